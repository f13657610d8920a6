"""Single-ray traversal of the 8-wide tree, for rays that do not form coherent packets.

The boxes of all :data:`~render.rays.bvh.layout.WIDE` children of a node are tested in one
counted loop that LLVM vectorises; leaf children are intersected at once, and of the inner
children the nearest is descended and the others pushed with their entry distance (closest
hit) or pushed in order (any hit, which stops at the first hit found). Among hits at exactly
the same ``t`` the lowest original triangle index wins, so the result does not depend on the
order in which the tree is traversed.

References
----------
- Wald, Benthin & Boulos, "Getting rid of packets: efficient SIMD single-ray traversal using
  multi-branching BVHs", IEEE Symposium on Interactive Ray Tracing 2008.
- Ize, "Robust BVH Ray Traversal", JCGT 2(2), 2013 (box test, :mod:`render.rays.bvh.slab`).
- Woop, Benthin & Wald, "Watertight Ray/Triangle Intersection", JCGT 2(1), 2013
  (:mod:`render.rays.bvh.triangle`).
"""

from __future__ import annotations

import numba
import numpy as np

from render.rays.bvh.layout import WIDE
from render.rays.bvh.slab import safe_inverse, slab_interval
from render.rays.bvh.triangle import intersect_triangle, ray_shear, triangle_vertices

__all__ = ["any_one", "closest_one"]


@numba.njit(cache=True, nogil=True)
def _ray_constants(o, d):
    """Axes ``k`` and shear ``s`` (Woop et al. 2013), the origin permuted to ``k`` and as is,
    and the inverse direction of one ray."""
    kx, ky, kz, sx, sy, sz = ray_shear(d[0], d[1], d[2])
    origin = (o[0], o[1], o[2])
    inverse = (safe_inverse(d[0]), safe_inverse(d[1]), safe_inverse(d[2]))
    return (kx, ky, kz), (o[kx], o[ky], o[kz]), (sx, sy, sz), origin, inverse


@numba.njit(cache=True, nogil=True, error_model="numpy")
def _wide_boxes(wb, node, origin, inverse, t_min, work, width):
    """Slab interval of every child box of wide ``node``: near (at least ``t_min``) in
    ``work[c]``, far in ``work[WIDE + c]``. ``width`` (= WIDE) is passed at run time so that
    the loop is vectorised rather than unrolled."""
    for c in range(width):
        lo = (np.float64(wb[node, c]), np.float64(wb[node, WIDE + c]), np.float64(wb[node, 2 * WIDE + c]))
        hi = (
            np.float64(wb[node, 3 * WIDE + c]),
            np.float64(wb[node, 4 * WIDE + c]),
            np.float64(wb[node, 5 * WIDE + c]),
        )
        work[c], work[WIDE + c] = slab_interval(lo, hi, origin, inverse, t_min)


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
) -> tuple[float, int, float, float]:
    """Closest hit of the ray ``o + t d`` with ``t_min < t < t_max``: ``(t, triangle, u, v)``,
    triangle -1 for a miss. ``wb``/``wi`` are the wide tree's float32/int32 views, ``tv``/``ti``
    the BVH's triangles and index; ``st_node``, ``st_t`` (stack) and ``work`` (2 WIDE) are
    scratch arrays."""
    k, p, s, origin, inverse = _ray_constants(o, d)
    best_t = t_max
    best_j = -1
    best_u = 0.0
    best_v = 0.0
    node = 0
    sp = 0
    while True:
        _wide_boxes(wb, node, origin, inverse, t_min, work, width)
        nxt = -1
        nxt_t = 0.0
        for c in range(WIDE):
            near = work[c]
            if not near <= min(work[WIDE + c], best_t):
                continue
            ch = wi[node, 6 * WIDE + c]
            if ch < 0:
                first = -ch - 1
                for j in range(first, first + wi[node, 7 * WIDE + c]):
                    hit, t, u, v = intersect_triangle(triangle_vertices(tv, j, k), p, s)
                    if hit and t > t_min and (t < best_t or (t == best_t and ti[j] < best_j)):
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
) -> bool:
    """True if the ray ``o + t d`` hits any triangle with ``t_min < t < t_max`` (stops at the
    first found). Arguments as for :func:`closest_one`."""
    k, p, s, origin, inverse = _ray_constants(o, d)
    node = 0
    sp = 0
    while True:
        _wide_boxes(wb, node, origin, inverse, t_min, work, width)
        for c in range(WIDE):
            if not work[c] <= min(work[WIDE + c], t_max):
                continue
            ch = wi[node, 6 * WIDE + c]
            if ch >= 0:
                st_node[sp] = ch
                sp += 1
                continue
            first = -ch - 1
            for j in range(first, first + wi[node, 7 * WIDE + c]):
                hit, t, _, _ = intersect_triangle(triangle_vertices(tv, j, k), p, s)
                if hit and t > t_min and t < t_max:
                    return True
        if sp == 0:
            return False
        sp -= 1
        node = st_node[sp]
