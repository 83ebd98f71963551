"""Surface shading: what one hit sends back along its ray, and the rays it spawns.

At each hit (glTF 2.0 spec Appendix B, with the KHR material extensions):

- emission, and direct light from every look light through shadow rays (``shots.kernels.direct``);
- diffuse light from the environment, blocked by the model, and light bounced off its other
  parts (``shots.kernels.ambient``), × occlusion; wide specular lobes and the sheen layer's
  share (approximately) go the same way;
- specular light from mirror and glossy reflection rays (``shots.kernels.reflection``),
  weighted by Fresnel;
- transmission (``shots.kernels.transmission``);
- coverage: a BLEND surface continues the camera ray behind it with weight 1 − α.

The helpers are compiled without reference counting (``_nrt=False``; none of them allocates):
they run per ray, and counting references to their array arguments cost more than the ray
queries.
"""

from __future__ import annotations

import numpy as np
from numba import njit

from shots.kernels.ambient import ambient_light
from shots.kernels.brdf import (
    refract,
    schlick_weight,
)
from shots.kernels.bsdf import clearcoat_fresnel, fresnel_split
from shots.kernels.direct import direct_light
from shots.kernels.layout import (
    BLUE,
    F_AREA_SAMPLES,
    F_MAX_DEPTH,
    F_PIXEL_SEED,
    F_SAMPLES,
    F_SEE_THROUGH,
    GREEN,
    RED,
    W_ACC,
)
from shots.kernels.raystack import (
    R_BOUNCES,
    R_CAMERA,
    R_COVER,
    R_D,
    R_DEPTH,
    R_O,
    R_SIGMA,
    R_START,
    R_W,
    push_ray,
    set_start,
)
from shots.kernels.reflection import (
    coat_rays,
    glossy_rays,
    spawn_coat,
    spawn_reflection,
    wide_lobe,
)
from shots.kernels.sheen import sheen_albedo
from shots.kernels.surface import (
    S_BASE_B,
    S_BASE_G,
    S_BASE_R,
    S_EM_B,
    S_EM_G,
    S_EM_R,
    S_FRONT,
    S_IOR,
    S_METALLIC,
    S_NX,
    S_NY,
    S_NZ,
    S_OCCLUSION,
    S_OPACITY,
    S_ROUGHNESS,
    S_SHEEN_B,
    S_SHEEN_G,
    S_SHEEN_R,
    S_SHEEN_ROUGHNESS,
    S_THICKNESS,
    S_TRANSMISSION,
    S_UNLIT,
)
from shots.kernels.transmission import medium_attenuation, spawn_transmission


@njit(cache=True, inline="always", error_model="numpy", _nrt=False)
def shade_hit(surf, ray, t_hit, frame, lights, env, bvh, scene, ground, pixel, sample, stack,
              sp, surf2, work, tstack):  # fmt: skip
    """Shade one surface hit of ``ray`` (N_RAY,); adds to work[W_ACC:+4], returns the stack size."""
    seed = int(frame[F_PIXEL_SEED])  # keys the pixel's sample sequences (sequence_point)
    see_through = frame[F_SEE_THROUGH] != 0.0
    depth = int(ray[R_DEPTH])
    dx, dy, dz = ray[R_D], ray[R_D + 1], ray[R_D + 2]
    vx, vy, vz = -dx, -dy, -dz
    wr, wg, wb = medium_attenuation(ray, surf, ray[R_W], ray[R_W + 1], ray[R_W + 2])
    cover = ray[R_COVER]
    a = surf[S_OPACITY]
    if a < 1.0:
        # BLEND: what lies behind shows through 1 − α (Porter–Duff over)
        sp = push_ray(stack, sp, ray[R_O], ray[R_O + 1], ray[R_O + 2], dx, dy, dz,
                      wr * (1.0 - a), wg * (1.0 - a), wb * (1.0 - a), cover * (1.0 - a), depth,
                      t_hit * (1.0 + 1e-7) + 1e-9, ray[R_SIGMA], ray[R_SIGMA + 1],
                      ray[R_SIGMA + 2], ray[R_CAMERA])  # fmt: skip
        set_start(stack, sp, ray[R_START], ray[R_START + 1], ray[R_START + 2])
        wr *= a
        wg *= a
        wb *= a
    work[W_ACC + 3] += cover * a
    if surf[S_UNLIT] != 0.0:  # KHR_materials_unlit: the base colour is the result
        work[W_ACC + 0] += wr * surf[S_BASE_R]
        work[W_ACC + 1] += wg * surf[S_BASE_G]
        work[W_ACC + 2] += wb * surf[S_BASE_B]
        return sp

    nx, ny, nz = surf[S_NX], surf[S_NY], surf[S_NZ]
    n_dot_v = max(nx * vx + ny * vy + nz * vz, 1e-4)
    coat = clearcoat_fresnel(surf, vx, vy, vz)
    under = 1.0 - coat  # what the clearcoat lets through to the base layer

    # emission and direct light
    spp = int(frame[F_SAMPLES])
    area_samples = int(frame[F_AREA_SAMPLES]) if depth == 0 else 1
    can_trace = depth + 1 <= int(frame[F_MAX_DEPTH])
    n_glossy = glossy_rays(surf, frame, depth, can_trace)
    n_coat = coat_rays(surf, frame, depth, can_trace)
    lr, lg, lb = direct_light(surf, vx, vy, vz, lights, area_samples, n_glossy, n_coat, spp, seed,
                              pixel, sample, frame, bvh, scene, ground, see_through, surf2, work,
                              tstack)  # fmt: skip
    # emission, except where a diffuse bounce found it (``shots.kernels.ambient``: meshes are
    # not sampled as lights, and a small bright emitter found by chance is a firefly)
    em = under if ray[R_BOUNCES] == 0.0 else 0.0
    work[W_ACC + 0] += wr * (lr + em * surf[S_EM_R])
    work[W_ACC + 1] += wg * (lg + em * surf[S_EM_G])
    work[W_ACC + 2] += wb * (lb + em * surf[S_EM_B])

    # Fresnel split of the environment light. For transmissive volumes Schlick is taken on the
    # outside angle, and total internal reflection sends everything to the mirror.
    transmission = surf[S_TRANSMISSION] * (1.0 - surf[S_METALLIC])
    front = surf[S_FRONT] != 0.0
    volume = surf[S_THICKNESS] > 0.0
    eta = 1.0  # n_incident / n_transmitted
    cos_t = n_dot_v
    tir = False
    tdx, tdy, tdz = dx, dy, dz  # thin wall: straight through
    if transmission > 0.0 and volume:
        eta = 1.0 / surf[S_IOR] if front else surf[S_IOR]
        ok, tdx, tdy, tdz, cos_t = refract(vx, vy, vz, nx, ny, nz, eta)
        tir = not ok
    cos_f = n_dot_v if eta <= 1.0 else cos_t
    fw = schlick_weight(cos_f)
    smooth = max(1.0 - surf[S_ROUGHNESS], 0.0)
    occlusion = surf[S_OCCLUSION]
    tint = not (volume and not front)  # a volume is tinted once, where light enters it
    spec0, diff0, trans0 = fresnel_split(surf, RED, fw, smooth, under, tir, tint)
    spec1, diff1, trans1 = fresnel_split(surf, GREEN, fw, smooth, under, tir, tint)
    spec2, diff2, trans2 = fresnel_split(surf, BLUE, fw, smooth, under, tir, tint)
    sheen = max(surf[S_SHEEN_R], surf[S_SHEEN_G], surf[S_SHEEN_B])
    e_sheen = 0.0
    if sheen > 0.0:
        # KHR_materials_sheen: the base layer's environment light (irradiance, reflection and
        # transmission weights) keeps 1 − max(sheenColor)·E(N·V)
        e_sheen = sheen_albedo(n_dot_v, surf[S_SHEEN_ROUGHNESS])
        scaling = max(1.0 - sheen * e_sheen, 0.0)
        spec0, diff0, trans0 = spec0 * scaling, diff0 * scaling, trans0 * scaling
        spec1, diff1, trans1 = spec1 * scaling, diff1 * scaling, trans1 * scaling
        spec2, diff2, trans2 = spec2 * scaling, diff2 * scaling, trans2 * scaling

    # environment light the model can block, and light bounced off its other parts; the sheen
    # layer's share, sheenColor·E(N·V)/π like a diffuse lobe, is exact only for light that is the
    # same from every direction (no rays are traced for the fibre lobe)
    wide = wide_lobe(surf)
    k = under * e_sheen
    d0 = diff0 + k * surf[S_SHEEN_R]
    d1 = diff1 + k * surf[S_SHEEN_G]
    d2 = diff2 + k * surf[S_SHEEN_B]
    s0, s1, s2 = (spec0, spec1, spec2) if wide else (0.0, 0.0, 0.0)
    sp, br, bg, bb, cr, cg, cb = ambient_light(surf, ray, wr * occlusion, wg * occlusion,
                                               wb * occlusion, d0, d1, d2, s0, s1, s2, can_trace,
                                               np.inf, frame, env, bvh, scene, ground, pixel,
                                               sample, stack, sp, surf2, work,
                                               tstack)  # fmt: skip
    work[W_ACC + 0] += br + cr
    work[W_ACC + 1] += bg + cg
    work[W_ACC + 2] += bb + cb
    if not wide:
        sp = spawn_reflection(surf, ray, wr * spec0 * occlusion, wg * spec1 * occlusion,
                              wb * spec2 * occlusion, n_glossy, frame, env, pixel, sample, stack,
                              sp, work)  # fmt: skip
    if coat > 0.0:
        sp = spawn_coat(surf, ray, wr, wg, wb, coat, n_coat, frame, env, pixel, sample, stack, sp,
                        work)  # fmt: skip
    if transmission > 0.0 and not tir:
        sp = spawn_transmission(surf, ray, tdx, tdy, tdz, wr * trans0, wg * trans1, wb * trans2,
                                can_trace, env, frame, stack, sp, work)  # fmt: skip
    return sp
