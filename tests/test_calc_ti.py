"""Threshold increment (render.calc.ti): veiling luminance, screening, TI forms.

Sources: Lv = 9.86·(1 + (A/66.4)⁴)·Σ E/θ², TI = 65·Lv/L̄^0.8 (L̄ ≤ 5 cd/m²) and
95·Lv/L̄^1.05 above, the 20° screening angle and the 1° line of sight of CIE 140-2000 /
EN 13201-3:2015 (from memory, see docs/references.md), written out here as literals; the
Stiles–Holladay constant 10 (CIE 146:2002 / Vos 2003, summary); E = I·cos θ/d² for a point
source (analytic); the observer positions for each direction of traffic (CIE 140 /
EN 13201-3, from memory); mirror symmetry of the two directions (analytic).
"""

from __future__ import annotations

import math

import numpy as np
import pytest
from test_calc_road import (
    FIELD_X0,
    FIELD_X1,
    ISOTROPIC_CD,
    asymmetric_layout,
    glossy_csv,
    lane_field,
    make_lights,
    two_lanes,
)

from render.calc.road import evaluate_luminance_field
from render.calc.ti import (
    age_factor,
    road_worst_case,
    threshold_increment,
    ti_percent,
    veiling_luminance_cd_m2,
)
from render.light.rtable import parse_r_table

EYE = np.array([0.0, 0.0, 1.5])
SIGHT = np.array([math.cos(math.radians(1.0)), 0.0, -math.sin(math.radians(1.0))])
UP = np.array([math.sin(math.radians(1.0)), 0.0, math.cos(math.radians(1.0))])


def _at(elevation_deg: float, distance_m: float, lateral_m: float = 0.0) -> tuple[float, float, float]:
    """A point at ``elevation_deg`` above the line of sight, in its vertical plane, shifted sideways."""
    e = math.radians(elevation_deg)
    p = EYE + distance_m * (math.cos(e) * SIGHT + math.sin(e) * UP) + np.array([0.0, lateral_m, 0.0])
    return (float(p[0]), float(p[1]), float(p[2]))


def test_age_factor_gives_stiles_holladay_ten_at_23():
    # 9.86·(1 + (23/66.4)⁴) = 10.00 (CIE 140, memory), the classic constant 10 (CIE 146 / Vos 2003).
    assert age_factor(23.0) == pytest.approx(10.0, abs=0.005)
    assert age_factor(23.0) == pytest.approx(9.86 * (1.0 + (23.0 / 66.4) ** 4), rel=1e-12)
    assert age_factor(66.4) == pytest.approx(2.0 * 9.86, rel=1e-12)
    assert age_factor() == age_factor(23.0)


def test_one_luminaire_by_hand():
    # Analytic: a luminaire 10° above the line of sight at 40 m: θ = 10°, E = I·cos θ/d².
    lights = make_lights([_at(10.0, 40.0)])
    e = ISOTROPIC_CD * math.cos(math.radians(10.0)) / 40.0**2
    expected = 9.86 * (1.0 + (23.0 / 66.4) ** 4) * e / 10.0**2
    assert veiling_luminance_cd_m2(lights, EYE) == pytest.approx(expected, rel=1e-9)
    # A 70-year-old: factor (1 + (70/66.4)⁴)/(1 + (23/66.4)⁴).
    old = veiling_luminance_cd_m2(lights, EYE, age_years=70.0)
    assert old / veiling_luminance_cd_m2(lights, EYE) == pytest.approx((1 + (70 / 66.4) ** 4) / (1 + (23 / 66.4) ** 4))


def test_off_axis_luminaire_angle_by_hand():
    # Analytic: 5° up and 3 m to the side at 30 m along the elevated direction; θ from the dot product.
    pos = np.array(_at(5.0, 30.0, lateral_m=3.0))
    d = pos - EYE
    dist = float(np.linalg.norm(d))
    cos_t = float(d @ SIGHT) / dist
    theta = math.degrees(math.acos(cos_t))
    expected = 9.86 * (1.0 + (23.0 / 66.4) ** 4) * ISOTROPIC_CD * cos_t / dist**2 / theta**2
    assert veiling_luminance_cd_m2(make_lights([tuple(pos)]), EYE) == pytest.approx(expected, rel=1e-9)


def test_screening_angle_excludes_25_degrees_keeps_15():
    # CIE 140 (memory): luminaires more than 20° above the line of sight are screened.
    assert veiling_luminance_cd_m2(make_lights([_at(25.0, 20.0)]), EYE) == 0.0
    assert veiling_luminance_cd_m2(make_lights([_at(21.0, 20.0)]), EYE) == 0.0
    assert veiling_luminance_cd_m2(make_lights([_at(19.0, 20.0)]), EYE) > 0.0
    assert veiling_luminance_cd_m2(make_lights([_at(15.0, 20.0)]), EYE) > 0.0
    # Behind the eye: not counted.
    assert veiling_luminance_cd_m2(make_lights([(-20.0, 0.0, 6.0)]), EYE) == 0.0
    assert veiling_luminance_cd_m2(make_lights([(-20.0, 0.0, 1.0)]), EYE) == 0.0


def test_ti_forms_by_hand():
    # TI = 65·Lv/L̄^0.8 for L̄ ≤ 5 cd/m², 95·Lv/L̄^1.05 above (CIE 140, memory).
    assert ti_percent(0.1, 1.0) == pytest.approx(6.5)
    assert ti_percent(0.1, 2.0) == pytest.approx(6.5 / 2.0**0.8)
    assert ti_percent(0.1, 5.0) == pytest.approx(6.5 / 5.0**0.8)
    assert ti_percent(0.1, 10.0) == pytest.approx(9.5 / 10.0**1.05)
    with pytest.raises(ValueError):
        ti_percent(0.1, 0.0)


def test_threshold_increment_is_the_largest_over_observer_positions():
    # The observer 60 m before each row of grid points, 1.5 m up at the lane centre (memory).
    lane = lane_field("lane 1", -3.5, 3.5)
    lights = make_lights([(0.0, -4.0, 8.0), (30.0, -4.0, 8.0), (60.0, -4.0, 8.0)])
    res = threshold_increment(lights, lane, mean_luminance_cd_m2=1.0)
    xs = np.unique(lane.points_m[:, 0])
    values = [veiling_luminance_cd_m2(lights, np.array([x - 60.0, -1.75, 1.5])) for x in xs]
    assert res.veiling_cd_m2 == pytest.approx(max(values))
    assert res.eye_m[0] == pytest.approx(xs[int(np.argmax(values))] - 60.0)
    assert res.eye_m[1:] == pytest.approx((-1.75, 1.5))
    assert res.ti_percent == pytest.approx(65.0 * max(values))


# --- both directions of traffic -------------------------------------------------------------

#: The line of sight of an observer in traffic along −x: along −x, 1° down (CIE 140, memory).
SIGHT_MINUS_X = np.array([-math.cos(math.radians(1.0)), 0.0, -math.sin(math.radians(1.0))])


def _veiling_by_hand(position: np.ndarray, eye: np.ndarray, sight: np.ndarray, age: float = 23.0) -> float:
    """K·E_eye/θ² for one isotropic luminaire in front of the eye and below the screening angle:
    E_eye = I·cos θ/d², θ in degrees from the line of sight (analytic)."""
    d = position - eye
    dist = float(np.linalg.norm(d))
    cos_t = float(d @ sight) / dist
    theta = math.degrees(math.acos(cos_t))
    return 9.86 * (1.0 + (age / 66.4) ** 4) * ISOTROPIC_CD * cos_t / dist**2 / theta**2


def test_one_luminaire_in_front_of_a_minus_x_observer_by_hand():
    # Analytic: a luminaire 40 m ahead along −x, 6.5 m above and 2 m beside the eye:
    # Lv = K·E/θ² with the −x line of sight; TI = 65·Lv/L̄^0.8 (CIE 140, memory).
    pos = np.array([-40.0, 2.0, 8.0])
    lights = make_lights([tuple(pos)])
    expected = _veiling_by_hand(pos, EYE, SIGHT_MINUS_X)
    lv = veiling_luminance_cd_m2(lights, EYE, direction=-1)
    assert lv == pytest.approx(expected, rel=1e-9)
    assert ti_percent(lv, 1.5) == pytest.approx(65.0 * expected / 1.5**0.8, rel=1e-9)
    # The same luminaire is behind an observer looking along +x: nothing.
    assert veiling_luminance_cd_m2(lights, EYE, direction=1) == 0.0
    # A luminaire behind the −x observer (at +x) counts for +x and not for −x.
    behind = make_lights([(40.0, 2.0, 8.0)])
    assert veiling_luminance_cd_m2(behind, EYE, direction=-1) == 0.0
    assert veiling_luminance_cd_m2(behind, EYE, direction=1) > 0.0


def test_screening_angle_for_a_minus_x_observer():
    # CIE 140 (memory): the 20° screening angle above the line of sight, whichever way one looks.
    up = np.array([-math.sin(math.radians(1.0)), 0.0, math.cos(math.radians(1.0))])

    def at(elevation_deg: float) -> tuple[float, float, float]:
        e = math.radians(elevation_deg)
        p = EYE + 20.0 * (math.cos(e) * SIGHT_MINUS_X + math.sin(e) * up)
        return (float(p[0]), float(p[1]), float(p[2]))

    assert veiling_luminance_cd_m2(make_lights([at(21.0)]), EYE, direction=-1) == 0.0
    assert veiling_luminance_cd_m2(make_lights([at(19.0)]), EYE, direction=-1) > 0.0


def test_threshold_increment_for_minus_x_traffic_by_hand():
    # The observer 60 m beyond each row of grid points for −x traffic, 1.5 m up at the lane
    # centre (CIE 140 / EN 13201-3 observer geometry, from memory); TI = 65·Lv/L̄^0.8 with the
    # largest Lv over the positions, each Lv by hand (analytic). Field 0–30 m, one luminaire
    # at x = 0, in front of every −x eye.
    lane = lane_field("lane 1", -3.5, 3.5)
    pos = np.array([0.0, -4.0, 8.0])
    res = threshold_increment(make_lights([tuple(pos)]), lane, mean_luminance_cd_m2=0.75, direction=-1)
    xs = np.unique(lane.points_m[:, 0])
    eyes = [np.array([x + 60.0, -1.75, 1.5]) for x in xs]
    values = [_veiling_by_hand(pos, eye, SIGHT_MINUS_X) for eye in eyes]
    best = int(np.argmax(values))
    assert res.direction == -1
    assert res.veiling_cd_m2 == pytest.approx(values[best], rel=1e-9)
    assert res.eye_m == pytest.approx(tuple(eyes[best]))
    assert res.ti_percent == pytest.approx(65.0 * values[best] / 0.75**0.8, rel=1e-9)
    assert res.to_json()["direction"] == -1
    # A luminaire beyond the field's end is behind every −x eye (x + 60 > 90 only for x > 30):
    # put it at x = 100, behind the eyes at 61.5…88.5 m: zero.
    behind = threshold_increment(make_lights([(100.0, -4.0, 8.0)]), lane, 0.75, direction=-1)
    assert behind.veiling_cd_m2 == 0.0 and behind.ti_percent == 0.0
    # ... while for +x traffic it is in front of every eye (−58.5…−31.5 m).
    assert threshold_increment(make_lights([(100.0, -4.0, 8.0)]), lane, 0.75, direction=1).ti_percent > 0.0


def test_mirrored_layout_seen_from_minus_x_gives_the_same_ti():
    # Analytic (mirror symmetry): the layout mirrored about the field's middle seen by the −x
    # observer gives the TI of the original seen by the +x observer, at the mirrored eye.
    table = parse_r_table(glossy_csv())
    lanes = two_lanes()
    original, mirror = asymmetric_layout(), asymmetric_layout(mirrored=True)
    forward = evaluate_luminance_field(original, lanes, r_table=table, direction=1)
    backward = evaluate_luminance_field(mirror, lanes, r_table=table, direction=-1)
    other_way = evaluate_luminance_field(original, lanes, r_table=table, direction=-1)
    for lane, f, b, o in zip(lanes, forward, backward, other_way, strict=True):
        ti_f = threshold_increment(original, lane, f.mean_cd_m2, direction=1)
        ti_b = threshold_increment(mirror, lane, b.mean_cd_m2, direction=-1)
        assert ti_f.ti_percent > 0.0
        assert ti_b.ti_percent == pytest.approx(ti_f.ti_percent, rel=1e-6)
        assert ti_b.veiling_cd_m2 == pytest.approx(ti_f.veiling_cd_m2, rel=1e-6)
        assert ti_b.eye_m == pytest.approx((FIELD_X0 + FIELD_X1 - ti_f.eye_m[0], *ti_f.eye_m[1:]))
        # not symmetric along x: the original's −x observer sees another TI
        ti_o = threshold_increment(original, lane, o.mean_cd_m2, direction=-1)
        assert abs(ti_o.ti_percent / ti_f.ti_percent - 1.0) > 0.01


def test_road_worst_case_over_lanes_and_directions():
    # Definition (EN 13201-2 judges a road by its worst observer, from memory): the lowest L̄,
    # U0 and Ul and the highest TI over every lane and direction, each with its observer.
    table = parse_r_table(glossy_csv())
    lanes = two_lanes()
    lights = asymmetric_layout()
    lum, tis = [], []
    for direction in (1, -1):
        results = evaluate_luminance_field(lights, lanes, r_table=table, direction=direction)
        lum += results
        tis += [threshold_increment(lights, lane, r.mean_cd_m2, direction=direction) for lane, r in zip(lanes, results)]
    worst = road_worst_case(lum, tis)
    for figure, observer in (("mean_cd_m2", "mean_observer"), ("u0", "u0_observer"), ("ul", "ul_observer")):
        values = {(r.observer_lane, r.direction): getattr(r, figure) for r in lum}
        assert getattr(worst, figure) == min(values.values())
        assert values[getattr(worst, observer)] == getattr(worst, figure)
    ti_values = {(t.lane, t.direction): t.ti_percent for t in tis}
    assert worst.ti_percent == max(ti_values.values())
    assert ti_values[worst.ti_observer] == worst.ti_percent
    # In this layout the directions differ, so the worst figures do not all come from +x.
    assert {worst.mean_observer[1], worst.u0_observer[1], worst.ul_observer[1], worst.ti_observer[1]} != {1}
    as_json = worst.to_json()
    assert as_json["ti_observer"] == {"lane": worst.ti_observer[0], "direction": worst.ti_observer[1]}
    no_ti = road_worst_case(lum)
    assert no_ti.ti_percent is None and no_ti.ti_observer is None
    with pytest.raises(ValueError):
        road_worst_case([])
