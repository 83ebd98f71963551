"""Edge-aware denoising of a rendered frame, guided by its first surfaces (``[image] denoise``).

    rgba = denoise(rgba, first_surfaces(prepared, camera), variance)

The filter is the edge-avoiding à-trous wavelet transform of Dammertz et al. 2010 ("Edge-Avoiding
À-Trous Wavelet Transform for fast Global Illumination Filtering", HPG 2010): five passes of the
5 × 5 cubic B-spline kernel (1/16, 1/4, 3/8, 1/4, 1/16) with holes of 1, 2, 4, 8 and 16 pixels
between its taps, each tap weighted down where it crosses an edge. The edge-stopping functions
are those of Schied et al. 2017 ("Spatiotemporal Variance-Guided Filtering", HPG 2017):

- normal: max(0, n·n')^σn with σn = 128;
- depth: exp(−|z − z'| / (σz · |∇z| · step · |offset| + ε)) with σz = 1, |∇z| the larger of the
  pixel's screen-space depth differences;
- luminance: exp(−|l − l'| / (σl · √g(var) + ε)) with σl = 2, var the variance of the pixel's
  luminance after a 3 × 3 Gaussian g; each pass carries the variance through its own weights
  (Σ w² var / (Σ w)²), as Schied et al. do.

What is filtered is the illumination: the colour divided by the first surface's albedo (averaged
over the pixel filter, ``shots.albedo.footprint_albedo``), filtered, then multiplied back (the
demodulation of Schied et al. 2017), so texture edges stay as sharp as the render shows them.
Only the product's matte inner pixels take part: metals, smooth or clear-coated lacquer, glass,
glowing and partly covered surfaces, the background, the floor and the anti-aliased outline (a
pixel with a neighbour outside that set) keep their rendered values bit for bit, and alpha is
never changed.

The variance is the adaptive sampler's own estimate of each pixel's error
(``shots.sampling_control``); a fixed-count render has none, so it is estimated from the
neighbourhood, as Schied et al. do for a pixel without temporal history.
"""

from __future__ import annotations

import numpy as np

from shots.albedo import FirstSurfaces, inner_pixels
from shots.colour import LUMA_709

PASSES = 5  # hole spacing 1, 2, 4, 8, 16 pixels
SPLINE = np.array([1 / 16, 1 / 4, 3 / 8, 1 / 4, 1 / 16])  # Dammertz et al. 2010: the à-trous kernel
SIGMA_NORMAL = 128  # Schied et al. 2017
SQUARINGS = 7  # 2^7 = SIGMA_NORMAL
SIGMA_DEPTH = 1.0
# Schied et al. use 4; 2 measured better on the demo bookcase's filtered pixels (RMSE in codes at
# 16 spp 3.60 against 4.08, adaptive 2.09 against 2.13) and the same on the chair.
SIGMA_LUMA = 2.0
ALBEDO_FLOOR = 0.02  # darker albedo channels demodulate by this (no division by zero)
TINY = 1e-10
# The filtered pixels keep the look's noise target. A looser one was measured with
# bench/quality.py --quick (demo thumbnails at 256 px; RMSE in codes, default → denoised): at 2×
# the table 2.25 → 2.59 and the sofa 2.29 → 2.77 lose more to the fewer samples than the filter
# wins back (total CPU −4 %); at 1.5× still 2.44 and 2.51; at 1× every model gains or keeps its
# error (worst 3.22 → 2.65) for 7-9 % more CPU.
GAUSS3 = np.array([1 / 4, 1 / 2, 1 / 4])  # the 3 × 3 Gaussian that steadies the variance


def filterable(surfaces: FirstSurfaces) -> np.ndarray:
    """(h, w) bool: the pixels the filter reads and writes: the product's matte surfaces, without
    the pixels next to anything else (its outline, a metal part, a miss)."""
    return inner_pixels(~surfaces.sharp)


def denoise(rgba: np.ndarray, surfaces: FirstSurfaces, variance: np.ndarray | None = None):
    """Filter the illumination of a frame's matte product pixels.

    Parameters
    ----------
    rgba : (h, w, 4) float32 premultiplied linear render.
    surfaces : its guide buffers (``shots.albedo.first_surfaces`` with the frame's camera).
    variance : (h, w, 4) variance of each pixel's mean (``render_adaptive``'s ``variance_out``),
        or None to estimate it from the neighbourhood.

    Returns
    -------
    (h, w, 4) float32: a copy with the filterable pixels' colour replaced.
    """
    out = np.array(rgba, np.float32, copy=True)
    mask = filterable(surfaces)
    if not mask.any():
        return out
    rows, cols = np.nonzero(mask)
    box = (slice(rows.min(), rows.max() + 1), slice(cols.min(), cols.max() + 1))
    m = mask[box]
    albedo = np.maximum(surfaces.albedo[box], ALBEDO_FLOOR).astype(np.float32)
    illumination = np.where(m[..., None], out[box][..., :3] / albedo, 0.0).astype(np.float32)
    normal = surfaces.normal[box].astype(np.float32)
    depth = np.where(m, surfaces.depth[box], 0.0).astype(np.float32)
    luma = (illumination @ LUMA_709.astype(np.float32)).astype(np.float32)
    if variance is None:
        var = neighbourhood_variance(luma, normal, m)
    else:
        weights = (LUMA_709**2).astype(np.float32) / (albedo * albedo)
        var = np.where(m, np.sum(variance[box][..., :3] * weights, axis=-1), 0.0)
    var = var.astype(np.float32)
    slope = depth_slope(depth, m)
    for level in range(PASSES):
        illumination, var = atrous_pass(illumination, var, normal, depth, slope, m, 1 << level)
    filtered = illumination * albedo
    region = out[box]
    region[..., :3] = np.where(m[..., None], filtered, region[..., :3])
    return out


def atrous_pass(illumination, var, normal, depth, slope, mask, step: int):
    """One à-trous pass with holes of ``step`` pixels: (illumination, variance) filtered."""
    h, w = mask.shape
    reach = 2 * step
    pad = ((reach, reach), (reach, reach))
    p_ill = np.pad(illumination, pad + ((0, 0),))
    p_var = np.pad(var, pad)
    p_normal = np.pad(normal, pad + ((0, 0),))
    p_depth = np.pad(depth, pad)
    p_mask = np.pad(mask, pad)
    luma = illumination @ LUMA_709.astype(np.float32)
    p_luma = np.pad(luma, pad)
    phi_luma = SIGMA_LUMA * np.sqrt(np.maximum(blur3(var, mask), 0.0)) + TINY
    total = np.zeros_like(illumination)
    weight_sum = np.zeros_like(var)
    var_sum = np.zeros_like(var)
    for j in range(5):
        for i in range(5):
            dy, dx = (j - 2) * step, (i - 2) * step
            window = (slice(reach + dy, reach + dy + h), slice(reach + dx, reach + dx + w))
            w_normal = normal_weight(normal, p_normal[window])
            phi_depth = slope * float(SIGMA_DEPTH * np.hypot(dx, dy)) + TINY
            exponent = np.abs(depth - p_depth[window]) / phi_depth
            exponent += np.abs(luma - p_luma[window]) / phi_luma
            weight = float(SPLINE[j] * SPLINE[i]) * w_normal * np.exp(-exponent) * p_mask[window]
            total += weight[..., None] * p_ill[window]
            weight_sum += weight
            var_sum += weight * weight * p_var[window]
    norm = np.maximum(weight_sum, TINY)
    keep = mask[..., None]
    return (np.where(keep, total / norm[..., None], illumination).astype(np.float32),
            np.where(mask, var_sum / (norm * norm), var).astype(np.float32))  # fmt: skip


def normal_weight(normal: np.ndarray, other: np.ndarray) -> np.ndarray:
    """max(0, n·n')^σn, the power taken by squaring (σn = 128 = 2^7)."""
    weight = np.maximum(np.einsum("ijk,ijk->ij", normal, other), 0.0)
    for _ in range(SQUARINGS):
        np.multiply(weight, weight, out=weight)
    return weight


def depth_slope(depth: np.ndarray, mask: np.ndarray) -> np.ndarray:
    """(h, w) the larger of the horizontal and vertical depth change per pixel, each the smaller
    of the one-sided differences (so a step in depth next to a pixel does not count as its
    slope). Schied et al. use the screen-space derivative of depth the same way."""
    padded = np.pad(np.where(mask, depth, np.inf), 1, mode="edge")
    centre = padded[1:-1, 1:-1]

    def side(a, b):
        with np.errstate(invalid="ignore"):  # inf − inf outside the mask
            d = np.minimum(np.abs(centre - a), np.abs(centre - b))
        return np.where(np.isfinite(d), d, 0.0)

    x = side(padded[1:-1, :-2], padded[1:-1, 2:])
    y = side(padded[:-2, 1:-1], padded[2:, 1:-1])
    return np.maximum(x, y).astype(np.float32)


def blur3(values: np.ndarray, mask: np.ndarray) -> np.ndarray:
    """The 3 × 3 Gaussian of ``values`` over the pixels of ``mask`` (normalised)."""
    h, w = values.shape
    padded = np.pad(np.where(mask, values, 0.0), 1)
    weights = np.pad(mask.astype(np.float32), 1)
    total = np.zeros_like(values)
    norm = np.zeros_like(values)
    for j in range(3):
        for i in range(3):
            g = GAUSS3[j] * GAUSS3[i]
            total += g * padded[j : j + h, i : i + w]
            norm += g * weights[j : j + h, i : i + w]
    return total / np.maximum(norm, TINY)


def neighbourhood_variance(luma: np.ndarray, normal: np.ndarray, mask: np.ndarray) -> np.ndarray:
    """Variance of each pixel's luminance from its 5 × 5 neighbours on surfaces facing the same
    way (weighted by the cubic B-spline), for a render without a per-pixel error estimate."""
    h, w = luma.shape
    padded = np.pad(luma, 2)
    p_normal = np.pad(normal, ((2, 2), (2, 2), (0, 0)))
    p_mask = np.pad(mask, 2)
    first = np.zeros_like(luma)
    second = np.zeros_like(luma)
    norm = np.zeros_like(luma)
    for j in range(5):
        for i in range(5):
            window = (slice(j, j + h), slice(i, i + w))
            weight = (
                float(SPLINE[j] * SPLINE[i])
                * normal_weight(normal, p_normal[window])
                * p_mask[window]
            )
            value = padded[window]
            first += weight * value
            second += weight * value * value
            norm += weight
    norm = np.maximum(norm, TINY)
    return np.maximum(second / norm - (first / norm) ** 2, 0.0)
