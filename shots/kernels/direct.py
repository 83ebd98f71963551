"""Direct light from the look's lights, with shadow rays, and the shadow catcher's shadow.

Area lights take stratified samples whose cells are spread over the pixel's camera samples
(``shots.kernels.sampling.spread_stratum``), so their shadows are soft at any sample count.
"""

from __future__ import annotations

import numpy as np
from numba import njit

from shots.kernels.bsdf import eval_bsdf
from shots.kernels.envlight import sh_irradiance
from shots.kernels.layout import (
    F_CONTACT_REACH,
)
from shots.kernels.lights import KIND_AREA, L_KIND, sample_light
from shots.kernels.sampling import (
    cosine_hemisphere,
    luminance,
    next_pair,
    orthonormal_basis,
    pixel_key,
    spread_count,
    spread_stratum,
)
from shots.kernels.surface import (
    S_GX,
    S_GY,
    S_GZ,
    S_NX,
    S_NY,
    S_NZ,
    S_PX,
    S_PY,
    S_PZ,
)
from shots.kernels.visibility import offset_point, shadow_ray


@njit(cache=True, error_model="numpy", _nrt=False)
def direct_light(surf, vx, vy, vz, lights, area_samples, spp, seed, pixel, sample, frame, bvh,
                 scene, ground, see_through, surf2, work, tstack):  # fmt: skip
    """Reflected radiance from all look lights with shadow rays; returns r, g, b.

    An area light gets ``spread_count(area_samples, spp)`` stratified shadow rays here, their
    cells spread over the pixel's ``spp`` camera samples.
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
                r1, r2 = next_pair(seed, pixel, sample, work)
                u1, u2 = spread_stratum(s, n, sample, spp, key, r1, r2)
            wx, wy, wz, dist, er, eg, eb = sample_light(lights, k, px, py, pz, u1, u2)
            if er + eg + eb <= 0.0 or wx * gx + wy * gy + wz * gz <= 0.0:
                continue
            fr, fg, fb = eval_bsdf(surf, vx, vy, vz, wx, wy, wz)
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
def shadow_amount(surf, lights, area_samples, contact_samples, spp, seed, pixel, sample,
                  frame, bvh, scene, ground, see_through, surf2, work,
                  tstack):  # fmt: skip
    """How much of the light a shadow-catcher point loses to the product, in [0, 1].

    1 − (light arriving) / (light that would arrive without the product), by luminance, from the
    look lights and from the environment (cosine-weighted rays: soft contact shadow).
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
                r1, r2 = next_pair(seed, pixel, sample, work)
                u1, u2 = spread_stratum(s, n, sample, spp, key, r1, r2)
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
    if contact_samples > 0:
        # the environment's share: its irradiance here, with the visible fraction of the sky
        # from cosine-weighted rays (the sky counted as even: a soft, direction-free contact
        # shadow; the look lights supply the directional ones)
        er, eg, eb = sh_irradiance(frame, nx, ny, nz)
        e_env = luminance(er, eg, eb)
        t1x, t1y, t1z, t2x, t2y, t2z = orthonormal_basis(nx, ny, nz)
        n = spread_count(contact_samples, spp)
        key = pixel_key(seed, pixel, lights.shape[0])
        reach = frame[F_CONTACT_REACH]  # nearby occluders only (see render.pack_frame)
        seen = 0.0
        for s in range(n):
            r1, r2 = next_pair(seed, pixel, sample, work)
            a, b = spread_stratum(s, n, sample, spp, key, r1, r2)
            lx, ly, lz = cosine_hemisphere(a, b)
            wx = lx * t1x + ly * t2x + lz * nx
            wy = lx * t1y + ly * t2y + lz * ny
            wz = lx * t1z + ly * t2z + lz * nz
            tr, tg, tb = shadow_ray(frame, bvh, scene, ground, see_through, ox, oy, oz, wx, wy, wz,
                                       reach, surf2, work, tstack)  # fmt: skip
            seen += luminance(tr, tg, tb)
        full += e_env
        lit += e_env * seen / n
    if full <= 0.0:
        return 0.0
    return min(max(1.0 - lit / full, 0.0), 1.0)
