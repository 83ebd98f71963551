"""Check a folder of catalog renders: find the images, measure, judge, compare with approved
images, write the report (report.md, report.json) and the review page (review.html)."""

from __future__ import annotations

import os
from collections.abc import Iterable, Mapping
from pathlib import Path

from shots.batch.layout import CONTACT_SHEET, REPORT_JSON, REPORT_MD, REVIEW_HTML
from shots.batch.layout import DIFFERENCES_FOLDER as DIFFERENCES
from shots.check.baseline import compare_with_approved
from shots.check.frames import FrameRecord, frame_records
from shots.check.judge import (
    Tolerances,
    catalog_medians,
    catalog_notes,
    exposure_stops,
    light_level,
    mask_rules,
    reasons_for,
    stops,
    variant_medians,
)
from shots.check.measure import Measurement, measure_image
from shots.check.report import (
    CheckReport,
    ImageCheck,
    relative_name,
    report_json,
    report_markdown,
)
from shots.check.review import review_html
from shots.errors import BatchError
from shots.limits import DEFAULT
from shots.output import atomic_write_bytes
from shots.presets import check_settings

Source = str | os.PathLike | Iterable[str | os.PathLike]
OWN_FILES = (CONTACT_SHEET,)  # PNG files a batch writes that are not renders


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
    against: str | os.PathLike | None = None,
    shot: str | None = None,
    max_pixels: int = DEFAULT.image_pixels,
) -> CheckReport:
    """Measure every PNG image, flag the ones that do not match the catalog (or their approved
    images), write report.md, report.json and review.html.

    Parameters
    ----------
    out_dir : a folder (searched recursively for ``*.png``, hidden files, the batch's contact
        sheet and difference pictures skipped), an image file, or a list of folders and files.
    tolerances : ``Tolerances`` (a preset's ``[check]`` table), or a mapping of overrides of the
        default ones, validated like that table.
    report_dir : where the report and review page go; default ``out_dir`` when it is one folder,
        else the deepest folder holding every listed path.
    measured : measurements already taken (by image path, with ``tolerances``' mask rules), used
        instead of reading those files again; a batch measures its frames as they arrive.
    against : a folder of approved renders (an earlier batch): every image is compared with the
        approved one of the same model, variant, shot and frame (``shots.check.baseline``).
    shot : only the images of this shot, by the batch manifests (images without a manifest:
        by a path component or a file name ending in ``-<shot>``).
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
        tolerances = check_settings(dict(tolerances))
    sources = source_paths(out_dir)
    folder = Path(report_dir) if report_dir is not None else default_report_folder(sources)
    records = frame_records([*sources, folder])
    images = find_images(sources)
    if shot is not None:
        images = of_shot(images, shot, records)
        if not images:
            raise BatchError(", ".join(str(s) for s in sources), None,
                             f"no images of shot {shot!r}")
    report = judge_images(images, folder, tolerances, measured, records, max_pixels)
    if against is not None:
        report = compare_with_approved(report, Path(against), folder / DIFFERENCES)
    paths = {name: folder / name for name in (REPORT_MD, REPORT_JSON, REVIEW_HTML)}
    write_if_changed(paths[REPORT_MD], report_markdown(report).encode("utf-8"))
    write_if_changed(paths[REPORT_JSON], report_json(report).encode("utf-8"))
    write_if_changed(paths[REVIEW_HTML], review_html(report, records).encode("utf-8"))
    return report.written(paths[REPORT_MD], paths[REPORT_JSON], paths[REVIEW_HTML])


def judge_images(images: list[Path], folder: Path, tolerances: Tolerances,
                 known: Mapping[Path, Measurement] | None = None,
                 records: Mapping[Path, FrameRecord] | None = None,
                 max_pixels: int = DEFAULT.image_pixels) -> CheckReport:
    """Measure ``images`` (those not in ``known``) and judge each against the others and against
    its model's variants (``records``: frame records by resolved path); nothing is written."""
    rules = mask_rules(tolerances)
    known, records = known or {}, records or {}
    measured, unreadable = {}, {}
    for path in images:
        if path in known:
            measured[path] = known[path]
            continue
        try:
            measured[path] = measure_image(path, rules, max_pixels)
        except (OSError, ValueError) as exc:
            unreadable[path] = f"cannot read the image: {exc}"
    mine = {path: records.get(path.resolve()) for path in images}
    lights = [light_level(r) for p, r in mine.items() if p in measured and measured[p].found]
    medians = catalog_medians(list(measured.values()), tolerances,
                              [light for light in lights if light is not None])
    by_variants = variant_medians({p: r for p, r in mine.items() if r is not None}, tolerances)
    checks = []
    for path in images:
        m, record = measured.get(path), mine[path]
        group = by_variants.get((record.model, record.shot, record.frame)) if record else None
        if m is None:
            reasons, catalog, among = (unreadable[path],), None, None
        else:
            reasons = tuple(reasons_for(m, medians, tolerances, record, group))
            catalog, among = exposure_stops(m, record, medians), stops(light_level(record), group)
        checks.append(ImageCheck(path, relative_name(path, folder), m, catalog, reasons,
                                 record=record, variant_stops=among))
    return CheckReport(
        folder=folder,
        images=tuple(checks),
        medians=medians,
        tolerances=tolerances,
        notes=tuple(catalog_notes(medians, tolerances)),
    )


def of_shot(images: list[Path], shot: str, records: Mapping[Path, FrameRecord]) -> list[Path]:
    """The images of ``shot``: by their frame record, else by their path."""
    chosen = []
    for path in images:
        record = records.get(path.resolve())
        if record is not None:
            if record.shot == shot:
                chosen.append(path)
        elif shot in path.parent.parts or path.stem == shot or path.stem.endswith(f"-{shot}"):
            chosen.append(path)
    return chosen


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
    """The files named in ``sources`` and every PNG render below its folders (hidden files and
    folders, contact sheets and difference pictures left out), sorted and without repeats.

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
            parts = path.relative_to(source).parts
            skipped = any(part.startswith(".") for part in parts) or parts[0] == DIFFERENCES \
                or path.name in OWN_FILES
            if path.suffix.lower() == ".png" and path.is_file() and not skipped:
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
