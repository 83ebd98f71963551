"""Benchmark: image error and CPU time of the default (adaptive) sampling against fixed 16 spp.

Usage: python bench/quality.py [--size 512] [--quick] [--cache FOLDER] [--models a,b]

For each demo model (read from the demo catalog's ``catalog.json``) it renders the default
thumbnail (built-in ``thumbnail``) and the first hero view (built-in ``demo-hero``) at ``--size``
pixels wide, three ways: a reference at 1024 samples per pixel (cached under ``--cache``, keyed by
the model's bytes, the frame, the size and a hash of the renderer's code), the preset's default
sampling, and a fixed 16 samples per pixel; then both again with ``[image] denoise`` on
(``shots.denoise``).
``--quick``: 256 px, thumbnails only.

Error is measured in 8-bit display codes (0–255) of the image as shown over black (display colour
× alpha, after exposure, tone map and sRGB), over the product's pixels: those a one-sample render
of the product alone covers, grown by one pixel for its edges. Alpha error is in codes too, over
every pixel the reference or the test covers (the product and its shadow on a catcher). CPU time
is the process's (all threads) inside ``render_frame``, after a warm-up render compiled the
kernels. The last line is
``headline: worst RMSE R codes, worst p99 P codes, time T× fixed-16`` (worst over the frames of
the default sampling; T is its total CPU time ÷ fixed 16's); the line before it gives the same
for the denoised default, and the filter's own cost per frame (guide pass and filter, CPU).
"""

from __future__ import annotations

import argparse
import hashlib
import json
import os
import sys
import time
from dataclasses import replace
from pathlib import Path

import numpy as np

ROOT = Path(__file__).resolve().parents[1]
sys.path.insert(0, str(ROOT))

import shots  # noqa: E402
from shots.albedo import first_surfaces  # noqa: E402
from shots.colour import to_display  # noqa: E402
from shots.demo import demo_folder  # noqa: E402
from shots.denoise import denoise  # noqa: E402
from shots.gltf import load_scene  # noqa: E402
from shots.look import Background, Ground  # noqa: E402
from shots.planner import plan_frames  # noqa: E402
from shots.presets import apply_model_fixes, load_preset  # noqa: E402
from shots.render import prepare_scene, render_frame_counted  # noqa: E402

REFERENCE_SAMPLES = 1024
FIXED_SAMPLES = 16
REFERENCE_SEED_OFFSET = 1_000_003
SHOTS = (("thumbnail", "thumbnail"), ("hero", "demo-hero"))
CODE_FILES = ("shots/kernels/*.py", "shots/render.py", "shots/scene.py", "shots/gltf/*.py",
              "shots/environment.py")  # fmt: skip
NOT_TRACED = ("shots/kernels/albedo.py",)  # the guide buffers' kernel: no reference pixel


def code_version() -> str:
    """A hash of the sources that decide a reference's pixels (not the sampling control)."""
    digest = hashlib.sha256(shots.__version__.encode())
    for pattern in CODE_FILES:
        for path in sorted(ROOT.glob(pattern)):
            if path.relative_to(ROOT).as_posix() in NOT_TRACED:
                continue
            digest.update(path.read_bytes())
    return digest.hexdigest()[:16]


def catalog_models() -> list[Path]:
    """The demo catalog's model files, in the catalog's order."""
    folder = demo_folder()
    catalog = json.loads((folder / "catalog.json").read_text())
    return [folder / product["file"] for product in catalog["products"]]


def first_frame(model: Path, preset_name: str, width: int):
    """(prepared scene, frame) of the preset's first frame at ``width`` px wide."""
    preset = load_preset(preset_name)
    height = max(1, round(width * preset.image.height / preset.image.width))
    preset = preset.with_image_size(width, height)
    scene = apply_model_fixes(load_scene(model), preset)
    return prepare_scene(scene), plan_frames(preset, scene)[0]


def timed(prepared, frame, look):
    """(rgba, counts, CPU seconds) of one render."""
    start = time.process_time()
    rgba, counts = render_frame_counted(prepared, frame.camera, look)
    return rgba, counts, time.process_time() - start


def reference(prepared, frame, model: Path, shot: str, cache: Path) -> np.ndarray:
    """The 1024-spp render of this frame, from the cache when its key matches."""
    key = hashlib.sha256(model.read_bytes())
    camera = {k: v for k, v in frame.to_json().items() if k != "samples"}
    # another seed than the tests', so no test shares random numbers with its reference
    look = replace(frame.look, samples=REFERENCE_SAMPLES, noise_target=0, min_samples=0,
                   max_samples=0, denoise=False,
                   seed=frame.look.seed + REFERENCE_SEED_OFFSET)  # fmt: skip
    key.update(json.dumps([shot, camera, repr(look), code_version()], sort_keys=True).encode())
    path = cache / f"{model.stem}-{shot}-{frame.camera.width}-{key.hexdigest()[:20]}.npy"
    if path.exists():
        return np.load(path)
    print(f"  reference {model.stem} {shot} ({REFERENCE_SAMPLES} spp) ...", flush=True)
    rgba = render_frame_counted(prepared, frame.camera, look)[0]
    cache.mkdir(parents=True, exist_ok=True)
    np.save(path, rgba)
    return rgba


def product_mask(prepared, frame) -> np.ndarray:
    """Pixels the product covers (one sample through each centre, nothing else), grown by 1 px."""
    alone = replace(frame.look, samples=1, ground=Ground(kind="none"),
                    background=Background(kind="transparent"))  # fmt: skip
    covered = render_frame_counted(prepared, frame.camera, alone)[0][..., 3] > 0
    padded = np.pad(covered, 1)
    h, w = covered.shape
    return np.any([padded[dy : dy + h, dx : dx + w] for dy in range(3) for dx in range(3)], axis=0)


def shown_codes(rgba: np.ndarray, look) -> np.ndarray:
    """(h, w, 4) float64: display colour × alpha, and alpha, in 8-bit codes."""
    display = to_display(rgba, look.exposure, look.tone_map)
    display[..., :3] *= display[..., 3:]
    return 255.0 * display


def errors(test: np.ndarray, ref: np.ndarray, mask: np.ndarray, look) -> dict:
    """RMSE and 99th percentile of the colour error over ``mask``, alpha RMSE over coverage."""
    a, b = shown_codes(test, look), shown_codes(ref, look)
    colour = np.abs(a[..., :3] - b[..., :3])[mask].ravel()
    covered = (a[..., 3] > 0) | (b[..., 3] > 0)
    alpha = (a[..., 3] - b[..., 3])[covered]
    return {
        "rmse": float(np.sqrt(np.mean(colour**2))) if colour.size else 0.0,
        "p99": float(np.percentile(colour, 99)) if colour.size else 0.0,
        "alpha": float(np.sqrt(np.mean(alpha**2))) if alpha.size else 0.0,
    }


def modes(look) -> tuple:
    """(name, look) of each way a frame is rendered: default and fixed 16, plain and denoised."""
    fixed = replace(look, samples=FIXED_SAMPLES)
    return (("default", look), (f"fixed {FIXED_SAMPLES}", fixed),
            ("default denoised", replace(look, denoise=True)),
            (f"fixed {FIXED_SAMPLES} denoised", replace(fixed, denoise=True)))  # fmt: skip


def filter_cost(prepared, frame, rgba) -> tuple[float, float]:
    """CPU seconds of the guide pass and of the filter (variance estimated from the
    neighbourhood, the fixed-count path) on one frame."""
    start = time.process_time()
    surfaces = first_surfaces(prepared, frame.camera)
    middle = time.process_time()
    denoise(rgba, surfaces)
    return middle - start, time.process_time() - middle


def summary(rows: list[dict], mode: str) -> tuple[float, float]:
    """(worst RMSE, worst p99) over the rows of one mode."""
    chosen = [r for r in rows if r["mode"] == mode]
    return max(r["rmse"] for r in chosen), max(r["p99"] for r in chosen)


def cpu_of(rows: list[dict], mode: str) -> float:
    return sum(r["cpu"] for r in rows if r["mode"] == mode)


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--size", type=int, default=512, help="image width in pixels")
    parser.add_argument("--quick", action="store_true", help="256 px, thumbnails only")
    parser.add_argument("--cache", type=Path, default=ROOT / "bench" / ".cache" / "quality")
    parser.add_argument("--models", help="comma-separated model file stems (default: all)")
    args = parser.parse_args()
    size = 256 if args.quick else args.size
    shot_list = SHOTS[:1] if args.quick else SHOTS
    models = catalog_models()
    if args.models:
        models = [m for m in models if m.stem in args.models.split(",")]
    print(f"quality: {len(models)} models × {[s for s, _ in shot_list]} at {size} px wide; "
          f"reference {REFERENCE_SAMPLES} spp (cache {args.cache})", flush=True)  # fmt: skip
    warm, warm_frame = first_frame(models[0], "thumbnail", 16)
    for _, look in modes(warm_frame.look):  # compile before timing (the guide pass too)
        render_frame_counted(warm, warm_frame.camera, look)
    rows, costs = [], []
    for model in models:
        for shot, preset_name in shot_list:
            prepared, frame = first_frame(model, preset_name, size)
            ref = reference(prepared, frame, model, shot, args.cache)
            mask = product_mask(prepared, frame)
            for mode, look in modes(frame.look):
                rgba, counts, cpu = timed(prepared, frame, look)
                if mode == f"fixed {FIXED_SAMPLES}":
                    costs.append(filter_cost(prepared, frame, rgba))
                row = {"model": model.stem, "shot": shot, "mode": mode, "cpu": cpu,
                       "spp": float(counts[mask].mean()), **errors(rgba, ref, mask, look)}  # fmt: skip
                rows.append(row)
                print(f"{row['model']:<26} {shot:<9} {mode:<19} cpu {cpu:6.2f} s  "
                      f"spp {row['spp']:5.1f}  RMSE {row['rmse']:5.2f}  p99 {row['p99']:6.1f}  "
                      f"alpha RMSE {row['alpha']:5.2f}", flush=True)  # fmt: skip
    adaptive = [r for r in rows if r["mode"] == "default"]
    fixed = [r for r in rows if r["mode"] == f"fixed {FIXED_SAMPLES}"]
    ratio = sum(r["cpu"] for r in adaptive) / sum(r["cpu"] for r in fixed)
    guides, filtering = np.median(costs, axis=0)
    print(f"filter cost per {size} px frame (median, CPU): guide pass {guides * 1000:.0f} ms, "
          f"filter {filtering * 1000:.0f} ms")  # fmt: skip
    for mode in ("default denoised", f"fixed {FIXED_SAMPLES} denoised"):
        worst, p99 = summary(rows, mode)
        print(f"{mode}: worst RMSE {worst:.2f} codes, worst p99 {p99:.1f} codes, time "
              f"{cpu_of(rows, mode) / cpu_of(rows, 'default'):.2f}× default, mean spp "
              f"{np.mean([r['spp'] for r in rows if r['mode'] == mode]):.1f}")  # fmt: skip
    print(f"load average {' '.join(f'{x:.2f}' for x in os.getloadavg())}")
    print(f"product pixels' mean spp: default {np.mean([r['spp'] for r in adaptive]):.1f}, "
          f"fixed {FIXED_SAMPLES}; worst fixed-16 RMSE {max(r['rmse'] for r in fixed):.2f}, "
          f"p99 {max(r['p99'] for r in fixed):.1f}")  # fmt: skip
    print(f"headline: worst RMSE {max(r['rmse'] for r in adaptive):.2f} codes, "
          f"worst p99 {max(r['p99'] for r in adaptive):.1f} codes, time {ratio:.2f}× fixed-16")


if __name__ == "__main__":
    main()
