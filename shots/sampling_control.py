"""How many camera samples each pixel gets: a fixed count, or passes until a noise target is met.

Fixed count (``look.samples`` = N > 0)
    One stratified set of N samples per pixel: exact, for previews and references.
Adaptive (``look.samples`` = 0)
    Every pixel first takes two sets of ``PILOT_SAMPLES``; then, in rounds, each pixel still
    short of its target takes one more set as large as all its earlier ones (``next_set_size``).
    Each set has the set number folded into the seed (the
    contract in ``shots.kernels.image``), except for the samples' 2-D numbers (place in the
    pixel, light, environment and lobe directions): they continue the pixel's own scrambled
    Sobol' sequences over all its sets, so each set fills the gaps the earlier ones left.
    The error estimate comes from the pixel's own sets: the per-sample variance from the spread
    of its set means (the between-groups mean square of a one-way analysis of variance: each set
    mean is an unbiased estimate of the pixel, so the estimate is valid, if conservative, for
    stratified sets; sets that fill each other's gaps in the pixel vary more among themselves
    than their combined mean does, which only adds to that margin), divided by the sample
    count for the standard error of the mean; carried to 8-bit display codes through the
    display transform at the pixel's current mean (a central difference of
    ``shots.colour.to_display`` over ±1 standard error: the delta method with the curve's own
    slope), as the root mean square over red, green and blue: the error bench/quality.py
    measures against a reference (the largest channel instead cost 3–12 % more CPU on the
    demo thumbnails for errors already under the target). Alpha counts as a fourth channel
    (255 codes = fully opaque), so edges against a transparent background converge too. The error falls as 1/√n, so a pixel with error e
    after n samples needs n·(e / target)².
    The decision is smoothed: a pixel goes on while its own error or the mean error variance of
    its 3 × 3 neighbourhood is above ``noise_target`` (two sets give one degree of freedom, and
    a pixel whose sets agree by luck must not stop alone; Dammertz et al. 2010, "A Hierarchical
    Automatic Stopping Condition for Monte Carlo Global Illumination", judge blocks, not pixels,
    for the same reason). It stops at ``max_samples`` in any case.
All decisions are made here in numpy between passes, from values that depend only on the seed and
the pixel, so the image does not depend on the thread count.
"""

from __future__ import annotations

from collections.abc import Callable

import numpy as np

from shots import contact_shadow
from shots.colour import to_display
from shots.kernels.sampling import pcg_hash

PILOT_SAMPLES = 4  # the first two sets: 2 × 2 strata each; with the default 4 light and gloss
# samples per hit every set keeps one shadow or glossy ray per hit (``spread_count``)
CODES = 255.0  # 8-bit display codes

# run_pass(samples, seed, active, out, counts): one stratified set in the active pixels
PassRunner = Callable[[int, int, np.ndarray, np.ndarray, np.ndarray], None]


def pass_seed(seed: int, index: int) -> int:
    """The seed of set ``index``: the frame's own seed for the first set (so a one-set render
    equals a fixed-count render), a hash of (seed, index) for the others."""
    if index == 0:
        return seed & 0xFFFFFFFF
    return int(pcg_hash((seed ^ int(pcg_hash(index & 0xFFFFFFFF))) & 0xFFFFFFFF))


def render_fixed(run_pass: PassRunner, shape: tuple[int, int], samples: int, seed: int):
    """Exactly ``samples`` samples in every pixel, one stratified set.

    Returns (rgba (h, w, 4) float32 premultiplied linear, counts (h, w) int32).
    """
    out = np.zeros(shape + (4,), np.float32)
    counts = np.zeros(shape, np.int32)
    run_pass(samples, seed, np.ones(shape, np.uint8), out, counts)
    return out, counts


class SetSums:
    """Per pixel: Σ n_k·m_k and Σ n_k·m_k² over its sets (n_k samples, mean m_k), and the count
    of sets; the samples are the kernel's counts."""

    def __init__(self, shape: tuple[int, int]):
        self.total = np.zeros(shape + (4,), np.float64)
        self.squares = np.zeros(shape + (4,), np.float64)
        self.sets = np.zeros(shape, np.int32)

    def add(self, on: np.ndarray, size: int, means: np.ndarray) -> None:
        means = means.astype(np.float64)
        self.total[on] += size * means
        self.squares[on] += size * means * means
        self.sets[on] += 1


def render_adaptive(
    run_pass: PassRunner,
    shape: tuple[int, int],
    seed: int,
    noise_target: float,
    min_samples: int,
    max_samples: int,
    exposure: float = 0.0,
    tone_map: str = "neutral",
    shadow_floor: float = 0.0,
    variance_out: np.ndarray | None = None,
    smooth_shadow: bool = False,
):
    """Stratified sets until each pixel's estimated error is under ``noise_target`` codes.

    ``shadow_floor``: the shadow-catcher alpha that ``shots.render.lift_shadow_noise_floor`` will
    remove from pure-shadow pixels (0 without a catcher); error below it is not shown.
    ``smooth_shadow``: smooth the shadow catcher's floor at the end (``shots.contact_shadow``),
    and let the pixels it smooths stop at the error smoothing will bring under the target.
    ``variance_out``: an (h, w, 4) float64 array to receive the estimated variance of each
    pixel's mean (its standard error squared, per channel), for the denoiser.

    Returns (rgba (h, w, 4) float32 premultiplied linear, counts (h, w) int32 samples per pixel).
    """
    active = np.ones(shape, np.uint8)
    out = np.zeros(shape + (4,), np.float32)
    counts = np.zeros(shape, np.int32)
    sums = SetSums(shape)
    error = np.zeros(shape, np.float64)
    index = 0
    plan = np.full(shape, PILOT_SAMPLES, np.int32)
    while active.any():
        for size in np.unique(plan[active.astype(bool)]):
            chosen = (active != 0) & (plan == size)
            run_pass(int(size), pass_seed(seed, index), chosen.astype(np.uint8), out, counts)
            sums.add(chosen, int(size), out[chosen])
            index += 1
        on = (active != 0) & (sums.sets >= 2)
        n = counts[on].astype(np.float64)[:, None]
        mean = sums.total[on] / n
        se = standard_error(sums.total[on], sums.squares[on], n, sums.sets[on][:, None])
        noisy = se.max(axis=1) > 0.0  # the rest (empty background, most of a frame) shows none
        found = np.zeros(len(se))
        scale = shadow_scales(sums.total, counts)[on][noisy] if smooth_shadow else 1.0
        found[noisy] = display_error(mean[noisy], se[noisy], exposure, tone_map, shadow_floor,
                                     scale)  # fmt: skip
        error[on] = found
        needed = np.where(on, np.ceil(counts * smoothed_square(error) / noise_target**2), 0)
        needed = np.clip(np.maximum(needed, min_samples), 0, max_samples)
        plan = np.where(sums.sets < 2, PILOT_SAMPLES,
                        next_set_size(counts, needed - counts, max_samples - counts))
        active &= (plan > 0).astype(np.uint8)
    if variance_out is not None:
        n = np.maximum(counts, 1).astype(np.float64)[..., None]
        sets = np.maximum(sums.sets, 2)[..., None]
        variance_out[...] = standard_error(sums.total, sums.squares, n, sets) ** 2
    rgba = (sums.total / np.maximum(counts, 1)[..., None]).astype(np.float32)
    if smooth_shadow:
        contact_shadow.smooth_floor(rgba)
    return rgba, counts


def shadow_scales(total: np.ndarray, counts: np.ndarray) -> np.ndarray:
    """(h, w) factor on each pixel's standard error for the decision to stop: ``stop_scale``
    where the floor will be smoothed, 1 elsewhere."""
    mean = total / np.maximum(counts, 1)[..., None]
    smoothed = contact_shadow.smoothed_pixels(mean)
    return np.where(smoothed, contact_shadow.stop_scale(), 1.0)


def next_set_size(counts: np.ndarray, short: np.ndarray, room: np.ndarray) -> np.ndarray:
    """The next set of a pixel still ``short`` of samples: as many as it has, within ``room``
    (0 when nothing is short or there is no room for two).

    Doubling the count means a pixel stops on a whole block of 2^m points of its Sobol'
    sequence, a (0, m, 2)-net (Niederreiter 1992), where the sequence is at its most even
    (measured on the stool's lacquered seat: 1.73 codes of noise at 64 samples against 2.07 at
    61), and a frame takes a few passes (5 on the stool's hero instead of 40: each pass
    costs a round of numpy work on the whole frame)."""
    size = np.minimum(counts, room)
    return np.where((short > 0) & (size >= 2), size, 0).astype(np.int32)


def standard_error(total, squares, samples, sets) -> np.ndarray:
    """Standard error of a pixel's mean from its sets' sums (see ``SetSums``).

    The per-sample variance is the between-sets mean square Σ n_k (m_k − m)² / (K − 1) =
    (Σ n_k m_k² − n m²) / (K − 1); the standard error is √(variance / n).
    """
    mean = total / samples
    variance = np.maximum(squares - samples * mean * mean, 0.0) / (sets - 1)
    return np.sqrt(variance / samples)


def display_error(
    mean: np.ndarray,
    se: np.ndarray,
    exposure: float,
    tone_map: str,
    shadow_floor: float = 0.0,
    shadow_scale: np.ndarray | float = 1.0,
) -> np.ndarray:
    """(n,) estimated error in 8-bit display codes of n pixels' (n, 4) premultiplied means with
    standard errors ``se``: the larger of the colour's error as shown over black (display
    colour × alpha; root mean square over red, green and blue, as bench/quality.py measures)
    and alpha (of a colourless pixel, after the shadow floor is lifted and the floor smoothed,
    which scales its standard error by ``shadow_scale``: one factor, or (n,))."""
    high, low = mean.copy(), mean.copy()
    high[:, :3] += se[:, :3]
    low[:, :3] = np.maximum(low[:, :3] - se[:, :3], 0.0)
    both = np.stack([high, low], axis=1).astype(np.float32)  # (n, 2, 4): one "image" row each
    display = to_display(both, exposure, tone_map)
    shown = display[..., :3] * display[..., 3:]
    colour = 0.5 * np.sqrt(np.mean((shown[:, 0] - shown[:, 1]) ** 2, axis=1))
    alpha = se[:, 3].copy()
    if shadow_floor > 0.0:
        shadow = mean[:, :3].max(axis=1) <= 0.0
        scale = np.broadcast_to(shadow_scale, shadow.shape)[shadow]
        a, d = mean[shadow, 3], scale * se[shadow, 3]
        alpha[shadow] = 0.5 * (lift(a + d, shadow_floor) - lift(a - d, shadow_floor))
    return CODES * np.maximum(colour, alpha)


def lift(alpha: np.ndarray, floor: float) -> np.ndarray:
    """Shadow-catcher alpha after its noise floor is removed (as ``lift_shadow_noise_floor``)."""
    return np.clip((alpha - floor) / (1.0 - floor), 0.0, 1.0)


def smoothed_square(error: np.ndarray) -> np.ndarray:
    """The larger of a pixel's squared error and the mean over its 3 × 3 neighbourhood."""
    square = error * error
    padded = np.pad(square, 1, mode="edge")
    h, w = square.shape
    pooled = sum(padded[dy : dy + h, dx : dx + w] for dy in range(3) for dx in range(3)) / 9.0
    return np.maximum(square, pooled)
