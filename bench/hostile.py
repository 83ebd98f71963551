"""Benchmark: the worst hostile input of each kind, full size: peak memory, time and outcome.

Usage: python bench/hostile.py [--code FOLDER] [--cap-gib 6] [--timeout 90]

Each case runs in its own child process with its address space capped (RLIMIT_AS) and a
wall-time limit; the child's peak resident memory comes from wait4's rusage. ``--code`` puts
another checkout's ``shots`` first on the path, so the same cases measure a version before a
change side by side (``git archive COMMIT | tar -x -C FOLDER``). The inputs are built once in
/tmp/shots_bench_hostile. Last line: ``headline: worst peak P MiB, worst time T s`` over all
cases (each includes the child interpreter's start and imports, about 150 MiB and a second).
"""

from __future__ import annotations

import argparse
import base64
import json
import os
import signal
import subprocess
import sys
import threading
import time
from pathlib import Path

import numpy as np

ROOT = Path(__file__).resolve().parents[1]
WORK = Path("/tmp/shots_bench_hostile")
TRI = [[0, 0, 0], [1, 0, 0], [0, 1, 0]]


def triangle_tree(indices: list[int] | None = None) -> dict:
    """One triangle in a data: URI buffer (glTF 2.0 spec §Buffers), optionally indexed."""
    blob = np.array(TRI, np.float32).tobytes()
    accessors = [{"bufferView": 0, "componentType": 5126, "count": 3, "type": "VEC3",
                  "min": [0, 0, 0], "max": [1, 1, 0]}]
    prim = {"attributes": {"POSITION": 0}}
    return {
        "asset": {"version": "2.0"},
        "buffers": [{"byteLength": len(blob), "uri": "data:application/octet-stream;base64,"
                     + base64.b64encode(blob).decode()}],
        "bufferViews": [{"buffer": 0, "byteLength": len(blob)}],
        "accessors": accessors, "meshes": [{"primitives": [prim]}],
        "nodes": [{"mesh": 0}], "scenes": [{"nodes": [0]}], "scene": 0,
    }


def png_of_zeros(side: int, mode: str) -> bytes:
    import io

    from PIL import Image

    out = io.BytesIO()
    Image.new(mode, (side, side)).save(out, format="PNG", optimize=True)
    return out.getvalue()


def textured(tree: dict, png: bytes, uses: int) -> dict:
    tree["images"] = [{"uri": "data:image/png;base64," + base64.b64encode(png).decode()}]
    tree["textures"] = [{"source": 0} for _ in range(uses)]
    slots = [("pbr", "baseColorTexture"), ("pbr", "metallicRoughnessTexture"),
             ("mat", "normalTexture"), ("mat", "occlusionTexture"), ("mat", "emissiveTexture")]
    material: dict = {"pbrMetallicRoughness": {}}
    for k in range(uses):
        where, name = slots[k % len(slots)]
        (material["pbrMetallicRoughness"] if where == "pbr" else material)[name] = {"index": k}
    if uses > len(slots):  # the sixth use: a sheen colour texture (sRGB)
        material["extensions"] = {"KHR_materials_sheen": {"sheenColorTexture": {"index": 5}}}
        tree["extensionsUsed"] = ["KHR_materials_sheen"]
    tree["materials"] = [material]
    tree["meshes"][0]["primitives"][0]["material"] = 0
    return tree


def write(name: str, tree: dict | str) -> str:
    path = WORK / name
    if not path.exists():
        path.write_text(tree if isinstance(tree, str) else json.dumps(tree))
    return str(path)


def draco_model(side: int) -> str:
    path = WORK / f"draco_{side}.gltf"
    if path.exists():
        return str(path)
    import DracoPy

    u, v = np.meshgrid(np.arange(side), np.arange(side))
    points = np.stack([u.ravel(), v.ravel(), np.zeros(side * side)], 1).astype(np.float32)
    k = (v[:-1, :-1] * side + u[:-1, :-1]).ravel()
    faces = np.concatenate([np.stack([k, k + 1, k + side], 1),
                            np.stack([k + 1, k + side + 1, k + side], 1)]).astype(np.uint32)
    payload = DracoPy.encode(points, faces)
    tree = {
        "asset": {"version": "2.0"}, "extensionsUsed": ["KHR_draco_mesh_compression"],
        "extensionsRequired": ["KHR_draco_mesh_compression"],
        "buffers": [{"byteLength": len(payload), "uri": "data:application/octet-stream;base64,"
                     + base64.b64encode(payload).decode()}],
        "bufferViews": [{"buffer": 0, "byteLength": len(payload)}],
        "accessors": [{"componentType": 5125, "count": faces.size, "type": "SCALAR"},
                      {"componentType": 5126, "count": side * side, "type": "VEC3",
                       "min": [0, 0, 0], "max": [side - 1, side - 1, 0]}],
        "meshes": [{"primitives": [{"attributes": {"POSITION": 1}, "indices": 0, "extensions": {
            "KHR_draco_mesh_compression": {"bufferView": 0, "attributes": {"POSITION": 0}}}}]}],
        "nodes": [{"mesh": 0}], "scenes": [{"nodes": [0]}], "scene": 0,
    }
    path.write_text(json.dumps(tree))
    return str(path)


def huge_png_file() -> str:
    path = WORK / "renders" / "huge.png"
    if not path.exists():
        path.parent.mkdir(parents=True, exist_ok=True)
        path.write_bytes(png_of_zeros(10000, "1"))
    return str(path.parent)


def build_cases() -> list[tuple[str, str, str]]:
    """(group, case, Python code run in the child); the code prints its outcome."""
    WORK.mkdir(exist_ok=True)
    load = "from shots.gltf import load_scene\nload_scene({!r})\nprint('loaded')"
    cases = []
    # 1: a NUL once percent-decoded, while the batch hashes and the loader loads
    (WORK / "tri.bin").write_bytes(b"\0" * 36)
    nul = triangle_tree()
    nul["buffers"][0]["uri"] = "tri.bin%00.png"
    path = write("nul.gltf", nul)
    batch = ("from shots.batch import run_batch\n"
             "s = run_batch({!r}, 'thumbnail', {!r}, quiet=True, workers=1)\n"
             "print('exit', s.exit_code, s.failures)")
    for name, folder in (("nul", "catalog_nul"), ("manifests", "catalog_manifests")):
        (WORK / folder).mkdir(exist_ok=True)
        (WORK / folder / f"{name}.gltf").write_text((WORK / "nul.gltf").read_text()
                                                    if name == "nul" else
                                                    json.dumps(triangle_tree()))
    (WORK / "catalog_nul" / "tri.bin").write_bytes(b"\0" * 36)
    cases.append(("1", "batch of a %00 URI model", batch.format(
        str(WORK / "catalog_nul"), str(WORK / "out_nul"))))
    cases.append(("1", "render of a %00 URI model", load.format(path)))
    # 2: a model named manifests
    cases.append(("2", "batch of manifests.gltf", batch.format(
        str(WORK / "catalog_manifests"), str(WORK / "out_manifests"))))
    # 3: markup in a catalog path, printed in the summary table
    cases.append(("3", "[/x] in the summary", "import io\nfrom pathlib import Path\n"
                  "from rich.console import Console\n"
                  "from shots.batch.progress import print_summary\n"
                  "from shots.batch.run import BatchSummary, ModelOutcome\n"
                  "m = ModelOutcome('x', '[/x].gltf', ['[/bold]'], 1, 0, 0, None)\n"
                  "print_summary(BatchSummary(Path('.'), [m], 0, 0.0, None, None), "
                  "Console(file=io.StringIO()))\nprint('printed')"))
    # 4: memory bombs
    tree = triangle_tree()
    tree["accessors"].append({"componentType": 5125, "count": 80_000_000, "type": "SCALAR"})
    tree["meshes"][0]["primitives"][0].update(indices=1, mode=5)
    cases.append(("4", "80 M zero indices (strip)", load.format(write("strip.gltf", tree))))
    cases.append(("4", "4096² 1-bit PNG × 6 uses", load.format(
        write("reuse.gltf", textured(triangle_tree(), png_of_zeros(4096, "1"), 6)))))
    cases.append(("4", "10000² PNG, 12 KB", load.format(
        write("png10000.gltf", textured(triangle_tree(), png_of_zeros(10000, "1"), 1)))))
    tree = triangle_tree()
    extras = json.dumps(tree)[:-1] + ', "extras": [' + ",".join(["[0.5,1.5]"] * 6_000_000) + "]}"
    cases.append(("4", "60 MB of extras", load.format(write("extras.gltf", extras))))
    cases.append(("4", "Draco 4 M triangles", load.format(draco_model(1415))))
    cases.append(("4", "shots check, 10000² PNG", "from shots.check import check_renders\n"
                  f"r = check_renders({huge_png_file()!r})\nprint(r.images[0].reasons)"))
    # 5: CPU bombs
    tree = triangle_tree()
    tree["extensions"] = {"KHR_materials_variants": {"variants": [{"name": "v"}] * 4000}}
    cases.append(("5", "4,000 equal variant names", load.format(write("variants.gltf", tree))))
    tree = triangle_tree()
    tree["meshes"][0]["primitives"] *= 1000
    tree["nodes"] = [{"mesh": 0}] * 1000
    tree["scenes"][0]["nodes"] = list(range(1000))
    cases.append(("5", "1,000 nodes × 1,000 primitives", load.format(
        write("instancing.gltf", tree))))
    for level in range(9):
        for side in "ab":
            below = (f'extends = ["d{level + 1}a.toml", "d{level + 1}b.toml"]\n'
                     if level < 8 else "")
            (WORK / f"d{level}{side}.toml").write_text(
                below + f'[image]\nseed = {level}\n[look]\ntone_map = "neutral"\n')
    cases.append(("5", "extends diamond, 18 files", "from shots.presets import load_preset\n"
                  f"load_preset({str(WORK / 'd0a.toml')!r})\nprint('loaded')"))
    # 6: a symlinked model in a catalog folder, pointing outside it
    catalog = WORK / "catalog"
    catalog.mkdir(exist_ok=True)
    if not (catalog / "link.gltf").is_symlink():
        os.symlink(WORK / "nul.gltf", catalog / "link.gltf")
    cases.append(("6", "link out of the catalog", "from pathlib import Path\n"
                  "from shots.batch.catalog import find_models\n"
                  f"m = find_models(Path({str(catalog)!r}))[0]\n"
                  "print(getattr(m, 'escapes_root', lambda: 'not checked')())"))
    # 8: presets
    (WORK / "inf.toml").write_text("[environment]\nintensity = inf\n")
    (WORK / "deep.toml").write_text("x = " + "[" * 5000 + "]" * 5000 + "\n")
    for name in ("inf", "deep"):
        cases.append(("8", f"preset {name}", "from shots.presets import load_preset\n"
                      f"load_preset({str(WORK / (name + '.toml'))!r})\nprint('loaded')"))
    return cases


def run_case(code: str, path_first: str, cap: int, timeout: float) -> tuple[float, float, str]:
    """(seconds, peak MiB, outcome) of ``code`` in a capped child."""
    # set inside the child (no preexec_fn: a forked copy of this process would count in the
    # child's peak); an editable install's finder is dropped so ``path_first`` wins
    prelude = (f"import resource, sys\nresource.setrlimit(resource.RLIMIT_AS, ({cap}, {cap}))\n"
               f"sys.meta_path[:] = [f for f in sys.meta_path if 'editable' not in repr(f)]\n"
               f"sys.path.insert(0, {path_first!r})\n")
    start = time.perf_counter()
    child = subprocess.Popen([sys.executable, "-c", prelude + code], stdout=subprocess.PIPE,
                             stderr=subprocess.PIPE, text=True)
    timer = threading.Timer(timeout, lambda: child.send_signal(signal.SIGKILL))
    timer.start()
    out, err = child.stdout.read(), child.stderr.read()
    _, status, usage = os.wait4(child.pid, 0)
    timer.cancel()
    seconds = time.perf_counter() - start
    peak = usage.ru_maxrss / 1024
    if os.WIFSIGNALED(status):
        return seconds, peak, f"killed after {timeout:g} s"
    lines = (err.strip() or out.strip()).splitlines() or [""]
    last = lines[-1]
    return seconds, peak, (out.strip().splitlines() or [""])[-1] if not err.strip() else last


def main() -> None:
    parser = argparse.ArgumentParser()
    parser.add_argument("--code", default=str(ROOT), help="checkout whose shots to measure")
    parser.add_argument("--cap-gib", type=float, default=6.0)
    parser.add_argument("--timeout", type=float, default=90.0)
    args = parser.parse_args()
    cap = int(args.cap_gib * (1 << 30))
    print(f"code: {args.code}; cap {args.cap_gib:g} GiB address space, {args.timeout:g} s")
    print(f"{'group':5} {'case':32} {'time s':>8} {'peak MiB':>9}  outcome")
    worst_peak = worst_time = 0.0
    for group, name, code in build_cases():
        seconds, peak, outcome = run_case(code, args.code, cap, args.timeout)
        worst_peak, worst_time = max(worst_peak, peak), max(worst_time, seconds)
        print(f"{group:5} {name:32} {seconds:8.2f} {peak:9.0f}  {outcome[:110]}", flush=True)
    print(f"headline: worst peak {worst_peak:.0f} MiB, worst time {worst_time:.1f} s")


if __name__ == "__main__":
    main()
