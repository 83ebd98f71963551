"""Sampling control: the error estimate, the stop rule, forced counts, determinism."""

import hashlib
import os
import subprocess
import sys
from pathlib import Path

import numba
import numpy as np
import pytest
from scenes import diffuse, look, material, ortho_camera, pixel_centres, quad, render, sphere

from shots.camera import Camera
from shots.look import Environment, Light
from shots.render import prepare_scene, render_frame_counted
from shots.sampling_control import (
    display_error,
    next_set_size,
    pass_seed,
    render_adaptive,
    smoothed_square,
    standard_error,
)

LIGHT = Light("area", intensity=3.0, position=(1, 2, 2), direction=(-1, -2, -2),
              edge_u=(0.5, 0, 0), edge_v=(0, 0.5, 0))  # fmt: skip


def set_sums(samples: np.ndarray, sizes):
    """(Σ n_k m_k, Σ n_k m_k², n, K) of (pixels, n) sample streams cut into sets of ``sizes``."""
    edges = np.cumsum([0, *sizes])
    means = np.stack([samples[:, a:b].mean(axis=1) for a, b in zip(edges[:-1], edges[1:], strict=True)],
                     axis=1)  # fmt: skip
    weights = np.asarray(sizes, np.float64)
    return means @ weights, (means * means) @ weights, float(edges[-1]), len(sizes)


@pytest.mark.parametrize("sizes", [(4, 4), (4, 4, 16), (4, 4, 25, 9), (4, 4, 4, 4)])
def test_standard_error_of_known_streams_is_sigma_over_root_n(sizes):
    # Standard error of a mean of n independent samples is σ/√n; the between-groups mean square
    # of a one-way analysis of variance is an unbiased estimate of σ² for groups of any sizes
    # (any statistics text). Here its mean over many pixels.
    sigma = 0.3
    rng = np.random.default_rng(len(sizes) + sum(sizes))
    streams = rng.normal(0.5, sigma, (40_000, sum(sizes)))
    total, squares, n, sets = set_sums(streams, sizes)
    se = standard_error(total, squares, n, sets)
    # the mean of a K−1 degree-of-freedom estimate over M pixels has relative spread
    # sqrt(2 / ((K − 1) M)) (chi-square)
    spread = np.sqrt(2.0 / ((sets - 1) * len(se)))
    assert abs(np.mean(se**2) / (sigma**2 / n) - 1.0) < 5 * spread


def srgb_slope_in_codes(x: float) -> float:
    """IEC 61966-2-1 §5.2: code = 255 (1.055 x^(1/2.4) − 0.055), so its slope is
    255·1.055/2.4·x^(1/2.4 − 1)."""
    return 255.0 * 1.055 / 2.4 * x ** (1.0 / 2.4 - 1.0)


def test_display_error_follows_the_srgb_slope():
    # a small standard error maps to codes through that slope (no tone map, opaque pixel)
    x, se = 0.2, 1e-4
    error = display_error(np.array([[x, x, x, 1.0]]), np.array([[se, se, se, 0.0]]), 0.0, "none")
    assert error[0] == pytest.approx(srgb_slope_in_codes(x) * se, rel=1e-3)


def test_colour_error_is_the_root_mean_square_over_channels():
    # noise in red alone counts √(1/3) of red's error: the target is the per-channel RMSE that
    # bench/quality.py reports, not the worst channel
    x, se = 0.2, 1e-4
    error = display_error(np.array([[x, x, x, 1.0]]), np.array([[se, 0.0, 0.0, 0.0]]), 0.0, "none")
    assert error[0] == pytest.approx(srgb_slope_in_codes(x) * se / np.sqrt(3.0), rel=1e-3)


def test_alpha_error_is_in_codes_of_coverage():
    # black with half coverage: only alpha varies, 255 codes = fully opaque
    error = display_error(np.array([[0.0, 0.0, 0.0, 0.5]]), np.array([[0.0, 0.0, 0.0, 0.01]]),
                          0.0, "none")  # fmt: skip
    assert error[0] == pytest.approx(255 * 0.01)


def test_shadow_below_the_noise_floor_shows_no_error():
    # a pure-shadow pixel whose alpha stays under the floor is lifted to 0 whatever its noise;
    # above it, the lift scales alpha by 1 / (1 − floor)
    se = np.array([[0.0, 0.0, 0.0, 0.01]] * 2)
    mean = np.array([[0.0, 0.0, 0.0, 0.02], [0.0, 0.0, 0.0, 0.5]])
    error = display_error(mean, se, 0.0, "none", shadow_floor=0.05)
    assert error[0] == 0.0 and error[1] == pytest.approx(255 * 0.01 / 0.95)


def test_a_lucky_pixel_does_not_stop_alone():
    error = np.full((5, 5), 3.0)
    error[2, 2] = 0.0  # its own sets agreed by chance
    assert smoothed_square(error)[2, 2] == pytest.approx(9.0 * 8 / 9)
    assert np.all(smoothed_square(np.full((5, 5), 0.5)) == 0.25)


def test_next_sets_double_the_count_within_the_room():
    # a pixel's count goes 8, 16, 32, …: each stop is a whole 2^m block of its Sobol' sequence
    counts = np.array([8, 8, 16, 32, 32, 48, 63])
    short = np.array([0, 1, 100, 5, 100, 100, 100])
    room = np.array([56, 56, 48, 32, 20, 16, 1])
    assert next_set_size(counts, short, room).tolist() == [0, 8, 16, 32, 20, 16, 0]


def synthetic_runner(sigma_codes: np.ndarray):
    """A pass runner whose pixels are black, half covered, with alpha noise of known σ per
    sample (in codes), Gaussian and seeded by the pass seed (deterministic)."""

    def run_pass(samples, seed, active, out, counts):
        rng = np.random.default_rng(seed)
        noise = rng.normal(0.0, 1.0, sigma_codes.shape) * sigma_codes / 255.0 / np.sqrt(samples)
        on = active.astype(bool)
        out[on] = 0.0
        out[..., 3][on] = (0.5 + noise)[on]
        counts[on] += samples

    return run_pass


def test_stop_rule_on_streams_of_known_variance():
    # a pixel stops once σ/√n is under the target: with σ = target·√24 that is n ≈ 24, which
    # the doubling counts (8, 16, 32, …) first cover at 32
    target = 1.0
    sigma = np.zeros((40, 40))
    sigma[:, 10:20] = target * np.sqrt(24)
    sigma[:, 20:] = 1000.0  # never meets the target
    rgba, counts = render_adaptive(synthetic_runner(sigma), sigma.shape, 5, target, 8, 128,
                                   0.0, "none")  # fmt: skip
    assert np.all(counts[:, :9] == 8)  # noiseless: the minimum
    assert np.all(counts[:, 21:] == 128)  # hopeless: the maximum
    middle = counts[:, 11:19]
    assert np.median(middle) == 32
    # the error left is about the target (one standard error)
    left = 255.0 * (rgba[:, 11:19, 3] - 0.5)
    assert 0.5 * target < np.sqrt(np.mean(left**2)) < 1.5 * target
    assert counts.min() >= 8 and counts.max() <= 128


def test_pass_seeds_differ_and_the_first_is_the_frame_seed():
    assert pass_seed(7, 0) == 7
    seeds = {pass_seed(7, k) for k in range(64)}
    assert len(seeds) == 64 and all(0 <= s < 2**32 for s in seeds)


def adaptive_digest() -> str:
    """SHA-256 of the adaptive render's pixels and sample counts (run also in a subprocess)."""
    prepared, camera = scene_and_camera()
    settings = look(LIGHT, env=Environment(), ground="shadow_catcher", samples=0, seed=3,
                    noise_target=2.0, min_samples=8, max_samples=32)  # fmt: skip
    rgba, counts = render_frame_counted(prepared, camera, settings)
    return hashlib.sha256(rgba.tobytes() + counts.tobytes()).hexdigest()


@pytest.mark.slow
def test_adaptive_render_is_the_same_on_three_threads_in_another_process():
    # numba's thread count is fixed per process: NUMBA_NUM_THREADS=3 deals the work items in
    # another pattern than this process's (even on a machine with fewer cores)
    here = Path(__file__).parent
    code = "from test_sampling_control import adaptive_digest; print(adaptive_digest())"
    env = {**os.environ, "NUMBA_NUM_THREADS": "3",
           "PYTHONPATH": os.pathsep.join([str(here), os.environ.get("PYTHONPATH", "")])}
    child = subprocess.run([sys.executable, "-c", code], env=env, capture_output=True,
                           text=True, check=True, cwd=here)  # fmt: skip
    assert child.stdout.strip().splitlines()[-1] == adaptive_digest()


def scene_and_camera():
    prepared = prepare_scene(sphere(rows=[diffuse(P_ROUGHNESS=0.3)]))
    camera = Camera(eye=(0, 1, 4), target=(0, 0, 0), up=(0, 1, 0), width=24, height=24)
    return prepared, camera


@pytest.mark.parametrize("samples", [1, 5, 16])
def test_forced_samples_give_exactly_n_per_pixel(samples):
    # the kernel counts the camera samples it traces into the debug buffer
    prepared, camera = scene_and_camera()
    settings = look(LIGHT, env=Environment(), ground="shadow_catcher", samples=samples)
    counts = render_frame_counted(prepared, camera, settings)[1]
    assert np.all(counts == samples)


def test_adaptive_reruns_are_bit_identical_on_one_and_two_threads():
    prepared, camera = scene_and_camera()
    settings = look(LIGHT, env=Environment(), ground="shadow_catcher", samples=0, seed=3,
                    noise_target=2.0, min_samples=8, max_samples=32)  # fmt: skip
    first, counts = render_frame_counted(prepared, camera, settings)
    again, counts_again = render_frame_counted(prepared, camera, settings)
    assert np.array_equal(first, again) and np.array_equal(counts, counts_again)
    assert counts.min() >= 8 and counts.max() <= 32 and len(np.unique(counts)) > 1
    threads = numba.get_num_threads()
    outcomes = []
    try:
        for n in (1, min(2, numba.config.NUMBA_NUM_THREADS)):
            numba.set_num_threads(n)
            outcomes.append(render_frame_counted(prepared, camera, settings))
    finally:
        numba.set_num_threads(threads)
    for rgba, used in outcomes:
        assert np.array_equal(rgba, first) and np.array_equal(used, counts)


ADAPTIVE = {"samples": 0, "noise_target": 1.0, "min_samples": 8, "max_samples": 64}


def test_adaptive_sets_combine_without_bias_in_the_furnace():
    # White furnace (common practice, e.g. Heitz et al. 2016 "Multiple-scattering microfacet
    # BSDFs", §6), as in test_shading: GGX single scattering of a white metal of roughness 0.2
    # keeps above 98 % facing the camera and never gains energy, whatever sets the pixels took.
    camera = ortho_camera(24)
    white = Environment(zenith=(1.0, 1.0, 1.0), horizon=(1.0, 1.0, 1.0), nadir=(1.0, 1.0, 1.0))
    row = material(P_METALLIC=1.0, P_ROUGHNESS=0.2)
    image, counts = render_frame_counted(prepare_scene(sphere(rows=[row])), camera,
                                         look(env=white, glossy_samples=8, **ADAPTIVE))  # fmt: skip
    x, y = pixel_centres(camera)
    facing = x * x + y * y < 0.8
    assert image[facing, 0].mean() > 0.98
    assert image[image[..., 3] > 0, 0].max() <= 1.0 + 1e-6
    assert counts.min() >= 8 and counts.max() <= 64


def test_adaptive_coverage_converges_on_an_edge():
    # as test_render's edge test: an edge through a pixel's centre covers half of its
    # symmetric tent filter, so alpha → 0.5 (the quad is unlit white: rgb == alpha)
    row = diffuse(P_UNLIT=1.0)
    half = render(quad(size=1.0, center=(0.625, 0, 0), rows=[row]), ortho_camera(8, 1.0),
                  look(**ADAPTIVE))  # fmt: skip
    edge = half[3:5, 4]
    assert np.allclose(edge[:, 3], 0.5, atol=0.03)
    np.testing.assert_allclose(edge[:, 0], edge[:, 3], rtol=1e-6)


def _sequence(kind, seed, n):
    from shots.kernels.sampling import sequence_point, sobol_point

    if kind == "camera":
        return np.array([sobol_point(i, seed) for i in range(n)])
    return np.array([sequence_point(1, i, seed) for i in range(n)])  # a hit's second ray


@pytest.mark.parametrize("kind", ["camera", "per-hit rays"])
@pytest.mark.parametrize("seed", [0, 12345, 0xDEADBEEF])
def test_sample_sequences_are_scrambled_0_2_sequences(kind, seed):
    # Sobol' 1967's first two dimensions form a (0, 2)-sequence in base 2: every aligned block
    # of 2^m points (the first 2^m, the next 2^m, ...) is a (0, m, 2)-net, one point in each
    # elementary interval [a/2^i, (a+1)/2^i) × [b/2^(m−i), (b+1)/2^(m−i)) (Niederreiter 1992,
    # "Random Number Generation and Quasi-Monte Carlo Methods", Def. 4.1 and §4.3); Owen
    # scrambling keeps the property (Owen 1995, "Randomly permuted (t,m,s)-nets and
    # (t,s)-sequences"). Independent jittered sets of 4 fail it from m = 3 on. The per-hit
    # rays' sequences shuffle the index by nested scrambling too (Burley 2020, §4), which maps
    # every aligned block of indices onto an aligned block, so the property holds for them.
    points = _sequence(kind, seed, 1024)
    assert np.all((points > 0.0) & (points < 1.0))
    for m in range(1, 11):
        for start in range(0, 1024, 1 << m):
            block = points[start : start + (1 << m)]
            for i in range(m + 1):
                cells = np.floor(block[:, 0] * (1 << i)) * (1 << (m - i)) + np.floor(
                    block[:, 1] * (1 << (m - i)))
                assert len(np.unique(cells)) == 1 << m, (m, start, i)
    other = _sequence(kind, seed + 1, 64)
    assert not np.allclose(other, points[:64])  # another pixel's seed: another scramble


def test_later_sets_fill_the_gaps_the_first_left():
    # The pixel's place of each camera sample follows its sample count over all sets, so two
    # sets of 4 are the first 8 points of one sequence, not two independent sets: the
    # 8 points then lie in 8 different cells of a 2 × 4 and a 4 × 2 grid (see above).
    from shots.kernels.camera_sample import sample_offset
    from shots.kernels.sampling import tent_warp

    seed, pixel = 7, 1234
    offsets = np.array([sample_offset(4, k, seed, pixel) for k in range(8)])
    # back through the tent warp (monotonic) to the unit square
    grid = np.linspace(0.0, 1.0, 200001)
    warped = np.array([tent_warp(u) for u in grid])
    unit = np.interp(offsets - 0.5, warped, grid)
    for nx, ny in ((2, 4), (4, 2), (8, 1), (1, 8)):
        cells = np.floor(unit[:, 0] * nx) * ny + np.floor(unit[:, 1] * ny)
        assert len(np.unique(cells)) == 8


def test_per_hit_sequences_do_not_move_in_step_with_the_camera_sample():
    # Two nested-scrambled copies of one sequence read at the same index are tied: scrambling
    # maps each half [0, ½) wholesale onto a half, so the light's u would sit in one half for
    # every sample in the left half of the pixel. The shuffled index (Burley 2020, §4) unties
    # them: the left half's samples reach both halves of the light about equally.
    from shots.kernels.sampling import sequence_point, sobol_point

    for seed in (3, 99, 2024):
        camera = np.array([sobol_point(i, seed) for i in range(256)])
        light = np.array([sequence_point(0, i, seed ^ 0xABCDEF) for i in range(256)])
        for axis in (0, 1):
            left = camera[:, axis] < 0.5
            for light_axis in (0, 1):
                share = np.mean(light[left, light_axis] < 0.5)
                assert 0.3 < share < 0.7, (seed, axis, light_axis, share)
