"""Ray casting (shots.accel) against independent references.

Sources: brute-force Möller & Trumbore (JGT 1997) in tests/naive.py; trimesh's
RayMeshIntersector (trimesh 5.x, an independent library); watertightness as defined by Woop,
Benthin & Wald (JCGT 2013); self-intersection offsets by Wächter & Binder (Ray Tracing Gems
ch. 6, 2019); the surface area heuristic (Goldsmith & Salmon 1987, Wald 2007).
"""

from __future__ import annotations

import pickle

import naive  # tests/naive.py: pytest puts this folder on sys.path
import numba
import numpy as np
import pytest
import trimesh
from trimesh.ray.ray_triangle import RayMeshIntersector

from shots.accel import (
    build_bvh,
    intersect_any,
    intersect_closest,
    offset_origins,
    sah_cost,
    traversal_bytes,
    triangle_corners,
)
from shots.kernels import bvh_build, simd, traverse
from shots.kernels.bvh_build import LINK_ROW, MAX_LEAF
from shots.kernels.traverse import any_hit_one, closest_hit_one, new_stack
from shots.kernels.triangle import intersect_triangle, ray_shear

REL_T = 1e-5  # float32 hit distances agree to this (common practice)
EDGE = 1e-5  # a ray this close to an edge (in barycentrics) may pick either neighbour


# --- meshes -----------------------------------------------------------------------------------


def grid(n, size=2.0, bump=0.0, seed=0):
    """n×n quads, two triangles each, in the z = 0 plane, optionally displaced in z."""
    xs = np.linspace(-size / 2, size / 2, n + 1)
    x, y = np.meshgrid(xs, xs, indexing="ij")
    z = bump * np.random.default_rng(seed).standard_normal(x.shape) if bump else 0 * x
    positions = np.stack([x, y, z], -1).reshape(-1, 3).astype(np.float32)
    i, j = np.meshgrid(np.arange(n), np.arange(n), indexing="ij")
    a = (i * (n + 1) + j).ravel()
    b, c, d = a + n + 1, a + 1, a + n + 2
    triangles = np.concatenate([np.stack([a, b, c], 1), np.stack([c, b, d], 1)]).astype(np.int32)
    return positions, triangles


def icosphere(subdivisions=3):
    """A closed sphere from trimesh (an independent tessellation)."""
    m = trimesh.creation.icosphere(subdivisions=subdivisions)
    return m.vertices.astype(np.float32), m.faces.astype(np.int32)


def soup(n=600, seed=1):
    """Random overlapping triangles of mixed sizes (stresses the SAH with heavy overlap)."""
    rng = np.random.default_rng(seed)
    centres = rng.uniform(-1, 1, (n, 1, 3))
    sizes = rng.choice([0.01, 0.1, 0.5], (n, 1, 1))
    positions = (centres + sizes * rng.standard_normal((n, 3, 3))).reshape(-1, 3)
    return positions.astype(np.float32), np.arange(3 * n, dtype=np.int32).reshape(n, 3)


def furniture():
    """Boxes and a cylinder side by side (flat, axis-aligned faces and thin parts)."""
    parts = [
        trimesh.creation.box((1.0, 0.05, 0.5)),
        trimesh.creation.box((0.05, 0.8, 0.05), transform=trimesh.transformations.translation_matrix((0.45, -0.4, 0.2))),
        trimesh.creation.cylinder(0.03, 0.8, sections=48, transform=trimesh.transformations.translation_matrix((-0.4, -0.4, -0.2))),
    ]  # fmt: skip
    m = trimesh.util.concatenate(parts)
    return m.vertices.astype(np.float32), m.faces.astype(np.int32)


MESHES = {
    "icosphere": icosphere(3),
    "displaced grid": grid(40, bump=0.05),
    "soup": soup(),
    "furniture": furniture(),
}


def sample_rays(positions, triangles, seed=0):
    """>= 10,000 seeded rays: random (many miss, many start inside the bounds), aimed at
    triangle interiors, aimed at edges (grazing), and starting inside the bounds."""
    rng = np.random.default_rng(seed)
    lo, hi = positions.min(0).astype(np.float64), positions.max(0).astype(np.float64)
    centre, extent = (lo + hi) / 2, np.maximum(hi - lo, 1e-3)

    def unit(n):
        d = rng.standard_normal((n, 3))
        return d / np.linalg.norm(d, axis=1, keepdims=True)

    def outside(n):
        return centre + 1.5 * extent.max() * unit(n)

    tri = positions[triangles].astype(np.float64)
    o1 = centre + rng.uniform(-0.75, 0.75, (4000, 3)) * extent  # 1.5× the bounds
    d1 = unit(4000)
    k = rng.integers(len(triangles), size=3000)
    w = rng.dirichlet((1, 1, 1), 3000)
    o2 = outside(3000)
    d2 = np.einsum("ri,rij->rj", w, tri[k]) - o2
    k = rng.integers(len(triangles), size=3000)
    e = rng.integers(3, size=3000)
    s = rng.uniform(0, 1, (3000, 1))
    p = (1 - s) * tri[k, e] + s * tri[k, (e + 1) % 3]
    o3 = outside(3000)
    d3 = p - o3
    o4 = centre + rng.uniform(-0.3, 0.3, (1000, 3)) * extent
    d4 = unit(1000)
    origins = np.concatenate([o1, o2, o3, o4]).astype(np.float32)
    directions = np.concatenate([d1, d2, d3, d4]).astype(np.float32)
    return origins, directions




def assert_same_hits(positions, triangles, origins, directions, ours, ref):
    """Ours equals the brute-force twin: same triangle and t within REL_T; where they differ the
    ray must pass within EDGE of an edge of the triangle involved, at the same distance."""
    t, tri = ours[0].astype(np.float64), ours[1]
    t_ref, tri_ref = ref[0], ref[1]
    both_miss = (tri < 0) & (tri_ref < 0)
    same = (tri == tri_ref) & (tri >= 0)
    assert np.all(np.abs(t[same] - t_ref[same]) <= REL_T * np.maximum(t_ref[same], 1e-3))
    other = ~(both_miss | same)
    # Disagreements: each side's triangle must be grazed (a near-edge tie), or a miss.
    for k_a in (tri, tri_ref):
        idx = np.flatnonzero(other & (k_a >= 0))
        near = naive.edge_distance(positions, triangles, k_a[idx], origins[idx], directions[idx])
        assert np.all(np.abs(near) <= EDGE), f"{idx.size} rays disagree away from an edge"
    both = np.flatnonzero(other & (tri >= 0) & (tri_ref >= 0))
    assert np.all(np.abs(t[both] - t_ref[both]) <= REL_T * np.maximum(t_ref[both], 1e-3))
    return int(other.sum())


@pytest.mark.parametrize("name", MESHES)
def test_closest_hit_equals_brute_force(name):
    positions, triangles = MESHES[name]
    origins, directions = sample_rays(positions, triangles)
    bvh = build_bvh(positions, triangles)
    ours = intersect_closest(bvh, origins, directions, 0.0, np.inf)
    ref = naive.closest_hits(positions, triangles, origins, directions)
    assert ours[1].dtype == np.int32 and ours[0].dtype == np.float32
    assert np.all(np.isinf(ours[0][ours[1] < 0]))
    n_edge = assert_same_hits(positions, triangles, origins, directions, ours, ref)
    assert n_edge <= 0.01 * len(origins)  # only a few grazing rays may tie
    hit = ours[1] >= 0
    assert 0.05 < hit.mean() < 0.95  # the set mixes hits and misses
    # Barycentrics refer to the original vertex order: they rebuild the hit point o + t·d.
    p = positions[triangles[ours[1][hit]]].astype(np.float64)
    u, v = ours[2][hit, None], ours[3][hit, None]
    rebuilt = (1 - u - v) * p[:, 0] + u * p[:, 1] + v * p[:, 2]
    along = origins[hit] + ours[0][hit, None].astype(np.float64) * directions[hit]
    scale = np.abs(origins[hit]).max() + np.abs(along).max()
    assert np.abs(rebuilt - along).max() <= 1e-5 * scale


@pytest.mark.parametrize("name", MESHES)
def test_any_hit_equals_brute_force(name):
    positions, triangles = MESHES[name]
    origins, directions = sample_rays(positions, triangles, seed=7)
    t_all = naive.all_hits(positions, triangles, origins, directions)
    # t_min, t_max halfway between consecutive hits (or 0 / past the last), so no hit sits on a
    # bound and the brute-force answer is unambiguous.
    rng = np.random.default_rng(3)
    sorted_t = np.sort(np.where(np.isfinite(t_all), t_all, np.inf), axis=1)
    n_hits = np.isfinite(sorted_t).sum(1)
    gaps = np.concatenate([np.zeros((len(t_all), 1)), sorted_t], 1)
    gaps = np.where(np.isfinite(gaps), gaps, 1e30)
    a = rng.integers(0, n_hits + 1)
    b = np.minimum(a + rng.integers(0, 3, len(a)), n_hits + 1)
    mid = lambda k: np.where(  # noqa: E731
        k == 0, 0.0, 0.5 * (gaps[np.arange(len(k)), k] + gaps[np.arange(len(k)), np.minimum(k + 1, gaps.shape[1] - 1)])
    )  # fmt: skip
    t_min, t_max = mid(a), np.where(b > n_hits, 1e30, mid(b))
    t_max = np.maximum(t_max, t_min)
    expected = ((t_all >= t_min[:, None]) & (t_all <= t_max[:, None])).any(1)
    occluded = intersect_any(build_bvh(positions, triangles), origins, directions, t_min, t_max)
    assert occluded.dtype == np.bool_
    grazing = np.zeros(len(origins), bool)
    for k in range(len(origins)):
        if occluded[k] != expected[k]:
            hits = np.flatnonzero(np.isfinite(t_all[k]))
            near = naive.edge_distance(
                positions, triangles, hits, np.repeat(origins[k : k + 1], len(hits), 0),
                np.repeat(directions[k : k + 1], len(hits), 0),
            )  # fmt: skip
            grazing[k] = np.any(np.abs(near) <= EDGE)
    mismatched = occluded != expected
    assert np.all(grazing[mismatched])
    assert mismatched.sum() <= 0.01 * len(origins)
    assert 0.05 < occluded.mean() < 0.95


@pytest.mark.parametrize("subdivisions", [1, 2])
def test_agrees_with_trimesh(subdivisions):
    # Independent library: trimesh.ray.ray_triangle.RayMeshIntersector (first hit per ray).
    m = trimesh.creation.icosphere(subdivisions=subdivisions)
    positions, triangles = m.vertices.astype(np.float32), m.faces.astype(np.int32)
    origins, directions = sample_rays(positions, triangles, seed=11)
    origins, directions = origins[::5], directions[::5]
    tri_ref, ray_ref = RayMeshIntersector(m).intersects_id(
        origins, directions, multiple_hits=False
    )
    ours = intersect_closest(build_bvh(positions, triangles), origins, directions)
    expected = np.full(len(origins), -1)
    expected[ray_ref] = tri_ref
    differ = np.flatnonzero(ours[1] != expected)
    # trimesh accepts hits within a small barycentric tolerance, so on rays aimed exactly at
    # edges it may report a neighbour (or a silhouette hit we and brute force miss). Every
    # difference must be such a grazing ray.
    for k in differ:
        tri = ours[1][k] if ours[1][k] >= 0 else expected[k]
        near = naive.edge_distance(positions, triangles, np.array([tri]), origins[k : k + 1],
                                   directions[k : k + 1])  # fmt: skip
        assert abs(near[0]) <= 1e-4
    assert len(differ) <= 0.02 * len(origins)
    assert (expected >= 0).sum() > 100


def shared_edge_targets(positions, triangles):
    """Every edge midpoint and every vertex of a mesh (float64)."""
    edges = np.sort(triangles[:, [0, 1, 1, 2, 2, 0]].reshape(-1, 2), axis=1)
    edges = np.unique(edges, axis=0)
    p = positions.astype(np.float64)
    return np.concatenate([(p[edges[:, 0]] + p[edges[:, 1]]) / 2, p[np.unique(triangles)]])


def test_watertight_icosphere():
    # Woop, Benthin & Wald 2013: rays through shared edges/vertices of a closed mesh never miss.
    positions, triangles = icosphere(4)
    targets = shared_edge_targets(positions, triangles)
    rng = np.random.default_rng(5)
    bvh = build_bvh(positions, triangles)
    for origins in (
        np.zeros_like(targets),  # from the centre outwards
        targets * 3.0 + rng.uniform(-0.5, 0.5, targets.shape),  # from outside, oblique
        targets * np.float32(2.5),  # from outside, radial
    ):
        o = origins.astype(np.float32)
        d = (targets - o).astype(np.float32)
        t, tri, u, v = intersect_closest(bvh, o, d)
        assert np.count_nonzero(tri < 0) == 0
        assert np.all(np.abs(t - 1.0) < 0.05)  # the hit is at (or near) the target
        # The rays really pass through edges or vertices of the triangle they hit.
        edge = naive.edge_distance(positions, triangles, tri, o, d)
        assert np.median(np.abs(edge)) < 1e-6


@pytest.mark.parametrize("oblique", [False, True])
def test_watertight_grid(oblique):
    positions, triangles = grid(48, size=3.0)
    targets = shared_edge_targets(positions, triangles)
    inner = np.all(np.abs(targets[:, :2]) < 1.5 - 1e-3, axis=1)  # skip the border
    targets = targets[inner]
    rng = np.random.default_rng(9)
    if oblique:
        o = targets + np.array([0.3, -0.7, 1.1]) + rng.uniform(-0.2, 0.2, targets.shape)
    else:  # straight down: two direction components are exactly zero (inf slab inverses)
        o = targets + np.array([0.0, 0.0, 1.0])
    o = o.astype(np.float32)
    d = (targets - o).astype(np.float32)
    bvh = build_bvh(positions, triangles)
    t, tri, u, v = intersect_closest(bvh, o, d)
    # Woop, Benthin & Wald 2013: no ray through a shared edge or vertex slips through.
    assert np.count_nonzero(tri < 0) == 0
    assert np.all(intersect_any(bvh, o, d, 0.0, 2.0))
    assert np.median(np.abs(naive.edge_distance(positions, triangles, tri, o, d))) < 1e-6
    assert np.all(np.abs(t - 1.0) < 1e-4)  # at the target: d = target - o, so t = 1


@pytest.mark.parametrize("threads", [1, 2])
def test_results_independent_of_thread_count(threads):
    positions, triangles = MESHES["displaced grid"]
    origins, directions = sample_rays(positions, triangles, seed=21)
    ref_bvh = build_bvh(positions, triangles)
    ref = intersect_closest(ref_bvh, origins, directions)
    ref_any = intersect_any(ref_bvh, origins, directions, 0.0, 1.0)
    previous = numba.get_num_threads()
    numba.set_num_threads(min(threads, numba.config.NUMBA_NUM_THREADS))
    try:
        bvh = build_bvh(positions, triangles)
        got = intersect_closest(bvh, origins, directions)
        got_any = intersect_any(bvh, origins, directions, 0.0, 1.0)
    finally:
        numba.set_num_threads(previous)
    for a, b in zip(bvh, ref_bvh, strict=True):
        assert a.tobytes() == b.tobytes()
    for a, b in zip(got, ref, strict=True):
        assert a.tobytes() == b.tobytes()  # bit for bit
    assert got_any.tobytes() == ref_any.tobytes()


def test_offset_matches_wachter_binder_formula():
    # Wächter & Binder 2019, listing 6-1: 256 ulps per unit normal away from the origin,
    # 1/65536 per unit normal where |coordinate| < 1/32.
    points = np.array([[1000.0, -1000.0, 0.0], [0.01, 2.0, -3.0]], np.float32)
    normals = np.array([[0.0, 0.6, 0.8], [1.0, -0.5, 0.5]], np.float32)
    got = offset_origins(points, normals)
    # By hand: ulp is 2^-14 in [512, 1024), 2^-23 in [1, 2), 2^-22 in [2, 4); the step is
    # int(256·n) ulps away from zero for n > 0 (toward zero for n < 0 on positive coordinates).
    expected = np.array(
        [
            [1000.0, -1000.0 + 153 * 2.0**-14, 0.8 / 65536],
            [0.01 + 1.0 / 65536, 2.0 - 128 * 2.0**-23, -3.0 + 128 * 2.0**-22],
        ]
    )
    np.testing.assert_array_equal(got, expected.astype(np.float32))


def shadow_acne(positions, triangles, eye, light_dir, offset):
    """Camera rays at the mesh, shadow rays from each hit toward a directional light on the same
    side: fraction of shadow rays that hit the mesh itself (which faces the light: should be 0)."""
    bvh = build_bvh(positions, triangles)
    rng = np.random.default_rng(0)
    tri = positions[triangles].astype(np.float64)
    k = rng.integers(len(triangles), size=20000)
    w = rng.dirichlet((1, 1, 1), 20000)
    aim = np.einsum("ri,rij->rj", w, tri[k])
    origins = np.broadcast_to(np.float32(eye), aim.shape).astype(np.float32)
    t, hit_tri, u, v = intersect_closest(bvh, origins, (aim - eye).astype(np.float32))
    assert np.all(hit_tri >= 0)
    p = positions[triangles[hit_tri]]  # float32, as the renderer would rebuild it
    u, v = u[:, None], v[:, None]
    points = ((1 - u - v) * p[:, 0] + u * p[:, 1] + v * p[:, 2]).astype(np.float32)
    n = np.cross(p[:, 1] - p[:, 0], p[:, 2] - p[:, 0]).astype(np.float64)
    n /= np.linalg.norm(n, axis=1, keepdims=True)
    n *= np.sign(n @ light_dir)[:, None]  # the outgoing side: toward the light
    start = offset_origins(points, n.astype(np.float32)) if offset else points
    to_light = np.broadcast_to(np.float32(light_dir), start.shape)
    return intersect_any(bvh, start, to_light, 0.0, np.inf).mean()


def tilted_quad(centre, size, seed):
    """Two triangles forming a square of side ``size`` around ``centre``, randomly oriented."""
    q, _ = np.linalg.qr(np.random.default_rng(seed).standard_normal((3, 3)))
    corners = np.array([[-1, -1, 0], [1, -1, 0], [1, 1, 0], [-1, 1, 0]]) * size / 2
    positions = (np.asarray(centre) + corners @ q.T).astype(np.float32)
    return positions, np.array([[0, 1, 2], [0, 2, 3]], np.int32), q[:, 2]


@pytest.mark.parametrize(
    "centre, size", [((600.0, -500.0, 620.0), 100.0), ((0.004, -0.002, 0.001), 1e-3)],
    ids=["plane 1 km away", "1 mm triangle pair"],
)  # fmt: skip
def test_offset_prevents_self_intersection(centre, size):
    positions, triangles, normal = tilted_quad(centre, size, seed=4)
    eye = np.asarray(centre) + 2.0 * size * normal
    # A light from the camera's side, at a grazing 10 degrees over the surface.
    tangent = np.cross(normal, [0.0, 0.0, 1.0])
    tangent /= np.linalg.norm(tangent)
    light = np.cos(np.radians(10)) * tangent + np.sin(np.radians(10)) * normal
    # Control: without the offset, many shadow rays hit their own surface (so the test can fail).
    assert shadow_acne(positions, triangles, eye, light, offset=False) > 0.05
    assert shadow_acne(positions, triangles, eye, light, offset=True) == 0.0


def test_sah_constants_shape_the_tree():
    # SAH (Wald 2007): a node becomes a leaf when c_isect·N <= c_trav + c_isect·(...); dearer
    # traversal therefore gives fewer, fuller leaves and a lower count of nodes.
    positions, triangles = icosphere(4)
    cheap = build_bvh(positions, triangles, cost_traversal=0.125, max_leaf=MAX_LEAF)
    dear = build_bvh(positions, triangles, cost_traversal=4.0, max_leaf=MAX_LEAF)
    assert len(dear.node_links) < len(cheap.node_links)
    # Both trees hold every triangle exactly once and give the same hits.
    for bvh in (cheap, dear):
        assert np.array_equal(np.sort(bvh.tri_ids), np.arange(len(triangles)))
    origins, directions = sample_rays(positions, triangles, seed=2)
    a = intersect_closest(cheap, origins, directions)
    b = intersect_closest(dear, origins, directions)
    assert np.mean(a[1] == b[1]) > 0.999
    # Cost of the tree is below brute force (c_isect·n) by orders of magnitude.
    assert sah_cost(cheap) < 0.01 * len(triangles)


def test_traversal_data_stays_within_64_bytes_per_triangle():
    # The memory budget (#4), on the mesh that needs the most nodes per triangle: a finely
    # tessellated sphere of equal triangles. 36 bytes are the vertices and 4 the triangle ids, so
    # the default SAH constants must keep the node records under 24 bytes per triangle.
    positions, triangles = icosphere(5)
    bvh = build_bvh(positions, triangles)
    assert traversal_bytes(bvh) <= 64 * len(triangles)
    # (the vertices' leaf blocks end in one padding row of 36 bytes)
    assert bvh.tri_verts.nbytes + bvh.tri_ids.nbytes == 40 * len(triangles) + 36


def test_child_boxes_contain_their_triangles():
    positions, triangles = MESHES["soup"]
    bvh = build_bvh(positions, triangles, max_leaf=4)
    lo_hi = triangle_corners(bvh)
    for node in range(len(bvh.node_links)):
        for j in range(4):
            link = bvh.node_links[node, LINK_ROW, j]
            box = bvh.node_bounds[node, :6, j]
            if link < 0:
                code = ~link
                tris = lo_hi[code >> 4 : (code >> 4) + (code & 15)]
                assert (code & 15) <= 4
                if len(tris):
                    assert np.all(tris.min(1) >= box[0::2]) and np.all(tris.max(1) <= box[1::2])
            else:
                child = bvh.node_bounds[link, :6]
                assert np.all(child[0::2].min(1) >= box[0::2])
                assert np.all(child[1::2].max(1) <= box[1::2])


def test_degenerate_inputs():
    # No triangles: every ray misses.
    empty = build_bvh(np.zeros((0, 3), np.float32), np.zeros((0, 3), np.int32))
    o = np.zeros((3, 3), np.float32)
    d = np.eye(3, dtype=np.float32)
    t, tri, _, _ = intersect_closest(empty, o, d)
    assert np.all(tri == -1) and np.all(np.isinf(t))
    assert not intersect_any(empty, o, d).any()
    # 40 copies of one triangle (coincident centroids) plus a zero-area one and one with a NaN
    # vertex: the copies are all found, the lowest... any copy is a valid closest hit.
    p = np.array([[0, 0, 1], [1, 0, 1], [0, 1, 1], [0.5, 0.5, 1], [np.nan, 0, 0]], np.float32)
    tris = np.array([[0, 1, 2]] * 40 + [[0, 3, 3], [0, 1, 4]], np.int32)
    bvh = build_bvh(p, tris)
    assert len(bvh.tri_ids) == 41 and 41 not in bvh.tri_ids
    t, tri, u, v = intersect_closest(bvh, np.array([[0.2, 0.3, 0.0]], np.float32),
                                     np.array([[0, 0, 1]], np.float32))  # fmt: skip
    assert 0 <= tri[0] < 40 and t[0] == 1.0
    # Möller & Trumbore 1997, by hand: o=(0.2,0.3,·), triangle (0,0),(1,0),(0,1) → u 0.2, v 0.3.
    assert abs(u[0] - 0.2) < 1e-6 and abs(v[0] - 0.3) < 1e-6
    with pytest.raises(ValueError):
        build_bvh(p, np.array([[0, 1, 9]], np.int32))


@numba.njit
def _trace_one_by_one(node_bounds, node_links, tri_verts, tri_ids, origins, directions, t_max):
    """The single-ray device functions (the shading kernels' entry points), ray after ray."""
    stack = new_stack()
    r = origins.shape[0]
    t_out = np.empty(r, np.float32)
    k_out = np.empty(r, np.int32)
    u_out = np.empty(r, np.float32)
    v_out = np.empty(r, np.float32)
    occluded = np.empty(r, np.bool_)
    for i in range(r):
        o, d = origins[i], directions[i]
        t, k, u, v = closest_hit_one(node_bounds, node_links, tri_verts, tri_ids, o[0], o[1], o[2],
                                     d[0], d[1], d[2], np.float32(0.0), np.float32(np.inf), stack)  # fmt: skip
        t_out[i], k_out[i], u_out[i], v_out[i] = t, k, u, v
        occluded[i] = any_hit_one(node_bounds, node_links, tri_verts, o[0], o[1], o[2], d[0], d[1],
                                  d[2], np.float32(0.0), t_max[i], stack)  # fmt: skip
    return t_out, k_out, u_out, v_out, occluded


@numba.njit
def _entry_keys(distances, links):
    out = np.empty(len(distances), np.int64)
    for i in range(len(distances)):
        out[i] = simd.entry_key(distances[i], links[i])
    return out


def test_entry_keys_sort_like_their_distances_and_keep_the_link():
    # IEEE 754-2008 §5.10 (totalOrder): sign-magnitude floats order as integers once negative
    # values are mirrored; -0 sorts just below +0. Traversal sorts children by these keys.
    distances = np.array([-np.inf, -3.5, -1e-40, -0.0, 0.0, 1e-45, 1e-3, 1.0, 1.0000001, 7e37,
                          np.inf], np.float32)  # fmt: skip
    links = np.array([5, -1, 0, 2**31 - 1, -(2**31), 7, -9, 3, 3, 11, -1], np.int32)
    keys = _entry_keys(distances, links)
    assert np.all(np.diff(keys) > 0)
    low = (keys & 0xFFFFFFFF).astype(np.uint32).view(np.int32)
    assert np.array_equal(low, links)
    # Equal distances order by link bits (unsigned), so a tie never depends on the visit order.
    same = _entry_keys(np.ones(2, np.float32), np.array([4, -1], np.int32))
    assert same[0] < same[1]


@numba.njit
def _four_against_one(blocks, count, origins, directions, t_max):
    """Each ray against a block of ``count`` triangles: simd.triangles4's lanes and the scalar
    test of every triangle, side by side: (rays, 2, 3, 4) float64 [vector | scalar][t, u, v]."""
    scalar = np.empty((count, 9), np.float32)
    for j in range(count):
        for r in range(9):
            scalar[j, r] = blocks[r * count + j]
    out = np.full((len(origins), 2, 3, 4), -1.0)
    verts = blocks.reshape(-1, 9)
    for i in range(len(origins)):
        o, d = origins[i], directions[i]
        kx, ky, kz, okx, oky, okz, sx, sy, sz = ray_shear(
            np.float64(o[0]), np.float64(o[1]), np.float64(o[2]),
            np.float64(d[0]), np.float64(d[1]), np.float64(d[2]),
        )  # fmt: skip
        lanes = simd.triangles4(verts, 0, count, kx, ky, kz, okx, oky, okz, sx, sy,
                                sz, 0.0, np.float64(t_max[i]))  # fmt: skip
        for j in range(count):
            out[i, 0, 0, j], out[i, 0, 1, j], out[i, 0, 2, j] = lanes[j], lanes[4 + j], lanes[8 + j]
            t, u, v = intersect_triangle(scalar, j, kx, ky, kz, okx, oky, okz, sx, sy, sz, 0.0,
                                         np.float64(t_max[i]))  # fmt: skip
            out[i, 1, 0, j], out[i, 1, 1, j], out[i, 1, 2, j] = t, u, v
    return out


@pytest.mark.parametrize("count", [1, 2, 3, 4])
def test_four_triangle_test_equals_the_scalar_test_bit_for_bit(count):
    # The leaf test runs Woop, Benthin & Wald's watertight test (JCGT 2013) on four triangles at
    # once; every lane must give exactly what the one-triangle version gives (same operations,
    # same order), so the trees' answers do not depend on how a leaf's triangles are grouped.
    # Lanes past ``count`` read whatever follows the block and are ignored.
    positions, triangles = MESHES["soup"]
    block = triangles[:count]
    origins, directions = sample_rays(positions, block, seed=5)  # aimed at these triangles
    t_max = np.random.default_rng(6).uniform(0.5, 4.0, len(origins)).astype(np.float32)
    rows = positions[block].reshape(count, 9).T.reshape(-1)  # the leaf-block layout
    after = np.full(9 * 4 - len(rows) % 9, np.nan, np.float32)  # what lanes past count read
    out = _four_against_one(np.concatenate([rows, after]), count, origins, directions, t_max)
    vector, scalar = out[:, 0, :, :count], out[:, 1, :, :count]
    hit = np.isfinite(scalar[:, 0])
    assert hit.sum() > 100 and (~hit).sum() > 100  # the rays both hit and miss
    assert vector.tobytes() == scalar.tobytes()


def test_batches_equal_single_ray_functions():
    # The batch kernels interleave several rays per thread; each ray must still get exactly the
    # single-ray answer (the shading kernels call those directly).
    positions, triangles = MESHES["furniture"]
    origins, directions = sample_rays(positions, triangles, seed=31)
    t_max = np.random.default_rng(2).uniform(0.0, 3.0, len(origins)).astype(np.float32)
    bvh = build_bvh(positions, triangles)
    *one, occluded_one = _trace_one_by_one(*bvh, origins, directions, t_max)
    batch = intersect_closest(bvh, origins, directions)
    for a, b in zip(batch, one, strict=True):
        assert a.tobytes() == b.tobytes()
    assert intersect_any(bvh, origins, directions, 0.0, t_max).tobytes() == occluded_one.tobytes()
    # So small a tree sends even random rays through closest_hits one after another; the lanes
    # must give the same answers.
    assert traverse.fits_in_cache(bvh.node_bounds, bvh.tri_verts)
    r = len(origins)
    lanes = [np.empty(r, np.float32), np.empty(r, np.int32), np.empty(r, np.float32),
             np.empty(r, np.float32)]  # fmt: skip
    t0 = np.zeros(r, np.float32)
    traverse.closest_hits_range(*bvh, origins, directions, t0, np.full(r, np.inf, np.float32), 0,
                                r, *lanes)  # fmt: skip
    for a, b in zip(lanes, batch, strict=True):
        assert a.tobytes() == b.tobytes()
    big = np.empty((traverse.IN_CACHE_BYTES // 36 + 1, 9), np.float32)  # 36 bytes a triangle
    assert not traverse.fits_in_cache(bvh.node_bounds, big)


def pinhole_rays(positions, size, fov_deg=40.0):
    """Row-major camera rays of a size×size pinhole looking at the mesh from above the front."""
    lo, hi = positions.min(0), positions.max(0)
    eye = (lo + hi) / 2 + np.array([0.4, -1.0, 0.8]) * np.linalg.norm(hi - lo)
    forward = ((lo + hi) / 2 - eye) / np.linalg.norm((lo + hi) / 2 - eye)
    right = np.cross(forward, [0.0, 0.0, 1.0])
    right /= np.linalg.norm(right)
    up = np.cross(right, forward)
    s = ((np.arange(size) + 0.5) / size * 2 - 1) * np.tan(np.radians(fov_deg / 2))
    py, px = np.meshgrid(-s, s, indexing="ij")
    d = (forward + px[..., None] * right + py[..., None] * up).reshape(-1, 3)
    return np.broadcast_to(eye, d.shape).astype(np.float32), d.astype(np.float32)


def test_coherent_chunks_are_traced_in_turn_with_the_same_answers():
    # Chunks of camera rays go through the ray-after-ray path of closest_hits, random rays through
    # the lanes unless the tree fits in a cache (this one does: the lanes are run directly below);
    # both must give every ray the single-ray functions' answer, bit for bit.
    positions, triangles = MESHES["furniture"]
    bvh = build_bvh(positions, triangles)
    scale = traverse.coherence_scale(bvh.node_bounds, bvh.tri_verts)
    cam_o, cam_d = pinhole_rays(positions, 512)
    rnd_o, rnd_d = sample_rays(positions, triangles, seed=41)
    chunk = traverse.CHUNK
    assert traverse.is_coherent(cam_o, cam_d, 0, chunk, scale)  # 0.0014 rad per pixel
    assert not traverse.is_coherent(rnd_o, rnd_d, 0, chunk, scale)
    wide_o, wide_d = pinhole_rays(positions, 128)  # 0.0055 rad per pixel: lanes
    assert not traverse.is_coherent(wide_o, wide_d, 0, chunk, scale)
    # Camera rays that start from scattered points are not coherent either.
    moved = cam_o + np.random.default_rng(4).uniform(-0.1, 0.1, cam_o.shape).astype(np.float32)
    assert not traverse.is_coherent(moved, cam_d, 0, chunk, scale)
    # A tree too large for the cache is always traced in lanes (they overlap its cache misses).
    assert 0.0 < scale and traverse.coherence_scale(bvh.node_bounds, np.empty((1 << 20, 9), np.float32)) == 0.0
    assert not traverse.is_coherent(cam_o, cam_d, 0, chunk, 0.0)
    middle = slice(len(cam_o) // 2, len(cam_o) // 2 + 8 * chunk)  # 16 scanlines across the model
    origins = np.ascontiguousarray(np.concatenate([cam_o[middle], rnd_o]))
    directions = np.ascontiguousarray(np.concatenate([cam_d[middle], rnd_d]))
    t_max = np.random.default_rng(6).uniform(0.0, 3.0, len(origins)).astype(np.float32)
    *one, occluded_one = _trace_one_by_one(*bvh, origins, directions, t_max)
    hits = intersect_closest(bvh, origins, directions)
    for a, b in zip(hits, one, strict=True):
        assert a.tobytes() == b.tobytes()
    assert intersect_any(bvh, origins, directions, 0.0, t_max).tobytes() == occluded_one.tobytes()
    assert 0.05 < (hits[1][: 8 * chunk] >= 0).mean() < 0.95  # the camera sees model and background
    # The lane kernels agree with the in-turn ones on the coherent chunk too.
    r = 8 * chunk
    lanes = [np.empty(r, np.float32), np.empty(r, np.int32), np.empty(r, np.float32),
             np.empty(r, np.float32)]  # fmt: skip
    t0, t1 = np.zeros(r, np.float32), np.full(r, np.inf, np.float32)
    traverse.closest_hits_range(*bvh, origins[:r], directions[:r], t0, t1, 0, r, *lanes)
    for a, b in zip(lanes, hits, strict=True):
        assert a.tobytes() == b[:r].tobytes()


def binary_depth(positions, triangles):
    """Levels of the binary tree the build makes before collapsing it (root = 1)."""
    prims = bvh_build.triangle_records(positions, triangles)
    left = bvh_build.build_binary(prims, 16, 1.0, 1.0, 1)[2]
    depth = np.ones(len(left), int)
    for node in range(len(left)):  # children always come after their parent
        if left[node] >= 0:
            depth[left[node] : left[node] + 2] = depth[node] + 1
    return depth.max()


def test_deep_tree_from_lopsided_geometry():
    # Triangles at x = 2^k: binned SAH can only peel a few off the far end per split, so the tree
    # gets about ten times deeper than a balanced one (log2 120 = 7). It must stay within the
    # build's depth bound (SAH down to depth 64, then halving splits), which sizes the traversal
    # stack, and still give brute-force answers.
    n = 120
    x = 2.0 ** np.arange(n)
    p = np.stack(
        [np.stack([x, x, x], 1), np.tile([-1.0, 1.0, -1.0], (n, 1)),
         np.tile([-1.0, -1.0, 1.0], (n, 1))], -1
    ).reshape(-1, 3)  # fmt: skip
    positions, triangles = p.astype(np.float32), np.arange(3 * n, dtype=np.int32).reshape(n, 3)
    bvh = build_bvh(positions, triangles, max_leaf=1)
    assert 30 < binary_depth(positions, triangles) <= 64 + 8
    rng = np.random.default_rng(8)
    origins = np.zeros((2000, 3), np.float32)
    origins[:, 0] = (2.0 ** rng.uniform(-1, n, 2000)).astype(np.float32)
    origins[:, 1:] = rng.uniform(-0.4, -0.3, (2000, 2))
    directions = np.tile(np.float32([1.0, 0.0, 0.0]), (2000, 1))
    directions[1000:] *= -1
    ours = intersect_closest(bvh, origins, directions)
    ref = naive.closest_hits(positions, triangles, origins, directions)
    assert np.array_equal(ours[1], ref[1])
    assert np.count_nonzero(ours[1] >= 0) > 1000


def test_bvh_survives_pickling():
    # Worker processes receive the BVH pickled: node_links then arrives as its own copy instead of
    # a view of node_bounds, and tracing must give the same answers.
    positions, triangles = MESHES["icosphere"]
    origins, directions = sample_rays(positions, triangles, seed=41)
    bvh = build_bvh(positions, triangles)
    copy = pickle.loads(pickle.dumps(bvh))
    for a, b in zip(intersect_closest(bvh, origins, directions),
                    intersect_closest(copy, origins, directions), strict=True):  # fmt: skip
        assert a.tobytes() == b.tobytes()
