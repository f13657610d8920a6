"""CIE 191:2010 MES2 mesopic photometry (render.vision.mesopic).

Source of every check: CIE 191:2010 system MES2 as written in /work/shared/reference-notes.md
(from memory there): L_mes = [m·L_p + (1−m)·L_s·V'(λ0)] / [m + (1−m)·V'(λ0)],
m = a + b·log10(L_mes) clipped to [0, 1], a = 0.7670, b = 0.3334, photopic at L_mes ≥ 5 cd/m²,
scotopic at L_mes ≤ 0.005 cd/m²; iteration from m0 = 0.5 (CIE 191).
"""

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


def independent_fixed_point(lp, ls, iterations=2000):
    """CIE 191's own iteration, written independently of the module: m0 = 0.5,
    m_{n+1} = clip(0.7670 + 0.3334·log10 L_mes(m_n), 0, 1). Returns (L_mes, m, converged)."""
    v0 = 683.0 / 1700.0  # V'(555) as Km/K'm with lampcast's K'm (the module's documented choice)
    m = 0.5
    prev = None
    for _ in range(iterations):
        lmes = (m * lp + (1 - m) * ls * v0) / (m + (1 - m) * v0)
        m_new = min(max(0.7670 + 0.3334 * np.log10(lmes), 0.0), 1.0)
        if prev is not None and abs(m_new - m) < 1e-13:
            return lmes, m_new, True
        prev, m = m, m_new
    return lmes, m, False


def test_constants_are_cie191():
    # CIE 191:2010 MES2 constants (reference notes, from memory).
    assert MES2_A == 0.7670 and MES2_B == 0.3334
    assert V_PRIME_LAMBDA0 == pytest.approx(683.0 / 1700.0)
    # a + b·log10(5) = 1 and a + b·log10(0.005) = 0 (to the 3-4 digits of the constants).
    assert adaptation_coefficient(5.0) == pytest.approx(1.0, abs=2e-4)
    assert adaptation_coefficient(0.005) == pytest.approx(0.0, abs=2e-4)


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


def test_agrees_with_independent_fixed_point_where_it_converges():
    lps = np.geomspace(0.003, 4.0, 15)
    sps = np.linspace(0.4, 2.6, 12)
    checked = 0
    for lp in lps:
        for sp in sps:
            ref_l, ref_m, ok = independent_fixed_point(lp, lp * sp)
            if not ok:
                continue
            lmes, m = solve_mes2(lp, lp * sp)
            assert lmes == pytest.approx(ref_l, rel=1e-9), (lp, sp)
            assert m == pytest.approx(ref_m, abs=1e-9)
            checked += 1
    assert checked > 0.8 * lps.size * sps.size  # the iteration converges over most of this range


def test_converges_everywhere_in_range():
    # Range from the brief: S/P 0.2-3, L_p 1e-4 to 100 cd/m²; the root must satisfy the MES2
    # equation itself (independent residual).
    lp, sp = np.meshgrid(np.geomspace(1e-4, 100.0, 60), np.linspace(0.2, 3.0, 40))
    ls = lp * sp
    lmes, m = solve_mes2(lp, ls)
    v0 = 683.0 / 1700.0
    lm_check = (m * lp + (1 - m) * ls * v0) / (m + (1 - m) * v0)
    m_check = np.clip(0.7670 + 0.3334 * np.log10(lm_check), 0.0, 1.0)
    assert np.all(np.isfinite(lmes))
    assert np.max(np.abs(m_check - m)) < 1e-9
    assert np.allclose(lm_check, lmes, rtol=1e-12)
    # Mesopic luminance lies between the photopic and scotopic values.
    assert np.all(lmes <= np.maximum(lp, ls) * (1 + 1e-12))
    assert np.all(lmes >= np.minimum(lp, ls) * (1 - 1e-12))


def test_vectorised_matches_scalar_and_zero_input():
    lp = np.array([[0.05, 0.5], [2.0, 0.0]])
    ls = lp * 1.8
    lmes, m = solve_mes2(lp, ls)
    for idx in np.ndindex(lp.shape):
        l1, m1 = solve_mes2(lp[idx], ls[idx])
        assert lmes[idx] == pytest.approx(float(l1), rel=1e-12, abs=0)
    assert lmes[1, 1] == 0.0 and m[1, 1] == 0.0


def test_mesopic_image_uses_given_m():
    # Per-pixel L_mes with the adaptation state's m is the MES2 formula (CIE 191) directly.
    lp = np.array([0.1, 1.0, 10.0])
    ls = 2.0 * lp
    v0 = 683.0 / 1700.0
    m = 0.4
    expected = (m * lp + (1 - m) * ls * v0) / (m + (1 - m) * v0)
    assert np.allclose(mesopic_image(lp, ls, m), expected, rtol=1e-14)
