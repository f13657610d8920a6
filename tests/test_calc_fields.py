"""Calculation fields (render.calc.fields): grid geometry, illuminance on the grid, scaling.

Sources: the grid rules of EN 13201-3:2015 / CIE 140-2000 (from memory, see
docs/references.md), worked by hand below; the inverse-square and cosine laws for a point
source (analytic); symmetry and linearity of direct illuminance (analytic).
"""

from __future__ import annotations

import json
import math
from pathlib import Path

import numpy as np
import pytest
from scenes_for_tests import street_model

from render.calc import (
    FieldResult,
    evaluate_face_field,
    evaluate_field,
    footway_across,
    lane_across,
    points_along,
    row_fields,
    row_positions,
    semicylindrical_illuminance_lx,
    street_fields,
)
from render.errors import InputError
from render.scene.model import GroupSetting, Setup
from render.study import Study

SCENES = Path(__file__).resolve().parents[1] / "scenes" / "tests"


@pytest.fixture(scope="module")
def plane() -> Study:
    return Study(SCENES / "point_over_plane.toml")


@pytest.fixture(scope="module")
def minimal() -> Study:
    return Study(SCENES / "minimal_street.toml")


# --- (a) grid geometry: EN 13201-3:2015 / CIE 140 rules (from memory), worked by hand ---------


@pytest.mark.parametrize(
    ("spacing_m", "n", "d_m"),
    [
        (30.0, 10, 3.0),  # S ≤ 30 m: N = 10, D = 30/10 = 3 m
        (25.0, 10, 2.5),  # S ≤ 30 m: N = 10 whatever D
        (36.0, 12, 3.0),  # 36/11 = 3.27 > 3, 36/12 = 3.0 ≤ 3: N = 12
        (40.0, 14, 40.0 / 14),  # 40/13 = 3.08 > 3, 40/14 = 2.857: N = 14
        (30.5, 11, 30.5 / 11),  # S > 30 m: 30.5/11 = 2.77 ≤ 3 (30.5/10 = 3.05 > 3)
    ],
)
def test_points_along_rule(spacing_m, n, d_m):
    got_n, got_d = points_along(spacing_m)
    assert got_n == n
    assert got_d == pytest.approx(d_m, rel=1e-12)


def test_points_across_rules():
    # Lane: three points, d = W/3 (EN 13201-3 / CIE 140, from memory): 3.5/3 = 1.1667 m.
    assert lane_across(3.5) == (3, pytest.approx(3.5 / 3, rel=1e-12))
    # Footway: three points up to 4.5 m; wider, the smallest n with d ≤ 1.5 m (from memory):
    # 2 m -> 3 points; 4.5 m -> 3 at 1.5 m; 5 m -> 5/3 = 1.67 > 1.5, 5/4 = 1.25: 4 points.
    assert footway_across(2.0) == (3, pytest.approx(2.0 / 3, rel=1e-12))
    assert footway_across(4.5) == (3, pytest.approx(1.5, rel=1e-12))
    assert footway_across(5.0) == (4, pytest.approx(1.25, rel=1e-12))


def test_grid_geometry_s30_by_hand():
    # Carriageway 7 m in two lanes of 3.5 m from x = 10 m, S = 30 m (worked by hand):
    # along x = 10 + 1.5 + 3 i, i = 0..9; lane 1 (right, y from -3.5): y = -3.5 + 0.5833,
    # -3.5 + 1.75, -3.5 + 2.9167; lane 2 from y = 0.
    fields = {f.name: f for f in street_fields(street_model(), 10.0, 30.0)}
    assert list(fields) == ["lane 1", "lane 2", "footway right", "footway left"]
    lane1 = fields["lane 1"]
    assert lane1.shape == (10, 3)
    assert lane1.spacing_m == pytest.approx((3.0, 1.1666666666666667), rel=1e-12)
    grid = lane1.points_m.reshape(10, 3, 3)
    np.testing.assert_allclose(grid[:, 0, 0], 10.0 + 1.5 + 3.0 * np.arange(10), rtol=0, atol=1e-12)
    np.testing.assert_allclose(grid[0, :, 1], [-3.5 + 0.5833333333, -3.5 + 1.75, -3.5 + 2.9166666667], atol=1e-9)
    np.testing.assert_allclose(grid[..., 2], 0.0)
    lane2 = fields["lane 2"].points_m.reshape(10, 3, 3)
    np.testing.assert_allclose(lane2[0, :, 1], [0.5833333333, 1.75, 2.9166666667], atol=1e-9)
    # Footways start beyond kerb (0.15 m) and verge (0.5 m): y from 3.5 + 0.65 = 4.15 m, width 2 m,
    # d = 0.6667 m, points at 4.4833, 5.15, 5.8167; on the footway surface, z = kerb height 0.12 m.
    left = fields["footway left"].points_m.reshape(10, 3, 3)
    np.testing.assert_allclose(left[0, :, 1], [4.4833333333, 5.15, 5.8166666667], atol=1e-9)
    np.testing.assert_allclose(left[..., 2], 0.12)
    right = fields["footway right"].points_m.reshape(10, 3, 3)
    np.testing.assert_allclose(right[0, :, 1], [-5.8166666667, -5.15, -4.4833333333], atol=1e-9)
    np.testing.assert_allclose(fields["footway right"].normals, np.tile([0.0, 0.0, 1.0], (30, 1)))


def test_grid_geometry_s36_by_hand():
    # S = 36 m: N = 12, D = 3 m, first row at 1.5 m, last at 34.5 m (worked by hand).
    f = street_fields(street_model(), 0.0, 36.0)[0]
    assert f.shape == (12, 3)
    xs = f.points_m.reshape(12, 3, 3)[:, 0, 0]
    np.testing.assert_allclose(xs, 1.5 + 3.0 * np.arange(12), rtol=0, atol=1e-12)
    assert xs[-1] == pytest.approx(34.5, abs=1e-12)


def test_row_fields_span_consecutive_luminaires(minimal):
    # The minimal street's row: luminaires at x = 5 and 35 m (the scene file), so S = 30 m.
    pos = row_positions(minimal.scene)
    np.testing.assert_allclose(pos[:, 0], [5.0, 35.0])
    fields = row_fields(minimal.scene)
    assert [f.name for f in fields] == ["lane 1", "lane 2", "footway right", "footway left"]
    xs = fields[0].points_m.reshape(10, 3, 3)[:, 0, 0]
    np.testing.assert_allclose(xs, 5.0 + 1.5 + 3.0 * np.arange(10), atol=1e-12)


def test_row_fields_bad_input_is_input_error(plane, minimal):
    with pytest.raises(InputError, match="street"):
        row_fields(plane.scene)  # no [street]
    with pytest.raises(InputError, match="luminaire_rows"):
        row_fields(minimal.scene, pair=1)  # two luminaires: only pair 0
    with pytest.raises(InputError, match="luminaire_rows"):
        row_fields(minimal.scene, row=3)


# --- (b) one luminaire of known distribution: E = I cos θ / d² (analytic) ----------------------


def test_isotropic_source_grid_is_inverse_square_cosine(plane):
    # Isotropic 10 000 lm, maintenance factor 1 (the scene file): I = 10000 / (4π) cd at
    # (0, 0, 5). Horizontal illuminance E = I cos θ / d² = I h / d³ with h = 5 - z (analytic).
    intensity = 10000.0 / (4.0 * math.pi)
    for f in street_fields(street_model(), -13.0, 30.0):
        r = evaluate_field(plane, f)
        d_vec = np.array([0.0, 0.0, 5.0]) - f.points_m
        d = np.linalg.norm(d_vec, axis=1)
        expected = intensity * (d_vec[:, 2] / d) / d**2
        # The built-in file's intensity has 7 figures (1.9e-8 relative from 10000/(4π)).
        np.testing.assert_allclose(r.illuminance_lx.ravel(), expected, rtol=1e-6)
        assert r.illuminance_lx.shape == f.shape


def test_field_summary_figures(plane):
    # Ē, Emin, Emax and U0 = Emin/Ē (EN 13201-2:2015 definition of U0, from memory) of the grid.
    f = street_fields(street_model(), -13.0, 30.0)[0]
    r = evaluate_field(plane, f)
    assert isinstance(r, FieldResult)
    g = r.illuminance_lx
    assert r.mean_lx == pytest.approx(g.sum() / g.size, rel=1e-12)
    assert r.min_lx == g.min() and r.max_lx == g.max()
    assert r.u0 == pytest.approx(g.min() / (g.sum() / g.size), rel=1e-12)
    assert 0.0 < r.u0 < 1.0
    data = json.loads(json.dumps(r.to_json()))
    assert data["name"] == "lane 1" and data["setup"] is None
    assert data["u0"] == r.u0 and data["mean_lx"] == r.mean_lx
    np.testing.assert_array_equal(np.array(data["illuminance_lx"]), g)


# --- (c) symmetric layouts give symmetric grids (analytic) --------------------------------------


def test_centred_source_gives_mirror_symmetric_grids(plane):
    # Source above (0, 0): a field from x = -15 over 30 m and a street symmetric about y = 0.
    # Mirroring x reverses the rows; mirroring y swaps lane 1 with lane 2 and the two footways,
    # reversing the points across.
    res = {f.name: evaluate_field(plane, f).illuminance_lx for f in street_fields(street_model(), -15.0, 30.0)}
    for g in res.values():
        np.testing.assert_allclose(g, g[::-1, :], rtol=1e-12)
    np.testing.assert_allclose(res["lane 1"], res["lane 2"][:, ::-1], rtol=1e-12)
    np.testing.assert_allclose(res["footway right"], res["footway left"][:, ::-1], rtol=1e-12)


def test_two_identical_luminaires_give_symmetric_field(minimal):
    # Minimal street: two identical luminaires at x = 5 and 35 m on a street from 0 to 40 m,
    # symmetric about x = 20 m, so each grid reads the same from either end.
    for f in row_fields(minimal.scene):
        g = evaluate_field(minimal, f).illuminance_lx
        assert g.min() > 0
        np.testing.assert_allclose(g, g[::-1, :], rtol=1e-9)


# --- (d) linearity: doubling lumens doubles every value; dimming scales (analytic) -------------


def test_doubling_lumens_doubles_and_dimming_scales(plane, minimal):
    for study in (plane, minimal):
        rated = study.lights().channels[0].lumens
        fields = row_fields(study.scene) if study.scene.street else street_fields(street_model(), -13.0, 30.0)
        double = Setup("double", "", {"*": GroupSetting(lumens=2.0 * rated)})
        dim = Setup("dim", "", {"*": GroupSetting(dimming=0.35)})
        for f in fields:
            base = evaluate_field(study, f)
            r2 = evaluate_field(study, f, double)
            rd = evaluate_field(study, f, dim)
            assert r2.setup == "double"
            np.testing.assert_allclose(r2.illuminance_lx, 2.0 * base.illuminance_lx, rtol=1e-12)
            np.testing.assert_allclose(rd.illuminance_lx, 0.35 * base.illuminance_lx, rtol=1e-12)
            assert r2.u0 == pytest.approx(base.u0, rel=1e-12)
            assert rd.mean_lx == pytest.approx(0.35 * base.mean_lx, rel=1e-12)


def test_named_setup_scales_by_lumens_and_dimming(plane):
    # point_over_plane's "dimmed-hps": 6000 lm of the 10 000 lm rating at dimming 0.5 -> 0.3
    # (the scene file; analytic).
    f = street_fields(street_model(), -13.0, 30.0)[2]
    base = evaluate_field(plane, f)
    r = evaluate_field(plane, f, "dimmed-hps")
    assert r.setup == "dimmed-hps"
    np.testing.assert_allclose(r.illuminance_lx, 0.3 * base.illuminance_lx, rtol=1e-12)


# --- semicylindrical and vertical illuminance at 1.5 m on footways -----------------------------


def test_face_field_point_source_closed_form(plane):
    # Isotropic I = 10000/(4π) cd at (0, 0, 5) (the scene file). A point at 1.5 m sees it at
    # distance d, elevation ε, azimuth α from the facing direction. Vertical plane facing f:
    # E_v = I cos ε max(cos α, 0)/d² (cosine law, analytic). Semicylinder facing f:
    # E_sc = I cos ε (1 + cos α)/(π d²) (the average over its curved face; derived by hand).
    intensity = 10000.0 / (4.0 * math.pi)
    for f in street_fields(street_model(), -13.0, 30.0)[2:]:
        for facing in ((1.0, 0.0, 0.0), (-1.0, 0.0, 0.0)):
            r = evaluate_face_field(plane, f, facing=facing)
            assert r.height_m == 1.5 and r.facing == facing
            p = f.points_m + [0.0, 0.0, 1.5]
            v = np.array([0.0, 0.0, 5.0]) - p
            d = np.linalg.norm(v, axis=1)
            elev = np.arcsin(v[:, 2] / d)
            alpha = np.arctan2(v[:, 1], v[:, 0]) - math.atan2(facing[1], facing[0])
            e_v = intensity * np.cos(elev) * np.maximum(np.cos(alpha), 0.0) / d**2
            e_sc = intensity * np.cos(elev) * (1.0 + np.cos(alpha)) / (math.pi * d**2)
            np.testing.assert_allclose(r.vertical_lx.ravel(), e_v, rtol=1e-6, atol=1e-9)
            np.testing.assert_allclose(r.semicylindrical_lx.ravel(), e_sc, rtol=1e-6)
            data = json.loads(json.dumps(r.to_json()))
            assert data["semicylindrical_min_lx"] == pytest.approx(e_sc.min(), rel=1e-6)


def test_semicylindrical_is_mean_of_vertical_planes(minimal):
    # Definition (the average illuminance on a half-cylinder's curved face): E_sc =
    # (1/π) ∫ E_v(φ) dφ over the vertical planes facing φ ∈ [-π/2, π/2] from the facing
    # direction. Midpoint rule over 720 planes with the scene's real (asymmetric) optics and
    # shadows; the integrand has kinks, so the rule is good to about 1e-4 (analytic bound).
    f = row_fields(minimal.scene)[3]
    p = f.points_m[::4] + [0.0, 0.0, 1.5]
    k = 720
    phi = -0.5 * math.pi + math.pi * (np.arange(k) + 0.5) / k
    normals = np.stack([np.cos(phi), np.sin(phi), np.zeros(k)], axis=1)
    ev = np.array([minimal.illuminance_lx(np.tile(q, (k, 1)), normals) for q in p])
    expected = ev.mean(axis=1)
    got = semicylindrical_illuminance_lx(minimal, p, (1.0, 0.0, 0.0))
    assert expected.max() > 1.0
    np.testing.assert_allclose(got, expected, rtol=2e-4, atol=1e-6)


def test_face_field_scales_with_dimming(minimal):
    # Linearity (analytic): dimming 0.35 scales every value by 0.35.
    f = row_fields(minimal.scene)[2]
    base = evaluate_face_field(minimal, f, facing=(-1.0, 0.0, 0.0))
    dim = evaluate_face_field(minimal, f, Setup("dim", "", {"*": GroupSetting(dimming=0.35)}), facing=(-1.0, 0.0, 0.0))
    assert dim.setup == "dim"
    assert base.semicylindrical_lx.max() > 1.0
    np.testing.assert_allclose(dim.semicylindrical_lx, 0.35 * base.semicylindrical_lx, rtol=1e-12)
    np.testing.assert_allclose(dim.vertical_lx, 0.35 * base.vertical_lx, rtol=1e-12)


def test_semicylindrical_counts_shadows(tmp_path):
    # The point-over-plane scene plus a wall (x 2.0-2.2 m, y ±1 m, 4 m high) between the source
    # at (0, 0, 5) and a point at (4, 0, 1.5): the ray to the source crosses x = 2.1 m at
    # z = 1.5 + 3.5 · 1.9/4 = 3.16 m, under the wall's top, so the point is in shadow (geometry
    # by hand); beside the wall, at (4, 3, 1.5), it is lit and follows the closed form.
    text = (SCENES / "point_over_plane.toml").read_text()
    wall = (
        '[[geometry]]\nkind = "box"\nname = "wall"\nsize_m = [0.2, 2.0, 4.0]\n'
        'position_m = [2.1, 0.0, 0.0]\nmaterial = "object-white"\n\n'
    )
    scene = tmp_path / "walled.toml"
    scene.write_text(text.replace("[[luminaires]]", wall + "[[luminaires]]", 1))
    study = Study(scene)
    p = np.array([[4.0, 0.0, 1.5], [4.0, 3.0, 1.5]])
    e = semicylindrical_illuminance_lx(study, p, (-1.0, 0.0, 0.0))
    assert e[0] == 0.0
    v = np.array([0.0, 0.0, 5.0]) - p[1]
    d = np.linalg.norm(v)
    cos_elev, cos_alpha = math.hypot(v[0], v[1]) / d, -v[0] / math.hypot(v[0], v[1])
    expected = 10000.0 / (4.0 * math.pi) * cos_elev * (1.0 + cos_alpha) / (math.pi * d * d)
    assert e[1] == pytest.approx(expected, rel=1e-6)
