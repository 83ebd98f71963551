"""The image: every pixel's camera samples, on every thread → premultiplied linear RGBA.

Inputs are few wide arrays (``shots.kernels.layout``); the BVH and the scene go as tuples:
    bvh = (node_bounds, node_links, tri_verts, tri_ids)          shots.accel.Bvh
    scene = (verts, faces, materials, texels, tex_info)          packed by shots.render
Everything is borrowed (``shots.kernels.borrow``) at the top of each work item; pixels
are independent, and tiles are dealt to work items round-robin, each with its own scratch.

Sampling contract (relied on by the shading kernels)
    One call traces a set of ``frame[F_SAMPLES]`` camera samples in every active pixel; the
    kernels below receive ``sample``, the pixel's sample count before the set plus the index
    within it (``counts[j, i] + s``). The sample's place in the pixel and the 2-D numbers of
    its per-hit rays (light, environment, lobe directions) are point ``sample`` of the pixel's
    own scrambled Sobol' sequences (``sobol_point``, ``sequence_point`` in
    ``shots.kernels.sampling``, keyed by ``frame[F_PIXEL_SEED]``, the same in every set), so
    each set fills the gaps the earlier ones left; ``spread_count`` splits a hit's rays over
    the set's samples. Adaptive sampling (``shots.sampling_control``) calls ``render_items``
    once per set on every thread, each set with its own ``frame[F_SEED]`` (the frame's seed
    with the set number folded in) for the rest of the numbers (``next_pair``: Russian
    roulette, lobe choice).
"""

from __future__ import annotations

import math

import numpy as np
from numba import njit

from shots.kernels.borrow import borrow
from shots.kernels.camera_sample import camera_ray, sample_offset, trace_sample
from shots.kernels.layout import (
    F_BG_BOTTOM,
    F_BG_TOP,
    F_HEIGHT,
    F_PIXEL_SEED,
    F_SAMPLES,
    F_WIDTH,
    N_WORK,
    W_ACC,
    W_DIM,
)
from shots.kernels.raystack import (
    N_RAY,
    STACK_RAYS,
)
from shots.kernels.surface import (
    N_SURFACE,
)
from shots.kernels.traverse import new_stack

TILE = 8  # pixels per tile edge
WORK_ITEMS = 256  # tiles are dealt to items round-robin, items to threads: threads stay balanced


# No fastmath here: numba passes it on to the callees it compiles, and contracting the
# watertight edge functions into FMAs lets rays through shared edges (Woop et al. 2013).
@njit(cache=True, nogil=True, error_model="numpy")
def render_items(first, step, out, frame, lights, env, ground, bvh, scene, active, counts):
    """Render work items ``first``, ``first + step``, … (below WORK_ITEMS) of one stratified set
    of samples in every active pixel into ``out``; one thread's share (``shots.render``).

    Parameters
    ----------
    first, step : int, the items this call takes.
    out : (h, w, 4) float32, receives the set's mean premultiplied linear RGBA in active
        pixels (the others are left as they are).
    frame : (N_FRAME,) float64 camera, settings, background and SH (``shots.kernels.layout``).
    lights : (k, N_LIGHT_COLS) float64; env : (radiance (eh, ew, 3) float32, its sampling
    table rows (eh, ew) and marginal (eh,) float64), see ``shots.kernels.envlight``;
    ground : (N_GROUND,) float64; bvh, scene : see the module docstring.
    active : (h, w) uint8, non-zero where the pixel takes this set.
    counts : (h, w) int32, each active pixel's count grows by the samples it traced.

    Not a ``parallel=True`` kernel: numba's parallel passes and the gufunc they build cost
    seconds of every cold start, so the threads are Python's (``nogil``), each calling this
    kernel, which only allocates each item's scratch and calls ``render_tiles``. Tiles are dealt
    to items and every item has its own scratch, so pixels do not depend on the thread count.
    """
    for item in range(first, WORK_ITEMS, step):
        # scratch owned here; render_tiles gets borrowed (uncounted) views of everything
        owned = (new_stack(), np.empty((STACK_RAYS, N_RAY), np.float64),
                 np.zeros((2, N_SURFACE), np.float64), np.zeros(N_WORK, np.float64))  # fmt: skip
        scratch = (borrow(owned[0]), borrow(owned[1]), borrow(owned[2]), borrow(owned[3]))
        b_env = (borrow(env[0]), borrow(env[1]), borrow(env[2]))
        b_bvh = (borrow(bvh[0]), borrow(bvh[1]), borrow(bvh[2]), borrow(bvh[3]))
        b_scene = (borrow(scene[0]), borrow(scene[1]), borrow(scene[2]), borrow(scene[3]),
                   borrow(scene[4]))  # fmt: skip
        render_tiles(item, borrow(out), borrow(frame), borrow(lights), b_env,
                     borrow(ground), b_bvh, b_scene, borrow(active), borrow(counts),
                     scratch)  # fmt: skip
        owned[3][W_DIM] = 0.0  # the scratch stays owned (alive) until here, past its views


@njit(cache=True, error_model="numpy", _nrt=False)
def render_tiles(item, out, frame, lights, env, ground, bvh, scene, active, counts, scratch):
    """Render the tiles dealt to work item ``item`` (every WORK_ITEMS-th tile from ``item``).

    ``scratch`` is (traversal stack, ray stack, two surface records, work record), this item's.
    """
    tstack, stack, surfs, work = scratch
    surf, surf2 = surfs[0], surfs[1]
    width = int(frame[F_WIDTH])
    height = int(frame[F_HEIGHT])
    spp = max(int(frame[F_SAMPLES]), 1)
    pixel_seed = int(frame[F_PIXEL_SEED])
    tiles_x = (width + TILE - 1) // TILE
    tiles = tiles_x * ((height + TILE - 1) // TILE)
    for tile in range(item, tiles, WORK_ITEMS):
        x0 = (tile % tiles_x) * TILE
        y0 = (tile // tiles_x) * TILE
        for j in range(y0, min(y0 + TILE, height)):
            for i in range(x0, min(x0 + TILE, width)):
                if active[j, i] == 0:
                    continue
                pixel = j * width + i
                for c in range(4):
                    work[W_ACC + c] = 0.0
                before = counts[j, i]  # the pixel's samples in earlier sets
                for s in range(spp):
                    sample = before + s
                    fx, fy = sample_offset(spp, sample, pixel_seed, pixel)
                    ox, oy, oz, dx, dy, dz = camera_ray(frame, i + fx, j + fy)
                    f = min(max((j + fy) / height, 0.0), 1.0)
                    bg_r = (1.0 - f) * frame[F_BG_TOP] + f * frame[F_BG_BOTTOM]
                    bg_g = (1.0 - f) * frame[F_BG_TOP + 1] + f * frame[F_BG_BOTTOM + 1]
                    bg_b = (1.0 - f) * frame[F_BG_TOP + 2] + f * frame[F_BG_BOTTOM + 2]
                    work[W_DIM] = 1.0  # dimension 0 placed the sample
                    trace_sample(ox, oy, oz, dx, dy, dz, bg_r, bg_g, bg_b, frame, lights,
                                 env, bvh, scene, ground, pixel, sample, stack, surf,
                                 surf2, work, tstack)  # fmt: skip
                    counts[j, i] += 1
                for c in range(4):
                    value = work[W_ACC + c] / spp
                    # a degenerate input (NaN normal, zero-area light) must not spread
                    out[j, i, c] = value if math.isfinite(value) else 0.0
