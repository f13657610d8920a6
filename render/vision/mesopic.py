"""Mesopic photometry: CIE 191:2010, system MES2.

The mesopic luminous efficiency is ``M(m)·V_mes(λ) = m·V(λ) + (1 − m)·V'(λ)`` with the
adaptation coefficient ``m`` in [0, 1]; the mesopic luminance of a stimulus with photopic
luminance ``L_p`` and scotopic luminance ``L_s`` is

    L_mes = [m·L_p + (1 − m)·L_s·V'(λ0)] / [m + (1 − m)·V'(λ0)],    λ0 = 555 nm,

and ``m`` belongs to the *adaptation* state through ``m = a + b·log10(L_mes)`` clipped to
[0, 1], a = 0.7670, b = 0.3334 (CIE 191:2010; from memory, see
/work/shared/reference-notes.md). Hence m = 1 (photopic) when L_mes ≥ 5 cd/m² and m = 0
(scotopic, L_mes = L_s) when L_mes ≤ 0.005 cd/m².

``V'(λ0)`` is the scotopic efficiency at 555 nm; CIE 191 writes it as 683/1699. Here it is
``Km / K'm`` with lampcast's constants (683/1700, :mod:`render.colour.observers`), so that the term
``L_s·V'(λ0)`` equals 683·∫L(λ)V'(λ)dλ whichever K'm the scotopic buffer was made with, and S/P
= 1 gives L_mes = L_p exactly. The difference from 683/1699 in the denominator is 0.06 %.

Solving for the adaptation state
--------------------------------
CIE 191 iterates ``m_{n+1} = a + b·log10(L_mes(m_n))`` from m0 = 0.5. That fixed-point iteration
need not converge (it oscillates at low S/P; Melgosa et al. 2017, Optics Express 25(15), who
give a bisection-Newton method). :func:`solve_mes2` instead brackets a root of the continuous
function ``φ(m) = clip(a + b·log10 L_mes(m), 0, 1) − m`` on [0, 1]; φ(0) ≥ 0 ≥ φ(1), so a root
always exists and bisection always converges. For S/P below about 0.2 at L_p of a few
hundredths of cd/m² φ has up to three roots (found numerically over S/P 0.05-10, L_p 1e-6 to
1e3 cd/m²); the solver then returns the root with the largest m (the one continuous with the
photopic branch), by scanning φ on a coarse grid of m before bisecting.
"""

from __future__ import annotations

import numpy as np

from render.colour.observers import KM_LM_PER_W, KM_SCOTOPIC_LM_PER_W

#: MES2 constants a, b of ``m = a + b·log10(L_mes)`` (CIE 191:2010; from memory).
MES2_A = 0.7670
MES2_B = 0.3334
#: Upper and lower ends of the mesopic range of MES2, cd/m² (CIE 191:2010).
MESOPIC_UPPER_CD_M2 = 5.0
MESOPIC_LOWER_CD_M2 = 0.005
#: V'(555 nm) written as Km/K'm with lampcast's constants (CIE 191 writes 683/1699).
V_PRIME_LAMBDA0 = KM_LM_PER_W / KM_SCOTOPIC_LM_PER_W


def mesopic_luminance(m, photopic_cd_m2, scotopic_cd_m2, v0: float = V_PRIME_LAMBDA0) -> np.ndarray:
    """Mesopic luminance for a given adaptation coefficient (CIE 191:2010 MES2), cd/m².

    ``L_mes = [m·L_p + (1 − m)·V'(λ0)·L_s] / [m + (1 − m)·V'(λ0)]``; broadcasts over arrays.
    """
    m = np.asarray(m, dtype=np.float64)
    lp = np.asarray(photopic_cd_m2, dtype=np.float64)
    ls = np.asarray(scotopic_cd_m2, dtype=np.float64)
    return (m * lp + (1.0 - m) * v0 * ls) / (m + (1.0 - m) * v0)


def adaptation_coefficient(mesopic_cd_m2) -> np.ndarray:
    """MES2 adaptation coefficient ``m = clip(a + b·log10 L_mes, 0, 1)`` (CIE 191:2010)."""
    lm = np.asarray(mesopic_cd_m2, dtype=np.float64)
    with np.errstate(divide="ignore"):
        return np.clip(MES2_A + MES2_B * np.log10(np.maximum(lm, 0.0)), 0.0, 1.0)


def _phi(m, lp, ls, v0):
    return adaptation_coefficient(mesopic_luminance(m, lp, ls, v0)) - m


def solve_mes2(
    photopic_cd_m2, scotopic_cd_m2, *, v0: float = V_PRIME_LAMBDA0, scan: int = 33, iterations: int = 60
) -> tuple[np.ndarray, np.ndarray]:
    """Self-consistent MES2 adaptation state: ``(L_mes, m)`` for each element.

    Parameters
    ----------
    photopic_cd_m2, scotopic_cd_m2
        Photopic and scotopic luminance of the adaptation field (or of each pixel), cd/m²;
        arrays of one shape (negative values are taken as 0).
    v0
        V'(λ0), see the module text.
    scan
        Points of the coarse scan of m in [0, 1] used to pick the root with the largest m.
    iterations
        Bisection steps inside the chosen bracket (60 halvings of a 1/32 bracket reach
        machine precision).

    Returns
    -------
    (L_mes, m)
        Mesopic luminance, cd/m², and adaptation coefficient, same shape as the inputs.

    Method: bracketing on ``φ(m) = clip(a + b·log10 L_mes(m), 0, 1) − m`` (see module text);
    always converges, vectorised over elements.
    """
    lp = np.maximum(np.asarray(photopic_cd_m2, dtype=np.float64), 0.0)
    ls = np.maximum(np.asarray(scotopic_cd_m2, dtype=np.float64), 0.0)
    lp, ls = np.broadcast_arrays(lp, ls)
    shape = lp.shape
    lp = lp.reshape(-1)
    ls = ls.reshape(-1)
    grid = np.linspace(0.0, 1.0, scan)
    phi = _phi(grid[:, None], lp[None, :], ls[None, :], v0)  # (scan, n)
    # The last grid interval [g_k, g_k+1] with phi(g_k) >= 0 and phi(g_k+1) <= 0.
    nonneg = phi >= 0.0
    ok = nonneg[:-1] & (phi[1:] <= 0.0)
    # phi(0) >= 0 and phi(1) <= 0 always, so at least one interval qualifies.
    k = (scan - 2) - np.argmax(ok[::-1], axis=0)
    lo = grid[k].copy()
    hi = grid[k + 1].copy()
    # Exact roots on the grid.
    exact_hi = phi[k + 1, np.arange(lp.size)] == 0.0
    for _ in range(iterations):
        mid = 0.5 * (lo + hi)
        f = _phi(mid, lp, ls, v0)
        up = f >= 0.0
        lo = np.where(up, mid, lo)
        hi = np.where(up, hi, mid)
    # lo keeps phi(lo) >= 0 and is exact when the root is a grid point from below (m = 0).
    m = np.where(exact_hi, grid[k + 1], lo)
    lmes = mesopic_luminance(m, lp, ls, v0)
    return lmes.reshape(shape), m.reshape(shape)


def mesopic_image(photopic_cd_m2, scotopic_cd_m2, m: float, v0: float = V_PRIME_LAMBDA0) -> np.ndarray:
    """Per-pixel mesopic luminance for the adaptation coefficient ``m`` of the adaptation state.

    CIE 191:2010 applies the ``m`` of the observer's adaptation to every stimulus in the field;
    this is that, per pixel, cd/m².
    """
    return mesopic_luminance(float(m), photopic_cd_m2, scotopic_cd_m2, v0)
