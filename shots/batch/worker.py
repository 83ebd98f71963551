"""The work a batch hands out: render a chunk of one model's frames and return encoded bytes.

Workers never write into the output folder: they return PNG (and EXR) bytes and the main
process writes them, so local processes, a Dask cluster and the inline path produce the same
files, and only one process ever touches the output tree.

This module imports nothing heavy at import time, so a worker process can set its numba thread
count before numba is loaded (``init_worker``).
"""

from __future__ import annotations

import os
import sys
import tempfile
import threading
import time
import traceback
from dataclasses import dataclass, field
from pathlib import Path

from shots.batch.jobs import DEFAULT_VARIANT, RenderTask

WATCHDOG_SECONDS = 0.5


@dataclass(frozen=True)
class Failure:
    """Why a task failed: ``kind`` is the exception's class name; ``details`` a traceback for
    unexpected errors (bugs), empty for a ``ShotsError`` (bad input)."""

    kind: str
    message: str
    details: str = ""


@dataclass(frozen=True)
class RenderedImage:
    """One rendered frame, encoded."""

    shot: str
    index: int
    view: str
    camera: dict
    seed: int
    png: bytes
    exr: bytes | None
    render_seconds: float
    encode_seconds: float
    codes: object = None  # (h, w, 4) uint8 display codes when the task wants them


@dataclass
class TaskResult:
    """What a task sends back: the images, or the failure, and where the time went."""

    model: str
    variant: str
    images: list[RenderedImage] = field(default_factory=list)
    variants: tuple[str, ...] = ()
    load_seconds: float = 0.0
    prepare_seconds: float = 0.0
    warnings: tuple[str, ...] = ()
    hints: tuple[str, ...] = ()  # units / up-axis hints on the model as loaded (shots.hints)
    failure: Failure | None = None


# --- process set-up -------------------------------------------------------------------------


def init_worker(threads: int, batch_pid: int | None = None) -> None:
    """Worker process initialiser: cap numba's threads, and exit when the batch process dies.

    ``NUMBA_NUM_THREADS`` is set when numba is not imported yet (it sizes numba's thread pool;
    once numba has read it, changing it breaks the next compile), and ``set_num_threads`` caps
    the threads in use either way, so ``workers`` × ``threads`` never exceeds the cores.
    """
    if "numba" not in sys.modules:
        os.environ["NUMBA_NUM_THREADS"] = str(threads)
    set_threads(threads)
    if batch_pid is not None:
        watch = (os.getppid(), batch_pid)
        threading.Thread(target=_exit_with_batch, args=watch, daemon=True).start()


def set_threads(threads: int) -> None:
    """Use ``threads`` numba threads for kernels launched from this thread."""
    import numba

    numba.set_num_threads(max(1, min(threads, numba.config.NUMBA_NUM_THREADS)))


def on_dask_worker(fn, host_threads: dict[str, int], *args):
    """Run ``fn(*args)`` on a Dask worker with its share of this host's cores for numba.

    ``host_threads`` is the number of Dask worker threads per host: each gets
    ``cores // threads`` numba threads (numba's setting is per calling thread).
    """
    from urllib.parse import urlsplit

    from dask.distributed import get_worker

    host = urlsplit(get_worker().address).hostname or ""
    set_threads(max(1, (os.cpu_count() or 1) // max(1, host_threads.get(host, 1))))
    return fn(*args)


def _exit_with_batch(parent_pid: int, batch_pid: int) -> None:
    """A batch killed with SIGKILL cannot stop its workers; they notice and leave.

    The parent is the batch process (spawn) or the fork server, which exits with the batch.
    """
    while os.getppid() == parent_pid and _alive(batch_pid):
        time.sleep(WATCHDOG_SECONDS)
    os._exit(1)


def _alive(pid: int) -> bool:
    try:
        os.kill(pid, 0)
    except ProcessLookupError:
        return False
    except PermissionError:
        return True
    return True


# --- tasks --------------------------------------------------------------------------------------

# The model a worker loaded last, kept for the next chunk of the same model.
_cache: dict = {}
_cache_lock = threading.Lock()


def probe_variants(model: str, inputs_sha256: str, preset, preset_sha256: str) -> TaskResult:
    """Load a model to learn its KHR_materials_variants names (for ``--variants all``)."""
    result = TaskResult(model, DEFAULT_VARIANT)
    try:
        with _cache_lock:
            loaded = _loaded_model(model, (inputs_sha256, preset_sha256), preset, result)
        result.variants = tuple(loaded["scene"].variants)
    except Exception as exc:  # reported per model; the batch goes on with the others
        result.failure = _failure(exc)
    return result


def render_task(task: RenderTask) -> TaskResult:
    """Render ``task.frames`` of one model and variant; never raises for a bad model."""
    result = TaskResult(task.model, task.variant)
    try:
        with _cache_lock:
            loaded = _loaded_model(task.model, (task.inputs_sha256, task.preset_sha256),
                                   task.preset, result)
            prepared = _prepared_variant(loaded, task.variant, result)
        result.variants = tuple(loaded["scene"].variants)
        for shot, index in task.frames:
            frame = loaded["frames"].get((shot, index))
            if frame is None:
                raise RuntimeError(f"the planner has no frame {index} of shot {shot!r}")
            result.images.append(_render_one(prepared, frame, task))
    except Exception as exc:  # reported per model; the batch goes on with the others
        result.images = []
        result.failure = _failure(exc)
    return result


def _loaded_model(model: str, hashes: tuple[str, str], preset, result: TaskResult) -> dict:
    """The fixed-up scene and its planned frames, from the cache when the model (and the
    preset, ``hashes`` = (inputs hash, preset hash)) are the same."""
    key = (model, *hashes)
    if _cache.get("key") == key:
        result.hints = _cache["value"]["hints"]
        return _cache["value"]
    _cache.clear()
    from shots.gltf import load_scene
    from shots.hints import model_hints
    from shots.planner import plan_frames
    from shots.presets import apply_model_fixes

    start = time.perf_counter()
    loaded = load_scene(Path(model))
    # as `shots render` does: hints only when the preset leaves units and up axis to glTF
    unfixed = preset.model.units == "m" and preset.model.up_axis == "y"
    hints = tuple(model_hints(loaded)) if unfixed else ()
    scene = apply_model_fixes(loaded, preset)
    frames = {(f.shot, f.index): f for f in plan_frames(preset, scene)}
    result.load_seconds += time.perf_counter() - start
    result.warnings = tuple(scene.warnings)
    result.hints = hints
    value = {"scene": scene, "frames": frames, "prepared": {}, "hints": hints}
    _cache.update(key=key, value=value)
    return value


def _prepared_variant(loaded: dict, variant: str, result: TaskResult):
    from shots.render import prepare_scene

    if variant not in loaded["prepared"]:
        scene = loaded["scene"]
        if variant != DEFAULT_VARIANT:
            if variant not in scene.variants:
                from shots.errors import RenderError

                known = ", ".join(scene.variants) or "none"
                raise RenderError(scene.source, "KHR_materials_variants",
                                  f"no variant {variant!r} (variants: {known})")
            scene = scene.with_variant(variant)
        start = time.perf_counter()
        loaded["prepared"] = {variant: prepare_scene(scene)}  # one variant kept at a time
        result.prepare_seconds += time.perf_counter() - start
    return loaded["prepared"][variant]


def _render_one(prepared, frame, task: RenderTask) -> RenderedImage:
    from shots.colour import display_codes
    from shots.output import encode_png
    from shots.render import render_frame

    start = time.perf_counter()
    rgba = render_frame(prepared, frame.camera, frame.look)
    rendered = time.perf_counter()
    codes = display_codes(rgba, frame.look.exposure, frame.look.tone_map, task.bits)
    png = encode_png(codes)
    exr = exr_bytes(rgba) if task.exr else None
    return RenderedImage(
        shot=frame.shot, index=frame.index, view=frame.view, camera=frame.to_json(),
        seed=frame.seed, png=png, exr=exr, render_seconds=rendered - start,
        encode_seconds=time.perf_counter() - rendered,
        codes=codes if task.wants_codes(frame.shot, frame.index) else None,
    )


def _failure(exc: Exception) -> Failure:
    from shots.errors import ShotsError

    if isinstance(exc, ShotsError):
        return Failure(type(exc).__name__, str(exc))
    return Failure(type(exc).__name__, f"unexpected error (a bug): {type(exc).__name__}: {exc}",
                   traceback.format_exc())


# --- linear EXR ---------------------------------------------------------------------------------


def exr_available() -> bool:
    """Whether the optional OpenEXR package (the EXR writer) is installed."""
    try:
        import OpenEXR  # noqa: F401
    except ImportError:
        return False
    return True


def exr_bytes(premultiplied) -> bytes:
    """A scanline ZIP-compressed float32 RGBA EXR of the linear premultiplied image.

    OpenEXR stores colour premultiplied by alpha (OpenEXR "Interpreting Deep Pixels" and
    "Technical Introduction", alpha convention), so the renderer's output goes in unchanged.
    """
    import numpy as np
    import OpenEXR

    header = {"compression": OpenEXR.ZIP_COMPRESSION, "type": OpenEXR.scanlineimage}
    channels = {name: np.ascontiguousarray(premultiplied[..., k], np.float32)
                for k, name in enumerate("RGBA")}
    fd, path = tempfile.mkstemp(suffix=".exr")
    os.close(fd)
    try:
        with OpenEXR.File(header, channels) as image:
            image.write(path)
        return Path(path).read_bytes()
    finally:
        Path(path).unlink(missing_ok=True)
