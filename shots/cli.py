"""The ``shots`` command: parse options, call the API, report.

Bad input (a broken model or preset, an unwritable folder) arrives as a ``ShotsError`` and
becomes one line on stderr and exit code 2, with nothing written.
"""

from __future__ import annotations

import json
import re
import sys
from pathlib import Path
from typing import Annotated

import typer
from rich.console import Console
from rich.markup import escape
from rich.table import Table

import shots
from shots.batch.cli_command import batch
from shots.errors import ShotsError

app = typer.Typer(
    add_completion=False,
    no_args_is_help=True,
    help="Render glTF 2.0 product models into consistent catalog images, on the CPU.",
)
err = Console(stderr=True)
out = Console()


def fail(message: str, code: int = 2) -> None:
    """Print one line on stderr and exit with ``code``."""
    err.print(f"[bold red]error:[/] {escape(message)}", highlight=False, soft_wrap=True)
    raise typer.Exit(code)


def warn(message: str) -> None:
    """Print one warning line on stderr, unwrapped (a hint must stay greppable as one line)."""
    err.print(f"[yellow]warning:[/] {escape(message)}", highlight=False, soft_wrap=True)


def show_version(value: bool) -> None:
    """``--version``: print the version (the renderer version in every frame's key) and stop."""
    if value:
        out.print(f"shots {shots.__version__}", highlight=False)
        raise typer.Exit()


@app.callback()
def options(
    version: Annotated[
        bool,
        typer.Option("--version", callback=show_version, is_eager=True,
                     help="Print the version and exit."),
    ] = False,
) -> None:
    """Options that come before the command."""


def parse_size(text: str | None) -> tuple[int, int] | None:
    """'640x480' → (640, 480)."""
    if text is None:
        return None
    match = re.fullmatch(r"\s*(\d+)\s*[xX×]\s*(\d+)\s*", text)
    if not match or not all(1 <= int(g) <= 16384 for g in match.groups()):
        fail(f"--size: expected WIDTHxHEIGHT between 1 and 16384, got {text!r}")
    return int(match.group(1)), int(match.group(2))


def parse_scene(text: str | None) -> int | str | None:
    return int(text) if text is not None and text.isdigit() else text


ModelArg = Annotated[Path, typer.Argument(help="A .gltf or .glb model file.")]
PresetOpt = Annotated[
    str, typer.Option("--preset", "-p", help="Built-in preset name or a TOML preset file.")
]
SceneOpt = Annotated[
    str | None, typer.Option("--scene", help="glTF scene index or name (default: the file's).")
]


@app.command()
def render(
    model: ModelArg,
    output: Annotated[Path, typer.Option("--output", "-o", help="Output folder.")] = Path("renders"),
    size: Annotated[str | None, typer.Option("--size", help="Image size WIDTHxHEIGHT.")] = None,
    preset: PresetOpt = "still",
    scene: SceneOpt = None,
    variant: Annotated[
        str | None, typer.Option("--variant", help="KHR_materials_variants name to render.")
    ] = None,
) -> None:
    """Render one model with a preset's shots (default: one three-quarter still)."""
    from shots.pipeline import render_model
    from shots.warmup import announce_compiles

    try:
        with announce_compiles(err):
            written = render_model(
                model,
                output,
                preset,
                size=parse_size(size),
                scene_choice=parse_scene(scene),
                variant=variant,
                on_frame=lambda r: out.print(f"wrote {r.path}", highlight=False),
                on_warning=lambda text: warn(f"{model}: {text}"),
            )
    except ShotsError as exc:
        fail(str(exc))
    out.print(f"{len(written)} image(s) in {output}", highlight=False)


@app.command()
def plan(
    preset: Annotated[str, typer.Argument(help="Built-in preset name or a TOML preset file.")],
    model: ModelArg,
    as_json: Annotated[bool, typer.Option("--json", help="Print the frames as JSON.")] = False,
    picture: Annotated[
        Path | None,
        typer.Option(
            "--output", "-o", help="Camera-path picture (PNG; default: MODEL-plan.png here)."
        ),
    ] = None,
    scene: SceneOpt = None,
    shot: Annotated[
        list[str] | None, typer.Option("--shot", help="Plan only this shot (repeatable).")
    ] = None,
) -> None:
    """Print the camera of every frame a preset plans for a model, and draw the camera path."""
    from shots.gltf import load_scene
    from shots.pathplot import write_path_picture
    from shots.planner import plan_frames
    from shots.presets import apply_model_fixes, load_preset

    picture = picture or Path(f"{model.stem}-plan.png")
    try:
        chosen = load_preset(preset)
        loaded = apply_model_fixes(load_scene(model, scene=parse_scene(scene)), chosen)
        frames = plan_frames(chosen, loaded, shots=shot or None)
        write_path_picture(frames, loaded, picture)
    except ShotsError as exc:
        fail(str(exc))
    rows = [frame.to_json() for frame in frames]
    if as_json:
        sys.stdout.write(json.dumps(rows, indent=1) + "\n")
        return
    for warning in loaded.warnings:
        err.print(f"warning: {escape(warning)}", highlight=False)
    table = Table(title=f"{preset} × {model.name}: {len(rows)} frames")
    for column in ("shot", "frame", "view", "eye", "target", "up", "lens", "size"):
        table.add_column(column)
    for row in rows:
        lens = f"{row['yfov_deg']:.2f}° v" if "yfov_deg" in row else f"ymag {row['ymag']:.3f} m"
        table.add_row(
            row["shot"], str(row["frame"]), row["view"], fmt3(row["eye"]), fmt3(row["target"]),
            fmt3(row["up"]), lens, f"{row['width']}x{row['height']}",
        )
    Console(width=max(out.width, 150)).print(table)
    out.print(f"camera path picture: {picture}", highlight=False)


@app.command()
def demo(
    output: Annotated[Path, typer.Option("--output", "-o", help="Output folder.")] = Path("renders"),
    quiet: Annotated[bool, typer.Option("--quiet", "-q", help="No progress bars.")] = False,
) -> None:
    """Render the invented demo catalog: thumbnails, hero views, a turntable, a report."""
    from shots.batch.progress import print_summary
    from shots.demo import run_demo

    try:
        summaries = run_demo(output, quiet=quiet, console=err)
    except ShotsError as exc:
        fail(str(exc))
    for summary in summaries:
        if not quiet:
            print_summary(summary, err)
    out.print(f"demo renders in {output}/ (contact sheet: {output}/thumbnails/contact_sheet.png,"
              f" report: {output}/thumbnails/report.md)", highlight=False)
    raise typer.Exit(max(summary.exit_code for summary in summaries))


@app.command()
def check(
    renders: Annotated[Path, typer.Argument(help="A folder of renders (searched recursively).")],
    shot: Annotated[
        str | None,
        typer.Option("--shot", help="Only images whose path names this shot, e.g. thumbnail."),
    ] = None,
) -> None:
    """Measure every thumbnail's fill, centring, background and exposure; flag the odd ones."""
    from shots.check import check_renders

    try:
        images = thumbnails_in(renders, shot)
        if not images:
            fail(f"{renders}: no rendered images found" + (f" for shot {shot!r}" if shot else ""))
        report = check_renders(images)
    except ShotsError as exc:
        fail(str(exc))
    for image, reasons in report.flagged:
        out.print(f"[yellow]flagged[/] {image}: {'; '.join(reasons)}", highlight=False)
    out.print(f"{len(report.flagged)} of {len(report.images)} image(s) flagged; "
              f"report in {report.markdown_path}", highlight=False)
    raise typer.Exit(1 if report.flagged else 0)


def thumbnails_in(folder: Path, shot: str | None) -> list[Path]:
    """Rendered PNG files under ``folder`` (not the batch's own contact sheet), optionally only
    those with ``shot`` as a path component or name prefix."""
    from shots.batch.layout import RESERVED

    if folder.is_file():
        return [folder]
    found = [
        p for p in sorted(folder.rglob("*.png"))
        if p.relative_to(folder).as_posix() not in RESERVED
        and not any(part.startswith(".") for part in p.relative_to(folder).parts)
    ]
    if shot is None:
        return found
    return [p for p in found if shot in p.relative_to(folder).parts or p.stem.startswith(shot)]


def fmt3(values) -> str:
    return "(" + ", ".join(f"{v:.3f}" for v in values) + ")"


app.command()(batch)


def main() -> None:
    """Console-script entry point."""
    app()
