"""The glTF 2.0 metallic-roughness BRDF (glTF 2.0 spec, Appendix B) and its sampling.

All functions work on scalars (cosines, roughness, colour channels) so the shading kernel can call
them per light and per channel without allocating. Roughness is perceptual; α = roughness².
"""

from __future__ import annotations

import math

from numba import njit

INV_PI = 1.0 / math.pi
ALPHA_MIN = 1e-3  # α = 0 makes D a delta (spec App. B notes the singularity); clamp it


@njit(cache=True, error_model="numpy", _nrt=False)
def alpha_of(roughness):
    """α = roughness², clamped away from the singular mirror case."""
    return max(roughness * roughness, ALPHA_MIN)


@njit(cache=True, error_model="numpy", _nrt=False)
def ggx_d(n_dot_h, alpha):
    """Trowbridge–Reitz (GGX) distribution D(h) (spec App. B, "Specular BRDF")."""
    if n_dot_h <= 0.0:
        return 0.0
    a2 = alpha * alpha
    f = n_dot_h * n_dot_h * (a2 - 1.0) + 1.0
    return a2 * INV_PI / (f * f)


@njit(cache=True, error_model="numpy", _nrt=False)
def smith_vis(n_dot_l, n_dot_v, alpha):
    """Height-correlated Smith visibility V = G2 / (4 |N·L| |N·V|) (spec App. B)."""
    a2 = alpha * alpha
    nl = abs(n_dot_l)
    nv = abs(n_dot_v)
    gv = nl * math.sqrt(nv * nv * (1.0 - a2) + a2)
    gl = nv * math.sqrt(nl * nl * (1.0 - a2) + a2)
    s = gv + gl
    if s <= 0.0:
        return 0.0
    return 0.5 / s


@njit(cache=True, error_model="numpy", _nrt=False)
def smith_g1(n_dot_w, alpha):
    """Smith masking G1 for GGX (Heitz 2014, "Understanding the Masking-Shadowing Function")."""
    c = abs(n_dot_w)
    a2 = alpha * alpha
    return 2.0 * c / (c + math.sqrt(a2 + (1.0 - a2) * c * c))


@njit(cache=True, error_model="numpy", _nrt=False)
def schlick_weight(v_dot_h):
    """(1 − |V·H|)⁵, the Schlick (1994) Fresnel weight."""
    m = 1.0 - abs(v_dot_h)
    if m < 0.0:
        m = 0.0
    m2 = m * m
    return m2 * m2 * m


@njit(cache=True, error_model="numpy", _nrt=False)
def f0_from_ior(ior):
    """Normal-incidence reflectance ((n − 1)/(n + 1))² (spec App. B; KHR_materials_ior)."""
    r = (ior - 1.0) / (ior + 1.0)
    return r * r


@njit(cache=True, error_model="numpy", _nrt=False)
def fresnel_dielectric(cos_i, eta):
    """Exact unpolarised Fresnel reflectance for relative index ``eta`` = n_t / n_i.

    Returns 1 beyond the critical angle (total internal reflection; Snell's law).
    """
    cos_i = min(max(cos_i, 0.0), 1.0)
    sin2_t = (1.0 - cos_i * cos_i) / (eta * eta)
    if sin2_t >= 1.0:
        return 1.0
    cos_t = math.sqrt(1.0 - sin2_t)
    rs = (cos_i - eta * cos_t) / (cos_i + eta * cos_t)
    rp = (eta * cos_i - cos_t) / (eta * cos_i + cos_t)
    return 0.5 * (rs * rs + rp * rp)


@njit(cache=True, error_model="numpy", _nrt=False)
def brdf_channel(base, metallic, f0, f90, diffuse_weight, d_vis, fw):
    """One colour channel of the glTF BRDF value f (without the cosine).

    Parameters
    ----------
    base : base colour channel (linear).
    metallic : metalness in [0, 1].
    f0, f90 : dielectric Fresnel at normal and grazing incidence (0.04 and 1 for ior 1.5;
        KHR_materials_specular scales both by its factor and F0 by its colour).
    diffuse_weight : 1 − transmission (KHR_materials_transmission replaces that much diffuse).
    d_vis : D·Vis, the specular lobe shared by both layers.
    fw : Schlick weight (1 − |V·H|)⁵.

    Notes
    -----
    metal = spec·(base + (1 − base)·fw); dielectric = mix(base/π, spec, F) with
    F = F0 + (F90 − F0)·fw (spec App. B "Complete model"); the result is
    mix(dielectric, metal, metallic).
    """
    f_metal = base + (1.0 - base) * fw
    metal = d_vis * f_metal
    f_die = f0 + (f90 - f0) * fw
    dielectric = (1.0 - f_die) * diffuse_weight * base * INV_PI + f_die * d_vis
    return (1.0 - metallic) * dielectric + metallic * metal


@njit(cache=True, error_model="numpy", _nrt=False)
def specular_lobe(n_dot_l, n_dot_v, n_dot_h, alpha):
    """D·Vis for the given cosines (spec App. B)."""
    return ggx_d(n_dot_h, alpha) * smith_vis(n_dot_l, n_dot_v, alpha)


@njit(cache=True, error_model="numpy", _nrt=False)
def sample_ggx_vndf(vx, vy, vz, alpha, u1, u2):
    """A microfacet normal drawn from the GGX distribution of visible normals.

    Heitz 2018, "Sampling the GGX Distribution of Visible Normals", JCGT 7(4), listing 1. The view
    vector (vx, vy, vz) is in the local frame with the surface normal along +z.

    Returns
    -------
    (hx, hy, hz) unit microfacet normal in the same frame.
    """
    # stretch the view vector to the hemisphere configuration
    sx = alpha * vx
    sy = alpha * vy
    sz = vz
    inv = 1.0 / math.sqrt(sx * sx + sy * sy + sz * sz)
    sx *= inv
    sy *= inv
    sz *= inv
    # orthonormal basis around the stretched view vector
    lensq = sx * sx + sy * sy
    if lensq > 0.0:
        il = 1.0 / math.sqrt(lensq)
        t1x, t1y, t1z = -sy * il, sx * il, 0.0
    else:
        t1x, t1y, t1z = 1.0, 0.0, 0.0
    t2x = sy * t1z - sz * t1y
    t2y = sz * t1x - sx * t1z
    t2z = sx * t1y - sy * t1x
    # a point on the projected disk, warped toward the visible half
    r = math.sqrt(u1)
    phi = 2.0 * math.pi * u2
    p1 = r * math.cos(phi)
    p2 = r * math.sin(phi)
    s = 0.5 * (1.0 + sz)
    p2 = (1.0 - s) * math.sqrt(max(0.0, 1.0 - p1 * p1)) + s * p2
    p3 = math.sqrt(max(0.0, 1.0 - p1 * p1 - p2 * p2))
    nx = p1 * t1x + p2 * t2x + p3 * sx
    ny = p1 * t1y + p2 * t2y + p3 * sy
    nz = p1 * t1z + p2 * t2z + p3 * sz
    # unstretch
    hx = alpha * nx
    hy = alpha * ny
    hz = max(nz, 0.0)
    inv = 1.0 / math.sqrt(hx * hx + hy * hy + hz * hz)
    return hx * inv, hy * inv, hz * inv


@njit(cache=True, error_model="numpy", _nrt=False)
def refract(vx, vy, vz, nx, ny, nz, eta):
    """Snell refraction of the unit view vector v (pointing away from the surface).

    Parameters
    ----------
    vx, vy, vz : unit vector toward the viewer; nx, ny, nz : unit normal on the viewer's side.
    eta : n_incident / n_transmitted.

    Returns
    -------
    ok : False on total internal reflection (sin θt > 1).
    tx, ty, tz : unit transmitted direction (into the surface).
    cos_t : cosine of the transmitted angle.
    """
    cos_i = vx * nx + vy * ny + vz * nz
    sin2_t = eta * eta * max(0.0, 1.0 - cos_i * cos_i)
    if sin2_t >= 1.0:
        return False, 0.0, 0.0, 0.0, 0.0
    cos_t = math.sqrt(1.0 - sin2_t)
    k = eta * cos_i - cos_t
    tx = -eta * vx + k * nx
    ty = -eta * vy + k * ny
    tz = -eta * vz + k * nz
    inv = 1.0 / math.sqrt(tx * tx + ty * ty + tz * tz)
    return True, tx * inv, ty * inv, tz * inv, cos_t
