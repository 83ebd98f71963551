"""Light sampling: where a light is seen from a point, how far, and how much light arrives.

Lights are packed one per row of a float64 table (columns ``L_*``, built by ``shots.render``).
Units follow KHR_lights_punctual: a directional light gives illuminance (lux) on a surface facing
it, a point or spot light intensity (candela) that falls off with the inverse square of distance.
An area light is a one-sided rectangle of uniform radiance.
"""

from __future__ import annotations

import math

from numba import njit

KIND_DIRECTIONAL, KIND_POINT, KIND_SPOT, KIND_AREA = 0, 1, 2, 3

L_KIND = 0
L_R, L_G, L_B = 1, 2, 3  # colour × intensity
L_PX, L_PY, L_PZ = 4, 5, 6  # position (centre of an area light)
L_DX, L_DY, L_DZ = 7, 8, 9  # unit travel direction (area: the emitting face's normal)
L_RANGE = 10  # 0 = unlimited
L_SPOT_SCALE, L_SPOT_OFFSET = 11, 12
L_UX, L_UY, L_UZ = 13, 14, 15  # area edge vectors
L_VX, L_VY, L_VZ = 16, 17, 18
L_AREA = 19  # |edge_u × edge_v|
N_LIGHT_COLS = 20


@njit(cache=True, error_model="numpy", _nrt=False)
def range_window(distance, light_range):
    """The range window clamp(1 − (d/range)⁴, 0, 1) of KHR_lights_punctual ("Range Property").

    The 1/d² factor is applied by the caller. No range (0) means pure inverse square.
    """
    if light_range <= 0.0:
        return 1.0
    r = distance / light_range
    w = 1.0 - r * r * r * r
    return min(max(w, 0.0), 1.0)


@njit(cache=True, error_model="numpy", _nrt=False)
def spot_attenuation(cos_axis, scale, offset):
    """Smooth cone falloff (KHR_lights_punctual, "Inner and Outer Cone Angles")."""
    a = min(max(cos_axis * scale + offset, 0.0), 1.0)
    return a * a


@njit(cache=True, inline="always", error_model="numpy", _nrt=False)
def sample_light(lights, k, px, py, pz, u1, u2):
    """Sample light ``k`` as seen from point p.

    Parameters
    ----------
    lights : (k, N_LIGHT_COLS) float64 light table.
    k : light row.
    px, py, pz : receiving point.
    u1, u2 : uniform numbers placing the sample on an area light.

    Returns
    -------
    wx, wy, wz : unit direction from p toward the light.
    distance : distance to the light sample (inf for directional light).
    er, eg, eb : irradiance at a surface facing the light (lux-like), before the receiver's
        cosine: E_receiver = (er, eg, eb)·max(0, n·w). Zero when p is outside the light.
    """
    kind = int(lights[k, L_KIND])
    r = lights[k, L_R]
    g = lights[k, L_G]
    b = lights[k, L_B]
    dx = lights[k, L_DX]
    dy = lights[k, L_DY]
    dz = lights[k, L_DZ]
    if kind == KIND_DIRECTIONAL:
        return -dx, -dy, -dz, math.inf, r, g, b
    if kind == KIND_AREA:
        sx = lights[k, L_PX] + (u1 - 0.5) * lights[k, L_UX] + (u2 - 0.5) * lights[k, L_VX]
        sy = lights[k, L_PY] + (u1 - 0.5) * lights[k, L_UY] + (u2 - 0.5) * lights[k, L_VY]
        sz = lights[k, L_PZ] + (u1 - 0.5) * lights[k, L_UZ] + (u2 - 0.5) * lights[k, L_VZ]
    else:
        sx = lights[k, L_PX]
        sy = lights[k, L_PY]
        sz = lights[k, L_PZ]
    wx = sx - px
    wy = sy - py
    wz = sz - pz
    d2 = wx * wx + wy * wy + wz * wz
    if d2 <= 0.0:
        return 0.0, 1.0, 0.0, 0.0, 0.0, 0.0, 0.0
    d = math.sqrt(d2)
    wx /= d
    wy /= d
    wz /= d
    if kind == KIND_AREA:
        # one sample of a uniform-area estimator: L·A·cos θ_light / d² (pdf 1/A)
        cos_light = -(wx * dx + wy * dy + wz * dz)
        if cos_light <= 0.0:
            return wx, wy, wz, d, 0.0, 0.0, 0.0
        s = lights[k, L_AREA] * cos_light / d2
        return wx, wy, wz, d, r * s, g * s, b * s
    s = range_window(d, lights[k, L_RANGE]) / d2
    if kind == KIND_SPOT:
        cos_axis = -(wx * dx + wy * dy + wz * dz)
        s *= spot_attenuation(cos_axis, lights[k, L_SPOT_SCALE], lights[k, L_SPOT_OFFSET])
    return wx, wy, wz, d, r * s, g * s, b * s


@njit(cache=True, error_model="numpy", _nrt=False)
def hit_area_light(lights, k, ox, oy, oz, dx, dy, dz):
    """Where a ray meets area light ``k``'s emitting face: (t, cos at the light), t = inf on a
    miss. The light is a rectangle (edge vectors at right angles, as the rigs build them)."""
    nx, ny, nz = lights[k, L_DX], lights[k, L_DY], lights[k, L_DZ]
    cos_light = -(dx * nx + dy * ny + dz * nz)
    if cos_light <= 0.0:  # one-sided: it emits along its direction only
        return math.inf, 0.0
    cx, cy, cz = lights[k, L_PX] - ox, lights[k, L_PY] - oy, lights[k, L_PZ] - oz
    t = -(cx * nx + cy * ny + cz * nz) / cos_light
    if t <= 0.0:
        return math.inf, 0.0
    qx, qy, qz = t * dx - cx, t * dy - cy, t * dz - cz  # hit point − centre
    ux, uy, uz = lights[k, L_UX], lights[k, L_UY], lights[k, L_UZ]
    vx, vy, vz = lights[k, L_VX], lights[k, L_VY], lights[k, L_VZ]
    a = (qx * ux + qy * uy + qz * uz) / (ux * ux + uy * uy + uz * uz)
    b = (qx * vx + qy * vy + qz * vz) / (vx * vx + vy * vy + vz * vz)
    if abs(a) > 0.5 or abs(b) > 0.5:
        return math.inf, 0.0
    return t, cos_light


@njit(cache=True, error_model="numpy", _nrt=False)
def area_pdf(lights, k, distance, cos_light):
    """Solid-angle pdf of ``sample_light``'s uniform point on area light k: d² / (A cos θ)."""
    if cos_light <= 0.0:
        return 0.0
    return distance * distance / (lights[k, L_AREA] * cos_light)
