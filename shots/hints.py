"""Hints about a model's units and up axis, read from its bounding box as loaded.

A fit-to-frame render hides a model exported in centimetres (it is scaled to the frame like any
other) and shows a Z-up model lying on its back, so these hints look at the geometry instead.
Use them on the scene as loaded, before ``shots.presets.apply_model_fixes``. glTF says metres and
+Y up (glTF 2.0 spec §Coordinate System and Units); catalog furniture spans roughly 0.3–3 m.

Units: the largest extent is read in the unit that makes it closest to 1 m on a log scale
(``shots.presets.guess_units``, the same rule as ``units = "auto"``), so 84 units reads as 84 cm
and 840 as 840 mm. A model smaller than 5 cm across is too small for furniture in any unit the
preset offers.

Up axis: a model that stands on the floor of its file is left alone: its lowest point is at y = 0
(the demo convention: origin at the centre of the floor footprint). Otherwise either of two cues
suggests a Z-up export (a +90° turn about X takes Y-up to Z-up: height goes to +Z, depth to −Y):
the model stands on z = 0 with its footprint centred around y = 0, or it is tallest along Z with
a Y extent under 2/3 of its height.
"""

from __future__ import annotations

import numpy as np

from shots.presets import UNIT_NAMES, guess_units
from shots.scene import Scene

TINY_EXTENT = 0.05  # metres: smaller than any piece of furniture (common practice)
FLOOR_TOLERANCE = 0.02  # share of the largest extent that still counts as "on the floor"
THIN_RATIO = 2 / 3  # a Y extent below this share of the Z extent is "thin"
LOW_Z_RATIO = 0.25  # on z = 0 counts only when the Z extent is at least this share of the size


def model_hints(scene: Scene) -> list[str]:
    """Plain-language hints that a model's units or up axis are not glTF's, with the preset fix.

    Parameters
    ----------
    scene : the model as loaded (world space, before any units or up-axis fix).

    Returns
    -------
    list of str, empty when the model looks like metres and +Y up.
    """
    if scene.triangle_count == 0:
        return []
    bounds = scene.bounds()
    extent = bounds[1] - bounds[0]
    hints = []
    units = units_hint(extent)
    if units:
        hints.append(units)
    up = up_axis_hint(bounds)
    if up:
        hints.append(up)
    return hints


def units_hint(extent: np.ndarray) -> str | None:
    """A hint when the (3,) extent reads better in centimetres or millimetres, or is tiny."""
    largest = float(extent.max())
    if largest <= 0.0:
        return None
    unit = guess_units(largest)
    if unit != "m":
        return (
            f"bounds {format_extent(extent)} units: looks like {UNIT_NAMES[unit]} "
            f'(set [model] units = "{unit}")'
        )
    if largest < TINY_EXTENT:
        return (
            f"bounds {format_extent(extent)} units: smaller than {TINY_EXTENT * 100:g} cm read as "
            f"metres; check the export scale"
        )
    return None


def up_axis_hint(bounds: np.ndarray) -> str | None:
    """A hint when the (2, 3) min/max bounds look like a Z-up export (module docstring)."""
    low, high = bounds
    extent = high - low
    size = float(extent.max())
    tolerance = FLOOR_TOLERANCE * size
    if abs(low[1]) <= tolerance:
        return None  # stands on y = 0, the glTF floor
    reasons = []
    straddles_y = low[1] < -tolerance and high[1] > tolerance
    if abs(low[2]) <= tolerance and straddles_y and extent[2] >= LOW_Z_RATIO * size:
        reasons.append("stands on z = 0 with its footprint centred on y = 0")
    if extent[2] == size and extent[1] < THIN_RATIO * extent[2]:
        reasons.append("tallest along Z with a thin Y extent")
    if not reasons:
        return None
    return f'{" and ".join(reasons)}: looks like a Z-up export (set [model] up_axis = "z")'


def format_extent(extent: np.ndarray) -> str:
    """``180 × 75 × 90``: whole numbers from 100 up, three significant digits below."""
    return " × ".join(f"{v:.0f}" if v >= 100 else f"{v:.3g}" for v in extent)
