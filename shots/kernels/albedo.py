"""Base colour of the first surface each camera ray sees: what the materials should give.

The check compares a render's luminance with this albedo (``shots.albedo``), so a light and a
dark fabric under the same light agree, while a wrong light still stands out. The same pass gives
the denoiser (``shots.denoise``) its guides: the shading normal and how glossy the surface is.
"""

from __future__ import annotations

import numpy as np
from numba import njit, prange

from shots.kernels.layout import N_WORK
from shots.kernels.surface import (
    N_SURFACE,
    S_BASE_B,
    S_BASE_G,
    S_BASE_R,
    S_CLEARCOAT,
    S_CLEARCOAT_ROUGHNESS,
    S_EM_B,
    S_EM_G,
    S_EM_R,
    S_METALLIC,
    S_NX,
    S_NY,
    S_NZ,
    S_OPACITY,
    S_ROUGHNESS,
    S_TRANSMISSION,
    mesh_surface,
)

# columns of the output rows
A_R, A_G, A_B = 0, 1, 2  # linear base colour: factor × texture × vertex colour
A_COVERAGE = 3  # opacity (alpha mode applied)
A_METALLIC = 4
A_GLOSS = 5  # the largest of clearcoat, transmission and emission: light that is no albedo's
A_NX, A_NY, A_NZ = 6, 7, 8  # unit shading normal, on the side the ray came from
A_ROUGHNESS = 9  # the smoothest visible layer's roughness (clearcoat's when it has one)
A_TRANSMISSION = 10
A_GLOW = 11  # emission, summed over r, g, b
N_ALBEDO = 12


@njit(cache=True, parallel=True, error_model="numpy")
def base_colours(tri, b1, b2, directions, cones, verts, faces, materials, texels, tex_info, out):
    """Fill ``out`` (r, N_ALBEDO) with the ``A_*`` columns at each hit; rows of missed rays
    (tri < 0) are left as they are. ``cones`` (r,): each ray's cone width at its hit (world
    units), the footprint its textures are filtered over; 0 reads the finest level."""
    for i in prange(len(tri)):
        k = tri[i]
        if k < 0:
            continue
        surf = np.empty(N_SURFACE)
        work = np.zeros(N_WORK)
        mesh_surface(k, b1[i], b2[i], directions[i, 0], directions[i, 1], directions[i, 2],
                     cones[i], verts, faces, materials, texels, tex_info, surf, work)  # fmt: skip
        out[i, A_R] = surf[S_BASE_R]
        out[i, A_G] = surf[S_BASE_G]
        out[i, A_B] = surf[S_BASE_B]
        out[i, A_COVERAGE] = surf[S_OPACITY]
        out[i, A_METALLIC] = surf[S_METALLIC]
        glow = surf[S_EM_R] + surf[S_EM_G] + surf[S_EM_B]
        out[i, A_GLOSS] = max(surf[S_CLEARCOAT], surf[S_TRANSMISSION], glow)
        out[i, A_NX] = surf[S_NX]
        out[i, A_NY] = surf[S_NY]
        out[i, A_NZ] = surf[S_NZ]
        rough = surf[S_ROUGHNESS]
        if surf[S_CLEARCOAT] > 0.0:
            rough = min(rough, surf[S_CLEARCOAT_ROUGHNESS])
        out[i, A_ROUGHNESS] = rough
        out[i, A_TRANSMISSION] = surf[S_TRANSMISSION]
        out[i, A_GLOW] = glow
