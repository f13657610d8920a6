"""The display's compiled passes against the numpy expressions they replace, value for value.

Source for every check: common practice, no source -- a compiled pass with the same arithmetic
(the same operations in the same order, no fused multiply-add) gives the same bits as the numpy
expression, which the other display tests check against their published sources.
"""

from __future__ import annotations

import numpy as np

from render.colour import matrices
from render.colour.matrices import apply_matrix
from render.vision.display import quantise, srgb_encode, srgb_quantised


def _numpy_product(m: np.ndarray, v: np.ndarray) -> np.ndarray:
    a, b, c = v[..., 0], v[..., 1], v[..., 2]
    return np.stack(
        [m[0, 0] * a + m[0, 1] * b + m[0, 2] * c, m[1, 0] * a + m[1, 1] * b + m[1, 2] * c,
         m[2, 0] * a + m[2, 1] * b + m[2, 2] * c],
        axis=-1,
    )  # fmt: skip


def test_matrix_product_compiled_is_the_numpy_product():
    rng = np.random.default_rng(7)
    m = rng.normal(size=(3, 3))
    n = matrices.COMPILED_FROM_COLOURS
    for shape in ((n, 3), (3, n + 5, 3), (7, 3), (3,)):
        v = rng.normal(size=shape) * 40.0
        got = apply_matrix(m, v)
        assert got.shape == v.shape
        assert got.tobytes() == _numpy_product(m, v).tobytes()
    v = rng.normal(size=(2 * n, 4))[:, :3]  # not contiguous
    assert apply_matrix(m, v).tobytes() == _numpy_product(m, v).tobytes()


def test_srgb_quantised_is_quantise_of_srgb_encode():
    rng = np.random.default_rng(11)
    ramp = np.linspace(-0.05, 1.05, 300_000)  # both segments, the knee and out-of-range values
    for x in (ramp.reshape(-1, 3), rng.random((120, 160, 3)) ** 5, rng.normal(0.4, 0.5, (64, 64, 3))):
        q8, q16 = srgb_quantised(x)
        enc = srgb_encode(x)
        assert q8.dtype == np.uint8 and q16.dtype == np.uint16
        assert q8.shape == q16.shape == x.shape
        assert np.array_equal(q8, quantise(enc, 8))
        assert np.array_equal(q16, quantise(enc, 16))
