"""Disability glare (render.vision.glare).

Sources: CIE 146:2002 general disability glare equation and age-adjusted Stiles-Holladay
equation as written in /work/shared/reference-notes.md (from memory there; the general
equation's form is also given by Vos 2003, Clin Exp Optom 86(6)); the definition
L_veil = E_glare·f(θ) with E_glare = L·dΩ·cos θ; numerical quadrature by scipy.
"""

import math

import numpy as np
import pytest
from scipy.integrate import quad

from render.vision.glare import (
    apply_glare,
    gsf_cie146_general,
    gsf_stiles_holladay_age,
    scattered_fraction,
    veiling_luminance,
)
from render.vision.view import ViewGeometry


def cie146_general(theta, age, p):
    # Written out independently: 10/θ³ + (5/θ² + 0.1p/θ)(1 + (A/62.5)⁴) + 0.0025p.
    return 10.0 / theta**3 + (5.0 / theta**2 + 0.1 * p / theta) * (1.0 + (age / 62.5) ** 4) + 0.0025 * p


def stiles_holladay(theta, age):
    return 10.0 * (1.0 + (age / 70.0) ** 4) / theta**2


@pytest.mark.parametrize("age", [20.0, 25.0, 45.0, 70.0, 85.0])
@pytest.mark.parametrize("p", [0.0, 0.5, 1.0])
def test_general_equation_at_sampled_angles(age, p):
    for theta in (0.1, 0.3, 1.0, 2.5, 5.0, 10.0, 30.0, 60.0, 100.0):
        assert gsf_cie146_general(theta, age, p) == pytest.approx(cie146_general(theta, age, p), rel=1e-14)


@pytest.mark.parametrize("age", [25.0, 70.0])
def test_stiles_holladay_at_sampled_angles(age):
    for theta in (1.0, 2.0, 5.0, 10.0, 30.0):
        assert gsf_stiles_holladay_age(theta, age) == pytest.approx(stiles_holladay(theta, age), rel=1e-14)
    # Age 0 gives the classical Stiles-Holladay 10/θ².
    assert gsf_stiles_holladay_age(4.0, 0.0) == pytest.approx(10.0 / 16.0)


@pytest.mark.parametrize("model,lo,hi", [("cie146-general", 0.1, 90.0), ("stiles-holladay", 1.0, 30.0)])
def test_scattered_fraction_is_the_integral_of_the_spread(model, lo, hi):
    # F = ∫ f(θ) cos θ dΩ = 2π ∫ f(θ) cos θ sin θ dθ (θ in radians for the measure), by quad.
    age, p = 55.0, 0.7
    f = (lambda t: cie146_general(t, age, p)) if model == "cie146-general" else (lambda t: stiles_holladay(t, age))
    ref, _ = quad(
        lambda r: f(math.degrees(r)) * math.cos(r) * math.sin(r),
        math.radians(lo),
        math.radians(hi),
        limit=200,
        points=[math.radians(lo) * 3, math.radians(1.0)],
    )
    assert scattered_fraction(model, age, p) == pytest.approx(2 * math.pi * ref, rel=1e-6)


def _point_source_veil(geometry, row, col, age, p, model="cie146-general", luminance=1e6):
    h, w = geometry.height_px, geometry.width_px
    img = np.zeros((h, w, 1))
    img[row, col] = luminance
    veil = veiling_luminance(img, geometry, age_years=age, pigmentation=p, model=model)[..., 0]
    e_pix = luminance * geometry.solid_angle_sr()[row, col]  # L·dΩ at the eye
    d = geometry.directions()
    theta = np.degrees(np.arccos(np.clip(d @ d[row, col], -1.0, 1.0)))
    dist_px = np.hypot(*np.meshgrid(np.arange(w) - col, np.arange(h) - row))
    return veil, e_pix, theta, dist_px


def test_single_pixel_energy_on_axis():
    # One bright pixel on the optical axis: L_veil(θ) = E·cos θ·f(θ), E = L·dΩ (definition of
    # the glare spread function, CIE 146). Discretisation: cell averaging and bilinear
    # resampling near the source.
    g = ViewGeometry(60.0, 161, 121)
    veil, e, theta, dist = _point_source_veil(g, 60, 80, 25.0, 0.5)
    expected = e * np.cos(np.radians(theta)) * cie146_general(np.maximum(theta, 1e-9), 25.0, 0.5)
    ratio = veil / np.where(dist > 0, expected, np.inf)
    assert np.all(np.abs(ratio[(dist >= 3) & (dist < 6)] - 1) < 0.04)
    assert np.all(np.abs(ratio[dist >= 6] - 1) < 0.01)


def test_single_pixel_energy_off_axis():
    # Off axis the equidistant map compresses angles across the azimuth by sin θ/θ (module
    # text): within 15 % up to 35° off axis beyond 12 pixels of the source.
    g = ViewGeometry(60.0, 161, 121)
    veil, e, theta, dist = _point_source_veil(g, 15, 140, 40.0, 0.5)
    expected = e * np.cos(np.radians(theta)) * cie146_general(np.maximum(theta, 1e-9), 40.0, 0.5)
    ratio = veil[dist >= 12] / expected[dist >= 12]
    assert np.all(np.abs(ratio - 1) < 0.15)


@pytest.mark.parametrize("model", ["cie146-general", "stiles-holladay"])
def test_veil_ratio_between_ages_follows_the_equation(model):
    # Veil next to a point source for 70 vs 25 years equals the equation's ratio at that angle;
    # for Stiles-Holladay that is the ratio of the age terms (1+(70/70)⁴)/(1+(25/70)⁴).
    g = ViewGeometry(40.0, 121, 91)
    v25, _, theta, dist = _point_source_veil(g, 45, 60, 25.0, 0.5, model)
    v70, _, _, _ = _point_source_veil(g, 45, 60, 70.0, 0.5, model)
    if model == "cie146-general":
        sel = (dist >= 6) & (theta < 90)
        expected = cie146_general(theta[sel], 70.0, 0.5) / cie146_general(theta[sel], 25.0, 0.5)
    else:
        sel = (dist >= 6) & (theta > 1.2) & (theta < 29.0)
        expected = (1 + 1.0) / (1 + (25.0 / 70.0) ** 4)
    assert np.all(np.abs(v70[sel] / v25[sel] / expected - 1) < 0.01)
    assert np.all(v70[sel] > v25[sel])


def test_lantern_veils_footway_more_for_older_observer():
    # A bare bright lantern (1e5 cd/m², a few pixels) above a dim footway (0.5 cd/m²).
    g = ViewGeometry(50.0, 160, 100)
    xyz = np.full((100, 160, 3), 0.5)
    xyz[18:21, 78:82] = 1e5
    s = xyz[..., 1] * 1.5
    footway = (slice(60, 100), slice(40, 120))
    veils = {}
    for age in (25.0, 70.0):
        out, s_out, veil_y, frac = apply_glare(xyz, s, g, age_years=age, pigmentation=0.5)
        veils[age] = veil_y[footway].mean()
    assert veils[70.0] > 1.5 * veils[25.0]
    # The veil over the footway is a real fraction of its luminance for a 1e5 cd/m² lantern.
    assert veils[25.0] > 0.01 * 0.5


def test_energy_is_conserved_up_to_light_leaving_the_view():
    # Direct image attenuated by F, veil adds the scattered light back (module text): the total
    # L·dΩ after glare is between (1 − F) and 1 times the total before.
    g = ViewGeometry(70.0, 140, 100)
    rng = np.random.default_rng(1)
    lum = rng.uniform(0.1, 2.0, (100, 140, 1))
    lum[50, 70] = 1e5
    veil = veiling_luminance(lum, g, age_years=40.0, pigmentation=0.5)
    frac = scattered_fraction("cie146-general", 40.0, 0.5)
    om = g.solid_angle_sr()[..., None]
    before = (lum * om).sum()
    after = ((lum * (1 - frac) + veil) * om).sum()
    assert (1 - frac) * before < after <= before * (1 + 1e-9)
    # Most of the scattered light stays within a 70° view.
    assert after > (1 - 0.3 * frac) * before
