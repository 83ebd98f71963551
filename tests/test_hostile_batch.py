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

import shots.gltf
from shots.batch import jobs, run_batch
from shots.batch.cli_command import batch
from shots.batch.manifest import index_csv_bytes
from shots.batch.progress import print_summary
from shots.batch.run import BatchSummary, ModelOutcome
from shots.batch.worker import over_limit_message
from shots.errors import BatchError, RenderError

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

# A model whose load does not return for a minute, however fast the machine: only the limit can
# stop it within the test. In this process through monkeypatch; in spawned worker processes
# through this sitecustomize, which Python imports at start-up from PYTHONPATH.
ENDLESS_LOAD = """
import time
import shots.gltf
_real = shots.gltf.load_scene

def _load(path, *args, **kwargs):
    if str(path).endswith("endless.gltf"):
        # Python code, which the limit's alarm interrupts; after a minute it gives up and
        # loads, so a broken limit fails the test instead of hanging it
        give_up = time.monotonic() + 60
        while time.monotonic() < give_up:
            pass
    return _real(path, *args, **kwargs)

shots.gltf.load_scene = _load
"""


def endless_catalog(tmp_path) -> Path:
    """A catalog of the Box sample and a copy of it whose load never returns."""
    catalog = tmp_path / "catalog"
    catalog.mkdir()
    shutil.copy(SAMPLES / "Box.gltf", catalog / "Box.gltf")
    shutil.copy(SAMPLES / "Box.gltf", catalog / "endless.gltf")
    return catalog


def test_a_model_over_the_time_limit_fails_alone(tmp_path, monkeypatch):
    catalog = endless_catalog(tmp_path)
    # the loader is put back after the test, whatever the hook sets it to
    monkeypatch.setattr("shots.gltf.load_scene", shots.gltf.load_scene)
    exec(ENDLESS_LOAD, {})
    # the kernels loaded first (a run without the endless model), so the Box's render is not
    # what the limit measures
    run_batch(catalog / "Box.gltf", write_preset(tmp_path), tmp_path / "warm", quiet=True,
              workers=1)
    limit = 3  # a setting, not a timing: the endless load never returns, only the limit ends it
    preset = write_preset(tmp_path, STILL + f"[limits]\nseconds = {limit}\n")
    out = tmp_path / "out"
    summary = run_batch(catalog, preset, out, quiet=True, workers=1)
    errors = {m.listed_as: m.error for m in summary.models}
    assert errors["Box.gltf"] is None  # behaviour: the other model renders
    # behaviour: the stuck model fails alone, with the preset's own limit named in its error
    assert over_limit_message(limit) in errors["endless.gltf"]
    catalog_outputs_exist(out)


def test_time_limit_interrupts_python_code():
    from shots.batch.worker import time_limit

    with pytest.raises(RenderError, match="limit seconds"), time_limit(0.2, "model.glb"):
        while True:
            pass


# ---------------------------------------------------------------- 7. damaged outputs ----------

def test_a_damaged_frame_is_rendered_again_and_the_sheet_survives(tmp_path):
    catalog = tmp_path / "catalog"
    catalog.mkdir()
    shutil.copy(SAMPLES / "Box.gltf", catalog / "Box.gltf")
    preset = write_preset(tmp_path)
    out = tmp_path / "out"
    run_batch(catalog, preset, out, quiet=True, workers=1)
    frame = out / "Box" / "default" / "hero" / "000.png"
    good = frame.read_bytes()
    frame.write_bytes(good[: len(good) // 2])  # truncated after the run
    second = run_batch(catalog, preset, out, quiet=True, workers=1)
    assert (second.frames_rendered, second.frames_skipped, second.exit_code) == (1, 0, 0)
    assert frame.read_bytes() == good  # deterministic render: the same bytes again
    third = run_batch(catalog, preset, out, quiet=True, workers=1)
    assert (third.frames_rendered, third.frames_skipped) == (0, 1)


def test_contact_sheet_leaves_an_unreadable_frame_blank(tmp_path):
    from PIL import Image

    from shots.batch.sheet import PAD, PAPER, THUMB, SheetCell, contact_sheet_bytes

    broken = tmp_path / "000.png"
    broken.write_bytes(b"\x89PNG\r\n\x1a\n\x00\x00")  # a PNG signature, then nothing
    sheet = Image.open(io.BytesIO(contact_sheet_bytes([[SheetCell(broken, "m", "v / s")]])))
    cell = np.asarray(sheet.convert("RGB"))[PAD : PAD + THUMB, PAD : PAD + THUMB]
    assert (cell == np.array(PAPER, np.uint8)).all()


@pytest.mark.parametrize("code", ["ENOSPC", "EDQUOT"])
def test_a_full_disk_is_one_line_and_leaves_no_partial_file(tmp_path, monkeypatch, code):
    import errno

    from shots.output import atomic_write_bytes

    def full(fd):
        raise OSError(getattr(errno, code), os.strerror(getattr(errno, code)))

    monkeypatch.setattr(os, "fsync", full)
    with pytest.raises(RenderError) as err:
        atomic_write_bytes(tmp_path / "a.png", b"x" * 1000)
    assert "nothing written" in str(err.value) and "\n" not in str(err.value)
    assert list(tmp_path.iterdir()) == []


FSIZE_CHILD = """
import resource, sys
from pathlib import Path
from shots.errors import ShotsError
from shots.output import atomic_write_bytes
resource.setrlimit(resource.RLIMIT_FSIZE, (4096, 4096))  # POSIX setrlimit: writes past it EFBIG
try:
    atomic_write_bytes(Path(sys.argv[1]) / "big.png", b"x" * 100_000)
except ShotsError as exc:
    print(exc)
"""


def test_a_file_size_limit_is_one_line_and_leaves_no_partial_file(tmp_path):
    import subprocess
    import sys

    done = subprocess.run([sys.executable, "-c", FSIZE_CHILD, str(tmp_path)],
                          capture_output=True, text=True, timeout=120)
    assert done.returncode == 0, done.stderr
    assert "File too large" in done.stdout and "nothing written" in done.stdout
    assert list(tmp_path.iterdir()) == []


# ---------------------------------------------------------------- 9. cluster trust ------------

def rendered_result(model="m.glb", variant="default", **changes):
    from shots.batch.worker import RenderedImage, TaskResult

    image = dict(shot="hero", index=0, view="front", camera={"width": 2, "height": 1},
                 seed=1, png=b"\x89PNG\r\n\x1a\n...", exr=None, render_seconds=0.0,
                 encode_seconds=0.0, codes=np.zeros((1, 2, 4), np.uint8))
    image.update(changes)
    return TaskResult(model, variant, images=[RenderedImage(**image)])


def test_results_from_workers_are_checked_before_use():
    from shots.batch.worker import result_problem

    assert result_problem(rendered_result(), "m.glb", "default") is None
    assert "not a TaskResult" in result_problem({"model": "m.glb"}, "m.glb", "default")
    assert "another model" in result_problem(rendered_result("x.glb"), "m.glb", "default")
    assert "not PNG" in result_problem(rendered_result(png=b"GIF89a"), "m.glb", "default")
    assert "wrong type or size" in result_problem(
        rendered_result(codes=np.zeros((9, 9, 4), np.uint8)), "m.glb", "default")
    assert "malformed image fields" in result_problem(rendered_result(index="0"), "m.glb",
                                                      "default")


def test_a_worker_with_another_version_refuses_the_task(monkeypatch):
    import distributed

    from shots.batch import worker

    class FakeWorker:
        address = "tcp://10.0.0.9:4000"

    monkeypatch.setattr(distributed, "get_worker", lambda: FakeWorker())
    called = []
    result = worker.on_dask_worker(lambda *a: called.append(a), {}, "0.0.0-other", "m.glb",
                                   "hash", None, "preset-hash")
    assert called == [] and result.failure is not None
    assert "the batch 0.0.0-other" in result.failure.message


def test_a_stale_model_copy_is_refused(tmp_path):
    from shots.batch.worker import _check_inputs

    model = tmp_path / "Box.gltf"
    shutil.copy(SAMPLES / "Box.gltf", model)
    _, inputs = jobs.model_hashes(model)
    _check_inputs(str(model), inputs)  # the same files: accepted
    model.write_text(model.read_text().replace('"Box"', '"Box2"', 1) + " ")
    with pytest.raises(RenderError, match="differ from those the batch hashed"):
        _check_inputs(str(model), inputs)


def test_tls_options_need_their_files(tmp_path):
    shutil.copy(SAMPLES / "Box.gltf", tmp_path)
    result = batch_cli(tmp_path, "--preset", "thumbnail", "-o", tmp_path / "out",
                       "--cluster", "tls://127.0.0.1:1", "--tls-ca-file", tmp_path / "ca.pem",
                       "--tls-cert", tmp_path / "me.pem")
    assert result.exit_code == 2
    assert "--tls-ca-file: no such file" in " ".join(result.output.split())
    result = batch_cli(tmp_path, "--preset", "thumbnail", "-o", tmp_path / "out",
                       "--tls-cert", tmp_path / "me.pem")
    assert result.exit_code == 2 and "TLS needs --cluster" in " ".join(result.output.split())


def make_certificates(folder: Path) -> dict[str, Path]:
    """A CA and one certificate it signs for 127.0.0.1 (X.509 via the openssl command)."""
    import subprocess

    def run(*args):
        subprocess.run(["openssl", *args], check=True, capture_output=True, cwd=folder)

    run("req", "-x509", "-newkey", "rsa:2048", "-nodes", "-days", "2", "-subj", "/CN=test-ca",
        "-keyout", "ca.key", "-out", "ca.pem")
    run("req", "-newkey", "rsa:2048", "-nodes", "-subj", "/CN=127.0.0.1", "-keyout", "node.key",
        "-out", "node.csr")
    (folder / "san.cnf").write_text("subjectAltName = IP:127.0.0.1, DNS:localhost\n")
    run("x509", "-req", "-in", "node.csr", "-CA", "ca.pem", "-CAkey", "ca.key",
        "-CAcreateserial", "-days", "2", "-extfile", "san.cnf", "-out", "node.pem")
    return {name: folder / f"{name}" for name in ("ca.pem", "node.pem", "node.key")}


@pytest.mark.slow
def test_a_tls_cluster_renders_with_the_tls_options(tmp_path):
    distributed = pytest.importorskip("distributed")
    if shutil.which("openssl") is None:
        pytest.skip("needs the openssl command to make certificates")
    from distributed.security import Security

    from shots.batch.runner import ClusterTls

    certs = make_certificates(tmp_path)
    ca, cert, key = (str(certs[n]) for n in ("ca.pem", "node.pem", "node.key"))
    security = Security(tls_ca_file=ca, tls_scheduler_cert=cert, tls_scheduler_key=key,
                        tls_worker_cert=cert, tls_worker_key=key, tls_client_cert=cert,
                        tls_client_key=key, require_encryption=True)
    catalog = tmp_path / "catalog"
    catalog.mkdir()
    shutil.copy(SAMPLES / "Box.gltf", catalog)
    with distributed.LocalCluster(n_workers=1, threads_per_worker=1, processes=False,
                                  protocol="tls://", host="127.0.0.1", security=security,
                                  dashboard_address=None) as cluster:
        address = cluster.scheduler_address
        assert address.startswith("tls://")
        summary = run_batch(catalog, write_preset(tmp_path), tmp_path / "out", quiet=True,
                            cluster=address, cluster_tls=ClusterTls(ca, cert, key))
        assert summary.exit_code == 0 and summary.frames_rendered == 1
        # without the TLS files: one line saying what to give, the batch refused
        with pytest.raises(BatchError, match="uses TLS: give --tls-ca-file"):
            run_batch(catalog, write_preset(tmp_path), tmp_path / "out2", quiet=True,
                      cluster=address, force=True)


# ---------------------------------------------------------------- single commands -------------

def test_render_refuses_an_encoded_nul_in_one_line(tmp_path):
    from shots.cli import app

    result = CliRunner().invoke(app, ["render", str(HOSTILE / "uri_nul_encoded.gltf"), "-o",
                                      str(tmp_path), "--size", "16x16"])
    assert result.exit_code == 2
    assert "buffers[0].uri: URI contains a NUL character" in " ".join(result.output.split())
    assert list(tmp_path.iterdir()) == []


def test_render_shows_escape_sequences_in_warnings_escaped(tmp_path):
    from shots.cli import app

    b = GltfBuilder()
    b.scene([b.node(mesh=b.mesh(TRI))])
    b.use_extension("\x1b[2J\x1b[1;1HFAKE")  # an unknown, optional extension: a warning
    model = b.write_gltf(tmp_path / "m.gltf")
    result = CliRunner().invoke(app, ["render", str(model), "-o", str(tmp_path / "out"),
                                      "--size", "16x16", "--preset", str(write_preset(tmp_path))])
    assert result.exit_code == 0, result.output
    assert "\x1b" not in result.output
    assert "extensions ignored: \\x1b[2J\\x1b[1;1HFAKE" in result.output


def test_check_reads_the_header_before_decoding_a_huge_png(tmp_path):
    import struct
    import zlib

    from shots.cli import app

    # a 10000 x 10000 RGBA PNG of 12 KB: zlib stream of zero rows (PNG spec §11.2.2 IHDR)
    row = b"\x00" + bytes(4 * 10000)
    data = zlib.compress(row * 10000, 9)

    def chunk(kind, body):
        return struct.pack(">I", len(body)) + kind + body + struct.pack(
            ">I", zlib.crc32(kind + body))

    png = (b"\x89PNG\r\n\x1a\n" + chunk(b"IHDR", struct.pack(">IIBBBBB", 10000, 10000, 8, 6,
                                                              0, 0, 0))
           + chunk(b"IDAT", data) + chunk(b"IEND", b""))
    assert len(png) < 500_000
    (tmp_path / "renders").mkdir()
    (tmp_path / "renders" / "huge.png").write_bytes(png)
    result = CliRunner().invoke(app, ["check", str(tmp_path / "renders")])
    assert result.exit_code == 1, result.output
    assert "over the limit image_pixels" in " ".join(result.output.split())
    result = CliRunner().invoke(app, ["check", str(tmp_path / "renders"), "--limit",
                                      "image_pixels=-1"])
    assert result.exit_code == 2 and "--limit: image_pixels" in result.output


@pytest.mark.slow
def test_a_worker_process_over_the_time_limit_fails_the_model_alone(tmp_path, monkeypatch):
    catalog = endless_catalog(tmp_path)
    hooks = tmp_path / "hooks"
    hooks.mkdir()
    (hooks / "sitecustomize.py").write_text(ENDLESS_LOAD)  # every spawned worker imports it
    monkeypatch.setenv("PYTHONPATH", os.pathsep.join(
        [str(hooks), *filter(None, [os.environ.get("PYTHONPATH")])]))
    # a fresh worker's first task also loads the compiled kernels: room for that
    limit = 20  # a setting, not a timing: the endless load never returns, only the limit ends it
    preset = write_preset(tmp_path, STILL + f"[limits]\nseconds = {limit}\n")
    summary = run_batch(catalog, preset, tmp_path / "out", quiet=True, workers=2)
    errors = {m.listed_as: m.error for m in summary.models}
    assert errors["Box.gltf"] is None  # behaviour: the other model renders
    # behaviour: the stuck model fails alone, with the preset's own limit named in its error
    assert over_limit_message(limit) in errors["endless.gltf"]
    catalog_outputs_exist(tmp_path / "out")
