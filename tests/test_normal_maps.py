"""Normal maps through the loader: the coat's own normal map and normal maps under
KHR_texture_transform, checked from file to pixel."""

from __future__ import annotations

import json
import struct
from pathlib import Path

import numpy as np
import pytest
from gltf_builder import GltfBuilder, quad
from scenes import look, ortho_camera, render

from shots.gltf import load_scene
from shots.look import Light

SAMPLES = Path(__file__).parent / "data" / "samples"
TILT = np.radians(45.0)
# a constant tangent-space normal tilted 45° toward the texture's +u axis (glTF 2.0 spec §3.9.3:
# texel = (n + 1) / 2); 8-bit, so the tilt is 45° to within 0.3°
TEXEL = np.round((np.array([np.sin(TILT), 0.0, np.cos(TILT)]) + 1) / 2 * 255).astype(np.uint8)


def lit_quad(tmp_path, rotation: float, light_from: tuple[float, float]) -> float:
    """Mean brightness of a white Lambertian quad (facing +z, u = +x, v = -y) whose normal map
    is TEXEL under a KHR_texture_transform ``rotation``, lit by a directional light from the
    horizontal direction ``light_from`` at 30° elevation."""
    p, uv, idx = quad(2.0)
    p -= (1.0, 1.0, 0.0)
    b = GltfBuilder()
    texture = b.image_png(np.tile(np.r_[TEXEL, 255], (4, 4, 1)))
    info = {"index": texture, "extensions": {"KHR_texture_transform": {"rotation": rotation}}}
    b.use_extension("KHR_texture_transform")
    mat = b.material(normalTexture=info, pbrMetallicRoughness={"metallicFactor": 0.0,
                                                               "roughnessFactor": 1.0})
    n = np.tile([[0, 0, 1]], (4, 1)).astype(np.float32)
    b.scene([b.node(mesh=b.mesh(p, idx, normals=n, uv0=uv, material=mat))])
    scene = load_scene(b.write_glb(tmp_path / f"q{rotation:.2f}{light_from}.glb"))
    el = np.radians(30.0)
    direction = (-np.cos(el) * light_from[0], -np.cos(el) * light_from[1], -np.sin(el))
    image = render(scene, ortho_camera(size=16, half_height=0.5),
                   look(Light(kind="directional", direction=direction, intensity=1.0)))
    return float(image[..., 0].mean())


def test_normal_map_turns_with_texture_transform_rotation(tmp_path):
    # KHR_texture_transform README: uv' = R(rotation)·uv, R = [[cos, sin], [-sin, cos]]; a
    # normal map must turn its tangent frame with it. Rotation 90° maps the texture's +u' onto
    # the surface's +v direction, which is world -y here (v = 1 - y), so the tilted normal is
    # n = (0, -sin 45°, cos 45°). Lambert: brightness ∝ max(n·l, 0); with l at 30° elevation,
    # from -y: n·l = cos45·cos30 + sin45·sin30 = 0.966, from +x: sin45·sin30 = 0.354.
    toward_minus_y = lit_quad(tmp_path, np.pi / 2, (0.0, -1.0))
    toward_plus_x = lit_quad(tmp_path, np.pi / 2, (1.0, 0.0))
    assert toward_minus_y / toward_plus_x == pytest.approx(0.966 / 0.354, rel=0.03)
    # without rotation the same texel tilts toward +x (u = x): the ratio inverts
    assert lit_quad(tmp_path, 0.0, (1.0, 0.0)) / lit_quad(tmp_path, 0.0, (0.0, -1.0)) == \
        pytest.approx(0.966 / 0.354, rel=0.03)


def strip_coat_normals(folder: Path) -> Path:
    """ClearCoatTest.glb with every clearcoatNormalTexture removed."""
    data = (SAMPLES / "ClearCoatTest.glb").read_bytes()
    length = struct.unpack_from("<I", data, 12)[0]
    tree = json.loads(data[20 : 20 + length])
    for material in tree["materials"]:
        coat = material.get("extensions", {}).get("KHR_materials_clearcoat", {})
        coat.pop("clearcoatNormalTexture", None)
    body = json.dumps(tree).encode()
    body += b" " * (-len(body) % 4)
    glb = struct.pack("<II", len(body), 0x4E4F534A) + body + data[20 + length :]
    out = folder / "ClearCoatTest.glb"
    out.write_bytes(struct.pack("<III", 0x46546C67, 2, 12 + len(glb)) + glb)
    return out


def coat_normal_row(path: Path) -> tuple[np.ndarray, np.ndarray]:
    """Luminance of the middle (coat with clearcoatNormalTexture) and right (the same texture as
    the base normal map) samples of ClearCoatTest's last row, "R4_CoatNormals" at y = -5.25,
    x = 0 and x = 2.1 (its node translations), under one light at 40° from the view."""
    scene = load_scene(path)
    light = Light(kind="directional", direction=(0.0, -np.sin(np.radians(40)),
                                                 -np.cos(np.radians(40))), intensity=3.0)
    tiles = []
    for x in (0.0, 2.1):
        camera = ortho_camera(size=96, half_height=0.8, eye=(x, -5.25, 5), target=(x, -5.25, 0))
        tiles.append(render(scene, camera, look(light, samples=9))[..., :3].mean(axis=-1))
    return tiles[0], tiles[1]


@pytest.mark.slow
def test_clearcoat_normal_texture_shapes_the_coat(tmp_path):
    # ClearCoatTest (Khronos sample), last row: the middle sample's coat carries
    # clearcoatNormalTexture, the right one shows the same texture as the base normal map.
    # KHR_materials_clearcoat README: the coat is shaded with its own normal, so the middle
    # sample's highlight pattern must follow the right one's; with the texture removed it is
    # the smooth coat's and does not (measured: 0.145 against 0.005 at 96 px, 9 samples).
    coated, reference = coat_normal_row(SAMPLES / "ClearCoatTest.glb")
    smooth, _ = coat_normal_row(strip_coat_normals(tmp_path))

    def correlation(a, b):
        return float(np.corrcoef(a.ravel(), b.ravel())[0, 1])

    with_map = correlation(coated, reference)
    without = correlation(smooth, reference)
    assert with_map > without + 0.1, (with_map, without)
    assert np.abs(coated - smooth).mean() > 0.05 * smooth.mean()  # the texture shows
