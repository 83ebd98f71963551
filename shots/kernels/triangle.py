"""Watertight ray–triangle intersection (Woop, Benthin & Wald, JCGT 2(1), 2013).

The ray is transformed so that its direction becomes +z (permute the dominant axis to z, then
shear), which reduces the test to 2-D edge functions of the sheared vertices. A shared edge yields
exactly the negated edge function in both triangles, so a ray can never slip between them.
We evaluate in float64 throughout (the paper's fallback precision); vertices are stored float32.

The code is written without data-dependent branches (selects instead of ``if``): for incoherent
rays a mispredicted branch costs more than the arithmetic it would skip.
"""

from __future__ import annotations

import numpy as np
from numba import njit


@njit(cache=True, inline="always")
def pick(k, x, y, z):
    """Component ``k`` (0, 1, 2) of (x, y, z), without a branch."""
    return z if k == 2 else (y if k == 1 else x)


@njit(cache=True, error_model="numpy", inline="always")
def ray_shear(ox, oy, oz, dx, dy, dz):
    """Per-ray constants of the watertight test (float64 in, float64 out).

    Returns
    -------
    kx, ky, kz : int, axis permutation (kz = dominant axis of the direction; kx, ky swapped when
        the direction points down kz, which keeps the triangle winding).
    okx, oky, okz : float, the origin in that order.
    sx, sy, sz : float, shear so that the direction becomes (0, 0, 1).
    """
    ax, ay, az = abs(dx), abs(dy), abs(dz)
    kz = 1 if ay > ax else 0
    kz = 2 if az > max(ax, ay) else kz
    kx = 0 if kz == 2 else kz + 1
    ky = 0 if kx == 2 else kx + 1
    dkz = pick(kz, dx, dy, dz)
    flip = dkz < 0.0
    kx, ky = (ky if flip else kx), (kx if flip else ky)
    return (
        kx, ky, kz,
        pick(kx, ox, oy, oz), pick(ky, ox, oy, oz), pick(kz, ox, oy, oz),
        pick(kx, dx, dy, dz) / dkz, pick(ky, dx, dy, dz) / dkz, 1.0 / dkz,
    )  # fmt: skip


@njit(cache=True, error_model="numpy", inline="always")
def intersect_triangle(verts, i, kx, ky, kz, okx, oky, okz, sx, sy, sz, t_min, t_max):
    """Intersect one ray with triangle ``i`` of ``verts``.

    Parameters
    ----------
    verts : (n, 9) float32, rows p0x p0y p0z p1x p1y p1z p2x p2y p2z.
    i : int, row of ``verts``.
    kx .. sz : the ray's constants from ``ray_shear``.
    t_min, t_max : float, accepted distance interval (inclusive), in units of the direction length.

    Returns
    -------
    t, u, v : float. ``t = inf`` on a miss. The hit point is (1-u-v)·p0 + u·p1 + v·p2.
    """
    az = verts[i, kz] - okz
    bz = verts[i, 3 + kz] - okz
    cz = verts[i, 6 + kz] - okz
    ax = (verts[i, kx] - okx) - sx * az
    ay = (verts[i, ky] - oky) - sy * az
    bx = (verts[i, 3 + kx] - okx) - sx * bz
    by = (verts[i, 3 + ky] - oky) - sy * bz
    cx = (verts[i, 6 + kx] - okx) - sx * cz
    cy = (verts[i, 6 + ky] - oky) - sy * cz
    # Edge functions: e(P, Q) = Qx·Py − Qy·Px; the neighbour sees e(Q, P) = −e(P, Q) exactly.
    eu = cx * by - cy * bx
    ev = ax * cy - ay * cx
    ew = bx * ay - by * ax
    det = eu + ev + ew
    inv = 1.0 / det
    t = (eu * az + ev * bz + ew * cz) * sz * inv
    # Inside when no two edge functions have opposite signs (zero counts as either side).
    outside = ((eu < 0.0) | (ev < 0.0) | (ew < 0.0)) & ((eu > 0.0) | (ev > 0.0) | (ew > 0.0))
    hit = (not outside) & (det != 0.0) & (t >= t_min) & (t <= t_max)
    return (t if hit else np.inf), ev * inv, ew * inv
