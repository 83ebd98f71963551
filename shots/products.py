"""The product table: which catalog product code and title each model and variant is sold as.

A CSV file (RFC 4180, UTF-8, a header row) with the columns ``model`` (the model's file name,
with or without its suffix), ``variant`` (optional; blank or "default" for the model's own
materials, else a KHR_materials_variants name), ``sku`` (the product code) and ``title``. Any
other column is kept and becomes a path-template field of the same name::

    model,variant,sku,title,range
    wool_sofa,oat,SL-4001-OAT,Wool sofa,living

Product codes are unique, and so is each (model, variant) pair; a broken table is refused as a
whole, naming the line and the column.
"""

from __future__ import annotations

import csv
import re
from dataclasses import dataclass
from pathlib import Path

from shots.errors import PresetError

REQUIRED = ("model", "sku", "title")
DEFAULT_VARIANT = "default"
COLUMN_NAME = re.compile(r"^[a-z][a-z0-9_]*$")
# Template fields a column may not shadow (shots.batch.layout and derivative templates)
RESERVED = ("model", "variant", "shot", "frame", "view", "size", "name")
MODEL_SUFFIXES = (".gltf", ".glb")


@dataclass(frozen=True)
class ProductTable:
    """Rows keyed by (model, variant); ``columns`` are the extra template fields."""

    path: Path
    rows: dict[tuple[str, str], dict[str, str]]
    columns: tuple[str, ...]

    def lookup(self, model_file: str, variant: str) -> dict[str, str] | None:
        """The row of a model file (as listed, or its name) and variant; None if missing."""
        for name in _model_names(model_file):
            row = self.rows.get((name, variant))
            if row is not None:
                return row
        return None

    @property
    def fields(self) -> tuple[str, ...]:
        """The template fields the table provides: sku, title and the other columns."""
        return ("sku", "title", *self.columns)


def _model_names(model_file: str) -> list[str]:
    """``chairs/oak_dining_chair.glb`` is found as written, as ``oak_dining_chair.glb`` and as
    ``oak_dining_chair``."""
    path = Path(model_file)
    names = [model_file, path.name]
    if path.suffix.lower() in MODEL_SUFFIXES:
        names += [path.with_suffix("").as_posix(), path.stem]
    return list(dict.fromkeys(names))


def load_products(path: str | Path) -> ProductTable:
    """Read and check a product table.

    Raises
    ------
    PresetError : one line naming the file, the line and column, and what is wrong.
    """
    path = Path(path)
    try:
        text = path.read_text(encoding="utf-8-sig")
    except (OSError, UnicodeDecodeError) as exc:
        raise PresetError(path, None, f"cannot read the product table: {exc}") from None
    reader = csv.reader(text.splitlines())
    header = [h.strip() for h in next(reader, [])]
    _check_header(path, header)
    columns = tuple(h for h in header if h not in (*REQUIRED, "variant"))
    rows: dict[tuple[str, str], dict[str, str]] = {}
    lines: dict[str, int] = {}
    for number, cells in enumerate(reader, start=2):
        if not any(c.strip() for c in cells):
            continue
        if len(cells) != len(header):
            raise PresetError(path, f"line {number}", f"has {len(cells)} cells, the header "
                                                      f"{len(header)}")
        row = {h: c.strip() for h, c in zip(header, cells, strict=True)}
        for column in REQUIRED:
            if not row[column]:
                raise PresetError(path, f"line {number}, {column}", "is empty")
        variant = row.get("variant") or DEFAULT_VARIANT
        row["variant"] = variant
        key = (row["model"], variant)
        if key in rows:
            raise PresetError(path, f"line {number}, model", f"{row['model']!r} variant "
                                                             f"{variant!r} is listed twice")
        if row["sku"] in lines:
            raise PresetError(path, f"line {number}, sku", f"{row['sku']!r} is already the "
                                                           f"code of line {lines[row['sku']]}")
        lines[row["sku"]] = number
        rows[key] = row
    if not rows:
        raise PresetError(path, None, "the product table has no rows")
    return ProductTable(path=path.resolve(), rows=rows, columns=columns)


def _check_header(path: Path, header: list[str]) -> None:
    missing = [c for c in REQUIRED if c not in header]
    if missing:
        raise PresetError(path, "line 1", f"needs the column(s) {', '.join(missing)} "
                                          f"(has: {', '.join(header) or 'none'})")
    for name in header:
        if not COLUMN_NAME.match(name):
            raise PresetError(path, "line 1", f"column {name!r}: use lower-case letters, "
                                              f"digits and '_' (it becomes a template field)")
        if header.count(name) > 1:
            raise PresetError(path, "line 1", f"column {name!r} appears twice")
        if name in RESERVED and name not in ("model", "variant"):
            raise PresetError(path, "line 1", f"column {name!r} would shadow the template "
                                              f"field of that name")
