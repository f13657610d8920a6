"""Edge illuminance ratio (render.calc.edge): strip geometry, R_EI by hand, invariance.

Sources: the definition of the surround ratio / edge illuminance ratio (CIE ILV "surround
ratio"; EN 13201-2:2015 R_EI); the strip width rule min(5 m, half the carriageway, the
surroundings) of EN 13201-3 / CIE 140 (from memory); the inverse-square and cosine laws for a
point source, E = I·h/(h² + r²)^(3/2) (analytic); a ratio of linear quantities does not change
with the lumens (analytic).
"""

from __future__ import annotations

import json
import math
from pathlib import Path

import numpy as np
import pytest
from scenes_for_tests import street_model

from render.calc.edge import EdgeResult, edge_illuminance_ratio, edge_strip_width_m, edge_strips
from render.scene.model import GroupSetting, Setup
from render.study import Study

SCENES = Path(__file__).resolve().parents[1] / "scenes" / "tests"


@pytest.fixture(scope="module")
def plane() -> Study:
    return Study(SCENES / "point_over_plane.toml")


def test_strip_width_rule_by_hand():
    # min(5 m, W/2, kerb + verge + footway) (EN 13201-3 / CIE 140, from memory), worked by hand:
    assert edge_strip_width_m(street_model(), "left") == pytest.approx(0.15 + 0.5 + 2.0)  # 2.65 < 3.5
    assert edge_strip_width_m(street_model(width_m=4.0), "right") == pytest.approx(2.0)  # W/2 = 2 < 2.65
    assert edge_strip_width_m(street_model(width_m=20.0, footway_m=6.0), "left") == pytest.approx(5.0)


def test_strip_geometry_by_hand():
    # 7 m carriageway, strips 2.65 m wide: three points across at d = 2.65/3 (footway rule);
    # left inside strip y from 3.5 - 2.65 = 0.85, outside from 3.5; outside points on the
    # kerb/footway surface at 0.12 m, inside on the carriageway (worked by hand).
    inside, outside = edge_strips(street_model(), -15.0, 30.0, "left")
    d = 2.65 / 3
    assert inside.shape == outside.shape == (10, 3)
    gi = inside.points_m.reshape(10, 3, 3)
    go = outside.points_m.reshape(10, 3, 3)
    np.testing.assert_allclose(gi[0, :, 1], 0.85 + d * np.array([0.5, 1.5, 2.5]), atol=1e-12)
    np.testing.assert_allclose(go[0, :, 1], 3.5 + d * np.array([0.5, 1.5, 2.5]), atol=1e-12)
    np.testing.assert_allclose(gi[:, 0, 0], -13.5 + 3.0 * np.arange(10), atol=1e-12)
    np.testing.assert_allclose(gi[..., 2], 0.0)
    np.testing.assert_allclose(go[..., 2], 0.12)
    r_in, r_out = edge_strips(street_model(), -15.0, 30.0, "right")
    np.testing.assert_allclose(r_in.points_m[:3, 1], -3.5 + d * np.array([0.5, 1.5, 2.5]), atol=1e-12)
    np.testing.assert_allclose(r_out.points_m[:3, 1], -6.15 + d * np.array([0.5, 1.5, 2.5]), atol=1e-12)


def test_isotropic_source_ratio_by_hand(plane):
    # point_over_plane: isotropic 10 000 lm at (0, 0, 5), I = 10000/(4π) cd (the scene file).
    # E = I·h/(h² + r²)^(3/2) with h = 5 - z at each strip point (analytic); R_EI = mean outside
    # over mean inside on the same grids; the two sides agree by symmetry.
    intensity = 10000.0 / (4.0 * math.pi)
    street = street_model()
    results = edge_illuminance_ratio(plane, street, -15.0, 30.0)
    assert [r.side for r in results] == ["right", "left"]
    for r in results:
        inside, outside = edge_strips(street, -15.0, 30.0, r.side)

        def mean_e(f):
            p = f.points_m
            h = 5.0 - p[:, 2]
            return float(np.mean(intensity * h / (h**2 + p[:, 0] ** 2 + p[:, 1] ** 2) ** 1.5))

        # The built-in file's intensity has 7 figures (as in test_calc_fields).
        assert r.inside_mean_lx == pytest.approx(mean_e(inside), rel=1e-6)
        assert r.outside_mean_lx == pytest.approx(mean_e(outside), rel=1e-6)
        assert r.ratio == pytest.approx(mean_e(outside) / mean_e(inside), rel=1e-6)
        assert 0.0 < r.ratio < 1.0
    assert results[0].ratio == pytest.approx(results[1].ratio, rel=1e-12)


def test_ratio_unchanged_by_doubling_lumens(plane):
    # A ratio of two illuminances, each linear in the lumens (analytic).
    rated = plane.lights().channels[0].lumens
    double = Setup("double", "", {"*": GroupSetting(lumens=2.0 * rated)})
    base = edge_illuminance_ratio(plane, street_model(), -13.0, 30.0)
    r2 = edge_illuminance_ratio(plane, street_model(), -13.0, 30.0, double)
    for a, b in zip(base, r2, strict=True):
        assert b.setup == "double"
        assert b.inside_mean_lx == pytest.approx(2.0 * a.inside_mean_lx, rel=1e-12)
        assert b.ratio == pytest.approx(a.ratio, rel=1e-12)


def test_to_json_round_trip(plane):
    r = edge_illuminance_ratio(plane, street_model(), -15.0, 30.0)[1]
    assert isinstance(r, EdgeResult)
    data = json.loads(json.dumps(r.to_json()))
    assert data["side"] == "left" and data["setup"] is None
    assert data["edge_illuminance_ratio"] == r.ratio
    assert data["strip_width_m"] == pytest.approx(2.65)
