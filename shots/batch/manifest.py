"""Manifests: what a batch wrote for each model and why, and the catalog index.

A model's manifest (``manifests/<model>.json``) records the model's hashes, the preset hash, the
renderer version, and for every frame its file, key, camera and seed. The batch reads it back to
decide which frames are up to date. It is written atomically, and only after the files it lists,
so a killed run never leaves a manifest that claims a frame it did not finish. Timings sit under
``timings`` keys; everything else is the same whichever way and however often a batch ran.

The catalog index (``index.json`` and ``index.csv``) lists every file of every finished model.
"""

from __future__ import annotations

import csv
import io
import json
from pathlib import Path

from shots.output import atomic_write_bytes

MANIFEST_FORMAT = "shots-batch-manifest/1"
INDEX_FORMAT = "shots-batch-index/1"
CSV_COLUMNS = ("model", "variant", "shot", "frame", "view", "kind", "path", "width", "height",
               "key")


def json_bytes(data: object) -> bytes:
    """Stable JSON: sorted keys, one space indent, a final newline."""
    return (json.dumps(data, indent=1, sort_keys=True, ensure_ascii=False) + "\n").encode()


def write_if_changed(path: Path, data: bytes) -> bool:
    """Atomically write ``data`` unless the file already holds exactly it; True if written."""
    try:
        if path.read_bytes() == data:
            return False
    except OSError:
        pass
    atomic_write_bytes(path, data)
    return True


def read_manifest(path: Path) -> dict | None:
    """A model's manifest, or None when missing, unreadable or of another format."""
    try:
        data = json.loads(path.read_text(encoding="utf-8"))
    except (OSError, ValueError):
        return None
    if not isinstance(data, dict) or data.get("format") != MANIFEST_FORMAT:
        return None
    if not isinstance(data.get("frames"), list) or not isinstance(data.get("animations"), list):
        return None
    return data


def frame_order(entry: dict) -> tuple:
    return (entry["variant"], entry["shot"], entry["frame"])


def animation_order(entry: dict) -> tuple:
    return (entry["variant"], entry["shot"], entry["format"])


def manifest_document(header: dict, frames: list[dict], animations: list[dict],
                      timings: dict) -> dict:
    """A manifest: ``header`` (model, hashes, preset, version, settings, variants) plus the
    frame and animation entries in canonical order."""
    return {
        "format": MANIFEST_FORMAT,
        **header,
        "frames": sorted(frames, key=frame_order),
        "animations": sorted(animations, key=animation_order),
        "timings": timings,
    }


def index_document(header: dict, models: list[dict], frames: list[dict],
                   animations: list[dict]) -> dict:
    """The catalog index: models (with status), and every frame and animation file."""
    return {
        "format": INDEX_FORMAT,
        **header,
        "models": models,
        "frames": frames,
        "animations": animations,
    }


FORMULA_STARTS = ("=", "+", "-", "@", "\t", "\r")


def spreadsheet_safe(value: object) -> object:
    """A text cell that a spreadsheet would run as a formula, prefixed with ``'`` so it is read
    as text (OWASP, "CSV Injection"); numbers and other text pass unchanged."""
    if isinstance(value, str) and value.startswith(FORMULA_STARTS):
        return "'" + value
    return value


class _SafeWriter(csv.DictWriter):
    def writerow(self, rowdict):
        return super().writerow({k: spreadsheet_safe(v) for k, v in rowdict.items()})


def index_csv_bytes(frames: list[dict], animations: list[dict]) -> bytes:
    """One CSV row per output file: PNG frames, their EXR twins and animations.

    Names come from model files (variant names) and folders, so formula-like cells are
    neutralised (``spreadsheet_safe``); index.json keeps every value exactly.
    """
    buffer = io.StringIO()
    writer = _SafeWriter(buffer, fieldnames=CSV_COLUMNS, lineterminator="\n")
    writer.writeheader()
    for entry in frames:
        common = {k: entry[k] for k in ("model", "variant", "shot", "frame", "view", "width",
                                        "height", "key")}
        writer.writerow({**common, "kind": "png", "path": entry["path"]})
        if entry.get("exr"):
            writer.writerow({**common, "kind": "exr", "path": entry["exr"]})
        for derived in entry.get("derivatives") or []:
            writer.writerow({**common, "kind": f"{derived['format']}:{derived['name']}",
                             "path": derived["path"], "width": derived["width"],
                             "height": derived["height"], "key": derived["key"]})
    for entry in animations:
        writer.writerow({
            "model": entry["model"], "variant": entry["variant"], "shot": entry["shot"],
            "frame": "", "view": "", "kind": entry["format"], "path": entry["path"],
            "width": entry["width"], "height": entry["height"], "key": entry["key"],
        })
    return buffer.getvalue().encode()
