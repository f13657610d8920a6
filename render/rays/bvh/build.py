"""BVH construction: top-down binned surface-area-heuristic (SAH) build of the binary tree.

:func:`build_bvh` sorts a triangle soup into a binary tree whose every inner node stores the
boxes of both children (layout in :mod:`render.rays.bvh.layout`), rounds the boxes outwards
to float32, and adds the 8-wide tree collapsed from it (:mod:`render.rays.bvh.wide`).

Each node's triangles are binned by box centroid along each axis; the split between bins with
the lowest SAH cost is taken, or a leaf when that is cheaper and small enough. Where the
centroids do not separate, or past :data:`~render.rays.bvh.layout.MAX_SAH_DEPTH` levels, the
range is split at the centroid median instead, which bounds the depth for any input.

References
----------
- Wald, "On fast Construction of SAH-based Bounding Volume Hierarchies", IEEE Symposium on
  Interactive Ray Tracing 2007 (binning of centroids).
- MacDonald & Booth, "Heuristics for ray tracing using space subdivision", The Visual
  Computer 6(3), 1990 (the surface-area cost model).
- Ize, "Robust BVH Ray Traversal", Journal of Computer Graphics Techniques 2(2), 2013 (boxes
  rounded outwards when stored in lower precision).
"""

from __future__ import annotations

import numba
import numpy as np

from render.rays.bvh.layout import BVH, MAX_SAH_DEPTH, STACK_SIZE, aligned_empty
from render.rays.bvh.simd import LANES
from render.rays.bvh.wide import collapse_wide

__all__ = ["build_bvh"]


@numba.njit(cache=True, nogil=True)
def _half_area(b0, b1, b2, b3, b4, b5):
    """Half the surface area of a box (min x, y, z, max x, y, z); 0 for an empty box."""
    dx = b3 - b0
    dy = b4 - b1
    dz = b5 - b2
    if dx < 0.0 or dy < 0.0 or dz < 0.0:
        return 0.0
    return dx * dy + dy * dz + dz * dx


@numba.njit(cache=True, nogil=True)
def _range_bounds(idx, lo, hi, start, end, out):
    """Union box of triangles ``idx[start:end]`` into ``out`` (6,)."""
    for k in range(3):
        out[k] = np.inf
        out[k + 3] = -np.inf
    for i in range(start, end):
        j = idx[i]
        for k in range(3):
            if lo[j, k] < out[k]:
                out[k] = lo[j, k]
            if hi[j, k] > out[k + 3]:
                out[k + 3] = hi[j, k]


@numba.njit(cache=True, nogil=True)
def _median_split(idx, cen, start, end):
    """Partition ``idx[start:end]`` at the centroid median of the widest centroid axis
    (quickselect, Hoare partition); returns the middle. Used when the SAH finds no split."""
    cmin0 = np.inf
    cmin1 = np.inf
    cmin2 = np.inf
    cmax0 = -np.inf
    cmax1 = -np.inf
    cmax2 = -np.inf
    for i in range(start, end):
        j = idx[i]
        cmin0 = min(cmin0, cen[j, 0])
        cmax0 = max(cmax0, cen[j, 0])
        cmin1 = min(cmin1, cen[j, 1])
        cmax1 = max(cmax1, cen[j, 1])
        cmin2 = min(cmin2, cen[j, 2])
        cmax2 = max(cmax2, cen[j, 2])
    axis = 0
    ext = cmax0 - cmin0
    if cmax1 - cmin1 > ext:
        axis = 1
        ext = cmax1 - cmin1
    if cmax2 - cmin2 > ext:
        axis = 2
        ext = cmax2 - cmin2
    mid = start + (end - start) // 2
    if ext <= 0.0:
        return mid
    lo = start
    hi = end - 1
    while lo < hi:
        pivot = cen[idx[(lo + hi) // 2], axis]
        i = lo
        j = hi
        while i <= j:
            while cen[idx[i], axis] < pivot:
                i += 1
            while cen[idx[j], axis] > pivot:
                j -= 1
            if i <= j:
                tmp = idx[i]
                idx[i] = idx[j]
                idx[j] = tmp
                i += 1
                j -= 1
        if mid <= j:
            hi = j
        elif mid >= i:
            lo = i
        else:
            break
    return mid


@numba.njit(cache=True, nogil=True)
def _binned_sah_split(idx, lo, hi, cen, start, end, parent_area, n_bins, c_trav, c_isect, left_box, right_box):
    """Find and apply the best binned-SAH split of ``idx[start:end]``.

    Returns ``(mid, cost)``; ``mid = -1`` when the centroids do not separate. On success
    ``idx`` is partitioned so that ``[start, mid)`` is the left child and the children's boxes
    are written to ``left_box`` / ``right_box``.
    """
    cmin = np.empty(3)
    cmax = np.empty(3)
    scale = np.empty(3)
    for k in range(3):
        cmin[k] = np.inf
        cmax[k] = -np.inf
        scale[k] = 0.0
    for i in range(start, end):
        j = idx[i]
        for k in range(3):
            c = cen[j, k]
            if c < cmin[k]:
                cmin[k] = c
            if c > cmax[k]:
                cmax[k] = c
    for k in range(3):
        ext = cmax[k] - cmin[k]
        if ext > 0.0:
            # Slightly below n_bins/ext so that the largest centroid falls in the last bin.
            scale[k] = n_bins * (1.0 - 1e-9) / ext

    counts = np.empty((3, n_bins), np.int64)
    boxes = np.empty((3, n_bins, 6))
    for k in range(3):
        for b in range(n_bins):
            counts[k, b] = 0
            for q in range(3):
                boxes[k, b, q] = np.inf
                boxes[k, b, q + 3] = -np.inf
    for i in range(start, end):
        j = idx[i]
        for k in range(3):
            if scale[k] == 0.0:
                continue
            b = int((cen[j, k] - cmin[k]) * scale[k])
            if b >= n_bins:
                b = n_bins - 1
            counts[k, b] += 1
            for q in range(3):
                if lo[j, q] < boxes[k, b, q]:
                    boxes[k, b, q] = lo[j, q]
                if hi[j, q] > boxes[k, b, q + 3]:
                    boxes[k, b, q + 3] = hi[j, q]

    best_cost = np.inf
    best_axis = -1
    best_bin = -1
    right_area = np.empty(n_bins)
    right_count = np.empty(n_bins, np.int64)
    acc = np.empty(6)
    for k in range(3):
        if scale[k] == 0.0:
            continue
        # Sweep from the right: right_area[b] covers bins b .. n_bins-1.
        for q in range(3):
            acc[q] = np.inf
            acc[q + 3] = -np.inf
        cnt = 0
        for b in range(n_bins - 1, 0, -1):
            cnt += counts[k, b]
            for q in range(3):
                acc[q] = min(acc[q], boxes[k, b, q])
                acc[q + 3] = max(acc[q + 3], boxes[k, b, q + 3])
            right_count[b] = cnt
            right_area[b] = _half_area(acc[0], acc[1], acc[2], acc[3], acc[4], acc[5])
        for q in range(3):
            acc[q] = np.inf
            acc[q + 3] = -np.inf
        cnt = 0
        for b in range(n_bins - 1):
            cnt += counts[k, b]
            for q in range(3):
                acc[q] = min(acc[q], boxes[k, b, q])
                acc[q + 3] = max(acc[q + 3], boxes[k, b, q + 3])
            nr = right_count[b + 1]
            if cnt == 0 or nr == 0:
                continue
            la = _half_area(acc[0], acc[1], acc[2], acc[3], acc[4], acc[5])
            cost = c_trav + c_isect * (la * cnt + right_area[b + 1] * nr) / parent_area
            if cost < best_cost:
                best_cost = cost
                best_axis = k
                best_bin = b
    if best_axis < 0:
        return -1, np.inf

    # Partition: bins 0..best_bin go left. Same bin formula as above, so the counts match.
    k = best_axis
    i = start
    j = end - 1
    while i <= j:
        b = int((cen[idx[i], k] - cmin[k]) * scale[k])
        if b >= n_bins:
            b = n_bins - 1
        if b <= best_bin:
            i += 1
        else:
            tmp = idx[i]
            idx[i] = idx[j]
            idx[j] = tmp
            j -= 1
    mid = i
    for q in range(3):
        left_box[q] = np.inf
        left_box[q + 3] = -np.inf
        right_box[q] = np.inf
        right_box[q + 3] = -np.inf
    for b in range(n_bins):
        dst = left_box if b <= best_bin else right_box
        for q in range(3):
            dst[q] = min(dst[q], boxes[k, b, q])
            dst[q + 3] = max(dst[q + 3], boxes[k, b, q + 3])
    return mid, best_cost


@numba.njit(cache=True, nogil=True)
def _put_box(bounds, node, slot, box):
    for q in range(6):
        bounds[node, slot, q] = box[q]


@numba.njit(cache=True, nogil=True, inline="always")
def _push_children(work, sp, start, mid, end, parent, depth):
    """Push the ranges ``[mid, end)`` (slot 1) and ``[start, mid)`` (slot 0, popped first) as
    children of ``parent`` at ``depth`` on the work stack (rows: start, end, parent, slot,
    depth); returns the new stack size."""
    work[sp, 0] = mid
    work[sp, 1] = end
    work[sp, 2] = parent
    work[sp, 3] = 1
    work[sp, 4] = depth
    work[sp + 1, 0] = start
    work[sp + 1, 1] = mid
    work[sp + 1, 2] = parent
    work[sp + 1, 3] = 0
    work[sp + 1, 4] = depth
    return sp + 2


@numba.njit(cache=True, nogil=True)
def _build_kernel(lo, hi, cen, n_bins, max_leaf, c_trav, c_isect):
    """Top-down binned-SAH build. Returns (bounds, child, count, idx, n_nodes, depth)."""
    n_tri = lo.shape[0]
    cap = max(n_tri, 1)
    bounds = np.empty((cap, 2, 6))
    child = np.empty((cap, 2), np.int32)
    count = np.empty((cap, 2), np.int32)
    for n in range(cap):
        child[n, 0] = -1
        child[n, 1] = -1
        count[n, 0] = 0
        count[n, 1] = 0
    idx = np.empty(n_tri, np.int32)
    for i in range(n_tri):
        idx[i] = i
    for c in range(2):
        for q in range(3):
            bounds[0, c, q] = np.inf
            bounds[0, c, q + 3] = -np.inf
    if n_tri == 0:
        return bounds, child, count, idx, 0, 0

    # Work stack of ranges waiting to become child (parent, slot) at a given depth.
    work = np.empty((2 * STACK_SIZE + 64, 5), np.int64)
    left_box = np.empty(6)
    right_box = np.empty(6)
    box = np.empty(6)

    # Indices passed to the kernels below as int64 values, not literals: numba compiles a
    # called kernel once per literal argument value.
    zero = np.int64(0)
    one = np.int64(1)
    n_nodes = one
    max_depth = 1
    if n_tri == 1:
        _range_bounds(idx, lo, hi, zero, one, box)
        _put_box(bounds, zero, zero, box)
        child[0, 0] = -1
        count[0, 0] = 1
        return bounds, child, count, idx, 1, 1

    # The root is always an inner node (so that traversal can start by testing its children).
    _range_bounds(idx, lo, hi, zero, n_tri, box)
    mid, _ = _binned_sah_split(
        idx,
        lo,
        hi,
        cen,
        zero,
        n_tri,
        max(_half_area(box[0], box[1], box[2], box[3], box[4], box[5]), 1e-300),
        n_bins,
        c_trav,
        c_isect,
        left_box,
        right_box,
    )
    if mid < 0:
        mid = _median_split(idx, cen, zero, n_tri)
        _range_bounds(idx, lo, hi, zero, mid, left_box)
        _range_bounds(idx, lo, hi, mid, n_tri, right_box)
    _put_box(bounds, zero, zero, left_box)
    _put_box(bounds, zero, one, right_box)
    sp = _push_children(work, 0, 0, mid, n_tri, 0, 2)

    while sp > 0:
        sp -= 1
        start, end, parent, slot, depth = work[sp, 0], work[sp, 1], work[sp, 2], work[sp, 3], work[sp, 4]
        n = end - start
        area = _half_area(
            bounds[parent, slot, 0],
            bounds[parent, slot, 1],
            bounds[parent, slot, 2],
            bounds[parent, slot, 3],
            bounds[parent, slot, 4],
            bounds[parent, slot, 5],
        )
        leaf_cost = c_isect * n
        mid = -1
        cost = np.inf
        if n > 1:
            if depth <= MAX_SAH_DEPTH and area > 0.0:
                mid, cost = _binned_sah_split(
                    idx, lo, hi, cen, start, end, area, n_bins, c_trav, c_isect, left_box, right_box
                )
            if n <= max_leaf and (mid < 0 or leaf_cost <= cost):
                mid = -1
            elif mid < 0:
                # Too many triangles for a leaf and no SAH split: split at the object median.
                mid = _median_split(idx, cen, start, end)
                _range_bounds(idx, lo, hi, start, mid, left_box)
                _range_bounds(idx, lo, hi, mid, end, right_box)
        if mid < 0:
            child[parent, slot] = -np.int32(start) - np.int32(1)
            count[parent, slot] = n
            continue
        node = n_nodes
        n_nodes += 1
        if depth > max_depth:
            max_depth = depth
        child[parent, slot] = node
        count[parent, slot] = 0
        _put_box(bounds, node, zero, left_box)
        _put_box(bounds, node, one, right_box)
        sp = _push_children(work, sp, start, mid, end, node, depth + 1)
    return bounds, child, count, idx, n_nodes, max_depth


@numba.njit(cache=True, nogil=True)
def _sah_cost(bounds, child, count, c_trav, c_isect):
    """SAH cost of a built tree relative to the root box area."""
    if child.shape[0] == 0:
        return 0.0
    root = np.empty(6)
    for q in range(3):
        root[q] = min(bounds[0, 0, q], bounds[0, 1, q])
        root[q + 3] = max(bounds[0, 0, q + 3], bounds[0, 1, q + 3])
    ra = _half_area(root[0], root[1], root[2], root[3], root[4], root[5])
    if ra <= 0.0:
        return 0.0
    cost = c_trav  # the root
    for n in range(child.shape[0]):
        for c in range(2):
            b = bounds[n, c]
            a = _half_area(b[0], b[1], b[2], b[3], b[4], b[5]) / ra
            if child[n, c] >= 0:
                cost += c_trav * a
            else:
                cost += c_isect * a * count[n, c]
    return cost


def _outward_float32(values: np.ndarray, down: bool) -> np.ndarray:
    """Round float64 to float32 so that the result is <= (down) or >= (up) the input."""
    f = values.astype(np.float32)
    if down:
        bad = f.astype(np.float64) > values
        f[bad] = np.nextafter(f[bad], np.float32(-np.inf))
    else:
        bad = f.astype(np.float64) < values
        f[bad] = np.nextafter(f[bad], np.float32(np.inf))
    return f


def build_bvh(
    triangles_m: np.ndarray,
    *,
    n_bins: int = 16,
    max_leaf_size: int = 8,
    traversal_cost: float = 1.0,
    intersection_cost: float = 1.0,
) -> BVH:
    """Build a BVH over a triangle soup with the binned SAH (Wald 2007).

    Parameters
    ----------
    triangles_m
        (F, 3, 3) float: vertex ``j`` of triangle ``i`` at ``[i, j]``, metres. F may be 0.
        Non-finite vertices are not allowed.
    n_bins
        Centroid bins per axis and node.
    max_leaf_size
        Largest leaf the SAH may choose (larger ranges are always split).
    traversal_cost, intersection_cost
        SAH cost constants (relative cost of one node visit and one triangle test).

    Returns
    -------
    BVH
    """
    tris = np.ascontiguousarray(triangles_m, dtype=np.float64).reshape(-1, 3, 3)
    if not np.all(np.isfinite(tris)):
        raise ValueError("triangle vertices must be finite")
    if n_bins < 2 or max_leaf_size < 1:
        raise ValueError("n_bins must be >= 2 and max_leaf_size >= 1")
    lo = tris.min(axis=1)
    hi = tris.max(axis=1)
    cen = 0.5 * (lo + hi)  # box centroid: cheaper than and as good as the triangle centroid
    bounds, child, count, idx, n_nodes, depth = _build_kernel(
        lo, hi, cen, int(n_bins), int(max_leaf_size), float(traversal_cost), float(intersection_cost)
    )
    bounds, child, count = bounds[:n_nodes], child[:n_nodes], count[:n_nodes]
    cost = float(_sah_cost(bounds, child, count, float(traversal_cost), float(intersection_cost)))
    # (n, c, k) -> (n, k, c): both children's value of one bound adjacent in memory.
    b = bounds.transpose(0, 2, 1).reshape(-1, 6, 2)
    nodes = aligned_empty((bounds.shape[0], 16), np.float32)
    nodes[:, 0:6] = _outward_float32(b[:, :3].reshape(-1, 6), down=True)
    nodes[:, 6:12] = _outward_float32(b[:, 3:].reshape(-1, 6), down=False)
    nodes_i32 = nodes.view(np.int32)
    nodes_i32[:, 12:14] = child
    nodes_i32[:, 14:16] = count
    wide, wide_i32, wide_stack = collapse_wide(nodes, nodes_i32)
    tri_index = idx.astype(np.int32)
    tri_vertices = np.ascontiguousarray(tris[tri_index].reshape(-1, 9))
    tri_lanes = np.zeros((9, tri_vertices.shape[0] + LANES - 1))
    tri_lanes[:, : tri_vertices.shape[0]] = tri_vertices.T
    return BVH(
        nodes=nodes,
        nodes_i32=nodes_i32,
        wide_nodes=wide,
        wide_nodes_i32=wide_i32,
        wide_stack=wide_stack,
        tri_index=tri_index,
        tri_vertices=tri_vertices,
        tri_lanes=tri_lanes,
        n_triangles=int(tris.shape[0]),
        depth=int(depth),
        sah_cost=cost,
    )
