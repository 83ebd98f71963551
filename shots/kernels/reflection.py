"""Light reflected off the surface: the specular lobe and the clearcoat layer.

Each lobe (the base layer's specular lobe, the clearcoat) is traced the same way: a smooth one
sends one mirror ray, a glossy one several GGX-sampled rays (visible normals, Heitz 2018),
weighted by Fresnel; their rays meet the area lights, combined with the light samples by
multiple importance sampling (``lobe_weight``). Lobes too wide to trace one by one (``wide_lobe``) go with the
diffuse lobe through ``shots.kernels.ambient`` instead.
"""

from __future__ import annotations

import math

import numpy as np
from numba import njit

from shots.kernels.ambient import power_heuristic
from shots.kernels.brdf import (
    alpha_of,
    ggx_d,
    sample_ggx_vndf,
    smith_g1,
    smith_vis,
)
from shots.kernels.envlight import env_radiance
from shots.kernels.layout import (
    F_GLOSSY_SAMPLES,
    F_PIXEL_SEED,
    F_SAMPLES,
    W_ACC,
)
from shots.kernels.raystack import (
    MIN_WEIGHT,
    R_D,
    R_DEPTH,
    R_LIGHT_PDF,
    R_SIGMA,
    push_ray,
    set_start,
)
from shots.kernels.sampling import (
    orthonormal_basis,
    pixel_key,
    sequence_point,
    spread_count,
)
from shots.kernels.surface import (
    S_CLEARCOAT,
    S_CLEARCOAT_ROUGHNESS,
    S_CX,
    S_CY,
    S_CZ,
    S_GX,
    S_GY,
    S_GZ,
    S_METALLIC,
    S_NX,
    S_NY,
    S_NZ,
    S_PX,
    S_PY,
    S_PZ,
    S_ROUGHNESS,
)
from shots.kernels.visibility import offset_point

MIRROR_ROUGHNESS = 0.03  # below: one ideal mirror ray (α ≤ 1e-3, a delta in practice)
# At and above these roughnesses a lobe is shaded with the diffuse one (``wide_lobe``):
# a dielectric reflects only ~4 % and its blurred highlight hides in noise, a metal shows it all.
GLOSSY_DIELECTRIC = 0.3
GLOSSY_METAL = 0.6
# R_LIGHT_PDF of a mirror ray: a delta lobe, which no light sample can share, so the area lights
# it meets count in full (``shots.kernels.direct.lights_seen``)
DELTA_PDF = np.inf
# pixel_key purposes (one per depth); numpy scalars, not Literal[int]: spawn_lobe compiles once
PURPOSE_BASE, PURPOSE_COAT = np.int64(3000), np.int64(4000)


@njit(cache=True, inline="always", error_model="numpy", _nrt=False)
def wide_lobe(surf):
    """Whether the specular lobe is rough enough to be shaded with the diffuse one."""
    limit = GLOSSY_DIELECTRIC + (GLOSSY_METAL - GLOSSY_DIELECTRIC) * surf[S_METALLIC]
    return surf[S_ROUGHNESS] >= limit


@njit(cache=True, error_model="numpy", _nrt=False)
def lobe_rays(roughness, frame, depth, can_trace):
    """How many rays a traced specular lobe sends: one mirror ray, or GGX-sampled glossy rays
    (spread over the pixel's camera samples at the camera hit, one below); 0 when it cannot."""
    if not can_trace:
        return 0
    if roughness < MIRROR_ROUGHNESS or depth > 0:
        return 1
    return spread_count(int(frame[F_GLOSSY_SAMPLES]), int(frame[F_SAMPLES]))


@njit(cache=True, error_model="numpy", _nrt=False)
def glossy_rays(surf, frame, depth, can_trace):
    """How many rays ``spawn_reflection`` sends from this hit (0: none)."""
    if wide_lobe(surf):
        return 0
    return lobe_rays(surf[S_ROUGHNESS], frame, depth, can_trace)


@njit(cache=True, error_model="numpy", _nrt=False)
def coat_rays(surf, frame, depth, can_trace):
    """How many rays ``spawn_coat`` sends from this hit (0: none)."""
    if surf[S_CLEARCOAT] <= 0.0:
        return 0
    return lobe_rays(surf[S_CLEARCOAT_ROUGHNESS], frame, depth, can_trace)


@njit(cache=True, error_model="numpy", _nrt=False)
def glossy_pdf(nx, ny, nz, roughness, vx, vy, vz, lx, ly, lz):
    """Solid-angle pdf of one glossy ray toward l about normal n: G1(v)·D(h) / (4 N·V) (Heitz
    2018, eq. 17 with the reflection Jacobian 1 / (4 V·H))."""
    n_dot_v = max(nx * vx + ny * vy + nz * vz, 1e-4)
    hx, hy, hz = vx + lx, vy + ly, vz + lz
    hl = math.sqrt(hx * hx + hy * hy + hz * hz)
    if hl <= 0.0:
        return 0.0
    alpha = alpha_of(roughness)
    d = ggx_d((nx * hx + ny * hy + nz * hz) / hl, alpha)
    return smith_g1(n_dot_v, alpha) * d / (4.0 * n_dot_v)


@njit(cache=True, error_model="numpy", _nrt=False)
def lobe_weight(n_rays, roughness, nx, ny, nz, vx, vy, vz, lx, ly, lz, light_pdf):
    """MIS weight of a light sample's share in a specular lobe that also sends ``n_rays`` rays
    (power heuristic, Veach 1995 §9.2; ``light_pdf`` already × the light's sample count).

    No rays: the light samples alone. A mirror lobe: its ray alone (a light sample can never
    land in a delta lobe; evaluating a GGX of α ≤ 1e-3 there only makes sparkles).
    """
    if n_rays == 0:
        return 1.0
    if roughness < MIRROR_ROUGHNESS:
        return 0.0
    return power_heuristic(light_pdf,
                           n_rays * glossy_pdf(nx, ny, nz, roughness, vx, vy, vz, lx, ly, lz))  # fmt: skip


@njit(cache=True, error_model="numpy", _nrt=False)
def spawn_lobe(surf, ray, nx, ny, nz, roughness, n_rays, purpose, rw0, rw1, rw2, frame, env,
               pixel, sample, stack, sp, work):  # fmt: skip
    """Trace a specular lobe about normal n: ``n_rays`` rays from ``lobe_rays``, carrying light
    of weight ``rw`` (Fresnel × what reaches the lobe); without rays, the environment in the
    mirror direction. Returns the stack size."""
    depth = int(ray[R_DEPTH])
    sr, sg, sb = ray[R_SIGMA], ray[R_SIGMA + 1], ray[R_SIGMA + 2]
    vx, vy, vz = -ray[R_D], -ray[R_D + 1], -ray[R_D + 2]
    px, py, pz = surf[S_PX], surf[S_PY], surf[S_PZ]
    n_dot_v = max(nx * vx + ny * vy + nz * vz, 1e-4)
    rx, ry, rz = 2.0 * n_dot_v * nx - vx, 2.0 * n_dot_v * ny - vy, 2.0 * n_dot_v * nz - vz
    ox, oy, oz = offset_point(surf, 1.0)
    if n_rays == 0 or roughness < MIRROR_ROUGHNESS:
        if n_rays > 0 and max(rw0, rw1, rw2) >= MIN_WEIGHT:
            sp = push_ray(stack, sp, ox, oy, oz, rx, ry, rz, rw0, rw1, rw2, 0.0, depth + 1, 0.0,
                          sr, sg, sb, 0.0)  # fmt: skip
            set_start(stack, sp, px, py, pz)
            stack[sp - 1, R_LIGHT_PDF] = DELTA_PDF
        else:
            qr, qg, qb = env_radiance(env, frame, rx, ry, rz, work)
            work[W_ACC + 0] += rw0 * qr
            work[W_ACC + 1] += rw1 * qg
            work[W_ACC + 2] += rw2 * qb
        return sp
    key = pixel_key(int(frame[F_PIXEL_SEED]), pixel, purpose + depth)
    alpha = alpha_of(roughness)
    t1x, t1y, t1z, t2x, t2y, t2z = orthonormal_basis(nx, ny, nz)
    lvx = vx * t1x + vy * t1y + vz * t1z
    lvy = vx * t2x + vy * t2y + vz * t2z
    g1 = smith_g1(n_dot_v, alpha)
    for s in range(n_rays):
        a1, a2 = sequence_point(s, sample, key)
        hx_, hy_, hz_ = sample_ggx_vndf(lvx, lvy, n_dot_v, alpha, a1, a2)
        hx = hx_ * t1x + hy_ * t2x + hz_ * nx
        hy = hx_ * t1y + hy_ * t2y + hz_ * ny
        hz = hx_ * t1z + hy_ * t2z + hz_ * nz
        v_dot_h = vx * hx + vy * hy + vz * hz
        lx = 2.0 * v_dot_h * hx - vx
        ly = 2.0 * v_dot_h * hy - vy
        lz = 2.0 * v_dot_h * hz - vz
        n_dot_l = lx * nx + ly * ny + lz * nz
        if n_dot_l <= 0.0 or lx * surf[S_GX] + ly * surf[S_GY] + lz * surf[S_GZ] <= 0.0:
            continue
        # estimator weight F·G2/G1 (Heitz 2018, eq. 19); rw carries F's colour and split
        g2 = smith_vis(n_dot_l, n_dot_v, alpha) * 4.0 * n_dot_l * n_dot_v
        k = g2 / g1 / n_rays
        pushed = push_ray(stack, sp, ox, oy, oz, lx, ly, lz, rw0 * k, rw1 * k, rw2 * k, 0.0,
                          depth + 1, 0.0, sr, sg, sb, 0.0)  # fmt: skip
        if pushed > sp:
            set_start(stack, pushed, px, py, pz)
            # it sees area lights, weighted against their light samples (shots.kernels.direct)
            pdf = g1 * ggx_d(hz_, alpha) / (4.0 * n_dot_v)  # = glossy_pdf(n, roughness, v, l)
            stack[pushed - 1, R_LIGHT_PDF] = n_rays * pdf
        sp = pushed
    return sp


@njit(cache=True, error_model="numpy", _nrt=False)
def spawn_reflection(surf, ray, rw0, rw1, rw2, n_rays, frame, env, pixel, sample, stack, sp,
                     work):  # fmt: skip
    """Reflect light of weight ``rw`` off the base layer's mirror or glossy lobe."""
    return spawn_lobe(surf, ray, surf[S_NX], surf[S_NY], surf[S_NZ], surf[S_ROUGHNESS], n_rays,
                      PURPOSE_BASE, rw0, rw1, rw2, frame, env, pixel, sample, stack, sp, work)  # fmt: skip


@njit(cache=True, error_model="numpy", _nrt=False)
def spawn_coat(surf, ray, wr, wg, wb, coat, n_rays, frame, env, pixel, sample, stack, sp, work):
    """The clearcoat (KHR_materials_clearcoat): a GGX layer of F0 0.04 on its own normal and
    roughness, weight ``coat`` (its Fresnel at the view angle)."""
    return spawn_lobe(surf, ray, surf[S_CX], surf[S_CY], surf[S_CZ],
                      surf[S_CLEARCOAT_ROUGHNESS], n_rays, PURPOSE_COAT, wr * coat, wg * coat,
                      wb * coat, frame, env, pixel, sample, stack, sp, work)  # fmt: skip
