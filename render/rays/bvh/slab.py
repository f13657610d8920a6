"""Rays against boxes: the per-ray set-up and the robust slab test shared by every traversal.

A ray ``origin + t * direction`` enters an axis-aligned box over the intersection of its three
slab intervals (Kay & Kajiya 1986). The test runs in float64 on boxes stored in float32 rounded
outwards; the far distance is scaled up by ``1 + 2 gamma(3)`` (Ize 2013), so rounding never
makes a ray miss a box it touches. Direction components of zero get an inverse clamped to
``+-1e300`` so that ``0 * inverse`` is 0, never NaN, and every distance stays NaN-free.

A ray with a zero direction component lies in its slab for every ``t`` or for none. With the
clamped inverse (``+1e300``) the far distance of that axis is ``(hi - o) * 1e300``, which is 0
rather than huge when the origin lies exactly in the box's upper face plane: the ray would
leave the box at ``t = 0`` and miss what it grazes there. The far bound of such an axis is
therefore measured from an origin moved a little below (:func:`far_origin`), which turns that
0 into a huge distance and changes nothing else (an origin outside by less than the move
enters the box, which only costs a test); axes with a non-zero direction keep the origin, so
their distances are unchanged.

References
----------
- Kay & Kajiya, "Ray tracing complex scenes", SIGGRAPH 1986 (slabs).
- Ize, "Robust BVH Ray Traversal", Journal of Computer Graphics Techniques 2(2), 2013
  (conservative far distance, ``gamma(n) = n u / (1 - n u)`` with unit roundoff ``u``).
"""

from __future__ import annotations

import numba
import numpy as np

__all__ = [
    "BIG_INV",
    "F32_BIG_INV",
    "F32_FAR",
    "F32_LIMIT",
    "F32_MARGIN",
    "ROBUST_FAR",
    "far_origin",
    "safe_inverse",
    "slab_interval",
    "valid_ray",
]

_F64_EPS = np.finfo(np.float64).eps * 0.5  # unit roundoff 2^-53
# Ize 2013: scale the far slab distance by 1 + 2*gamma(3), gamma(n) = n*u / (1 - n*u).
ROBUST_FAR = 1.0 + 2.0 * (3.0 * _F64_EPS) / (1.0 - 3.0 * _F64_EPS)
# Direction components smaller than this are treated as zero in the slab test (the inverse
# is clamped to +-BIG_INV so that 0 * inverse is 0, never NaN).
BIG_INV = 1e300
# The single-ray box test in float32 (render.rays.bvh.simd.node_entry_mask32), each distance
# computed as (bound - origin) * inverse with the origin rounded to the side that makes the near
# distance smaller and the far one larger, so only three roundings remain (the inverse's, the
# difference's, the product's; relative 3 u with u = 2^-24, the inverse rounded twice adding
# less than 2^-53): the far bound's inverse is scaled up by F32_FAR, so its distance exceeds
# the near one's bound by more than (1 + 3u) / (1 - 3u) (Ize 2013's argument), and hits are looked for up to a distance raised by F32_MARGIN >= 3u relative, so a
# box whose entry is computed late by rounding is still entered; inverses are clamped to
# +-F32_BIG_INV; a distance above F32_LIMIT (overflowed) is no entry.
F32_FAR = 1.0 + 2.0**-20
F32_MARGIN = 2.0**-21
F32_BIG_INV = 1e38
F32_LIMIT = float(np.finfo(np.float32).max)
# Far-side origin of an axis with a zero direction component: moved down by more than one ulp
# of the origin (2^-50 relative) plus an absolute 1e-200, so that (hi - origin) * BIG_INV is at
# least 1e100 when the origin lies in the upper face plane.
_FAR_SHIFT_REL = 2.0**-50
_FAR_SHIFT_ABS = 1e-200


@numba.njit(cache=True, nogil=True)
def safe_inverse(d: float) -> float:
    """``1 / d`` clamped to ``[-BIG_INV, BIG_INV]`` (``BIG_INV`` for ``d == 0``)."""
    if d == 0.0:
        return BIG_INV
    inv = 1.0 / d
    if inv > BIG_INV:
        return BIG_INV
    if inv < -BIG_INV:
        return -BIG_INV
    return inv


@numba.njit(cache=True, nogil=True)
def far_origin(o: float, d: float) -> float:
    """Origin component the far slab bound is measured from: ``o`` itself, or for a zero
    direction component ``d`` a value just below it (see the module docstring)."""
    if d == 0.0:
        return o - (abs(o) * _FAR_SHIFT_REL + _FAR_SHIFT_ABS)
    return o


@numba.njit(cache=True, nogil=True)
def valid_ray(origins: np.ndarray, directions: np.ndarray, i: int) -> bool:
    """A ray can hit something only with a finite origin and a finite, non-zero direction."""
    ok = True
    nonzero = False
    for k in range(3):
        ok = ok and np.isfinite(origins[i, k]) and np.isfinite(directions[i, k])
        nonzero = nonzero or directions[i, k] != 0.0
    return ok and nonzero


@numba.njit(cache=True, nogil=True, error_model="numpy")
def slab_interval(
    lo: tuple[float, float, float],
    hi: tuple[float, float, float],
    origin: tuple[float, float, float],
    inverse: tuple[float, float, float],
    t_min: float,
    upper_origin: tuple[float, float, float],
) -> tuple[float, float]:
    """``(near, far)`` ray parameters of the box ``[lo, hi]`` (float64 corners), ``near`` no
    less than ``t_min``: the ray enters the box where ``near <= min(far, t_max)``. ``far``
    carries the robust scaling of Ize 2013; ``inverse`` is :func:`safe_inverse` per axis and
    ``upper_origin`` :func:`far_origin` per axis, from which the upper bounds are measured
    (for an axis with a zero direction, whose inverse is positive, the upper bound is the far
    one)."""
    a = (lo[0] - origin[0]) * inverse[0]
    b = (hi[0] - upper_origin[0]) * inverse[0]
    c = (lo[1] - origin[1]) * inverse[1]
    d = (hi[1] - upper_origin[1]) * inverse[1]
    e = (lo[2] - origin[2]) * inverse[2]
    f = (hi[2] - upper_origin[2]) * inverse[2]
    near = max(max(min(a, b), min(c, d)), max(min(e, f), t_min))
    far = min(min(max(a, b), max(c, d)), max(e, f)) * ROBUST_FAR
    return near, far
