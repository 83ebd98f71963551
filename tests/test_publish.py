"""Publish-ready batches: derivatives named by product code, made once per frame and again only
when their settings change; the product table; bad publishing input refused before rendering;
turntable videos converted and tagged as BT.709."""

import io
import json
import shutil
import subprocess
from pathlib import Path

import imageio_ffmpeg
import numpy as np
import pytest
from PIL import Image
from typer.testing import CliRunner

from shots.batch import run_batch
from shots.batch.encode import mp4_bytes
from shots.cli import app
from shots.errors import BatchError, PresetError
from shots.presets import load_preset
from shots.products import load_products

HERE = Path(__file__).parent
SAMPLES = HERE / "data" / "samples"
DEMO = HERE.parent / "assets_demo"

PRESET = """
extends = "thumbnail"
[image]
width = 64
height = 48
samples = 1
light_samples = 1
gloss_samples = 1
bounces = 1
[publish]
products = "products.csv"
copyright = "© 2026 Sawdust Lane Workshop"
[[shots]]
name = "hero"
kind = "views"
views = ["front_left", "front"]
[[derivatives]]
name = "web"
format = "jpeg"
longest_side = 32
background = [1.0, 1.0, 1.0]
quality = 88
path = "web/{sku}_{view}.jpg"
[[derivatives]]
name = "square"
format = "webp"
box = [40, 40]
path = "square/{range}/{sku}_{view}.webp"
"""
PRODUCTS = """model,variant,sku,title,range
Box,,SL-0001,Sample box,misc
oak_dining_chair.glb,default,SL-1101,Oak dining chair,dining
"""


def make_catalog(root: Path, preset: str = PRESET, products: str = PRODUCTS) -> tuple:
    catalog = root / "catalog"
    catalog.mkdir(parents=True)
    shutil.copy(SAMPLES / "Box.gltf", catalog)
    shutil.copy(DEMO / "oak_dining_chair.glb", catalog)
    (root / "products.csv").write_text(products, encoding="utf-8")
    path = root / "publish.toml"
    path.write_text(preset, encoding="utf-8")
    return catalog, path


def batch(catalog, preset, out, log=None):
    return run_batch(catalog, preset, out, quiet=True, workers=1, animations=(),
                     log_json=log)


def rendered_frames(log: Path) -> int:
    lines = [json.loads(line) for line in log.read_text().splitlines()]
    return sum(1 for e in lines if e["event"] == "frame" and e["status"] == "rendered")


@pytest.fixture(scope="module")
def published(tmp_path_factory):
    root = tmp_path_factory.mktemp("publish")
    catalog, preset = make_catalog(root)
    out = root / "out"
    summary = batch(catalog, preset, out)
    return {"root": root, "catalog": catalog, "preset": preset, "out": out, "summary": summary}


def test_derivatives_are_named_by_product_code(published):
    out = published["out"]
    assert published["summary"].exit_code == 0
    assert published["summary"].derivatives_written == 8
    names = sorted(p.relative_to(out).as_posix() for p in out.glob("*/**/*.*")
                   if p.parts[-3] in ("web", "square") or p.parent.name in ("web",))
    assert names == [
        "square/dining/SL-1101_front.webp", "square/dining/SL-1101_front_left.webp",
        "square/misc/SL-0001_front.webp", "square/misc/SL-0001_front_left.webp",
        "web/SL-0001_front.jpg", "web/SL-0001_front_left.jpg",
        "web/SL-1101_front.jpg", "web/SL-1101_front_left.jpg",
    ]


def test_derivative_sizes_tags_and_metadata(published):
    out = published["out"]
    jpeg = Image.open(out / "web/SL-1101_front_left.jpg")
    assert jpeg.size == (32, 24) and jpeg.mode == "RGB"  # 64 × 48, longest side 32
    assert jpeg.info.get("icc_profile")
    assert b"SL-1101" in jpeg.info["xmp"] and b"Oak dining chair" in jpeg.info["xmp"]
    webp = Image.open(out / "square/dining/SL-1101_front_left.webp")
    assert webp.size == (40, 40) and webp.mode == "RGBA"  # box kept transparent
    alpha = np.asarray(webp)[..., 3]
    assert alpha[0].max() == 0 and alpha[-1].max() == 0  # 40 × 30 picture, centred
    master = Image.open(out / "oak_dining_chair/default/hero/000.png")
    assert master.info.get("srgb") == 0  # PNG spec §11.3.3.5


def test_manifest_and_index_list_the_derivatives(published):
    out = published["out"]
    manifest = json.loads((out / "manifests/oak_dining_chair.json").read_text())
    assert manifest["products"]["default"]["sku"] == "SL-1101"
    first = manifest["frames"][0]["derivatives"]
    assert [d["name"] for d in first] == ["web", "square"]
    index = (out / "index.csv").read_text()
    assert "jpeg:web,web/SL-1101_front_left.jpg" in index.replace('"', "")


def test_derivatives_from_memory_equal_those_from_the_master_file(published, tmp_path):
    out = tmp_path / "out"
    shutil.copytree(published["out"], out)
    target = out / "web/SL-0001_front.jpg"
    original = target.read_bytes()
    target.unlink()
    log = tmp_path / "log.jsonl"
    batch(published["catalog"], published["preset"], out, log)
    assert rendered_frames(log) == 0
    assert target.read_bytes() == original


def test_changed_derivative_settings_remake_derivatives_not_frames(published, tmp_path):
    out = tmp_path / "out"
    shutil.copytree(published["out"], out)
    preset = published["root"] / "publish-q60.toml"
    preset.write_text(PRESET.replace("quality = 88", "quality = 60"), encoding="utf-8")
    masters = {p: p.read_bytes() for p in out.rglob("hero/*.png")}
    webp = (out / "square/misc/SL-0001_front.webp").read_bytes()
    jpeg = (out / "web/SL-0001_front.jpg").read_bytes()
    log = tmp_path / "log.jsonl"
    summary = batch(published["catalog"], preset, out, log)
    assert rendered_frames(log) == 0 and summary.derivatives_written == 4  # 2 models × 2 views
    assert all(p.read_bytes() == data for p, data in masters.items())
    assert (out / "web/SL-0001_front.jpg").read_bytes() != jpeg
    assert (out / "square/misc/SL-0001_front.webp").read_bytes() == webp


def test_a_model_missing_from_the_product_table_is_reported(tmp_path):
    catalog, preset = make_catalog(tmp_path, products=PRODUCTS.splitlines()[0] + "\n"
                                   + PRODUCTS.splitlines()[1] + "\n")
    summary = batch(catalog, preset, tmp_path / "out")
    assert summary.exit_code == 1
    [(model, reason)] = summary.failures
    assert model == "oak_dining_chair.glb"
    assert "variant 'default' is not in the product table" in reason
    assert not (tmp_path / "out/web/oak_dining_chair_front.jpg").exists()
    assert (tmp_path / "out/web/SL-0001_front.jpg").is_file()


@pytest.mark.parametrize(("path", "words"), [
    ("../web/{sku}_{view}.jpg", "leaves the output folder"),
    ("web/{view}.jpg", "needs {model} or {sku}: the catalog has several models"),
    ("web/{sku}.jpg", "needs {frame} or {view}"),
    ("web/{sku}_{view}_{colour}.jpg", "unknown field {colour}"),
    ("web/{sku}_{view}.jpg.png", "must end with .jpg or .jpeg"),
])
def test_bad_templates_stop_the_batch_before_rendering(tmp_path, path, words):
    catalog, preset = make_catalog(tmp_path, PRESET.replace('"web/{sku}_{view}.jpg"',
                                                            json.dumps(path)))
    with pytest.raises((BatchError, PresetError)) as caught:
        batch(catalog, preset, tmp_path / "out")
    message = str(caught.value)
    assert message.startswith(str(preset)) and "derivatives[0]" in message, message
    assert words in message, message
    assert not list((tmp_path / "out").rglob("*.png"))


def test_cli_refuses_duplicate_product_codes_on_one_line(tmp_path):
    products = PRODUCTS.replace("SL-1101", "SL-0001")
    catalog, preset = make_catalog(tmp_path, products=products)
    result = CliRunner().invoke(app, ["batch", str(catalog), "-p", str(preset),
                                      "-o", str(tmp_path / "out"), "-q"])
    assert result.exit_code == 2
    lines = result.output.strip().splitlines()
    assert len(lines) == 1, result.output
    assert "products.csv: line 3, sku: 'SL-0001' is already the code of line 2" in lines[0]
    assert not (tmp_path / "out").exists() or not list((tmp_path / "out").rglob("*.png"))


def test_product_columns_without_a_table_are_refused(tmp_path):
    text = PRESET.replace('products = "products.csv"\n', "")
    catalog, preset = make_catalog(tmp_path, text)
    with pytest.raises(BatchError, match=r"unknown field \{sku\}.*need \[publish\] products"):
        batch(catalog, preset, tmp_path / "out")


@pytest.mark.parametrize(("text", "where", "words"), [
    ("sku,title\nA,a\n", "line 1", "needs the column(s) model"),
    ("model,sku,title\nm,A,a\nm,B,b\n", "line 3, model", "listed twice"),
    ("model,sku,title\nm,,a\n", "line 2, sku", "is empty"),
    ("model,sku,title,Shelf Width\nm,A,a,1\n", "line 1", "lower-case"),
    ("model,sku,title,shot\nm,A,a,1\n", "line 1", "shadow"),
])
def test_broken_product_tables_name_line_and_column(tmp_path, text, where, words):
    path = tmp_path / "products.csv"
    path.write_text(text, encoding="utf-8")
    with pytest.raises(PresetError) as caught:
        load_products(path)
    assert str(caught.value).startswith(f"{path}: {where}: ") and words in str(caught.value)


def test_product_rows_are_found_by_file_name_or_stem(tmp_path):
    path = tmp_path / "products.csv"
    path.write_text(PRODUCTS, encoding="utf-8")
    table = load_products(path)
    assert table.lookup("Box.gltf", "default")["sku"] == "SL-0001"
    assert table.lookup("sub/oak_dining_chair.glb", "default")["sku"] == "SL-1101"
    assert table.lookup("Box.gltf", "oak") is None
    assert table.fields == ("sku", "title", "range")


# --- video ------------------------------------------------------------------------------------


def probe(data: bytes, tmp_path: Path) -> tuple[str, np.ndarray]:
    """ffmpeg's stream line for an MP4, and its first frame as raw 8-bit Y'CbCr 4:2:0 planes."""
    path = tmp_path / "clip.mp4"
    path.write_bytes(data)
    ffmpeg = imageio_ffmpeg.get_ffmpeg_exe()
    info = subprocess.run([ffmpeg, "-hide_banner", "-i", str(path)], capture_output=True,
                          text=True).stderr
    stream = next(line for line in info.splitlines() if "Video:" in line)
    raw = subprocess.run([ffmpeg, "-v", "error", "-i", str(path), "-frames:v", "1", "-f",
                          "rawvideo", "-pix_fmt", "yuv420p", "-"], capture_output=True).stdout
    return stream, np.frombuffer(raw, np.uint8)


def test_turntable_video_is_bt709_converted_and_tagged(tmp_path):
    colour = np.array([200, 40, 30])
    frames = [np.broadcast_to(colour.astype(np.uint8), (32, 48, 3)).copy()] * 3
    stream, raw = probe(mp4_bytes(frames, 12.0, (1.0, 1.0, 1.0)), tmp_path)
    # range tv, colour space (matrix) bt709, primaries and transfer bt709: ffmpeg prints one
    # "bt709" when all three agree
    assert "yuv420p(tv, bt709" in stream, stream
    # ITU-R BT.709-6 item 3.2 luma and 3.3 colour differences, limited range (item 4.6):
    # Y' = 16 + 219·(0.2126 R' + 0.7152 G' + 0.0722 B'); BT.601 weights would give Y' = 90
    r, g, b = colour / 255.0
    luma = 0.2126 * r + 0.7152 * g + 0.0722 * b
    expected = (16 + 219 * luma, 128 + 224 * (b - luma) / 1.8556,
                128 + 224 * (r - luma) / 1.5748)
    plane = 32 * 48
    measured = (raw[plane // 2 + 24], raw[plane + plane // 8], raw[plane + plane // 4 + 100])
    assert np.allclose(measured, expected, atol=1.5), (measured, expected)


def test_animated_webp_carries_an_srgb_profile():
    from shots.batch.encode import webp_bytes

    frames = [np.zeros((8, 8, 4), np.uint8)] * 2
    image = Image.open(io.BytesIO(webp_bytes(frames, 12.0)))
    assert image.info.get("icc_profile")


def test_demo_product_table_matches_the_demo_catalog():
    # the demo's storefront names come from presets/demo-products.csv; the catalog description
    # shipped with the models (assets_demo/catalog.json) must agree on every code and variant
    from shots.presets import builtin_folder

    table = load_products(builtin_folder() / "demo-products.csv")
    catalog = json.loads((DEMO / "catalog.json").read_text())
    for product in catalog["products"]:
        row = table.lookup(product["file"], "default")
        assert row is not None and row["sku"] == product["sku"], product["file"]
        assert row["title"] == product["name"]
        for variant in product["variants"]:
            assert table.lookup(product["file"], variant)["sku"].startswith(product["sku"])
    assert {Path(m).stem for m, _ in table.rows} == {p.stem for p in DEMO.glob("*.glb")}


def test_dry_run_counts_what_a_run_then_does_and_writes_nothing(published, tmp_path):
    from shots.batch.preview import preview_batch

    fresh = preview_batch(published["catalog"], published["preset"], tmp_path / "new",
                          workers=1, animations=())
    assert not (tmp_path / "new").exists()
    assert (fresh.frames_to_render, fresh.frames_to_skip, fresh.derivatives_to_make) == (4, 0, 8)
    # the estimate comes from rendering one small frame of the first model to render, and adds
    # up per frame and per derivative (the timings themselves belong in bench/, not here)
    assert fresh.calibrated_on.startswith(Path(fresh.models[0].listed_as).name)
    assert fresh.estimate_seconds == pytest.approx(
        4 * fresh.seconds_per_frame + 8 * fresh.seconds_per_derivative)

    out = tmp_path / "out"
    shutil.copytree(published["out"], out)
    preset = published["root"] / "publish-q70.toml"
    preset.write_text(PRESET.replace("quality = 88", "quality = 70"), encoding="utf-8")
    before = sorted((p, p.stat().st_mtime_ns) for p in out.rglob("*"))
    changed = preview_batch(published["catalog"], preset, out, workers=1, animations=())
    assert sorted((p, p.stat().st_mtime_ns) for p in out.rglob("*")) == before
    # only the JPEG derivative changed: 2 models × 2 views, nothing to render
    assert (changed.frames_to_render, changed.frames_to_skip) == (0, 4)
    # nothing to render: no frame is calibrated, and only the derivatives count
    assert changed.derivatives_to_make == 4
    assert changed.seconds_per_frame is None and changed.calibrated_on == ""
    assert changed.estimate_seconds == pytest.approx(4 * changed.seconds_per_derivative)
    log = tmp_path / "log.jsonl"
    batch(published["catalog"], preset, out, log)
    assert rendered_frames(log) == 0


def test_dry_run_from_the_command_line(published, tmp_path):
    result = CliRunner().invoke(app, ["batch", str(published["catalog"]), "-p",
                                      str(published["preset"]), "-o", str(published["out"]),
                                      "--dry-run", "-j", "1"])
    assert result.exit_code == 0, result.output
    assert "nothing to render or publish" in result.stdout
    assert "oak_dining_chair.glb" in result.stdout


# --- progress where output is not a terminal ----------------------------------------------------


def test_plain_progress_lines_and_log_records(published, tmp_path, monkeypatch, caplog):
    import logging

    from rich.console import Console

    from shots.batch import progress

    monkeypatch.setattr(progress, "PLAIN_INTERVAL", 0.0)  # a "still rendering" line each frame
    stream = io.StringIO()
    console = Console(file=stream, force_terminal=False, width=200)
    with caplog.at_level(logging.INFO, logger="shots.batch"):
        run_batch(published["catalog"], published["preset"], tmp_path / "out", workers=1,
                  animations=(), console=console)
    lines = stream.getvalue().splitlines()
    done = [line for line in lines if line.startswith("done ")]
    assert [line.split(",")[0] for line in done] == [
        "done 1/2 Box: 2 rendered", "done 2/2 oak_dining_chair: 2 rendered"]
    assert any(line.startswith("… Box: 1 frame(s) done; 1/4 frames in all") for line in lines)
    assert "\x1b" not in stream.getvalue()  # no terminal escapes in a CI log
    messages = [r.getMessage() for r in caplog.records if r.name == "shots.batch"]
    assert any(m.startswith("done 2/2 oak_dining_chair") for m in messages)


def test_a_derivative_landing_on_a_master_frame_stops_the_batch(tmp_path):
    text = PRESET.replace('format = "webp"', 'format = "png"').replace(
        '"square/{range}/{sku}_{view}.webp"', '"{model}/{variant}/{shot}/{frame}.png"')
    catalog, preset = make_catalog(tmp_path, text)
    with pytest.raises(BatchError, match=r"derivatives: .*two of its outputs would be"):
        batch(catalog, preset, tmp_path / "out")
    assert not list((tmp_path / "out").rglob("*.png"))


def test_avif_without_libavif_is_a_clear_error(tmp_path, monkeypatch):
    from PIL import features

    monkeypatch.setattr(features, "check", lambda name: name != "avif")
    preset = tmp_path / "p.toml"
    preset.write_text('[[derivatives]]\nname = "a"\nformat = "avif"\nlongest_side = 9\n'
                      'path = "a/{model}.avif"\n')
    with pytest.raises(PresetError, match=r"derivatives\[0\]: .*cannot write AVIF"):
        load_preset(preset)


def test_contact_sheet_is_tagged_srgb(published):
    sheet = Image.open(published["out"] / "contact_sheet.png")
    assert sheet.info.get("srgb") == 0  # PNG spec §11.3.3.5
