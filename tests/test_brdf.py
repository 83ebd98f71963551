"""The BRDF, Fresnel and refraction kernels against published values (shots.kernels.brdf)."""

import math

import numpy as np
import pytest

from shots.kernels import brdf


@pytest.mark.parametrize(
    "ior, f0", [(1.5, 0.04), (1.33, 0.0201), (1.52, 0.0426), (1.76, 0.0758), (2.42, 0.1724)]
)
def test_f0_from_ior(ior, f0):
    # glTF 2.0 spec App. B / KHR_materials_ior: F0 = ((n − 1)/(n + 1))², worked out by hand
    assert brdf.f0_from_ior(ior) == pytest.approx(f0, abs=5e-5)


def test_schlick_at_60_degrees():
    # Schlick 1994 (glTF 2.0 spec Appendix B): F0 + (1 − F0)(1 − V·H)⁵ = 0.04 + 0.96/32 = 0.07
    fw = brdf.schlick_weight(0.5)
    assert 0.04 + 0.96 * fw == pytest.approx(0.07, abs=1e-12)


def test_exact_fresnel_glass_60_degrees():
    # Fresnel equations (Hecht, Optics, §4.6), mean of Rs and Rp: n = 1.5 at 60° → 0.0892
    assert brdf.fresnel_dielectric(math.cos(math.radians(60)), 1.5) == pytest.approx(0.0892, abs=1e-4)
    # normal incidence equals ((n−1)/(n+1))² (Hecht, Optics, §4.6)
    assert brdf.fresnel_dielectric(1.0, 1.5) == pytest.approx(0.04, abs=1e-12)


@pytest.mark.parametrize("roughness", [0.1, 0.5, 1.0])
def test_visibility_head_on_is_a_quarter(roughness):
    # glTF 2.0 spec Appendix B, height-correlated Smith: Vis(N·L = N·V = 1) = 1/(2·(1 + 1)) = 0.25
    assert brdf.smith_vis(1.0, 1.0, brdf.alpha_of(roughness)) == pytest.approx(0.25)


@pytest.mark.parametrize("roughness, value", [(0.5, 5.0930), (1.0, 1.0 / math.pi)])
def test_ggx_peak(roughness, value):
    # glTF 2.0 spec Appendix B, GGX: D(N·H = 1) = 1/(π α²): 5.0930 at roughness 0.5, 1/π at 1
    assert brdf.ggx_d(1.0, brdf.alpha_of(roughness)) == pytest.approx(value, rel=1e-4)


@pytest.mark.parametrize("roughness", [0.3, 0.7])
def test_ggx_is_normalised(roughness):
    # Walter et al. 2007 (EGSR), eq. 4: ∫ D(h) (n·h) dω_h = 1 over the hemisphere
    alpha = brdf.alpha_of(roughness)
    theta = (np.arange(200000) + 0.5) / 200000 * (math.pi / 2)
    d = np.array([brdf.ggx_d(c, alpha) for c in np.cos(theta)])
    integral = np.sum(d * np.cos(theta) * np.sin(theta)) * (math.pi / 2 / len(theta)) * 2 * math.pi
    assert integral == pytest.approx(1.0, abs=1e-5)


def test_white_dielectric_head_on():
    # glTF 2.0 spec Appendix B model, white dielectric, roughness 0.5, L = V = N → f = 0.35651
    alpha = brdf.alpha_of(0.5)
    d_vis = brdf.specular_lobe(1.0, 1.0, 1.0, alpha)
    f = brdf.brdf_channel(1.0, 0.0, 0.04, 1.0, 1.0, d_vis, brdf.schlick_weight(1.0))
    assert f == pytest.approx(0.35651, abs=1e-5)


def test_metal_reflects_its_base_colour_head_on():
    # spec App. B: metal_brdf = specular_brdf · (baseColor + (1 − baseColor)(1 − |V·H|)⁵)
    alpha = brdf.alpha_of(0.5)
    d_vis = brdf.specular_lobe(1.0, 1.0, 1.0, alpha)
    f = brdf.brdf_channel(0.7, 1.0, 0.04, 1.0, 1.0, d_vis, 0.0)
    assert f == pytest.approx(0.7 * d_vis)


def test_lambert_albedo_integral_is_one():
    # Lambert: ∫ (1/π) cos θ dω = 1 over the hemisphere (energy of the diffuse term)
    theta = (np.arange(100000) + 0.5) / 100000 * (math.pi / 2)
    integral = np.sum(np.cos(theta) * np.sin(theta)) * (math.pi / 2 / len(theta)) * 2
    assert integral == pytest.approx(1.0, abs=1e-6)


def test_total_internal_reflection_begins_at_critical_angle():
    # Snell's law: sin θc = 1/n; for n = 1.5, θc = 41.81° (Hecht, Optics, §4.7)
    critical = math.degrees(math.asin(1 / 1.5))
    assert critical == pytest.approx(41.81, abs=0.01)
    n = (0.0, 0.0, 1.0)
    for angle, expect_ok in [(critical - 0.05, True), (critical + 0.05, False)]:
        a = math.radians(angle)
        v = (math.sin(a), 0.0, math.cos(a))  # inside the glass, toward the surface's inside
        ok, *_ = brdf.refract(*v, *n, 1.5)
        assert ok == expect_ok
        assert (brdf.fresnel_dielectric(math.cos(a), 1 / 1.5) == 1.0) == (not expect_ok)


def test_refraction_obeys_snell():
    # Snell: n1 sin θ1 = n2 sin θ2; 45° into n = 1.5 turns to 28.13° (Hecht, Optics, §4.4)
    a = math.radians(45)
    ok, tx, ty, tz, cos_t = brdf.refract(math.sin(a), 0.0, math.cos(a), 0.0, 0.0, 1.0, 1 / 1.5)
    assert ok
    assert math.degrees(math.acos(-tz)) == pytest.approx(28.13, abs=0.01)
    assert tx < 0  # continues across the normal, away from the side the view vector is on
    assert cos_t == pytest.approx(-tz)
    assert tx * tx + ty * ty + tz * tz == pytest.approx(1.0)


def test_vndf_samples_are_unit_and_in_upper_hemisphere():
    # Heitz 2018 (JCGT 7(4)): sampled visible normals satisfy h·z ≥ 0 and v·h ≥ 0
    rng = np.random.default_rng(1)
    v = np.array([0.6, 0.0, 0.8])
    for u1, u2 in rng.random((500, 2)):
        h = np.array(brdf.sample_ggx_vndf(*v, 0.3, u1, u2))
        assert np.linalg.norm(h) == pytest.approx(1.0)
        assert h[2] >= 0.0 and h @ v >= -1e-12


def test_vndf_sampling_matches_its_density():
    # Heitz 2018, eq. 2 and 3: the pdf of visible normals is G1(v) max(0, v·h) D(h) / (n·v).
    # Histogram of sampled cos θ_h against that density integrated over azimuth (numerically).
    alpha = 0.5
    v = np.array([math.sin(0.8), 0.0, math.cos(0.8)])
    rng = np.random.default_rng(2)
    samples = np.array([brdf.sample_ggx_vndf(*v, alpha, a, b) for a, b in rng.random((40000, 2))])
    edges = np.linspace(0.0, math.pi / 2, 11)
    counts, _ = np.histogram(np.arccos(np.clip(samples[:, 2], -1, 1)), edges)
    theta = np.linspace(0, math.pi / 2, 400, endpoint=False) + math.pi / 800
    phi = np.linspace(0, 2 * math.pi, 400, endpoint=False) + math.pi / 400
    t, p = np.meshgrid(theta, phi, indexing="ij")
    h = np.stack([np.sin(t) * np.cos(p), np.sin(t) * np.sin(p), np.cos(t)], -1)
    d = np.vectorize(brdf.ggx_d)(h[..., 2], alpha)
    pdf = brdf.smith_g1(v[2], alpha) * np.maximum(h @ v, 0) * d / v[2] * np.sin(t)
    pdf *= (math.pi / 2 / 400) * (2 * math.pi / 400)
    bands = zip(edges[:-1], edges[1:], strict=True)
    expected = np.array([pdf[(theta >= a) & (theta < b)].sum() for a, b in bands])
    assert expected.sum() == pytest.approx(1.0, abs=2e-3)
    assert np.abs(counts / len(samples) - expected).max() < 0.01
