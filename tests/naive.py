"""Brute-force twins of the project's kernels, in plain numpy, for tests to compare against.

Each twin favours obviousness over speed: no acceleration structure, every ray against every
primitive, float64 throughout.
"""

from __future__ import annotations

import numpy as np


def moller_trumbore(positions, triangles, origins, directions, t_min=0.0, t_max=np.inf):
    """Every ray against every triangle (Möller & Trumbore, JGT 2(1), 1997), no culling.

    Parameters
    ----------
    positions : (v, 3) vertex positions; triangles : (n, 3) int vertex indices.
    origins, directions : (r, 3); t_min, t_max : scalars or (r,), accepted t is [t_min, t_max].

    Returns
    -------
    t : (r, n) float64 hit distance per ray and triangle, inf where missed.
    u, v : (r, n) float64 barycentrics (hit = (1-u-v)·p0 + u·p1 + v·p2).
    """
    p = np.asarray(positions, np.float64)[np.asarray(triangles)]
    p0, e1, e2 = p[:, 0], p[:, 1] - p[:, 0], p[:, 2] - p[:, 0]
    o = np.asarray(origins, np.float64)[:, None, :]
    d = np.asarray(directions, np.float64)[:, None, :]
    pvec = np.cross(d, e2)
    det = np.einsum("rnk,nk->rn", pvec, e1)
    with np.errstate(divide="ignore", invalid="ignore"):
        inv = 1.0 / det
        tvec = o - p0
        u = np.einsum("rnk,rnk->rn", tvec, pvec) * inv
        qvec = np.cross(tvec, e1)
        v = np.einsum("rk,rnk->rn", d[:, 0], qvec) * inv
        t = np.einsum("rnk,nk->rn", qvec, e2) * inv
    t_min = np.broadcast_to(np.asarray(t_min, np.float64), (len(o),))[:, None]
    t_max = np.broadcast_to(np.asarray(t_max, np.float64), (len(o),))[:, None]
    ok = (det != 0) & (u >= 0) & (v >= 0) & (u + v <= 1) & (t >= t_min) & (t <= t_max)
    return np.where(ok, t, np.inf), u, v


def _chunk(n_triangles):
    """Rays per numpy pass, so the (rays, triangles, 3) temporaries stay near 50 MB."""
    return max(1, 2_000_000 // max(n_triangles, 1))


def closest_hits(positions, triangles, origins, directions, t_min=0.0, t_max=np.inf):
    """Nearest hit per ray by brute force: t (inf on a miss), tri (-1 on a miss), u, v."""
    r = len(origins)
    chunk = _chunk(len(triangles))
    t_out = np.full(r, np.inf)
    tri_out = np.full(r, -1, np.int64)
    u_out = np.zeros(r)
    v_out = np.zeros(r)
    t_min = np.broadcast_to(np.asarray(t_min, np.float64), (r,))
    t_max = np.broadcast_to(np.asarray(t_max, np.float64), (r,))
    for s in range(0, r, chunk):
        e = min(r, s + chunk)
        t, u, v = moller_trumbore(
            positions, triangles, origins[s:e], directions[s:e], t_min[s:e], t_max[s:e]
        )
        k = np.argmin(t, axis=1)
        rows = np.arange(e - s)
        hit = np.isfinite(t[rows, k])
        t_out[s:e] = t[rows, k]
        tri_out[s:e] = np.where(hit, k, -1)
        u_out[s:e] = np.where(hit, u[rows, k], 0.0)
        v_out[s:e] = np.where(hit, v[rows, k], 0.0)
    return t_out, tri_out, u_out, v_out


def all_hits(positions, triangles, origins, directions, t_min=0.0, t_max=np.inf):
    """(r, n) float64 hit distance of every ray with every triangle (inf where missed)."""
    chunk = _chunk(len(triangles))
    parts = [
        moller_trumbore(positions, triangles, origins[s : s + chunk], directions[s : s + chunk],
                        np.broadcast_to(t_min, (len(origins),))[s : s + chunk],
                        np.broadcast_to(t_max, (len(origins),))[s : s + chunk])[0]
        for s in range(0, len(origins), chunk)
    ]  # fmt: skip
    return np.concatenate(parts) if parts else np.zeros((0, len(triangles)))


def edge_distance(positions, triangles, tri, origins, directions):
    """How close each ray passes to an edge of its triangle ``tri`` (r,): min barycentric of the
    ray's crossing with the triangle's plane (negative = outside), for judging near-edge cases."""
    p = np.asarray(positions, np.float64)[np.asarray(triangles)[tri]]
    p0, e1, e2 = p[:, 0], p[:, 1] - p[:, 0], p[:, 2] - p[:, 0]
    o = np.asarray(origins, np.float64)
    d = np.asarray(directions, np.float64)
    pvec = np.cross(d, e2)
    with np.errstate(divide="ignore", invalid="ignore"):
        inv = 1.0 / np.einsum("rk,rk->r", pvec, e1)
        tvec = o - p0
        u = np.einsum("rk,rk->r", tvec, pvec) * inv
        v = np.einsum("rk,rk->r", d, np.cross(tvec, e1)) * inv
    return np.minimum(np.minimum(u, v), 1.0 - u - v)
