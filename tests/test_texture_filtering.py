"""Texture prefiltering: mip pyramids, texel storage, filter modes and the ray-cone footprint.

Sources: Williams 1983 ("Pyramidal Parametrics", box-filtered mip levels); OpenGL 4.6 §8.14–8.15
(level sizes, λ, the minification modes and the c = 0.5 rule), which glTF 2.0 §Samplers
borrows; IEC 61966-2-1 (sRGB); Akenine-Möller et al. 2019 (Ray Tracing Gems ch. 20, ray cones:
a pixel's footprint λ = log2(texels per pixel)); PNG spec §11.2.2 (IHDR bit depth).
"""

from __future__ import annotations

import dataclasses
import io
import math
import struct
import zlib
from pathlib import Path

import numpy as np
import png
import pytest
from gltf_builder import GltfBuilder, quad
from scenes import look, material, render, textured_table
from scenes import quad as quad_scene

from shots.camera import Camera
from shots.colour import display_codes
from shots.errors import GltfError
from shots.gltf import load_scene
from shots.gltf.textures import textures_from_codes
from shots.kernels.raystack import (
    N_RAY,
    R_CONE,
    R_CONE_HIT,
    R_SPREAD,
    STACK_RAYS,
    push_ray,
)
from shots.kernels.texture import sample_texture
from shots.planner import plan_frames
from shots.presets import apply_model_fixes, load_preset
from shots.render import prepare_scene, render_frame
from shots.scene import (
    FILTER_LINEAR,
    FILTER_NEAREST,
    LINEAR_MIPMAP_LINEAR,
    LINEAR_MIPMAP_NEAREST,
    NEAREST_MIPMAP_LINEAR,
    NEAREST_MIPMAP_NEAREST,
    T_BASE_COLOR,
    T_EMISSIVE,
    TI_BYTES,
    TI_CHANNELS,
    TI_LEVEL,
    TI_LEVELS,
    TI_OFFSET,
    TI_WRAP_S,
    WRAP_CLAMP,
    WRAP_MIRROR,
    WRAP_REPEAT,
)

DEMO = Path(__file__).resolve().parents[1] / "assets_demo"


def iec_decode(c):
    # IEC 61966-2-1 §5.2: c <= 0.04045 -> c/12.92, else ((c+0.055)/1.055)^2.4
    c = np.asarray(c, np.float64)
    return np.where(c <= 0.04045, c / 12.92, ((c + 0.055) / 1.055) ** 2.4)


def iec_encode(x):
    # IEC 61966-2-1 §5.3 (inverse): x <= 0.0031308 -> 12.92 x, else 1.055 x^(1/2.4) - 0.055
    x = np.asarray(x, np.float64)
    return np.where(x <= 0.0031308, 12.92 * x, 1.055 * x ** (1 / 2.4) - 0.055)


def stored_level(textures, tex, level):
    """Level ``level`` of texture ``tex`` as (h, w, c) codes, read straight from the atlas."""
    row = textures.info[tex]
    w, h = max(int(row[1]) >> level, 1), max(int(row[2]) >> level, 1)
    c, depth = int(row[TI_CHANNELS]), int(row[TI_BYTES])
    start = int(row[TI_LEVEL + level])
    raw = textures.texels[start : start + w * h * c * depth]
    return raw.view("<u2" if depth == 2 else np.uint8).reshape(h, w, c)


def block_means(values, b):
    h, w, c = values.shape
    return values.reshape(h // b, b, w // b, b, c).mean(axis=(1, 3))


# --- the pyramid ---------------------------------------------------------------------------------
@pytest.mark.parametrize("srgb", [False, True])
def test_levels_are_block_means_in_linear_light(srgb):
    # Williams 1983: level l of a 2^n texture is the mean of 2^l × 2^l blocks of level 0; the
    # mean is taken on linear values (sRGB decoded, IEC 61966-2-1; alpha is linear), and each
    # level is stored rounded to the nearest 8-bit code
    rng = np.random.default_rng(7)
    codes = rng.integers(0, 256, (32, 16, 4), dtype=np.uint8)
    textures = textures_from_codes([(codes, srgb, (WRAP_REPEAT,) * 2 + (9729, 9987))])
    assert textures.info[0, TI_LEVELS] == 6  # 32×16, 16×8, 8×4, 4×2, 2×1, 1×1 (OpenGL §8.14.3)
    linear = codes / 255.0
    if srgb:
        linear[..., :3] = iec_decode(linear[..., :3])
    for level in range(1, 5):
        expected = block_means(linear, 2**level)
        if srgb:
            expected[..., :3] = iec_encode(expected[..., :3])
        got = stored_level(textures, 0, level).astype(np.float64)
        assert np.abs(got - expected * 255).max() <= 0.5 + 1e-3, level
    last = stored_level(textures, 0, 5).astype(np.float64)
    # the 1×1 level averages a 2×1 level: the mean of the two 16×16 halves
    mean = linear.mean(axis=(0, 1))
    if srgb:
        mean[:3] = iec_encode(mean[:3])
    assert np.abs(last[0, 0] - mean * 255).max() <= 0.5 + 1e-3


def test_odd_sizes_average_exact_areas():
    # an odd size halves to ⌊n/2⌋ (OpenGL §8.14.3) and every source texel counts by the area it
    # shares with the output texel: numpy's repeat-then-block-mean gives that area average
    rng = np.random.default_rng(3)
    codes = rng.integers(0, 256, (3, 5, 1), dtype=np.uint8)
    textures = textures_from_codes([(codes, False, (WRAP_REPEAT,) * 2 + (9729, 9987))])
    expected = codes.astype(np.float64).repeat(2, axis=1)  # 5 → 10 columns, blocks of 5 → 2
    expected = expected.reshape(3, 2, 5, 1).mean(axis=(0, 2))  # 3 rows → 1
    got = stored_level(textures, 0, 1).astype(np.float64)
    assert got.shape == (1, 2, 1)
    assert np.abs(got[0] - expected).max() <= 0.5 + 1e-6
    assert np.abs(stored_level(textures, 0, 2)[0, 0, 0] - codes.mean()) <= 0.5 + 1e-6


def test_checker_averages_to_linear_half_not_code_128():
    # IEC 61966-2-1: a 50/50 black-and-white checker is linear 0.5 on average, which encodes to
    # 1.055·0.5^(1/2.4) − 0.055 = 0.7354, code 188 (averaging codes would give 128)
    checker = ((np.indices((64, 64)).sum(axis=0) % 2) * 255).astype(np.uint8)
    codes = np.repeat(checker[..., None], 3, axis=2)
    textures = textures_from_codes([(codes, True, (WRAP_REPEAT,) * 2 + (9729, 9987))])
    top = textures.info[0, TI_LEVELS] - 1
    assert stored_level(textures, 0, top)[0, 0].tolist() == [188, 188, 188]
    out = np.zeros(4)
    sample_texture(textures.texels, textures.info, 0, 0.5, 0.5, 20.0, out)
    np.testing.assert_allclose(out[:3], iec_decode(188 / 255), rtol=1e-6)
    assert abs(out[0] - 0.5) < 0.005


# --- filter modes against their definitions (OpenGL 4.6 §8.14.2, §8.14.4, §8.15) ---------------
def wrapped(i, n, mode):
    if mode == WRAP_CLAMP:
        return np.clip(i, 0, n - 1)
    if mode == WRAP_MIRROR:
        k = np.mod(i, 2 * n)
        return np.where(k < n, k, 2 * n - 1 - k)
    return np.mod(i, n)


def nearest(level, u, v, mode):
    h, w, _ = level.shape
    return level[wrapped(math.floor(v * h), h, mode), wrapped(math.floor(u * w), w, mode)]


def bilinear(level, u, v, mode):
    h, w, _ = level.shape
    x, y = u * w - 0.5, v * h - 0.5
    i0, j0 = math.floor(x), math.floor(y)
    a, b = x - i0, y - j0
    i = [wrapped(i0, w, mode), wrapped(i0 + 1, w, mode)]
    j = [wrapped(j0, h, mode), wrapped(j0 + 1, h, mode)]
    return ((1 - a) * (1 - b) * level[j[0], i[0]] + a * (1 - b) * level[j[0], i[1]]
            + (1 - a) * b * level[j[1], i[0]] + a * b * level[j[1], i[1]])  # fmt: skip


def filter_case(min_filter, mag_filter=FILTER_LINEAR, wrap=WRAP_REPEAT):
    rng = np.random.default_rng(11)
    codes = rng.integers(0, 256, (16, 16, 1), dtype=np.uint8)
    textures = textures_from_codes([(codes, False, (wrap, wrap, mag_filter, min_filter))])
    levels = [stored_level(textures, 0, k)[..., 0] / 255.0 for k in range(5)]
    return textures, [lv[..., None] for lv in levels]


def lookup(textures, u, v, lod):
    out = np.zeros(4)
    sample_texture(textures.texels, textures.info, 0, u, v, lod, out)
    return out[0]


@pytest.mark.parametrize("u, v", [(0.37, 0.61), (0.02, 0.95), (0.81, 0.13)])
def test_min_filters_follow_their_definitions(u, v):
    # NEAREST / LINEAR: level 0 only. *_MIPMAP_NEAREST: level d = ⌈λ + ½⌉ − 1 (0 for λ ≤ ½).
    # *_MIPMAP_LINEAR: levels ⌊λ⌋ and ⌊λ⌋ + 1 blended by frac(λ); the first word filters within.
    for lod in (0.3, 0.7, 1.3, 1.5, 2.6, 3.999, 7.0):
        t, lv = filter_case(FILTER_NEAREST)
        assert lookup(t, u, v, lod) == pytest.approx(nearest(lv[0], u, v, WRAP_REPEAT)[0])
        t, lv = filter_case(FILTER_LINEAR)
        assert lookup(t, u, v, lod) == pytest.approx(bilinear(lv[0], u, v, WRAP_REPEAT)[0])
        d = 0 if lod <= 0.5 else min(math.ceil(lod + 0.5) - 1, 4)
        t, lv = filter_case(NEAREST_MIPMAP_NEAREST, FILTER_NEAREST)
        assert lookup(t, u, v, lod) == pytest.approx(nearest(lv[d], u, v, WRAP_REPEAT)[0])
        t, lv = filter_case(LINEAR_MIPMAP_NEAREST)
        assert lookup(t, u, v, lod) == pytest.approx(bilinear(lv[d], u, v, WRAP_REPEAT)[0])
        lo, f = min(math.floor(lod), 4), lod - math.floor(lod)
        hi = min(lo + 1, 4)
        for mode, within in ((NEAREST_MIPMAP_LINEAR, nearest), (LINEAR_MIPMAP_LINEAR, bilinear)):
            t, lv = filter_case(mode, FILTER_NEAREST)
            expected = within(lv[lo], u, v, WRAP_REPEAT)[0]
            if lod < 4:
                expected = (1 - f) * expected + f * within(lv[hi], u, v, WRAP_REPEAT)[0]
            assert lookup(t, u, v, lod) == pytest.approx(expected), (mode, lod)


def test_magnification_threshold():
    # OpenGL §8.15: λ ≤ c magnifies with magFilter; c = 0.5 for LINEAR magnification with a
    # NEAREST_MIPMAP_* minification, else 0
    u, v = 0.37, 0.61
    t, lv = filter_case(NEAREST_MIPMAP_NEAREST, FILTER_LINEAR)
    assert lookup(t, u, v, 0.4) == pytest.approx(bilinear(lv[0], u, v, WRAP_REPEAT)[0])
    assert lookup(t, u, v, -3.0) == pytest.approx(bilinear(lv[0], u, v, WRAP_REPEAT)[0])
    t, lv = filter_case(LINEAR_MIPMAP_NEAREST, FILTER_NEAREST)
    assert lookup(t, u, v, 0.0) == pytest.approx(nearest(lv[0], u, v, WRAP_REPEAT)[0])
    assert lookup(t, u, v, 0.4) == pytest.approx(bilinear(lv[0], u, v, WRAP_REPEAT)[0])


@pytest.mark.parametrize("wrap", [WRAP_REPEAT, WRAP_CLAMP, WRAP_MIRROR])
def test_wrap_modes_apply_at_coarse_levels(wrap):
    # glTF 2.0 §Samplers: the wrap mode folds texel indices at every level (a 4×4 level here)
    t, lv = filter_case(LINEAR_MIPMAP_NEAREST, wrap=wrap)
    assert t.info[0, TI_WRAP_S] == wrap
    for u, v in ((1.3, 0.2), (-0.45, 2.7), (0.99, -0.01), (2.02, 0.5)):
        assert lookup(t, u, v, 2.0) == pytest.approx(bilinear(lv[2], u, v, wrap)[0]), (u, v)


# --- the footprint: one pixel covering 4 × 4 texels reads level 2 -------------------------------
STRIPES = 256  # texels across the quad


def stripe_texture():
    # per column x: red alternates every texel, green every 2, blue every 4 texels; so red is
    # flat (0.5) from level 1 on, green from level 2, blue from level 3
    x = np.arange(STRIPES)
    rgb = np.stack([(x // k) % 2 for k in (1, 2, 4)], -1) * 255
    codes = np.broadcast_to(rgb[None], (STRIPES, STRIPES, 3)).astype(np.uint8)
    return textures_from_codes([(np.ascontiguousarray(codes), False,
                                 (WRAP_REPEAT, WRAP_REPEAT, FILTER_NEAREST,
                                  NEAREST_MIPMAP_NEAREST))])  # fmt: skip


@pytest.mark.parametrize("texels_per_pixel, level", [(4, 2), (4 * 2**0.4, 2), (4 * 2**0.6, 3),
                                                      (2, 1)])  # fmt: skip
def test_pixel_footprint_picks_the_mip_level(texels_per_pixel, level):
    # Ray cones (Akenine-Möller et al. 2019): a pixel subtends α = atan(2 tan(fov/2) / H); a
    # screen-aligned quad at distance d shows α·d of its surface per pixel. Placed so that one
    # pixel spans 4 texels, λ = log2 4 = 2 and NEAREST_MIPMAP_NEAREST reads level 2
    # (d = ⌈λ + ½⌉ − 1): red and green flat at 0.5, blue still black or white
    size, pixels, fov = 2.0, 32, math.radians(10.0)
    alpha = math.atan(2 * math.tan(fov / 2) / pixels)
    distance = texels_per_pixel * (size / STRIPES) / alpha
    camera = Camera(eye=(0.0, 0.0, distance), target=(0.0, 0.0, 0.0), up=(0.0, 1.0, 0.0),
                    width=pixels, height=pixels, yfov=fov)  # fmt: skip
    scene = quad_scene(size=size, textures=stripe_texture(),
                       table=textured_table(material(P_UNLIT=1.0), {T_BASE_COLOR: 0}))  # fmt: skip
    image = render(scene, camera, look())[12:20, 12:20, :3]  # the centre, where |n·d| ≈ 1
    flat = np.isclose(image, 128 / 255, atol=2e-3)
    binary = np.isclose(image, 0.0, atol=1e-6) | np.isclose(image, 1.0, atol=1e-6)
    channels_flat = [bool(flat[..., c].all()) for c in range(3)]
    assert channels_flat == [c < level for c in range(3)], (texels_per_pixel, channels_flat)
    for c in range(level, 3):
        assert binary[..., c].all()


# --- the loader: storage, sharing, 16-bit, budget ------------------------------------------------
def load_with(tmp_path, material, builder):
    p, uv, idx = quad()
    mesh = builder.mesh(p, idx, normals=np.tile([0, 0, 1], (4, 1)).astype(np.float32), uv0=uv,
                        material=builder.material(**material))  # fmt: skip
    builder.scene([builder.node(mesh=mesh)])
    return load_scene(builder.write_glb(tmp_path / "m.glb"))


def test_one_image_is_stored_once_per_colour_space(tmp_path):
    # two textures of one image with different samplers (glTF 2.0 §Textures): two info rows with
    # their own wrap modes, one copy of the texels; 3-channel 8-bit as in the file
    b = GltfBuilder()
    image = np.arange(4 * 4 * 3, dtype=np.uint8).reshape(4, 4, 3)
    first = b.image_png(image, sampler={"wrapS": WRAP_CLAMP})
    second = b.image_png(image, sampler={"wrapS": WRAP_MIRROR})
    b.gltf["textures"][second]["source"] = b.gltf["textures"][first]["source"]
    scene = load_with(tmp_path, {"pbrMetallicRoughness": {"baseColorTexture": {"index": first}},
                                 "emissiveTexture": {"index": second}}, b)
    info = scene.textures.info
    a, c = scene.materials.texture[0, T_BASE_COLOR], scene.materials.texture[0, T_EMISSIVE]
    assert info[a, TI_WRAP_S] == WRAP_CLAMP and info[c, TI_WRAP_S] == WRAP_MIRROR
    assert info[a, TI_OFFSET] == info[c, TI_OFFSET]
    assert (info[a, TI_CHANNELS], info[a, TI_BYTES]) == (3, 1)
    np.testing.assert_array_equal(stored_level(scene.textures, a, 0), image)


def png16(values: np.ndarray) -> bytes:
    out = io.BytesIO()
    h, w = values.shape
    png.Writer(w, h, greyscale=True, bitdepth=16).write(out, values.tolist())
    return out.getvalue()


def test_16_bit_png_keeps_its_precision(tmp_path):
    # PNG spec §11.2.2: bit depth 16; a code is value / 65535, decoded as linear or through the
    # sRGB curve (IEC 61966-2-1) on lookup
    values = np.array([[0, 1, 32768, 65535]], np.uint16)
    b = GltfBuilder()
    view = b.view(png16(values))
    image = b._add("images", {"bufferView": view, "mimeType": "image/png"})
    tex = b._add("textures", {"source": image})
    scene = load_with(tmp_path, {"pbrMetallicRoughness": {
        "baseColorTexture": {"index": tex}, "metallicRoughnessTexture": {"index": tex}}}, b)
    t = scene.materials.texture[0]
    info = scene.textures.info
    assert info[t[T_BASE_COLOR], TI_BYTES] == 2 and info[t[T_BASE_COLOR], TI_CHANNELS] == 1
    out = np.zeros(4)
    for i, code in enumerate(values[0]):
        u = (i + 0.5) / 4
        sample_texture(scene.textures.texels, info, t[1], u, 0.5, -1e30, out)  # linear
        assert out[0] == pytest.approx(code / 65535, abs=1e-9) and out[3] == 1.0
        sample_texture(scene.textures.texels, info, t[T_BASE_COLOR], u, 0.5, -1e30, out)
        assert out[:3] == pytest.approx([float(iec_decode(code / 65535))] * 3, rel=1e-9)


def huge_png_header(width: int, height: int) -> bytes:
    """A PNG whose IHDR declares an RGBA image of this size; its pixel data is never read."""
    def chunk(kind, data):
        return (struct.pack(">I", len(data)) + kind + data
                + struct.pack(">I", zlib.crc32(kind + data)))  # fmt: skip
    ihdr = struct.pack(">IIBBBBB", width, height, 8, 6, 0, 0, 0)  # 8-bit RGBA
    return (b"\x89PNG\r\n\x1a\n" + chunk(b"IHDR", ihdr) + chunk(b"IDAT", zlib.compress(b"\0"))
            + chunk(b"IEND", b""))  # fmt: skip


def test_decoded_bytes_budget_is_checked_from_headers(tmp_path):
    # a 13000² RGBA image with its mip levels needs 13000²·4·4/3 = 859 MiB, over the default
    # budget: refused from its header alone (its pixel data is never read),
    # with one line naming the texture and its image
    b = GltfBuilder()
    view = b.view(huge_png_header(13000, 13000))
    image = b._add("images", {"bufferView": view, "mimeType": "image/png"})
    tex = b._add("textures", {"source": image})
    with pytest.raises(GltfError) as caught:
        load_with(tmp_path, {"pbrMetallicRoughness": {"baseColorTexture": {"index": tex}}}, b)
    assert caught.value.field == "textures[0]"
    message = str(caught.value)
    assert "images[0] is 13000x13000" in message and "over the limit texture_mb" in message
    assert "\n" not in message


# --- a whole frame: the demo sofa's plain-weave normal map, minified in a thumbnail ---------------
@pytest.mark.slow
def test_prefiltering_brings_16_samples_closer_to_the_converged_sofa():
    # Monte Carlo supersampling with point lookups (minFilter LINEAR, no mip levels) converges
    # to the pixel-filtered texture: 256 samples of it are the reference. At 16 samples the
    # prefiltered frame must be clearly closer to it (RMSE in 8-bit display codes over the
    # product's pixels) than point lookups, the renderer's behaviour before mip levels
    preset = load_preset("thumbnail")
    scene = apply_model_fixes(load_scene(DEMO / "wool_sofa.glb"), preset)
    frame = plan_frames(preset, scene)[0]
    camera = dataclasses.replace(frame.camera, width=128, height=128)
    point = prepare_scene(dataclasses.replace(
        scene, textures=scene.textures.with_min_filter(FILTER_LINEAR)))  # fmt: skip
    filtered = prepare_scene(scene)

    def codes(prepared, samples):
        image = render_frame(prepared, camera, dataclasses.replace(frame.look, samples=samples))
        return display_codes(image, exposure=frame.look.exposure,
                             tone_map=frame.look.tone_map).astype(np.float64)  # fmt: skip

    reference = codes(point, 256)
    product = (reference[..., 3] >= 255) & (reference[..., :3].max(-1) > 0)
    assert product.sum() > 2000

    def rmse(image):
        return float(np.sqrt(np.mean((image[..., :3] - reference[..., :3])[product] ** 2)))

    before, after = rmse(codes(point, 16)), rmse(codes(filtered, 16))
    assert after < 0.9 * before, (before, after)


def test_spawned_rays_start_with_the_cone_width_at_the_hit():
    # Ray cones (Akenine-Möller et al. 2019): the width grows linearly, w(t) = w0 + γ·t, and a
    # ray spawned at a hit starts with the parent's width there and keeps its spread (flat
    # surface, β = 0); a continuation from the same origin (tmin > 0) keeps w0
    stack = np.zeros((STACK_RAYS, N_RAY))
    current = stack[STACK_RAYS - 1]
    current[R_CONE], current[R_SPREAD] = 0.01, 0.002
    current[R_CONE_HIT] = 0.01 + 0.002 * 5.0  # as the tracer sets it after a hit at t = 5
    sp = push_ray(stack, 0, 0, 0, 0, 0, 0, 1, 1, 1, 1, 0.0, 1, 0.0, 0, 0, 0, 0.0)
    sp = push_ray(stack, sp, 0, 0, 0, 0, 0, 1, 1, 1, 1, 1.0, 0, 5.0, 0, 0, 0, 1.0)
    assert sp == 2
    assert stack[0, R_CONE] == pytest.approx(0.02) and stack[0, R_SPREAD] == 0.002
    assert stack[1, R_CONE] == 0.01 and stack[1, R_SPREAD] == 0.002
