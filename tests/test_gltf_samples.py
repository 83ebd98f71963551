"""Every Khronos sample model in tests/data/samples/ loads and agrees with independent readers.

Oracles: trimesh 5.2 (world bounds, triangle counts; wrong for sparse accessors and fans, as
running it shows), VTK's glTF reader through pyvista, the accessors' declared min/max
(Spec §Accessors: POSITION must declare them), and MANIFEST.json (bbox_spec_* computed from the
glTF by the sample set's curator). Licences: tests/data/samples/NOTICE.md.
"""

from __future__ import annotations

import json
import struct
import warnings
from pathlib import Path

import numpy as np
import pytest
from scenes import look, render

from shots.camera import ORTHOGRAPHIC, Camera
from shots.colour import quantize, to_display
from shots.gltf import load_scene
from shots.gltf.accessors import AccessorReader
from shots.gltf.container import read_document
from shots.scene import (
    ALPHA_BLEND,
    ALPHA_MASK,
    ALPHA_OPAQUE,
    P_ALPHA_CUTOFF,
    P_ALPHA_MODE,
    P_BASE_R,
    P_DOUBLE_SIDED,
    P_METALLIC,
    P_ROUGHNESS,
    T_BASE_COLOR,
    T_EMISSIVE,
    T_METALLIC_ROUGHNESS,
    T_NORMAL,
    TI_HEIGHT,
    TI_WIDTH,
    TI_WRAP_S,
    TI_WRAP_T,
    WRAP_REPEAT,
)

SAMPLES = Path(__file__).parent / "data" / "samples"
MANIFEST = json.loads((SAMPLES / "MANIFEST.json").read_text())
MODELS = {m["name"]: m for m in MANIFEST["models"]}
# The manifest's loader_notes, confirmed by running trimesh 5.2: it ignores sparse data and drops
# fans
TRIMESH_WRONG = {"SimpleSparseAccessor", "MeshPrimitiveModes"}
# VTK counts points and lines as cells and puts them in its bounds; it cannot open raw-space URIs
VTK_UNUSABLE = {"MeshPrimitiveModes", "BoxWithSpaces"}


def entry(name: str) -> Path:
    return SAMPLES / MODELS[name]["entry"]


def gltf_json(path: Path) -> dict:
    data = path.read_bytes()
    if data[:4] == b"glTF":
        length = struct.unpack_from("<I", data, 12)[0]
        return json.loads(data[20 : 20 + length])
    return json.loads(data)


_loaded: dict[str, object] = {}


def scene_of(name: str):
    if name not in _loaded:
        _loaded[name] = load_scene(entry(name))
    return _loaded[name]


def trimesh_scene(name: str, **kwargs):
    import trimesh

    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        return trimesh.load(entry(name), force="scene", **kwargs)


def test_every_sample_copied_with_its_notice():
    # MANIFEST.json lists every file with its SHA-256 (the sample set's own record)
    import hashlib

    assert (SAMPLES / "NOTICE.md").is_file()
    for model in MANIFEST["models"]:
        for f in model["files"]:
            digest = hashlib.sha256((SAMPLES / f["path"]).read_bytes()).hexdigest()
            assert digest == f["sha256"], f["path"]


@pytest.mark.parametrize("name", sorted(MODELS))
def test_sample_loads_with_consistent_arrays(name):
    scene = scene_of(name)
    v = scene.positions.shape[0]
    assert scene.positions.dtype == np.float32 and scene.positions.shape == (v, 3)
    assert scene.normals.shape == (v, 3) and scene.tangents.shape == (v, 4)
    assert scene.uv.shape == (2, v, 2) and scene.colors.shape == (v, 4)
    assert scene.triangles.dtype == np.int32 and scene.triangles.shape[1] == 3
    assert scene.triangles.min() >= 0 and scene.triangles.max() < v
    assert scene.tri_material.dtype == np.int32
    assert 0 <= scene.tri_material.min() and scene.tri_material.max() < len(scene.materials.names)
    used = np.unique(scene.triangles)
    assert np.all(np.isfinite(scene.positions[used]))
    # normals are unit length (Spec §Meshes: NORMAL is normalized; flat normals otherwise)
    np.testing.assert_allclose(np.linalg.norm(scene.normals[used], axis=1), 1.0, atol=1e-5)


@pytest.mark.parametrize("name", sorted(n for n in MODELS if "triangles" in MODELS[n]))
def test_triangle_count_matches_manifest(name):  # the newer entries carry no count
    # MANIFEST.json "triangles": n/3, strips and fans n-2, every node instance counted. We drop
    # zero-area triangles (by design, with a warning); count those independently with trimesh's
    # own (unprocessed) faces and vertices in the mesh's coordinates.
    expected = MODELS[name]["triangles"]
    if name not in TRIMESH_WRONG:
        sc = trimesh_scene(name, process=False)
        zero = 0
        for node in sc.graph.nodes_geometry:
            mesh = sc.geometry[sc.graph[node][1]]
            if not hasattr(mesh, "faces"):
                continue
            p = np.asarray(mesh.vertices, np.float32)
            f = mesh.faces
            zero += int((~np.cross(p[f[:, 1]] - p[f[:, 0]], p[f[:, 2]] - p[f[:, 0]]).any(1)).sum())
        expected -= zero
    assert scene_of(name).triangle_count == expected


@pytest.mark.parametrize("name", sorted(set(MODELS) - TRIMESH_WRONG))
def test_world_bounds_match_trimesh(name):
    # trimesh 5.2 applies TRS in the right order and reads quaternions as (x, y, z, w), as the spec
    # says (§Transformations)
    expected = trimesh_scene(name).bounds
    np.testing.assert_allclose(scene_of(name).bounds(), expected, rtol=1e-5, atol=1e-7)


@pytest.mark.parametrize("name", sorted(set(MODELS) - VTK_UNUSABLE))
def test_world_bounds_and_count_match_vtk(name):
    # VTK's vtkGLTFReader through pyvista: an independent C++ implementation of the spec
    import pyvista as pv

    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        block = pv.read(entry(name))
    mesh = block.combine().triangulate()
    bounds = np.array(mesh.bounds).reshape(3, 2).T
    scene = scene_of(name)
    np.testing.assert_allclose(scene.bounds(), bounds, rtol=1e-5, atol=1e-7)
    # we drop zero-area triangles, VTK keeps them: count them in VTK's own points and faces
    assert np.all(mesh.celltypes == pv.CellType.TRIANGLE)
    faces = mesh.cells.reshape(-1, 4)[:, 1:]
    p = np.asarray(mesh.points, np.float32)
    zero = int((~np.cross(p[faces[:, 1]] - p[faces[:, 0]], p[faces[:, 2]] - p[faces[:, 0]])
                .any(axis=1)).sum())
    assert mesh.n_cells - zero == scene.triangle_count


@pytest.mark.parametrize("name", sorted(MODELS))
def test_positions_match_declared_min_max(name):
    # Spec §Accessors: POSITION accessors MUST declare min/max (after sparse substitution)
    doc = read_document(entry(name))
    reader = AccessorReader(doc, max_elements=1 << 26)
    checked = 0
    for mesh in doc.gltf.meshes:
        for prim in mesh.primitives:
            i = prim.attributes["POSITION"]
            acc = doc.gltf.accessors[i]
            data = reader.floats(i, "test", ("VEC3",))
            np.testing.assert_allclose(data.min(axis=0), np.float32(acc.min), rtol=1e-6, atol=1e-7)
            np.testing.assert_allclose(data.max(axis=0), np.float32(acc.max), rtol=1e-6, atol=1e-7)
            checked += 1
    assert checked >= 1


def test_sparse_sample_uses_the_sparse_values():
    # MANIFEST bbox_spec_max (4.0 in y, from the sparse values); trimesh says 1.0
    model = MODELS["SimpleSparseAccessor"]
    bounds = scene_of("SimpleSparseAccessor").bounds()
    np.testing.assert_allclose(bounds, [model["bbox_spec_min"], model["bbox_spec_max"]])


def test_primitive_modes_sample_skips_points_and_lines():
    # MeshPrimitiveModes: meshes 0-3 are POINTS/LINES/LINE_LOOP/LINE_STRIP, 4-6 TRIANGLES, STRIP,
    # FAN (its JSON); all share POSITION accessor 7. Triangle bounds = declared min/max of that
    # accessor shifted by the translations of the triangle-mode nodes.
    tree = gltf_json(entry("MeshPrimitiveModes"))
    lo, hi = np.array(tree["accessors"][7]["min"]), np.array(tree["accessors"][7]["max"])
    shifts = np.array([n["translation"] for n in tree["nodes"]
                       if tree["meshes"][n["mesh"]]["primitives"][0].get("mode", 4) >= 4])
    scene = scene_of("MeshPrimitiveModes")
    np.testing.assert_allclose(scene.bounds(), [lo + shifts.min(0), hi + shifts.max(0)],
                               atol=1e-6)
    # one note per model names each skipped mode with its count
    assert list(scene.warnings) == ["primitives without a surface not rendered: 1 LINES, "
                                    "1 LINE_LOOP, 1 LINE_STRIP, 1 POINTS"]


def test_vertex_colours_equal_positions():
    # MANIFEST purpose of BoxVertexColors: "colour = vertex position"; VEC3 gets alpha 1 (Spec)
    scene = scene_of("BoxVertexColors")
    np.testing.assert_allclose(scene.colors[:, :3], scene.positions, atol=1e-6)
    assert np.all(scene.colors[:, 3] == 1.0)


def test_default_material_row_is_last():
    # Spec §Default Material: white, metallic 1, roughness 1, for primitives without material
    scene = scene_of("Triangle")
    assert scene.materials.params.shape[0] == 1
    assert np.all(scene.tri_material == 0)
    row = scene.materials.params[0]
    assert tuple(row[P_BASE_R : P_BASE_R + 4]) == (1, 1, 1, 1)
    assert row[P_METALLIC] == 1 and row[P_ROUGHNESS] == 1


def test_alpha_modes_follow_the_file():
    # AlphaBlendModeTest JSON: names give the mode and the cutoff; default cutoff 0.5 (Spec)
    scene = scene_of("AlphaBlendModeTest")
    params = dict(zip(scene.materials.names, scene.materials.params, strict=True))
    assert params["MatOpaque"][P_ALPHA_MODE] == ALPHA_OPAQUE
    assert params["MatBlend"][P_ALPHA_MODE] == ALPHA_BLEND
    for name, cutoff in (("MatCutoff25", 0.25), ("MatCutoff75", 0.75), ("MatCutoffDefault", 0.5)):
        assert params[name][P_ALPHA_MODE] == ALPHA_MASK
        assert params[name][P_ALPHA_CUTOFF] == pytest.approx(cutoff)
        assert params[name][P_DOUBLE_SIDED] == 1.0
    assert params["MatBed"][P_DOUBLE_SIDED] == 0.0
    # MANIFEST "images": three 2048² JPEGs and one 1024² PNG in bufferViews
    sizes = sorted((int(r[TI_WIDTH]), int(r[TI_HEIGHT])) for r in scene.textures.info)
    assert sizes == [(1024, 1024), (2048, 2048), (2048, 2048), (2048, 2048)]


def test_metal_rough_spheres_factors():
    # MetalRoughSpheresNoTextures JSON: every material's factors land in its row
    tree = gltf_json(entry("MetalRoughSpheresNoTextures"))
    scene = scene_of("MetalRoughSpheresNoTextures")
    for i, mat in enumerate(tree["materials"]):
        pbr = mat.get("pbrMetallicRoughness", {})
        assert scene.materials.params[i, P_METALLIC] == pytest.approx(pbr.get("metallicFactor", 1))
        assert scene.materials.params[i, P_ROUGHNESS] == pytest.approx(
            pbr.get("roughnessFactor", 1))


def test_external_files_with_spaces_and_percent_encoding():
    # BoxWithSpaces: buffer URI with raw spaces, image URIs percent-encoded (Spec §URIs)
    scene = scene_of("BoxWithSpaces")
    tex = scene.materials.texture[0]
    for slot in (T_BASE_COLOR, T_METALLIC_ROUGHNESS, T_NORMAL):
        assert tex[slot] >= 0
    info = scene.textures.info
    assert np.all(info[:, TI_WIDTH] == 1024) and np.all(info[:, TI_HEIGHT] == 1024)
    # no sampler: REPEAT both ways (Spec §Texture Data)
    assert np.all(info[:, TI_WRAP_S] == WRAP_REPEAT) and np.all(info[:, TI_WRAP_T] == WRAP_REPEAT)
    assert sum("Normal Map" in n for n in scene.textures.names) == 1


def test_texture_settings_samplers():
    # TextureSettingsTest JSON: textures[k].sampler -> samplers[...] wrapS/wrapT, taken verbatim
    tree = gltf_json(entry("TextureSettingsTest"))
    scene = scene_of("TextureSettingsTest")
    wraps = {(s.get("wrapS", 10497), s.get("wrapT", 10497)) for s in tree["samplers"]}
    got = {(int(r[TI_WRAP_S]), int(r[TI_WRAP_T])) for r in scene.textures.info}
    assert got <= wraps and len(got) == len(wraps)


def test_multi_uv_emissive_reads_texcoord_1():
    # MultiUVTest JSON: emissiveTexture texCoord 1, baseColorTexture texCoord 0
    scene = scene_of("MultiUVTest")
    assert scene.materials.texcoord[0, T_EMISSIVE] == 1
    assert scene.materials.texcoord[0, T_BASE_COLOR] == 0
    assert np.any(scene.uv[1] != scene.uv[0])


def test_cameras_sample():
    # Cameras.gltf JSON: a perspective (yfov 0.7, aspect 1) and an orthographic camera
    # (xmag = ymag = 1), both at translation (0.5, 0.5, 3) with no rotation
    cams = scene_of("Cameras").cameras
    assert [c.kind for c in cams] == ["perspective", "orthographic"]
    assert cams[0].yfov == pytest.approx(0.7) and cams[0].aspect_ratio == 1.0
    assert cams[0].znear == pytest.approx(0.01) and cams[0].zfar == 100
    assert cams[1].xmag == 1.0 and cams[1].ymag == 1.0
    for c in cams:
        np.testing.assert_allclose(c.world[:3, 3], [0.5, 0.5, 3.0])
        np.testing.assert_allclose(c.world[:3, :3], np.eye(3))


def test_texture_linear_interpolation_happens_after_srgb_decoding():
    # TextureLinearInterpolationTest (its README: "linear texture interpolation is performed on
    # linear values, i.e. after sRGB decoding"): the right sphere samples its 2×1 sRGB emissive
    # texture (black, green 255) halfway between the texels, u = 0.5, with a LINEAR sampler;
    # decoded first (IEC 61966-2-1) that is linear 0.5, the left sphere's plain emissive factor
    # (0, 0.5, 0), i.e. display code 188; interpolating codes would give 128 (linear 0.216)
    camera = Camera(eye=(0.0, -1.0, 5.0), target=(0.0, -1.0, 0.0), up=(0.0, 1.0, 0.0),
                    width=96, height=32, kind=ORTHOGRAPHIC, ymag=1.2)  # fmt: skip
    image = render(scene_of("TextureLinearInterpolationTest"), camera, look())
    # sphere centres x = ∓1.5 → columns (1 ∓ 1.5 / 3.6) · 48; row 16 is y = −1
    left, right = image[14:18, 26:30], image[14:18, 66:70]
    np.testing.assert_allclose(left[..., :3], np.broadcast_to([0.0, 0.5, 0.0], left[..., :3].shape),
                               atol=1e-6)  # fmt: skip
    np.testing.assert_allclose(right[..., :3], left[..., :3], atol=2e-3)
    codes = quantize(to_display(image, tone_map="none"))
    assert np.all(codes[14:18, 66:70, 1] == 188) and np.all(codes[14:18, 26:30, 1] == 188)
