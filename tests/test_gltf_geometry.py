"""Scene graph, accessors and primitives, on small files built in code (tests/gltf_builder.py).

Every expected value is worked out in the test itself from the rule it checks (the glTF 2.0
spec section or extension README named beside each check).
"""

from __future__ import annotations

import math

import numpy as np
import pytest
from gltf_builder import GltfBuilder, quad

from shots.errors import GltfError
from shots.gltf import load_scene

TRI = np.array([[0, 0, 0], [1, 0, 0], [0, 1, 0]], np.float32)
UP = np.array([[0, 0, 1]] * 3, np.float32)


def one_node(tmp_path, positions=TRI, node=None, glb=True, **prim):
    b = GltfBuilder()
    mesh = b.mesh(positions, **prim)
    b.scene([b.node(mesh=mesh, **(node or {}))])
    return load_scene(b.write_glb(tmp_path / "m.glb") if glb else b.write_gltf(tmp_path / "m.gltf"))


def world_of(scene, local_vertex: int = 1) -> np.ndarray:
    return scene.positions[scene.triangles[0, local_vertex]]


# ---------------------------------------------------------------- transforms ---------------

def test_trs_order_is_translate_rotate_scale(tmp_path):
    # Spec §Transformations: T=(1,0,0), R=90° about +Z, S=(2,1,1) maps (1,0,0)
    # to (1,2,0). Independently: scale -> (2,0,0); rotate by 90° -> (0,2,0); translate -> (1,2,0).
    # The wrong order T·S·R would give (1,1,0).
    half = math.pi / 4
    node = {"translation": [1, 0, 0], "rotation": [0, 0, math.sin(half), math.cos(half)],
            "scale": [2, 1, 1]}
    scene = one_node(tmp_path, node=node, normals=UP)
    c, s = math.cos(math.pi / 2), math.sin(math.pi / 2)
    p = np.array([1.0, 0, 0]) * [2, 1, 1]
    p = np.array([c * p[0] - s * p[1], s * p[0] + c * p[1], p[2]]) + [1, 0, 0]
    np.testing.assert_allclose(world_of(scene), p, atol=1e-6)
    np.testing.assert_allclose(p, [1, 2, 0], atol=1e-12)


def test_matrix_is_column_major(tmp_path):
    # Spec §Transformations (column-major): [1,0,0,0, 0,1,0,0, 0,0,1,0, 5,6,7,1] translates (5,6,7)
    node = {"matrix": [1, 0, 0, 0, 0, 1, 0, 0, 0, 0, 1, 0, 5, 6, 7, 1]}
    scene = one_node(tmp_path, node=node, normals=UP)
    np.testing.assert_allclose(scene.positions[scene.triangles[0]], TRI + [5, 6, 7])


def test_quaternion_is_xyzw(tmp_path):
    # Spec §Transformations (rotation is x, y, z, w): q = [0, 0.70711, 0, 0.70711] is +90° about
    # +Y: +X -> (0,0,-1).
    # Read as (w,x,y,z) it would send +X to (0,0,+1).
    node = {"rotation": [0, 0.70711, 0, 0.70711]}
    scene = one_node(tmp_path, node=node, normals=UP)
    np.testing.assert_allclose(world_of(scene), [0, 0, -1], atol=1e-5)


def test_hierarchy_composes_parent_times_child(tmp_path):
    # Spec §Transformations: global = parent · local. Parent translates (0,0,3), child scales 2:
    # (1,0,0) -> scale first (2,0,0), then parent's translation -> (2,0,3).
    b = GltfBuilder()
    child = b.node(mesh=b.mesh(TRI, normals=UP), scale=[2, 2, 2])
    b.scene([b.node(children=[child], translation=[0, 0, 3])])
    scene = load_scene(b.write_glb(tmp_path / "h.glb"))
    np.testing.assert_allclose(world_of(scene), [2, 0, 3])


def test_shared_mesh_is_instanced_per_node(tmp_path):
    # Spec §Nodes and Hierarchy: a mesh used by two nodes is drawn twice, once per transform
    b = GltfBuilder()
    mesh = b.mesh(TRI, normals=UP, material=b.material(name="wood"))
    b.scene([b.node(mesh=mesh), b.node(mesh=mesh, translation=[10, 0, 0])])
    scene = load_scene(b.write_glb(tmp_path / "s.glb"))
    assert scene.triangle_count == 2
    np.testing.assert_allclose(scene.bounds(), [[0, 0, 0], [11, 1, 0]])
    assert list(scene.tri_material) == [0, 0]


def test_negative_determinant_flips_winding(tmp_path):
    # Spec §Instantiation: under scale (-1,1,1) the front face stays the one the
    # normal points out of, so the winding must be reversed. Check that the geometric normal of
    # the (counter-clockwise) world triangle agrees with the transformed shading normal (+Z).
    scene = one_node(tmp_path, node={"scale": [-1, 1, 1]}, normals=UP)
    a, b, c = scene.positions[scene.triangles[0]].astype(np.float64)
    geometric = np.cross(b - a, c - a)
    assert geometric[2] > 0
    np.testing.assert_allclose(scene.normals[scene.triangles[0]], [[0, 0, 1]] * 3, atol=1e-6)


def test_normals_use_the_inverse_transpose(tmp_path):
    # A sloped triangle under non-uniform scale (3,1,1): the world normal must stay
    # perpendicular to the world edges (the defining property; Spec §Transformations "normals
    # ... inverse transpose"), and unit length.
    p = np.array([[0, 0, 0], [1, 0, 1], [0, 1, 0]], np.float32)
    n = np.cross(p[1] - p[0], p[2] - p[0])
    n = np.tile(n / np.linalg.norm(n), (3, 1)).astype(np.float32)
    scene = one_node(tmp_path, positions=p, normals=n, node={"scale": [3, 1, 1]})
    w = scene.positions[scene.triangles[0]].astype(np.float64)
    for normal in scene.normals[scene.triangles[0]]:
        assert abs(np.dot(normal, w[1] - w[0])) < 1e-6
        assert abs(np.dot(normal, w[2] - w[0])) < 1e-6
        assert np.linalg.norm(normal) == pytest.approx(1.0, abs=1e-6)


def test_flat_normals_when_normal_is_absent(tmp_path):
    # Spec §Meshes: without NORMAL, flat normals; each triangle gets its own vertices
    p, _, idx = quad()
    scene = one_node(tmp_path, positions=p, indices=idx, node={"rotation": [0.70711, 0, 0,
                                                                             0.70711]})
    assert scene.positions.shape[0] == 6
    for tri in scene.triangles:
        a, b, c = scene.positions[tri].astype(np.float64)
        expected = np.cross(b - a, c - a)
        expected /= np.linalg.norm(expected)
        np.testing.assert_allclose(scene.normals[tri], [expected] * 3, atol=1e-6)
    # +90° about +X turns +Z into -Y
    np.testing.assert_allclose(scene.normals[0], [0, -1, 0], atol=1e-5)


# ---------------------------------------------------------------- accessors ----------------

@pytest.mark.parametrize("dtype, stored, expected", [
    # Spec §Animations, normalized integer table: i8 max(c/127,-1), u8 c/255, i16 max(c/32767,-1),
    # u16 c/65535
    (np.int8, [-128, 127, 0], [-1.0, 1.0, 0.0]),
    (np.uint8, [255, 0, 51], [1.0, 0.0, 0.2]),
    (np.int16, [-32768, 32767, 16384], [-1.0, 1.0, 16384 / 32767]),
    (np.uint16, [65535, 0, 13107], [1.0, 0.0, 0.2]),
])
def test_normalized_integer_positions(tmp_path, dtype, stored, expected):
    # KHR_mesh_quantization: normalized integer POSITION; one vertex holds the three values
    top = np.iinfo(dtype).max
    p = np.array([stored, [top, 0, 0], [0, top, 0]], dtype)
    scene = one_node(tmp_path, positions=p, normals=UP, normalized={"POSITION": True})
    np.testing.assert_allclose(scene.positions[scene.triangles[0, 0]], expected, atol=1e-7)


def test_quantized_cube_is_one_metre(tmp_path):
    # KHR_mesh_quantization README: a 1 m cube stored as normalized i16 has a 1 m bbox, not
    # 32767 m (trimesh 5.2 ignores `normalized`, as running it shows)
    corners = np.array([[x, y, z] for x in (0, 1) for y in (0, 1) for z in (0, 1)])
    q = (corners * 32767).astype(np.int16)
    faces = np.array([[0, 1, 3], [0, 3, 2], [4, 6, 7], [4, 7, 5], [0, 4, 5], [0, 5, 1],
                      [2, 3, 7], [2, 7, 6], [0, 2, 6], [0, 6, 4], [1, 5, 7], [1, 7, 3]],
                     np.uint16)
    scene = one_node(tmp_path, positions=q, indices=faces, normalized={"POSITION": True})
    np.testing.assert_allclose(scene.bounds(), [[0, 0, 0], [1, 1, 1]])


def test_interleaved_stride_equals_packed(tmp_path):
    # Spec §Buffers and Buffer Views (byteStride): POSITION/NORMAL/TEXCOORD_0 interleaved with
    # byteStride 32 decode to the same values as separate packed accessors
    rng = np.random.default_rng(1)
    p = rng.normal(size=(30, 3)).astype(np.float32)
    n = rng.normal(size=(30, 3)).astype(np.float32)
    n /= np.linalg.norm(n, axis=1, keepdims=True)
    uv = rng.random((30, 2)).astype(np.float32)
    idx = np.arange(30, dtype=np.uint16)
    packed = one_node(tmp_path, positions=p, normals=n, uv0=uv, indices=idx)
    b = GltfBuilder()
    pa, na, ta = b.interleaved([p, n, uv], stride=32)
    assert b.gltf["bufferViews"][0]["byteStride"] == 32
    b.scene([b.node(mesh=b.mesh(pa, idx, normals=na, uv0=ta))])
    strided = load_scene(b.write_glb(tmp_path / "i.glb"))
    np.testing.assert_array_equal(strided.positions, packed.positions)
    np.testing.assert_allclose(strided.normals, packed.normals, atol=1e-7)
    np.testing.assert_array_equal(strided.uv, packed.uv)
    np.testing.assert_array_equal(strided.positions, p)  # identity transform: values as written


def test_sparse_accessor_overrides_vertex(tmp_path):
    # Spec §Sparse Accessors: quad with sparse index [3], value (5,5,5)
    p, _, idx = quad()
    b = GltfBuilder()
    acc = b.sparse_accessor(p, 4, indices=[3], values=np.array([[5, 5, 5]], np.float32))
    b.scene([b.node(mesh=b.mesh(acc, idx))])
    scene = load_scene(b.write_glb(tmp_path / "sp.glb"))
    np.testing.assert_allclose(scene.bounds(), [[0, 0, 0], [5, 5, 5]])
    assert any(np.allclose(v, 5) for v in scene.positions)


def test_sparse_accessor_without_buffer_view_starts_from_zeros(tmp_path):
    # Spec §Sparse Accessors: no bufferView = all zeros before substitution
    b = GltfBuilder()
    values = np.array([[1, 0, 0], [0, 2, 0]], np.float32)
    acc = b.sparse_accessor(None, 3, indices=[1, 2], values=values)
    b.scene([b.node(mesh=b.mesh(acc))])
    scene = load_scene(b.write_glb(tmp_path / "z.glb"))
    np.testing.assert_allclose(scene.positions[:3], [[0, 0, 0], [1, 0, 0], [0, 2, 0]])


# ---------------------------------------------------------------- primitives ---------------

FIVE = np.array([[0, 0, 0], [1, 0, 0], [0, 1, 0], [1, 1, 0], [0, 2, 0]], np.float32)


@pytest.mark.parametrize("mode, expected", [
    (4, [(0, 1, 2)]),  # TRIANGLES: 5 indices -> one triangle, two ignored
    (5, [(0, 1, 2), (1, 3, 2), (2, 3, 4)]),  # Vulkan spec "Primitive Topologies": strip
    (6, [(1, 2, 0), (2, 3, 0), (3, 4, 0)]),  # Vulkan spec "Primitive Topologies": fan
])
def test_strip_and_fan_order(tmp_path, mode, expected):
    normals = np.tile([0, 0, 1], (5, 1)).astype(np.float32)
    scene = one_node(tmp_path, positions=FIVE, normals=normals, mode=mode,
                     indices=np.arange(5, dtype=np.uint8))
    kept = [tuple(t) for t in scene.triangles]
    # zero-area triangles are dropped; all the expected ones here have area
    assert kept == expected


def test_non_indexed_triangles(tmp_path):
    # Spec §Meshes: without indices, vertices are drawn in order
    scene = one_node(tmp_path, positions=FIVE[:3], normals=UP)
    assert [tuple(t) for t in scene.triangles] == [(0, 1, 2)]


def test_points_and_lines_are_skipped_with_a_warning(tmp_path):
    # Spec §Meshes (mode 0-3): points and lines cover no area; skip them and say so
    b = GltfBuilder()
    prims = [b.primitive(FIVE, mode=0), b.primitive(FIVE, mode=1), b.primitive(TRI, normals=UP)]
    b.scene([b.node(mesh=b.mesh(primitives=prims))])
    scene = load_scene(b.write_glb(tmp_path / "pl.glb"))
    assert scene.triangle_count == 1
    assert any("POINTS" in w for w in scene.warnings) and any("LINES" in w for w in scene.warnings)


def test_colors_vec3_normalized_get_alpha_one(tmp_path):
    # Spec §Meshes: COLOR_0 VEC3 -> alpha 1; normalized u8 c/255 (Spec §Animations table)
    c = np.array([[255, 0, 0], [0, 51, 0], [0, 0, 255]], np.uint8)
    scene = one_node(tmp_path, colors=c, normals=UP, normalized={"COLOR_0": True})
    np.testing.assert_allclose(scene.colors[:3], [[1, 0, 0, 1], [0, 0.2, 0, 1], [0, 0, 1, 1]],
                               atol=1e-7)


def test_texcoords_both_sets(tmp_path):
    # Spec §Meshes, §Materials (texCoord): TEXCOORD_0 and TEXCOORD_1 both reach the scene;
    # normalized u16 UVs
    uv0 = np.array([[0, 0], [1, 0], [0, 1]], np.float32)
    uv1 = np.array([[65535, 0], [0, 65535], [0, 0]], np.uint16)
    scene = one_node(tmp_path, uv0=uv0, uv1=uv1, normals=UP, normalized={"TEXCOORD_1": True})
    np.testing.assert_allclose(scene.uv[0, :3], uv0)
    np.testing.assert_allclose(scene.uv[1, :3], [[1, 0], [0, 1], [0, 0]])


def test_given_tangents_follow_the_node_and_mirror(tmp_path):
    # Tangents transform with the model matrix; under a mirror the bitangent sign w flips so
    # that B = cross(N, T)·w equals the mirrored original bitangent (Spec §Meshes TANGENT).
    t = np.tile([1, 0, 0, 1], (3, 1)).astype(np.float32)
    scene = one_node(tmp_path, normals=UP, tangents=t, node={"scale": [-1, 1, 1]})
    tangent = scene.tangents[0]
    np.testing.assert_allclose(tangent[:3], [-1, 0, 0], atol=1e-6)
    bitangent = np.cross(scene.normals[0], tangent[:3]) * tangent[3]
    original = np.cross([0, 0, 1], [1, 0, 0]) * 1.0  # +Y
    np.testing.assert_allclose(bitangent, np.array([-1, 1, 1]) * original, atol=1e-6)


def test_generated_tangents_match_the_handedness_rule(tmp_path):
    # Spec §Meshes (TANGENT), glTF-Sample-Models issue #174: quad facing +Z with u -> +X and
    # v -> -Y; generated tangents must equal the explicit TANGENT (1,0,0,1): T = +X and
    # B = cross(N,T)·w = +Y, the direction of decreasing v.
    p, uv, idx = quad()
    b = GltfBuilder()
    tex = b.image_png(np.full((2, 2, 4), 128, np.uint8))
    mat = b.material(normalTexture={"index": tex})
    b.scene([b.node(mesh=b.mesh(p, idx, normals=np.tile([0, 0, 1], (4, 1)).astype(np.float32),
                                uv0=uv, material=mat))])
    scene = load_scene(b.write_glb(tmp_path / "t.glb"))
    np.testing.assert_allclose(scene.tangents, np.tile([1, 0, 0, 1], (4, 1)), atol=1e-6)
    # v grows toward -Y here, so "decreasing v" is +Y: the bitangent must point there
    dv = uv[3] - uv[0]  # from vertex (0,0,0) to (0,1,0): v changes by -1 going +Y
    assert dv[1] < 0
    bitangent = np.cross(scene.normals[0], scene.tangents[0, :3]) * scene.tangents[0, 3]
    np.testing.assert_allclose(bitangent, [0, 1, 0], atol=1e-6)


def test_no_tangents_without_normal_map(tmp_path):
    scene = one_node(tmp_path, normals=UP, uv0=np.zeros((3, 2), np.float32))
    assert not scene.tangents.any()


# ---------------------------------------------------------------- scenes and containers ----

def two_scenes(tmp_path, default: int | None):
    b = GltfBuilder()
    small = b.node(mesh=b.mesh(TRI, normals=UP))
    big = b.node(mesh=b.mesh(TRI * 10, normals=UP))
    b.scene([small], name="small", default=False)
    b.scene([big], name="big", default=False)
    if default is not None:
        b.gltf["scene"] = default
    return b.write_gltf(tmp_path / "two.gltf")


def test_scene_choice(tmp_path):
    # Spec §Scenes: the default scene, else (our choice) scenes[0]; or a choice by index or name
    path = two_scenes(tmp_path, default=1)
    assert load_scene(path).bounds()[1, 0] == 10
    assert load_scene(path, scene=0).bounds()[1, 0] == 1
    assert load_scene(path, scene="small").bounds()[1, 0] == 1
    no_default = two_scenes(tmp_path, default=None)
    loaded = load_scene(no_default)
    assert loaded.bounds()[1, 0] == 1
    assert any("scenes[0]" in w for w in loaded.warnings)
    with pytest.raises(GltfError, match="no scene named"):
        load_scene(path, scene="sofa")


def test_glb_detected_by_magic_with_unknown_chunk(tmp_path):
    # Spec §GLB File Format: unknown chunk types are ignored; GLB is known by magic, not extension
    b = GltfBuilder()
    b.scene([b.node(mesh=b.mesh(TRI, normals=UP))])
    path = tmp_path / "renamed.gltf"
    path.write_bytes(b.glb_bytes(extra_chunks=[(0x12345678, b"abcd")]))
    assert load_scene(path).triangle_count == 1


@pytest.mark.parametrize("mime", ["application/octet-stream", "application/gltf-buffer"])
def test_data_uri_media_types(tmp_path, mime):
    # Spec §URIs, §File Extensions and Media Types: both buffer media types are valid (pygltflib
    # only reads one)
    b = GltfBuilder()
    b.scene([b.node(mesh=b.mesh(TRI, normals=UP))])
    assert load_scene(b.write_gltf(tmp_path / "d.gltf", mime=mime)).triangle_count == 1


def test_external_buffer_percent_encoded(tmp_path):
    # Spec §URIs: relative URIs are percent-encoded; "my%20part.bin" names "my part.bin"
    b = GltfBuilder()
    b.scene([b.node(mesh=b.mesh(TRI, normals=UP))])
    path = b.write_gltf(tmp_path / "my part.gltf", external=True)
    import json

    tree = json.loads(path.read_text())
    tree["buffers"][0]["uri"] = "my%20part.bin"
    path.write_text(json.dumps(tree))
    assert load_scene(path).triangle_count == 1


def test_triangle_limit(tmp_path):
    b = GltfBuilder()
    mesh = b.mesh(TRI, normals=UP)
    b.scene([b.node(mesh=mesh), b.node(mesh=mesh, translation=[2, 0, 0])])
    path = b.write_glb(tmp_path / "l.glb")
    assert load_scene(path, max_triangles=2).triangle_count == 2
    with pytest.raises(GltfError, match="over the limit triangles 1") as err:
        load_scene(path, max_triangles=1)
    assert err.value.field == "nodes[1]"  # the second instance passes the budget


def test_nan_and_degenerate_triangles_dropped_with_warning(tmp_path):
    p = np.array([[0, 0, 0], [1, 0, 0], [0, 1, 0], [np.nan, 0, 0], [2, 0, 0]], np.float32)
    idx = np.array([0, 1, 2, 0, 3, 2, 0, 1, 4, 1, 1, 2], np.uint16)  # ok, NaN, collinear, repeat
    scene = one_node(tmp_path, positions=p, indices=idx, normals=np.tile([0, 0, 1], (5, 1))
                     .astype(np.float32))
    assert [tuple(t) for t in scene.triangles] == [(0, 1, 2)]
    assert any("NaN" in w for w in scene.warnings)
    assert any("2 degenerate" in w for w in scene.warnings)


def test_unsupported_required_extension_is_named(tmp_path):
    # Spec §Specifying Extensions: extensionsRequired we do not implement -> error naming it
    b = GltfBuilder()
    b.scene([b.node(mesh=b.mesh(TRI, normals=UP))])
    b.use_extension("EXT_meshopt_compression", required=True)
    with pytest.raises(GltfError, match="EXT_meshopt_compression") as err:
        load_scene(b.write_glb(tmp_path / "x.glb"))
    assert err.value.field == "extensionsRequired[0]"


def test_draco_compressed_primitive(tmp_path):
    # KHR_draco_mesh_compression README, decoded with DracoPy; positions quantised to
    # 14 bits over a 1 m range, so within 1/2^14 of the original
    DracoPy = pytest.importorskip("DracoPy")
    p, _, idx = quad()
    data = DracoPy.encode(p, idx.reshape(-1, 3), quantization_bits=14)
    b = GltfBuilder()
    view = b.view(bytes(data))
    b.gltf.setdefault("accessors", []).extend([
        {"componentType": 5126, "count": 4, "type": "VEC3", "min": [0, 0, 0], "max": [1, 1, 0]},
        {"componentType": 5123, "count": 6, "type": "SCALAR"},
    ])
    prim = {"attributes": {"POSITION": 0}, "indices": 1, "extensions": {
        "KHR_draco_mesh_compression": {"bufferView": view, "attributes": {"POSITION": 0}}}}
    b.scene([b.node(mesh=b.mesh(primitives=[prim]))])
    b.use_extension("KHR_draco_mesh_compression", required=True)
    scene = load_scene(b.write_glb(tmp_path / "draco.glb"))
    assert scene.triangle_count == 2
    np.testing.assert_allclose(scene.bounds(), [[0, 0, 0], [1, 1, 0]], atol=2 ** -14)


def test_corrupt_draco_data_is_a_gltf_error(tmp_path):
    pytest.importorskip("DracoPy")
    b = GltfBuilder()
    view = b.view(b"DRACO" + bytes(range(64)))
    b.gltf.setdefault("accessors", []).append(
        {"componentType": 5126, "count": 3, "type": "VEC3"})
    prim = {"attributes": {"POSITION": 0}, "extensions": {
        "KHR_draco_mesh_compression": {"bufferView": view, "attributes": {"POSITION": 0}}}}
    b.scene([b.node(mesh=b.mesh(primitives=[prim]))])
    with pytest.raises(GltfError, match="Draco") as err:
        load_scene(b.write_glb(tmp_path / "bad.glb"))
    assert err.value.field.endswith("KHR_draco_mesh_compression.bufferView")
