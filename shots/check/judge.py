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

*Exposure* is judged on the light the product received, not on its colour. A batch traces one
ray per pixel through the model and reads the base colour of the first surface (``shots.albedo``);
the rendered luminance of the product's matte pixels divided by the luminance of their base
colour plus the dielectric reflectance of 0.04 (glTF 2.0 spec, Appendix B: F0 of a dielectric)
is the light level. Only matte surfaces count: a frame showing nothing but metal, clear-coated
lacquer, glass or a lamp's glow has no light level and no exposure check. A light and a dark
fabric under the same lights read alike; a doubled light reads one stop higher. An image's light
level is compared with the catalog median (``exposure_stops``) and with the median of the same
model's variants seen in the same shot and frame (``variant_stops``, at least three of them),
which agree far more closely than different products do. Images without a batch record (renders
from elsewhere) fall back on their mean luminance against the catalog median, which reads colour
too: a black sofa stands out among oak.

*White base colour.* A base colour texture lost on export leaves the material's factor, white for
a textured material (glTF 2.0 spec §Materials: the texture is multiplied by the factor), so the
rendered light level looks right and the product is plain white. When more than ``white_base``
of the visible matte surface has a pure white base colour, the image is flagged.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

from shots.check.frames import FrameRecord
from shots.check.measure import MaskRules, Measurement
from shots.presets import CheckSettings

Tolerances = CheckSettings  # the preset's [check] table (shots.presets)
DIELECTRIC_F0 = 0.04  # glTF 2.0 spec, Appendix B: specular reflectance of a dielectric at normal
MIN_VARIANTS = 3  # images of one model, shot and frame needed to compare its variants


def mask_rules(tolerances: Tolerances) -> MaskRules:
    """The thresholds that decide product, shadow and background pixels."""
    return MaskRules(
        alpha_threshold=tolerances.alpha_threshold,
        shadow_level=tolerances.shadow_level,
        background_threshold=tolerances.background_threshold,
        opaque_shadow_floor=tolerances.opaque_shadow_floor,
    )


def light_level(record: FrameRecord | None) -> float | None:
    """The light the product received: rendered luminance over what its materials reflect
    (module docstring); None without an albedo reading."""
    if record is None or not record.albedo:
        return None
    try:
        rendered, albedo = float(record.albedo["rendered"]), float(record.albedo["albedo"])
    except (KeyError, TypeError, ValueError):
        return None
    if not (math.isfinite(rendered) and math.isfinite(albedo)) or albedo < 0:
        return None
    return max(rendered, 1e-9) / (albedo + DIELECTRIC_F0)


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
    light: float | None = None  # light level (``light_level``) over the images with a reading


def catalog_medians(measurements: list[Measurement], tolerances: Tolerances,
                    lights: list[float] = ()) -> CatalogMedians:
    """The catalog medians the relative checks compare against; ``lights`` are the light levels
    of the images that have one."""
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
        light=float(np.median(lights)) if len(lights) >= tolerances.min_catalog else None,
    )


def median_deviation(values) -> float:
    """Median absolute deviation from the median (unscaled): a spread a few outliers do not move."""
    values = np.asarray(values, np.float64)
    return float(np.median(np.abs(values - np.median(values))))


def framed_to_one_fill(medians: CatalogMedians, tolerances: Tolerances) -> bool:
    """Whether the catalog's fills agree (module docstring); True when it is too small to tell,
    so a lone image is still held to the centre."""
    return medians.fill_spread is None or medians.fill_spread <= tolerances.fill_spread


def stops(value: float | None, reference: float | None) -> float | None:
    """``value`` relative to ``reference`` in stops (log2); None when either is missing."""
    if value is None or not reference:
        return None
    return math.log2(max(value, 1e-9) / reference)


def exposure_stops(m: Measurement, record: FrameRecord | None,
                   medians: CatalogMedians) -> float | None:
    """The image's exposure against the catalog in stops: a batch's frame by its light level
    against the median light level (None when nothing matte showed), any other image by its
    mean luminance against the median luminance."""
    if record is not None:
        return stops(light_level(record), medians.light)
    if m.luminance is None:
        return None
    return stops(m.luminance, medians.luminance)


def variant_medians(records: dict, tolerances: Tolerances) -> dict[tuple, float]:
    """Median light level of each (model, shot, frame) seen in at least ``MIN_VARIANTS``
    images (its variants), from ``records`` {image: FrameRecord}."""
    groups: dict[tuple, list[float]] = {}
    for record in records.values():
        light = light_level(record)
        if light is not None:
            groups.setdefault((record.model, record.shot, record.frame), []).append(light)
    return {key: float(np.median(v)) for key, v in groups.items() if len(v) >= MIN_VARIANTS}


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


def reasons_for(m: Measurement, medians: CatalogMedians, tolerances: Tolerances,
                record: FrameRecord | None = None,
                variant_median: float | None = None) -> list[str]:
    """Every reason to look at this image again; empty when it is consistent.

    ``record`` is the image's frame record, ``variant_median`` the median light level of its
    model's variants in the same shot and frame (``variant_medians``)."""
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
    reasons += exposure_reasons(m, record, medians, variant_median, t)
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


def exposure_reasons(m: Measurement, record: FrameRecord | None, medians: CatalogMedians,
                     variant_median: float | None, t: Tolerances) -> list[str]:
    """Exposure against the catalog and against the model's variants, and a white base colour
    (module docstring)."""
    reasons = []
    light = light_level(record)
    catalog = exposure_stops(m, record, medians)
    if catalog is not None and abs(catalog) > t.exposure_stops:
        if light is not None:
            reasons.append(
                f"light on the product {catalog:+.1f} stops from the catalog "
                f"(±{t.exposure_stops:g}): check the lights and the exposure of this render"
            )
        else:
            reasons.append(
                f"exposure {catalog:+.1f} stops from the catalog (±{t.exposure_stops:g}): check "
                f"the materials (a missing texture renders its plain base colour)"
            )
    among_variants = stops(light, variant_median)
    if among_variants is not None and abs(among_variants) > t.variant_stops:
        reasons.append(
            f"light on the product {among_variants:+.1f} stops from its other variants "
            f"(±{t.variant_stops:g}): the variants were not lit alike"
        )
    white = (record.albedo or {}).get("white") if record is not None else None
    if isinstance(white, int | float) and white > t.white_base:
        reasons.append(
            f"base colour pure white on {white:.0%} of the visible surface (limit "
            f"{t.white_base:.0%}): a base colour texture missing?"
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
