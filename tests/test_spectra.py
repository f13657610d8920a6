"""Tests of render.colour.spectra (the grid, moving spectra onto it) and render.colour.observers.

Each check names what it is checked against: analytic results, CIE tables (as bundled with
colour-science) or colour-science's own computations.
"""

from __future__ import annotations

import warnings

import numpy as np
import pytest

from render.colour.observers import (
    KM_LM_PER_W,
    KM_SCOTOPIC_LM_PER_W,
    cmfs_xyz,
    photopic,
    photopic_lef,
    scale_to_photopic,
    scale_to_scotopic,
    scotopic,
    scotopic_lef,
    sp_ratio,
    tristimulus,
)
from render.colour.spectra import (
    BIN_EDGES_NM,
    N_BINS,
    WAVELENGTHS_NM,
    band_power,
    bin_density,
    bin_mean,
    centroid_nm,
    density_on_grid,
    deposit_lines,
)

colour = pytest.importorskip("colour")


def _xy(XYZ):
    XYZ = np.asarray(XYZ, dtype=np.float64)
    return XYZ[:2] / XYZ.sum()


def _uv(XYZ):
    X, Y, Z = XYZ
    d = X + 15 * Y + 3 * Z
    return np.array([4 * X / d, 6 * Y / d])


def _cct_ohno(XYZ):
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        return colour.temperature.uv_to_CCT_Ohno2013(_uv(XYZ))


def _trapezoid_clipped(x, y, lo, hi):
    """Analytic integral of the piecewise-linear function through (x, y), zero outside
    [x0, xn], over [lo, hi] -- written independently of render.colour.spectra."""
    total = 0.0
    for x0, x1, y0, y1 in zip(x[:-1], x[1:], y[:-1], y[1:]):
        a, b = max(x0, lo), min(x1, hi)
        if b <= a:
            continue
        ya = y0 + (y1 - y0) * (a - x0) / (x1 - x0)
        yb = y0 + (y1 - y0) * (b - x0) / (x1 - x0)
        total += 0.5 * (ya + yb) * (b - a)
    return total


# --- the grid --------------------------------------------------------------------------------


def test_grid_is_380_to_780_at_1nm():
    # Definition in render/spectra.py's docstring (the one grid of the project).
    assert N_BINS == 401
    assert WAVELENGTHS_NM[0] == 380.0 and WAVELENGTHS_NM[-1] == 780.0
    assert np.allclose(np.diff(WAVELENGTHS_NM), 1.0)
    assert BIN_EDGES_NM[0] == 379.5 and BIN_EDGES_NM[-1] == 780.5


# --- bin_density: analytic integrals of piecewise-linear functions ----------------------------


@pytest.mark.parametrize("seed", [0, 1, 2])
def test_bin_density_conserves_total_power_inside_grid(seed):
    # Analytic: the integral of a piecewise-linear function is the trapezoid sum over its knots.
    rng = np.random.default_rng(seed)
    x = np.sort(rng.uniform(382.0, 778.0, 37))
    y = rng.uniform(0.0, 5.0, x.size)
    exact = float(np.sum(0.5 * (y[1:] + y[:-1]) * np.diff(x)))
    assert bin_density(x, y).sum() * 1.0 == pytest.approx(exact, rel=1e-12)


@pytest.mark.parametrize("seed", [3, 4])
def test_bin_density_conserves_power_of_samples_beyond_the_grid(seed):
    # Analytic: only the part of the function inside [379.5, 780.5] nm lands on the grid.
    rng = np.random.default_rng(seed)
    x = np.sort(rng.uniform(300.0, 900.0, 53))
    y = rng.uniform(0.0, 2.0, x.size)
    exact = _trapezoid_clipped(x, y, 379.5, 780.5)
    assert bin_density(x, y).sum() == pytest.approx(exact, rel=1e-12)


def test_bin_density_per_bin_band_power():
    # Analytic: the power in one bin [c-0.5, c+0.5] of an irregularly sampled function.
    rng = np.random.default_rng(7)
    x = np.sort(rng.uniform(370.0, 790.0, 80))
    y = rng.uniform(0.0, 1.0, x.size)
    got = bin_density(x, y)
    for i in (0, 17, 200, 399, 400):
        c = WAVELENGTHS_NM[i]
        assert got[i] == pytest.approx(_trapezoid_clipped(x, y, c - 0.5, c + 0.5), rel=1e-10, abs=1e-14)


def test_bin_density_of_linear_function_is_value_at_bin_centre():
    # Analytic: the mean of a linear function over a symmetric interval is its centre value.
    x = np.array([300.0, 900.0])
    y = 2.0 + 0.01 * (x - 300.0)
    got = bin_density(x, y)
    assert np.allclose(got, 2.0 + 0.01 * (WAVELENGTHS_NM - 300.0), rtol=1e-12)


def test_bin_density_rejects_unsorted_samples():
    with pytest.raises(ValueError):
        bin_density([400.0, 390.0, 500.0], [1.0, 1.0, 1.0])


def test_bin_mean_holds_constant_reflectance_and_needs_full_coverage():
    # Analytic: the mean of a constant is the constant.
    assert np.allclose(bin_mean([380.0, 500.0, 780.0], [0.3, 0.3, 0.3]), 0.3)
    with pytest.raises(ValueError):
        bin_mean([400.0, 780.0], [0.3, 0.3])


# --- deposit_lines: exact power and mean wavelength -------------------------------------------


def test_deposit_lines_conserves_power_and_mean_wavelength():
    # Analytic: linear sharing between the two nearest bin centres keeps sum(p) and sum(p*w).
    rng = np.random.default_rng(11)
    wl = rng.uniform(380.0, 780.0, 25)
    p = rng.uniform(0.1, 3.0, 25)
    d = deposit_lines(wl, p)
    assert d.sum() == pytest.approx(p.sum(), rel=1e-12)
    assert (d * WAVELENGTHS_NM).sum() == pytest.approx((p * wl).sum(), rel=1e-12)
    # one line at a time: its centroid is its own wavelength
    for w in (380.0, 588.995, 589.592, 780.0):
        assert centroid_nm(deposit_lines(w, 1.0)) == pytest.approx(w, abs=1e-9)


def test_deposit_lines_rejects_lines_off_the_grid():
    with pytest.raises(ValueError):
        deposit_lines([819.482], [1.0])


def test_band_power_of_a_line():
    # Analytic: a line at 500.3 nm puts 0.7 of its power in the 500 nm bin, 0.3 in 501.
    d = deposit_lines(500.3, 2.0)
    assert band_power(d, 500.0, 500.0) == pytest.approx(1.4)
    assert band_power(d) == pytest.approx(2.0)


# --- observers: photometric constants ---------------------------------------------------------


def test_one_watt_at_555nm_is_683_lumen():
    # SI definition of the candela / CIE: Km = 683 lm/W and V(555 nm) = 1 (CIE 1924 table).
    assert float(photopic(deposit_lines(555.0, 1.0))) == pytest.approx(683.0, rel=1e-9)
    assert KM_LM_PER_W == 683.0


def test_scotopic_and_photopic_agree_at_555nm():
    # CIE (docs/references.md): K'm·V'(555) equals Km·V(555), V'(555) = 683/1699 = 0.402, so
    # S/P of 555 nm light is 1700·0.402/683 = 1.0006.
    assert float(sp_ratio(deposit_lines(555.0, 1.0))) == pytest.approx(1700.0 * 0.402 / 683.0, rel=1e-6)
    assert float(sp_ratio(deposit_lines(555.0, 1.0))) == pytest.approx(1.0, abs=2e-3)


def test_peak_scotopic_efficacy_is_1700_lm_per_w_at_507nm():
    # CIE 1951: V'(507 nm) = 1, K'm = 1700 lm/W (CIE 15:2018 / CIE 18:2019).
    assert float(scotopic(deposit_lines(507.0, 1.0))) == pytest.approx(KM_SCOTOPIC_LM_PER_W, rel=1e-9)


def test_observer_tables_match_colour_science_at_the_bin_centres():
    # Reference library: colour-science's CIE tables at 1 nm.
    cmfs = colour.MSDS_CMFS["CIE 1931 2 Degree Standard Observer"]
    assert np.allclose(cmfs_xyz(), cmfs[WAVELENGTHS_NM], atol=1e-12)
    assert np.allclose(photopic_lef(), cmfs_xyz()[:, 1], atol=1e-12)  # CIE: ȳ = V(λ)
    # CIE 1951: peak 1 at 507 nm (the 1 nm table, rounded to 3 decimals, reads 1.000 at 506-508).
    assert scotopic_lef()[WAVELENGTHS_NM == 507.0][0] == pytest.approx(1.0)
    assert 506.0 <= WAVELENGTHS_NM[np.argmax(scotopic_lef())] <= 508.0


def test_equal_energy_sp_ratio_vs_independent_integration():
    # Reference library: integrate colour-science's V(λ) and V'(λ) tables directly with the
    # trapezoid rule over 380-780 nm (independent of render.colour.observers); equal-energy S/P is
    # 1700·∫V' / 683·∫V.
    from colour.colorimetry import SDS_LEFS_PHOTOPIC, SDS_LEFS_SCOTOPIC

    v = SDS_LEFS_PHOTOPIC["CIE 1924 Photopic Standard Observer"]
    vs = SDS_LEFS_SCOTOPIC["CIE 1951 Scotopic Standard Observer"]
    sel = (v.wavelengths >= 380) & (v.wavelengths <= 780)
    int_v = np.trapezoid(v.values[sel], v.wavelengths[sel])
    sel = (vs.wavelengths >= 380) & (vs.wavelengths <= 780)
    int_vs = np.trapezoid(vs.values[sel], vs.wavelengths[sel])
    expected = 1700.0 * int_vs / (683.0 * int_v)
    flat = np.ones(N_BINS)
    assert float(sp_ratio(flat)) == pytest.approx(expected, rel=1e-3)


def test_equal_energy_chromaticity_is_one_third():
    # CIE 15: illuminant E has x = y = 1/3 (the CMFs have equal integrals).
    assert _xy(tristimulus(np.ones(N_BINS))) == pytest.approx([1 / 3, 1 / 3], abs=3e-4)


def test_scaling_to_1000_lm_gives_1000_lm():
    # Analytic: photopic() is linear, so scaling by target/photopic hits the target.
    sd = colour.SDS_ILLUMINANTS["LED-B3"]
    d = density_on_grid(sd.wavelengths, sd.values)
    assert float(photopic(scale_to_photopic(d, 1000.0))) == pytest.approx(1000.0, rel=1e-12)
    assert float(scotopic(scale_to_scotopic(d, 250.0))) == pytest.approx(250.0, rel=1e-12)
    batch = scale_to_photopic(np.stack([d, 2 * d]), np.array([1000.0, 50.0]))
    assert np.allclose(photopic(batch), [1000.0, 50.0])
    with pytest.raises(ValueError):
        scale_to_photopic(np.zeros(N_BINS), 1000.0)


# --- colorimetry of tabulated illuminants -----------------------------------------------------


def _grid(key):
    sd = colour.SDS_ILLUMINANTS[key]
    return density_on_grid(sd.wavelengths, sd.values)


CIE15_XY = colour.CCS_ILLUMINANTS["CIE 1931 2 Degree Standard Observer"]  # CIE 15 table values


@pytest.mark.parametrize(
    "key, tol",
    [
        ("A", 1e-4),
        ("D65", 1e-4),
        ("LED-B3", 3e-4),
        # HP1's 5 nm table is peaky; 1 nm linear reading vs CIE's 5 nm sums differ by ~2e-4.
        ("HP1", 4e-4),
        ("FL2", 3e-4),
    ],
)
def test_chromaticity_of_tabulated_illuminants(key, tol):
    # CIE 15:2004/2018 chromaticity tables (colour.CCS_ILLUMINANTS) and colour-science's own
    # sd_to_XYZ on the original 5 nm table.
    xy = _xy(tristimulus(_grid(key)))
    assert xy == pytest.approx(CIE15_XY[key], abs=tol)
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        xy_colour = _xy(colour.sd_to_XYZ(colour.SDS_ILLUMINANTS[key]))
    assert xy == pytest.approx(xy_colour, abs=tol)


def test_illuminant_a_tristimulus_vs_colour_science():
    # Reference library: relative XYZ of CIE A, Y normalised to 100 (colour.sd_to_XYZ).
    XYZ = tristimulus(_grid("A"))
    XYZ = 100 * XYZ / XYZ[1]
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        ref = colour.sd_to_XYZ(colour.SDS_ILLUMINANTS["A"])
    ref = 100 * ref / ref[1]
    assert XYZ == pytest.approx(ref, abs=0.02)
    # CIE 15:2004 Table T.3 (from memory): A is X 109.85, Y 100, Z 35.58.
    assert XYZ == pytest.approx([109.85, 100.0, 35.58], abs=0.05)


# Tolerances: our 1 nm grid reads the 5 nm tables as piecewise-linear; CIE (and colour-science's
# ASTM E308 weights) sum them at 5 nm. The chromaticities then differ by up to ~3e-4, which is
# a few kelvin at 2000-4000 K and up to ~10 K at 6500 K.
@pytest.mark.parametrize(
    "key, cct_K, tol_K",
    [
        ("A", 2856.0, 2.0),  # CIE 15 / ISO 11664-2: Planckian radiator at 2856 K
        ("HP1", 1959.0, 5.0),  # CIE 15:2018 Table 11 (from memory): 1959 K
        ("LED-B3", 4103.0, 3.0),  # CIE 15:2018 Table 12 (from memory): 4103 K
        ("LED-B1", 2733.0, 4.0),  # CIE 15:2018 Table 12 (from memory): 2733 K
        ("LED-B5", 6598.0, 12.0),  # CIE 15:2018 Table 12 (from memory): 6598 K
    ],
)
def test_cct_of_tabulated_illuminants(key, cct_K, tol_K):
    cct, duv = _cct_ohno(tristimulus(_grid(key)))
    assert cct == pytest.approx(cct_K, abs=tol_K)
    assert abs(duv) < 0.005
    # colour-science on its own 5 nm table agrees with ours to a few kelvin.
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        cct_colour, _ = _cct_ohno(colour.sd_to_XYZ(colour.SDS_ILLUMINANTS[key]))
    assert cct == pytest.approx(cct_colour, abs=tol_K)
    assert cct_colour == pytest.approx(cct_K, abs=tol_K)


def test_half_bin_extension_at_grid_ends():
    # Analytic: a constant density tabulated exactly over 380-780 nm fills all 401 bins evenly.
    d = density_on_grid([380.0, 780.0], [2.0, 2.0])
    assert np.allclose(d, 2.0)
    # ... while a table ending inside the grid is zero beyond its end (bin_density's rule).
    d = density_on_grid([380.0, 700.0], [1.0, 1.0])
    assert d[WAVELENGTHS_NM > 700.5].max() == 0.0
    assert d[WAVELENGTHS_NM == 700.0][0] == pytest.approx(0.5)
