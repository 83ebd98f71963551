"""Published versions of a frame: resized in linear light, flattened or kept transparent, encoded
as JPEG, WebP, PNG or AVIF with colour tags and catalog metadata.

A derivative is made from the master frame's display codes (straight alpha, sRGB), in memory,
so the same bytes come out whether the frame was just rendered or read back from its PNG:

1. sRGB codes → linear light (IEC 61966-2-1), colour premultiplied by alpha;
2. resampled with Pillow's Lanczos filter (a windowed sinc, its support widened by the scale
   factor when shrinking, so every source pixel counts), channel by channel in float32;
3. colour divided by alpha again, or composited over the background colour ("over", Porter &
   Duff 1984) in linear light;
4. sRGB-encoded, rounded to 8 bits, and written with the file's colour tags (``shots.tags``).

Resampling premultiplied colour keeps what is under transparent pixels out of the edges, and
doing it in linear light keeps fine light and dark detail at its true average brightness.
"""

from __future__ import annotations

import io

import numpy as np
from PIL import Image

from shots.colour import srgb_to_linear
from shots.tags import NO_METADATA, ImageMetadata, exif_bytes, srgb_icc_profile, tag_png, xmp_packet

WEBP_METHOD = 4  # libwebp effort 0–6: its own default, a balance of time and size
AVIF_SPEED = 8  # libavif speed 0–10 (10 fastest): common practice for batch encoding
# sRGB code → linear light for every 8-bit code, looked up instead of computed
DECODE_8 = srgb_to_linear(np.arange(256) / 255.0).astype(np.float32)


def fitted_size(width: int, height: int, longest_side: int | None,
                box: tuple[int, int] | None) -> tuple[int, int]:
    """The picture's size inside a derivative: the longest side scaled to ``longest_side``, or
    the largest size with the frame's aspect that fits ``box``; never below one pixel."""
    if longest_side is not None:
        scale = longest_side / max(width, height)
    else:
        scale = min(box[0] / width, box[1] / height)
    return max(1, round(width * scale)), max(1, round(height * scale))


def canvas_size(width: int, height: int, longest_side: int | None,
                box: tuple[int, int] | None) -> tuple[int, int]:
    """The derivative file's pixel size: ``box`` exactly, else the fitted size."""
    return tuple(box) if box is not None else fitted_size(width, height, longest_side, box)


def premultiplied_linear(codes: np.ndarray) -> np.ndarray:
    """(h, w, 4) float32 linear RGBA, colour × alpha, of uint8 or uint16 straight sRGB codes."""
    if codes.dtype == np.uint8:
        colour = DECODE_8[codes[..., :3]]
        alpha = codes[..., 3].astype(np.float32) / 255.0
    else:
        top = float(np.iinfo(codes.dtype).max)
        colour = srgb_to_linear(codes[..., :3] / top).astype(np.float32)
        alpha = codes[..., 3].astype(np.float32) / top
    out = np.empty(codes.shape, np.float32)
    np.multiply(colour, alpha[..., None], out=out[..., :3])
    out[..., 3] = alpha
    return out


def resample(image: np.ndarray, size: tuple[int, int]) -> np.ndarray:
    """(h, w, c) float32 resized to ``size`` = (width, height) with Lanczos, channel by channel."""
    if (image.shape[1], image.shape[0]) == tuple(size):
        return image
    channels = [
        np.asarray(Image.fromarray(np.ascontiguousarray(image[..., k]), "F")
                   .resize(size, Image.Resampling.LANCZOS))
        for k in range(image.shape[2])
    ]
    return np.stack(channels, axis=-1)


def compose(premultiplied: np.ndarray, canvas: tuple[int, int],
            background: tuple[float, float, float] | None) -> np.ndarray:
    """Centre a premultiplied linear picture on a ``canvas`` = (width, height) and encode it.

    Returns (H, W, 3) uint8 sRGB over ``background`` (a display colour), or (H, W, 4) uint8
    straight-alpha sRGB when ``background`` is None (the canvas around the picture is clear).
    """
    width, height = canvas
    full = np.zeros((height, width, 4), np.float32)
    top = (height - premultiplied.shape[0]) // 2
    left = (width - premultiplied.shape[1]) // 2
    full[top:top + premultiplied.shape[0], left:left + premultiplied.shape[1]] = premultiplied
    # Lanczos lobes overshoot: keep alpha in [0, 1] and colour within what alpha allows
    alpha = np.clip(full[..., 3:], 0.0, 1.0)
    colour = np.clip(full[..., :3], 0.0, alpha)
    if background is not None:
        under = srgb_to_linear(np.asarray(background, np.float64)).astype(np.float32)
        return _codes(colour + under * (1.0 - alpha))
    straight = np.divide(colour, alpha, out=np.zeros_like(colour), where=alpha > 0)
    return np.concatenate([_codes(straight), _codes(alpha, srgb=False)], axis=-1)


# Linear light where each 8-bit sRGB code begins: code k covers [ENCODE_8[k - 1], ENCODE_8[k]),
# the decoded midpoints between codes, so a binary search rounds to the nearest code as
# rint(255 · sRGB(x)) does, without the power function on every pixel
ENCODE_8 = srgb_to_linear((np.arange(1, 256) - 0.5) / 255.0).astype(np.float32)


def _codes(values: np.ndarray, srgb: bool = True) -> np.ndarray:
    """uint8 codes of linear values (sRGB-encoded) or of alpha (``srgb`` False)."""
    if srgb:
        return np.searchsorted(ENCODE_8, values, side="right").astype(np.uint8)
    return np.rint(np.clip(values, 0.0, 1.0) * 255.0).astype(np.uint8)


def make_derivative(codes: np.ndarray, derivative, metadata: ImageMetadata = NO_METADATA) -> bytes:
    """The file bytes of one derivative (``shots.presets.Derivative``) of a master frame.

    Parameters
    ----------
    codes : (h, w, 4) uint8 or uint16 straight-alpha sRGB codes of the master frame.
    derivative : format, size (``longest_side`` or ``box``), background and quality settings.
    metadata : product code, title, variant and copyright written into the file.
    """
    height, width = codes.shape[:2]
    picture = fitted_size(width, height, derivative.longest_side, derivative.box)
    canvas = canvas_size(width, height, derivative.longest_side, derivative.box)
    pixels = compose(resample(premultiplied_linear(codes), picture), canvas,
                     derivative.background)
    return encode_image(pixels, derivative, metadata)


def encode_image(pixels: np.ndarray, derivative, metadata: ImageMetadata) -> bytes:
    """RGB or RGBA uint8 sRGB pixels → file bytes in the derivative's format, tagged."""
    image = Image.fromarray(pixels, "RGBA" if pixels.shape[2] == 4 else "RGB")
    buffer = io.BytesIO()
    kind = derivative.format
    if kind == "png":
        image.save(buffer, format="PNG", compress_level=6)
        return tag_png(buffer.getvalue(), metadata)
    tagged = dict(icc_profile=srgb_icc_profile(), exif=exif_bytes(metadata),
                  xmp=xmp_packet(metadata))
    if kind == "jpeg":
        image.save(buffer, format="JPEG", quality=derivative.quality, optimize=True,
                   progressive=True, subsampling=derivative.chroma, **tagged)
    elif kind == "webp":
        image.save(buffer, format="WEBP", quality=derivative.quality,
                   lossless=derivative.lossless, method=WEBP_METHOD, exact=False, **tagged)
    elif kind == "avif":
        image.save(buffer, format="AVIF", quality=derivative.quality, speed=AVIF_SPEED,
                   subsampling=derivative.chroma, **tagged)
    else:
        raise ValueError(f"unknown derivative format {kind!r}")
    return buffer.getvalue()
