"""Judge measured images against fixed limits and against the rest of the catalog.

An image is compared with the catalog median (fill, exposure, texture detail, mass position) and
with absolute limits (centre, background, clipping). The median is robust: a few broken images do
not move it, so they stand out instead of hiding among themselves. Comparisons with the median need
at least ``Tolerances.min_catalog`` images with a product.

What the framing holds constant
-------------------------------
Fill and vertical centring are only worth comparing when the catalog's framing makes them equal.
A tight thumbnail catalog gives every product the same fill and centres it, so an outlier is a
fault. A catalog at one scale (a fixed-scale line-up, a locked camera over a floor) shows sizes as
they are: a stool fills less than a sofa, and under a locked camera a lamp reaches higher in the
frame than a stool standing on the same floor. So the catalog counts as framed to one fill when
its fills agree (their median absolute deviation is at most ``fill_spread``; like the median, it
is not moved by a few broken images), and only then are fill and the vertical centre compared.
The horizontal centre is held to ``centre_offset`` in every catalog: a symmetric product standing
on its origin stays on the centre line of a straight-on locked camera too. At one scale the
faults show differently: a model in centimetres overflows the frame (it reaches the edge, or one
surface covers the frame edge to edge), and an off-centre pivot moves the product sideways.

Heuristics
----------
*Upside down.* Two cues, either one flags. (1) The contact shadow lies above the product: its
shadow-weighted centroid is higher than the product's bounding-box centre by more than
``shadow_above`` box heights. A floor shadow is always at the product's foot, so this means the
image (or the camera's up) is flipped. (2) For a model turned over in the scene the shadow stays
on the floor, so the second cue is the outline's mass: furniture carries its bulk up high on thin
legs or a stem (chairs, tables, stools, lamps), so the centroid of the product's pixels sits in the
upper part of its box (0.28–0.47 of the height, 0 at the top, in 160 px renders of the demo
models; 0.59–0.69 for the ones that visibly change when turned over). A product whose mass
position is greater than both ``mass_low`` and the catalog median plus ``mass_margin`` is
flagged. Symmetric outlines (a box-like bookcase, a sofa, a chair seen from the side) look much
the same either way and are not caught.

*Missing texture.* A texture (wood grain, weave, print) changes most pixels against their
neighbours; a flat colour only changes smoothly. ``Measurement.detail`` is the median distance of
a pixel from the mean of its neighbourhood (3×3 pixels in thumbnails below 384 px). An image whose
detail is below ``flat_ratio`` times the catalog median is flagged as flat colour, but only when
the catalog median itself reaches ``flat_floor`` (the catalog is mostly textured); in a catalog of
mostly plain lacquer and paint, a flat product is normal and the check stays off.

*Exposure* compares the product's mean luminance with the catalog median in stops, so it reads
albedo too: a black sofa in a catalog of oak will stand out.
"""

from __future__ import annotations

import difflib
import math
from collections.abc import Mapping
from dataclasses import dataclass, fields

import numpy as np

from shots.check.measure import MaskRules, Measurement
from shots.errors import PresetError


@dataclass(frozen=True)
class Tolerances:
    """How far an image may stray before it is flagged (fractions of the frame unless said)."""

    fill: float = 0.08  # |fill − catalog median fill|
    centre_offset: float = 0.03  # |x| and |y| of the bbox centre from the frame centre
    exposure_stops: float = 1.0  # |log2(Y / catalog median Y)|
    purity: float = 0.99  # transparent backgrounds: least share of clean background pixels
    border_std: float = 0.02  # opaque backgrounds: most spread of the border around its colour
    clipped: float = 0.10  # most share of product pixels at full white
    flat_ratio: float = 0.25  # flat colour: detail below this share of the catalog median
    flat_floor: float = 0.01  # ... checked only when the catalog median detail reaches this
    shadow_above: float = 0.1  # upside down: shadow centroid this many bbox heights above centre
    mass_low: float = 0.55  # upside down: mass position (0 top, 1 bottom) beyond this
    mass_margin: float = 0.1  # ... and this far beyond the catalog median
    fill_spread: float = 0.04  # fill and vertical centre compared only when fills agree this well
    min_catalog: int = 3  # images with a product needed to compare with the catalog median
    alpha_threshold: float = MaskRules.alpha_threshold
    shadow_level: float = MaskRules.shadow_level
    background_threshold: float = MaskRules.background_threshold
    opaque_shadow_floor: float = MaskRules.opaque_shadow_floor

    @staticmethod
    def from_mapping(values: Mapping[str, object], source: str = "[check]") -> Tolerances:
        """Tolerances from a table of overrides (for example a preset's ``[check]`` table).

        Raises
        ------
        PresetError : an unknown key or a value that is not a non-negative number.
        """
        known = [f.name for f in fields(Tolerances)]
        for key, value in values.items():
            if key not in known:
                close = difflib.get_close_matches(key, known, n=1)
                hint = f"; did you mean {close[0]!r}?" if close else ""
                raise PresetError(source, key, f"unknown tolerance{hint}")
            if isinstance(value, bool) or not isinstance(value, int | float) or value < 0:
                raise PresetError(source, key, f"needs a non-negative number, not {value!r}")
            if key == "min_catalog" and not isinstance(value, int):
                raise PresetError(source, key, f"needs a whole number, not {value!r}")
        return Tolerances(**values)

    def mask_rules(self) -> MaskRules:
        """The thresholds that decide product, shadow and background pixels."""
        return MaskRules(
            alpha_threshold=self.alpha_threshold,
            shadow_level=self.shadow_level,
            background_threshold=self.background_threshold,
            opaque_shadow_floor=self.opaque_shadow_floor,
        )


@dataclass(frozen=True)
class CatalogMedians:
    """Medians over the images with a product; None when there are too few images.

    ``fill_spread`` is the median absolute deviation of fill: how well the catalog agrees on it.
    """

    count: int
    fill: float | None
    luminance: float | None
    detail: float | None
    mass_position: float | None
    fill_spread: float | None = None


def catalog_medians(measurements: list[Measurement], tolerances: Tolerances) -> CatalogMedians:
    """The catalog medians the relative checks compare against."""
    found = [m for m in measurements if m.found]

    def median(name: str) -> float | None:
        values = [getattr(m, name) for m in found if getattr(m, name) is not None]
        if len(values) < tolerances.min_catalog:
            return None
        return float(np.median(values))

    fills = [m.fill for m in found]
    return CatalogMedians(
        count=len(found),
        fill=median("fill"),
        luminance=median("luminance"),
        detail=median("detail"),
        mass_position=median("mass_position"),
        fill_spread=median_deviation(fills) if len(fills) >= tolerances.min_catalog else None,
    )


def median_deviation(values) -> float:
    """Median absolute deviation from the median (unscaled): a spread a few outliers do not move."""
    values = np.asarray(values, np.float64)
    return float(np.median(np.abs(values - np.median(values))))


def framed_to_one_fill(medians: CatalogMedians, tolerances: Tolerances) -> bool:
    """Whether the catalog's fills agree (module docstring); True when it is too small to tell,
    so a lone image is still held to the centre."""
    return medians.fill_spread is None or medians.fill_spread <= tolerances.fill_spread


def exposure_stops(m: Measurement, medians: CatalogMedians) -> float | None:
    """The product's mean luminance relative to the catalog median, in stops (log2)."""
    if m.luminance is None or not medians.luminance:
        return None
    return math.log2(max(m.luminance, 1e-6) / medians.luminance)


def catalog_notes(medians: CatalogMedians, tolerances: Tolerances) -> list[str]:
    """Checks that could not run on this catalog, and why."""
    notes = []
    if medians.count < tolerances.min_catalog:
        notes.append(
            f"only {medians.count} image(s) with a product: fill, exposure, texture and mass "
            f"are not compared with the catalog (needs {tolerances.min_catalog})"
        )
        return notes
    if medians.detail is not None and medians.detail < tolerances.flat_floor:
        notes.append(
            f"missing-texture check off: the catalog is mostly flat colour (median detail "
            f"{medians.detail:.4f} < {tolerances.flat_floor:.4f})"
        )
    if not framed_to_one_fill(medians, tolerances):
        notes.append(
            f"fill and vertical centre not compared: the fills differ (median deviation "
            f"{medians.fill_spread:.3f} > {tolerances.fill_spread:g}), as in a catalog at one "
            f"scale; the horizontal centre is still checked"
        )
    return notes


def reasons_for(m: Measurement, medians: CatalogMedians, tolerances: Tolerances) -> list[str]:
    """Every reason to look at this image again; empty when it is consistent."""
    if not m.found:
        if m.transparent:
            return ["no product found (the image is empty or all background)"]
        # An opaque frame of one colour: an empty render on a solid background, or, at a fixed
        # scale, a close-up of a model so large that one of its surfaces covers the frame.
        return [
            "no product found: one colour edge to edge (an empty render, or a model so large "
            "that one surface covers the frame: check the model's units)"
        ]
    t = tolerances
    reasons = []
    if m.touches_edge:
        reasons.append(
            "the product reaches the frame edge: cut off? check the model's units or the framing"
        )
    one_fill = framed_to_one_fill(medians, t)
    if medians.fill is not None and one_fill and abs(m.fill - medians.fill) > t.fill:
        size = "larger" if m.fill > medians.fill else "smaller"
        reasons.append(
            f"fill {m.fill:.2f} vs catalog {medians.fill:.2f} (±{t.fill:.2f}): {size} than the "
            f"rest; check the model's units or the framing"
        )
    dx, dy = m.centre_offset
    if abs(dx) > t.centre_offset or (one_fill and abs(dy) > t.centre_offset):
        # In a centred catalog the planner frames every vertex, so a product that sits high has
        # a part that does not show: below the floor (a Z-up export, a pivot not at the foot).
        reasons.append(
            f"off centre by x {dx:+.3f}, y {dy:+.3f} of the frame (limit {t.centre_offset:.3f}): "
            f"check the model's pivot and up axis (a part below the floor does not show) or "
            f"the framing"
        )
    stops = exposure_stops(m, medians)
    if stops is not None and abs(stops) > t.exposure_stops:
        reasons.append(
            f"exposure {stops:+.1f} stops from the catalog (±{t.exposure_stops:g}): check the "
            f"materials (a missing texture renders its plain base colour)"
        )
    if m.clipped > t.clipped:
        reasons.append(f"{m.clipped:.0%} of the product at full white (limit {t.clipped:.0%})")
    if m.background_purity is not None and m.background_purity < t.purity:
        reasons.append(
            f"background purity {m.background_purity:.3f} (needs {t.purity:.2f}): stray pixels "
            f"or a visible floor"
        )
    if m.border_std is not None and m.border_std > t.border_std:
        reasons.append(
            f"uneven background: border spread {m.border_std:.3f} (limit {t.border_std:.3f})"
        )
    reasons += upside_down_reasons(m, medians, t)
    if flat_colour(m, medians, t):
        reasons.append(
            f"flat colour (detail {m.detail:.4f} vs catalog {medians.detail:.4f}): possible "
            f"missing texture"
        )
    return reasons


def upside_down_reasons(m: Measurement, medians: CatalogMedians, t: Tolerances) -> list[str]:
    """The two upside-down cues of the module docstring."""
    reasons = []
    if m.shadow_position is not None and m.shadow_position < -t.shadow_above:
        reasons.append("the contact shadow is above the product: upside down?")
    elif (
        medians.mass_position is not None
        and m.mass_position > t.mass_low
        and m.mass_position > medians.mass_position + t.mass_margin
    ):
        reasons.append(
            f"bulk at the bottom of the outline (mass at {m.mass_position:.2f} of the height, "
            f"catalog {medians.mass_position:.2f}): upside down?"
        )
    return reasons


def flat_colour(m: Measurement, medians: CatalogMedians, t: Tolerances) -> bool:
    """Whether the product is far flatter than a mostly textured catalog (module docstring)."""
    if m.detail is None or medians.detail is None or medians.detail < t.flat_floor:
        return False
    return m.detail < t.flat_ratio * medians.detail
