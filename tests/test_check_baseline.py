"""`shots check OUT --against APPROVED` on real renders: a model edit that moves a chair leg is
flagged with a difference picture; a rerun with another seed is not. The chair is found through
assets_demo/catalog.json; the edit moves its first leg node 5 cm (tests/broken_copies.py)."""

from __future__ import annotations

import json
import shutil

import numpy as np
import pytest
from broken_copies import moved_part_copy, product_file
from PIL import Image
from typer.testing import CliRunner

from shots.batch import run_batch
from shots.cli import app

pytestmark = pytest.mark.slow  # three batches of one 96-pixel thumbnail

PRESET = 'extends = "thumbnail"\n[image]\nwidth = 96\nheight = 96\nsamples = 4\n'


@pytest.fixture(scope="module")
def batches(tmp_path_factory):
    root = tmp_path_factory.mktemp("baseline")
    chair = product_file("chair")
    intact, edited = root / "intact", root / "edited"
    intact.mkdir()
    shutil.copy(chair, intact)
    moved_part_copy(chair, edited)
    for name, models, extra in (("approved", intact, ""), ("reseeded", intact, "seed = 7\n"),
                                ("moved", edited, "")):
        preset = root / f"{name}.toml"
        preset.write_text(PRESET + extra, encoding="utf-8")
        run_batch(models, preset, root / name, workers=1, quiet=True, animations=())
    return root


def check_against(batches, name):
    result = CliRunner().invoke(app, ["check", str(batches / name), "--against",
                                      str(batches / "approved"), "--json"])
    return result, json.loads(result.stdout)


def test_a_rerun_with_another_seed_is_not_flagged(batches):
    ours = np.asarray(Image.open(next((batches / "reseeded").rglob("000.png"))))
    approved = np.asarray(Image.open(next((batches / "approved").rglob("000.png"))))
    assert np.any(ours != approved)  # other noise: not the same pixels
    result, report = check_against(batches, "reseeded")
    assert result.exit_code == 0 and report["images_flagged"] == 0
    baseline = report["images"][0]["baseline"]
    assert baseline["approved"].startswith("../approved/")
    assert baseline["ssim"] > 0.98 and baseline["changed_share"] == 0.0
    assert not (batches / "reseeded" / "differences").exists()


def test_a_moved_leg_is_flagged_with_a_difference_picture(batches):
    result, report = check_against(batches, "moved")
    assert result.exit_code == 1 and report["images_flagged"] == 1
    entry = report["images"][0]
    assert any("changed from the approved image" in reason for reason in entry["reasons"])
    baseline = entry["baseline"]
    assert baseline["changed_share"] > 0.01
    picture = np.asarray(Image.open(batches / "moved" / baseline["difference"]))
    # The changed pixels are painted (shots.check.compare.CHANGE_COLOUR, a rose red); they lie
    # in the lower half of the frame, where the legs are.
    painted = (picture[..., 0].astype(int) - picture[..., 1] > 80)
    rows = np.nonzero(painted)[0]
    assert painted.sum() > 20 and np.median(rows) > picture.shape[0] / 2
