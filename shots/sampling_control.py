"""How many camera samples each pixel gets: a fixed count, or passes until a noise target is met.

Fixed count (``look.samples`` = N > 0)
    One stratified set of N samples per pixel: exact, for previews and references.
Adaptive (``look.samples`` = 0)
    Passes of ``PASS_SAMPLES`` samples, each pass one stratified set with the pass number folded
    into the seed (the contract in ``shots.kernels.image``). After ``min_samples`` a pixel's error
    is estimated from its own passes: the standard error of the mean from the variance of its pass
    means (each pass mean is an independent, unbiased estimate of the pixel, so this holds for
    the stratified estimator too; batch means, e.g. Law & Kelton, "Simulation Modeling and
    Analysis"), carried to 8-bit display codes through the display transform at the pixel's
    current mean (a central difference of ``shots.colour.to_display`` over ±1 standard error: the
    delta method with the curve's own slope). Alpha counts as a fourth channel (255 codes =
    fully opaque), so edges against a transparent background converge too.
    The decision is smoothed: a pixel goes on while its own error or the mean error variance of
    its 3 × 3 neighbourhood is above ``noise_target`` (few passes give few degrees of freedom, and
    a pixel whose passes agree by luck must not stop alone; Dammertz et al. 2010, "A Hierarchical
    Automatic Stopping Condition for Monte Carlo Global Illumination", judge blocks, not pixels,
    for the same reason). It stops at ``max_samples`` in any case.
All decisions are made here in numpy between passes, from values that depend only on the seed and
the pixel, so the image does not depend on the thread count.
"""

from __future__ import annotations

import math
from collections.abc import Callable

import numpy as np

from shots.colour import to_display
from shots.kernels.sampling import pcg_hash

PASS_SAMPLES = 4  # samples per pass: 2 × 2 strata; with the default 4 light and gloss samples
# per hit this keeps one shadow or glossy ray per hit (``spread_count``), as 16 fixed samples do
CODES = 255.0  # 8-bit display codes

# run_pass(samples, seed, active, out, counts): one stratified set in the active pixels
PassRunner = Callable[[int, int, np.ndarray, np.ndarray, np.ndarray], None]


def pass_seed(seed: int, index: int) -> int:
    """The seed of pass ``index``: the frame's own seed for the first pass (so a one-pass
    render equals a fixed-count render), a hash of (seed, index) for the others."""
    if index == 0:
        return seed & 0xFFFFFFFF
    return int(pcg_hash((seed ^ int(pcg_hash(index & 0xFFFFFFFF))) & 0xFFFFFFFF))


def pass_count(samples: int) -> int:
    """Passes that give at least ``samples`` samples (and at least two, for a variance)."""
    return max(2, math.ceil(samples / PASS_SAMPLES))


def render_fixed(run_pass: PassRunner, shape: tuple[int, int], samples: int, seed: int):
    """Exactly ``samples`` samples in every pixel, one stratified set.

    Returns (rgba (h, w, 4) float32 premultiplied linear, counts (h, w) int32).
    """
    out = np.zeros(shape + (4,), np.float32)
    counts = np.zeros(shape, np.int32)
    run_pass(samples, seed, np.ones(shape, np.uint8), out, counts)
    return out, counts


def render_adaptive(
    run_pass: PassRunner,
    shape: tuple[int, int],
    seed: int,
    noise_target: float,
    min_samples: int,
    max_samples: int,
    exposure: float = 0.0,
    tone_map: str = "neutral",
):
    """Passes until each pixel's estimated error is under ``noise_target`` display codes.

    Returns (rgba (h, w, 4) float32 premultiplied linear, counts (h, w) int32 samples per pixel).
    """
    first_check, last = pass_count(min_samples), max(pass_count(max_samples), pass_count(min_samples))
    active = np.ones(shape, np.uint8)
    out = np.zeros(shape + (4,), np.float32)
    counts = np.zeros(shape, np.int32)
    total = np.zeros(shape + (4,), np.float64)
    squares = np.zeros(shape + (4,), np.float64)
    error = np.zeros(shape, np.float64)
    for index in range(last):
        run_pass(PASS_SAMPLES, pass_seed(seed, index), active, out, counts)
        on = active.astype(bool)
        means = out[on].astype(np.float64)
        total[on] += means
        squares[on] += means * means
        if index + 1 < first_check:
            continue
        passes = index + 1  # every active pixel has taken every pass so far
        error[on] = display_error(total[on] / passes, squares[on] / passes, passes,
                                  exposure, tone_map)  # fmt: skip
        active[on & ~needs_more(error, noise_target)] = 0
        if not active.any():
            break
    passes = np.maximum(counts // PASS_SAMPLES, 1)[..., None]
    return (total / passes).astype(np.float32), counts


def standard_error(mean: np.ndarray, mean_square: np.ndarray, passes: int) -> np.ndarray:
    """Standard error of the mean of ``passes`` pass means, from their mean and mean square
    (sample variance with Bessel's correction, divided by the count)."""
    variance = np.maximum(mean_square - mean * mean, 0.0) * (passes / (passes - 1))
    return np.sqrt(variance / passes)


def display_error(
    mean: np.ndarray, mean_square: np.ndarray, passes: int, exposure: float, tone_map: str
) -> np.ndarray:
    """(n,) estimated error in 8-bit display codes of n pixels' (n, 4) premultiplied means.

    The largest of the colour channels as shown over black (display colour × alpha) and alpha.
    """
    se = standard_error(mean, mean_square, passes)
    high, low = mean.copy(), mean.copy()
    high[:, :3] += se[:, :3]
    low[:, :3] = np.maximum(low[:, :3] - se[:, :3], 0.0)
    both = np.stack([high, low], axis=1).astype(np.float32)  # (n, 2, 4): one "image" row each
    display = to_display(both, exposure, tone_map)
    shown = display[..., :3] * display[..., 3:]
    colour = 0.5 * np.abs(shown[:, 0] - shown[:, 1]).max(axis=1)
    return CODES * np.maximum(colour, se[:, 3])


def needs_more(error: np.ndarray, target: float) -> np.ndarray:
    """Where a pixel's own error or its 3 × 3 neighbourhood's RMS error exceeds ``target``."""
    square = error * error
    padded = np.pad(square, 1, mode="edge")
    h, w = square.shape
    pooled = sum(padded[dy : dy + h, dx : dx + w] for dy in range(3) for dx in range(3)) / 9.0
    return np.maximum(square, pooled) > target * target
