"""The colour pipeline: exposure, tone mapping, sRGB transfer and alpha handling.

Shading happens in linear light with Rec.709 primaries (glTF's). An image leaves the renderer as
premultiplied linear RGBA; this module turns it into display values with straight alpha.
"""

from __future__ import annotations

import numpy as np

TONE_MAPS = ("neutral", "none")


# BT.709 luminance weights of linear RGB (ITU-R BT.709-6, item 3.2)
LUMA_709 = np.array([0.2126, 0.7152, 0.0722])


def srgb_to_linear(c: np.ndarray) -> np.ndarray:
    """Decode sRGB values in [0, 1] to linear light (IEC 61966-2-1, §5.2)."""
    c = np.asarray(c, np.float64)
    return np.where(c <= 0.04045, c / 12.92, ((c + 0.055) / 1.055) ** 2.4)


def linear_to_srgb(x: np.ndarray) -> np.ndarray:
    """Encode linear values in [0, 1] to sRGB (IEC 61966-2-1, §5.2)."""
    x = np.clip(np.asarray(x, np.float64), 0.0, 1.0)
    return np.where(x <= 0.0031308, 12.92 * x, 1.055 * x ** (1.0 / 2.4) - 0.055)


def pbr_neutral(color: np.ndarray) -> np.ndarray:
    """Khronos PBR Neutral tone mapping (KhronosGroup/ToneMapping, "PBR Neutral", 2024).

    Near-identity below a peak of 0.76 (a small toe removes up to 0.04), so a product's base colour
    survives; brighter values are compressed and desaturated toward white.

    Parameters
    ----------
    color : (..., 3) linear RGB.
    """
    start_compression = 0.8 - 0.04
    desaturation = 0.15
    color = np.asarray(color, np.float64)
    shape = color.shape
    color = color.reshape(-1, 3)
    x = _channel_min(color)
    offset = np.where(x < 0.08, x - 6.25 * x * x, 0.04)
    color = color - offset
    peak = _channel_max(color)
    bright = ~(peak[:, 0] < start_compression)  # NaN is compressed, as np.where would
    if np.any(bright):
        peak, below = peak[bright], color[bright]
        d = 1.0 - start_compression
        new_peak = 1.0 - d * d / (peak + d - start_compression)
        compressed = below * (new_peak / np.maximum(peak, 1e-12))
        g = 1.0 - 1.0 / (desaturation * (peak - new_peak) + 1.0)
        color[bright] = compressed * (1.0 - g) + new_peak * g
    return color.reshape(shape)


def _channel_min(rgb: np.ndarray) -> np.ndarray:
    """(n, 1) smallest channel of (n, 3) colours (np.min over a short axis is slow)."""
    return np.minimum(np.minimum(rgb[:, 0], rgb[:, 1]), rgb[:, 2])[:, None]


def _channel_max(rgb: np.ndarray) -> np.ndarray:
    """(n, 1) largest channel of (n, 3) colours."""
    return np.maximum(np.maximum(rgb[:, 0], rgb[:, 1]), rgb[:, 2])[:, None]


def to_display(
    premultiplied: np.ndarray, exposure: float = 0.0, tone_map: str = "neutral"
) -> np.ndarray:
    """Premultiplied linear RGBA → straight-alpha display RGBA in [0, 1] (sRGB-encoded colour).

    Colour is un-premultiplied first, so a half-covered white edge stays white with alpha 0.5
    instead of turning grey (no dark fringe); then exposure (2^stops), tone map, sRGB encode.

    Parameters
    ----------
    premultiplied : (h, w, 4) float32 linear RGBA, colour already multiplied by alpha.
    exposure : stops; the linear colour is multiplied by 2**exposure.
    tone_map : "neutral" (Khronos PBR Neutral) or "none" (clip).

    Returns
    -------
    (h, w, 4) float64 display RGBA.
    """
    alpha, coloured, colour = _display_parts(premultiplied, exposure, tone_map)
    display = np.zeros(premultiplied.shape[:-1] + (4,), np.float64)
    display[..., 3] = alpha
    display[coloured, :3] = colour
    return display


def display_codes(
    premultiplied: np.ndarray, exposure: float = 0.0, tone_map: str = "neutral", bits: int = 8
) -> np.ndarray:
    """``quantize(to_display(...), bits)`` without the full-size float image in between.

    Returns
    -------
    (h, w, 4) uint8 (``bits`` 8) or uint16 (16) straight-alpha display codes.
    """
    alpha, coloured, colour = _display_parts(premultiplied, exposure, tone_map)
    codes = np.zeros(premultiplied.shape[:-1] + (4,), np.uint8 if bits == 8 else np.uint16)
    codes[..., 3] = quantize(alpha, bits)
    codes[coloured, :3] = quantize(colour, bits)
    return codes


def _display_parts(premultiplied: np.ndarray, exposure: float, tone_map: str):
    """The display image in parts: (h, w) float64 alpha in [0, 1], the (h, w) bool mask of
    pixels with colour, and their (n, 3) float64 display colour; every other pixel is black.

    Only pixels with some colour go through the curves: black maps to black through each of
    them, and on a catalog image (transparent background, black shadow catcher) the colourless
    pixels are most of the frame. The values are the same as computing every pixel.
    """
    if tone_map not in TONE_MAPS:
        raise ValueError(f"tone map must be one of {TONE_MAPS}, not {tone_map!r}")
    alpha = np.clip(premultiplied[..., 3].astype(np.float64), 0.0, 1.0)
    premultiplied_colour = premultiplied[..., :3]
    # NaN counts as colour (NaN != 0), so a bad pixel is not hidden as black
    coloured = alpha > 0
    coloured &= (premultiplied_colour[..., 0] != 0) | (premultiplied_colour[..., 1] != 0) \
        | (premultiplied_colour[..., 2] != 0)
    colour = premultiplied_colour[coloured] / np.maximum(alpha[coloured], 1e-12)[:, None]
    colour = np.maximum(colour, 0.0) * 2.0**exposure
    if tone_map == "neutral":
        colour = pbr_neutral(colour)
    return alpha, coloured, linear_to_srgb(colour)


def quantize(display: np.ndarray, bits: int = 8) -> np.ndarray:
    """Display values in [0, 1] → uint8 or uint16 codes, rounded to nearest."""
    top = (1 << bits) - 1
    dtype = np.uint8 if bits == 8 else np.uint16
    return np.rint(np.clip(display, 0.0, 1.0) * top).astype(dtype)
