"""The tracer: camera samples → ray trees → premultiplied linear RGBA, in one parallel kernel.

Whitted-style recursion, unrolled onto a small per-thread ray stack. At each hit:

- emission, and direct light from every look light through shadow rays (area lights with
  stratified samples, so their shadows are soft), with the glTF BRDF (spec Appendix B) under
  the KHR_materials_sheen fibre layer (``shots.kernels.sheen``);
- diffuse light from the environment's spherical-harmonics irradiance, × occlusion (the sheen
  layer's share of it too, approximately);
- specular light from reflection rays: one mirror ray for smooth surfaces, several GGX-sampled
  rays for glossy ones (Heitz 2018 visible normals), weighted by Fresnel; rough lobes take the
  SH-blurred environment along the mirror direction instead (tracing them mostly adds noise);
- transmission: a straight-through ray for thin walls, Snell refraction with Beer–Lambert
  absorption over the traced distance for volumes (KHR_materials_transmission / _volume);
- coverage: BLEND surfaces continue the camera ray behind them; the shadow catcher writes its
  shadow as alpha over the background.

Inputs are few wide arrays (``shots.kernels.layout``); the BVH and the scene go as tuples:
    bvh = (node_bounds, node_links, tri_verts, tri_ids)          shots.accel.Bvh
    scene = (verts, faces, materials, texels, tex_info)          packed by shots.render
Everything is borrowed (``shots.kernels.borrow``) at the top of each parallel work item and the
helpers are compiled without reference counting (``_nrt=False``; none of them allocates): they
run per ray, and counting references to their array arguments cost more than the ray queries.
Pixels are independent: tiles are dealt to work items round-robin, each with its own scratch.
"""

from __future__ import annotations

import math

import numpy as np
from numba import njit, prange

from shots.kernels.borrow import borrow
from shots.kernels.brdf import (
    INV_PI,
    alpha_of,
    brdf_channel,
    f0_from_ior,
    refract,
    sample_ggx_vndf,
    schlick_weight,
    smith_g1,
    smith_vis,
    specular_lobe,
)
from shots.kernels.ground import (
    G_B,
    G_G,
    G_KIND,
    G_R,
    G_ROUGHNESS,
    G_STRENGTH,
    GROUND_CATCHER,
    GROUND_NONE,
    intersect_ground,
)
from shots.kernels.layout import (
    BG_ENVIRONMENT,
    BG_TRANSPARENT,
    F_AREA_SAMPLES,
    F_ASPECT,
    F_BACKGROUND,
    F_BG_BOTTOM,
    F_BG_TOP,
    F_CONTACT_REACH,
    F_CONTACT_SAMPLES,
    F_ENV_ROTATION,
    F_EYE,
    F_GLOSSY_SAMPLES,
    F_HEIGHT,
    F_MAX_DEPTH,
    F_ORTHO,
    F_SAMPLES,
    F_SEE_THROUGH,
    F_SEED,
    F_SH,
    F_TAN_Y,
    F_U,
    F_V,
    F_W,
    F_WIDTH,
    F_YMAG,
    N_WORK,
    W_ACC,
    W_DIM,
    W_ENV,
)
from shots.kernels.lights import KIND_AREA, L_KIND, sample_light
from shots.kernels.offset import offset_origin_one
from shots.kernels.sampling import (
    cosine_hemisphere,
    orthonormal_basis,
    pixel_key,
    random_bits,
    spread_count,
    spread_stratum,
    stratum,
    tent_warp,
)
from shots.kernels.sheen import albedo_scaling, sheen_albedo, sheen_lobe
from shots.kernels.surface import (
    N_SURFACE,
    S_ATT_DISTANCE,
    S_ATT_R,
    S_BASE_B,
    S_BASE_G,
    S_BASE_R,
    S_CLEARCOAT,
    S_CLEARCOAT_ROUGHNESS,
    S_CX,
    S_CY,
    S_CZ,
    S_EM_B,
    S_EM_G,
    S_EM_R,
    S_FRONT,
    S_GX,
    S_GY,
    S_GZ,
    S_IOR,
    S_METALLIC,
    S_NX,
    S_NY,
    S_NZ,
    S_OCCLUSION,
    S_OPACITY,
    S_PX,
    S_PY,
    S_PZ,
    S_ROUGHNESS,
    S_SHEEN_B,
    S_SHEEN_G,
    S_SHEEN_R,
    S_SHEEN_ROUGHNESS,
    S_SKIP,
    S_SPEC_R,
    S_SPECULAR,
    S_THICKNESS,
    S_TRANSMISSION,
    S_UNLIT,
    ground_surface,
    mesh_surface,
)
from shots.kernels.texture import sample_equirect
from shots.kernels.traverse import any_hit_one, closest_hit_one, new_stack

# --- ray stack columns --------------------------------------------------------------------------
R_O, R_D, R_W = 0, 3, 6  # origin, unit direction, rgb weight
R_COVER = 9  # share of the pixel's alpha this ray decides (camera chain only)
R_DEPTH = 10
R_TMIN = 11
R_SIGMA = 12  # (3) absorption coefficients of the medium the ray travels in (1/m)
R_CAMERA = 15  # 1 for camera rays and their straight continuations
R_START = 16  # (3) where the ray's medium segment began: its un-offset surface point
N_RAY = 19
STACK_RAYS = 96  # the last row holds the ray being traced

MIRROR_ROUGHNESS = 0.03  # below: one ideal mirror ray (α ≤ 1e-3, a delta in practice)
# At and above these roughnesses a lobe is taken as blurred environment light instead of traced:
# a dielectric reflects only ~4 % and its blurred highlight hides in noise, a metal shows it all.
GLOSSY_DIELECTRIC = 0.3
GLOSSY_METAL = 0.6
MIN_WEIGHT = 1e-3  # rays carrying less than this are not traced (their mean is added instead)
MAX_SKIPS = 64  # cut-out and back-face hits passed through per ray
TILE = 8  # pixels per tile edge
WORK_ITEMS = 256  # parallel items; tiles are dealt round-robin so threads stay balanced
# real SH basis constants (Ramamoorthi & Hanrahan 2001, eq. 3)
SH_Y0 = 0.5 * math.sqrt(1.0 / math.pi)
SH_Y1 = math.sqrt(3.0 / (4.0 * math.pi))
SH_Y2 = math.sqrt(15.0 / (4.0 * math.pi))
SH_Y20 = math.sqrt(5.0 / (16.0 * math.pi))
SH_Y22 = math.sqrt(15.0 / (16.0 * math.pi))


# =================================================================================================
# small helpers
# =================================================================================================
@njit(cache=True, inline="always", error_model="numpy", _nrt=False)
def next_pair(seed, pixel, sample, work):
    """The next two numbers of this camera sample's sequence (counter in work[W_DIM]).

    Both come from one 32-bit hash, 16 bits each: they only jitter a point inside a stratum.
    """
    d = int(work[W_DIM])
    work[W_DIM] = d + 1
    h = random_bits(seed, pixel, sample, d)
    return ((h & 0xFFFF) + 0.5) * (1.0 / 65536.0), ((h >> 16) + 0.5) * (1.0 / 65536.0)


@njit(cache=True, inline="always", error_model="numpy", _nrt=False)
def luminance(r, g, b):
    """Relative luminance of linear Rec.709 RGB (ITU-R BT.709)."""
    return 0.2126 * r + 0.7152 * g + 0.0722 * b


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


@njit(cache=True, inline="always", error_model="numpy", _nrt=False)
def offset_point(surf, side):
    """The hit point pushed off the surface, toward the ray's side (+1) or through it (−1)."""
    return offset_origin_one(
        surf[S_PX], surf[S_PY], surf[S_PZ],
        side * surf[S_GX], side * surf[S_GY], side * surf[S_GZ],
    )  # fmt: skip


@njit(cache=True, inline="always", error_model="numpy", _nrt=False)
def push_ray(stack, sp, ox, oy, oz, dx, dy, dz, wr, wg, wb, cover, depth, tmin, sr, sg, sb, camera):
    """Push a ray onto the stack; returns the new stack size (rays beyond capacity are dropped)."""
    if sp >= stack.shape[0] - 1:  # the last row is the current ray
        return sp
    set_ray(stack[sp], ox, oy, oz, dx, dy, dz, wr, wg, wb, cover, depth, tmin, sr, sg, sb, camera)
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


@njit(cache=True, inline="always", error_model="numpy", _nrt=False)
def set_start(stack, sp, x, y, z):
    """Record the true surface point the ray on top of the stack (row sp − 1) starts from."""
    if sp > 0:
        stack[sp - 1, R_START] = x
        stack[sp - 1, R_START + 1] = y
        stack[sp - 1, R_START + 2] = z


# =================================================================================================
# visibility
# =================================================================================================
@njit(cache=True, inline="always", error_model="numpy", _nrt=False)
def find_surface(bvh, scene, ground, ox, oy, oz, dx, dy, dz, t_min, camera, surf, work, tstack):
    """The first surface a ray sees, skipping cut-out and single-sided back-face hits.

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
        mesh_surface(k, b1, b2, dx, dy, dz, verts, faces, materials, texels, tex_info, surf, work)
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

    Cut-outs pass it; BLEND surfaces pass 1 − α; transmissive surfaces pass their tint (no
    refraction: caustics are out of scope). Returns r, g, b in [0, 1].
    """
    node_bounds, node_links, tri_verts, tri_ids = bvh
    verts, faces, materials, texels, tex_info = scene
    tr, tg, tb = 1.0, 1.0, 1.0
    t_lo = 0.0
    for _ in range(MAX_SKIPS):
        t, k, b1, b2 = closest_hit_one(
            node_bounds, node_links, tri_verts, tri_ids, ox, oy, oz, dx, dy, dz, t_lo, t_max,
            tstack,
        )  # fmt: skip
        if k < 0:
            return tr, tg, tb
        mesh_surface(k, b1, b2, dx, dy, dz, verts, faces, materials, texels, tex_info, surf, work)
        a = surf[S_OPACITY]
        through = (1.0 - surf[S_METALLIC]) * surf[S_TRANSMISSION]
        tr *= (1.0 - a) + a * through * surf[S_BASE_R]
        tg *= (1.0 - a) + a * through * surf[S_BASE_G]
        tb *= (1.0 - a) + a * through * surf[S_BASE_B]
        if max(tr, tg, tb) <= 0.0:
            return 0.0, 0.0, 0.0
        t_lo = t * (1.0 + 1e-7) + 1e-9
    return 0.0, 0.0, 0.0


# =================================================================================================
# BSDF evaluation
# =================================================================================================
@njit(cache=True, inline="always", error_model="numpy", _nrt=False)
def dielectric_f0(surf, c):
    """KHR_materials_specular F0 of colour channel ``c``: min(F0(ior)·colour, 1)·factor."""
    return min(f0_from_ior(surf[S_IOR]) * surf[S_SPEC_R + c], 1.0) * surf[S_SPECULAR]


@njit(cache=True, inline="always", error_model="numpy", _nrt=False)
def clearcoat_fresnel(surf, vx, vy, vz):
    """clearcoat · F_Schlick(0.04, N_c·V) (KHR_materials_clearcoat, "fresnel_coat")."""
    cc = surf[S_CLEARCOAT]
    if cc <= 0.0:
        return 0.0
    c = surf[S_CX] * vx + surf[S_CY] * vy + surf[S_CZ] * vz
    return cc * (0.04 + 0.96 * schlick_weight(c))


@njit(cache=True, inline="always", error_model="numpy", _nrt=False)
def eval_bsdf(surf, vx, vy, vz, lx, ly, lz):
    """f(v, l)·(N·L) of the surface for unit view v and light l; returns r, g, b."""
    nx, ny, nz = surf[S_NX], surf[S_NY], surf[S_NZ]
    n_dot_l = nx * lx + ny * ly + nz * lz
    if n_dot_l <= 0.0:
        return 0.0, 0.0, 0.0
    n_dot_v = max(nx * vx + ny * vy + nz * vz, 1e-4)
    hx, hy, hz = vx + lx, vy + ly, vz + lz
    hl = math.sqrt(hx * hx + hy * hy + hz * hz)
    if hl <= 0.0:
        return 0.0, 0.0, 0.0
    hx /= hl
    hy /= hl
    hz /= hl
    n_dot_h = nx * hx + ny * hy + nz * hz
    v_dot_h = vx * hx + vy * hy + vz * hz
    alpha = alpha_of(surf[S_ROUGHNESS])
    d_vis = specular_lobe(n_dot_l, n_dot_v, n_dot_h, alpha)
    fw = schlick_weight(v_dot_h)
    metallic = surf[S_METALLIC]
    diffuse_weight = 1.0 - surf[S_TRANSMISSION]
    f90 = surf[S_SPECULAR]
    fr = brdf_channel(surf[S_BASE_R], metallic, dielectric_f0(surf, 0), f90, diffuse_weight,
                      d_vis, fw)  # fmt: skip
    fg = brdf_channel(surf[S_BASE_G], metallic, dielectric_f0(surf, 1), f90, diffuse_weight,
                      d_vis, fw)  # fmt: skip
    fb = brdf_channel(surf[S_BASE_B], metallic, dielectric_f0(surf, 2), f90, diffuse_weight,
                      d_vis, fw)  # fmt: skip
    sheen = max(surf[S_SHEEN_R], surf[S_SHEEN_G], surf[S_SHEEN_B])
    if sheen > 0.0:
        # KHR_materials_sheen, "Albedo-scaling technique": f = sheenColor·D·V + scaling·f_base
        rough = surf[S_SHEEN_ROUGHNESS]
        scaling = albedo_scaling(sheen, n_dot_v, rough)
        lobe = sheen_lobe(n_dot_l, n_dot_v, n_dot_h, rough)
        fr = fr * scaling + surf[S_SHEEN_R] * lobe
        fg = fg * scaling + surf[S_SHEEN_G] * lobe
        fb = fb * scaling + surf[S_SHEEN_B] * lobe
    coat = clearcoat_fresnel(surf, vx, vy, vz)  # the clearcoat lies over the sheen
    if coat > 0.0:
        cx, cy, cz = surf[S_CX], surf[S_CY], surf[S_CZ]
        cl = cx * lx + cy * ly + cz * lz
        layer = 0.0
        if cl > 0.0:
            ca = alpha_of(surf[S_CLEARCOAT_ROUGHNESS])
            layer = specular_lobe(
                cl, max(cx * vx + cy * vy + cz * vz, 1e-4), cx * hx + cy * hy + cz * hz, ca
            ) * cl / n_dot_l
        fr = (1.0 - coat) * fr + coat * layer
        fg = (1.0 - coat) * fg + coat * layer
        fb = (1.0 - coat) * fb + coat * layer
    return fr * n_dot_l, fg * n_dot_l, fb * n_dot_l


@njit(cache=True, inline="always", error_model="numpy", _nrt=False)
def direct_light(surf, vx, vy, vz, lights, area_samples, spp, seed, pixel, sample, frame, bvh,
                 scene, ground, see_through, surf2, work, tstack):  # fmt: skip
    """Reflected radiance from all look lights with shadow rays; returns r, g, b.

    An area light gets ``spread_count(area_samples, spp)`` stratified shadow rays here, their
    cells spread over the pixel's ``spp`` camera samples.
    """
    px, py, pz = surf[S_PX], surf[S_PY], surf[S_PZ]
    gx, gy, gz = surf[S_GX], surf[S_GY], surf[S_GZ]
    lr, lg, lb = 0.0, 0.0, 0.0
    for k in range(lights.shape[0]):
        area = int(lights[k, L_KIND]) == KIND_AREA
        n = spread_count(area_samples, spp) if area else 1
        inv_n = 1.0 / n
        key = pixel_key(seed, pixel, k)
        for s in range(n):
            u1, u2 = 0.5, 0.5
            if area:
                r1, r2 = next_pair(seed, pixel, sample, work)
                u1, u2 = spread_stratum(s, n, sample, spp, key, r1, r2)
            wx, wy, wz, dist, er, eg, eb = sample_light(lights, k, px, py, pz, u1, u2)
            if er + eg + eb <= 0.0 or wx * gx + wy * gy + wz * gz <= 0.0:
                continue
            fr, fg, fb = eval_bsdf(surf, vx, vy, vz, wx, wy, wz)
            fr *= er * inv_n
            fg *= eg * inv_n
            fb *= eb * inv_n
            if fr + fg + fb <= 0.0:
                continue
            ox, oy, oz = offset_point(surf, 1.0)
            t_max = np.inf if dist == np.inf else dist * (1.0 - 1e-5)
            tr, tg, tb = shadow_ray(frame, bvh, scene, ground, see_through, ox, oy, oz, wx, wy, wz, t_max,
                                       surf2, work, tstack)  # fmt: skip
            lr += fr * tr
            lg += fg * tg
            lb += fb * tb
    return lr, lg, lb


@njit(cache=True, inline="always", error_model="numpy", _nrt=False)
def shadow_amount(surf, lights, area_samples, contact_samples, spp, seed, pixel, sample,
                  frame, bvh, scene, ground, see_through, surf2, work,
                  tstack):  # fmt: skip
    """How much of the light a shadow-catcher point loses to the product, in [0, 1].

    1 − (light arriving) / (light that would arrive without the product), by luminance, from the
    look lights and from the environment (cosine-weighted rays: soft contact shadow).
    """
    px, py, pz = surf[S_PX], surf[S_PY], surf[S_PZ]
    nx, ny, nz = surf[S_NX], surf[S_NY], surf[S_NZ]
    ox, oy, oz = offset_point(surf, 1.0)
    lit, full = 0.0, 0.0
    for k in range(lights.shape[0]):
        area = int(lights[k, L_KIND]) == KIND_AREA
        n = spread_count(area_samples, spp) if area else 1
        key = pixel_key(seed, pixel, k)
        for s in range(n):
            u1, u2 = 0.5, 0.5
            if area:
                r1, r2 = next_pair(seed, pixel, sample, work)
                u1, u2 = spread_stratum(s, n, sample, spp, key, r1, r2)
            wx, wy, wz, dist, er, eg, eb = sample_light(lights, k, px, py, pz, u1, u2)
            cos = wx * nx + wy * ny + wz * nz
            if cos <= 0.0:
                continue
            e = luminance(er, eg, eb) * cos / n
            if e <= 0.0:
                continue
            t_max = np.inf if dist == np.inf else dist * (1.0 - 1e-5)
            tr, tg, tb = shadow_ray(frame, bvh, scene, ground, see_through, ox, oy, oz, wx, wy, wz, t_max,
                                       surf2, work, tstack)  # fmt: skip
            full += e
            lit += e * luminance(tr, tg, tb)
    if contact_samples > 0:
        # the environment's share: its irradiance here, with the visible fraction of the sky
        # from cosine-weighted rays (the sky counted as even: a soft, direction-free contact
        # shadow; the look lights supply the directional ones)
        er, eg, eb = sh_irradiance(frame, nx, ny, nz)
        e_env = luminance(er, eg, eb)
        t1x, t1y, t1z, t2x, t2y, t2z = orthonormal_basis(nx, ny, nz)
        n = spread_count(contact_samples, spp)
        key = pixel_key(seed, pixel, lights.shape[0])
        reach = frame[F_CONTACT_REACH]  # nearby occluders only (see render.pack_frame)
        seen = 0.0
        for s in range(n):
            r1, r2 = next_pair(seed, pixel, sample, work)
            a, b = spread_stratum(s, n, sample, spp, key, r1, r2)
            lx, ly, lz = cosine_hemisphere(a, b)
            wx = lx * t1x + ly * t2x + lz * nx
            wy = lx * t1y + ly * t2y + lz * ny
            wz = lx * t1z + ly * t2z + lz * nz
            tr, tg, tb = shadow_ray(frame, bvh, scene, ground, see_through, ox, oy, oz, wx, wy, wz,
                                       reach, surf2, work, tstack)  # fmt: skip
            seen += luminance(tr, tg, tb)
        full += e_env
        lit += e_env * seen / n
    if full <= 0.0:
        return 0.0
    return min(max(1.0 - lit / full, 0.0), 1.0)


# =================================================================================================
# one hit: add what it sends back along the ray, push the rays it spawns
# =================================================================================================
@njit(cache=True, inline="always", error_model="numpy", _nrt=False)
def shade_hit(surf, ray, t_hit, frame, lights, env_map, bvh, scene, ground, pixel, sample, stack,
              sp, surf2, work, tstack):  # fmt: skip
    """Shade one surface hit of ``ray`` (N_RAY,); adds to work[W_ACC:+4], returns the stack size."""
    seed = int(frame[F_SEED])
    see_through = frame[F_SEE_THROUGH] != 0.0
    max_depth = int(frame[F_MAX_DEPTH])
    depth = int(ray[R_DEPTH])
    dx, dy, dz = ray[R_D], ray[R_D + 1], ray[R_D + 2]
    vx, vy, vz = -dx, -dy, -dz
    wr, wg, wb = ray[R_W], ray[R_W + 1], ray[R_W + 2]
    sr, sg, sb = ray[R_SIGMA], ray[R_SIGMA + 1], ray[R_SIGMA + 2]
    # Beer–Lambert along the segment just travelled (KHR_materials_volume), measured from the
    # true surface point it left, not the offset origin
    if sr + sg + sb > 0.0:
        ex = surf[S_PX] - ray[R_START]
        ey = surf[S_PY] - ray[R_START + 1]
        ez = surf[S_PZ] - ray[R_START + 2]
        x = math.sqrt(ex * ex + ey * ey + ez * ez)
        wr *= math.exp(-sr * x)
        wg *= math.exp(-sg * x)
        wb *= math.exp(-sb * x)
    camera = ray[R_CAMERA]
    cover = ray[R_COVER]
    a = surf[S_OPACITY]
    if a < 1.0:
        # BLEND: what lies behind shows through 1 − α (Porter–Duff over)
        sp = push_ray(stack, sp, ray[R_O], ray[R_O + 1], ray[R_O + 2], dx, dy, dz,
                      wr * (1.0 - a), wg * (1.0 - a), wb * (1.0 - a), cover * (1.0 - a), depth,
                      t_hit * (1.0 + 1e-7) + 1e-9, sr, sg, sb, camera)  # fmt: skip
        set_start(stack, sp, ray[R_START], ray[R_START + 1], ray[R_START + 2])
        wr *= a
        wg *= a
        wb *= a
    work[W_ACC + 3] += cover * a
    if surf[S_UNLIT] != 0.0:  # KHR_materials_unlit: the base colour is the result
        work[W_ACC + 0] += wr * surf[S_BASE_R]
        work[W_ACC + 1] += wg * surf[S_BASE_G]
        work[W_ACC + 2] += wb * surf[S_BASE_B]
        return sp

    nx, ny, nz = surf[S_NX], surf[S_NY], surf[S_NZ]
    n_dot_v = max(nx * vx + ny * vy + nz * vz, 1e-4)
    coat = clearcoat_fresnel(surf, vx, vy, vz)
    under = 1.0 - coat  # what the clearcoat lets through to the base layer

    # emission and direct light
    spp = int(frame[F_SAMPLES])
    area_samples = int(frame[F_AREA_SAMPLES]) if depth == 0 else 1
    lr, lg, lb = direct_light(surf, vx, vy, vz, lights, area_samples, spp, seed, pixel, sample,
                              frame, bvh, scene, ground, see_through, surf2, work,
                              tstack)  # fmt: skip
    work[W_ACC + 0] += wr * (lr + under * surf[S_EM_R])
    work[W_ACC + 1] += wg * (lg + under * surf[S_EM_G])
    work[W_ACC + 2] += wb * (lb + under * surf[S_EM_B])

    # Fresnel split of the environment light. For transmissive volumes Schlick is taken on the
    # outside angle, and total internal reflection sends everything to the mirror.
    metallic = surf[S_METALLIC]
    roughness = surf[S_ROUGHNESS]
    transmission = surf[S_TRANSMISSION] * (1.0 - metallic)
    front = surf[S_FRONT] != 0.0
    volume = surf[S_THICKNESS] > 0.0
    eta = 1.0  # n_incident / n_transmitted
    cos_t = n_dot_v
    tir = False
    tdx, tdy, tdz = dx, dy, dz  # thin wall: straight through
    if transmission > 0.0 and volume:
        eta = 1.0 / surf[S_IOR] if front else surf[S_IOR]
        ok, tdx, tdy, tdz, cos_t = refract(vx, vy, vz, nx, ny, nz, eta)
        tir = not ok
    cos_f = n_dot_v if eta <= 1.0 else cos_t
    fw = schlick_weight(cos_f)
    smooth = max(1.0 - roughness, 0.0)
    occlusion = surf[S_OCCLUSION]
    tint = not (volume and not front)  # a volume is tinted once, where light enters it
    spec0, diff0, trans0 = fresnel_split(surf, 0, fw, smooth, under, tir, tint)
    spec1, diff1, trans1 = fresnel_split(surf, 1, fw, smooth, under, tir, tint)
    spec2, diff2, trans2 = fresnel_split(surf, 2, fw, smooth, under, tir, tint)
    sheen = max(surf[S_SHEEN_R], surf[S_SHEEN_G], surf[S_SHEEN_B])
    e_sheen = 0.0
    if sheen > 0.0:
        # KHR_materials_sheen: the base layer's environment light (irradiance, reflection and
        # transmission weights) keeps 1 − max(sheenColor)·E(N·V)
        e_sheen = sheen_albedo(n_dot_v, surf[S_SHEEN_ROUGHNESS])
        scaling = max(1.0 - sheen * e_sheen, 0.0)
        spec0, diff0, trans0 = spec0 * scaling, diff0 * scaling, trans0 * scaling
        spec1, diff1, trans1 = spec1 * scaling, diff1 * scaling, trans1 * scaling
        spec2, diff2, trans2 = spec2 * scaling, diff2 * scaling, trans2 * scaling

    # diffuse environment light (SH irradiance), attenuated by the occlusion texture only
    er, eg, eb = sh_irradiance(frame, nx, ny, nz)
    work[W_ACC + 0] += wr * diff0 * er * INV_PI * occlusion
    work[W_ACC + 1] += wg * diff1 * eg * INV_PI * occlusion
    work[W_ACC + 2] += wb * diff2 * eb * INV_PI * occlusion
    if sheen > 0.0:
        # ambient sheen, an approximation: sheenColor·E(N·V)·irradiance(N)/π is exact only for
        # light that is the same from every direction (no rays traced for the fibre lobe)
        k = under * e_sheen * INV_PI * occlusion
        work[W_ACC + 0] += wr * surf[S_SHEEN_R] * k * er
        work[W_ACC + 1] += wg * surf[S_SHEEN_G] * k * eg
        work[W_ACC + 2] += wb * surf[S_SHEEN_B] * k * eb

    can_trace = depth + 1 <= max_depth
    px, py, pz = surf[S_PX], surf[S_PY], surf[S_PZ]
    # --- reflection -----------------------------------------------------------------------------
    rx, ry, rz = 2.0 * n_dot_v * nx - vx, 2.0 * n_dot_v * ny - vy, 2.0 * n_dot_v * nz - vz
    rw0 = wr * spec0 * occlusion
    rw1 = wg * spec1 * occlusion
    rw2 = wb * spec2 * occlusion
    ox, oy, oz = offset_point(surf, 1.0)
    glossy_limit = GLOSSY_DIELECTRIC + (GLOSSY_METAL - GLOSSY_DIELECTRIC) * metallic
    if roughness < MIRROR_ROUGHNESS or roughness >= glossy_limit or not can_trace:
        if roughness >= glossy_limit:
            # a wide lobe: the environment blurred like irradiance, seen along the mirror
            # direction (no occlusion) instead of noisy rays
            qr, qg, qb = sh_irradiance(frame, rx, ry, rz)
            work[W_ACC + 0] += rw0 * qr * INV_PI
            work[W_ACC + 1] += rw1 * qg * INV_PI
            work[W_ACC + 2] += rw2 * qb * INV_PI
        elif can_trace and max(rw0, rw1, rw2) >= MIN_WEIGHT:
            sp = push_ray(stack, sp, ox, oy, oz, rx, ry, rz, rw0, rw1, rw2, 0.0, depth + 1, 0.0,
                          sr, sg, sb, 0.0)  # fmt: skip
            set_start(stack, sp, px, py, pz)
        else:
            qr, qg, qb = env_radiance(env_map, frame, rx, ry, rz, work)
            work[W_ACC + 0] += rw0 * qr
            work[W_ACC + 1] += rw1 * qg
            work[W_ACC + 2] += rw2 * qb
    else:
        n_glossy = spread_count(int(frame[F_GLOSSY_SAMPLES]), spp) if depth == 0 else 1
        key = pixel_key(seed, pixel, lights.shape[0] + 1 + depth)
        alpha = alpha_of(roughness)
        t1x, t1y, t1z, t2x, t2y, t2z = orthonormal_basis(nx, ny, nz)
        lvx = vx * t1x + vy * t1y + vz * t1z
        lvy = vx * t2x + vy * t2y + vz * t2z
        g1 = smith_g1(n_dot_v, alpha)
        for s in range(n_glossy):
            r1, r2 = next_pair(seed, pixel, sample, work)
            a1, a2 = spread_stratum(s, n_glossy, sample, spp, key, r1, r2)
            hx_, hy_, hz_ = sample_ggx_vndf(lvx, lvy, n_dot_v, alpha, a1, a2)
            hx = hx_ * t1x + hy_ * t2x + hz_ * nx
            hy = hx_ * t1y + hy_ * t2y + hz_ * ny
            hz = hx_ * t1z + hy_ * t2z + hz_ * nz
            v_dot_h = vx * hx + vy * hy + vz * hz
            lx = 2.0 * v_dot_h * hx - vx
            ly = 2.0 * v_dot_h * hy - vy
            lz = 2.0 * v_dot_h * hz - vz
            n_dot_l = lx * nx + ly * ny + lz * nz
            if n_dot_l <= 0.0 or lx * surf[S_GX] + ly * surf[S_GY] + lz * surf[S_GZ] <= 0.0:
                continue
            # estimator weight F·G2/G1 (Heitz 2018, eq. 19); rw carries F's colour and split
            g2 = smith_vis(n_dot_l, n_dot_v, alpha) * 4.0 * n_dot_l * n_dot_v
            k = g2 / g1 / n_glossy
            sp = push_ray(stack, sp, ox, oy, oz, lx, ly, lz, rw0 * k, rw1 * k, rw2 * k, 0.0,
                          depth + 1, 0.0, sr, sg, sb, 0.0)  # fmt: skip
            set_start(stack, sp, px, py, pz)
    # clearcoat: a mirror-like layer of F0 0.04 on the interpolated normal
    if coat > 0.0:
        cx, cy, cz = surf[S_CX], surf[S_CY], surf[S_CZ]
        cv = max(cx * vx + cy * vy + cz * vz, 1e-4)
        qx, qy, qz = 2.0 * cv * cx - vx, 2.0 * cv * cy - vy, 2.0 * cv * cz - vz
        if can_trace and coat * max(wr, wg, wb) >= MIN_WEIGHT:
            sp = push_ray(stack, sp, ox, oy, oz, qx, qy, qz, wr * coat, wg * coat, wb * coat,
                          0.0, depth + 1, 0.0, sr, sg, sb, 0.0)  # fmt: skip
            set_start(stack, sp, px, py, pz)
        else:
            qr, qg, qb = env_radiance(env_map, frame, qx, qy, qz, work)
            work[W_ACC + 0] += wr * coat * qr
            work[W_ACC + 1] += wg * coat * qg
            work[W_ACC + 2] += wb * coat * qb

    # --- transmission ---------------------------------------------------------------------------
    if transmission > 0.0 and not tir:
        tw0, tw1, tw2 = wr * trans0, wg * trans1, wb * trans2
        if volume and front:  # entering: absorb with the material's coefficients from here on
            nsr, nsg, nsb = absorption(surf, 0), absorption(surf, 1), absorption(surf, 2)
        elif volume:  # leaving the medium
            nsr, nsg, nsb = 0.0, 0.0, 0.0
        else:  # thin wall, tinted by the base colour (KHR_materials_transmission)
            nsr, nsg, nsb = sr, sg, sb
        if can_trace and max(tw0, tw1, tw2) >= MIN_WEIGHT:
            bx, by, bz = offset_point(surf, -1.0)
            sp = push_ray(stack, sp, bx, by, bz, tdx, tdy, tdz, tw0, tw1, tw2, 0.0, depth + 1,
                          0.0, nsr, nsg, nsb, 0.0)  # fmt: skip
            set_start(stack, sp, px, py, pz)
        else:
            qr, qg, qb = env_radiance(env_map, frame, tdx, tdy, tdz, work)
            work[W_ACC + 0] += tw0 * qr
            work[W_ACC + 1] += tw1 * qg
            work[W_ACC + 2] += tw2 * qb
    return sp


@njit(cache=True, inline="always", error_model="numpy", _nrt=False)
def fresnel_split(surf, c, fw, smooth, under, tir, tint):
    """Environment-light weights of channel ``c``: (reflection, diffuse, transmission).

    Schlick Fresnel with F90 lowered by roughness (common practice for prefiltered ambient
    light), so rough surfaces do not turn into mirrors at grazing angles.
    """
    base = surf[S_BASE_R + c]
    metallic = surf[S_METALLIC]
    f0 = dielectric_f0(surf, c)
    f_die = 1.0 if tir else f0 + (max(surf[S_SPECULAR] * smooth, f0) - f0) * fw
    f_metal = base + (max(smooth, base) - base) * fw
    spec = under * ((1.0 - metallic) * f_die + metallic * f_metal)
    diffuse = under * (1.0 - metallic) * (1.0 - surf[S_TRANSMISSION]) * (1.0 - f_die) * base
    trans = under * (1.0 - metallic) * surf[S_TRANSMISSION] * (1.0 - f_die)
    if tint:
        trans *= base
    return spec, diffuse, trans


@njit(cache=True, inline="always", error_model="numpy", _nrt=False)
def absorption(surf, c):
    """Beer–Lambert coefficient σ = −ln(c)/d of channel ``c`` (KHR_materials_volume)."""
    d = surf[S_ATT_DISTANCE]
    col = surf[S_ATT_R + c]
    if not d < np.inf or col >= 1.0:
        return 0.0
    if col <= 0.0:
        return 1e30
    return -math.log(col) / d


# =================================================================================================
# one camera sample
# =================================================================================================
@njit(cache=True, inline="always", error_model="numpy", _nrt=False)
def trace_sample(ox, oy, oz, dx, dy, dz, bg_r, bg_g, bg_b, frame, lights, env_map, bvh, scene,
                 ground, pixel, sample, stack, surf, surf2, work, tstack):  # fmt: skip
    """Trace one camera ray and its tree; adds premultiplied RGBA into work[W_ACC:+4].

    ``stack`` (STACK_RAYS, N_RAY), ``surf``, ``surf2`` (N_SURFACE,) and ``work`` are scratch.
    """
    background = int(frame[F_BACKGROUND])
    # the ray being traced lives in the stack's last row; the camera ray starts there, so the
    # many that see only the background never touch the stack
    ray = stack[STACK_RAYS - 1]
    set_ray(ray, ox, oy, oz, dx, dy, dz, 1.0, 1.0, 1.0, 1.0, 0, 0.0, 0.0, 0.0, 0.0, 1.0)
    sp = 0
    while True:
        rox, roy, roz = ray[R_O], ray[R_O + 1], ray[R_O + 2]
        rdx, rdy, rdz = ray[R_D], ray[R_D + 1], ray[R_D + 2]
        camera = ray[R_CAMERA] != 0.0
        t, what = find_surface(bvh, scene, ground, rox, roy, roz, rdx, rdy, rdz, ray[R_TMIN],
                               camera, surf, work, tstack)  # fmt: skip
        if what == 2 and camera and int(ground[G_KIND]) == GROUND_CATCHER:
            # invisible floor: its shadow becomes coverage of black (premultiplied: alpha only);
            # the rest of the ray shows the background (nothing stands below the floor)
            shadow = shadow_amount(surf, lights, int(frame[F_AREA_SAMPLES]),
                                   int(frame[F_CONTACT_SAMPLES]), int(frame[F_SAMPLES]),
                                   int(frame[F_SEED]), pixel, sample, frame, bvh, scene,
                                   ground, frame[F_SEE_THROUGH] != 0.0, surf2, work,
                                   tstack)  # fmt: skip
            a = min(shadow * ground[G_STRENGTH], 1.0)
            work[W_ACC + 3] += ray[R_COVER] * a
            for c in range(3):
                ray[R_W + c] *= 1.0 - a
            ray[R_COVER] *= 1.0 - a
            what = 0
        if what != 0:
            sp = shade_hit(surf, ray, t, frame, lights, env_map, bvh, scene, ground, pixel, sample,
                           stack, sp, surf2, work, tstack)  # fmt: skip
        elif camera and background != BG_ENVIRONMENT:
            if background != BG_TRANSPARENT:
                work[W_ACC] += ray[R_W] * bg_r
                work[W_ACC + 1] += ray[R_W + 1] * bg_g
                work[W_ACC + 2] += ray[R_W + 2] * bg_b
                work[W_ACC + 3] += ray[R_COVER]
        else:
            qr, qg, qb = env_radiance(env_map, frame, rdx, rdy, rdz, work)
            work[W_ACC] += ray[R_W] * qr
            work[W_ACC + 1] += ray[R_W + 1] * qg
            work[W_ACC + 2] += ray[R_W + 2] * qb
            if camera:
                work[W_ACC + 3] += ray[R_COVER]
        if sp == 0:
            return
        sp -= 1
        for c in range(N_RAY):  # element copy: a slice copy between views of one array allocates
            ray[c] = stack[sp, c]


@njit(cache=True, inline="always", error_model="numpy", _nrt=False)
def camera_ray(frame, px, py):
    """The ray through image position (px right, py down, in pixels), as ``Camera.rays_at``."""
    sx = 2.0 * px / frame[F_WIDTH] - 1.0
    sy = 1.0 - 2.0 * py / frame[F_HEIGHT]
    if frame[F_ORTHO] != 0.0:
        xm = frame[F_YMAG] * frame[F_ASPECT]
        ym = frame[F_YMAG]
        ox = frame[F_EYE] + sx * xm * frame[F_U] + sy * ym * frame[F_V]
        oy = frame[F_EYE + 1] + sx * xm * frame[F_U + 1] + sy * ym * frame[F_V + 1]
        oz = frame[F_EYE + 2] + sx * xm * frame[F_U + 2] + sy * ym * frame[F_V + 2]
        return ox, oy, oz, -frame[F_W], -frame[F_W + 1], -frame[F_W + 2]
    a = sx * frame[F_TAN_Y] * frame[F_ASPECT]
    b = sy * frame[F_TAN_Y]
    dx = a * frame[F_U] + b * frame[F_V] - frame[F_W]
    dy = a * frame[F_U + 1] + b * frame[F_V + 1] - frame[F_W + 1]
    dz = a * frame[F_U + 2] + b * frame[F_V + 2] - frame[F_W + 2]
    n = math.sqrt(dx * dx + dy * dy + dz * dz)
    return frame[F_EYE], frame[F_EYE + 1], frame[F_EYE + 2], dx / n, dy / n, dz / n


@njit(cache=True, inline="always", error_model="numpy", _nrt=False)
def sample_offset(spp, s, seed, pixel):
    """Sub-pixel position of camera sample ``s``: the centre for one sample, else a jittered
    grid warped to the tent filter of radius 1 px (filter importance sampling)."""
    if spp == 1:
        return 0.5, 0.5
    h = random_bits(seed, pixel, s, 0)
    u1 = ((h & 0xFFFF) + 0.5) * (1.0 / 65536.0)
    u2 = ((h >> 16) + 0.5) * (1.0 / 65536.0)
    a, b = stratum(s, spp, u1, u2)
    return 0.5 + tent_warp(a), 0.5 + tent_warp(b)


# =================================================================================================
# the image
# =================================================================================================
# No fastmath here: numba passes it on to the callees it compiles, and contracting the
# watertight edge functions into FMAs lets rays through shared edges (Woop et al. 2013).
@njit(cache=True, parallel=True, error_model="numpy")
def render_image(out, frame, lights, env_map, ground, bvh, scene):
    """Render every pixel into ``out``.

    Parameters
    ----------
    out : (h, w, 4) float32, receives premultiplied linear RGBA.
    frame : (N_FRAME,) float64 camera, settings, background and SH (``shots.kernels.layout``).
    lights : (k, N_LIGHT_COLS) float64; env_map : (eh, ew, 3) float32 linear radiance;
    ground : (N_GROUND,) float64; bvh, scene : see the module docstring.
    """
    width = int(frame[F_WIDTH])
    height = int(frame[F_HEIGHT])
    spp = max(int(frame[F_SAMPLES]), 1)
    seed = int(frame[F_SEED])
    tiles_x = (width + TILE - 1) // TILE
    tiles = tiles_x * ((height + TILE - 1) // TILE)
    for item in prange(WORK_ITEMS):
        # scratch owned here; the loops below use borrowed (uncounted) views of everything
        owned = (new_stack(), np.empty((STACK_RAYS, N_RAY), np.float64),
                 np.zeros((2, N_SURFACE), np.float64), np.zeros(N_WORK, np.float64))  # fmt: skip
        tstack, stack, surfs, work = borrow(owned[0]), borrow(owned[1]), borrow(owned[2]), borrow(
            owned[3]
        )
        surf, surf2 = surfs[0], surfs[1]
        b_frame, b_lights, b_env, b_ground = borrow(frame), borrow(lights), borrow(env_map), borrow(
            ground
        )
        b_bvh = (borrow(bvh[0]), borrow(bvh[1]), borrow(bvh[2]), borrow(bvh[3]))
        b_scene = (borrow(scene[0]), borrow(scene[1]), borrow(scene[2]), borrow(scene[3]),
                   borrow(scene[4]))  # fmt: skip
        for tile in range(item, tiles, WORK_ITEMS):
            x0 = (tile % tiles_x) * TILE
            y0 = (tile // tiles_x) * TILE
            for j in range(y0, min(y0 + TILE, height)):
                for i in range(x0, min(x0 + TILE, width)):
                    pixel = j * width + i
                    for c in range(4):
                        work[W_ACC + c] = 0.0
                    for s in range(spp):
                        fx, fy = sample_offset(spp, s, seed, pixel)
                        ox, oy, oz, dx, dy, dz = camera_ray(b_frame, i + fx, j + fy)
                        f = min(max((j + fy) / height, 0.0), 1.0)
                        bg_r = (1.0 - f) * frame[F_BG_TOP] + f * frame[F_BG_BOTTOM]
                        bg_g = (1.0 - f) * frame[F_BG_TOP + 1] + f * frame[F_BG_BOTTOM + 1]
                        bg_b = (1.0 - f) * frame[F_BG_TOP + 2] + f * frame[F_BG_BOTTOM + 2]
                        work[W_DIM] = 1.0  # dimension 0 placed the sample
                        trace_sample(ox, oy, oz, dx, dy, dz, bg_r, bg_g, bg_b, b_frame, b_lights,
                                     b_env, b_bvh, b_scene, b_ground, pixel, s, stack, surf,
                                     surf2, work, tstack)  # fmt: skip
                    for c in range(4):
                        value = work[W_ACC + c] / spp
                        # a degenerate input (NaN normal, zero-area light) must not spread
                        out[j, i, c] = value if math.isfinite(value) else 0.0
        owned[3][W_DIM] = 0.0  # the scratch stays owned (alive) until here, past its views
