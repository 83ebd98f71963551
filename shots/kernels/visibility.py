"""Which surface a ray sees, and how much light a shadow ray lets through.

Both skip what the glTF material says is not there: MASK cut-outs and the back faces of
single-sided surfaces (glTF 2.0 spec §3.9.4–3.9.5); shadow rays also pass BLEND and transmissive
surfaces in scenes that have them.
"""

from __future__ import annotations

import math

import numpy as np
from numba import njit

from shots.kernels.brdf import f0_from_ior, schlick_weight
from shots.kernels.ground import (
    G_B,
    G_G,
    G_KIND,
    G_R,
    G_ROUGHNESS,
    GROUND_CATCHER,
    GROUND_NONE,
    intersect_ground,
)
from shots.kernels.layout import BLUE, GREEN, RED, W_CONE, W_SPREAD
from shots.kernels.offset import offset_origin_one
from shots.kernels.surface import (
    S_ATT_DISTANCE,
    S_ATT_R,
    S_BASE_R,
    S_FRONT,
    S_GX,
    S_GY,
    S_GZ,
    S_IOR,
    S_METALLIC,
    S_OPACITY,
    S_PX,
    S_PY,
    S_PZ,
    S_ROUGHNESS,
    S_SKIP,
    S_SPEC_R,
    S_SPECULAR,
    S_THICKNESS,
    S_TRANSMISSION,
    ground_surface,
    mesh_surface,
)
from shots.kernels.traverse import any_hit_one, closest_hit_one

MAX_SKIPS = 64  # cut-out and back-face hits passed through per ray


@njit(cache=True, inline="always", error_model="numpy", _nrt=False)
def offset_point(surf, side):
    """The hit point pushed off the surface, toward the ray's side (+1) or through it (−1).

    float64 like every other ray origin (exactly the float32 offset point): one type signature
    for the ray queries and the floor test whichever ray they trace.
    """
    x, y, z = offset_origin_one(
        surf[S_PX], surf[S_PY], surf[S_PZ],
        side * surf[S_GX], side * surf[S_GY], side * surf[S_GZ],
    )  # fmt: skip
    return np.float64(x), np.float64(y), np.float64(z)



@njit(cache=True, inline="always", error_model="numpy", _nrt=False)
def find_surface(bvh, scene, ground, ox, oy, oz, dx, dy, dz, t_min, camera, surf, work, tstack):
    """The first surface a ray sees, skipping cut-out and single-sided back-face hits.

    Textures are filtered over the ray's cone: width work[W_CONE] at the origin, growing by
    work[W_SPREAD] per unit of distance.

    Returns
    -------
    t : float, inf on a miss.
    what : 0 miss, 1 mesh, 2 floor. ``surf`` holds the surface for hits.
    """
    node_bounds, node_links, tri_verts, tri_ids = bvh
    verts, faces, materials, texels, tex_info = scene
    kind = int(ground[G_KIND])
    ground_seen = kind != GROUND_NONE and (kind != GROUND_CATCHER or camera)
    t_lo = t_min
    for _ in range(MAX_SKIPS):
        t, k, b1, b2 = closest_hit_one(
            node_bounds, node_links, tri_verts, tri_ids, ox, oy, oz, dx, dy, dz, t_lo, np.inf,
            tstack,
        )  # fmt: skip
        if ground_seen:
            tg, gnx, gny, gnz = intersect_ground(ground, ox, oy, oz, dx, dy, dz, t_lo, t)
            if tg < t:
                ground_surface(
                    ox + tg * dx, oy + tg * dy, oz + tg * dz, gnx, gny, gnz,
                    ground[G_R], ground[G_G], ground[G_B], ground[G_ROUGHNESS], surf,
                )  # fmt: skip
                return tg, 2
        if k < 0:
            return np.inf, 0
        cone = work[W_CONE] + work[W_SPREAD] * t  # the ray cone's width at the hit
        mesh_surface(k, b1, b2, dx, dy, dz, cone, verts, faces, materials, texels, tex_info, surf,
                     work)  # fmt: skip
        if surf[S_SKIP] == 0.0 and surf[S_OPACITY] > 0.0:
            return t, 1
        t_lo = t * (1.0 + 1e-7) + 1e-9
    return np.inf, 0



@njit(cache=True, inline="always", error_model="numpy", _nrt=False)
def shadow_ray(frame, bvh, scene, ground, see_through, ox, oy, oz, dx, dy, dz, t_max, surf, work,
               tstack):  # fmt: skip
    """Light let through along a shadow ray (origin already offset) up to ``t_max``.

    Opaque geometry blocks it; a visible floor blocks. Scenes with see-through materials take
    ``light_through``. Returns r, g, b in [0, 1]. Inlined: shadow rays are most of a frame's
    rays, and a call would pass every array of the scene on the stack.
    """
    kind = int(ground[G_KIND])
    if kind != GROUND_NONE and kind != GROUND_CATCHER:
        tg, _, _, _ = intersect_ground(ground, ox, oy, oz, dx, dy, dz, 0.0, t_max)
        if tg < t_max:
            return 0.0, 0.0, 0.0
    if see_through:
        return light_through(bvh, scene, ox, oy, oz, dx, dy, dz, t_max, surf, work, tstack)
    node_bounds, node_links, tri_verts, _ = bvh
    if any_hit_one(node_bounds, node_links, tri_verts, ox, oy, oz, dx, dy, dz, 0.0, t_max, tstack):
        return 0.0, 0.0, 0.0
    return 1.0, 1.0, 1.0



@njit(cache=True, error_model="numpy", _nrt=False)
def light_through(bvh, scene, ox, oy, oz, dx, dy, dz, t_max, surf, work, tstack):
    """Light let through along a shadow ray past see-through surfaces up to ``t_max``.

    Cut-outs pass it; BLEND surfaces pass 1 − α; transmissive surfaces pass what the camera path
    passes (``shade.py``/``transmission.py``): Fresnel transmittance 1 − F at each interface,
    the base colour once per thin wall or once where a volume is entered, and Beer–Lambert
    absorption over the distance inside a volume (KHR_materials_transmission,
    KHR_materials_volume). Shadow rays do not refract (caustics are out of scope), so both
    interfaces of a volume see the ray's own angle, as a slab's would. Returns r, g, b in
    [0, 1].
    """
    node_bounds, node_links, tri_verts, tri_ids = bvh
    verts, faces, materials, texels, tex_info = scene
    tr, tg, tb = 1.0, 1.0, 1.0
    t_lo = 0.0
    t_entered = 0.0  # where the ray last entered a volume (0: it starts inside or outside)
    for _ in range(MAX_SKIPS):
        t, k, b1, b2 = closest_hit_one(
            node_bounds, node_links, tri_verts, tri_ids, ox, oy, oz, dx, dy, dz, t_lo, t_max,
            tstack,
        )  # fmt: skip
        if k < 0:
            return tr, tg, tb
        # point lookups: a shadow ray's cone is not tracked
        mesh_surface(k, b1, b2, dx, dy, dz, 0.0, verts, faces, materials, texels, tex_info, surf,
                     work)  # fmt: skip
        a = surf[S_OPACITY]
        through = (1.0 - surf[S_METALLIC]) * surf[S_TRANSMISSION]
        volume = surf[S_THICKNESS] > 0.0
        entering = surf[S_FRONT] != 0.0
        tint = not (volume and not entering)  # a volume is tinted once, where light enters it
        cos_i = abs(dx * surf[S_GX] + dy * surf[S_GY] + dz * surf[S_GZ])
        tr *= (1.0 - a) + a * through * crossing_transmittance(surf, RED, cos_i, tint)
        tg *= (1.0 - a) + a * through * crossing_transmittance(surf, GREEN, cos_i, tint)
        tb *= (1.0 - a) + a * through * crossing_transmittance(surf, BLUE, cos_i, tint)
        if volume and through > 0.0:
            if entering:
                t_entered = t
            else:  # leaving: Beer–Lambert over the path inside
                inside = t - t_entered
                tr *= math.exp(-volume_absorption(surf, 0) * inside)
                tg *= math.exp(-volume_absorption(surf, 1) * inside)
                tb *= math.exp(-volume_absorption(surf, 2) * inside)
                t_entered = 0.0
        if max(tr, tg, tb) <= 0.0:
            return 0.0, 0.0, 0.0
        t_lo = t * (1.0 + 1e-7) + 1e-9
    return 0.0, 0.0, 0.0


@njit(cache=True, error_model="numpy", _nrt=False)
def crossing_transmittance(surf, c, cos_i, tint):
    """Channel ``c`` let through one interface: (1 − F)·(base colour if ``tint``), F the Schlick
    (1994) Fresnel of the dielectric F0 (KHR_materials_ior, KHR_materials_specular) with F90
    lowered by roughness, as the camera path's environment split does."""
    f0 = min(f0_from_ior(surf[S_IOR]) * surf[S_SPEC_R + c], 1.0) * surf[S_SPECULAR]
    f90 = max(surf[S_SPECULAR] * max(1.0 - surf[S_ROUGHNESS], 0.0), f0)
    fresnel = f0 + (f90 - f0) * schlick_weight(cos_i)
    return (1.0 - fresnel) * (surf[S_BASE_R + c] if tint else 1.0)


@njit(cache=True, inline="always", error_model="numpy", _nrt=False)
def volume_absorption(surf, c):
    """Beer–Lambert σ = −ln(attenuationColor)/attenuationDistance of channel ``c``
    (KHR_materials_volume); 0 without attenuation."""
    d = surf[S_ATT_DISTANCE]
    col = surf[S_ATT_R + c]
    if not d < np.inf or col >= 1.0:
        return 0.0
    if col <= 0.0:
        return 1e30
    return -math.log(col) / d
