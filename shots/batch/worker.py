"""The work a batch hands out: render a chunk of one model's frames and return encoded bytes.

Workers never write into the output folder: they return PNG (and EXR) bytes and the main
process writes them, so local processes, a Dask cluster and the inline path produce the same
files, and only one process ever touches the output tree.

This module imports nothing heavy at import time, so a worker process can set its numba thread
count before numba is loaded (``init_worker``).
"""

from __future__ import annotations

import os
import signal
import sys
import tempfile
import threading
import time
import traceback
from contextlib import contextmanager
from dataclasses import dataclass, field
from pathlib import Path

from shots.batch.jobs import DEFAULT_VARIANT, DeriveTask, RenderTask, derivatives_for

WATCHDOG_SECONDS = 0.5
GRACE_SECONDS = 30.0  # past a model's time limit, a worker stuck in a kernel is ended
EXIT_TIMED_OUT = 3
_in_worker_process = False  # set by init_worker: only a worker process may end itself


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
    png: bytes | None  # None: derivatives only (a DeriveTask)
    exr: bytes | None
    render_seconds: float
    encode_seconds: float
    codes: object = None  # (h, w, 4) uint8 display codes when the task wants them
    albedo: dict | None = None  # rendered and albedo luminance (shots.albedo.exposure_reading)
    derivatives: dict = field(default_factory=dict)  # derivative name → file bytes
    derive_seconds: float = 0.0


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
    global _in_worker_process
    _in_worker_process = True
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


def on_dask_worker(fn, host_threads: dict[str, int], version: str, model: str, *args):
    """Run ``fn(model, *args)`` on a Dask worker with its share of this host's cores for numba.

    ``host_threads`` is the number of Dask worker threads per host: each gets
    ``cores // threads`` numba threads (numba's setting is per calling thread). A worker whose
    ``shots`` version is not the batch's ``version`` refuses the task: its pixels could differ
    while the batch would file them under keys made for ``version``.
    """
    from urllib.parse import urlsplit

    from distributed import get_worker  # dask.distributed only re-exports it

    import shots

    if shots.__version__ != version:
        from shots.errors import RenderError

        error = RenderError(get_worker().address, None, f"the worker runs shots "
                            f"{shots.__version__}, the batch {version}; install the same version")
        variant = getattr(model, "variant", DEFAULT_VARIANT)
        return TaskResult(getattr(model, "model", model), variant, failure=_failure(error))
    host = urlsplit(get_worker().address).hostname or ""
    set_threads(max(1, (os.cpu_count() or 1) // max(1, host_threads.get(host, 1))))
    return fn(model, *args)


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
        with _cache_lock, time_limit(preset.limits.seconds, model):
            loaded = _loaded_model(model, (inputs_sha256, preset_sha256), preset, result)
        result.variants = tuple(loaded["scene"].variants)
    except Exception as exc:  # reported per model; the batch goes on with the others
        result.failure = _failure(exc)
    return result


def render_task(task: RenderTask) -> TaskResult:
    """Render ``task.frames`` of one model and variant; never raises for a bad model."""
    result = TaskResult(task.model, task.variant)
    try:
        with time_limit(task.preset.limits.seconds, task.model):
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


def run_task(task: RenderTask | DeriveTask) -> TaskResult:
    """What a worker runs for any task of a batch."""
    return render_task(task) if isinstance(task, RenderTask) else derive_task(task)


def derive_task(task: DeriveTask) -> TaskResult:
    """Re-make derivatives of frames already rendered, from their master PNG bytes."""
    from shots.output import decode_png

    result = TaskResult(task.model, task.variant)
    by_name = {d.name: d for d in task.derivatives}
    try:
        for shot, index, png, names in task.frames:
            start = time.perf_counter()
            made = make_derivatives(decode_png(png), [by_name[n] for n in names], task.metadata)
            result.images.append(RenderedImage(
                shot=shot, index=index, view="", camera={}, seed=0, png=None, exr=None,
                render_seconds=0.0, encode_seconds=0.0, derivatives=made,
                derive_seconds=time.perf_counter() - start))
    except Exception as exc:  # reported per model; the batch goes on with the others
        result.images = []
        result.failure = _failure(exc)
    return result


def make_derivatives(codes, derivatives, metadata) -> dict[str, bytes]:
    """{name: file bytes} of each derivative of one master frame's display codes."""
    from shots.derivatives import make_derivative

    return {d.name: make_derivative(codes, d, metadata) for d in derivatives}


def _loaded_model(model: str, hashes: tuple[str, str], preset, result: TaskResult) -> dict:
    """The fixed-up scene and its planned frames, from the cache when the model (and the
    preset, ``hashes`` = (inputs hash, preset hash)) are the same."""
    key = (model, *hashes)
    if _cache.get("key") == key:
        result.hints = _cache["value"]["hints"]
        return _cache["value"]
    _cache.clear()
    _check_inputs(model, hashes[0])
    from shots.gltf import load_scene
    from shots.hints import model_hints
    from shots.planner import plan_frames
    from shots.presets import apply_model_fixes

    start = time.perf_counter()
    loaded = load_scene(Path(model), limits=preset.limits)
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


def _check_inputs(model: str, inputs_sha256: str) -> None:
    """Refuse a model whose files here are not the ones the batch hashed (a stale copy on a
    cluster worker, or a file changed since): its frames would be filed under the wrong key."""
    from shots.batch.jobs import model_hashes
    from shots.errors import RenderError

    try:
        found = model_hashes(Path(model))[1]
    except OSError as exc:
        raise RenderError(model, None, f"cannot read the model here: {exc.strerror}") from None
    if found != inputs_sha256:
        raise RenderError(model, None, "the model's files here differ from those the batch "
                                       "hashed (a stale copy on this worker, or changed since)")


def over_limit_message(seconds: float) -> str:
    """The error of a model stopped by the preset's ``[limits] seconds``: the limit and its key."""
    return f"took more than {seconds:g} s (limit seconds)"


@contextmanager
def time_limit(seconds: float, source: str):
    """Fail the work in the block with a ``RenderError`` after ``seconds`` of wall time.

    SIGALRM interrupts Python code in the main thread (a worker process, or the inline
    runner); a numba kernel runs on until it returns, so in a worker process a timer thread
    ends the process ``GRACE_SECONDS`` later if it has not come back by then (the batch
    reports the worker lost and carries on). Elsewhere (a Dask worker thread) nothing is done.
    """
    if threading.current_thread() is not threading.main_thread() or \
            not hasattr(signal, "setitimer"):
        yield
        return
    from shots.errors import RenderError

    def expire(signum, frame):
        # Python drops an exception raised inside a garbage-collector callback or a finaliser,
        # so the alarm rings again shortly until the raise reaches the work itself
        signal.setitimer(signal.ITIMER_REAL, 0.05)
        raise RenderError(source, None, over_limit_message(seconds))

    previous = signal.signal(signal.SIGALRM, expire)
    signal.setitimer(signal.ITIMER_REAL, seconds)
    backstop = None
    if _in_worker_process:
        backstop = threading.Timer(seconds + GRACE_SECONDS, os._exit, args=(EXIT_TIMED_OUT,))
        backstop.daemon = True
        backstop.start()
    try:
        yield
    finally:
        signal.setitimer(signal.ITIMER_REAL, 0)
        signal.signal(signal.SIGALRM, previous)
        if backstop is not None:
            backstop.cancel()


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
    from shots.albedo import exposure_reading
    from shots.colour import display_codes
    from shots.output import encode_png
    from shots.render import render_frame

    start = time.perf_counter()
    rgba = render_frame(prepared, frame.camera, frame.look)
    rendered = time.perf_counter()
    codes = display_codes(rgba, frame.look.exposure, frame.look.tone_map, task.bits)
    png = encode_png(codes)
    exr = exr_bytes(rgba) if task.exr else None
    albedo = exposure_reading(prepared, frame.camera, rgba, frame.look.exposure)
    encoded = time.perf_counter()
    derivatives = make_derivatives(codes, derivatives_for(task.derivatives, frame.shot),
                                   task.metadata)
    return RenderedImage(
        shot=frame.shot, index=frame.index, view=frame.view, camera=frame.to_json(),
        seed=frame.seed, png=png, exr=exr, render_seconds=rendered - start,
        encode_seconds=encoded - rendered,
        codes=codes if task.wants_codes(frame.shot, frame.index) else None, albedo=albedo,
        derivatives=derivatives, derive_seconds=time.perf_counter() - encoded,
    )


PNG_SIGNATURE = b"\x89PNG\r\n\x1a\n"


def result_problem(result, model: str, variant: str) -> str | None:
    """What is wrong with a result from another machine, or None when it has the shape the
    batch uses: a ``TaskResult`` for this model and variant whose images are PNG bytes with
    plain fields and 8-bit codes of the camera's size."""
    import numpy as np

    if type(result) is not TaskResult:
        return f"a {type(result).__name__}, not a TaskResult"
    if result.model != model or result.variant != variant:
        return "for another model or variant"
    if result.failure is not None:
        return None if type(result.failure) is Failure else "a malformed failure"
    texts = (*result.variants, *result.warnings, *result.hints)
    if not isinstance(result.images, list) or not all(isinstance(t, str) for t in texts):
        return "malformed fields"
    for image in result.images:
        if type(image) is not RenderedImage:
            return f"an image of type {type(image).__name__}"
        if not (isinstance(image.png, bytes) and image.png.startswith(PNG_SIGNATURE)):
            return "an image that is not PNG bytes"
        if not (isinstance(image.shot, str) and type(image.index) is int
                and isinstance(image.camera, dict) and type(image.seed) is int
                and isinstance(image.view, str)):
            return "malformed image fields"
        if image.exr is not None and not isinstance(image.exr, bytes):
            return "EXR data that is not bytes"
        if image.codes is not None:
            size = (image.camera.get("height"), image.camera.get("width"), 4)
            if not (isinstance(image.codes, np.ndarray) and image.codes.dtype == np.uint8
                    and image.codes.shape == size):
                return "pixel codes of the wrong type or size"
    return None


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
