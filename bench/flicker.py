"""Benchmark: frame-to-frame flicker of a turntable, adaptive sampling beside fixed 16 spp.

Usage: python bench/flicker.py [--size 256] [--frames 3]

A turntable's light rig turns with the camera, so a product that is symmetric under the turntable's
step renders the same picture in every frame: whatever changes from one frame to the next is
noise and sampling decisions, which a viewer sees as flicker. The demo lamp (the catalog entry of
category "lamp") is symmetric under 15° except for a few parts; those triangles are dropped (every
triangle touching a vertex that the 15° turn does not map onto a vertex), and its first
``--frames`` frames of the built-in ``demo-turntable`` preset are rendered with the default
(adaptive) sampling and with a fixed 16 samples per pixel.

Per pair of adjacent frames: the RMS and 99th percentile of the difference in 8-bit display codes
(display colour × alpha, and alpha) over the pixels either frame covers (product and shadow;
the rest is transparent), and the share of those pixels whose sample count changed. For pure
noise the RMS difference is √2 × each frame's RMS error. The last line is
``headline: frame-to-frame RMS A codes adaptive (p99 a), F codes fixed-16 (p99 f)``.
"""

from __future__ import annotations

import argparse
import json
import math
import sys
from dataclasses import replace
from pathlib import Path

import numpy as np

ROOT = Path(__file__).resolve().parents[1]
sys.path.insert(0, str(ROOT))

from shots.colour import to_display  # noqa: E402
from shots.demo import demo_folder  # noqa: E402
from shots.gltf import load_scene  # noqa: E402
from shots.planner import plan_frames  # noqa: E402
from shots.presets import apply_model_fixes, load_preset  # noqa: E402
from shots.render import prepare_scene, render_frame_counted  # noqa: E402

STEP_DEG = 15.0  # demo-turntable: 24 frames


def lamp_model() -> Path:
    """The demo catalog's lamp."""
    folder = demo_folder()
    products = json.loads((folder / "catalog.json").read_text())["products"]
    return folder / next(p["file"] for p in products if p["category"] == "lamp")


def symmetric_part(scene, step_deg: float):
    """The scene without the triangles that a turn of ``step_deg`` about +Y does not map onto
    the model itself; returns (scene, share of triangles kept)."""
    p = scene.positions.astype(np.float64)
    a = math.radians(step_deg)
    turned = p @ np.array([[math.cos(a), 0, math.sin(a)], [0, 1, 0], [-math.sin(a), 0, math.cos(a)]]).T
    nearest = np.array([np.min(np.sum((p - q) ** 2, axis=1)) for q in turned])
    moved = np.sqrt(nearest) > 1e-4
    keep = ~moved[scene.triangles].any(axis=1)
    kept = replace(scene, triangles=scene.triangles[keep], tri_material=scene.tri_material[keep])
    return kept, float(keep.mean())


def shown(rgba, look) -> np.ndarray:
    """(h, w, 4) display colour × alpha and alpha, in 8-bit codes."""
    display = to_display(rgba, look.exposure, look.tone_map)
    display[..., :3] *= display[..., 3:]
    return 255.0 * display


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--size", type=int, default=256)
    parser.add_argument("--frames", type=int, default=3)
    args = parser.parse_args()
    preset = load_preset("demo-turntable").with_image_size(args.size, args.size)
    model = lamp_model()
    scene, share = symmetric_part(apply_model_fixes(load_scene(model), preset), STEP_DEG)
    frames = plan_frames(preset, scene)[: args.frames]
    prepared = prepare_scene(scene)
    print(f"flicker: {model.name}, {share:.0%} of its triangles (the part symmetric under "
          f"{STEP_DEG:g}°), demo-turntable frames 0–{len(frames) - 1} at {args.size} px")  # fmt: skip
    results = {}
    for mode, samples in (("adaptive", None), ("fixed 16", 16)):
        renders = []
        for frame in frames:
            look = frame.look if samples is None else replace(frame.look, samples=samples)
            rgba, counts = render_frame_counted(prepared, frame.camera, look)
            renders.append((shown(rgba, look), counts))
        diffs, changed = [], []
        for (a, ca), (b, cb) in zip(renders, renders[1:], strict=False):
            covered = (a[..., 3] > 0) | (b[..., 3] > 0)
            diffs.append((a - b)[covered].ravel())
            changed.append(float(np.mean(ca[covered] != cb[covered])))
        d = np.abs(np.concatenate(diffs))
        rms, p99 = float(np.sqrt(np.mean(d**2))), float(np.percentile(d, 99))
        spp = float(np.mean([c[c > 0].mean() for _, c in renders]))
        results[mode] = (rms, p99)
        print(f"{mode:<9} frame-to-frame RMS {rms:5.2f} codes  p99 {p99:5.1f}  max {d.max():6.1f}  "
              f"mean spp {spp:5.1f}  pixels whose count changed {np.mean(changed):.0%}")  # fmt: skip
    (ar, ap), (fr, fp) = results["adaptive"], results["fixed 16"]
    print(f"headline: frame-to-frame RMS {ar:.2f} codes adaptive (p99 {ap:.1f}), "
          f"{fr:.2f} codes fixed-16 (p99 {fp:.1f})")


if __name__ == "__main__":
    main()
