"""The tracer: camera samples → ray trees → premultiplied linear RGBA, in one parallel kernel.

Whitted-style recursion, unrolled onto a small per-thread ray stack. At each hit:

- emission, and direct light from every look light through shadow rays (area lights with
  stratified samples, so their shadows are soft), with the glTF BRDF (spec Appendix B);
- diffuse light from the environment's spherical-harmonics irradiance, × occlusion;
- specular light from reflection rays: one mirror ray for smooth surfaces, several GGX-sampled
  rays for glossy ones (Heitz 2018 visible normals), weighted by Fresnel; rough lobes take the
  SH-blurred environment along the mirror direction instead (tracing them mostly adds noise);
- transmission: a straight-through ray for thin walls, Snell refraction with Beer–Lambert
  absorption over the traced distance for volumes (KHR_materials_transmission / _volume);
- coverage: BLEND surfaces and the shadow catcher continue the camera ray behind them.

Argument groups are passed as tuples so every function takes the same few names:
    bvh = (node_bounds, node_links, tri_verts, tri_ids)                 shots.accel.Bvh
    geo = (positions, normals, tangents, uvs, colors, triangles, tri_material)
    mats = (params, mat_texture, mat_texcoord, mat_uv, texels, tex_info)
    env = (env_map (h, w, 3) float32, env_sh (9, 3) float64, rotation (1,) float64)
"""

from __future__ import annotations

import math

import numpy as np
from numba import njit, prange

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
    G_KIND,
    G_R,
    G_ROUGHNESS,
    G_STRENGTH,
    GROUND_CATCHER,
    GROUND_NONE,
    intersect_ground,
)
from shots.kernels.lights import KIND_AREA, L_KIND, sample_light
from shots.kernels.offset import offset_origin_one
from shots.kernels.sampling import (
    cosine_hemisphere,
    orthonormal_basis,
    pixel_key,
    random01,
    spread_count,
    spread_stratum,
    stratum,
    tent_warp,
)
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

# --- settings (int64 row) ----------------------------------------------------------------------
C_WIDTH, C_HEIGHT, C_SAMPLES, C_AREA_SAMPLES, C_GLOSSY_SAMPLES = 0, 1, 2, 3, 4
C_MAX_DEPTH, C_SEED, C_SEE_THROUGH, C_BACKGROUND, C_CONTACT_SAMPLES = 5, 6, 7, 8, 9
N_SETTINGS = 10
BG_TRANSPARENT, BG_SOLID, BG_GRADIENT, BG_ENVIRONMENT = 0, 1, 2, 3

# --- camera (float64 row): eye, right u, up v, backward w, lens ------------------------------
CAM_EYE, CAM_U, CAM_V, CAM_W = 0, 3, 6, 9
CAM_TAN_Y, CAM_ASPECT, CAM_ORTHO, CAM_YMAG = 12, 13, 14, 15
N_CAMERA = 16

# --- ray stack columns --------------------------------------------------------------------------
R_O, R_D, R_W = 0, 3, 6  # origin, unit direction, rgb weight
R_COVER = 9  # share of the pixel's alpha this ray decides (camera chain only)
R_DEPTH = 10
R_TMIN = 11
R_SIGMA = 12  # (3) absorption coefficients of the medium the ray travels in (1/m)
R_CAMERA = 15  # 1 for camera rays and their straight continuations
R_START = 16  # (3) where the ray's medium segment began: its un-offset surface point
N_RAY = 19
STACK_RAYS = 96

MIRROR_ROUGHNESS = 0.03  # below: one ideal mirror ray (α ≤ 1e-3, a delta in practice)
# At and above these roughnesses a lobe is taken as blurred environment light instead of traced:
# a dielectric reflects only ~4 % and its rough sheen hides in noise, a metal shows it all.
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
@njit(cache=True)
def next_random(seed, pixel, sample, dim):
    """The next number of this camera sample's sequence (``dim`` is a (1,) int64 counter)."""
    d = dim[0]
    dim[0] = d + 1
    return random01(seed, pixel, sample, d)


@njit(cache=True)
def luminance(r, g, b):
    """Relative luminance of linear Rec.709 RGB (ITU-R BT.709)."""
    return 0.2126 * r + 0.7152 * g + 0.0722 * b


@njit(cache=True)
def sh_irradiance(sh, nx, ny, nz):
    """E(n) from nine SH coefficients (Ramamoorthi & Hanrahan 2001, eq. 13)."""
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
        c0 * sh[0, 0] + c1 * sh[1, 0] + c2 * sh[2, 0] + c3 * sh[3, 0] + c4 * sh[4, 0]
        + c5 * sh[5, 0] + c6 * sh[6, 0] + c7 * sh[7, 0] + c8 * sh[8, 0]
    )  # fmt: skip
    e1 = (
        c0 * sh[0, 1] + c1 * sh[1, 1] + c2 * sh[2, 1] + c3 * sh[3, 1] + c4 * sh[4, 1]
        + c5 * sh[5, 1] + c6 * sh[6, 1] + c7 * sh[7, 1] + c8 * sh[8, 1]
    )  # fmt: skip
    e2 = (
        c0 * sh[0, 2] + c1 * sh[1, 2] + c2 * sh[2, 2] + c3 * sh[3, 2] + c4 * sh[4, 2]
        + c5 * sh[5, 2] + c6 * sh[6, 2] + c7 * sh[7, 2] + c8 * sh[8, 2]
    )  # fmt: skip
    return max(e0, 0.0), max(e1, 0.0), max(e2, 0.0)


@njit(cache=True)
def env_radiance(env, dx, dy, dz, scratch):
    """Environment radiance along a direction (into ``scratch`` (3,)); returns r, g, b."""
    sample_equirect(env[0], dx, dy, dz, env[2][0], 1.0, scratch)
    return scratch[0], scratch[1], scratch[2]


@njit(cache=True)
def offset_point(surf, side):
    """The hit point pushed off the surface, toward the ray's side (+1) or through it (−1)."""
    return offset_origin_one(
        surf[S_PX], surf[S_PY], surf[S_PZ],
        side * surf[S_GX], side * surf[S_GY], side * surf[S_GZ],
    )  # fmt: skip


@njit(cache=True)
def push_ray(stack, sp, ox, oy, oz, dx, dy, dz, wr, wg, wb, cover, depth, tmin, sr, sg, sb, camera):
    """Push a ray onto the stack; returns the new stack size (rays beyond capacity are dropped)."""
    if sp >= stack.shape[0]:
        return sp
    row = stack[sp]
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
    return sp + 1


@njit(cache=True)
def set_start(stack, sp, x, y, z):
    """Record the true surface point the ray on top of the stack (row sp − 1) starts from."""
    if sp > 0:
        stack[sp - 1, R_START] = x
        stack[sp - 1, R_START + 1] = y
        stack[sp - 1, R_START + 2] = z


# =================================================================================================
# visibility
# =================================================================================================
@njit(cache=True)
def find_surface(bvh, geo, mats, ground, ox, oy, oz, dx, dy, dz, t_min, camera, surf, uv_sets,
                 texel, tstack):  # fmt: skip
    """The first surface a ray sees, skipping cut-out and single-sided back-face hits.

    Returns
    -------
    t : float, inf on a miss.
    what : 0 miss, 1 mesh, 2 floor. ``surf`` holds the surface for hits.
    """
    node_bounds, node_links, tri_verts, tri_ids = bvh
    positions, normals, tangents, uvs, colors, triangles, tri_material = geo
    params, mat_texture, mat_texcoord, mat_uv, texels, tex_info = mats
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
                    ground[G_R:G_B + 1], ground[G_ROUGHNESS], surf,
                )  # fmt: skip
                return tg, 2
        if k < 0:
            return np.inf, 0
        mesh_surface(
            k, b1, b2, dx, dy, dz, positions, normals, tangents, uvs, colors, triangles,
            tri_material, params, mat_texture, mat_texcoord, mat_uv, texels, tex_info,
            surf, uv_sets, texel,
        )  # fmt: skip
        if surf[S_SKIP] == 0.0 and surf[S_OPACITY] > 0.0:
            return t, 1
        t_lo = t * (1.0 + 1e-7) + 1e-9
    return np.inf, 0


@njit(cache=True)
def transmittance(bvh, geo, mats, ground, see_through, ox, oy, oz, dx, dy, dz, t_max, surf,
                  uv_sets, texel, tstack):  # fmt: skip
    """Light let through along a shadow ray (origin already offset) up to ``t_max``.

    Opaque geometry blocks it; cut-outs pass it; BLEND surfaces pass 1 − α; transmissive
    surfaces pass their tint (no refraction: caustics are out of scope). A visible floor blocks.
    Returns r, g, b in [0, 1].
    """
    kind = int(ground[G_KIND])
    if kind != GROUND_NONE and kind != GROUND_CATCHER:
        tg, _, _, _ = intersect_ground(ground, ox, oy, oz, dx, dy, dz, 0.0, t_max)
        if tg < t_max:
            return 0.0, 0.0, 0.0
    node_bounds, node_links, tri_verts, tri_ids = bvh
    if not see_through:
        if any_hit_one(node_bounds, node_links, tri_verts, ox, oy, oz, dx, dy, dz, 0.0, t_max,
                       tstack):  # fmt: skip
            return 0.0, 0.0, 0.0
        return 1.0, 1.0, 1.0
    positions, normals, tangents, uvs, colors, triangles, tri_material = geo
    params, mat_texture, mat_texcoord, mat_uv, texels, tex_info = mats
    tr, tg_, tb = 1.0, 1.0, 1.0
    t_lo = 0.0
    for _ in range(MAX_SKIPS):
        t, k, b1, b2 = closest_hit_one(
            node_bounds, node_links, tri_verts, tri_ids, ox, oy, oz, dx, dy, dz, t_lo, t_max,
            tstack,
        )  # fmt: skip
        if k < 0:
            return tr, tg_, tb
        mesh_surface(
            k, b1, b2, dx, dy, dz, positions, normals, tangents, uvs, colors, triangles,
            tri_material, params, mat_texture, mat_texcoord, mat_uv, texels, tex_info,
            surf, uv_sets, texel,
        )  # fmt: skip
        a = surf[S_OPACITY]
        through = (1.0 - surf[S_METALLIC]) * surf[S_TRANSMISSION]
        tr *= (1.0 - a) + a * through * surf[S_BASE_R]
        tg_ *= (1.0 - a) + a * through * surf[S_BASE_G]
        tb *= (1.0 - a) + a * through * surf[S_BASE_B]
        if max(tr, tg_, tb) <= 0.0:
            return 0.0, 0.0, 0.0
        t_lo = t * (1.0 + 1e-7) + 1e-9
    return 0.0, 0.0, 0.0


# =================================================================================================
# BSDF evaluation
# =================================================================================================
@njit(cache=True)
def dielectric_f0(surf, c):
    """KHR_materials_specular F0 of colour channel ``c``: min(F0(ior)·colour, 1)·factor."""
    return min(f0_from_ior(surf[S_IOR]) * surf[S_SPEC_R + c], 1.0) * surf[S_SPECULAR]


@njit(cache=True)
def clearcoat_fresnel(surf, vx, vy, vz):
    """clearcoat · F_Schlick(0.04, N_c·V) (KHR_materials_clearcoat, "fresnel_coat")."""
    cc = surf[S_CLEARCOAT]
    if cc <= 0.0:
        return 0.0
    c = surf[S_CX] * vx + surf[S_CY] * vy + surf[S_CZ] * vz
    return cc * (0.04 + 0.96 * schlick_weight(c))


@njit(cache=True)
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
    coat = clearcoat_fresnel(surf, vx, vy, vz)
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


@njit(cache=True)
def direct_light(surf, vx, vy, vz, lights, area_samples, spp, bvh, geo, mats, ground,
                 see_through, seed, pixel, sample, dim, scratch_surf, uv_sets, texel,
                 tstack):  # fmt: skip
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
        key = pixel_key(seed, pixel, k)
        for s in range(n):
            u1, u2 = 0.5, 0.5
            if area:
                u1, u2 = spread_stratum(s, n, sample, spp, key,
                                        next_random(seed, pixel, sample, dim),
                                        next_random(seed, pixel, sample, dim))  # fmt: skip
            wx, wy, wz, dist, er, eg, eb = sample_light(lights, k, px, py, pz, u1, u2)
            if er + eg + eb <= 0.0 or wx * gx + wy * gy + wz * gz <= 0.0:
                continue
            fr, fg, fb = eval_bsdf(surf, vx, vy, vz, wx, wy, wz)
            fr *= er / n
            fg *= eg / n
            fb *= eb / n
            if fr + fg + fb <= 0.0:
                continue
            ox, oy, oz = offset_point(surf, 1.0)
            t_max = np.inf if dist == np.inf else dist * (1.0 - 1e-5)
            tr, tg, tb = transmittance(bvh, geo, mats, ground, see_through, ox, oy, oz,
                                       wx, wy, wz, t_max, scratch_surf, uv_sets, texel,
                                       tstack)  # fmt: skip
            lr += fr * tr
            lg += fg * tg
            lb += fb * tb
    return lr, lg, lb


@njit(cache=True)
def shadow_amount(surf, lights, area_samples, contact_samples, spp, env, bvh, geo, mats, ground,
                  see_through, seed, pixel, sample, dim, scratch_surf, uv_sets, texel, tstack,
                  scratch3):  # fmt: skip
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
                u1, u2 = spread_stratum(s, n, sample, spp, key,
                                        next_random(seed, pixel, sample, dim),
                                        next_random(seed, pixel, sample, dim))  # fmt: skip
            wx, wy, wz, dist, er, eg, eb = sample_light(lights, k, px, py, pz, u1, u2)
            cos = wx * nx + wy * ny + wz * nz
            if cos <= 0.0:
                continue
            e = luminance(er, eg, eb) * cos / n
            if e <= 0.0:
                continue
            t_max = np.inf if dist == np.inf else dist * (1.0 - 1e-5)
            tr, tg, tb = transmittance(bvh, geo, mats, ground, see_through, ox, oy, oz,
                                       wx, wy, wz, t_max, scratch_surf, uv_sets, texel,
                                       tstack)  # fmt: skip
            full += e
            lit += e * luminance(tr, tg, tb)
    if contact_samples > 0:
        t1x, t1y, t1z, t2x, t2y, t2z = orthonormal_basis(nx, ny, nz)
        n = spread_count(contact_samples, spp)
        key = pixel_key(seed, pixel, lights.shape[0])
        for s in range(n):
            a, b = spread_stratum(s, n, sample, spp, key, next_random(seed, pixel, sample, dim),
                                  next_random(seed, pixel, sample, dim))  # fmt: skip
            lx, ly, lz = cosine_hemisphere(a, b)
            wx = lx * t1x + ly * t2x + lz * nx
            wy = lx * t1y + ly * t2y + lz * ny
            wz = lx * t1z + ly * t2z + lz * nz
            rr, rg, rb = env_radiance(env, wx, wy, wz, scratch3)
            e = math.pi * luminance(rr, rg, rb) / n
            if e <= 0.0:
                continue
            tr, tg, tb = transmittance(bvh, geo, mats, ground, see_through, ox, oy, oz,
                                       wx, wy, wz, np.inf, scratch_surf, uv_sets, texel,
                                       tstack)  # fmt: skip
            full += e
            lit += e * luminance(tr, tg, tb)
    if full <= 0.0:
        return 0.0
    return min(max(1.0 - lit / full, 0.0), 1.0)


# =================================================================================================
# one hit: add what it sends back along the ray, push the rays it spawns
# =================================================================================================
@njit(cache=True)
def shade_hit(surf, ray, t_hit, settings, lights, env, bvh, geo, mats, ground, pixel, sample,
              dim, acc, stack, sp, scratch_surf, uv_sets, texel, tstack, scratch3):  # fmt: skip
    """Shade one surface hit of ``ray`` (a stack row); returns the new stack size."""
    seed = settings[C_SEED]
    see_through = settings[C_SEE_THROUGH] != 0
    max_depth = settings[C_MAX_DEPTH]
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
    acc[3] += cover * a
    if surf[S_UNLIT] != 0.0:  # KHR_materials_unlit: the base colour is the result
        acc[0] += wr * surf[S_BASE_R]
        acc[1] += wg * surf[S_BASE_G]
        acc[2] += wb * surf[S_BASE_B]
        return sp

    nx, ny, nz = surf[S_NX], surf[S_NY], surf[S_NZ]
    n_dot_v = max(nx * vx + ny * vy + nz * vz, 1e-4)
    coat = clearcoat_fresnel(surf, vx, vy, vz)
    under = 1.0 - coat  # what the clearcoat lets through to the base layer

    # emission and direct light
    spp = settings[C_SAMPLES]
    area_samples = settings[C_AREA_SAMPLES] if depth == 0 else 1
    lr, lg, lb = direct_light(surf, vx, vy, vz, lights, area_samples, spp, bvh, geo, mats, ground,
                              see_through, seed, pixel, sample, dim, scratch_surf, uv_sets,
                              texel, tstack)  # fmt: skip
    acc[0] += wr * (lr + under * surf[S_EM_R])
    acc[1] += wg * (lg + under * surf[S_EM_G])
    acc[2] += wb * (lb + under * surf[S_EM_B])

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

    # diffuse environment light (SH irradiance), attenuated by the occlusion texture only
    er, eg, eb = sh_irradiance(env[1], nx, ny, nz)
    acc[0] += wr * diff0 * er * INV_PI * occlusion
    acc[1] += wg * diff1 * eg * INV_PI * occlusion
    acc[2] += wb * diff2 * eb * INV_PI * occlusion

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
            qr, qg, qb = sh_irradiance(env[1], rx, ry, rz)
            acc[0] += rw0 * qr * INV_PI
            acc[1] += rw1 * qg * INV_PI
            acc[2] += rw2 * qb * INV_PI
        elif can_trace and max(rw0, rw1, rw2) >= MIN_WEIGHT:
            sp = push_ray(stack, sp, ox, oy, oz, rx, ry, rz, rw0, rw1, rw2, 0.0, depth + 1, 0.0,
                          sr, sg, sb, 0.0)  # fmt: skip
            set_start(stack, sp, px, py, pz)
        else:
            qr, qg, qb = env_radiance(env, rx, ry, rz, scratch3)
            acc[0] += rw0 * qr
            acc[1] += rw1 * qg
            acc[2] += rw2 * qb
    else:
        n_glossy = spread_count(settings[C_GLOSSY_SAMPLES], spp) if depth == 0 else 1
        key = pixel_key(seed, pixel, lights.shape[0] + 1 + depth)
        alpha = alpha_of(roughness)
        t1x, t1y, t1z, t2x, t2y, t2z = orthonormal_basis(nx, ny, nz)
        lvx = vx * t1x + vy * t1y + vz * t1z
        lvy = vx * t2x + vy * t2y + vz * t2z
        g1 = smith_g1(n_dot_v, alpha)
        for s in range(n_glossy):
            a1, a2 = spread_stratum(s, n_glossy, sample, spp, key,
                                    next_random(seed, pixel, sample, dim),
                                    next_random(seed, pixel, sample, dim))  # fmt: skip
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
            qr, qg, qb = env_radiance(env, qx, qy, qz, scratch3)
            acc[0] += wr * coat * qr
            acc[1] += wg * coat * qg
            acc[2] += wb * coat * qb

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
            qr, qg, qb = env_radiance(env, tdx, tdy, tdz, scratch3)
            acc[0] += tw0 * qr
            acc[1] += tw1 * qg
            acc[2] += tw2 * qb
    return sp


@njit(cache=True)
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


@njit(cache=True)
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
@njit(cache=True)
def trace_sample(ox, oy, oz, dx, dy, dz, bg_r, bg_g, bg_b, settings, lights, env, bvh, geo,
                 mats, ground, pixel, sample, dim, acc, stack, ray, surf, scratch_surf, uv_sets,
                 texel, tstack, scratch3):  # fmt: skip
    """Trace one camera ray and its tree; adds premultiplied RGBA into ``acc`` (4,).

    ``stack`` (STACK_RAYS, N_RAY) and ``ray`` (N_RAY,) are scratch, as are the rest.
    """
    background = settings[C_BACKGROUND]
    sp = push_ray(stack, 0, ox, oy, oz, dx, dy, dz, 1.0, 1.0, 1.0, 1.0, 0, 0.0, 0.0, 0.0, 0.0, 1.0)
    while sp > 0:
        sp -= 1
        ray[:] = stack[sp]
        rox, roy, roz = ray[R_O], ray[R_O + 1], ray[R_O + 2]
        rdx, rdy, rdz = ray[R_D], ray[R_D + 1], ray[R_D + 2]
        camera = ray[R_CAMERA] != 0.0
        t, what = find_surface(bvh, geo, mats, ground, rox, roy, roz, rdx, rdy, rdz, ray[R_TMIN],
                               camera, surf, uv_sets, texel, tstack)  # fmt: skip
        if what == 0:
            if camera and background != BG_ENVIRONMENT:
                if background != BG_TRANSPARENT:
                    acc[0] += ray[R_W] * bg_r
                    acc[1] += ray[R_W + 1] * bg_g
                    acc[2] += ray[R_W + 2] * bg_b
                    acc[3] += ray[R_COVER]
            else:
                qr, qg, qb = env_radiance(env, rdx, rdy, rdz, scratch3)
                acc[0] += ray[R_W] * qr
                acc[1] += ray[R_W + 1] * qg
                acc[2] += ray[R_W + 2] * qb
                if camera:
                    acc[3] += ray[R_COVER]
            continue
        if what == 2 and int(ground[G_KIND]) == GROUND_CATCHER:
            # invisible floor: its shadow becomes coverage of black (premultiplied: alpha only)
            shadow = shadow_amount(surf, lights, settings[C_AREA_SAMPLES],
                                   settings[C_CONTACT_SAMPLES], settings[C_SAMPLES], env, bvh,
                                   geo, mats, ground,
                                   settings[C_SEE_THROUGH] != 0, settings[C_SEED], pixel, sample,
                                   dim, scratch_surf, uv_sets, texel, tstack,
                                   scratch3)  # fmt: skip
            a = min(shadow * ground[G_STRENGTH], 1.0)
            acc[3] += ray[R_COVER] * a
            sp = push_ray(stack, sp, rox, roy, roz, rdx, rdy, rdz, ray[R_W] * (1.0 - a),
                          ray[R_W + 1] * (1.0 - a), ray[R_W + 2] * (1.0 - a),
                          ray[R_COVER] * (1.0 - a), ray[R_DEPTH], t * (1.0 + 1e-7) + 1e-9,
                          ray[R_SIGMA], ray[R_SIGMA + 1], ray[R_SIGMA + 2], 1.0)  # fmt: skip
            set_start(stack, sp, ray[R_START], ray[R_START + 1], ray[R_START + 2])
            continue
        sp = shade_hit(surf, ray, t, settings, lights, env, bvh, geo, mats, ground, pixel, sample,
                       dim, acc, stack, sp, scratch_surf, uv_sets, texel, tstack,
                       scratch3)  # fmt: skip


@njit(cache=True)
def camera_ray(cam, width, height, px, py):
    """The ray through image position (px right, py down, in pixels), as ``Camera.rays_at``."""
    sx = 2.0 * px / width - 1.0
    sy = 1.0 - 2.0 * py / height
    if cam[CAM_ORTHO] != 0.0:
        xm = cam[CAM_YMAG] * cam[CAM_ASPECT]
        ym = cam[CAM_YMAG]
        ox = cam[CAM_EYE] + sx * xm * cam[CAM_U] + sy * ym * cam[CAM_V]
        oy = cam[CAM_EYE + 1] + sx * xm * cam[CAM_U + 1] + sy * ym * cam[CAM_V + 1]
        oz = cam[CAM_EYE + 2] + sx * xm * cam[CAM_U + 2] + sy * ym * cam[CAM_V + 2]
        return ox, oy, oz, -cam[CAM_W], -cam[CAM_W + 1], -cam[CAM_W + 2]
    a = sx * cam[CAM_TAN_Y] * cam[CAM_ASPECT]
    b = sy * cam[CAM_TAN_Y]
    dx = a * cam[CAM_U] + b * cam[CAM_V] - cam[CAM_W]
    dy = a * cam[CAM_U + 1] + b * cam[CAM_V + 1] - cam[CAM_W + 1]
    dz = a * cam[CAM_U + 2] + b * cam[CAM_V + 2] - cam[CAM_W + 2]
    n = math.sqrt(dx * dx + dy * dy + dz * dz)
    return cam[CAM_EYE], cam[CAM_EYE + 1], cam[CAM_EYE + 2], dx / n, dy / n, dz / n


@njit(cache=True)
def sample_offset(spp, s, seed, pixel):
    """Sub-pixel position of camera sample ``s``: the centre for one sample, else a jittered
    grid warped to the tent filter of radius 1 px (filter importance sampling)."""
    if spp == 1:
        return 0.5, 0.5
    a, b = stratum(s, spp, random01(seed, pixel, s, 0), random01(seed, pixel, s, 1))
    return 0.5 + tent_warp(a), 0.5 + tent_warp(b)


# =================================================================================================
# the image
# =================================================================================================
@njit(cache=True, parallel=True)
def render_image(out, cam, settings, background, lights, env, bvh, geo, mats, ground):
    """Render every pixel into ``out``.

    Parameters
    ----------
    out : (h, w, 4) float32, receives premultiplied linear RGBA.
    cam : (N_CAMERA,) float64; settings : (N_SETTINGS,) int64.
    background : (2, 3) float64 linear top and bottom colour.
    lights : (k, N_LIGHT_COLS) float64; env, bvh, geo, mats : see the module docstring.
    ground : (N_GROUND,) float64.
    """
    width = settings[C_WIDTH]
    height = settings[C_HEIGHT]
    spp = max(settings[C_SAMPLES], 1)
    seed = settings[C_SEED]
    tiles_x = (width + TILE - 1) // TILE
    tiles = tiles_x * ((height + TILE - 1) // TILE)
    for item in prange(WORK_ITEMS):
        tstack = new_stack()
        stack = np.empty((STACK_RAYS, N_RAY), np.float64)
        ray = np.empty(N_RAY, np.float64)
        surf = np.zeros(N_SURFACE, np.float64)
        scratch_surf = np.zeros(N_SURFACE, np.float64)
        uv_sets = np.zeros(4, np.float64)
        texel = np.zeros(4, np.float64)
        scratch3 = np.zeros(3, np.float64)
        acc = np.zeros(4, np.float64)
        dim = np.zeros(1, np.int64)
        for tile in range(item, tiles, WORK_ITEMS):
            x0 = (tile % tiles_x) * TILE
            y0 = (tile // tiles_x) * TILE
            for j in range(y0, min(y0 + TILE, height)):
                for i in range(x0, min(x0 + TILE, width)):
                    pixel = j * width + i
                    acc[:] = 0.0
                    for s in range(spp):
                        fx, fy = sample_offset(spp, s, seed, pixel)
                        ox, oy, oz, dx, dy, dz = camera_ray(cam, width, height, i + fx, j + fy)
                        f = min(max((j + fy) / height, 0.0), 1.0)
                        bg_r = (1.0 - f) * background[0, 0] + f * background[1, 0]
                        bg_g = (1.0 - f) * background[0, 1] + f * background[1, 1]
                        bg_b = (1.0 - f) * background[0, 2] + f * background[1, 2]
                        dim[0] = 2
                        trace_sample(ox, oy, oz, dx, dy, dz, bg_r, bg_g, bg_b, settings, lights,
                                     env, bvh, geo, mats, ground, pixel, s, dim, acc, stack, ray, surf,
                                     scratch_surf, uv_sets, texel, tstack, scratch3)  # fmt: skip
                    for c in range(4):
                        out[j, i, c] = acc[c] / spp
