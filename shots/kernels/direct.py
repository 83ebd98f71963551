"""Direct light from the look's lights, with shadow rays, and the shadow catcher's shadow.

Area lights take points of the pixel's own progressive sequence, one sequence per light, spread
over the pixel's camera samples (``shots.kernels.sampling.sequence_point``), so their shadows are
soft at any sample count.
A glossy lobe's highlight of an area light (the base layer's or the clearcoat's) comes from two
techniques, combined by multiple importance sampling with the power heuristic (Veach 1995, §9.2):
the light samples here, and the reflection rays (``shots.kernels.reflection``) that meet the light
(``lights_seen``). Light samples find broad highlights, reflection rays sharp ones, so neither
leaves sparkles; a mirror lobe's highlight comes from its ray alone.
"""

from __future__ import annotations

import math

import numpy as np
from numba import njit

from shots.kernels.ambient import ambient_light, power_heuristic
from shots.kernels.bsdf import eval_bsdf
from shots.kernels.layout import F_AREA_SAMPLES, F_CONTACT_REACH, F_SAMPLES, W_ACC
from shots.kernels.lights import (
    KIND_AREA,
    L_B,
    L_DX,
    L_DY,
    L_DZ,
    L_G,
    L_KIND,
    L_R,
    area_pdf,
    hit_area_light,
    sample_light,
)
from shots.kernels.raystack import R_D, R_DEPTH, R_LIGHT_PDF, R_O, R_W
from shots.kernels.reflection import DELTA_PDF, lobe_weight
from shots.kernels.sampling import (
    luminance,
    pixel_key,
    sequence_point,
    spread_count,
)
from shots.kernels.surface import (
    S_CLEARCOAT_ROUGHNESS,
    S_CX,
    S_CY,
    S_CZ,
    S_GX,
    S_GY,
    S_GZ,
    S_NX,
    S_NY,
    S_NZ,
    S_PX,
    S_PY,
    S_PZ,
    S_ROUGHNESS,
)
from shots.kernels.visibility import offset_point, shadow_ray

# plain-typed arguments (not Literal[bool] / Literal[int]): ambient_light compiles once for the
# shadow catcher and the shaded hit
NO_BOUNCE, EMPTY = np.bool_(False), np.int64(0)

@njit(cache=True, error_model="numpy", _nrt=False)
def direct_light(surf, vx, vy, vz, lights, area_samples, n_glossy, n_coat, spp, seed, pixel,
                 sample, frame, bvh, scene, ground, see_through, surf2, work, tstack):  # fmt: skip
    """Reflected radiance from all look lights with shadow rays; returns r, g, b.

    An area light gets ``spread_count(area_samples, spp)`` stratified shadow rays here, their
    cells spread over the pixel's ``spp`` camera samples. When the hit also sends ``n_glossy``
    rays for its specular lobe or ``n_coat`` for its clearcoat (``shots.kernels.reflection``),
    that lobe's share of each light sample takes its MIS weight.
    """
    px, py, pz = surf[S_PX], surf[S_PY], surf[S_PZ]
    gx, gy, gz = surf[S_GX], surf[S_GY], surf[S_GZ]
    lr, lg, lb = 0.0, 0.0, 0.0
    for k in range(lights.shape[0]):
        area = int(lights[k, L_KIND]) == KIND_AREA
        n = spread_count(area_samples, spp) if area else 1
        inv_n = 1.0 / n
        key = pixel_key(seed, pixel, k)
        for s in range(n):
            u1, u2 = 0.5, 0.5
            if area:
                u1, u2 = sequence_point(s, sample, key)
            wx, wy, wz, dist, er, eg, eb = sample_light(lights, k, px, py, pz, u1, u2)
            if er + eg + eb <= 0.0 or wx * gx + wy * gy + wz * gz <= 0.0:
                continue
            spec_weight, coat_weight = 1.0, 1.0
            if area:
                cos_light = -(wx * lights[k, L_DX] + wy * lights[k, L_DY] + wz * lights[k, L_DZ])
                light_pdf = n * area_pdf(lights, k, dist, cos_light)
                spec_weight = lobe_weight(n_glossy, surf[S_ROUGHNESS], surf[S_NX], surf[S_NY],
                                          surf[S_NZ], vx, vy, vz, wx, wy, wz, light_pdf)  # fmt: skip
                coat_weight = lobe_weight(n_coat, surf[S_CLEARCOAT_ROUGHNESS], surf[S_CX],
                                          surf[S_CY], surf[S_CZ], vx, vy, vz, wx, wy, wz,
                                          light_pdf)  # fmt: skip
            fr, fg, fb = eval_bsdf(surf, vx, vy, vz, wx, wy, wz, spec_weight, coat_weight)
            fr *= er * inv_n
            fg *= eg * inv_n
            fb *= eb * inv_n
            if fr + fg + fb <= 0.0:
                continue
            ox, oy, oz = offset_point(surf, 1.0)
            t_max = np.inf if dist == np.inf else dist * (1.0 - 1e-5)
            tr, tg, tb = shadow_ray(frame, bvh, scene, ground, see_through, ox, oy, oz, wx, wy, wz, t_max,
                                       surf2, work, tstack)  # fmt: skip
            lr += fr * tr
            lg += fg * tg
            lb += fb * tb
    return lr, lg, lb



@njit(cache=True, error_model="numpy", _nrt=False)
def lights_seen(lights, frame, ray, t_hit, work):
    """A glossy ray meets area lights before its hit at ``t_hit``: add their radiance, weighted
    against the light samples of the hit that sent it (the other half of ``direct_light``'s MIS).
    """
    pdf_ray = ray[R_LIGHT_PDF]
    if pdf_ray <= 0.0:
        return
    area_samples = int(frame[F_AREA_SAMPLES]) if int(ray[R_DEPTH]) == 1 else 1
    n = spread_count(area_samples, int(frame[F_SAMPLES]))  # as direct_light at the sender
    for k in range(lights.shape[0]):
        if int(lights[k, L_KIND]) != KIND_AREA:
            continue
        t, cos_light = hit_area_light(lights, k, ray[R_O], ray[R_O + 1], ray[R_O + 2], ray[R_D],
                                      ray[R_D + 1], ray[R_D + 2])  # fmt: skip
        if t < t_hit:
            w = 1.0 if pdf_ray == DELTA_PDF else power_heuristic(pdf_ray, n * area_pdf(lights, k, t, cos_light))
            work[W_ACC + 0] += ray[R_W] * lights[k, L_R] * w
            work[W_ACC + 1] += ray[R_W + 1] * lights[k, L_G] * w
            work[W_ACC + 2] += ray[R_W + 2] * lights[k, L_B] * w


@njit(cache=True, error_model="numpy", _nrt=False)
def shadow_amount(surf, ray, lights, area_samples, spp, seed, pixel, sample, frame, env, bvh,
                  scene, ground, see_through, stack, surf2, work, tstack):  # fmt: skip
    """How much of the light a shadow-catcher point loses to the product: ≥ 0, in [0, 1] on average.

    1 − (light arriving) / (light that would arrive without the product), by luminance, from the
    look lights and from the environment (the estimator of ``shots.kernels.ambient`` for a white
    Lambertian floor: the contact shadow is the sky the product hides nearby).
    """
    px, py, pz = surf[S_PX], surf[S_PY], surf[S_PZ]
    nx, ny, nz = surf[S_NX], surf[S_NY], surf[S_NZ]
    ox, oy, oz = offset_point(surf, 1.0)
    lit, full = 0.0, 0.0
    for k in range(lights.shape[0]):
        area = int(lights[k, L_KIND]) == KIND_AREA
        n = spread_count(area_samples, spp) if area else 1
        key = pixel_key(seed, pixel, k)
        for s in range(n):
            u1, u2 = 0.5, 0.5
            if area:
                u1, u2 = sequence_point(s, sample, key)
            wx, wy, wz, dist, er, eg, eb = sample_light(lights, k, px, py, pz, u1, u2)
            cos = wx * nx + wy * ny + wz * nz
            if cos <= 0.0:
                continue
            e = luminance(er, eg, eb) * cos / n
            if e <= 0.0:
                continue
            t_max = np.inf if dist == np.inf else dist * (1.0 - 1e-5)
            tr, tg, tb = shadow_ray(frame, bvh, scene, ground, see_through, ox, oy, oz, wx, wy, wz, t_max,
                                       surf2, work, tstack)  # fmt: skip
            full += e
            lit += e * luminance(tr, tg, tb)
    # nearby blockers only (F_CONTACT_REACH, see render.pack_frame)
    _, br, bg, bb, cr, cg, cb = ambient_light(surf, ray, 1.0, 1.0, 1.0, 1.0, 1.0, 1.0, 0.0, 0.0,
                                              0.0, NO_BOUNCE, frame[F_CONTACT_REACH], frame, env,
                                              bvh, scene, ground, pixel, sample, stack, EMPTY,
                                              surf2, work,
                                              tstack)  # fmt: skip
    e_env = math.pi * luminance(br, bg, bb)  # radiance of a white floor → irradiance
    full += e_env
    lit += e_env + math.pi * luminance(cr, cg, cb)
    if full <= 0.0:
        return 0.0
    # No upper clamp: one sample's MIS estimate of the hidden sky can exceed the whole sky (up to
    # 1.5× for a uniform one); clamping it would bias the mean low (measured 5 % against the
    # configuration factor in tests/test_ambient.py). The pixel's alpha is clamped once, on output.
    return max(1.0 - lit / full, 0.0)
