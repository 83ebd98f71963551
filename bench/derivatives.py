"""Derivative benchmark: what publishing costs per frame, beside rendering that frame.

    .venv/bin/python bench/derivatives.py [--quick] [--repeat N]

1. Each format alone (``shots.derivatives.make_derivative``) on a rendered master of the demo's
   oak dining chair, at thumbnail size (512 px) and hero size (1600×1200): CPU seconds per file,
   median of ``--repeat`` runs.
2. The demo's storefront set (``presets/demo-thumbnail.toml``: a JPEG and a WebP per frame) in a
   one-model batch, one worker: the manifest's ``derive_s`` (making the set in the worker) beside
   ``render_s`` (rendering the frame) and ``encode_s`` (the master PNG).

    share = derive_s / render_s

The last line is ``headline: derive share S per frame T s``.
"""

from __future__ import annotations

import argparse
import json
import statistics
import tempfile
import time
from pathlib import Path

from shots.derivatives import make_derivative
from shots.presets import Derivative, load_preset

ROOT = Path(__file__).resolve().parents[1]
MODEL = ROOT / "assets_demo" / "oak_dining_chair.glb"
FORMATS = {
    "jpeg q86 on white": dict(format="jpeg", background=(1.0, 1.0, 1.0), quality=86),
    "webp q86 alpha": dict(format="webp", quality=86),
    "png alpha": dict(format="png"),
    "avif q60 alpha": dict(format="avif", quality=60),
}


def master_codes(width: int, height: int, samples: int):
    """A rendered master frame's 8-bit display codes (thumbnail look, demo chair)."""
    from shots.colour import display_codes
    from shots.gltf import load_scene
    from shots.planner import plan_frames
    from shots.presets import apply_model_fixes
    from shots.render import prepare_scene, render_frame

    preset = load_preset("thumbnail").with_image_size(width, height)
    preset = preset.model_copy(update={"image": preset.image.model_copy(
        update={"samples": samples})})
    scene = apply_model_fixes(load_scene(MODEL), preset)
    frame = plan_frames(preset, scene)[0]
    rgba = render_frame(prepare_scene(scene), frame.camera, frame.look)
    return display_codes(rgba, frame.look.exposure, frame.look.tone_map)


def time_formats(codes, longest_side: int, repeat: int) -> dict[str, float]:
    from PIL import features

    times = {}
    for label, keys in FORMATS.items():
        if keys["format"] == "avif" and not features.check("avif"):
            continue
        derivative = Derivative.model_validate(
            {"name": "d", "path": "d." + keys["format"].replace("jpeg", "jpg"),
             "longest_side": longest_side, **keys})
        runs = []
        for _ in range(repeat):
            start = time.process_time()
            make_derivative(codes, derivative)
            runs.append(time.process_time() - start)
        times[label] = statistics.median(runs)
    return times


def storefront_batch(samples: int) -> dict:
    """Timings of the demo storefront set in a one-model batch (one worker)."""
    from shots.batch import run_batch

    with tempfile.TemporaryDirectory(prefix="shots-bench-") as scratch:
        folder = Path(scratch)
        listing = folder / "models.txt"
        listing.write_text(f"{MODEL}\n")
        preset = folder / "storefront.toml"
        products = ROOT / "presets" / "demo-products.csv"
        shipped = (ROOT / "presets" / "demo-thumbnail.toml").read_text()
        preset.write_text(shipped.replace('"demo-products.csv"', json.dumps(str(products)))
                          + f"\n[image]\nsamples = {samples}\n")
        run_batch(listing, preset, folder / "out", quiet=True, workers=1, animations=())
        manifest = json.loads((folder / "out/manifests/oak_dining_chair.json").read_text())
        return manifest["timings"]


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--quick", action="store_true", help="fewer samples and repeats")
    parser.add_argument("--repeat", type=int, default=5)
    args = parser.parse_args()
    samples = 4 if args.quick else 16
    repeat = 2 if args.quick else args.repeat

    print("per file, CPU seconds (median):")
    print(f"{'format':<20} {'512 → 400':>10} {'1600x1200 → 1200':>18}")
    small = time_formats(master_codes(512, 512, samples), 400, repeat)
    large = time_formats(master_codes(1600, 1200, 1), 1200, repeat)
    for label in small:
        print(f"{label:<20} {small[label]:>10.4f} {large[label]:>18.4f}")

    timings = storefront_batch(samples)
    derive, render, encode = timings["derive_s"], timings["render_s"], timings["encode_s"]
    print(f"\ndemo storefront set (JPEG + WebP), one 512 px frame at {samples} samples:")
    print(f"render_s {render:.3f}  encode_s (master PNG) {encode:.4f}  derive_s {derive:.4f}")
    share = derive / render
    print(f"headline: derive share {share:.4f} per frame {derive:.3f} s")


if __name__ == "__main__":
    main()
