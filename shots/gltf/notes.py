"""Notes about a model: what the loader repaired, and what a file asks for that is not rendered.

Every note is a ``Note``: a plain string (so it prints, sorts and goes into JSON as text) that
also carries its ``kind``. Text taken from the file is made literal here, once: control
characters become ``\\xNN`` escapes, so a note can never move the cursor or recolour a terminal.
"""

from __future__ import annotations

from typing import TYPE_CHECKING

import numpy as np

from shots.gltf import checks
from shots.terminal import visible

if TYPE_CHECKING:
    from shots.gltf.container import Document

WARNING, IGNORED = "warning", "ignored"


class Note(str):
    """One line about a model; ``kind`` is ``"warning"`` (repaired or doubtful input) or
    ``"ignored"`` (read from the file, not rendered)."""

    __slots__ = ("kind",)

    def __new__(cls, text: str, kind: str = WARNING) -> Note:
        note = super().__new__(cls, visible(text))
        note.kind = kind
        return note

    def __reduce__(self):  # keep the kind across process pools
        return Note, (str(self), self.kind)


def as_note(item) -> Note:
    """A Note from a Note or a plain string (a plain string is a warning)."""
    return item if isinstance(item, Note) else Note(item)


def unused_features(doc: Document, nodes: list[tuple[int, np.ndarray]]) -> None:
    """Note, once per model, what the file holds that the renderer does not use: skins, morph
    targets and animations (glTF 2.0 spec §Skins, §Morph Targets, §Animations: the model is
    drawn in its rest pose)."""
    gltf, src = doc.gltf, doc.source
    used_nodes = [gltf.nodes[i] for i, _ in nodes]
    meshes = {n.mesh for n in used_nodes if isinstance(n.mesh, int)}
    skinned = sum(1 for n in used_nodes if n.skin is not None)
    if skinned:
        doc.ignore(f"skins on {skinned} node(s) not applied: drawn in the rest pose")
    morphed = sum(1 for m in sorted(meshes) if m < len(gltf.meshes or [])
                  and any(getattr(p, "targets", None) for p in gltf.meshes[m].primitives or []))
    if morphed:
        doc.ignore(f"morph targets in {morphed} mesh(es) not applied: drawn with the base "
                   "geometry (weights ignored)")
    animations = checks.array(gltf.animations, src, "animations")
    if animations:
        doc.ignore(f"{len(animations)} animation(s) not played: drawn in the rest pose")


def camera_notes(doc: Document, cameras) -> None:
    """A file camera's znear is not honoured: camera rays start at the lens (glTF 2.0 spec
    §Cameras: znear is the near clipping plane)."""
    near = [c for c in cameras if c.znear > 0]
    if near:
        doc.ignore(f"znear of {len(near)} file camera(s) not honoured: no near clipping")
