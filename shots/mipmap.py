"""Mip pyramids: a texture and its successively halved, box-filtered copies (Williams 1983,
"Pyramidal Parametrics").

Level ``l`` is max(1, w >> l) × max(1, h >> l), the sizes of OpenGL 4.6 §8.14.3 (which glTF's
samplers follow). Each texel of a level is the exact area average of the texels of the level
above that its footprint covers: a 2×2 box for even sizes, and for an odd size 3 taps weighted
by their overlap, so no row or column is dropped.

Averaging happens in linear light: sRGB codes are decoded (IEC 61966-2-1) before filtering and
encoded again for storage, so a black-and-white checker averages to linear 0.5 (code 188), not
to code 128. Alpha is always linear (glTF 2.0 spec §Materials). Codes are 8-bit or 16-bit; a
level is built from the float values of the level above (only the stored copy is rounded), and
large levels are processed in bands of rows so that no full-size float copy exists.
"""

from __future__ import annotations

import numpy as np

from shots.colour import linear_to_srgb, srgb_to_linear

MAX_LEVELS = 16
BAND_ROWS = 64  # output rows filtered at once from an 8- or 16-bit level
_SRGB_DECODE_8 = srgb_to_linear(np.arange(256) / 255.0).astype(np.float32)


def level_sizes(width: int, height: int, max_levels: int = MAX_LEVELS) -> list[tuple[int, int]]:
    """(w, h) of every level from the full image down to 1 × 1 (at most ``max_levels``)."""
    sizes = [(width, height)]
    while sizes[-1] != (1, 1) and len(sizes) < max_levels:
        w, h = sizes[-1]
        sizes.append((max(1, w // 2), max(1, h // 2)))
    return sizes


def pyramid_bytes(width: int, height: int, channels: int, depth: int) -> int:
    """Bytes of all levels of a (width × height × channels) image of ``depth`` bytes a value."""
    return sum(w * h for w, h in level_sizes(width, height)) * channels * depth


def alpha_channel(channels: int) -> int:
    """Index of the alpha channel (grey + alpha, RGBA), or -1 when there is none."""
    return channels - 1 if channels in (2, 4) else -1


def box_taps(n: int) -> tuple[np.ndarray, np.ndarray]:
    """Source indices and weights (each (m, 3)) of the area-average from n texels to n // 2.

    Output texel i covers source interval [i·n/m, (i+1)·n/m); each source texel is weighted by
    its overlap with it, over the interval's length. n/m is 2 for even n and at most 3 for odd n.
    """
    m = max(1, n // 2)
    i = np.arange(m, dtype=np.int64)
    first = (i * n) // m
    lo, hi = i * n / m, (i + 1) * n / m
    index = np.empty((m, 3), np.int64)
    weight = np.empty((m, 3), np.float32)
    for k in range(3):
        j = first + k
        overlap = np.clip(np.minimum(j + 1, hi) - np.maximum(j, lo), 0.0, None)
        index[:, k] = np.minimum(j, n - 1)
        weight[:, k] = overlap * m / n
    return index, weight


def decode(codes: np.ndarray, srgb: bool) -> np.ndarray:
    """Linear float32 values of (h, w, c) 8- or 16-bit codes; sRGB colour channels decoded."""
    if codes.dtype == np.uint8:
        values = codes.astype(np.float32) * np.float32(1 / 255)
        colour = np.take(_SRGB_DECODE_8, codes) if srgb else None
    else:
        values = codes.astype(np.float32) * np.float32(1 / 65535)
        colour = srgb_to_linear(values).astype(np.float32) if srgb else None
    if srgb:
        alpha = alpha_channel(codes.shape[-1])
        if alpha >= 0:
            colour[..., alpha] = values[..., alpha]
        return colour
    return values


def encode(values: np.ndarray, srgb: bool, dtype: np.dtype) -> np.ndarray:
    """Codes of ``dtype`` (uint8 or uint16) for linear values, rounded to nearest."""
    top = float(np.iinfo(dtype).max)
    values = np.clip(values, 0.0, 1.0)
    if srgb:
        alpha = alpha_channel(values.shape[-1])
        encoded = linear_to_srgb(values)
        if alpha >= 0:
            encoded[..., alpha] = values[..., alpha]
        values = encoded
    return np.rint(values * top).astype(dtype)


def halve(read_rows, height: int, width: int, channels: int) -> np.ndarray:
    """The next level as linear float32 (h // 2, w // 2, c), from a level of size (height, width).

    ``read_rows(start, stop)`` gives that level's rows start..stop-1 as linear float32 (so the
    level itself may stay in 8-bit codes); the level is read in bands of ``BAND_ROWS`` outputs.
    Even sizes take the plain 2 × 2 mean, odd ones the 3-tap area weights of ``box_taps``.
    """
    iy, wy = box_taps(height)
    ix, wx = box_taps(width)
    out = np.empty((len(iy), len(ix), channels), np.float32)
    for a in range(0, len(iy), BAND_ROWS):
        b = min(a + BAND_ROWS, len(iy))
        if height % 2 == 0:
            src = read_rows(2 * a, 2 * b)
            rows = 0.5 * (src[0::2] + src[1::2])
        else:
            start, stop = int(iy[a].min()), int(iy[b - 1].max()) + 1
            src = read_rows(start, stop)
            rows = sum(wy[a:b, k, None, None] * src[iy[a:b, k] - start] for k in range(3))
        if width % 2 == 0:
            out[a:b] = 0.5 * (rows[:, 0::2] + rows[:, 1::2])
        else:
            out[a:b] = sum(wx[None, :, k, None] * rows[:, ix[:, k]] for k in range(3))
    return out


def write_levels(region: np.ndarray, width: int, height: int, channels: int, srgb: bool) -> None:
    """Fill levels 1… of a pyramid whose level 0 is already at the start of ``region``.

    ``region`` is a flat uint8 or uint16 array of ``level_sizes`` texels × channels; levels
    follow each other without gaps.
    """
    sizes = level_sizes(width, height)
    offset = width * height * channels
    top = region[:offset].reshape(height, width, channels)
    values = None  # float copy of the previous level (levels ≥ 1 are a quarter of the image)
    for (w, h), (w2, h2) in zip(sizes, sizes[1:], strict=False):
        if values is None:
            values = halve(lambda a, b: decode(top[a:b], srgb), h, w, channels)
        else:
            previous = values
            values = halve(lambda a, b, p=previous: p[a:b], h, w, channels)
        level = region[offset : offset + w2 * h2 * channels].reshape(h2, w2, channels)
        for a in range(0, h2, BAND_ROWS):
            level[a : a + BAND_ROWS] = encode(values[a : a + BAND_ROWS], srgb, region.dtype)
        offset += w2 * h2 * channels
