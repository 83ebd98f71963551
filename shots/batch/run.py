"""A catalog batch: every model × variant × shot × frame of a preset, incremental and resumable.

    summary = run_batch("catalog/", "thumbnail", "out/")

1. find the models, hash them and read their manifests (``jobs``, ``manifest``);
2. keep every frame whose file exists and whose manifest key matches; the rest are pending;
3. render the pending frames in chunks on a runner (``runner``, ``worker``), writing each file
   atomically as it arrives and the model's manifest after it;
4. once a model is complete, encode its animations (``encode``);
5. write the catalog index and the contact sheet (``manifest``, ``sheet``).

Only this process writes into the output folder. A broken model fails alone; the summary says
which and why.
"""

from __future__ import annotations

import hashlib
import re
import time
from collections import deque
from dataclasses import dataclass, field
from pathlib import Path

import shots
from shots.batch import encode, jobs, manifest
from shots.batch.catalog import CatalogModel, find_models
from shots.batch.jobs import DEFAULT_VARIANT, DeriveTask, FrameId, ModelVariantJob, RenderTask
from shots.batch.layout import CONTACT_SHEET, INDEX_CSV, INDEX_JSON, DerivativeTemplate, Layout
from shots.batch.progress import Reporter
from shots.batch.runner import (
    WORKER_DIED,
    ClusterTls,
    ProcessRunner,
    available_cores,
    make_runner,
)
from shots.batch.sheet import CELL, SheetCell, contact_sheet_bytes, thumbnail
from shots.batch.worker import TaskResult, exr_available, probe_variants, run_task
from shots.check.judge import mask_rules
from shots.check.measure import measure_codes
from shots.derivatives import canvas_size
from shots.errors import BatchError
from shots.output import atomic_write_bytes
from shots.presets import (
    OrbitShot,
    PathShot,
    Preset,
    TurntableShot,
    ViewsShot,
    load_preset,
    sidecar_for,
)
from shots.products import ProductTable, load_products
from shots.tags import ImageMetadata

VARIANT_CHOICES = ("default", "all")
LOCK_NAME = ".shots-batch.lock"
# Temporary files of shots.output.atomic_write_bytes: ".<name>.<8 random chars>.part"
TEMPORARY_FILE = re.compile(r"^\..+\.[A-Za-z0-9_]{8}\.part$")


@dataclass
class ModelOutcome:
    """How one model fared."""

    model: str
    listed_as: str
    variants: list[str]
    rendered: int
    skipped: int
    failed: int
    error: str | None
    notes: list[str] = field(default_factory=list)  # the model's loader notes, sorted


@dataclass
class BatchSummary:
    """The result of ``run_batch``; ``exit_code`` is 1 when any model failed."""

    out_dir: Path
    models: list[ModelOutcome]
    animations_written: int
    seconds: float
    index: Path | None
    contact_sheet: Path | None
    notes: list[str] = field(default_factory=list)
    report: Path | None = None  # the consistency report (report.md) of the first frames
    flagged: list[tuple[Path, list[str]]] = field(default_factory=list)
    derivatives_written: int = 0

    @property
    def frames_rendered(self) -> int:
        return sum(m.rendered for m in self.models)

    @property
    def frames_skipped(self) -> int:
        return sum(m.skipped for m in self.models)

    @property
    def frames_failed(self) -> int:
        return sum(m.failed for m in self.models)

    @property
    def failures(self) -> list[tuple[str, str]]:
        """(model as listed, reason) for every failed model."""
        return [(m.listed_as, m.error) for m in self.models if m.error is not None]

    @property
    def exit_code(self) -> int:
        return 1 if self.failures else 0


@dataclass
class ModelState:
    """Everything the batch knows about one model while it runs."""

    entry: CatalogModel
    preset: Preset | None = None  # the batch's, or with the model's sidecar merged over it
    preset_hash: str = ""
    sidecar: dict | None = None  # the sidecar that applied: its file and SHA-256
    file_sha256: str = ""
    inputs_sha256: str = ""
    old: dict | None = None
    available: list[str] | None = None  # KHR_materials_variants names, once known
    variants: list[str] = field(default_factory=list)  # the ones rendered
    planned: list[FrameId] = field(default_factory=list)
    paths: dict[FrameId, str] = field(default_factory=dict)
    keys: dict[FrameId, str] = field(default_factory=dict)
    entries: dict[FrameId, dict] = field(default_factory=dict)
    pending: set[FrameId] = field(default_factory=set)
    animations: dict[tuple, dict] = field(default_factory=dict)
    derived: dict[FrameId, list[dict]] = field(default_factory=dict)  # wanted derivatives
    rederive: dict[FrameId, tuple[str, ...]] = field(default_factory=dict)  # stale, not re-render
    metadata: dict[str, ImageMetadata] = field(default_factory=dict)  # per variant
    products: dict[str, dict] = field(default_factory=dict)  # product table row per variant
    pictures: dict[FrameId, object] = field(default_factory=dict)  # 8-bit codes to animate
    warnings: set[str] = field(default_factory=set)
    hints: list[str] = field(default_factory=list)  # shots.hints, from the load or the manifest
    hints_shown: bool = False
    timings: dict[str, float] = field(default_factory=dict)
    rendered: int = 0
    skipped: int = 0
    failed: int = 0
    error: str | None = None
    done: bool = False

    @property
    def name(self) -> str:
        return self.entry.name

    @property
    def key(self) -> str:
        return str(self.entry.path)

    def add_time(self, name: str, seconds: float) -> None:
        self.timings[name] = round(self.timings.get(name, 0.0) + seconds, 4)


def run_batch(
    source: str | Path,
    preset: str | Path | Preset,
    out_dir: str | Path,
    *,
    variants: str = "default",
    force: bool = False,
    workers: int | None = None,
    cluster: str | None = None,
    quiet: bool = False,
    log_json: str | Path | None = None,
    template: str | None = None,
    bits: int = 8,
    exr: bool = False,
    animations: tuple[str, ...] = encode.ANIMATION_FORMATS,
    fps: float = 12.0,
    threads: int | None = None,
    pool: ProcessRunner | None = None,
    console=None,
    cluster_tls: ClusterTls | None = None,
) -> BatchSummary:
    """Render a catalog: every model of ``source`` × variants × every shot of ``preset``.

    Parameters
    ----------
    source : a folder of .gltf/.glb models (searched recursively) or a list file.
    preset : a Preset, a built-in preset name or a TOML preset path.
    out_dir : the output folder.
    variants : "default" (the models' own materials) or "all" (every KHR_materials_variants
        variant; a model without variants renders its default look).
    force : render every frame even when it is up to date.
    workers : local worker processes (default: the cores); 1 renders in this process.
    cluster : address of a Dask distributed scheduler to send the tasks to instead.
    cluster_tls : TLS files for a ``tls://`` scheduler (``shots.batch.runner.ClusterTls``).
    quiet : no progress bars. log_json : JSON-lines event log path.
    template : frame path template (``shots.batch.layout``).
    bits : PNG bit depth, 8 or 16. exr : also write linear premultiplied EXR files.
    animations : formats for shots that move the camera ("gif", "webp", "mp4").
    fps : animation frame rate. threads : numba threads per worker (default cores // workers).
    pool : worker processes shared by several batches (``shots.batch.runner.local_workers``);
        used instead of starting ``workers`` processes, and left running.

    Raises
    ------
    BatchError, PresetError : the run cannot start (bad source, template, preset or options).
    A broken model does not raise: it is reported in the summary (``exit_code`` 1).
    """
    started = time.perf_counter()
    batch = prepare_batch(source, preset, out_dir, variants=variants, force=force,
                          workers=workers, cluster=cluster, template=template, bits=bits,
                          exr=exr, animations=animations, fps=fps, threads=threads, pool=pool,
                          cluster_tls=cluster_tls)
    with Reporter(quiet=quiet, log_json=Path(log_json) if log_json else None,
                  console=console) as reporter:
        summary = batch.run(reporter)
        summary.seconds = time.perf_counter() - started
        reporter.event("summary", models=len(summary.models), failed=len(summary.failures),
                       rendered=summary.frames_rendered, skipped=summary.frames_skipped,
                       frames_failed=summary.frames_failed,
                       animations=summary.animations_written,
                       derivatives=summary.derivatives_written,
                       seconds=round(summary.seconds, 3), exit_code=summary.exit_code,
                       failures=[{"model": m, "reason": r} for m, r in summary.failures])
    return summary


def prepare_batch(source, preset, out_dir, *, variants: str = "default", force: bool = False,
                  workers: int | None = None, cluster: str | None = None,
                  template: str | None = None, bits: int = 8, exr: bool = False,
                  animations: tuple[str, ...] = encode.ANIMATION_FORMATS, fps: float = 12.0,
                  threads: int | None = None, pool: ProcessRunner | None = None,
                  cluster_tls: ClusterTls | None = None) -> Batch:
    """Check the options (``run_batch`` explains them) and set a batch up, writing nothing.

    Raises
    ------
    BatchError, PresetError : the run cannot start.
    """
    if variants not in VARIANT_CHOICES:
        raise BatchError("--variants", None, f"expected 'default' or 'all', got {variants!r}")
    if bits not in (8, 16):
        raise BatchError("--bits", None, f"PNG bit depth must be 8 or 16, got {bits}")
    if not fps > 0:
        raise BatchError("--fps", None, f"must be positive, got {fps}")
    if workers is not None and workers < 1:
        raise BatchError("--workers", None, f"must be 1 or more, got {workers}")
    unknown = [a for a in animations if a not in encode.ANIMATION_FORMATS]
    if unknown:
        raise BatchError("--animations", None, f"unknown format(s) {', '.join(unknown)} "
                                               f"(known: {', '.join(encode.ANIMATION_FORMATS)})")
    if not isinstance(preset, Preset):
        preset = load_preset(preset)
    return Batch(
        preset=preset, layout=Layout.create(Path(out_dir), template),
        models=find_models(Path(source)), variants=variants, force=force,
        workers=workers, cluster=cluster, bits=bits, exr=exr, animations=tuple(animations),
        fps=float(fps), threads=threads, pool=pool, cluster_tls=cluster_tls,
    )


class Batch:
    """One run of a catalog batch (``run_batch`` is the way in)."""

    def __init__(self, preset: Preset, layout: Layout, models: list[CatalogModel],
                 variants: str, force: bool, workers: int | None, cluster: str | None,
                 bits: int, exr: bool, animations: tuple[str, ...], fps: float,
                 threads: int | None, pool: ProcessRunner | None = None,
                 cluster_tls: ClusterTls | None = None):
        self.preset = preset
        self.layout = layout
        self.variant_choice = variants
        self.force = force
        self.workers = workers or available_cores()
        self.cluster = cluster
        self.cluster_tls = cluster_tls
        self.bits = bits
        self.fps = fps
        self.threads = threads
        self.pool = None if cluster else pool
        self.notes: list[str] = []
        self.exr = exr and self._exr_writer()
        self.animations = self._encoders(animations)
        self.preset_hash = jobs.preset_sha256(preset)
        self.version = shots.__version__
        self.size = f"{preset.image.width}x{preset.image.height}"
        self.counts = dict(jobs.shot_frame_counts(preset))
        self.moving = {s.name for s in preset.shots
                       if isinstance(s, TurntableShot | OrbitShot | PathShot)}
        self.animated = tuple(sorted(s for s in self.moving if self.counts[s] > 1)) \
            if self.animations else ()
        # first frames measured and shrunk as they arrive, so the end of the run reads no PNG
        self.measured: dict[Path, object] = {}
        self.thumbnails: dict[Path, object] = {}
        self.states = [self._with_sidecar(ModelState(entry, preset, self.preset_hash))
                       for entry in models]
        self.by_key = {state.key: state for state in self.states}
        self.owners: dict[str, str] = {}  # output path → model that writes it
        self.animations_written = 0
        self.derivatives_written = 0
        self.runner = None
        self.reporter: Reporter | None = None
        self.dry_run = False  # plan only: nothing is written (shots.batch.preview)
        self._check_template()
        self.products: ProductTable | None = (
            load_products(preset.publish.products) if preset.publish.products else None
        )
        self.derivative_templates = self._derivative_templates()

    # --- set-up -------------------------------------------------------------------------------

    def _exr_writer(self) -> bool:
        if exr_available():
            return True
        self.notes.append("EXR skipped: no EXR writer installed (pip install OpenEXR)")
        return False

    def _encoders(self, wanted: tuple[str, ...]) -> tuple[str, ...]:
        if "mp4" in wanted:
            try:
                import imageio_ffmpeg  # noqa: F401
            except ImportError:
                self.notes.append("MP4 skipped: pip install imageio-ffmpeg")
                wanted = tuple(w for w in wanted if w != "mp4")
        return wanted

    def _check_template(self) -> None:
        """Refuse a template that would make frames of this catalog overwrite each other."""
        fields = self.layout.fields
        needs = [
            ("model", len(self.states) > 1, "the catalog has several models"),
            ("shot", len(self.counts) > 1, "the preset has several shots"),
            ("frame", any(n > 1 for n in self.counts.values()), "a shot has several frames"),
            ("variant", self.variant_choice == "all", "--variants all is given"),
        ]
        for name, needed, why in needs:
            if needed and name not in fields:
                raise BatchError("--template", self.layout.template,
                                 f"needs {{{name}}}: {why}")

    def _with_sidecar(self, state: ModelState) -> ModelState:
        """Merge the model's ``<model>.shots.toml`` over the preset, if it has one; a broken
        sidecar stops the batch here, before anything renders."""
        sidecar = sidecar_for(state.entry.path)
        if not sidecar.is_file():
            return state
        if not self.preset.source:
            raise BatchError(sidecar, None, "a sidecar needs the batch preset as a file or name")
        merged = load_preset(self.preset.source, sidecar)
        # the budgets stay the batch's, with any --limit overrides it was given
        state.preset = merged.model_copy(update={"limits": self.preset.limits})
        state.preset._source = merged.source
        state.preset_hash = jobs.preset_sha256(state.preset)
        state.sidecar = {"file": sidecar.name, "sha256": jobs.sha256_file(sidecar)}
        return state

    def _derivative_templates(self) -> dict[str, DerivativeTemplate]:
        """Check every derivative's path template now, so a bad one stops the batch before
        anything renders: known fields only, inside the output folder, and enough fields to
        tell this catalog's files apart."""
        product_fields = self.products.fields if self.products else ()
        templates = {}
        for index, derivative in enumerate(self.preset.derivatives):
            where = f"derivatives[{index}].path"
            template = DerivativeTemplate.create(derivative.path, self.preset.source, where,
                                                 product_fields)
            used = set(template.used)
            shots = derivative.shots or list(self.counts)
            needs = [
                ({"model", "sku"}, len(self.states) > 1, "the catalog has several models"),
                ({"shot"}, len(shots) > 1, "it applies to several shots"),
                ({"frame", "view"}, any(self.counts[s] > 1 for s in shots),
                 "a shot has several frames"),
                ({"variant", "sku"}, self.variant_choice == "all", "--variants all is given"),
            ]
            for names, needed, why in needs:
                if needed and not used & names:
                    either = " or ".join(f"{{{n}}}" for n in sorted(names))
                    raise BatchError(self.preset.source, where,
                                     f"{derivative.path!r} needs {either}: {why}")
            sample = dict.fromkeys(template.fields, "x") | {"frame": 0}
            self.layout.derivative_path(template, sample)  # escapes the output folder: refused
            templates[derivative.name] = template
        return templates

    def _lock(self):
        """Hold an exclusive lock on the output folder; the OS drops it even on SIGKILL."""
        self.layout.out_dir.mkdir(parents=True, exist_ok=True)
        handle = open(self.layout.out_dir / LOCK_NAME, "a+b")  # noqa: SIM115
        try:
            import fcntl
        except ImportError:  # no advisory locks on this OS
            return handle
        try:
            fcntl.flock(handle, fcntl.LOCK_EX | fcntl.LOCK_NB)
        except OSError:
            handle.close()
            raise BatchError(self.layout.out_dir, None,
                             "another batch is writing to this folder") from None
        return handle

    def _remove_temporary_files(self) -> None:
        """Delete what a killed run left half-written (only ever under temporary names)."""
        for path in self.layout.out_dir.rglob(".*.part"):
            if TEMPORARY_FILE.match(path.name) and path.is_file():
                path.unlink(missing_ok=True)

    # --- the run ------------------------------------------------------------------------------

    def run(self, reporter: Reporter) -> BatchSummary:
        self.reporter = reporter
        for note in self.notes:
            reporter.note(note)
        lock = self._lock()
        try:
            self._remove_temporary_files()
            for state in self.states:
                self._inspect(state)
            reporter.totals(len(self.states), self._frame_total())
            try:
                self._probe_variants()
                for state in self.states:
                    self._plan(state)
                reporter.totals(len(self.states), self._frame_total())
                self._render(self._tasks())
            finally:
                if self.runner is not None and self.runner is not self.pool:
                    self.runner.close()
            index, sheet = self._write_catalog()
            report = self._check_consistency()
        finally:
            lock.close()
        return BatchSummary(
            out_dir=self.layout.out_dir, models=[self._outcome(s) for s in self.states],
            animations_written=self.animations_written, seconds=0.0, index=index,
            derivatives_written=self.derivatives_written,
            contact_sheet=sheet, notes=self.notes,
            report=report.markdown_path if report else None,
            flagged=report.flagged if report else [],
        )

    def plan_only(self, reporter: Reporter) -> None:
        """Hash, read the manifests and plan every model, as ``run`` does, writing nothing:
        afterwards each state's ``pending`` and ``rederive`` say what a run would do."""
        self.reporter, self.dry_run = reporter, True
        try:
            for state in self.states:
                self._inspect(state)
            self._probe_variants()
            for state in self.states:
                self._plan(state)
        finally:
            if self.runner is not None and self.runner is not self.pool:
                self.runner.close()

    def _check_consistency(self):
        """Write the consistency report and review page (shots.check) over the first frame of
        every shot, with the preset's [check] tolerances."""
        from shots.check import check_renders

        images = [
            self.layout.absolute(state.paths[FrameId(variant, shot.name, 0)])
            for state in self.states if state.error is None
            for variant in state.variants
            for shot in self.preset.shots
            if FrameId(variant, shot.name, 0) in state.paths
        ]
        images = [path for path in images if path.is_file()]
        if not images:
            return None
        return check_renders(images, self.preset.check, report_dir=self.layout.out_dir,
                             measured=self.measured)

    def _frame_total(self) -> int:
        per_variant = sum(self.counts.values())
        return sum(len(s.variants or [DEFAULT_VARIANT]) * per_variant for s in self.states)

    def _get_runner(self, frames: int):
        """The runner, started on first use with no more local workers than ``frames``."""
        if self.runner is None and not self.cluster:
            self._compile_kernels()
        if self.runner is None and self.pool is not None:
            self.runner = self.pool
        elif self.runner is None:
            workers = max(1, min(self.workers, frames))
            self.runner = make_runner(workers, self.cluster, self.threads, self.cluster_tls)
        return self.runner

    def _compile_kernels(self) -> None:
        """Compile (or load) the kernels here, once, before local workers start: they then only
        load them from the cache, where each would otherwise compile them at the same time."""
        from shots.compile_helper import helping_compile
        from shots.warmup import announce_compiles, compile_renderer

        reporter = self.reporter
        with announce_compiles(reporter.console, reporter.progress, reporter.quiet):
            with helping_compile(albedo=True):
                compile_renderer()

    def _inspect(self, state: ModelState) -> None:
        """Hash the model and read its manifest; a model that cannot be read fails here, alone."""
        try:
            self._read_inputs(state)
        except Exception as exc:  # any surprise from one model's files fails that model alone
            self._fail(state, f"{state.entry.listed_as}: cannot read: "
                              f"{getattr(exc, 'strerror', None) or exc}", [])

    def _read_inputs(self, state: ModelState) -> None:
        path = state.entry.path
        if state.entry.escapes_root():
            self._fail(state, f"{state.entry.listed_as}: a link to a file outside the catalog "
                              f"folder {state.entry.root} (refused)", [])
            return
        if not path.is_file():
            self._fail(state, f"{state.entry.listed_as}: no such model file", [])
            return
        state.file_sha256, state.inputs_sha256 = jobs.model_hashes(path)
        old = manifest.read_manifest(self.layout.absolute(self.layout.manifest_path(state.name)))
        if old is not None and old.get("inputs_sha256") == state.inputs_sha256:
            state.old = old
            if isinstance(old.get("variants"), list):
                state.available = [str(v) for v in old["variants"]]
            state.warnings.update(str(w) for w in old.get("warnings", []))
            if old.get("preset_sha256") == state.preset_hash and isinstance(old.get("hints"), list):
                state.hints = [str(h) for h in old["hints"]]
        if self.variant_choice == "default":
            state.variants = [DEFAULT_VARIANT]
        elif state.available is not None:
            state.variants = list(state.available) or [DEFAULT_VARIANT]

    def _probe_variants(self) -> None:
        """For ``--variants all``: load the models whose variant names are not known yet."""
        unknown = [s for s in self.states if s.error is None and not s.variants]
        if not unknown:
            return
        runner = self._get_runner(self._frame_total())
        futures = {runner.submit(probe_variants, s.key, s.inputs_sha256, s.preset,
                                 s.preset_hash): s
                   for s in unknown}
        pending = set(futures)
        while pending:
            done, pending = runner.wait_any(pending)
            for future in done:
                state = futures[future]
                result = runner.result(future, state.key, DEFAULT_VARIANT)
                state.add_time("load_s", result.load_seconds)
                self._show_hints(state, result)
                if result.failure is not None:
                    self._fail(state, result.failure.message, [])
                    continue
                state.available = list(result.variants)
                state.warnings.update(result.warnings)
                state.variants = list(result.variants) or [DEFAULT_VARIANT]

    def _plan(self, state: ModelState) -> None:
        """Each frame's path and key; keep the up-to-date ones, the rest become pending."""
        if state.error is not None:
            return
        old_frames = {}
        for entry in (state.old or {}).get("frames", []):
            try:
                old_frames[FrameId(entry["variant"], entry["shot"], entry["frame"])] = entry
            except (KeyError, TypeError):
                continue
        if not self._find_products(state):
            return
        paths = {}
        for variant in state.variants:
            for frame in jobs.frame_ids(self.preset, variant):
                state.planned.append(frame)
                state.keys[frame] = jobs.frame_key(state.inputs_sha256, state.preset_hash,
                                                   self.version, self.bits, frame)
        try:  # a model (or variant) named like the batch's own files fails alone
            for frame in state.planned:
                paths[frame] = self.layout.frame_path(state.name, frame.variant, frame.shot,
                                                      frame.index, self.size)
                state.derived[frame] = self._derivatives_of(state, frame)
            clash = self._claim(state, list(paths.values()) + self._animation_paths(state))
        except BatchError as exc:
            clash = f"{state.entry.listed_as}: {exc.message}; rename the model or change " \
                    f"--template"
        derivative_paths = [d["path"] for wanted in state.derived.values() for d in wanted]
        if clash:
            self._fail(state, clash, state.planned)
            return
        clash = self._claim(state, derivative_paths)
        if clash:  # the preset's templates collide: no model's files would be safe
            raise BatchError(self.preset.source, "derivatives", clash)
        state.paths = paths
        for frame in state.planned:
            entry = old_frames.get(frame)
            if not self.force and self._up_to_date(entry, state.keys[frame], paths[frame]):
                state.entries[frame] = entry
                state.skipped += 1
                self.reporter.frame("skipped", state.name, frame.variant, frame.shot,
                                    frame.index, paths[frame])
                stale = self._stale_derivatives(state, frame, entry)
                if stale:
                    state.rederive[frame] = stale
                    state.pending.add(frame)
                else:
                    entry["derivatives"] = state.derived[frame]
            else:
                state.pending.add(frame)
        if not state.pending and not self.dry_run:
            self._finish(state)

    def _find_products(self, state: ModelState) -> bool:
        """Each variant's product table row and metadata; a missing row fails the model (it
        is reported, not named after its file)."""
        copyright = self.preset.publish.copyright
        for variant in state.variants:
            row = {}
            if self.products is not None:
                row = self.products.lookup(state.entry.listed_as, variant)
                if row is None:
                    self._fail(state, f"{state.entry.listed_as}: variant {variant!r} is not in "
                                      f"the product table {self.products.path}", [])
                    return False
            state.products[variant] = row
            state.metadata[variant] = ImageMetadata(
                product_code=row.get("sku", ""), title=row.get("title", ""),
                variant=variant if variant != DEFAULT_VARIANT else "", copyright=copyright)
        return True

    def _derivatives_of(self, state: ModelState, frame: FrameId) -> list[dict]:
        """The derivatives wanted of a frame: name, format, path, size and key."""
        wanted = []
        width, height = self.preset.image.width, self.preset.image.height
        metadata = state.metadata[frame.variant].as_dict()
        for derivative in jobs.derivatives_for(tuple(self.preset.derivatives), frame.shot):
            size = canvas_size(width, height, derivative.longest_side, derivative.box)
            values = {**state.products[frame.variant], "model": state.name,
                      "variant": frame.variant, "shot": frame.shot, "frame": frame.index,
                      "view": self._view_name(frame), "size": f"{size[0]}x{size[1]}",
                      "name": derivative.name}
            wanted.append({
                "name": derivative.name, "format": derivative.format,
                "path": self.layout.derivative_path(self.derivative_templates[derivative.name],
                                                    values),
                "width": size[0], "height": size[1],
                "key": jobs.derivative_key(state.keys[frame], derivative, metadata),
            })
        return wanted

    def _view_name(self, frame: FrameId) -> str:
        """A named view's name, else the frame number (three digits)."""
        shot = next(s for s in self.preset.shots if s.name == frame.shot)
        return shot.views[frame.index] if isinstance(shot, ViewsShot) else f"{frame.index:03d}"

    def _stale_derivatives(self, state: ModelState, frame: FrameId, entry: dict) -> tuple:
        """Names of the derivatives of an up-to-date frame that need making again."""
        old = {d.get("name"): d for d in entry.get("derivatives") or [] if isinstance(d, dict)}
        stale = []
        for wanted in state.derived[frame]:
            have = old.get(wanted["name"])
            if (self.force or have is None or have.get("key") != wanted["key"]
                    or have.get("path") != wanted["path"]
                    or not self.layout.absolute(wanted["path"]).is_file()):
                stale.append(wanted["name"])
        return tuple(stale)

    def _animation_paths(self, state: ModelState) -> list[str]:
        return [
            self.layout.animation_path(state.name, variant, shot, self.size, kind)
            for variant in state.variants for shot in self.moving if self.counts[shot] > 1
            for kind in self.animations
        ]

    def _claim(self, state: ModelState, paths: list[str]) -> str | None:
        """Reserve output paths for a model; a message if another model already has one."""
        exr = [str(Path(p).with_suffix(".exr").as_posix()) for p in paths if p.endswith(".png")]
        wanted = paths + (exr if self.exr else [])
        if len(set(wanted)) != len(wanted):
            return (f"{state.entry.listed_as}: two of its outputs share a path under the "
                    f"template {self.layout.template!r} (variant names alike once made safe?)")
        for path in wanted:
            owner = self.owners.get(path)
            if owner == state.entry.listed_as:
                return f"{state.entry.listed_as}: two of its outputs would be {path!r}"
            if owner is not None:
                return (f"{state.entry.listed_as}: its output {path!r} would overwrite one of "
                        f"{owner} (two models with the same name?)")
        self.owners.update(dict.fromkeys(wanted, state.entry.listed_as))
        return None

    def _up_to_date(self, entry: dict | None, key: str, path: str) -> bool:
        """Whether a frame can be kept: same key and path, and its file still holds the bytes
        the manifest recorded (a file truncated or damaged since is rendered again)."""
        if entry is None or entry.get("key") != key or entry.get("path") != path:
            return False
        if not _intact(self.layout.absolute(path), entry.get("sha256")):
            return False
        if self.exr:
            exr = entry.get("exr")
            return bool(exr) and _intact(self.layout.absolute(exr), entry.get("exr_sha256"))
        return True

    def _tasks(self) -> list[RenderTask | DeriveTask]:
        variant_jobs, derive = [], []
        for state in self.states:
            if state.error is not None or not state.pending:
                continue
            for variant in state.variants:
                pending = [f for f in state.planned if f in state.pending and f.variant == variant]
                render = [f for f in pending if f not in state.rederive]
                if render:
                    variant_jobs.append(ModelVariantJob(state.key, state.inputs_sha256, variant,
                                                        render, state.preset, state.preset_hash))
                stale = [f for f in pending if f in state.rederive]
                if stale:
                    derive.append(self._derive_task(state, variant, stale))
        if not variant_jobs:
            return derive
        # chunks are cut for the runner's size: a cluster's threads, else the local workers
        workers = self._get_runner(sum(len(j.pending) for j in variant_jobs)).workers
        metadata = {(s.key, v): m for s in self.states for v, m in s.metadata.items()}
        return jobs.chunk_tasks(variant_jobs, workers, self.preset, self.preset_hash, self.bits,
                                self.exr, self.animated, metadata) + derive

    def _derive_task(self, state: ModelState, variant: str, frames: list[FrameId]) -> DeriveTask:
        """Re-make stale derivatives from the masters on disk."""
        return DeriveTask(
            state.key, variant,
            tuple((f.shot, f.index, self.layout.absolute(state.paths[f]), state.rederive[f])
                  for f in frames),
            tuple(self.preset.derivatives), state.metadata[variant])

    def _render(self, tasks: list[RenderTask | DeriveTask]) -> None:
        if not tasks:
            return
        runner = self._get_runner(sum(len(t.frames) for t in tasks))
        capacity = 1 if runner.workers == 1 else 2 * runner.workers
        queue = deque(tasks)
        retried: set[int] = set()
        in_flight: dict = {}
        while queue or in_flight:
            while queue and len(in_flight) < capacity:
                task = queue.popleft()
                state = self.by_key[task.model]
                if state.error is not None:
                    self._fail(state, state.error, self._frames_of(task))
                    continue
                if isinstance(task, DeriveTask):
                    task = task.with_masters()
                in_flight[runner.submit(run_task, task)] = task
            if not in_flight:
                break
            done, _ = runner.wait_any(set(in_flight))
            for future in done:
                task = in_flight.pop(future)
                result = runner.result(future, task.model, task.variant)
                failure = result.failure
                if failure is not None and failure.kind == WORKER_DIED and id(task) not in retried:
                    retried.add(id(task))  # once: the task may only have shared the pool
                    queue.appendleft(task)
                    continue
                self._take(task, result)

    @staticmethod
    def _frames_of(task: RenderTask | DeriveTask) -> list[FrameId]:
        return [FrameId(task.variant, frame[0], frame[1]) for frame in task.frames]

    def _take(self, task: RenderTask | DeriveTask, result: TaskResult) -> None:
        """Write a finished chunk's files, then the model's manifest."""
        state = self.by_key[task.model]
        state.add_time("load_s", result.load_seconds)
        state.add_time("prepare_s", result.prepare_seconds)
        state.warnings.update(result.warnings)
        self._show_hints(state, result)
        if result.variants:
            state.available = list(result.variants)
        if state.error is not None or result.failure is not None:
            error = state.error or result.failure.message
            self._fail(state, error, self._frames_of(task), result.failure)
            return
        for image in result.images:
            frame = FrameId(task.variant, image.shot, image.index)
            if image.png is None:  # derivatives re-made; the master was up to date
                self._write_derivatives(state, frame, image)
                state.pending.discard(frame)
                continue
            start = time.perf_counter()
            path = state.paths[frame]
            atomic_write_bytes(self.layout.absolute(path), image.png)
            exr_path = None
            if image.exr is not None:
                exr_path = Path(path).with_suffix(".exr").as_posix()
                atomic_write_bytes(self.layout.absolute(exr_path), image.exr)
            write_seconds = time.perf_counter() - start
            if image.codes is not None:
                self._keep_codes(state, frame, self.layout.absolute(path), image.codes)
            state.entries[frame] = self._frame_entry(state, frame, image, path, exr_path,
                                                     write_seconds)
            self._write_derivatives(state, frame, image)
            state.pending.discard(frame)
            state.rendered += 1
            state.add_time("render_s", image.render_seconds)
            state.add_time("encode_s", image.encode_seconds)
            state.add_time("write_s", write_seconds)
            self.reporter.frame("rendered", state.name, frame.variant, frame.shot, frame.index,
                                path, round(image.render_seconds, 4))
        if state.pending or self._moves(state):  # else _finish writes it at once
            self._write_manifest(state)
        if not state.pending:
            self._finish(state)

    def _write_derivatives(self, state: ModelState, frame: FrameId, image) -> None:
        """Write the derivatives a worker made of a frame and list them in its entry."""
        start = time.perf_counter()
        for wanted in state.derived[frame]:
            data = image.derivatives.get(wanted["name"])
            if data is not None:
                atomic_write_bytes(self.layout.absolute(wanted["path"]), data)
                self.derivatives_written += 1
        state.entries[frame]["derivatives"] = state.derived[frame]
        state.rederive.pop(frame, None)
        state.add_time("derive_s", image.derive_seconds)
        state.add_time("write_s", time.perf_counter() - start)

    def _moves(self, state: ModelState) -> bool:
        """Whether the model has animations to make once its frames are in."""
        return bool(self.animated and state.variants)

    def _show_hints(self, state: ModelState, result: TaskResult | None = None) -> None:
        """Print the model's hints once: those of a worker's load, else (a model with nothing
        to render) those its manifest kept."""
        if result is not None and result.failure is not None and not result.hints:
            return  # the load failed before any hint was read
        if result is not None:
            state.hints = list(result.hints)
        if state.hints_shown:
            return
        state.hints_shown = True
        for text in state.hints:
            self.reporter.hint(state.name, state.entry.listed_as, text)

    def _keep_codes(self, state: ModelState, frame: FrameId, path: Path, codes) -> None:
        """Use a frame's 8-bit codes now (first frames: report and contact sheet) or keep them
        for its animation, instead of decoding its PNG file later."""
        if frame.index == 0:
            self.measured[path] = measure_codes(codes, path, mask_rules(self.preset.check))
            self.thumbnails[path] = thumbnail(codes, self._sheet_background())
        if frame.shot in self.animated:
            state.pictures[frame] = codes

    def _frame_entry(self, state, frame: FrameId, image, path, exr_path, write_seconds) -> dict:
        return {
            "variant": frame.variant, "shot": frame.shot, "frame": frame.index,
            "view": image.view, "path": path, "exr": exr_path, "key": state.keys[frame],
            "sha256": hashlib.sha256(image.png).hexdigest(),
            "exr_sha256": hashlib.sha256(image.exr).hexdigest() if image.exr else None,
            "seed": image.seed, "albedo": image.albedo, "width": image.camera["width"],
            "height": image.camera["height"], "camera": image.camera,
            "timings": {"render_s": round(image.render_seconds, 4),
                        "encode_s": round(image.encode_seconds, 4),
                        "write_s": round(write_seconds, 4)},
        }

    def _fail(self, state: ModelState, message: str, frames: list[FrameId],
              failure=None) -> None:
        first = state.error is None
        state.error = message
        for frame in frames:
            state.pending.discard(frame)
            state.failed += 1
            self.reporter.frame("failed", state.name, frame.variant, frame.shot, frame.index,
                                reason=message)
        if first:
            if not frames:
                self.reporter.frame("failed", state.name, DEFAULT_VARIANT, None, None,
                                    reason=message)
            details = failure.details if failure is not None and failure.details else None
            self.reporter.model_done(state.name, failed=True, reason=message, details=details)

    # --- a finished model ---------------------------------------------------------------------

    def _finish(self, state: ModelState) -> None:
        """All frames are in place: encode the animations, write the manifest."""
        started, before = time.perf_counter(), self.animations_written
        old = {}
        for entry in (state.old or {}).get("animations", []):
            try:
                old[(entry["variant"], entry["shot"], entry["format"])] = entry
            except (KeyError, TypeError):
                continue
        for variant in state.variants:
            for shot in self.preset.shots:
                if shot.name in self.moving and self.counts[shot.name] > 1:
                    self._animate(state, variant, shot.name, old)
        state.pictures.clear()
        written = self.animations_written - before
        if state.rendered or written:
            state.add_time("animate_s", time.perf_counter() - started)
        elif state.old is not None:  # nothing new: the timings of the run that made the files
            state.timings = dict(state.old.get("timings") or {})
        state.done = True
        self._show_hints(state)
        self._write_manifest(state)
        self.reporter.model_done(state.name, failed=False, rendered=state.rendered,
                                 skipped=state.skipped)

    def _animate(self, state: ModelState, variant: str, shot: str, old: dict) -> None:
        frames = [FrameId(variant, shot, k) for k in range(self.counts[shot])]
        keys = [state.keys[f] for f in frames]
        wanted = {}
        for kind in self.animations:
            path = self.layout.animation_path(state.name, variant, shot, self.size, kind)
            key = jobs.animation_key(keys, kind, self._animation_settings(kind))
            entry = old.get((variant, shot, kind))
            if (not self.force and entry is not None and entry.get("key") == key
                    and entry.get("path") == path and self.layout.absolute(path).is_file()):
                state.animations[(variant, shot, kind)] = entry
            else:
                wanted[kind] = (path, key)
        if not wanted:
            return
        pictures = [state.pictures[f] if f in state.pictures
                    else encode.read_rgba8(self.layout.absolute(state.paths[f])) for f in frames]
        encoded = encode.encode_animations(tuple(wanted), pictures, self.fps,
                                           self._flatten_colour())
        height, width = pictures[0].shape[:2]
        for kind, (path, key) in wanted.items():
            atomic_write_bytes(self.layout.absolute(path), encoded[kind])
            self.animations_written += 1
            state.animations[(variant, shot, kind)] = {
                "variant": variant, "shot": shot, "format": kind, "path": path, "key": key,
                "frames": len(frames), "fps": self.fps, "width": width, "height": height,
            }

    def _animation_settings(self, kind: str) -> dict:
        settings = {"fps": self.fps}
        if kind in ("gif", "mp4"):
            settings["background"] = list(self._flatten_colour())
        if kind == "mp4":
            settings.update(crf=encode.MP4_CRF, preset=encode.MP4_PRESET)
        if kind == "webp":
            settings["method"] = encode.WEBP_METHOD
        return settings

    def _flatten_colour(self) -> tuple[float, float, float]:
        """The preset's background colour where it has one, else white."""
        background = self.preset.background
        if background.kind in ("solid", "gradient"):
            return tuple(background.color)
        return (1.0, 1.0, 1.0)

    def _manifest_header(self, state: ModelState) -> dict:
        return {
            "model": state.name,
            "file": state.entry.listed_as,
            "sha256": state.file_sha256,
            "inputs_sha256": state.inputs_sha256,
            "preset": self.preset.name,
            "preset_sha256": state.preset_hash,
            "sidecar": state.sidecar,
            "renderer_version": self.version,
            "settings": {"bits": self.bits, "exr": self.exr, "template": self.layout.template,
                         "animations": list(self.animations), "fps": self.fps},
            "variants": state.available or [],
            "rendered_variants": state.variants,
            "products": state.products if self.products is not None else None,
            "warnings": sorted(state.warnings),
            "hints": sorted(state.hints),
        }

    def _write_manifest(self, state: ModelState) -> None:
        document = manifest.manifest_document(
            self._manifest_header(state), list(state.entries.values()),
            list(state.animations.values()), dict(sorted(state.timings.items())),
        )
        path = self.layout.absolute(self.layout.manifest_path(state.name))
        manifest.write_if_changed(path, manifest.json_bytes(document))

    # --- catalog files ------------------------------------------------------------------------

    def _write_catalog(self) -> tuple[Path, Path | None]:
        finished = [s for s in self.states if s.done and s.error is None]
        sheet_path = self._write_sheet(finished)
        models, frames, animations = [], [], []
        for state in self.states:
            models.append({
                "model": state.name, "file": state.entry.listed_as, "sha256": state.file_sha256,
                "manifest": self.layout.manifest_path(state.name),
                "status": "failed" if state.error else "ok", "error": state.error,
                "variants": state.variants,
            })
            if state not in finished:
                continue
            for frame in sorted(state.entries):
                entry = state.entries[frame]
                frames.append({"model": state.name, **{k: entry[k] for k in (
                    "variant", "shot", "frame", "view", "path", "exr", "key", "seed", "width",
                    "height")}, "derivatives": entry.get("derivatives") or []})
            for key in sorted(state.animations):
                animations.append({"model": state.name, **state.animations[key]})
        header = {
            "preset": self.preset.name, "preset_sha256": self.preset_hash,
            "renderer_version": self.version, "template": self.layout.template,
            "contact_sheet": CONTACT_SHEET if sheet_path else None,
        }
        document = manifest.index_document(header, models, frames, animations)
        index = self.layout.absolute(INDEX_JSON)
        manifest.write_if_changed(index, manifest.json_bytes(document))
        manifest.write_if_changed(self.layout.absolute(INDEX_CSV),
                                  manifest.index_csv_bytes(frames, animations))
        return index, sheet_path

    def _write_sheet(self, finished: list[ModelState]) -> Path | None:
        rows = []
        for state in finished:
            for variant in state.variants:
                paths = [self.layout.absolute(state.paths[FrameId(variant, shot.name, 0)])
                         for shot in self.preset.shots]
                rows.append([
                    SheetCell(path, state.name, f"{variant} / {shot.name}",
                              self.thumbnails.get(path))
                    for path, shot in zip(paths, self.preset.shots, strict=True)
                ])
        if not rows:
            return None
        path = self.layout.absolute(CONTACT_SHEET)
        manifest.write_if_changed(path, contact_sheet_bytes(rows, self._sheet_background()))
        return path

    def _sheet_background(self) -> tuple[float, float, float]:
        """The display colour the contact sheet puts behind transparent pixels."""
        if self.preset.background.kind == "transparent":
            return CELL
        return self._flatten_colour()

    def _outcome(self, state: ModelState) -> ModelOutcome:
        return ModelOutcome(model=state.name, listed_as=state.entry.listed_as,
                            variants=state.variants, rendered=state.rendered,
                            skipped=state.skipped, failed=state.failed, error=state.error,
                            notes=sorted(state.warnings))


def _intact(path: Path, sha256: str | None) -> bool:
    """Whether ``path`` is a file whose bytes hash to ``sha256`` (a manifest from before
    hashes were recorded: whether the image decodes whole)."""
    if not path.is_file():
        return False
    try:
        if sha256 is not None:
            return jobs.sha256_file(path) == sha256
        if path.suffix != ".png":
            return True
        from PIL import Image

        with Image.open(path) as image:
            image.verify()  # reads every chunk and checks its CRC, no pixels decoded
        return True
    except Exception:  # unreadable or damaged: render it again
        return False
