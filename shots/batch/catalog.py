"""The models of a batch: every .gltf/.glb under a folder, or the paths listed in a text file."""

from __future__ import annotations

import os
from dataclasses import dataclass
from pathlib import Path

from shots.errors import BatchError
from shots.pipeline import safe_name

MODEL_SUFFIXES = (".gltf", ".glb")


@dataclass(frozen=True)
class CatalogModel:
    """One model of the catalog.

    Attributes
    ----------
    path : the model file (absolute, links not followed: its folder is the one its
        resources must stay in, as for ``shots render``).
    name : the file-name-safe model name used in output paths (the file's stem).
    listed_as : how the source names it (relative to the folder or as written in the list).
    root : for a catalog folder, that folder: the model file must really lie inside it.
    """

    path: Path
    name: str
    listed_as: str
    root: Path | None = None

    def escapes_root(self) -> bool:
        """Whether the file is a link (or under a linked folder) leading outside ``root``."""
        if self.root is None:
            return False
        try:
            real, root = self.path.resolve(), self.root.resolve()
        except (OSError, RuntimeError):
            return True  # a symlink loop
        return not real.is_relative_to(root)


def find_models(source: Path) -> list[CatalogModel]:
    """The models of ``source``: a folder (searched recursively), one model file or a list file.

    A list file holds one model path per line, relative to the list file; blank lines and
    lines starting with ``#`` are skipped. A listed file that does not exist is kept, so the
    batch reports it as a failed model instead of silently leaving it out.

    Raises
    ------
    BatchError : the source does not exist, cannot be read or names no models.
    """
    source = Path(source)
    if source.is_dir():
        models = _from_folder(source)
    elif source.is_file() and source.suffix.lower() in MODEL_SUFFIXES:
        models = [_model(source, source.name)]
    elif source.is_file():
        models = _from_list(source)
    else:
        raise BatchError(source, None, "no such folder or list file")
    if not models:
        raise BatchError(source, None, "no .gltf or .glb models found")
    return models


def _from_folder(folder: Path) -> list[CatalogModel]:
    found = [
        path for path in folder.rglob("*")
        if path.suffix.lower() in MODEL_SUFFIXES and path.is_file()
        and not any(part.startswith(".") for part in path.relative_to(folder).parts)
    ]
    found.sort(key=lambda p: p.relative_to(folder).as_posix())
    return [_model(path, path.relative_to(folder).as_posix(), folder) for path in found]


def _from_list(list_file: Path) -> list[CatalogModel]:
    try:
        text = list_file.read_text(encoding="utf-8")
    except (OSError, UnicodeDecodeError) as exc:
        raise BatchError(list_file, None, f"cannot read the model list: {exc}") from None
    models = []
    for number, line in enumerate(text.splitlines(), start=1):
        entry = line.strip()
        if not entry or entry.startswith("#"):
            continue
        path = Path(entry)
        if path.suffix.lower() not in MODEL_SUFFIXES:
            raise BatchError(list_file, f"line {number}", f"{entry!r} is not a .gltf or .glb file")
        models.append(_model(list_file.parent / path, entry))
    return models


def _model(path: Path, listed_as: str, root: Path | None = None) -> CatalogModel:
    return CatalogModel(path=Path(os.path.abspath(path)), name=safe_name(path.stem),
                        listed_as=listed_as, root=None if root is None else Path(os.path.abspath(root)))
