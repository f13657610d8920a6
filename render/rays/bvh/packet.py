"""Packet traversal of the binary tree: runs of consecutive rays with similar directions.

:data:`PACKET` consecutive rays whose directions are close (camera rays of neighbouring pixels,
shadow rays towards one lamp) share one traversal: a node's child is entered when any lane hits
its box, and when both are, the child most lanes reach first is descended first. The per-lane
work is in plain counted loops over lane state held in one flat array, which LLVM vectorises.
Each lane computes exactly the floating-point operations single-ray traversal computes for that
ray (the same slab and triangle functions), and exact ties in ``t`` go to the lower triangle
index, so a ray's result never depends on the path that traced it.

:func:`packet_load`, :func:`packet_trace` and the per-node functions it calls take their arrays' data pointers
(:func:`~render.rays.bvh.simd.data_pointer`) and make their views with ``numba.carray``:
numba passes an array as its whole record and, for a function that can raise, keeps atomic
reference counts of it, on every call; a pointer is one register and counts nothing.

References
----------
- Wald, Slusallek, Benthin & Wagner, "Interactive Rendering with Coherent Ray Tracing",
  Computer Graphics Forum 20(3), 2001 (packets).
- Ize, "Robust BVH Ray Traversal", JCGT 2(2), 2013 (box test, :mod:`render.rays.bvh.slab`).
- Woop, Benthin & Wald, "Watertight Ray/Triangle Intersection", JCGT 2(1), 2013
  (:mod:`render.rays.bvh.triangle`).
"""

from __future__ import annotations

import numba
import numpy as np

from render.rays.bvh.simd import data_pointer
from render.rays.bvh.slab import far_origin, safe_inverse, slab_interval, valid_ray
from render.rays.bvh.triangle import intersect_triangle, ray_shear, triangle_vertices

__all__ = [
    "LANE_FIELDS",
    "PACKET",
    "PACKET_COS",
    "PACKET_COS_ANY",
    "lane_result",
    "packet_coherent",
    "packet_load",
    "packet_trace",
]

PACKET = 16
# A packet is traced together only if all its directions are within this angle of the first
# ray's and share its projection axes (kx, ky, kz); otherwise its rays go one by one. Shadow
# rays converging on a light still share most nodes at wider spreads, hence the wider limit
# for occlusion queries (both values tuned on the stress scene of render.bench.rays).
_PACKET_MAX_ANGLE_RAD = 0.1
_PACKET_MAX_ANGLE_ANY_RAD = 0.5
PACKET_COS = float(np.cos(_PACKET_MAX_ANGLE_RAD))
PACKET_COS_ANY = float(np.cos(_PACKET_MAX_ANGLE_ANY_RAD))

# Views made from data pointers inside the per-packet and per-node functions: a binary node
# record is 16 columns; the row count is only a bound no index reaches (numba checks none).
_NODE_RECORD = 16
_ROWS = 1 << 40

# Lane state lives in one flat float64 array, field f of lane r at f * PACKET + r: a single
# base pointer with constant offsets lets the vectoriser prove that the fields do not overlap.
# O: origin, I: inverse direction, P: origin permuted to (kx, ky, kz), S: shear, TB: best t
# so far (the moving t_max; -inf for an unused or occluded lane), BJ: its triangle (-1: none;
# occlusion: 1 when occluded), BU, BV: its barycentrics; U: the origin the upper box bounds are
# measured from (render.rays.bvh.slab.far_origin).
LANE_FIELDS = 19
_OX, _OY, _OZ, _IX, _IY, _IZ, _PX, _PY, _PZ, _SX, _SY, _SZ, _TB, _BJ, _BU, _BV, _UX, _UY, _UZ = (
    f * PACKET for f in range(LANE_FIELDS)
)


@numba.njit(cache=True, nogil=True, error_model="numpy")
def packet_coherent(origins: np.ndarray, directions: np.ndarray, start: int, n: int, cos_max: float) -> bool:
    """A quick rejection before :func:`packet_load`: False if the second or the last of rays
    ``start .. start + n - 1`` fails :func:`packet_load`'s test (valid, within ``cos_max`` of
    the first ray's direction and with its axes, by the same arithmetic), else True and
    :func:`packet_load` decides. Incoherent rays (bounces) then cost two rays of this test
    before going one by one, instead of filling a packet's lanes first; coherent ones two rays
    more."""
    d0x = directions[start, 0]
    d0y = directions[start, 1]
    d0z = directions[start, 2]
    n0 = np.sqrt(d0x * d0x + d0y * d0y + d0z * d0z)
    kx0, ky0, _, _, _, _ = ray_shear(d0x, d0y, d0z)
    for i in (start + 1, start + n - 1):
        dx = directions[i, 0]
        dy = directions[i, 1]
        dz = directions[i, 2]
        kx, ky, _, _, _, _ = ray_shear(dx, dy, dz)
        if kx != kx0 or ky != ky0 or not valid_ray(origins, directions, i):
            return False
        if dx * d0x + dy * d0y + dz * d0z < cos_max * n0 * np.sqrt(dx * dx + dy * dy + dz * dz):
            return False
    return True


@numba.njit(cache=True, nogil=True, error_model="numpy")
def packet_load(
    lane: np.ndarray,
    origins: np.ndarray,
    directions: np.ndarray,
    t_max: np.ndarray,
    start: int,
    n: int,
    cos_max: float,
) -> tuple[bool, tuple[int, int, int]]:
    """Fill the lane state for rays ``start .. start + n - 1`` (n <= PACKET).

    Unused lanes get t_max = -inf so that they never enter a box. Returns ``(coherent, k)``:
    whether the rays may be traced together (all valid, within ``cos_max`` of the first ray's
    direction and with its axes), and those axes ``k`` = (kx, ky, kz). ``lane``, ``origins``,
    ``directions`` (float64, (N, 3)) and ``t_max`` (float64) are C-contiguous.
    """
    return _packet_load(
        data_pointer(lane, np.float64),
        data_pointer(origins, np.float64),
        data_pointer(directions, np.float64),
        data_pointer(t_max, np.float64),
        start,
        n,
        cos_max,
    )


@numba.njit(cache=True, nogil=True, error_model="numpy")
def _packet_load(lane_p, origins_p, directions_p, t_max_p, start, n, cos_max):
    """:func:`packet_load` on its arrays' data pointers (see the module docstring)."""
    lane = numba.carray(lane_p, (LANE_FIELDS * PACKET,), np.float64)
    origins = numba.carray(origins_p, (_ROWS, 3), np.float64)
    directions = numba.carray(directions_p, (_ROWS, 3), np.float64)
    t_max = numba.carray(t_max_p, (_ROWS,), np.float64)
    d0x = directions[start, 0]
    d0y = directions[start, 1]
    d0z = directions[start, 2]
    n0 = np.sqrt(d0x * d0x + d0y * d0y + d0z * d0z)
    kx0, ky0, kz0, _, _, _ = ray_shear(d0x, d0y, d0z)
    coherent = True
    for r in range(n):
        i = start + r
        dx = directions[i, 0]
        dy = directions[i, 1]
        dz = directions[i, 2]
        kx, ky, kz, sx, sy, sz = ray_shear(dx, dy, dz)
        if kx != kx0 or ky != ky0 or not valid_ray(origins, directions, i):
            coherent = False
        if dx * d0x + dy * d0y + dz * d0z < cos_max * n0 * np.sqrt(dx * dx + dy * dy + dz * dz):
            coherent = False
        o = (origins[i, 0], origins[i, 1], origins[i, 2])
        lane[_OX + r] = o[0]
        lane[_OY + r] = o[1]
        lane[_OZ + r] = o[2]
        lane[_UX + r] = far_origin(o[0], dx)
        lane[_UY + r] = far_origin(o[1], dy)
        lane[_UZ + r] = far_origin(o[2], dz)
        lane[_IX + r] = safe_inverse(dx)
        lane[_IY + r] = safe_inverse(dy)
        lane[_IZ + r] = safe_inverse(dz)
        lane[_PX + r] = o[kx]
        lane[_PY + r] = o[ky]
        lane[_PZ + r] = o[kz]
        lane[_SX + r] = sx
        lane[_SY + r] = sy
        lane[_SZ + r] = sz
        lane[_TB + r] = t_max[i]
        lane[_BJ + r] = -1.0
        lane[_BU + r] = 0.0
        lane[_BV + r] = 0.0
    for r in range(n, PACKET):  # unused lanes: a finite dummy ray that enters no box
        for f in range(LANE_FIELDS):
            lane[f * PACKET + r] = 0.0
        lane[_IX + r] = 1.0
        lane[_IY + r] = 1.0
        lane[_IZ + r] = 1.0
        lane[_SZ + r] = 1.0
        lane[_TB + r] = -np.inf
        lane[_BJ + r] = -1.0
    return coherent, (kx0, ky0, kz0)


@numba.njit(cache=True, nogil=True)
def lane_result(lane: np.ndarray, r: int) -> tuple[float, int, float, float]:
    """Lane ``r``'s result ``(t, triangle, u, v)`` after :func:`packet_trace`: triangle -1 for
    a miss; for an occlusion query triangle 1 means occluded."""
    return lane[_TB + r], np.int64(lane[_BJ + r]), lane[_BU + r], lane[_BV + r]


@numba.njit(cache=True, nogil=True, error_model="numpy")
def _packet_boxes(nb_p, node, lane_p, n_lanes, t_min):
    """Slab test of both children of ``node`` for every lane (``nb_p``, ``lane_p``: data
    pointers of the binary nodes and the lane state).

    Returns (lanes entering child 0, lanes entering child 1, lanes entering both, of which
    nearer to child 1).
    """
    nb = numba.carray(nb_p, (_ROWS, _NODE_RECORD), np.float32)
    lane = numba.carray(lane_p, (LANE_FIELDS * PACKET,), np.float64)
    lo0 = (np.float64(nb[node, 0]), np.float64(nb[node, 2]), np.float64(nb[node, 4]))
    hi0 = (np.float64(nb[node, 6]), np.float64(nb[node, 8]), np.float64(nb[node, 10]))
    lo1 = (np.float64(nb[node, 1]), np.float64(nb[node, 3]), np.float64(nb[node, 5]))
    hi1 = (np.float64(nb[node, 7]), np.float64(nb[node, 9]), np.float64(nb[node, 11]))
    h0 = 0
    h1 = 0
    both = 0
    vote1 = 0
    for r in range(n_lanes):
        origin = (lane[_OX + r], lane[_OY + r], lane[_OZ + r])
        inverse = (lane[_IX + r], lane[_IY + r], lane[_IZ + r])
        upper = (lane[_UX + r], lane[_UY + r], lane[_UZ + r])
        tb = lane[_TB + r]
        near0, far0 = slab_interval(lo0, hi0, origin, inverse, t_min, upper)
        near1, far1 = slab_interval(lo1, hi1, origin, inverse, t_min, upper)
        k0 = near0 <= min(far0, tb)
        k1 = near1 <= min(far1, tb)
        h0 += k0
        h1 += k1
        both += k0 & k1
        vote1 += k0 & k1 & (near1 < near0)
    return h0, h1, both, vote1


@numba.njit(cache=True, nogil=True)
def _lane_hit(lane, r, tri):
    """Watertight test of triangle ``tri`` (permuted vertices) against lane ``r``."""
    p = (lane[_PX + r], lane[_PY + r], lane[_PZ + r])
    s = (lane[_SX + r], lane[_SY + r], lane[_SZ + r])
    return intersect_triangle(tri, p, s)


@numba.njit(cache=True, nogil=True, error_model="numpy")
def _leaf_closest(tv, ti, first, count, lane, n_lanes, t_min, k):
    """Leaf triangles against every lane; keeps each lane's closest hit (BJ = original
    triangle index; ties in t go to the lower index)."""
    for j in range(first, first + count):
        tri = triangle_vertices(tv, j, k)
        fj = np.float64(ti[j])
        for r in range(n_lanes):
            hit, t, u, v = _lane_hit(lane, r, tri)
            tb = lane[_TB + r]
            bj = lane[_BJ + r]
            upd = hit & (t > t_min) & ((t < tb) | ((t == tb) & (fj < bj)))
            lane[_TB + r] = t if upd else tb
            lane[_BJ + r] = fj if upd else bj
            lane[_BU + r] = u if upd else lane[_BU + r]
            lane[_BV + r] = v if upd else lane[_BV + r]


@numba.njit(cache=True, nogil=True, error_model="numpy")
def _leaf_any(tv, first, count, lane, n_lanes, t_min, k):
    """Occlusion test of leaf triangles for every lane; an occluded lane gets TB = -inf (it
    then enters no more boxes) and BJ = 1. Returns the number of lanes newly occluded."""
    newly = 0
    for j in range(first, first + count):
        tri = triangle_vertices(tv, j, k)
        for r in range(n_lanes):
            hit, t, _, _ = _lane_hit(lane, r, tri)
            tb = lane[_TB + r]
            upd = hit & (t > t_min) & (t < tb)
            lane[_TB + r] = -np.inf if upd else tb
            lane[_BJ + r] = 1.0 if upd else lane[_BJ + r]
            newly += upd
    return newly


@numba.njit(cache=True, nogil=True)
def _visit_leaf(ni_p, node, c, tv_p, ti_p, lane_p, n_lanes, t_min, k, occlusion):
    """Test leaf child ``c`` of ``node`` (arrays as data pointers); returns the lanes it newly
    occluded (0 for closest)."""
    nb_i32 = numba.carray(ni_p, (_ROWS, _NODE_RECORD), np.int32)
    tv = numba.carray(tv_p, (_ROWS, 9), np.float64)
    ti = numba.carray(ti_p, (_ROWS,), np.int32)
    lane = numba.carray(lane_p, (LANE_FIELDS * PACKET,), np.float64)
    first = -nb_i32[node, 12 + c] - 1
    count = nb_i32[node, 14 + c]
    if occlusion:
        return _leaf_any(tv, first, count, lane, n_lanes, t_min, k)
    _leaf_closest(tv, ti, first, count, lane, n_lanes, t_min, k)
    return 0


@numba.njit(cache=True, nogil=True, error_model="numpy")
def packet_trace(
    nb: np.ndarray,
    ni: np.ndarray,
    tv: np.ndarray,
    ti: np.ndarray,
    lane: np.ndarray,
    n_lanes: int,
    t_min: float,
    k: tuple[int, int, int],
    st_node: np.ndarray,
    occlusion: bool,
) -> None:
    """Trace one loaded packet through the binary tree (``nb``/``ni`` its float32/int32 views;
    ``tv``/``ti`` the BVH's triangles (float64) and index (int32); ``lane`` the lane state;
    ``st_node`` an int64 scratch stack; all C-contiguous). Closest hit, or with ``occlusion``
    any hit, stopping when every lane that can be hit is occluded. Results stay in ``lane``
    (:func:`lane_result`)."""
    _packet_trace(
        data_pointer(nb, np.float32),
        data_pointer(ni, np.int32),
        data_pointer(tv, np.float64),
        data_pointer(ti, np.int32),
        data_pointer(lane, np.float64),
        n_lanes,
        t_min,
        k,
        data_pointer(st_node, np.int64),
        occlusion,
    )


@numba.njit(cache=True, nogil=True, error_model="numpy")
def _packet_trace(nb_p, ni_p, tv_p, ti_p, lane_p, n_lanes, t_min, k, st_node_p, occlusion):
    """:func:`packet_trace` on its arrays' data pointers (see the module docstring)."""
    ni = numba.carray(ni_p, (_ROWS, _NODE_RECORD), np.int32)
    lane = numba.carray(lane_p, (LANE_FIELDS * PACKET,), np.float64)
    st_node = numba.carray(st_node_p, (_ROWS,), np.int64)
    # int64, not the literal 0: numba compiles a called kernel once per literal argument, and
    # type inference would otherwise compile _packet_boxes for node = 0 as well.
    node = np.int64(0)
    # The child slots as int64 values too, so that _visit_leaf is compiled once, not once for
    # each literal slot.
    slot0 = np.int64(0)
    slot1 = np.int64(1)
    sp = 0
    left = 0  # lanes not yet occluded
    for r in range(n_lanes):
        left += lane[_TB + r] > t_min
    while True:
        h0, h1, both, vote1 = _packet_boxes(nb_p, node, lane_p, n_lanes, t_min)
        nxt = -1
        if h0 > 0:
            ch = ni[node, 12]
            if ch < 0:
                left -= _visit_leaf(ni_p, node, slot0, tv_p, ti_p, lane_p, n_lanes, t_min, k, occlusion)
            else:
                nxt = ch
        if h1 > 0:
            ch = ni[node, 13]
            if ch < 0:
                left -= _visit_leaf(ni_p, node, slot1, tv_p, ti_p, lane_p, n_lanes, t_min, k, occlusion)
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
        if occlusion and left <= 0:
            return
        if nxt >= 0:
            node = nxt
            continue
        if sp == 0:
            return
        sp -= 1
        node = st_node[sp]
