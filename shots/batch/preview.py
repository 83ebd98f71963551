"""``shots batch --dry-run``: what a batch would render, skip and publish, and roughly how long
it would take, without writing anything.

The plan is the batch's own (``Batch.plan_only``: hashes, manifests, keys), so the counts are
exactly what a run would do. The time comes from a calibration render: one frame of the first
model with work to do, at a small size with the preset's samples, rendered twice (the first
pays for loading the kernels) and scaled by pixel count; derivatives are timed on a full-size
frame. Time per pixel varies across views and models, so the estimate is a rough guide.
"""

from __future__ import annotations

import time
from dataclasses import dataclass, field
from pathlib import Path

import numpy as np

from shots.batch.jobs import RenderTask
from shots.batch.progress import Reporter
from shots.tags import NO_METADATA

CALIBRATION_SIDE = 96  # pixels on the longer side of the calibration frame


@dataclass
class ModelPreview:
    """What a run would do for one model."""

    listed_as: str
    variants: list[str]
    render: int  # frames to render
    skip: int  # frames up to date
    derivatives: int  # derivative files to (re)make
    sidecar: str | None = None
    error: str | None = None


@dataclass
class BatchPreview:
    """The dry run of a batch: per-model counts and the time estimate."""

    models: list[ModelPreview]
    seconds_per_frame: float | None = None  # at the preset's size, from the calibration
    seconds_per_derivative: float = 0.0
    calibrated_on: str = ""
    notes: list[str] = field(default_factory=list)

    @property
    def frames_to_render(self) -> int:
        return sum(m.render for m in self.models)

    @property
    def frames_to_skip(self) -> int:
        return sum(m.skip for m in self.models)

    @property
    def derivatives_to_make(self) -> int:
        return sum(m.derivatives for m in self.models)

    @property
    def estimate_seconds(self) -> float | None:
        if self.seconds_per_frame is None:
            return None if self.frames_to_render else self.derivative_seconds
        return self.frames_to_render * self.seconds_per_frame + self.derivative_seconds

    @property
    def derivative_seconds(self) -> float:
        return self.derivatives_to_make * self.seconds_per_derivative


def preview_batch(source, preset, out_dir, *, calibrate: bool = True, **options) -> BatchPreview:
    """Plan a batch (``run_batch``'s options) and estimate its time; writes nothing.

    Raises
    ------
    BatchError, PresetError : the batch could not start (as ``run_batch``).
    """
    from shots.batch.run import prepare_batch

    batch = prepare_batch(source, preset, out_dir, **options)
    with Reporter(quiet=True) as reporter:
        batch.plan_only(reporter)
    preview = BatchPreview(models=[_model_preview(state) for state in batch.states],
                           notes=list(batch.notes))
    if calibrate:
        _calibrate(batch, preview)
    return preview


def _model_preview(state) -> ModelPreview:
    render = [f for f in state.pending if f not in state.rederive]
    derivatives = sum(len(state.derived.get(f, ())) for f in render)
    derivatives += sum(len(names) for names in state.rederive.values())
    return ModelPreview(
        listed_as=state.entry.listed_as, variants=list(state.variants), render=len(render),
        skip=state.skipped, derivatives=derivatives,
        sidecar=state.sidecar["file"] if state.sidecar else None, error=state.error)


def _calibrate(batch, preview: BatchPreview) -> None:
    """Time one small frame of the first model with frames to render, and the derivatives."""
    from shots.batch.worker import make_derivatives, render_task

    if batch.preset.derivatives:
        width, height = batch.preset.image.width, batch.preset.image.height
        codes = np.zeros((height, width, 4), np.uint8)
        codes[height // 4:-height // 4, width // 4:-width // 4] = (180, 120, 90, 255)
        start = time.perf_counter()
        make_derivatives(codes, batch.preset.derivatives, NO_METADATA)
        preview.seconds_per_derivative = (time.perf_counter() - start) / len(
            batch.preset.derivatives)
    state = next((s for s in batch.states if s.error is None
                  and any(f not in s.rederive for f in s.pending)), None)
    if state is None:
        return
    frame = next(f for f in state.planned if f in state.pending and f not in state.rederive)
    full = state.preset.image
    scale = CALIBRATION_SIDE / max(full.width, full.height)
    small = state.preset.with_image_size(max(1, round(full.width * scale)),
                                         max(1, round(full.height * scale)))
    task = RenderTask(state.key, state.inputs_sha256, frame.variant,
                      ((frame.shot, frame.index),) * 2, small, state.preset_hash + "-calibration")
    result = render_task(task)
    if result.failure is not None:
        preview.notes.append(f"no time estimate: the calibration frame failed: "
                             f"{result.failure.message}")
        return
    seconds = min(image.render_seconds for image in result.images)
    pixels = (full.width * full.height) / (small.image.width * small.image.height)
    preview.seconds_per_frame = seconds * pixels
    preview.calibrated_on = (f"{Path(state.entry.listed_as).name} {frame.shot} "
                             f"{frame.index} at {small.image.width}x{small.image.height}")


def print_preview(preview: BatchPreview, console) -> None:
    """The dry run as a table, totals and the estimate (user text shown literally)."""
    from rich.table import Table

    from shots.terminal import literal

    table = Table(title=f"dry run: {len(preview.models)} model(s), nothing written")
    for column in ("model", "variants", "render", "skip", "derivatives", "sidecar"):
        table.add_column(column, justify="right" if column in ("render", "skip",
                                                               "derivatives") else "left")
    for model in preview.models:
        table.add_row(literal(model.listed_as), literal(", ".join(model.variants) or "-"),
                      str(model.render), str(model.skip), str(model.derivatives),
                      literal(model.sidecar or "-"))
    table.add_row("total", "", str(preview.frames_to_render), str(preview.frames_to_skip),
                  str(preview.derivatives_to_make), "", end_section=True)
    console.print(table)
    for note in preview.notes:
        console.print(literal(note), highlight=False, soft_wrap=True)
    for model in preview.models:
        if model.error:
            console.print(f"[bold red]would fail:[/] {literal(model.listed_as)}: "
                          f"{literal(model.error)}", highlight=False, soft_wrap=True)
    estimate = preview.estimate_seconds
    if not preview.frames_to_render and not preview.derivatives_to_make:
        console.print("nothing to render or publish: every file is up to date", highlight=False)
    elif estimate is not None:
        basis = (f"; {preview.seconds_per_frame:.2f} s a frame from {literal(preview.calibrated_on)}"
                 if preview.seconds_per_frame is not None else "")
        console.print(f"estimate: about {_duration(estimate)} on this machine{basis}",
                      highlight=False, soft_wrap=True)


def _duration(seconds: float) -> str:
    if seconds < 60:
        return f"{seconds:.0f} s"
    minutes, rest = divmod(round(seconds), 60)
    if minutes < 60:
        return f"{minutes} min {rest:02d} s"
    hours, minutes = divmod(minutes, 60)
    return f"{hours} h {minutes:02d} min"
