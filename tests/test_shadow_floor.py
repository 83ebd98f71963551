"""The shadow catcher's noise floor: faint speckle goes, the contact shadow and product stay."""

import numpy as np

from shots.render import SHADOW_NOISE_FLOOR, lift_shadow_noise_floor


def test_faint_shadow_is_removed_and_strong_shadow_rescaled():
    rgba = np.zeros((1, 4, 4), np.float32)
    rgba[0, 0, 3] = 0.5 * SHADOW_NOISE_FLOOR  # speckle on distant floor
    rgba[0, 1, 3] = 0.6  # contact shadow: black, partly opaque
    rgba[0, 2] = (0.01, 0.01, 0.01, 0.02)  # a product edge pixel (has colour): untouched
    rgba[0, 3] = (0.3, 0.2, 0.1, 1.0)  # product
    before = rgba.copy()
    lift_shadow_noise_floor(rgba)
    assert rgba[0, 0, 3] == 0.0
    expected = (0.6 - SHADOW_NOISE_FLOOR) / (1 - SHADOW_NOISE_FLOOR)
    assert np.isclose(rgba[0, 1, 3], expected)
    assert np.array_equal(rgba[0, 2:], before[0, 2:])
