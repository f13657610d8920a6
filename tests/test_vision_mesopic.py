"""CIE 191:2010 MES2 mesopic photometry (render.vision.mesopic).

Source of every check: CIE 191:2010, system MES2 (docs/references.md says which parts were read
in secondary sources). The checks do not retype the module's closed form and compare:

* the closed form against the spectral definition it comes from, V_mes(λ) ∝ m·V(λ) + (1 − m)·V'(λ)
  with K_mes = 683/V_mes(555 nm), integrated over a lamp spectrum with colour-science's CIE 1924
  V(λ) and CIE 1951 V'(λ) tables;
* the solver against an independent one written here: every self-consistent m in [0, 1] found
  by plain bisection between sign changes of a + b·log10 L_mes(m) − m, with the clipped ends
  decided by their own conditions;
* the solver against CIE 191's own fixed-point iteration from m0 = 0.5;
* limits that follow from the definition: S/P = 1, and the photopic and scotopic ends.

The MES2 constants are a = 0.7670 and b = 0.3334, and V'(λ0) = 683/1699 (CIE 191:2010).
"""

import math

import numpy as np
import pytest

from render.vision.mesopic import (
    MES2_A,
    MES2_B,
    V_PRIME_LAMBDA0,
    adaptation_coefficient,
    mesopic_image,
    solve_mes2,
)

#: CIE 191:2010 MES2 constants, written from the standard (not imported from the module).
A_CIE = 0.7670
B_CIE = 0.3334
V0_CIE = 683.0 / 1699.0


def l_mes(m, lp, ls, v0=V0_CIE):
    """CIE 191 mesopic luminance for adaptation coefficient m (the standard's equation)."""
    return (m * lp + (1.0 - m) * ls * v0) / (m + (1.0 - m) * v0)


def mes2_roots(lp, ls, v0=V0_CIE, scan=1000, halvings=100):
    """Every self-consistent adaptation state m = clip(a + b·log10 L_mes(m), 0, 1) in [0, 1].

    m = 0 is one when a + b·log10 L_s <= 0 (L_mes(0) = L_s), m = 1 when a + b·log10 L_p >= 1
    (L_mes(1) = L_p). Interior roots solve h(m) = a + b·log10 L_mes(m) − m = 0 without clipping:
    a scan of ``scan`` intervals, then plain bisection (``halvings`` steps) in each interval
    whose ends have opposite signs.
    """
    roots = []
    if ls <= 0.0 or A_CIE + B_CIE * math.log10(ls) <= 0.0:
        roots.append(0.0)

    def h(m):
        lm = l_mes(m, lp, ls, v0)
        return -math.inf if lm <= 0.0 else A_CIE + B_CIE * math.log10(lm) - m

    grid = [k / scan for k in range(scan + 1)]
    values = [h(m) for m in grid]
    for k in range(scan):
        lo, hi, f_lo, f_hi = grid[k], grid[k + 1], values[k], values[k + 1]
        if f_lo == 0.0 and 0.0 < lo < 1.0:
            roots.append(lo)
        if not (f_lo * f_hi < 0.0):
            continue
        for _ in range(halvings):
            mid = 0.5 * (lo + hi)
            if (h(mid) < 0.0) == (f_lo < 0.0):
                lo = mid
            else:
                hi = mid
        root = 0.5 * (lo + hi)
        if 0.0 < root < 1.0:
            roots.append(root)
    if lp > 0.0 and A_CIE + B_CIE * math.log10(lp) >= 1.0:
        roots.append(1.0)
    return sorted(roots)


def cie_iteration(lp, ls, v0=V0_CIE, iterations=5000):
    """CIE 191's procedure: m0 = 0.5, m_{n+1} = clip(a + b·log10 L_mes(m_n), 0, 1).
    Returns (m, converged)."""
    m = 0.5
    for _ in range(iterations):
        lm = l_mes(m, lp, ls, v0)
        m_new = 0.0 if lm <= 0.0 else min(max(A_CIE + B_CIE * math.log10(lm), 0.0), 1.0)
        if abs(m_new - m) < 1e-14:
            return m_new, True
        m = m_new
    return m, False


def test_constants_are_cie191():
    # CIE 191:2010 MES2 constants.
    assert MES2_A == A_CIE and MES2_B == B_CIE
    # The module's V'(λ0) is Km/K'm with lampcast's K'm = 1700 lm/W (its documented choice);
    # CIE 191 writes 683/1699: 0.06 % apart.
    assert V_PRIME_LAMBDA0 == pytest.approx(683.0 / 1700.0, rel=1e-15)
    assert abs(V_PRIME_LAMBDA0 / V0_CIE - 1.0) < 6e-4
    # CIE 191: m = 1 at 5 cd/m² and m = 0 at 0.005 cd/m² (to the 3-4 digits of a and b).
    assert adaptation_coefficient(5.0) == pytest.approx(1.0, abs=2e-4)
    assert adaptation_coefficient(0.005) == pytest.approx(0.0, abs=2e-4)


@pytest.mark.parametrize("lamp", ["HP1", "LED-B3", "FL11"])
@pytest.mark.parametrize("m", [0.0, 0.3, 0.7, 1.0])
def test_closed_form_is_the_spectral_definition(lamp, m):
    # CIE 191: V_mes(λ) = [m·V(λ) + (1 − m)·V'(λ)] / M(m), M(m) normalising its peak to 1, and
    # L_mes = (683 / V_mes(555 nm))·∫ L(λ)·V_mes(λ) dλ. V(λ), V'(λ) and the lamp spectra are
    # colour-science's CIE tables (1 nm, 380-780 nm); L_s uses K'm = 683/V'(555) so that
    # the closed form's V'(λ0) is V'(555) exactly.
    import colour
    from colour.colorimetry import SDS_LEFS_PHOTOPIC, SDS_LEFS_SCOTOPIC

    wl = np.arange(380.0, 781.0)
    v = np.asarray(SDS_LEFS_PHOTOPIC["CIE 1924 Photopic Standard Observer"][wl])
    vs = np.asarray(SDS_LEFS_SCOTOPIC["CIE 1951 Scotopic Standard Observer"][wl])
    sd = colour.SDS_ILLUMINANTS[lamp]
    radiance = np.interp(wl, sd.wavelengths, sd.values) * 1e-4  # W/(m²·sr·nm), any scale
    v555, vs555 = v[wl == 555.0][0], vs[wl == 555.0][0]
    lp = 683.0 * float(radiance @ v)
    ls = 683.0 / vs555 * float(radiance @ vs)
    mix = m * v + (1.0 - m) * vs
    v_mes = mix / mix.max()
    k_mes = 683.0 / (v_mes[wl == 555.0][0])
    expected = k_mes * float(radiance @ v_mes)
    assert v555 == pytest.approx(1.0, abs=1e-15)  # V peaks at 555 nm
    assert float(mesopic_image(lp, ls, m, v0=vs555)) == pytest.approx(expected, rel=1e-12)


@pytest.mark.parametrize("lp", [1e-4, 3e-3, 0.01, 0.1, 0.5, 1.0, 4.0, 20.0])
def test_sp_one_gives_photopic(lp):
    # CIE 191: V_mes is a normalised mix of V and V', so S/P = 1 gives L_mes = L_p at any level.
    lmes, m = solve_mes2(lp, lp)
    assert lmes == pytest.approx(lp, rel=1e-12)


@pytest.mark.parametrize("sp", [0.25, 0.65, 1.7, 2.5])
def test_photopic_and_scotopic_limits(sp):
    # CIE 191: m = 1 (L_mes = L_p) when L_mes >= 5 cd/m²; m = 0 (L_mes = L_s) when <= 0.005.
    lmes, m = solve_mes2(10.0, 10.0 * sp)
    assert m == 1.0 and lmes == pytest.approx(10.0, rel=1e-12)
    lmes, m = solve_mes2(0.001, 0.001 * sp)
    assert m == 0.0 and lmes == pytest.approx(0.001 * sp, rel=1e-12)


def test_solver_returns_the_largest_self_consistent_state():
    # Over L_p 1e-4 to 100 cd/m² and S/P 0.05 to 5 (low-pressure sodium is about 0.25, warm
    # LEDs 1.2-1.5, cool LEDs up to about 2.5), the module's m is the largest root found by the
    # independent bisection, and L_mes follows from it.
    lps = np.geomspace(1e-4, 100.0, 41)
    sps = [0.05, 0.1, 0.15, 0.2, 0.25, 0.3, 0.4, 0.65, 1.0, 1.7, 2.5, 5.0]
    several = 0
    for lp in lps:
        for sp in sps:
            ls = lp * sp
            roots = mes2_roots(lp, ls)
            assert roots, (lp, sp)
            lmes, m = solve_mes2(lp, ls, v0=V0_CIE)
            # Both are bisections to machine precision on well-separated roots.
            assert float(m) == pytest.approx(roots[-1], abs=1e-12), (lp, sp, roots)
            assert float(lmes) == pytest.approx(l_mes(roots[-1], lp, ls), rel=1e-12)
            # Mesopic luminance lies between the photopic and scotopic values.
            assert min(lp, ls) * (1 - 1e-12) <= float(lmes) <= max(lp, ls) * (1 + 1e-12)
            if len(roots) > 1:
                several += 1
                # Where there are several, all lie below m0 = 0.5, so CIE's iteration from
                # 0.5 (monotone for S/P < 1) ends on the largest: see the next test.
                assert sp < 1.0 and roots[-1] < 0.5, (lp, sp, roots)
    assert several >= 3  # the grid reaches the region with more than one self-consistent state


def test_two_root_region_low_sp():
    # L_p = 0.024 cd/m², S/P = 0.2 (a low-pressure-sodium-like light near the bottom of the
    # mesopic range): m = 0 is self-consistent (L_s = 0.0048 cd/m² is below 0.005 cd/m²), and
    # so is m ≈ 0.042; an unstable root lies between. The module returns the largest, which is
    # also where CIE 191's iteration from m0 = 0.5 ends.
    lp, ls = 0.024, 0.024 * 0.2
    roots = mes2_roots(lp, ls)
    assert len(roots) == 3 and roots[0] == 0.0
    assert roots[1] == pytest.approx(0.024, abs=2e-3) and roots[2] == pytest.approx(0.042, abs=2e-3)
    m_cie, converged = cie_iteration(lp, ls)
    assert converged and m_cie == pytest.approx(roots[2], abs=1e-12)
    lmes, m = solve_mes2(lp, ls, v0=V0_CIE)
    assert float(m) == pytest.approx(roots[2], abs=1e-12)
    assert float(lmes) == pytest.approx(l_mes(roots[2], lp, ls), rel=1e-12)
    # The same with the module's default V'(λ0) = 683/1700: the largest root again.
    lmes, m = solve_mes2(lp, ls)
    assert float(m) == pytest.approx(mes2_roots(lp, ls, v0=V_PRIME_LAMBDA0)[-1], abs=1e-12)


def test_close_root_pair_near_the_fold():
    # L_p = 0.032 cd/m², S/P = 0.114: the two upper roots are only 0.008 apart (they merge at a
    # fold nearby), closer than a 1/32 scan of m could separate. The module still returns the
    # largest, where CIE's iteration ends (slowly there: its stopping step of 1e-14 leaves an
    # error of that step over one minus the iteration's rate, hence abs=1e-9).
    lp, ls = 0.032, 0.032 * 0.114
    roots = mes2_roots(lp, ls)
    assert len(roots) == 3 and roots[2] - roots[1] < 1.0 / 32.0
    m_cie, converged = cie_iteration(lp, ls)
    assert converged and m_cie == pytest.approx(roots[2], abs=1e-9)
    _, m = solve_mes2(lp, ls, v0=V0_CIE)
    assert float(m) == pytest.approx(roots[2], abs=1e-12)


def test_agrees_with_cie_iteration_where_it_converges():
    lps = np.geomspace(0.003, 4.0, 15)
    sps = np.concatenate([[0.05, 0.1, 0.2], np.linspace(0.4, 2.6, 12)])
    checked = 0
    for lp in lps:
        for sp in sps:
            ref_m, ok = cie_iteration(lp, lp * sp)
            if not ok:
                continue
            lmes, m = solve_mes2(lp, lp * sp, v0=V0_CIE)
            assert float(m) == pytest.approx(ref_m, abs=1e-12), (lp, sp)
            assert float(lmes) == pytest.approx(l_mes(ref_m, lp, lp * sp), rel=1e-12)
            checked += 1
    assert checked > 0.8 * lps.size * sps.size  # the iteration converges over most of this range


def test_vectorised_matches_scalar_and_zero_input():
    lp = np.array([[0.05, 0.5], [2.0, 0.0]])
    ls = lp * 1.8
    lmes, m = solve_mes2(lp, ls)
    for idx in np.ndindex(lp.shape):
        l1, m1 = solve_mes2(lp[idx], ls[idx])
        assert lmes[idx] == pytest.approx(float(l1), rel=1e-12, abs=0)
    assert lmes[1, 1] == 0.0 and m[1, 1] == 0.0


def test_mesopic_image_limits():
    # m = 1 is photopic and m = 0 scotopic photometry, whatever V'(λ0) (CIE 191).
    lp = np.array([0.1, 1.0, 10.0])
    ls = np.array([0.3, 0.5, 25.0])
    assert np.allclose(mesopic_image(lp, ls, 1.0), lp, rtol=1e-15, atol=0)
    assert np.allclose(mesopic_image(lp, ls, 0.0), ls, rtol=1e-15, atol=0)
