"""Check a folder of catalog renders: find the images, measure, judge, write the report."""

from __future__ import annotations

import os
from collections.abc import Iterable, Mapping
from pathlib import Path

from shots.check.judge import (
    Tolerances,
    catalog_medians,
    catalog_notes,
    exposure_stops,
    reasons_for,
)
from shots.check.measure import Measurement, measure_image
from shots.check.report import (
    CheckReport,
    ImageCheck,
    relative_name,
    report_json,
    report_markdown,
)
from shots.errors import BatchError
from shots.limits import DEFAULT
from shots.output import atomic_write_bytes

Source = str | os.PathLike | Iterable[str | os.PathLike]


def write_if_changed(path: Path, data: bytes) -> None:
    """Atomically write ``data`` unless the file already holds it (a rerun touches nothing)."""
    if not (path.is_file() and path.read_bytes() == data):
        atomic_write_bytes(path, data)


def check_renders(
    out_dir: Source,
    tolerances: Tolerances | Mapping[str, object] | None = None,
    *,
    report_dir: str | os.PathLike | None = None,
    measured: Mapping[Path, Measurement] | None = None,
    max_pixels: int = DEFAULT.image_pixels,
) -> CheckReport:
    """Measure every PNG image, flag the ones that do not match the catalog, write the report.

    Parameters
    ----------
    out_dir : a folder (searched recursively for ``*.png``, hidden files skipped), an image file,
        or a list of folders and files.
    tolerances : ``Tolerances``, or a mapping of overrides such as a preset's ``[check]`` table.
    report_dir : where report.md and report.json go; default ``out_dir`` when it is one folder,
        else the deepest folder holding every listed path.
    measured : measurements already taken (by image path, with ``tolerances``' mask rules), used
        instead of reading those files again; a batch measures its frames as they arrive.
    max_pixels : an image declaring more pixels is flagged unreadable, never decoded.

    Returns
    -------
    The ``CheckReport``; ``report.flagged`` lists (image, reasons).

    Raises
    ------
    BatchError : a listed path does not exist, or no PNG image was found.
    PresetError : an unknown or invalid tolerance.
    RenderError : the report cannot be written.
    """
    if tolerances is None:
        tolerances = Tolerances()
    elif not isinstance(tolerances, Tolerances):
        tolerances = Tolerances.from_mapping(tolerances)
    sources = source_paths(out_dir)
    images = find_images(sources)
    folder = Path(report_dir) if report_dir is not None else default_report_folder(sources)
    report = judge_images(images, folder, tolerances, measured, max_pixels)
    markdown_path, json_path = folder / "report.md", folder / "report.json"
    write_if_changed(markdown_path, report_markdown(report).encode("utf-8"))
    write_if_changed(json_path, report_json(report).encode("utf-8"))
    return CheckReport(
        folder=report.folder,
        images=report.images,
        medians=report.medians,
        tolerances=report.tolerances,
        notes=report.notes,
        markdown_path=markdown_path,
        json_path=json_path,
    )


def judge_images(images: list[Path], folder: Path, tolerances: Tolerances,
                 known: Mapping[Path, Measurement] | None = None,
                 max_pixels: int = DEFAULT.image_pixels) -> CheckReport:
    """Measure ``images`` (those not in ``known``) and judge each against the others (nothing
    is written)."""
    rules = tolerances.mask_rules()
    known = known or {}
    measured, unreadable = {}, {}
    for path in images:
        if path in known:
            measured[path] = known[path]
            continue
        try:
            measured[path] = measure_image(path, rules, max_pixels)
        except (OSError, ValueError) as exc:
            unreadable[path] = f"cannot read the image: {exc}"
    medians = catalog_medians(list(measured.values()), tolerances)
    checks = []
    for path in images:
        m = measured.get(path)
        if m is None:
            reasons, stops = (unreadable[path],), None
        else:
            reasons, stops = tuple(reasons_for(m, medians, tolerances)), exposure_stops(m, medians)
        checks.append(ImageCheck(path, relative_name(path, folder), m, stops, reasons))
    return CheckReport(
        folder=folder,
        images=tuple(checks),
        medians=medians,
        tolerances=tolerances,
        notes=tuple(catalog_notes(medians, tolerances)),
    )


def source_paths(out_dir: Source) -> list[Path]:
    """The folders and files the caller named, checked to exist."""
    if isinstance(out_dir, str | os.PathLike):
        out_dir = [out_dir]
    paths = [Path(p) for p in out_dir]
    if not paths:
        raise BatchError("<check>", None, "no folder or image given")
    for path in paths:
        if not path.exists():
            raise BatchError(path, None, "no such file or folder")
    return paths


def find_images(sources: list[Path]) -> list[Path]:
    """The files named in ``sources`` and every PNG below its folders (hidden files and folders
    left out), sorted and without repeats.

    Raises
    ------
    BatchError : when there is none.
    """
    found = set()
    for source in sources:
        if source.is_file():
            found.add(source)
            continue
        for path in source.rglob("*"):
            hidden = any(part.startswith(".") for part in path.relative_to(source).parts)
            if path.suffix.lower() == ".png" and path.is_file() and not hidden:
                found.add(path)
    if not found:
        shown = ", ".join(str(s) for s in sources)
        raise BatchError(shown, None, "no PNG images to check")
    return sorted(found)


def default_report_folder(sources: list[Path]) -> Path:
    """``sources[0]`` when it is the one folder given, else the deepest folder holding them all."""
    if len(sources) == 1 and sources[0].is_dir():
        return sources[0]
    folders = [s.resolve() if s.is_dir() else s.resolve().parent for s in sources]
    return Path(os.path.commonpath(folders))
