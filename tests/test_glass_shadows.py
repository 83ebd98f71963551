"""Shadow rays through glass agree with the camera path, and single-sided thin glass culls its
back faces (KHR_materials_transmission, KHR_materials_volume, glTF 2.0 spec §3.9.5)."""

from __future__ import annotations

import math

import numpy as np
import pytest
from scenes import box, diffuse, look, material, merge, ortho_camera, pixel_centres, quad, render

from shots.look import Light

TILT = math.radians(30.0)
HEIGHT, THICKNESS = 2.0, 0.2


def glass(base=0.8, **values):
    return material(P_METALLIC=0.0, P_ROUGHNESS=0.0, P_TRANSMISSION=1.0,
                    P_BASE_R=[base, base, base], **values)


def shadow_ratio(glass_row) -> float:
    """Floor brightness in the slab's shadow over the lit floor: a 1 m × 1 m × 0.2 m slab
    2 m up, lit by a directional light 30° from vertical so that its shadow falls at x = 0,
    out of the camera's line of sight to the slab."""
    shift = HEIGHT * math.tan(TILT)
    slab = box(extents=(1.0, 1.0, THICKNESS), center=(-shift, 0.0, HEIGHT), rows=[glass_row])
    floor = quad(size=8.0, rows=[diffuse()])
    camera = ortho_camera(size=64, half_height=2.0)
    light = Light(kind="directional", direction=(math.sin(TILT), 0.0, -math.cos(TILT)),
                  intensity=1.0)
    image = render(merge(floor, slab), camera, look(light))[..., 0]
    x, y = pixel_centres(camera)
    shadow = (np.abs(x) < 0.25) & (np.abs(y) < 0.25)
    lit = (np.abs(x - 1.5) < 0.25) & (np.abs(y) < 0.25)
    return float(image[shadow].mean() / image[lit].mean())


def schlick(cos_i: float, f0: float = 0.04) -> float:
    """Schlick (1994): F = F0 + (1 − F0)(1 − cos θ)⁵; F0 = ((1.5 − 1)/(1.5 + 1))² = 0.04."""
    return f0 + (1 - f0) * (1 - cos_i) ** 5


def test_volume_tints_once_and_absorbs_over_the_path():
    # KHR_materials_volume: a closed slab (thickness > 0) is entered once and left once. Light
    # through it: Fresnel (1 − F) at both interfaces, the base colour once (KHR_materials_
    # transmission), Beer–Lambert exp(−σ·x) with σ = −ln(attenuationColor)/attenuationDistance
    # over the straight path x = thickness / cos θ. Not base² (tinting at every crossing).
    row = glass(P_THICKNESS=THICKNESS, P_ATTENUATION_DISTANCE=0.4,
                P_ATTENUATION_R=[0.5, 0.5, 0.5])
    sigma = -math.log(0.5) / 0.4
    expected = (1 - schlick(math.cos(TILT))) ** 2 * 0.8 * math.exp(
        -sigma * THICKNESS / math.cos(TILT))
    assert shadow_ratio(row) == pytest.approx(expected, rel=0.02)


def test_thin_glass_tints_once_per_wall():
    # KHR_materials_transmission without a volume: each face is a thin wall, tinted once with
    # Fresnel 1 − F at each; a closed box of thin walls has two walls on the light's path
    expected = ((1 - schlick(math.cos(TILT))) * 0.8) ** 2
    assert shadow_ratio(glass()) == pytest.approx(expected, rel=0.02)


def back_face_view(glass_row) -> float:
    """What a camera sees through glass turned away from it: an emissive wall (radiance 1)
    behind a quad whose front faces away from the camera."""
    wall = quad(center=(0.0, 0.0, -1.0), size=4.0,
                rows=[material(P_BASE_R=[0.0, 0.0, 0.0], P_EMISSIVE_R=[1.0, 1.0, 1.0])])
    pane = quad(size=2.0, rows=[glass_row])
    pane = type(pane)(**{**pane.__dict__, "triangles": pane.triangles[:, ::-1].copy(),
                         "normals": -pane.normals})  # front face toward -z
    image = render(merge(wall, pane), ortho_camera(size=16, half_height=0.5), look())
    return float(image[..., 0].mean())


def test_single_sided_thin_glass_culls_its_back_face():
    # glTF 2.0 spec §3.9.5: back faces of single-sided materials are not rendered; thin
    # transmission is no exception, so the wall shows at full radiance
    assert back_face_view(glass(P_DOUBLE_SIDED=0.0)) == pytest.approx(1.0, abs=1e-3)
    # double-sided thin glass is seen: Fresnel and the base colour 0.8 dim the wall
    assert back_face_view(glass(P_DOUBLE_SIDED=1.0)) < 0.85


def test_volume_keeps_its_back_faces():
    # KHR_materials_volume: a volume's back faces are where light leaves it; they are kept
    # whatever doubleSided says (the wall is seen through an exit interface, so dimmed)
    assert back_face_view(glass(P_DOUBLE_SIDED=0.0, P_THICKNESS=0.1)) < 0.99
