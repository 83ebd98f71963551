"""Texture lookups in the flat atlas (``shots.scene.Textures``) and in equirectangular maps.

Conventions (glTF 2.0 spec §Images, §Samplers): uv (0, 0) is the image's top-left corner, u runs
right and v down; texel (i, j) has its centre at ((i + 0.5)/W, (j + 0.5)/H). Texels are stored
row-major from the top row. Minification uses the magnification filter (no mipmaps): catalog
frames look at products from close up, and supersampling handles the rest.
"""

from __future__ import annotations

import math

from numba import njit

from shots.scene import (
    FILTER_NEAREST,
    TI_HEIGHT,
    TI_MAG_FILTER,
    TI_OFFSET,
    TI_WIDTH,
    TI_WRAP_S,
    TI_WRAP_T,
    WRAP_CLAMP,
    WRAP_MIRROR,
)


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


@njit(cache=True, error_model="numpy", _nrt=False)
def sample_texture(texels, info, tex, u, v, out, at=0):
    """Filtered RGBA of texture ``tex`` at (u, v), written into ``out[at : at + 4]``.

    Parameters
    ----------
    texels : (k, 4) float32 linear texels of all textures.
    info : (t, N_TEX_INFO) int32 offsets, sizes, wrap modes and filter.
    tex : texture index.
    u, v : texture coordinates after any transform.
    out : float64 array receiving the value at ``at``.
    """
    base = info[tex, TI_OFFSET]
    w = info[tex, TI_WIDTH]
    h = info[tex, TI_HEIGHT]
    ws = info[tex, TI_WRAP_S]
    wt = info[tex, TI_WRAP_T]
    x = u * w - 0.5
    y = v * h - 0.5
    if info[tex, TI_MAG_FILTER] == FILTER_NEAREST:
        i = wrap_index(int(math.floor(x + 0.5)), w, ws)
        j = wrap_index(int(math.floor(y + 0.5)), h, wt)
        k = base + j * w + i
        for c in range(4):
            out[at + c] = texels[k, c]
        return
    x0 = math.floor(x)
    y0 = math.floor(y)
    fx = x - x0
    fy = y - y0
    i0 = wrap_index(int(x0), w, ws)
    i1 = wrap_index(int(x0) + 1, w, ws)
    j0 = wrap_index(int(y0), h, wt)
    j1 = wrap_index(int(y0) + 1, h, wt)
    k00 = base + j0 * w + i0
    k10 = base + j0 * w + i1
    k01 = base + j1 * w + i0
    k11 = base + j1 * w + i1
    for c in range(4):
        top = texels[k00, c] * (1.0 - fx) + texels[k10, c] * fx
        bottom = texels[k01, c] * (1.0 - fx) + texels[k11, c] * fx
        out[at + c] = top * (1.0 - fy) + bottom * fy


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
