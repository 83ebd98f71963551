"""KHR_materials_sheen: the Charlie lobe, its albedo table, energy, and what it does to a render.

Formulas: KHR_materials_sheen README, "Implementation Notes" (Khronos glTF repository): Charlie
distribution (Estevez & Kulla 2017, "Production Friendly Microfacet Sheen BRDF"), the simpler
visibility 1/(4(N·L + N·V − N·L·N·V)) (Ashikhmin & Premože 2007), albedo scaling
f = f_sheen + (1 − max(sheenColor)·E(N·V))·f_base.
"""

import math

import numpy as np
import pytest
from numba import njit
from scenes import (
    diffuse,
    look,
    material,
    ortho_camera,
    pixel_centres,
    render,
    single_texture,
    sphere,
    textured_table,
)

from shots.kernels import sheen
from shots.kernels.bsdf import eval_bsdf
from shots.kernels.surface import (
    N_SURFACE,
    S_BASE_B,
    S_BASE_G,
    S_BASE_R,
    S_IOR,
    S_NZ,
    S_OCCLUSION,
    S_OPACITY,
    S_ROUGHNESS,
    S_SHEEN_B,
    S_SHEEN_G,
    S_SHEEN_R,
    S_SHEEN_ROUGHNESS,
)
from shots.look import DIRECTIONAL, Environment, Light
from shots.scene import FILTER_NEAREST, T_SHEEN_COLOR, T_SHEEN_ROUGHNESS, WRAP_CLAMP

WHITE_ENV = Environment(zenith=(1.0, 1.0, 1.0), horizon=(1.0, 1.0, 1.0), nadir=(1.0, 1.0, 1.0))
LAMBERT = dict(P_SPECULAR=0.0)  # KHR_materials_specular factor 0: a pure Lambert base


def sheen_row(colour=(1.0, 1.0, 1.0), roughness=0.5, base=(1.0, 1.0, 1.0), **values):
    """A rough dielectric (roughness 1) under a sheen layer of this colour and roughness."""
    return diffuse(base, P_SHEEN_R=list(colour), P_SHEEN_ROUGHNESS=roughness, **values)


# --- the lobe and its albedo --------------------------------------------------------------------
@njit(cache=False)
def charlie_normalisation(alpha, n):
    """∫ D(h)(n·h) dω_h over the hemisphere: midpoint rule in θ_h, the φ integral is 2π."""
    total = 0.0
    for k in range(n):
        theta = (k + 0.5) / n * (0.5 * math.pi)
        c = math.cos(theta)
        total += sheen.charlie_d(c, alpha) * c * math.sin(theta)
    return total * (0.5 * math.pi / n) * 2.0 * math.pi


@pytest.mark.parametrize("roughness", [sheen.ROUGHNESS_MIN, 0.2, 0.5, 0.8, 1.0])
def test_charlie_distribution_is_normalised(roughness):
    # A microfacet distribution projects to unit area: ∫ D(h)(n·h) dω_h = 1 (Walter et al. 2007,
    # "Microfacet Models for Refraction", eq. 4); for the Charlie D of Estevez & Kulla 2017 the
    # integral is (2 + 1/α)·∫ sin^(1/α+1)θ cos θ dθ = 1 in closed form
    assert charlie_normalisation(roughness**2, 400_000) == pytest.approx(1.0, abs=1e-5)


@njit(cache=False)
def direct_albedo(mu, roughness, n_cos, n_phi):
    """E(μ) = ∫ D·V·(N·L) dω_l of the kernel's lobe, midpoint rule in (cos θ_l, φ_l).

    A different quadrature from the table's (Gauss–Legendre in θ_l) and the kernel's own lobe
    functions rather than the table maker's numpy copy.
    """
    sin_v = math.sqrt(1.0 - mu * mu)
    total = 0.0
    for a in range(n_cos):
        c = (a + 0.5) / n_cos
        s = math.sqrt(1.0 - c * c)
        for b in range(n_phi):
            phi = (b + 0.5) / n_phi * math.pi  # half the circle; the other half mirrors it
            hx, hy, hz = sin_v + s * math.cos(phi), s * math.sin(phi), mu + c
            n_dot_h = hz / math.sqrt(hx * hx + hy * hy + hz * hz)
            total += sheen.sheen_lobe(c, mu, n_dot_h, roughness) * c
    return total * (1.0 / n_cos) * (2.0 * math.pi / n_phi)


def test_albedo_table_matches_direct_integration():
    # The table's E against a direct numerical integration, at cell centres (where bilinear
    # interpolation errs most), across the whole range: within 1 % of E, or of 0.05 where E is
    # smaller (there the lobe takes under 5 % of the light; 1 % of that is 5e-4)
    t = np.linspace(0.0, 1.0, 2 * sheen.N_MU - 1)[1::2]
    s = np.linspace(0.0, 1.0, 2 * sheen.N_ROUGH - 1)[1::2]
    mus = sheen.mu_nodes(t[[0, 1, 2, 4, 8, 13, 19, 26, 33, -1]])
    roughnesses = sheen.roughness_nodes(s[[0, 1, 2, 4, 8, 15, 22, -1]])
    worst = 0.0
    for mu in mus:
        for r in roughnesses:
            exact = direct_albedo(mu, r, 400, 200)
            error = abs(sheen.sheen_albedo(mu, r) - exact) / max(exact, 0.05)
            worst = max(worst, error)
    assert worst < 0.01, worst


def test_albedo_closed_forms():
    # At N·V = 1 and sheen roughness 1 (α = 1), D = 3 sin(θ_l/2)/(2π) and V = 1/4, so
    # E = (3/4)·∫₀^{π/2} sin(θ/2) cos θ sin θ dθ = (3/4)·(2√2/15) = √2/10 (by hand: with u = θ/2
    # the integral is ∫₀^{π/4} sin u sin 4u du = ½[sin 3u/3 − sin 5u/5]₀^{π/4})
    assert sheen.sheen_albedo(1.0, 1.0) == pytest.approx(math.sqrt(2) / 10, rel=1e-6)
    assert direct_albedo(1.0, 1.0, 2000, 8) == pytest.approx(math.sqrt(2) / 10, rel=1e-5)
    # E falls toward normal incidence and rises toward grazing views (fibres catch grazing light)
    mu = np.linspace(0.0, 1.0, 101)
    for r in (0.2, 0.5, 1.0):
        e = np.array([sheen.sheen_albedo(m, r) for m in mu])
        assert np.all(np.diff(e) < 0)


def test_albedo_table_is_the_integral_at_its_nodes():
    # what the table stores is ln E − k·ln((1 + sin θ_v)/2); undone, it is the integral itself
    # (a second, finer Gauss–Legendre rule: 256 × 128 nodes)
    j = [0, 10, 31]
    r = sheen.roughness_nodes(np.linspace(0.0, 1.0, sheen.N_ROUGH))[j]
    mu = sheen.mu_nodes(np.linspace(0.0, 1.0, sheen.N_MU))
    fine = sheen.albedo_integral(mu, r, quadrature=(256, 128))
    stored = np.exp(sheen.ALBEDO[:, j] + sheen.leading_log(mu[:, None], r[None, :]))
    np.testing.assert_allclose(stored, fine, rtol=1e-3)


# --- energy ---------------------------------------------------------------------------------------
def lambert_sheen_surface(roughness):
    """A surface record: white Lambert base (specular 0) under a white sheen, normal +Z."""
    surf = np.zeros(N_SURFACE)
    surf[S_NZ] = 1.0
    surf[S_BASE_R] = surf[S_BASE_G] = surf[S_BASE_B] = 1.0
    surf[S_ROUGHNESS] = 1.0
    surf[S_OPACITY] = surf[S_OCCLUSION] = 1.0
    surf[S_IOR] = 1.5
    surf[S_SHEEN_R] = surf[S_SHEEN_G] = surf[S_SHEEN_B] = 1.0
    surf[S_SHEEN_ROUGHNESS] = roughness
    return surf


@njit(cache=False)
def reflected_energy(surf, mu, n_cos, n_phi):
    """∫ f(v, l)(N·L) dω_l of ``eval_bsdf`` for a view at cos θ_v = mu: the white-furnace sum."""
    vx, vz = math.sqrt(1.0 - mu * mu), mu
    total = 0.0
    for a in range(n_cos):
        c = (a + 0.5) / n_cos
        s = math.sqrt(1.0 - c * c)
        for b in range(n_phi):
            phi = (b + 0.5) / n_phi * 2.0 * math.pi
            r, _, _ = eval_bsdf(surf, vx, 0.0, vz, s * math.cos(phi), s * math.sin(phi), c)
            total += r
    return total * (1.0 / n_cos) * (2.0 * math.pi / n_phi)


@pytest.mark.parametrize("roughness", [0.3, 0.5, 1.0])
def test_sheen_over_white_lambert_keeps_energy_one(roughness):
    # White furnace for direct light (common practice, e.g. Heitz et al. 2016, "Multiple-
    # scattering microfacet BSDFs", §6): the sheen lobe reflects E(μ) and the albedo scaling
    # leaves (1 − E(μ)) of a white Lambert base, so the sum is 1, up to the table's error, and
    # not above. Views from 9° above the horizon, where E ≤ 1 (below, smooth sheens gain energy,
    # as the extension warns for this visibility term).
    surf = lambert_sheen_surface(roughness)
    for mu in (0.15, 0.3, 0.6, 0.9, 1.0):
        energy = reflected_energy(surf, mu, 600, 300)
        assert energy == pytest.approx(1.0, abs=0.01), (mu, energy)


@pytest.mark.parametrize("base", [LAMBERT, {}])  # Lambert; the default F0 0.04 dielectric
def test_sheen_in_a_white_furnace(base):
    # White furnace for the environment part (Heitz et al. 2016, §6): a white sheen (roughness
    # 0.5, E ≤ 0.9 at every angle) on a white base under uniform unit radiance stays at 1 ± 1 %:
    # the ambient sheen E·L plus the scaled base (1 − E)·L
    row = sheen_row((1.0, 1.0, 1.0), roughness=0.5, **base)
    camera = ortho_camera(32)
    image = render(sphere(rows=[row]), camera, look(env=WHITE_ENV))
    covered = image[..., 3] == 1
    assert covered.sum() > 400
    np.testing.assert_allclose(image[covered, :3], 1.0, atol=0.01)


# --- in a render ----------------------------------------------------------------------------------
KEY = Light("area", intensity=2.0, position=(0.5, 0.5, 4.0), direction=(-0.5, -0.5, -4.0),
            edge_u=(0.6, 0, 0), edge_v=(0, 0.6, 0))  # fmt: skip
GREY_ENV = Environment(zenith=(0.5, 0.5, 0.5), horizon=(0.4, 0.4, 0.4), nadir=(0.2, 0.2, 0.2))


def half_sheen_sphere(sheen_colour):
    """A dark fabric sphere whose sheen texture is 0 on its −X half and ``sheen_colour`` on +X."""
    ball = sphere(rows=[diffuse((0.15, 0.12, 0.1))])
    uv = np.where(ball.positions[:, :1] < 0.0, [0.25, 0.5], [0.75, 0.5]).astype(np.float32)
    texels = np.array([[[0.0, 0.0, 0.0, 1.0], [*sheen_colour, 1.0]]])
    row = sheen_row((1.0, 1.0, 1.0), roughness=0.4, base=(0.15, 0.12, 0.1))
    return sphere(rows=[row], uv=uv, textures=single_texture(texels, WRAP_CLAMP, FILTER_NEAREST),
                  table=textured_table(row, {T_SHEEN_COLOR: 0}))  # fmt: skip


def test_sheen_brightens_the_rim_and_changes_nothing_where_it_is_zero():
    # KHR_materials_sheen: the fibres scatter at grazing angles, so a sheen sphere is brighter
    # at its rim than the same sphere without; where sheenColor = 0 "the whole sheen layer is
    # disabled": those pixels are bit for bit those of the plain material (same seed)
    camera = ortho_camera(64, half_height=1.05)
    look_ = look(KEY, env=GREY_ENV, samples=4)
    with_sheen = render(half_sheen_sphere((0.8, 0.8, 0.8)), camera, look_)
    plain = render(half_sheen_sphere((0.0, 0.0, 0.0)), camera, look_)
    x, y = pixel_centres(camera)
    r = np.hypot(x, y)
    rim, centre = (r > 0.85) & (r < 0.97), r < 0.4
    no_sheen, sheen_half = x < -0.1, x > 0.1
    assert np.array_equal(with_sheen[no_sheen], plain[no_sheen])
    lum = with_sheen[..., :3].mean(-1)
    lum_plain = plain[..., :3].mean(-1)
    assert (rim & sheen_half).sum() > 150
    assert np.all(lum[rim & sheen_half] > lum_plain[rim & sheen_half])
    gain_rim = lum[rim & sheen_half].mean() / lum_plain[rim & sheen_half].mean()
    gain_centre = lum[centre & sheen_half].mean() / lum_plain[centre & sheen_half].mean()
    # head-on the lobe is weak (E(0.9) ≈ 0.03 at roughness 0.4), at the rim it dominates
    assert gain_rim > 1.3 and gain_rim - 1.0 > 5.0 * (gain_centre - 1.0) > 0.0


def test_sheen_textures_multiply_the_factors():
    # KHR_materials_sheen: sheenColor = factor × sheenColorTexture.rgb and sheenRoughness =
    # factor × sheenRoughnessTexture.a (alpha, not a colour channel); the renders agree with
    # untextured factors of the same products (to float32 rounding of the 8-bit texel values)
    camera = ortho_camera(16, half_height=1.05)
    look_ = look(Light(DIRECTIONAL, intensity=2.0, direction=(-0.6, 0.0, -0.8)), env=GREY_ENV)
    base = (0.3, 0.3, 0.3)
    texel = np.array([[[51, 128, 204, 77]]], np.uint8)
    textured = sheen_row((1.0, 1.0, 1.0), roughness=1.0, base=base)
    table = textured_table(textured, {T_SHEEN_COLOR: 0, T_SHEEN_ROUGHNESS: 0})
    image = render(sphere(rows=[textured], textures=single_texture(texel), table=table), camera,
                   look_)  # fmt: skip
    factors = sheen_row(np.float32([51, 128, 204]) / 255, roughness=np.float32(77 / 255),
                        base=base)  # fmt: skip
    np.testing.assert_allclose(image, render(sphere(rows=[factors]), camera, look_), rtol=1e-5,
                               atol=1e-7)  # fmt: skip
    rgb_roughness = sheen_row(np.float32([0.2, 0.5, 0.8]), roughness=np.float32(0.8), base=base)
    assert not np.array_equal(image, render(sphere(rows=[rgb_roughness]), camera, look_))


def test_zero_sheen_colour_is_the_plain_material():
    # KHR_materials_sheen: "If sheenColorFactor is zero, the whole sheen layer is disabled" —
    # whatever its roughness
    camera = ortho_camera(16, half_height=1.05)
    look_ = look(KEY, env=GREY_ENV, samples=4)
    plain = render(sphere(rows=[material(P_METALLIC=0.0)]), camera, look_)
    zero = render(sphere(rows=[material(P_METALLIC=0.0, P_SHEEN_ROUGHNESS=0.7)]), camera, look_)
    assert np.array_equal(plain, zero)
