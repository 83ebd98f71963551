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
from rich.table import Table

import shots
from shots.batch.cli_command import batch
from shots.cli_help import FLAG, ShotsCommand, ShotsGroup
from shots.errors import ShotsError
from shots.terminal import literal

app = typer.Typer(
    cls=ShotsGroup,
    add_completion=False,
    no_args_is_help=True,
    help="Render glTF 2.0 product models into consistent catalog images, on the CPU.",
)
err = Console(stderr=True)
out = Console()


def fail(message: str, code: int = 2) -> None:
    """Print one line on stderr and exit with ``code``."""
    err.print(f"[bold red]error:[/] {literal(message)}", highlight=False, soft_wrap=True)
    raise typer.Exit(code)


def warn(message: str, kind: str = "warning") -> None:
    """Print one warning line on stderr, unwrapped (a hint must stay greppable as one line);
    ``kind`` labels it (``"ignored"`` for what the model asks for and is not rendered)."""
    err.print(f"[yellow]{kind}:[/] {literal(message)}", highlight=False, soft_wrap=True)


def show_version(value: bool) -> None:
    """``--version``: print the version (the renderer version in every frame's key) and stop."""
    if value:
        out.print(f"shots {shots.__version__}", highlight=False)
        raise typer.Exit()


@app.callback()
def options(
    version: Annotated[
        bool,
        typer.Option("--version", metavar=FLAG, callback=show_version, is_eager=True,
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


def parse_samples(count: int | None) -> int | None:
    """--samples N: a forced count of camera samples per pixel, 1 to 4096."""
    if count is not None and not 1 <= count <= 4096:
        fail(f"--samples: expected a count between 1 and 4096, got {count}")
    return count


def parse_scene(text: str | None) -> int | str | None:
    return int(text) if text is not None and text.isdigit() else text


ModelArg = Annotated[Path, typer.Argument(metavar="MODEL", help="A .gltf or .glb model file.")]
PresetOpt = Annotated[str, typer.Option(
    "--preset", "-p", metavar="PRESET", help="Built-in preset name or a TOML preset file.")]
SceneOpt = Annotated[str | None, typer.Option(
    "--scene", metavar="SCENE", help="glTF scene index or name (default: the file's).")]
OutputOpt = Annotated[
    Path, typer.Option("--output", "-o", metavar="FOLDER", help="Output folder.")]
QuietOpt = Annotated[bool, typer.Option("--quiet", "-q", metavar=FLAG, help="No progress bars.")]
LimitOpt = Annotated[list[str] | None, typer.Option(
    "--limit", metavar="KEY=VALUE", help="Override a budget of the preset's [limits] "
                                         "(repeatable).")]


@app.command(cls=ShotsCommand)
def render(
    model: ModelArg,
    output: OutputOpt = Path("renders"),
    size: Annotated[str | None, typer.Option(
        "--size", metavar="WxH", help="Image size WIDTHxHEIGHT.")] = None,
    samples: Annotated[int | None, typer.Option(
        "--samples", metavar="N",
        help="Exactly N camera samples per pixel (adaptive sampling off).")] = None,
    denoise: Annotated[bool, typer.Option(
        "--denoise", metavar=FLAG, help="Smooth the product's matte surfaces with the edge-aware "
                                        "filter (the preset key image.denoise).")] = False,
    preset: PresetOpt = "still",
    scene: SceneOpt = None,
    variant: Annotated[str | None, typer.Option(
        "--variant", metavar="VARIANT",
        help="KHR_materials_variants name to render; it joins the file name.")] = None,
    limit: LimitOpt = None,
) -> None:
    """Render one model with a preset's shots (default: one three-quarter still)."""
    from shots.compile_helper import helping_compile
    from shots.limits import preset_with_limits
    from shots.pipeline import render_model
    from shots.presets import load_preset
    from shots.warmup import announce_compiles

    try:
        with announce_compiles(err), helping_compile():
            written = render_model(
                model,
                output,
                preset_with_limits(load_preset(preset), limit),
                size=parse_size(size),
                samples=parse_samples(samples),
                denoise=True if denoise else None,
                scene_choice=parse_scene(scene),
                variant=variant,
                on_frame=lambda r: out.print(f"wrote {literal(r.path)}", highlight=False),
                on_warning=lambda text: warn(f"{model}: {text}", getattr(text, "kind", "warning")),
            )
    except ShotsError as exc:
        fail(str(exc))
    out.print(f"{len(written)} image(s) in {literal(output)}", highlight=False)


@app.command(cls=ShotsCommand)
def plan(
    preset: Annotated[str, typer.Argument(
        metavar="PRESET", help="Built-in preset name or a TOML preset file.")],
    model: ModelArg,
    as_json: Annotated[bool, typer.Option(
        "--json", metavar=FLAG, help="Print the frames as JSON.")] = False,
    picture: Annotated[Path | None, typer.Option(
        "--output", "-o", metavar="FILE",
        help="Camera-path picture (PNG; default: MODEL-plan.png here).")] = None,
    scene: SceneOpt = None,
    shot: Annotated[list[str] | None, typer.Option(
        "--shot", metavar="SHOT", help="Plan only this shot (repeatable).")] = None,
    limit: LimitOpt = None,
) -> None:
    """Print the camera of every frame a preset plans for a model, and draw the camera path."""
    from shots.gltf import load_scene
    from shots.limits import preset_with_limits
    from shots.pathplot import write_path_picture
    from shots.planner import plan_frames
    from shots.presets import apply_model_fixes, load_preset

    picture = picture or Path(f"{model.stem}-plan.png")
    try:
        chosen = preset_with_limits(load_preset(preset), limit)
        scene_model = load_scene(model, scene=parse_scene(scene), limits=chosen.limits)
        loaded = apply_model_fixes(scene_model, chosen)
        frames = plan_frames(chosen, loaded, shots=shot or None)
        write_path_picture(frames, loaded, picture)
    except ShotsError as exc:
        fail(str(exc))
    rows = [frame.to_json() for frame in frames]
    if as_json:  # strict JSON: a non-finite number (never planned on purpose) becomes null
        from shots.check.report import finite_or_null

        sys.stdout.write(json.dumps(finite_or_null(rows), indent=1, allow_nan=False) + "\n")
        return
    for warning in loaded.warnings:
        warn(warning, getattr(warning, "kind", "warning"))
    table = Table(title=literal(f"{preset} × {model.name}: {len(rows)} frames"))
    for column in ("shot", "frame", "view", "eye", "target", "up", "lens", "size"):
        table.add_column(column)
    for row in rows:
        lens = f"{row['yfov_deg']:.2f}° v" if "yfov_deg" in row else f"ymag {row['ymag']:.3f} m"
        table.add_row(
            row["shot"], str(row["frame"]), row["view"], fmt3(row["eye"]), fmt3(row["target"]),
            fmt3(row["up"]), lens, f"{row['width']}x{row['height']}",
        )
    Console(width=max(out.width, 150)).print(table)
    out.print(f"camera path picture: {literal(picture)}", highlight=False)


@app.command(cls=ShotsCommand)
def demo(output: OutputOpt = Path("renders"), quiet: QuietOpt = False) -> None:
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
              f" report: {output}/thumbnails/report.md, review page:"
              f" {output}/thumbnails/review.html, storefront sets:"
              f" {output}/thumbnails/storefront/)", highlight=False)
    raise typer.Exit(max(summary.exit_code for summary in summaries))


@app.command(cls=ShotsCommand)
def check(
    renders: Annotated[Path, typer.Argument(
        metavar="RENDERS", help="A folder of renders (searched recursively).")],
    shot: Annotated[
        str | None,
        typer.Option("--shot", metavar="SHOT",
                     help="Only the images of this shot, as the batch manifests name it (images "
                          "without one: by folder or file name)."),
    ] = None,
    against: Annotated[
        Path | None,
        typer.Option("--against", metavar="APPROVED", help="A folder of approved renders: compare every image with "
                                       "the approved one of the same model, variant, shot and "
                                       "frame (SSIM, CIEDE2000) and draw what changed."),
    ] = None,
    preset: Annotated[
        str | None,
        typer.Option("--preset", "-p", metavar="PRESET", help="Take the tolerances from this preset's [check] "
                                            "table (built-in name or TOML file)."),
    ] = None,
    tolerance: Annotated[
        list[str] | None,
        typer.Option("--tolerance", "-t", metavar="KEY=VALUE", help="Override one tolerance, KEY=VALUE "
                                               "(repeatable), e.g. exposure_stops=0.5."),
    ] = None,
    as_json: Annotated[
        bool, typer.Option("--json", metavar=FLAG, help="Print the report as JSON on stdout.")
    ] = False,
    limit: LimitOpt = None,
) -> None:
    """Measure every PNG render (framing, centring, background, light on the product, texture,
    orientation), compare variants and, given approved renders, those too; flag the odd ones.

    Writes report.md, report.json and review.html beside the renders; exits 1 when an image
    is flagged.
    """
    from shots.check import check_renders
    from shots.check.report import report_json
    from shots.limits import DEFAULT, with_overrides
    from shots.presets import check_settings, load_preset

    try:
        base = load_preset(preset).check.model_dump() if preset else {}
        overrides = parse_tolerances(tolerance or [])
        tolerances = check_settings({**base, **overrides}, "--tolerance" if overrides else
                                    str(preset or "[check]"))
        max_pixels = with_overrides(DEFAULT, limit).image_pixels
        report = check_renders(renders, tolerances, against=against, shot=shot,
                               max_pixels=max_pixels)
    except ShotsError as exc:
        fail(str(exc))
    if as_json:
        sys.stdout.write(report_json(report))
    else:
        for image, reasons in report.flagged:
            out.print(f"[yellow]flagged[/] {literal(image)}: {literal('; '.join(reasons))}",
                      highlight=False)
        out.print(f"{len(report.flagged)} of {len(report.images)} image(s) flagged; report in "
                  f"{literal(report.markdown_path)}, review page "
                  f"{literal(report.review_path)}", highlight=False)
    raise typer.Exit(1 if report.flagged else 0)


def parse_tolerances(items: list[str]) -> dict[str, object]:
    """``KEY=VALUE`` pairs, the value read as a TOML value (so ``0.5`` is a number and ``abc``
    stays text for the validator to refuse)."""
    import tomllib

    values = {}
    for item in items:
        key, sep, text = item.partition("=")
        if not sep or not key.strip():
            fail(f"--tolerance: expected KEY=VALUE, got {item!r}")
        try:
            value = tomllib.loads(f"v = {text.strip()}")["v"]
        except tomllib.TOMLDecodeError:
            value = text.strip()
        values[key.strip()] = value
    return values


preset_app = typer.Typer(cls=ShotsGroup, no_args_is_help=True,
                         help="Look at presets: resolved, or the format's JSON Schema.")
app.add_typer(preset_app, name="preset")


@preset_app.command("show", cls=ShotsCommand)
def preset_show(
    preset: Annotated[str, typer.Argument(
        metavar="PRESET", help="Built-in preset name or a TOML preset file.")],
    model: Annotated[Path | None, typer.Option(
        "--model", metavar="MODEL",
        help="Merge this model's sidecar (MODEL.shots.toml) over the preset.")] = None,
) -> None:
    """Print a preset as TOML with `extends` (and a model's sidecar) resolved."""
    from shots.presets import load_preset, resolved_toml, sidecar_for

    sidecar = sidecar_for(model) if model is not None else None
    if sidecar is not None and not sidecar.is_file():
        warn(f"{model}: no sidecar {sidecar.name}; showing the preset alone")
        sidecar = None
    try:
        sys.stdout.write(resolved_toml(load_preset(preset, sidecar), sidecar))
    except ShotsError as exc:
        fail(str(exc))


@preset_app.command("schema", cls=ShotsCommand)
def preset_schema(
    output: Annotated[Path | None, typer.Option(
        "--output", "-o", metavar="FILE",
        help="Write the schema to this file (default: print it).")] = None,
) -> None:
    """Write the preset format as a JSON Schema, for editors that complete and check TOML."""
    from shots.output import atomic_write_bytes
    from shots.presets import json_schema

    text = json.dumps(json_schema(), indent=2) + "\n"
    if output is None:
        sys.stdout.write(text)
        return
    try:
        atomic_write_bytes(output, text.encode())
    except ShotsError as exc:
        fail(str(exc))
    out.print(f"wrote {output}", highlight=False)


def fmt3(values) -> str:
    return "(" + ", ".join(f"{v:.3f}" for v in values) + ")"


app.command(cls=ShotsCommand)(batch)


def main() -> None:
    """Console-script entry point."""
    app()
