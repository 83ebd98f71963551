"""Light through transmissive materials (KHR_materials_transmission, KHR_materials_volume).

Thin walls let light straight through, tinted by the base colour; volumes refract it (Snell) and
absorb it along the distance travelled inside (Beer–Lambert, with the attenuation colour and
distance of KHR_materials_volume).
"""

from __future__ import annotations

import math

from numba import njit

from shots.kernels.envlight import env_radiance
from shots.kernels.layout import (
    W_ACC,
)
from shots.kernels.raystack import (
    MIN_WEIGHT,
    R_DEPTH,
    R_SIGMA,
    R_START,
    push_ray,
    set_start,
)
from shots.kernels.surface import (
    S_FRONT,
    S_PX,
    S_PY,
    S_PZ,
    S_THICKNESS,
)
from shots.kernels.visibility import offset_point
from shots.kernels.visibility import volume_absorption as absorption  # shared with shadow rays


@njit(cache=True, error_model="numpy", _nrt=False)
def medium_attenuation(ray, surf, wr, wg, wb):
    """The ray's weight after Beer–Lambert absorption along the segment it just travelled.

    Measured from the true surface point the segment left (R_START), not the offset origin.
    """
    sr, sg, sb = ray[R_SIGMA], ray[R_SIGMA + 1], ray[R_SIGMA + 2]
    if sr + sg + sb > 0.0:
        ex = surf[S_PX] - ray[R_START]
        ey = surf[S_PY] - ray[R_START + 1]
        ez = surf[S_PZ] - ray[R_START + 2]
        x = math.sqrt(ex * ex + ey * ey + ez * ez)
        wr *= math.exp(-sr * x)
        wg *= math.exp(-sg * x)
        wb *= math.exp(-sb * x)
    return wr, wg, wb


@njit(cache=True, error_model="numpy", _nrt=False)
def spawn_transmission(surf, ray, tdx, tdy, tdz, tw0, tw1, tw2, can_trace, env, frame,
                       stack, sp, work):  # fmt: skip
    """Push the transmitted ray with weight ``tw`` along ``t``, or add the environment seen
    along it; returns the stack size. The ray carries the absorption of the medium it enters.
    """
    depth = int(ray[R_DEPTH])
    front = surf[S_FRONT] != 0.0
    volume = surf[S_THICKNESS] > 0.0
    if volume and front:  # entering: absorb with the material's coefficients from here on
        nsr, nsg, nsb = absorption(surf, 0), absorption(surf, 1), absorption(surf, 2)
    elif volume:  # leaving the medium
        nsr, nsg, nsb = 0.0, 0.0, 0.0
    else:  # thin wall, tinted by the base colour (KHR_materials_transmission)
        nsr, nsg, nsb = ray[R_SIGMA], ray[R_SIGMA + 1], ray[R_SIGMA + 2]
    if can_trace and max(tw0, tw1, tw2) >= MIN_WEIGHT:
        bx, by, bz = offset_point(surf, -1.0)
        sp = push_ray(stack, sp, bx, by, bz, tdx, tdy, tdz, tw0, tw1, tw2, 0.0, depth + 1,
                      0.0, nsr, nsg, nsb, 0.0)  # fmt: skip
        set_start(stack, sp, surf[S_PX], surf[S_PY], surf[S_PZ])
    else:
        qr, qg, qb = env_radiance(env, frame, tdx, tdy, tdz, work)
        work[W_ACC + 0] += tw0 * qr
        work[W_ACC + 1] += tw1 * qg
        work[W_ACC + 2] += tw2 * qb
    return sp
