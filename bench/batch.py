"""Benchmark: the demo catalog's batches with 1 and 2 local workers, and the batch's overhead.

Usage: python bench/batch.py [--quick] [--repeat N]

The catalog is what ``shots demo`` renders for a shop: the thumbnails of the six demo models
(assets_demo/*.glb, built-in preset ``thumbnail``: 512 px, adaptive sampling, one frame each) and
the turntable of the stool (built-in ``demo-turntable``: 24 frames at 320 px, adaptive sampling,
with GIF, WebP and MP4). ``--quick`` renders the same at a quarter of the pixels (thumbnails 256 px,
turntable 160 px). A full run takes about two and a half minutes on two idle cores, a quick
one under a minute (plus numba's compile after a kernel changed). Three timings, in one run
(``--repeat``: that many rounds, medians shown):

- render alone: ``render_frame`` for every frame of every model, one numba thread, nothing else
  (no loading, no encoding, no files);
- batch, 1 worker: ``run_batch(workers=1, threads=1)`` for each batch (in this process, one
  core), with every output: PNGs, GIF/WebP/MP4, manifests, index, contact sheet, report;
- batch, 2 workers: the same on two worker processes of one numba thread each, started once
  for the catalog (``local_workers``, as ``shots demo`` does): the first batch pays their start.

Parallel efficiency E = T(1 worker) / (2 × T(2 workers)) in wall time over both batches,
process start-up included. Other programs on the machine lower it (the 2-worker run loses
cores the 1-worker run did not need): the load averages are printed beside it.

Overhead O = (CPU(1 worker) − CPU(render_frame in that run)) / CPU(render_frame in that run):
everything the batch adds per frame (loading, tone mapping and PNG encoding, files,
animations, manifests, contact sheet, report) as a share of the render time, in CPU time of
all processes (ffmpeg included). The render time is counted inside the same batch run (this
process wraps ``render_frame``); it used to be the render-alone run's, but the CPU time of one
piece of work varies by ±10 % between two runs minutes apart on a shared machine (other
programs share the cores and their caches), which made O, the difference of two such totals,
come out at −8 % and +10 % for the same code here. The table also shows O against the render-alone run,
the overhead in wall time, and the extra CPU of the 2-worker run (its worker start-up included).
The last line is ``headline: efficiency E overhead O``.
"""

from __future__ import annotations

import argparse
import contextlib
import json
import os
import resource
import statistics
import sys
import tempfile
import time
from dataclasses import dataclass, field
from pathlib import Path

ROOT = Path(__file__).resolve().parents[1]
sys.path.insert(0, str(ROOT))

import shots.render  # noqa: E402
from shots.batch import run_batch  # noqa: E402
from shots.batch.runner import local_workers  # noqa: E402
from shots.batch.worker import set_threads  # noqa: E402
from shots.demo import TURNTABLE_MODEL  # noqa: E402
from shots.gltf import load_scene  # noqa: E402
from shots.planner import plan_frames  # noqa: E402
from shots.presets import Preset, apply_model_fixes, load_preset  # noqa: E402
from shots.render import prepare_scene, render_frame  # noqa: E402

ANIMATIONS = (".gif", ".webp", ".mp4")


@dataclass
class CatalogBatch:
    """One batch of the catalog: a folder of models and a preset."""

    name: str
    preset: Preset
    source: Path
    models: list[Path]


@dataclass
class Timing:
    """Wall and CPU seconds of one run; for a batch run also the seconds inside render_frame
    (1 worker) and the seconds by phase summed over the models' manifests."""

    wall: float = 0.0
    cpu: float = 0.0
    render_wall: float = 0.0
    render_cpu: float = 0.0
    phases: dict = field(default_factory=dict)


def cpu_seconds() -> float:
    """CPU time of this process and of its finished children (workers, ffmpeg)."""
    children = resource.getrusage(resource.RUSAGE_CHILDREN)
    return time.process_time() + children.ru_utime + children.ru_stime


def make_catalog(tmp: Path, quick: bool) -> list[CatalogBatch]:
    """The thumbnails of every demo model and the stool's turntable, copied under ``tmp``."""
    models = sorted((ROOT / "assets_demo").glob("*.glb"))
    batches = []
    for name, preset_name, chosen, quick_size in (
        ("thumbnails", "thumbnail", models, 256),
        ("turntable", "demo-turntable", [m for m in models if m.stem == TURNTABLE_MODEL], 160),
    ):
        folder = tmp / name
        folder.mkdir()
        for model in chosen:
            (folder / model.name).write_bytes(model.read_bytes())
        preset = load_preset(preset_name)
        if quick:
            preset = preset.with_image_size(quick_size, quick_size)
        batches.append(CatalogBatch(name, preset, folder, sorted(folder.glob("*.glb"))))
    return batches


def render_alone(batches: list[CatalogBatch]) -> tuple[Timing, int]:
    """render_frame alone over every frame of the catalog, and the frame count."""
    timing, count = Timing(), 0
    for batch in batches:
        for model in batch.models:
            scene = apply_model_fixes(load_scene(model), batch.preset)
            prepared = prepare_scene(scene)
            for frame in plan_frames(batch.preset, scene):
                start, start_cpu = time.perf_counter(), time.process_time()
                render_frame(prepared, frame.camera, frame.look)
                timing.wall += time.perf_counter() - start
                timing.cpu += time.process_time() - start_cpu
                count += 1
    return timing, count


@contextlib.contextmanager
def counting_renders(timing: Timing):
    """Add the wall and CPU seconds of every render_frame call in this process to ``timing``
    (the batch's inline worker looks ``shots.render.render_frame`` up at each frame)."""
    original = shots.render.render_frame

    def counted(*args, **kwargs):
        start, start_cpu = time.perf_counter(), time.process_time()
        try:
            return original(*args, **kwargs)
        finally:
            timing.render_wall += time.perf_counter() - start
            timing.render_cpu += time.process_time() - start_cpu

    shots.render.render_frame = counted
    try:
        yield
    finally:
        shots.render.render_frame = original


def timed_catalog(batches: list[CatalogBatch], out: Path, workers: int) -> Timing:
    """Run every batch, forced: wall and CPU seconds (all processes), render and phases."""
    timing = Timing()
    start, start_cpu = time.perf_counter(), cpu_seconds()
    pool = local_workers(workers, threads=1) if workers > 1 else contextlib.nullcontext()
    with pool as shared, counting_renders(timing):
        for batch in batches:
            batch_start = time.perf_counter()
            summary = run_batch(batch.source, batch.preset, out / batch.name, workers=workers,
                                threads=1, quiet=True, force=True, pool=shared)
            if summary.exit_code != 0:
                raise SystemExit(f"batch failed: {summary.failures}")
            phases = manifest_phases(out / batch.name)
            if workers == 1:  # index, contact sheet, report, set-up: what no manifest counts
                phases["catalog_s"] = time.perf_counter() - batch_start - sum(phases.values())
            for name, value in phases.items():
                timing.phases[name] = timing.phases.get(name, 0.0) + value
    timing.wall, timing.cpu = time.perf_counter() - start, cpu_seconds() - start_cpu
    return timing


def manifest_phases(out: Path) -> dict[str, float]:
    """Seconds by phase summed over the models' manifests."""
    phases: dict[str, float] = {}
    for path in (out / "manifests").glob("*.json"):
        for name, value in json.loads(path.read_text())["timings"].items():
            phases[name] = phases.get(name, 0.0) + value
    return phases


def same_outputs(a: Path, b: Path) -> bool:
    """Whether every image and animation under ``a`` has the same bytes under ``b``."""
    files = sorted(p.relative_to(a) for p in a.rglob("*")
                   if p.suffix in (".png", *ANIMATIONS) and p.is_file())
    return bool(files) and all((b / f).is_file() and (a / f).read_bytes() == (b / f).read_bytes()
                               for f in files)


def load_average() -> float:
    return os.getloadavg()[0] if hasattr(os, "getloadavg") else float("nan")


def median_timing(runs: list[Timing]) -> Timing:
    """Field by field median of several rounds."""
    median = statistics.median
    names = sorted({name for run in runs for name in run.phases})
    return Timing(
        wall=median(r.wall for r in runs), cpu=median(r.cpu for r in runs),
        render_wall=median(r.render_wall for r in runs),
        render_cpu=median(r.render_cpu for r in runs),
        phases={n: median(r.phases.get(n, 0.0) for r in runs) for n in names},
    )


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--quick", action="store_true",
                        help="a quarter of the pixels (thumbnails 256 px, turntable 160 px)")
    parser.add_argument("--repeat", type=int, default=1, help="rounds; medians are shown")
    args = parser.parse_args()

    rounds: dict[str, list[Timing]] = {"alone": [], "one": [], "two": []}
    ratios: dict[str, list[float]] = {"efficiency": [], "overhead": []}
    loads = [load_average()]
    identical = True
    with tempfile.TemporaryDirectory(prefix="shots-bench-batch-") as tmp:
        tmp = Path(tmp)
        batches = make_catalog(tmp, args.quick)
        set_threads(1)
        warm = batches[1].preset.with_image_size(16, 16)  # numba caches loaded, not timed
        render_alone([CatalogBatch("warm-up", warm, batches[1].source, batches[1].models)])
        for k in range(max(1, args.repeat)):
            alone, frames = render_alone(batches)
            one = timed_catalog(batches, tmp / f"one-{k}", 1)
            two = timed_catalog(batches, tmp / f"two-{k}", 2)
            loads.append(load_average())
            identical &= same_outputs(tmp / f"one-{k}", tmp / f"two-{k}")
            for name, run in (("alone", alone), ("one", one), ("two", two)):
                rounds[name].append(run)
            ratios["efficiency"].append(one.wall / (2.0 * two.wall))
            ratios["overhead"].append((one.cpu - one.render_cpu) / one.render_cpu)

    alone, one, two = (median_timing(rounds[name]) for name in ("alone", "one", "two"))
    efficiency = statistics.median(ratios["efficiency"])
    overhead = statistics.median(ratios["overhead"])
    shapes = ", ".join(
        f"{b.name} {len(b.models)} × {b.preset.image.width} px "
        f"{b.preset.image.samples or 'adaptive'} spp"
        for b in batches)
    rounds_note = f"medians of {args.repeat} rounds; " if args.repeat > 1 else ""
    print(f"catalog: {frames} frames ({shapes}); {rounds_note}load average "
          f"{' / '.join(f'{v:.2f}' for v in loads)} (start / after each round) "
          f"on {os.cpu_count()} cores")
    print(f"{'run':<20}{'wall s':>9}{'CPU s':>9}{'wall/frame':>12}{'speedup':>9}"
          f"{'efficiency':>12}")
    print(f"{'render_frame alone':<20}{alone.wall:>9.2f}{alone.cpu:>9.2f}"
          f"{alone.wall / frames:>12.3f}")
    print(f"{'batch, 1 worker':<20}{one.wall:>9.2f}{one.cpu:>9.2f}{one.wall / frames:>12.3f}"
          f"{1.0:>9.2f}{1.0:>12.0%}")
    print(f"{'batch, 2 workers':<20}{two.wall:>9.2f}{two.cpu:>9.2f}{two.wall / frames:>12.3f}"
          f"{one.wall / two.wall:>9.2f}{efficiency:>12.0%}")
    for name, run in (("1 worker", one), ("2 workers", two)):
        print(f"{name}, seconds by phase (summed over models): "
              + ", ".join(f"{k} {v:.2f}" for k, v in sorted(run.phases.items())))
    print(f"render_frame inside the 1-worker batch: {one.render_cpu:.2f} s CPU, "
          f"{one.render_wall:.2f} s wall (alone: {alone.cpu:.2f} s CPU)")
    print(f"overhead per frame: {(one.cpu - one.render_cpu) / frames * 1000:.1f} ms CPU "
          f"({overhead:.1%} of render CPU time; wall: "
          f"{(one.wall - one.render_wall) / one.render_wall:.1%}; against render alone: "
          f"{(one.cpu - alone.cpu) / alone.cpu:.1%} CPU); "
          f"2 workers used {two.cpu / one.cpu:.2f}x the CPU of 1")
    busy = sum(two.phases.get(k, 0.0) for k in ("load_s", "prepare_s", "render_s", "encode_s"))
    print(f"2 workers were busy {busy / (2 * two.wall):.0%} of the run's wall time (loading, "
          f"rendering, encoding; the rest is start-up, tails and the batch process's own work)")
    print(f"1 and 2 workers wrote identical images and animations: {identical}")
    print(f"headline: efficiency {efficiency:.2f} overhead {overhead:.3f}")


if __name__ == "__main__":
    main()
