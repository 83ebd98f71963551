"""The colour pipeline against IEC 61966-2-1 (sRGB) and the Khronos PBR Neutral reference values."""

import io

import numpy as np
import png
from PIL import Image

from shots.colour import (
    display_codes,
    linear_to_srgb,
    pbr_neutral,
    quantize,
    srgb_to_linear,
    to_display,
)
from shots.output import CURRENT_UMASK, png_bytes, write_png


def test_srgb_reference_values():
    # IEC 61966-2-1 transfer functions; values worked out from its formulas in float64.
    assert np.isclose(srgb_to_linear(0.5), 0.21404, atol=1e-5)
    assert np.isclose(srgb_to_linear(128 / 255), 0.21586, atol=1e-5)
    assert np.isclose(linear_to_srgb(0.18), 0.46136, atol=1e-5)
    assert round(float(linear_to_srgb(0.18)) * 255) == 118
    assert round(float(linear_to_srgb(0.5)) * 255) == 188
    # The linear segment: IEC 61966-2-1 slope 12.92 below 0.0031308.
    assert np.isclose(linear_to_srgb(0.001), 0.01292)


def test_srgb_round_trip_is_exact_for_8_bit_codes():
    # IEC 61966-2-1: decode then encode must return every 8-bit code.
    codes = np.arange(256)
    back = quantize(linear_to_srgb(srgb_to_linear(codes / 255.0)))
    assert np.array_equal(back, codes)


def test_pbr_neutral_reference_values():
    # Khronos PBR Neutral (KhronosGroup/ToneMapping, 2024): grey inputs through its reference code.
    for x, expected in [(0.18, 0.14), (0.5, 0.46), (1.0, 0.86909)]:
        out = pbr_neutral(np.array([x, x, x]))
        assert np.allclose(out, expected, atol=1e-4), (x, out)


def test_pbr_neutral_keeps_saturated_midtones():
    # Below the 0.76 peak the operator only subtracts the toe offset (≤ 0.04) from every channel.
    color = np.array([0.6, 0.3, 0.1])
    assert np.allclose(pbr_neutral(color), color - 0.04)


def test_half_covered_white_edge_has_no_dark_fringe():
    # Straight alpha in PNG (PNG spec §12.8): premultiplied (0.5,0.5,0.5,0.5) is
    # white at half coverage and must be written as (255, 255, 255, 128), not grey 188.
    premultiplied = np.array([[[0.5, 0.5, 0.5, 0.5]]], np.float32)
    codes = quantize(to_display(premultiplied, tone_map="none"))
    assert codes.tolist() == [[[255, 255, 255, 128]]]


def test_to_display_equals_the_formulas_pixel_by_pixel():
    # Each pixel on its own: un-premultiply (PNG spec §12.8 straight alpha), Khronos PBR Neutral
    # (KhronosGroup/ToneMapping, 2024, reference code), IEC 61966-2-1 §5.2 encoding, in Python
    # floats. to_display skips colourless pixels; they must come out black like the rest say.
    rng = np.random.default_rng(11)
    image = rng.uniform(-0.2, 3.0, (24, 24, 4)).astype(np.float32)
    image[..., 3] = rng.uniform(-0.1, 1.1, (24, 24))
    image[:6, :, :3] = 0.0  # black pixels: shadow-catcher pixels and transparent background
    image[6:8, :, 3] = 0.0
    display = to_display(image, exposure=0.5)
    for y, x in np.ndindex(image.shape[:2]):
        alpha = min(max(float(image[y, x, 3]), 0.0), 1.0)
        rgb = [max(float(c) / alpha, 0.0) * 2**0.5 if alpha > 0 else 0.0 for c in image[y, x, :3]]
        expected = [_srgb(c) for c in _neutral(rgb)] + [alpha]
        assert np.allclose(display[y, x], expected, rtol=0, atol=1e-9), (y, x)


def test_display_codes_are_the_quantized_display():
    # The batch's shortcut must give the codes of the documented two steps, at 8 and 16 bits.
    rng = np.random.default_rng(12)
    image = rng.uniform(-0.2, 3.0, (32, 32, 4)).astype(np.float32)
    image[..., 3] = rng.uniform(-0.1, 1.1, (32, 32))
    image[:10, :, :3] = 0.0
    for bits in (8, 16):
        codes = display_codes(image, exposure=-0.5, tone_map="neutral", bits=bits)
        expected = quantize(to_display(image, exposure=-0.5, tone_map="neutral"), bits)
        assert codes.dtype == expected.dtype and np.array_equal(codes, expected)


def _neutral(rgb: list[float]) -> list[float]:
    x = min(rgb)
    offset = x - 6.25 * x * x if x < 0.08 else 0.04
    rgb = [c - offset for c in rgb]
    peak = max(rgb)
    if peak < 0.76:
        return rgb
    d = 1.0 - 0.76
    new_peak = 1.0 - d * d / (peak + d - 0.76)
    g = 1.0 - 1.0 / (0.15 * (peak - new_peak) + 1.0)
    return [c * new_peak / peak * (1.0 - g) + new_peak * g for c in rgb]


def _srgb(v: float) -> float:
    v = min(max(v, 0.0), 1.0)
    return 12.92 * v if v <= 0.0031308 else 1.055 * v ** (1 / 2.4) - 0.055


def test_exposure_is_in_stops():
    one = np.array([[[0.1, 0.1, 0.1, 1.0]]], np.float32)
    up = to_display(one, exposure=1.0, tone_map="none")
    assert np.isclose(up[0, 0, 0], linear_to_srgb(0.2))


def test_png_round_trip_8_and_16_bit(tmp_path):
    rng = np.random.default_rng(1)
    display = rng.random((6, 5, 4))
    image8 = np.asarray(Image.open(io.BytesIO(png_bytes(display, 8))))
    assert image8.shape == (6, 5, 4) and image8.dtype == np.uint8
    assert np.array_equal(image8, quantize(display, 8))
    width, height, rows, info = png.Reader(bytes=png_bytes(display, 16)).read()
    image16 = np.vstack(list(rows)).reshape(height, width, 4)
    assert info["bitdepth"] == 16 and info["alpha"]
    assert np.array_equal(image16, quantize(display, 16))


def test_write_png_leaves_no_temporary_file(tmp_path):
    target = tmp_path / "sub" / "frame.png"
    write_png(target, np.zeros((3, 3, 4), np.float32))
    assert [p.name for p in target.parent.iterdir()] == ["frame.png"]
    # Readable like any other file the user writes (mkstemp alone would leave it 0600).
    assert target.stat().st_mode & 0o777 == 0o666 & ~CURRENT_UMASK
