"""Compare every checked image with the approved image of the same frame, and draw what changed.

The approved folder is an earlier batch's output (or any folder of renders). An image is matched
by its frame record, (model, variant, shot, frame), with the approved batch's manifests; an image
without a record is matched by its path relative to the report folder. Each flagged image gets a
difference picture (``shots.check.compare.difference_picture``) under the report folder.
"""

from __future__ import annotations

from dataclasses import replace
from pathlib import Path

from shots.check.compare import compare_images, difference_picture
from shots.check.frames import frame_records
from shots.check.measure import read_rgba
from shots.check.report import BaselineCheck, CheckReport, ImageCheck, relative_name
from shots.errors import BatchError
from shots.output import atomic_write_bytes, encode_png


def compare_with_approved(report: CheckReport, approved: Path, differences: Path) -> CheckReport:
    """``report`` with every image compared with its approved image; flagged images gain the
    comparison's reasons and a difference picture in ``differences``.

    Raises
    ------
    BatchError : ``approved`` is not a folder.
    """
    if not approved.is_dir():
        raise BatchError(approved, None, "the approved renders must be a folder")
    by_frame = {record.identity: path for path, record in frame_records([approved]).items()}
    images = tuple(
        compare_one(image, approved_image(image, report.folder, approved, by_frame),
                    report, differences)
        for image in report.images
    )
    return replace(report, images=images, against=approved)


def approved_image(image: ImageCheck, folder: Path, approved: Path, by_frame: dict) -> Path | None:
    """The approved image of ``image``'s frame, or None when the approved folder has none."""
    if image.record is not None and image.record.identity in by_frame:
        return by_frame[image.record.identity]
    same_place = approved / image.name
    return same_place if same_place.is_file() else None


def compare_one(image: ImageCheck, approved: Path | None, report: CheckReport,
                differences: Path) -> ImageCheck:
    """One image against its approved image (``approved`` None: nothing to compare)."""
    if approved is None:
        return replace(image, baseline=BaselineCheck(None, note="no approved image"))
    shown = relative_name(approved, report.folder)
    try:
        rendered, before = read_rgba(image.path), read_rgba(approved)
    except (OSError, ValueError) as exc:
        reason = f"cannot compare with the approved image: {exc}"
        return replace(image, reasons=(*image.reasons, reason),
                       baseline=BaselineCheck(shown, note=reason))
    if rendered.shape != before.shape:
        reason = (f"size {rendered.shape[1]}x{rendered.shape[0]} differs from the approved "
                  f"image's {before.shape[1]}x{before.shape[0]}")
        return replace(image, reasons=(*image.reasons, reason),
                       baseline=BaselineCheck(shown, note=reason))
    comparison = compare_images(rendered, before, report.tolerances)
    reasons = comparison.reasons(report.tolerances)
    difference = None
    if reasons:
        target = differences / image.name
        atomic_write_bytes(target, encode_png(difference_picture(rendered, comparison,
                                                                 report.tolerances)))
        difference = relative_name(target, report.folder)
    baseline = BaselineCheck(shown, comparison.ssim, comparison.changed_share,
                             comparison.largest_delta_e, difference)
    return replace(image, reasons=(*image.reasons, *reasons), baseline=baseline)
