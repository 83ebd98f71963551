"""Base colour of the first surface each camera ray sees: what the materials should give.

The check compares a render's luminance with this albedo (``shots.albedo``), so a light and a
dark fabric under the same light agree, while a wrong light still stands out.
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
    S_METALLIC,
    S_OPACITY,
    mesh_surface,
)


@njit(cache=True, parallel=True, error_model="numpy")
def base_colours(tri, b1, b2, directions, verts, faces, materials, texels, tex_info, out):
    """Fill ``out`` (r, 5) with linear base colour R, G, B (factor × texture × vertex colour),
    coverage and metallic at each hit; rows of missed rays (tri < 0) are left as they are."""
    for i in prange(len(tri)):
        k = tri[i]
        if k < 0:
            continue
        surf = np.empty(N_SURFACE)
        work = np.zeros(N_WORK)
        mesh_surface(k, b1[i], b2[i], directions[i, 0], directions[i, 1], directions[i, 2],
                     verts, faces, materials, texels, tex_info, surf, work)
        out[i, 0] = surf[S_BASE_R]
        out[i, 1] = surf[S_BASE_G]
        out[i, 2] = surf[S_BASE_B]
        out[i, 3] = surf[S_OPACITY]
        out[i, 4] = surf[S_METALLIC]
