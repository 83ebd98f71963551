"""Rendered radiance against analytic results: lights, materials, textures, glass, shadows.

Scenes are built in code (tests/scenes.py) and read back as the linear premultiplied buffer.
"""

import math

import numpy as np
import pytest
from scenes import (
    box,
    diffuse,
    look,
    material,
    merge,
    mesh_scene,
    ortho_camera,
    pixel_centres,
    quad,
    render,
    single_texture,
    sphere,
    textured_table,
)

from shots.camera import Camera
from shots.colour import quantize, to_display
from shots.kernels import ground as gk
from shots.kernels import lights as lk
from shots.kernels.texture import NO_FOOTPRINT, sample_texture, wrap_coord
from shots.look import DIRECTIONAL, Environment, Ground, Light
from shots.render import pack_lights
from shots.scene import (
    ALPHA_BLEND,
    ALPHA_MASK,
    FILTER_LINEAR,
    FILTER_NEAREST,
    T_BASE_COLOR,
    T_EMISSIVE,
    T_METALLIC_ROUGHNESS,
    T_NORMAL,
    T_OCCLUSION,
    WRAP_CLAMP,
    WRAP_MIRROR,
    WRAP_REPEAT,
)

WHITE_ENV = Environment(zenith=(1.0, 1.0, 1.0), horizon=(1.0, 1.0, 1.0), nadir=(1.0, 1.0, 1.0))
LAMBERT = dict(P_SPECULAR=0.0)  # KHR_materials_specular factor 0: no specular lobe at all


def unlit(color=(1.0, 1.0, 1.0), **values):
    return material(P_BASE_R=list(color), P_UNLIT=1.0, **values)


# --- lights ------------------------------------------------------------------------------------
def test_lambert_sphere_under_directional_light():
    # Lambert's cosine law: L = albedo · E · cos θ / π
    albedo, lux = 0.8, 3.0
    to_light = np.array([0.3, 0.4, math.sqrt(0.75)])
    scene = sphere(rows=[diffuse((albedo,) * 3, **LAMBERT)])
    camera = ortho_camera(48)
    image = render(scene, camera, look(Light(DIRECTIONAL, intensity=lux, direction=-to_light)))
    x, y = pixel_centres(camera)
    inside = x * x + y * y < 0.9**2
    n = np.stack([x, y, np.sqrt(np.clip(1 - x * x - y * y, 0, 1))], -1)
    cos = n @ to_light
    lit = inside & (cos > 0.2)
    expected = albedo * lux * cos / math.pi
    assert lit.sum() > 300
    np.testing.assert_allclose(image[lit, 0], expected[lit], rtol=0.01)
    assert np.all(image[inside & (cos < -0.05), :3] == 0.0)  # unlit side: no light at all


@pytest.mark.parametrize("distance", [1.0, 2.0])
def test_point_light_inverse_square(distance):
    # KHR_lights_punctual: E = I cos θ / d² (1 cd at 1 m head-on → 1/π = 0.31831 from a
    # white Lambert surface; at 2 m → 0.07958)
    scene = quad(size=2.0, rows=[diffuse(**LAMBERT)])
    camera = ortho_camera(21, half_height=1.0)
    light = Light("point", intensity=1.0, position=(0.0, 0.0, distance))
    image = render(scene, camera, look(light))
    x, y = pixel_centres(camera)
    r2 = x * x + y * y + distance**2
    expected = (1.0 / math.pi) * (distance / np.sqrt(r2)) / r2
    np.testing.assert_allclose(image[..., 0], expected, rtol=1e-4)
    assert image[10, 10, 0] == pytest.approx({1.0: 0.31831, 2.0: 0.07958}[distance], rel=1e-4)


def test_range_window_and_spot_cone():
    # KHR_lights_punctual "Range Property": window at d = range/2 is 1 − (1/2)⁴ = 0.9375;
    # "Inner and Outer Cone Angles": outer π/4, inner 0, 22.5° off axis → 0.54776
    lights = pack_lights(
        (
            Light("point", intensity=1.0, position=(0.0, 0.0, 0.0), range=4.0),
            Light("spot", intensity=1.0, position=(0.0, 0.0, 0.0), direction=(0.0, -1.0, 0.0)),
        )
    )
    *_, d, e, _, _ = lk.sample_light(lights, 0, 0.0, -2.0, 0.0, 0.5, 0.5)
    assert d == pytest.approx(2.0) and e * d * d == pytest.approx(0.9375)
    a = math.radians(22.5)
    *_, d, e, _, _ = lk.sample_light(lights, 1, math.sin(a), -math.cos(a), 0.0, 0.5, 0.5)
    assert e * d * d == pytest.approx(0.54776, abs=1e-5)
    *_, e, _, _ = lk.sample_light(lights, 1, 1.0, -0.9, 0.0, 0.5, 0.5)  # 48° off axis: outside
    assert e == 0.0


def test_square_area_light_irradiance():
    # Configuration factor from a point to a parallel rectangle over its corner (Howell, "A
    # Catalog of Radiation Heat Transfer Configuration Factors", case B-3, from memory):
    # F = 1/(2π) [X/√(1+X²) atan(Y/√(1+X²)) + Y/√(1+Y²) atan(X/√(1+Y²))]; four quarters of a
    # centred square. A Lambert surface under radiance L then returns L·F.
    side, height, radiance = 1.0, 1.0, 2.0
    x = side / 2 / height
    s = math.sqrt(1 + x * x)
    factor = 4 * (2 * x / s * math.atan(x / s)) / (2 * math.pi)
    light = Light("area", intensity=radiance, position=(0.0, 0.0, height),
                  direction=(0.0, 0.0, -1.0), edge_u=(side, 0, 0), edge_v=(0, side, 0))  # fmt: skip
    image = render(quad(size=2.0, rows=[diffuse(**LAMBERT)]), ortho_camera(5, 1.0),
                   look(light, area_light_samples=1024))  # fmt: skip
    assert image[2, 2, 0] == pytest.approx(radiance * factor, rel=0.005)


def test_light_direction():
    # A directional light with identity rotation travels along
    # −Z (KHR_lights_punctual: light points down the node's −Z); only a +Z-facing quad is lit
    light = Light(DIRECTIONAL, intensity=1.0, direction=(0.0, 0.0, -1.0))
    facing_plus = quad(size=2.0, rows=[diffuse(**LAMBERT)])
    facing_minus = mesh_scene(facing_plus.positions * [-1, 1, 1], facing_plus.triangles,
                              normals=-facing_plus.normals, rows=[diffuse(**LAMBERT)])  # fmt: skip
    front = render(facing_plus, ortho_camera(8, 0.5), look(light))
    back = render(facing_minus, ortho_camera(8, 0.5, eye=(0, 0, -5)), look(light))
    assert np.allclose(front[..., 0], 1 / math.pi) and np.all(front[..., 3] == 1)
    assert np.all(back[..., :3] == 0) and np.all(back[..., 3] == 1)


# --- environment -------------------------------------------------------------------------------
@pytest.mark.parametrize(
    "row",
    [
        diffuse(**LAMBERT),  # pure Lambert
        diffuse(),  # default F0 0.04, roughness 1: the Fresnel split must keep the sum
        material(P_METALLIC=1.0, P_ROUGHNESS=0.0),  # white mirror metal: reflection rays
    ],
)
def test_furnace(row):
    # White furnace (common practice, e.g. Heitz et al. 2016 "Multiple-scattering microfacet
    # BSDFs", §6): a white non-absorbing convex object under uniform unit radiance is invisible.
    camera = Camera(eye=(0, 0, 4), target=(0, 0, 0), up=(0, 1, 0), width=32, height=32)
    image = render(sphere(rows=[row]), camera, look(env=WHITE_ENV))
    covered = image[..., 3] == 1
    assert covered.sum() > 100
    np.testing.assert_allclose(image[covered, :3], 1.0, atol=0.01)


def test_glossy_metal_loses_little_energy_in_the_furnace():
    # GGX single scattering loses only a few percent at low roughness away from grazing angles
    # (Heitz et al. 2016, "Multiple-scattering microfacet BSDFs", fig. 1, from memory): a white
    # metal of roughness 0.2 (α = 0.04) traced with GGX-sampled reflection rays averages above
    # 0.98 where N·V > 0.45, and no pixel exceeds 1 (no energy gain). Single pixels may lose a
    # ray: GGX's long tail puts ~0.1 % of normals past 50°, whose reflections go below the
    # horizon.
    camera = ortho_camera(24)
    row = material(P_METALLIC=1.0, P_ROUGHNESS=0.2)
    image = render(sphere(rows=[row]), camera, look(env=WHITE_ENV, samples=4, glossy_samples=8))
    x, y = pixel_centres(camera)
    facing = x * x + y * y < 0.8
    assert facing.sum() > 100
    assert image[facing, 0].mean() > 0.98
    assert image[image[..., 3] > 0, 0].max() <= 1.0 + 1e-6


def test_clearcoat_reflects_four_percent_head_on():
    # KHR_materials_clearcoat: the coat is a dielectric layer of F0 0.04 (ior 1.5) mixed over
    # the base by clearcoat · F(N·V); over a black, non-reflecting base in a white furnace the
    # centre of a facing quad returns exactly that 0.04
    row = material(P_BASE_R=[0.0, 0.0, 0.0], P_METALLIC=0.0, P_SPECULAR=0.0, P_CLEARCOAT=1.0,
                   P_CLEARCOAT_ROUGHNESS=0.0)  # fmt: skip
    image = render(quad(size=2.0, rows=[row]), ortho_camera(4, 0.5), look(env=WHITE_ENV))
    np.testing.assert_allclose(image[..., :3], 0.04, rtol=1e-6)


@pytest.mark.parametrize("coat_roughness", [0.0, 0.04, 0.1])
def test_clearcoat_reflects_an_area_light_without_sparkles(coat_roughness):
    # The same coat over a black base, now under a large area light of radiance 10 facing it
    # (KHR_materials_clearcoat: clearcoat · F(N·V) = 0.04 head on). Every pixel's mirror
    # direction meets the light, and a coat this smooth (α ≤ 0.01) keeps nearly all of its
    # GGX lobe on it (its single-scattering albedo ≈ 1 head on, Heitz et al. 2016 fig. 1, from
    # memory), so each pixel returns 0.04 · 10 = 0.4. Light samples alone land in so narrow a
    # lobe once in thousands of samples; the coat's own rays must find it, evenly across pixels.
    row = material(P_BASE_R=[0.0, 0.0, 0.0], P_METALLIC=0.0, P_SPECULAR=0.0, P_CLEARCOAT=1.0,
                   P_CLEARCOAT_ROUGHNESS=coat_roughness)  # fmt: skip
    light = Light("area", intensity=10.0, position=(0.0, 0.0, 2.0), direction=(0.0, 0.0, -1.0),
                  edge_u=(4.0, 0, 0), edge_v=(0, 4.0, 0))  # fmt: skip
    image = render(quad(size=2.0, rows=[row]), ortho_camera(16, 0.5),
                   look(light, samples=16, area_light_samples=4, glossy_samples=4))  # fmt: skip
    red = image[..., 0]
    assert red.mean() == pytest.approx(0.4, rel=0.02)
    # 16 rays a pixel: one ray in the lobe's far tail, left to the light samples by MIS, moves a
    # pixel by a few percent; a sparkle (or a light sample's miss) by far more
    assert red.std() < 0.05 * 0.4
    assert red.max() < 0.4 * 1.15 and red.min() > 0.4 * 0.85


def test_occlusion_darkens_only_the_environment_term():
    # Spec §Materials, occlusionTexture: occlusion applies to indirect light only
    tex = single_texture(np.array([[[0.0, 0.0, 0.0, 1.0]]]))
    occluded = quad(size=2.0, rows=[diffuse()], textures=tex,
                    table=textured_table(diffuse(), {T_OCCLUSION: 0}))  # fmt: skip
    plain = quad(size=2.0, rows=[diffuse()])
    light = Light("point", intensity=2.0, position=(0.3, 0.2, 1.5))
    camera = ortho_camera(9, 1.0)
    assert np.array_equal(render(occluded, camera, look(light)), render(plain, camera, look(light)))
    ambient_occluded = render(occluded, camera, look(env=WHITE_ENV))
    ambient_plain = render(plain, camera, look(env=WHITE_ENV))
    assert np.all(ambient_occluded[..., :3] == 0) and np.all(ambient_plain[..., :3] > 0.5)


# --- textures ----------------------------------------------------------------------------------
RED, GREEN, BLUE, WHITE = (1, 0, 0, 1), (0, 1, 0, 1), (0, 0, 1, 1), (1, 1, 1, 1)


def test_texture_orientation():
    # A V flip or mirrored U shows here: uv (0, 0) is the image's top-left (spec §Images);
    # 2×2 NEAREST texture TL red, TR green, BL blue, BR white
    tex = single_texture(np.array([[RED, GREEN], [BLUE, WHITE]]))
    scene = quad(size=2.0, textures=tex, table=textured_table(unlit(), {T_BASE_COLOR: 0}))
    image = render(scene, ortho_camera(16, 1.0), look())
    quads = {(0, 0): RED, (0, 1): GREEN, (1, 0): BLUE, (1, 1): WHITE}
    for (r, c), colour in quads.items():
        block = image[r * 8 : r * 8 + 8, c * 8 : c * 8 + 8]
        np.testing.assert_array_equal(block.reshape(-1, 4), np.tile(colour, (64, 1)))


def test_texture_transform_rotation():
    # KHR_texture_transform README, worked example: offset (0, 1), rotation π/2, scale 0.5
    # maps quad corners (0,0),(1,0),(1,1),(0,1) to (0,1),(0,0.5),(0.5,0.5),(0.5,1), using
    # u' = cos·u + sin·v, v' = −sin·u + cos·v after scaling, then the offset
    rot, scale, offset = math.pi / 2, 0.5, (0.0, 1.0)
    c, s = math.cos(rot), math.sin(rot)
    uv_transform = np.array([[c * scale, s * scale, offset[0]], [-s * scale, c * scale, offset[1]]])
    colours = np.arange(16, dtype=np.float32).reshape(4, 4) * 16 / 255  # (col, row) → 4·row + col
    texels = np.stack([colours, np.zeros_like(colours), np.zeros_like(colours),
                       np.ones_like(colours)], -1)  # fmt: skip
    table = textured_table(unlit(), {T_BASE_COLOR: 0}, uv_transform=uv_transform)
    image = render(quad(size=2.0, textures=single_texture(texels), table=table),
                   ortho_camera(16, 1.0), look())  # fmt: skip
    # image quadrant (row, col) → texel (col, row) of the texture's lower-left quadrant
    expected = {(0, 0): (0, 3), (0, 1): (0, 2), (1, 1): (1, 2), (1, 0): (1, 3)}
    for (r, c_), (tc, tr) in expected.items():
        block = image[r * 8 : r * 8 + 8, c_ * 8 : c_ * 8 + 8, 0]
        np.testing.assert_allclose(block * 255 / 16, 4 * tr + tc, atol=1e-4)


def test_wrap_modes():
    # Spec §Samplers (wrap modes): repeat 2.2 → 0.2, −0.4 → 0.6; mirrored 2.2 → 0.2, −0.4 → 0.4,
    # 1.3 → 0.7
    for x, mode, expected in [(2.2, WRAP_REPEAT, 0.2), (-0.4, WRAP_REPEAT, 0.6),
                              (2.2, WRAP_MIRROR, 0.2), (-0.4, WRAP_MIRROR, 0.4),
                              (1.3, WRAP_MIRROR, 0.7), (1.3, WRAP_CLAMP, 1.0),
                              (-0.4, WRAP_CLAMP, 0.0)]:  # fmt: skip
        assert wrap_coord(x, mode) == pytest.approx(expected)
    # the same folds on a 10-texel row sampled at texel centres (value = texel index × 20 / 255)
    row = np.stack([np.arange(10.0) * 20 / 255] + [np.zeros(10)] * 3, -1)[None]
    out = np.zeros(4)
    for u, mode, texel in [(2.25, WRAP_REPEAT, 2), (-0.35, WRAP_REPEAT, 6), (-0.35, WRAP_MIRROR, 3),
                           (1.25, WRAP_MIRROR, 7), (1.35, WRAP_CLAMP, 9), (-0.45, WRAP_CLAMP, 0)]:  # fmt: skip
        tex = single_texture(row, wrap=mode, filter_=FILTER_NEAREST)
        sample_texture(tex.texels, tex.info, 0, u, 0.5, NO_FOOTPRINT, out)
        assert out[0] * 255 / 20 == pytest.approx(texel), (u, mode)
    # bilinear (spec §Samplers LINEAR): halfway between texel centres 3 and 4, and across the seam
    lin = single_texture(row, wrap=WRAP_REPEAT, filter_=FILTER_LINEAR)
    sample_texture(lin.texels, lin.info, 0, 0.4, 0.5, NO_FOOTPRINT, out)
    assert out[0] * 255 / 20 == pytest.approx(3.5)
    # halfway between texel 9 and texel 0
    sample_texture(lin.texels, lin.info, 0, 1.0, 0.5, NO_FOOTPRINT, out)
    assert out[0] * 255 / 20 == pytest.approx(4.5)


def test_metal_rough_channels_are_linear_and_not_swapped():
    # Spec §Materials and Appendix B: white material, MR texel (0, 128, 0) (G roughness 0.502,
    # B metallic 0; linear), point light, L = V = N → f = 0.35572 (sRGB-decoded: 1.7717; swapped:
    # mirror metal)
    tex = single_texture(np.array([[[0.0, 128 / 255, 0.0, 1.0]]]))
    table = textured_table(material(), {T_METALLIC_ROUGHNESS: 0})
    scene = quad(size=2.0, textures=tex, table=table)
    camera = Camera(eye=(0, 0, 2), target=(0, 0, 0), up=(0, 1, 0), width=5, height=5)
    image = render(scene, camera, look(Light("point", intensity=4.0, position=(0.0, 0.0, 2.0))))
    assert image[2, 2, 0] == pytest.approx(0.35572 * 4.0 / 4.0, rel=1e-4)


def test_emissive_texture_is_not_decoded_twice():
    # Spec §Materials (emissiveTexture is sRGB): emissive-only quad, texture code 128 (decoded once
    # by the texture lookup, IEC 61966-2-1), factor 1, no tone map → output code 128
    tex = single_texture(np.array([[[128, 128, 128, 255]]], np.uint8), srgb=True)
    row = material(P_BASE_R=[0.0, 0.0, 0.0], P_METALLIC=0.0, P_EMISSIVE_R=[1.0, 1.0, 1.0],
                   P_SPECULAR=0.0)  # fmt: skip
    scene = quad(size=2.0, textures=tex, table=textured_table(row, {T_EMISSIVE: 0}))
    image = render(scene, ortho_camera(4, 0.5), look())
    codes = quantize(to_display(image, tone_map="none"))
    assert np.all(codes[..., :3] == 128) and np.all(codes[..., 3] == 255)


@pytest.mark.parametrize("tangent", [(1.0, 0.0, 0.0, 1.0), None])
def test_normal_map_handedness(tangent):
    # Spec §Materials normalTexture, §Meshes TANGENT: quad facing +Z, texel (128, 218, 218) →
    # shading normal ≈ (0, 0.707, 0.707) with TANGENT (1, 0, 0, 1) and with tangents made from uvs
    # (u → +X, v → −Y). Lit along (0, 1, 1)/√2 it reflects E/π·(n·l) ≈ E/π; the flipped normal
    # gives ~0.
    texel = np.array([128, 218, 218]) / 255
    n = 2 * texel - 1
    n /= np.linalg.norm(n)
    tex = single_texture(np.array([[[*texel, 1.0]]]))
    table = textured_table(diffuse(**LAMBERT), {T_NORMAL: 0})
    tangents = None if tangent is None else np.tile(tangent, (4, 1))
    scene = quad(size=2.0, textures=tex, table=table, tangents=tangents)
    to_light = np.array([0.0, 1.0, 1.0]) / math.sqrt(2)
    image = render(scene, ortho_camera(4, 0.5), look(Light(DIRECTIONAL, direction=-to_light)))
    np.testing.assert_allclose(image[..., 0], n @ to_light / math.pi, rtol=1e-5)
    assert n @ to_light > 0.99


# --- coverage: alpha modes, sides, background --------------------------------------------------
def test_alpha_modes():
    # spec §Materials "Alpha Coverage": MASK keeps α ≥ cutoff (α = 0.5, cutoff 0.5 → opaque) and
    # drops the rest; BLEND composites "over", premultiplied (Porter & Duff 1984)
    camera = ortho_camera(4, 0.5)

    def one(mode, alpha):
        row = unlit(P_ALPHA_MODE=mode, P_BASE_A=alpha, P_ALPHA_CUTOFF=0.5)
        return render(quad(size=2.0, rows=[row]), camera, look())[0, 0]

    np.testing.assert_array_equal(one(ALPHA_MASK, 0.5), [1, 1, 1, 1])
    np.testing.assert_array_equal(one(ALPHA_MASK, 0.49), [0, 0, 0, 0])
    np.testing.assert_allclose(one(ALPHA_BLEND, 0.5), [0.5, 0.5, 0.5, 0.5])
    # two half-transparent layers over transparent: α = 0.5 + 0.5·0.5
    front = quad(size=2.0, center=(0, 0, 0.5), rows=[unlit((1, 0, 0), P_ALPHA_MODE=ALPHA_BLEND,
                                                           P_BASE_A=0.5)])  # fmt: skip
    back = quad(size=2.0, rows=[unlit((0, 0, 1), P_ALPHA_MODE=ALPHA_BLEND, P_BASE_A=0.5)])
    pixel = render(merge(front, back), camera, look())[0, 0]
    np.testing.assert_allclose(pixel, [0.5, 0.0, 0.25, 0.75])


def test_single_sided_back_faces_are_skipped():
    # spec §Materials "doubleSided": a single-sided quad facing away
    # shows the background; double-sided it is visible, lit on its camera-facing side
    camera = ortho_camera(4, 0.5, eye=(0, 0, -5))
    light = Light(DIRECTIONAL, direction=(0.0, 0.0, 1.0))
    single = render(quad(size=2.0, rows=[diffuse(**LAMBERT)]), camera, look(light))
    double = render(quad(size=2.0, rows=[diffuse(P_DOUBLE_SIDED=1.0, **LAMBERT)]), camera,
                    look(light))  # fmt: skip
    assert np.all(single == 0)
    np.testing.assert_allclose(double[..., 0], 1 / math.pi, rtol=1e-5)
    assert np.all(double[..., 3] == 1)


# --- glass -------------------------------------------------------------------------------------
GLASS = dict(P_TRANSMISSION=1.0, P_METALLIC=0.0, P_ROUGHNESS=0.0, P_IOR=1.5)


@pytest.mark.parametrize("thickness, expected", [(0.02, 0.25), (0.01, 0.5)])
def test_beer_lambert_through_a_slab(thickness, expected):
    # KHR_materials_volume: T = c^(x/d) over the traced distance (c = 0.5,
    # d = 1 cm, x = 2 cm → 0.25), times (1 − F0)² for the two faces at normal incidence (F0 0.04)
    glass = material(P_THICKNESS=thickness, P_ATTENUATION_DISTANCE=0.01,
                     P_ATTENUATION_R=[0.5, 0.5, 0.5], **GLASS)  # fmt: skip
    slab = box((3.0, 3.0, thickness), rows=[glass])
    backdrop = quad(size=4.0, center=(0, 0, -1), rows=[unlit()])
    image = render(merge(slab, backdrop), ortho_camera(4, 0.5), look())
    np.testing.assert_allclose(image[..., :3], 0.96**2 * expected, rtol=1e-5)


def test_glass_slab_displaces_a_ray():
    # Plane-parallel plate (Hecht, Optics, §5.2.2 "plane-parallel plate"): a ray crossing a slab
    # of thickness t at incidence θ leaves parallel, displaced by t·sin(θ − θt)/cos θt.
    t, theta = 0.5, math.radians(45)
    theta_t = math.asin(math.sin(theta) / 1.5)
    shift = t * math.sin(theta - theta_t) / math.cos(theta_t)
    slab = box((3.0, 3.0, t), rotation_y=theta, rows=[material(P_THICKNESS=t, **GLASS)])
    stripe = quad(size=0.3, center=(0, 0, -1), rows=[unlit()])
    camera = ortho_camera(4, 0.01, width=600)  # 600 × 4 pixels over 3 m × 0.02 m

    def centroid(scene):
        row = render(scene, camera, look(samples=16))[2, :, 0]
        x = (np.arange(600) + 0.5) / 600 * 3.0 - 1.5
        return (row * x).sum() / row.sum()

    assert centroid(stripe) == pytest.approx(0.0, abs=1e-3)
    # the ray bends toward −n = −(sin θ, 0, cos θ) inside, so the stripe appears shifted to +x
    assert centroid(merge(slab, stripe)) == pytest.approx(shift, abs=0.005)


# --- shadows and the floor ---------------------------------------------------------------------
def ground_points(camera):
    """Where each pixel's ray meets the plane y = 0: (h, w, 3)."""
    jj, ii = np.mgrid[0 : camera.height, 0 : camera.width]
    o, d = camera.rays_at(ii + 0.5, jj + 0.5)
    t = -o[:, 1] / d[:, 1]
    return (o + t[:, None] * d).reshape(camera.height, camera.width, 3)


def test_hard_shadow_lands_where_geometry_predicts():
    # Shadow of a sphere (r 0.25, centre 1 m up) cast by a directional light along (1, −1, 0)/√2
    # onto y = 0: an ellipse centred at x = 1 with semi-axes r/cos 45° (along x) and r (along z)
    light = Light(DIRECTIONAL, intensity=2.0, direction=(1 / math.sqrt(2), -1 / math.sqrt(2), 0))
    camera = ortho_camera(48, 1.0, eye=(0.6, 5, 0), target=(0.6, 0, 0), up=(0, 0, -1))
    floor = Ground(kind="plane", height=0.0, color=(0.5, 0.5, 0.5), roughness=1.0)
    # no diffuse bounces: light bounced off the lit sphere brightens the floor near it, and this
    # checks the direct shadow's outline alone
    image = render(sphere(0.25, (0, 1, 0), subdivisions=4), camera,
                   look(light, ground=floor, diffuse_bounces=0))  # fmt: skip
    p = ground_points(camera)
    q = ((p[..., 0] - 1) / (0.25 * math.sqrt(2))) ** 2 + (p[..., 2] / 0.25) ** 2
    off_sphere = np.hypot(p[..., 0], p[..., 2]) > 0.3
    inside, outside = (q < 0.7) & off_sphere, (q > 1.4) & off_sphere
    assert inside.sum() > 20 and outside.sum() > 500
    assert np.all(image[inside, :3] == 0.0)
    lit = image[outside, 0]
    assert lit.min() > 0.05 and lit.max() - lit.min() < 1e-6  # a directional light: uniform


def test_shadow_catcher_writes_shadow_into_alpha():
    # Product-shot floor: invisible, its shadow becomes black coverage (premultiplied rgb 0)
    light = Light("area", intensity=4.0, position=(0, 3, 0), direction=(0, -1, 0),
                  edge_u=(1, 0, 0), edge_v=(0, 0, 1))  # fmt: skip
    camera = Camera(eye=(0, 1.5, 3), target=(0, 0.3, 0), up=(0, 1, 0), width=48, height=48)
    scene = sphere(0.5, (0, 0.5, 0), subdivisions=4, rows=[diffuse()])
    image = render(scene, camera, look(light, env=Environment(), ground="shadow_catcher",
                                       samples=4, area_light_samples=4))  # fmt: skip
    p = ground_points(camera)
    jj, ii = np.mgrid[0:48, 0:48]
    o, d = camera.rays_at(ii.ravel() + 0.5, jj.ravel() + 0.5)
    # rays that miss the sphere (ray–sphere discriminant < 0, with margin) and go down
    oc = o - np.array([0, 0.5, 0])
    b = (oc * d).sum(1)
    disc = (b * b - ((oc * oc).sum(1) - 0.55**2)).reshape(48, 48)
    floor = (disc < 0) & (d[:, 1].reshape(48, 48) < 0)
    radius = np.hypot(p[..., 0], p[..., 2])
    near, far = floor & (radius < 0.6), floor & (radius > 3.0)
    assert near.sum() > 10 and far.sum() > 10
    assert image[near, 3].mean() > 0.3
    assert np.all(image[floor, :3] == 0.0)  # shadow is black, premultiplied: colour stays 0
    assert image[far, 3].mean() < 0.01
    sky = d[:, 1].reshape(48, 48) > 0
    assert np.all(image[sky & (disc < 0)] == 0.0)  # transparent background


def test_sweep_profile():
    # The sweep's three parts (ground module docstring): floor, quarter cylinder, wall
    row = np.zeros(gk.N_GROUND)
    row[gk.G_KIND] = gk.GROUND_SWEEP
    row[gk.G_FX], row[gk.G_FZ] = 0.0, -1.0  # camera looks along −Z
    row[gk.G_RADIUS], row[gk.G_DISTANCE] = 1.0, 2.0
    # straight down in front of the curve: the floor
    t, nx, ny, nz = gk.intersect_ground(row, 0.0, 1.0, 0.0, 0.0, -1.0, 0.0, 0.0, np.inf)
    assert t == pytest.approx(1.0) and (nx, ny, nz) == (0.0, 1.0, 0.0)
    # horizontally at 2 m height: the wall at s = 2 (z = −2), normal toward the camera
    t, nx, ny, nz = gk.intersect_ground(row, 0.0, 2.0, 0.0, 0.0, 0.0, -1.0, 0.0, np.inf)
    assert t == pytest.approx(2.0) and (nx, ny, nz) == (-0.0, 0.0, 1.0)
    # horizontally at 0.5 m: the curve, centre (s, y) = (1, 1), so s = 1 + √(1 − 0.25)
    t, nx, ny, nz = gk.intersect_ground(row, 0.0, 0.5, 0.0, 0.0, 0.0, -1.0, 0.0, np.inf)
    assert t == pytest.approx(1 + math.sqrt(0.75))
    assert (nx, ny, nz) == pytest.approx((0.0, 0.5, math.sqrt(0.75)))
