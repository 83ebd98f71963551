"""Column layout of the packed arrays the tracer reads (built by ``shots.render``).

The scene goes to the kernels as a handful of wide arrays rather than one per attribute: every
array a numba function takes costs call and reference-count work, and the tracer's helpers are
called for every ray.

    verts     (v, N_VERT) float32   position, normal, tangent (w = bitangent sign), uv0, uv1, colour
    faces     (n, 4) int32          vertex indices i0 i1 i2, material row
    materials (m, N_MAT) float32    the ``shots.scene`` P_* columns, then per texture slot:
                                    texture index, texcoord set, uv affine a00 a01 a02 a10 a11 a12
    frame     (N_FRAME,) float64    camera, settings, background, SH irradiance, env rotation,
                                    the model's box, diffuse bounces
    work      (N_WORK,) float64     per-thread scratch: interpolated uvs, a texel, an env lookup,
                                    the sample's accumulator and its random-dimension counter
"""

from __future__ import annotations

import numpy as np

from shots.scene import N_PARAMS, N_SLOTS

# --- verts ---------------------------------------------------------------------------------------
V_P, V_N, V_T, V_UV0, V_UV1, V_C = 0, 3, 6, 10, 12, 14
N_VERT = 18

# --- materials: P_* columns first, then 8 per slot -------------------------------------------
M_SLOTS = N_PARAMS
SLOT_TEX, SLOT_SET, SLOT_A = 0, 1, 2  # texture index, texcoord set, affine (6)
SLOT_WIDTH = 8
N_MAT = M_SLOTS + SLOT_WIDTH * N_SLOTS

# --- frame -----------------------------------------------------------------------------------
# camera: eye, right u, up v, backward w, tan(yfov/2), aspect, orthographic flag, ymag
F_EYE, F_U, F_V, F_W = 0, 3, 6, 9
F_TAN_Y, F_ASPECT, F_ORTHO, F_YMAG = 12, 13, 14, 15
# settings (integers stored as float64)
F_WIDTH, F_HEIGHT, F_SAMPLES, F_AREA_SAMPLES, F_GLOSSY_SAMPLES = 16, 17, 18, 19, 20
F_MAX_DEPTH, F_SEED, F_SEE_THROUGH, F_BACKGROUND = 21, 22, 23, 24
F_ZNEAR = 25  # near clipping plane's distance along the view axis (m); 0: none
F_BG_TOP, F_BG_BOTTOM = 26, 29  # linear rgb
F_SH = 32  # 9 × 3 SH irradiance coefficients, row-major
F_ENV_ROTATION = 59
F_CONTACT_REACH = 60  # length of the floor's contact-shadow rays (m)
# --- occluded environment light and diffuse bounces (shots.kernels.ambient) ---
F_BOX = 61  # (6) the model's bounding box: min xyz, max xyz
F_DIFFUSE_BOUNCES = 67  # diffuse bounces a path may take
F_INDIRECT_CLAMP = 68  # largest luminance one indirect ray may add to a sample
F_PIXEL_SEED = 69  # the frame's own seed, the same in every set: scrambles each pixel's sequence
N_FRAME = 70
BG_TRANSPARENT, BG_SOLID, BG_GRADIENT, BG_ENVIRONMENT = 0, 1, 2, 3

# --- work ------------------------------------------------------------------------------------
W_UV = 0  # (4) uv0, uv1 at the hit
W_TEXEL = 4  # (4) last texel sampled
W_ENV = 8  # (3) last environment look-up
W_ACC = 11  # (4) premultiplied rgba of the current pixel
W_DIM = 15  # random-number dimension counter of the current sample

# --- work: texture footprint of the current ray (ray cones, shots.kernels.surface) -------------
W_LOD = 16  # (2) per uv set: log2 of the footprint in uv units (a texture adds log2 of its size)
W_CONE = 18  # cone width at the ray's origin (world units)
W_SPREAD = 19  # cone spread angle (radians): the width grows by this per unit of distance
N_WORK = 20

# --- colour channels, and texture slots passed to functions that are not inlined ---------------
# numba types a Python int constant as Literal[int] and compiles a callee once for every literal
# value it is passed; numpy ints are plain int64, so every call shares one compiled function.
RED, GREEN, BLUE = np.int64(0), np.int64(1), np.int64(2)
