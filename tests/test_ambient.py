"""Environment light blocked by the model, diffuse bounces, and the firefly clamp.

Expected values come from radiative heat-transfer configuration factors, the sphere's
equal-view-factor property, Veach 1995 and the piecewise-constant distribution of the PBR book.
"""

import math

import numpy as np
import pytest
from naive import moller_trumbore
from scenes import box, diffuse, look, material, merge, mesh_scene, ortho_camera, render, sphere

import shots.render
from shots.environment import environment_map, sampling_table
from shots.kernels import layout
from shots.kernels.ambient import box_distance, hemisphere_clear, power_heuristic
from shots.kernels.envlight import env_pdf, sample_env
from shots.kernels.ground import GROUND_CATCHER, GROUND_NONE, GROUND_PLANE, N_GROUND
from shots.look import Environment, Ground
from shots.render import SHADOW_NOISE_FLOOR

WHITE_ENV = Environment(zenith=(1.0, 1.0, 1.0), horizon=(1.0, 1.0, 1.0), nadir=(1.0, 1.0, 1.0))
LAMBERT = dict(P_SPECULAR=0.0, P_DOUBLE_SIDED=1.0)  # no specular lobe, seen from both sides


def test_power_heuristic_weights_sum_to_one():
    # Veach 1995, "Optimally Combining Sampling Techniques", §9.2: the weights of all techniques
    # that can produce a sample sum to one, so the combined estimator stays unbiased
    rng = np.random.default_rng(1)
    for a, b in rng.uniform(0.0, 50.0, (200, 2)):
        assert power_heuristic(a, b) + power_heuristic(b, a) == pytest.approx(1.0, abs=1e-12)
    assert power_heuristic(2.0, 0.0) == 1.0  # a technique that cannot make the sample
    assert power_heuristic(1.0, 3.0) == pytest.approx(0.1)  # β = 2: 1 / (1 + 9)


def _env_tuple(radiance):
    rows, marginal = sampling_table(radiance)
    return radiance, rows, marginal


def _frame(rotation=0.0):
    frame = np.zeros(layout.N_FRAME)
    frame[layout.F_ENV_ROTATION] = rotation
    return frame


@pytest.mark.parametrize("source", ["gradient", "spot"])
def test_environment_pdf_integrates_to_one_and_matches_its_samples(source):
    # Pharr, Jakob & Humphreys, PBR 3rd ed. §14.2.4: pdf(ω) = p(u, v)·w·h / (2π² sin θ) is a
    # density over the sphere (∫ pdf dω = 1), and sampling returns the pdf of what it drew
    if source == "gradient":
        radiance = environment_map(Environment(zenith=(2, 2, 2), horizon=(1, 1, 1),
                                               nadir=(0.1, 0.1, 0.1)))[0]  # fmt: skip
    else:
        radiance = np.full((64, 128, 3), 0.05, np.float32)
        radiance[10:14, 30:36] = 500.0  # a small bright sun
    env = _env_tuple(radiance)
    frame = _frame(0.7)
    n_t, n_p = 4 * radiance.shape[0], 2 * radiance.shape[1]  # midpoints, several per pixel
    theta = (np.arange(n_t) + 0.5) / n_t * np.pi
    phi = (np.arange(n_p) + 0.5) / n_p * 2.0 * np.pi
    total = 0.0
    for t in theta:
        st = math.sin(t)
        row = sum(env_pdf(env, frame, st * math.sin(p), math.cos(t), -st * math.cos(p))
                  for p in phi)  # fmt: skip
        total += row * st * (np.pi / n_t) * (2.0 * np.pi / n_p)
    assert total == pytest.approx(1.0, rel=0.02)
    rng = np.random.default_rng(2)
    for u1, u2 in rng.uniform(0.0, 1.0, (200, 2)):
        dx, dy, dz, pdf = sample_env(env, frame, u1, u2)
        assert math.isclose(dx * dx + dy * dy + dz * dz, 1.0, rel_tol=1e-9)
        assert env_pdf(env, frame, dx, dy, dz) == pytest.approx(pdf, rel=1e-6)
    if source == "spot":  # most samples land on the sun (its share of the table is ~97 %)
        dirs = np.array([sample_env(env, frame, a, b)[:3] for a, b in rng.uniform(0, 1, (400, 2))])
        v = np.arccos(np.clip(dirs[:, 1], -1, 1)) / np.pi
        assert np.mean((v > 10 / 64) & (v < 14 / 64)) > 0.9


def _ground(kind):
    row = np.zeros(N_GROUND)
    row[0] = kind
    return row


def test_hemisphere_clear_only_where_no_ray_can_meet_the_model():
    # The proof in hemisphere_clear's docstring, checked with brute-force ray casts
    # (Möller–Trumbore against every triangle, tests/naive.py) from points it accepts
    scene = merge(box((1.0, 1.0, 1.0), (0.0, 0.5, 0.0)), box((0.4, 0.4, 0.4), (0.3, 1.2, 0.0)))
    frame = _frame()
    lo, hi = scene.bounds()
    frame[layout.F_BOX : layout.F_BOX + 6] = np.concatenate([lo, hi])
    none, catcher, plane = _ground(GROUND_NONE), _ground(GROUND_CATCHER), _ground(GROUND_PLANE)
    top = (0.3, 1.4, 0.0, 0.0, 1.0, 0.0)  # top of the small box, which is the box's top too
    floor_near = (1.0, 0.0, 0.0, 0.0, 1.0, 0.0)
    big_top = (-0.3, 1.0, 0.0, 0.0, 1.0, 0.0)  # the big box's top, beside the small one
    assert hemisphere_clear(frame, none, *top[:3], *top[3:], *top[3:])
    assert hemisphere_clear(frame, catcher, *top[:3], *top[3:], *top[3:])
    assert not hemisphere_clear(frame, plane, *top[:3], *top[3:], *top[3:])  # a visible floor
    assert not hemisphere_clear(frame, none, *floor_near[:3], *floor_near[3:], *floor_near[3:])
    assert not hemisphere_clear(frame, none, *big_top[:3], *big_top[3:], *big_top[3:])
    rng = np.random.default_rng(3)
    positions = scene.positions.astype(np.float64)
    accepted = 0
    for _ in range(60):  # random points on the surface and their normals
        tri = rng.integers(len(scene.triangles))
        a, b, c = positions[scene.triangles[tri]]
        r1, r2 = rng.uniform(0, 1, 2)
        if r1 + r2 > 1:
            r1, r2 = 1 - r1, 1 - r2
        p = a + r1 * (b - a) + r2 * (c - a)
        n = np.cross(b - a, c - a)
        n /= np.linalg.norm(n)
        if not hemisphere_clear(frame, none, *p, *n, *n):
            continue
        accepted += 1
        d = rng.normal(size=(200, 3))
        d /= np.linalg.norm(d, axis=1, keepdims=True)
        d[d @ n < 0] *= -1
        t = moller_trumbore(positions, scene.triangles, np.tile(p + 1e-6 * n, (200, 1)), d)[0]
        assert np.all(~np.isfinite(t))
    assert accepted > 5


def test_box_distance_bounds_the_contact_shadow_rays():
    # Euclidean distance from a point to an axis-aligned box (0 inside): contact-shadow rays of
    # length r cannot meet the model from points farther than r
    frame = _frame()
    frame[layout.F_BOX : layout.F_BOX + 6] = (-1.0, 0.0, -1.0, 1.0, 2.0, 1.0)
    assert box_distance(frame, 0.0, 1.0, 0.0) == 0.0
    assert box_distance(frame, 4.0, 0.0, 0.0) == pytest.approx(3.0)
    assert box_distance(frame, 4.0, -4.0, 5.0) == pytest.approx(math.sqrt(9 + 16 + 16))


def _floor_and_wall(h=1.0, parts=False):
    """A white Lambertian floor (y = 0, x > 0) beside a long, thin black wall of height h
    (merged, or the two apart with ``parts``)."""
    floor = mesh_scene([[0, 0, -20], [0, 0, 20], [10, 0, 20], [10, 0, -20]],
                       [[0, 1, 2], [0, 2, 3]], normals=np.tile([0.0, 1.0, 0.0], (4, 1)),
                       rows=[diffuse(**LAMBERT)])  # fmt: skip
    wall = box((0.002, h, 40.0), (-0.001, h / 2, 0.0), rows=[diffuse((0, 0, 0), **LAMBERT)])
    return (floor, wall) if parts else merge(floor, wall)


def test_floor_beside_a_wall_receives_the_configuration_factor():
    # Configuration factor from a differential floor strip to an infinitely long wall of height
    # h at distance d: F = ½(1 − d/√(d² + h²)) (J. R. Howell, "A Catalog of Radiation Heat
    # Transfer Configuration Factors", strip element to a perpendicular infinite plane). In a
    # uniform environment of radiance 1 a white Lambertian floor beside a black wall returns
    # the sky's share 1 − F: 0.62 at d = h/4, 0.72 at h/2, 0.85 at h; within 2 %.
    camera = ortho_camera(32, half_height=1.0, eye=(0.6, 5.0, 0.0), target=(0.6, 0.0, 0.0),
                          up=(0.0, 0.0, -1.0), width=48)  # fmt: skip
    image = render(_floor_and_wall(), camera, look(env=WHITE_ENV, samples=64))
    jj, ii = np.mgrid[0 : camera.height, 0 : camera.width]
    origins, _ = camera.rays_at(ii.ravel() + 0.5, jj.ravel() + 0.5)
    x = origins[:, 0].reshape(camera.height, camera.width)
    pixel = 1.2 / 32 * 1.0 * 2.0 / 2.0
    for d, expected in ((0.25, 0.62), (0.5, 0.72), (1.0, 0.85)):
        exact = 1.0 - 0.5 * (1.0 - d / math.hypot(d, 1.0))
        assert exact == pytest.approx(expected, abs=0.005)
        strip = np.abs(x - d) < 0.75 * pixel
        assert strip.sum() >= 32
        # the wall is black: the strip's radiance is the visible sky alone (any bounce is black)
        assert image[strip, 0].mean() == pytest.approx(exact, rel=0.02)


def test_shadow_catcher_alpha_is_the_sky_the_wall_hides():
    # The same configuration factor (Howell's catalogue, strip element to a perpendicular
    # infinite plane) read from the invisible floor: with no lights, the contact shadow a
    # shadow catcher writes to alpha is the share of the sky's irradiance the wall hides,
    # F = ½(1 − d/√(d² + h²)): 0.38 at d = h/4, 0.28 at h/2, 0.15 at h, less the catcher's
    # noise floor (alpha (F − floor)/(1 − floor), shots.render.lift_shadow_noise_floor); the
    # colour stays black (premultiplied).
    _, wall = _floor_and_wall(parts=True)
    camera = ortho_camera(32, half_height=1.0, eye=(0.6, 5.0, 0.0), target=(0.6, 0.0, 0.0),
                          up=(0.0, 0.0, -1.0), width=48)  # fmt: skip
    catcher = Ground(kind="shadow_catcher", height=0.0)
    image = render(wall, camera, look(env=WHITE_ENV, ground=catcher, samples=64))
    jj, ii = np.mgrid[0 : camera.height, 0 : camera.width]
    origins, _ = camera.rays_at(ii.ravel() + 0.5, jj.ravel() + 0.5)
    x = origins[:, 0].reshape(camera.height, camera.width)
    pixel = 1.2 / 32
    for d in (0.25, 0.5, 1.0):
        hidden = 0.5 * (1.0 - d / math.hypot(d, 1.0))
        strip = np.abs(x - d) < 0.75 * pixel
        assert strip.sum() >= 32
        expected = (hidden - SHADOW_NOISE_FLOOR) / (1.0 - SHADOW_NOISE_FLOOR)
        assert image[strip, 3].mean() == pytest.approx(expected, abs=0.006)  # 1.5 alpha codes
        assert np.all(image[strip, :3] == 0.0)
    far = x > 1.1  # still well inside the contact reach: the alpha keeps falling with d
    assert image[far, 3].mean() < image[np.abs(x - 1.0) < 0.75 * pixel, 3].mean()


def _bowl(radius=1.0, rings=24, segments=64):
    """The lower half of a sphere, open at the top, radial normals, white Lambertian."""
    theta = np.linspace(np.pi / 2, np.pi, rings + 1)
    phi = np.linspace(0.0, 2.0 * np.pi, segments, endpoint=False)
    st, ct = np.sin(theta)[:, None], np.cos(theta)[:, None]
    verts = np.stack([st * np.cos(phi), np.broadcast_to(ct, (rings + 1, segments)),
                      st * np.sin(phi)], -1).reshape(-1, 3)  # fmt: skip
    faces = []
    for r in range(rings):
        for s in range(segments):
            a, b = r * segments + s, r * segments + (s + 1) % segments
            faces += [[a, b + segments, b], [a, a + segments, b + segments]]
    keep = np.unique(np.array(faces))
    assert len(keep) == len(verts)
    return mesh_scene(verts * radius, faces, normals=verts, rows=[diffuse(**LAMBERT)])


@pytest.mark.parametrize("bounces", [0, 1, 2])
def test_white_bowl_approaches_the_furnace_as_bounces_are_added(bounces):
    # Any two elements on one sphere see each other with the configuration factor
    # dF = dA_j / (4πR²) (Sparrow & Cess, "Radiation Heat Transfer", the sphere's
    # equal-view-factor property), so every point inside a hemispherical bowl sees the open top
    # with factor ½ and the bowl with ½. A white Lambertian bowl in a uniform environment of
    # radiance 1 (white furnace) then returns 1 − ½^(k+1) after k diffuse bounces: 0.5, 0.75,
    # 0.875, toward 1.
    camera = ortho_camera(24, half_height=1.0, eye=(0.0, 5.0, 0.0), target=(0.0, 0.0, 0.0),
                          up=(0.0, 0.0, -1.0))  # fmt: skip
    image = render(_bowl(), camera, look(env=WHITE_ENV, samples=64, diffuse_bounces=bounces))
    jj, ii = np.mgrid[0:24, 0:24]
    r = np.hypot((ii + 0.5) / 12 - 1, (jj + 0.5) / 12 - 1)
    inside = r < 0.8
    assert image[inside, 0].mean() == pytest.approx(1.0 - 0.5 ** (bounces + 1), rel=0.03)


def test_convex_white_sphere_stays_invisible_with_bounces():
    # White furnace (Heitz et al. 2016, §6): a convex white Lambertian object blocks none of
    # its own sky, whatever the bounce count
    camera = ortho_camera(24)
    image = render(sphere(rows=[diffuse(**LAMBERT)]), camera,
                   look(env=WHITE_ENV, samples=4, diffuse_bounces=2))  # fmt: skip
    covered = image[..., 3] == 1
    assert covered.sum() > 100
    np.testing.assert_allclose(image[covered, :3], 1.0, atol=0.02)


def test_coloured_panel_tints_its_neighbour():
    # Diffuse interreflection: a white floor beside a red wall turns red near it with a bounce
    # (colour bleeding), and stays grey without one
    floor = mesh_scene([[0, 0, -2], [0, 0, 2], [2, 0, 2], [2, 0, -2]], [[0, 1, 2], [0, 2, 3]],
                       normals=np.tile([0.0, 1.0, 0.0], (4, 1)), rows=[diffuse(**LAMBERT)])  # fmt: skip
    wall = box((0.02, 1.0, 4.0), (-0.01, 0.5, 0.0), rows=[diffuse((0.9, 0.05, 0.05), **LAMBERT)])
    camera = ortho_camera(16, half_height=0.2, eye=(0.25, 5.0, 0.0), target=(0.25, 0.0, 0.0),
                          up=(0.0, 0.0, -1.0))  # fmt: skip
    bled = render(merge(floor, wall), camera, look(env=WHITE_ENV, samples=16))
    plain = render(merge(floor, wall), camera, look(env=WHITE_ENV, samples=16, diffuse_bounces=0))
    assert np.allclose(plain[..., 0].mean(), plain[..., 1].mean(), rtol=0.01)
    assert bled[..., 0].mean() > bled[..., 1].mean() + 0.05


@pytest.mark.parametrize("sun, max_bias", [(0.8, 0.0), (100.0, 0.2)])
def test_indirect_clamp_bias(monkeypatch, sun, max_bias):
    # The firefly clamp's bias, measured on a white bowl holding a glossy metal ball (the sun
    # seen in the ball by a bounce ray is the rare bright path; the ball's own reflection of the
    # sun, one scattering, is not clamped). Under a sky no brighter than the catalog rigs'
    # (0.8) the clamp never engages: no bias. Under a small sun 200× the sky it engages and
    # removes 12 % of the bowl's light, measured when this was written: the price of no
    # fireflies, paid only where indirect light is that extreme.
    radiance = np.full((32, 64, 3), 0.5, np.float32)
    radiance[4:8, 8:16] = sun
    monkeypatch.setattr(shots.render, "_environment",
                        lambda env: ((radiance, *sampling_table(radiance)), _sh(radiance)))
    camera = ortho_camera(32, half_height=1.0, eye=(0.0, 5.0, 0.0), target=(0.0, 0.0, 0.0),
                          up=(0.0, 0.0, -1.0))  # fmt: skip
    ball = sphere(0.45, (0.0, -0.5, 0.0), subdivisions=3,
                  rows=[material(P_METALLIC=1.0, P_ROUGHNESS=0.15)])  # fmt: skip
    scene = merge(_bowl(), ball)
    clamped = render(scene, camera, look(env=WHITE_ENV, samples=16))
    monkeypatch.setattr(shots.render, "INDIRECT_CLAMP", np.inf)
    free = render(scene, camera, look(env=WHITE_ENV, samples=16))
    inside = free[..., 3] > 0
    bias = 1.0 - clamped[inside, :3].mean() / free[inside, :3].mean()
    print(f"clamp bias under a sky of {sun}: {bias:.4f}")
    assert np.all(clamped[inside, :3].max(-1) <= free[inside, :3].max(-1) + 1e-6)
    if max_bias == 0.0:
        np.testing.assert_array_equal(clamped, free)
    else:
        assert 0.0 < bias < max_bias


def _sh(radiance):
    from shots.environment import irradiance_coefficients

    return irradiance_coefficients(radiance)
