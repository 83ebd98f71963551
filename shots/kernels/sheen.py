"""The KHR_materials_sheen layer: the "Charlie" fibre lobe and its directional albedo.

Per the extension's implementation notes, the sheen lobe sits on the base material and the base is
dimmed by the light the lobe takes (albedo scaling, Estevez & Kulla 2017):

    f = sheenColor · D(h) · V(l, v) + (1 − max(sheenColor) · E(N·V)) · f_base

- D: the Charlie distribution (2 + 1/α)·sin^(1/α)θ_h / (2π), α = sheenRoughness² (Estevez &
  Kulla 2017, "Production Friendly Microfacet Sheen BRDF"; the extension's "Sheen distribution").
- V: 1 / (4 (N·L + N·V − N·L·N·V)), the extension's "simpler visibility term" after Ashikhmin &
  Premože 2007; Neubelt & Pettineo (2013, SIGGRAPH course notes) give the same expression. It is
  chosen over the extension's fitted Charlie Λ because it is cheap and that fit is no more
  accurate at low roughness: its Smith normalisation ∫G1(v)(v·h)⁺D dω_h = N·V is off by 32 % at
  sheenRoughness 0.2 and by a factor 4.7 at 0.05 (measured while making this module).
- E(μ): the lobe's directional albedo ∫ D·V·(N·L) dω_l for sheen colour 1. The spec's simplified
  scaling with E(N·V) alone is used, so one look-up serves every light and the environment.

How the E table is made (here, at import; no published table is used): ``albedo_integral``
integrates D·V·(N·L) over the light hemisphere with a 64 × 32 Gauss–Legendre rule in (θ_l, φ_l)
at N_MU × N_ROUGH nodes, μ = sin²(π t^1.5 / 2) and r = r_min + (1 − r_min) s² for t, s evenly
spaced in [0, 1]. It stores ln E − k·ln((1 + sin θ_v)/2), k = 1/(2α) (``leading_log``), which
varies slowly where E itself falls by orders of magnitude; ``sheen_albedo`` interpolates that
bilinearly and adds the term back. Against an independent integration the worst error is 0.7 %
of E, or of 0.05 where E is smaller (tests/test_sheen.py).

This visibility term gains energy where the sheen is smooth and the view grazes: E(μ) is above 1
for N·V below about 0.085 at sheenRoughness 0.2, and 5.7 at N·V = 0 and the floor roughness (the
extension warns that it is "not energy conserving" with albedo scaling). The scaling is clamped
at 0 there.
"""

from __future__ import annotations

import math

import numpy as np
from numba import njit

ROUGHNESS_MIN = 0.07  # α ≥ 0.0049: below, the lobe is a sliver at the silhouette (like ALPHA_MIN)
N_MU, N_ROUGH = 40, 32  # table nodes
MU_WARP = 1.5  # μ = sin²(π t^1.5 / 2): nodes crowd at grazing views, even in angle head-on
QUADRATURE = (64, 32)  # Gauss–Legendre nodes in θ_l and φ_l ∈ [0, π]: within 5e-4 of 256 × 128


def mu_nodes(t: np.ndarray) -> np.ndarray:
    """N·V at table coordinates t in [0, 1] (``sheen_albedo`` inverts it)."""
    return np.sin(0.5 * np.pi * t**MU_WARP) ** 2


def roughness_nodes(s: np.ndarray) -> np.ndarray:
    """Sheen roughness at table coordinates s in [0, 1]: denser at the smooth end."""
    return ROUGHNESS_MIN + (1.0 - ROUGHNESS_MIN) * s * s


def leading_log(mu, roughness):
    """k·ln((1 + sin θ_v)/2), k = 1/(2α): the log of E's steepest factor.

    (1 + sin θ_v)/2 is the largest sin²θ_h a light in the upper hemisphere can make with the view
    (light at the horizon, on the view's side), so D there scales like it to the power k
    (Laplace's method). Subtracted before tabulating, it leaves a slowly varying rest.
    """
    return 0.5 / (roughness * roughness) * np.log(0.5 * (1.0 + np.sqrt(1.0 - mu * mu)))


def albedo_integral(mu: np.ndarray, roughness, quadrature=QUADRATURE) -> np.ndarray:
    """Directional albedo E(μ) = ∫ D·V·(N·L) dω_l of the sheen lobe (colour 1), numerically.

    Parameters
    ----------
    mu : (n,) float64 cosines N·V in [0, 1].
    roughness : sheen roughness (perceptual), a number or (m,) float64; α = roughness².
    quadrature : Gauss–Legendre node counts in θ_l ∈ [0, π/2] and φ_l ∈ [0, π] (the integrand
        is symmetric about the view's plane).

    Returns
    -------
    (n,) float64 for one roughness, (n, m) float64 for m.
    """
    x, w = np.polynomial.legendre.leggauss(quadrature[0])
    theta, w_theta = (x + 1.0) * (np.pi / 4), w * (np.pi / 4)
    x, w = np.polynomial.legendre.leggauss(quadrature[1])
    phi, w_phi = (x + 1.0) * (np.pi / 2), w * (np.pi / 2)
    mu = np.asarray(mu, np.float64)[:, None, None]
    sin_l, n_dot_l = np.sin(theta)[None, :, None], np.cos(theta)[None, :, None]
    v_dot_l = np.sqrt(1.0 - mu * mu) * sin_l * np.cos(phi)[None, None, :] + mu * n_dot_l
    sin2_h = 1.0 - (mu + n_dot_l) ** 2 / (2.0 + 2.0 * v_dot_l)  # h = (v + l)/|v + l|
    log_sin2_h = np.log(np.maximum(sin2_h, 1e-300))
    vis = 1.0 / (4.0 * (n_dot_l + mu - n_dot_l * mu))
    # dω = sin θ dθ dφ; the 2 counts the mirror half φ_l ∈ [π, 2π]
    weight = vis * n_dot_l * (2.0 * sin_l * w_theta[None, :, None]) * w_phi[None, None, :]
    alphas = np.atleast_1d(np.asarray(roughness, np.float64)) ** 2
    out = np.empty((mu.shape[0], alphas.size))
    for j, alpha in enumerate(alphas):
        d = (2.0 + 1.0 / alpha) / (2.0 * np.pi) * np.exp(log_sin2_h * (0.5 / alpha))
        out[:, j] = np.sum(d * weight, axis=(1, 2))
    return out if np.ndim(roughness) else out[:, 0]


def albedo_table() -> np.ndarray:
    """(N_MU, N_ROUGH) float64: ln E − ``leading_log`` at the table nodes."""
    mu = mu_nodes(np.linspace(0.0, 1.0, N_MU))[:, None]
    roughness = roughness_nodes(np.linspace(0.0, 1.0, N_ROUGH))[None, :]
    return np.log(albedo_integral(mu[:, 0], roughness[0])) - leading_log(mu, roughness)


ALBEDO = albedo_table()  # under 0.1 s at import; frozen into the compiled kernels as a constant


@njit(cache=True, error_model="numpy", _nrt=False)
def clamp_roughness(roughness):
    """Sheen roughness in [ROUGHNESS_MIN, 1] (the table's range; D is a delta at 0)."""
    r = roughness if roughness > ROUGHNESS_MIN else ROUGHNESS_MIN  # NaN → the floor
    return r if r < 1.0 else 1.0


@njit(cache=True, error_model="numpy", _nrt=False)
def charlie_d(n_dot_h, alpha):
    """Charlie distribution D(h) = (2 + 1/α)·sin^(1/α)θ_h / (2π) (Estevez & Kulla 2017)."""
    if n_dot_h <= 0.0:
        return 0.0
    sin2 = max(1.0 - n_dot_h * n_dot_h, 0.0)
    return (2.0 + 1.0 / alpha) * sin2 ** (0.5 / alpha) * (0.5 / math.pi)


@njit(cache=True, error_model="numpy", _nrt=False)
def sheen_visibility(n_dot_l, n_dot_v):
    """V = 1 / (4 (N·L + N·V − N·L·N·V)) (Ashikhmin & Premože 2007; KHR_materials_sheen)."""
    return 0.25 / (n_dot_l + n_dot_v - n_dot_l * n_dot_v)


@njit(cache=True, error_model="numpy", _nrt=False)
def sheen_lobe(n_dot_l, n_dot_v, n_dot_h, roughness):
    """D·V of the sheen layer for colour 1 (multiply by sheenColor and N·L)."""
    r = clamp_roughness(roughness)
    return charlie_d(n_dot_h, r * r) * sheen_visibility(n_dot_l, n_dot_v)


@njit(cache=True, error_model="numpy", _nrt=False)
def sheen_albedo(n_dot_v, roughness):
    """E(N·V): the sheen lobe's directional albedo for colour 1, bilinear in the table."""
    mu = n_dot_v if n_dot_v > 0.0 else 0.0  # written so that NaN lands in the table too
    mu = mu if mu < 1.0 else 1.0
    r = clamp_roughness(roughness)
    x = (math.asin(math.sqrt(mu)) * (2.0 / math.pi)) ** (1.0 / MU_WARP) * (N_MU - 1)
    y = math.sqrt((r - ROUGHNESS_MIN) / (1.0 - ROUGHNESS_MIN)) * (N_ROUGH - 1)
    i = min(int(x), N_MU - 2)
    j = min(int(y), N_ROUGH - 2)
    fx = x - i
    fy = y - j
    rest = (1.0 - fy) * ((1.0 - fx) * ALBEDO[i, j] + fx * ALBEDO[i + 1, j]) + fy * (
        (1.0 - fx) * ALBEDO[i, j + 1] + fx * ALBEDO[i + 1, j + 1]
    )
    lead = 0.5 / (r * r) * math.log(0.5 * (1.0 + math.sqrt(1.0 - mu * mu)))
    return math.exp(rest + lead)


@njit(cache=True, error_model="numpy", _nrt=False)
def albedo_scaling(sheen_max, n_dot_v, roughness):
    """1 − max(sheenColor)·E(N·V), what the base layer keeps under the sheen (≥ 0)."""
    return max(1.0 - sheen_max * sheen_albedo(n_dot_v, roughness), 0.0)
