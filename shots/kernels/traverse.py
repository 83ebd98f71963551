"""BVH traversal: closest hit and any hit, one ray at a time or a batch in parallel.

Single-ray device functions, callable from any numba kernel (including inside its own prange):

    stack = new_stack()                       # once per thread/chunk, not per ray
    t, k, u, v = closest_hit_one(node_bounds, node_links, tri_verts, tri_ids,
                                 ox, oy, oz, dx, dy, dz, t_min, t_max, stack)
    hit = any_hit_one(node_bounds, node_links, tri_verts,
                      ox, oy, oz, dx, dy, dz, t_min, t_max, stack)

    node_bounds, node_links, tri_verts, tri_ids : the arrays of a ``shots.accel.Bvh`` (in that
        field order, so a kernel can take ``*bvh``).
    ox .. dz : float, ray origin and direction (direction need not be unit length, but non-zero;
        t is measured in units of its length).
    t_min, t_max : float, hits are accepted for t_min <= t <= t_max.
    stack : scratch from ``new_stack()``; reuse it for every ray of one thread.
    Returns of closest_hit_one: t (inf on a miss), k = ORIGINAL triangle index (-1 on a miss),
        u, v barycentrics with hit point (1-u-v)·p0 + u·p1 + v·p2 in the original vertex order.
    any_hit_one returns True when any triangle lies within [t_min, t_max] (shadow rays).

Traversal is ordered (nearest child first, farther children on a small fixed stack with their
entry distance so they are skipped once a closer hit is known). The slab test is the robust one
of Ize (JCGT 2(2), 2013): the exit distance is widened by 2·gamma(3) float32 ulps so rounding can
never cull a box a ray touches. Batched kernels split rays into fixed chunks (results do not
depend on the number of threads: every ray is computed alone and in the same way).
"""

from __future__ import annotations

import numpy as np
from numba import njit, prange

from shots.kernels.bvh_build import LEAF_BITS, MAX_LEAF, WIDTH
from shots.kernels.simd import slab4
from shots.kernels.triangle import intersect_triangle, ray_shear

assert WIDTH == 4  # the slab tests below are written out for four children

STACK_SIZE = 512
CHUNK = 64  # rays per parallel work item
# Ize 2013: 1 + 2·gamma(3), gamma(n) = n·eps / (1 - n·eps), eps = 2^-24 (float32 boxes).
_EPS32 = 2.0**-24
ROBUST = np.float32(1.0 + 2.0 * (3.0 * _EPS32) / (1.0 - 3.0 * _EPS32))
INF32 = np.float32(np.inf)


@njit(cache=True)
def new_stack():
    """Scratch for one thread's traversals: (2·STACK_SIZE,) float64 of (entry t, link) pairs."""
    return np.empty(2 * STACK_SIZE, np.float64)


@njit(cache=True, inline="always")
def slab(node_bounds, node, j, nx, ny, nz, ox, oy, oz, ix, iy, iz, t_lo, t_hi):
    """Entry distance of the ray into child ``j``'s box (float32), or +inf when it misses.

    A NaN (0·inf: an axis-parallel ray starting on a slab plane) leaves the interval unchanged,
    so each comparison has the possible NaN on the left."""
    lo_x = (node_bounds[node, nx, j] - ox) * ix
    hi_x = (node_bounds[node, nx ^ 1, j] - ox) * ix * ROBUST
    lo_y = (node_bounds[node, ny, j] - oy) * iy
    hi_y = (node_bounds[node, ny ^ 1, j] - oy) * iy * ROBUST
    lo_z = (node_bounds[node, nz, j] - oz) * iz
    hi_z = (node_bounds[node, nz ^ 1, j] - oz) * iz * ROBUST
    t_in = lo_x if lo_x > t_lo else t_lo
    t_in = lo_y if lo_y > t_in else t_in
    t_in = lo_z if lo_z > t_in else t_in
    t_out = hi_x if hi_x < t_hi else t_hi
    t_out = hi_y if hi_y < t_out else t_out
    t_out = hi_z if hi_z < t_out else t_out
    return t_in if t_in <= t_out else INF32


@njit(cache=True, error_model="numpy", inline="always")
def ray_setup(dx, dy, dz):
    """float32 reciprocal direction for the slab tests and the row of each axis's near plane
    (min when the direction is positive, max when negative; -0.0 counts as negative)."""
    ix, iy, iz = np.float32(1.0) / dx, np.float32(1.0) / dy, np.float32(1.0) / dz
    return ix, iy, iz, int(ix < 0.0), 2 + int(iy < 0.0), 4 + int(iz < 0.0)


@njit(cache=True, inline="always")
def sort2(ta, la, tb, lb):
    """Order two (distance, link) pairs by distance, without a branch."""
    swap = tb < ta
    return (tb if swap else ta), (lb if swap else la), (ta if swap else tb), (la if swap else lb)


@njit(cache=True, error_model="numpy")
def closest_hit_one(
    node_bounds, node_links, tri_verts, tri_ids, ox, oy, oz, dx, dy, dz, t_min, t_max, stack
):
    """Nearest hit along one ray; see the module docstring for arguments and returns."""
    fx, fy, fz = np.float32(ox), np.float32(oy), np.float32(oz)
    ix, iy, iz, nx, ny, nz = ray_setup(np.float32(dx), np.float32(dy), np.float32(dz))
    kx, ky, kz, okx, oky, okz, sx, sy, sz = ray_shear(
        np.float64(ox), np.float64(oy), np.float64(oz),
        np.float64(dx), np.float64(dy), np.float64(dz),
    )  # fmt: skip
    t_lo = np.float32(t_min)
    t_best, u_best, v_best, k_best = np.float64(t_max), 0.0, 0.0, -1
    t_hi = np.float32(t_best) * ROBUST
    sp = 0
    link = 0
    while True:
        if link >= 0:
            # Inner node: slab-test the four children, sort them (misses sort last at +inf),
            # continue with the nearest and push the other hits far to near.
            t0, t1, t2, t3 = slab4(node_bounds, link, nx, ny, nz, fx, fy, fz, ix, iy, iz, t_lo, t_hi,
                                   ROBUST)  # fmt: skip
            n_hit = int(t0 < INF32) + int(t1 < INF32) + int(t2 < INF32) + int(t3 < INF32)
            if n_hit > 0:
                l0, l1 = node_links[link, 0], node_links[link, 1]
                l2, l3 = node_links[link, 2], node_links[link, 3]
                # Sorting network for four elements.
                t0, l0, t1, l1 = sort2(t0, l0, t1, l1)
                t2, l2, t3, l3 = sort2(t2, l2, t3, l3)
                t0, l0, t2, l2 = sort2(t0, l0, t2, l2)
                t1, l1, t3, l3 = sort2(t1, l1, t3, l3)
                t1, l1, t2, l2 = sort2(t1, l1, t2, l2)
                stack[sp], stack[sp + 1] = t3, l3
                sp += 2 * int(n_hit > 3)
                stack[sp], stack[sp + 1] = t2, l2
                sp += 2 * int(n_hit > 2)
                stack[sp], stack[sp + 1] = t1, l1
                sp += 2 * int(n_hit > 1)
                link = l0
                continue
        else:
            code = ~link
            start = code >> LEAF_BITS
            for k in range(start, start + (code & MAX_LEAF)):
                t, u, v = intersect_triangle(
                    tri_verts, k, kx, ky, kz, okx, oky, okz, sx, sy, sz, t_min, t_best
                )
                # Closer, or the first hit exactly at t_max.
                better = (t < t_best) | ((k_best < 0) & (t == t_best) & (t < np.inf))
                t_best = t if better else t_best
                u_best = u if better else u_best
                v_best = v if better else v_best
                k_best = k if better else k_best
            t_hi = np.float32(t_best) * ROBUST
        # Pop the next child that may still hold a closer hit.
        link = 0
        while sp > 0:
            sp -= 2
            if stack[sp] <= t_hi:
                link = int(stack[sp + 1])
                break
        if link == 0:
            break
    if k_best < 0:
        return np.inf, -1, 0.0, 0.0
    return t_best, tri_ids[k_best], u_best, v_best


@njit(cache=True, error_model="numpy")
def any_hit_one(node_bounds, node_links, tri_verts, ox, oy, oz, dx, dy, dz, t_min, t_max, stack):
    """True when any triangle lies within [t_min, t_max] along the ray (shadow rays)."""
    fx, fy, fz = np.float32(ox), np.float32(oy), np.float32(oz)
    ix, iy, iz, nx, ny, nz = ray_setup(np.float32(dx), np.float32(dy), np.float32(dz))
    kx, ky, kz, okx, oky, okz, sx, sy, sz = ray_shear(
        np.float64(ox), np.float64(oy), np.float64(oz),
        np.float64(dx), np.float64(dy), np.float64(dz),
    )  # fmt: skip
    t_lo = np.float32(t_min)
    t_hi = np.float32(t_max) * ROBUST
    sp = 0
    link = 0
    while True:
        if link >= 0:
            # Push every child the ray enters (no ordering: any hit will do).
            t0, t1, t2, t3 = slab4(node_bounds, link, nx, ny, nz, fx, fy, fz, ix, iy, iz, t_lo, t_hi,
                                   ROBUST)  # fmt: skip
            stack[sp] = node_links[link, 0]
            sp += int(t0 < INF32)
            stack[sp] = node_links[link, 1]
            sp += int(t1 < INF32)
            stack[sp] = node_links[link, 2]
            sp += int(t2 < INF32)
            stack[sp] = node_links[link, 3]
            sp += int(t3 < INF32)
        else:
            code = ~link
            start = code >> LEAF_BITS
            for k in range(start, start + (code & MAX_LEAF)):
                t, u, v = intersect_triangle(
                    tri_verts, k, kx, ky, kz, okx, oky, okz, sx, sy, sz, t_min, t_max
                )
                if t < np.inf:
                    return True
        if sp == 0:
            return False
        sp -= 1
        link = int(stack[sp])


@njit(cache=True, parallel=True, error_model="numpy")
def closest_hits(node_bounds, node_links, tri_verts, tri_ids, origins, directions, t_min, t_max):
    """Closest hits of a batch: origins, directions (r, 3) float32; t_min, t_max (r,) float32.

    Returns t (r,) float32, tri (r,) int32, u (r,) float32, v (r,) float32.
    """
    r = origins.shape[0]
    t_out = np.empty(r, np.float32)
    tri_out = np.empty(r, np.int32)
    u_out = np.empty(r, np.float32)
    v_out = np.empty(r, np.float32)
    for chunk in prange((r + CHUNK - 1) // CHUNK):
        stack = new_stack()
        for i in range(chunk * CHUNK, min(r, (chunk + 1) * CHUNK)):
            t, k, u, v = closest_hit_one(
                node_bounds, node_links, tri_verts, tri_ids,
                origins[i, 0], origins[i, 1], origins[i, 2],
                directions[i, 0], directions[i, 1], directions[i, 2],
                t_min[i], t_max[i], stack,
            )  # fmt: skip
            t_out[i], tri_out[i], u_out[i], v_out[i] = t, k, u, v
    return t_out, tri_out, u_out, v_out


@njit(cache=True, parallel=True, error_model="numpy")
def any_hits(node_bounds, node_links, tri_verts, origins, directions, t_min, t_max):
    """Occlusion of a batch: (r,) bool, True when something lies within [t_min, t_max]."""
    r = origins.shape[0]
    out = np.empty(r, np.bool_)
    for chunk in prange((r + CHUNK - 1) // CHUNK):
        stack = new_stack()
        for i in range(chunk * CHUNK, min(r, (chunk + 1) * CHUNK)):
            out[i] = any_hit_one(
                node_bounds, node_links, tri_verts,
                origins[i, 0], origins[i, 1], origins[i, 2],
                directions[i, 0], directions[i, 1], directions[i, 2],
                t_min[i], t_max[i], stack,
            )  # fmt: skip
    return out
