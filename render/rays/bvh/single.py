"""Single-ray traversal of the 8-wide tree, for rays that do not form coherent packets.

The boxes of all :data:`~render.rays.bvh.layout.WIDE` children of a node are tested at once
in float32 vector code (:func:`~render.rays.bvh.simd.node_entry_mask`), reading for each axis
only the bound the ray meets first (near) and the one it leaves by (far), chosen once per ray
by the signs of its direction (its octant); the test yields a bit mask of the children
entered. Closest hit: the children
entered, inner nodes and leaves alike, are inserted into the stack by entry distance, so
the nearest is always taken next and a leaf is only intersected when nothing nearer is
left; entries farther than the best hit so far are dropped when popped. Any hit: leaves are
intersected at once (the query stops at the first hit found) and inner children pushed.
Among hits at exactly the same ``t`` the lowest original triangle index wins, so the result
does not depend on the order in which the tree is traversed or on which boxes are entered
beyond those the ray touches: the float64 triangle test decides every hit.

Given the BVH's ``tri_lanes`` (the vertices by component), a leaf's triangles are tested
:data:`~render.rays.bvh.simd.LANES` at a time (:func:`~render.rays.bvh.simd.leaf_lane_hits`,
the watertight test's operations per lane), and the lanes' hits are taken in triangle order by
the same rule, so the hits are those of the one-by-one test to the bit.

The box test runs in float32 (a node test waits on the one before it, and float32 bounds need
no widening) and stays conservative: per axis the ray's float64 origin is rounded to a float32
on the side that makes the near bound's distance smaller and, separately, on the side that
makes the far bound's distance larger (for an axis with a zero direction the far origin is
then below the origin, so a ray in a box's face plane stays inside it), so the remaining error
of a distance is the three roundings of Ize (2013), covered by the far scale and the margin
on the best hit's distance in :mod:`render.rays.bvh.slab`. A box the exact test enters is
therefore entered; a few more are (by at most a relative 2^-20 of a distance).

The traversal is called once per ray, and numba passes an array as its whole record (about
eight machine words), nine arrays so some seventy words pushed on the stack per call, a fifth
of a cached scene's time. :func:`closest_one` and :func:`any_one` therefore only take their
arrays' data pointers (:func:`~render.rays.bvh.simd.data_pointer`) and call the traversal
with those, which makes its views again with ``numba.carray``: one register per array, and
row lengths known at compile time.

References
----------
- Wald, Benthin & Boulos, "Getting rid of packets: efficient SIMD single-ray traversal using
  multi-branching BVHs", IEEE Symposium on Interactive Ray Tracing 2008.
- Williams, Barrus, Morley & Shirley, "An efficient and robust ray-box intersection
  algorithm", Journal of Graphics Tools 10(1), 2005 (near and far bounds by direction sign).
- Ize, "Robust BVH Ray Traversal", JCGT 2(2), 2013 (box test, :mod:`render.rays.bvh.slab`).
- Woop, Benthin & Wald, "Watertight Ray/Triangle Intersection", JCGT 2(1), 2013
  (:mod:`render.rays.bvh.triangle`).
"""

from __future__ import annotations

import numba
import numpy as np
from numba.core import types
from numba.extending import overload

from render.rays.bvh.layout import WIDE
from render.rays.bvh.simd import LANES, data_pointer, leaf_lane_hits, lowest_bit, node_entry_mask
from render.rays.bvh.slab import F32_BIG_INV, F32_FAR, F32_LIMIT, F32_MARGIN, safe_inverse
from render.rays.bvh.triangle import intersect_triangle, triangle_vertices

__all__ = ["any_one", "closest_one"]

# Column of the first child's hi bound of axis k is _HI + 8 k (lo: 8 k), see layout.BVH.
_HI = 3 * WIDE
# Relative and absolute moves of a float64 origin to a float32 on a chosen side of it (one to
# two units in the last place of float32, so that rounding to nearest cannot cross back).
_ULP32 = 2.0**-23
_TINY32 = 1e-30
# Unsigned constants of the per-ray axis choice (unsigned indices: no wraparound check).
_ONE = np.uint64(1)
_TWO = np.uint64(2)
_THREE = np.uint64(3)
# Views made inside the per-ray functions from their arrays' data pointers: the row length is
# what indexing needs (a constant, so the row offsets are shifts); the row count is only a
# bound that no index reaches (numba checks no bounds), so it is a large constant.
_RECORD = 8 * WIDE
_ROWS = 1 << 40
# Columns of the first child's reference and leaf count.
_REF = np.uint64(6 * WIDE)
_COUNT = np.uint64(7 * WIDE)
# Where leaf_lane_hits stores the lanes' u and v in ``work`` (t at 0).
_U = np.uint64(LANES)
_V = np.uint64(2 * LANES)


@numba.njit(cache=True, nogil=True)
def _cull(t: float) -> np.float32:
    """float32 bound of the box test for hits before ``t``: ``t`` raised by a relative
    :data:`~render.rays.bvh.slab.F32_MARGIN` (the box test's rounding), at most the float32
    limit (a distance that overflowed to infinity is no entry)."""
    return np.float32(min(t + abs(t) * F32_MARGIN, F32_LIMIT))


@numba.njit(cache=True, nogil=True)
def _up32(x: float) -> np.float32:
    """A float32 above ``x`` by one or two units in the last place (never below it)."""
    return np.float32(x + (abs(x) * _ULP32 + _TINY32))


@numba.njit(cache=True, nogil=True)
def _down32(x: float) -> np.float32:
    """A float32 below ``x`` by one or two units in the last place (never above it)."""
    return np.float32(x - (abs(x) * _ULP32 + _TINY32))


@numba.njit(cache=True, nogil=True)
def _inverse32(d: float) -> np.float32:
    """:func:`~render.rays.bvh.slab.safe_inverse` rounded to float32, clamped to +-1e38."""
    return np.float32(min(max(safe_inverse(d), -F32_BIG_INV), F32_BIG_INV))


@numba.njit(cache=True, nogil=True)
def _octant_columns(ix: float, iy: float, iz: float) -> tuple[int, int, int, int, int, int]:
    """Columns of the first child's near x, y, z and far x, y, z bound in a wide-node record
    for a ray with inverse direction (ix, iy, iz). Unsigned, so that numba indexes with them
    without a negative-index wraparound."""
    nx = 0 if ix >= 0.0 else _HI
    ny = WIDE if iy >= 0.0 else _HI + WIDE
    nz = 2 * WIDE if iz >= 0.0 else _HI + 2 * WIDE
    return (
        np.uint64(nx),
        np.uint64(ny),
        np.uint64(nz),
        np.uint64(_HI - nx),
        np.uint64(_HI + 2 * WIDE - ny),
        np.uint64(_HI + 4 * WIDE - nz),
    )


def _lanes_arguments(lanes):
    """``(data pointer, row length)`` of ``tri_lanes``, or ``(None, 0)`` without it (chosen by
    type when compiled, so the traversal without lanes keeps the one-by-one leaf test)."""


@overload(_lanes_arguments)
def _lanes_arguments_impl(lanes):
    if lanes is None or isinstance(lanes, (types.NoneType, types.Omitted)):
        return lambda lanes: (None, 0)
    return lambda lanes: (data_pointer(lanes, np.float64), lanes.shape[1])


@numba.njit(cache=True, nogil=True)
def _lane_rows(k: tuple[int, int, int], stride: int) -> tuple[int, int, int, int, int, int, int, int, int]:
    """Element offsets in ``tri_lanes`` (rows of ``stride``) of the components x, y, z of v0,
    v1, v2 permuted to the axes ``k`` = (kx, ky, kz): the rows ``3 v + k``."""
    kx, ky, kz = k
    return (
        kx * stride,
        ky * stride,
        kz * stride,
        (3 + kx) * stride,
        (3 + ky) * stride,
        (3 + kz) * stride,
        (6 + kx) * stride,
        (6 + ky) * stride,
        (6 + kz) * stride,
    )


@numba.njit(cache=True, nogil=True, error_model="numpy")
def closest_one(
    wb: np.ndarray,
    wi: np.ndarray,
    tv: np.ndarray,
    ti: np.ndarray,
    o: np.ndarray,
    d: np.ndarray,
    t_min: float,
    t_max: float,
    st_node: np.ndarray,
    st_t: np.ndarray,
    work: np.ndarray,
    width: int,
    lanes: np.ndarray | None = None,
) -> tuple[float, int, float, float]:
    """Closest hit of the ray ``o + t d`` with ``t_min < t < t_max``: ``(t, triangle, u, v)``,
    triangle -1 for a miss. ``wb``/``wi`` are the wide tree's float32/int32 views, ``tv``/``ti``
    the BVH's triangles (float64) and index (int32); ``o``, ``d`` (3,) float64; ``st_node``
    (int64), ``st_t`` (float64; stack, ``BVH.wide_stack`` entries) and ``work`` (float64, at
    least 2 WIDE) are scratch arrays. All C-contiguous. With ``lanes`` (the BVH's
    ``tri_lanes``) a leaf's triangles are tested :data:`~render.rays.bvh.simd.LANES` at a
    time (the same hits to the bit); without, one by one."""
    lanes_p, stride = _lanes_arguments(lanes)
    return _closest(
        data_pointer(wb, np.float32),
        data_pointer(wi, np.int32),
        data_pointer(tv, np.float64),
        data_pointer(ti, np.int32),
        data_pointer(o, np.float64),
        data_pointer(d, np.float64),
        data_pointer(st_node, np.int64),
        data_pointer(st_t, np.float64),
        data_pointer(work, np.float64),
        t_min,
        t_max,
        lanes_p,
        stride,
    )


@numba.njit(cache=True, nogil=True, inline="always")
def _box_constants(ox: float, oy: float, oz: float, dx: float, dy: float, dz: float):
    """A ray's constants of the float32 box test (:func:`~render.rays.bvh.simd.node_entry_mask`):
    the inverse direction; per axis the origin of its near bound rounded to the side that makes
    the near distance smaller and of its far bound to the side that makes the far distance
    larger (for an axis with a zero direction, whose inverse is positive, the far origin is then
    below the origin); the far bound's inverse scaled by F32_FAR; the octant's columns. Inlined
    (it takes scalars, so no array is counted per ray)."""
    inverse = (_inverse32(dx), _inverse32(dy), _inverse32(dz))
    up = (_up32(ox), _up32(oy), _up32(oz))
    down = (_down32(ox), _down32(oy), _down32(oz))
    near_o = (
        up[0] if inverse[0] >= 0.0 else down[0],
        up[1] if inverse[1] >= 0.0 else down[1],
        up[2] if inverse[2] >= 0.0 else down[2],
    )
    far_o = (
        down[0] if inverse[0] >= 0.0 else up[0],
        down[1] if inverse[1] >= 0.0 else up[1],
        down[2] if inverse[2] >= 0.0 else up[2],
    )
    far_inverse = (
        np.float32(inverse[0] * F32_FAR),
        np.float32(inverse[1] * F32_FAR),
        np.float32(inverse[2] * F32_FAR),
    )
    return inverse, near_o, far_o, far_inverse, _octant_columns(inverse[0], inverse[1], inverse[2])


@numba.njit(cache=True, nogil=True, error_model="numpy")
def _closest(wb_p, wi_p, tv_p, ti_p, o_p, d_p, st_node_p, st_t_p, work_p, t_min, t_max, lanes_p, stride):
    """:func:`closest_one` on its arrays' data pointers (see the module docstring)."""
    wb = numba.carray(wb_p, (_ROWS, _RECORD), np.float32)
    wi = numba.carray(wi_p, (_ROWS, _RECORD), np.int32)
    tv = numba.carray(tv_p, (_ROWS, 9), np.float64)
    ti = numba.carray(ti_p, (_ROWS,), np.int32)
    o = numba.carray(o_p, (3,), np.float64)
    d = numba.carray(d_p, (3,), np.float64)
    st_node = numba.carray(st_node_p, (_ROWS,), np.int64)
    st_t = numba.carray(st_t_p, (_ROWS,), np.float64)
    work = numba.carray(work_p, (_ROWS,), np.float64)
    # Per-ray constants (the shear written out here: a call returning it from the arrays is not inlined, and its
    # exception path would keep numba's reference counts of the arrays for every ray).
    # The axes and shear of ray_shear, chosen by arithmetic on the comparisons and picked by
    # index from o and d instead of by branches, which a random direction mispredicts.
    ox, oy, oz = o[0], o[1], o[2]
    ax = abs(d[0])
    ay = abs(d[1])
    az = abs(d[2])
    kz = (_ONE - np.uint64((ax >= ay) & (ax >= az))) * (_TWO - np.uint64(ay >= az))
    kx = kz + _ONE - _THREE * np.uint64(kz == _TWO)
    ky = kx + _ONE - _THREE * np.uint64(kx == _TWO)
    swap = (kx ^ ky) * np.uint64(d[kz] < 0.0)
    kx ^= swap
    ky ^= swap
    sz = 1.0 / d[kz]
    k = (np.int64(kx), np.int64(ky), np.int64(kz))
    p = (o[kx], o[ky], o[kz])
    s = (d[kx] * sz, d[ky] * sz, sz)
    rows = _lane_rows(k, stride)
    inverse, near_o, far_o, far_inverse, cols = _box_constants(ox, oy, oz, d[0], d[1], d[2])
    t_min32 = _down32(t_min)
    best_t = t_max
    cull32 = _cull(best_t)
    cull = np.float64(cull32)
    best_j = -1
    best_u = 0.0
    best_v = 0.0
    # A stack entry is an inner node (>= 0) or a leaf: -(first + 1) - (count << 32).
    entry = np.int64(0)
    sp = 0
    while True:
        if entry >= 0:
            node = np.uint64(entry)
            mask = node_entry_mask(wb, node, cols, near_o, far_o, inverse, far_inverse, t_min32, cull32, work)
            if mask != 0:
                c = np.uint64(lowest_bit(mask))
                mask &= mask - 1
                ch = np.int64(wi[node, _REF + c])
                e0 = ch if ch >= 0 else ch - (np.int64(wi[node, _COUNT + c]) << 32)
                if mask == 0:
                    entry = e0
                    continue
                near0 = work[c]
                c = np.uint64(lowest_bit(mask))
                mask &= mask - 1
                ch = np.int64(wi[node, _REF + c])
                e1 = ch if ch >= 0 else ch - (np.int64(wi[node, _COUNT + c]) << 32)
                near1 = work[c]
                # Two children entered (the common case): the farther is pushed, the nearer
                # taken next. More: all are kept sorted on the stack and the top is taken.
                base = sp
                if near1 < near0:
                    st_node[sp] = e0
                    st_t[sp] = near0
                    entry = e1
                    near_first = near1
                else:
                    st_node[sp] = e1
                    st_t[sp] = near1
                    entry = e0
                    near_first = near0
                sp += 1
                if mask == 0:
                    continue
                st_node[sp] = entry
                st_t[sp] = near_first
                sp += 1
                while mask != 0:
                    c = np.uint64(lowest_bit(mask))
                    mask &= mask - 1
                    ch = np.int64(wi[node, _REF + c])
                    e = ch if ch >= 0 else ch - (np.int64(wi[node, _COUNT + c]) << 32)
                    near = work[c]
                    j = sp
                    while j > base and st_t[j - 1] < near:
                        st_t[j] = st_t[j - 1]
                        st_node[j] = st_node[j - 1]
                        j -= 1
                    st_t[j] = near
                    st_node[j] = e
                    sp += 1
                sp -= 1
                entry = st_node[sp]
                continue
        else:
            packed = -entry
            first = (packed & 0xFFFFFFFF) - 1
            end = first + (packed >> 32)
            if lanes_p is None:
                for j in range(first, end):
                    hit, t, u, v = intersect_triangle(triangle_vertices(tv, j, k), p, s)
                    if hit and t > t_min and (t < best_t or (t == best_t and ti[j] < best_j)):
                        best_t = t
                        best_j = ti[j]
                        best_u = u
                        best_v = v
                        cull32 = _cull(best_t)
                        cull = np.float64(cull32)
            else:
                lanes = numba.carray(lanes_p, (9, stride), np.float64)
                for g in range(first, end, LANES):
                    m = leaf_lane_hits(lanes, g, end - g, rows, p, s, t_min, best_t, work)
                    # Lanes in triangle order, each kept by the same rule as one by one.
                    while m != 0:
                        c = lowest_bit(m)
                        m &= m - 1
                        lane = np.uint64(c)
                        t = work[lane]
                        j = g + c
                        if t < best_t or (t == best_t and ti[j] < best_j):
                            best_t = t
                            best_j = ti[j]
                            best_u = work[_U + lane]
                            best_v = work[_V + lane]
                            cull32 = _cull(best_t)
                            cull = np.float64(cull32)
        found = False
        while sp > 0:
            sp -= 1
            if st_t[sp] <= cull:
                entry = st_node[sp]
                found = True
                break
        if not found:
            break
    return best_t, best_j, best_u, best_v


@numba.njit(cache=True, nogil=True, error_model="numpy")
def any_one(
    wb: np.ndarray,
    wi: np.ndarray,
    tv: np.ndarray,
    o: np.ndarray,
    d: np.ndarray,
    t_min: float,
    t_max: float,
    st_node: np.ndarray,
    work: np.ndarray,
    width: int,
    lanes: np.ndarray | None = None,
) -> bool:
    """True if the ray ``o + t d`` hits any triangle with ``t_min < t < t_max`` (stops at the
    first found). Arguments as for :func:`closest_one`; ``work`` is not read (any hit does not
    order the children)."""
    lanes_p, stride = _lanes_arguments(lanes)
    return _any(
        data_pointer(wb, np.float32),
        data_pointer(wi, np.int32),
        data_pointer(tv, np.float64),
        data_pointer(o, np.float64),
        data_pointer(d, np.float64),
        data_pointer(st_node, np.int64),
        t_min,
        t_max,
        lanes_p,
        stride,
    )


@numba.njit(cache=True, nogil=True, error_model="numpy")
def _any(wb_p, wi_p, tv_p, o_p, d_p, st_node_p, t_min, t_max, lanes_p, stride):
    """:func:`any_one` on its arrays' data pointers (see the module docstring)."""
    wb = numba.carray(wb_p, (_ROWS, _RECORD), np.float32)
    wi = numba.carray(wi_p, (_ROWS, _RECORD), np.int32)
    tv = numba.carray(tv_p, (_ROWS, 9), np.float64)
    o = numba.carray(o_p, (3,), np.float64)
    d = numba.carray(d_p, (3,), np.float64)
    st_node = numba.carray(st_node_p, (_ROWS,), np.int64)
    # Per-ray constants (the shear written out here: a call returning it from the arrays is not inlined, and its
    # exception path would keep numba's reference counts of the arrays for every ray).
    # The axes and shear of ray_shear, chosen by arithmetic on the comparisons and picked by
    # index from o and d instead of by branches, which a random direction mispredicts.
    ox, oy, oz = o[0], o[1], o[2]
    ax = abs(d[0])
    ay = abs(d[1])
    az = abs(d[2])
    kz = (_ONE - np.uint64((ax >= ay) & (ax >= az))) * (_TWO - np.uint64(ay >= az))
    kx = kz + _ONE - _THREE * np.uint64(kz == _TWO)
    ky = kx + _ONE - _THREE * np.uint64(kx == _TWO)
    swap = (kx ^ ky) * np.uint64(d[kz] < 0.0)
    kx ^= swap
    ky ^= swap
    sz = 1.0 / d[kz]
    k = (np.int64(kx), np.int64(ky), np.int64(kz))
    p = (o[kx], o[ky], o[kz])
    s = (d[kx] * sz, d[ky] * sz, sz)
    rows = _lane_rows(k, stride)
    inverse, near_o, far_o, far_inverse, cols = _box_constants(ox, oy, oz, d[0], d[1], d[2])
    t_min32 = _down32(t_min)
    cull32 = _cull(t_max)
    node = np.uint64(0)
    sp = 0
    while True:
        mask = node_entry_mask(wb, node, cols, near_o, far_o, inverse, far_inverse, t_min32, cull32, None)
        while mask != 0:
            c = np.uint64(lowest_bit(mask))
            mask &= mask - 1
            ch = wi[node, _REF + c]
            if ch >= 0:
                st_node[sp] = ch
                sp += 1
                continue
            first = -ch - 1
            end = first + wi[node, _COUNT + c]
            if lanes_p is None:
                for j in range(first, end):
                    hit, t, _, _ = intersect_triangle(triangle_vertices(tv, j, k), p, s)
                    if hit and t > t_min and t < t_max:
                        return True
            else:
                lanes = numba.carray(lanes_p, (9, stride), np.float64)
                for g in range(first, end, LANES):
                    if leaf_lane_hits(lanes, g, end - g, rows, p, s, t_min, t_max, None) != 0:
                        return True
        if sp == 0:
            return False
        sp -= 1
        node = np.uint64(st_node[sp])
