"""The light kernel's intensity bound: never below the intensity it stands for.

The direct-light kernel passes over a (point, luminaire) pair before tracing its shadow ray when
a bound on its contribution is below the negligible level, and looks the intensity up only
afterwards. The light is then unchanged only if the bound is never below the interpolated
intensity of any direction in its bin of the cosine from the nadir, and 0 only where the
lookup gives 0 (outside the measured γ range). Checked here against the photometry module's own
lookup (a binary search, independent of the kernel's cell guess) for the demo's luminaires, at
random directions, at every γ node of their tables and at the bins' edges.

Source of the expected values: the bound's definition (common practice, no source): the
bilinear interpolant of a table never exceeds the largest value it interpolates.
"""

from __future__ import annotations

import math

import numpy as np
import pytest

from render.light.integrator import _luminaire_bounds
from render.light.photometry import direction_to_c_gamma, intensity_lookup
from render.resources import demo_scene_path
from render.study import Study


@pytest.fixture(scope="module")
def lights():
    return Study(demo_scene_path()).lights(None)


def _directions(lights, k: int, n_random: int, rng) -> np.ndarray:
    """Unit world directions from luminaire k: random, along every γ node of its table (at a
    few C), and at the edges of the cosine bins (just either side)."""
    t = int(lights.table[k])
    rot = lights.rotation[k]
    d = rng.normal(size=(n_random, 3))
    local = []
    for g in lights.g_grid[t, : lights.n_g[t]]:
        for c in (0.0, 90.0, 200.0):
            gr, cr = math.radians(float(g)), math.radians(c)
            local.append((math.sin(gr) * math.cos(cr), math.sin(gr) * math.sin(cr), -math.cos(gr)))
    bins = _luminaire_bounds(lights)[0].shape[1]
    for edge in np.linspace(-1.0, 1.0, bins + 1):
        for eps in (-1e-12, 0.0, 1e-12):
            z = float(np.clip(edge + eps, -1.0, 1.0))
            local.append((math.sqrt(max(0.0, 1.0 - z * z)), 0.0, -z))
    world = np.array(local) @ rot.T  # luminaire frame to world
    out = np.concatenate([d, world])
    return out / np.linalg.norm(out, axis=1, keepdims=True)


def test_bound_never_below_the_intensity(lights):
    bound, bins_per_cos = _luminaire_bounds(lights)
    rng = np.random.default_rng(5)
    checked = zero_bins = 0
    for k in range(lights.n_luminaires):
        t = int(lights.table[k])
        nc, ng = int(lights.n_c[t]), int(lights.n_g[t])
        tables = (lights.c_grid[t, :nc], lights.g_grid[t, :ng], lights.cd_table[t, :nc, :ng])
        rot = lights.rotation[k]
        for dx, dy, dz in _directions(lights, k, 3000, rng):
            c, g = direction_to_c_gamma(rot, dx, dy, dz)
            inten = intensity_lookup(*tables, c, g)
            down = -(rot[0, 2] * dx + rot[1, 2] * dy + rot[2, 2] * dz)
            b = min(max(int((down + 1.0) * bins_per_cos), 0), bound.shape[1] - 1)
            assert bound[t, b] >= inten, (k, g, c, inten, bound[t, b])
            zero_bins += bound[t, b] == 0.0
            checked += 1
    assert checked > 10_000
    # The demo's tables do not cover the whole sphere: some directions fall in bins bounded by 0.
    assert zero_bins > 0
