"""A view rendered in many tiles shared among threads: every tile rendered, the same bytes.

Sources of the expected values:
* which camera samples see the ground: the ray/plane intersection of each camera ray with the
  plane z = 0 (analytic), for rays steep enough that the hit lies well inside the scene's
  200 m × 200 m ground;
* the light there: inverse-square and cosine laws for a point source over a plane,
  E = I·h / d³ with L = E/π of a white diffuser (analytic; as in ``tests/test_light.py``);
* the same buffers whatever the number of threads: every sample's value is computed by the same
  arithmetic whichever thread and tile take it (common practice for reproducible rendering, no
  source).
"""

from __future__ import annotations

import math
from pathlib import Path

import numba
import numpy as np
import pytest

from render.light.integrator import TILE_SAMPLES
from render.rays.cameras import camera_rays
from render.study import Study

SCENES = Path(__file__).resolve().parents[1] / "scenes" / "tests"

#: Relative rounding of one float32 value (half an ulp), the precision of the light buffers.
FLOAT32_ROUNDING = 2.0**-24
#: Relative error of the isotropic test source's stored intensity (79.57747 vs 1000/(4π) cd).
TABLE_ROUNDING = 1.95e-8
#: Camera rays at least this steeply downward (z component of the unit direction) meet the
#: plane within 9 m / 0.1 = 90 m of the camera, inside the 200 m ground.
STEEP = -0.1
#: View size and samples: several tiles of TILE_SAMPLES samples, more with two threads.
WIDTH_PX = 256
SPP = 16


def _render(study: Study, threads: int):
    before = numba.get_num_threads()
    numba.set_num_threads(threads)
    try:
        return study.render_view("above", samples_per_pixel=SPP, width_px=WIDTH_PX)
    finally:
        numba.set_num_threads(before)


@pytest.fixture(scope="module")
def plane():
    return Study(SCENES / "point_over_plane.toml")


def test_every_tile_is_rendered_with_the_analytic_light(plane):
    threads = min(2, numba.config.NUMBA_NUM_THREADS)
    view = _render(plane, threads)
    b = view.buffers
    assert b.n_samples > 4 * TILE_SAMPLES  # several tiles on each thread
    # The camera rays again, pixel-major like the buffers; which of them meet the plane z = 0.
    _, d, _ = camera_rays(view.camera, SPP, plane.scene.render.seed)
    steep = d[:, 2] / np.linalg.norm(d, axis=1) < STEEP
    assert steep.mean() > 0.5
    # Each of them sees the ground, or the luminous opening 5 m up in front of it (a few).
    ground = b.response == 0
    opening = b.emitter >= 0
    assert np.all(ground[steep] | opening[steep])
    assert opening[steep].mean() < 1e-3
    steep &= ground
    # The light at the kept hit points: E/π = I·h/(π d³), the isotropic source 5 m up.
    p = b.point_m[steep].astype(np.float64)
    assert np.allclose(p[:, 2], 0.0, atol=1e-5)
    intensity = 10000.0 / (4.0 * math.pi)
    d2 = ((p - [0.0, 0.0, 5.0]) ** 2).sum(axis=1)
    value = b.value_cd_m2[steep, 0].astype(np.float64)
    np.testing.assert_allclose(value * math.pi, intensity * 5.0 / d2**1.5, rtol=FLOAT32_ROUNDING + TABLE_ROUNDING)


def test_same_bytes_with_one_thread_and_two(plane):
    if numba.config.NUMBA_NUM_THREADS < 2:
        pytest.skip("numba has one thread here")
    one = _render(plane, 1).buffers
    two = _render(plane, 2).buffers
    for name in ("response", "value_cd_m2", "spec_cd_m2", "object_id", "emitter"):
        assert getattr(one, name).tobytes() == getattr(two, name).tobytes(), name
    geo_one, geo_two = one.sample_geometry(), two.sample_geometry()
    for name in ("point_m", "normal", "geo_normal", "direction"):
        assert getattr(geo_one, name).tobytes() == getattr(geo_two, name).tobytes(), name
