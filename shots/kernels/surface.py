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

from shots.kernels.layout import (
    M_SLOTS,
    SLOT_A,
    SLOT_SET,
    SLOT_TEX,
    SLOT_WIDTH,
    V_C,
    V_N,
    V_T,
    V_UV0,
    W_LOD,
    W_TEXEL,
    W_UV,
)
from shots.kernels.texture import NO_FOOTPRINT, sample_texture
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
    P_CLEARCOAT_NORMAL_SCALE,
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
    P_SHEEN_B,
    P_SHEEN_G,
    P_SHEEN_R,
    P_SHEEN_ROUGHNESS,
    P_SPECULAR,
    P_SPECULAR_B,
    P_SPECULAR_G,
    P_SPECULAR_R,
    P_THICKNESS,
    P_TRANSMISSION,
    P_UNLIT,
    T_BASE_COLOR,
    T_CLEARCOAT,
    T_CLEARCOAT_NORMAL,
    T_CLEARCOAT_ROUGHNESS,
    T_EMISSIVE,
    T_METALLIC_ROUGHNESS,
    T_NORMAL,
    T_OCCLUSION,
    T_SHEEN_COLOR,
    T_SHEEN_ROUGHNESS,
    T_SPECULAR,
    T_SPECULAR_COLOR,
    T_THICKNESS,
    T_TRANSMISSION,
    TI_HEIGHT,
    TI_WIDTH,
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
S_SHEEN_R, S_SHEEN_G, S_SHEEN_B = 38, 39, 40  # KHR_materials_sheen colour (linear); 0: no layer
S_SHEEN_ROUGHNESS = 41
N_SURFACE = 42


# the normal slots as plain int64 (not Literal[int]): mapped_normal compiles once for both
NORMAL_SLOT, COAT_NORMAL_SLOT = np.int64(T_NORMAL), np.int64(T_CLEARCOAT_NORMAL)

@njit(cache=True, inline="always", error_model="numpy", _nrt=False)
def sample_slot(materials, texels, tex_info, m, slot, work):
    """Sample material ``m``'s texture in ``slot`` into work[W_TEXEL:+4]; False when it has none.

    Inlined so that the common case, no texture, costs one comparison and no call.
    """
    tex = int(materials[m, M_SLOTS + SLOT_WIDTH * slot + SLOT_TEX])
    if tex < 0:
        return False
    sample_slot_texture(materials, texels, tex_info, m, M_SLOTS + SLOT_WIDTH * slot, tex, work)
    return True


@njit(cache=True, error_model="numpy", _nrt=False)
def sample_slot_texture(materials, texels, tex_info, m, col, tex, work):
    """Texture ``tex`` at the uv of the slot whose columns start at ``col``: its TEXCOORD set
    (work[W_UV:+4] holds both) through its KHR_texture_transform affine map; the texel goes to
    work[W_TEXEL:+4].

    The level of detail adds to the set's log2 footprint (work[W_LOD + set]) half the log2 of
    the texels per unit of uv area: the texture's size times the affine map's area scale."""
    s = min(max(int(materials[m, col + SLOT_SET]), 0), 1)
    u = work[W_UV + 2 * s]
    v = work[W_UV + 2 * s + 1]
    a = col + SLOT_A
    tu = materials[m, a] * u + materials[m, a + 1] * v + materials[m, a + 2]
    tv = materials[m, a + 3] * u + materials[m, a + 4] * v + materials[m, a + 5]
    lod = work[W_LOD + s]
    texels_per_uv = abs(materials[m, a] * materials[m, a + 4] - materials[m, a + 1]
                        * materials[m, a + 3]) * tex_info[tex, TI_WIDTH] * tex_info[tex, TI_HEIGHT]
    if lod > NO_FOOTPRINT and texels_per_uv > 0.0:
        lod += 0.5 * math.log2(texels_per_uv)
    else:
        lod = NO_FOOTPRINT
    sample_texture(texels, tex_info, tex, tu, tv, lod, work, W_TEXEL)


@njit(cache=True, inline="always", error_model="numpy", _nrt=False)
def normalize3(x, y, z):
    n = math.sqrt(x * x + y * y + z * z)
    if n <= 0.0:
        return 0.0, 0.0, 0.0, 0.0
    return x / n, y / n, z / n, n


@njit(cache=True, error_model="numpy", _nrt=False)
def mesh_surface(k, b1, b2, dx, dy, dz, cone, verts, faces, materials, texels, tex_info, surf,
                 work):  # fmt: skip
    """Fill ``surf`` for a hit on triangle ``k`` at barycentrics (b1, b2) by a ray along d.

    Parameters
    ----------
    k : original triangle index; b1, b2 : barycentrics (hit = (1-b1-b2)p0 + b1 p1 + b2 p2).
    dx, dy, dz : ray direction (unit).
    cone : width of the ray's cone at the hit (world units); 0 samples textures at a point.
    verts, faces, materials, texels, tex_info : the packed scene (``shots.kernels.layout``).
    surf : (N_SURFACE,) float64 output record; work : (N_WORK,) float64 scratch.

    Returns
    -------
    Material row index.
    """
    i0 = faces[k, 0]
    i1 = faces[k, 1]
    i2 = faces[k, 2]
    b0 = 1.0 - b1 - b2
    m = faces[k, 3]
    # position rebuilt from barycentrics (more accurate than o + t·d for the ray offset)
    for a in range(3):
        surf[S_PX + a] = b0 * verts[i0, a] + b1 * verts[i1, a] + b2 * verts[i2, a]
    e1x = verts[i1, 0] - verts[i0, 0]
    e1y = verts[i1, 1] - verts[i0, 1]
    e1z = verts[i1, 2] - verts[i0, 2]
    e2x = verts[i2, 0] - verts[i0, 0]
    e2y = verts[i2, 1] - verts[i0, 1]
    e2z = verts[i2, 2] - verts[i0, 2]
    gx, gy, gz, area2 = normalize3(e1y * e2z - e1z * e2y, e1z * e2x - e1x * e2z,
                                   e1x * e2y - e1y * e2x)  # fmt: skip
    front = gx * dx + gy * dy + gz * dz < 0.0
    for a in range(4):
        c = V_UV0 + a
        work[W_UV + a] = b0 * verts[i0, c] + b1 * verts[i1, c] + b2 * verts[i2, c]
    footprint_lods(k, verts, faces, cone, abs(gx * dx + gy * dy + gz * dz), area2, work)
    nx = b0 * verts[i0, V_N] + b1 * verts[i1, V_N] + b2 * verts[i2, V_N]
    ny = b0 * verts[i0, V_N + 1] + b1 * verts[i1, V_N + 1] + b2 * verts[i2, V_N + 1]
    nz = b0 * verts[i0, V_N + 2] + b1 * verts[i1, V_N + 2] + b2 * verts[i2, V_N + 2]
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
    c0, c1, c2 = V_C, V_C + 1, V_C + 2
    br = materials[m, P_BASE_R] * (b0 * verts[i0, c0] + b1 * verts[i1, c0] + b2 * verts[i2, c0])
    bg = materials[m, P_BASE_G] * (b0 * verts[i0, c1] + b1 * verts[i1, c1] + b2 * verts[i2, c1])
    bb = materials[m, P_BASE_B] * (b0 * verts[i0, c2] + b1 * verts[i1, c2] + b2 * verts[i2, c2])
    c3 = V_C + 3
    ba = materials[m, P_BASE_A] * (b0 * verts[i0, c3] + b1 * verts[i1, c3] + b2 * verts[i2, c3])
    if sample_slot(materials, texels, tex_info, m, T_BASE_COLOR, work):
        br *= work[W_TEXEL]
        bg *= work[W_TEXEL + 1]
        bb *= work[W_TEXEL + 2]
        ba *= work[W_TEXEL + 3]
    surf[S_BASE_R] = br
    surf[S_BASE_G] = bg
    surf[S_BASE_B] = bb
    mode = int(materials[m, P_ALPHA_MODE])
    if mode == ALPHA_MASK:
        surf[S_OPACITY] = 1.0 if ba >= materials[m, P_ALPHA_CUTOFF] else 0.0
    elif mode == ALPHA_BLEND:
        surf[S_OPACITY] = min(max(ba, 0.0), 1.0)
    else:
        surf[S_OPACITY] = 1.0

    # --- metallic, roughness (B, G), occlusion (R) --------------------------------------------
    metallic = materials[m, P_METALLIC]
    roughness = materials[m, P_ROUGHNESS]
    if sample_slot(materials, texels, tex_info, m, T_METALLIC_ROUGHNESS, work):
        roughness *= work[W_TEXEL + 1]
        metallic *= work[W_TEXEL + 2]
    surf[S_METALLIC] = min(max(metallic, 0.0), 1.0)
    surf[S_ROUGHNESS] = min(max(roughness, 0.0), 1.0)
    occlusion = 1.0
    if sample_slot(materials, texels, tex_info, m, T_OCCLUSION, work):
        occlusion = 1.0 + materials[m, P_OCCLUSION_STRENGTH] * (work[W_TEXEL] - 1.0)
    surf[S_OCCLUSION] = occlusion

    # --- emission (factor already × KHR_materials_emissive_strength) ---------------------------
    er = materials[m, P_EMISSIVE_R]
    eg = materials[m, P_EMISSIVE_G]
    eb = materials[m, P_EMISSIVE_B]
    if er + eg + eb > 0.0 and sample_slot(materials, texels, tex_info, m, T_EMISSIVE, work):
        er *= work[W_TEXEL]
        eg *= work[W_TEXEL + 1]
        eb *= work[W_TEXEL + 2]
    surf[S_EM_R] = er
    surf[S_EM_G] = eg
    surf[S_EM_B] = eb

    # --- extensions: transmission (R), volume thickness (G), clearcoat, specular, sheen --------
    transmission = materials[m, P_TRANSMISSION]
    if transmission > 0.0 and sample_slot(materials, texels, tex_info, m, T_TRANSMISSION, work):
        transmission *= work[W_TEXEL]
    surf[S_TRANSMISSION] = transmission
    surf[S_IOR] = materials[m, P_IOR]
    thickness = materials[m, P_THICKNESS]
    if thickness > 0.0 and sample_slot(materials, texels, tex_info, m, T_THICKNESS, work):
        thickness *= work[W_TEXEL + 1]
    surf[S_THICKNESS] = thickness
    surf[S_ATT_DISTANCE] = materials[m, P_ATTENUATION_DISTANCE]
    surf[S_ATT_R] = materials[m, P_ATTENUATION_R]
    surf[S_ATT_G] = materials[m, P_ATTENUATION_G]
    surf[S_ATT_B] = materials[m, P_ATTENUATION_B]
    clearcoat = materials[m, P_CLEARCOAT]
    cc_rough = materials[m, P_CLEARCOAT_ROUGHNESS]
    if clearcoat > 0.0:
        if sample_slot(materials, texels, tex_info, m, T_CLEARCOAT, work):
            clearcoat *= work[W_TEXEL]
        if sample_slot(materials, texels, tex_info, m, T_CLEARCOAT_ROUGHNESS, work):
            cc_rough *= work[W_TEXEL + 1]
    surf[S_CLEARCOAT] = clearcoat
    surf[S_CLEARCOAT_ROUGHNESS] = min(max(cc_rough, 0.0), 1.0)
    specular = materials[m, P_SPECULAR]
    if sample_slot(materials, texels, tex_info, m, T_SPECULAR, work):
        specular *= work[W_TEXEL + 3]
    sr = materials[m, P_SPECULAR_R]
    sg = materials[m, P_SPECULAR_G]
    sb = materials[m, P_SPECULAR_B]
    if sample_slot(materials, texels, tex_info, m, T_SPECULAR_COLOR, work):
        sr *= work[W_TEXEL]
        sg *= work[W_TEXEL + 1]
        sb *= work[W_TEXEL + 2]
    surf[S_SPECULAR] = specular
    surf[S_SPEC_R] = sr
    surf[S_SPEC_G] = sg
    surf[S_SPEC_B] = sb
    surf[S_UNLIT] = materials[m, P_UNLIT]
    # KHR_materials_sheen: colour × texture rgb (sRGB-decoded), roughness × texture alpha; a
    # zero colour factor disables the layer, so its textures are not read
    sheen_r = materials[m, P_SHEEN_R]
    sheen_g = materials[m, P_SHEEN_G]
    sheen_b = materials[m, P_SHEEN_B]
    sheen_roughness = materials[m, P_SHEEN_ROUGHNESS]
    if max(sheen_r, sheen_g, sheen_b) > 0.0:
        if sample_slot(materials, texels, tex_info, m, T_SHEEN_COLOR, work):
            sheen_r *= work[W_TEXEL]
            sheen_g *= work[W_TEXEL + 1]
            sheen_b *= work[W_TEXEL + 2]
        if sample_slot(materials, texels, tex_info, m, T_SHEEN_ROUGHNESS, work):
            sheen_roughness *= work[W_TEXEL + 3]
    surf[S_SHEEN_R] = sheen_r
    surf[S_SHEEN_G] = sheen_g
    surf[S_SHEEN_B] = sheen_b
    surf[S_SHEEN_ROUGHNESS] = min(max(sheen_roughness, 0.0), 1.0)

    # --- normal maps (spec §Materials "normalTexture"; KHR_materials_clearcoat
    # "clearcoatNormalTexture" bends the coat's normal, which starts from the interpolated one)
    if sample_slot(materials, texels, tex_info, m, T_NORMAL, work):
        nx, ny, nz = mapped_normal(k, i0, i1, i2, b0, b1, b2, verts, faces, materials, m,
                                   NORMAL_SLOT, materials[m, P_NORMAL_SCALE], nx, ny, nz,
                                   work)  # fmt: skip
    if sample_slot(materials, texels, tex_info, m, T_CLEARCOAT_NORMAL, work):
        cx, cy, cz = mapped_normal(k, i0, i1, i2, b0, b1, b2, verts, faces, materials, m,
                                   COAT_NORMAL_SLOT, materials[m, P_CLEARCOAT_NORMAL_SCALE],
                                   surf[S_CX], surf[S_CY], surf[S_CZ], work)
        surf[S_CX] = cx
        surf[S_CY] = cy
        surf[S_CZ] = cz

    # --- sides (spec §Materials "doubleSided"; KHR_materials_volume ignores it) ---------------
    surf[S_FRONT] = 1.0 if front else 0.0
    # a volume (KHR_materials_volume: thicknessFactor > 0) needs its back faces to leave the
    # medium whatever doubleSided says; single-sided thin glass culls them (glTF 2.0 §3.9.5)
    volume = materials[m, P_THICKNESS] > 0.0
    skip = not front and materials[m, P_DOUBLE_SIDED] == 0.0 and not volume
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


@njit(cache=True, error_model="numpy", _nrt=False)
def mapped_normal(k, i0, i1, i2, b0, b1, b2, verts, faces, materials, m, slot, scale, nx, ny, nz,
                  work):
    """The normal (nx, ny, nz) bent by the tangent-space texel in work[W_TEXEL:+3] (glTF 2.0 spec
    §3.9.3 "normalTexture": x, y scaled by ``scale``; tangent w = bitangent sign).

    Under KHR_texture_transform the texture's axes turn with the transform's rotation (its
    README: the tangent frame must be rotated too), so T and B are turned by the angle of the
    slot's affine map before the texel is applied.
    """
    mx = (2.0 * work[W_TEXEL] - 1.0) * scale
    my = (2.0 * work[W_TEXEL + 1] - 1.0) * scale
    mz = 2.0 * work[W_TEXEL + 2] - 1.0
    t0, t1, t2 = V_T, V_T + 1, V_T + 2
    tx = b0 * verts[i0, t0] + b1 * verts[i1, t0] + b2 * verts[i2, t0]
    ty = b0 * verts[i0, t1] + b1 * verts[i1, t1] + b2 * verts[i2, t1]
    tz = b0 * verts[i0, t2] + b1 * verts[i1, t2] + b2 * verts[i2, t2]
    sign = verts[i0, V_T + 3]
    col = M_SLOTS + SLOT_WIDTH * slot
    if tx * tx + ty * ty + tz * tz < 1e-12:
        tx, ty, tz, sign = uv_tangent(k, verts, faces, int(materials[m, col + SLOT_SET]),
                                      nx, ny, nz)
    sign = 1.0 if sign >= 0.0 else -1.0
    # Gram–Schmidt against the normal, then B = (N × T)·w
    d = tx * nx + ty * ny + tz * nz
    tx, ty, tz, tl = normalize3(tx - d * nx, ty - d * ny, tz - d * nz)
    if tl == 0.0:
        return nx, ny, nz
    bx = (ny * tz - nz * ty) * sign
    by = (nz * tx - nx * tz) * sign
    bz = (nx * ty - ny * tx) * sign
    # the transform's rotation from its first column (c·sx, -s·sx): u' = c u + s v, so the
    # texture's +u' runs along c T - s B and its up axis along s T + c B
    a00 = materials[m, col + SLOT_A]
    a10 = materials[m, col + SLOT_A + 3]
    length = math.sqrt(a00 * a00 + a10 * a10)
    if length > 0.0:
        c = a00 / length
        s = -a10 / length
        tx, ty, tz, bx, by, bz = (c * tx - s * bx, c * ty - s * by, c * tz - s * bz,
                                  s * tx + c * bx, s * ty + c * by, s * tz + c * bz)
    px, py, pz, pl = normalize3(tx * mx + bx * my + nx * mz, ty * mx + by * my + ny * mz,
                                tz * mx + bz * my + nz * mz)
    if pl > 0.0:
        return px, py, pz
    return nx, ny, nz


@njit(cache=True, error_model="numpy", _nrt=False)
def footprint_lods(k, verts, faces, cone, cos_incidence, area2, work):
    """Per uv set, log2 of the ray cone's footprint measured in uv units, into work[W_LOD:+2].

    Ray cones (Akenine-Möller et al. 2019, "Texture Level of Detail Strategies for Real-Time
    Ray Tracing", Ray Tracing Gems ch. 20): λ = Δ + log2(w / |n·d|), with
    Δ = ½ log2(t_a / p_a) the triangle's texel-to-world area ratio. Here t_a is the uv area (the
    texture multiplies in its own size, ``sample_slot_texture``); ``area2`` is 2 p_a.
    """
    if cone <= 0.0 or area2 <= 0.0 or cos_incidence <= 0.0:
        work[W_LOD] = NO_FOOTPRINT
        work[W_LOD + 1] = NO_FOOTPRINT
        return
    base = math.log2(cone / cos_incidence) - 0.5 * math.log2(area2)
    i0 = faces[k, 0]
    i1 = faces[k, 1]
    i2 = faces[k, 2]
    for s in range(2):
        c = V_UV0 + 2 * s
        du1 = verts[i1, c] - verts[i0, c]
        dv1 = verts[i1, c + 1] - verts[i0, c + 1]
        du2 = verts[i2, c] - verts[i0, c]
        dv2 = verts[i2, c + 1] - verts[i0, c + 1]
        uv2 = abs(du1 * dv2 - du2 * dv1)  # 2 t_a in uv units
        work[W_LOD + s] = base + 0.5 * math.log2(uv2) if uv2 > 0.0 else NO_FOOTPRINT


@njit(cache=True, inline="always", error_model="numpy", _nrt=False)
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


@njit(cache=True, error_model="numpy", _nrt=False)
def uv_tangent(k, verts, faces, uv_set, nx, ny, nz):
    """A per-triangle tangent from the uv parametrisation, for normal maps without TANGENT.

    T follows +u. glTF's v runs down the image, so the bitangent (N × T)·w must point toward
    decreasing v (glTF-Sample-Models #174): w is chosen so that B·dP/dv < 0.
    """
    c = V_UV0 + 2 * min(max(uv_set, 0), 1)
    i0 = faces[k, 0]
    i1 = faces[k, 1]
    i2 = faces[k, 2]
    du1 = verts[i1, c] - verts[i0, c]
    dv1 = verts[i1, c + 1] - verts[i0, c + 1]
    du2 = verts[i2, c] - verts[i0, c]
    dv2 = verts[i2, c + 1] - verts[i0, c + 1]
    det = du1 * dv2 - du2 * dv1
    if det == 0.0:
        return 0.0, 0.0, 0.0, 1.0
    r = 1.0 / det
    e1x = verts[i1, 0] - verts[i0, 0]
    e1y = verts[i1, 1] - verts[i0, 1]
    e1z = verts[i1, 2] - verts[i0, 2]
    e2x = verts[i2, 0] - verts[i0, 0]
    e2y = verts[i2, 1] - verts[i0, 1]
    e2z = verts[i2, 2] - verts[i0, 2]
    tx = (dv2 * e1x - dv1 * e2x) * r
    ty = (dv2 * e1y - dv1 * e2y) * r
    tz = (dv2 * e1z - dv1 * e2z) * r
    qx = (du1 * e2x - du2 * e1x) * r  # dP/dv
    qy = (du1 * e2y - du2 * e1y) * r
    qz = (du1 * e2z - du2 * e1z) * r
    bx = ny * tz - nz * ty
    by = nz * tx - nx * tz
    bz = nx * ty - ny * tx
    w = -1.0 if bx * qx + by * qy + bz * qz > 0.0 else 1.0
    return tx, ty, tz, w


@njit(cache=True, error_model="numpy", _nrt=False)
def ground_surface(px, py, pz, nx, ny, nz, cr, cg, cb, roughness, surf):
    """Fill ``surf`` for the analytic floor: a dielectric of linear albedo (cr, cg, cb)."""
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
    surf[S_BASE_R] = cr
    surf[S_BASE_G] = cg
    surf[S_BASE_B] = cb
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
