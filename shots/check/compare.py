"""Compare a render with its approved image: structure (SSIM) and colour (CIEDE2000).

    comparison = compare_images(rendered_rgba, approved_rgba, tolerances)

Both images are composited over white as a page shows them, then averaged over a Gaussian window
(σ = 1.5 pixels, in linear light): a render's sampling noise, which a rerun with another seed
reshuffles, cancels, while a part that moved or changed colour stays. (On 96-pixel renders at
4 samples the mean SSIM of two seeds is 0.87 on the raw pixels and 0.99 after averaging; a chair
leg moved by 5 cm gives 0.81 and 0.93.) *Structure* is the mean SSIM of Wang, Bovik, Sheikh &
Simoncelli (2004), "Image quality assessment: from error visibility to structural similarity",
on the averaged images' CIE lightness L*/100: an 11-tap Gaussian window of σ = 1.5, K1 = 0.01,
K2 = 0.03, the mean taken over the pixels whose window fits in the frame. *Colour* is the
CIEDE2000 difference (CIE 142-2001; the formulas as written out by Sharma, Wu & Dalal 2005)
of the averaged colours. A pixel has changed when that difference exceeds ``delta_e``; an image is flagged
when its mean SSIM falls below ``ssim`` or its changed share exceeds ``changed_share``.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from shots.colour import linear_to_srgb, srgb_to_linear

SIGMA = 1.5  # Wang et al. 2004, §III-C: Gaussian weighting, standard deviation 1.5 samples
RADIUS = 5  # an 11 × 11 window
K1, K2 = 0.01, 0.03  # Wang et al. 2004, eq. (7) and (9)
# sRGB (linear, D65) to CIE XYZ: IEC 61966-2-1, §5.2 eq. (7)
SRGB_TO_XYZ = np.array([[0.4124, 0.3576, 0.1805],
                        [0.2126, 0.7152, 0.0722],
                        [0.0193, 0.1192, 0.9505]])  # fmt: skip
D65_WHITE = SRGB_TO_XYZ.sum(axis=1)  # the XYZ of sRGB white (1, 1, 1)
CHANGE_COLOUR = np.array([0.93, 0.24, 0.42])  # how a changed pixel is painted (display sRGB)


@dataclass(frozen=True)
class Comparison:
    """How a render differs from its approved image.

    ssim : mean SSIM (1 identical). changed_share : share of pixels whose local colour differs
    by more than ``delta_e`` (CIEDE2000). largest_delta_e : the largest such difference.
    delta_e_map : (h, w) CIEDE2000 of the local colours, for the difference picture.
    """

    ssim: float
    changed_share: float
    largest_delta_e: float
    delta_e_map: np.ndarray

    def reasons(self, tolerances) -> list[str]:
        """Why this comparison is beyond ``tolerances``; empty when it is not."""
        reasons = []
        if self.ssim < tolerances.ssim:
            reasons.append(f"changed from the approved image: structure (SSIM) {self.ssim:.3f} "
                           f"below {tolerances.ssim:g}")
        if self.changed_share > tolerances.changed_share:
            reasons.append(f"changed from the approved image: {self.changed_share:.1%} of the "
                           f"frame differs in colour by more than ΔE00 {tolerances.delta_e:g} "
                           f"(limit {tolerances.changed_share:.1%})")
        return reasons


def over_white(rgba: np.ndarray) -> np.ndarray:
    """(h, w, 3) display sRGB of straight-alpha display RGBA in [0, 1] composited over white."""
    alpha = rgba[..., 3:4]
    return rgba[..., :3] * alpha + (1.0 - alpha)


def srgb_to_lab(display: np.ndarray) -> np.ndarray:
    """CIE L*a*b* (D65 white, CIE 15:2004 §8.2.1) of display sRGB values in [0, 1]."""
    return xyz_to_lab(srgb_to_linear(display) @ SRGB_TO_XYZ.T)


def xyz_to_lab(xyz: np.ndarray) -> np.ndarray:
    """CIE L*a*b* of XYZ (Y of white = 1) relative to D65 (CIE 15:2004 §8.2.1)."""
    t = xyz / D65_WHITE
    delta = 6.0 / 29.0
    f = np.where(t > delta**3, np.cbrt(t), t / (3 * delta**2) + 4.0 / 29.0)
    return np.stack([116.0 * f[..., 1] - 16.0, 500.0 * (f[..., 0] - f[..., 1]),
                     200.0 * (f[..., 1] - f[..., 2])], axis=-1)  # fmt: skip


def ciede2000(lab1: np.ndarray, lab2: np.ndarray) -> np.ndarray:
    """CIEDE2000 colour difference (kL = kC = kH = 1) of L*a*b* arrays (..., 3).

    Sharma, Wu & Dalal (2005), "The CIEDE2000 color-difference formula: implementation notes,
    supplementary test data, and mathematical observations", eq. (1)–(22).
    """
    l1, a1, b1 = np.moveaxis(np.asarray(lab1, np.float64), -1, 0)
    l2, a2, b2 = np.moveaxis(np.asarray(lab2, np.float64), -1, 0)
    c_bar = (np.hypot(a1, b1) + np.hypot(a2, b2)) / 2.0
    g = 0.5 * (1.0 - np.sqrt(c_bar**7 / (c_bar**7 + 25.0**7)))
    a1p, a2p = (1.0 + g) * a1, (1.0 + g) * a2
    c1p, c2p = np.hypot(a1p, b1), np.hypot(a2p, b2)
    h1p = np.degrees(np.arctan2(b1, a1p)) % 360.0
    h2p = np.degrees(np.arctan2(b2, a2p)) % 360.0
    chroma_product = c1p * c2p
    dh = h2p - h1p
    dh = np.where(dh > 180.0, dh - 360.0, np.where(dh < -180.0, dh + 360.0, dh))
    dh = np.where(chroma_product == 0.0, 0.0, dh)
    d_l, d_c = l2 - l1, c2p - c1p
    d_h = 2.0 * np.sqrt(chroma_product) * np.sin(np.radians(dh / 2.0))
    l_bar, cp_bar = (l1 + l2) / 2.0, (c1p + c2p) / 2.0
    h_sum = h1p + h2p
    h_bar = np.where(np.abs(h1p - h2p) <= 180.0, h_sum / 2.0,
                     np.where(h_sum < 360.0, (h_sum + 360.0) / 2.0, (h_sum - 360.0) / 2.0))
    h_bar = np.where(chroma_product == 0.0, h_sum, h_bar)
    t = (1.0 - 0.17 * np.cos(np.radians(h_bar - 30.0)) + 0.24 * np.cos(np.radians(2.0 * h_bar))
         + 0.32 * np.cos(np.radians(3.0 * h_bar + 6.0))
         - 0.20 * np.cos(np.radians(4.0 * h_bar - 63.0)))
    d_theta = 30.0 * np.exp(-(((h_bar - 275.0) / 25.0) ** 2))
    r_c = 2.0 * np.sqrt(cp_bar**7 / (cp_bar**7 + 25.0**7))
    s_l = 1.0 + 0.015 * (l_bar - 50.0) ** 2 / np.sqrt(20.0 + (l_bar - 50.0) ** 2)
    s_c = 1.0 + 0.045 * cp_bar
    s_h = 1.0 + 0.015 * cp_bar * t
    r_t = -np.sin(np.radians(2.0 * d_theta)) * r_c
    tl, tc, th = d_l / s_l, d_c / s_c, d_h / s_h
    return np.sqrt(tl**2 + tc**2 + th**2 + r_t * tc * th)


def gaussian_blur(values: np.ndarray, sigma: float = SIGMA, radius: int = RADIUS) -> np.ndarray:
    """Separable Gaussian average of the first two axes, edges mirrored (half-sample symmetric)."""
    taps = np.exp(-0.5 * (np.arange(-radius, radius + 1) / sigma) ** 2)
    taps /= taps.sum()
    out = np.asarray(values, np.float64)
    for axis in (0, 1):
        pad = [(0, 0)] * out.ndim
        pad[axis] = (radius, radius)
        padded = np.pad(out, pad, mode="symmetric")
        n = out.shape[axis]
        out = sum(w * np.take(padded, range(k, k + n), axis=axis) for k, w in enumerate(taps))
    return out


def ssim(x: np.ndarray, y: np.ndarray, data_range: float = 1.0) -> float:
    """Mean SSIM of two (h, w) images (Wang et al. 2004, eq. (13) with Gaussian windows),
    over the pixels whose window lies inside the frame."""
    c1, c2 = (K1 * data_range) ** 2, (K2 * data_range) ** 2
    mx, my = gaussian_blur(x), gaussian_blur(y)
    vx = gaussian_blur(x * x) - mx * mx
    vy = gaussian_blur(y * y) - my * my
    cxy = gaussian_blur(x * y) - mx * my
    index = ((2 * mx * my + c1) * (2 * cxy + c2)) / ((mx * mx + my * my + c1) * (vx + vy + c2))
    inner = index[RADIUS:-RADIUS, RADIUS:-RADIUS] if min(index.shape) > 2 * RADIUS else index
    return float(inner.mean())


def compare_images(rendered: np.ndarray, approved: np.ndarray, tolerances) -> Comparison:
    """Compare two straight-alpha display RGBA images in [0, 1] of the same size."""
    a, b = over_white(rendered), over_white(approved)
    local_a = linear_to_srgb(gaussian_blur(srgb_to_linear(a)))
    local_b = linear_to_srgb(gaussian_blur(srgb_to_linear(b)))
    lab_a, lab_b = srgb_to_lab(local_a), srgb_to_lab(local_b)
    delta = ciede2000(lab_a, lab_b)
    return Comparison(
        ssim=ssim(lab_a[..., 0] / 100.0, lab_b[..., 0] / 100.0),
        changed_share=float(np.mean(delta > tolerances.delta_e)),
        largest_delta_e=float(delta.max()),
        delta_e_map=delta,
    )


def difference_picture(rendered: np.ndarray, comparison: Comparison, tolerances) -> np.ndarray:
    """(h, w, 4) uint8 opaque RGBA: the render faded to a light grey, changed pixels painted in
    ``CHANGE_COLOUR``, stronger the larger their difference (full at twice ``delta_e``)."""
    grey = srgb_to_lab(over_white(rendered))[..., 0:1] / 100.0
    base = 0.55 + 0.4 * grey
    limit = max(tolerances.delta_e, 1e-6)
    strength = np.clip((comparison.delta_e_map - limit) / limit, 0.0, 1.0)[..., None]
    strength = np.where(comparison.delta_e_map[..., None] > limit, 0.35 + 0.65 * strength, 0.0)
    picture = base * (1.0 - strength) + CHANGE_COLOUR * strength
    codes = np.full((*picture.shape[:2], 4), 255, np.uint8)
    codes[..., :3] = np.round(np.clip(picture, 0.0, 1.0) * 255)
    return codes
