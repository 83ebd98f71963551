"""Progress of a batch: rich bars on a terminal, plain lines elsewhere (CI logs), log records
for library users, and a JSON-lines event log for machines.

Every frame produces one event (``rendered``, ``skipped`` or ``failed``); the run ends with a
``summary`` event. Events are flushed as they happen, so the log of a killed run is still valid
up to its last line. When stderr is not a terminal, bars would show nothing until the end, so
each finished model prints one line instead, with a line every ``PLAIN_INTERVAL`` seconds
while a long model renders. The same lines go to the ``shots.batch`` logger (INFO; failures
and hints as WARNING; frames as DEBUG).
"""

from __future__ import annotations

import json
import logging
import time
from collections import Counter
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

logger = logging.getLogger("shots.batch")
PLAIN_INTERVAL = 30.0  # seconds between "still rendering" lines in plain output


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
        self.plain = not quiet and not self.console.is_terminal
        self.started = time.monotonic()
        self.last_line = self.started
        self.models_total = self.frames_total = 0
        self.models_done = self.frames_done = 0
        self.frames_by_model: Counter[str] = Counter()

    def __enter__(self) -> Reporter:
        if self.log_path is not None:
            self.log_path.parent.mkdir(parents=True, exist_ok=True)
            self.log = open(self.log_path, "w", encoding="utf-8")  # noqa: SIM115
        if not self.quiet and not self.plain:
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
        self.models_total, self.frames_total = models, frames
        if self.progress is not None:
            self.progress.update(self.models_bar, total=models)
            self.progress.update(self.frames_bar, total=frames)

    def frame(self, status: str, model: str, variant: str, shot: str | None,
              index: int | None, path: str | None = None, seconds: float | None = None,
              reason: str | None = None) -> None:
        """One frame rendered, skipped (up to date) or failed."""
        self.event("frame", status=status, model=model, variant=variant, shot=shot,
                   frame=index, path=path, seconds=seconds, reason=reason)
        logger.debug("%s %s %s %s %s", status, model, variant, shot, index)
        self.frames_done += 1
        self.frames_by_model[model] += 1
        if self.progress is not None:
            self.progress.advance(self.frames_bar)
        now = time.monotonic()
        if now - self.last_line >= PLAIN_INTERVAL:
            self._line(logging.INFO, f"… {model}: {self.frames_by_model[model]} frame(s) done; "
                                     f"{self.frames_done}/{self.frames_total} frames in all, "
                                     f"{self._elapsed()}")

    def model_done(self, model: str, failed: bool, reason: str | None = None,
                   details: str | None = None, rendered: int | None = None,
                   skipped: int | None = None) -> None:
        """A model finished, or failed (``reason``; ``details``: a traceback for a bug)."""
        self.event("model", status="failed" if failed else "done", model=model, reason=reason,
                   traceback=details)
        self.models_done += 1
        if self.progress is not None:
            self.progress.advance(self.models_bar)
        count = f"{self.models_done}/{self.models_total}"
        if failed:
            self._line(logging.WARNING, f"failed {count} {model}: {reason}")
        else:
            frames = (f": {rendered} rendered, {skipped} up to date"
                      if rendered is not None else "")
            self._line(logging.INFO, f"done {count} {model}{frames}, {self._elapsed()}")

    def _line(self, level: int, text: str) -> None:
        """One progress line: to the logger, and printed when output is not a terminal."""
        logger.log(level, "%s", text)
        if self.plain:
            self.console.print(literal(text), highlight=False, soft_wrap=True)
        self.last_line = time.monotonic()

    def _elapsed(self) -> str:
        seconds = round(time.monotonic() - self.started)
        return f"{seconds // 60} min {seconds % 60:02d} s" if seconds >= 60 else f"{seconds} s"

    def hint(self, model: str, listed_as: str, text: str) -> None:
        """A units or up-axis hint about a model (``shots.hints``): one unwrapped line naming
        the file and the preset key that fixes it, as ``shots render`` prints it."""
        self.event("hint", model=model, file=listed_as, hint=text)
        logger.warning("%s: %s", listed_as, text)
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
    for model in summary.models:  # what each file asks for that is not rendered, and repairs
        for note in model.notes:
            console.print(f"[yellow]note:[/] {literal(model.listed_as)}: {literal(note)}",
                          highlight=False, soft_wrap=True)
    if summary.derivatives_written:
        console.print(f"derivatives written: {summary.derivatives_written}", highlight=False)
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
