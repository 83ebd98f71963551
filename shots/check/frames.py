"""Which model, variant, shot and frame each image is, read from the manifests a batch wrote.

A batch folder holds ``index.json`` (``shots.batch.manifest``), which names each model's
manifest; a manifest lists every frame's file with its variant, shot, frame number and the
exposure reading of its albedo pass (``shots.albedo``). The check groups variants by these, the
review page builds its grid and turntables from them, and approved images are matched on them
rather than on file names, so a custom ``--template`` works the same.
"""

from __future__ import annotations

import json
from dataclasses import dataclass
from pathlib import Path

from shots.batch.manifest import INDEX_FORMAT, read_manifest


@dataclass(frozen=True)
class FrameRecord:
    """One rendered frame as its batch recorded it.

    Attributes
    ----------
    model, variant, shot, frame : what the image shows. view : the shot's named view, if any.
    albedo : the exposure reading ({"rendered", "albedo", "white", "pixels"}), None when the
        batch had none (an older renderer, or no non-metal surface in view).
    """

    model: str
    variant: str
    shot: str
    frame: int
    view: str = ""
    albedo: dict | None = None

    @property
    def identity(self) -> tuple[str, str, str, int]:
        """What an approved image is matched on."""
        return (self.model, self.variant, self.shot, self.frame)


def batch_indexes(paths: list[Path]) -> list[Path]:
    """Every batch index (``index.json``) in or below the folders of ``paths`` (hidden folders
    left out), and for an image file the nearest one in the folders above it."""
    found = set()
    for path in paths:
        if path.is_file():
            above = next((p / "index.json" for p in path.resolve().parents
                          if (p / "index.json").is_file()), None)
            if above is not None:
                found.add(above)
            continue
        if not path.is_dir():
            continue
        for index in path.rglob("index.json"):
            if not any(part.startswith(".") for part in index.relative_to(path).parts):
                found.add(index.resolve())
    return sorted(found)


def frame_records(paths: list[Path]) -> dict[Path, FrameRecord]:
    """The frames listed by the batches of ``paths`` (``batch_indexes``), by resolved image path.

    Unreadable or foreign files are skipped: without a record an image is still measured, it
    only cannot be grouped with its variants or matched with an approved image.
    """
    records = {}
    for index_path in batch_indexes(paths):
        try:
            index = json.loads(index_path.read_text(encoding="utf-8"))
        except (OSError, ValueError):
            continue
        if not isinstance(index, dict) or index.get("format") != INDEX_FORMAT:
            continue
        root = index_path.parent
        for model in index.get("models") or []:
            manifest = read_manifest(root / str(model.get("manifest", "")))
            if manifest is None:
                continue
            for entry in manifest["frames"]:
                record = _record(manifest, entry)
                if record is not None:
                    records[(root / entry["path"]).resolve()] = record
    return records


def _record(manifest: dict, entry: dict) -> FrameRecord | None:
    try:
        albedo = entry.get("albedo")
        return FrameRecord(
            model=str(manifest["model"]), variant=str(entry["variant"]), shot=str(entry["shot"]),
            frame=int(entry["frame"]), view=str(entry.get("view") or ""),
            albedo=albedo if isinstance(albedo, dict) else None,
        )
    except (KeyError, TypeError, ValueError):
        return None
