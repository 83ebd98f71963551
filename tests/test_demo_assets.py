"""The invented Sawdust Lane Workshop demo catalog in assets_demo/: generator, geometry, materials.

The models are read back with libraries that share no code with the generator's writer path:
trimesh (an independent glTF loader) for geometry and Pillow for the embedded images. pygltflib
only parses the JSON; accessor bytes are decoded here from the spec's rules.
"""

from __future__ import annotations

import importlib.util
import io
import json
import sys
from pathlib import Path

import numpy as np
import pygltflib
import pytest
import trimesh
from PIL import Image

ROOT = Path(__file__).resolve().parents[1]
ASSETS = ROOT / "assets_demo"
CATALOG = json.loads((ASSETS / "catalog.json").read_text(encoding="utf-8"))
PRODUCTS = CATALOG["products"]
BY_CATEGORY = {p["category"]: p for p in PRODUCTS}
IDS = [p["file"] for p in PRODUCTS]

# glTF 2.0 spec §Accessors: component types and element sizes
COMPONENTS = {5126: np.float32, 5125: np.uint32, 5123: np.uint16, 5121: np.uint8}
WIDTH = {"SCALAR": 1, "VEC2": 2, "VEC3": 3, "VEC4": 4}


@pytest.fixture(scope="module")
def make_catalog():
    """The generator script, imported by path (assets_demo is not a package)."""
    spec = importlib.util.spec_from_file_location("make_catalog", ASSETS / "make_catalog.py")
    module = importlib.util.module_from_spec(spec)
    sys.modules[spec.name] = module  # dataclasses look their module up while the class is built
    spec.loader.exec_module(module)
    yield module
    sys.modules.pop(spec.name, None)


def load_gltf(entry: dict) -> pygltflib.GLTF2:
    return pygltflib.GLTF2.load_binary(str(ASSETS / entry["file"]))


def read_accessor(doc: pygltflib.GLTF2, index: int) -> np.ndarray:
    """Decode a tightly packed, non-sparse accessor (glTF 2.0 spec §Accessors, §Buffer Views)."""
    acc = doc.accessors[index]
    view = doc.bufferViews[acc.bufferView]
    assert view.byteStride in (None, 0)  # our writer packs every attribute in its own view
    blob = doc.binary_blob()
    start = view.byteOffset + (acc.byteOffset or 0)
    dtype = np.dtype(COMPONENTS[acc.componentType]).newbyteorder("<")
    width = WIDTH[acc.type]
    data = np.frombuffer(blob, dtype, acc.count * width, start)
    return data.reshape(acc.count, width) if width > 1 else data


def materials_by_name(doc: pygltflib.GLTF2) -> dict[str, pygltflib.Material]:
    return {m.name: m for m in doc.materials}


def uses_texture(material: pygltflib.Material) -> bool:
    pbr = material.pbrMetallicRoughness
    return bool((pbr and pbr.baseColorTexture) or material.normalTexture)


# --- generator --------------------------------------------------------------------------------


def test_generator_is_deterministic(make_catalog, tmp_path):
    first = make_catalog.write_catalog(tmp_path / "a")
    second = make_catalog.write_catalog(tmp_path / "b")
    assert [p.name for p in first] == [p.name for p in second]
    assert len([p for p in first if p.suffix == ".glb"]) >= 6
    for a, b in zip(first, second, strict=True):
        assert a.read_bytes() == b.read_bytes(), a.name


def test_committed_files_are_what_the_generator_writes(make_catalog, tmp_path):
    # By content, not bytes: the generator's floats come from numpy and trimesh, whose last bits
    # may move between releases, and Pillow's PNG compression may change the image bytes.
    for fresh in make_catalog.write_catalog(tmp_path):
        committed = ASSETS / fresh.name
        stale = f"assets_demo/{fresh.name} is stale: run python assets_demo/make_catalog.py"
        if fresh.suffix == ".glb":
            assert_same_glb(fresh, committed, stale)
        else:
            assert_same_json(json.loads(fresh.read_text(encoding="utf-8")),
                             json.loads(committed.read_text(encoding="utf-8")), stale)


# Tolerances of the content comparison: 1e-5 m (0.01 mm) on positions, and 1e-5 on unit normals,
# tangents and texture coordinates, is a thousand times below a pixel of a 4k render of a metre-size
# product, yet a hundred times float32's last bit at 1.0; one 8-bit code value on texels is
# rounding; JSON numbers within 1e-6 relative (float32 printed as decimal).
FLOAT_TOLERANCE = 1e-5
TEXEL_TOLERANCE = 1
JSON_RELATIVE = 1e-6
LAYOUT_KEYS = {"byteOffset", "byteLength"}  # where bytes sit moves with the PNGs' sizes


def assert_same_json(fresh, committed, message: str, where: str = "$") -> None:
    """Equal JSON values, numbers within JSON_RELATIVE."""
    if isinstance(fresh, dict) and isinstance(committed, dict):
        assert fresh.keys() == committed.keys(), f"{message} ({where})"
        for key in fresh:
            assert_same_json(fresh[key], committed[key], message, f"{where}.{key}")
    elif isinstance(fresh, list) and isinstance(committed, list):
        assert len(fresh) == len(committed), f"{message} ({where})"
        for i, (a, b) in enumerate(zip(fresh, committed, strict=True)):
            assert_same_json(a, b, message, f"{where}[{i}]")
    elif isinstance(fresh, float) or isinstance(committed, float):
        assert fresh == pytest.approx(committed, rel=JSON_RELATIVE, abs=1e-12), f"{message} ({where})"
    else:
        assert fresh == committed, f"{message} ({where})"


def glb_layout_free_json(doc: pygltflib.GLTF2) -> dict:
    """The glTF JSON without the byte positions of buffer views and the buffer's length."""
    data = json.loads(doc.to_json())
    for view in data.get("bufferViews", []):
        for key in LAYOUT_KEYS:
            view.pop(key, None)
    for buffer in data.get("buffers", []):
        buffer.pop("byteLength", None)
    return data


def image_pixels(doc: pygltflib.GLTF2, image: pygltflib.Image) -> np.ndarray:
    view = doc.bufferViews[image.bufferView]
    data = doc.binary_blob()[view.byteOffset : view.byteOffset + view.byteLength]
    with Image.open(io.BytesIO(data)) as decoded:
        return np.asarray(decoded.convert("RGBA"), np.int16)


def assert_same_glb(fresh_path: Path, committed_path: Path, message: str) -> None:
    """The same glTF JSON, the same accessor values (floats within FLOAT_TOLERANCE, integers
    exactly) and the same decoded texels (within TEXEL_TOLERANCE), wherever the bytes sit."""
    fresh = pygltflib.GLTF2.load_binary(str(fresh_path))
    committed = pygltflib.GLTF2.load_binary(str(committed_path))
    assert_same_json(glb_layout_free_json(fresh), glb_layout_free_json(committed), message)
    for index, accessor in enumerate(fresh.accessors):
        a, b = read_accessor(fresh, index), read_accessor(committed, index)
        if accessor.componentType == 5126:  # FLOAT
            np.testing.assert_allclose(a, b, rtol=0, atol=FLOAT_TOLERANCE,
                                       err_msg=f"{message} (accessor {index})")
        else:
            np.testing.assert_array_equal(a, b, err_msg=f"{message} (accessor {index})")
    for index, (a, b) in enumerate(zip(fresh.images, committed.images, strict=True)):
        pa, pb = image_pixels(fresh, a), image_pixels(committed, b)
        assert pa.shape == pb.shape, f"{message} (image {index})"
        assert np.abs(pa - pb).max() <= TEXEL_TOLERANCE, f"{message} (image {index})"


def test_catalog_covers_the_six_required_pieces():
    assert {"chair", "table", "lamp", "sofa", "storage", "stool"} <= set(BY_CATEGORY)
    for entry in PRODUCTS:
        assert (ASSETS / entry["file"]).is_file()
        assert set(entry["dimensions_m"]) == {"width", "depth", "height"}


# --- geometry, read back with trimesh --------------------------------------------------------


@pytest.mark.parametrize("entry", PRODUCTS, ids=IDS)
def test_trimesh_bounds_match_catalog_dimensions(entry):
    # glTF 2.0 spec §Coordinate System and Units: metres, +Y up; our convention puts the origin
    # at the centre of the footprint with the model standing on y = 0.
    scene = trimesh.load(ASSETS / entry["file"], force="scene", process=False)
    (x0, y0, z0), (x1, y1, z1) = scene.bounds
    size = entry["dimensions_m"]
    assert x1 - x0 == pytest.approx(size["width"], abs=0.01)
    assert y1 - y0 == pytest.approx(size["height"], abs=0.01)
    assert z1 - z0 == pytest.approx(size["depth"], abs=0.01)
    assert y0 == pytest.approx(0.0, abs=1e-4)
    assert (x0 + x1) / 2 == pytest.approx(0.0, abs=0.01)
    assert (z0 + z1) / 2 == pytest.approx(0.0, abs=0.01)
    assert (x1 - x0) * (y1 - y0) * (z1 - z0) > 0


@pytest.mark.parametrize("entry", PRODUCTS, ids=IDS)
def test_every_part_is_closed_with_outward_normals(entry):
    # glTF 2.0 spec §Meshes: front faces are counter-clockwise, so a closed part welded by
    # position has positive signed volume; shading normals must lean the same way as the faces.
    scene = trimesh.load(ASSETS / entry["file"], force="scene", process=False)
    for name, geometry in scene.geometry.items():
        welded = trimesh.Trimesh(geometry.vertices, geometry.faces, process=False)
        welded.merge_vertices(merge_tex=True, merge_norm=True)
        assert welded.is_watertight, name
        assert welded.volume > 0, name
        normals = np.asarray(geometry.vertex_normals)
        np.testing.assert_allclose(np.linalg.norm(normals, axis=1), 1.0, atol=1e-5)
        corner_normals = normals[geometry.faces]  # (n, 3, 3)
        agreement = np.einsum("ncj,nj->nc", corner_normals, geometry.face_normals)
        assert agreement.min() > 0.5, name  # within 60° of the face: no inverted shading


def test_triangle_and_file_budgets():
    for entry in PRODUCTS:
        path = ASSETS / entry["file"]
        scene = trimesh.load(path, force="scene", process=False)
        triangles = sum(
            len(scene.geometry[g].faces)
            for _, g in (scene.graph[n] for n in scene.graph.nodes_geometry)
        )
        assert 0 < triangles < 30_000, entry["file"]
        assert path.stat().st_size < 300 * 1024, entry["file"]


@pytest.mark.parametrize(
    ("category", "probe_xz"), [("chair", (0.0, 0.0)), ("sofa", (0.4, 0.1)), ("stool", (0.0, 0.0))]
)
def test_seat_height_matches_catalog(category, probe_xz):
    entry = BY_CATEGORY[category]
    mesh = trimesh.load(ASSETS / entry["file"], force="scene", process=False).to_mesh()
    x, z = probe_xz
    hits, _, _ = mesh.ray.intersects_location(
        [[x, 3.0, z]], [[0.0, -1.0, 0.0]], multiple_hits=False
    )
    assert hits[0, 1] == pytest.approx(entry["seat_height_m"], abs=0.01)
    # common practice for dining seats: 0.43-0.48 m; counter stools 0.60-0.70 m (from memory)
    assert 0.40 <= entry["seat_height_m"] <= 0.70


@pytest.mark.parametrize("category", ["chair", "sofa"])
def test_backrest_is_at_the_back(category):
    # glTF 2.0 spec §Coordinate System and Units: the front of an asset faces +Z
    mesh = trimesh.load(
        ASSETS / BY_CATEGORY[category]["file"], force="scene", process=False
    ).to_mesh()
    high = mesh.vertices[mesh.vertices[:, 1] > 0.7]
    assert len(high) > 0
    assert high[:, 2].max() < 0.0


# --- glTF structure and materials, parsed from the JSON --------------------------------------


@pytest.mark.parametrize("entry", PRODUCTS, ids=IDS)
def test_primitives_carry_the_attributes_their_materials_need(entry):
    doc = load_gltf(entry)
    assert doc.asset.version == "2.0"
    for mesh in doc.meshes:
        for primitive in mesh.primitives:
            attributes = primitive.attributes
            material = doc.materials[primitive.material]
            assert attributes.NORMAL is not None  # we promise NORMAL on every primitive
            if uses_texture(material):
                assert attributes.TEXCOORD_0 is not None, material.name
            if material.normalTexture is not None:
                assert attributes.TANGENT is not None, material.name
            positions = read_accessor(doc, attributes.POSITION)
            accessor = doc.accessors[attributes.POSITION]
            # glTF 2.0 spec §Accessors: POSITION must have exact min and max
            np.testing.assert_array_equal(positions.min(axis=0), np.float32(accessor.min))
            np.testing.assert_array_equal(positions.max(axis=0), np.float32(accessor.max))
            indices = read_accessor(doc, primitive.indices)
            assert indices.max() < len(positions)
            # glTF 2.0 spec §Meshes: no primitive-restart values in indices
            assert indices.max() < np.iinfo(indices.dtype).max


@pytest.mark.parametrize("entry", PRODUCTS, ids=IDS)
def test_embedded_textures_are_small_pngs(entry):
    doc = load_gltf(entry)
    blob = doc.binary_blob()
    for image in doc.images:
        view = doc.bufferViews[image.bufferView]
        data = blob[view.byteOffset : view.byteOffset + view.byteLength]
        assert data[:8] == b"\x89PNG\r\n\x1a\n"  # PNG signature (ISO/IEC 15948 §5.2)
        with Image.open(io.BytesIO(data)) as decoded:
            assert 128 <= decoded.width <= 256 and 128 <= decoded.height <= 256


def test_table_has_an_embedded_wood_texture():
    doc = load_gltf(BY_CATEGORY["table"])
    textured = [m for m in doc.materials if m.pbrMetallicRoughness.baseColorTexture is not None]
    assert textured
    assert len(doc.images) == 1 and doc.images[0].mimeType == "image/png"


def test_lamp_has_a_metal_stem_glass_shade_and_lit_bulb():
    doc = load_gltf(BY_CATEGORY["lamp"])
    materials = doc.materials
    metals = [m for m in materials if m.pbrMetallicRoughness.metallicFactor == 1.0]
    assert any(m.pbrMetallicRoughness.roughnessFactor <= 0.3 for m in metals)
    glass = [m for m in materials if "KHR_materials_transmission" in (m.extensions or {})]
    assert glass
    ext = glass[0].extensions
    assert ext["KHR_materials_transmission"]["transmissionFactor"] > 0
    assert ext["KHR_materials_ior"]["ior"] == pytest.approx(1.5)  # crown glass, about 1.5
    assert ext["KHR_materials_volume"]["thicknessFactor"] > 0
    lit = [m for m in materials if "KHR_materials_emissive_strength" in (m.extensions or {})]
    assert lit and max(lit[0].emissiveFactor) > 0
    assert lit[0].extensions["KHR_materials_emissive_strength"]["emissiveStrength"] > 1
    # KHR extension specs: a file must declare every extension it uses
    used = {name for m in materials for name in (m.extensions or {})}
    assert used <= set(doc.extensionsUsed)


def test_stool_has_lacquer_and_chrome():
    doc = load_gltf(BY_CATEGORY["stool"])
    coats = [
        m.extensions["KHR_materials_clearcoat"]
        for m in doc.materials
        if "KHR_materials_clearcoat" in (m.extensions or {})
    ]
    assert coats and coats[0]["clearcoatFactor"] > 0
    assert any(m.pbrMetallicRoughness.metallicFactor == 1.0 for m in doc.materials)
    assert "KHR_materials_clearcoat" in doc.extensionsUsed


def test_sofa_variants_map_every_upholstered_part():
    # KHR_materials_variants spec: root lists named variants; primitives map them to materials
    doc = load_gltf(BY_CATEGORY["sofa"])
    names = [v["name"] for v in doc.extensions["KHR_materials_variants"]["variants"]]
    assert {"oat", "slate"} <= set(names)
    assert names == BY_CATEGORY["sofa"]["variants"]
    mapped = 0
    for mesh in doc.meshes:
        for primitive in mesh.primitives:
            mappings = (
                (primitive.extensions or {}).get("KHR_materials_variants", {}).get("mappings", [])
            )
            if not mappings:
                continue
            mapped += 1
            covered = sorted(v for m in mappings for v in m["variants"])
            assert covered == list(range(len(names)))
            targets = [doc.materials[m["material"]] for m in mappings]
            assert len({m.name for m in targets}) == len(names)
            assert all(m.normalTexture is not None for m in targets)
            colours = {tuple(m.pbrMetallicRoughness.baseColorFactor) for m in targets}
            assert len(colours) == len(names)
    assert mapped >= 5
    assert "KHR_materials_variants" in doc.extensionsUsed


def test_sofa_fabric_is_rough_with_sheen():
    doc = load_gltf(BY_CATEGORY["sofa"])
    fabrics = [m for m in doc.materials if m.normalTexture is not None]
    for fabric in fabrics:
        assert fabric.pbrMetallicRoughness.roughnessFactor >= 0.7
        assert fabric.pbrMetallicRoughness.metallicFactor == 0.0
        assert max(fabric.extensions["KHR_materials_sheen"]["sheenColorFactor"]) > 0


def test_woven_normal_map_holds_unit_outward_normals():
    # glTF 2.0 spec §Materials, normalTexture: rgb = (n + 1) / 2 in tangent space, +Z outward
    doc = load_gltf(BY_CATEGORY["sofa"])
    texture = doc.textures[doc.materials[0].normalTexture.index]
    view = doc.bufferViews[doc.images[texture.source].bufferView]
    data = doc.binary_blob()[view.byteOffset : view.byteOffset + view.byteLength]
    with Image.open(io.BytesIO(data)) as decoded:
        texels = np.asarray(decoded.convert("RGB"), np.float64)
    n = texels / 255.0 * 2.0 - 1.0
    np.testing.assert_allclose(np.linalg.norm(n, axis=-1), 1.0, atol=0.02)  # 8-bit rounding
    assert n[..., 2].min() > 0
    assert np.abs(n[..., :2]).max() > 0.3  # the weave has real relief, not a flat map


def test_sofa_tangents_follow_the_uv_convention():
    # glTF 2.0 spec §Meshes: TANGENT xyz unit, w = ±1, bitangent = cross(normal, tangent) · w.
    # The bitangent must point toward decreasing v (image up, green up), see
    # glTF 2.0 spec §Meshes (TANGENT) and glTF-Sample-Models issue #174.
    doc = load_gltf(BY_CATEGORY["sofa"])
    checked = 0
    for mesh in doc.meshes:
        for primitive in mesh.primitives:
            a = primitive.attributes
            if a.TANGENT is None:
                continue
            p = read_accessor(doc, a.POSITION).astype(np.float64)
            n = read_accessor(doc, a.NORMAL).astype(np.float64)
            t = read_accessor(doc, a.TANGENT).astype(np.float64)
            uv = read_accessor(doc, a.TEXCOORD_0).astype(np.float64)
            tri = read_accessor(doc, primitive.indices).reshape(-1, 3).astype(np.int64)
            np.testing.assert_allclose(np.linalg.norm(t[:, :3], axis=1), 1.0, atol=1e-5)
            assert set(np.unique(t[:, 3])) <= {-1.0, 1.0}
            assert np.abs(np.sum(t[:, :3] * n, axis=1)).max() < 1e-4
            bitangent = np.cross(n, t[:, :3]) * t[:, 3:4]
            # per-triangle dP/du and dP/dv from positions and uvs (Lengyel 2001)
            e1, e2 = p[tri[:, 1]] - p[tri[:, 0]], p[tri[:, 2]] - p[tri[:, 0]]
            d1, d2 = uv[tri[:, 1]] - uv[tri[:, 0]], uv[tri[:, 2]] - uv[tri[:, 0]]
            det = d1[:, 0] * d2[:, 1] - d2[:, 0] * d1[:, 1]
            ok = np.abs(det) > 1e-9
            dp_du = (e1 * d2[:, 1:2] - e2 * d1[:, 1:2])[ok] / det[ok, None]
            dp_dv = (e2 * d1[:, 0:1] - e1 * d2[:, 0:1])[ok] / det[ok, None]
            for k in range(3):
                corner = tri[ok, k]
                assert np.min(np.sum(t[corner, :3] * dp_du, axis=1)) > 0
                assert np.max(np.sum(bitangent[corner] * dp_dv, axis=1)) < 0
            checked += 1
    assert checked >= 5


def test_instanced_meshes_share_one_mesh():
    # glTF 2.0 spec §Nodes: several nodes may reference one mesh (the four table legs)
    doc = load_gltf(BY_CATEGORY["table"])
    leg_nodes = [n for n in doc.nodes if n.name.startswith("leg_")]
    assert len(leg_nodes) == 4
    assert len({n.mesh for n in leg_nodes}) == 1
