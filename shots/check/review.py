"""The review page: one self-contained ``review.html`` beside the report, for a catalog team.

It needs no server and no network: the styles, the script and the data are inside the file, and
the rendered images are linked by paths relative to it, so the folder can be zipped, shared or
opened from disk. What it shows, in order of what a reviewer does:

1. the images that need a look, each with its reasons (and, against approved images, a
   before/after slider and the difference picture);
2. the catalog grid: one row per model, its variants side by side, every shot's first frame;
3. the turntables, turned by dragging or scrolling across them, or with the arrow keys.

All text from files (model, variant and shot names, reasons) reaches the page as JSON data and is
set with ``textContent``, never parsed as HTML.
"""

from __future__ import annotations

import json
import math
from collections.abc import Mapping
from importlib import resources
from pathlib import Path

from shots.check.frames import FrameRecord
from shots.check.report import CheckReport, ImageCheck, relative_name

NO_VARIANT = "default"


def review_html(report: CheckReport, records: Mapping[Path, FrameRecord]) -> str:
    """The review page of ``report``; ``records`` (by resolved path) supply the turntables."""
    data = json.dumps(review_data(report, records), ensure_ascii=True, allow_nan=False)
    # The JSON sits inside a <script> element: no "<" may end it or open a comment there.
    data = data.replace("<", "\\u003c")
    files = resources.files("shots.check")
    page = (files / "review.html").read_text(encoding="utf-8")
    return (page.replace("/*STYLE*/", (files / "review.css").read_text(encoding="utf-8"))
            .replace("/*SCRIPT*/", (files / "review.js").read_text(encoding="utf-8"))
            .replace("/*DATA*/", data))


def review_data(report: CheckReport, records: Mapping[Path, FrameRecord]) -> dict:
    """What the page's script draws, as plain JSON-ready values."""
    images = [image_data(image) for image in report.images]
    return {
        "checked": len(images),
        "flagged": sum(image["flagged"] for image in images),
        "against": str(report.against) if report.against else None,
        "notes": list(report.notes),
        "images": images,
        "turntables": turntables(report.folder, records),
    }


def image_data(image: ImageCheck) -> dict:
    """One checked image for the page."""
    record = image.record
    parts = Path(image.name).parts
    entry = {
        "src": image.name,
        "model": record.model if record else (parts[0] if len(parts) > 1 else Path(image.name).stem),
        "variant": record.variant if record else NO_VARIANT,
        "shot": record.shot if record else Path(image.name).stem,
        "frame": record.frame if record else 0,
        "view": record.view if record else "",
        "flagged": image.flagged,
        "reasons": list(image.reasons),
        "exposure": _finite(image.exposure_stops),
        "variantStops": _finite(image.variant_stops),
        "approved": None,
        "difference": None,
    }
    if image.baseline is not None:
        entry.update(approved=image.baseline.approved, difference=image.baseline.difference,
                     ssim=_finite(image.baseline.ssim),
                     changed=_finite(image.baseline.changed_share),
                     baselineNote=image.baseline.note)
    return entry


def turntables(folder: Path, records: Mapping[Path, FrameRecord]) -> list[dict]:
    """Every (model, variant, shot) of a moving camera with more than one frame on disk below
    ``folder``, its frames in order, as paths relative to ``folder``. Stills of named views
    (their records name the view) are not a turn."""
    root = Path(folder).resolve()
    groups: dict[tuple, list[tuple[int, str]]] = {}
    for path, record in records.items():
        if not record.view and path.is_relative_to(root) and path.is_file():
            key = (record.model, record.variant, record.shot)
            groups.setdefault(key, []).append((record.frame, relative_name(path, root)))
    return [
        {"model": model, "variant": variant, "shot": shot,
         "frames": [name for _, name in sorted(frames)]}
        for (model, variant, shot), frames in sorted(groups.items()) if len(frames) > 1
    ]


def _finite(value: float | None) -> float | None:
    return value if value is not None and math.isfinite(value) else None
