"""Origin offset for secondary rays (Wächter & Binder, "A Fast and Robust Method for Avoiding
Self-Intersection", Ray Tracing Gems ch. 6, 2019).

The hit point is moved along the geometric normal by a number of float32 ulps proportional to the
normal (integer arithmetic on the bit pattern, so the step scales with the coordinate's
magnitude); near the origin, where ulps get tiny, by a small absolute amount instead. The
constants assume float32 positions.
"""

from __future__ import annotations

import numpy as np
from llvmlite import ir
from numba import njit, prange, types
from numba.extending import intrinsic

ORIGIN = 1.0 / 32.0  # below this |coordinate|, use the absolute offset
FLOAT_SCALE = 1.0 / 65536.0  # absolute offset per unit normal
INT_SCALE = 256.0  # ulps per unit normal


@intrinsic
def _float_bits(typingctx, x):
    """Bit pattern of a float32 as int32."""
    sig = types.int32(types.float32)

    def codegen(context, builder, signature, args):
        return builder.bitcast(args[0], ir.IntType(32))

    return sig, codegen


@intrinsic
def _bits_float(typingctx, i):
    """float32 with the given int32 bit pattern."""
    sig = types.float32(types.int32)

    def codegen(context, builder, signature, args):
        return builder.bitcast(args[0], ir.FloatType())

    return sig, codegen


@njit(cache=True)
def offset_coordinate(p, n):
    """One coordinate of the offset point: p, n float32 (n = outgoing-side normal component)."""
    p = np.float32(p)
    n = np.float32(n)
    if abs(p) < ORIGIN:
        return np.float32(p + np.float32(FLOAT_SCALE) * n)
    step = np.int32(np.float32(INT_SCALE) * n)  # truncates toward zero, as the C++ cast
    bits = _float_bits(p)
    return _bits_float(np.int32(bits - step if p < 0 else bits + step))


@njit(cache=True)
def offset_origin_one(px, py, pz, nx, ny, nz):
    """Offset one point; returns the new (x, y, z) as float32."""
    return offset_coordinate(px, nx), offset_coordinate(py, ny), offset_coordinate(pz, nz)


@njit(cache=True, parallel=True)
def offset_points(points, normals):
    """Offset a batch: points, normals (r, 3) float32 → (r, 3) float32."""
    r = points.shape[0]
    out = np.empty((r, 3), np.float32)
    for i in prange(r):
        for a in range(3):
            out[i, a] = offset_coordinate(points[i, a], normals[i, a])
    return out
