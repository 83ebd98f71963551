"""Validation of single JSON values: every refusal names the file and the JSON path.

pygltflib parses the document but checks nothing (a count may be negative, an index may point
past the end of its array), so every value the loader uses passes through one of these first.
"""

from __future__ import annotations

import math
from collections.abc import Sequence

from shots.errors import GltfError


def integer(value, source: str, field: str, *, low: int = 0, high: int | None = None,
            default: int | None = None) -> int:
    """``value`` as an int in ``[low, high]``; ``default`` when it is absent (None)."""
    if value is None:
        if default is None:
            raise GltfError(source, field, "is required")
        return default
    if isinstance(value, bool) or not isinstance(value, int):
        raise GltfError(source, field, f"must be an integer, got {value!r:.40}")
    if value < low or (high is not None and value > high):
        bound = f"[{low}, {high}]" if high is not None else f">= {low}"
        raise GltfError(source, field, f"{value} is out of range {bound}")
    return value


def index(value, items: Sequence | None, source: str, field: str, what: str) -> int:
    """``value`` as a valid index into the document array ``items`` (named ``what``)."""
    length = len(items) if items else 0
    if value is None:
        raise GltfError(source, field, "is required")
    if isinstance(value, bool) or not isinstance(value, int):
        raise GltfError(source, field, f"must be an integer index, got {value!r:.40}")
    if not 0 <= value < length:
        raise GltfError(source, field, f"{what}[{value}] does not exist ({length} defined)")
    return value


def number(value, source: str, field: str, *, default: float | None = None,
           low: float = -math.inf, high: float = math.inf) -> float:
    """``value`` as a finite float in ``[low, high]``; ``default`` when absent."""
    if value is None:
        if default is None:
            raise GltfError(source, field, "is required")
        return default
    if isinstance(value, bool) or not isinstance(value, int | float):
        raise GltfError(source, field, f"must be a number, got {value!r:.40}")
    value = float(value)
    if not math.isfinite(value) or not low <= value <= high:
        raise GltfError(source, field, f"{value} is out of range [{low}, {high}]")
    return value


def numbers(value, size: int, source: str, field: str, default: Sequence[float] | None = None,
            *, low: float = -math.inf, high: float = math.inf) -> list[float]:
    """``value`` as a list of exactly ``size`` finite floats; ``default`` when absent."""
    if value is None:
        if default is None:
            raise GltfError(source, field, "is required")
        return list(default)
    if not isinstance(value, list | tuple) or len(value) != size:
        raise GltfError(source, field, f"must be an array of {size} numbers")
    return [number(v, source, f"{field}[{i}]", low=low, high=high) for i, v in enumerate(value)]


def mapping(value, source: str, field: str) -> dict:
    """``value`` as a JSON object ({} when absent)."""
    if value is None:
        return {}
    if not isinstance(value, dict):
        raise GltfError(source, field, "must be a JSON object")
    return value


def array(value, source: str, field: str) -> list:
    """``value`` as a JSON array ([] when absent)."""
    if value is None:
        return []
    if not isinstance(value, list):
        raise GltfError(source, field, "must be a JSON array")
    return value


def text(value, source: str, field: str, default: str | None = None) -> str:
    """``value`` as a string; ``default`` when absent."""
    if value is None:
        if default is None:
            raise GltfError(source, field, "is required")
        return default
    if not isinstance(value, str):
        raise GltfError(source, field, f"must be a string, got {value!r:.40}")
    return value
