"""A bad model never stops a catalog: one model's crash, name, link or time-out fails that model
alone, every other output (frames, index, contact sheet, report) is still written, and text
from files reaches the terminal and the CSV index only as inert text."""

import csv
import io
import json
import os
import shutil
from pathlib import Path

import numpy as np
import pytest
import typer
from gltf_builder import GltfBuilder
from rich.console import Console
from typer.testing import CliRunner

from shots.batch import jobs, run_batch
from shots.batch.cli_command import batch
from shots.batch.manifest import index_csv_bytes
from shots.batch.progress import print_summary
from shots.batch.run import BatchSummary, ModelOutcome
from shots.errors import RenderError

HERE = Path(__file__).parent
SAMPLES = HERE / "data" / "samples"
HOSTILE = HERE / "data" / "hostile"
TRI = np.array([[0, 0, 0], [1, 0, 0], [0, 1, 0]], np.float32)

STILL = """
extends = "thumbnail"
[image]
width = 16
height = 16
samples = 1
light_samples = 1
gloss_samples = 1
bounces = 0
[[shots]]
name = "hero"
kind = "views"
views = ["front"]
"""


def write_preset(folder: Path, text: str = STILL) -> Path:
    path = folder / "still.toml"
    path.write_text(text)
    return path


def batch_cli(*args: str):
    app = typer.Typer()
    app.command()(batch)
    return CliRunner().invoke(app, [str(a) for a in args])


def catalog_outputs_exist(out: Path) -> None:
    for name in ("index.json", "index.csv", "contact_sheet.png", "report.md"):
        assert (out / name).is_file(), name


def statuses(out: Path) -> dict[str, str]:
    index = json.loads((out / "index.json").read_text())
    return {m["file"]: m["status"] for m in index["models"]}


# ---------------------------------------------------------------- 1. any exception -------------

def test_a_model_that_crashes_inspection_fails_alone(tmp_path):
    catalog = tmp_path / "catalog"
    catalog.mkdir()
    shutil.copy(SAMPLES / "Box.gltf", catalog)
    # a buffer URI with %00 (a NUL once percent-decoded, Spec §URIs) and one naming a
    # self-referencing symlink: both used to end the whole batch with a traceback
    shutil.copy(HOSTILE / "uri_nul_encoded.gltf", catalog)
    shutil.copy(HOSTILE / "uri_symlink_loop.gltf", catalog)
    os.symlink("loop.bin", catalog / "loop.bin")
    out = tmp_path / "out"
    result = batch_cli(catalog, "--preset", write_preset(tmp_path), "-o", out, "-q")
    assert result.exit_code == 1, result.output
    assert "Traceback" not in result.output
    assert statuses(out) == {"Box.gltf": "ok", "uri_nul_encoded.gltf": "failed",
                             "uri_symlink_loop.gltf": "failed"}
    lines = [line for line in result.output.splitlines() if line.startswith("failed:")]
    assert len(lines) == 2 and "NUL character" in result.output
    catalog_outputs_exist(out)


def test_any_unexpected_error_while_inspecting_fails_that_model_alone(tmp_path, monkeypatch):
    catalog = tmp_path / "catalog"
    catalog.mkdir()
    shutil.copy(SAMPLES / "Box.gltf", catalog / "a.gltf")
    shutil.copy(SAMPLES / "Box.gltf", catalog / "b.gltf")
    real = jobs.model_hashes

    def flaky(path):
        if path.name == "b.gltf":
            raise RuntimeError("Symlink loop from 'b.gltf'")
        return real(path)

    monkeypatch.setattr(jobs, "model_hashes", flaky)
    summary = run_batch(catalog, write_preset(tmp_path), tmp_path / "out", quiet=True,
                        workers=1)
    assert [m.error is None for m in summary.models] == [True, False]
    assert "Symlink loop" in summary.models[1].error
    catalog_outputs_exist(tmp_path / "out")


# ---------------------------------------------------------------- 2. reserved names ------------

@pytest.mark.parametrize("name, template", [("manifests", None),
                                            ("contact_sheet", "{model}.png"),
                                            ("index", "{model}.json/{shot}.png")])
def test_a_model_named_like_the_batch_files_fails_alone(tmp_path, name, template):
    catalog = tmp_path / "catalog"
    catalog.mkdir()
    shutil.copy(SAMPLES / "Box.gltf", catalog / "Box.gltf")
    shutil.copy(SAMPLES / "Box.gltf", catalog / f"{name}.gltf")
    out = tmp_path / "out"
    args = ["--template", template] if template else []
    result = batch_cli(catalog, "--preset", write_preset(tmp_path), "-o", out, "-q", *args)
    assert result.exit_code == 1, result.output
    assert statuses(out) == {"Box.gltf": "ok", f"{name}.gltf": "failed"}
    assert "where the batch keeps its own files" in " ".join(result.output.split())
    assert json.loads((out / "index.json").read_text())["format"] == "shots-batch-index/1"


# ---------------------------------------------------------------- 3. terminal and CSV ---------

def variant_model(path: Path, names: list[str]) -> Path:
    """A triangle with one KHR_materials_variants variant per name."""
    b = GltfBuilder()
    base, alt = b.material(name="base"), b.material(name="alt")
    b.gltf["extensions"] = {"KHR_materials_variants": {"variants": [{"name": n} for n in names]}}
    b.use_extension("KHR_materials_variants")
    prim = b.primitive(TRI, material=base, extensions={"KHR_materials_variants": {
        "mappings": [{"material": alt, "variants": list(range(len(names)))}]}})
    b.scene([b.node(mesh=b.mesh(primitives=[prim]))])
    return b.write_gltf(path)


def test_markup_in_names_prints_literally(tmp_path):
    catalog = tmp_path / "catalog"
    (catalog / "[").mkdir(parents=True)  # listed as "[/x].gltf"
    variant_model(catalog / "[" / "x].gltf", ["[/bold]", "=1+2", "@SUM(A1)"])
    out = tmp_path / "out"
    summary = run_batch(catalog, write_preset(tmp_path), out, quiet=True, workers=1,
                        variants="all")
    assert summary.exit_code == 0
    console = Console(file=io.StringIO(), width=200, color_system=None)
    print_summary(summary, console)  # used to raise rich's MarkupError
    text = console.file.getvalue()
    assert "[/x].gltf" in text and "[/bold]" in text
    # OWASP "CSV Injection": a cell starting with = + - @ is prefixed with a single quote
    rows = list(csv.DictReader(io.StringIO((out / "index.csv").read_text())))
    assert sorted(r["variant"] for r in rows) == ["'=1+2", "'@SUM(A1)", "[/bold]"]
    index = json.loads((out / "index.json").read_text())
    assert sorted(f["variant"] for f in index["frames"]) == ["=1+2", "@SUM(A1)", "[/bold]"]


def test_escape_sequences_from_a_model_are_shown_escaped():
    fake = "\x1b[2J\x1b[32mall models rendered\x1b[0m"
    outcome = ModelOutcome(model="m", listed_as=f"m{fake}.gltf", variants=["v\x07"],
                           rendered=0, skipped=0, failed=1, error=f"extensions ignored: {fake}")
    summary = BatchSummary(out_dir=Path("."), models=[outcome], animations_written=0,
                           seconds=0.0, index=None, contact_sheet=None)
    console = Console(file=io.StringIO(), width=300, color_system=None)
    print_summary(summary, console)
    text = console.file.getvalue()
    assert "\x1b" not in text and "\x07" not in text
    assert "\\x1b[2J\\x1b[32mall models rendered" in text


def test_formula_cells_are_neutralised_and_numbers_kept():
    frame = {"model": "m", "variant": "-2+3", "shot": "+s", "frame": 0, "view": "@v",
             "width": 16, "height": 16, "key": "k", "path": "=p.png"}
    rows = list(csv.reader(io.StringIO(index_csv_bytes([frame], []).decode())))
    assert rows[1] == ["m", "'-2+3", "'+s", "0", "'@v", "png", "'=p.png", "16", "16", "k"]


# ---------------------------------------------------------------- 6. links out of the catalog --

def test_a_link_to_a_model_outside_the_catalog_fails_alone(tmp_path):
    outside = tmp_path / "outside"
    shutil.copytree(SAMPLES / "BoxWithSpaces", outside)
    catalog = tmp_path / "catalog"
    (catalog / "sub").mkdir(parents=True)
    shutil.copy(SAMPLES / "Box.gltf", catalog / "sub" / "Box.gltf")
    os.symlink(outside / "Box With Spaces.gltf", catalog / "escape.gltf")
    os.symlink(catalog / "sub" / "Box.gltf", catalog / "inside.gltf")  # stays inside: fine
    summary = run_batch(catalog, write_preset(tmp_path), tmp_path / "out", quiet=True,
                        workers=1)
    errors = {m.listed_as: m.error for m in summary.models}
    assert errors["inside.gltf"] is None and errors["sub/Box.gltf"] is None
    assert "outside the catalog folder" in errors["escape.gltf"]


# ---------------------------------------------------------------- 5. time limit ---------------

def test_a_model_over_the_time_limit_fails_alone(tmp_path):
    catalog = tmp_path / "catalog"
    catalog.mkdir()
    shutil.copy(SAMPLES / "Box.gltf", catalog / "Box.gltf")
    shutil.copy(HOSTILE / "bomb_instancing.gltf", catalog / "slow.gltf")
    # the instance budget raised so only the time limit can stop the 1 M primitive instances
    preset = write_preset(tmp_path, STILL + "[limits]\ninstances = 2000000\nseconds = 1\n")
    out = tmp_path / "out"
    summary = run_batch(catalog, preset, out, quiet=True, workers=1)
    errors = {m.listed_as: m.error for m in summary.models}
    assert errors["Box.gltf"] is None
    assert "took more than 1 s (limit seconds)" in errors["slow.gltf"]
    catalog_outputs_exist(out)


def test_time_limit_interrupts_python_code():
    from shots.batch.worker import time_limit

    with pytest.raises(RenderError, match="limit seconds"), time_limit(0.2, "model.glb"):
        while True:
            pass
