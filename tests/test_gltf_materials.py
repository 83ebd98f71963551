"""Materials, textures, samplers, variants, cameras and lights, on files built in code.

Sources: glTF 2.0 spec §Materials, §Textures, §Samplers, §Cameras; the KHR extension READMEs
(defaults quoted from their property tables); IEC 61966-2-1 for sRGB.
"""

from __future__ import annotations

import math

import numpy as np
import pytest
from gltf_builder import GltfBuilder, quad

from shots.errors import GltfError
from shots.gltf import load_scene
from shots.gltf.materials import texture_transform
from shots.kernels.texture import NO_FOOTPRINT, sample_texture
from shots.scene import (
    ALPHA_MASK,
    FILTER_LINEAR,
    FILTER_NEAREST,
    LINEAR_MIPMAP_LINEAR,
    P_ALPHA_CUTOFF,
    P_ALPHA_MODE,
    P_ATTENUATION_B,
    P_ATTENUATION_DISTANCE,
    P_ATTENUATION_R,
    P_BASE_A,
    P_BASE_R,
    P_CLEARCOAT,
    P_CLEARCOAT_ROUGHNESS,
    P_EMISSIVE_B,
    P_EMISSIVE_R,
    P_IOR,
    P_METALLIC,
    P_NORMAL_SCALE,
    P_OCCLUSION_STRENGTH,
    P_ROUGHNESS,
    P_SHEEN_B,
    P_SHEEN_R,
    P_SHEEN_ROUGHNESS,
    P_SPECULAR,
    P_SPECULAR_B,
    P_SPECULAR_R,
    P_THICKNESS,
    P_TRANSMISSION,
    P_UNLIT,
    T_BASE_COLOR,
    T_CLEARCOAT,
    T_EMISSIVE,
    T_METALLIC_ROUGHNESS,
    T_NORMAL,
    T_OCCLUSION,
    T_SHEEN_COLOR,
    T_SPECULAR_COLOR,
    T_TRANSMISSION,
    TI_BYTES,
    TI_CHANNELS,
    TI_HEIGHT,
    TI_MAG_FILTER,
    TI_MIN_FILTER,
    TI_OFFSET,
    TI_WIDTH,
    TI_WRAP_S,
    TI_WRAP_T,
    WRAP_CLAMP,
    WRAP_MIRROR,
    WRAP_REPEAT,
)

P, UV, IDX = quad()
N = np.tile([0, 0, 1], (4, 1)).astype(np.float32)


def load_with(tmp_path, material: dict | None = None, builder: GltfBuilder | None = None,
              extra_nodes: list[int] = ()):
    b = builder or GltfBuilder()
    mat = None if material is None else b.material(**material)
    mesh = b.mesh(P, IDX, normals=N, uv0=UV, material=mat)
    b.scene([b.node(mesh=mesh), *extra_nodes])
    return load_scene(b.write_glb(tmp_path / "m.glb"))


def texel_value(scene, texture: int) -> np.ndarray:
    """The decoded RGBA of texel (0, 0) of a texture, as the renderer's lookup returns it."""
    out = np.zeros(4)
    info = scene.textures.info
    u = 0.5 / info[texture, TI_WIDTH]
    v = 0.5 / info[texture, TI_HEIGHT]
    sample_texture(scene.textures.texels, info, texture, u, v, NO_FOOTPRINT, out)
    return out


def iec_decode(code: int) -> float:
    # IEC 61966-2-1: c <= 0.04045 -> c/12.92, else ((c+0.055)/1.055)^2.4, with c = code/255
    c = code / 255
    return c / 12.92 if c <= 0.04045 else ((c + 0.055) / 1.055) ** 2.4


# ---------------------------------------------------------------- factors ------------------

def test_core_factors(tmp_path):
    # Spec §Materials: values copied; emissive × KHR_materials_emissive_strength (its README:
    # factor 1, strength 5 -> 5)
    scene = load_with(tmp_path, {
        "pbrMetallicRoughness": {"baseColorFactor": [0.2, 1, 0.7, 0.5], "metallicFactor": 0.25,
                                 "roughnessFactor": 0.75},
        "emissiveFactor": [1, 0.5, 0],
        "extensions": {"KHR_materials_emissive_strength": {"emissiveStrength": 5}},
        "alphaMode": "MASK", "doubleSided": True,
    })
    row = scene.materials.params[0]
    np.testing.assert_allclose(row[P_BASE_R : P_BASE_A + 1], [0.2, 1, 0.7, 0.5])
    assert row[P_METALLIC] == 0.25 and row[P_ROUGHNESS] == 0.75
    np.testing.assert_allclose(row[P_EMISSIVE_R : P_EMISSIVE_B + 1], [5, 2.5, 0])
    assert row[P_ALPHA_MODE] == ALPHA_MASK
    assert row[P_ALPHA_CUTOFF] == 0.5  # Spec §Materials: alphaCutoff default 0.5


def test_material_without_pbr_block_is_white_metal(tmp_path):
    # Spec §Materials: pbrMetallicRoughness absent -> its defaults (white, metallic 1, rough 1)
    scene = load_with(tmp_path, {"name": "plain"})
    row = scene.materials.params[0]
    assert tuple(row[P_BASE_R : P_BASE_A + 1]) == (1, 1, 1, 1)
    assert row[P_METALLIC] == 1 and row[P_ROUGHNESS] == 1
    assert scene.materials.names == ("plain", "(default material)")


def test_extension_values(tmp_path):
    # Values as written in each KHR_materials_* extension object
    scene = load_with(tmp_path, {"extensions": {
        "KHR_materials_transmission": {"transmissionFactor": 0.9},
        "KHR_materials_ior": {"ior": 1.33},
        "KHR_materials_volume": {"thicknessFactor": 0.01, "attenuationDistance": 0.5,
                                 "attenuationColor": [0.9, 0.8, 0.7]},
        "KHR_materials_clearcoat": {"clearcoatFactor": 1.0, "clearcoatRoughnessFactor": 0.1},
        "KHR_materials_specular": {"specularFactor": 0.5, "specularColorFactor": [1, 0.9, 0.8]},
        "KHR_materials_sheen": {"sheenColorFactor": [0.3, 0.2, 0.1], "sheenRoughnessFactor": 0.6},
        "KHR_materials_unlit": {},
    }})
    row = scene.materials.params[0]
    assert row[P_TRANSMISSION] == pytest.approx(0.9) and row[P_IOR] == pytest.approx(1.33)
    assert row[P_THICKNESS] == pytest.approx(0.01)
    assert row[P_ATTENUATION_DISTANCE] == pytest.approx(0.5)
    np.testing.assert_allclose(row[P_ATTENUATION_R : P_ATTENUATION_B + 1], [0.9, 0.8, 0.7])
    assert row[P_CLEARCOAT] == 1 and row[P_CLEARCOAT_ROUGHNESS] == pytest.approx(0.1)
    assert row[P_SPECULAR] == 0.5
    np.testing.assert_allclose(row[P_SPECULAR_R : P_SPECULAR_B + 1], [1, 0.9, 0.8])
    np.testing.assert_allclose(row[P_SHEEN_R : P_SHEEN_B + 1], [0.3, 0.2, 0.1])
    assert row[P_SHEEN_ROUGHNESS] == pytest.approx(0.6) and row[P_UNLIT] == 1


def test_extension_defaults(tmp_path):
    # Defaults from the extension READMEs: transmission 0, ior 1.5, thickness 0, attenuation
    # distance +inf and colour white, clearcoat 0, specular 1 and colour white, sheen colour
    # black and roughness 0
    scene = load_with(tmp_path, {"extensions": {
        name: {} for name in ("KHR_materials_transmission", "KHR_materials_ior",
                              "KHR_materials_volume", "KHR_materials_clearcoat",
                              "KHR_materials_specular", "KHR_materials_sheen")}})
    row = scene.materials.params[0]
    assert row[P_TRANSMISSION] == 0 and row[P_IOR] == 1.5 and row[P_THICKNESS] == 0
    assert row[P_ATTENUATION_DISTANCE] == np.inf
    assert tuple(row[P_ATTENUATION_R : P_ATTENUATION_B + 1]) == (1, 1, 1)
    assert row[P_CLEARCOAT] == 0 and row[P_SPECULAR] == 1
    assert tuple(row[P_SPECULAR_R : P_SPECULAR_B + 1]) == (1, 1, 1)
    assert tuple(row[P_SHEEN_R : P_SHEEN_B + 1]) == (0, 0, 0) and row[P_SHEEN_ROUGHNESS] == 0
    assert row[P_UNLIT] == 0


# ---------------------------------------------------------------- textures -----------------

CORNERS = np.array([[[255, 0, 0, 255], [0, 255, 0, 255]],
                    [[0, 0, 255, 255], [255, 255, 255, 255]]], np.uint8)  # TL red, TR green...


def test_texture_rows_start_at_the_image_top(tmp_path):
    # Spec §Images: uv (0,0) is the first pixel of the image (top-left), so with
    # TL red, TR green, BL blue, BR white -> atlas texels in that reading order
    b = GltfBuilder()
    tex = b.image_png(CORNERS)
    scene = load_with(tmp_path, {"pbrMetallicRoughness": {"baseColorTexture": {"index": tex}}}, b)
    info = scene.textures.info[scene.materials.texture[0, T_BASE_COLOR]]
    assert (info[TI_WIDTH], info[TI_HEIGHT], info[TI_CHANNELS], info[TI_BYTES]) == (2, 2, 4, 1)
    codes = scene.textures.texels[info[TI_OFFSET] : info[TI_OFFSET] + 16].reshape(4, 4)
    np.testing.assert_array_equal(codes, CORNERS.reshape(4, 4))
    # and the quad's vertex at world top-left (0,1,0) carries uv (0,0), the red texel
    top_left = np.flatnonzero(np.all(scene.positions == [0, 1, 0], axis=1))[0]
    np.testing.assert_array_equal(scene.uv[0, top_left], [0, 0])


def test_colour_textures_are_srgb_decoded_and_data_textures_linear(tmp_path):
    # Spec §Materials (metallicRoughnessTexture: G roughness, B metallic, linear), IEC 61966-2-1:
    # one image with texel (255, 64, 192) used as base colour (sRGB) and as metallicRoughness
    # (linear: roughness G = 0.251, metallic B = 0.753)
    b = GltfBuilder()
    tex = b.image_png(np.array([[[255, 64, 192, 128]]], np.uint8))
    scene = load_with(tmp_path, {"pbrMetallicRoughness": {
        "baseColorTexture": {"index": tex}, "metallicRoughnessTexture": {"index": tex}}}, b)
    t = scene.materials.texture[0]
    srgb = texel_value(scene, t[T_BASE_COLOR])
    linear = texel_value(scene, t[T_METALLIC_ROUGHNESS])
    np.testing.assert_allclose(srgb, [iec_decode(255), iec_decode(64), iec_decode(192),
                                      128 / 255], rtol=1e-6)
    np.testing.assert_allclose(linear[1:3], [0.251, 0.753], atol=5e-4)
    assert iec_decode(128) == pytest.approx(0.21586, abs=1e-5)  # IEC 61966-2-1 decode of 128/255


def test_srgb_slots(tmp_path):
    # Spec §Materials and the KHR_materials_* READMEs: emissive, specularColor, sheenColor are
    # sRGB; transmission, clearcoat, normal and occlusion are linear
    b = GltfBuilder()
    tex = b.image_png(np.full((1, 1, 3), 128, np.uint8))
    ref = {"index": tex}
    scene = load_with(tmp_path, {
        "emissiveTexture": ref, "normalTexture": {"index": tex, "scale": 0.5},
        "occlusionTexture": {"index": tex, "strength": 0.25},
        "extensions": {
            "KHR_materials_specular": {"specularColorTexture": ref},
            "KHR_materials_sheen": {"sheenColorTexture": ref},
            "KHR_materials_transmission": {"transmissionTexture": ref},
            "KHR_materials_clearcoat": {"clearcoatTexture": ref}}}, b)
    t, info = scene.materials.texture[0], scene.textures.info

    def red(slot):
        return texel_value(scene, t[slot])[0]

    for slot in (T_EMISSIVE, T_SPECULAR_COLOR, T_SHEEN_COLOR):
        assert red(slot) == pytest.approx(iec_decode(128), rel=1e-6)
    for slot in (T_NORMAL, T_OCCLUSION, T_TRANSMISSION, T_CLEARCOAT):
        assert red(slot) == pytest.approx(128 / 255, rel=1e-6)
    row = scene.materials.params[0]
    assert row[P_NORMAL_SCALE] == 0.5 and row[P_OCCLUSION_STRENGTH] == 0.25
    assert len(info) == 2  # one image, decoded once per colour space
    # ... and stored once per colour space, however many slots use it
    assert len(set(info[:, TI_OFFSET])) == 2


def test_sampler_codes(tmp_path):
    # Spec §Samplers: codes stored as given; no sampler -> REPEAT, and we pick
    # LINEAR magnification when it is undefined
    b = GltfBuilder()
    clamp = b.image_png(CORNERS, sampler={"wrapS": 33071, "wrapT": 33648, "magFilter": 9728})
    plain = b.image_png(CORNERS)
    scene = load_with(tmp_path, {"pbrMetallicRoughness": {"baseColorTexture": {"index": clamp}},
                                 "emissiveTexture": {"index": plain}}, b)
    info = scene.textures.info
    first = info[scene.materials.texture[0, T_BASE_COLOR]]
    second = info[scene.materials.texture[0, T_EMISSIVE]]
    assert (first[TI_WRAP_S], first[TI_WRAP_T], first[TI_MAG_FILTER]) == (
        WRAP_CLAMP, WRAP_MIRROR, FILTER_NEAREST)
    assert (second[TI_WRAP_S], second[TI_WRAP_T], second[TI_MAG_FILTER]) == (
        WRAP_REPEAT, WRAP_REPEAT, FILTER_LINEAR)
    # minFilter undefined: the spec's "auto filtering"; we pick trilinear
    assert first[TI_MIN_FILTER] == second[TI_MIN_FILTER] == LINEAR_MIPMAP_LINEAR


def test_texture_transform_worked_example():
    # KHR_texture_transform README, worked example: offset (0,1), rotation π/2, scale
    # (0.5,0.5) maps corners (0,0),(1,0),(1,1),(0,1) to (0,1),(0,0.5),(0.5,0.5),(0.5,1)
    m = texture_transform([0, 1], math.pi / 2, [0.5, 0.5]).astype(np.float64)
    corners = np.array([[0, 0, 1], [1, 0, 1], [1, 1, 1], [0, 1, 1]], np.float64)
    np.testing.assert_allclose(corners @ m.T, [[0, 1], [0, 0.5], [0.5, 0.5], [0.5, 1]],
                               atol=1e-7)


def test_texture_transform_and_texcoord_override_in_file(tmp_path):
    # KHR_texture_transform: the transform is stored per slot; its texCoord overrides the
    # textureInfo's
    b = GltfBuilder()
    tex = b.image_png(CORNERS)
    transform = {"offset": [0.25, 0.5], "rotation": 0.0, "scale": [2, 3], "texCoord": 1}
    scene = load_with(tmp_path, {"pbrMetallicRoughness": {"baseColorTexture": {
        "index": tex, "texCoord": 0, "extensions": {"KHR_texture_transform": transform}}}}, b)
    np.testing.assert_allclose(scene.materials.uv_transform[0, T_BASE_COLOR],
                               [[2, 0, 0.25], [0, 3, 0.5]])
    assert scene.materials.texcoord[0, T_BASE_COLOR] == 1
    np.testing.assert_allclose(scene.materials.uv_transform[0, T_EMISSIVE],
                               [[1, 0, 0], [0, 1, 0]])


def test_texture_pixel_limit(tmp_path):
    b = GltfBuilder()
    tex = b.image_png(np.zeros((4, 4, 3), np.uint8))
    material = {"pbrMetallicRoughness": {"baseColorTexture": {"index": tex}}}
    mat = b.material(**material)
    b.scene([b.node(mesh=b.mesh(P, IDX, normals=N, uv0=UV, material=mat))])
    path = b.write_glb(tmp_path / "big.glb")
    assert load_scene(path, max_texture_pixels=16).textures.info.shape[0] == 1
    with pytest.raises(GltfError, match="limit of 15 pixels") as err:
        load_scene(path, max_texture_pixels=15)
    assert err.value.field == "images[0]"


# ---------------------------------------------------------------- variants -----------------

def test_materials_variants(tmp_path):
    # KHR_materials_variants: each variant maps primitives to materials; unmapped primitives
    # keep their default material
    b = GltfBuilder()
    oak, walnut, felt = (b.material(name=n) for n in ("oak", "walnut", "felt"))
    b.gltf["extensions"] = {"KHR_materials_variants": {
        "variants": [{"name": "Oak"}, {"name": "Walnut"}]}}
    b.use_extension("KHR_materials_variants")
    mapped = b.primitive(P, IDX, normals=N, material=oak, extensions={"KHR_materials_variants": {
        "mappings": [{"material": walnut, "variants": [1]}, {"material": oak, "variants": [0]}]}})
    other = b.primitive(P + [2, 0, 0], IDX, normals=N, material=felt)
    b.scene([b.node(mesh=b.mesh(primitives=[mapped, other]))])
    scene = load_scene(b.write_glb(tmp_path / "v.glb"))
    assert set(scene.variants) == {"Oak", "Walnut"}
    assert list(scene.tri_material) == [oak, oak, felt, felt]
    assert list(scene.variants["Walnut"]) == [walnut, walnut, felt, felt]
    assert list(scene.with_variant("Oak").tri_material) == [oak, oak, felt, felt]


# ---------------------------------------------------------------- cameras and lights -------

def test_camera_world_transform(tmp_path):
    # Spec §Cameras: the camera sits at its node; §View Matrix (it looks along its -Z)
    b = GltfBuilder()
    b.gltf["cameras"] = [{"type": "perspective", "perspective": {"yfov": 0.66, "znear": 0.1}}]
    cam = b.node(camera=0, translation=[0, 1, 5], rotation=[0, 0.70711, 0, 0.70711])
    scene = load_with(tmp_path, builder=b, extra_nodes=[cam])
    (c,) = scene.cameras
    assert c.kind == "perspective" and c.yfov == pytest.approx(0.66)
    assert c.aspect_ratio is None and c.zfar is None  # absent = viewport aspect, infinite far
    np.testing.assert_allclose(c.world[:3, 3], [0, 1, 5])
    # +90° about +Y sends the view direction -Z to -X
    np.testing.assert_allclose(-c.world[:3, 2], [-1, 0, 0], atol=1e-5)


def test_punctual_lights(tmp_path):
    # KHR_lights_punctual: position = node translation; direction = node -Z; defaults colour
    # white, intensity 1, spot cones 0 and π/4
    b = GltfBuilder()
    b.gltf["extensions"] = {"KHR_lights_punctual": {"lights": [
        {"type": "directional", "intensity": 3.0},
        {"type": "spot", "color": [1, 0.5, 0.25], "range": 10, "spot": {}},
    ]}}
    b.use_extension("KHR_lights_punctual")
    sun = b.node(extensions={"KHR_lights_punctual": {"light": 0}})
    # rotation -90° about +X turns -Z into -Y: the spot points down
    spot = b.node(translation=[1, 4, 0], rotation=[-0.70711, 0, 0, 0.70711], scale=[3, 3, 3],
                  extensions={"KHR_lights_punctual": {"light": 1}})
    scene = load_with(tmp_path, builder=b, extra_nodes=[sun, spot])
    d, s = scene.lights
    assert d.kind == "directional" and d.intensity == 3.0 and d.color == (1, 1, 1)
    np.testing.assert_allclose(d.direction, [0, 0, -1], atol=1e-6)
    assert s.kind == "spot" and s.intensity == 1.0 and s.range == 10
    assert s.inner_cone == 0 and s.outer_cone == pytest.approx(math.pi / 4)
    np.testing.assert_allclose(s.position, [1, 4, 0])
    np.testing.assert_allclose(s.direction, [0, -1, 0], atol=1e-5)
