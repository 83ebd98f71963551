"""Benchmark: a small catalog batch with 1 and 2 local workers, and the batch's own overhead.

Usage: python bench/batch.py [--size 128] [--samples 16] [--frames 8] [--models 4]

The catalog is the demo models (assets_demo/*.glb), the preset the built-in thumbnail look at
``--size`` px with a still and a ``--frames`` turntable. Three timings, in one run:

- render alone: ``render_frame`` for every frame of every model, one numba thread, nothing else
  (no loading, no encoding, no files);
- batch, 1 worker: ``run_batch(workers=1, threads=1)`` (in this process, one core), with every
  output: PNGs, GIF/WebP/MP4, manifests, index, contact sheet;
- batch, 2 workers: two spawned worker processes with one numba thread each, same outputs.

Parallel efficiency E = T(1 worker) / (2 × T(2 workers)) in wall time, process start-up
included. Overhead O = (CPU(1 worker) − CPU(render alone)) / CPU(render alone): everything the
batch adds per frame (loading, PNG encoding, files, animations, manifests, contact sheet) as a
share of the render time. O is taken in CPU time because the cores are shared: wall times of
two runs minutes apart differ by whatever else the machine does, CPU times do not. The table
also shows wall-time overhead, and the CPU time the 2-worker run spent in all its processes.
The last line is ``headline: efficiency E overhead O``.
"""

from __future__ import annotations

import argparse
import json
import os
import resource
import sys
import tempfile
import time
from pathlib import Path

ROOT = Path(__file__).resolve().parents[1]
sys.path.insert(0, str(ROOT))

from shots.batch import run_batch  # noqa: E402
from shots.batch.worker import set_threads  # noqa: E402
from shots.gltf import load_scene  # noqa: E402
from shots.planner import plan_frames  # noqa: E402
from shots.presets import apply_model_fixes, load_preset  # noqa: E402
from shots.render import prepare_scene, render_frame  # noqa: E402

PRESET = """
extends = "thumbnail"
[image]
width = {size}
height = {size}
samples = {samples}
[[shots]]
name = "hero"
kind = "views"
views = ["front_left"]
[[shots]]
name = "turntable"
kind = "turntable"
frames = {frames}
"""


def cpu_seconds() -> float:
    """CPU time of this process and of its finished children (worker processes)."""
    children = resource.getrusage(resource.RUSAGE_CHILDREN)
    return time.process_time() + children.ru_utime + children.ru_stime


def render_alone(models: list[Path], preset) -> tuple[float, float, int]:
    """Wall and CPU seconds spent in render_frame alone over every frame, and the frames."""
    wall = cpu = 0.0
    count = 0
    for model in models:
        scene = apply_model_fixes(load_scene(model), preset)
        prepared = prepare_scene(scene)
        for frame in plan_frames(preset, scene):
            start, start_cpu = time.perf_counter(), time.process_time()
            render_frame(prepared, frame.camera, frame.look)
            wall += time.perf_counter() - start
            cpu += time.process_time() - start_cpu
            count += 1
    return wall, cpu, count


def timed_batch(catalog: Path, preset_path: Path, out: Path, workers: int):
    """Wall seconds, CPU seconds (all processes) and time per phase of one forced batch."""
    start, start_cpu = time.perf_counter(), cpu_seconds()
    summary = run_batch(catalog, preset_path, out, workers=workers, threads=1, quiet=True,
                        force=True)
    wall, cpu = time.perf_counter() - start, cpu_seconds() - start_cpu
    if summary.exit_code != 0:
        raise SystemExit(f"batch failed: {summary.failures}")
    phases: dict[str, float] = {}
    for path in (out / "manifests").glob("*.json"):
        for name, value in json.loads(path.read_text())["timings"].items():
            phases[name] = phases.get(name, 0.0) + value
    return wall, cpu, phases


def same_images(a: Path, b: Path) -> bool:
    files = sorted(p.relative_to(a) for p in a.rglob("*.png"))
    return bool(files) and all((a / f).read_bytes() == (b / f).read_bytes() for f in files)


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--size", type=int, default=128)
    parser.add_argument("--samples", type=int, default=16)
    parser.add_argument("--frames", type=int, default=8)
    parser.add_argument("--models", type=int, default=4)
    args = parser.parse_args()

    with tempfile.TemporaryDirectory(prefix="shots-bench-batch-") as tmp:
        tmp = Path(tmp)
        catalog = tmp / "catalog"
        catalog.mkdir()
        models = sorted((ROOT / "assets_demo").glob("*.glb"))[: args.models]
        for model in models:
            (catalog / model.name).write_bytes(model.read_bytes())
        preset_path = tmp / "bench.toml"
        preset_path.write_text(PRESET.format(size=args.size, samples=args.samples,
                                             frames=args.frames))
        preset = load_preset(preset_path)
        models = sorted(catalog.glob("*.glb"))

        set_threads(1)
        render_alone(models[:1], preset)  # warm-up: numba caches loaded, not timed
        alone, alone_cpu, frames = render_alone(models, preset)
        one, one_cpu, phases = timed_batch(catalog, preset_path, tmp / "one", workers=1)
        two, two_cpu, _ = timed_batch(catalog, preset_path, tmp / "two", workers=2)
        identical = same_images(tmp / "one", tmp / "two")

    efficiency = one / (2.0 * two)
    overhead = (one_cpu - alone_cpu) / alone_cpu
    load = os.getloadavg()[0] if hasattr(os, "getloadavg") else float("nan")
    print(f"catalog: {len(models)} models, {frames} frames of {args.size}x{args.size} px, "
          f"{args.samples} samples; load average {load:.2f} on {os.cpu_count()} cores")
    print(f"{'run':<22}{'wall s':>9}{'CPU s':>9}{'wall/frame':>12}{'speedup':>9}"
          f"{'efficiency':>12}")
    print(f"{'render_frame alone':<22}{alone:>9.2f}{alone_cpu:>9.2f}{alone / frames:>12.3f}")
    print(f"{'batch, 1 worker':<22}{one:>9.2f}{one_cpu:>9.2f}{one / frames:>12.3f}"
          f"{1.0:>9.2f}{1.0:>12.0%}")
    print(f"{'batch, 2 workers':<22}{two:>9.2f}{two_cpu:>9.2f}{two / frames:>12.3f}"
          f"{one / two:>9.2f}{efficiency:>12.0%}")
    print("1-worker batch, seconds by phase: "
          + ", ".join(f"{k} {v:.2f}" for k, v in sorted(phases.items())))
    print(f"overhead per frame: {(one_cpu - alone_cpu) / frames * 1000:.1f} ms CPU "
          f"({overhead:.1%} of render CPU time; wall: {(one - alone) / alone:.1%}); "
          f"2 workers used {two_cpu / one_cpu:.2f}x the CPU of 1")
    print(f"1 and 2 workers wrote identical PNGs: {identical}")
    print(f"headline: efficiency {efficiency:.2f} overhead {overhead:.3f}")


if __name__ == "__main__":
    main()
