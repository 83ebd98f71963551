"""Light from the environment: its radiance along a direction, its SH irradiance, and directions
drawn in proportion to its radiance.

The environment reaches the kernels as a tuple ``env = (radiance, rows, marginal)``: the
(h, w, 3) float32 equirect map and its sampling table (``shots.environment.sampling_table``).
"""

from __future__ import annotations

import math

from numba import njit

from shots.kernels.layout import (
    F_ENV_ROTATION,
    F_SH,
    W_ENV,
)
from shots.kernels.texture import equirect_uv, sample_equirect

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
def env_radiance(env, frame, dx, dy, dz, work):
    """Environment radiance along a direction (via work[W_ENV:+3]); returns r, g, b."""
    sample_equirect(env[0], dx, dy, dz, frame[F_ENV_ROTATION], 1.0, work, W_ENV)
    return work[W_ENV], work[W_ENV + 1], work[W_ENV + 2]


@njit(cache=True, error_model="numpy", _nrt=False)
def _find_interval(cdf, u):
    """The first index i with cdf[i] > u (binary search; cdf ends at 1)."""
    lo, hi = 0, cdf.shape[0] - 1
    while lo < hi:
        mid = (lo + hi) // 2
        if cdf[mid] > u:
            hi = mid
        else:
            lo = mid + 1
    return lo


@njit(cache=True, error_model="numpy", _nrt=False)
def _cell_probability(cdf, i):
    return cdf[i] - (cdf[i - 1] if i > 0 else 0.0)


@njit(cache=True, error_model="numpy", _nrt=False)
def sample_env(env, frame, u1, u2):
    """A direction drawn from the environment's table and its solid-angle pdf.

    Pharr, Jakob & Humphreys, PBR 3rd ed., §14.2.4: a row from the marginal, a pixel from the
    row's conditional, a uniform point inside it; pdf(ω) = p(u, v)·w·h / (2π² sin θ).
    Returns dx, dy, dz, pdf (pdf 0 at the poles).
    """
    rows, marginal = env[1], env[2]
    h, w = rows.shape
    j = _find_interval(marginal, u1)
    p_row = _cell_probability(marginal, j)
    lo = marginal[j] - p_row
    v = (j + min(max((u1 - lo) / p_row, 0.0), 1.0)) / h
    i = _find_interval(rows[j], u2)
    p_col = _cell_probability(rows[j], i)
    lo = rows[j, i] - p_col
    u = (i + min(max((u2 - lo) / p_col, 0.0), 1.0)) / w
    theta = v * math.pi
    phi = (u - 0.5) * 2.0 * math.pi + frame[F_ENV_ROTATION]  # inverse of equirect_uv
    st = math.sin(theta)
    if st <= 0.0:
        return 0.0, 1.0, 0.0, 0.0
    pdf = p_row * p_col * w * h / (2.0 * math.pi * math.pi * st)
    return st * math.sin(phi), math.cos(theta), -st * math.cos(phi), pdf


@njit(cache=True, error_model="numpy", _nrt=False)
def env_pdf(env, frame, dx, dy, dz):
    """Solid-angle pdf with which ``sample_env`` draws the unit direction d."""
    rows, marginal = env[1], env[2]
    h, w = rows.shape
    u, v = equirect_uv(dx, dy, dz, frame[F_ENV_ROTATION])
    j = min(int(v * h), h - 1)
    i = min(int(u * w), w - 1)
    st = math.sqrt(max(1.0 - dy * dy, 0.0))
    if st <= 0.0:
        return 0.0
    p = _cell_probability(marginal, j) * _cell_probability(rows[j], i)
    return p * w * h / (2.0 * math.pi * math.pi * st)
