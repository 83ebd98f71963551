"""Compile the renderer once per machine, before anything waits for it, and say so.

numba compiles each kernel on its first call and keeps the machine code in the kernel cache
(``shots.kernel_cache``); later processes load it in a fraction of a second. Only the first run
on a machine waits for the compiler, so ``announce_compiles`` prints one line when compiling
starts and shows which function is being compiled until it ends. A batch calls
``compile_renderer`` before its worker processes start, so that they only load the kernels:
two workers compiling the same kernels at once would each take the whole time.
"""

from __future__ import annotations

import time
from contextlib import contextmanager

from numba.core import event
from rich.console import Console
from rich.markup import escape
from rich.progress import Progress, SpinnerColumn, TextColumn, TimeElapsedColumn

from shots.kernel_cache import kernel_cache_folder

# What the first run waits, as bench/coldstart.py measures it on two cores (about 25 s for a
# render, the helper process compiling on the second core; shots.compile_helper).
COMPILE_ESTIMATE = "about half a minute"

_compiled_here = False


def compile_renderer() -> None:
    """Compile, or load from the kernel cache, every kernel a render uses, in this process.

    Renders one pixel of the smallest demo model with the built-in ``still`` preset, and its
    albedo pass (the batch's exposure reading): the loader and ``shots.render`` give its arrays
    the same types as any model's, so the kernels compiled here are the ones every later render
    calls.
    """
    global _compiled_here
    if _compiled_here:
        return
    from shots.albedo import albedo_image
    from shots.demo import demo_models
    from shots.gltf import load_scene
    from shots.planner import plan_frames
    from shots.presets import load_preset
    from shots.render import prepare_scene, render_frame

    model = min(demo_models(), key=lambda path: path.stat().st_size)
    scene = load_scene(model)
    frame = plan_frames(load_preset("still").with_image_size(1, 1), scene)[0]
    prepared = prepare_scene(scene)
    render_frame(prepared, frame.camera, frame.look)
    albedo_image(prepared, frame.camera)
    _compiled_here = True


class CompileAnnouncer(event.Listener):
    """Listens to numba's compile events: one line when the first compile starts, then the
    function being compiled and the time so far on a progress line, and the total at the end.

    ``progress``: a running rich Progress to add the line to (a batch's bars); without one, a
    terminal ``console`` gets a progress line of its own unless ``quiet``; any other console
    only the two lines.
    """

    def __init__(self, console: Console, progress: Progress | None = None, quiet: bool = False):
        self.console = console
        self.progress = progress
        self.quiet = quiet
        self.own_progress: Progress | None = None
        self.task = None
        self.started: float | None = None
        self.functions = 0

    def on_start(self, ev) -> None:
        if self.started is None:
            self._begin()
        self.functions += 1
        if self.task is not None:
            function = ev.data["dispatcher"].py_func
            name = f"{function.__module__}.{function.__qualname__}".removeprefix("shots.kernels.")
            self._progress().update(self.task, function=escape(name), count=self.functions)

    def on_end(self, ev) -> None:
        pass

    def _progress(self) -> Progress:
        return self.progress or self.own_progress

    def _begin(self) -> None:
        self.started = time.perf_counter()
        self.console.print(
            f"compiling the renderer for this machine: once, {COMPILE_ESTIMATE}; later runs load "
            f"it from {escape(str(kernel_cache_folder()))}", highlight=False, soft_wrap=True)
        if self.progress is None and self.console.is_terminal and not self.quiet:
            self.own_progress = Progress(
                SpinnerColumn(), TextColumn("compiling {task.fields[function]}"),
                TextColumn("({task.fields[count]} functions)"), TimeElapsedColumn(),
                console=self.console, transient=True,
            )
            self.own_progress.start()
        if self._progress() is not None:
            self.task = self._progress().add_task("compile", total=None, function="", count=0)

    def finish(self) -> None:
        """Take the progress line down and say how long the compile took."""
        if self.started is None:
            return
        if self.own_progress is not None:
            self.own_progress.stop()
        elif self.task is not None:
            self.progress.remove_task(self.task)
        seconds = time.perf_counter() - self.started
        self.console.print(f"compiled {self.functions} functions in {seconds:.0f} s",
                           highlight=False)


@contextmanager
def announce_compiles(console: Console, progress: Progress | None = None, quiet: bool = False):
    """Within the block, tell the user when (and while) numba compiles (``CompileAnnouncer``)."""
    announcer = CompileAnnouncer(console, progress, quiet)
    try:
        with event.install_listener("numba:compile", announcer):
            yield announcer
    finally:
        announcer.finish()
