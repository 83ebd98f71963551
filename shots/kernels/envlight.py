"""Light from the environment: its radiance along a direction and its SH irradiance.
"""

from __future__ import annotations

import math

from numba import njit

from shots.kernels.layout import (
    F_ENV_ROTATION,
    F_SH,
    W_ENV,
)
from shots.kernels.texture import sample_equirect

# real SH basis constants (Ramamoorthi & Hanrahan 2001, eq. 3)
SH_Y0 = 0.5 * math.sqrt(1.0 / math.pi)
SH_Y1 = math.sqrt(3.0 / (4.0 * math.pi))
SH_Y2 = math.sqrt(15.0 / (4.0 * math.pi))
SH_Y20 = math.sqrt(5.0 / (16.0 * math.pi))
SH_Y22 = math.sqrt(15.0 / (16.0 * math.pi))


@njit(cache=True, inline="always", error_model="numpy", _nrt=False)
def sh_irradiance(frame, nx, ny, nz):
    """E(n) from the nine SH coefficients in frame[F_SH:] (Ramamoorthi & Hanrahan 2001, eq. 13)."""
    c0 = SH_Y0
    c1 = SH_Y1 * ny
    c2 = SH_Y1 * nz
    c3 = SH_Y1 * nx
    c4 = SH_Y2 * nx * ny
    c5 = SH_Y2 * ny * nz
    c6 = SH_Y20 * (3.0 * nz * nz - 1.0)
    c7 = SH_Y2 * nx * nz
    c8 = SH_Y22 * (nx * nx - ny * ny)
    e0 = (
        c0 * frame[F_SH + 0] + c1 * frame[F_SH + 3] + c2 * frame[F_SH + 6] + c3 * frame[F_SH + 9] + c4 * frame[F_SH + 12]
        + c5 * frame[F_SH + 15] + c6 * frame[F_SH + 18] + c7 * frame[F_SH + 21] + c8 * frame[F_SH + 24]
    )  # fmt: skip
    e1 = (
        c0 * frame[F_SH + 1] + c1 * frame[F_SH + 4] + c2 * frame[F_SH + 7] + c3 * frame[F_SH + 10] + c4 * frame[F_SH + 13]
        + c5 * frame[F_SH + 16] + c6 * frame[F_SH + 19] + c7 * frame[F_SH + 22] + c8 * frame[F_SH + 25]
    )  # fmt: skip
    e2 = (
        c0 * frame[F_SH + 2] + c1 * frame[F_SH + 5] + c2 * frame[F_SH + 8] + c3 * frame[F_SH + 11] + c4 * frame[F_SH + 14]
        + c5 * frame[F_SH + 17] + c6 * frame[F_SH + 20] + c7 * frame[F_SH + 23] + c8 * frame[F_SH + 26]
    )  # fmt: skip
    return max(e0, 0.0), max(e1, 0.0), max(e2, 0.0)



@njit(cache=True, inline="always", error_model="numpy", _nrt=False)
def env_radiance(env_map, frame, dx, dy, dz, work):
    """Environment radiance along a direction (via work[W_ENV:+3]); returns r, g, b."""
    sample_equirect(env_map, dx, dy, dz, frame[F_ENV_ROTATION], 1.0, work, W_ENV)
    return work[W_ENV], work[W_ENV + 1], work[W_ENV + 2]
