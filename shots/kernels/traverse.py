"""BVH traversal: closest hit and any hit, one ray at a time or a batch in parallel.

Single-ray device functions, callable from any numba kernel (including inside its own prange):

    stack = new_stack()                       # once per thread/chunk, not per ray
    t, k, u, v = closest_hit_one(node_bounds, node_links, tri_verts, tri_ids,
                                 ox, oy, oz, dx, dy, dz, t_min, t_max, stack)
    hit = any_hit_one(node_bounds, node_links, tri_verts,
                      ox, oy, oz, dx, dy, dz, t_min, t_max, stack)

    node_bounds, node_links, tri_verts, tri_ids : the arrays of a ``shots.accel.Bvh`` (in that
        field order, so a kernel can take ``*bvh``; node_links is an int32 view of the node
        records, child links in row LINK_ROW).
    ox .. dz : float, ray origin and direction (direction need not be unit length, but non-zero;
        t is measured in units of its length).
    t_min, t_max : float, hits are accepted for t_min <= t <= t_max.
    stack : scratch from ``new_stack()``; reuse it for every ray of one thread.
    Returns of closest_hit_one: t (inf on a miss), k = ORIGINAL triangle index (-1 on a miss),
        u, v barycentrics with hit point (1-u-v)·p0 + u·p1 + v·p2 in the original vertex order.
    any_hit_one returns True when any triangle lies within [t_min, t_max] (shadow rays).

Batches (``closest_hits``, ``any_hits``, behind ``shots.accel``) split the rays into fixed chunks
over threads and keep LANES rays per thread in flight (see "batches" below), except that
``closest_hits`` traces a chunk ray after ray when its rays are coherent (``is_coherent``) or the
whole tree fits in a core's cache (``fits_in_cache``). Either
way each ray gets exactly what the single-ray functions return, independent of the number of
threads.

Traversal is ordered: nearest child first, farther children on a small fixed stack with their
entry distance, so they are skipped once a closer hit is known. A stack entry is one int64 key
(``simd.entry_key``: distance bits above, link below), so the children sort with integer
min/max, which compile to conditional moves rather than branches. The four child boxes of a node
are tested at once (``simd.slab4``) with the robust slab test of Ize (JCGT 2(2), 2013; as in
Pharr, Jakob & Humphreys, PBR 3rd ed. §3.9.2): exit distances are widened by 1 + 2·gamma(3) so
float32 rounding never culls a box the ray touches. A leaf's triangles are tested four at a time
(``simd.triangles4``, the float64 watertight test of ``shots.kernels.triangle`` on <4 x double>
lanes), reading the leaf blocks ``bvh_build.gather_vertices`` lays out. Data-dependent choices are written as selects
rather than branches where that is cheap: mispredicted branches dominate incoherent traversal.
"""

from __future__ import annotations

import numpy as np
from numba import njit, prange

from shots.kernels.bvh_build import BLOCK, LEAF_BITS, LINK_ROW, MAX_LEAF, WIDTH
from shots.kernels.simd import child_keys, entry_key, prefetch_row, slab4, triangles4
from shots.kernels.triangle import ray_shear

assert WIDTH == 4  # the slab tests below are written out for four children
assert BLOCK == 4  # and the triangle tests for four triangles

# Stack entries per ray: at most 3 per tree level, and the build bounds the depth by
# SAH_MAX_DEPTH + log2(triangles) + 1 <= 92 (bvh_build), so 3·92 + 3 fit.
STACK_SIZE = 320
CHUNK = 1024  # rays per parallel work item
LANES = 16  # rays in flight per thread in the batch kernels
LANE_STACK = STACK_SIZE  # stack entries per lane
# A chunk is coherent when most consecutive rays turn by less than COHERENT_STEP radians (and move
# their origin by less than COHERENT_STEP x the scene's size). Measured with bench/raycast.py's
# cameras: one ray after another wins over LANES in flight at 512 px over 40 degrees (0.0014 rad
# per pixel, 1.06-1.21x) and, on a 2-core Xeon with 2 MB of level-2 cache per core, at 256 px
# too (0.0027 rad: 1.06-1.08x on trees up to 3 MB, 1.00-1.05x on 5-11 MB; one thread, CPU
# time): a ray that retraces its predecessor's path finds it in cache and the branch predictor
# primed.
# That needs the tree in cache: with 32 MB of L3 cache shared by two cores it lost at 60 MB (a
# million triangles, 0.71-0.76x, where overlapping the cache misses of LANES rays pays) and won
# at 12 MB; on the Xeon above (2 MB of level-2 cache per core) 256 px camera rays lost 8% at 5.9 MB
# (bench/raycast.py --quick, grid 100k) and won at 1.3 and 2.7 MB.
COHERENT_STEP = 4e-3
COHERENT_SHARE = 0.75  # share of consecutive pairs that must be that close (scanlines wrap)
COHERENT_SAMPLE = 8  # pairs judged: every 8th (the check costs 1/8 of judging them all)
IN_TURN_MAX_BYTES = 4 << 20  # largest tree (nodes and vertices) traced in turn
# Any rays, coherent or not, go one after another through a tree this small: with nothing to
# wait for, keeping LANES rays in flight is pure overhead. Random rays, one thread: 1.14-1.18x
# at 0.28 and 0.52 MB, 0.78x at 1.6 MB and 0.56x at 4.5 MB (the L2 cache is 1 MB per core
# here).
IN_CACHE_BYTES = 768 << 10
# Ize 2013: 1 + 2·gamma(3), gamma(n) = n·eps / (1 - n·eps), eps = 2^-24 (float32 boxes).
_EPS32 = 2.0**-24
ROBUST = np.float32(1.0 + 2.0 * (3.0 * _EPS32) / (1.0 - 3.0 * _EPS32))
INF32 = np.float32(np.inf)
ROOT = 0
NONE = -1  # "no node": the link of an empty child slot, which traversal never enters
MISS_KEY = 0x7F800000 << 32  # entry keys at or above this are misses (entry distance +inf)


@njit(cache=True)
def new_stack():
    """Scratch for one thread's traversals: (STACK_SIZE,) int64 entry keys."""
    return np.empty(STACK_SIZE, np.int64)


@njit(cache=True, error_model="numpy", inline="always")
def ray_setup(dx, dy, dz):
    """float32 reciprocal direction for the slab tests and the row of each axis's near plane
    (min when the direction is positive, max when negative; -0.0 counts as negative)."""
    ix, iy, iz = np.float32(1.0) / dx, np.float32(1.0) / dy, np.float32(1.0) / dz
    return ix, iy, iz, int(ix < 0.0), 2 + int(iy < 0.0), 4 + int(iz < 0.0)


@njit(cache=True, inline="always")
def sort2(a, b):
    """Order two entry keys, without a branch."""
    return min(a, b), max(a, b)


@njit(cache=True, inline="always")
def key_link(key):
    """The link held in the low 32 bits of an entry key."""
    return ((key & 0xFFFFFFFF) ^ 0x80000000) - 0x80000000


@njit(cache=True, inline="always")
def visit_ordered(node_bounds, node, nx, ny, nz, fx, fy, fz, ix, iy, iz, t_lo, t_hi, stack, sp):
    """Slab-test the four children of an inner node, sort them by entry distance (misses sort
    last, at +inf), push the hit ones but the nearest onto ``stack`` far to near as entry keys,
    and return (nearest hit child or NONE, new stack top)."""
    k0, k1, k2, k3 = child_keys(node_bounds, node, nx, ny, nz, fx, fy, fz, ix, iy, iz, t_lo,
                                t_hi, ROBUST, LINK_ROW)  # fmt: skip
    # Sorting network for four elements.
    k0, k1 = sort2(k0, k1)
    k2, k3 = sort2(k2, k3)
    k0, k2 = sort2(k0, k2)
    k1, k3 = sort2(k1, k3)
    k1, k2 = sort2(k1, k2)
    if k0 >= MISS_KEY:
        return NONE, sp
    stack[sp] = k3
    sp += int(k3 < MISS_KEY)
    stack[sp] = k2
    sp += int(k2 < MISS_KEY)
    stack[sp] = k1
    sp += int(k1 < MISS_KEY)
    return key_link(k0), sp


@njit(cache=True, inline="always")
def pop_ordered(stack, bottom, sp, t_hi):
    """Pop the next entry above ``bottom`` whose entry distance is still <= t_hi; returns
    (link or NONE, new stack top)."""
    limit = entry_key(t_hi, NONE)  # the largest key with distance t_hi
    while sp > bottom:
        sp -= 1
        if stack[sp] <= limit:
            return key_link(stack[sp]), sp
    return NONE, sp


@njit(cache=True, inline="always")
def block_hits(tri_verts, first, end, kx, ky, kz, okx, oky, okz, sx, sy, sz, t_min, t_max):
    """``simd.triangles4`` on the block of a leaf that starts at triangle ``first`` (the leaf
    ends before ``end``)."""
    return triangles4(tri_verts, first, min(BLOCK, end - first), kx, ky, kz, okx, oky, okz, sx,
                      sy, sz, np.float64(t_min), np.float64(t_max))  # fmt: skip


@njit(cache=True, inline="always")
def take_closer(t, u, v, k, t_best, u_best, v_best, k_best):
    """The better of a triangle's hit and the best so far: closer, or the first hit exactly at
    t_max."""
    better = (t < t_best) | ((k_best < 0) & (t == t_best) & (t < np.inf))
    return ((t if better else t_best), (u if better else u_best), (v if better else v_best),
            (k if better else k_best))  # fmt: skip


@njit(cache=True, inline="always")
def visit_leaf_closest(tri_verts, link, kx, ky, kz, okx, oky, okz, sx, sy, sz, t_min, t_best,
                       u_best, v_best, k_best):  # fmt: skip
    """Test the triangles of a leaf, four at a time; returns the updated (t, u, v, leaf-order
    index) best hit. Lanes are taken in leaf order, so ties resolve as one by one would."""
    code = ~link
    start = code >> LEAF_BITS
    end = start + (code & MAX_LEAF)
    for first in range(start, end, BLOCK):
        t0, t1, t2, t3, u0, u1, u2, u3, v0, v1, v2, v3 = block_hits(
            tri_verts, first, end, kx, ky, kz, okx, oky, okz, sx, sy, sz, t_min, t_best
        )
        t_best, u_best, v_best, k_best = take_closer(t0, u0, v0, first, t_best, u_best, v_best,
                                                     k_best)  # fmt: skip
        t_best, u_best, v_best, k_best = take_closer(t1, u1, v1, first + 1, t_best, u_best,
                                                     v_best, k_best)  # fmt: skip
        t_best, u_best, v_best, k_best = take_closer(t2, u2, v2, first + 2, t_best, u_best,
                                                     v_best, k_best)  # fmt: skip
        t_best, u_best, v_best, k_best = take_closer(t3, u3, v3, first + 3, t_best, u_best,
                                                     v_best, k_best)  # fmt: skip
    return t_best, u_best, v_best, k_best


@njit(cache=True, inline="always")
def visit_any(node_bounds, node_links, node, nx, ny, nz, fx, fy, fz, ix, iy, iz, t_lo, t_hi,
              stack, sp):  # fmt: skip
    """Push every child of an inner node that the ray enters (any hit will do: no order)."""
    t0, t1, t2, t3 = slab4(node_bounds, node, nx, ny, nz, fx, fy, fz, ix, iy, iz, t_lo, t_hi,
                           ROBUST)  # fmt: skip
    stack[sp] = node_links[node, LINK_ROW, 0]
    sp += int(t0 < INF32)
    stack[sp] = node_links[node, LINK_ROW, 1]
    sp += int(t1 < INF32)
    stack[sp] = node_links[node, LINK_ROW, 2]
    sp += int(t2 < INF32)
    stack[sp] = node_links[node, LINK_ROW, 3]
    sp += int(t3 < INF32)
    return sp


@njit(cache=True, inline="always")
def leaf_occludes(tri_verts, link, kx, ky, kz, okx, oky, okz, sx, sy, sz, t_min, t_max):
    """True when a triangle of the leaf lies within [t_min, t_max]."""
    code = ~link
    start = code >> LEAF_BITS
    end = start + (code & MAX_LEAF)
    for first in range(start, end, BLOCK):
        t0, t1, t2, t3 = block_hits(tri_verts, first, end, kx, ky, kz, okx, oky, okz, sx, sy, sz,
                                    t_min, t_max)[:4]  # fmt: skip
        if min(min(t0, t1), min(t2, t3)) < np.inf:
            return True
    return False


@njit(cache=True, error_model="numpy", inline="always")
def prepare_ray(ox, oy, oz, dx, dy, dz):
    """Everything traversal needs per ray: float32 origin and reciprocal direction with near-plane
    rows for the boxes, float64 shear constants for the triangles."""
    ix, iy, iz, nx, ny, nz = ray_setup(np.float32(dx), np.float32(dy), np.float32(dz))
    kx, ky, kz, okx, oky, okz, sx, sy, sz = ray_shear(
        np.float64(ox), np.float64(oy), np.float64(oz),
        np.float64(dx), np.float64(dy), np.float64(dz),
    )  # fmt: skip
    return (np.float32(ox), np.float32(oy), np.float32(oz), ix, iy, iz, nx, ny, nz,
            kx, ky, kz, okx, oky, okz, sx, sy, sz)  # fmt: skip


@njit(cache=True, error_model="numpy")
def closest_hit_one(
    node_bounds, node_links, tri_verts, tri_ids, ox, oy, oz, dx, dy, dz, t_min, t_max, stack
):
    """Nearest hit along one ray; see the module docstring for arguments and returns."""
    return trace_closest(node_bounds, node_links, tri_verts, tri_ids, ox, oy, oz, dx, dy, dz,
                         t_min, t_max, stack)  # fmt: skip


@njit(cache=True, error_model="numpy", inline="always")
def trace_closest(
    node_bounds, node_links, tri_verts, tri_ids, ox, oy, oz, dx, dy, dz, t_min, t_max, stack
):
    """closest_hit_one, inlined where it runs in a loop over rays."""
    fx, fy, fz, ix, iy, iz, nx, ny, nz, kx, ky, kz, okx, oky, okz, sx, sy, sz = prepare_ray(
        ox, oy, oz, dx, dy, dz
    )
    t_lo, t_min = np.float32(t_min), np.float64(t_min)
    t_best, u_best, v_best, k_best = np.float64(t_max), 0.0, 0.0, -1
    t_hi = np.float32(t_best) * ROBUST
    link, sp = ROOT, 0
    while True:
        if link == NONE:
            link, sp = pop_ordered(stack, 0, sp, t_hi)
            if link == NONE:
                break
        elif link >= 0:
            link, sp = visit_ordered(node_bounds, link, nx, ny, nz, fx, fy, fz, ix, iy, iz, t_lo,
                                     t_hi, stack, sp)  # fmt: skip
        else:
            t_best, u_best, v_best, k_best = visit_leaf_closest(
                tri_verts, link, kx, ky, kz, okx, oky, okz, sx, sy, sz, t_min, t_best, u_best,
                v_best, k_best,
            )  # fmt: skip
            t_hi = np.float32(t_best) * ROBUST
            link = NONE
    if k_best < 0:
        return np.inf, -1, 0.0, 0.0
    return t_best, tri_ids[k_best], u_best, v_best


@njit(cache=True, error_model="numpy")
def any_hit_one(node_bounds, node_links, tri_verts, ox, oy, oz, dx, dy, dz, t_min, t_max, stack):
    """True when any triangle lies within [t_min, t_max] along the ray (shadow rays)."""
    fx, fy, fz, ix, iy, iz, nx, ny, nz, kx, ky, kz, okx, oky, okz, sx, sy, sz = prepare_ray(
        ox, oy, oz, dx, dy, dz
    )
    t_lo, t_hi = np.float32(t_min), np.float32(t_max) * ROBUST
    t_min, t_max = np.float64(t_min), np.float64(t_max)
    stack[0] = ROOT
    sp = 1
    while sp > 0:
        sp -= 1
        link = stack[sp]
        if link >= 0:
            sp = visit_any(node_bounds, node_links, link, nx, ny, nz, fx, fy, fz, ix, iy, iz, t_lo,
                           t_hi, stack, sp)  # fmt: skip
        elif leaf_occludes(tri_verts, link, kx, ky, kz, okx, oky, okz, sx, sy, sz, t_min, t_max):
            return True
    return False


# --- batches: several rays per thread in flight ------------------------------------------------
# One ray's traversal is a chain of dependent memory reads. A batch kernel keeps LANES rays per
# thread in flight and advances them in turn, one node or leaf per step, prefetching what each
# ray reads next, so cache misses of different rays overlap. Every ray still runs the very same
# arithmetic as closest_hit_one / any_hit_one, so results are identical bit for bit.

# Lane state: float32 columns, float64 columns, int64 columns.
F_OX, F_OY, F_OZ, F_IX, F_IY, F_IZ, F_TLO, F_THI = range(8)
D_OKX, D_OKY, D_OKZ, D_SX, D_SY, D_SZ, D_TMIN, D_TMAX, D_T, D_U, D_V = range(11)
I_RAY, I_LINK, I_SP, I_K, I_NX, I_NY, I_NZ, I_KX, I_KY, I_KZ = range(10)


@njit(cache=True, inline="always")
def prefetch_link(node_bounds, tri_verts, link):
    """Start fetching what visiting ``link`` will read (a node record or a leaf's triangles)."""
    prefetch_row(node_bounds, max(link, 0))
    prefetch_row(tri_verts, max((~link) >> LEAF_BITS, 0))  # a leaf's first block starts its row


@njit(cache=True, error_model="numpy")
def start_lane(lane, i, origins, directions, t_min, t_max, fs, ds, ls):
    """Load ray ``i`` into ``lane``; its traversal starts at the root."""
    fx, fy, fz, ix, iy, iz, nx, ny, nz, kx, ky, kz, okx, oky, okz, sx, sy, sz = prepare_ray(
        origins[i, 0], origins[i, 1], origins[i, 2],
        directions[i, 0], directions[i, 1], directions[i, 2],
    )  # fmt: skip
    fs[lane, F_OX], fs[lane, F_OY], fs[lane, F_OZ] = fx, fy, fz
    fs[lane, F_IX], fs[lane, F_IY], fs[lane, F_IZ] = ix, iy, iz
    fs[lane, F_TLO] = np.float32(t_min[i])
    fs[lane, F_THI] = np.float32(t_max[i]) * ROBUST
    ds[lane, D_OKX], ds[lane, D_OKY], ds[lane, D_OKZ] = okx, oky, okz
    ds[lane, D_SX], ds[lane, D_SY], ds[lane, D_SZ] = sx, sy, sz
    ds[lane, D_TMIN], ds[lane, D_TMAX] = t_min[i], t_max[i]
    ds[lane, D_T], ds[lane, D_U], ds[lane, D_V] = np.float64(t_max[i]), 0.0, 0.0
    ls[lane, I_RAY], ls[lane, I_LINK], ls[lane, I_SP], ls[lane, I_K] = i, ROOT, lane * LANE_STACK, -1
    ls[lane, I_NX], ls[lane, I_NY], ls[lane, I_NZ] = nx, ny, nz
    ls[lane, I_KX], ls[lane, I_KY], ls[lane, I_KZ] = kx, ky, kz


@njit(cache=True, error_model="numpy")
def closest_hits_range(node_bounds, node_links, tri_verts, tri_ids, origins, directions, t_min,
                       t_max, first, last, t_out, tri_out, u_out, v_out):  # fmt: skip
    """Closest hits of rays first..last-1, LANES at a time (see above)."""
    stack = np.empty(LANES * LANE_STACK, np.int64)
    fs = np.empty((LANES, 8), np.float32)
    ds = np.empty((LANES, 11), np.float64)
    ls = np.empty((LANES, 10), np.int64)
    following = first
    for lane in range(LANES):
        ls[lane, I_RAY] = -1
        if following < last:
            start_lane(lane, following, origins, directions, t_min, t_max, fs, ds, ls)
            following += 1
    active = min(LANES, last - first)
    while active > 0:
        for lane in range(LANES):
            i = ls[lane, I_RAY]
            if i < 0:
                continue
            link, sp, t_hi = ls[lane, I_LINK], ls[lane, I_SP], fs[lane, F_THI]
            if link == NONE:
                link, sp = pop_ordered(stack, lane * LANE_STACK, sp, t_hi)
                if link == NONE:  # done: write the result, take the next ray
                    k = ls[lane, I_K]
                    t_out[i] = ds[lane, D_T] if k >= 0 else np.inf
                    tri_out[i] = tri_ids[k] if k >= 0 else -1
                    u_out[i] = ds[lane, D_U] if k >= 0 else 0.0
                    v_out[i] = ds[lane, D_V] if k >= 0 else 0.0
                    if following < last:
                        start_lane(lane, following, origins, directions, t_min, t_max, fs, ds, ls)
                        following += 1
                        prefetch_row(node_bounds, ROOT)
                    else:
                        ls[lane, I_RAY] = -1
                        active -= 1
                    continue
            if link >= 0:  # ROOT or an inner node
                link, sp = visit_ordered(
                    node_bounds, link, ls[lane, I_NX], ls[lane, I_NY], ls[lane, I_NZ],
                    fs[lane, F_OX], fs[lane, F_OY], fs[lane, F_OZ], fs[lane, F_IX],
                    fs[lane, F_IY], fs[lane, F_IZ], fs[lane, F_TLO], t_hi, stack, sp,
                )  # fmt: skip
            else:
                t, u, v, k = visit_leaf_closest(
                    tri_verts, link, ls[lane, I_KX], ls[lane, I_KY], ls[lane, I_KZ],
                    ds[lane, D_OKX], ds[lane, D_OKY], ds[lane, D_OKZ], ds[lane, D_SX],
                    ds[lane, D_SY], ds[lane, D_SZ], ds[lane, D_TMIN], ds[lane, D_T],
                    ds[lane, D_U], ds[lane, D_V], ls[lane, I_K],
                )  # fmt: skip
                ds[lane, D_T], ds[lane, D_U], ds[lane, D_V], ls[lane, I_K] = t, u, v, k
                fs[lane, F_THI] = np.float32(t) * ROBUST
                link = NONE
            ls[lane, I_LINK], ls[lane, I_SP] = link, sp
            if link == NONE and sp > lane * LANE_STACK:
                link = key_link(stack[sp - 1])  # what the next step will probably pop
            prefetch_link(node_bounds, tri_verts, link)


@njit(cache=True, error_model="numpy")
def any_hits_range(node_bounds, node_links, tri_verts, origins, directions, t_min, t_max, first,
                   last, out):  # fmt: skip
    """Occlusion of rays first..last-1, LANES at a time (see above)."""
    stack = np.empty(LANES * LANE_STACK, np.int64)
    fs = np.empty((LANES, 8), np.float32)
    ds = np.empty((LANES, 11), np.float64)
    ls = np.empty((LANES, 10), np.int64)
    following = first
    for lane in range(LANES):
        ls[lane, I_RAY] = -1
        if following < last:
            start_lane(lane, following, origins, directions, t_min, t_max, fs, ds, ls)
            following += 1
    active = min(LANES, last - first)
    while active > 0:
        for lane in range(LANES):
            i = ls[lane, I_RAY]
            if i < 0:
                continue
            link, sp, bottom = ls[lane, I_LINK], ls[lane, I_SP], lane * LANE_STACK
            if link == ROOT:  # a fresh ray
                ls[lane, I_LINK] = NONE
            else:
                sp -= 1
                link = stack[sp]
            occluded = False
            if link >= 0:
                sp = visit_any(node_bounds, node_links, link, ls[lane, I_NX], ls[lane, I_NY],
                               ls[lane, I_NZ], fs[lane, F_OX], fs[lane, F_OY], fs[lane, F_OZ],
                               fs[lane, F_IX], fs[lane, F_IY], fs[lane, F_IZ], fs[lane, F_TLO],
                               fs[lane, F_THI], stack, sp)  # fmt: skip
            else:
                occluded = leaf_occludes(
                    tri_verts, link, ls[lane, I_KX], ls[lane, I_KY], ls[lane, I_KZ],
                    ds[lane, D_OKX], ds[lane, D_OKY], ds[lane, D_OKZ], ds[lane, D_SX],
                    ds[lane, D_SY], ds[lane, D_SZ], ds[lane, D_TMIN], ds[lane, D_TMAX],
                )  # fmt: skip
            if occluded or sp == bottom:  # done: write the result, take the next ray
                out[i] = occluded
                if following < last:
                    start_lane(lane, following, origins, directions, t_min, t_max, fs, ds, ls)
                    following += 1
                    prefetch_row(node_bounds, ROOT)
                else:
                    ls[lane, I_RAY] = -1
                    active -= 1
                continue
            ls[lane, I_SP] = sp
            prefetch_link(node_bounds, tri_verts, stack[sp - 1])


@njit(cache=True)
def fits_in_cache(node_bounds, tri_verts):
    """Whether the tree (nodes and vertices) is at most IN_CACHE_BYTES."""
    return 4 * (node_bounds.size + tri_verts.size) <= IN_CACHE_BYTES


@njit(cache=True, error_model="numpy")
def coherence_scale(node_bounds, tri_verts):
    """The length ``is_coherent`` measures origin moves in: the diagonal of the root's box. 0 (no
    chunk is coherent) for an empty tree, or one too large to trace in turn (IN_TURN_MAX_BYTES)."""
    if 4 * (node_bounds.size + tri_verts.size) > IN_TURN_MAX_BYTES:
        return 0.0
    size = 0.0
    for axis in range(3):
        lo = np.float64(node_bounds[ROOT, 2 * axis].min())
        hi = np.float64(node_bounds[ROOT, 2 * axis + 1].max())
        size += (hi - lo) ** 2 if hi >= lo else 0.0
    return np.sqrt(size)


@njit(cache=True, error_model="numpy", inline="always")
def unit_direction(directions, i):
    """Direction of ray ``i`` scaled to unit length (float64)."""
    dx, dy, dz = np.float64(directions[i, 0]), np.float64(directions[i, 1]), directions[i, 2]
    unit = 1.0 / np.sqrt(dx * dx + dy * dy + np.float64(dz) * dz)
    return dx * unit, dy * unit, dz * unit


@njit(cache=True, error_model="numpy")
def is_coherent(origins, directions, first, last, scale):
    """Whether rays first..last-1 come as a coherent stream (see COHERENT_STEP), judged on every
    COHERENT_SAMPLE-th pair of consecutive rays; ``scale`` from ``coherence_scale``."""
    if scale == 0.0:
        return False
    close, pairs, reach = 0, 0, COHERENT_STEP * scale
    for i in range(first + 1, last, COHERENT_SAMPLE):
        ax, ay, az = unit_direction(directions, i - 1)
        bx, by, bz = unit_direction(directions, i)
        turn = (bx - ax) ** 2 + (by - ay) ** 2 + (bz - az) ** 2  # chord² ≈ angle²
        move = 0.0
        for axis in range(3):
            move += (np.float64(origins[i, axis]) - origins[i - 1, axis]) ** 2
        close += int(turn < COHERENT_STEP**2) & int(move <= reach * reach)
        pairs += 1
    return pairs > 0 and close >= COHERENT_SHARE * pairs


@njit(cache=True, error_model="numpy")
def closest_hits_in_turn(node_bounds, node_links, tri_verts, tri_ids, origins, directions, t_min,
                         t_max, first, last, t_out, tri_out, u_out, v_out):  # fmt: skip
    """Closest hits of rays first..last-1, one ray after another."""
    stack = new_stack()
    for i in range(first, last):
        o, d = origins[i], directions[i]
        t_out[i], tri_out[i], u_out[i], v_out[i] = trace_closest(
            node_bounds, node_links, tri_verts, tri_ids, o[0], o[1], o[2], d[0], d[1], d[2],
            t_min[i], t_max[i], stack,
        )  # fmt: skip


@njit(cache=True)
def spread_stride(n_chunks):
    """A step coprime with ``n_chunks`` near n_chunks / golden ratio. The parallel loops take
    chunk (c · step) mod n_chunks at iteration c: the threads split the iterations into
    contiguous blocks, and this deals each block chunks from all over the batch, so a thread does
    not get all the busy rays of a camera image (its lower half, say) while another idles."""
    step = max(1, int(round(n_chunks * 0.6180339887)))
    while np.gcd(step, n_chunks) != 1:
        step += 1
    return step


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
    scale = coherence_scale(node_bounds, tri_verts)
    in_cache = fits_in_cache(node_bounds, tri_verts)
    n_chunks = (r + CHUNK - 1) // CHUNK
    step = spread_stride(n_chunks)
    for c in prange(n_chunks):
        chunk = (c * step) % n_chunks
        first, last = chunk * CHUNK, min(r, (chunk + 1) * CHUNK)
        if in_cache or is_coherent(origins, directions, first, last, scale):
            closest_hits_in_turn(node_bounds, node_links, tri_verts, tri_ids, origins, directions,
                                 t_min, t_max, first, last, t_out, tri_out, u_out,
                                 v_out)  # fmt: skip
        else:
            closest_hits_range(node_bounds, node_links, tri_verts, tri_ids, origins, directions,
                               t_min, t_max, first, last, t_out, tri_out, u_out, v_out)  # fmt: skip
    return t_out, tri_out, u_out, v_out


@njit(cache=True, parallel=True, error_model="numpy")
def any_hits(node_bounds, node_links, tri_verts, origins, directions, t_min, t_max):
    """Occlusion of a batch: (r,) bool, True when something lies within [t_min, t_max]."""
    r = origins.shape[0]
    out = np.empty(r, np.bool_)
    # No in-turn path here: measured on 512 px camera rays (chair, grid 100k), tracing them in turn
    # was slower than the lanes (0.90-0.92x).
    n_chunks = (r + CHUNK - 1) // CHUNK
    step = spread_stride(n_chunks)
    for c in prange(n_chunks):
        chunk = (c * step) % n_chunks
        any_hits_range(node_bounds, node_links, tri_verts, origins, directions, t_min, t_max,
                       chunk * CHUNK, min(r, (chunk + 1) * CHUNK), out)  # fmt: skip
    return out
