"""Joining the world-space pieces into the Scene's flat arrays, and dropping unusable triangles."""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from shots.gltf.container import Document
from shots.gltf.geometry import Piece, face_normals


@dataclass
class Mesh:
    """The flat arrays of a Scene (shapes as documented on ``shots.scene.Scene``)."""

    positions: np.ndarray
    normals: np.ndarray
    tangents: np.ndarray
    uv: np.ndarray
    colors: np.ndarray
    triangles: np.ndarray
    tri_material: np.ndarray
    variants: dict[int, np.ndarray]


def assemble(doc: Document, pieces: list[Piece], variant_count: int) -> Mesh:
    """Concatenate pieces (one copy at most), then repair what kernels must never see."""
    vertex_counts = [p.positions.shape[0] for p in pieces]
    triangle_counts = [p.triangles.shape[0] for p in pieces]
    v, n = sum(vertex_counts), sum(triangle_counts)
    vertex_starts = np.cumsum([0] + vertex_counts)[:-1]
    triangle_starts = np.cumsum([0] + triangle_counts)[:-1]

    def join(get, width: int, fill: float) -> np.ndarray:
        if len(pieces) == 1 and get(pieces[0]) is not None:
            only = np.ascontiguousarray(get(pieces[0]), np.float32)
            return only if only.flags.writeable else only.copy()  # not a view of the file
        out = np.full((v, width), fill, np.float32) if fill else np.zeros((v, width), np.float32)
        for start, piece in zip(vertex_starts, pieces, strict=True):
            data = get(piece)
            if data is not None:
                out[start : start + data.shape[0]] = data
        return out

    positions = join(lambda p: p.positions, 3, 0.0)
    normals = join(lambda p: p.normals, 3, 0.0)
    tangents = join(lambda p: p.tangents, 4, 0.0)
    uv = np.zeros((2, v, 2), np.float32)
    for k in (0, 1):
        for start, piece in zip(vertex_starts, pieces, strict=True):
            if piece.uv[k] is not None:
                uv[k, start : start + piece.uv[k].shape[0]] = piece.uv[k]
    colors = join(lambda p: p.colors, 4, 1.0)
    triangles = np.empty((n, 3), np.int32)
    tri_material = np.empty(n, np.int32)
    variants = {k: np.empty(n, np.int32) for k in range(variant_count)}
    for piece, v0, t0 in zip(pieces, vertex_starts, triangle_starts, strict=True):
        t1 = t0 + piece.triangles.shape[0]
        np.add(piece.triangles, np.int32(v0), out=triangles[t0:t1])
        tri_material[t0:t1] = piece.material
        for k, per_variant in variants.items():
            per_variant[t0:t1] = piece.variants.get(k, piece.material)
    keep = _usable_triangles(doc, positions, triangles)
    if keep is not None:
        triangles, tri_material = triangles[keep], tri_material[keep]
        variants = {k: a[keep] for k, a in variants.items()}
    _repair_attributes(doc, positions, normals, uv, colors, triangles)
    return Mesh(positions, normals, tangents, uv, colors, triangles, tri_material, variants)


def _usable_triangles(doc: Document, positions: np.ndarray,
                      triangles: np.ndarray) -> np.ndarray | None:
    """Mask of triangles to keep after the world transform, or None when all are fine.

    Each primitive was already checked in its own coordinates (once per shared mesh), so only a
    transform overflowing to infinity can break a triangle here; the usual case costs one pass
    over the vertices. Non-finite vertices left unused are zeroed so no stage meets a NaN.
    """
    if np.isfinite(positions).all():
        return None
    finite = np.isfinite(positions).all(axis=1)
    positions[~finite] = 0.0
    if triangles.shape[0] == 0:
        return None
    broken = ~finite[triangles].all(axis=1)
    if not broken.any():
        return None
    doc.warn(f"{int(broken.sum())} triangles with vertices overflowing to infinity dropped")
    return ~broken


def _repair_attributes(doc: Document, positions, normals, uv, colors, triangles) -> None:
    """Replace non-finite attributes and zero normals so kernels never see NaN."""
    for name, data in (("TEXCOORD", uv), ("COLOR_0", colors)):
        bad = ~np.isfinite(data)
        if bad.any():
            doc.warn(f"{int(bad.sum())} non-finite {name} values replaced by 0")
            data[bad] = 0.0
    broken = ~(np.einsum("ij,ij->i", normals, normals) > 0)  # zero rows (NaN already zeroed)
    if broken.any():
        # zero or non-finite normals: use the area-weighted normal of the faces around the vertex
        used = triangles[broken[triangles[:, 0]] | broken[triangles[:, 1]]
                         | broken[triangles[:, 2]]]
        face = face_normals(positions, used) if used.size else np.zeros((0, 3), np.float32)
        acc = np.zeros((positions.shape[0], 3))
        for k in range(3):
            np.add.at(acc, used[:, k], face)
        length = np.linalg.norm(acc, axis=1)
        fixed = broken & (length > 0)
        normals[fixed] = (acc[fixed] / length[fixed, None]).astype(np.float32)
        normals[broken & ~fixed] = (0.0, 0.0, 1.0)
