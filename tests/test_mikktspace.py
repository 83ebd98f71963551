"""Generated tangents follow MikkTSpace (Mikkelsen 2008, "Simulation of Wrinkled Surfaces
Revisited"), which glTF 2.0 spec §3.7.2.1 asks clients to use when TANGENT is absent."""

from __future__ import annotations

import json
import struct
from pathlib import Path

import numpy as np
import pytest
from gltf_builder import GltfBuilder

from shots.gltf import load_scene
from shots.gltf.accessors import AccessorReader
from shots.gltf.container import read_document
from shots.gltf.mikktspace import mikktspace_corners

SAMPLES = Path(__file__).parent / "data" / "samples"


def test_matches_the_tangents_a_mikktspace_exporter_wrote():
    # NormalTangentMirrorTest (Khronos sample, written by the Blender glTF exporter, whose
    # TANGENT comes from the MikkTSpace reference code) has mirrored UVs. Recomputing its
    # tangents without TANGENT must give the stored ones: same sign at every corner, directions
    # within a small angle (float32 storage).
    doc = read_document(SAMPLES / "NormalTangentMirrorTest.glb")
    reader = AccessorReader(doc, max_elements=1 << 24)
    prim = doc.gltf.meshes[0].primitives[0]
    attributes = prim.attributes  # a plain dict as the loader parses it

    def floats(name, kind):
        return reader.floats(attributes[name], name, (kind,))

    triangles = reader.indices(prim.indices, "indices").astype(np.int64).reshape(-1, 3)
    corners = mikktspace_corners(floats("POSITION", "VEC3"), floats("NORMAL", "VEC3"),
                                 triangles, floats("TEXCOORD_0", "VEC2")).reshape(-1, 4)
    stored = floats("TANGENT", "VEC4")[triangles.reshape(-1)].astype(np.float64)
    assert (np.sign(corners[:, 3]) == np.sign(stored[:, 3])).all()
    assert (stored[:, 3] < 0).any() and (stored[:, 3] > 0).any()  # the sample mirrors
    cos = np.einsum("ij,ij->i", corners[:, :3],
                    stored[:, :3] / np.linalg.norm(stored[:, :3], axis=1)[:, None])
    angle = np.degrees(np.arccos(np.clip(cos, -1, 1)))
    assert angle.max() < 0.05


def test_mirrored_quad_splits_the_seam_vertices(tmp_path):
    # Two quads sharing the edge x = 1; the right one mirrors u (u = 2 - x). MikkTSpace keeps
    # the orientations apart: left corners T = +x, w = +1; right corners T = -x (u grows to
    # -x), w = -1 (the mirrored side). glTF 2.0 spec §3.7.2.1: B = cross(N, T)·w, which must
    # point toward decreasing v (v runs down the image), here +y on both halves.
    p = np.array([[0, 0, 0], [1, 0, 0], [1, 1, 0], [0, 1, 0], [2, 0, 0], [2, 1, 0]], np.float32)
    uv = np.array([[0, 1], [1, 1], [1, 0], [0, 0], [0, 1], [0, 0]], np.float32)
    n = np.tile([[0, 0, 1]], (6, 1)).astype(np.float32)
    idx = np.array([0, 1, 2, 0, 2, 3, 1, 4, 5, 1, 5, 2], np.uint16)
    b = GltfBuilder()
    tex = b.image_png(np.full((2, 2, 4), 128, np.uint8))
    mat = b.material(normalTexture={"index": tex})
    b.scene([b.node(mesh=b.mesh(p, idx, normals=n, uv0=uv, material=mat))])
    scene = load_scene(b.write_glb(tmp_path / "m.glb"))
    assert scene.positions.shape[0] == 8  # the two seam vertices are split
    for tri in scene.triangles:
        centre_x = scene.positions[tri, 0].mean()
        t = scene.tangents[tri]
        expected = (1, 0, 0, 1) if centre_x < 1 else (-1, 0, 0, -1)
        np.testing.assert_allclose(t, np.tile(expected, (3, 1)), atol=1e-6)
        bitangent = np.cross(scene.normals[tri], t[:, :3]) * t[:, 3:]
        np.testing.assert_allclose(bitangent, np.tile([0, 1, 0], (3, 1)), atol=1e-6)


def test_corner_angle_weighting():
    # Mikkelsen 2008 weights each triangle by its angle at the shared corner. A fan at the
    # origin: a 90° triangle with T = +x and a 10° triangle whose UVs are turned so T = +y.
    # Angle weights give T at atan2(10, 90) = 6.34° from +x; an unweighted sum would give 45°.
    a = np.radians(10.0)
    p = np.array([[0, 0, 0], [1, 0, 0], [0, 1, 0], [0, 1, 0], [-np.sin(a), np.cos(a), 0]])
    n = np.tile([[0.0, 0, 1]], (5, 1))
    # glTF uv, v down: first triangle u = x, v = -y; second u = y, v = x (both keep orientation)
    uv = np.array([[0, 0], [1, 0], [0, -1], [1, 0], [np.cos(a), -np.sin(a)]])
    tri = np.array([[0, 1, 2], [0, 3, 4]])
    corners = mikktspace_corners(p, n, tri, uv)
    np.testing.assert_allclose(corners[0, 0], corners[1, 0])  # one welded origin, one tangent
    angle = np.degrees(np.arctan2(corners[0, 0, 1], corners[0, 0, 0]))
    assert abs(angle - np.degrees(np.arctan2(10.0, 90.0))) < 1e-6
    assert corners[0, 0, 3] == 1.0


def without_tangents(name: str, folder: Path) -> Path:
    """A copy of a sample GLB whose primitives lose TANGENT (the loader must generate them)."""
    data = (SAMPLES / name).read_bytes()
    length = struct.unpack_from("<I", data, 12)[0]
    tree = json.loads(data[20 : 20 + length])
    for mesh in tree["meshes"]:
        for prim in mesh["primitives"]:
            prim["attributes"].pop("TANGENT", None)
    body = json.dumps(tree).encode()
    body += b" " * (-len(body) % 4)
    rest = data[20 + length :]
    glb = struct.pack("<II", len(body), 0x4E4F534A) + body + rest
    out = folder / name
    out.write_bytes(struct.pack("<III", 0x46546C67, 2, 12 + len(glb)) + glb)
    return out


def _runs(mask: np.ndarray) -> list[tuple[int, int]]:
    edges = np.flatnonzero(np.diff(np.r_[0, mask.astype(int), 0]))
    return [(a, b) for a, b in zip(edges[::2], edges[1::2], strict=True) if b - a > 4]


@pytest.mark.slow
@pytest.mark.parametrize("name", ["NormalTangentTest.glb", "NormalTangentMirrorTest.glb"])
def test_normal_mapped_bumps_are_lit_from_the_lights_side(tmp_path, name):
    # NormalTangentTest / NormalTangentMirrorTest (Khronos samples; the second with mirrored
    # UVs): every square holds hemispheres drawn by a normal map. With generated tangents, a
    # grazing light (20° elevation) from +x must brighten each bump's +x side as it would a real
    # hemisphere: the difference D = I(light from +x) - I(light from -x) has a positive first
    # moment along x about the bump's centre, in every square; likewise along y. A flipped
    # tangent or bitangent (or a mirrored column blended across its seam) turns it negative.
    from scenes import look, ortho_camera, render

    from shots.look import Light

    scene = load_scene(without_tangents(name, tmp_path))
    camera = ortho_camera(size=192, half_height=1.25, eye=(0, -0.12, 5), target=(0, -0.12, 0))
    c, s = np.cos(np.radians(20)), np.sin(np.radians(20))

    def lit(direction):
        image = render(scene, camera, look(Light(kind="directional", direction=direction,
                                                 intensity=3.0), samples=4))
        return image[..., :3].mean(axis=-1), image[..., 3]

    plus_x, alpha = lit((-c, 0, -s))
    minus_x, _ = lit((c, 0, -s))
    plus_y, _ = lit((0, -c, -s))
    minus_y, _ = lit((0, c, -s))
    mask = alpha > 0.5
    j, i = np.mgrid[0 : mask.shape[0], 0 : mask.shape[1]]
    checked = 0
    for difference, coordinate in ((plus_x - minus_x, i), (plus_y - minus_y, -j)):
        for x0, x1 in _runs(mask.any(axis=0)):
            for y0, y1 in _runs(mask.any(axis=1)):
                cell = (slice(y0, y1), slice(x0, x1))
                weight = np.abs(difference[cell])
                if weight.sum() < 10.0:  # a square without a lit bump (labels, gaps)
                    continue
                centre = (weight * coordinate[cell]).sum() / weight.sum()
                moment = (difference[cell] * (coordinate[cell] - centre)).sum() / weight.sum()
                assert moment > -0.1, (x0, y0)
                checked += 1
    assert checked >= 30  # 15 squares and more, both directions
