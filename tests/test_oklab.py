"""Tests of render.colour.oklab, the project's one route into and out of Oklab.

Sources: colour-science's ``XYZ_to_Oklab`` / ``Oklab_to_XYZ`` (reference library); the table of
test values in Ottosson (2020), "A perceptual color space for image processing" (from memory,
three decimals).
"""

from __future__ import annotations

import numpy as np
import pytest

from render.colour.oklab import oklab_to_xyz, xyz_to_oklab

colour = pytest.importorskip("colour")


def _samples() -> np.ndarray:
    rng = np.random.default_rng(20201223)
    xyz = rng.uniform(0.0, 1.2, (2000, 3))
    # Negative responses occur after gamut mapping and in false-colour arithmetic: the cube root
    # must keep their sign, as colour-science's does.
    return np.concatenate([xyz, rng.uniform(-0.2, 0.2, (200, 3)), np.eye(3), np.zeros((1, 3))])


def test_forward_matches_colour_science():
    # Reference library: colour.XYZ_to_Oklab, to 1e-10.
    xyz = _samples()
    np.testing.assert_allclose(xyz_to_oklab(xyz), colour.XYZ_to_Oklab(xyz), rtol=0, atol=1e-10)


def test_inverse_matches_colour_science():
    # Reference library: colour.Oklab_to_XYZ, to 1e-10 (Lab samples spanning the sRGB gamut and beyond).
    rng = np.random.default_rng(7)
    lab = np.stack([rng.uniform(0.0, 1.0, 2000), rng.uniform(-0.4, 0.4, 2000), rng.uniform(-0.4, 0.4, 2000)], axis=-1)
    np.testing.assert_allclose(oklab_to_xyz(lab), colour.Oklab_to_XYZ(lab), rtol=0, atol=1e-10)


def test_round_trip():
    # Analytic: the inverse matrices are computed in double precision, so the round trip is exact
    # to rounding.
    xyz = _samples()
    np.testing.assert_allclose(oklab_to_xyz(xyz_to_oklab(xyz)), xyz, rtol=0, atol=1e-12)


@pytest.mark.parametrize(
    "xyz, lab",
    [
        # Ottosson (2020), table of test values (from memory, three decimals).
        ((0.950, 1.000, 1.089), (1.000, 0.000, 0.000)),
        ((1.000, 0.000, 0.000), (0.450, 1.236, -0.019)),
        ((0.000, 1.000, 0.000), (0.922, -0.671, 0.263)),
        ((0.000, 0.000, 1.000), (0.153, -1.415, -0.449)),
    ],
)
def test_published_test_values(xyz, lab):
    np.testing.assert_allclose(xyz_to_oklab(np.array(xyz)), lab, rtol=0, atol=1e-3)


def test_shapes_follow_the_input():
    # Common practice, no source: (..., 3) in, (..., 3) out; a single colour stays 1-D.
    assert xyz_to_oklab(np.array([0.5, 0.5, 0.5])).shape == (3,)
    assert oklab_to_xyz(np.zeros((4, 5, 3))).shape == (4, 5, 3)
