"""The calculation on roads (render.calc with ``luminaire_rows.road``): fields, observers, edge
strips, plan and ground patches following a road, straight or curved.

The checks and their sources:

* grid points on a circular arc lie at their stated offsets from the curved kerb and at their
  stated distances along the centreline (analytic circle geometry: the point at distance s and
  offset d lies at radius R − d from the arc's centre, at angle (s − s_arc)/R), within the
  tessellation's chord error; their count follows the spacing rules of EN 13201-3 / CIE 140
  (N = 10 for S ≤ 30 m, else the least N with S/N ≤ 3 m; three points across a lane; from
  memory, see render/calc/fields.py) with S the distance along the centreline;
* the horizontal illuminance at those points from isotropic luminaires is Σ I·h/d³
  (inverse-square and cosine laws, analytic) with points and luminaires at their analytic
  places on the arc;
* a straight road turned by any angle gives the same calculation as the ``[street]`` of the
  same cross-section (every figure is invariant under a rotation of the whole scene: analytic);
* the observer of the road luminance stands 60 m before the field along the centreline
  (CIE 140 / EN 13201-3 from memory; along a bend lampcast's own reading), worked by hand;
* the ground patches of a road round an arc add up to each band's area, w·L − θ·(d1² − d0²)/2
  for a band from offset d0 to d1 along a centreline of length L turning by θ to the side of
  positive offsets (analytic annulus sectors).
"""

from __future__ import annotations

import math

import numpy as np
import pytest

from render.calc.fields import evaluate_field, row_fields
from render.calc.plan import compute_plan
from render.calc.road import OBSERVER_DISTANCE_M, OBSERVER_HEIGHT_M, lane_observer_m, lane_observers
from render.calc.run import calc_options, run_calculation, scene_ground_patches
from render.scene.loader import load_scene_document
from render.study import Study

# A road along x that turns left by 90° round an arc of radius 60 m: the arc starts at
# (40, 0) (s = 40 m), its centre is (40, 60), and it ends at (100, 60).
R = 60.0
CENTRE = np.array([40.0, 60.0])
ARC_START_S = 40.0
BEND = {"name": "bend", "points_m": [[0, 0], [100, 0], [100, 100]], "corner_radius_m": R}
SECTION = {"carriageway_width_m": 7.0, "kerb_height_m": 0.0, "centre_line": "none"}
VIEW = {"name": "v", "position_m": [1.0, -1.0], "target_m": [30.0, 0.0, 0.0], "resolution": [32, 18]}
TOL_M = 0.01  # the roads' default max_chord_error_m


def _row(**extra) -> dict:
    row = {
        "road": "bend",
        "start_m": 50.0,
        "spacing_m": 30.0,
        "count": 2,
        "mounting_height_m": 8.0,
        "setback_m": 0.5,
        "outreach_m": 0.5,
        "photometry": "generic-isotropic",
        "lamp": "led-4000k-cie-b3",
        "lumens": 10000.0,
        "maintenance_factor": 1.0,
        "column": False,
    }
    row.update(extra)
    return row


def _scene(tmp_path, roads, rows, **tables):
    return load_scene_document(
        {"views": [VIEW], "roads": roads, "luminaire_rows": rows, **tables}, tmp_path / "roads.toml"
    )


def _on_arc(s, d):
    """The analytic place of distance s along and offset d across the bend (on its arc)."""
    theta = (np.asarray(s) - ARC_START_S) / R
    r = R - np.asarray(d)
    return np.stack([CENTRE[0] + r * np.sin(theta), CENTRE[1] - r * np.cos(theta)], axis=-1)


@pytest.mark.parametrize(("spacing_m", "n_along"), [(30.0, 10), (36.0, 12)])
def test_fields_on_an_arc_follow_the_curved_kerb(tmp_path, spacing_m, n_along):
    scene = _scene(tmp_path, [{**BEND, **SECTION}], [_row(spacing_m=spacing_m)])
    fields = {f.name: f for f in row_fields(scene)}
    assert list(fields) == ["lane 1", "lane 2", "footway right", "footway left"]
    d_along = spacing_m / n_along
    for name, f in fields.items():
        n_across = 3  # lanes 3.5 m wide; footways 2 m wide (≤ 4.5 m): three points
        assert f.shape == (n_along, n_across) and f.points_m.shape == (n_along * n_across, 3)
        np.testing.assert_allclose(f.spacing_m[0], d_along, rtol=1e-12)
        along = f.along.reshape(f.shape)
        np.testing.assert_allclose(along[:, 0], 50.0 + d_along * (np.arange(n_along) + 0.5), rtol=1e-12)
        # offsets: lanes from the right kerb (−3.5 m), footways beyond the kerb tops (0.15 m)
        radius = np.hypot(*(f.points_m[:, :2] - CENTRE).T)
        np.testing.assert_allclose(radius, R - f.across, atol=TOL_M)
        np.testing.assert_allclose(f.points_m[:, :2], _on_arc(f.along, f.across), atol=TOL_M)
        kerb = 3.5 if name.endswith("left") else -3.5
        if name.startswith("footway"):  # stated distance behind the curved kerb: kerb top + half a step
            behind = np.abs(R - kerb - radius).reshape(f.shape)[:, :: 1 if kerb > 0 else -1].ravel()
            np.testing.assert_allclose(
                behind, 0.15 + (2.0 / 3) * (np.arange(3) + 0.5)[None].repeat(n_along, 0).ravel(), atol=TOL_M
            )
    lane1 = fields["lane 1"].across.reshape(n_along, 3)[0]
    np.testing.assert_allclose(lane1, -3.5 + (3.5 / 3) * (np.arange(3) + 0.5), rtol=1e-12)


def test_illuminance_on_an_arc_is_inverse_square_cosine(tmp_path):
    # Two isotropic luminaires of 10 000 lm (I = 10 000/(4π) cd) 8 m above the road over the
    # left kerb (setback 0.5 m, outreach 0.5 m) at s = 50 and 80 m: E = Σ I·h/d³ (analytic),
    # points and luminaires at their analytic places on the arc.
    scene = _scene(tmp_path, [{**BEND, **SECTION}], [_row()])
    study = Study(scene)
    lamps = np.column_stack([_on_arc([50.0, 80.0], [3.5, 3.5]), [8.0, 8.0]])
    np.testing.assert_allclose([lum.position_m for lum in scene.luminaires], lamps, atol=TOL_M)
    intensity = 10000.0 / (4.0 * math.pi)
    worst = 0.0
    for f in row_fields(scene):
        got = evaluate_field(study, f).illuminance_lx.ravel()
        pts = np.column_stack([_on_arc(f.along, f.across), f.points_m[:, 2]])
        v = lamps[:, None, :] - pts[None]
        d = np.linalg.norm(v, axis=2)
        expected = (intensity * v[..., 2] / d**3).sum(axis=0)
        worst = max(worst, float(np.max(np.abs(got / expected - 1))))
    # 1 cm of tessellation at 4 m or more from a luminaire: at most 3·0.01/4 relative.
    assert worst < 7.5e-3


SECTION_STRAIGHT = {"kerb_height_m": 0.12, "carriageway_width_m": 7.0, "left": {"verge_width_m": 1.0}}
ROW_STRAIGHT = {"start_m": 20.0, "count": 3, "photometry": "generic-road-asymmetric", "column": True}


def _straight(tmp_path, angle_deg: float):
    a = math.radians(angle_deg)
    end = [120.0 * math.cos(a), 120.0 * math.sin(a)]
    road = {"name": "r", "points_m": [[0.0, 0.0], end], **SECTION_STRAIGHT}
    return _scene(tmp_path, [road], [_row(road="r", **ROW_STRAIGHT)])


@pytest.mark.parametrize("angle_deg", [33.0, 180.0 + 71.0])
def test_a_turned_straight_road_calculates_as_the_street(tmp_path, angle_deg):
    road = _straight(tmp_path, angle_deg)
    row = _row(**ROW_STRAIGHT)
    row.pop("road")
    street = load_scene_document(
        {"views": [VIEW], "street": {"length_m": 120.0, **SECTION_STRAIGHT}, "luminaire_rows": [row]},
        tmp_path / "street.toml",
    )
    a, b = (run_calculation(Study(s), [None], calc_options(s)).setups[0] for s in (road, street))
    for ha, hb in zip(a.headline(), b.headline(), strict=True):
        if hb.value is None:
            assert ha.value is None
        elif ha.key == "upward_lm_per_m":
            # The upward total takes the upward exitance map's reflected flux, measured on a plane
            # over the scene's axis-aligned bounds: a turned road's plane reaches farther past its
            # sides and catches more light rising at low angles (here about 8 % more), so only
            # its parts that do not depend on the plane are compared exactly.
            assert a.sky.direct_upward_lm == pytest.approx(b.sky.direct_upward_lm, rel=1e-6)
            assert a.sky.reflected_upward_lm == pytest.approx(b.sky.reflected_upward_lm, rel=1e-6)
            assert a.sky.reflected_upward_source == b.sky.reflected_upward_source == "upward exitance map"
        else:
            assert ha.value == pytest.approx(hb.value, rel=1e-6, abs=1e-9), ha.key
    for fa, fb in zip(a.fields, b.fields, strict=True):
        np.testing.assert_allclose(fa.illuminance_lx, fb.illuminance_lx, rtol=1e-7, atol=1e-9)
    for la, lb in zip(a.luminance, b.luminance, strict=True):
        for name in lb.luminance_cd_m2:
            np.testing.assert_allclose(la.luminance_cd_m2[name], lb.luminance_cd_m2[name], rtol=1e-7, atol=1e-12)
    for ta, tb in zip(a.ti, b.ti, strict=True):
        assert ta.ti_percent == pytest.approx(tb.ti_percent, rel=1e-7)
    for ea, eb in zip(a.edge, b.edge, strict=True):
        assert ea.ratio == pytest.approx(eb.ratio, rel=1e-7)
    for fa, fb in zip(a.faces, b.faces, strict=True):
        assert fa.facing == fb.facing
        np.testing.assert_allclose(fa.semicylindrical_lx, fb.semicylindrical_lx, rtol=1e-7, atol=1e-9)


def test_observers_stand_60_m_back_along_the_road(tmp_path):
    # Fields from s = 80 to 110 m on the arc (which runs from s = 40 to 40 + 30π ≈ 134.2 m).
    scene = _scene(tmp_path, [{**BEND, **SECTION}], [_row(start_m=80.0)])
    lane = row_fields(scene)[0]  # lane 1: offset −3.5 + 3.5/2 = −1.75 m
    assert OBSERVER_DISTANCE_M == 60.0
    # Traffic along the road: 80 − 60 = 20 m, on the straight before the arc: (20, −1.75).
    # (Within 1 cm: next to the arc's first chord the offset direction starts to turn, moving a
    # point 1.75 m off the centreline by 1.75·φ/4 along it, φ the chords' angle.)
    np.testing.assert_allclose(lane_observer_m(lane, 1), [20.0, -1.75, OBSERVER_HEIGHT_M], atol=TOL_M)
    # Against it: 110 + 60 = 170 m, 35.8 m beyond the arc's end (100, 60) on the straight along
    # +y, the right of the reversed road being the left (offset −1.75 → x = 100 + 1.75).
    arc_end = ARC_START_S + R * math.pi / 2
    eye = lane_observer_m(lane, -1)
    np.testing.assert_allclose(eye[:2], [101.75, 60.0 + (170.0 - arc_end)], atol=3 * TOL_M)
    # The moving observer of TI: 60 m back from each row, looking toward that row's lane centre.
    for (eye, sight), s in zip(lane_observers(lane, 1), np.unique(lane.along), strict=True):
        target = _on_arc(s, -1.75)
        back = s - 60.0
        expected = _on_arc(back, -1.75) if back >= ARC_START_S else np.array([back, -1.75])
        np.testing.assert_allclose(eye[:2], expected, atol=3 * TOL_M)
        np.testing.assert_allclose(sight, (target - eye[:2]) / np.hypot(*(target - eye[:2])), atol=1e-3)


def test_calculation_plan_and_edge_on_a_curved_road(tmp_path):
    roads = [{**BEND, **SECTION, "left": {"verge_width_m": 1.0}}]
    scene = _scene(tmp_path, roads, [_row()])
    study = Study(scene)
    report = run_calculation(study, [None], calc_options(scene))
    calc = report.setups[0]
    assert calc.carriageway_figures().mean_illuminance_lx > 0
    assert calc.worst is not None and calc.ti_max_percent is not None and calc.ti_max_percent > 0
    # Edge strips: min(5 m, half the carriageway 3.5 m, kerb 0.15 + verge + footway) wide.
    widths = {e.side: e.strip_width_m for e in calc.edge}
    assert widths == {"right": pytest.approx(2.15), "left": pytest.approx(3.15)}
    assert all(e.ratio > 0 for e in calc.edge)
    length = scene.roads[0].section.length_m
    assert calc.sky.upward_lm_per_m == pytest.approx(calc.sky.upward_lm / length, rel=1e-12)
    plan = compute_plan(study, None, spacing_m=1.0)
    assert plan.road == "bend" and plan.street_length_m == pytest.approx(length)
    assert plan.x_m[0] == 0.0 and plan.x_m[-1] == pytest.approx(length)
    np.testing.assert_allclose(plan.luminaires_xy_m, [[50.0, 3.5], [80.0, 3.5]], atol=1e-6)
    fields = {f.name: f for f in row_fields(scene)}
    for pf in plan.fields:
        np.testing.assert_allclose(pf.x_m, fields[pf.name].along.reshape(fields[pf.name].shape)[:, 0])
    # The plan's points are the road's: its value at a field's point is the field's there.
    lane = calc.fields[0]
    i = int(np.argmin(np.abs(plan.x_m - 51.5)))
    j = int(np.argmin(np.abs(plan.y_m - (-3.5 + 3.5 / 6))))
    f = fields["lane 1"]
    k = int(np.argmin(np.abs(f.along - plan.x_m[i]) + np.abs(f.across - plan.y_m[j])))
    if abs(f.along[k] - plan.x_m[i]) < 1e-9 and abs(f.across[k] - plan.y_m[j]) < 1e-9:
        assert plan.illuminance_lx[j, i] == pytest.approx(lane.illuminance_lx.ravel()[k], rel=1e-9)


def test_ground_patches_round_an_arc_add_up_to_the_bands(tmp_path):
    roads = [{**BEND, **SECTION, "left": {"verge_width_m": 1.0, "frontage_depth_m": 2.0}}]
    scene = _scene(tmp_path, roads, [_row()])
    patches, length = scene_ground_patches(scene, 1.0)
    L = scene.roads[0].section.length_m
    assert length == L
    theta = math.pi / 2  # the road turns left by 90°

    def band(d0, d1):
        return (d1 - d0) * L - theta * (d1 * d1 - d0 * d0) / 2

    by = dict.fromkeys(patches.materials, 0.0)
    for m, a in zip(patches.material_index, patches.area_m2, strict=True):
        by[patches.materials[m]] += a
    # carriageway; left: kerb 0.15, verge 1, footway 2, gardens 2 (grass, as the verge); right:
    # kerb 0.15, footway 2, gardens 3 (the patches stop at the building lines).
    assert by["asphalt-worn"] == pytest.approx(band(-3.5, 3.5), rel=2e-4)
    assert by["concrete-kerb"] == pytest.approx(band(3.5, 3.65) + band(-3.65, -3.5), rel=2e-4)
    assert by["concrete-paving"] == pytest.approx(band(4.65, 6.65) + band(-5.65, -3.65), rel=2e-4)
    assert by["grass"] == pytest.approx(band(3.65, 4.65) + band(6.65, 8.65) + band(-8.65, -5.65), rel=2e-4)
