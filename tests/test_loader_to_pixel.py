"""From file to pixel: texture colour spaces, vertex colours and factors go through the loader
and the renderer together (glTF files written with tests/gltf_builder.py)."""

from __future__ import annotations

import math

import numpy as np
import pytest
from gltf_builder import GltfBuilder, quad
from scenes import look, ortho_camera, pixel_centres, render

from shots.gltf import load_scene
from shots.look import Environment

CODE = 128  # an 8-bit texel value


def srgb_decode(code: int) -> float:
    """IEC 61966-2-1: c ≤ 0.04045 → c/12.92, else ((c + 0.055)/1.055)^2.4."""
    c = code / 255
    return c / 12.92 if c <= 0.04045 else ((c + 0.055) / 1.055) ** 2.4


def quad_pixel(tmp_path, material: dict, *, colors=None, env=None, unlit=False) -> float:
    """Mean red value of a quad filling an orthographic view, loaded from a GLB."""
    p, uv, idx = quad(2.0)
    p -= (1.0, 1.0, 0.0)
    b = GltfBuilder()
    texture = b.image_png(np.full((4, 4, 4), CODE, np.uint8))
    material = {k: (dict(v, index=texture) if isinstance(v, dict) and "index" in v else v)
                for k, v in material.items()}
    if "pbrMetallicRoughness" in material:
        pbr = material["pbrMetallicRoughness"]
        for key, value in list(pbr.items()):
            if isinstance(value, dict) and "index" in value:
                pbr[key] = dict(value, index=texture)
    if unlit:
        material.setdefault("extensions", {})["KHR_materials_unlit"] = {}
        b.use_extension("KHR_materials_unlit")
    n = np.tile([[0, 0, 1]], (4, 1)).astype(np.float32)
    mat = b.material(**material)
    b.scene([b.node(mesh=b.mesh(p, idx, normals=n, uv0=uv, colors=colors, material=mat))])
    scene = load_scene(b.write_glb(tmp_path / "m.glb"))
    image = render(scene, ortho_camera(size=8, half_height=0.5), look(env=env) if env else look())
    return float(image[..., 0].mean())


def test_base_colour_texture_is_srgb(tmp_path):
    # glTF 2.0 spec §3.9.6 (baseColorTexture: sRGB transfer function); KHR_materials_unlit
    # shows base colour × factor as is
    value = quad_pixel(tmp_path, {"pbrMetallicRoughness": {
        "baseColorTexture": {"index": 0}, "baseColorFactor": [0.5, 1, 1, 1]}}, unlit=True)
    assert value == pytest.approx(0.5 * srgb_decode(CODE), rel=1e-3)


def test_emissive_texture_is_srgb(tmp_path):
    # glTF 2.0 spec §3.9.6 (emissiveTexture: sRGB); black base, no light: radiance = emission
    value = quad_pixel(tmp_path, {"pbrMetallicRoughness": {"baseColorFactor": [0, 0, 0, 1]},
                                  "emissiveTexture": {"index": 0},
                                  "emissiveFactor": [1, 1, 1]})
    assert value == pytest.approx(srgb_decode(CODE), rel=1e-3)


def test_vertex_colour_multiplies_base_colour(tmp_path):
    # glTF 2.0 spec §3.7.2.1: COLOR_0 (linear) multiplies the base colour
    colors = np.full((4, 4), 0.5, np.float32)
    value = quad_pixel(tmp_path, {"pbrMetallicRoughness": {"baseColorFactor": [0.6, 1, 1, 1]}},
                       colors=colors, unlit=True)
    assert value == pytest.approx(0.3, rel=1e-3)


def test_occlusion_texture_is_linear(tmp_path):
    # glTF 2.0 spec §3.9.6: occlusion is linear; under uniform white sky light the diffuse
    # response scales by the texel value 128/255 (strength 1), not by its sRGB decoding 0.216
    sky = Environment(zenith=(1.0, 1.0, 1.0), horizon=(1.0, 1.0, 1.0), nadir=(1.0, 1.0, 1.0))
    pbr = {"metallicFactor": 0.0, "roughnessFactor": 1.0}
    plain = quad_pixel(tmp_path, {"pbrMetallicRoughness": dict(pbr)}, env=sky)
    occluded = quad_pixel(tmp_path, {"pbrMetallicRoughness": dict(pbr),
                                     "occlusionTexture": {"index": 0}}, env=sky)
    assert occluded / plain == pytest.approx(CODE / 255, rel=0.02)


def spot_falloff(cos_angle: float, inner: float, outer: float) -> float:
    """KHR_lights_punctual README, "Inner and Outer Cone Angles" (its reference code)."""
    scale = 1.0 / max(0.001, math.cos(inner) - math.cos(outer))
    offset = -math.cos(outer) * scale
    return min(max(cos_angle * scale + offset, 0.0), 1.0) ** 2


def test_spot_light_from_a_node_lights_the_floor(tmp_path):
    # KHR_lights_punctual README: a spot light sits at its node and shines along the node's -Z;
    # a node turned -90° about X shines down -Y. Irradiance on the floor below at angle α off
    # the axis: I·falloff(α)·cos³α/h² (inverse square, Lambert); a purely diffuse floor
    # (KHR_materials_specular specularFactor 0) shows it in proportion.
    from shots.model_lights import frame_lights

    height, inner, outer = 1.0, math.radians(10), math.radians(30)
    b = GltfBuilder()
    floor = np.array([[-2, 0, 2], [2, 0, 2], [2, 0, -2], [-2, 0, -2]], np.float32)
    up = np.tile([[0, 1, 0]], (4, 1)).astype(np.float32)
    b.use_extension("KHR_lights_punctual")
    b.use_extension("KHR_materials_specular")
    b.gltf["extensions"] = {"KHR_lights_punctual": {"lights": [{
        "type": "spot", "intensity": 5.0, "spot": {"innerConeAngle": inner,
                                                   "outerConeAngle": outer}}]}}
    mat = b.material(pbrMetallicRoughness={"metallicFactor": 0.0, "roughnessFactor": 1.0},
                     extensions={"KHR_materials_specular": {"specularFactor": 0.0}})
    lamp = b.node(translation=[0, height, 0], rotation=[-math.sqrt(0.5), 0, 0, math.sqrt(0.5)],
                  extensions={"KHR_lights_punctual": {"light": 0}})
    b.scene([b.node(mesh=b.mesh(floor, np.array([0, 1, 2, 0, 2, 3], np.uint16), normals=up,
                                material=mat)), lamp])
    scene = load_scene(b.write_glb(tmp_path / "lamp.glb"))
    assert len(scene.lights) == 1
    camera = ortho_camera(size=64, half_height=1.0, eye=(0, 5, 0), target=(0, 0, 0),
                          up=(0, 0, -1))
    image = render(scene, camera, look(*frame_lights("model", (), scene.lights)))[..., 0]
    x, y = pixel_centres(camera)  # camera right = +x, up = -z on the floor
    radius = np.hypot(x, y)
    centre = image[radius < 0.05].mean()
    for r in (0.25, 0.45, 0.7):
        ring = image[np.abs(radius - r) < 0.02].mean()
        alpha = math.atan(r / height)
        # the ring average of a smoothly varying function: evaluated at its mean radius
        expected = spot_falloff(math.cos(alpha), inner, outer) * math.cos(alpha) ** 3
        assert ring / centre == pytest.approx(expected, abs=0.03), r
    assert centre == pytest.approx(5.0 / height**2 / math.pi, rel=0.02)  # E·ρ/π, ρ = 1


def test_preset_chooses_rig_model_or_both_lights(tmp_path):
    # KHR_lights_punctual lights reach a frame only when [look] model_lights asks; otherwise
    # one note says how many were ignored and which key uses them
    from shots.planner import plan_frames
    from shots.presets import apply_model_fixes, load_preset

    b = GltfBuilder()
    b.use_extension("KHR_lights_punctual")
    b.gltf["extensions"] = {"KHR_lights_punctual": {"lights": [{"type": "point"},
                                                               {"type": "directional"}]}}
    lamps = [b.node(translation=[0, 2, 0], extensions={"KHR_lights_punctual": {"light": k}})
             for k in (0, 1)]
    p, _, idx = quad(1.0)
    b.scene([b.node(mesh=b.mesh(p, idx)), *lamps])
    loaded = load_scene(b.write_glb(tmp_path / "m.glb"))
    counts = {}
    for choice in ("rig", "model", "both"):
        base = load_preset("still")
        preset = base.model_copy(update={"look": base.look.model_copy(
            update={"model_lights": choice})})
        scene = apply_model_fixes(loaded, preset)
        frame = plan_frames(preset, scene)[0]
        counts[choice] = len(frame.look.lights)
        notes = [n for n in scene.warnings if "KHR_lights_punctual" in n]
        assert len(notes) == (1 if choice == "rig" else 0)
        if notes:
            assert notes[0].startswith("2 light(s) in the model") and "model_lights" in notes[0]
    rig = counts["rig"]
    assert counts["model"] == 2 and counts["both"] == rig + 2
    assert [light.kind for light in plan_frames(preset, scene)[0].look.lights[rig:]] == [
        "point", "directional"]
