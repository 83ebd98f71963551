"""Frame benchmark: one 512×512 catalog thumbnail, and the same rays cast alone through the BVH.

    /tmp/venv/bin/python bench/frame.py [model.glb] [--size 512] [--preset thumbnail]

Renders the thumbnail preset's frame of a demo model (assets_demo/, else a procedural chair made
with trimesh), then, in the same run, casts that frame's primary rays (every camera sample) and
the shadow rays its first hits cast (one per light sample toward each light, plus the floor's
contact rays) through ``shots.accel`` batch queries, timing only those queries.

    overhead = frame time / ray time

is what shading, texturing, secondary rays and orchestration cost on top of the visibility work a
frame cannot avoid. Both are measured as CPU time of all threads, which other programs on a shared
machine disturb least, frame and rays interleaved in every repetition; the headline is the median
of the per-repetition ratios. Wall-clock figures are printed too, with frames per minute for the
thumbnail and a turntable preset. The last line is ``headline: overhead R``.
"""

from __future__ import annotations

import argparse
import math
import os
import time
from pathlib import Path

import numba
import numpy as np
from numba import njit, prange

from shots.accel import intersect_any, intersect_closest, offset_origins
from shots.kernels import camera_sample
from shots.kernels.sampling import spread_count
from shots.planner import plan_frames
from shots.presets import apply_model_fixes, load_preset
from shots.render import (
    pack_frame,
    pack_ground,
    prepare_scene,
    render_frame,
)

ROOT = Path(__file__).resolve().parents[1]
CONTACT_RAYS = 2  # environment rays per shadow-catcher hit
CHUNK = 1 << 20  # primary rays per batch (bounds memory)


def procedural_chair():
    """A chair from boxes (seat, four legs, back), as a Scene; needs trimesh."""
    import trimesh

    from shots.scene import MaterialTable, Scene, default_material_params

    parts = [((0.45, 0.04, 0.45), (0, 0.45, 0))]
    parts += [((0.04, 0.45, 0.04), (x, 0.225, z)) for x in (-0.2, 0.2) for z in (-0.2, 0.2)]
    parts += [((0.45, 0.4, 0.03), (0, 0.68, -0.21))]
    mesh = trimesh.util.concatenate(
        [trimesh.creation.box(extents=e).apply_translation(c) for e, c in parts]
    )
    mesh.unmerge_vertices()
    v = len(mesh.vertices)
    row = default_material_params()
    row[0:3] = (0.6, 0.4, 0.25)
    row[4], row[5] = 0.0, 0.55
    return Scene(
        positions=mesh.vertices.astype(np.float32),
        normals=np.repeat(mesh.face_normals, 3, axis=0).astype(np.float32),
        tangents=np.zeros((v, 4), np.float32),
        uv=np.zeros((2, v, 2), np.float32),
        colors=np.ones((v, 4), np.float32),
        triangles=mesh.faces.astype(np.int32),
        tri_material=np.zeros(len(mesh.faces), np.int32),
        materials=MaterialTable.from_rows([row], ["wood"]),
        source="procedural chair",
    )


def load_model(path: str | None):
    """The model to benchmark and its name."""
    from shots.gltf import load_scene

    if path:
        return load_scene(Path(path)), Path(path).name
    demos = sorted((ROOT / "assets_demo").glob("*.glb"))
    chairs = [p for p in demos if "chair" in p.name] or demos
    if chairs:
        return load_scene(chairs[0]), chairs[0].name
    return procedural_chair(), "procedural chair"


@njit(parallel=True, cache=True)
def camera_samples(frame, width, height, spp, seed):
    """Every camera sample's ray, exactly as the renderer places them: (n, 3) float32 each."""
    n = width * height * spp
    origins = np.empty((n, 3), np.float32)
    directions = np.empty((n, 3), np.float32)
    for j in prange(height):
        for i in range(width):
            pixel = j * width + i
            for s in range(spp):
                fx, fy = camera_sample.sample_offset(spp, s, seed, pixel)
                ox, oy, oz, dx, dy, dz = camera_sample.camera_ray(frame, i + fx, j + fy)
                k = pixel * spp + s
                origins[k, 0], origins[k, 1], origins[k, 2] = ox, oy, oz
                directions[k, 0], directions[k, 1], directions[k, 2] = dx, dy, dz
    return origins, directions


def light_points(light, count, rng):
    """``count`` points on a light (its position for punctual lights): (count, 3)."""
    p = np.asarray(light.position, np.float64)
    if light.kind != "area":
        return np.broadcast_to(p, (count, 3))
    u, v = rng.random((2, count, 1)) - 0.5
    return p + u * np.asarray(light.edge_u) + v * np.asarray(light.edge_v)


def shadow_rays(points, normals, look, spp, contact, rng):
    """The shadow rays first hits cast: toward each light sample, and contact rays from the floor.

    Returns origins, directions, t_max as float32 arrays.
    """
    origins, directions, t_max = [], [], []
    start = offset_origins(points.astype(np.float32), normals.astype(np.float32))
    for light in look.lights:
        n = spread_count(look.area_light_samples, spp) if light.kind == "area" else 1
        for _ in range(n):
            if light.kind == "directional":
                d = np.broadcast_to(-np.asarray(light.direction, np.float64), points.shape)
                dist = np.full(len(points), np.inf)
            else:
                d = light_points(light, len(points), rng) - points
                dist = np.linalg.norm(d, axis=1)
                d = d / dist[:, None]
            facing = (d * normals).sum(1) > 0
            origins.append(start[facing])
            directions.append(d[facing])
            t_max.append(dist[facing] * (1 - 1e-5))
    if contact.any():
        # one environment-table ray and one cosine ray per floor hit (shots.kernels.ambient), both
        # taken here as cosine rays
        for _ in range(CONTACT_RAYS):
            a, b = rng.random((2, int(contact.sum())))
            r, phi = np.sqrt(a), 2 * np.pi * b
            d = np.stack([r * np.cos(phi), np.sqrt(1 - a), r * np.sin(phi)], 1)  # about +Y
            origins.append(start[contact])
            directions.append(d)
            t_max.append(np.full(len(d), np.inf))
    if not origins:
        return np.zeros((0, 3), np.float32), np.zeros((0, 3), np.float32), np.zeros(0, np.float32)
    cat = np.concatenate
    return (cat(origins).astype(np.float32), cat(directions).astype(np.float32),
            cat(t_max).astype(np.float32))  # fmt: skip


def time_rays(prepared, camera, look):
    """Seconds spent in BVH queries for the frame's primary and first-hit shadow rays.

    Returns (wall seconds, CPU seconds of all threads, primary count, shadow count).
    """
    spp = max(look.samples, 1)
    frame = pack_frame(camera, look, prepared.see_through, np.zeros((9, 3)), prepared.bounds)
    origins, directions = camera_samples(frame, camera.width, camera.height, spp,
                                         int(look.seed) & 0xFFFFFFFF)  # fmt: skip
    ground = pack_ground(look.ground, prepared.bounds, camera)
    catcher = look.ground.kind == "shadow_catcher"
    floor_y = ground[1]
    rng = np.random.default_rng(0)
    seconds, cpu, primary, shadow = 0.0, 0.0, 0, 0
    for lo in range(0, len(origins), CHUNK):
        o, d = origins[lo : lo + CHUNK], directions[lo : lo + CHUNK]
        t0, c0 = time.perf_counter(), time.process_time()
        t, tri, u, v = intersect_closest(prepared.bvh, o, d)
        seconds += time.perf_counter() - t0
        cpu += time.process_time() - c0
        primary += len(o)
        t_floor = np.where(d[:, 1] < 0, (floor_y - o[:, 1]) / np.where(d[:, 1] < 0, d[:, 1], -1), np.inf)
        on_floor = (t_floor < t) if look.ground.kind != "none" else np.zeros(len(o), bool)
        on_mesh = (tri >= 0) & ~on_floor
        tris = prepared.scene.triangles[tri[on_mesh]]
        pos = prepared.scene.positions
        b1, b2 = u[on_mesh, None], v[on_mesh, None]
        p_mesh = (1 - b1 - b2) * pos[tris[:, 0]] + b1 * pos[tris[:, 1]] + b2 * pos[tris[:, 2]]
        n_mesh = np.cross(pos[tris[:, 1]] - pos[tris[:, 0]], pos[tris[:, 2]] - pos[tris[:, 0]])
        n_mesh /= np.maximum(np.linalg.norm(n_mesh, axis=1, keepdims=True), 1e-30)
        flip = (n_mesh * d[on_mesh]).sum(1) > 0
        n_mesh[flip] *= -1
        p_floor = o[on_floor] + t_floor[on_floor, None] * d[on_floor]
        n_floor = np.tile([0.0, 1.0, 0.0], (len(p_floor), 1))
        points = np.concatenate([p_mesh, p_floor])
        normals = np.concatenate([n_mesh, n_floor])
        contact = np.r_[np.zeros(len(p_mesh), bool), np.full(len(p_floor), catcher)]
        so, sd, st = shadow_rays(points, normals, look, spp, contact, rng)
        if len(so) == 0:
            continue
        t0, c0 = time.perf_counter(), time.process_time()
        intersect_any(prepared.bvh, so, sd, 0.0, st)
        seconds += time.perf_counter() - t0
        cpu += time.process_time() - c0
        shadow += len(so)
    return seconds, cpu, primary, shadow


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("model", nargs="?")
    parser.add_argument("--size", type=int, default=512)
    parser.add_argument("--preset", default="thumbnail")
    parser.add_argument("--repeat", type=int, default=5, help="repetitions (medians count)")
    parser.add_argument("--samples", type=int, default=16,
                        help="fixed samples per pixel (the ray count must match the frame's)")
    parser.add_argument("--turntable", default="turntable-36", help="preset timed for frames/min")
    args = parser.parse_args()

    scene, name = load_model(args.model)
    preset = load_preset(args.preset).with_image_size(args.size, args.size)
    scene = apply_model_fixes(scene, preset)
    frame = plan_frames(preset.with_samples(args.samples), scene)[0]
    t0 = time.perf_counter()
    prepared = prepare_scene(scene)
    prepare_seconds = time.perf_counter() - t0

    # compile (or load from cache) every kernel on a tiny frame of the same look
    from dataclasses import replace

    small = replace(frame.camera, width=16, height=16)
    render_frame(prepared, small, frame.look)
    time_rays(prepared, small, frame.look)

    # frame and rays interleaved in every repetition: the machine may be shared
    frame_wall, frame_cpu, ray_wall, ray_cpu = [], [], [], []
    for _ in range(args.repeat):
        t0, c0 = time.perf_counter(), time.process_time()
        render_frame(prepared, frame.camera, frame.look)
        frame_wall.append(time.perf_counter() - t0)
        frame_cpu.append(time.process_time() - c0)
        wall, cpu, primary, shadow = time_rays(prepared, frame.camera, frame.look)
        ray_wall.append(wall)
        ray_cpu.append(cpu)
    ratios = np.divide(frame_cpu, ray_cpu)  # CPU time of all threads: least disturbed by load
    med = np.median
    look = frame.look
    print(f"model: {name} ({scene.triangle_count} triangles), preset {args.preset}, "
          f"{args.size}x{args.size}, {look.samples} samples/px, {len(look.lights)} lights, "
          f"ground {look.ground.kind}, {numba.get_num_threads()} threads, "
          f"load average {os.getloadavg()[0]:.2f}")  # fmt: skip
    print(f"prepare (BVH build): {prepare_seconds:.2f} s")
    print(f"frame: {med(frame_wall):.2f} s wall, {med(frame_cpu):.2f} s CPU (medians of "
          f"{args.repeat})")  # fmt: skip
    print(f"rays alone: {primary / 1e6:.2f} M primary + {shadow / 1e6:.2f} M shadow in "
          f"{med(ray_wall):.2f} s wall, {med(ray_cpu):.2f} s CPU "
          f"({(primary + shadow) / med(ray_wall) / 1e6:.1f} M rays/s)")  # fmt: skip
    print("overhead (frame CPU / ray CPU) per repetition: "
          + " ".join(f"{r:.2f}" for r in ratios))  # fmt: skip
    print(f"wall-clock ratio: {med(frame_wall) / med(ray_wall):.2f}")
    print(f"frames per minute: {args.preset} {60.0 / med(frame_wall):.1f}, "
          f"{args.turntable} {frames_per_minute(scene, args.turntable, args.repeat):.1f} "
          f"(wall clock, {numba.get_num_threads()} threads)")  # fmt: skip
    overhead = float(med(ratios))
    print(f"headline: overhead {overhead:.2f}")
    assert math.isfinite(overhead)


def frames_per_minute(scene, preset_name: str, repeat: int) -> float:
    """Frames per minute (wall clock, median) of a preset's first frame at its own size."""
    preset = load_preset(preset_name)
    scene = apply_model_fixes(scene, preset)
    frame = plan_frames(preset, scene)[0]
    prepared = prepare_scene(scene)
    render_frame(prepared, frame.camera, frame.look)  # compiled already; warms caches
    walls = []
    for _ in range(max(1, repeat // 2)):
        t0 = time.perf_counter()
        render_frame(prepared, frame.camera, frame.look)
        walls.append(time.perf_counter() - t0)
    return 60.0 / float(np.median(walls))


if __name__ == "__main__":
    main()
