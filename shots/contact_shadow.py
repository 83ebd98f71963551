"""Smoothing of the shadow on a shadow catcher, which lets the adaptive sampler stop its pixels early.

    stop = smoothed_pixels(rgba)         # the floor pixels smoothing will write
    scale = stop_scale()                 # what the sampler multiplies their error by
    smooth_floor(rgba)                   # in place, after the adaptive passes

Over a transparent background a shadow catcher's pixels are black and carry one number, the
shadow's opacity (alpha), and it changes slowly across the floor: soft lights and contact
occlusion that fades over centimetres, many pixels at catalog sizes. Averaging neighbouring
pixels is then much cheaper than tracing more samples in each; before it, the contact shadow took
about 40 % of the samples of a chair's or a sofa's thumbnail (12 % of the pixels, most at the
sample cap). Each pixel scrambles its own sample sequence, so neighbours' errors are independent
and a normalised weighted mean with weights w divides the standard error by
Σw / √(Σw²) (Bienaymé's formula for the variance of a sum of uncorrelated values).

The weights are a Gaussian of σ = SIGMA pixels over a (2·RADIUS + 1)² window, renormalised over
the floor pixels in it, so the product (any pixel with colour, its anti-aliased outline included)
never bleeds into its shadow, and the floor right beside the product is left as traced
(``smoothed_pixels``). Only the adaptive sampler smooths: a fixed sample count
(``--samples N``, previews and references) keeps every pixel as traced.
"""

from __future__ import annotations

import numpy as np

SIGMA = 1.0  # pixels; a contact shadow's steepest edge spans several
RADIUS = 2  # 5 × 5 window: beyond 2σ the weights are under 14 % of the centre's


def kernel() -> np.ndarray:
    """(2·RADIUS + 1)² Gaussian weights, centre 1."""
    offsets = np.arange(-RADIUS, RADIUS + 1, dtype=np.float64)
    line = np.exp(-0.5 * (offsets / SIGMA) ** 2)
    return np.outer(line, line)


def noise_scale() -> float:
    """Factor by which smoothing scales an inner floor pixel's standard error: √(Σw²) / Σw."""
    w = kernel()
    return float(np.sqrt((w * w).sum()) / w.sum())


def stop_scale() -> float:
    """The factor the adaptive sampler applies to a smoothed pixel's standard error when it
    decides whether the pixel may stop: twice ``noise_scale``, so the smoothed floor ends at
    about half the noise target. Smoothing turns fine grain into blotches a few pixels wide,
    which show more than grain of the same size in codes (seen at 100 % on the chair's
    thumbnail: at the full factor its shadow was mottled, at twice it is as clean as unsmoothed
    sampling to the target)."""
    return 2.0 * noise_scale()


def floor_pixels(rgba: np.ndarray) -> np.ndarray:
    """(h, w) bool: pixels with no colour (shadow-catcher floor, shadowed or not, and empty
    background), the ones smoothing reads."""
    return rgba[..., :3].max(axis=-1) <= 0.0


def smoothed_pixels(rgba: np.ndarray) -> np.ndarray:
    """(h, w) bool: the floor pixels smoothing writes, those with no coloured pixel within RADIUS
    (in x and y). The contact shadow is darkest and narrowest right at the product's foot (a
    ring a pixel or two wide round the floor lamp's base at 256 px), where averaging with the
    lighter floor beyond would wash it out; there the sampler traces to the plain target."""
    return _far_from_colour(floor_pixels(rgba))


def _far_from_colour(floor: np.ndarray) -> np.ndarray:
    coloured = np.pad(~floor, RADIUS)
    h, w = floor.shape
    near = np.zeros((h, w), bool)
    for dy in range(2 * RADIUS + 1):
        for dx in range(2 * RADIUS + 1):
            near |= coloured[dy : dy + h, dx : dx + w]
    return ~near


def smooth_floor(rgba: np.ndarray) -> None:
    """Replace the alpha of the ``smoothed_pixels`` by the Gaussian-weighted mean of the floor
    pixels around them (in place; colour and every other pixel are left alone)."""
    floor = floor_pixels(rgba)
    written = _far_from_colour(floor)
    if not written.any():
        return
    h, w = floor.shape
    pad = ((RADIUS, RADIUS), (RADIUS, RADIUS))
    weights = np.pad(floor.astype(np.float64), pad)
    alpha = np.pad(np.where(floor, rgba[..., 3], 0.0).astype(np.float64), pad)
    total = np.zeros((h, w))
    norm = np.zeros((h, w))
    for (dy, dx), k in np.ndenumerate(kernel()):
        total += k * alpha[dy : dy + h, dx : dx + w]
        norm += k * weights[dy : dy + h, dx : dx + w]
    rgba[..., 3][written] = (total[written] / norm[written]).astype(rgba.dtype)
