"""Ray casting against a triangle mesh: build a BVH once, then trace batches of rays.

    bvh = build_bvh(positions, triangles)
    t, tri, u, v = intersect_closest(bvh, origins, directions, 0.0, np.inf)
    occluded = intersect_any(bvh, shadow_origins, to_light, 0.0, light_distance)

Triangles are tested watertight (Woop, Benthin & Wald 2013) so rays never slip through shared
edges of a closed mesh; secondary rays start from ``offset_origins`` (Wächter & Binder 2019) so
they never hit the surface they leave. Kernels for tracing inside another numba kernel are in
``shots.kernels.traverse`` (pass ``*bvh``).
"""

from __future__ import annotations

from typing import NamedTuple

import numpy as np

from shots.kernels import bvh_build, offset, traverse

# SAH constants: one visit of a 4-wide node against one test of a block of up to four triangles
# (bvh_build.BLOCK). Earlier, with one triangle tested at a time, a node visit timed at about 1.5
# triangle tests on camera rays and 1.2 kept traversal within 64 bytes per triangle. With block
# tests, bench/raycast.py --quick (one thread, ours / Embree; camera, incoherent; one run each)
# could not tell the settings apart: a block costing 1.0, 1.5 or 2.0 gave 0.83/0.70, 0.82/0.71,
# 0.81/0.71 (per-triangle costs of 0.3-0.6 likewise 0.79-0.82/0.69-0.72); all of them read
# 47-50 bytes per triangle where per-triangle costs of 1.0 read 58-63. 1.5 is the middle.
COST_TRAVERSAL = 1.2
COST_INTERSECT = 1.5


class Bvh(NamedTuple):
    """A flattened 4-wide BVH over triangles stored in leaf order (fields in kernel-argument order).

    Attributes
    ----------
    node_bounds : (m, 8, 4) float32 node records, 128-byte aligned: rows 0–5 are the child boxes
        (min x, max x, min y, max y, min z, max z; one column per child), row 6 holds the links.
    node_links : (m, 8, 4) int32 view of the same records; ``node_links[:, 6]`` are the child
        links: inner node index (>= 0) or encoded leaf range (< 0).
    tri_verts : (n + 1, 9) float32, the vertices of the triangles in leaf order, stored in blocks
        of up to four per leaf so that four triangles are tested at once
        (``bvh_build.gather_vertices``; ``triangle_corners`` reads them back).
    tri_ids : (n,) int32, original triangle index of each leaf-order triangle.
    """

    node_bounds: np.ndarray
    node_links: np.ndarray
    tri_verts: np.ndarray
    tri_ids: np.ndarray


def build_bvh(
    positions: np.ndarray,
    triangles: np.ndarray,
    *,
    bins: int = 16,
    cost_traversal: float = COST_TRAVERSAL,
    cost_intersect: float = COST_INTERSECT,
    max_leaf: int = 8,
) -> Bvh:
    """Build a binned-SAH BVH (Wald 2007) over a triangle mesh.

    Parameters
    ----------
    positions : (v, 3) float32 vertex positions.
    triangles : (n, 3) int32 vertex indices. Triangles with a non-finite vertex are left out
        (they can never be hit).
    bins : centroid bins per axis for the SAH sweep (8–32 is usual; 16 is common practice).
    cost_traversal, cost_intersect : SAH constants, the cost of one node visit and of one test of
        a block of up to four triangles.
    max_leaf : most triangles per leaf (1–15); smaller leaves are made whenever SAH prefers them.

    Returns
    -------
    Bvh
    """
    positions = np.require(positions, np.float32, ["C", "W"])
    triangles = np.require(triangles, np.int32, ["C", "W"])
    if positions.ndim != 2 or positions.shape[1] != 3:
        raise ValueError(f"positions must be (v, 3), got {positions.shape}")
    if triangles.ndim != 2 or triangles.shape[1] != 3:
        raise ValueError(f"triangles must be (n, 3), got {triangles.shape}")
    if triangles.size and (triangles.min() < 0 or triangles.max() >= len(positions)):
        raise ValueError("triangle vertex index out of range")
    if not 1 <= max_leaf <= bvh_build.MAX_LEAF:
        raise ValueError(f"max_leaf must be in 1..{bvh_build.MAX_LEAF}, got {max_leaf}")
    if bins < 2:
        raise ValueError(f"bins must be >= 2, got {bins}")
    if len(triangles) >= 1 << (31 - bvh_build.LEAF_BITS):
        raise ValueError(f"too many triangles for one BVH: {len(triangles)}")

    ids = np.arange(len(triangles), dtype=np.int32)
    finite = np.isfinite(positions).all(axis=1)
    usable = finite[triangles].all(axis=1)
    if not usable.all():
        ids = ids[usable]
        triangles = triangles[usable]
    prims = bvh_build.triangle_records(positions, triangles)
    order, node_box, node_left, node_start, node_count = bvh_build.build_binary(
        prims, int(bins), float(cost_traversal), float(cost_intersect), int(max_leaf)
    )
    bounds, links = bvh_build.collapse_wide(
        node_box, node_left, node_start, node_count, float(cost_traversal), float(cost_intersect),
        int(max_leaf),
    )  # fmt: skip
    node_bounds, node_links = _node_records(bounds, links)
    tri_verts = bvh_build.gather_vertices(positions, triangles, order, links)
    return Bvh(node_bounds, node_links, tri_verts, ids[order])


def triangle_corners(bvh: Bvh) -> np.ndarray:
    """(n, 3, 3) float32: the corners p0, p1, p2 of each triangle in leaf order, read back from
    the leaf blocks of ``bvh.tri_verts``."""
    flat = bvh.tri_verts.reshape(-1)
    corners = np.empty((len(bvh.tri_ids), 9), np.float32)
    links = bvh.node_links[:, bvh_build.LINK_ROW].reshape(-1)
    for code in ~links[links < -1]:
        start = code >> bvh_build.LEAF_BITS
        end = start + (code & bvh_build.MAX_LEAF)
        for first in range(start, end, bvh_build.BLOCK):
            count = min(bvh_build.BLOCK, end - first)
            block = flat[9 * first : 9 * (first + count)].reshape(9, count)
            corners[first : first + count] = block.T
    return corners.reshape(-1, 3, 3)


def _aligned_empty(shape, dtype, align=128) -> np.ndarray:
    """An empty C-contiguous array whose first byte sits on an ``align``-byte boundary."""
    nbytes = int(np.prod(shape)) * np.dtype(dtype).itemsize
    raw = np.empty(nbytes + align, np.uint8)
    start = (-raw.ctypes.data) % align
    return raw[start : start + nbytes].view(dtype).reshape(shape)


def _node_records(bounds: np.ndarray, links: np.ndarray):
    """Pack each node into one 128-byte record (two cache lines): six rows of child bounds, one
    row of child links (int32 bits) and one of padding. Returns the float32 records and their
    int32 view (one array type for the kernels whatever the tree, and after pickling)."""
    records = _aligned_empty((len(bounds), bvh_build.NODE_ROWS, bvh_build.WIDTH), np.float32)
    records[:, :6] = bounds
    as_int = records.view(np.int32)
    as_int[:, bvh_build.LINK_ROW] = links
    as_int[:, bvh_build.LINK_ROW + 1 :] = 0
    return records, as_int


def sah_cost(
    bvh: Bvh, cost_traversal: float = COST_TRAVERSAL, cost_intersect: float = COST_INTERSECT
) -> float:
    """Expected cost of a random ray through the root box under the SAH (for reports)."""
    return float(
        bvh_build.sah_cost(
            bvh.node_bounds,
            np.ascontiguousarray(bvh.node_links[:, bvh_build.LINK_ROW]),
            cost_traversal,
            cost_intersect,
        )
    )


def traversal_bytes(bvh: Bvh) -> int:
    """Bytes of all arrays traversal reads: node records (links included), triangle vertices and
    triangle ids."""
    return bvh.node_bounds.nbytes + bvh.tri_verts.nbytes + bvh.tri_ids.nbytes


def _kernel_array(a) -> np.ndarray:
    """float32, C-contiguous and writable: the one array type the kernels are compiled for."""
    return np.require(a, np.float32, ["C", "W"])


def _rays(origins, directions, t_min, t_max):
    origins = _kernel_array(origins)
    directions = _kernel_array(directions)
    if origins.ndim != 2 or origins.shape[1] != 3 or directions.shape != origins.shape:
        raise ValueError(
            f"origins and directions must both be (r, 3), got {origins.shape}, {directions.shape}"
        )
    r = len(origins)
    t_min = _kernel_array(np.broadcast_to(np.asarray(t_min, np.float32), (r,)))
    t_max = _kernel_array(np.broadcast_to(np.asarray(t_max, np.float32), (r,)))
    return origins, directions, t_min, t_max


def intersect_closest(bvh: Bvh, origins, directions, t_min=0.0, t_max=np.inf):
    """Nearest hit of each ray.

    Parameters
    ----------
    bvh : from ``build_bvh``.
    origins, directions : (r, 3) float32 (directions non-zero, any length; t is in its units).
    t_min, t_max : (r,) float32 or scalars; hits count for t_min <= t <= t_max.

    Returns
    -------
    t : (r,) float32, inf on a miss.
    tri : (r,) int32 original triangle index, -1 on a miss.
    u, v : (r,) float32 barycentrics: hit = (1-u-v)·p0 + u·p1 + v·p2 of the original triangle.
    """
    o, d, t0, t1 = _rays(origins, directions, t_min, t_max)
    return traverse.closest_hits(*bvh, o, d, t0, t1)


def intersect_any(bvh: Bvh, origins, directions, t_min=0.0, t_max=np.inf) -> np.ndarray:
    """Whether anything lies along each ray within [t_min, t_max] (shadow rays).

    Parameters are as for ``intersect_closest``. Returns (r,) bool.
    """
    o, d, t0, t1 = _rays(origins, directions, t_min, t_max)
    return traverse.any_hits(bvh.node_bounds, bvh.node_links, bvh.tri_verts, o, d, t0, t1)


def offset_origins(points: np.ndarray, geometric_normals: np.ndarray) -> np.ndarray:
    """Move hit points off their surface before tracing secondary rays (Wächter & Binder 2019).

    Parameters
    ----------
    points : (r, 3) float32 hit points (best rebuilt from barycentrics, not o + t·d).
    geometric_normals : (r, 3) float32 unit geometric normals on the side the new ray leaves
        (flip them for rays going into the surface, e.g. refraction).

    Returns
    -------
    (r, 3) float32 origins for the new rays; trace them with t_min = 0.
    """
    points = _kernel_array(points)
    normals = _kernel_array(geometric_normals)
    if points.ndim != 2 or points.shape[1] != 3 or normals.shape != points.shape:
        raise ValueError(f"points and normals must both be (r, 3), got {points.shape}")
    return offset.offset_points(points, normals)


def warm_up() -> None:
    """Compile (or load from the on-disk cache) every kernel, using a two-triangle mesh."""
    positions = np.array([[0, 0, 0], [1, 0, 0], [0, 1, 0], [1, 1, 0]], np.float32)
    bvh = build_bvh(positions, np.array([[0, 1, 2], [1, 3, 2]], np.int32))
    origins = np.array([[0.25, 0.25, 1.0]], np.float32)
    directions = np.array([[0.0, 0.0, -1.0]], np.float32)
    intersect_closest(bvh, origins, directions)
    intersect_any(bvh, origins, directions)
    offset_origins(origins, directions)
    sah_cost(bvh)
