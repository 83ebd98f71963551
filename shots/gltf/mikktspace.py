"""Tangents by MikkTSpace (Mikkelsen 2008, "Simulation of Wrinkled Surfaces Revisited"), the
frame normal maps are baked against (glTF 2.0 spec §3.7.2.1: clients SHOULD use it).

A vectorised port of the reference implementation's rules:

- each triangle's tangent and bitangent directions from its UV derivatives (the paper's eq. 18,
  19), and whether the triangle preserves or mirrors the UV orientation;
- corners are grouped when they share position, normal and UV (welded by value) and the same
  orientation, so mirrored UVs never blend across the seam;
- within a group, the per-triangle directions are projected onto the tangent plane of the corner
  normal (Gram–Schmidt) and summed, weighted by the corner's angle in that plane;
- the corner's tangent is the normalised sum; w = +1 for orientation-preserving groups, else -1.

The reference also splits a welded vertex into separate groups when its triangles are not
edge-connected around it; here all corners of a welded vertex with the same orientation form
one group (the same result on manifold fans).

UVs enter as (u, 1 - v): glTF's v runs down the image, MikkTSpace's up, and exporters flip v
before computing tangents, so B = w·cross(N, T) points toward decreasing glTF v.
"""

from __future__ import annotations

import numpy as np


def mikktspace_corners(positions: np.ndarray, normals: np.ndarray, triangles: np.ndarray,
                       uv: np.ndarray) -> np.ndarray:
    """(k, 3, 4) float64 tangent (xyz unit, w = ±1) of every triangle corner."""
    p = positions.astype(np.float64)
    n = normals.astype(np.float64)
    t = np.column_stack([uv[:, 0], 1.0 - uv[:, 1]]).astype(np.float64)
    i0, i1, i2 = triangles[:, 0], triangles[:, 1], triangles[:, 2]
    d1, d2 = p[i1] - p[i0], p[i2] - p[i0]
    t21, t31 = t[i1] - t[i0], t[i2] - t[i0]
    area = t21[:, 0] * t31[:, 1] - t21[:, 1] * t31[:, 0]
    preserving = area > 0
    sign = np.where(preserving, 1.0, -1.0)[:, None]
    os_ = _unit(sign * (t31[:, 1:2] * d1 - t21[:, 1:2] * d2))  # the paper's eq. 18
    os_[area == 0] = 0.0

    corner_vertex = triangles.reshape(-1)
    corner_normal = n[corner_vertex]
    corner_os = np.repeat(os_, 3, axis=0)
    corner_os = _unit(corner_os - corner_normal * _dot(corner_normal, corner_os)[:, None])
    weight = _corner_angles(p, triangles, corner_normal)
    orient = np.repeat(preserving, 3)

    weld = _weld(p, n, t)
    groups, group_of = np.unique(np.column_stack([weld[corner_vertex], orient]), axis=0,
                                 return_inverse=True)
    group_of = group_of.reshape(-1)
    total = np.zeros((groups.shape[0], 3))
    for axis in range(3):
        total[:, axis] = np.bincount(group_of, weight * corner_os[:, axis],
                                     minlength=groups.shape[0])
    tangent = total[group_of]
    tangent = tangent - corner_normal * _dot(corner_normal, tangent)[:, None]  # Gram–Schmidt
    tangent = _unit(tangent)
    missing = ~tangent.any(axis=1)
    tangent[missing] = _perpendicular(corner_normal[missing])
    out = np.empty((corner_vertex.shape[0], 4))
    out[:, :3] = tangent
    out[:, 3] = np.where(orient, 1.0, -1.0)
    return out.reshape(-1, 3, 4)


def split_vertices(triangles: np.ndarray, corner_tangents: np.ndarray):
    """One vertex per distinct (vertex, tangent) pair.

    Returns ``(source, triangles, tangents)``: (v',) int source vertex of each new vertex,
    (k, 3) int32 triangles over the new vertices, (v', 4) float32 tangents.
    """
    corners = corner_tangents.reshape(-1, 4)
    key = np.column_stack([triangles.reshape(-1).astype(np.float64), corners])
    unique, first, inverse = np.unique(key, axis=0, return_index=True, return_inverse=True)
    source = triangles.reshape(-1)[first]
    return (source.astype(np.int64), inverse.reshape(-1, 3).astype(np.int32),
            unique[:, 1:].astype(np.float32))


def _corner_angles(p: np.ndarray, triangles: np.ndarray, corner_normal: np.ndarray) -> np.ndarray:
    """(3k,) angle at each corner between its two edges, both projected onto the plane of the
    corner's normal (the reference's weight)."""
    here = triangles.reshape(-1)
    before = triangles[:, [2, 0, 1]].reshape(-1)
    after = triangles[:, [1, 2, 0]].reshape(-1)
    e1 = p[before] - p[here]
    e2 = p[after] - p[here]
    e1 = _unit(e1 - corner_normal * _dot(corner_normal, e1)[:, None])
    e2 = _unit(e2 - corner_normal * _dot(corner_normal, e2)[:, None])
    return np.arccos(np.clip(_dot(e1, e2), -1.0, 1.0))


def _weld(p: np.ndarray, n: np.ndarray, t: np.ndarray) -> np.ndarray:
    """(v,) id shared by vertices with identical position, normal and UV."""
    key = np.ascontiguousarray(np.column_stack([p, n, t]))
    return np.unique(key, axis=0, return_inverse=True)[1].reshape(-1)


def _dot(a: np.ndarray, b: np.ndarray) -> np.ndarray:
    return np.einsum("ij,ij->i", a, b)


def _unit(v: np.ndarray) -> np.ndarray:
    length = np.sqrt(_dot(v, v))
    ok = length > 1e-30
    out = np.zeros_like(v)
    out[ok] = v[ok] / length[ok, None]
    return out


def _perpendicular(n: np.ndarray) -> np.ndarray:
    helper = np.where(np.abs(n[:, :1]) < 0.9, [[1.0, 0.0, 0.0]], [[0.0, 1.0, 0.0]])
    return _unit(np.cross(n, helper))
