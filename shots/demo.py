"""The demo catalog: the invented Sawdust Lane Workshop models shipped with the package, and the
``shots demo`` run that shows every stage on them in a few minutes."""

from __future__ import annotations

import contextlib
import tempfile
from dataclasses import dataclass
from importlib import resources
from pathlib import Path

HERO_MODEL = "wool_sofa"  # the sofa has colour variants: one hero set per variant
TURNTABLE_MODEL = "lacquered_counter_stool"  # chrome and lacquer show the tracer's reflections


@dataclass(frozen=True)
class DemoStep:
    """One batch of the demo: which models, which preset, into which sub-folder."""

    title: str
    preset: str
    models: tuple[str, ...] | None  # None: the whole catalog
    folder: str
    variants: str = "default"


DEMO_STEPS = (
    DemoStep("catalog thumbnails and storefront sets", "demo-thumbnail", None, "thumbnails"),
    DemoStep("hero views, every colour option", "demo-hero", (HERO_MODEL,), "hero", "all"),
    DemoStep("turntable", "demo-turntable", (TURNTABLE_MODEL,), "turntable"),
)


def demo_folder() -> Path:
    """Where the demo's .glb files are (they install as the data package ``shots.demo_models``)."""
    return Path(str(resources.files("shots.demo_models")))


def demo_models() -> list[Path]:
    """The demo catalog's .glb files, in name order."""
    return sorted(demo_folder().glob("*.glb"))


def run_demo(out_dir: Path, *, quiet: bool = False, console=None) -> list:
    """Render the demo catalog into ``out_dir``, one batch per ``DEMO_STEPS`` entry.

    Returns the batch summaries; each batch writes its own contact sheet and consistency report
    (``out_dir/thumbnails/report.md`` for the catalog thumbnails).
    """
    from shots.batch import run_batch
    from shots.batch.runner import available_cores, local_workers

    summaries = []
    # one set of worker processes for every step: each would otherwise start its own
    workers = local_workers() if available_cores() > 1 else contextlib.nullcontext()
    with tempfile.TemporaryDirectory(prefix="shots-demo-") as scratch, workers as pool:
        for step in DEMO_STEPS:
            source = demo_folder()
            if step.models is not None:
                source = Path(scratch) / f"{step.folder}.txt"
                lines = [str(demo_folder() / f"{name}.glb") for name in step.models]
                source.write_text("\n".join(lines) + "\n", encoding="utf-8")
            if console is not None and not quiet:
                console.print(f"[bold]{step.title}[/] ({step.preset})", highlight=False)
            summaries.append(
                run_batch(source, step.preset, out_dir / step.folder, variants=step.variants,
                          quiet=quiet, console=console, pool=pool)
            )
    return summaries
