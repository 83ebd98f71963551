"""One camera sample: the camera ray through a sub-pixel position, and the ray tree it grows.

The sample's rays are traced depth-first from a small per-thread stack (``shots.kernels.raystack``):
surface hits are shaded (``shots.kernels.shade``), the shadow catcher turns the product's shadow
into alpha, and rays that leave the scene see the background or the environment.
"""

from __future__ import annotations

import math

import numpy as np
from numba import njit

from shots.kernels.ambient import limit_indirect, take_back_sky
from shots.kernels.direct import lights_seen, shadow_amount
from shots.kernels.envlight import env_radiance
from shots.kernels.ground import (
    G_KIND,
    G_STRENGTH,
    GROUND_CATCHER,
)
from shots.kernels.layout import (
    BG_ENVIRONMENT,
    BG_TRANSPARENT,
    F_AREA_SAMPLES,
    F_ASPECT,
    F_BACKGROUND,
    F_EYE,
    F_HEIGHT,
    F_ORTHO,
    F_PIXEL_SEED,
    F_SAMPLES,
    F_SEE_THROUGH,
    F_TAN_Y,
    F_U,
    F_V,
    F_W,
    F_WIDTH,
    F_YMAG,
    F_ZNEAR,
    W_ACC,
    W_CONE,
    W_SPREAD,
)
from shots.kernels.raystack import (
    N_RAY,
    R_AMBIENT,
    R_BOUNCES,
    R_CAMERA,
    R_CONE,
    R_CONE_HIT,
    R_COVER,
    R_D,
    R_DEPTH,
    R_O,
    R_SPREAD,
    R_TMIN,
    R_W,
    STACK_RAYS,
    set_ray,
)
from shots.kernels.sampling import (
    pcg_hash,
    sobol_point,
    tent_warp,
)
from shots.kernels.shade import shade_hit
from shots.kernels.visibility import find_surface


@njit(cache=True, inline="always", error_model="numpy", _nrt=False)
def trace_sample(ox, oy, oz, dx, dy, dz, bg_r, bg_g, bg_b, frame, lights, env, bvh, scene,
                 ground, pixel, sample, stack, surf, surf2, work, tstack):  # fmt: skip
    """Trace one camera ray and its tree; adds premultiplied RGBA into work[W_ACC:+4].

    ``stack`` (STACK_RAYS, N_RAY), ``surf``, ``surf2`` (N_SURFACE,) and ``work`` are scratch.
    """
    background = int(frame[F_BACKGROUND])
    # the ray being traced lives in the stack's last row; the camera ray starts there, so the
    # many that see only the background never touch the stack
    ray = stack[STACK_RAYS - 1]
    set_ray(ray, ox, oy, oz, dx, dy, dz, 1.0, 1.0, 1.0, 1.0, 0, near_start(frame, dx, dy, dz),
            0.0, 0.0, 0.0, 1.0)  # fmt: skip
    ray[R_CONE], ray[R_SPREAD] = pixel_cone(frame)
    sp = np.int64(0)  # not Literal[int](0), which type inference would compile shade_hit for
    while True:
        rox, roy, roz = ray[R_O], ray[R_O + 1], ray[R_O + 2]
        rdx, rdy, rdz = ray[R_D], ray[R_D + 1], ray[R_D + 2]
        camera = ray[R_CAMERA] != 0.0
        r0, g0, b0 = work[W_ACC], work[W_ACC + 1], work[W_ACC + 2]
        work[W_CONE] = ray[R_CONE]
        work[W_SPREAD] = ray[R_SPREAD]
        t, what = find_surface(bvh, scene, ground, rox, roy, roz, rdx, rdy, rdz, ray[R_TMIN],
                               camera, surf, work, tstack)  # fmt: skip
        ray[R_CONE_HIT] = ray[R_CONE] + ray[R_SPREAD] * t  # the rays this hit spawns start here
        if not camera:
            lights_seen(lights, frame, ray, t, work)
        if what == 2 and camera and int(ground[G_KIND]) == GROUND_CATCHER:
            # invisible floor: its shadow becomes coverage of black (premultiplied: alpha only);
            # the rest of the ray shows the background (nothing stands below the floor)
            shadow = shadow_amount(surf, ray, lights, int(frame[F_AREA_SAMPLES]),
                                   int(frame[F_SAMPLES]), int(frame[F_PIXEL_SEED]), pixel, sample,
                                   frame, env, bvh, scene, ground, frame[F_SEE_THROUGH] != 0.0,
                                   stack, surf2, work, tstack)  # fmt: skip
            a = shadow * ground[G_STRENGTH]  # unclamped per sample, so the mean is unbiased
            work[W_ACC + 3] += ray[R_COVER] * a
            for c in range(3):
                ray[R_W + c] *= 1.0 - a
            ray[R_COVER] *= 1.0 - a
            what = 0
        if what != 0:
            take_back_sky(ray, work)
            sp = shade_hit(surf, ray, t, frame, lights, env, bvh, scene, ground, pixel, sample,
                           stack, sp, surf2, work, tstack)  # fmt: skip
        elif camera and background != BG_ENVIRONMENT:
            if background != BG_TRANSPARENT:
                work[W_ACC] += ray[R_W] * bg_r
                work[W_ACC + 1] += ray[R_W + 1] * bg_g
                work[W_ACC + 2] += ray[R_W + 2] * bg_b
                work[W_ACC + 3] += ray[R_COVER]
        elif ray[R_AMBIENT] == 0.0:  # (a bounce ray's sky is in its hit's ambient base)
            qr, qg, qb = env_radiance(env, frame, rdx, rdy, rdz, work)
            work[W_ACC] += ray[R_W] * qr
            work[W_ACC + 1] += ray[R_W + 1] * qg
            work[W_ACC + 2] += ray[R_W + 2] * qb
            if camera:
                work[W_ACC + 3] += ray[R_COVER]
        if ray[R_DEPTH] >= 2.0 or ray[R_BOUNCES] >= 1.0:  # light scattered twice or more
            limit_indirect(work, frame, r0, g0, b0)
        if sp == 0:
            return
        sp -= 1
        for c in range(N_RAY):  # element copy: a slice copy between views of one array allocates
            ray[c] = stack[sp, c]


@njit(cache=True, inline="always", error_model="numpy", _nrt=False)
def pixel_cone(frame):
    """(width at the eye, spread angle) of the cone of one camera sample.

    A perspective pixel subtends α = atan(2 tan(yfov/2) / height) (Akenine-Möller et al. 2019,
    Ray Tracing Gems ch. 20, "pixel spread angle"); an orthographic pixel is a tube 2·ymag/height
    wide. Each of the pixel's N stratified samples stands for 1/N of its area, so its cone is
    1/√N of the pixel across: the samples together then average the texture over the pixel
    filter once, and many samples converge to plain supersampling instead of blurring twice
    (measured on the demo sofa in bench/texture_filtering.py).
    """
    height = frame[F_HEIGHT] * math.sqrt(max(frame[F_SAMPLES], 1.0))
    if frame[F_ORTHO] != 0.0:
        return 2.0 * frame[F_YMAG] / height, 0.0
    return 0.0, math.atan(2.0 * frame[F_TAN_Y] / height)


@njit(cache=True, error_model="numpy", _nrt=False)
def near_start(frame, dx, dy, dz):
    """Where a camera ray along unit (dx, dy, dz) crosses the near clipping plane, the plane
    ``znear`` in front of the lens across the view axis (glTF 2.0 spec §3.10: "znear: the
    floating-point distance to the near clipping plane"); 0 when there is none."""
    znear = frame[F_ZNEAR]
    if znear <= 0.0:
        return 0.0
    along = -(dx * frame[F_W] + dy * frame[F_W + 1] + dz * frame[F_W + 2])  # cos to the axis
    return znear / along if along > 0.0 else 0.0


@njit(cache=True, inline="always", error_model="numpy", _nrt=False)
def camera_ray(frame, px, py):
    """The ray through image position (px right, py down, in pixels), as ``Camera.rays_at``."""
    sx = 2.0 * px / frame[F_WIDTH] - 1.0
    sy = 1.0 - 2.0 * py / frame[F_HEIGHT]
    if frame[F_ORTHO] != 0.0:
        xm = frame[F_YMAG] * frame[F_ASPECT]
        ym = frame[F_YMAG]
        ox = frame[F_EYE] + sx * xm * frame[F_U] + sy * ym * frame[F_V]
        oy = frame[F_EYE + 1] + sx * xm * frame[F_U + 1] + sy * ym * frame[F_V + 1]
        oz = frame[F_EYE + 2] + sx * xm * frame[F_U + 2] + sy * ym * frame[F_V + 2]
        return ox, oy, oz, -frame[F_W], -frame[F_W + 1], -frame[F_W + 2]
    a = sx * frame[F_TAN_Y] * frame[F_ASPECT]
    b = sy * frame[F_TAN_Y]
    dx = a * frame[F_U] + b * frame[F_V] - frame[F_W]
    dy = a * frame[F_U + 1] + b * frame[F_V + 1] - frame[F_W + 1]
    dz = a * frame[F_U + 2] + b * frame[F_V + 2] - frame[F_W + 2]
    n = math.sqrt(dx * dx + dy * dy + dz * dz)
    return frame[F_EYE], frame[F_EYE + 1], frame[F_EYE + 2], dx / n, dy / n, dz / n


@njit(cache=True, inline="always", error_model="numpy", _nrt=False)
def sample_offset(spp, index, seed, pixel):
    """Sub-pixel position of the pixel's camera sample ``index`` (counted over all its sets):
    the centre for a one-sample render, else point ``index`` of the pixel's own scrambled
    Sobol' sequence (``sobol_point``) warped to the tent filter of radius 1 px (filter
    importance sampling)."""
    if spp == 1:
        return 0.5, 0.5
    a, b = sobol_point(index, pcg_hash((seed ^ pcg_hash(pixel & 0xFFFFFFFF)) & 0xFFFFFFFF))
    return 0.5 + tent_warp(a), 0.5 + tent_warp(b)
