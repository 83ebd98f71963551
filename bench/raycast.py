"""Ray-casting benchmark: our BVH kernels beside Embree, trimesh and VTK, in one run.

    /tmp/venv/bin/python bench/raycast.py [--quick] [--reps N] [--embree-only]

For each mesh and ray set, every repetition times (back to back, so they share the machine's load;
each the fastest of CALLS calls; one thread in the thread's CPU seconds, two on the wall clock)
our closest-hit kernel on 1 and 2 threads and Embree (package ``embreex``, a yardstick only) on
1 thread and split over two Python threads. Embree runs in its fastest configuration that
embreex offers: the default (non-robust) scene, which is faster than its robust flag, and the call
that returns only the hit triangle (the full-output call is 4-50% slower; embreex exposes no
build-quality setting). trimesh's pure-numpy intersector and VTK's OBB tree run on a subset of the
rays; their rates are extrapolated from it (and say so). Reported: medians and per-repetition
ratios, BVH build time beside Embree's, the bytes per triangle the traversal reads, the SAH cost,
hit and distance agreement with Embree, cold/warm JIT start-up measured in fresh subprocesses,
the machine's load average, and a table of all ratios. ``--embree-only`` leaves out trimesh, VTK
and the start-up timing (for quick comparisons while tuning). The last two lines are

    ours (2 threads) / Embree's faster run (1 or 2 threads), geometric mean of medians: camera R1 incoherent R2
    headline: single-thread camera R1 incoherent R2

with R in the headline = the geometric mean over the meshes of the median over repetitions of
ours(1 thread) / Embree(1 thread) in rays/s: one core against one core, which does not depend on
how either side scales with threads (Embree does not, from Python threads, on this machine).
"""

from __future__ import annotations

import argparse
import os
import subprocess
import sys
import tempfile
import threading
import time
from pathlib import Path

import numba
import numpy as np

sys.path.insert(0, str(Path(__file__).resolve().parents[1]))

from shots import accel  # noqa: E402

# --- meshes -----------------------------------------------------------------------------------


def icosphere(subdivisions):
    import trimesh

    m = trimesh.creation.icosphere(subdivisions=subdivisions)
    return m.vertices.astype(np.float32), m.faces.astype(np.int32)


def superellipsoid(centre, radii, n, exponent=0.25):
    """A closed rounded box: lat-long grid of n×n quads (poles fanned), exponent < 1 = boxier."""
    u = np.linspace(-np.pi, np.pi, n, endpoint=False)
    v = np.linspace(-np.pi / 2, np.pi / 2, n + 1)[1:-1]
    uu, vv = np.meshgrid(u, v, indexing="ij")

    def f(w):
        return np.sign(w) * np.abs(w) ** exponent

    pts = np.stack([f(np.cos(vv)) * f(np.cos(uu)), f(np.cos(vv)) * f(np.sin(uu)), f(np.sin(vv))])
    pts = pts.reshape(3, -1).T * radii + centre
    poles = np.array([[0, 0, -1], [0, 0, 1]]) * radii + centre
    positions = np.concatenate([pts, poles])
    rows = n - 1  # latitude rings
    i, j = np.meshgrid(np.arange(n), np.arange(rows - 1), indexing="ij")
    a = i * rows + j
    b = ((i + 1) % n) * rows + j
    quads = np.concatenate([np.stack([a, b, a + 1], -1), np.stack([a + 1, b, b + 1], -1)])
    ring = np.arange(n)
    south, north = n * rows, n * rows + 1
    fan_s = np.stack([ring * rows, np.full(n, south), ((ring + 1) % n) * rows], -1)
    fan_n = np.stack([ring * rows + rows - 1, ((ring + 1) % n) * rows + rows - 1,
                      np.full(n, north)], -1)  # fmt: skip
    triangles = np.concatenate([quads.reshape(-1, 3), fan_s, fan_n])
    return positions, triangles


def chair(scale):
    """A procedural armchair of rounded boxes: seat, back, two arms, four legs.
    scale=1 gives about 250k triangles."""
    parts = [
        ((0, 0, 0.45), (0.5, 0.5, 0.08), int(180 * scale)),  # seat
        ((0, -0.45, 0.85), (0.5, 0.06, 0.4), int(150 * scale)),  # back
        ((0.47, 0, 0.65), (0.05, 0.5, 0.2), int(100 * scale)),  # arms
        ((-0.47, 0, 0.65), (0.05, 0.5, 0.2), int(100 * scale)),
    ] + [((x, y, 0.2), (0.04, 0.04, 0.2), int(70 * scale)) for x in (-0.42, 0.42)
         for y in (-0.42, 0.42)]  # fmt: skip
    positions, triangles, base = [], [], 0
    for centre, radii, n in parts:
        p, t = superellipsoid(np.array(centre), np.array(radii), max(n, 8))
        positions.append(p)
        triangles.append(t + base)
        base += len(p)
    return np.concatenate(positions).astype(np.float32), np.concatenate(triangles).astype(np.int32)


def displaced_grid(n_triangles, seed=0):
    """A height field of about n_triangles triangles over [-1, 1]²: smooth waves plus noise."""
    n = int(round(np.sqrt(n_triangles / 2)))
    xs = np.linspace(-1, 1, n + 1)
    x, y = np.meshgrid(xs, xs, indexing="ij")
    z = 0.08 * np.sin(6 * x) * np.cos(5 * y) + 0.01 * np.random.default_rng(seed).standard_normal(
        x.shape
    )
    positions = np.stack([x, y, z], -1).reshape(-1, 3)
    i, j = np.meshgrid(np.arange(n), np.arange(n), indexing="ij")
    a = (i * (n + 1) + j).ravel()
    b, c, d = a + n + 1, a + 1, a + n + 2
    triangles = np.concatenate([np.stack([a, b, c], 1), np.stack([c, b, d], 1)])
    return positions.astype(np.float32), triangles.astype(np.int32)


# --- rays ---------------------------------------------------------------------------------------


def camera_rays(positions, size, fov_deg=40.0):
    """Row-major primary rays of a size×size pinhole camera looking at the mesh's bounding sphere
    from above the front-right."""
    lo, hi = positions.min(0), positions.max(0)
    centre = (lo + hi) / 2
    radius = np.linalg.norm(hi - lo) / 2
    view = np.array([0.6, -1.0, 0.7])
    view /= np.linalg.norm(view)
    eye = centre + view * radius / np.sin(np.radians(fov_deg / 2))
    forward = (centre - eye) / np.linalg.norm(centre - eye)
    right = np.cross(forward, [0, 0, 1.0])
    right /= np.linalg.norm(right)
    up = np.cross(right, forward)
    half = np.tan(np.radians(fov_deg / 2))
    s = (np.arange(size) + 0.5) / size * 2 - 1
    py, px = np.meshgrid(-s * half, s * half, indexing="ij")
    d = forward + px[..., None] * right + py[..., None] * up
    d = d.reshape(-1, 3)
    return np.broadcast_to(eye, d.shape).astype(np.float32), d.astype(np.float32)


def incoherent_rays(positions, count, seed=1):
    """Random origins in the slightly enlarged bounds, uniformly random directions."""
    rng = np.random.default_rng(seed)
    lo, hi = positions.min(0), positions.max(0)
    centre, extent = (lo + hi) / 2, (hi - lo) * 1.1
    origins = centre + (rng.random((count, 3)) - 0.5) * extent
    d = rng.standard_normal((count, 3))
    return origins.astype(np.float32), (d / np.linalg.norm(d, axis=1, keepdims=True)).astype(
        np.float32
    )


# --- tracers ------------------------------------------------------------------------------------


class Embree:
    """Embree 4 through embreex: single-ray rtcIntersect1 in a Cython loop (GIL released), the
    default non-robust scene, returning the hit triangle only (its fastest call)."""

    def __init__(self, positions, triangles):
        from embreex import rtcore_scene
        from embreex.mesh_construction import TriangleMesh

        start = time.perf_counter()
        self.scene = rtcore_scene.EmbreeScene()
        TriangleMesh(scene=self.scene, vertices=positions[triangles])
        one = np.zeros((1, 3), np.float32)
        self.scene.run(one, one + 1)  # commits (builds) the scene
        self.build_seconds = time.perf_counter() - start

    def closest(self, origins, directions):
        return self.scene.run(origins, directions)

    def closest_threads(self, origins, directions, threads=2):
        parts = np.array_split(np.arange(len(origins)), threads)
        out = [None] * threads

        def work(k):
            out[k] = self.scene.run(origins[parts[k]], directions[parts[k]])

        workers = [threading.Thread(target=work, args=(k,)) for k in range(threads)]
        for w in workers:
            w.start()
        for w in workers:
            w.join()
        return np.concatenate(out)


def rate_on_subset(trace, origins, directions, budget=3.0, batch=32):
    """Rays/s of ``trace(origins, directions)`` on leading batches of the rays, stopping once
    ``budget`` seconds are spent. Returns (rays/s, rays traced)."""
    done, spent = 0, 0.0
    while done < len(origins) and spent < budget:
        start = time.perf_counter()
        trace(origins[done : done + batch], directions[done : done + batch])
        spent += time.perf_counter() - start
        done = min(len(origins), done + batch)
    return done / spent, done


def trimesh_rate(positions, triangles, origins, directions):
    """trimesh.ray.ray_triangle.RayMeshIntersector (pure numpy + rtree) on a subset."""
    import trimesh
    from trimesh.ray.ray_triangle import RayMeshIntersector

    mesh = trimesh.Trimesh(positions, triangles, process=False)
    intersector = RayMeshIntersector(mesh)
    intersector.intersects_id(origins[:2], directions[:2], multiple_hits=False)  # builds the tree
    return rate_on_subset(
        lambda o, d: intersector.intersects_id(o, d, multiple_hits=False), origins, directions
    )


def vtk_rate(positions, triangles, origins, directions):
    """VTK's vtkOBBTree.IntersectWithLine (on a pyvista mesh), one ray per call, on a subset."""
    import pyvista as pv
    import vtk

    faces = np.hstack([np.full((len(triangles), 1), 3), triangles]).ravel()
    tree = vtk.vtkOBBTree()
    tree.SetDataSet(pv.PolyData(positions.astype(np.float64), faces))
    tree.BuildLocator()
    points, ids = vtk.vtkPoints(), vtk.vtkIdList()

    def trace(o, d):
        far = (o + d * 1e3).astype(np.float64)
        for a, b in zip(o.astype(np.float64), far, strict=True):
            tree.IntersectWithLine(a, b, points, ids)

    return rate_on_subset(trace, origins, directions)


def distance_agreement(bvh, embree, origins, directions):
    """Over the rays that both hit (untimed): the share whose hit distances agree within 1e-4
    relative, the worst relative difference, and our distance on that ray."""
    t = accel.intersect_closest(bvh, origins, directions)[0]
    theirs = embree.scene.run(origins, directions, output=1)
    both = np.isfinite(t) & (theirs["primID"] >= 0)
    if not both.any():
        return 1.0, 0.0, 0.0
    ours_t, far = t[both].astype(np.float64), theirs["tfar"][both].astype(np.float64)
    rel = np.abs(ours_t - far) / far
    worst = int(np.argmax(rel))
    return float(np.mean(rel <= 1e-4)), float(rel[worst]), float(ours_t[worst])


def ours(bvh, origins, directions, threads):
    numba.set_num_threads(threads)
    return accel.intersect_closest(bvh, origins, directions)[1]


def timed(fn, *args, clock=time.perf_counter):
    start = clock()
    result = fn(*args)
    return clock() - start, result


# Calls per timing, of which the fastest counts: a ray set takes 5-50 ms, about a scheduler time
# slice, so on a shared machine single calls are often interrupted by other work (which only ever
# slows a call down). The fastest of a few is the undisturbed speed (common practice, as in
# Python's timeit); repetitions then spread these timings over the run.
CALLS = 3
# Single-thread runs are timed in CPU seconds of the calling thread, where both tracers run then
# (numba with one thread runs a parallel loop on the caller; embreex traces in the caller): the
# time the thread waits while other programs run is left out, so the ratio holds on a busy
# machine. Runs on two threads are timed on the wall clock.
ONE_THREAD_CLOCK = time.thread_time


def fastest(fn, *args, clock=time.perf_counter):
    """(seconds, result) of the fastest of CALLS calls of ``fn(*args)``."""
    runs = [timed(fn, *args, clock=clock) for _ in range(CALLS)]
    return min(runs, key=lambda run: run[0])


# --- start-up -------------------------------------------------------------------------------------

_STARTUP = (
    "import time; t0 = time.perf_counter(); import shots.accel as a; t1 = time.perf_counter(); "
    "a.warm_up(); t2 = time.perf_counter(); print(t1 - t0, t2 - t1)"
)


def startup_seconds():
    """(cold, warm) seconds of ``import shots.accel; warm_up()`` in fresh interpreters, cold with
    an empty numba cache (compiles everything), warm with the cache it left."""
    root = Path(__file__).resolve().parents[1]
    with tempfile.TemporaryDirectory() as cache:
        env = dict(os.environ, NUMBA_CACHE_DIR=cache, PYTHONPATH=str(root))
        runs = []
        for _ in range(3):  # cold, then warm twice (the median of the warm ones is kept)
            out = subprocess.run([sys.executable, "-c", _STARTUP], env=env, capture_output=True,
                                 text=True, check=True, cwd=root)  # fmt: skip
            runs.append([float(x) for x in out.stdout.split()])
    return runs[0], runs[2] if runs[2][1] < runs[1][1] else runs[1]


# --- main ---------------------------------------------------------------------------------------


def load_text():
    """The machine's 1/5/15-minute load averages, for the report."""
    return "load average " + " ".join(f"{x:.2f}" for x in os.getloadavg())


def geometric_mean(values):
    return float(np.exp(np.mean(np.log(values))))


def main():
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--quick", action="store_true", help="smaller meshes and images (< 2 min)")
    parser.add_argument("--reps", type=int, default=None, help="repetitions (default 5, quick 3)")
    parser.add_argument("--embree-only", action="store_true",
                        help="compare with Embree only: no trimesh, VTK or start-up timing")  # fmt: skip
    args = parser.parse_args()
    quick = args.quick
    reps = args.reps or (3 if quick else 5)
    size = 256 if quick else 512
    n_incoherent = 65536 if quick else 262144
    subset = 256 if quick else 2048
    meshes = {
        "icosphere": lambda: icosphere(5 if quick else 6),
        "chair": lambda: chair(0.5 if quick else 1.0),
        "grid 10k": lambda: displaced_grid(10_000),
        "grid 100k": lambda: displaced_grid(100_000),
    }
    if not quick:
        meshes["grid 1M"] = lambda: displaced_grid(1_000_000)

    accel.warm_up()
    threads = min(2, numba.config.NUMBA_NUM_THREADS)
    print(f"numba {numba.__version__}, threading layer {numba.threading_layer()}, "
          f"{threads} threads, {reps} repetitions, camera {size}x{size}, "
          f"{n_incoherent} incoherent rays; {load_text()} at the start")  # fmt: skip
    # Per (mesh, kind): medians of rays/s and of the per-repetition ratios.
    table = []
    agreement = []
    for name, make in meshes.items():
        positions, triangles = make()
        builds = []
        for _ in range(reps):
            numba.set_num_threads(threads)
            seconds, bvh = timed(accel.build_bvh, positions, triangles)
            builds.append(seconds)
        embree = Embree(positions, triangles)
        n = len(triangles)
        print(f"\n== {name}: {n} triangles. build: ours {np.median(builds) * 1e3:.0f} ms "
              f"(median of {reps}, {threads} threads), Embree {embree.build_seconds * 1e3:.0f} ms "
              f"(its own thread pool)\n   traversal reads {accel.traversal_bytes(bvh) / n:.1f} "
              f"bytes/triangle (nodes {bvh.node_bounds.nbytes / n:.1f} + vertices "
              f"{bvh.tri_verts.nbytes / n:.1f} + ids {bvh.tri_ids.nbytes / n:.1f}, the ids once "
              f"per hit); SAH cost {accel.sah_cost(bvh):.1f}; {load_text()}")  # fmt: skip
        for kind, (origins, directions) in (
            ("camera", camera_rays(positions, size)),
            ("incoherent", incoherent_rays(positions, n_incoherent)),
        ):
            r = len(origins)
            rows = {"ours 1 thread": [], f"ours {threads} threads": [], "Embree 1 thread": [],
                    f"Embree {threads} threads": []}  # fmt: skip
            single, best = [], []
            for _ in range(reps):
                t1, ours_tri = fastest(ours, bvh, origins, directions, 1, clock=ONE_THREAD_CLOCK)
                t2, _ = fastest(ours, bvh, origins, directions, threads)
                e1, embree_tri = fastest(
                    embree.closest, origins, directions, clock=ONE_THREAD_CLOCK
                )
                e2, _ = fastest(embree.closest_threads, origins, directions, threads)
                for key, sec in zip(rows, (t1, t2, e1, e2), strict=True):
                    rows[key].append(r / sec)
                single.append(e1 / t1)
                best.append(min(e1, e2) / t2)
            hit_same = np.mean((ours_tri >= 0) == (embree_tri >= 0))
            tri_same = np.mean(ours_tri == embree_tri)
            agreement.append(hit_same)
            medians = [np.median(v) for v in rows.values()]
            table.append((name, kind, *medians, np.median(single), np.median(best)))
            print(f"  {kind} ({r} rays): " + ", ".join(
                f"{k} {m / 1e6:.2f}" for k, m in zip(rows, medians, strict=True))
                + " Mrays/s (medians)")  # fmt: skip
            print(
                "    ratio ours/Embree (1 thread) per repetition: "
                + " ".join(f"{x:.2f}" for x in single)
                + f" -> median {np.median(single):.2f}"
            )
            close, worst, worst_t = distance_agreement(bvh, embree, origins, directions)
            print(f"    agreement with Embree: hit/miss {hit_same * 100:.4f}%, same triangle "
                  f"{tri_same * 100:.4f}%, distance within 1e-4 relative {close * 100:.4f}% "
                  f"(worst {worst:.1e} at t = {worst_t:.1e})")  # fmt: skip
            if args.embree_only:
                continue
            # Spread the subset over the whole ray set (camera rays come in scanlines).
            sub = np.random.default_rng(5).permutation(r)[:subset]
            tm, tm_rays = trimesh_rate(positions, triangles, origins[sub], directions[sub])
            vt, vt_rays = vtk_rate(positions, triangles, origins[sub], directions[sub])
            print(f"    trimesh {tm / 1e6:.4f} Mrays/s, VTK OBB tree {vt / 1e6:.4f} Mrays/s (1 "
                  f"thread; extrapolated from {tm_rays} and {vt_rays} random rays of the set)")  # fmt: skip

    if not args.embree_only:
        cold, warm = startup_seconds()
        print(f"\nstart-up (fresh interpreter): cold import {cold[0]:.2f} s + warm_up "
              f"{cold[1]:.2f} s (compiles); warm import {warm[0]:.2f} s + warm_up {warm[1]:.2f} s "
              f"(cached)")  # fmt: skip
    print_table(table, threads)
    print(f"hit/miss agreement with Embree, worst ray set: {min(agreement) * 100:.4f}%")
    print(f"{load_text()} at the end")
    summary = {kind: [geometric_mean([row[col] for row in table if row[1] == kind])
                      for col in (6, 7)] for kind in ("camera", "incoherent")}  # fmt: skip
    print(f"ours ({threads} threads) / Embree's faster run (1 or {threads} threads), geometric "
          f"mean of medians: camera {summary['camera'][1]:.2f} "
          f"incoherent {summary['incoherent'][1]:.2f}")  # fmt: skip
    print(
        f"headline: single-thread camera {summary['camera'][0]:.2f} "
        f"incoherent {summary['incoherent'][0]:.2f}"
    )


def print_table(table, threads):
    """All medians in one Markdown table (Mrays/s and ratios)."""
    print(f"\n| mesh | rays | ours 1 thr | Embree 1 thr | ours {threads} thr | Embree {threads} thr "
          f"| ours ÷ Embree, 1 thread | ours {threads} thr ÷ Embree's faster |")  # fmt: skip
    print("|---|---|---|---|---|---|---|---|")
    for name, kind, o1, o2, e1, e2, single, best in table:
        print(f"| {name} | {kind} | {o1 / 1e6:.2f} | {e1 / 1e6:.2f} | {o2 / 1e6:.2f} "
              f"| {e2 / 1e6:.2f} | {single:.2f} | {best:.2f} |")  # fmt: skip


if __name__ == "__main__":
    main()
