"""Catalog batches end to end: the tree a batch writes, incremental reruns, a killed run that
resumes byte for byte, broken models that fail alone, and the same bytes from local worker
processes and from a Dask cluster."""

import hashlib
import json
import multiprocessing
import os
import random
import shutil
import signal
import struct
import subprocess
import sys
import time
import zlib
from pathlib import Path

import imageio.v3 as iio
import numpy as np
import pytest
import typer
from PIL import Image
from typer.testing import CliRunner

import shots
from shots.batch import jobs, run_batch
from shots.batch.cli_command import batch
from shots.batch.layout import Layout
from shots.batch.runner import local_workers
from shots.batch.sheet import CAPTION_LINES, LINE_HEIGHT, PAD, THUMB
from shots.errors import BatchError
from shots.gltf import load_scene
from shots.pipeline import render_model
from shots.planner import plan_frames
from shots.presets import apply_model_fixes, load_preset

HERE = Path(__file__).parent
SAMPLES = HERE / "data" / "samples"
HOSTILE = HERE / "data" / "hostile"
DEMO = HERE.parent / "assets_demo"

# A tiny catalog look: the built-in thumbnail preset at 48 px with one sample, one still and a
# four-frame turntable.
TINY = """
extends = "thumbnail"
[image]
width = 48
height = 48
samples = 1
light_samples = 1
gloss_samples = 1
bounces = 1
seed = 5
[[shots]]
name = "hero"
kind = "views"
views = ["front_left"]
[[shots]]
name = "spin"
kind = "turntable"
frames = 4
"""
VARIANTS = {"Box": ["default"], "Box-With-Spaces": ["default"],
            "oak_dining_chair": ["default"], "wool_sofa": ["oat", "slate", "moss"]}
SHOTS = {"hero": 1, "spin": 4}
FRAMES = sum(len(v) for v in VARIANTS.values()) * sum(SHOTS.values())  # 30


def make_catalog(folder: Path) -> Path:
    """Two Khronos samples (one with external files in a sub-folder) and two demo models."""
    folder.mkdir(parents=True)
    shutil.copy(SAMPLES / "Box.gltf", folder)
    shutil.copytree(SAMPLES / "BoxWithSpaces", folder / "spaces")
    shutil.copy(DEMO / "oak_dining_chair.glb", folder)
    shutil.copy(DEMO / "wool_sofa.glb", folder)
    return folder


def write_preset(folder: Path, text: str = TINY) -> Path:
    path = folder / "tiny.toml"
    path.write_text(text)
    return path


def quiet_batch(source, preset, out, **options):
    return run_batch(source, preset, out, quiet=True, **options)


@pytest.fixture(scope="module")
def reference(tmp_path_factory):
    """An uninterrupted in-process run over the catalog with every variant."""
    root = tmp_path_factory.mktemp("reference")
    catalog = make_catalog(root / "catalog")
    preset = write_preset(root)
    out = root / "out"
    summary = quiet_batch(catalog, preset, out, variants="all", workers=1,
                          log_json=root / "log.jsonl")
    return {"root": root, "catalog": catalog, "preset": preset, "out": out, "summary": summary}


def strip_timings(value):
    if isinstance(value, dict):
        return {k: strip_timings(v) for k, v in value.items() if k != "timings"}
    if isinstance(value, list):
        return [strip_timings(v) for v in value]
    return value


def tree(out: Path) -> dict[str, bytes]:
    """Every file of an output tree; manifests without their timings (which always differ)."""
    files = {}
    for path in sorted(out.rglob("*")):
        if not path.is_file() or path.name == ".shots-batch.lock":
            continue
        relative = path.relative_to(out).as_posix()
        data = path.read_bytes()
        if relative.startswith("manifests/"):
            data = json.dumps(strip_timings(json.loads(data)), sort_keys=True).encode()
        files[relative] = data
    return files


def expected_files() -> set[str]:
    files = {"index.json", "index.csv", "contact_sheet.png", "report.md", "report.json",
             "review.html"}
    for model, variants in VARIANTS.items():
        files.add(f"manifests/{model}.json")
        for variant in variants:
            for shot, count in SHOTS.items():
                files.update(f"{model}/{variant}/{shot}/{k:03d}.png" for k in range(count))
            files.update(f"{model}/{variant}/spin.{ext}" for ext in ("gif", "webp", "mp4"))
    return files


def events(log: Path) -> list[dict]:
    return [json.loads(line) for line in log.read_text().splitlines()]


# --- one run ---------------------------------------------------------------------------------


def test_batch_writes_the_expected_tree(reference):
    summary, out = reference["summary"], reference["out"]
    assert summary.exit_code == 0 and summary.failures == []
    assert summary.frames_rendered == FRAMES and summary.animations_written == 6 * 3
    assert set(tree(out)) == expected_files()
    for path in out.rglob("*.png"):
        if path.name != "contact_sheet.png":  # the report embeds no images of its own
            with Image.open(path) as image:
                assert image.size == (48, 48) and image.mode == "RGBA"


def test_batch_frames_equal_the_single_model_pipeline(reference, tmp_path):
    # The same frame through shots.pipeline.render_model (one model, no batch) has the same bytes
    written = render_model(reference["catalog"] / "oak_dining_chair.glb", tmp_path,
                           load_preset(reference["preset"]))
    single = {(r.frame.shot, r.frame.index): r.path.read_bytes() for r in written}
    out = reference["out"] / "oak_dining_chair" / "default"
    assert single[("hero", 0)] == (out / "hero" / "000.png").read_bytes()
    assert single[("spin", 3)] == (out / "spin" / "003.png").read_bytes()


def test_variants_render_their_own_materials(reference):
    out = reference["out"] / "wool_sofa"
    heroes = {v: (out / v / "hero" / "000.png").read_bytes() for v in ("oat", "slate", "moss")}
    assert len(set(heroes.values())) == 3


def test_manifest_records_hashes_cameras_and_seeds(reference):
    out, catalog = reference["out"], reference["catalog"]
    preset = load_preset(reference["preset"])
    data = json.loads((out / "manifests" / "wool_sofa.json").read_text())
    model = catalog / "wool_sofa.glb"
    assert data["sha256"] == hashlib.sha256(model.read_bytes()).hexdigest()
    assert data["preset_sha256"] == jobs.preset_sha256(preset)
    assert data["renderer_version"] == shots.__version__
    assert data["variants"] == ["oat", "slate", "moss"]  # KHR_materials_variants, file order
    assert len(data["frames"]) == 15
    planned = {(f.shot, f.index): f for f in
               plan_frames(preset, apply_model_fixes(load_scene(model), preset))}
    for entry in data["frames"]:
        frame = planned[(entry["shot"], entry["frame"])]
        # the planner's seed rule, CRC-32 of "base:shot:index" (shots.planner.frame_seed)
        assert entry["seed"] == zlib.crc32(f"5:{entry['shot']}:{entry['frame']}".encode())
        assert entry["camera"] == json.loads(json.dumps(frame.to_json()))
        assert entry["timings"]["render_s"] > 0
        assert (out / entry["path"]).is_file()
    assert {(a["variant"], a["format"]) for a in data["animations"]} == {
        (v, f) for v in ("oat", "slate", "moss") for f in ("gif", "webp", "mp4")}


def test_catalog_index_lists_every_file(reference):
    out = reference["out"]
    index = json.loads((out / "index.json").read_text())
    assert [m["status"] for m in index["models"]] == ["ok"] * 4
    assert len(index["frames"]) == FRAMES and len(index["animations"]) == 18
    rows = (out / "index.csv").read_text().splitlines()
    assert len(rows) == 1 + FRAMES + 18
    listed = {row.split(",")[6] for row in rows[1:]}
    assert listed == expected_files() - {
        "index.json", "index.csv", "contact_sheet.png", "report.md", "report.json",
        "review.html"} - {
        f"manifests/{m}.json" for m in VARIANTS}


def test_contact_sheet_has_a_row_per_model_variant(reference):
    with Image.open(reference["out"] / "contact_sheet.png") as sheet:
        cell_h = THUMB + PAD + CAPTION_LINES * LINE_HEIGHT + PAD
        assert sheet.size == (2 * (THUMB + 2 * PAD), 6 * cell_h)  # 2 shots × 6 model-variants
        pixels = np.asarray(sheet.convert("RGB"))
    hero = np.asarray(Image.open(reference["out"] / "Box" / "default" / "hero" / "000.png"))
    # the 48 px thumbnail sits centred in the first cell; where the render is opaque it matches
    x0 = PAD + (THUMB - 48) // 2
    opaque = hero[..., 3] == 255
    assert opaque.any()
    assert np.array_equal(pixels[x0 : x0 + 48, x0 : x0 + 48][opaque], hero[..., :3][opaque])


def test_animations_read_back(reference):
    out = reference["out"] / "oak_dining_chair" / "default"
    gif = iio.imread(out / "spin.gif", index=None)
    assert gif.shape[:3] == (4, 48, 48)
    with Image.open(out / "spin.gif") as image:
        assert image.info["loop"] == 0
    mp4 = iio.imread(out / "spin.mp4", index=None)
    assert mp4.shape == (4, 48, 48, 3)
    with Image.open(out / "spin.webp") as image:
        assert image.n_frames == 4 and image.info["loop"] == 0
    # GIF and MP4 are flattened onto white (the thumbnail preset is transparent): a corner
    # pixel that the PNG leaves fully transparent is white there
    first = np.asarray(Image.open(out / "spin" / "000.png"))
    assert first[0, 0, 3] == 0
    assert gif[0, 0, 0, :3].tolist() == [255, 255, 255]
    assert np.all(mp4[0, 0, 0] > 245)  # lossy H.264


def test_log_has_an_event_per_frame_and_a_summary(reference):
    log = events(reference["root"] / "log.jsonl")
    frames = [e for e in log if e["event"] == "frame"]
    assert len(frames) == FRAMES and {e["status"] for e in frames} == {"rendered"}
    assert log[-1]["event"] == "summary" and log[-1]["rendered"] == FRAMES
    assert log[-1]["exit_code"] == 0


# --- incremental reruns ----------------------------------------------------------------------


def copy_run(reference, tmp_path):
    catalog = tmp_path / "catalog"
    shutil.copytree(reference["catalog"], catalog)
    out = tmp_path / "out"
    shutil.copytree(reference["out"], out)
    return catalog, out


def test_second_run_renders_nothing(reference, tmp_path):
    catalog, out = copy_run(reference, tmp_path)
    before = {p: (p.stat().st_mtime_ns, p.read_bytes()) for p in out.rglob("*") if p.is_file()}
    summary = quiet_batch(catalog, reference["preset"], out, variants="all", workers=1,
                          log_json=tmp_path / "log.jsonl")
    assert summary.frames_rendered == 0 and summary.frames_skipped == FRAMES
    assert summary.animations_written == 0
    after = {p: (p.stat().st_mtime_ns, p.read_bytes()) for p in out.rglob("*") if p.is_file()}
    assert after == before  # not one file rewritten
    statuses = {e["status"] for e in events(tmp_path / "log.jsonl") if e["event"] == "frame"}
    assert statuses == {"skipped"}


def test_touching_one_model_rerenders_only_its_frames(reference, tmp_path):
    catalog, out = copy_run(reference, tmp_path)
    model = catalog / "Box.gltf"
    document = json.loads(model.read_text())
    document["materials"][0]["pbrMetallicRoughness"]["baseColorFactor"] = [0.2, 0.6, 0.2, 1.0]
    model.write_text(json.dumps(document))
    summary = quiet_batch(catalog, reference["preset"], out, variants="all", workers=1,
                          log_json=tmp_path / "log.jsonl")
    assert {m.model: m.rendered for m in summary.models} == {
        "Box": 5, "Box-With-Spaces": 0, "oak_dining_chair": 0, "wool_sofa": 0}
    rendered = [e for e in events(tmp_path / "log.jsonl") if e.get("status") == "rendered"]
    assert {e["model"] for e in rendered} == {"Box"}
    old, new = tree(reference["out"]), tree(out)
    changed = {path for path in old if old[path] != new[path]}
    assert "Box/default/hero/000.png" in changed  # the new colour shows
    assert all(p.startswith(("Box/", "manifests/Box.json", "index.", "contact_sheet", "report.",
                             "review.")) for p in changed)


def test_touching_an_external_texture_rerenders_its_model(reference, tmp_path):
    catalog, out = copy_run(reference, tmp_path)
    texture = catalog / "spaces" / "glTF Logo With Spaces.png"
    with Image.open(texture) as image:
        image.convert("RGB").transpose(Image.Transpose.FLIP_LEFT_RIGHT).save(texture)
    summary = quiet_batch(catalog, reference["preset"], out, variants="all", workers=1)
    assert {m.model: m.rendered for m in summary.models}["Box-With-Spaces"] == 5
    assert summary.frames_rendered == 5


def test_changing_the_preset_rerenders_everything(reference, tmp_path):
    catalog, out = copy_run(reference, tmp_path)
    preset = write_preset(tmp_path, TINY.replace("seed = 5", "seed = 6"))
    summary = quiet_batch(catalog, preset, out, variants="all", workers=1)
    assert summary.frames_rendered == FRAMES and summary.frames_skipped == 0
    forced = quiet_batch(catalog, preset, out, variants="all", workers=1, force=True)
    assert forced.frames_rendered == FRAMES


# --- a killed run resumes -------------------------------------------------------------------

RUN_IN_CHILD = """
import sys
from shots.batch import run_batch
summary = run_batch(sys.argv[1], sys.argv[2], sys.argv[3], variants="all", workers=2,
                    quiet=True, log_json=sys.argv[4])
sys.exit(summary.exit_code)
"""


def descendants(pid: int) -> list[int]:
    """Child processes, recursively, from Linux's /proc/PID/task/TID/children (proc(5))."""
    found = []
    for children in Path(f"/proc/{pid}/task").glob("*/children"):
        for child in children.read_text().split():
            found += [int(child), *descendants(int(child))]
    return found


@pytest.mark.slow
@pytest.mark.skipif(not Path("/proc/self/task").is_dir(), reason="needs Linux /proc")
def test_killed_run_resumes_to_identical_bytes(reference, tmp_path):
    rng = random.Random(20240611)  # fixed: the same kill moment on every run of the test
    after_frames, extra_delay = rng.randint(1, 15), rng.uniform(0.0, 0.05)
    out, log = tmp_path / "out", tmp_path / "log.jsonl"
    child = subprocess.Popen(
        [sys.executable, "-c", RUN_IN_CHILD, str(reference["catalog"]),
         str(reference["preset"]), str(out), str(log)],
        stdout=subprocess.DEVNULL, stderr=subprocess.PIPE,
    )
    deadline = time.monotonic() + 120
    while time.monotonic() < deadline and child.poll() is None:
        if log.exists() and log.read_text().count('"rendered"') >= after_frames:
            break
        time.sleep(0.005)
    time.sleep(extra_delay)
    workers = descendants(child.pid)
    child.send_signal(signal.SIGKILL)
    child.wait()
    assert child.returncode == -signal.SIGKILL, "the batch finished before it could be killed"
    assert workers, "the batch had started no worker processes"
    # the workers notice that the batch is gone and leave (they write nothing in any case)
    deadline = time.monotonic() + 15
    while time.monotonic() < deadline and any(Path(f"/proc/{p}").exists() for p in workers):
        time.sleep(0.05)
    assert not [p for p in workers if Path(f"/proc/{p}").exists()], "orphaned workers live on"
    # whatever the kill left under real names is complete: PNGs decode, manifests parse
    for path in out.rglob("*.png"):
        with Image.open(path) as image:
            image.load()
    for path in out.rglob("*.json"):
        json.loads(path.read_text())
    assert not (out / "index.json").exists()  # the catalog files come last

    summary = quiet_batch(reference["catalog"], reference["preset"], out, variants="all",
                          workers=1)
    assert summary.exit_code == 0
    assert 0 < summary.frames_skipped and summary.frames_rendered < FRAMES
    assert tree(out) == tree(reference["out"])
    assert not [p for p in out.rglob("*.part")], "a temporary file survived"


# --- faults -------------------------------------------------------------------------------------


def test_broken_models_fail_alone(tmp_path):
    models = tmp_path / "models"
    models.mkdir()
    shutil.copy(SAMPLES / "Box.gltf", models)
    shutil.copy(HOSTILE / "index_out_of_range.gltf", models / "hostile.gltf")
    shutil.copytree(SAMPLES / "BoxWithSpaces", models / "spaces")
    (models / "spaces" / "glTF Logo With Spaces.png").unlink()  # a missing texture
    listing = tmp_path / "catalog.txt"
    listing.write_text("models/Box.gltf\nmodels/hostile.gltf\n"
                       "models/spaces/Box With Spaces.gltf\nmodels/gone.glb\n")
    preset = write_preset(tmp_path)
    app = typer.Typer()
    app.command()(batch)
    result = CliRunner().invoke(app, [str(listing), "--preset", str(preset), "-o",
                                      str(tmp_path / "out"), "--log-json",
                                      str(tmp_path / "log.jsonl"), "--animations", "gif"])
    assert result.exit_code == 1, result.output
    output = " ".join(result.output.split())
    # the loader's field paths for these faults (tests/data/hostile/expected.json, and a
    # missing image is the image's uri)
    assert "meshes[0].primitives[0].indices" in output
    assert "images[" in output and "not found" in output
    assert "gone.glb: no such model file" in output
    index = json.loads((tmp_path / "out" / "index.json").read_text())
    assert [(m["model"], m["status"]) for m in index["models"]] == [
        ("Box", "ok"), ("hostile", "failed"), ("Box-With-Spaces", "failed"), ("gone", "failed")]
    assert len(index["frames"]) == 5
    assert (tmp_path / "out" / "Box" / "default" / "spin.gif").is_file()
    log = events(tmp_path / "log.jsonl")
    assert log[-1]["event"] == "summary" and log[-1]["failed"] == 3
    assert {e["model"] for e in log if e.get("status") == "failed" and e["event"] == "frame"} \
        == {"hostile", "Box-With-Spaces", "gone"}


def test_models_with_the_same_name_do_not_overwrite_each_other(tmp_path):
    catalog = tmp_path / "catalog"
    for folder in ("a", "b"):
        (catalog / folder).mkdir(parents=True)
        shutil.copy(SAMPLES / "Box.gltf", catalog / folder / "Box.gltf")
    preset = write_preset(tmp_path, TINY.replace('frames = 4', 'frames = 1'))
    summary = quiet_batch(catalog, preset, tmp_path / "out", workers=1, animations=())
    assert [m.error is None for m in summary.models] == [True, False]
    assert "a/Box.gltf" in summary.failures[0][1] and summary.exit_code == 1


def test_template_must_tell_models_apart(tmp_path):
    catalog = make_catalog(tmp_path / "catalog")
    with pytest.raises(BatchError, match=r"\{model\}"):
        quiet_batch(catalog, write_preset(tmp_path), tmp_path / "out",
                    template="{shot}/{frame}.png")


def test_16_bit_png_and_linear_exr(tmp_path):
    openexr = pytest.importorskip("OpenEXR")
    catalog = tmp_path / "catalog"
    catalog.mkdir()
    shutil.copy(SAMPLES / "Box.gltf", catalog)
    summary = quiet_batch(catalog, write_preset(tmp_path), tmp_path / "out", workers=1,
                          bits=16, exr=True, animations=("gif",),
                          template="{model}-{shot}-{frame}.png")
    assert summary.exit_code == 0
    png = tmp_path / "out" / "Box-hero-000.png"
    # PNG spec §11.2.2: IHDR holds width, height (4 bytes each), then bit depth, colour type
    width, height, depth, colour = struct.unpack(">IIBB", png.read_bytes()[16:26])
    assert (width, height, depth, colour) == (48, 48, 16, 6)  # colour type 6 = RGBA
    with openexr.File(str(png.with_suffix(".exr")), separate_channels=True) as exr:
        names = set(exr.channels())
        alpha = np.array(exr.channels()["A"].pixels)
    assert names == {"R", "G", "B", "A"} and alpha.shape == (48, 48)
    import png as pypng  # an independent PNG decoder (Pillow reads 16-bit RGBA as 8-bit)

    _, _, rows, _ = pypng.Reader(filename=str(png)).asRGBA()
    codes = np.vstack([np.asarray(row, np.uint16) for row in rows]).reshape(48, 48, 4)
    assert np.allclose(codes[..., 3] / 65535.0, np.clip(alpha, 0, 1), atol=1 / 65535)
    assert (tmp_path / "out" / "Box-spin.gif").is_file()


# --- other runners ------------------------------------------------------------------------------


@pytest.mark.slow
def test_local_processes_write_the_same_bytes(reference, tmp_path):
    summary = quiet_batch(reference["catalog"], reference["preset"], tmp_path / "out",
                          variants="all", workers=2)
    assert summary.exit_code == 0
    assert tree(tmp_path / "out") == tree(reference["out"])


@pytest.mark.slow
def test_shared_workers_serve_several_batches(reference, tmp_path):
    before = {p.pid for p in multiprocessing.active_children()}
    with local_workers(2, threads=1) as pool:
        first = quiet_batch(reference["catalog"], reference["preset"], tmp_path / "a",
                            variants="all", pool=pool)
        started = {p.pid for p in multiprocessing.active_children()} - before
        second = quiet_batch(reference["catalog"], reference["preset"], tmp_path / "b",
                             variants="all", pool=pool)
        still = {p.pid for p in multiprocessing.active_children()} - before
    assert first.exit_code == second.exit_code == 0
    assert len(started) == 2 and still == started  # the second batch started no process
    assert tree(tmp_path / "a") == tree(reference["out"]) == tree(tmp_path / "b")
    assert not {p.pid for p in multiprocessing.active_children()} & started  # stopped


@pytest.mark.slow
def test_dask_cluster_writes_the_same_bytes(reference, tmp_path):
    distributed = pytest.importorskip("distributed")
    with distributed.LocalCluster(n_workers=2, threads_per_worker=1, processes=True,
                                  dashboard_address=None) as cluster:
        summary = quiet_batch(reference["catalog"], reference["preset"], tmp_path / "out",
                              variants="all", cluster=cluster.scheduler_address)
    assert summary.exit_code == 0 and summary.frames_rendered == FRAMES
    assert tree(tmp_path / "out") == tree(reference["out"])


def test_layout_matches_what_the_batch_wrote(reference):
    layout = Layout.create(reference["out"])
    for model, variants in VARIANTS.items():
        for variant in variants:
            path = layout.frame_path(model, variant, "spin", 2, "48x48")
            assert (reference["out"] / path).is_file()
    assert os.path.isfile(reference["out"] / layout.manifest_path("Box"))
