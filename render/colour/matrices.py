"""Colour matrices: a 3×3 linear map applied to every colour of an image.

Colour-space changes (XYZ to linear sRGB, to cone responses, to Oklab's LMS) are 3×3 matrices
applied to arrays of shape (..., 3). :func:`apply_matrix` writes the product out per output
channel: on millions of pixels that is much faster than a matrix-library call on 3-vectors, and
it gives the same bits on every machine (no fused multiply-add, no blocking that depends on the
library).

References
----------
- Common practice, no source: the per-channel expansion of ``v @ M.T``.
"""

from __future__ import annotations

import numpy as np
from numpy.typing import ArrayLike

__all__ = ["COMPILED_FROM_COLOURS", "apply_matrix"]


#: Colours from which :func:`apply_matrix` takes the compiled pass
#: (:mod:`render.colour.matrix_kernel`, the same bits); smaller arrays need no kernel loaded.
COMPILED_FROM_COLOURS = 4096


def apply_matrix(matrix: ArrayLike, v: ArrayLike) -> np.ndarray:
    """``v @ matrix.T`` for (..., 3) arrays, one multiply-add chain per output channel (on
    large arrays in one compiled pass with the same arithmetic)."""
    m = np.asarray(matrix, dtype=np.float64)
    v = np.asarray(v, dtype=np.float64)
    if m.shape == (3, 3) and v.ndim >= 1 and v.shape[-1] == 3 and v.size >= 3 * COMPILED_FROM_COLOURS:
        from render.colour.matrix_kernel import apply_matrix_rows

        flat = np.ascontiguousarray(v.reshape(-1, 3))
        out = np.empty_like(flat)
        apply_matrix_rows(np.ascontiguousarray(m), flat, out)
        return out.reshape(v.shape)
    a, b, c = v[..., 0], v[..., 1], v[..., 2]
    return np.stack(
        [
            m[0, 0] * a + m[0, 1] * b + m[0, 2] * c,
            m[1, 0] * a + m[1, 1] * b + m[1, 2] * c,
            m[2, 0] * a + m[2, 1] * b + m[2, 2] * c,
        ],
        axis=-1,
    )
