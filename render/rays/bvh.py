"""Bounding volume hierarchy over a triangle soup, and batched ray queries.

The hierarchy is a binary BVH built top-down with the binned surface-area heuristic (SAH):
Wald, "On fast Construction of SAH-based Bounding Volume Hierarchies", IEEE Symposium on
Interactive Ray Tracing 2007 (binning of triangle centroids, cost model of MacDonald & Booth,
"Heuristics for ray tracing using space subdivision", The Visual Computer 6(3), 1990).

Layout (all arrays flat, no Python objects in the hot path):

* Only inner nodes are stored. Node ``n`` holds the boxes of *both* its children
  (``node_bounds[n, :, c]`` = min x, y, z, max x, y, z of child ``c``), so one node fetch decides
  which children a ray enters and in which order ("child boxes in the parent"). Boxes, child
  references and counts of a node share one 64-byte record (one cache line), ``BVH.nodes``.
* ``node_child[n, c] >= 0`` is the index of an inner node; ``< 0`` is a leaf holding
  ``node_count[n, c]`` triangles starting at ``-node_child[n, c] - 1`` in the permuted
  triangle order. An empty slot has an inverted box that no ray enters.
* Boxes are stored in float32 rounded outwards (never smaller than the float64 triangle
  bounds), which halves the memory traffic of traversal; the ray/box test itself runs in
  float64 with the conservative far-distance scaling of Ize, "Robust BVH Ray Traversal",
  JCGT 2(2), 2013, so rounding never makes a ray miss a box it touches.
* Triangles are copied in leaf order into ``tri_vertices`` (M, 9) float64 (v0, v1, v2), and
  ``tri_index`` maps back to the caller's triangle order.
* The binary tree is also collapsed into an 8-wide tree (``BVH.wide_nodes``) with the same
  leaves.

Traversal. Queries take batches of rays, split over threads (numba ``prange``). Within a batch,
runs of 16 consecutive rays whose directions are close (camera rays of neighbouring pixels,
shadow rays towards one lamp) are traced as a packet through the binary tree, the per-ray work
in loops that LLVM vectorises; other rays are traced one by one through the wide tree, whose 8
child boxes are tested in one vectorised loop. Both paths compute each ray with the same
floating-point operations and break exact ties in ``t`` by the lower triangle index, so a ray's
result never depends on the path, the batch or the order of the rays.

Ray/triangle intersection is the watertight test of Woop, Benthin & Wald, "Watertight
Ray/Triangle Intersection", JCGT 2(1), 2013, evaluated in float64: a ray through a shared
edge or vertex of a closed mesh never passes between the triangles. It is two-sided (no
back-face culling).

Rays are ``origin + t * direction``: directions need not be unit length and ``t`` is measured in
units of the direction's length (for unit directions ``t`` is the distance in metres). A hit is
accepted for ``t_min < t < t_max``.

Barycentrics: the hit point is ``(1 - u - v) * v0 + u * v1 + v * v2``.
"""

from __future__ import annotations

from dataclasses import dataclass

import numba
import numpy as np
from numba import prange

# Traversal stack entries; the builder limits the tree depth well below this (see _MAX_SAH_DEPTH).
_STACK_SIZE = 128
# Past this depth the builder splits at the object median, which bounds the depth by
# _MAX_SAH_DEPTH + log2(number of triangles) < _STACK_SIZE for any int32 triangle count.
_MAX_SAH_DEPTH = 64

_F64_EPS = np.finfo(np.float64).eps * 0.5  # unit roundoff 2^-53
# Ize 2013: scale the far slab distance by 1 + 2*gamma(3), gamma(n) = n*u / (1 - n*u).
_ROBUST_FAR = 1.0 + 2.0 * (3.0 * _F64_EPS) / (1.0 - 3.0 * _F64_EPS)
# Direction components smaller than this are treated as zero in the slab test (the inverse
# is clamped to +-_BIG_INV so that 0 * inverse is 0, never NaN).
_BIG_INV = 1e300
# Children per node of the wide tree used by single-ray traversal.
_WIDE = 8
# Box of an unused wide-tree slot: a point at the float32 limit, which no ray reaches.
_FAR_POINT = float(np.finfo(np.float32).max)


@dataclass
class BVH:
    """Flattened BVH (see the module docstring for the layout).

    Attributes
    ----------
    nodes
        (n_nodes, 16) float32, one 64-byte record per inner node, 64-byte aligned: columns
        ``2 k + c`` (k = 0..5: min x, min y, min z, max x, max y, max z, metres) hold the box of
        child ``c``; columns 12-15 hold int32 bit patterns (see ``nodes_i32``) of the two child
        references and the two leaf triangle counts.
    nodes_i32
        The same memory viewed as int32.
    wide_nodes, wide_nodes_i32
        (n_wide, 64) float32 / int32 views of the 8-wide tree collapsed from the binary one,
        one 256-byte record per node: columns ``8 k + c`` bound ``k`` of child ``c``, then 8
        child references and 8 leaf counts (same encoding). Unused slots hold a point box at
        the float32 limit. Used by single-ray traversal; packets use the binary tree.
    wide_stack
        Traversal stack entries the wide tree can need.
    tri_index
        (M,) int32: original index of the triangle stored at each leaf position.
    tri_vertices
        (M, 9) float64: vertices v0, v1, v2 (metres) in leaf order.
    n_triangles
        Number of triangles the BVH was built over.
    depth
        Number of inner-node levels (0 for an empty BVH).
    sah_cost
        SAH cost of the tree (traversal cost 1 per inner node, intersection cost per triangle,
        weighted by surface area relative to the root): a quality figure, lower is better.
    """

    nodes: np.ndarray
    nodes_i32: np.ndarray
    wide_nodes: np.ndarray
    wide_nodes_i32: np.ndarray
    wide_stack: int
    tri_index: np.ndarray
    tri_vertices: np.ndarray
    n_triangles: int
    depth: int
    sah_cost: float

    @property
    def node_bounds(self) -> np.ndarray:
        """(n_nodes, 6, 2) float32 view: ``[n, k, c]`` is bound ``k`` of child ``c``."""
        return self.nodes[:, :12].reshape(-1, 6, 2)

    @property
    def node_child(self) -> np.ndarray:
        """(n_nodes, 2) int32 view: inner node index (>= 0) or ``-(first leaf position) - 1``."""
        return self.nodes_i32[:, 12:14]

    @property
    def node_count(self) -> np.ndarray:
        """(n_nodes, 2) int32 view: triangles in a leaf child (0 for inner children, empty slots)."""
        return self.nodes_i32[:, 14:16]

    @property
    def n_nodes(self) -> int:
        return int(self.nodes.shape[0])

    @property
    def nbytes(self) -> int:
        """Bytes held by the BVH arrays (nodes, permutation and triangle copy)."""
        return int(self.nodes.nbytes + self.wide_nodes.nbytes + self.tri_index.nbytes + self.tri_vertices.nbytes)


def _aligned_empty(shape: tuple[int, ...], dtype, align: int = 64) -> np.ndarray:
    """Uninitialised C-contiguous array whose data starts on an ``align``-byte boundary."""
    dtype = np.dtype(dtype)
    n = int(np.prod(shape)) * dtype.itemsize
    raw = np.empty(n + align, np.uint8)
    offset = (-raw.ctypes.data) % align
    return raw[offset : offset + n].view(dtype).reshape(shape)


@dataclass
class Hits:
    """Closest hits of a batch of rays.

    Attributes
    ----------
    t
        (N,) float64 ray parameter of the hit, in units of the direction length; ``inf`` for a
        miss.
    triangle
        (N,) int32 index into the triangles the BVH was built from; -1 for a miss.
    u, v
        (N,) float64 barycentrics: hit point = (1 - u - v) v0 + u v1 + v v2 (0 for a miss).
    """

    t: np.ndarray
    triangle: np.ndarray
    u: np.ndarray
    v: np.ndarray

    @property
    def hit(self) -> np.ndarray:
        """(N,) bool: the ray hit something."""
        return self.triangle >= 0

    def points_m(self, origins: np.ndarray, directions: np.ndarray) -> np.ndarray:
        """(N, 3) hit points ``origin + t * direction`` (NaN for misses)."""
        t = np.where(self.hit, self.t, np.nan)
        return np.asarray(origins, np.float64) + t[:, None] * np.asarray(directions, np.float64)


# --------------------------------------------------------------------------------------------
# Build
# --------------------------------------------------------------------------------------------


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
    w_start = np.empty(2 * _STACK_SIZE + 64, np.int64)
    w_end = np.empty_like(w_start)
    w_parent = np.empty_like(w_start)
    w_slot = np.empty_like(w_start)
    w_depth = np.empty_like(w_start)
    left_box = np.empty(6)
    right_box = np.empty(6)
    box = np.empty(6)

    n_nodes = 1
    max_depth = 1
    if n_tri == 1:
        _range_bounds(idx, lo, hi, 0, 1, box)
        _put_box(bounds, 0, 0, box)
        child[0, 0] = -1
        count[0, 0] = 1
        return bounds, child, count, idx, 1, 1

    # The root is always an inner node (so that traversal can start by testing its children).
    _range_bounds(idx, lo, hi, 0, n_tri, box)
    mid, _ = _binned_sah_split(
        idx,
        lo,
        hi,
        cen,
        0,
        n_tri,
        max(_half_area(box[0], box[1], box[2], box[3], box[4], box[5]), 1e-300),
        n_bins,
        c_trav,
        c_isect,
        left_box,
        right_box,
    )
    if mid < 0:
        mid = _median_split(idx, cen, 0, n_tri)
        _range_bounds(idx, lo, hi, 0, mid, left_box)
        _range_bounds(idx, lo, hi, mid, n_tri, right_box)
    _put_box(bounds, 0, 0, left_box)
    _put_box(bounds, 0, 1, right_box)
    sp = 0
    w_start[sp] = mid
    w_end[sp] = n_tri
    w_parent[sp] = 0
    w_slot[sp] = 1
    w_depth[sp] = 2
    sp += 1
    w_start[sp] = 0
    w_end[sp] = mid
    w_parent[sp] = 0
    w_slot[sp] = 0
    w_depth[sp] = 2
    sp += 1

    while sp > 0:
        sp -= 1
        start = w_start[sp]
        end = w_end[sp]
        parent = w_parent[sp]
        slot = w_slot[sp]
        depth = w_depth[sp]
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
            if depth <= _MAX_SAH_DEPTH and area > 0.0:
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
        _put_box(bounds, node, 0, left_box)
        _put_box(bounds, node, 1, right_box)
        w_start[sp] = mid
        w_end[sp] = end
        w_parent[sp] = node
        w_slot[sp] = 1
        w_depth[sp] = depth + 1
        sp += 1
        w_start[sp] = start
        w_end[sp] = mid
        w_parent[sp] = node
        w_slot[sp] = 0
        w_depth[sp] = depth + 1
        sp += 1
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


@numba.njit(cache=True, nogil=True)
def _collapse_wide(nodes, ni, width):
    """Wide tree from the binary one (Dammertz, Hanika & Keller, "Shallow bounding volume
    hierarchies for fast SIMD ray tracing of incoherent rays", EGSR 2008; Wald, Benthin &
    Boulos 2008): each wide node takes a binary node's two children and keeps replacing the
    inner child of largest surface area by its two children until it has ``width`` children.
    Leaves (and so the triangle order) are unchanged; boxes are copied (already rounded
    outwards). Returns (bounds (N, 6, width) float32, child (N, width), count (N, width),
    n_nodes, depth)."""
    n2 = nodes.shape[0]
    cap = max(n2, 1)
    wb = np.empty((cap, 6, width), np.float32)
    wc = np.empty((cap, width), np.int32)
    wn = np.empty((cap, width), np.int32)
    for n in range(cap):
        for c in range(width):
            for q in range(6):
                wb[n, q, c] = _FAR_POINT
            wc[n, c] = -1
            wn[n, c] = 0
    if n2 == 0:
        return wb, wc, wn, 0, 0
    st_bin = np.empty(width * cap + 8, np.int64)
    st_wide = np.empty(width * cap + 8, np.int64)
    st_depth = np.empty(width * cap + 8, np.int64)
    ref = np.empty(width, np.int64)
    cnt = np.empty(width, np.int64)
    box = np.empty((width, 6), np.float32)
    st_bin[0] = 0
    st_wide[0] = 0
    st_depth[0] = 1
    sp = 1
    n_wide = 1
    depth = 1
    while sp > 0:
        sp -= 1
        a = st_bin[sp]
        m = st_wide[sp]
        dep = st_depth[sp]
        if dep > depth:
            depth = dep
        used = 2
        for c in range(2):
            ref[c] = ni[a, 12 + c]
            cnt[c] = ni[a, 14 + c]
            for k in range(6):
                box[c, k] = nodes[a, 2 * k + c]
        while used < width:
            pick = -1
            pick_area = -1.0
            for c in range(used):
                if ref[c] >= 0:
                    dx = np.float64(box[c, 3]) - box[c, 0]
                    dy = np.float64(box[c, 4]) - box[c, 1]
                    dz = np.float64(box[c, 5]) - box[c, 2]
                    area = dx * dy + dy * dz + dz * dx
                    if area > pick_area:
                        pick_area = area
                        pick = c
            if pick < 0:
                break
            g = ref[pick]
            ref[pick] = ni[g, 12]
            cnt[pick] = ni[g, 14]
            ref[used] = ni[g, 13]
            cnt[used] = ni[g, 15]
            for k in range(6):
                box[pick, k] = nodes[g, 2 * k]
                box[used, k] = nodes[g, 2 * k + 1]
            used += 1
        for c in range(used):
            for k in range(6):
                wb[m, k, c] = box[c, k]
            if ref[c] >= 0:
                wc[m, c] = n_wide
                st_bin[sp] = ref[c]
                st_wide[sp] = n_wide
                st_depth[sp] = dep + 1
                sp += 1
                n_wide += 1
            else:
                wc[m, c] = ref[c]
                wn[m, c] = cnt[c]
    return wb, wc, wn, n_wide, depth


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
    nodes = _aligned_empty((bounds.shape[0], 16), np.float32)
    nodes[:, 0:6] = _outward_float32(b[:, :3].reshape(-1, 6), down=True)
    nodes[:, 6:12] = _outward_float32(b[:, 3:].reshape(-1, 6), down=False)
    nodes_i32 = nodes.view(np.int32)
    nodes_i32[:, 12:14] = child
    nodes_i32[:, 14:16] = count
    wb, wc, wn, n_wide, wide_depth = _collapse_wide(nodes, nodes_i32, _WIDE)
    wide = _aligned_empty((n_wide, 8 * _WIDE), np.float32)
    wide[:, : 6 * _WIDE] = wb[:n_wide].reshape(-1, 6 * _WIDE)
    wide_i32 = wide.view(np.int32)
    wide_i32[:, 6 * _WIDE : 7 * _WIDE] = wc[:n_wide]
    wide_i32[:, 7 * _WIDE :] = wn[:n_wide]
    tri_index = idx.astype(np.int32)
    tri_vertices = np.ascontiguousarray(tris[tri_index].reshape(-1, 9))
    return BVH(
        nodes=nodes,
        nodes_i32=nodes_i32,
        wide_nodes=wide,
        wide_nodes_i32=wide_i32,
        wide_stack=int(_WIDE * (wide_depth + 1)),
        tri_index=tri_index,
        tri_vertices=tri_vertices,
        n_triangles=int(tris.shape[0]),
        depth=int(depth),
        sah_cost=cost,
    )


# --------------------------------------------------------------------------------------------
# Traversal kernels
# --------------------------------------------------------------------------------------------


@numba.njit(cache=True, nogil=True, inline="always")
def _safe_inverse(d):
    if d == 0.0:
        return _BIG_INV
    inv = 1.0 / d
    if inv > _BIG_INV:
        return _BIG_INV
    if inv < -_BIG_INV:
        return -_BIG_INV
    return inv


@numba.njit(cache=True, nogil=True, inline="always")
def _valid_ray(origins, directions, i):
    """A ray can hit something only with a finite origin and a finite, non-zero direction."""
    ok = True
    nonzero = False
    for k in range(3):
        ok = ok and np.isfinite(origins[i, k]) and np.isfinite(directions[i, k])
        nonzero = nonzero or directions[i, k] != 0.0
    return ok and nonzero


@numba.njit(cache=True, nogil=True, inline="always")
def _ray_shear(dx, dy, dz):
    """Per-ray constants of the watertight test (Woop et al. 2013, section 3).

    kz is the axis of the largest |direction| component; kx, ky follow cyclically and are
    swapped when d[kz] < 0 to keep the triangle winding. Returns (kx, ky, kz, Sx, Sy, Sz).
    """
    ax = abs(dx)
    ay = abs(dy)
    az = abs(dz)
    if ax >= ay and ax >= az:
        kz = 0
        dkz = dx
    elif ay >= az:
        kz = 1
        dkz = dy
    else:
        kz = 2
        dkz = dz
    kx = kz + 1
    if kx == 3:
        kx = 0
    ky = kx + 1
    if ky == 3:
        ky = 0
    if dkz < 0.0:
        tmp = kx
        kx = ky
        ky = tmp
    d = (dx, dy, dz)
    sz = 1.0 / dkz
    sx = d[kx] * sz
    sy = d[ky] * sz
    return kx, ky, kz, sx, sy, sz


# The arithmetic of the watertight test below is written out identically in the single-ray
# kernel (_intersect_triangle) and the packet kernels (_packet_leaf_*), so that a ray gets
# bit-identical results whichever path traces it.


@numba.njit(cache=True, nogil=True, inline="always", error_model="numpy")
def _intersect_triangle(tv, j, px, py, pz, kx, ky, kz, sx, sy, sz):
    """Watertight ray/triangle test (Woop, Benthin & Wald 2013, JCGT 2(1), Fig. 1-2).

    ``tv[j]`` holds v0, v1, v2; ``(px, py, pz)`` is the ray origin permuted to (kx, ky, kz).
    Returns ``(hit, t, u, v)`` with the hit point at (1-u-v) v0 + u v1 + v v2. Evaluated in
    float64. Exact zeros of the edge functions are accepted, so a ray through an edge shared
    by two triangles hits at least one of them (the edge function of a shared edge is computed
    from the same numbers in both triangles, with opposite sign).
    """
    az = tv[j, kz] - pz
    bz = tv[j, 3 + kz] - pz
    cz = tv[j, 6 + kz] - pz
    # Translate and shear so that the ray becomes the +z axis.
    ax = (tv[j, kx] - px) - sx * az
    ay = (tv[j, ky] - py) - sy * az
    bx = (tv[j, 3 + kx] - px) - sx * bz
    by = (tv[j, 3 + ky] - py) - sy * bz
    cx = (tv[j, 6 + kx] - px) - sx * cz
    cy = (tv[j, 6 + ky] - py) - sy * cz
    # Scaled barycentric coordinates (2D edge functions).
    uu = cx * by - cy * bx
    vv = ax * cy - ay * cx
    ww = bx * ay - by * ax
    if (uu < 0.0 or vv < 0.0 or ww < 0.0) and (uu > 0.0 or vv > 0.0 or ww > 0.0):
        return False, 0.0, 0.0, 0.0
    det = uu + vv + ww
    if det == 0.0:
        return False, 0.0, 0.0, 0.0
    inv = 1.0 / det
    t = (uu * (sz * az) + vv * (sz * bz) + ww * (sz * cz)) * inv
    return True, t, vv * inv, ww * inv


# --------------------------------------------------------------------------------------------
# Single-ray traversal on the wide tree (used for rays that do not form coherent packets):
# the boxes of all _WIDE children are tested in one counted loop that LLVM vectorises
# (Wald, Benthin & Boulos, "Getting rid of packets: efficient SIMD single-ray traversal using
# multi-branching BVHs", IEEE Symposium on Interactive Ray Tracing 2008).
# --------------------------------------------------------------------------------------------


@numba.njit(cache=True, nogil=True, error_model="numpy", inline="always")
def _wide_boxes(wb, node, o0, o1, o2, i0, i1, i2, work, width):
    """Slab distances of every child box of wide ``node``: entry in ``work[c]``, exit (Ize 2013
    robust scaling) in ``work[width + c]``. ``width`` is passed at run time so that the loop
    is vectorised rather than unrolled."""
    for c in range(width):
        a = (np.float64(wb[node, c]) - o0) * i0
        b = (np.float64(wb[node, 3 * _WIDE + c]) - o0) * i0
        e = (np.float64(wb[node, _WIDE + c]) - o1) * i1
        f = (np.float64(wb[node, 4 * _WIDE + c]) - o1) * i1
        g = (np.float64(wb[node, 2 * _WIDE + c]) - o2) * i2
        h = (np.float64(wb[node, 5 * _WIDE + c]) - o2) * i2
        work[c] = max(max(min(a, b), min(e, f)), min(g, h))
        work[_WIDE + c] = min(min(max(a, b), max(e, f)), max(g, h)) * _ROBUST_FAR


@numba.njit(cache=True, nogil=True, error_model="numpy")
def _closest_one(wb, wi, tv, ti, o, d, t_min, t_max, st_node, st_t, work, width):
    """Closest hit of one ray; returns (t, triangle, u, v) with triangle -1 for a miss.

    Among hits at exactly the same ``t`` the lowest original triangle index wins, so the result
    does not depend on the order in which the tree is traversed.
    """
    kx, ky, kz, sx, sy, sz = _ray_shear(d[0], d[1], d[2])
    px = o[kx]
    py = o[ky]
    pz = o[kz]
    i0 = _safe_inverse(d[0])
    i1 = _safe_inverse(d[1])
    i2 = _safe_inverse(d[2])
    o0 = o[0]
    o1 = o[1]
    o2 = o[2]
    best_t = t_max
    best_j = -1
    best_u = 0.0
    best_v = 0.0
    node = 0
    sp = 0
    while True:
        _wide_boxes(wb, node, o0, o1, o2, i0, i1, i2, work, width)
        # Leaves are intersected at once; of the inner children the nearest is descended and
        # the others pushed.
        nxt = -1
        nxt_t = 0.0
        for c in range(_WIDE):
            near = max(work[c], t_min)
            if not near <= min(work[_WIDE + c], best_t):
                continue
            ch = wi[node, 6 * _WIDE + c]
            if ch < 0:
                first = -ch - 1
                for j in range(first, first + wi[node, 7 * _WIDE + c]):
                    ok, t, u, v = _intersect_triangle(tv, j, px, py, pz, kx, ky, kz, sx, sy, sz)
                    if ok and t > t_min and (t < best_t or (t == best_t and ti[j] < best_j)):
                        best_t = t
                        best_j = ti[j]
                        best_u = u
                        best_v = v
            elif nxt < 0:
                nxt = ch
                nxt_t = near
            elif near < nxt_t:
                st_node[sp] = nxt
                st_t[sp] = nxt_t
                sp += 1
                nxt = ch
                nxt_t = near
            else:
                st_node[sp] = ch
                st_t[sp] = near
                sp += 1
        if nxt >= 0 and nxt_t <= best_t:
            node = nxt
            continue
        node = -1
        while sp > 0:
            sp -= 1
            if st_t[sp] <= best_t:
                node = st_node[sp]
                break
        if node < 0:
            break
    return best_t, best_j, best_u, best_v


@numba.njit(cache=True, nogil=True, error_model="numpy")
def _any_one(wb, wi, tv, o, d, t_min, t_max, st_node, work, width):
    """True if the ray hits any triangle with t_min < t < t_max (stops at the first found)."""
    kx, ky, kz, sx, sy, sz = _ray_shear(d[0], d[1], d[2])
    px = o[kx]
    py = o[ky]
    pz = o[kz]
    i0 = _safe_inverse(d[0])
    i1 = _safe_inverse(d[1])
    i2 = _safe_inverse(d[2])
    o0 = o[0]
    o1 = o[1]
    o2 = o[2]
    node = 0
    sp = 0
    while True:
        _wide_boxes(wb, node, o0, o1, o2, i0, i1, i2, work, width)
        for c in range(_WIDE):
            near = max(work[c], t_min)
            if not near <= min(work[_WIDE + c], t_max):
                continue
            ch = wi[node, 6 * _WIDE + c]
            if ch < 0:
                first = -ch - 1
                for j in range(first, first + wi[node, 7 * _WIDE + c]):
                    ok, t, u, v = _intersect_triangle(tv, j, px, py, pz, kx, ky, kz, sx, sy, sz)
                    if ok and t > t_min and t < t_max:
                        return True
            else:
                st_node[sp] = ch
                sp += 1
        if sp == 0:
            return False
        sp -= 1
        node = st_node[sp]


# --------------------------------------------------------------------------------------------
# Packet traversal (Wald, Slusallek, Benthin & Wagner, "Interactive Rendering with Coherent Ray
# Tracing", Computer Graphics Forum 20(3), 2001): _PACKET consecutive rays with similar
# directions share one traversal; a node is entered when any of them hits its box. The
# per-ray loops are plain counted loops that LLVM vectorises.
# --------------------------------------------------------------------------------------------

_PACKET = 16
# A packet is traced together only if all its directions are within this angle of the first
# ray's and share its projection axes (kx, ky, kz); otherwise its rays go one by one. Shadow
# rays converging on a light still share most nodes at wider spreads, hence the wider limit
# for occlusion queries (both values tuned on the stress scene of render.bench.rays).
_PACKET_MAX_ANGLE_RAD = 0.1
_PACKET_MAX_ANGLE_ANY_RAD = 0.5
_PACKET_COS = float(np.cos(_PACKET_MAX_ANGLE_RAD))
_PACKET_COS_ANY = float(np.cos(_PACKET_MAX_ANGLE_ANY_RAD))

# Lane state lives in one flat float64 array, field f of lane r at f * _PACKET + r: a single
# base pointer with constant offsets lets the vectoriser prove that the fields do not overlap.
_F_OX, _F_OY, _F_OZ, _F_IX, _F_IY, _F_IZ, _F_PX, _F_PY, _F_PZ, _F_SX, _F_SY, _F_SZ, _F_TB, _F_BJ, _F_BU, _F_BV = range(
    16
)
_N_FIELDS = 16
_OX, _OY, _OZ = _F_OX * _PACKET, _F_OY * _PACKET, _F_OZ * _PACKET
_IX, _IY, _IZ = _F_IX * _PACKET, _F_IY * _PACKET, _F_IZ * _PACKET
_PX, _PY, _PZ = _F_PX * _PACKET, _F_PY * _PACKET, _F_PZ * _PACKET
_SX, _SY, _SZ = _F_SX * _PACKET, _F_SY * _PACKET, _F_SZ * _PACKET
_TB, _BJ, _BU, _BV = _F_TB * _PACKET, _F_BJ * _PACKET, _F_BU * _PACKET, _F_BV * _PACKET


@numba.njit(cache=True, nogil=True, error_model="numpy")
def _packet_load(lane, origins, directions, t_max, start, n, cos_max):
    """Fill the lane state for rays ``start .. start + n - 1`` (n <= _PACKET).

    Unused lanes get t_max = -inf so that they never enter a box. Returns
    ``(coherent, kx, ky, kz)``.
    """
    d0x = directions[start, 0]
    d0y = directions[start, 1]
    d0z = directions[start, 2]
    n0 = np.sqrt(d0x * d0x + d0y * d0y + d0z * d0z)
    kx0, ky0, kz0, _, _, _ = _ray_shear(d0x, d0y, d0z)
    coherent = True
    for r in range(_PACKET):
        if r < n:
            i = start + r
            dx = directions[i, 0]
            dy = directions[i, 1]
            dz = directions[i, 2]
            kx, ky, kz, sx, sy, sz = _ray_shear(dx, dy, dz)
            if kx != kx0 or ky != ky0 or not _valid_ray(origins, directions, i):
                coherent = False
            if dx * d0x + dy * d0y + dz * d0z < cos_max * n0 * np.sqrt(dx * dx + dy * dy + dz * dz):
                coherent = False
            o = (origins[i, 0], origins[i, 1], origins[i, 2])
            lane[_OX + r] = o[0]
            lane[_OY + r] = o[1]
            lane[_OZ + r] = o[2]
            lane[_IX + r] = _safe_inverse(dx)
            lane[_IY + r] = _safe_inverse(dy)
            lane[_IZ + r] = _safe_inverse(dz)
            lane[_PX + r] = o[kx]
            lane[_PY + r] = o[ky]
            lane[_PZ + r] = o[kz]
            lane[_SX + r] = sx
            lane[_SY + r] = sy
            lane[_SZ + r] = sz
            lane[_TB + r] = t_max[i]
        else:
            lane[_OX + r] = 0.0
            lane[_OY + r] = 0.0
            lane[_OZ + r] = 0.0
            lane[_IX + r] = 1.0
            lane[_IY + r] = 1.0
            lane[_IZ + r] = 1.0
            lane[_PX + r] = 0.0
            lane[_PY + r] = 0.0
            lane[_PZ + r] = 0.0
            lane[_SX + r] = 0.0
            lane[_SY + r] = 0.0
            lane[_SZ + r] = 1.0
            lane[_TB + r] = -np.inf
        lane[_BJ + r] = -1.0
        lane[_BU + r] = 0.0
        lane[_BV + r] = 0.0
    return coherent, kx0, ky0, kz0


@numba.njit(cache=True, nogil=True, error_model="numpy")
def _packet_boxes(nb, node, lane, n_lanes, t_min):
    """Slab test of both children of ``node`` for every lane (Ize 2013 robust far bound).

    Returns (lanes hitting child 0, lanes hitting child 1, lanes hitting both, of which
    nearer to child 1).
    """
    x00 = np.float64(nb[node, 0])
    y00 = np.float64(nb[node, 2])
    z00 = np.float64(nb[node, 4])
    x10 = np.float64(nb[node, 6])
    y10 = np.float64(nb[node, 8])
    z10 = np.float64(nb[node, 10])
    x01 = np.float64(nb[node, 1])
    y01 = np.float64(nb[node, 3])
    z01 = np.float64(nb[node, 5])
    x11 = np.float64(nb[node, 7])
    y11 = np.float64(nb[node, 9])
    z11 = np.float64(nb[node, 11])
    h0 = 0
    h1 = 0
    both = 0
    vote1 = 0
    for r in range(n_lanes):
        ox = lane[_OX + r]
        oy = lane[_OY + r]
        oz = lane[_OZ + r]
        ix = lane[_IX + r]
        iy = lane[_IY + r]
        iz = lane[_IZ + r]
        tb = lane[_TB + r]
        a = (x00 - ox) * ix
        b = (x10 - ox) * ix
        c = (y00 - oy) * iy
        d = (y10 - oy) * iy
        e = (z00 - oz) * iz
        f = (z10 - oz) * iz
        near0 = max(max(min(a, b), min(c, d)), max(min(e, f), t_min))
        far0 = min(min(max(a, b), max(c, d)), max(e, f)) * _ROBUST_FAR
        a = (x01 - ox) * ix
        b = (x11 - ox) * ix
        c = (y01 - oy) * iy
        d = (y11 - oy) * iy
        e = (z01 - oz) * iz
        f = (z11 - oz) * iz
        near1 = max(max(min(a, b), min(c, d)), max(min(e, f), t_min))
        far1 = min(min(max(a, b), max(c, d)), max(e, f)) * _ROBUST_FAR
        k0 = near0 <= min(far0, tb)
        k1 = near1 <= min(far1, tb)
        h0 += k0
        h1 += k1
        both += k0 & k1
        vote1 += k0 & k1 & (near1 < near0)
    return h0, h1, both, vote1


@numba.njit(cache=True, nogil=True, error_model="numpy")
def _packet_leaf_closest(tv, ti, first, count, lane, n_lanes, t_min, kx, ky, kz):
    """Watertight test of leaf triangles against every lane; keeps each lane's closest hit
    (BJ = original triangle index; ties in t go to the lower index)."""
    for j in range(first, first + count):
        v0x = tv[j, kx]
        v0y = tv[j, ky]
        v0z = tv[j, kz]
        v1x = tv[j, 3 + kx]
        v1y = tv[j, 3 + ky]
        v1z = tv[j, 3 + kz]
        v2x = tv[j, 6 + kx]
        v2y = tv[j, 6 + ky]
        v2z = tv[j, 6 + kz]
        fj = np.float64(ti[j])
        for r in range(n_lanes):
            px = lane[_PX + r]
            py = lane[_PY + r]
            pz = lane[_PZ + r]
            sx = lane[_SX + r]
            sy = lane[_SY + r]
            sz = lane[_SZ + r]
            az = v0z - pz
            bz = v1z - pz
            cz = v2z - pz
            ax = (v0x - px) - sx * az
            ay = (v0y - py) - sy * az
            bx = (v1x - px) - sx * bz
            by = (v1y - py) - sy * bz
            cx = (v2x - px) - sx * cz
            cy = (v2y - py) - sy * cz
            uu = cx * by - cy * bx
            vv = ax * cy - ay * cx
            ww = bx * ay - by * ax
            det = uu + vv + ww
            ok = (((uu >= 0.0) & (vv >= 0.0) & (ww >= 0.0)) | ((uu <= 0.0) & (vv <= 0.0) & (ww <= 0.0))) & (det != 0.0)
            inv = 1.0 / (det if ok else 1.0)
            t = (uu * (sz * az) + vv * (sz * bz) + ww * (sz * cz)) * inv
            tb = lane[_TB + r]
            bj = lane[_BJ + r]
            upd = ok & (t > t_min) & ((t < tb) | ((t == tb) & (fj < bj)))
            lane[_TB + r] = t if upd else tb
            lane[_BJ + r] = fj if upd else bj
            lane[_BU + r] = vv * inv if upd else lane[_BU + r]
            lane[_BV + r] = ww * inv if upd else lane[_BV + r]


@numba.njit(cache=True, nogil=True, error_model="numpy")
def _packet_leaf_any(tv, first, count, lane, n_lanes, t_min, kx, ky, kz):
    """Occlusion test of leaf triangles for every lane; an occluded lane gets t_max = -inf
    (it then enters no more boxes) and BJ = 1. Returns the number of lanes newly occluded."""
    newly = 0
    for j in range(first, first + count):
        v0x = tv[j, kx]
        v0y = tv[j, ky]
        v0z = tv[j, kz]
        v1x = tv[j, 3 + kx]
        v1y = tv[j, 3 + ky]
        v1z = tv[j, 3 + kz]
        v2x = tv[j, 6 + kx]
        v2y = tv[j, 6 + ky]
        v2z = tv[j, 6 + kz]
        for r in range(n_lanes):
            px = lane[_PX + r]
            py = lane[_PY + r]
            pz = lane[_PZ + r]
            sx = lane[_SX + r]
            sy = lane[_SY + r]
            sz = lane[_SZ + r]
            az = v0z - pz
            bz = v1z - pz
            cz = v2z - pz
            ax = (v0x - px) - sx * az
            ay = (v0y - py) - sy * az
            bx = (v1x - px) - sx * bz
            by = (v1y - py) - sy * bz
            cx = (v2x - px) - sx * cz
            cy = (v2y - py) - sy * cz
            uu = cx * by - cy * bx
            vv = ax * cy - ay * cx
            ww = bx * ay - by * ax
            det = uu + vv + ww
            ok = (((uu >= 0.0) & (vv >= 0.0) & (ww >= 0.0)) | ((uu <= 0.0) & (vv <= 0.0) & (ww <= 0.0))) & (det != 0.0)
            inv = 1.0 / (det if ok else 1.0)
            t = (uu * (sz * az) + vv * (sz * bz) + ww * (sz * cz)) * inv
            tb = lane[_TB + r]
            upd = ok & (t > t_min) & (t < tb)
            lane[_TB + r] = -np.inf if upd else tb
            lane[_BJ + r] = 1.0 if upd else lane[_BJ + r]
            newly += upd
    return newly


@numba.njit(cache=True, nogil=True, error_model="numpy")
def _packet_closest(nb, ni, tv, ti, lane, n_lanes, t_min, kx, ky, kz, st_node):
    """Closest-hit traversal of one loaded packet; results stay in ``lane`` (TB, BJ, BU, BV)."""
    node = 0
    sp = 0
    while True:
        h0, h1, both, vote1 = _packet_boxes(nb, node, lane, n_lanes, t_min)
        nxt = -1
        if h0 > 0:
            ch = ni[node, 12]
            if ch < 0:
                _packet_leaf_closest(tv, ti, -ch - 1, ni[node, 14], lane, n_lanes, t_min, kx, ky, kz)
            else:
                nxt = ch
        if h1 > 0:
            ch = ni[node, 13]
            if ch < 0:
                _packet_leaf_closest(tv, ti, -ch - 1, ni[node, 15], lane, n_lanes, t_min, kx, ky, kz)
            elif nxt < 0:
                nxt = ch
            elif 2 * vote1 > both:
                # most lanes reach child 1 first: descend it, keep child 0 for later
                st_node[sp] = nxt
                sp += 1
                nxt = ch
            else:
                st_node[sp] = ch
                sp += 1
        if nxt >= 0:
            node = nxt
            continue
        if sp == 0:
            return
        sp -= 1
        node = st_node[sp]


@numba.njit(cache=True, nogil=True, error_model="numpy")
def _packet_any(nb, ni, tv, lane, n_lanes, n_active, t_min, kx, ky, kz, st_node):
    """Occlusion traversal of one loaded packet; stops when every active lane is occluded."""
    node = 0
    sp = 0
    left = n_active
    while True:
        h0, h1, both, vote1 = _packet_boxes(nb, node, lane, n_lanes, t_min)
        nxt = -1
        if h0 > 0:
            ch = ni[node, 12]
            if ch < 0:
                left -= _packet_leaf_any(tv, -ch - 1, ni[node, 14], lane, n_lanes, t_min, kx, ky, kz)
            else:
                nxt = ch
        if h1 > 0:
            ch = ni[node, 13]
            if ch < 0:
                left -= _packet_leaf_any(tv, -ch - 1, ni[node, 15], lane, n_lanes, t_min, kx, ky, kz)
            elif nxt < 0:
                nxt = ch
            elif 2 * vote1 > both:
                st_node[sp] = nxt
                sp += 1
                nxt = ch
            else:
                st_node[sp] = ch
                sp += 1
        if left <= 0:
            return
        if nxt >= 0:
            node = nxt
            continue
        if sp == 0:
            return
        sp -= 1
        node = st_node[sp]


# --------------------------------------------------------------------------------------------
# Batches
# --------------------------------------------------------------------------------------------

# Packets per parallel work item, and work items handed to a thread at a time (dynamic
# scheduling balances the cheap sky rays against the busy ones).
_PACKETS_PER_ITEM = 4
_CHUNK_ITEMS = 4


@numba.njit(cache=True, nogil=True, parallel=True, error_model="numpy")
def _closest_batch(
    nb,
    ni,
    wb,
    wi,
    wide_stack,
    tv,
    ti,
    origins,
    directions,
    t_min,
    t_max,
    n_lanes,
    width,
    use_packets,
    packet_cos,
    out_t,
    out_tri,
    out_u,
    out_v,
):
    n_rays = origins.shape[0]
    per_item = _PACKET * _PACKETS_PER_ITEM
    n_items = (n_rays + per_item - 1) // per_item
    for item in prange(n_items):
        lane = np.empty(_N_FIELDS * _PACKET)
        st_node = np.empty(max(_STACK_SIZE, wide_stack), np.int64)
        st_t = np.empty(wide_stack)
        work = np.empty(2 * _WIDE)
        stop = min(n_rays, (item + 1) * per_item)
        for start in range(item * per_item, stop, _PACKET):
            n = min(_PACKET, stop - start)
            coherent = False
            kx = ky = kz = 0
            if use_packets and n > 1:
                coherent, kx, ky, kz = _packet_load(lane, origins, directions, t_max, start, n, packet_cos)
            if coherent:
                _packet_closest(nb, ni, tv, ti, lane, n_lanes, t_min, kx, ky, kz, st_node)
                for r in range(n):
                    i = start + r
                    j = np.int64(lane[_BJ + r])
                    if j >= 0:
                        out_t[i] = lane[_TB + r]
                        out_tri[i] = j
                        out_u[i] = lane[_BU + r]
                        out_v[i] = lane[_BV + r]
                    else:
                        out_t[i] = np.inf
                        out_tri[i] = -1
                        out_u[i] = 0.0
                        out_v[i] = 0.0
                continue
            for i in range(start, start + n):
                if not _valid_ray(origins, directions, i):
                    out_t[i] = np.inf
                    out_tri[i] = -1
                    out_u[i] = 0.0
                    out_v[i] = 0.0
                    continue
                t, j, u, v = _closest_one(
                    wb, wi, tv, ti, origins[i], directions[i], t_min, t_max[i], st_node, st_t, work, width
                )
                if j >= 0:
                    out_t[i] = t
                    out_tri[i] = j
                    out_u[i] = u
                    out_v[i] = v
                else:
                    out_t[i] = np.inf
                    out_tri[i] = -1
                    out_u[i] = 0.0
                    out_v[i] = 0.0


@numba.njit(cache=True, nogil=True, parallel=True, error_model="numpy")
def _any_batch(
    nb, ni, wb, wi, wide_stack, tv, origins, directions, t_min, t_max, n_lanes, width, use_packets, packet_cos, out
):
    n_rays = origins.shape[0]
    per_item = _PACKET * _PACKETS_PER_ITEM
    n_items = (n_rays + per_item - 1) // per_item
    for item in prange(n_items):
        lane = np.empty(_N_FIELDS * _PACKET)
        st_node = np.empty(max(_STACK_SIZE, wide_stack), np.int64)
        work = np.empty(2 * _WIDE)
        stop = min(n_rays, (item + 1) * per_item)
        for start in range(item * per_item, stop, _PACKET):
            n = min(_PACKET, stop - start)
            coherent = False
            kx = ky = kz = 0
            if use_packets and n > 1:
                coherent, kx, ky, kz = _packet_load(lane, origins, directions, t_max, start, n, packet_cos)
            if coherent:
                active = 0
                for r in range(n):
                    active += lane[_TB + r] > t_min
                _packet_any(nb, ni, tv, lane, n_lanes, active, t_min, kx, ky, kz, st_node)
                for r in range(n):
                    out[start + r] = lane[_BJ + r] > 0.0
                continue
            for i in range(start, start + n):
                if not _valid_ray(origins, directions, i):
                    out[i] = False
                    continue
                out[i] = _any_one(wb, wi, tv, origins[i], directions[i], t_min, t_max[i], st_node, work, width)


def _ray_arrays(origins, directions, t_max):
    o = np.ascontiguousarray(origins, dtype=np.float64).reshape(-1, 3)
    d = np.ascontiguousarray(directions, dtype=np.float64).reshape(-1, 3)
    if o.shape != d.shape:
        raise ValueError(f"origins {o.shape} and directions {d.shape} must both be (N, 3)")
    n = o.shape[0]
    if t_max is None:
        tm = np.full(n, np.inf)
    else:
        tm = np.asarray(t_max, dtype=np.float64)
        tm = np.full(n, float(tm)) if tm.ndim == 0 else np.ascontiguousarray(tm.reshape(-1))
        if tm.shape[0] != n:
            raise ValueError(f"t_max has {tm.shape[0]} values for {n} rays")
    return o, d, tm


def intersect_closest(
    bvh: BVH, origins: np.ndarray, directions: np.ndarray, t_min: float = 0.0, t_max=None, *, packets: bool = True
) -> Hits:
    """Closest hit of each ray ``origin + t * direction`` with ``t_min < t < t_max``.

    Parameters
    ----------
    bvh
        From :func:`build_bvh`.
    origins, directions
        (N, 3) metres; directions need not be unit length (``t`` is then in units of the
        direction's length). A ray with a zero or non-finite direction, or a non-finite origin,
        hits nothing.
    t_min
        Lower bound of accepted ``t`` (exclusive), the same for every ray.
    t_max
        None (no bound), a scalar, or (N,) upper bounds (exclusive).
    packets
        Trace runs of consecutive rays with similar directions together (faster for camera
        rays and shadow rays in pixel order; the result is the same either way).

    Returns
    -------
    Hits
        Among triangles hit at exactly the same ``t`` the one stored first in the BVH wins,
        so the result does not depend on batching or traversal order.
    """
    o, d, tm = _ray_arrays(origins, directions, t_max)
    n = o.shape[0]
    if not (n and bvh.n_nodes):
        return Hits(np.full(n, np.inf), np.full(n, -1, np.int32), np.zeros(n), np.zeros(n))
    # Every entry is written by the kernel.
    out_t = np.empty(n)
    out_tri = np.empty(n, np.int32)
    out_u = np.empty(n)
    out_v = np.empty(n)
    # The lane count and tree width are passed at run time so that LLVM vectorises the loops
    # over them instead of unrolling them.
    with numba.parallel_chunksize(_CHUNK_ITEMS):
        _closest_batch(
            bvh.nodes,
            bvh.nodes_i32,
            bvh.wide_nodes,
            bvh.wide_nodes_i32,
            bvh.wide_stack,
            bvh.tri_vertices,
            bvh.tri_index,
            o,
            d,
            float(t_min),
            tm,
            _PACKET,
            _WIDE,
            bool(packets),
            _PACKET_COS,
            out_t,
            out_tri,
            out_u,
            out_v,
        )
    return Hits(out_t, out_tri, out_u, out_v)


def intersect_any(
    bvh: BVH, origins: np.ndarray, directions: np.ndarray, t_max=None, t_min: float = 0.0, *, packets: bool = True
) -> np.ndarray:
    """Occlusion test for shadow rays: (N,) bool, True if any hit has ``t_min < t < t_max``.

    Same ray conventions as :func:`intersect_closest`; stops at the first hit found. For a
    shadow ray from a surface point ``p`` to a light at ``q`` use ``direction = q - p`` and
    ``t_max = 1 - eps`` (and a small ``t_min`` or an offset origin against self-hits).
    """
    o, d, tm = _ray_arrays(origins, directions, t_max)
    n = o.shape[0]
    if not (n and bvh.n_nodes):
        return np.zeros(n, np.bool_)
    out = np.empty(n, np.bool_)  # every entry is written by the kernel
    with numba.parallel_chunksize(_CHUNK_ITEMS):
        _any_batch(
            bvh.nodes,
            bvh.nodes_i32,
            bvh.wide_nodes,
            bvh.wide_nodes_i32,
            bvh.wide_stack,
            bvh.tri_vertices,
            o,
            d,
            float(t_min),
            tm,
            _PACKET,
            _WIDE,
            bool(packets),
            _PACKET_COS_ANY,
            out,
        )
    return out


# --------------------------------------------------------------------------------------------


def interpolate_normal(mesh_normals: np.ndarray, hits: Hits) -> np.ndarray:
    """Shading normals (N, 3) at hits, interpolated from per-vertex normals (F, 3, 3).

    Phong interpolation with the barycentrics of :class:`Hits`, renormalised to unit length.
    Misses get (0, 0, 0).
    """
    nrm = np.asarray(mesh_normals, dtype=np.float64).reshape(-1, 3, 3)
    out = np.zeros((hits.t.shape[0], 3))
    m = hits.hit
    if not np.any(m):
        return out
    tri = hits.triangle[m]
    u = hits.u[m][:, None]
    v = hits.v[m][:, None]
    n = (1.0 - u - v) * nrm[tri, 0] + u * nrm[tri, 1] + v * nrm[tri, 2]
    length = np.linalg.norm(n, axis=1, keepdims=True)
    out[m] = np.divide(n, length, out=np.zeros_like(n), where=length > 0)
    return out


def geometric_normal(triangles_m: np.ndarray, hits: Hits) -> np.ndarray:
    """Unit geometric (face) normals (N, 3) of the hit triangles, counter-clockwise winding.

    Misses and degenerate triangles get (0, 0, 0).
    """
    tris = np.asarray(triangles_m, dtype=np.float64).reshape(-1, 3, 3)
    out = np.zeros((hits.t.shape[0], 3))
    m = hits.hit
    if not np.any(m):
        return out
    t = tris[hits.triangle[m]]
    n = np.cross(t[:, 1] - t[:, 0], t[:, 2] - t[:, 0])
    length = np.linalg.norm(n, axis=1, keepdims=True)
    out[m] = np.divide(n, length, out=np.zeros_like(n), where=length > 0)
    return out


def face_forward(normals: np.ndarray, directions: np.ndarray) -> np.ndarray:
    """Flip normals (N, 3) to face against the incoming ray directions (N, 3)."""
    n = np.asarray(normals, dtype=np.float64)
    s = np.einsum("ij,ij->i", n, np.asarray(directions, dtype=np.float64))
    return np.where((s > 0.0)[:, None], -n, n)
