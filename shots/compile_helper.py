"""Compile part of the renderer in a second process while this one compiles the rest.

numba compiles on one core. On a cold kernel cache (``shots.kernel_cache``) the first render
would wait for the whole renderer to compile there, so ``helping_compile`` starts
``python -m shots.compile_helper``, which compiles the big callees of the pixel kernel
(``helped_kernels``: the ray queries, the hit's surface, its environment and direct light, the
reflected and transmitted rays; each with its own callees) into the same cache, printing each
function's name once it is there. This process goes on with the rest: loading the model, the
BVH builder, the pixel kernel's own code. When numba is about to compile one of those functions
here, it first waits for the helper's line, and then loads the function from the cache.

The helper is skipped when its functions are in the cache already (a warm start pays a few
index reads), when the cache cannot be written, when numba's compiler is off
(``NUMBA_DISABLE_JIT``) or ``SHOTS_COMPILE_HELPER=0``. It exits when this process closes its
stdin (also when this process dies), and is killed and reaped when the block ends.

The argument types in ``helped_kernels`` are copied from the call sites (``shots.kernels``:
``visibility``, ``camera_sample``, ``shade``); ``tests/test_compile_helper.py`` checks them
against the types a render compiles.
"""

from __future__ import annotations

import os
import subprocess
import sys
import threading
from contextlib import contextmanager
from pathlib import Path

WAIT_LIMIT = 600.0  # seconds this process waits for one function before compiling it itself


def helped_kernels(albedo: bool = False) -> list[tuple[object, tuple]]:
    """(dispatcher, argument types) the helper compiles, in the order a render reaches them;
    with ``albedo``, then the albedo pass's kernels (``shots.albedo``: a batch's exposure
    reading, which ``shots.warmup.compile_renderer`` compiles after the render)."""
    from numba import types

    from shots.kernels import albedo as albedo_pass
    from shots.kernels import ambient, direct, reflection, surface, transmission, traverse

    f32, f64, i64, yes = types.float32, types.float64, types.int64, types.boolean
    row, table, ints = types.float64[::1], types.float64[:, ::1], types.int64[::1]
    # shots.accel.Bvh, shots.render's packed scene and environment, as shots.kernels.image
    # passes them on (borrowed views keep the types)
    nodes, links, verts = types.float32[:, :, ::1], types.int32[:, :, ::1], types.float32[:, ::1]
    bvh = types.Tuple((nodes, links, verts, types.int32[::1]))
    mesh = (types.float32[:, ::1], types.int32[:, ::1], types.float32[:, ::1], types.uint8[::1],
            types.int32[:, ::1])  # fmt: skip
    scene = types.Tuple(mesh)
    env = types.Tuple((f32[:, :, ::1], table, row))
    ray = (f64,) * 8  # origin, direction, t_min, t_max
    # closest_hit_one(node_bounds, node_links, tri_verts, tri_ids, o, d, t_min, t_max, stack)
    closest = (nodes, links, verts, types.int32[::1], *ray, ints)
    # mesh_surface(k, b1, b2, dx, dy, dz, cone, *the scene's arrays, surf, work)
    hit = (i64, *(f64,) * 6, *mesh, row, row)
    # any_hit_one(node_bounds, node_links, tri_verts, o, d, t_min, t_max, stack)
    blocked = (nodes, links, verts, *ray, ints)
    # ambient_light(surf, ray, tr, tg, tb, d0, d1, d2, s0, s1, s2, can_bounce, reach, frame, env,
    #               bvh, scene, ground, pixel, sample, stack, sp, surf2, work, tstack)
    ambient_args = (row, row, *(f64,) * 9, yes, f64, row, env, bvh, scene, row, i64, i64, table)
    ambient_args += (i64, row, row, ints)
    # direct_light(surf, vx, vy, vz, lights, area_samples, n_glossy, n_coat, spp, seed, pixel,
    #              sample, frame, bvh, scene, ground, see_through, surf2, work, tstack)
    lit = (row, f64, f64, f64, table, *(i64,) * 7, row, bvh, scene, row, yes, row, row, ints)
    # spawn_reflection(surf, ray, rw0, rw1, rw2, n_rays, frame, env, pixel, sample, stack, sp,
    #                  work)
    mirror = (row, row, f64, f64, f64, i64, row, env, i64, i64, table, i64, row)
    # spawn_transmission(surf, ray, tdx, tdy, tdz, tw0, tw1, tw2, can_trace, env, frame, stack,
    #                    sp, work)
    through = (row, row, *(f64,) * 6, yes, env, row, table, i64, row)
    # closest_hits(node_bounds, node_links, tri_verts, tri_ids, origins, directions, t_min, t_max)
    rays = (nodes, links, verts, types.int32[::1], f32[:, ::1], f32[:, ::1], f32[::1], f32[::1])
    # base_colours(tri, b1, b2, directions, cones, *the scene's arrays, out)
    colours = (types.int32[::1], f32[::1], f32[::1], f32[:, ::1], row, *mesh, table)
    extra = [(traverse.closest_hits, rays), (albedo_pass.base_colours, colours)] if albedo else []
    return [
        (traverse.closest_hit_one, closest),
        (surface.mesh_surface, hit),
        (traverse.any_hit_one, blocked),
        (ambient.ambient_light, ambient_args),
        (direct.direct_light, lit),
        (reflection.spawn_reflection, mirror),
        (transmission.spawn_transmission, through),
        *extra,
    ]


def qualified_name(dispatcher) -> str:
    """'shots.kernels.direct.direct_light': the helper's line for a finished function."""
    return f"{dispatcher.py_func.__module__}.{dispatcher.py_func.__qualname__}"


def cache_is_cold(kernels: list[tuple[object, tuple]]) -> bool:
    """True when some helped function is missing from a kernel cache this process can write.

    Reads numba's cache index (``numba.core.caching``) for the entry ``Dispatcher.compile``
    would load; anything unexpected there counts as "not cold", and the helper is skipped.
    """
    from numba.core.caching import FunctionCache

    try:
        missing = False
        for dispatcher, signature in kernels:
            cache = dispatcher._cache
            if not isinstance(cache, FunctionCache):
                return False
            key = cache._index_key(signature, dispatcher.targetctx.codegen())
            missing = missing or key not in cache._cache_file._load_index()
        if missing:
            cache._impl.locator.ensure_cache_path()  # raises when the folder is not writable
        return missing
    except Exception:  # noqa: BLE001 (numba internals moved, or the folder is unusable)
        return False


def wanted() -> bool:
    """False when the helper is switched off or could not help (numba's compiler off)."""
    from numba.core import config

    return os.environ.get("SHOTS_COMPILE_HELPER", "1") != "0" and not config.DISABLE_JIT


class CompileHelper:
    """The helper process and the names of the functions it has put in the cache."""

    def __init__(self, cache_folder: str, albedo: bool = False):
        root = str(Path(__file__).resolve().parents[1])  # this shots, whatever sys.path says
        path = os.pathsep.join(p for p in (root, os.environ.get("PYTHONPATH", "")) if p)
        env = dict(os.environ, NUMBA_CACHE_DIR=cache_folder, PYTHONPATH=path)
        self.process = subprocess.Popen(
            [sys.executable, "-m", "shots.compile_helper", *(["--albedo"] if albedo else [])],
            stdin=subprocess.PIPE,
            stdout=subprocess.PIPE, stderr=subprocess.DEVNULL, env=env, text=True)  # fmt: skip
        self.ready: set[str] = set()
        self.finished = False
        self.changed = threading.Condition()
        self.reader = threading.Thread(target=self._read, daemon=True)
        self.reader.start()

    def _read(self) -> None:
        for line in self.process.stdout:
            with self.changed:
                self.ready.add(line.strip())
                self.changed.notify_all()
        with self.changed:
            self.finished = True
            self.changed.notify_all()

    def wait_for(self, name: str, timeout: float = WAIT_LIMIT) -> bool:
        """Wait until the helper has cached ``name`` (True) or has ended without it."""
        with self.changed:
            self.changed.wait_for(lambda: name in self.ready or self.finished, timeout)
            return name in self.ready

    def stop(self) -> None:
        """Kill the helper if it still runs, and reap it."""
        if self.process.poll() is None:
            self.process.kill()
        self.process.wait()
        self.reader.join()
        self.process.stdin.close()
        self.process.stdout.close()


def _waiting_compile(dispatcher, helper: CompileHelper):
    """``dispatcher.compile`` that first waits for the helper to cache the function."""
    own = type(dispatcher).compile.__get__(dispatcher)
    name = qualified_name(dispatcher)

    def compile(signature):
        helper.wait_for(name)
        return own(signature)

    return compile


@contextmanager
def helping_compile(albedo: bool = False):
    """Within the block, a helper process compiles ``helped_kernels(albedo)`` when the cache is
    cold; this process loads them from the cache when it reaches them. Yields the
    ``CompileHelper``, or None when there is none."""
    if not wanted():
        yield None
        return
    from numba.core import config

    kernels = helped_kernels(albedo)
    if not cache_is_cold(kernels):
        yield None
        return
    helper = CompileHelper(config.CACHE_DIR, albedo)
    try:
        for dispatcher, _ in kernels:
            dispatcher.compile = _waiting_compile(dispatcher, helper)
        yield helper
    finally:
        for dispatcher, _ in kernels:
            vars(dispatcher).pop("compile", None)
        helper.stop()


def _exit_with_parent() -> None:
    """Runs in the helper: end the process when the parent closes stdin or dies."""
    sys.stdin.read()
    os._exit(0)


def main() -> None:
    """The helper process: compile ``helped_kernels`` into the cache, one line per function."""
    threading.Thread(target=_exit_with_parent, daemon=True).start()
    for dispatcher, signature in helped_kernels(albedo="--albedo" in sys.argv[1:]):
        dispatcher.compile(signature)
        print(qualified_name(dispatcher), flush=True)


if __name__ == "__main__":
    main()
