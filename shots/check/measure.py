"""Measure one catalog image: where the product is, how big, how centred, how bright, how clean.

Everything here looks at a single image; comparing images with each other is ``shots.check.judge``.

Which pixels are the product
----------------------------
*Transparent background* (the border is mostly see-through): a pixel is product when its alpha is
at least ``alpha_threshold`` (0.5: at least half covered) and it is not pure shadow. A shadow
catcher writes its shadow as black with partial alpha (``shots.render``: "coverage of black"), so
a pixel whose colour is black (every channel at most ``shadow_level``) is shadow whatever its
alpha, even the opaque contact core right under a leg. A product edge over the shadow keeps some
product colour and counts as product once product and shadow together cover half the pixel, so
the outline can grow by a pixel where it meets its shadow.

*Opaque background*: the background colour is estimated per row from the left and right border
strips (a running median over rows, so solid and vertical-gradient backgrounds both work), and a
pixel is product when some channel differs from it by more than ``background_threshold``. A soft
shadow on an opaque background is the background made darker: a pixel whose display colour is
``k`` times the background colour (to within ``OFF_TINT`` per channel) with
``opaque_shadow_floor <= k < 1`` is shadow. Only the soft part of a shadow goes: a darker core
counts as product, because a neutral product on a neutral background is also a darker copy of the
background, and the two cannot be told apart by colour; with the floor at 0.75, a grey product
lighter than three quarters of the background would still be read as shadow. Check transparent
renders for exact masks. A visible floor or sweep is read as product in both modes.
"""

from __future__ import annotations

import warnings
from dataclasses import dataclass
from pathlib import Path

import numpy as np
from PIL import Image, UnidentifiedImageError

from shots.colour import LUMA_709, srgb_to_linear
from shots.limits import DEFAULT

OFF_TINT = 0.02  # opaque: a shadow pixel is this close to a multiple of the background colour


@dataclass(frozen=True)
class MaskRules:
    """Thresholds that decide product, shadow and background pixels (values in [0, 1])."""

    alpha_threshold: float = 0.5  # product coverage: at least half the pixel
    shadow_level: float = 3 / 255  # a "black" shadow pixel: every channel at most this
    background_threshold: float = 0.06  # opaque: product differs from the background by more
    opaque_shadow_floor: float = 0.75  # opaque: a shadow keeps at least this much of the background


@dataclass(frozen=True)
class Measurement:
    """The numbers measured on one image (fractions of the frame unless said otherwise).

    Attributes
    ----------
    path : the image file.
    width, height : pixels.
    transparent : whether the background is see-through (else opaque).
    product_pixels : pixels in the product mask.
    bbox : (top, left, bottom, right) of the product mask, bottom and right exclusive; None when
        no product was found.
    fill : the larger of bbox height / frame height and bbox width / frame width.
    area_fraction : product pixels / frame pixels.
    centre_offset : (x, y) bbox centre minus frame centre, in frame widths and heights; +y is down.
    background_purity : transparent only: share of background pixels (those more than 2 px from
        the product) that are fully transparent or pure shadow.
    border_std : opaque only: robust standard deviation of the border around the estimated
        background (``robust_spread``), the largest over R, G, B.
    luminance : mean BT.709 luminance Y of the sRGB-decoded product pixels (linear, 0..1).
    clipped : share of product pixels with a channel at the top code (255 in 8 bits).
    detail : median distance of the product's sRGB colour from its local mean (``texture_detail``):
        fine spatial variation such as texture; None when the product is too thin to measure.
    shadow_weight : summed shadow strength (alpha or darkening), in pixels.
    shadow_position : shadow centroid minus product bbox centre, in bbox heights (+ is below).
    mass_position : product centroid row within its bbox, 0 at the top and 1 at the bottom.
    """

    path: Path
    width: int
    height: int
    transparent: bool
    product_pixels: int
    bbox: tuple[int, int, int, int] | None
    fill: float | None
    fill_width: float | None
    fill_height: float | None
    area_fraction: float
    centre_offset: tuple[float, float] | None
    background_purity: float | None
    border_std: float | None
    luminance: float | None
    clipped: float | None
    detail: float | None
    shadow_weight: float
    shadow_position: float | None
    mass_position: float | None

    @property
    def found(self) -> bool:
        """Whether any product pixel was found."""
        return self.bbox is not None

    @property
    def touches_edge(self) -> bool:
        """Whether the product mask reaches a side of the frame (probably cut off)."""
        if self.bbox is None:
            return False
        top, left, bottom, right = self.bbox
        return top == 0 or left == 0 or bottom == self.height or right == self.width


def read_rgba(path: Path, max_pixels: int = DEFAULT.image_pixels) -> np.ndarray:
    """(h, w, 4) float64 straight-alpha RGBA in [0, 1] (alpha 1 for images without alpha).

    Raises
    ------
    OSError or ValueError when the file is not a readable image, or its header declares more
    than ``max_pixels`` (checked before decoding: a small PNG can declare 10000 × 10000).
    """
    try:
        with warnings.catch_warnings():  # Pillow's own bomb warning: our limit decides
            warnings.simplefilter("ignore", Image.DecompressionBombWarning)
            image = Image.open(path)
        with image:
            width, height = image.size
            if width * height > max_pixels:
                raise ValueError(f"the image is {width}x{height}, over the limit image_pixels "
                                 f"{max_pixels}")
            rgba = np.asarray(image.convert("RGBA"), np.float64) / 255.0
    except (UnidentifiedImageError, Image.DecompressionBombError) as exc:
        raise ValueError(str(exc)) from None
    return rgba


def measure_image(path: Path, rules: MaskRules | None = None,
                  max_pixels: int = DEFAULT.image_pixels) -> Measurement:
    """Read ``path`` and measure it (see ``measure_rgba``)."""
    return measure_rgba(read_rgba(path, max_pixels), Path(path), rules)


def measure_codes(codes: np.ndarray, path: Path, rules: MaskRules | None = None) -> Measurement:
    """Measure (h, w, 4) uint8 RGBA codes, the pixels of an 8-bit PNG at ``path``, without
    reading the file: the same numbers as ``measure_image(path)``."""
    return measure_rgba(codes.astype(np.float64) / 255.0, Path(path), rules)


def measure_rgba(rgba: np.ndarray, path: Path, rules: MaskRules | None = None) -> Measurement:
    """Measure one image.

    Parameters
    ----------
    rgba : (h, w, 4) float straight-alpha display RGBA in [0, 1] (sRGB-encoded colour).
    path : where the image came from, for the report.
    rules : mask thresholds (defaults: ``MaskRules()``).
    """
    rules = rules or MaskRules()
    height, width = rgba.shape[:2]
    ring = border_width(height, width)
    transparent = bool(np.median(border_pixels(rgba[..., 3], ring)) < 0.5)
    if transparent:
        product, shadow = transparent_masks(rgba, rules)
        purity, border_std = background_purity(rgba, product, shadow), None
    else:
        product, shadow, border_std = opaque_masks(rgba[..., :3], ring, rules)
        purity = None
    bbox = bounding_box(product)
    found = bbox is not None
    fill_height, fill_width = fill_fractions(bbox, height, width) if found else (None, None)
    colour = rgba[..., :3][product]
    return Measurement(
        path=path,
        width=width,
        height=height,
        transparent=transparent,
        product_pixels=int(product.sum()),
        bbox=bbox,
        fill=max(fill_height, fill_width) if found else None,
        fill_width=fill_width,
        fill_height=fill_height,
        area_fraction=float(product.mean()),
        centre_offset=centre_offset(bbox, height, width) if found else None,
        background_purity=purity,
        border_std=border_std,
        luminance=float(np.mean(srgb_to_linear(colour) @ LUMA_709)) if found else None,
        clipped=float(np.mean(np.any(colour >= 1.0, axis=1))) if found else None,
        detail=texture_detail(rgba[..., :3], product, detail_radius(height, width)),
        shadow_weight=float(shadow.sum()),
        shadow_position=shadow_position(shadow, bbox),
        mass_position=mass_position(product, bbox),
    )


# --- masks --------------------------------------------------------------------------------------


def border_width(height: int, width: int) -> int:
    """Width in pixels of the border ring used to read the background: 1/64 of the frame, at
    least 2, at most a quarter of the frame (so a tiny image still has a middle)."""
    side = min(height, width)
    return max(1, min(max(2, round(side / 64)), side // 4))


def border_pixels(channel: np.ndarray, ring: int) -> np.ndarray:
    """The values of a (h, w, ...) array in the outer ``ring`` pixels of every side, flattened."""
    top, bottom = channel[:ring], channel[-ring:]
    left, right = channel[ring:-ring, :ring], channel[ring:-ring, -ring:]
    tail = channel.shape[2:]
    return np.concatenate([part.reshape(-1, *tail) for part in (top, bottom, left, right)])


def transparent_masks(rgba: np.ndarray, rules: MaskRules) -> tuple[np.ndarray, np.ndarray]:
    """(product, shadow) for a see-through background.

    Returns
    -------
    product : (h, w) bool. shadow : (h, w) float64 shadow alpha outside the product, else 0.
    """
    alpha = rgba[..., 3]
    pure_shadow = (alpha > 0.0) & (channel_max(rgba) <= rules.shadow_level)
    product = (alpha >= rules.alpha_threshold) & ~pure_shadow
    return product, np.where(pure_shadow, alpha, 0.0)


def background_purity(rgba: np.ndarray, product: np.ndarray, shadow: np.ndarray) -> float | None:
    """Share of background pixels (beyond 2 px of the product, past its soft edge) that are
    fully transparent or pure shadow; None when the product leaves no background."""
    background = ~dilate(product, 2)
    if not background.any():
        return None
    clean = (rgba[..., 3] <= 0.5 / 255) | (shadow > 0.0)
    return float(clean[background].mean())


def opaque_masks(
    rgb: np.ndarray, ring: int, rules: MaskRules
) -> tuple[np.ndarray, np.ndarray, float]:
    """(product, shadow, border_std) for an opaque background (see the module docstring).

    Returns
    -------
    product : (h, w) bool. shadow : (h, w) float64 darkening 1 - k of shadow pixels, else 0.
    border_std : float, the border's spread around the estimated background.
    """
    background = background_rows(rgb, ring)[:, None, :]  # (h, 1, 3)
    differs = np.abs(rgb - background).max(axis=2) > rules.background_threshold
    k = (rgb * background).sum(axis=2) / np.maximum((background * background).sum(axis=2), 1e-12)
    off_tint = np.abs(rgb - k[..., None] * background).max(axis=2)
    darker = (off_tint <= OFF_TINT) & (k < 1.0)
    product = differs & ~(darker & (k >= rules.opaque_shadow_floor))
    shadow = np.where(darker & ~product, 1.0 - k, 0.0)
    return product, shadow, robust_spread(border_pixels(rgb - background, ring))


def robust_spread(values: np.ndarray) -> float:
    """Largest per-channel robust standard deviation of (n, 3) values: 1.4826 × the median absolute
    deviation, which is σ for Gaussian noise (Rousseeuw & Croux 1993) and ignores sparse specks
    such as a noisy shadow reaching the border."""
    deviation = np.abs(values - np.median(values, axis=0))
    return float((1.4826 * np.median(deviation, axis=0)).max())


def background_rows(rgb: np.ndarray, ring: int) -> np.ndarray:
    """(h, 3) background colour per row: median of the side strips, then a running median over
    rows (window 1/8 of the height) so a product touching a side for a few rows is ignored."""
    sides = np.concatenate([rgb[:, :ring], rgb[:, -ring:]], axis=1)
    per_row = np.median(sides, axis=1)
    half = max(1, rgb.shape[0] // 16)
    padded = np.pad(per_row, ((half, half), (0, 0)), mode="edge")
    windows = np.lib.stride_tricks.sliding_window_view(padded, 2 * half + 1, axis=0)
    return np.median(windows, axis=2)


def dilate(mask: np.ndarray, radius: int) -> np.ndarray:
    """(h, w) bool ``mask`` grown by ``radius`` pixels (a square structuring element).

    A square is a row segment times a column segment, so the rows are grown first and then the
    columns: 2·(2·radius + 1) passes instead of (2·radius + 1)², with the same result."""
    h, w = mask.shape
    grown = np.pad(mask, ((0, 0), (radius, radius)))
    rows = np.zeros_like(mask)
    for dx in range(2 * radius + 1):
        rows |= grown[:, dx : dx + w]
    grown = np.pad(rows, ((radius, radius), (0, 0)))
    out = np.zeros_like(mask)
    for dy in range(2 * radius + 1):
        out |= grown[dy : dy + h]
    return out


def channel_max(image: np.ndarray) -> np.ndarray:
    """(h, w) largest of the first three channels (faster than ``max(axis=2)``, same values)."""
    return np.maximum(np.maximum(image[..., 0], image[..., 1]), image[..., 2])


def erode(mask: np.ndarray, radius: int) -> np.ndarray:
    """(h, w) bool ``mask`` shrunk by ``radius`` pixels (outside the frame counts as outside)."""
    return ~dilate(~np.pad(mask, radius), radius)[radius:-radius, radius:-radius]


# --- geometry of the mask -----------------------------------------------------------------------


def bounding_box(mask: np.ndarray) -> tuple[int, int, int, int] | None:
    """(top, left, bottom, right) of the True pixels, bottom and right exclusive; None if empty."""
    rows, cols = np.flatnonzero(mask.any(axis=1)), np.flatnonzero(mask.any(axis=0))
    if rows.size == 0:
        return None
    return int(rows[0]), int(cols[0]), int(rows[-1]) + 1, int(cols[-1]) + 1


def fill_fractions(bbox, height: int, width: int) -> tuple[float, float]:
    """(bbox height / frame height, bbox width / frame width)."""
    top, left, bottom, right = bbox
    return (bottom - top) / height, (right - left) / width


def centre_offset(bbox, height: int, width: int) -> tuple[float, float]:
    """(x, y) of the bbox centre minus the frame centre, in frame widths and heights (+y down)."""
    top, left, bottom, right = bbox
    return ((left + right) / 2 - width / 2) / width, ((top + bottom) / 2 - height / 2) / height


def shadow_position(shadow: np.ndarray, bbox) -> float | None:
    """Shadow-weighted centroid row minus the bbox centre row, in bbox heights (+ is below).

    None without a product, or when the shadow weighs less than one pixel in a thousand of the
    frame (no shadow catcher, or nothing to read)."""
    total = shadow.sum()
    if bbox is None or total < 1e-3 * shadow.size:
        return None
    top, _, bottom, _ = bbox
    rows = np.arange(shadow.shape[0])
    centroid = (shadow.sum(axis=1) @ rows) / total + 0.5
    return float((centroid - (top + bottom) / 2) / (bottom - top))


def mass_position(mask: np.ndarray, bbox) -> float | None:
    """Centroid row of the product pixels within the bbox: 0 at its top, 1 at its bottom."""
    if bbox is None:
        return None
    top, _, bottom, _ = bbox
    rows = np.arange(mask.shape[0])
    centroid = (mask.sum(axis=1) @ rows) / mask.sum() + 0.5
    return float((centroid - top) / (bottom - top))


# --- texture ------------------------------------------------------------------------------------


def detail_radius(height: int, width: int) -> int:
    """Half-size of the local-mean box for ``texture_detail``: 1/256 of the frame, at least 1."""
    return max(1, round(min(height, width) / 256))


def texture_detail(rgb: np.ndarray, mask: np.ndarray, radius: int) -> float | None:
    """Median over the product interior of how far a pixel's sRGB colour is from its local mean.

    The local mean is a box of (2·radius + 1)² pixels over product pixels only (normalised
    convolution, so the background never leaks in); subtracting it takes smooth shading away and
    keeps detail finer than the box: wood grain, weave, print. The distance is the largest of the
    three channel differences. The median, not the mean, so the few pixels on edges between parts
    and on sharp highlights do not count: a texture changes most pixels, an edge only some. The
    interior is the mask shrunk by ``radius`` pixels. None when it has fewer than 16 pixels.
    """
    bbox = bounding_box(mask)
    if bbox is None:
        return None
    # Outside the mask's box every weight and every masked colour is zero, so the box sums
    # inside it are the same, to the bit, on the box alone (the summed-area table only gains
    # or loses rows and columns of zeros): far less work for a product that fills part of the
    # frame.
    top, left, bottom, right = bbox
    mask, rgb = mask[top:bottom, left:right], rgb[top:bottom, left:right]
    inside = erode(mask, radius)
    if inside.sum() < 16:
        return None
    weight = np.maximum(box_sum(mask.astype(np.float64), radius), 1.0)
    local = np.stack([box_sum(rgb[..., c] * mask, radius) / weight for c in range(3)], axis=2)
    return float(np.median(np.abs(rgb - local)[inside].max(axis=1)))


def box_sum(values: np.ndarray, radius: int) -> np.ndarray:
    """(h, w) sums of ``values`` over (2·radius + 1)² boxes clipped to the frame (summed-area
    table).

    The values are padded with ``radius`` zeros on every side, so every box is a plain slice of
    the table: adding zeros changes no partial sum, and the result is the same, bit for bit, as
    clipping each box to the frame.
    """
    h, w = values.shape
    side = 2 * radius + 1
    table = np.zeros((h + 2 * radius + 1, w + 2 * radius + 1))
    table[radius + 1 : radius + 1 + h, radius + 1 : radius + 1 + w] = values
    np.cumsum(table, axis=0, out=table)
    np.cumsum(table, axis=1, out=table)
    return table[side:, side:] - table[:h, side:] - table[side:, :w] + table[:h, :w]
