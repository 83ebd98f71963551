"""Sampling control: the error estimate, the stop rule, forced counts, determinism."""

import numba
import numpy as np
import pytest
from scenes import diffuse, look, sphere

from shots.camera import Camera
from shots.look import Environment, Light
from shots.render import prepare_scene, render_frame_counted
from shots.sampling_control import (
    PASS_SAMPLES,
    display_error,
    needs_more,
    pass_seed,
    render_adaptive,
    standard_error,
)

LIGHT = Light("area", intensity=3.0, position=(1, 2, 2), direction=(-1, -2, -2),
              edge_u=(0.5, 0, 0), edge_v=(0, 0.5, 0))  # fmt: skip


def pass_statistics(samples: np.ndarray):
    """(mean, mean square, passes) of the pass means of (pixels, n) sample streams."""
    means = samples.reshape(len(samples), -1, PASS_SAMPLES).mean(axis=2)
    return means.mean(axis=1), (means * means).mean(axis=1), means.shape[1]


@pytest.mark.parametrize("n", [8, 16, 64])
def test_standard_error_of_known_streams_is_sigma_over_root_n(n):
    # Standard error of a mean of n independent samples is σ/√n, and the Bessel-corrected
    # variance is unbiased (any statistics text); here its mean over many pixels.
    sigma = 0.3
    rng = np.random.default_rng(n)
    streams = rng.normal(0.5, sigma, (40_000, n))
    se = standard_error(*pass_statistics(streams))
    passes = n // PASS_SAMPLES
    # the mean of s² over M pixels has relative spread sqrt(2 / ((passes − 1) M)) (chi-square)
    spread = np.sqrt(2.0 / ((passes - 1) * len(se)))
    assert abs(np.mean(se**2) / (sigma**2 / n) - 1.0) < 5 * spread


def test_display_error_follows_the_srgb_slope():
    # IEC 61966-2-1 §5.2: code = 255 (1.055 x^(1/2.4) − 0.055), slope 255·1.055/2.4·x^(1/2.4 − 1);
    # a small standard error maps to codes through that slope (no tone map, opaque pixel)
    x, se = 0.2, 1e-4
    mean = np.array([[x, x, x, 1.0]])
    passes = 2  # standard_error = sqrt((ms − m²) / (passes − 1)): pick ms so that it is se
    mean_square = mean * mean + se * se
    mean_square[:, 3] = 1.0
    error = display_error(mean, mean_square, passes, 0.0, "none")
    slope = 255.0 * 1.055 / 2.4 * x ** (1.0 / 2.4 - 1.0)
    assert error[0] == pytest.approx(slope * se, rel=1e-3)


def test_alpha_error_is_in_codes_of_coverage():
    mean = np.array([[0.0, 0.0, 0.0, 0.5]])  # black with half coverage: only alpha varies
    se = 0.01
    mean_square = mean * mean
    mean_square[:, 3] += se * se  # two passes: se² = ms − m²
    assert display_error(mean, mean_square, 2, 0.0, "none")[0] == pytest.approx(255 * se)


def test_a_lucky_pixel_does_not_stop_alone():
    error = np.full((5, 5), 3.0)
    error[2, 2] = 0.0  # its own passes agreed by chance
    assert needs_more(error, 1.0)[2, 2]
    assert not needs_more(np.full((5, 5), 0.5), 1.0).any()


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
    # a pixel stops once σ/√n is under the target: with σ = target·√32 that is n ≈ 32
    target = 1.0
    sigma = np.zeros((40, 40))
    sigma[:, 10:20] = target * np.sqrt(32)
    sigma[:, 20:] = 1000.0  # never meets the target
    rgba, counts = render_adaptive(synthetic_runner(sigma), sigma.shape, 5, target, 8, 128,
                                   0.0, "none")  # fmt: skip
    assert np.all(counts[:, :9] == 8)  # noiseless: the minimum
    assert np.all(counts[:, 21:] == 128)  # hopeless: the maximum
    middle = counts[:, 11:19]
    assert 24 <= np.median(middle) <= 48
    # the error left is about the target (one standard error)
    left = 255.0 * (rgba[:, 11:19, 3] - 0.5)
    assert 0.5 * target < np.sqrt(np.mean(left**2)) < 1.5 * target
    assert np.all(counts % PASS_SAMPLES == 0)


def test_pass_seeds_differ_and_the_first_is_the_frame_seed():
    assert pass_seed(7, 0) == 7
    seeds = {pass_seed(7, k) for k in range(64)}
    assert len(seeds) == 64 and all(0 <= s < 2**32 for s in seeds)


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
