"""Measuring 8-bit codes in memory gives the numbers of measuring the PNG file (the batch
measures its frames as they arrive), and the fast box sums and dilation match brute force."""

import json
import shutil
from pathlib import Path

import numpy as np
from PIL import Image
from test_batch import TINY  # tests/: the batch tests' small preset (48 px, a 4-frame turntable)
from typer.testing import CliRunner

from shots.batch import run_batch
from shots.check import check_renders, measure_image
from shots.check.measure import box_sum, dilate, measure_codes, texture_detail
from shots.cli import app

DEMO = Path(__file__).resolve().parents[1] / "assets_demo"


def textured_disc(size=64, seed=3) -> np.ndarray:
    """(size, size, 4) uint8: a noisy disc off-centre on a transparent background, with a black
    half-transparent shadow below it (the renderer's shadow-catcher convention)."""
    rng = np.random.default_rng(seed)
    y, x = np.mgrid[:size, :size]
    codes = np.zeros((size, size, 4), np.uint8)
    disc = (x - 0.4 * size) ** 2 + (y - 0.45 * size) ** 2 < (0.25 * size) ** 2
    shadow = (np.abs(y - 0.75 * size) < 2) & (np.abs(x - 0.4 * size) < 0.3 * size) & ~disc
    codes[disc, :3] = rng.integers(60, 255, (disc.sum(), 3))
    codes[disc, 3] = 255
    codes[shadow, 3] = 128
    return codes


def naive_box_sum(values: np.ndarray, radius: int) -> np.ndarray:
    """Every box summed pixel by pixel, clipped to the frame (the definition)."""
    h, w = values.shape
    out = np.zeros((h, w))
    for yy in range(h):
        for xx in range(w):
            out[yy, xx] = values[
                max(0, yy - radius) : yy + radius + 1, max(0, xx - radius) : xx + radius + 1
            ].sum()
    return out


def naive_dilate(mask: np.ndarray, radius: int) -> np.ndarray:
    """A pixel is set when any pixel of its (2·radius + 1)² square is (the definition)."""
    h, w = mask.shape
    return np.array(
        [
            [
                mask[
                    max(0, yy - radius) : yy + radius + 1, max(0, xx - radius) : xx + radius + 1
                ].any()
                for xx in range(w)
            ]
            for yy in range(h)
        ]
    )


def test_box_sum_and_dilate_match_brute_force():
    rng = np.random.default_rng(7)
    values = rng.random((23, 31))
    mask = rng.random((23, 31)) > 0.9
    for radius in (1, 2, 4):
        np.testing.assert_allclose(
            box_sum(values, radius), naive_box_sum(values, radius), rtol=1e-12, atol=1e-12
        )
        assert np.array_equal(dilate(mask, radius), naive_dilate(mask, radius))


def test_texture_detail_matches_a_brute_force_local_mean():
    # The local mean over product pixels only (normalised convolution), as the docstring of
    # texture_detail defines it, computed pixel by pixel on the whole frame.
    codes = textured_disc()
    rgb = codes[..., :3] / 255.0
    mask = codes[..., 3] == 255
    radius = 1
    inside = ~naive_dilate(~np.pad(mask, radius), radius)[radius:-radius, radius:-radius]
    weight = np.maximum(naive_box_sum(mask.astype(float), radius), 1.0)
    local = np.stack([naive_box_sum(rgb[..., c] * mask, radius) / weight for c in range(3)], 2)
    expected = np.median(np.abs(rgb - local)[inside].max(axis=1))
    assert abs(texture_detail(rgb, mask, radius) - expected) < 1e-12
    assert texture_detail(rgb, np.zeros_like(mask), radius) is None


def test_codes_in_memory_measure_as_the_png_file(tmp_path):
    codes = textured_disc()
    path = tmp_path / "disc.png"
    Image.fromarray(codes, "RGBA").save(path)
    from_file = measure_image(path)
    assert from_file.found and from_file.shadow_weight > 0
    assert measure_codes(codes, path) == from_file  # every number, to the bit


def test_batch_report_equals_checking_its_files_afterwards(tmp_path):
    # The batch measures first frames from memory; `shots check` reads the same PNG files.
    catalog = tmp_path / "catalog"
    catalog.mkdir()
    for name in ("oak_dining_chair", "lacquered_counter_stool", "brass_floor_lamp"):
        shutil.copy(DEMO / f"{name}.glb", catalog)
    preset = tmp_path / "tiny.toml"
    preset.write_text(TINY)
    out = tmp_path / "out"
    summary = run_batch(catalog, preset, out, workers=1, quiet=True)
    assert summary.exit_code == 0 and summary.report is not None
    images = sorted(out.glob("*/default/*/000.png"))
    assert len(images) == 6
    again = check_renders(images, report_dir=tmp_path / "again")
    batch_report = json.loads((out / "report.json").read_text())
    file_report = json.loads(again.json_path.read_text())
    # the same numbers and verdicts (file names differ: each is relative to its report)
    assert [(i["metrics"], i["reasons"]) for i in batch_report["images"]] == [
        (i["metrics"], i["reasons"]) for i in file_report["images"]
    ]
    assert batch_report["catalog_medians"] == file_report["catalog_medians"]


def test_check_shot_follows_the_manifests_not_the_file_names(tmp_path):
    # A template without {shot}: the file names do not say which shot a frame is.
    catalog = tmp_path / "catalog"
    catalog.mkdir()
    products = json.loads((DEMO / "catalog.json").read_text(encoding="utf-8"))["products"]
    files = sorted(product["file"] for product in products)[:2]
    for name in files:
        shutil.copy(DEMO / name, catalog)
    preset = tmp_path / "one-shot.toml"
    preset.write_text('extends = "thumbnail"\n[image]\nwidth = 32\nheight = 32\nsamples = 1\n')
    out = tmp_path / "out"
    run_batch(catalog, preset, out, workers=1, quiet=True, template="{model}.png")
    runner = CliRunner()
    result = runner.invoke(app, ["check", str(out), "--shot", "thumbnail", "--json"])
    found = sorted(entry["file"] for entry in json.loads(result.stdout)["images"])
    assert found == [name.replace(".glb", ".png") for name in files]
    result = runner.invoke(app, ["check", str(out), "--shot", "hero"])
    assert result.exit_code == 2 and "no images of shot 'hero'" in result.stderr
