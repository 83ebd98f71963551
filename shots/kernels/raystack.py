"""The tracer's ray stack: one record per pending ray, kept per thread.

A hit pushes the rays it spawns (reflection, transmission, the continuation behind a BLEND
surface); the camera sample pops them until the stack is empty. Records are rows of a float64
array read by the ``R_*`` column constants.
"""

from __future__ import annotations

from numba import njit

# --- ray record columns -------------------------------------------------------------------------
R_O, R_D, R_W = 0, 3, 6  # origin, unit direction, rgb weight
R_COVER = 9  # share of the pixel's alpha this ray decides (camera chain only)
R_DEPTH = 10
R_TMIN = 11
R_SIGMA = 12  # (3) absorption coefficients of the medium the ray travels in (1/m)
R_CAMERA = 15  # 1 for camera rays and their straight continuations
R_START = 16  # (3) where the ray's medium segment began: its un-offset surface point
# ray cone (Akenine-Möller et al. 2019, Ray Tracing Gems ch. 20): width w(t) = R_CONE + R_SPREAD·t
R_CONE = 19  # cone width at the origin (world units)
R_SPREAD = 20  # spread angle (radians; small-angle: width grows by this per unit distance)
R_CONE_HIT = 21  # cone width where the ray hit (set by the tracer before the hit spawns rays)
# --- environment light and diffuse bounces (shots.kernels.ambient) ---
R_BOUNCES = 22  # diffuse bounces on the path so far (copied from the ray being traced)
R_AMBIENT = 23  # 1: the environment this ray would see is already counted (ambient base)
R_SKY = 24  # (3) what to take back when such a ray is blocked
R_LIGHT_PDF = 27  # > 0: a glossy ray that sees area lights; its technique's solid-angle pdf
N_RAY = 28
STACK_RAYS = 96  # the last row holds the ray being traced
MIN_WEIGHT = 1e-3  # rays carrying less than this are not traced (their mean is added instead)


@njit(cache=True, inline="always", error_model="numpy", _nrt=False)
def push_ray(stack, sp, ox, oy, oz, dx, dy, dz, wr, wg, wb, cover, depth, tmin, sr, sg, sb, camera):
    """Push a ray onto the stack; returns the new stack size (rays beyond capacity are dropped).

    The ray cone comes from the ray being traced (the last row): a ray spawned at its hit
    (tmin = 0) starts with the cone's width there; a continuation from the same origin
    (tmin > 0, behind a BLEND surface) keeps the cone as it is. The spread is kept (surfaces
    are treated as flat, curvature term β = 0 in the ray-cone model). The new ray also
    inherits the path's diffuse-bounce count."""
    current = stack.shape[0] - 1
    if sp >= current:  # the last row is the current ray
        return sp
    set_ray(stack[sp], ox, oy, oz, dx, dy, dz, wr, wg, wb, cover, depth, tmin, sr, sg, sb, camera)
    stack[sp, R_CONE] = stack[current, R_CONE] if tmin > 0.0 else stack[current, R_CONE_HIT]
    stack[sp, R_SPREAD] = stack[current, R_SPREAD]
    stack[sp, R_BOUNCES] = stack[current, R_BOUNCES]
    return sp + 1



@njit(cache=True, inline="always", error_model="numpy", _nrt=False)
def set_ray(row, ox, oy, oz, dx, dy, dz, wr, wg, wb, cover, depth, tmin, sr, sg, sb, camera):
    """Fill one ray record (N_RAY,); its medium segment starts at its origin."""
    row[R_O] = ox
    row[R_O + 1] = oy
    row[R_O + 2] = oz
    row[R_D] = dx
    row[R_D + 1] = dy
    row[R_D + 2] = dz
    row[R_W] = wr
    row[R_W + 1] = wg
    row[R_W + 2] = wb
    row[R_COVER] = cover
    row[R_DEPTH] = depth
    row[R_TMIN] = tmin
    row[R_SIGMA] = sr
    row[R_SIGMA + 1] = sg
    row[R_SIGMA + 2] = sb
    row[R_CAMERA] = camera
    row[R_START] = ox
    row[R_START + 1] = oy
    row[R_START + 2] = oz
    row[R_BOUNCES] = 0.0
    row[R_AMBIENT] = 0.0
    row[R_SKY] = 0.0
    row[R_SKY + 1] = 0.0
    row[R_SKY + 2] = 0.0
    row[R_LIGHT_PDF] = 0.0



@njit(cache=True, inline="always", error_model="numpy", _nrt=False)
def set_start(stack, sp, x, y, z):
    """Record the true surface point the ray on top of the stack (row sp − 1) starts from."""
    if sp > 0:
        stack[sp - 1, R_START] = x
        stack[sp - 1, R_START + 1] = y
        stack[sp - 1, R_START + 2] = z
