"""Binned-SAH BVH build (Wald 2007) and its flattening into 4-wide nodes.

Build: top-down over triangle records (box, centre), reordered in place. At each node the centres
are sorted into ``bins`` equal bins per axis; every plane between bins is scored with the surface
area heuristic (Goldsmith & Salmon 1987; MacDonald & Booth 1990)

    C = c_trav + c_isect · (A_L·B(N_L) + A_R·B(N_R)) / A,    B(N) = ⌈N / BLOCK⌉,

and the node becomes a leaf when C_leaf = c_isect · B(N) is no worse (and N <= max_leaf). A leaf's
triangles are tested BLOCK at a time (``simd.triangles4``), so c_isect is the cost of one block
test and a leaf of 1 to BLOCK triangles costs the same (block-granular leaf costs, as in Wald et
al., "Embree: A Kernel Framework for Efficient CPU Ray Tracing", ACM TOG 33(4), 2014; from
memory). Nodes with
more than PAR_MIN triangles are split first, binning in parallel; the subtrees below them are then
built in parallel. Counts and min/max are exact and the schedule depends only on triangle counts,
so the tree is the same for any number of threads.

Collapse: the binary tree becomes a 4-wide one by repeatedly opening the child with the largest
surface area. A would-be wide node holding only two leaves becomes a single leaf when SAH with
the cost of a whole wide node favours it (``merges_into_leaf``), which saves memory.

Flat layout (what traversal reads; ``shots.accel`` packs it into 128-byte node records):
    bounds : (m, 6, WIDTH) float32, rows min x, max x, min y, max y, min z, max z, one column per
        child (structure of arrays, so the four slab tests run side by side). Empty slots have
        min = +inf, max = -inf and are never entered.
    links : (m, WIDTH) int32. >= 0: index of an inner node. < 0: a leaf, ~link = start << 4 |
        count (triangles start .. start+count-1 of the leaf-ordered arrays); -1 = empty slot.
Node 0 is the root; nodes are in depth-first order.
"""

from __future__ import annotations

import numpy as np
from numba import njit, prange

WIDTH = 4
NODE_ROWS, LINK_ROW = 8, 6  # node record: 6 rows of child bounds, the links, padding
LEAF_BITS = 4
BLOCK = 4  # triangles tested together (simd.triangles4): the granularity of a leaf's cost
MAX_LEAF = (1 << LEAF_BITS) - 1  # triangles per leaf that the link encoding can hold
SAH_MAX_DEPTH = 64  # below this depth, halving splits bound the tree depth
TASK_STACK = 256


# Columns of a primitive record: box min (0..2), box max (3..5), box centre (6..8).
P_LO, P_HI, P_C = 0, 3, 6
PAR_MIN = 1 << 15  # nodes with more triangles bin in parallel and are split before subtrees
PAR_CHUNKS = 16  # fixed chunks for parallel binning (not the thread count: results never vary)


@njit(cache=True, parallel=True)
def triangle_records(positions, triangles):
    """One record per triangle: (n, 9) float32 = box min, box max, box centre."""
    n = triangles.shape[0]
    prims = np.empty((n, 9), np.float32)
    for k in prange(n):
        for a in range(3):
            p0 = positions[triangles[k, 0], a]
            p1 = positions[triangles[k, 1], a]
            p2 = positions[triangles[k, 2], a]
            lo = min(p0, p1, p2)
            hi = max(p0, p1, p2)
            prims[k, P_LO + a] = lo
            prims[k, P_HI + a] = hi
            prims[k, P_C + a] = np.float32(0.5) * (lo + hi)
    return prims


@njit(cache=True)
def half_area(box):
    """Half the surface area of a box stored as (min x, y, z, max x, y, z)."""
    dx = np.float64(box[3]) - box[0]
    dy = np.float64(box[4]) - box[1]
    dz = np.float64(box[5]) - box[2]
    return dx * dy + dy * dz + dz * dx


@njit(cache=True)
def empty_box(box):
    """Set a (min xyz, max xyz) box to the empty one, ready to grow."""
    for j in range(3):
        box[j] = np.inf
        box[3 + j] = -np.inf


@njit(cache=True)
def range_bounds(prims, start, end, box, cbox):
    """Bounds of the boxes and of the centres of prims[start:end]."""
    empty_box(box)
    empty_box(cbox)
    for k in range(start, end):
        for a in range(3):
            box[a] = min(box[a], prims[k, P_LO + a])
            box[3 + a] = max(box[3 + a], prims[k, P_HI + a])
            cbox[a] = min(cbox[a], prims[k, P_C + a])
            cbox[3 + a] = max(cbox[3 + a], prims[k, P_C + a])


@njit(cache=True)
def bin_scales(cbox, bins, scale):
    """Per axis: centroid → bin factor (0 where the centres do not spread)."""
    for a in range(3):
        extent = np.float64(cbox[3 + a]) - cbox[a]
        scale[a] = bins * (1.0 - 1e-6) / extent if extent > 0.0 else 0.0


@njit(cache=True)
def bin_of(c, c_lo, scale, bins):
    """Bin of centroid coordinate ``c`` (same expression in binning and partitioning)."""
    b = int((np.float64(c) - c_lo) * scale)
    return min(max(b, 0), bins - 1)


@njit(cache=True)
def bin_prims(prims, start, end, cbox, scale, bins, counts, boxes):
    """Add prims[start:end] to the bins of all three axes: counts (3, bins) and boxes
    (3, bins, 6) (which the caller has cleared)."""
    for k in range(start, end):
        for a in range(3):
            b = bin_of(prims[k, P_C + a], cbox[a], scale[a], bins)
            counts[a, b] += 1
            for j in range(3):
                boxes[a, b, j] = min(boxes[a, b, j], prims[k, P_LO + j])
                boxes[a, b, 3 + j] = max(boxes[a, b, 3 + j], prims[k, P_HI + j])


@njit(cache=True)
def clear_bins(counts, boxes, bins):
    for a in range(3):
        for b in range(bins):
            counts[a, b] = 0
            empty_box(boxes[a, b])


@njit(cache=True, parallel=True)
def bin_chunks(prims, start, end, cbox, scale, bins, part_counts, part_boxes):
    """``bin_prims`` on PAR_CHUNKS chunks of prims[start:end] in parallel, one set of bins each."""
    size = (end - start + PAR_CHUNKS - 1) // PAR_CHUNKS
    for c in prange(PAR_CHUNKS):
        clear_bins(part_counts[c], part_boxes[c], bins)
        lo = start + c * size
        bin_prims(prims, lo, min(end, lo + size), cbox, scale, bins, part_counts[c],
                  part_boxes[c])  # fmt: skip


@njit(cache=True)
def bin_prims_parallel(prims, start, end, cbox, scale, bins, counts, boxes, part_counts,
                       part_boxes):  # fmt: skip
    """``bin_prims`` over fixed chunks in parallel, then merged: counts and min/max merge
    exactly, so the bins are identical to the serial ones."""
    bin_chunks(prims, start, end, cbox, scale, bins, part_counts, part_boxes)
    for c in range(PAR_CHUNKS):
        for a in range(3):
            for b in range(bins):
                counts[a, b] += part_counts[c, a, b]
                for j in range(3):
                    boxes[a, b, j] = min(boxes[a, b, j], part_boxes[c, a, b, j])
                    boxes[a, b, 3 + j] = max(boxes[a, b, 3 + j], part_boxes[c, a, b, 3 + j])


@njit(cache=True, inline="always")
def blocks(count):
    """Block tests a leaf of ``count`` triangles takes."""
    return (count + BLOCK - 1) // BLOCK


@njit(cache=True)
def best_split(counts, boxes, scale, bins, c_trav, c_isect, area, n, right_area, run):
    """Score every bin plane of every axis; return (cost, axis, plane) of the cheapest, plane =
    first bin of the right side, cost = inf when no plane separates the centres."""
    best_cost, best_axis, best_plane = np.inf, -1, -1
    for a in range(3):
        if scale[a] == 0.0:
            continue
        empty_box(run)  # sweep from the right: area of bins plane..bins-1
        for b in range(bins - 1, 0, -1):
            for j in range(3):
                run[j] = min(run[j], boxes[a, b, j])
                run[3 + j] = max(run[3 + j], boxes[a, b, 3 + j])
            right_area[b] = half_area(run)
        empty_box(run)  # sweep from the left and score each plane
        n_left = 0
        for plane in range(1, bins):
            b = plane - 1
            n_left += counts[a, b]
            for j in range(3):
                run[j] = min(run[j], boxes[a, b, j])
                run[3 + j] = max(run[3 + j], boxes[a, b, 3 + j])
            n_right = n - n_left
            if n_left == 0 or n_right == 0:
                continue
            cost = c_trav + c_isect * (half_area(run) * blocks(n_left)
                                       + right_area[plane] * blocks(n_right)) / area  # fmt: skip
            if cost < best_cost:
                best_cost, best_axis, best_plane = cost, a, plane
    return best_cost, best_axis, best_plane


@njit(cache=True)
def swap_records(prims, order, i, j):
    for c in range(9):
        prims[i, c], prims[j, c] = prims[j, c], prims[i, c]
    order[i], order[j] = order[j], order[i]


@njit(cache=True)
def grow(box, cbox, prims, k):
    for a in range(3):
        box[a] = min(box[a], prims[k, P_LO + a])
        box[3 + a] = max(box[3 + a], prims[k, P_HI + a])
        cbox[a] = min(cbox[a], prims[k, P_C + a])
        cbox[3 + a] = max(cbox[3 + a], prims[k, P_C + a])


@njit(cache=True)
def partition(prims, order, start, end, axis, c_lo, scale, bins, plane, boxes):
    """Reorder prims[start:end] so those with bin < plane come first; return the middle.
    ``boxes`` (4, 6) receives the left box, left centre bounds, right box, right centre bounds."""
    for r in range(4):
        empty_box(boxes[r])
    i, j = start, end - 1
    while i <= j:
        if bin_of(prims[i, P_C + axis], c_lo, scale, bins) < plane:
            grow(boxes[0], boxes[1], prims, i)
            i += 1
        else:
            grow(boxes[2], boxes[3], prims, i)
            swap_records(prims, order, i, j)
            j -= 1
    return i


@njit(cache=True)
def halving_split(prims, start, end, boxes):
    """Split prims[start:end] in two halves as they lie; return the middle. Used when the
    centres coincide (no plane separates them) or the tree got too deep for SAH: halving bounds
    the depth."""
    mid = (start + end) // 2
    range_bounds(prims, start, mid, boxes[0], boxes[1])
    range_bounds(prims, mid, end, boxes[2], boxes[3])
    return mid


@njit(cache=True)
def split_node(prims, order, start, end, depth, box, cbox, bins, c_trav, c_isect, max_leaf,
               counts, bin_boxes, scratch, scale, part_counts, part_boxes):  # fmt: skip
    """Decide how to split one node. Returns the middle index, or -1 for a leaf; the children's
    boxes and centre bounds land in scratch[0:4]. Binning runs in parallel when per-chunk bins
    ``part_counts``, ``part_boxes`` are given (non-empty)."""
    count = end - start
    if count <= 1:
        return -1
    if depth < SAH_MAX_DEPTH:
        bins = min(bins, count)  # more bins than triangles only costs time
        bin_scales(cbox, bins, scale)
        if scale[0] + scale[1] + scale[2] > 0.0:
            clear_bins(counts, bin_boxes, bins)
            if part_counts.shape[0] > 0:
                bin_prims_parallel(prims, start, end, cbox, scale, bins, counts, bin_boxes,
                                   part_counts, part_boxes)  # fmt: skip
            else:
                bin_prims(prims, start, end, cbox, scale, bins, counts, bin_boxes)
            area = half_area(box)
            if area <= 0.0:
                area = 1.0  # a degenerate box: any split is as good as any other
            cost, axis, plane = best_split(counts, bin_boxes, scale, bins, c_trav, c_isect, area,
                                           count, scratch[4], scratch[5])  # fmt: skip
            if count <= max_leaf and cost >= c_isect * blocks(count):
                return -1
            if axis >= 0:
                return partition(prims, order, start, end, axis, cbox[axis], scale[axis], bins,
                                 plane, scratch)  # fmt: skip
    if count <= max_leaf:
        return -1
    return halving_split(prims, start, end, scratch)


@njit(cache=True)
def copy6(dst, src):
    """dst[:6] = src[:6] (explicit: slice assignment is slow to compile)."""
    for j in range(6):
        dst[j] = src[j]


@njit(cache=True, inline="always")
def set3(dst, a, b, c):
    dst[0], dst[1], dst[2] = a, b, c


@njit(cache=True)
def build_subtree(prims, order, root, start, end, depth, box, cbox, first_free, bins, c_trav,
                  c_isect, max_leaf, node_box, node_left, node_start, node_count):  # fmt: skip
    """Build the subtree of node ``root`` over prims[start:end] serially, taking new nodes from
    ``first_free`` on (at most 2·count - 2 of them). Returns the next free node."""
    counts = np.zeros((3, bins), np.int64)
    bin_boxes = np.empty((3, bins, 6), np.float32)
    scratch = np.empty((6, max(bins, 6)), np.float32)
    scale = np.empty(3, np.float64)
    no_counts = np.zeros((0, 3, bins), np.int64)  # serial binning
    no_boxes = np.zeros((0, 3, bins, 6), np.float32)
    task_node = np.empty(TASK_STACK, np.int64)
    task_range = np.empty((TASK_STACK, 3), np.int64)  # start, end, depth
    task_box = np.empty((TASK_STACK, 12), np.float32)  # box, centre bounds
    task_node[0] = root
    set3(task_range[0], start, end, depth)
    copy6(task_box[0, :6], box)
    copy6(task_box[0, 6:], cbox)
    sp = 1
    free = first_free
    while sp > 0:
        sp -= 1
        node = task_node[sp]
        lo, hi, d = task_range[sp, 0], task_range[sp, 1], task_range[sp, 2]
        copy6(node_box[node], task_box[sp, :6])
        node_start[node] = lo
        node_count[node] = hi - lo
        mid = split_node(prims, order, lo, hi, d, task_box[sp, :6], task_box[sp, 6:], bins,
                         c_trav, c_isect, max_leaf, counts, bin_boxes, scratch, scale, no_counts,
                         no_boxes)  # fmt: skip
        if mid < 0:
            continue
        node_left[node] = free
        node_count[node] = 0
        # Right child below left on the stack, so the left subtree is built first.
        task_node[sp] = free + 1
        set3(task_range[sp], mid, hi, d + 1)
        copy6(task_box[sp, :6], scratch[2, :6])
        copy6(task_box[sp, 6:], scratch[3, :6])
        task_node[sp + 1] = free
        set3(task_range[sp + 1], lo, mid, d + 1)
        copy6(task_box[sp + 1, :6], scratch[0, :6])
        copy6(task_box[sp + 1, 6:], scratch[1, :6])
        sp += 2
        free += 2
    return free


@njit(cache=True, parallel=True)
def build_subtrees(prims, order, sub_node, sub_range, sub_box, first, bins, c_trav, c_isect,
                   max_leaf, node_box, node_left, node_start, node_count):  # fmt: skip
    """Build every collected subtree, in parallel (each owns its triangles and node slots)."""
    for k in prange(sub_node.shape[0]):
        build_subtree(prims, order, sub_node[k], sub_range[k, 0], sub_range[k, 1],
                      sub_range[k, 2], sub_box[k, :6], sub_box[k, 6:], first[k], bins, c_trav,
                      c_isect, max_leaf, node_box, node_left, node_start, node_count)  # fmt: skip


@njit(cache=True)
def build_binary(prims, bins, c_trav, c_isect, max_leaf):
    """Binned-SAH binary BVH over triangle records (reordered in place into leaf order).

    Nodes with more than PAR_MIN triangles are split first, one at a time with parallel binning;
    the subtrees below them are then built in parallel, each into its own range of node slots.

    Returns
    -------
    order : (n,) int32, original triangle index of each record after reordering.
    node_box : (b, 6) float32 node bounds (min xyz, max xyz).
    node_left : (b,) int32, first of the two consecutive children, or -1 for a leaf.
    node_start, node_count : (b,) int32, leaf range. Unused slots have count 0 and no parent.
    """
    n = prims.shape[0]
    order = np.arange(n).astype(np.int32)
    cap = max(2 * n, 2)
    node_box = np.empty((cap, 6), np.float32)
    node_left = np.full(cap, -1, np.int32)
    node_start = np.zeros(cap, np.int32)
    node_count = np.zeros(cap, np.int32)
    box = np.empty(6, np.float32)
    cbox = np.empty(6, np.float32)
    range_bounds(prims, np.int64(0), n, box, cbox)  # not Literal[int](0): one specialisation
    # Top: split big nodes (the leftmost first); collect the subtrees left to build.
    counts = np.zeros((3, bins), np.int64)
    bin_boxes = np.empty((3, bins, 6), np.float32)
    scratch = np.empty((6, max(bins, 6)), np.float32)
    scale = np.empty(3, np.float64)
    part_counts = np.zeros((PAR_CHUNKS, 3, bins), np.int64)
    part_boxes = np.empty((PAR_CHUNKS, 3, bins, 6), np.float32)
    n_sub_max = 4 * (n // PAR_MIN) + 16  # lopsided splits stop the top phase early
    sub_node = np.empty(n_sub_max, np.int64)
    sub_range = np.empty((n_sub_max, 3), np.int64)
    sub_box = np.empty((n_sub_max, 12), np.float32)
    sub_node[0] = 0
    set3(sub_range[0], 0, n, 0)
    copy6(sub_box[0, :6], box)
    copy6(sub_box[0, 6:], cbox)
    n_sub = 1
    free = 1
    k = 0
    while k < n_sub:
        lo, hi, d = sub_range[k, 0], sub_range[k, 1], sub_range[k, 2]
        if hi - lo <= PAR_MIN or n_sub == n_sub_max:
            k += 1
            continue
        node = sub_node[k]
        copy6(node_box[node], sub_box[k, :6])
        node_start[node] = lo
        node_count[node] = hi - lo
        mid = split_node(prims, order, lo, hi, d, sub_box[k, :6], sub_box[k, 6:], bins, c_trav,
                         c_isect, max_leaf, counts, bin_boxes, scratch, scale, part_counts,
                         part_boxes)  # fmt: skip
        if mid < 0:
            k += 1
            continue
        node_left[node] = free
        node_count[node] = 0
        # Replace task k by its left child and append the right one.
        sub_node[k] = free
        set3(sub_range[k], lo, mid, d + 1)
        copy6(sub_box[k, :6], scratch[0, :6])
        copy6(sub_box[k, 6:], scratch[1, :6])
        sub_node[n_sub] = free + 1
        set3(sub_range[n_sub], mid, hi, d + 1)
        copy6(sub_box[n_sub, :6], scratch[2, :6])
        copy6(sub_box[n_sub, 6:], scratch[3, :6])
        n_sub += 1
        free += 2
    # Subtree k may use 2·count - 2 slots from first[k].
    first = np.empty(n_sub + 1, np.int64)
    first[0] = free
    for k in range(n_sub):
        first[k + 1] = first[k] + max(2 * (sub_range[k, 1] - sub_range[k, 0]) - 2, 0)
    build_subtrees(prims, order, sub_node[:n_sub], sub_range[:n_sub], sub_box[:n_sub], first,
                   bins, c_trav, c_isect, max_leaf, node_box, node_left, node_start,
                   node_count)  # fmt: skip
    used = first[n_sub]
    return order, node_box[:used], node_left[:used], node_start[:used], node_count[:used]


@njit(cache=True, inline="always")
def leaf_link(start, count):
    """Encode a leaf range as a negative link."""
    return ~((start << LEAF_BITS) | count)


@njit(cache=True)
def merges_into_leaf(node_box, node_left, node_count, c, c_trav, c_isect, max_leaf):
    """Whether binary node ``c``, whose children are both leaves, should rather be one leaf.

    Kept apart, the two leaves would need a wide node of their own with two of its WIDTH slots
    used; it costs a whole wide-node visit, about two binary levels (2·c_trav), which the binary
    SAH did not charge. Merging needs no new slot: the two leaf ranges are adjacent."""
    left = node_left[c]
    if left < 0 or node_left[left] >= 0 or node_left[left + 1] >= 0:
        return False
    n_left, n_right = node_count[left], node_count[left + 1]
    if n_left + n_right > max_leaf:
        return False
    area = half_area(node_box[c])
    if area <= 0.0:
        return True
    split = 2.0 * c_trav + c_isect * (
        half_area(node_box[left]) * blocks(n_left) + half_area(node_box[left + 1]) * blocks(n_right)
    ) / area
    return c_isect * blocks(n_left + n_right) <= split


@njit(cache=True)
def collapse_wide(node_box, node_left, node_start, node_count, c_trav, c_isect, max_leaf):
    """Collapse a binary BVH into WIDTH-wide nodes (repeatedly open the child with the largest
    surface area), laid out depth first. A child that would become a wide node holding just two
    leaves becomes one leaf instead when ``merges_into_leaf`` says so.

    Returns
    -------
    node_bounds : (m, 6, WIDTH) float32 and node_links : (m, WIDTH) int32 (see module docstring).
    """
    cap = max(node_box.shape[0], 1)
    bounds = np.empty((cap, 6, WIDTH), np.float32)
    links = np.empty((cap, WIDTH), np.int32)
    stack_bin = np.empty(TASK_STACK * WIDTH, np.int64)  # binary inner node to expand
    stack_parent = np.empty(TASK_STACK * WIDTH, np.int64)  # wide node and slot that link to it
    stack_slot = np.empty(TASK_STACK * WIDTH, np.int64)
    kids = np.empty(WIDTH, np.int64)
    stack_bin[0], stack_parent[0], stack_slot[0] = 0, -1, 0
    sp = 1
    m = 0
    while sp > 0:
        sp -= 1
        b = stack_bin[sp]
        node = m
        m += 1
        if stack_parent[sp] >= 0:
            links[stack_parent[sp], stack_slot[sp]] = node
        # Gather up to WIDTH children by opening the largest inner child.
        if node_left[b] < 0:
            kids[0] = b
            n_kids = 1
        else:
            kids[0], kids[1] = node_left[b], node_left[b] + 1
            n_kids = 2
        while n_kids < WIDTH:
            pick, pick_area = -1, -1.0
            for j in range(n_kids):
                c = kids[j]
                if node_left[c] >= 0:
                    a = half_area(node_box[c])
                    if a > pick_area:
                        pick, pick_area = j, a
            if pick < 0:
                break
            c = kids[pick]
            kids[pick] = node_left[c]
            kids[n_kids] = node_left[c] + 1
            n_kids += 1
        for j in range(WIDTH):
            if j >= n_kids:
                for a in range(3):
                    bounds[node, 2 * a, j] = np.inf
                    bounds[node, 2 * a + 1, j] = -np.inf
                links[node, j] = leaf_link(0, 0)
                continue
            c = kids[j]
            for a in range(3):
                bounds[node, 2 * a, j] = node_box[c, a]
                bounds[node, 2 * a + 1, j] = node_box[c, 3 + a]
            if node_left[c] < 0:
                links[node, j] = leaf_link(node_start[c], node_count[c])
            elif merges_into_leaf(node_box, node_left, node_count, c, c_trav, c_isect, max_leaf):
                left = node_left[c]
                links[node, j] = leaf_link(node_start[left],
                                           node_count[left] + node_count[left + 1])  # fmt: skip
                kids[j] = -1
        # Push inner children in reverse so slot 0's subtree comes next (depth-first layout).
        for j in range(n_kids - 1, -1, -1):
            c = kids[j]
            if c >= 0 and node_left[c] >= 0:
                stack_bin[sp], stack_parent[sp], stack_slot[sp] = c, node, j
                sp += 1
    return bounds[:m].copy(), links[:m].copy()


@njit(cache=True, parallel=True)
def gather_vertices(positions, triangles, order, links):
    """Triangle vertices in leaf blocks: (n + 1, 9) float32, read as a flat array.

    Each leaf's triangles (leaf order, ``order``) go in blocks of up to BLOCK: a block of c
    triangles starting at leaf-order triangle f fills floats 9f .. 9f + 9c - 1 with nine rows of c
    floats (p0x p0y p0z p1x ... p2z, original vertex order), so the four triangles' values of one
    coordinate are one vector load (``simd.triangles4``). The last row is padding: a block's
    loads read four floats per row, up to three past its own end."""
    n = order.shape[0]
    verts = np.zeros((n + 1, 9), np.float32)
    flat = verts.reshape(9 * (n + 1))
    for node in prange(links.shape[0]):
        for slot in range(WIDTH):
            code = ~links[node, slot]
            if code < 0:  # an inner node
                continue
            start = code >> LEAF_BITS
            end = start + (code & MAX_LEAF)
            for first in range(start, end, BLOCK):
                count = min(BLOCK, end - first)
                for j in range(count):
                    p = order[first + j]
                    for c in range(3):
                        for a in range(3):
                            flat[9 * first + (3 * c + a) * count + j] = positions[triangles[p, c], a]
    return verts


@njit(cache=True)
def sah_cost(node_bounds, node_links, c_trav, c_isect):
    """SAH cost of the wide tree relative to its root box: c_trav per node visit and c_isect per
    block of a leaf's triangles, each weighted by the probability of a random line through the
    root hitting it."""
    root = np.empty(6, np.float32)
    child = np.empty(6, np.float32)
    for a in range(3):
        root[a] = node_bounds[0, 2 * a].min()
        root[3 + a] = node_bounds[0, 2 * a + 1].max()
    root_area = half_area(root)
    if root_area <= 0.0:
        return 0.0
    cost = c_trav  # the root is always visited
    for node in range(node_bounds.shape[0]):
        for j in range(WIDTH):
            link = node_links[node, j]
            for a in range(3):
                child[a] = node_bounds[node, 2 * a, j]
                child[3 + a] = node_bounds[node, 2 * a + 1, j]
            if link >= 0:
                cost += c_trav * half_area(child) / root_area
            elif (~link) & MAX_LEAF:
                cost += c_isect * blocks((~link) & MAX_LEAF) * half_area(child) / root_area
    return cost
