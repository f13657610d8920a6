"""Tests of render.vision.discrimination (castleCSF for pairs of surfaces), each naming its source.

Reference values of castleCSF
-----------------------------
``GABOR_REFERENCE`` and ``DISC_REFERENCE`` were printed by the authors' own MATLAB release of
castleCSF, v0.2.4 (commit f4b0b722af83001d7af979281e06ca642d36e4e8), run under GNU Octave 7.3.0
(Debian package ``octave``). The release's ``CSF_base.m`` declares abstract methods, which
Octave 7 cannot parse outside an @-folder; that ``methods( Abstract )`` block (declarations only,
no computation) was deleted for the run and nothing else changed. The script, with the
release's ``matlab/`` and ``matlab/utils/`` on the path::

    m = CSF_castleCSF();
    % Gabor sensitivities of the three mechanisms (luminance column, frequency row):
    S = m.castleCSF_ach.sensitivity(struct('luminance', L, 's_frequency', f, 'area', a));
    %   ... and m.castleCSF_rg, m.castleCSF_yv; L = [0.02 0.1 1 10 100 1000]',
    %   f = [0.25 1 4], a = 1 and 10
    % disc sensitivities: bkg(i,1,:) = [0.698 0.302 0.0196]*L(i), delta(i,d,:) = dir(d,:)*L(i)*0.01
    S = m.sensitivity_edge(struct('t_frequency', 0, 'lms_bkg', bkg, 'lms_delta', delta, 'ge_sigma', r));
    %   L = [0.02 0.3 5 100], r = 0.1, 0.5, 2, the four directions of DISC_REFERENCE

printing each value with ``%.10g``. ``sensitivity_edge`` returns 1/(RMS cone contrast at
threshold), ``RMS = sqrt(mean((k·Δ/bkg)²))`` over L, M, S; the multiple of threshold of the
modulation itself is that sensitivity times the modulation's own RMS cone contrast.
"""

from __future__ import annotations

import itertools
import math

import numpy as np
import pytest

from render.colour.materials import d65_on_grid, material_library
from render.colour.observers import photopic, tristimulus
from render.colour.spectra import WAVELENGTHS_NM
from render.vision.discrimination import (
    CHANNELS,
    HUE_MIN_M,
    SurfaceSignals,
    cone_fundamentals,
    cone_signals,
    disc_sensitivities,
    discriminate,
    discriminate_all,
    discriminate_signals,
    gabor_sensitivity,
    hue_availability,
    mechanism_contrasts,
    surface_signals,
    verdict,
)
from render.vision.discrimination import castle_params as P
from render.vision.discrimination.csf import mechanism_matrix

# channel, luminance cd/m², frequency cpd, area deg², sensitivity (castleCSF v0.2.4 under Octave)
GABOR_REFERENCE = """
    ach 0.02 0.25 1 5.865638578
    ach 0.02 1 1 7.956525005
    ach 0.02 4 1 1.875941324
    ach 0.1 0.25 1 7.372748556
    ach 0.1 1 1 16.44142505
    ach 0.1 4 1 6.37149829
    ach 1 0.25 1 9.286664395
    ach 1 1 1 35.37144955
    ach 1 4 1 27.84030737
    ach 10 0.25 1 11.67461313
    ach 10 1 1 51.58313733
    ach 10 4 1 80.37241255
    ach 100 0.25 1 12.53058771
    ach 100 1 1 51.46725894
    ach 100 4 1 134.2779421
    ach 1000 0.25 1 12.59207924
    ach 1000 1 1 50.06851986
    ach 1000 4 1 151.1264784
    ach 0.02 0.25 10 17.98057039
    ach 0.02 1 10 23.25879538
    ach 0.02 4 10 3.693457039
    ach 0.1 0.25 10 22.60169405
    ach 0.1 1 10 48.0639779
    ach 0.1 4 10 12.54550043
    ach 1 0.25 10 28.46894412
    ach 1 1 10 103.4029977
    ach 1 4 10 54.81765651
    ach 10 0.25 10 35.78937441
    ach 10 1 10 150.7953759
    ach 10 4 10 158.2535439
    ach 100 0.25 10 38.41342665
    ach 100 1 10 150.4566232
    ach 100 4 10 264.3937084
    ach 1000 0.25 10 38.6019334
    ach 1000 1 10 146.3676244
    ach 1000 4 10 297.5685316
    rg 0.02 0.25 1 2.568283063
    rg 0.02 1 1 4.703657684
    rg 0.02 4 1 4.622570324
    rg 0.1 0.25 1 5.558784135
    rg 0.1 1 1 10.18058254
    rg 0.1 4 1 10.0050773
    rg 1 0.25 1 16.61480898
    rg 1 1 1 30.42903449
    rg 1 4 1 29.90446187
    rg 10 0.25 1 45.45331608
    rg 10 1 1 83.2450451
    rg 10 4 1 81.80996598
    rg 100 0.25 1 82.72545076
    rg 100 1 1 151.506743
    rg 100 4 1 148.8948859
    rg 1000 0.25 1 94.85475272
    rg 1000 1 1 173.7208382
    rg 1000 4 1 170.7260276
    rg 0.02 0.25 10 7.954370948
    rg 0.02 1 10 11.78369661
    rg 0.02 4 10 6.089391562
    rg 0.1 0.25 10 17.21641655
    rg 0.1 1 10 25.50459749
    rg 0.1 4 10 13.17986078
    rg 1 0.25 10 51.45864012
    rg 1 1 10 76.23142131
    rg 1 4 10 39.39366305
    rg 10 0.25 10 140.775969
    rg 10 1 10 208.5471396
    rg 10 4 10 107.7696783
    rg 100 0.25 10 256.2135505
    rg 100 1 10 379.5577005
    rg 100 4 10 196.1417996
    rg 1000 0.25 10 293.7798797
    rg 1000 1 10 435.2088927
    rg 1000 4 10 224.9003387
    yv 0.02 0.25 1 0.4901139595
    yv 0.02 1 1 0.7707670998
    yv 0.02 4 1 0.6539394624
    yv 0.1 0.25 1 0.9505970434
    yv 0.1 1 1 1.494935845
    yv 0.1 4 1 1.268343632
    yv 1 0.25 1 2.439993892
    yv 1 1 1 3.837203531
    yv 1 4 1 3.255586305
    yv 10 0.25 1 5.966840905
    yv 10 1 1 9.383623075
    yv 10 4 1 7.961317278
    yv 100 0.25 1 11.0618466
    yv 100 1 1 17.39617339
    yv 100 4 1 14.75937969
    yv 1000 0.25 1 13.1889083
    yv 1000 1 1 20.7412509
    yv 1000 4 1 17.59743309
    yv 0.02 0.25 10 1.513211181
    yv 0.02 1 10 1.855547159
    yv 0.02 4 10 0.8268905419
    yv 0.1 0.25 10 2.93493798
    yv 0.1 1 10 3.598913291
    yv 0.1 4 10 1.603789668
    yv 1 0.25 10 7.533403134
    yv 1 1 10 9.237695941
    yv 1 4 10 4.116609684
    yv 10 0.25 10 18.42243053
    yv 10 1 10 22.59016393
    yv 10 4 10 10.06689202
    yv 100 0.25 10 34.15309772
    yv 100 1 10 41.87960296
    yv 100 4 10 18.66287657
    yv 1000 0.25 10 40.72033273
    yv 1000 1 10 49.93255314
    yv 1000 4 10 22.25152605
"""

# luminance cd/m², radius deg, ΔL, ΔM, ΔS, sensitivity_edge (castleCSF v0.2.4 under Octave);
# background (0.698, 0.302, 0.0196)·luminance
DISC_REFERENCE = """
    0.02 0.1 0.0001396 6.04e-05 3.92e-06 6.23246139
    0.02 0.1 2e-06 -2e-06 0 5.412877275
    0.02 0.1 0 0 2e-07 0.9231799893
    0.02 0.1 4e-06 -1e-06 8e-08 5.969835329
    0.3 0.1 0.002094 0.000906 5.88e-05 18.03535586
    0.3 0.1 3e-05 -3e-05 0 19.8095806
    0.3 0.1 0 0 3e-06 2.811637135
    0.3 0.1 6e-05 -1.5e-05 1.2e-06 21.19576274
    5 0.1 0.0349 0.0151 0.00098 48.4611294
    5 0.1 0.0005 -0.0005 0 72.39152498
    5 0.1 0 0 5e-05 8.698456313
    5 0.1 0.001 -0.00025 2e-05 70.94543704
    100 0.1 0.698 0.302 0.0196 88.10628161
    100 0.1 0.01 -0.01 0 174.350997
    100 0.1 0 0 0.001 20.83612439
    100 0.1 0.02 -0.005 0.0004 159.668125
    0.02 0.5 0.0001396 6.04e-05 3.92e-06 10.63569921
    0.02 0.5 2e-06 -2e-06 0 9.237078408
    0.02 0.5 0 0 2e-07 1.575407221
    0.02 0.5 4e-06 -1e-06 8e-08 10.18752767
    0.3 0.5 0.002094 0.000906 5.88e-05 30.7773459
    0.3 0.5 3e-05 -3e-05 0 33.80506152
    0.3 0.5 0 0 3e-06 4.798060505
    0.3 0.5 6e-05 -1.5e-05 1.2e-06 36.17058218
    5 0.5 0.0349 0.0151 0.00098 82.69894721
    5 0.5 0.0005 -0.0005 0 123.536182
    5 0.5 0 0 5e-05 14.84392106
    5 0.5 0.001 -0.00025 2e-05 121.0684321
    100 0.5 0.698 0.302 0.0196 150.3534239
    100 0.5 0.01 -0.01 0 297.5300838
    100 0.5 0 0 0.001 35.55685912
    100 0.5 0.02 -0.005 0.0004 272.4737538
    0.02 2 0.0001396 6.04e-05 3.92e-06 16.85356033
    0.02 2 2e-06 -2e-06 0 14.63727539
    0.02 2 0 0 2e-07 2.496424553
    0.02 2 4e-06 -1e-06 8e-08 16.14337796
    0.3 2 0.002094 0.000906 5.88e-05 48.77045183
    0.3 2 3e-05 -3e-05 0 53.56823586
    0.3 2 0 0 3e-06 7.603111051
    0.3 2 6e-05 -1.5e-05 1.2e-06 57.31669137
    5 2 0.0349 0.0151 0.00098 131.0465507
    5 2 0.0005 -0.0005 0 195.7581214
    5 2 0 0 5e-05 23.52200022
    5 2 0.001 -0.00025 2e-05 191.8476711
    100 2 0.698 0.302 0.0196 238.2533062
    100 2 0.01 -0.01 0 471.4726432
    100 2 0 0 0.001 56.34417246
    100 2 0.02 -0.005 0.0004 431.7678375
"""

_NAMES = {"ach": "achromatic", "rg": "red-green", "yv": "yellow-violet"}


def _rows(table: str) -> list[list[str]]:
    return [line.split() for line in table.strip().splitlines()]


# ------------------------------------------------------------------ castleCSF's own values


@pytest.mark.parametrize("row", _rows(GABOR_REFERENCE), ids=lambda r: "-".join(r[:4]))
def test_gabor_sensitivity_reproduces_the_release(row):
    # Source: castleCSF v0.2.4 run under Octave (module text).
    channel, lum, freq, area, expected = _NAMES[row[0]], *map(float, row[1:])
    got = float(gabor_sensitivity(channel, freq, lum, area))
    assert got == pytest.approx(expected, rel=1e-8)


@pytest.mark.parametrize("row", _rows(DISC_REFERENCE), ids=lambda r: "-".join(r[:2]))
def test_disc_multiple_reproduces_the_release(row):
    # Source: castleCSF v0.2.4 sensitivity_edge under Octave (module text): our multiple of
    # threshold of the modulation equals the release's disc sensitivity times its RMS cone contrast.
    lum, radius, dl, dm, ds, s_edge = map(float, row)
    bkg = np.array([0.698, 0.302, 0.0196]) * lum
    delta = np.array([dl, dm, ds])
    contrast = mechanism_contrasts(bkg, delta)
    sens = disc_sensitivities(lum, radius)
    multiple = np.sqrt(np.sum((contrast[:, None] * sens) ** 2, axis=0)).max()
    rms = math.sqrt(np.mean((delta / bkg) ** 2))
    assert multiple == pytest.approx(s_edge * rms, rel=1e-8)


def test_mechanism_matrix_is_the_releases():
    # Source: castleCSF v0.2.4, CSF_castleCSF.get_lms2acc() printed under Octave:
    # 1 1 0; 1 -2.3112 0; -1 -1 50.9875.
    expected = np.array([[1, 1, 0], [1, -2.3112, 0], [-1, -1, 50.9875]])
    np.testing.assert_array_equal(mechanism_matrix(), expected)


def test_pair_matches_the_release_when_adapted_to_the_pair_mean():
    # Source: DISC_REFERENCE row "100 0.5 ... 0.02 -0.005 0.0004" (castleCSF v0.2.4 under Octave):
    # a pair whose mean is that background and whose difference is that modulation, with the
    # adaptation luminance at the background's, has the release's multiple of threshold.
    bkg = np.array([0.698, 0.302, 0.0196]) * 100.0
    delta = np.array([0.02, -0.005, 0.0004])
    a = SurfaceSignals(tuple(bkg + 0.5 * delta), 100.0)
    b = SurfaceSignals(tuple(bkg - 0.5 * delta), 100.0)
    got = discriminate_signals(a, b, 100.0, 1.0)
    rms = math.sqrt(np.mean((delta / bkg) ** 2))
    assert got.multiple == pytest.approx(272.4737538 * rms, rel=1e-8)
    assert got.in_range and got.verdict == verdict(272.4737538 * rms) == "cannot"


# ------------------------------------------------------------------------------ cone signals


def test_cone_luminance_is_cie_2008_physiological_lef():
    # Source: CIE 170-1:2006 V_F(λ) as tabulated independently by colour-science ("CIE 2008 2
    # Degree Physiologically Relevant LEF"): L + M per unit radiance is 683·V_F(λ).
    from colour.colorimetry import SDS_LEFS_PHOTOPIC

    sd = SDS_LEFS_PHOTOPIC["CIE 2008 2 Degree Physiologically Relevant LEF"]
    v_f = np.interp(WAVELENGTHS_NM, sd.wavelengths, sd.values, left=0.0, right=0.0)
    lms = cone_fundamentals()
    np.testing.assert_allclose((lms[:, 0] + lms[:, 1]) / 683.0, v_f, atol=1e-5)


def test_surface_signals_of_a_radiance():
    # Source: colour-science's tables of CIE 170-1 V_F(λ) ("CIE 2008 2 Degree Physiologically
    # Relevant LEF") and CIE 1951 V'(λ), integrated here with Km = 683 and K'm = 1700 lm/W
    # (CIE 18:2019): L + M is the luminance by V_F, the scotopic luminance by V'.
    from colour.colorimetry import SDS_LEFS_PHOTOPIC, SDS_LEFS_SCOTOPIC

    def table(sd):
        return np.interp(WAVELENGTHS_NM, sd.wavelengths, sd.values, left=0.0, right=0.0)

    radiance = _materials()["object-red"] * d65_on_grid() * 1e-3
    got = surface_signals(radiance)
    v_f = table(SDS_LEFS_PHOTOPIC["CIE 2008 2 Degree Physiologically Relevant LEF"])
    v_s = table(SDS_LEFS_SCOTOPIC["CIE 1951 Scotopic Standard Observer"])
    assert got.lms[0] + got.lms[1] == pytest.approx(683.0 * np.sum(radiance * v_f), rel=1e-5)
    assert got.scotopic_cd_m2 == pytest.approx(1700.0 * np.sum(radiance * v_s), rel=1e-9)


def test_d65_cone_ratios_match_castles_d65_grey():
    # Source: castleCSF v0.2.4: the mechanism matrix's 50.9875 (printed under Octave) and
    # matlab/utils/lms2dkl_d65.m, lms_gray = [0.739876529525622 0.320136241543338
    # 0.020793708751515], whose ratios (L+M)/S = 50.978 and L/M = 2.3111 the matrix rounds.
    # S is scaled so that CIE D65 gives the matrix's 50.9875 (cones module text); L/M follows
    # from CIE 170-1 and is checked against the grey independently.
    grey = np.array([0.739876529525622, 0.320136241543338, 0.020793708751515])
    lms = cone_signals(d65_on_grid())
    assert (lms[0] + lms[1]) / lms[2] == pytest.approx(50.9875, rel=1e-12)
    assert (lms[0] + lms[1]) / lms[2] == pytest.approx((grey[0] + grey[1]) / grey[2], rel=3e-4)
    assert lms[0] / lms[1] == pytest.approx(grey[0] / grey[1], rel=1e-3)
    # castleCSF's default background (CSF_base.m test_complete_params, [0.6991 0.3009 0.0198]):
    assert lms[0] / (lms[0] + lms[1]) == pytest.approx(0.6991, abs=0.002)


# ---------------------------------------------------------------------------- the behaviour

LUMINANCES = np.geomspace(0.02, 100.0, 60)


@pytest.mark.parametrize("radius_deg", [1 / 12, 0.5, 1.0, 5.0])
def test_thresholds_rise_as_luminance_falls(radius_deg):
    # Source: the check; castleCSF's data (Ashraf et al. 2024, Fig. of sensitivity against
    # luminance) and the de Vries-Rose / Weber behaviour: every mechanism's disc threshold grows
    # strictly as the luminance falls over 0.02-100 cd/m².
    thresholds = 1.0 / disc_sensitivities(LUMINANCES, radius_deg).max(axis=-1)  # (n, 3)
    assert np.all(np.diff(thresholds, axis=0) < 0), "thresholds must fall as luminance rises"


def _materials():
    lib = material_library()
    return {k: m.reflectance for k, m in lib.items()}


def _d65_radiance(reflectance, white_cd_m2=100.0):
    d65 = d65_on_grid()
    return reflectance * d65 * (white_cd_m2 / photopic(d65))


def test_a_pair_gets_harder_as_the_light_falls():
    # Source: the check (thresholds rise as luminance falls), for a whole pair: a red and
    # a green paint under D65 scaled together from 100 to 0.02 cd/m².
    mats = _materials()
    multiples = []
    for lum in LUMINANCES:
        a = _d65_radiance(mats["object-red"], lum)
        b = _d65_radiance(mats["object-green"], lum)
        multiples.append(discriminate(a, b, lum, 2.0).multiple)
    assert np.all(np.diff(multiples) > 0)


@pytest.mark.parametrize("adaptation_cd_m2", [0.05, 1.0, 30.0])
def test_monochromatic_589_nm_light_leaves_no_difference_at_equal_luminance(adaptation_cd_m2):
    # Source: the check; analytic: under one wavelength every surface has the same L:M:S
    # ratio (that of the fundamentals at 589 nm), so two surfaces of equal luminance are the same
    # stimulus. Real reflectances of the material library, every pair.
    mats = _materials()
    lamp = np.zeros(WAVELENGTHS_NM.size)
    lamp[np.flatnonzero(WAVELENGTHS_NM == 589.0)[0]] = 1.0
    signals = {}
    for k, rho in mats.items():
        radiance = rho * lamp
        lum = photopic(radiance)
        if lum <= 0:
            continue
        radiance = radiance * (adaptation_cd_m2 / lum)  # every surface at the same luminance
        lms = cone_signals(radiance)
        signals[k] = SurfaceSignals(tuple(lms), adaptation_cd_m2)
    assert len(signals) > 50
    for a, b in itertools.combinations(signals, 2):
        result = discriminate_signals(signals[a], signals[b], adaptation_cd_m2, 2.0)
        assert result.verdict == "cannot", (a, b, result.multiple)
        assert result.multiple < 1e-9
    # The same pairs under D65 at equal luminance are not all alike (the check can fail):
    red = _d65_radiance(mats["object-red"])
    green = _d65_radiance(mats["object-green"])
    green *= photopic(red) / photopic(green)
    assert discriminate(red, green, 100.0, 2.0).verdict == "easy"


def test_monochromatic_light_cone_contrasts_are_equal():
    # Source: analytic (one wavelength: L, M, S scale together), whatever the two luminances.
    mats = _materials()
    lamp = np.zeros(WAVELENGTHS_NM.size)
    lamp[np.flatnonzero(WAVELENGTHS_NM == 589.0)[0]] = 1.0
    a = cone_signals(mats["object-red"] * lamp)
    b = cone_signals(mats["object-blue"] * lamp)
    ratio = a / b
    np.testing.assert_allclose(ratio, ratio[0], rtol=1e-12)


def _lab(reflectance):
    import colour

    d65 = d65_on_grid()
    white = tristimulus(d65)
    xyz = tristimulus(reflectance * d65) / white[1]
    return colour.XYZ_to_Lab(xyz, colour.XYZ_to_xy(white / white[1]))


def test_daylight_verdicts_agree_with_ciede2000():
    # Source: colour-science's CIEDE2000 (CIE 142-2001) between the library's materials under
    # D65 (2° observer) against the verdicts at 100 cd/m² (white) for 2° objects. Pairs with
    # ΔE00 > 10 are "easy"; pairs with ΔE00 < 0.5 are "cannot". The library's pairs under 0.5
    # are materials with identical reflectance files (asserted to exist so the check is not
    # empty); near threshold castleCSF is finer than CIEDE2000 (pairs module text).
    import colour

    mats = _materials()
    labs = {k: _lab(r) for k, r in mats.items()}
    distinct, identical = 0, 0
    for a, b in itertools.combinations(mats, 2):
        de = float(colour.delta_E(labs[a], labs[b], method="CIE 2000"))
        if 0.5 <= de <= 10.0:
            continue
        result = discriminate(_d65_radiance(mats[a]), _d65_radiance(mats[b]), 100.0, 2.0)
        if de > 10.0:
            distinct += 1
            assert result.verdict == "easy", (a, b, de, result.multiple)
        else:
            identical += 1
            assert result.verdict == "cannot", (a, b, de, result.multiple)
    assert distinct > 1000 and identical >= 1


# ---------------------------------------------------------------------- range and verdicts


def test_below_the_chromatic_range_nothing_is_extrapolated():
    # Source: castleCSF's data (release data/data_aggregated_merged.csv): chromatic backgrounds
    # from 0.02 cd/m². Below it the result says so and gives no multiple.
    mats = _materials()
    red, green = _d65_radiance(mats["object-red"], 0.01), _d65_radiance(mats["object-green"], 0.01)
    result = discriminate(red, green, 0.01, 2.0)
    assert not result.in_range and math.isnan(result.multiple)
    assert all(math.isnan(t) for t in result.threshold)
    assert result.verdict == "unknown" and "below the model's range" in result.note
    # A pair with (almost) no difference: the bound at 0.02 cd/m² is below 1.
    grey = _d65_radiance(mats["object-grey"], 0.01)
    result = discriminate(grey, grey * 1.001, 0.01, 2.0)
    assert result.verdict == "likely cannot" and result.upper_bound < 1.0
    # The bound is the in-range multiple at 0.02 cd/m² when rods see no larger contrast.
    at_floor = discriminate(grey, grey * 1.001, P.CHROMATIC_LUMINANCE_RANGE_CD_M2[0], 2.0)
    assert result.upper_bound == pytest.approx(at_floor.multiple, rel=1e-12)


def test_rod_contrast_enters_the_bound_below_the_range():
    # Source: the pairs module text (our rule): a pair the cones barely separate but the rods
    # see differently is not called "likely cannot".
    a = SurfaceSignals((0.0070, 0.0030, 0.000196), 0.010)
    b = SurfaceSignals((0.0070, 0.0030, 0.000196), 0.030)
    result = discriminate_signals(a, b, 0.01, 2.0)
    assert result.scotopic_contrast == pytest.approx(1.0)
    assert result.verdict == "unknown" and result.upper_bound > 1.0


def test_size_is_clamped_to_the_disc_data():
    # Source: castleCSF's disc data radii 1/12°-5° (release data/data_aggregated_merged.csv:
    # hdr_csf_disc, hansen2009, kong2018).
    a = SurfaceSignals((70.0, 30.0, 1.96), 100.0)
    b = SurfaceSignals((71.0, 30.0, 1.96), 100.0)
    big = discriminate_signals(a, b, 100.0, 20.0)
    assert big.size_clamped and big.radius_deg == 5.0
    assert big.multiple == pytest.approx(discriminate_signals(a, b, 100.0, 10.0).multiple)
    assert not discriminate_signals(a, b, 100.0, 2.0).size_clamped


def test_verdict_cut_offs():
    # Source: common practice, no source (pairs module text): 3 and 1 times threshold.
    assert [verdict(x) for x in (0.0, 0.99, 1.0, 2.99, 3.0, 50.0)] == [
        "cannot",
        "cannot",
        "hard",
        "hard",
        "easy",
        "easy",
    ]
    assert verdict(float("nan")) == "unknown"


def test_discriminate_all_uses_the_smaller_size():
    # Source: the pairs module text (our rule).
    s = [SurfaceSignals((70.0, 30.0, 1.96), 100.0), SurfaceSignals((71.0, 30.0, 1.96), 100.0)]
    pairs = discriminate_all(s, 100.0, [4.0, 0.5])
    assert list(pairs) == [(0, 1)] and pairs[(0, 1)].size_deg == 0.5
    assert pairs[(0, 1)].as_dict()["channels"] == list(CHANNELS)


# ---------------------------------------------------------------------------------- hue


def _cie191_iteration(lp, ls, steps=200):
    # CIE 191:2010's fixed-point iteration from m0 = 0.5 with its published a, b and
    # V'(λ0) = 683/1699, written out independently of render.vision.mesopic.
    m, v0 = 0.5, 683.0 / 1699.0
    for _ in range(steps):
        lmes = (m * lp + (1 - m) * ls * v0) / (m + (1 - m) * v0)
        m = min(max(0.7670 + 0.3334 * math.log10(lmes), 0.0), 1.0)
    return m


def test_hue_floor_is_the_mes2_state_of_castles_dimmest_chromatic_background():
    # Source: castleCSF release data/backgrounds.csv, bkg_id 3 (hdr_csf, D65 at 0.02 cd/m²,
    # scotopic R = 0.0534186 cd/m²), and CIE 191:2010's iteration.
    assert HUE_MIN_M == pytest.approx(_cie191_iteration(0.02, 0.0534186096965401), abs=1e-3)
    assert HUE_MIN_M == pytest.approx(0.288, abs=1e-3)


def test_hue_availability_levels():
    # Source: the pairs module text (CIE 191 m = 0 is scotopic; castleCSF's chromatic data floor).
    assert hue_availability(10.0, 1.0).available
    assert hue_availability(0.003, 0.0).level == "none"
    assert hue_availability(0.01, 0.3).level == "unreliable"
    assert hue_availability(0.05, HUE_MIN_M - 0.01).level == "unreliable"
    assert hue_availability(0.05, HUE_MIN_M + 0.01).level == "available"
    assert "not reliable" in hue_availability(0.01, 0.3).reason
