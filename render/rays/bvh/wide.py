"""The 8-wide tree: the binary BVH collapsed for single-ray traversal.

Each wide node takes a binary node's two children and keeps replacing the inner child of
largest surface area by its two children until it has :data:`~render.rays.bvh.layout.WIDE`
children. Leaves (and so the triangle order) are unchanged and boxes are copied (already
rounded outwards), so both trees give a ray the same candidate triangles. Unused slots get a
point box at the float32 limit that no ray enters. Record layout: :class:`~render.rays.bvh.layout.BVH`.

References
----------
- Dammertz, Hanika & Keller, "Shallow bounding volume hierarchies for fast SIMD ray tracing of
  incoherent rays", Eurographics Symposium on Rendering 2008 (collapsing by largest area).
- Wald, Benthin & Boulos, "Getting rid of packets: efficient SIMD single-ray traversal using
  multi-branching BVHs", IEEE Symposium on Interactive Ray Tracing 2008.
"""

from __future__ import annotations

import numba
import numpy as np

from render.rays.bvh.layout import FAR_POINT, WIDE, aligned_empty

__all__ = ["collapse_wide"]


@numba.njit(cache=True, nogil=True)
def _collapse_kernel(nodes, ni, width):
    """Wide tree of ``width`` children per node from the binary tree (``nodes``, its int32 view
    ``ni``). Returns (bounds (N, 6, width) float32, child (N, width), count (N, width),
    n_nodes, depth); only the first n_nodes rows are used."""
    n2 = nodes.shape[0]
    cap = max(n2, 1)
    wb = np.empty((cap, 6, width), np.float32)
    wc = np.empty((cap, width), np.int32)
    wn = np.empty((cap, width), np.int32)
    for n in range(cap):
        for c in range(width):
            for q in range(6):
                wb[n, q, c] = FAR_POINT
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


def collapse_wide(nodes: np.ndarray, nodes_i32: np.ndarray) -> tuple[np.ndarray, np.ndarray, int]:
    """Wide tree of the binary tree ``nodes`` (``nodes_i32`` its int32 view).

    Returns ``(wide_nodes, wide_nodes_i32, wide_stack)``: (n_wide, 8 WIDE) float32 records,
    64-byte aligned, their int32 view, and the traversal stack entries the tree can need.
    """
    wb, wc, wn, n_wide, depth = _collapse_kernel(nodes, nodes_i32, WIDE)
    wide = aligned_empty((n_wide, 8 * WIDE), np.float32)
    wide[:, : 6 * WIDE] = wb[:n_wide].reshape(-1, 6 * WIDE)
    wide_i32 = wide.view(np.int32)
    wide_i32[:, 6 * WIDE : 7 * WIDE] = wc[:n_wide]
    wide_i32[:, 7 * WIDE :] = wn[:n_wide]
    return wide, wide_i32, int(WIDE * (depth + 1))
