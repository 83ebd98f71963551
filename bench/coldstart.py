"""Cold start: the first ``shots render`` on a fresh machine, the next one, and a first batch.

    python bench/coldstart.py [--skip-batch]

Every run is a fresh interpreter (a subprocess) with its own empty kernel cache folder
(``NUMBA_CACHE_DIR`` pointing at a new temporary folder), so nothing compiled earlier on this
machine is reused. Three measurements:

- cold render: ``shots render MODEL --size 64x64`` with the empty cache: wall and CPU seconds of
  the whole command (imports, numba's compile, the render, the file; CPU includes the compile
  helper process, ``shots.compile_helper``), and where the compile went: every dispatcher that
  numba compiled in the command's own process, with its type specialisations and its own
  seconds (``numba:compile`` events, minus the time spent compiling the functions it calls;
  a function the helper compiled is loaded here, and its wait is in its caller's seconds);
- warm render: the same command again on the cache the cold one left: seconds for the imports,
  and the warm start, everything after the imports (loading the kernels from the cache, the
  model, the render, the file);
- cold batch: ``shots batch`` of two demo models at 64 px with two worker processes on another
  empty cache: wall and CPU, and how many kernels each process compiled (numba's cache-miss
  count, written by every process as it exits); the batch compiles in its own process (and its
  compile helper) before the workers start, so each worker's count should be 0.

The model is the first demo model (``shots.demo.demo_models()``). Wall times depend on what else
runs on the machine (the load average is printed); CPU seconds much less. The last line is

    headline: cold first render T s, warm start W s
"""

from __future__ import annotations

import argparse
import json
import os
import resource
import subprocess
import sys
import tempfile
import time
from collections import defaultdict
from pathlib import Path

ROOT = Path(__file__).resolve().parents[1]

# Runs inside the fresh interpreter: time the imports, record numba's compile events, run the
# command line, and write the timings and events as JSON to the path in argv[1].
DRIVER = r"""
import json, sys, time
t0, c0 = time.perf_counter(), time.process_time()
import shots.cli, shots.pipeline
t1, c1 = time.perf_counter(), time.process_time()
from numba.core import event
recorder = event.RecordingListener()
event.register("numba:compile", recorder)
llvm = event.TimingListener()  # time holding numba's LLVM lock: LLVM's optimiser and code gen
event.register("numba:llvm_lock", llvm)
report, sys.argv = sys.argv[1], ["shots", *sys.argv[2:]]
try:
    shots.cli.main()
except SystemExit as stop:
    if stop.code:
        raise
t2, c2 = time.perf_counter(), time.process_time()
events = []
for stamp, ev in recorder.buffer:
    disp = ev.data["dispatcher"]
    name = f"{disp.py_func.__module__}.{disp.py_func.__qualname__}"
    events.append([stamp, ev.is_start, name, str(tuple(ev.data["args"]))])
with open(report, "w") as f:
    json.dump({"imports": t1 - t0, "after_imports": t2 - t1, "imports_cpu": c1 - c0,
               "after_imports_cpu": c2 - c1, "events": events,
               "llvm": llvm.duration if llvm.done else 0.0}, f)
"""

# Put on PYTHONPATH for the batch: every process (the batch and its spawned workers) appends its
# numba cache misses and hits over the shots kernels to the file in SHOTS_BENCH_COMPILES at exit.
SITECUSTOMIZE = r"""
import atexit, json, os, sys

def _report_compiles():
    if "numba" not in sys.modules:
        return
    from numba.core.dispatcher import Dispatcher
    misses = hits = 0
    for name, module in list(sys.modules.items()):
        if name.startswith("shots.kernels."):
            for value in vars(module).values():
                if isinstance(value, Dispatcher):
                    misses += sum(value.stats.cache_misses.values())
                    hits += sum(value.stats.cache_hits.values())
    import multiprocessing
    role = "batch" if multiprocessing.parent_process() is None else "worker"
    if sys.argv and sys.argv[0].endswith("compile_helper.py"):
        role = "helper"  # shots.compile_helper, started by the batch on a cold cache
    with open(os.environ["SHOTS_BENCH_COMPILES"], "a") as f:
        f.write(json.dumps({"pid": os.getpid(), "role": role, "compiled": misses,
                            "loaded": hits}) + "\n")

atexit.register(_report_compiles)
"""

TINY_PRESET = """\
description = "coldstart benchmark: thumbnails at 64 px, one sample"
extends = "thumbnail"

[image]
width = 64
height = 64
samples = 1
"""


def children_cpu() -> float:
    usage = resource.getrusage(resource.RUSAGE_CHILDREN)
    return usage.ru_utime + usage.ru_stime


def run(args: list[str], env: dict, cwd: Path) -> tuple[float, float]:
    """Run a command to completion; (wall, CPU) seconds, CPU of all its processes."""
    cpu, start = children_cpu(), time.perf_counter()
    done = subprocess.run(args, env=env, cwd=cwd, capture_output=True, text=True)
    wall = time.perf_counter() - start
    if done.returncode != 0:
        sys.exit(f"{' '.join(args)} failed ({done.returncode}):\n{done.stdout}\n{done.stderr}")
    return wall, children_cpu() - cpu


def own_seconds(events: list) -> dict[tuple[str, str], float]:
    """Seconds each (dispatcher, signature) compile took itself: its span minus the spans of the
    compiles nested in it (the functions it calls, compiled on the way)."""
    own: dict[tuple[str, str], float] = defaultdict(float)
    stack: list[list] = []  # [key, start, seconds spent in nested compiles]
    for stamp, is_start, name, signature in events:
        if is_start:
            stack.append([(name, signature), stamp, 0.0])
            continue
        key, start, nested = stack.pop()
        span = stamp - start
        own[key] += span - nested
        if stack:
            stack[-1][2] += span
    return own


def print_compiles(events: list) -> float:
    """Print the compile table (per kernel, slowest first); return the total compile seconds."""
    own = own_seconds(events)
    per_kernel: dict[str, list] = defaultdict(lambda: [0.0, 0])
    for (name, _signature), seconds in own.items():
        per_kernel[name][0] += seconds
        per_kernel[name][1] += 1
    total = sum(seconds for seconds, _ in per_kernel.values())
    print(f"\nnumba compiles: {len(own)} specialisations of {len(per_kernel)} functions, "
          f"{total:.1f} s in all (own time, callees excluded)")
    print(f"{'function':<52} {'types':>5} {'seconds':>8} {'share':>6}")
    for name, (seconds, count) in sorted(per_kernel.items(), key=lambda kv: -kv[1][0]):
        if seconds >= 0.05 or count > 1:
            print(f"{name.removeprefix('shots.kernels.'):<52} {count:>5} {seconds:>8.2f} "
                  f"{seconds / max(total, 1e-9):>6.0%}")
    several = sorted(k for k, v in per_kernel.items() if v[1] > 1 and k.startswith("shots."))
    if several:
        print("\nshots functions compiled for more than one type signature:")
    for name in several:
        signatures = {signature: seconds for (other, signature), seconds in own.items()
                      if other == name}
        print(f"  {name.removeprefix('shots.kernels.')}: {differing_arguments(list(signatures))}"
              f", {sum(signatures.values()):.1f} s in all")
    return total


def top_level_items(text: str) -> list[str]:
    """'a(b, c), d' → ['a(b, c)', 'd']: split at commas outside brackets."""
    items, depth, start = [], 0, 0
    for i, char in enumerate(text):
        depth += (char in "([") - (char in ")]")
        if char == "," and depth == 0:
            items.append(text[start:i].strip())
            start = i + 1
    last = text[start:].strip()
    return items + [last] if last else items


def differing_arguments(signatures: list[str]) -> str:
    """Where type signatures (``str`` of a tuple of numba types) differ: 'arg 3: int64 | uint64'."""
    split = [top_level_items(s[1:-1]) for s in signatures]
    if len({len(args) for args in split}) > 1:
        return "different argument counts"
    parts = []
    for position, types in enumerate(zip(*split, strict=True)):
        if len(set(types)) > 1:
            parts.append(f"arg {position}: {' | '.join(dict.fromkeys(types))}")
    return "; ".join(parts)


def render_twice(model: Path, work: Path) -> dict:
    """The cold render and the warm one after it, on one fresh cache folder."""
    env = dict(os.environ, NUMBA_CACHE_DIR=str(work / "cache"), PYTHONPATH=str(ROOT))
    results = {}
    for label in ("cold", "warm"):
        report = work / f"{label}.json"
        command = [sys.executable, "-c", DRIVER, str(report), "render", str(model),
                   "--size", "64x64", "-o", str(work / label)]
        wall, cpu = run(command, env, work)
        results[label] = dict(json.loads(report.read_text()), wall=wall, cpu=cpu)
    return results


def cold_batch(models: list[Path], work: Path) -> tuple[float, float, list[dict]]:
    """A two-worker batch of ``models`` on an empty cache; (wall, CPU, per-process compiles)."""
    (work / "site").mkdir()
    (work / "site" / "sitecustomize.py").write_text(SITECUSTOMIZE)
    (work / "tiny.toml").write_text(TINY_PRESET)
    (work / "models.txt").write_text("".join(f"{m}\n" for m in models))
    compiles = work / "compiles.jsonl"
    env = dict(os.environ, NUMBA_CACHE_DIR=str(work / "batch-cache"),
               PYTHONPATH=os.pathsep.join([str(work / "site"), str(ROOT)]),
               SHOTS_BENCH_COMPILES=str(compiles))
    command = [sys.executable, "-m", "shots", "batch", str(work / "models.txt"), "-p",
               str(work / "tiny.toml"), "-o", str(work / "out"), "-j", "2", "--quiet",
               "--animations", "none"]
    wall, cpu = run(command, env, work)
    rows = [json.loads(line) for line in compiles.read_text().splitlines()]
    return wall, cpu, rows


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--skip-batch", action="store_true", help="only the two renders")
    options = parser.parse_args()
    sys.path.insert(0, str(ROOT))
    from shots.demo import demo_models

    models = demo_models()
    print(f"python {sys.version.split()[0]}, {os.cpu_count()} cores, load average "
          f"{' '.join(f'{x:.1f}' for x in os.getloadavg())}; model {models[0].name}")
    with tempfile.TemporaryDirectory(prefix="shots-coldstart-") as scratch:
        work = Path(scratch)
        runs = render_twice(models[0], work)
        cold, warm = runs["cold"], runs["warm"]
        compile_seconds = print_compiles(cold["events"])
        print(f"\n{'run':<34} {'wall s':>8} {'CPU s':>8}")
        print(f"{'cold render (64x64, empty cache)':<34} {cold['wall']:>8.1f} {cold['cpu']:>8.1f}")
        print(f"{'  of which imports':<34} {cold['imports']:>8.2f} {cold['imports_cpu']:>8.2f}")
        print(f"{'  of which numba compiles':<34} {compile_seconds:>8.1f}")
        print(f"{'    of which in LLVM':<34} {cold['llvm']:>8.1f}")
        print(f"{'warm render (same cache)':<34} {warm['wall']:>8.2f} {warm['cpu']:>8.2f}")
        print(f"{'  of which imports':<34} {warm['imports']:>8.2f} {warm['imports_cpu']:>8.2f}")
        print(f"{'  warm start (after imports)':<34} {warm['after_imports']:>8.2f} "
              f"{warm['after_imports_cpu']:>8.2f}")
        if warm["events"]:
            print(f"warning: the warm run compiled {len(warm['events']) // 2} functions again")
        if not options.skip_batch:
            wall, cpu, rows = cold_batch(models[:2], work)
            print(f"{'cold batch (2 models, 2 workers)':<34} {wall:>8.1f} {cpu:>8.1f}")
            for row in sorted(rows, key=lambda r: r["role"]):
                print(f"  {row['role']:<7} pid {row['pid']:<8} compiled {row['compiled']:>3}, "
                      f"loaded from cache {row['loaded']:>3}")
        print(f"load average after: {' '.join(f'{x:.1f}' for x in os.getloadavg())}")
    print(f"headline: cold first render {cold['wall']:.1f} s, warm start "
          f"{warm['after_imports']:.2f} s")


if __name__ == "__main__":
    main()
