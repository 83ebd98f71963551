"""The analytic floor under the product: an infinite plane, or a sweep that curves up into a wall.

The floor is not in the BVH: it is infinite, and its kind changes between looks of one model.
Parameters are packed in a float64 row (columns ``G_*``, built by ``shots.render``).

Sweep profile, in the vertical plane along the horizontal view axis f (s = distance behind the
camera target along f): floor y = h for s ≤ D − R, a quarter cylinder of radius R centred at
(s, y) = (D − R, h + R), and a wall s = D above y = h + R. The curve faces the camera.
"""

from __future__ import annotations

import math

from numba import njit

GROUND_NONE, GROUND_CATCHER, GROUND_PLANE, GROUND_SWEEP = 0, 1, 2, 3

G_KIND = 0
G_HEIGHT = 1
G_R, G_G, G_B = 2, 3, 4  # linear albedo of a visible floor
G_ROUGHNESS = 5
G_STRENGTH = 6  # shadow-catcher strength
G_FX, G_FZ = 7, 8  # unit horizontal axis from camera toward target (sweep)
G_TX, G_TZ = 9, 10  # target position (sweep)
G_RADIUS = 11
G_DISTANCE = 12
N_GROUND = 13


@njit(cache=True, error_model="numpy", _nrt=False)
def intersect_ground(ground, ox, oy, oz, dx, dy, dz, t_min, t_max):
    """Nearest floor hit within (t_min, t_max).

    Returns
    -------
    t : float, inf on a miss.
    nx, ny, nz : unit normal at the hit, on the camera's side (+Y on the floor).
    """
    kind = int(ground[G_KIND])
    if kind == GROUND_NONE:
        return math.inf, 0.0, 1.0, 0.0
    h = ground[G_HEIGHT]
    best, bnx, bny, bnz = math.inf, 0.0, 1.0, 0.0
    if kind != GROUND_SWEEP:
        if dy != 0.0:
            t = (h - oy) / dy
            if t > t_min and t < t_max:
                best = t
        return best, bnx, bny, bnz
    fx = ground[G_FX]
    fz = ground[G_FZ]
    r = ground[G_RADIUS]
    wall = ground[G_DISTANCE]
    s0 = wall - r
    so = (ox - ground[G_TX]) * fx + (oz - ground[G_TZ]) * fz
    ds = dx * fx + dz * fz
    # floor part
    if dy != 0.0:
        t = (h - oy) / dy
        if t > t_min and t < t_max and so + t * ds <= s0:
            best = t
    # wall part
    if ds != 0.0:
        t = (wall - so) / ds
        if t > t_min and t < min(t_max, best) and oy + t * dy >= h + r:
            best, bnx, bny, bnz = t, -fx, 0.0, -fz
    # curved part: circle in (s, y) centred at (s0, h + r)
    cs = so - s0
    cy = oy - (h + r)
    a = ds * ds + dy * dy
    if a > 0.0:
        b = cs * ds + cy * dy
        c = cs * cs + cy * cy - r * r
        disc = b * b - a * c
        if disc >= 0.0:
            root = math.sqrt(disc)
            for t in ((-b - root) / a, (-b + root) / a):
                if t > t_min and t < min(t_max, best):
                    ps = cs + t * ds
                    py = cy + t * dy
                    if ps >= 0.0 and py <= 0.0:
                        # inward normal (toward the centre, i.e. toward the camera)
                        best = t
                        bnx = -ps / r * fx
                        bny = -py / r
                        bnz = -ps / r * fz
    return best, bnx, bny, bnz
