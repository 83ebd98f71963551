"""Texture prefiltering: how much closer 16 samples get to a converged image with mip lookups.

    .venv/bin/python bench/texture_filtering.py [model.glb] [--size 256] [--reference 256]

Renders the thumbnail preset's first frame of a model (default: the demo sofa, whose plain-weave
normal map is minified in a catalog thumbnail) three ways:

- reference: ``--reference`` samples per pixel with point lookups in the full-size textures
  (every sampler's minFilter forced to LINEAR: no mip levels), i.e. plain supersampling, which
  converges to the pixel-filtered texture;
- unfiltered: 16 samples the same way (how the renderer sampled textures before mip maps);
- prefiltered: 16 samples with the file's minFilter (mip levels picked from ray cones).

and prints the error of each 16-sample image against the reference in 8-bit display codes (the
preset's exposure and tone map, sRGB) over the product's pixels (opaque and not pure black in the
reference): RMSE and 99th percentile, and the render time of each; then the prefiltered render
at the reference's sample count, whose error is the bias prefiltering leaves. The last line is
``headline: RMSE unfiltered U -> prefiltered P codes, p99 U99 -> P99, time T×``.
"""

from __future__ import annotations

import argparse
import dataclasses
import time
from pathlib import Path

import numpy as np

from shots.colour import display_codes
from shots.gltf import load_scene
from shots.planner import plan_frames
from shots.presets import apply_model_fixes, load_preset
from shots.render import prepare_scene, render_frame
from shots.scene import FILTER_LINEAR

ROOT = Path(__file__).resolve().parents[1]
SOFA = ROOT / "assets_demo" / "wool_sofa.glb"


def codes(image, look):
    return display_codes(image, exposure=look.exposure, tone_map=look.tone_map).astype(np.float64)


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("model", nargs="?", default=str(SOFA))
    parser.add_argument("--size", type=int, default=256)
    parser.add_argument("--reference", type=int, default=256, help="reference samples per pixel")
    parser.add_argument("--samples", type=int, default=16)
    args = parser.parse_args()
    preset = load_preset("thumbnail")
    scene = apply_model_fixes(load_scene(Path(args.model)), preset)
    frame = plan_frames(preset, scene)[0]
    camera = dataclasses.replace(frame.camera, width=args.size, height=args.size)
    look = frame.look
    filtered = prepare_scene(scene)
    point_lookups = scene.textures.with_min_filter(FILTER_LINEAR)
    unfiltered = prepare_scene(dataclasses.replace(scene, textures=point_lookups))
    render_frame(filtered, dataclasses.replace(camera, width=8, height=8), look)  # compile
    reference = render_frame(unfiltered, camera, dataclasses.replace(look, samples=args.reference))
    ref = codes(reference, look)
    product = (ref[..., 3] >= 255) & (ref[..., :3].max(-1) > 0)
    print(f"model {Path(args.model).name}, {args.size} px, {product.sum()} product pixels, "
          f"reference {args.reference} spp without mip levels")
    print(f"{'16-spp render':<14}{'RMSE':>8}{'p99':>8}{'wall s':>9}")
    results = {}
    for name, prepared in (("unfiltered", unfiltered), ("prefiltered", filtered)):
        start = time.perf_counter()
        image = render_frame(prepared, camera, dataclasses.replace(look, samples=args.samples))
        wall = time.perf_counter() - start
        error = np.abs(codes(image, look)[..., :3] - ref[..., :3])[product]
        rmse = float(np.sqrt(np.mean(error**2)))
        p99 = float(np.percentile(error, 99))
        results[name] = (rmse, p99, wall)
        print(f"{name:<14}{rmse:>8.2f}{p99:>8.1f}{wall:>9.2f}")
    image = render_frame(filtered, camera, dataclasses.replace(look, samples=args.reference))
    error = np.abs(codes(image, look)[..., :3] - ref[..., :3])[product]
    print(f"prefiltered at {args.reference} spp (its bias): RMSE {np.sqrt(np.mean(error**2)):.2f}")
    (u, u99, ut), (p, p99, pt) = results["unfiltered"], results["prefiltered"]
    print(f"headline: RMSE unfiltered {u:.2f} -> prefiltered {p:.2f} codes, "
          f"p99 {u99:.0f} -> {p99:.0f}, time {pt / ut:.2f}×")


if __name__ == "__main__":
    main()
