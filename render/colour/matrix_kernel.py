"""Compiled pass of :func:`render.colour.matrices.apply_matrix` for large images.

One loop over the colours, each output channel the same multiply-add chain as the numpy
expression in :mod:`render.colour.matrices` (products rounded, then summed left to right; no
fused multiply-add, no reassociation), so both give the same bits. Kept apart so that modules
importing :mod:`render.colour.matrices` do not import numba.

References
----------
- Common practice, no source: the per-channel expansion of ``v @ M.T``.
"""

from __future__ import annotations

import numba
import numpy as np

__all__ = ["apply_matrix_rows"]


@numba.njit(cache=True, nogil=True)
def apply_matrix_rows(m: np.ndarray, v: np.ndarray, out: np.ndarray) -> None:
    """``out[i] = m @ v[i]`` for (N, 3) ``v`` and ``out``, ``m`` (3, 3)."""
    m00, m01, m02 = m[0, 0], m[0, 1], m[0, 2]
    m10, m11, m12 = m[1, 0], m[1, 1], m[1, 2]
    m20, m21, m22 = m[2, 0], m[2, 1], m[2, 2]
    for i in range(v.shape[0]):
        a = v[i, 0]
        b = v[i, 1]
        c = v[i, 2]
        out[i, 0] = m00 * a + m01 * b + m02 * c
        out[i, 1] = m10 * a + m11 * b + m12 * c
        out[i, 2] = m20 * a + m21 * b + m22 * c
