"""Consistency check of a catalog's renders: measure each image, flag the odd ones, write a report
and a review page.

    report = check_renders(out_dir)          # writes report.md, report.json and review.html
    report = check_renders(out_dir, against="approved/")   # also compares with approved images
    for image, reasons in report.flagged: ...

``measure`` reads one image, ``frames`` reads what the batch manifests say each image is,
``judge`` compares images with limits, with each other and with their variants, ``compare`` and
``baseline`` compare them with approved images, ``report`` and ``review`` render the result,
``run`` ties them together. Tolerances are a preset's ``[check]`` table
(``shots.presets.CheckSettings``).
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
