"""Smoothing of the shadow catcher's floor (shots.contact_shadow), against textbook statistics.

Source: Bienaymé's formula (1853): the variance of a sum of uncorrelated values is the sum of
their variances, so a weighted mean of independent values of equal variance σ² has variance
σ²·Σw² / (Σw)².
"""

import numpy as np

from shots import contact_shadow
from shots.sampling_control import display_error, shadow_scales


def test_noise_scale_is_the_weighted_mean_formula_and_holds_on_independent_noise():
    w = contact_shadow.kernel()
    assert w.shape == (2 * contact_shadow.RADIUS + 1,) * 2 and w.max() == 1.0
    assert np.isclose(contact_shadow.noise_scale(), np.sqrt((w**2).sum()) / w.sum())
    # A flat shadow (alpha 0.4) with independent noise of σ = 0.05 in every pixel: inner pixels'
    # spread after smoothing is σ times the scale (within the 2 % a 200 × 200 sample allows).
    rng = np.random.default_rng(3)
    rgba = np.zeros((200, 200, 4), np.float32)
    rgba[..., 3] = 0.4 + rng.normal(0.0, 0.05, (200, 200))
    contact_shadow.smooth_floor(rgba)
    inner = rgba[10:-10, 10:-10, 3]
    assert abs(inner.mean() - 0.4) < 1e-3
    assert abs(inner.std() / 0.05 - contact_shadow.noise_scale()) < 0.02 * contact_shadow.noise_scale()


def test_product_pixels_never_bleed_into_the_floor_and_stay_as_traced():
    rgba = np.zeros((9, 9, 4), np.float32)
    rgba[..., 3] = 0.3  # a flat shadow...
    rgba[:, 5:] = (0.5, 0.4, 0.3, 1.0)  # ...beside the product (colour, opaque)
    rgba[4, 4] = (0.01, 0.0, 0.0, 0.2)  # an outline pixel: it has colour, so it is product
    rng = np.random.default_rng(1)
    rgba[:, :5, 3] += rng.normal(0.0, 0.01, (9, 5)).astype(np.float32)  # a little noise
    rgba[4, 4, 3] = 0.2
    before = rgba.copy()
    contact_shadow.smooth_floor(rgba)
    product = ~contact_shadow.floor_pixels(before)
    assert np.array_equal(rgba[product], before[product])
    assert np.array_equal(rgba[..., :3], before[..., :3])
    # The floor within RADIUS of the product keeps its traced values (the contact shadow is
    # narrowest there); the rest averages floor pixels only: about 0.3 beside alpha 1.
    written = contact_shadow.smoothed_pixels(before)
    assert written[:, 0].all() and not written[:, 3:].any() and not written[2:7, 2].any()
    assert np.array_equal(rgba[~written], before[~written])
    assert not np.array_equal(rgba[written], before[written])
    assert np.allclose(rgba[written][:, 3], 0.3, atol=0.01)


def test_a_step_in_the_shadow_is_softened_by_the_kernel_and_no_further():
    rgba = np.zeros((1, 12, 4), np.float32)
    rgba[0, 6:, 3] = 1.0  # a hard shadow edge along a row
    contact_shadow.smooth_floor(rgba)
    alpha = rgba[0, :, 3]
    # Further than RADIUS from the step, nothing changes; at it, the Gaussian's partial sums.
    assert np.all(alpha[: 6 - contact_shadow.RADIUS] == 0.0)
    assert np.all(alpha[6 + contact_shadow.RADIUS :] == 1.0)
    line = np.exp(-0.5 * (np.arange(-2, 3) / contact_shadow.SIGMA) ** 2)
    assert np.isclose(alpha[5], line[3:].sum() / line.sum(), atol=1e-6)


def test_the_sampler_counts_the_smoothing_in_a_shadow_pixels_error():
    # A pure-shadow pixel (black, alpha 0.5) with standard error 0.02 in alpha: its error in
    # codes scales by the smoothing's factor; a product pixel's does not.
    mean = np.array([[0.0, 0.0, 0.0, 0.5], [0.2, 0.2, 0.2, 1.0]])
    se = np.array([[0.0, 0.0, 0.0, 0.02], [0.0, 0.0, 0.0, 0.02]])
    plain = display_error(mean, se, 0.0, "neutral", 0.05)
    smoothed = display_error(mean, se, 0.0, "neutral", 0.05, 0.3)
    assert np.isclose(smoothed[0], 0.3 * plain[0], rtol=1e-3)
    assert smoothed[1] == plain[1]


def test_the_sampler_lets_only_the_smoothed_pixels_stop_early():
    total = np.zeros((7, 7, 4))
    total[3, 3] = (0.5, 0.5, 0.5, 1.0)  # one product pixel in a floor
    scales = shadow_scales(total, np.ones((7, 7), np.int32))
    far = contact_shadow.smoothed_pixels(total)
    assert far.sum() == 49 - 25
    assert np.all(scales[far] == contact_shadow.stop_scale()) and np.all(scales[~far] == 1.0)
