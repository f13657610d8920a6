"""Batched ray queries: closest hit and any hit (occlusion) for arrays of rays.

A batch is split into work items of a few packets, interleaved over threads
(:func:`render.threads.run_split`; the kernel itself is serial, which compiles several times
faster than a ``prange`` loop). Within an item, each run of :data:`~render.rays.bvh.packet.PACKET` consecutive rays whose directions are
close is traced as a packet through the binary tree (:mod:`render.rays.bvh.packet`); other rays
go one by one through the 8-wide tree (:mod:`render.rays.bvh.single`). Both paths compute each
ray with the same floating-point operations and break exact ties in ``t`` by the lower triangle
index, so a ray's result never depends on the path, the batch or the order of the rays.

Rays are ``origin + t * direction`` (directions need not be unit length; ``t`` is in units of
the direction's length) and a hit counts for ``t_min < t < t_max``.

References
----------
- Wald, Slusallek, Benthin & Wagner, "Interactive Rendering with Coherent Ray Tracing",
  Computer Graphics Forum 20(3), 2001 (packets).
- Wald, Benthin & Boulos, "Getting rid of packets: efficient SIMD single-ray traversal using
  multi-branching BVHs", IEEE Symposium on Interactive Ray Tracing 2008 (single rays).
"""

from __future__ import annotations

import numba
import numpy as np

from render.rays.bvh.layout import BVH, STACK_SIZE, WIDE, Hits
from render.rays.bvh.packet import (
    LANE_FIELDS,
    PACKET,
    PACKET_COS,
    PACKET_COS_ANY,
    lane_result,
    packet_coherent,
    packet_load,
    packet_trace,
)
from render.rays.bvh.single import any_one, closest_one
from render.rays.bvh.slab import valid_ray
from render.threads import run_split

__all__ = ["intersect_any", "intersect_closest"]

# Packets per work item; items are interleaved over the threads, which balances the cheap sky
# rays against the busy ones.
_PACKETS_PER_ITEM = 4


@numba.njit(cache=True, nogil=True, inline="always")
def _store(i, t, j, u, v, out_t, out_tri, out_u, out_v):
    """Write ray ``i``'s closest hit (``j`` < 0: a miss, stored as t = inf, triangle -1)."""
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


@numba.njit(cache=True, nogil=True, error_model="numpy")
def _trace_batch(
    tree,
    wide_stack,
    origins,
    directions,
    t_min,
    t_max,
    n_lanes,
    width,
    use_packets,
    packet_cos,
    occlusion,
    out,
    first,
    stride,
):
    """Trace work items ``first, first + stride, ...`` of a batch through ``tree`` = (binary
    nodes, their int32 view, wide nodes, their int32 view, triangle vertices, triangle index,
    triangle lanes).
    Closest hits go into ``out`` = (t, triangle, u, v, _) or, with ``occlusion``, any hit into
    ``out[4]`` (the other outputs are then not touched)."""
    nb, ni, wb, wi, tv, ti, tl = tree
    out_t, out_tri, out_u, out_v, out_hit = out
    n_rays = origins.shape[0]
    per_item = PACKET * _PACKETS_PER_ITEM
    n_items = (n_rays + per_item - 1) // per_item
    lane = np.empty(LANE_FIELDS * PACKET)
    st_node = np.empty(max(STACK_SIZE, wide_stack), np.int64)
    st_t = np.empty(wide_stack)
    work = np.empty(2 * WIDE)
    # One ray's origin and direction, copied here rather than passed as views origins[i]:
    # a view takes a reference to the batch's array, an atomic update of a count that the
    # threads share.
    o = np.empty(3)
    d = np.empty(3)
    for item in range(first, n_items, stride):
        stop = min(n_rays, (item + 1) * per_item)
        for start in range(item * per_item, stop, PACKET):
            n = min(PACKET, stop - start)
            coherent = False
            k = (0, 0, 0)
            if use_packets and n > 1 and packet_coherent(origins, directions, start, n, packet_cos):
                coherent, k = packet_load(lane, origins, directions, t_max, start, n, packet_cos)
            if coherent:
                packet_trace(nb, ni, tv, ti, lane, n_lanes, t_min, k, st_node, occlusion)
                for r in range(n):
                    t, j, u, v = lane_result(lane, r)
                    if occlusion:
                        out_hit[start + r] = j > 0
                    else:
                        _store(start + r, t, j, u, v, out_t, out_tri, out_u, out_v)
                continue
            for i in range(start, start + n):
                valid = valid_ray(origins, directions, i)
                for q in range(3):
                    o[q] = origins[i, q]
                    d[q] = directions[i, q]
                if occlusion:
                    out_hit[i] = valid and any_one(wb, wi, tv, o, d, t_min, t_max[i], st_node, work, width, tl)
                    continue
                t, j, u, v = np.inf, -1, 0.0, 0.0
                if valid:
                    t, j, u, v = closest_one(wb, wi, tv, ti, o, d, t_min, t_max[i], st_node, st_t, work, width, tl)
                _store(i, t, j, u, v, out_t, out_tri, out_u, out_v)


def _ray_arrays(
    origins: np.ndarray, directions: np.ndarray, t_max: float | np.ndarray | None
) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """Contiguous float64 (N, 3) origins and directions and (N,) upper bounds."""
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


def _run(
    bvh: BVH,
    o: np.ndarray,
    d: np.ndarray,
    t_min: float,
    tm: np.ndarray,
    packets: bool,
    occlusion: bool,
    out: tuple[np.ndarray, np.ndarray, np.ndarray, np.ndarray, np.ndarray],
) -> None:
    """Run :func:`_trace_batch` on prepared rays (see :func:`intersect_closest`)."""
    # The lane count and tree width are passed at run time so that LLVM vectorises the loops
    # over them instead of unrolling them. Every entry of the requested outputs is written.
    per_item = PACKET * _PACKETS_PER_ITEM
    run_split(
        _trace_batch,
        (o.shape[0] + per_item - 1) // per_item,
        bvh.kernel_arrays,
        bvh.wide_stack,
        o,
        d,
        float(t_min),
        tm,
        PACKET,
        WIDE,
        bool(packets),
        PACKET_COS_ANY if occlusion else PACKET_COS,
        occlusion,
        out,
    )


def intersect_closest(
    bvh: BVH,
    origins: np.ndarray,
    directions: np.ndarray,
    t_min: float = 0.0,
    t_max: float | np.ndarray | None = None,
    *,
    packets: bool = True,
) -> Hits:
    """Closest hit of each ray ``origin + t * direction`` with ``t_min < t < t_max``.

    Parameters
    ----------
    bvh
        From :func:`~render.rays.bvh.build.build_bvh`.
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
    hits = Hits(np.empty(n), np.empty(n, np.int32), np.empty(n), np.empty(n))
    _run(bvh, o, d, t_min, tm, packets, False, (hits.t, hits.triangle, hits.u, hits.v, np.empty(0, np.bool_)))
    return hits


def intersect_any(
    bvh: BVH,
    origins: np.ndarray,
    directions: np.ndarray,
    t_max: float | np.ndarray | None = None,
    t_min: float = 0.0,
    *,
    packets: bool = True,
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
    out = np.empty(n, np.bool_)
    unused = np.empty(0)
    _run(bvh, o, d, t_min, tm, packets, True, (unused, np.empty(0, np.int32), unused, unused, out))
    return out
