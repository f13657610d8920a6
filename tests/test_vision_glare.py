"""Disability glare (render.vision.glare).

Sources (docs/references.md says how each was checked):
* CIE 146:2002 validity domains, from the CIE's published summary of the report: the
  age-adjusted Stiles-Holladay equation for 1°-30°, the general equation for 0.1°-100°, whose
  pigmentation factor p "plays a role" at glare angles above 30°;
* the age-adjusted Stiles-Holladay equation L_veil/E_glare = 10·(1 + (A/70)⁴)/θ² (θ in degrees),
  as printed in the abstract of Vos 2003 (Clin Exp Optom 86(6)), which reduces to the classic
  Stiles-Holladay constant 10 at A = 0;
* the CIE 146 general equation's structure (secondary sources): a small-angle term 10/θ³ that
  depends on neither age nor pigmentation, an age factor growing with the fourth power of age,
  pigmentation entering linearly;
* the definition L_veil = E_glare·f(θ) with E_glare = L·dΩ·cos θ, integrated by scipy.

The spread functions are not retyped here: the checks are properties a transcription error would
break (limits, ratios, domains) and integrals computed another way (closed form, adaptive
quadrature). The image checks use the module's own spread function, as they test the
convolution, not the equation.
"""

import math

import numpy as np
import pytest
from scipy.integrate import quad
from scipy.special import sici

from render.vision.glare import (
    CIE146_GENERAL_RANGE_DEG,
    STILES_HOLLADAY_RANGE_DEG,
    apply_glare,
    gsf_cie146_general,
    gsf_stiles_holladay_age,
    scattered_fraction,
    veiling_luminance,
)
from render.vision.observer import ObserverSettings
from render.vision.view import ViewGeometry

ANGLES_DEG = np.array([0.1, 0.3, 1.0, 2.5, 5.0, 10.0, 30.0, 60.0, 100.0])
AGES = [0.0, 20.0, 25.0, 45.0, 70.0, 85.0]
#: CIE 146 pigmentation factors: very dark, brown, light, very light blue (secondary sources).
PIGMENTATIONS = [0.0, 0.5, 1.0, 1.2]


def test_validity_domains_are_cie146():
    # CIE 146:2002 (the CIE's summary of the report): 1° < θ < 30° and 0.1° < θ < 100°.
    assert STILES_HOLLADAY_RANGE_DEG == (1.0, 30.0)
    assert CIE146_GENERAL_RANGE_DEG == (0.1, 100.0)


def test_stiles_holladay_classic_constant_and_age_doubling():
    # A = 0: the classic Stiles-Holladay law θ²·L_veil/E_glare = 10 (θ in degrees) over its
    # domain; the age factor 1 + (A/70)⁴ doubles it at 70 years (Vos 2003).
    theta = np.linspace(1.0, 30.0, 59)
    assert np.allclose(theta**2 * gsf_stiles_holladay_age(theta, 0.0), 10.0, rtol=1e-15, atol=0)
    assert np.allclose(gsf_stiles_holladay_age(theta, 70.0) / gsf_stiles_holladay_age(theta, 0.0), 2.0, rtol=1e-15)


@pytest.mark.parametrize("model", ["stiles-holladay", "cie146-general"])
@pytest.mark.parametrize("p", PIGMENTATIONS)
def test_age_excess_grows_with_the_fourth_power_of_age(model, p):
    # Both CIE 146 equations multiply their age-dependent part by 1 + (A/A0)⁴: the excess over
    # the age-0 value scales as A⁴ at every angle (80 years gives 2⁴ = 16 times 40 years').
    def f(theta, age):
        if model == "stiles-holladay":
            return gsf_stiles_holladay_age(theta, age)
        return gsf_cie146_general(theta, age, p)

    theta = ANGLES_DEG if model == "cie146-general" else np.array([1.0, 2.5, 5.0, 10.0, 30.0])
    excess40 = f(theta, 40.0) - f(theta, 0.0)
    excess80 = f(theta, 80.0) - f(theta, 0.0)
    assert np.all(excess40 > 0)
    assert np.allclose(excess80 / excess40, 16.0, rtol=1e-12)


@pytest.mark.parametrize("age", AGES)
@pytest.mark.parametrize("p", PIGMENTATIONS)
def test_general_small_angle_term_is_ten_over_theta_cubed(age, p):
    # The general equation's small-angle term is 10/θ³ for every age and eye: θ³·f → 10 as
    # θ → 0, the other terms vanishing like θ (CIE 146 small-angle equation, same leading term).
    for theta, rel in ((1e-3, 5e-2), (1e-5, 5e-4), (1e-7, 5e-6)):
        assert theta**3 * gsf_cie146_general(theta, age, p) == pytest.approx(10.0, rel=rel)


def test_general_beyond_small_angles_is_a_stiles_holladay_law_doubling_at_62_5_years():
    # For very dark eyes (p = 0) the general equation is its small-angle term 10/θ³ plus a
    # Stiles-Holladay θ⁻² law whose age factor 1 + (A/62.5)⁴ doubles it at 62.5 years
    # (CIE 146, secondary sources): θ²·(f − 10/θ³) is the same at every angle.
    theta = ANGLES_DEG
    rest = {age: theta**2 * (gsf_cie146_general(theta, age, 0.0) - 10.0 / theta**3) for age in (0.0, 62.5, 85.0)}
    for age, values in rest.items():
        assert np.allclose(values, values[0], rtol=1e-12), age
    assert np.allclose(rest[62.5] / rest[0.0], 2.0, rtol=1e-12)


@pytest.mark.parametrize("age", [25.0, 70.0])
def test_pigmentation_matters_above_thirty_degrees(age):
    # CIE 146: p "plays a role at glare angles greater than 30°"; lighter eyes scatter more.
    # Linear in p, increasing with p at every angle; from very dark (0) to very light blue
    # (1.2) eyes the spread changes by under 3 % within 1° and grows 1.8-fold or more from 30° on.
    f = {p: gsf_cie146_general(ANGLES_DEG, age, p) for p in PIGMENTATIONS}
    assert np.allclose(f[1.2] - f[0.0], 1.2 * (f[1.0] - f[0.0]), rtol=1e-12)
    assert np.all(f[0.5] > f[0.0]) and np.all(f[1.0] > f[0.5]) and np.all(f[1.2] > f[1.0])
    ratio = f[1.2] / f[0.0]
    assert np.all(ratio[ANGLES_DEG <= 1.0] < 1.03)
    assert np.all(ratio[ANGLES_DEG >= 30.0] > 1.8)


@pytest.mark.parametrize("age", [0.0, 25.0, 70.0])
def test_general_equation_extends_stiles_holladay(age):
    # CIE 146 built the general equation to extend the (age-adjusted) Stiles-Holladay law: in
    # the latter's domain the two agree within the spread of the data they summarise (Vos 2003:
    # "great individual spread"); here within a factor of 1.6 for a brown-eyed observer.
    theta = np.linspace(1.0, 30.0, 59)
    ratio = gsf_cie146_general(theta, age, 0.5) / gsf_stiles_holladay_age(theta, age)
    assert np.all((ratio > 1.0 / 1.6) & (ratio < 1.6))


@pytest.mark.parametrize("age,p", [(0.0, 0.0), (25.0, 0.5), (55.0, 0.7), (85.0, 1.2)])
def test_scattered_fraction_stiles_holladay_closed_form(age, p):
    # F = 2π∫ f(θ)·cos θ·sin θ dθ over 1°-30° (θ in radians for the measure). With
    # f = k/θ² (k = 10·(1 + (A/70)⁴)·(π/180)² in radian units) the integral is elementary up
    # to the cosine integral: ∫ sin 2θ/(2θ²) dθ = Ci(2θ) − sin 2θ/(2θ).
    k = 10.0 * (1.0 + (age / 70.0) ** 4) * (math.pi / 180.0) ** 2

    def primitive(t):
        return sici(2.0 * t)[1] - math.sin(2.0 * t) / (2.0 * t)

    closed = 2.0 * math.pi * k * (primitive(math.radians(30.0)) - primitive(math.radians(1.0)))
    # The module integrates by Simpson's rule on 4001 log-spaced angles: error below 1e-12.
    assert scattered_fraction("stiles-holladay", age, p) == pytest.approx(closed, rel=1e-10)


@pytest.mark.parametrize("age,p", [(0.0, 0.0), (25.0, 0.5), (55.0, 0.7), (85.0, 1.2)])
def test_scattered_fraction_general_by_adaptive_quadrature(age, p):
    # F over 0.1°-90° (the published lower limit; 90° because a source behind the plane of the
    # eye does not illuminate it), by scipy's adaptive quadrature of the module's own function.
    ref, _ = quad(
        lambda r: float(gsf_cie146_general(math.degrees(r), age, p)) * math.cos(r) * math.sin(r),
        math.radians(0.1),
        math.radians(90.0),
        limit=400,
        epsabs=0.0,
        epsrel=1e-13,
        points=[math.radians(0.3), math.radians(1.0), math.radians(10.0)],
    )
    assert scattered_fraction("cie146-general", age, p) == pytest.approx(2 * math.pi * ref, rel=1e-10)


def test_pigmentation_range_is_cie146():
    # CIE 146's scale runs from 0 (very dark eyes) to 1.2 (very light blue eyes).
    for p in PIGMENTATIONS:
        assert ObserverSettings(pigmentation=p).pigmentation == p
    from render.errors import InputError

    for p in (-0.01, 1.21):
        with pytest.raises(InputError, match="pigmentation"):
            ObserverSettings(pigmentation=p)


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
    expected = e * np.cos(np.radians(theta)) * gsf_cie146_general(np.maximum(theta, 1e-9), 25.0, 0.5)
    ratio = veil / np.where(dist > 0, expected, np.inf)
    assert np.all(np.abs(ratio[(dist >= 3) & (dist < 6)] - 1) < 0.04)
    assert np.all(np.abs(ratio[dist >= 6] - 1) < 0.01)


def test_single_pixel_energy_off_axis():
    # Off axis the equidistant map compresses angles across the azimuth by sin θ/θ (module
    # text): within 15 % up to 35° off axis beyond 12 pixels of the source.
    g = ViewGeometry(60.0, 161, 121)
    veil, e, theta, dist = _point_source_veil(g, 15, 140, 40.0, 0.5)
    expected = e * np.cos(np.radians(theta)) * gsf_cie146_general(np.maximum(theta, 1e-9), 40.0, 0.5)
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
        expected = gsf_cie146_general(theta[sel], 70.0, 0.5) / gsf_cie146_general(theta[sel], 25.0, 0.5)
    else:
        sel = (dist >= 6) & (theta > 1.2) & (theta < 29.0)
        expected = (1 + 1.0) / (1 + (25.0 / 70.0) ** 4)
    assert np.all(np.abs(v70[sel] / v25[sel] / expected - 1) < 0.01)
    assert np.all(v70[sel] > v25[sel])


def test_stiles_holladay_veil_stays_within_its_domain():
    # The age-adjusted Stiles-Holladay equation holds for 1°-30° only (CIE 146): a point
    # source veils nothing beyond 30° (plus two pixels of cell averaging and bilinear
    # resampling; FFT round-off aside) and does veil inside. The source is on the optical axis,
    # where the equidistant map's angles are exact; the view's corners lie 36° off axis.
    g = ViewGeometry(60.0, 161, 121)
    veil, e, theta, dist = _point_source_veil(g, 60, 80, 40.0, 0.5, "stiles-holladay")
    pixel_deg = 60.0 / 161
    outside = theta > 30.0 + 2 * pixel_deg
    inside = (theta > 1.0 + 2 * pixel_deg) & (theta < 30.0 - 2 * pixel_deg)
    assert outside.sum() > 100
    assert np.all(veil[outside] < 1e-12 * veil.max())
    assert np.all(veil[inside] > 1e-3 * veil.max())


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


def _bilinear_weights(gx, gy):
    x0, y0 = np.floor(gx).astype(int), np.floor(gy).astype(int)
    fx, fy = gx - x0, gy - y0
    return [
        (y0, x0, (1 - fx) * (1 - fy)),
        (y0, x0 + 1, fx * (1 - fy)),
        (y0 + 1, x0, (1 - fx) * fy),
        (y0 + 1, x0 + 1, fx * fy),
    ]


@pytest.mark.parametrize("model", ["cie146-general", "stiles-holladay"])
def test_fft_convolution_equals_the_direct_sum_on_the_grid(model):
    # The veil is a linear convolution on the equidistant grid (module text); transforms of
    # g + h points must give it without wrap-around. Reference: the same bilinear splat and
    # read-back written out here, and the convolution summed directly in space
    # (scipy.signal.convolve, method "direct") with the module's kernel. A bright corner pixel
    # is the case where wrap-around would show first.
    from scipy.signal import convolve

    from render.vision.glare import glare_kernel, glare_optics, spread_function

    g = ViewGeometry(70.0, 41, 29)
    rng = np.random.default_rng(5)
    img = rng.uniform(0.0, 1.0, (29, 41, 2))
    img[0, 0] = 1e4
    img[28, 40, 1] = 1e3
    optics = glare_optics(g, age_years=55.0, pigmentation=0.7, model=model)
    veil = veiling_luminance(img, g, age_years=55.0, pigmentation=0.7, model=model, optics=optics)
    gh, gw = optics.grid_shape
    gx, gy = np.asarray(optics.grid_x), np.asarray(optics.grid_y)
    e = img.reshape(-1, 2) * g.solid_angle_sr().reshape(-1, 1)
    grid = np.zeros((2, gh, gw))
    for yy, xx, w in _bilinear_weights(gx, gy):
        for c in range(2):
            np.add.at(grid[c], (yy, xx), e[:, c] * w)
    _, (lo, hi) = spread_function(model, 55.0, 0.7)
    reach = int(np.ceil(min(hi, 90.0) / g.deg_per_px_centre)) + 1
    hy, hx = min(gh - 1, reach), min(gw - 1, reach)
    kernel = glare_kernel(g.deg_per_px_centre, (hy, hx), model, 55.0, 0.7)
    ref = np.zeros_like(veil)
    for c in range(2):
        full = convolve(grid[c], kernel, mode="full", method="direct")[hy : hy + gh, hx : hx + gw]
        ref[..., c] = sum(w * full[yy, xx] for yy, xx, w in _bilinear_weights(gx, gy)).reshape(29, 41)
    assert np.allclose(veil, ref, rtol=1e-12, atol=1e-15 * ref.max())


def test_glare_optics_are_shared_only_with_their_view_and_eye():
    # One view's optics serve every setup seen from it and give the same bits as optics made
    # for the call (the shared spectrum is the one the call would make); another view or eye
    # is refused (common practice, no source).
    from render.vision.glare import glare_optics

    g = ViewGeometry(50.0, 60, 40)
    rng = np.random.default_rng(2)
    optics = glare_optics(g, age_years=40.0, pigmentation=0.5)
    for _ in range(2):
        img = rng.uniform(0.0, 5.0, (40, 60, 3))
        own = veiling_luminance(img, g, age_years=40.0, pigmentation=0.5)
        shared = veiling_luminance(img, g, age_years=40.0, pigmentation=0.5, optics=optics)
        assert np.array_equal(own, shared)
    img = np.ones((40, 60, 1))
    with pytest.raises(ValueError, match="another view or eye"):
        veiling_luminance(img, g, age_years=70.0, pigmentation=0.5, optics=optics)
    with pytest.raises(ValueError, match="another view or eye"):
        veiling_luminance(img, g, age_years=40.0, pigmentation=0.5, model="stiles-holladay", optics=optics)
    other = ViewGeometry(51.0, 60, 40)
    with pytest.raises(ValueError, match="another view or eye"):
        veiling_luminance(img, other, age_years=40.0, pigmentation=0.5, optics=optics)
