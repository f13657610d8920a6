"""View geometry, adaptation field, pupil and degree of adaptation (render.vision.view,
render.vision.adaptation, render.vision.observer).

Sources: analytic solid angle of a rectangle seen from a point on its axis,
Ω = 4·asin(sin(α/2)·sin(β/2)) (α, β full angles); CIECAM02 degree of adaptation as implemented
by colour-science (``colour.appearance.ciecam02.degree_of_adaptation``); Stanley & Davies (1995)
pupil formula as quoted by Watson & Yellott (2012) (from memory, as in the module); CIE 191:2010
for the MES2 state.
"""

import math

import numpy as np
import pytest

from render.errors import InputError
from render.vision.adaptation import (
    adaptation_state,
    central_field_mask,
    degree_of_adaptation,
    field_means,
    pupil_diameter_mm,
    shared_adaptation_state,
)
from render.vision.mesopic import solve_mes2
from render.vision.observer import ObserverSettings
from render.vision.view import ViewGeometry


@pytest.mark.parametrize("hfov,w,h", [(60.0, 64, 48), (120.0, 30, 20), (10.0, 7, 5)])
def test_pixel_solid_angles_sum_to_the_rectangle(hfov, w, h):
    g = ViewGeometry(hfov, w, h)
    a, b = math.radians(g.hfov_deg), math.radians(g.vfov_deg)
    expected = 4 * math.asin(math.sin(a / 2) * math.sin(b / 2))
    assert g.solid_angle_sr().sum() == pytest.approx(expected, rel=1e-12)
    assert np.all(g.solid_angle_sr() > 0)


def test_angles_of_pixels():
    g = ViewGeometry(90.0, 100, 50)
    # Pinhole: the right edge of the image is 45° off axis; the central pixel pitch is 2·atan(1/(2f)).
    assert g.focal_px == pytest.approx(50.0)
    assert g.deg_per_px_centre == pytest.approx(math.degrees(2 * math.atan(0.5 / 50.0)))
    off = g.off_axis_deg()
    assert off[25, 99] == pytest.approx(math.degrees(math.atan(math.hypot(49.5, 0.5) / 50.0)), rel=1e-12)
    u, v = g.azimuthal_equidistant_deg()
    assert np.allclose(np.hypot(u, v), off)


def test_view_geometry_of_any_camera_like_object():
    class Cam:
        hfov_deg, width_px, height_px = 75.0, 320, 200

    g = ViewGeometry.of(Cam())
    assert (g.hfov_deg, g.width_px, g.height_px) == (75.0, 320, 200)
    # Vertical field of view of square pixels: 2·atan(tan(hfov/2)·H/W) (pinhole geometry).
    assert g.vfov_deg == pytest.approx(math.degrees(2 * math.atan(math.tan(math.radians(37.5)) * 200 / 320)))


def test_view_geometry_rejects_bad_input():
    with pytest.raises(InputError) as err:
        ViewGeometry(190.0, 0, 10)
    text = str(err.value)
    assert "hfov_deg" in text and "width_px" in text


def test_field_mean_excludes_luminaires_and_weights_by_solid_angle():
    g = ViewGeometry(60.0, 81, 61)
    xyz = np.ones((61, 81, 3))
    xyz[30, 40] = 1e6
    s = xyz[..., 1] * 2.0
    mask = xyz[..., 1] > 1000
    m_xyz, m_s = field_means(xyz, s, g, 20.0, exclude=mask)
    assert m_xyz[1] == pytest.approx(1.0) and m_s == pytest.approx(2.0)
    # Outside the 20° field nothing counts.
    xyz2 = xyz.copy()
    xyz2[~central_field_mask(g, 20.0)] = 50.0
    assert field_means(xyz2, s, g, 20.0, exclude=mask)[0][1] == pytest.approx(1.0)


def test_state_measured_and_override():
    g = ViewGeometry(40.0, 41, 31)
    xyz = np.ones((31, 41, 3)) * np.array([0.95, 1.0, 1.09]) * 0.5
    s = xyz[..., 1] * 1.8
    st = adaptation_state(xyz, s, g)
    lmes, m = solve_mes2(0.5, 0.9)
    assert st.photopic_cd_m2 == pytest.approx(0.5) and st.scotopic_cd_m2 == pytest.approx(0.9)
    assert st.mesopic_cd_m2 == pytest.approx(float(lmes)) and st.m == pytest.approx(float(m))
    assert st.white_sp_ratio == pytest.approx(1.8)
    over = adaptation_state(xyz, s, g, override_cd_m2=2.0)
    assert over.photopic_cd_m2 == 2.0 and over.scotopic_cd_m2 == pytest.approx(3.6)
    assert over.how == "override"
    both = shared_adaptation_state([(xyz, s, g, None), (xyz * 3, s * 3, g, None)])
    assert both.photopic_cd_m2 == pytest.approx(1.0) and both.how == "shared"


@pytest.mark.parametrize("la", [0.0, 0.1, 10.0, 100.0, 1000.0])
def test_degree_of_adaptation_matches_ciecam02(la):
    from colour.appearance.ciecam02 import degree_of_adaptation as ref

    assert degree_of_adaptation(la, 1.0) == pytest.approx(float(ref(1.0, la)), rel=1e-12)


def test_pupil_formula():
    # Stanley & Davies via Watson & Yellott (from memory): 7.75 mm in the dark, -> 2 mm bright.
    assert pupil_diameter_mm(0.0, 20.0) == pytest.approx(7.75)
    d = [pupil_diameter_mm(L, 20.0) for L in np.geomspace(1e-4, 1e5, 30)]
    assert np.all(np.diff(d) < 0) and 2.0 < d[-1] < 3.0
    x = (1.0 * math.pi * 100 / 846.0) ** 0.41
    assert pupil_diameter_mm(1.0, 20.0) == pytest.approx(7.75 - 5.75 * x / (x + 2))


def test_observer_settings_validation():
    with pytest.raises(InputError) as err:
        ObserverSettings(age_years=-3, pigmentation=2.0, display_peak_cd_m2=0, glare_model="cie146")
    text = str(err.value)
    for key in ("age_years", "pigmentation", "display_peak_cd_m2", "glare_model", "did you mean"):
        assert key in text
    with pytest.raises(InputError) as err:
        ObserverSettings.from_mapping({"age_year": 30}, source="street.toml")
    assert "street.toml: observer.age_year: unknown setting (did you mean 'age_years'?)" in str(err.value)
    with pytest.raises(InputError) as err:
        ObserverSettings.from_mapping({"age_years": "old"}, source="street.toml")
    assert "street.toml: observer.age_years" in str(err.value)
    assert ObserverSettings.from_mapping({"age_years": 70}).age_years == 70
