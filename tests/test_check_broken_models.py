"""The consistency report on real renders of deliberately broken copies of the demo models.

tests/test_check.py proves the measurements on drawn images whose right answers are known; here
the demo models go through the renderer and a catalog batch (``shots.batch.run_batch``,
which writes the report at its end), with broken copies (tests/broken_copies.py) beside intact
ones, at 96 × 96 pixels.

An auto-framing thumbnail scales and centres every model to its frame, so it hides a model in
centimetres and an off-centre pivot (``test_auto_framing_hides_scale_and_pivot``). Each fault is
therefore rendered the way a practitioner would look for it:

=================  ===========================================  ==================================
fault              catalog                                      how it shows
=================  ===========================================  ==================================
scaled ×100 (cm)   fixed-scale line-up (catalog-scale's metres  the model overflows the frame
                   per frame, orthographic)
off-centre pivot   locked camera, straight on, over the floor   moved sideways off the centre line
rotated Z-up       thumbnails, floor at the file's y = 0        half below the floor: what shows
                                                                sits high in the centred frame
texture removed    thumbnails                                   the albedo pass reads pure white
=================  ===========================================  ==================================

glTF puts the floor at y = 0 for a product that stands on its origin (glTF 2.0 spec §Coordinate
System and Units: metres, +Y up; the demo convention: origin at the centre of the floor
footprint, assets_demo/catalog.json), so the thumbnails and the locked camera here put the
shadow catcher at y = 0 instead of at each model's lowest point. Intact models stand on it
exactly as they do by default.
"""

from __future__ import annotations

import json
from pathlib import Path

import numpy as np
import pygltflib
import pytest
import trimesh
from broken_copies import (
    intact_copy,
    scaled_copy,
    shifted_copy,
    untextured_copy,
    z_up_copy,
)

from shots.batch import run_batch
from shots.check import Tolerances
from shots.presets import load_preset

pytestmark = pytest.mark.slow  # about 25 renders and three batches

SIZE = 96
INTACT = [
    "oak_dining_chair", "lacquered_counter_stool", "brass_floor_lamp", "wool_sofa",
    "oak_dining_table", "ash_bookcase",
]  # fmt: skip
CHAIR, LAMP, TABLE = "oak_dining_chair", "brass_floor_lamp", "oak_dining_table"
LIMITS = Tolerances()  # the batch checks with the default tolerances

# 96 px frames with the floor at the file's y = 0 (where a Z-up export sinks through it).
SMALL_ON_FILE_FLOOR = f"""
[image]
width = {SIZE}
height = {SIZE}
[ground]
height = 0.0
"""
THUMBNAILS = 'extends = "thumbnail"' + SMALL_ON_FILE_FLOOR  # the shipped thumbnail, small


def lineup_preset() -> str:
    """catalog-scale at 96 px showing the same metres per frame (its pixels per metre scaled by
    96 / its height), orthographic. The shipped perspective line-up refuses to plan a model 100
    times too large (the camera would stand inside it), so nothing would reach the report; an
    orthographic camera at the same scale renders it, as a frame-filling close-up."""
    shipped = load_preset("catalog-scale")
    shot = shipped.shots[0]
    pixels_per_metre = shot.pixels_per_metre * SIZE / shipped.image.height
    return f"""
extends = "catalog-scale"
[image]
width = {SIZE}
height = {SIZE}
[[shots]]
name = "lineup"
kind = "views"
views = {json.dumps(shot.views)}
elevation_deg = {shot.elevation_deg}
framing = "scale"
pixels_per_metre = {pixels_per_metre}
projection = "orthographic"
"""


# A locked camera: a one-frame path in world metres, straight on from the front (+Z) and a
# little above, aimed at a point over the origin. An 85 mm lens on a 36 mm sensor shows
# 2 · distance · 18/85 metres across (pinhole camera), about 2.4 m here: the widest product (the
# 2 m sofa) and the tallest (the 1.8 m bookcase) fit.
LOCKED_EYE, LOCKED_TARGET, LOCKED_FOCAL = (0.0, 1.9, 5.6), (0.0, 0.9, 0.0), 85.0
LOCKED = THUMBNAILS + f"""
[[shots]]
name = "locked"
kind = "path"
space = "world"
frames = 1
focal_length_mm = {LOCKED_FOCAL}
keys = [{{ eye = {list(LOCKED_EYE)}, target = {list(LOCKED_TARGET)} }},
        {{ eye = {list(LOCKED_EYE)}, target = {list(LOCKED_TARGET)} }}]
"""


def run_catalog(root: Path, preset_text: str, broken) -> dict:
    """Batch-render the intact demo models and the ``broken`` copies (functions of a folder
    returning a .glb path) with ``preset_text``; the report's entries by model file stem."""
    models = root / "models"
    for name in INTACT:
        intact_copy(name, models)
    for make in broken:
        make(models)
    preset = root / "preset.toml"
    preset.write_text(preset_text, encoding="utf-8")
    out = root / "out"
    summary = run_batch(models, preset, out, workers=1, quiet=True, animations=())
    assert summary.exit_code == 0 and summary.failures == []
    report = json.loads((out / "report.json").read_text(encoding="utf-8"))
    entries = {Path(entry["file"]).parts[0]: entry for entry in report["images"]}
    assert len(entries) == len(INTACT) + len(broken)  # one still per model
    # The batch's summary lists the same flags as its report.
    flagged = {Path(path).relative_to(out).parts[0] for path, _ in summary.flagged}
    assert flagged == {name for name, entry in entries.items() if entry["flagged"]}
    return {"entries": entries, "notes": report["notes"], "out": out}


@pytest.fixture(scope="module")
def thumbnails(tmp_path_factory):
    return run_catalog(tmp_path_factory.mktemp("thumbnails"), THUMBNAILS, [
        lambda folder: z_up_copy(CHAIR, folder),
        lambda folder: untextured_copy(TABLE, folder),
        lambda folder: scaled_copy(CHAIR, folder),  # hidden by auto-framing
        lambda folder: shifted_copy(CHAIR, folder),  # hidden by auto-framing
    ])  # fmt: skip


@pytest.fixture(scope="module")
def lineup(tmp_path_factory):
    return run_catalog(tmp_path_factory.mktemp("lineup"), lineup_preset(), [
        lambda folder: scaled_copy(CHAIR, folder),
        lambda folder: scaled_copy(LAMP, folder),
    ])  # fmt: skip


@pytest.fixture(scope="module")
def locked(tmp_path_factory):
    return run_catalog(tmp_path_factory.mktemp("locked"), LOCKED, [
        lambda folder: shifted_copy(CHAIR, folder),
    ])  # fmt: skip


def flagged(catalog) -> dict[str, list[str]]:
    return {name: entry["reasons"] for name, entry in catalog["entries"].items() if entry["flagged"]}


def metrics(catalog, name: str) -> dict:
    return catalog["entries"][name]["metrics"]


def has_reason(reasons: list[str], *words: str) -> bool:
    return any(all(word in reason for word in words) for reason in reasons)


# --- the broken copies are broken as intended (read back with trimesh, an independent loader) --


def world_bounds(path: Path) -> np.ndarray:
    """(2, 3) bounds of the whole scene with its node transforms, as trimesh reads the file."""
    return np.asarray(trimesh.load(path, force="scene").bounds)


def test_the_broken_copies_have_their_fault_and_no_other(tmp_path):
    intact = world_bounds(intact_copy(CHAIR, tmp_path))
    np.testing.assert_allclose(world_bounds(scaled_copy(CHAIR, tmp_path)), 100 * intact,
                               rtol=1e-5, atol=1e-4)  # fmt: skip
    np.testing.assert_allclose(world_bounds(shifted_copy(CHAIR, tmp_path)),
                               intact + [0.3, 0.0, 0.0], atol=1e-6)  # fmt: skip
    # +90° about X: (x, y, z) -> (x, -z, y), so the height goes to +Z and the front to -Y.
    turned = world_bounds(z_up_copy(CHAIR, tmp_path))
    np.testing.assert_allclose(turned[:, 0], intact[:, 0], atol=1e-6)
    np.testing.assert_allclose(turned[:, 1], -intact[::-1, 2], atol=1e-6)
    np.testing.assert_allclose(turned[:, 2], intact[:, 1], atol=1e-6)
    assert abs(intact[0, 1]) < 1e-6  # the intact chair stands on y = 0
    # Only the texture reference goes; the geometry is untouched.
    untextured = untextured_copy(TABLE, tmp_path)
    np.testing.assert_allclose(world_bounds(untextured), world_bounds(intact_copy(TABLE, tmp_path)))
    doc = pygltflib.GLTF2.load_binary(str(untextured))
    assert all(m.pbrMetallicRoughness.baseColorTexture is None for m in doc.materials)


# --- thumbnails: Z-up and missing texture ---------------------------------------------------------


def test_thumbnails_flag_the_z_up_and_untextured_copies_only(thumbnails):
    assert set(flagged(thumbnails)) == {f"{CHAIR}-z-up", f"{TABLE}-no-texture"}
    reasons = flagged(thumbnails)
    # Half of the Z-up chair is below the floor and does not show; the planner framed all of it,
    # so what shows sits high (+y is down).
    assert has_reason(reasons[f"{CHAIR}-z-up"], "off centre", "up axis")
    assert metrics(thumbnails, f"{CHAIR}-z-up")["centre_offset"][1] < -LIMITS.centre_offset
    # Without its texture the table is its white base colour factor (glTF 2.0 spec §Materials:
    # base colour = factor × texture): its albedo pass reads pure white on all of it. The light
    # it received is that of the others, so the exposure check keeps quiet about it.
    untextured = thumbnails["entries"][f"{TABLE}-no-texture"]
    assert has_reason(reasons[f"{TABLE}-no-texture"], "base colour pure white", "texture")
    assert untextured["frame"]["albedo"]["white"] > 0.95
    assert thumbnails["entries"][TABLE]["frame"]["albedo"]["white"] < 0.05
    for name in (TABLE, f"{TABLE}-no-texture"):
        assert abs(metrics(thumbnails, name)["exposure_stops"]) < LIMITS.exposure_stops


def test_auto_framing_hides_scale_and_pivot(thumbnails):
    # The reason the other two catalogs exist: framed to the frame, the chair in centimetres and
    # the chair off its origin look like the intact chair, to the pixel.
    intact = metrics(thumbnails, CHAIR)
    for fault in ("x100", "off-centre"):
        copy = metrics(thumbnails, f"{CHAIR}-{fault}")
        assert copy["bbox"] == intact["bbox"], fault
        assert copy["area_fraction"] == pytest.approx(intact["area_fraction"], abs=2 / SIZE**2)


# --- fixed-scale line-up: centimetres -------------------------------------------------------------


def test_lineup_flags_the_centimetre_models_only(lineup):
    reasons = flagged(lineup)
    assert set(reasons) == {f"{CHAIR}-x100", f"{LAMP}-x100"}
    # The chair's seat covers the whole frame; the lamp's stem, a hundred times thicker,
    # crosses it from edge to edge. Since the environment's occlusion is traced, the seat
    # darkens toward the chair's back (with sampling grain), so the frame is no longer one
    # colour and the check may read the darker part as an off-centre product: either reason
    # sends the reader to the model.
    assert (has_reason(reasons[f"{CHAIR}-x100"], "edge to edge", "units")
            or has_reason(reasons[f"{CHAIR}-x100"], "off centre", "pivot"))
    assert has_reason(reasons[f"{LAMP}-x100"], "frame edge", "units")
    assert metrics(lineup, f"{LAMP}-x100")["touches_edge"]


def test_lineup_does_not_hold_intact_models_to_one_fill(lineup):
    # At one scale a stool fills less of the frame than a sofa: the fills of the intact models
    # spread, so the report compares neither fill nor vertical centre, and says so.
    fills = [metrics(lineup, name)["fill"] for name in INTACT]
    assert max(fills) - min(fills) > 0.3
    assert any("fill and vertical centre not compared" in note for note in lineup["notes"])


# --- locked camera: off-centre pivot --------------------------------------------------------------


def test_locked_camera_flags_the_off_centre_pivot_only(locked):
    reasons = flagged(locked)
    assert set(reasons) == {f"{CHAIR}-off-centre"}
    assert has_reason(reasons[f"{CHAIR}-off-centre"], "off centre", "pivot")
    # Pinhole projection: 0.3 m sideways at the camera's distance is 0.3 / (2 d tan(xfov/2)) of
    # the frame width, with tan(xfov/2) = 18 mm / 85 mm; the chair's near and far sides lie up to
    # 0.25 m off that distance, hence 10 %. +x is to the right seen from +Z.
    distance = float(np.linalg.norm(np.subtract(LOCKED_EYE, LOCKED_TARGET)))
    expected = 0.3 / (2 * distance * 18.0 / LOCKED_FOCAL)
    shifted = metrics(locked, f"{CHAIR}-off-centre")["centre_offset"][0]
    assert shifted == pytest.approx(expected, rel=0.1)
    # The intact products, of every height, stand on the centre line.
    for name in INTACT:
        assert abs(metrics(locked, name)["centre_offset"][0]) <= 1 / SIZE, name
