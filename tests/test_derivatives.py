"""Derivatives of a master frame: linear-light resampling with premultiplied alpha, fitting,
flattening, and the colour tags and metadata every file format carries."""

import io
import struct

import numpy as np
import pytest
from PIL import Image, ImageCms, features

from shots.derivatives import canvas_size, fitted_size, make_derivative
from shots.errors import PresetError
from shots.output import decode_png, encode_png
from shots.presets import Derivative, load_preset
from shots.tags import ImageMetadata

META = ImageMetadata(product_code="SL-4001-OAT", title="Wool sofa, oat weave",
                     variant="oat", copyright="© 2026 Sawdust Lane Workshop")


def derivative(**keys) -> Derivative:
    fmt = keys.setdefault("format", "png")
    keys.setdefault("name", "d")
    keys.setdefault("path", f"x.{ {'jpeg': 'jpg'}.get(fmt, fmt)}")
    if "box" not in keys:
        keys.setdefault("longest_side", 4)
    return Derivative.model_validate(keys)


def srgb_encode(x: float) -> float:
    """IEC 61966-2-1 §5.2 encoding, written out here for the check."""
    return 12.92 * x if x <= 0.0031308 else 1.055 * x ** (1 / 2.4) - 0.055


def opened(data: bytes) -> Image.Image:
    image = Image.open(io.BytesIO(data))
    image.load()
    return image


# --- resampling ------------------------------------------------------------------------------


def test_downscaling_averages_light_not_codes():
    # A one-pixel black/white checkerboard halved: each output pixel is half white in linear
    # light, 0.5 → sRGB 0.7354 → code 188 (IEC 61966-2-1); averaging codes would give 128.
    board = (np.indices((64, 64)).sum(axis=0) % 2 * 255).astype(np.uint8)
    codes = np.dstack([board, board, board, np.full((64, 64), 255, np.uint8)])
    out = np.asarray(opened(make_derivative(codes, derivative(longest_side=32))))
    expected = round(srgb_encode(0.5) * 255)
    centre = out[8:24, 8:24, :3]
    assert np.all(np.abs(centre.astype(int) - expected) <= 1), np.unique(centre)


def test_transparent_pixels_do_not_bleed_into_edges():
    # Opaque red beside fully transparent pixels whose stored colour is green. Resampling
    # premultiplied colour (Porter & Duff 1984) gives red at partial alpha, never a green or
    # dark fringe; resampling straight colour would mix the green in.
    codes = np.zeros((32, 32, 4), np.uint8)
    codes[..., 1] = 255  # green under alpha 0
    codes[:, :16] = (255, 0, 0, 255)
    out = np.asarray(opened(make_derivative(codes, derivative(longest_side=8))))
    partial = (out[..., 3] > 0) & (out[..., 3] < 255)
    assert partial.any()
    assert np.all(out[partial][:, 0] >= 250) and np.all(out[partial][:, 1] <= 3)


def test_flattening_mixes_with_the_background_in_linear_light():
    # A 50 % alpha black image over white: linear 0.5 → code 188 (IEC 61966-2-1).
    codes = np.zeros((8, 8, 4), np.uint8)
    codes[..., 3] = 128
    d = derivative(format="jpeg", longest_side=8, background=(1.0, 1.0, 1.0), quality=100,
                   chroma="4:4:4")
    out = np.asarray(opened(make_derivative(codes, d)))
    expected = srgb_encode(1.0 - 128 / 255) * 255
    assert out.shape == (8, 8, 3)
    assert np.all(np.abs(out.astype(float) - expected) <= 1.5)


def test_box_fits_and_centres_the_frame():
    codes = np.zeros((30, 60, 4), np.uint8)
    codes[...] = (0, 0, 255, 255)
    d = derivative(format="png", box=(40, 40), background=(1.0, 0.0, 0.0))
    out = np.asarray(opened(make_derivative(codes, d)))
    assert out.shape == (40, 40, 3)
    # 60 × 30 fitted into 40 × 40 is 40 × 20, centred: rows 10–29 blue, the rest background
    assert np.all(out[12:28, :, 2] == 255) and np.all(out[12:28, :, 0] == 0)
    assert np.all(out[:9, :] == (255, 0, 0)) and np.all(out[31:, :] == (255, 0, 0))
    assert fitted_size(60, 30, None, (40, 40)) == (40, 20)
    assert canvas_size(60, 30, 20, None) == (20, 10)


def test_sixteen_bit_masters_round_trip_and_derive_alike():
    rng = np.random.default_rng(1)
    codes16 = rng.integers(0, 65536, (16, 24, 4), dtype=np.uint16)
    assert np.array_equal(decode_png(encode_png(codes16)), codes16)
    codes8 = rng.integers(0, 256, (16, 24, 4), dtype=np.uint8)
    assert np.array_equal(decode_png(encode_png(codes8)), codes8)
    # the same picture at 16 bits (code × 257 is exact) gives the same derivative
    d = derivative(format="png", longest_side=12)
    a = np.asarray(opened(make_derivative(codes8, d)))
    b = np.asarray(opened(make_derivative(codes8.astype(np.uint16) * 257, d)))
    assert np.abs(a.astype(int) - b.astype(int)).max() <= 1


# --- colour tags and metadata -----------------------------------------------------------------

# sRGB primaries adapted to the ICC profile connection space (D50) with the Bradford transform,
# the colorants every sRGB ICC profile carries (from memory; ICC.1:2010 Annex and
# IEC 61966-2-1 primaries), to 3 decimals.
SRGB_D50_RED = (0.4361, 0.2225, 0.0139)
SRGB_D50_GREEN = (0.3851, 0.7169, 0.0971)
SRGB_D50_BLUE = (0.1431, 0.0606, 0.7141)


def assert_srgb_icc(image: Image.Image):
    icc = image.info.get("icc_profile")
    assert icc, "no ICC profile"
    profile = ImageCms.ImageCmsProfile(io.BytesIO(icc)).profile
    assert profile.xcolor_space.strip() == "RGB"
    for measured, expected in ((profile.red_colorant, SRGB_D50_RED),
                               (profile.green_colorant, SRGB_D50_GREEN),
                               (profile.blue_colorant, SRGB_D50_BLUE)):
        assert np.allclose(measured[0], expected, atol=2e-3), (measured, expected)


def assert_srgb_png(image: Image.Image):
    # PNG spec §11.3.3.5: sRGB chunk, with gAMA 45455 and the cHRM of IEC 61966-2-1
    assert image.info.get("srgb") == 0
    assert image.info.get("gamma") == pytest.approx(0.45455)
    assert image.info.get("chromaticity") == pytest.approx(
        (0.3127, 0.3290, 0.64, 0.33, 0.30, 0.60, 0.15, 0.06))


def test_master_pngs_are_tagged_srgb_at_8_and_16_bits():
    codes = np.zeros((4, 4, 4), np.uint8)
    assert_srgb_png(opened(encode_png(codes)))
    # Pillow reads the chunks of a 16-bit RGBA PNG too (it does not keep all its bits)
    assert_srgb_png(opened(encode_png(codes.astype(np.uint16))))


def test_chunks_are_valid_and_before_the_image_data():
    data = encode_png(np.zeros((4, 4, 4), np.uint16), META)
    position, kinds = 8, []
    while position < len(data):  # PNG spec §5.3: length, type, data, CRC-32
        length, kind = struct.unpack(">I4s", data[position:position + 8])
        body = data[position + 4:position + 8 + length]
        crc = struct.unpack(">I", data[position + 8 + length:position + 12 + length])[0]
        import zlib

        assert zlib.crc32(body) == crc, kind
        kinds.append(kind)
        position += 12 + length
    assert kinds[0] == b"IHDR" and kinds[-1] == b"IEND"
    assert kinds.index(b"sRGB") < kinds.index(b"IDAT")


def png_derivative_metadata():
    image = opened(make_derivative(np.zeros((8, 8, 4), np.uint8), derivative(), META))
    assert_srgb_png(image)
    return image


def test_png_derivative_carries_text_metadata():
    text = png_derivative_metadata().text
    assert text["Title"] == META.title
    assert text["Copyright"] == "© 2026 Sawdust Lane Workshop"
    assert text["Product code"] == "SL-4001-OAT" and text["Variant"] == "oat"


FORMATS = ["jpeg", "webp"] + (["avif"] if features.check("avif") else [])


@pytest.mark.parametrize("fmt", FORMATS)
def test_lossy_derivatives_carry_icc_exif_and_xmp(fmt):
    codes = np.zeros((8, 8, 4), np.uint8)
    codes[...] = (200, 120, 40, 255)
    d = derivative(format=fmt, background=(1.0, 1.0, 1.0))
    image = opened(make_derivative(codes, d, META))
    assert image.format == {"jpeg": "JPEG", "webp": "WEBP", "avif": "AVIF"}[fmt]
    assert_srgb_icc(image)
    exif = image.getexif()
    assert exif[0x8298] == "(c) 2026 Sawdust Lane Workshop"  # EXIF 2.32 Copyright tag
    assert exif[0x010E].startswith("SL-4001-OAT")  # ImageDescription
    xmp = image.info["xmp"]
    xmp = xmp.decode() if isinstance(xmp, bytes) else xmp
    assert "<dc:identifier>SL-4001-OAT</dc:identifier>" in xmp
    assert "© 2026 Sawdust Lane Workshop" in xmp and "Wool sofa, oat weave" in xmp


def test_webp_keeps_alpha_without_a_background():
    codes = np.zeros((8, 8, 4), np.uint8)
    codes[:, :4] = (10, 20, 30, 255)
    image = opened(make_derivative(codes, derivative(format="webp", lossless=True), META))
    assert image.mode == "RGBA"
    alpha = np.asarray(image)[..., 3]
    assert alpha[:, 0].min() == 255 and alpha[:, -1].max() == 0


# --- settings refused at load time ------------------------------------------------------------


@pytest.mark.parametrize(("keys", "field", "words"), [
    ({"format": "tiff"}, "derivatives[0].format", "is not allowed"),
    ({"longest_side": 0}, "derivatives[0].longest_side", "at least 1"),
    ({"box": [0, 10], "longest_side": None}, "derivatives[0].box", "at least 1"),
    ({"format": "jpeg", "path": "a.jpg"}, "derivatives[0]", "background"),
    ({"path": "a.jpg"}, "derivatives[0]", "must end with .png"),
    ({"box": [10, 10]}, "derivatives[0]", "longest_side or box"),
    ({"shots": ["nope"]}, "derivatives[0].shots", "no shot 'nope'"),
])
def test_bad_derivatives_are_refused_naming_the_key(tmp_path, keys, field, words):
    table = {"name": "web", "format": "png", "path": "web/{model}.png", "longest_side": 100}
    table.update(keys)
    lines = "\n".join(f"{k} = {toml(v)}" for k, v in table.items() if v is not None)
    preset = tmp_path / "p.toml"
    preset.write_text('[[shots]]\nname = "hero"\nkind = "views"\n\n[[derivatives]]\n' + lines)
    with pytest.raises(PresetError) as caught:
        load_preset(preset)
    message = str(caught.value)
    assert message.startswith(f"{preset}: {field}") and words in message, message
    assert "\n" not in message


def test_two_derivatives_on_one_path_are_refused(tmp_path):
    preset = tmp_path / "p.toml"
    one = '[[derivatives]]\nname = "{}"\nformat = "png"\nlongest_side = 9\npath = "a/{{model}}.png"\n'
    preset.write_text(one.format("a") + one.format("b"))
    with pytest.raises(PresetError, match=r"derivatives\[1\]\.path: .* collide"):
        load_preset(preset)


def toml(value) -> str:
    if isinstance(value, str):
        return f'"{value}"'
    if isinstance(value, list):
        return "[" + ", ".join(toml(v) for v in value) + "]"
    return str(value).lower() if isinstance(value, bool) else str(value)


def test_the_icc_profile_is_the_same_bytes_in_every_process():
    # LittleCMS stamps the creation time into a new profile; ours is fixed, so a rerun in
    # other worker processes writes identical files
    import subprocess
    import sys

    from shots.tags import srgb_icc_profile

    code = "import sys; from shots.tags import srgb_icc_profile as p; sys.stdout.buffer.write(p())"
    other = subprocess.run([sys.executable, "-c", code], capture_output=True, check=True).stdout
    assert other == srgb_icc_profile()
    # ICC.1:2010 §7.2.2: the header's size field is the profile's length; "acsp" at byte 36
    assert struct.unpack(">I", other[:4])[0] == len(other) and other[36:40] == b"acsp"
