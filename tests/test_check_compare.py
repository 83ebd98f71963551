"""The measures that compare a render with its approved image: CIEDE2000 against the published
test data, SSIM and CIELAB against scikit-image (an independent implementation)."""

import numpy as np
import pytest
from scipy.ndimage import gaussian_filter
from skimage.color import rgb2lab
from skimage.metrics import structural_similarity

from shots.check.compare import (
    ciede2000,
    compare_images,
    difference_picture,
    gaussian_blur,
    srgb_to_lab,
    ssim,
)
from shots.presets import CheckSettings

# Sharma, Wu & Dalal (2005), "The CIEDE2000 color-difference formula: implementation notes,
# supplementary test data, and mathematical observations", Table 1: pairs 1–10, 13, 14, 17, 34
# (L*a*b* of both colours and ΔE00 to four decimals). They exercise the hue-mean and hue-
# difference branches around 180° and the achromatic (zero chroma) cases.
SHARMA_PAIRS = [
    ((50.0000, 2.6772, -79.7751), (50.0000, 0.0000, -82.7485), 2.0425),
    ((50.0000, 3.1571, -77.2803), (50.0000, 0.0000, -82.7485), 2.8615),
    ((50.0000, 2.8361, -74.0200), (50.0000, 0.0000, -82.7485), 3.4412),
    ((50.0000, -1.3802, -84.2814), (50.0000, 0.0000, -82.7485), 1.0000),
    ((50.0000, -1.1848, -84.8006), (50.0000, 0.0000, -82.7485), 1.0000),
    ((50.0000, -0.9009, -85.5211), (50.0000, 0.0000, -82.7485), 1.0000),
    ((50.0000, 0.0000, 0.0000), (50.0000, -1.0000, 2.0000), 2.3669),
    ((50.0000, -1.0000, 2.0000), (50.0000, 0.0000, 0.0000), 2.3669),
    ((50.0000, 2.4900, -0.0010), (50.0000, -2.4900, 0.0009), 7.1792),
    ((50.0000, 2.4900, -0.0010), (50.0000, -2.4900, 0.0011), 7.2195),
    ((50.0000, 2.5000, 0.0000), (50.0000, 0.0000, -2.5000), 4.3065),
    ((50.0000, 2.5000, 0.0000), (73.0000, 25.0000, -18.0000), 27.1492),
    ((60.2574, -34.0099, 36.2677), (60.4626, -34.1751, 39.4387), 1.2644),
    ((2.0776, 0.0795, -1.1350), (0.9033, -0.0636, -0.5514), 0.9082),
]


def test_ciede2000_matches_the_published_test_data():
    first = np.array([pair[0] for pair in SHARMA_PAIRS])
    second = np.array([pair[1] for pair in SHARMA_PAIRS])
    expected = np.array([pair[2] for pair in SHARMA_PAIRS])
    np.testing.assert_allclose(ciede2000(first, second), expected, atol=5e-5)
    # The formula is symmetric in its two colours (Sharma et al. 2005, §3).
    np.testing.assert_allclose(ciede2000(second, first), expected, atol=5e-5)
    assert ciede2000(first, first).max() == 0.0


def smooth_pair(seed=1, shape=(40, 52), noise=0.05):
    rng = np.random.default_rng(seed)
    x = gaussian_filter(rng.random(shape), 2.0)
    return x, np.clip(x + noise * rng.standard_normal(shape), 0.0, 1.0)


@pytest.mark.parametrize("noise", [0.0, 0.02, 0.1])
def test_ssim_matches_scikit_image(noise):
    # scikit-image with the settings of Wang et al. (2004): Gaussian weights of σ = 1.5,
    # population covariances, K1 = 0.01, K2 = 0.03 (its defaults), data range 1.
    x, y = smooth_pair(noise=noise)
    reference = structural_similarity(x, y, gaussian_weights=True, sigma=1.5,
                                      use_sample_covariance=False, data_range=1.0)
    assert ssim(x, y) == pytest.approx(reference, abs=1e-12)


def test_gaussian_window_matches_scipy():
    x, _ = smooth_pair()
    # scipy's mirror at the edge ("reflect") and 3.5 σ of taps: the 11-tap window of Wang et al.
    np.testing.assert_allclose(gaussian_blur(x), gaussian_filter(x, 1.5, truncate=3.5),
                               atol=1e-14)


def test_cielab_matches_scikit_image():
    colours = np.random.default_rng(2).random((6, 7, 3))
    # scikit-image rounds the D65 white differently (0.95047, 1, 1.08883): a few hundredths.
    np.testing.assert_allclose(srgb_to_lab(colours), rgb2lab(colours), atol=0.05)
    np.testing.assert_allclose(srgb_to_lab(np.ones(3)), (100.0, 0.0, 0.0), atol=1e-3)


def disc(shift=0.0, colour=(0.6, 0.4, 0.3), size=64) -> np.ndarray:
    y, x = np.mgrid[:size, :size] + 0.5
    rgba = np.zeros((size, size, 4))
    inside = (x - size / 2 - shift) ** 2 + (y - size / 2) ** 2 < (size / 4) ** 2
    rgba[inside] = (*colour, 1.0)
    return rgba


def test_a_moved_shape_is_flagged_and_drawn():
    limits = CheckSettings()
    same = compare_images(disc(), disc(), limits)
    assert same.ssim == pytest.approx(1.0) and same.changed_share == 0.0
    assert same.reasons(limits) == []
    moved = compare_images(disc(shift=4), disc(), limits)
    assert moved.ssim < limits.ssim and moved.changed_share > limits.changed_share
    assert len(moved.reasons(limits)) == 2
    picture = difference_picture(disc(shift=4), moved, limits)
    assert picture.shape == (64, 64, 4) and picture.dtype == np.uint8
    # The leading edge of the moved disc (to the right) is painted; the far corner is not.
    painted = np.abs(picture[..., :3].astype(int) - picture[0, 0, :3]).sum(axis=2) > 30
    assert painted[32, 32 + 16 + 2] and not painted[2, 2]


def test_a_slight_colour_shift_is_within_the_colour_tolerance():
    limits = CheckSettings()
    # 2 % more red on a terracotta disc: a ΔE00 of about 1, well below the default 5.
    shifted = compare_images(disc(colour=(0.612, 0.4, 0.3)), disc(), limits)
    assert 0.3 < shifted.largest_delta_e < limits.delta_e
    assert shifted.reasons(limits) == []
