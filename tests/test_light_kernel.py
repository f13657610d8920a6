"""The light kernel's illuminance against the distance law with the photometry module's lookup.

The direct-light kernel (:func:`render.light.integrator.direct_illuminance_lx`) finds (C, γ) and
the table cell its own way (from the rotation's elements, a cell guessed from the grid's mean
spacing and corrected) and sums per channel in one pass. Here every (point, luminaire) pair of
the demo's luminaires (asymmetric street distributions, tilted and turned) is recomputed in
numpy: E = I(C, γ)·cos θ / d² with (C, γ) from :func:`render.light.photometry.world_to_c_gamma`
and I from :func:`render.light.photometry.intensity_cd` (a binary search on the table), summed
over the luminaires of each channel.

Sources of the expected values: the inverse-square and cosine laws of a point source,
E = I·cos θ / d² (analytic; docs/references.md); the C-γ table's bilinear interpolation as the
photometry module reads LM-63 and EULUMDAT tables (ANSI/IESNA LM-63-2002, from memory).
Tolerance: the two computations round differently (numpy's and libm's arctangent, a different
order of the distance terms), a few units in the last place of float64; 1e-12 relative is far
below any interpolation error a wrong cell or fraction would make.
"""

from __future__ import annotations

import numpy as np
import pytest

from render.light.integrator import direct_illuminance_lx
from render.light.photometry import intensity_cd, world_to_c_gamma
from render.resources import demo_scene_path
from render.study import Study


@pytest.fixture(scope="module")
def lights():
    return Study(demo_scene_path()).lights(None)


def _expected_lx(lights, points: np.ndarray, normals: np.ndarray) -> np.ndarray:
    out = np.zeros((points.shape[0], lights.n_channels))
    for k in range(lights.n_luminaires):
        d = points - lights.position_m[k]
        d2 = np.einsum("ij,ij->i", d, d)
        cos = -np.einsum("ij,ij->i", normals, d) / np.sqrt(d2)
        c, g = world_to_c_gamma(d, lights.rotation[k])
        inten = intensity_cd(lights.photometries[int(lights.table[k])], c, g)
        e = lights.scale[k] * inten * cos / d2
        out[:, lights.channel[k]] += np.where(cos > 0.0, e, 0.0)
    return out


def test_kernel_illuminance_equals_distance_law_with_table_lookup(lights):
    rng = np.random.default_rng(11)
    n = 4000
    lo = lights.position_m.min(axis=0) - [20.0, 10.0, 0.0]
    hi = lights.position_m.max(axis=0) + [20.0, 10.0, 0.0]
    points = np.column_stack(
        [rng.uniform(lo[0], hi[0], n), rng.uniform(lo[1], hi[1], n), rng.uniform(0.0, lo[2] - 0.5, n)]
    )
    # Normals of every direction, so that some face away from a luminaire (no light from it).
    normals = rng.normal(size=(n, 3))
    normals /= np.linalg.norm(normals, axis=1, keepdims=True)
    got = direct_illuminance_lx(points, normals, lights, None, negligible_lx=0.0)
    want = _expected_lx(lights, points, normals)
    assert np.count_nonzero(want) > n  # lit from several luminaires, not a vacuous check
    assert got == pytest.approx(want, rel=1e-12, abs=1e-300)
