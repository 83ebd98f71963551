"""The layered glTF material at one surface point: base BRDF, sheen and clearcoat.

``eval_bsdf`` is f(v, l)·(N·L) for one light direction (glTF 2.0 spec Appendix B, with the
KHR_materials_sheen and KHR_materials_clearcoat layers); ``fresnel_split`` divides the light
that arrives from the environment between reflection, diffuse and transmission.
"""

from __future__ import annotations

import math

from numba import njit

from shots.kernels.brdf import (
    alpha_of,
    brdf_channel,
    f0_from_ior,
    schlick_weight,
    specular_lobe,
)
from shots.kernels.sheen import albedo_scaling, sheen_lobe
from shots.kernels.surface import (
    S_BASE_B,
    S_BASE_G,
    S_BASE_R,
    S_CLEARCOAT,
    S_CLEARCOAT_ROUGHNESS,
    S_CX,
    S_CY,
    S_CZ,
    S_IOR,
    S_METALLIC,
    S_NX,
    S_NY,
    S_NZ,
    S_ROUGHNESS,
    S_SHEEN_B,
    S_SHEEN_G,
    S_SHEEN_R,
    S_SHEEN_ROUGHNESS,
    S_SPEC_R,
    S_SPECULAR,
    S_TRANSMISSION,
)


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
def eval_bsdf(surf, vx, vy, vz, lx, ly, lz, spec_weight=1.0, coat_weight=1.0):
    """f(v, l)·(N·L) of the surface for unit view v and light l; returns r, g, b.

    ``spec_weight`` and ``coat_weight`` scale the base layer's specular lobe and the clearcoat
    alone: their multiple-importance weights when reflection rays share those lobes with the light
    samples (``shots.kernels.direct``).
    """
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
    d_vis = specular_lobe(n_dot_l, n_dot_v, n_dot_h, alpha) * spec_weight
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
            ) * cl / n_dot_l * coat_weight
        fr = (1.0 - coat) * fr + coat * layer
        fg = (1.0 - coat) * fg + coat * layer
        fb = (1.0 - coat) * fb + coat * layer
    return fr * n_dot_l, fg * n_dot_l, fb * n_dot_l



@njit(cache=True, error_model="numpy", _nrt=False)
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
