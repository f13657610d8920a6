"""Rays against boxes: the per-ray set-up and the robust slab test shared by every traversal.

A ray ``origin + t * direction`` enters an axis-aligned box over the intersection of its three
slab intervals (Kay & Kajiya 1986). The test runs in float64 on boxes stored in float32 rounded
outwards; the far distance is scaled up by ``1 + 2 gamma(3)`` (Ize 2013), so rounding never
makes a ray miss a box it touches. Direction components of zero get an inverse clamped to
``+-1e300`` so that ``0 * inverse`` is 0, never NaN, and every distance stays NaN-free.

References
----------
- Kay & Kajiya, "Ray tracing complex scenes", SIGGRAPH 1986 (slabs).
- Ize, "Robust BVH Ray Traversal", Journal of Computer Graphics Techniques 2(2), 2013
  (conservative far distance, ``gamma(n) = n u / (1 - n u)`` with unit roundoff ``u``).
"""

from __future__ import annotations

import numba
import numpy as np

__all__ = ["BIG_INV", "ROBUST_FAR", "safe_inverse", "slab_interval", "valid_ray"]

_F64_EPS = np.finfo(np.float64).eps * 0.5  # unit roundoff 2^-53
# Ize 2013: scale the far slab distance by 1 + 2*gamma(3), gamma(n) = n*u / (1 - n*u).
ROBUST_FAR = 1.0 + 2.0 * (3.0 * _F64_EPS) / (1.0 - 3.0 * _F64_EPS)
# Direction components smaller than this are treated as zero in the slab test (the inverse
# is clamped to +-BIG_INV so that 0 * inverse is 0, never NaN).
BIG_INV = 1e300


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
) -> tuple[float, float]:
    """``(near, far)`` ray parameters of the box ``[lo, hi]`` (float64 corners), ``near`` no
    less than ``t_min``: the ray enters the box where ``near <= min(far, t_max)``. ``far``
    carries the robust scaling of Ize 2013; ``inverse`` is :func:`safe_inverse` per axis."""
    a = (lo[0] - origin[0]) * inverse[0]
    b = (hi[0] - origin[0]) * inverse[0]
    c = (lo[1] - origin[1]) * inverse[1]
    d = (hi[1] - origin[1]) * inverse[1]
    e = (lo[2] - origin[2]) * inverse[2]
    f = (hi[2] - origin[2]) * inverse[2]
    near = max(max(min(a, b), min(c, d)), max(min(e, f), t_min))
    far = min(min(max(a, b), max(c, d)), max(e, f)) * ROBUST_FAR
    return near, far
