"""Threshold increment (render.calc.ti): veiling luminance, screening, TI forms.

Sources: Lv = 9.86·(1 + (A/66.4)⁴)·Σ E/θ², TI = 65·Lv/L̄^0.8 (L̄ ≤ 5 cd/m²) and
95·Lv/L̄^1.05 above, the 20° screening angle and the 1° line of sight of CIE 140-2000 /
EN 13201-3:2015 (from memory, see docs/references.md), written out here as literals; the
Stiles–Holladay constant 10 (CIE 146:2002 / Vos 2003, summary); E = I·cos θ/d² for a point
source (analytic).
"""

from __future__ import annotations

import math

import numpy as np
import pytest
from test_calc_road import ISOTROPIC_CD, lane_field, make_lights

from render.calc.ti import age_factor, threshold_increment, ti_percent, veiling_luminance_cd_m2

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
