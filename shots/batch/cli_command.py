"""The ``shots batch`` command, an adapter over ``run_batch``; register it with
``app.command()(batch)`` in ``shots.cli``.

Exit codes: 0 all models done, 1 some model failed (the summary says which and why), 2 the
batch could not start (bad source, preset, template or option).
"""

from __future__ import annotations

from pathlib import Path
from typing import Annotated

import typer
from rich.console import Console

from shots.cli_help import FLAG
from shots.errors import ShotsError
from shots.terminal import literal

err = Console(stderr=True)


def batch(
    source: Annotated[Path, typer.Argument(
        metavar="SOURCE",
        help="A folder of .gltf/.glb models (searched recursively) or a text file listing "
             "one model path per line, relative to the list file.")],
    preset: Annotated[str, typer.Option(
        "--preset", "-p", metavar="PRESET", help="Built-in preset name or a TOML preset file.")],
    output: Annotated[Path, typer.Option(
        "--output", "-o", metavar="FOLDER", help="Output folder.")],
    variants: Annotated[str, typer.Option(
        "--variants", metavar="default|all",
        help="'default' (the models' own materials) or 'all' "
             "(every KHR_materials_variants variant).")] = "default",
    force: Annotated[bool, typer.Option(
        "--force", metavar=FLAG,
        help="Render every frame, even those that are up to date.")] = False,
    workers: Annotated[int | None, typer.Option(
        "--workers", "-j", metavar="N",
        help="Local worker processes (default: one per core).")] = None,
    cluster: Annotated[str | None, typer.Option(
        "--cluster", metavar="ADDRESS",
        help="Address of a Dask distributed scheduler to run on.")] = None,
    tls_ca_file: Annotated[str | None, typer.Option(
        "--tls-ca-file", metavar="FILE",
        help="CA certificate for a tls:// --cluster (with --tls-cert).")] = None,
    tls_cert: Annotated[str | None, typer.Option(
        "--tls-cert", metavar="FILE",
        help="This client's TLS certificate for a tls:// --cluster.")] = None,
    tls_key: Annotated[str | None, typer.Option(
        "--tls-key", metavar="FILE",
        help="Its private key, when not inside the --tls-cert file.")] = None,
    template: Annotated[str | None, typer.Option(
        "--template", metavar="TEMPLATE",
        help="Frame path template; fields {model} {variant} {shot} {frame} "
             "{size}. Default: {model}/{variant}/{shot}/{frame}.png")] = None,
    bits: Annotated[int, typer.Option(
        "--bits", metavar="8|16", help="PNG bit depth: 8 or 16.")] = 8,
    exr: Annotated[bool, typer.Option(
        "--exr", metavar=FLAG,
        help="Also write linear premultiplied EXR files beside the PNGs.")] = False,
    animations: Annotated[str, typer.Option(
        "--animations", metavar="FORMATS",
        help="Formats for moving shots, comma-separated (gif,webp,mp4), "
             "or 'none'.")] = "gif,webp,mp4",
    fps: Annotated[float, typer.Option(
        "--fps", metavar="FPS", help="Animation frame rate.")] = 12.0,
    quiet: Annotated[bool, typer.Option(
        "--quiet", "-q", metavar=FLAG, help="No progress bars.")] = False,
    log_json: Annotated[Path | None, typer.Option(
        "--log-json", metavar="FILE",
        help="Write one JSON event per line to this file.")] = None,
    dry_run: Annotated[bool, typer.Option(
        "--dry-run", metavar=FLAG,
        help="List what would be rendered, skipped and published, with a time estimate "
             "from a short calibration render; write nothing.")] = False,
    limit: Annotated[list[str] | None, typer.Option(
        "--limit", metavar="KEY=VALUE",
        help="Override a budget of the preset's [limits] (repeatable).")] = None,
) -> None:
    """Render a catalog: every model × variant × shot of a preset, only what changed."""
    from shots.batch.progress import print_summary
    from shots.batch.run import run_batch
    from shots.limits import preset_with_limits
    from shots.presets import load_preset

    formats = tuple(a.strip() for a in animations.split(",") if a.strip() and a != "none")
    if dry_run:
        _dry_run(source, preset, output, limit, variants=variants, force=force,
                 workers=workers, cluster=cluster, template=template, bits=bits, exr=exr,
                 animations=formats, fps=fps)
        return
    try:
        tls = cluster_tls(cluster, tls_ca_file, tls_cert, tls_key)
        chosen = preset_with_limits(load_preset(preset), limit)
        summary = run_batch(
            source, chosen, output, variants=variants, force=force, workers=workers,
            cluster=cluster, quiet=quiet, log_json=log_json, template=template, bits=bits,
            exr=exr, animations=formats, fps=fps, console=err, cluster_tls=tls,
        )
    except ShotsError as exc:
        err.print(f"[bold red]error:[/] {literal(str(exc))}", highlight=False, soft_wrap=True)
        raise typer.Exit(2) from None
    if quiet:
        for listed_as, reason in summary.failures:
            err.print(f"[bold red]failed:[/] {literal(listed_as)}: {literal(reason)}", highlight=False,
                      soft_wrap=True)
    else:
        print_summary(summary, err)
    raise typer.Exit(summary.exit_code)


def _dry_run(source, preset, output, limit, **options) -> None:
    from shots.batch.preview import preview_batch, print_preview
    from shots.limits import preset_with_limits
    from shots.presets import load_preset

    try:
        chosen = preset_with_limits(load_preset(preset), limit)
        preview = preview_batch(source, chosen, output, **options)
    except ShotsError as exc:
        err.print(f"[bold red]error:[/] {literal(str(exc))}", highlight=False, soft_wrap=True)
        raise typer.Exit(2) from None
    print_preview(preview, Console(width=max(Console().width, 120)))


def cluster_tls(cluster: str | None, ca_file: str | None, cert: str | None, key: str | None):
    """The ``ClusterTls`` the --tls-* options describe, or None when none is given."""
    from shots.batch.runner import ClusterTls
    from shots.errors import UsageError

    if ca_file is None and cert is None and key is None:
        return None
    if cluster is None or ca_file is None or cert is None:
        raise UsageError("--tls-ca-file", None, "TLS needs --cluster tls://..., --tls-ca-file "
                                                "and --tls-cert (and --tls-key unless the "
                                                "certificate file holds it)")
    return ClusterTls(ca_file, cert, key)
