"""Texture lookups in the flat byte atlas (``shots.scene.Textures``) and in equirectangular maps.

Conventions (glTF 2.0 spec §Images, §Samplers): uv (0, 0) is the image's top-left corner, u runs
right and v down; texel (i, j) has its centre at ((i + 0.5)/W, (j + 0.5)/H). Texels are stored
row-major from the top row, as 8-bit or 16-bit codes of 1 to 4 channels, decoded here: sRGB
colour channels through a 256-entry table (IEC 61966-2-1), everything else divided by 255 or
65535; grey expands to (l, l, l), a missing alpha is 1.

Filtering follows the OpenGL definitions glTF's samplers borrow (OpenGL 4.6 §8.14–8.15): the
caller gives the level of detail λ = log2(texels per pixel footprint); λ ≤ c magnifies with
``magFilter`` (c = 0.5 for LINEAR magnification with a NEAREST_MIPMAP_* minification, else 0);
above it ``minFilter`` picks the mip level(s) (nearest level: d = ⌈λ + ½⌉ − 1; linear: levels
⌊λ⌋ and ⌊λ⌋ + 1 blended by the fraction, i.e. trilinear for LINEAR_MIPMAP_LINEAR) and filters
within each with nearest or bilinear lookups, wrap modes applied at every level.
"""

from __future__ import annotations

import math

import numpy as np
from numba import njit

from shots.colour import srgb_to_linear
from shots.scene import (
    FILTER_LINEAR,
    FILTER_NEAREST,
    LINEAR_MIPMAP_NEAREST,
    NEAREST_MIPMAP_LINEAR,
    NEAREST_MIPMAP_NEAREST,
    TI_BYTES,
    TI_CHANNELS,
    TI_HEIGHT,
    TI_LEVEL,
    TI_LEVELS,
    TI_MAG_FILTER,
    TI_MIN_FILTER,
    TI_SRGB,
    TI_WIDTH,
    TI_WRAP_S,
    TI_WRAP_T,
    WRAP_CLAMP,
    WRAP_MIRROR,
)

SRGB_DECODE = srgb_to_linear(np.arange(256) / 255.0)  # 8-bit sRGB code → linear
NO_FOOTPRINT = -1e30  # level of detail of a point lookup: the finest level, magnified


@njit(cache=True, error_model="numpy", _nrt=False)
def wrap_index(i, n, mode):
    """Integer texel index ``i`` folded into [0, n) by a glTF wrap mode (spec §Samplers)."""
    if mode == WRAP_CLAMP:
        return min(max(i, 0), n - 1)
    if mode == WRAP_MIRROR:
        period = 2 * n
        k = i % period  # Python-style modulo: non-negative
        return k if k < n else period - 1 - k
    return i % n


@njit(cache=True, error_model="numpy", _nrt=False)
def wrap_coord(x, mode):
    """A texture coordinate folded into [0, 1] by a wrap mode (for tests and nearest lookups)."""
    if mode == WRAP_CLAMP:
        return min(max(x, 0.0), 1.0)
    if mode == WRAP_MIRROR:
        k = x - 2.0 * math.floor(x * 0.5)
        return k if k <= 1.0 else 2.0 - k
    return x - math.floor(x)


@njit(cache=True, inline="always", error_model="numpy", _nrt=False)
def channel(texels, k, depth, colour_srgb):
    """One stored channel value at byte ``k`` as a linear float."""
    if depth == 1:
        code = texels[k]
        return SRGB_DECODE[code] if colour_srgb else code * (1.0 / 255.0)
    x = (texels[k] | (np.int64(texels[k + 1]) << 8)) * (1.0 / 65535.0)
    if not colour_srgb:
        return x
    return x / 12.92 if x <= 0.04045 else ((x + 0.055) / 1.055) ** 2.4  # IEC 61966-2-1


@njit(cache=True, error_model="numpy", _nrt=False)
def texel(texels, info, tex, k):
    """RGBA of the texel whose first byte is ``k``; grey is (l, l, l), missing alpha 1."""
    n = info[tex, TI_CHANNELS]
    depth = info[tex, TI_BYTES]
    srgb = info[tex, TI_SRGB] != 0
    first = channel(texels, k, depth, srgb)
    if n <= 2:
        a = channel(texels, k + depth, depth, False) if n == 2 else 1.0
        return first, first, first, a
    g = channel(texels, k + depth, depth, srgb)
    b = channel(texels, k + 2 * depth, depth, srgb)
    a = channel(texels, k + 3 * depth, depth, False) if n == 4 else 1.0
    return first, g, b, a


@njit(cache=True, error_model="numpy", _nrt=False)
def sample_level(texels, info, tex, level, linear, u, v):
    """RGBA of mip ``level`` at (u, v), nearest or bilinear (spec §Samplers), wraps applied."""
    w = max(info[tex, TI_WIDTH] >> level, 1)
    h = max(info[tex, TI_HEIGHT] >> level, 1)
    ws = info[tex, TI_WRAP_S]
    wt = info[tex, TI_WRAP_T]
    base = info[tex, TI_LEVEL + level]
    stride = info[tex, TI_CHANNELS] * info[tex, TI_BYTES]
    x = u * w - 0.5
    y = v * h - 0.5
    if not linear:
        i = wrap_index(int(math.floor(x + 0.5)), w, ws)
        j = wrap_index(int(math.floor(y + 0.5)), h, wt)
        return texel(texels, info, tex, base + (j * w + i) * stride)
    x0 = math.floor(x)
    y0 = math.floor(y)
    fx = x - x0
    fy = y - y0
    i0 = wrap_index(int(x0), w, ws)
    i1 = wrap_index(int(x0) + 1, w, ws)
    j0 = wrap_index(int(y0), h, wt)
    j1 = wrap_index(int(y0) + 1, h, wt)
    r00, g00, b00, a00 = texel(texels, info, tex, base + (j0 * w + i0) * stride)
    r10, g10, b10, a10 = texel(texels, info, tex, base + (j0 * w + i1) * stride)
    r01, g01, b01, a01 = texel(texels, info, tex, base + (j1 * w + i0) * stride)
    r11, g11, b11, a11 = texel(texels, info, tex, base + (j1 * w + i1) * stride)
    w00 = (1.0 - fx) * (1.0 - fy)
    w10 = fx * (1.0 - fy)
    w01 = (1.0 - fx) * fy
    w11 = fx * fy
    return (w00 * r00 + w10 * r10 + w01 * r01 + w11 * r11,
            w00 * g00 + w10 * g10 + w01 * g01 + w11 * g11,
            w00 * b00 + w10 * b10 + w01 * b01 + w11 * b11,
            w00 * a00 + w10 * a10 + w01 * a01 + w11 * a11)  # fmt: skip


@njit(cache=True, error_model="numpy", _nrt=False)
def sample_texture(texels, info, tex, u, v, lod, out, at=0):
    """Filtered RGBA of texture ``tex`` at (u, v), written into ``out[at : at + 4]``.

    Parameters
    ----------
    texels : (k,) uint8 atlas of all textures' levels.
    info : (t, N_TEX_INFO) int32 level offsets, sizes, wrap modes, filters and format.
    tex : texture index.
    u, v : texture coordinates after any transform.
    lod : level of detail λ, log2 of the footprint's size in level-0 texels (``NO_FOOTPRINT``
        for a point lookup).
    out : float64 array receiving the value at ``at``.
    """
    mag = info[tex, TI_MAG_FILTER]
    minify = info[tex, TI_MIN_FILTER]
    nearest_mips = minify == NEAREST_MIPMAP_NEAREST or minify == NEAREST_MIPMAP_LINEAR
    c = 0.5 if mag == FILTER_LINEAR and nearest_mips else 0.0
    level, level2, blend = 0, 0, 0.0
    if lod <= c:
        linear = mag != FILTER_NEAREST
    elif minify == FILTER_NEAREST or minify == FILTER_LINEAR:
        linear = minify == FILTER_LINEAR
    else:
        top = info[tex, TI_LEVELS] - 1
        linear = minify != NEAREST_MIPMAP_NEAREST and minify != NEAREST_MIPMAP_LINEAR
        if minify == NEAREST_MIPMAP_NEAREST or minify == LINEAR_MIPMAP_NEAREST:
            level = 0 if lod <= 0.5 else min(int(math.ceil(lod + 0.5)) - 1, top)
        elif lod >= top:
            level = top
        else:
            level = int(math.floor(lod))
            level2 = level + 1
            blend = lod - level
    r, g, b, a = sample_level(texels, info, tex, level, linear, u, v)
    if blend > 0.0:
        r2, g2, b2, a2 = sample_level(texels, info, tex, level2, linear, u, v)
        r += blend * (r2 - r)
        g += blend * (g2 - g)
        b += blend * (b2 - b)
        a += blend * (a2 - a)
    out[at] = r
    out[at + 1] = g
    out[at + 2] = b
    out[at + 3] = a


@njit(cache=True, error_model="numpy", _nrt=False)
def equirect_uv(dx, dy, dz, rotation):
    """Equirectangular (u, v) of a unit direction; +Y up, v = 0 at the zenith.

    u = 0.5 looks along −Z (the glTF camera's default view), u grows toward +X; ``rotation``
    turns the map about +Y (radians, counter-clockwise seen from above).
    """
    phi = math.atan2(dx, -dz) - rotation
    u = 0.5 + phi / (2.0 * math.pi)
    u = u - math.floor(u)
    v = math.acos(min(max(dy, -1.0), 1.0)) / math.pi
    return u, v


@njit(cache=True, error_model="numpy", _nrt=False)
def sample_equirect(image, dx, dy, dz, rotation, scale, out, at=0):
    """Bilinear radiance of an equirectangular map (h, w, 3) along a direction, × ``scale``.

    Wraps around in u and clamps at the poles. Writes (3,) into ``out[at : at + 3]``.
    """
    h = image.shape[0]
    w = image.shape[1]
    u, v = equirect_uv(dx, dy, dz, rotation)
    x = u * w - 0.5
    y = min(max(v * h - 0.5, 0.0), h - 1.0)
    x0 = math.floor(x)
    y0 = math.floor(y)
    fx = x - x0
    fy = y - y0
    i0 = int(x0) % w
    i1 = (int(x0) + 1) % w
    j0 = int(y0)
    j1 = min(j0 + 1, h - 1)
    for c in range(3):
        top = image[j0, i0, c] * (1.0 - fx) + image[j0, i1, c] * fx
        bottom = image[j1, i0, c] * (1.0 - fx) + image[j1, i1, c] * fx
        out[at + c] = scale * (top * (1.0 - fy) + bottom * fy)
