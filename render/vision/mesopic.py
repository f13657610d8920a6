"""Mesopic photometry: CIE 191:2010, system MES2.

The mesopic luminous efficiency is ``M(m)·V_mes(λ) = m·V(λ) + (1 − m)·V'(λ)`` with the
adaptation coefficient ``m`` in [0, 1] (``M(m)`` normalises the peak of ``V_mes`` to 1); the
mesopic luminance of a stimulus with photopic luminance ``L_p`` and scotopic luminance ``L_s``
is ``(683/V_mes(λ0))·∫L(λ)V_mes(λ)dλ``, which is

    L_mes = [m·L_p + (1 − m)·L_s·V'(λ0)] / [m + (1 − m)·V'(λ0)],    λ0 = 555 nm,

and ``m`` belongs to the *adaptation* state through ``m = a + b·log10(L_mes)`` clipped to
[0, 1], a = 0.7670, b = 0.3334. Hence m = 1 (photopic) when L_mes ≥ 5 cd/m² and m = 0
(scotopic, L_mes = L_s) when L_mes ≤ 0.005 cd/m².

``V'(λ0)`` is the scotopic efficiency at 555 nm; CIE 191 writes it as 683/1699. Here it is
``Km / K'm`` with lampcast's constants (683/1700, :mod:`render.colour.observers`), so that the term
``L_s·V'(λ0)`` equals 683·∫L(λ)V'(λ)dλ whichever K'm the scotopic buffer was made with, and S/P
= 1 gives L_mes = L_p exactly. The difference from 683/1699 in the denominator is 0.06 %.

Solving for the adaptation state
--------------------------------
CIE 191 iterates ``m_{n+1} = clip(a + b·log10 L_mes(m_n), 0, 1)`` from m0 = 0.5. For S/P ≤ 1,
L_mes grows with m, so that map is nondecreasing and the iteration walks monotonically to the
nearest self-consistent m; for S/P > 1 the map decreases, the self-consistent m is unique, and
the iteration may oscillate instead of converging (here from S/P of about 20 at a few cd/m²;
Li et al. 2018 prove convergence for S/P below 18.18).

:func:`solve_mes2` does not iterate: it brackets a root of the continuous function
``φ(m) = clip(a + b·log10 L_mes(m), 0, 1) − m`` on [0, 1]. φ(0) ≥ 0 ≥ φ(1), so a root always
exists and bisection always converges.

**Which root.** At low S/P near the bottom of the mesopic range the equation has more than one
self-consistent state, e.g. L_p = 0.024 cd/m² and S/P = 0.2: m = 0 (L_s = 0.0048 cd/m² is below
0.005 cd/m²), an unstable root at m ≈ 0.024 and m ≈ 0.042 (Gao et al. 2017 and Shpak et al.
2017 describe this). :func:`solve_mes2` returns the **largest** self-consistent m, the one
continuous with the photopic branch: it scans φ on a grid of m (``scan`` points) and bisects
the highest interval where φ changes sign from ≥ 0 to ≤ 0. Where there are several roots they
all lie below 0.5 (found numerically over S/P 0.03-30 and L_p 1e-4 to 100 cd/m²), so this is
also the root CIE 191's iteration from m0 = 0.5 ends on. The default scan step, 1/256, resolves
root pairs down to that spacing; only within a hair of the fold where the two upper roots merge
could a pair slip between grid points (the answer would then be m = 0). The tests check the
choice against an independent bisection and against CIE's iteration.

References
----------
- CIE 191:2010, "Recommended system for mesopic photometry based on visual performance":
  MES2, V_mes, the L_mes equation, a, b, the 0.005-5 cd/m² range and the iteration from
  m0 = 0.5 (docs/references.md: read in secondary sources).
- Gao et al. (2017; M. Melgosa, M. R. Pointer, M. R. Luo among the authors),
  "Improved computation of the adaptation coefficient in the CIE system of mesopic
  photometry", Optics Express 25(15), 18365: no or several solutions with the original a, b;
  a bisection-Newton solver.
- M. Shpak, P. Kärhä, E. Ikonen (2017), "Mathematical limitations of the CIE mesopic
  photometry system", Lighting Research & Technology 49(1), 111-121.
- Li et al. (2018), "Theoretical consideration on convergence of the fixed-point iteration
  method in CIE mesopic photometry system MES2", Optics Express 26(24), 31351.
"""

from __future__ import annotations

import numpy as np
import numpy.typing as npt

from render.colour.observers import KM_LM_PER_W, KM_SCOTOPIC_LM_PER_W

__all__ = [
    "MES2_A",
    "MES2_B",
    "MESOPIC_LOWER_CD_M2",
    "MESOPIC_UPPER_CD_M2",
    "V_PRIME_LAMBDA0",
    "adaptation_coefficient",
    "mesopic_image",
    "mesopic_luminance",
    "solve_mes2",
]

#: MES2 constants a, b of ``m = a + b·log10(L_mes)`` (CIE 191:2010).
MES2_A = 0.7670
MES2_B = 0.3334
#: Upper and lower ends of the mesopic range of MES2, cd/m² (CIE 191:2010).
MESOPIC_UPPER_CD_M2 = 5.0
MESOPIC_LOWER_CD_M2 = 0.005
#: V'(555 nm) written as Km/K'm with lampcast's constants (CIE 191 writes 683/1699).
V_PRIME_LAMBDA0 = KM_LM_PER_W / KM_SCOTOPIC_LM_PER_W


def mesopic_luminance(
    m: npt.ArrayLike, photopic_cd_m2: npt.ArrayLike, scotopic_cd_m2: npt.ArrayLike, v0: float = V_PRIME_LAMBDA0
) -> np.ndarray:
    """Mesopic luminance for a given adaptation coefficient (CIE 191:2010 MES2), cd/m².

    ``L_mes = [m·L_p + (1 − m)·V'(λ0)·L_s] / [m + (1 − m)·V'(λ0)]``; broadcasts over arrays.
    """
    m = np.asarray(m, dtype=np.float64)
    lp = np.asarray(photopic_cd_m2, dtype=np.float64)
    ls = np.asarray(scotopic_cd_m2, dtype=np.float64)
    return (m * lp + (1.0 - m) * v0 * ls) / (m + (1.0 - m) * v0)


def adaptation_coefficient(mesopic_cd_m2: npt.ArrayLike) -> np.ndarray:
    """MES2 adaptation coefficient ``m = clip(a + b·log10 L_mes, 0, 1)`` (CIE 191:2010)."""
    lm = np.asarray(mesopic_cd_m2, dtype=np.float64)
    with np.errstate(divide="ignore"):
        return np.clip(MES2_A + MES2_B * np.log10(np.maximum(lm, 0.0)), 0.0, 1.0)


def _phi(m, lp, ls, v0):
    return adaptation_coefficient(mesopic_luminance(m, lp, ls, v0)) - m


def solve_mes2(
    photopic_cd_m2: npt.ArrayLike,
    scotopic_cd_m2: npt.ArrayLike,
    *,
    v0: float = V_PRIME_LAMBDA0,
    scan: int = 257,
    iterations: int = 60,
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
        Points of the scan of m in [0, 1] used to pick the root with the largest m (module
        text); the scan costs ``scan`` evaluations per element.
    iterations
        Bisection steps inside the chosen bracket (60 halvings of a 1/256 bracket reach
        machine precision).

    Returns
    -------
    (L_mes, m)
        Mesopic luminance, cd/m², and adaptation coefficient, same shape as the inputs.

    Method: bracketing on ``φ(m) = clip(a + b·log10 L_mes(m), 0, 1) − m`` (see module text);
    always converges, vectorised over elements; the largest self-consistent m is returned.
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


def mesopic_image(
    photopic_cd_m2: npt.ArrayLike, scotopic_cd_m2: npt.ArrayLike, m: float, v0: float = V_PRIME_LAMBDA0
) -> np.ndarray:
    """Per-pixel mesopic luminance for the adaptation coefficient ``m`` of the adaptation state.

    CIE 191:2010 applies the ``m`` of the observer's adaptation to every stimulus in the field;
    this is that, per pixel, cd/m².
    """
    return mesopic_luminance(float(m), photopic_cd_m2, scotopic_cd_m2, v0)
