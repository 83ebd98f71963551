"""What a ray sees where it hits: the material inputs of a surface point, in one flat record.

``mesh_surface`` interpolates a triangle's vertex attributes and samples its material's textures
(glTF 2.0 spec §Materials, §Meshes); ``ground_surface`` fills the same record for the analytic
floor. The shading kernel reads the record by the ``S_*`` columns and never looks back at the
scene arrays.
"""

from __future__ import annotations

import math

import numpy as np
from numba import njit

from shots.kernels.texture import sample_texture
from shots.scene import (
    ALPHA_BLEND,
    ALPHA_MASK,
    P_ALPHA_CUTOFF,
    P_ALPHA_MODE,
    P_ATTENUATION_B,
    P_ATTENUATION_DISTANCE,
    P_ATTENUATION_G,
    P_ATTENUATION_R,
    P_BASE_A,
    P_BASE_B,
    P_BASE_G,
    P_BASE_R,
    P_CLEARCOAT,
    P_CLEARCOAT_ROUGHNESS,
    P_DOUBLE_SIDED,
    P_EMISSIVE_B,
    P_EMISSIVE_G,
    P_EMISSIVE_R,
    P_IOR,
    P_METALLIC,
    P_NORMAL_SCALE,
    P_OCCLUSION_STRENGTH,
    P_ROUGHNESS,
    P_SPECULAR,
    P_SPECULAR_B,
    P_SPECULAR_G,
    P_SPECULAR_R,
    P_THICKNESS,
    P_TRANSMISSION,
    P_UNLIT,
    T_BASE_COLOR,
    T_CLEARCOAT,
    T_CLEARCOAT_ROUGHNESS,
    T_EMISSIVE,
    T_METALLIC_ROUGHNESS,
    T_NORMAL,
    T_OCCLUSION,
    T_SPECULAR,
    T_SPECULAR_COLOR,
    T_THICKNESS,
    T_TRANSMISSION,
)

# --- surface record columns (float64) ---------------------------------------------------------
S_PX, S_PY, S_PZ = 0, 1, 2  # hit point
S_GX, S_GY, S_GZ = 3, 4, 5  # unit geometric normal, on the side the ray came from
S_NX, S_NY, S_NZ = 6, 7, 8  # unit shading normal, same side
S_BASE_R, S_BASE_G, S_BASE_B = 9, 10, 11
S_OPACITY = 12  # coverage: 1 opaque, 0 cut out (MASK below cutoff), else BLEND alpha
S_METALLIC = 13
S_ROUGHNESS = 14
S_EM_R, S_EM_G, S_EM_B = 15, 16, 17
S_OCCLUSION = 18
S_TRANSMISSION = 19
S_IOR = 20
S_THICKNESS = 21
S_ATT_DISTANCE = 22
S_ATT_R, S_ATT_G, S_ATT_B = 23, 24, 25
S_CLEARCOAT = 26
S_CLEARCOAT_ROUGHNESS = 27
S_SPECULAR = 28
S_SPEC_R, S_SPEC_G, S_SPEC_B = 29, 30, 31
S_UNLIT = 32
S_FRONT = 33  # 1 when the ray hit the face's front (counter-clockwise) side
S_SKIP = 34  # 1 when the hit is to be ignored (single-sided back face)
S_CX, S_CY, S_CZ = 35, 36, 37  # clearcoat normal: the interpolated normal without normal map
N_SURFACE = 38


def new_surface():
    """A blank surface record (call from Python or a kernel)."""
    return np.zeros(N_SURFACE, np.float64)


@njit(cache=True)
def slot_uv(mat_texcoord, mat_uv, m, slot, uv_sets):
    """The (u, v) a material slot samples: its TEXCOORD set, then KHR_texture_transform."""
    s = mat_texcoord[m, slot]
    if s < 0 or s > 1:
        s = 0
    u = uv_sets[2 * s]
    v = uv_sets[2 * s + 1]
    a = mat_uv[m, slot]
    return a[0, 0] * u + a[0, 1] * v + a[0, 2], a[1, 0] * u + a[1, 1] * v + a[1, 2]


@njit(cache=True)
def sample_slot(mat_texture, mat_texcoord, mat_uv, texels, tex_info, m, slot, uv_sets, out):
    """Sample a material slot's texture into ``out`` (4,); returns False when it has none."""
    tex = mat_texture[m, slot]
    if tex < 0:
        return False
    u, v = slot_uv(mat_texcoord, mat_uv, m, slot, uv_sets)
    sample_texture(texels, tex_info, tex, u, v, out)
    return True


@njit(cache=True)
def normalize3(x, y, z):
    n = math.sqrt(x * x + y * y + z * z)
    if n <= 0.0:
        return 0.0, 0.0, 0.0, 0.0
    return x / n, y / n, z / n, n


@njit(cache=True)
def mesh_surface(
    k, b1, b2, dx, dy, dz,
    positions, normals, tangents, uvs, colors, triangles, tri_material,
    params, mat_texture, mat_texcoord, mat_uv, texels, tex_info,
    surf, uv_sets, texel,
):  # fmt: skip
    """Fill ``surf`` for a hit on triangle ``k`` at barycentrics (b1, b2) by a ray along d.

    Parameters
    ----------
    k : original triangle index; b1, b2 : barycentrics (hit = (1-b1-b2)p0 + b1 p1 + b2 p2).
    dx, dy, dz : ray direction (unit).
    positions, normals : (v, 3) float32; tangents : (v, 4) float32; uvs : (2, v, 2) float32;
    colors : (v, 4) float32; triangles : (n, 3) int32; tri_material : (n,) int32.
    params, mat_texture, mat_texcoord, mat_uv : the material table's arrays.
    texels, tex_info : the texture atlas.
    surf : (N_SURFACE,) float64 output record.
    uv_sets : (4,) float64 scratch; texel : (4,) float64 scratch.

    Returns
    -------
    Material row index.
    """
    i0 = triangles[k, 0]
    i1 = triangles[k, 1]
    i2 = triangles[k, 2]
    b0 = 1.0 - b1 - b2
    m = tri_material[k]
    # position rebuilt from barycentrics (more accurate than o + t·d for the ray offset)
    for a in range(3):
        surf[S_PX + a] = b0 * positions[i0, a] + b1 * positions[i1, a] + b2 * positions[i2, a]
    e1x = positions[i1, 0] - positions[i0, 0]
    e1y = positions[i1, 1] - positions[i0, 1]
    e1z = positions[i1, 2] - positions[i0, 2]
    e2x = positions[i2, 0] - positions[i0, 0]
    e2y = positions[i2, 1] - positions[i0, 1]
    e2z = positions[i2, 2] - positions[i0, 2]
    gx, gy, gz, _ = normalize3(e1y * e2z - e1z * e2y, e1z * e2x - e1x * e2z, e1x * e2y - e1y * e2x)
    front = gx * dx + gy * dy + gz * dz < 0.0
    for s in range(2):
        for a in range(2):
            uv_sets[2 * s + a] = (
                b0 * uvs[s, i0, a] + b1 * uvs[s, i1, a] + b2 * uvs[s, i2, a]
            )
    nx = b0 * normals[i0, 0] + b1 * normals[i1, 0] + b2 * normals[i2, 0]
    ny = b0 * normals[i0, 1] + b1 * normals[i1, 1] + b2 * normals[i2, 1]
    nz = b0 * normals[i0, 2] + b1 * normals[i1, 2] + b2 * normals[i2, 2]
    nx, ny, nz, length = normalize3(nx, ny, nz)
    if length == 0.0:
        nx, ny, nz = gx, gy, gz
    elif nx * gx + ny * gy + nz * gz < 0.0:
        # a vertex normal opposite the winding: trust the winding's side (spec §Meshes)
        nx, ny, nz = -nx, -ny, -nz
    surf[S_CX] = nx
    surf[S_CY] = ny
    surf[S_CZ] = nz

    # --- base colour and coverage (spec §Materials, "Metallic-Roughness Material", "Alpha") ---
    br = params[m, P_BASE_R] * (b0 * colors[i0, 0] + b1 * colors[i1, 0] + b2 * colors[i2, 0])
    bg = params[m, P_BASE_G] * (b0 * colors[i0, 1] + b1 * colors[i1, 1] + b2 * colors[i2, 1])
    bb = params[m, P_BASE_B] * (b0 * colors[i0, 2] + b1 * colors[i1, 2] + b2 * colors[i2, 2])
    ba = params[m, P_BASE_A] * (b0 * colors[i0, 3] + b1 * colors[i1, 3] + b2 * colors[i2, 3])
    if sample_slot(mat_texture, mat_texcoord, mat_uv, texels, tex_info, m, T_BASE_COLOR,
                   uv_sets, texel):  # fmt: skip
        br *= texel[0]
        bg *= texel[1]
        bb *= texel[2]
        ba *= texel[3]
    surf[S_BASE_R] = br
    surf[S_BASE_G] = bg
    surf[S_BASE_B] = bb
    mode = int(params[m, P_ALPHA_MODE])
    if mode == ALPHA_MASK:
        surf[S_OPACITY] = 1.0 if ba >= params[m, P_ALPHA_CUTOFF] else 0.0
    elif mode == ALPHA_BLEND:
        surf[S_OPACITY] = min(max(ba, 0.0), 1.0)
    else:
        surf[S_OPACITY] = 1.0

    # --- metallic, roughness (B, G), occlusion (R) --------------------------------------------
    metallic = params[m, P_METALLIC]
    roughness = params[m, P_ROUGHNESS]
    if sample_slot(mat_texture, mat_texcoord, mat_uv, texels, tex_info, m, T_METALLIC_ROUGHNESS,
                   uv_sets, texel):  # fmt: skip
        roughness *= texel[1]
        metallic *= texel[2]
    surf[S_METALLIC] = min(max(metallic, 0.0), 1.0)
    surf[S_ROUGHNESS] = min(max(roughness, 0.0), 1.0)
    occlusion = 1.0
    if sample_slot(mat_texture, mat_texcoord, mat_uv, texels, tex_info, m, T_OCCLUSION,
                   uv_sets, texel):  # fmt: skip
        occlusion = 1.0 + params[m, P_OCCLUSION_STRENGTH] * (texel[0] - 1.0)
    surf[S_OCCLUSION] = occlusion

    # --- emission (factor already × KHR_materials_emissive_strength) ---------------------------
    er = params[m, P_EMISSIVE_R]
    eg = params[m, P_EMISSIVE_G]
    eb = params[m, P_EMISSIVE_B]
    if er + eg + eb > 0.0 and sample_slot(mat_texture, mat_texcoord, mat_uv, texels, tex_info, m,
                                          T_EMISSIVE, uv_sets, texel):  # fmt: skip
        er *= texel[0]
        eg *= texel[1]
        eb *= texel[2]
    surf[S_EM_R] = er
    surf[S_EM_G] = eg
    surf[S_EM_B] = eb

    # --- extensions: transmission (R), volume thickness (G), clearcoat, specular ---------------
    transmission = params[m, P_TRANSMISSION]
    if transmission > 0.0 and sample_slot(mat_texture, mat_texcoord, mat_uv, texels, tex_info, m,
                                          T_TRANSMISSION, uv_sets, texel):  # fmt: skip
        transmission *= texel[0]
    surf[S_TRANSMISSION] = transmission
    surf[S_IOR] = params[m, P_IOR]
    thickness = params[m, P_THICKNESS]
    if thickness > 0.0 and sample_slot(mat_texture, mat_texcoord, mat_uv, texels, tex_info, m,
                                       T_THICKNESS, uv_sets, texel):  # fmt: skip
        thickness *= texel[1]
    surf[S_THICKNESS] = thickness
    surf[S_ATT_DISTANCE] = params[m, P_ATTENUATION_DISTANCE]
    surf[S_ATT_R] = params[m, P_ATTENUATION_R]
    surf[S_ATT_G] = params[m, P_ATTENUATION_G]
    surf[S_ATT_B] = params[m, P_ATTENUATION_B]
    clearcoat = params[m, P_CLEARCOAT]
    cc_rough = params[m, P_CLEARCOAT_ROUGHNESS]
    if clearcoat > 0.0:
        if sample_slot(mat_texture, mat_texcoord, mat_uv, texels, tex_info, m, T_CLEARCOAT,
                       uv_sets, texel):  # fmt: skip
            clearcoat *= texel[0]
        if sample_slot(mat_texture, mat_texcoord, mat_uv, texels, tex_info, m,
                       T_CLEARCOAT_ROUGHNESS, uv_sets, texel):  # fmt: skip
            cc_rough *= texel[1]
    surf[S_CLEARCOAT] = clearcoat
    surf[S_CLEARCOAT_ROUGHNESS] = min(max(cc_rough, 0.0), 1.0)
    specular = params[m, P_SPECULAR]
    if sample_slot(mat_texture, mat_texcoord, mat_uv, texels, tex_info, m, T_SPECULAR,
                   uv_sets, texel):  # fmt: skip
        specular *= texel[3]
    sr = params[m, P_SPECULAR_R]
    sg = params[m, P_SPECULAR_G]
    sb = params[m, P_SPECULAR_B]
    if sample_slot(mat_texture, mat_texcoord, mat_uv, texels, tex_info, m, T_SPECULAR_COLOR,
                   uv_sets, texel):  # fmt: skip
        sr *= texel[0]
        sg *= texel[1]
        sb *= texel[2]
    surf[S_SPECULAR] = specular
    surf[S_SPEC_R] = sr
    surf[S_SPEC_G] = sg
    surf[S_SPEC_B] = sb
    surf[S_UNLIT] = params[m, P_UNLIT]

    # --- normal map (spec §Materials "normalTexture"; tangent w = bitangent sign) --------------
    if mat_texture[m, T_NORMAL] >= 0:
        sample_slot(mat_texture, mat_texcoord, mat_uv, texels, tex_info, m, T_NORMAL,
                    uv_sets, texel)  # fmt: skip
        scale = params[m, P_NORMAL_SCALE]
        mx = (2.0 * texel[0] - 1.0) * scale
        my = (2.0 * texel[1] - 1.0) * scale
        mz = 2.0 * texel[2] - 1.0
        tx = b0 * tangents[i0, 0] + b1 * tangents[i1, 0] + b2 * tangents[i2, 0]
        ty = b0 * tangents[i0, 1] + b1 * tangents[i1, 1] + b2 * tangents[i2, 1]
        tz = b0 * tangents[i0, 2] + b1 * tangents[i1, 2] + b2 * tangents[i2, 2]
        sign = tangents[i0, 3]
        if tx * tx + ty * ty + tz * tz < 1e-12:
            tx, ty, tz, sign = uv_tangent(
                k, positions, uvs, triangles, mat_texcoord[m, T_NORMAL], nx, ny, nz
            )
        sign = 1.0 if sign >= 0.0 else -1.0
        # Gram–Schmidt against the interpolated normal, then B = (N × T)·w
        d = tx * nx + ty * ny + tz * nz
        tx, ty, tz, tl = normalize3(tx - d * nx, ty - d * ny, tz - d * nz)
        if tl > 0.0:
            bx = (ny * tz - nz * ty) * sign
            by = (nz * tx - nx * tz) * sign
            bz = (nx * ty - ny * tx) * sign
            px, py, pz, pl = normalize3(
                tx * mx + bx * my + nx * mz, ty * mx + by * my + ny * mz, tz * mx + bz * my + nz * mz
            )
            if pl > 0.0:
                nx, ny, nz = px, py, pz

    # --- sides (spec §Materials "doubleSided"; KHR_materials_volume ignores it) ---------------
    surf[S_FRONT] = 1.0 if front else 0.0
    skip = not front and params[m, P_DOUBLE_SIDED] == 0.0 and transmission == 0.0
    surf[S_SKIP] = 1.0 if skip else 0.0
    if not front:
        gx, gy, gz = -gx, -gy, -gz
        nx, ny, nz = -nx, -ny, -nz
        surf[S_CX] = -surf[S_CX]
        surf[S_CY] = -surf[S_CY]
        surf[S_CZ] = -surf[S_CZ]
    surf[S_GX] = gx
    surf[S_GY] = gy
    surf[S_GZ] = gz
    nx, ny, nz = face_viewer(nx, ny, nz, -dx, -dy, -dz)
    surf[S_NX] = nx
    surf[S_NY] = ny
    surf[S_NZ] = nz
    cx, cy, cz = face_viewer(surf[S_CX], surf[S_CY], surf[S_CZ], -dx, -dy, -dz)
    surf[S_CX] = cx
    surf[S_CY] = cy
    surf[S_CZ] = cz
    return m


@njit(cache=True)
def face_viewer(nx, ny, nz, vx, vy, vz):
    """Bend a shading normal that faces away from the viewer until N·V is slightly positive.

    Interpolated and mapped normals can point away from the eye near silhouettes; without this
    such points would shade black (common practice).
    """
    c = nx * vx + ny * vy + nz * vz
    floor = 1e-3
    if c >= floor:
        return nx, ny, nz
    nx += (floor - c) * vx
    ny += (floor - c) * vy
    nz += (floor - c) * vz
    nx, ny, nz, _ = normalize3(nx, ny, nz)
    return nx, ny, nz


@njit(cache=True)
def uv_tangent(k, positions, uvs, triangles, uv_set, nx, ny, nz):
    """A per-triangle tangent from the uv parametrisation, for normal maps without TANGENT.

    T follows +u. glTF's v runs down the image, so the bitangent (N × T)·w must point toward
    decreasing v (glTF-Sample-Models #174): w is chosen so that B·dP/dv < 0.
    """
    s = min(max(uv_set, 0), 1)
    i0 = triangles[k, 0]
    i1 = triangles[k, 1]
    i2 = triangles[k, 2]
    du1 = uvs[s, i1, 0] - uvs[s, i0, 0]
    dv1 = uvs[s, i1, 1] - uvs[s, i0, 1]
    du2 = uvs[s, i2, 0] - uvs[s, i0, 0]
    dv2 = uvs[s, i2, 1] - uvs[s, i0, 1]
    det = du1 * dv2 - du2 * dv1
    if det == 0.0:
        return 0.0, 0.0, 0.0, 1.0
    r = 1.0 / det
    e1 = (positions[i1, 0] - positions[i0, 0], positions[i1, 1] - positions[i0, 1],
          positions[i1, 2] - positions[i0, 2])  # fmt: skip
    e2 = (positions[i2, 0] - positions[i0, 0], positions[i2, 1] - positions[i0, 1],
          positions[i2, 2] - positions[i0, 2])  # fmt: skip
    tx = (dv2 * e1[0] - dv1 * e2[0]) * r
    ty = (dv2 * e1[1] - dv1 * e2[1]) * r
    tz = (dv2 * e1[2] - dv1 * e2[2]) * r
    qx = (du1 * e2[0] - du2 * e1[0]) * r  # dP/dv
    qy = (du1 * e2[1] - du2 * e1[1]) * r
    qz = (du1 * e2[2] - du2 * e1[2]) * r
    bx = ny * tz - nz * ty
    by = nz * tx - nx * tz
    bz = nx * ty - ny * tx
    w = -1.0 if bx * qx + by * qy + bz * qz > 0.0 else 1.0
    return tx, ty, tz, w


@njit(cache=True)
def ground_surface(px, py, pz, nx, ny, nz, color, roughness, surf):
    """Fill ``surf`` for the analytic floor: a rough white-ish dielectric of ``color``."""
    surf[:] = 0.0
    surf[S_PX] = px
    surf[S_PY] = py
    surf[S_PZ] = pz
    surf[S_GX] = nx
    surf[S_GY] = ny
    surf[S_GZ] = nz
    surf[S_NX] = nx
    surf[S_NY] = ny
    surf[S_NZ] = nz
    surf[S_CX] = nx
    surf[S_CY] = ny
    surf[S_CZ] = nz
    surf[S_BASE_R] = color[0]
    surf[S_BASE_G] = color[1]
    surf[S_BASE_B] = color[2]
    surf[S_OPACITY] = 1.0
    surf[S_ROUGHNESS] = roughness
    surf[S_OCCLUSION] = 1.0
    surf[S_IOR] = 1.5
    surf[S_ATT_DISTANCE] = math.inf
    surf[S_SPECULAR] = 1.0
    surf[S_SPEC_R] = 1.0
    surf[S_SPEC_G] = 1.0
    surf[S_SPEC_B] = 1.0
    surf[S_FRONT] = 1.0
