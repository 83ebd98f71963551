"""The consistency report: its data, and its two renderings (Markdown for people, JSON for tools).

report.md embeds every image as a relative link next to its numbers, flagged rows marked;
report.json carries the same numbers, the medians and the tolerances used. The review page
(``shots.check.review``) is a third rendering of the same data.
"""

from __future__ import annotations

import json
import math
import os
from dataclasses import asdict, dataclass, field, replace
from pathlib import Path
from urllib.parse import quote

from shots.check.frames import FrameRecord
from shots.check.judge import CatalogMedians, Tolerances
from shots.check.measure import Measurement

FLAG_MARK = "⚠ flagged"
REPORT_VERSION = 2


@dataclass(frozen=True)
class BaselineCheck:
    """An image against its approved image (``shots.check.baseline``).

    approved : the approved image's path relative to the report folder, None when there is none.
    ssim, changed_share, largest_delta_e : the comparison (``shots.check.compare``), None when
        there was nothing to compare. difference : the difference picture's path relative to the
        report folder, for flagged images. note : why nothing was compared, if so.
    """

    approved: str | None
    ssim: float | None = None
    changed_share: float | None = None
    largest_delta_e: float | None = None
    difference: str | None = None
    note: str = ""


@dataclass(frozen=True)
class ImageCheck:
    """One image's verdict.

    Attributes
    ----------
    path : the image file. name : its path relative to the report folder (POSIX separators).
    measurement : the numbers, or None when the file could not be read.
    exposure_stops : light level (or, without an albedo reading, mean luminance) relative to
        the catalog median (None without a median).
    reasons : why it was flagged; empty when it is consistent with the catalog.
    record : the frame as its batch recorded it (model, variant, shot, frame), if known.
    variant_stops : light level relative to the model's variants in the same shot and frame.
    baseline : the comparison with the approved image, when one was asked for.
    """

    path: Path
    name: str
    measurement: Measurement | None
    exposure_stops: float | None
    reasons: tuple[str, ...]
    record: FrameRecord | None = None
    variant_stops: float | None = None
    baseline: BaselineCheck | None = None

    @property
    def flagged(self) -> bool:
        return bool(self.reasons)


@dataclass(frozen=True)
class CheckReport:
    """What ``check_renders`` found.

    Attributes
    ----------
    folder : where report.md and report.json were written (image links are relative to it).
    images : one ``ImageCheck`` per image, in path order.
    medians, tolerances : what the images were compared with.
    notes : checks that could not run on this catalog, and why.
    """

    folder: Path
    images: tuple[ImageCheck, ...]
    medians: CatalogMedians
    tolerances: Tolerances
    notes: tuple[str, ...] = ()
    against: Path | None = None  # the folder of approved images, when compared
    markdown_path: Path | None = field(default=None, compare=False)
    json_path: Path | None = field(default=None, compare=False)
    review_path: Path | None = field(default=None, compare=False)

    def written(self, markdown: Path, json_file: Path, review: Path) -> CheckReport:
        """The same report, knowing where its files are."""
        return replace(self, markdown_path=markdown, json_path=json_file, review_path=review)

    @property
    def flagged(self) -> list[tuple[Path, list[str]]]:
        """(image, reasons) for every flagged image."""
        return [(image.path, list(image.reasons)) for image in self.images if image.flagged]


# --- JSON ---------------------------------------------------------------------------------------


def report_json(report: CheckReport) -> str:
    """The report as a JSON document (numbers that do not exist are null)."""
    document = {
        "version": REPORT_VERSION,
        "images_checked": len(report.images),
        "images_flagged": sum(image.flagged for image in report.images),
        "tolerances": report.tolerances.model_dump(),
        "catalog_medians": asdict(report.medians),
        "notes": list(report.notes),
        "approved_folder": str(report.against) if report.against else None,
        "images": [image_entry(image) for image in report.images],
    }
    return json.dumps(finite_or_null(document), indent=2, ensure_ascii=False) + "\n"


def image_entry(image: ImageCheck) -> dict:
    """One image as a JSON-ready dict."""
    metrics = None
    if image.measurement is not None:
        metrics = asdict(image.measurement)
        del metrics["path"]
        metrics["touches_edge"] = image.measurement.touches_edge
        metrics["exposure_stops"] = image.exposure_stops
        metrics["variant_stops"] = image.variant_stops
    return {
        "file": image.name,
        "frame": asdict(image.record) if image.record else None,
        "flagged": image.flagged,
        "reasons": list(image.reasons),
        "metrics": metrics,
        "baseline": asdict(image.baseline) if image.baseline else None,
    }


def finite_or_null(value):
    """JSON has no NaN or infinity: such numbers become null; tuples become lists."""
    if isinstance(value, float):
        return value if math.isfinite(value) else None
    if isinstance(value, dict):
        return {key: finite_or_null(item) for key, item in value.items()}
    if isinstance(value, list | tuple):
        return [finite_or_null(item) for item in value]
    return value


# --- Markdown -----------------------------------------------------------------------------------

COLUMNS = ("", "Image", "Fill", "Area", "Centre x, y", "Background", "Exposure", "Clipped",
           "Detail", "Findings")  # fmt: skip


def report_markdown(report: CheckReport) -> str:
    """The report as Markdown: a summary, the flagged images, then a table of every image."""
    flagged = [image for image in report.images if image.flagged]
    t, m = report.tolerances, report.medians
    lines = [
        "# Catalog consistency check",
        "",
        f"{len(report.images)} images checked, {len(flagged)} flagged.",
        "",
        f"Catalog medians over {m.count} images with a product: fill {_num(m.fill, 2)}, "
        f"luminance Y {_num(m.luminance, 3)}, light level {_num(m.light, 3)}, "
        f"detail {_num(m.detail, 4)}, "
        f"mass position {_num(m.mass_position, 2)}.",
        "",
        f"Limits: fill ±{t.fill:g} of the median and vertical centre offset ≤ "
        f"{t.centre_offset:g} when the fills agree (median deviation ≤ {t.fill_spread:g}), "
        f"horizontal centre offset ≤ {t.centre_offset:g}, light on the product "
        f"±{t.exposure_stops:g} stop(s) from the catalog and ±{t.variant_stops:g} from its "
        f"variants, background purity ≥ {t.purity:g} (transparent) or border "
        f"spread ≤ {t.border_std:g} (opaque), clipped ≤ {t.clipped:.0%}.",
    ]
    if report.against is not None:
        lines += ["", f"Compared with the approved images in {report.against}: SSIM ≥ "
                      f"{t.ssim:g}, at most {t.changed_share:.1%} of the frame beyond ΔE00 "
                      f"{t.delta_e:g}."]
    if report.notes:
        lines += ["", "## Notes", ""] + [f"- {note}" for note in report.notes]
    if flagged:
        lines += ["", "## Flagged", ""]
        lines += [f"- **{_cell(i.name)}**: {_cell('; '.join(i.reasons))}" for i in flagged]
    lines += ["", "## All images", "", _row(COLUMNS), _row(["---"] * len(COLUMNS))]
    lines += [_row(image_cells(image)) for image in report.images]
    return "\n".join(lines) + "\n"


def image_cells(image: ImageCheck) -> list[str]:
    """The table cells of one image."""
    mark = f"**{FLAG_MARK}**" if image.flagged else "ok"
    link = f"![{_cell(Path(image.name).name)}]({quote(image.name)})"
    findings = _cell("; ".join(image.reasons)) if image.reasons else ""
    m = image.measurement
    if m is None:
        return [mark, link, "", "", "", "", "", "", "", findings]
    offset = f"{m.centre_offset[0]:+.3f}, {m.centre_offset[1]:+.3f}" if m.found else ""
    if m.transparent:
        background = f"transparent, purity {_num(m.background_purity, 3)}"
    else:
        background = f"opaque, spread {_num(m.border_std, 3)}"
    stops = "" if image.exposure_stops is None else f" ({image.exposure_stops:+.2f} stops)"
    exposure = f"Y {_num(m.luminance, 3)}{stops}"
    clipped = "" if m.clipped is None else f"{m.clipped:.1%}"
    return [mark, link, _num(m.fill, 3), f"{m.area_fraction:.3f}", offset, background,
            exposure, clipped, _num(m.detail, 4), findings]  # fmt: skip


def relative_name(path: Path, folder: Path) -> str:
    """``path`` relative to ``folder`` with POSIX separators, for links in report.md."""
    return Path(os.path.relpath(Path(path).resolve(), Path(folder).resolve())).as_posix()


def _row(cells) -> str:
    return "| " + " | ".join(cells) + " |"


def _cell(text: str) -> str:
    """Text safe inside a table cell or list item: no pipes, no line breaks."""
    return text.replace("|", "\\|").replace("\n", " ")


def _num(value: float | None, digits: int) -> str:
    return "–" if value is None else f"{value:.{digits}f}"
