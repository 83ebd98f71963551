"""Texture memory: peak RSS of `shots render` on a model with six distinct 4096² RGBA textures.

    .venv/bin/python bench/texture_memory.py [--size 4096] [--baseline OTHER/.venv/bin/shots]

Writes the model once (six quads, each with its own base-colour PNG of a different pattern:
stripes, rings and gradients compress well, noise would not), then renders its thumbnail with
``/usr/bin/time -v`` and reads "Maximum resident set size". With ``--baseline`` the same model
is rendered by another installation side by side (e.g. the main checkout) for the ratio.
Texels alone: 6 × 4096² × 4 bytes × 4/3 (mip levels) = 537 MB. The target is 1 GB.
The last line is ``headline: peak RSS X MB (6 × 4096² RGBA)``.
"""

from __future__ import annotations

import argparse
import io
import json
import re
import struct
import subprocess
import sys
import tempfile
import time
from pathlib import Path

import numpy as np
from PIL import Image

ROOT = Path(__file__).resolve().parents[1]
COUNT = 6


def pattern(k: int, size: int) -> bytes:
    """PNG bytes of the k-th patterned RGBA image."""
    y, x = np.mgrid[0:size, 0:size].astype(np.float32) / size
    period = 8 + 5 * k
    r = (np.floor(x * size / period) % 2) * 200 + 30
    g = np.hypot(x - 0.5, y - 0.5) * (400 + 60 * k) % 255
    b = (x + y) * 127 * (k + 1) % 255
    a = np.full_like(x, 255)
    rgba = np.stack([r, g, b, a], -1).astype(np.uint8)
    out = io.BytesIO()
    Image.fromarray(rgba, "RGBA").save(out, format="PNG", compress_level=6)
    return out.getvalue()


def write_model(path: Path, size: int) -> None:
    """A GLB of six textured quads side by side."""
    blob = bytearray()
    views, accessors, meshes, nodes, materials, textures, images = [], [], [], [], [], [], []

    def add_view(data: bytes) -> int:
        blob.extend(b"\0" * (-len(blob) % 4))
        views.append({"buffer": 0, "byteOffset": len(blob), "byteLength": len(data)})
        blob.extend(data)
        return len(views) - 1

    positions = np.array([[0, 0, 0], [1, 0, 0], [1, 1, 0], [0, 1, 0]], np.float32)
    uv = np.array([[0, 1], [1, 1], [1, 0], [0, 0]], np.float32)
    indices = np.array([0, 1, 2, 0, 2, 3], np.uint16)
    accessors.append({"bufferView": add_view(positions.tobytes()), "componentType": 5126,
                      "count": 4, "type": "VEC3", "min": [0, 0, 0], "max": [1, 1, 0]})
    accessors.append({"bufferView": add_view(uv.tobytes()), "componentType": 5126, "count": 4,
                      "type": "VEC2"})
    accessors.append({"bufferView": add_view(indices.tobytes()), "componentType": 5123,
                      "count": 6, "type": "SCALAR"})
    for k in range(COUNT):
        images.append({"bufferView": add_view(pattern(k, size)), "mimeType": "image/png"})
        textures.append({"source": k})
        materials.append({"pbrMetallicRoughness": {"baseColorTexture": {"index": k},
                                                   "metallicFactor": 0.0}})
        meshes.append({"primitives": [{"attributes": {"POSITION": 0, "TEXCOORD_0": 1},
                                       "indices": 2, "material": k}]})
        nodes.append({"mesh": k, "translation": [1.1 * (k % 3), 1.1 * (k // 3), 0]})
    gltf = {"asset": {"version": "2.0"}, "scene": 0, "scenes": [{"nodes": list(range(COUNT))}],
            "nodes": nodes, "meshes": meshes, "materials": materials, "textures": textures,
            "images": images, "accessors": accessors, "bufferViews": views,
            "buffers": [{"byteLength": len(blob)}]}
    text = json.dumps(gltf).encode()
    text += b" " * (-len(text) % 4)
    blob.extend(b"\0" * (-len(blob) % 4))
    body = (struct.pack("<II", len(text), 0x4E4F534A) + text
            + struct.pack("<II", len(blob), 0x004E4942) + bytes(blob))
    path.write_bytes(struct.pack("<III", 0x46546C67, 2, 12 + len(body)) + body)


def peak_rss(shots: str, model: Path, out: Path) -> tuple[float, float]:
    """(peak RSS in MB, wall seconds) of one `shots render` of the model's thumbnail."""
    start = time.perf_counter()
    run = subprocess.run(["/usr/bin/time", "-v", shots, "render", str(model), "--preset",
                          "thumbnail", "--output", str(out)], capture_output=True, text=True)
    wall = time.perf_counter() - start
    if run.returncode != 0:
        sys.exit(f"{shots} failed:\n{run.stderr[-2000:]}")
    kb = int(re.search(r"Maximum resident set size \(kbytes\): (\d+)", run.stderr).group(1))
    return kb / 1000.0, wall


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--size", type=int, default=4096)
    parser.add_argument("--baseline", help="another installation's shots executable")
    args = parser.parse_args()
    ours = str(Path(sys.executable).with_name("shots"))
    with tempfile.TemporaryDirectory() as tmp:
        model = Path(tmp) / "six_textures.glb"
        write_model(model, args.size)
        print(f"model: {COUNT} × {args.size}² RGBA PNG, {model.stat().st_size / 1e6:.1f} MB file")
        rows = [("this checkout", ours)]
        if args.baseline:
            rows.append(("baseline", args.baseline))
        results = {}
        print(f"{'installation':<16}{'peak RSS MB':>14}{'wall s':>10}")
        for name, exe in rows:
            rss, wall = peak_rss(exe, model, Path(tmp) / name.replace(" ", "_"))
            results[name] = rss
            print(f"{name:<16}{rss:>14.0f}{wall:>10.1f}")
        if args.baseline:
            print(f"ratio this / baseline: {results['this checkout'] / results['baseline']:.2f}")
    print(f"headline: peak RSS {results['this checkout']:.0f} MB ({COUNT} × {args.size}² RGBA)")


if __name__ == "__main__":
    main()
