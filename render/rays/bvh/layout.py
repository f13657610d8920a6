"""BVH layout: the flat arrays of the tree and of a batch of hits.

Everything the traversal kernels read is a flat array; no Python object is touched in the
hot path.

* Only inner nodes are stored. Node ``n`` of the binary tree holds the boxes of *both* its
  children, so one node fetch decides which children a ray enters and in which order ("child
  boxes in the parent"). Boxes, child references and leaf counts of a node share one 64-byte
  record (one cache line), :attr:`BVH.nodes`.
* A child reference ``>= 0`` is the index of an inner node; ``< 0`` is a leaf holding ``count``
  triangles starting at ``-reference - 1`` in the permuted triangle order. An empty slot has
  a box that no ray enters.
* Boxes are stored in float32 rounded outwards (never smaller than the float64 triangle
  bounds), which halves the memory traffic of traversal; the ray/box test itself runs in
  float64 with the conservative far distance of Ize 2013 (:mod:`render.rays.bvh.slab`), so
  rounding never makes a ray miss a box it touches.
* Triangles are copied in leaf order into ``tri_vertices`` (M, 9) float64 (v0, v1, v2), and
  ``tri_index`` maps back to the caller's triangle order. The same vertices are stored again
  component by component, ``tri_lanes`` (9, M + 3): a leaf's next four triangles are one
  vector load per component, and the ray's axis permutation of the watertight test is a
  choice of rows (the single-ray traversal tests a leaf's triangles four at a time).
* The binary tree is also collapsed into an 8-wide tree (:attr:`BVH.wide_nodes`,
  :mod:`render.rays.bvh.wide`) with the same leaves.

Rays are ``origin + t * direction``: directions need not be unit length and ``t`` is measured
in units of the direction's length (for unit directions ``t`` is the distance in metres).
Barycentrics: the hit point is ``(1 - u - v) * v0 + u * v1 + v * v2``.

References
----------
- Ize, "Robust BVH Ray Traversal", Journal of Computer Graphics Techniques 2(2), 2013
  (boxes rounded outwards, conservative far distance).
- Wald, Benthin & Boulos, "Getting rid of packets: efficient SIMD single-ray traversal using
  multi-branching BVHs", IEEE Symposium on Interactive Ray Tracing 2008 (wide-node records).
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
from numpy.typing import DTypeLike

__all__ = ["BVH", "FAR_POINT", "Hits", "MAX_SAH_DEPTH", "STACK_SIZE", "WIDE", "aligned_empty"]

# Traversal stack entries of the binary tree; the builder limits the tree depth well below
# this (see MAX_SAH_DEPTH).
STACK_SIZE = 128
# Past this depth the builder splits at the object median, which bounds the depth by
# MAX_SAH_DEPTH + log2(number of triangles) < STACK_SIZE for any int32 triangle count.
MAX_SAH_DEPTH = 64
# Children per node of the wide tree used by single-ray traversal.
WIDE = 8
# Box of an unused wide-tree slot: a point at the float32 limit, which no ray reaches.
FAR_POINT = float(np.finfo(np.float32).max)


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
    tri_lanes
        (9, M + LANES - 1) float64: ``tri_vertices`` transposed (row ``3 v + c`` component
        ``c`` of vertex ``v``), then LANES - 1 columns of zeros, so that the LANES triangles
        from any leaf position are one contiguous run per row
        (:func:`render.rays.bvh.simd.leaf_lane_hits`).
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
    tri_lanes: np.ndarray
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
    def kernel_arrays(self) -> tuple[np.ndarray, ...]:
        """The arrays the batch kernels take as their ``tree`` argument, in their order: binary
        nodes and their int32 view, wide nodes and their int32 view, triangle vertices, triangle
        index, the vertices by component."""
        return (
            self.nodes,
            self.nodes_i32,
            self.wide_nodes,
            self.wide_nodes_i32,
            self.tri_vertices,
            self.tri_index,
            self.tri_lanes,
        )

    @property
    def nbytes(self) -> int:
        """Bytes held by the BVH arrays (nodes, permutation and the two triangle copies)."""
        return int(
            self.nodes.nbytes
            + self.wide_nodes.nbytes
            + self.tri_index.nbytes
            + self.tri_vertices.nbytes
            + self.tri_lanes.nbytes
        )


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


def aligned_empty(shape: tuple[int, ...], dtype: DTypeLike, align: int = 64) -> np.ndarray:
    """Uninitialised C-contiguous array whose data starts on an ``align``-byte boundary."""
    dtype = np.dtype(dtype)
    n = int(np.prod(shape)) * dtype.itemsize
    raw = np.empty(n + align, np.uint8)
    offset = (-raw.ctypes.data) % align
    return raw[offset : offset + n].view(dtype).reshape(shape)
