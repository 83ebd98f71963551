"""Progress of a batch: rich bars on stderr, and a JSON-lines event log for machines.

Every frame produces one event (``rendered``, ``skipped`` or ``failed``); the run ends with a
``summary`` event. Events are flushed as they happen, so the log of a killed run is still valid
up to its last line.
"""

from __future__ import annotations

import json
import time
from pathlib import Path

from rich.console import Console
from rich.progress import (
    BarColumn,
    MofNCompleteColumn,
    Progress,
    TextColumn,
    TimeElapsedColumn,
    TimeRemainingColumn,
)

from shots.terminal import literal


class Reporter:
    """Progress bars (models, frames with ETA) and the optional JSON-lines log.

    Use as a context manager; ``quiet`` turns the bars off, ``log_json`` names the log file.
    """

    def __init__(self, quiet: bool = False, log_json: Path | None = None,
                 console: Console | None = None):
        self.console = console or Console(stderr=True)
        self.quiet = quiet
        self.log_path = Path(log_json) if log_json is not None else None
        self.log = None
        self.progress: Progress | None = None
        self.models_bar = self.frames_bar = None

    def __enter__(self) -> Reporter:
        if self.log_path is not None:
            self.log_path.parent.mkdir(parents=True, exist_ok=True)
            self.log = open(self.log_path, "w", encoding="utf-8")  # noqa: SIM115
        if not self.quiet:
            self.progress = Progress(
                TextColumn("{task.description:<7}"), BarColumn(), MofNCompleteColumn(),
                TimeElapsedColumn(), TextColumn("ETA"), TimeRemainingColumn(),
                console=self.console, transient=False,
            )
            self.progress.start()
            self.models_bar = self.progress.add_task("models", total=None)
            self.frames_bar = self.progress.add_task("frames", total=None)
        return self

    def __exit__(self, *exc) -> None:
        if self.progress is not None:
            self.progress.stop()
        if self.log is not None:
            self.log.close()

    def totals(self, models: int, frames: int) -> None:
        """Set the bars' totals (frames may grow once variants are known)."""
        if self.progress is not None:
            self.progress.update(self.models_bar, total=models)
            self.progress.update(self.frames_bar, total=frames)

    def frame(self, status: str, model: str, variant: str, shot: str | None,
              index: int | None, path: str | None = None, seconds: float | None = None,
              reason: str | None = None) -> None:
        """One frame rendered, skipped (up to date) or failed."""
        self.event("frame", status=status, model=model, variant=variant, shot=shot,
                   frame=index, path=path, seconds=seconds, reason=reason)
        if self.progress is not None:
            self.progress.advance(self.frames_bar)

    def model_done(self, model: str, failed: bool, reason: str | None = None,
                   details: str | None = None) -> None:
        """A model finished, or failed (``reason``; ``details``: a traceback for a bug)."""
        self.event("model", status="failed" if failed else "done", model=model, reason=reason,
                   traceback=details)
        if self.progress is not None:
            self.progress.advance(self.models_bar)

    def hint(self, model: str, listed_as: str, text: str) -> None:
        """A units or up-axis hint about a model (``shots.hints``): one unwrapped line naming
        the file and the preset key that fixes it, as ``shots render`` prints it."""
        self.event("hint", model=model, file=listed_as, hint=text)
        if not self.quiet:
            self.console.print(f"[yellow]warning:[/] {literal(listed_as)}: {literal(text)}",
                               highlight=False, soft_wrap=True)

    def note(self, message: str) -> None:
        """A line for people (not in quiet mode)."""
        if not self.quiet:
            self.console.print(literal(message), highlight=False, soft_wrap=True)

    def event(self, kind: str, **fields) -> None:
        if self.log is None:
            return
        record = {"event": kind, "time": round(time.time(), 3)}
        record.update({k: v for k, v in fields.items() if v is not None})
        self.log.write(json.dumps(record, sort_keys=True) + "\n")
        self.log.flush()



def print_summary(summary, console: Console) -> None:
    """The summary table of a batch, then one line per failed model and why."""
    from rich.table import Table

    table = Table(title=f"batch: {len(summary.models)} model(s) in {summary.seconds:.1f} s")
    for column in ("model", "variants", "rendered", "skipped", "failed", "status"):
        table.add_column(column, justify="right" if column in ("rendered", "skipped",
                                                               "failed") else "left")
    for model in summary.models:
        status = "[red]failed[/]" if model.error else "ok"
        table.add_row(literal(model.listed_as), literal(", ".join(model.variants) or "-"),
                      str(model.rendered),
                      str(model.skipped), str(model.failed), status)
    table.add_row("total", "", str(summary.frames_rendered), str(summary.frames_skipped),
                  str(summary.frames_failed), f"{len(summary.failures)} failed", end_section=True)
    console.print(table)
    for note in summary.notes:
        console.print(literal(note), highlight=False, soft_wrap=True)
    for image, reasons in summary.flagged:
        console.print(f"[yellow]flagged:[/] {literal(str(image))}: {literal('; '.join(reasons))}", highlight=False,
                      soft_wrap=True)
    if summary.report is not None:
        console.print(f"consistency report: {literal(summary.report)} "
                      f"({len(summary.flagged)} image(s) flagged), review page: "
                      f"{literal(summary.report.with_name('review.html'))}", highlight=False)
    for listed_as, reason in summary.failures:
        console.print(f"[bold red]failed:[/] {literal(listed_as)}: {literal(reason)}", highlight=False,
                      soft_wrap=True)
