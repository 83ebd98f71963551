"""Consistency check of a catalog's renders: measure each image, flag the odd ones, write a report.

    report = check_renders(out_dir)          # writes out_dir/report.md and out_dir/report.json
    for image, reasons in report.flagged: ...

``measure`` reads one image, ``judge`` compares images with limits and with each other, ``report``
renders the result, ``run`` ties them together.
"""

from shots.check.judge import Tolerances
from shots.check.measure import Measurement, measure_image, measure_rgba
from shots.check.report import CheckReport, ImageCheck
from shots.check.run import check_renders

__all__ = [
    "CheckReport",
    "ImageCheck",
    "Measurement",
    "Tolerances",
    "check_renders",
    "measure_image",
    "measure_rgba",
]
