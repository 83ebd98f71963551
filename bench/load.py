"""Benchmark: load a 1M-triangle GLB with shots.gltf and with trimesh, in the same run.

Usage: python bench/load.py [--repeat 7] [--triangles 1000000]

The model (a rippled grid: POSITION, NORMAL, TEXCOORD_0, u32 indices, one material, one node)
is built once and cached in /tmp. Prints a table of median times and, last, the line
``headline: load ratio R`` with R = ours / trimesh.load(path) (its default options).
"""

from __future__ import annotations

import argparse
import statistics
import sys
import time
import warnings
from pathlib import Path

import numpy as np

sys.path.insert(0, str(Path(__file__).resolve().parents[1]))
sys.path.insert(0, str(Path(__file__).resolve().parents[1] / "tests"))

from gltf_builder import GltfBuilder  # noqa: E402

from shots.gltf import load_scene  # noqa: E402


def grid_model(triangles: int) -> Path:
    """A cached GLB holding a grid of about ``triangles`` triangles."""
    side = int(np.ceil(np.sqrt(triangles / 2))) + 1
    path = Path(f"/tmp/shots_bench_grid_{side}.glb")
    if path.exists():
        return path
    u, v = np.meshgrid(np.linspace(0, 1, side), np.linspace(0, 1, side))
    height = 0.02 * np.sin(20 * u) * np.cos(20 * v)
    positions = np.stack([u, height, v], axis=-1).reshape(-1, 3).astype(np.float32)
    normals = np.stack([-0.4 * np.cos(20 * u) * np.cos(20 * v), np.ones_like(u),
                        0.4 * np.sin(20 * u) * np.sin(20 * v)], axis=-1).reshape(-1, 3)
    normals = (normals / np.linalg.norm(normals, axis=1, keepdims=True)).astype(np.float32)
    uv = np.stack([u, v], axis=-1).reshape(-1, 2).astype(np.float32)
    k = np.arange(side - 1)
    a = (k[:, None] * side + k[None, :]).reshape(-1)
    quads = np.stack([a, a + side, a + 1, a + 1, a + side, a + side + 1], axis=1)
    b = GltfBuilder()
    mat = b.material(pbrMetallicRoughness={"baseColorFactor": [0.8, 0.6, 0.4, 1]})
    mesh = b.mesh(positions, quads.reshape(-1).astype(np.uint32), normals=normals, uv0=uv,
                  material=mat)
    b.scene([b.node(mesh=mesh, translation=[0, 0.5, 0])])
    b.write_glb(path)
    return path


def median_times(loaders: list, repeat: int) -> list[float]:
    """Median wall time of each loader; rounds interleave them so load drift hits all alike."""
    times: list[list[float]] = [[] for _ in loaders]
    for _ in range(repeat):
        for k, fn in enumerate(loaders):
            start = time.perf_counter()
            fn()
            times[k].append(time.perf_counter() - start)
    return [statistics.median(t) for t in times]


def main() -> None:
    parser = argparse.ArgumentParser()
    parser.add_argument("--repeat", type=int, default=7)
    parser.add_argument("--triangles", type=int, default=1_000_000)
    args = parser.parse_args()

    import trimesh

    path = grid_model(args.triangles)
    scene = load_scene(path)  # warm-up: imports, page cache
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        trimesh.load(path)
        ours, theirs, flat = median_times([
            lambda: load_scene(path),
            lambda: trimesh.load(path),
            lambda: trimesh.load(path, force="mesh"),
        ], args.repeat)
    size = path.stat().st_size / 2**20
    print(f"model: {path} ({size:.1f} MiB, {scene.triangle_count:,} triangles, "
          f"{scene.positions.shape[0]:,} vertices), median of {args.repeat}")
    print(f"{'loader':44s} {'median s':>9s} {'ours/it':>8s}")
    rows = [("shots.gltf.load_scene (world space)", ours),
            ("trimesh.load(path) (scene, default)", theirs),
            ("trimesh.load(path, force='mesh') (world space)", flat)]
    for name, t in rows:
        print(f"{name:44s} {t:9.3f} {ours / t:8.2f}")
    print(f"headline: load ratio {ours / theirs:.2f}")


if __name__ == "__main__":
    main()
