"""Cone signals for castleCSF: CIE 2006 2° cone fundamentals on the lampcast grid.

castleCSF describes colours by the cone excitations L, M, S of the CIE 2006 physiological
observer (Stockman & Sharpe 2000 2° fundamentals, CIE 170-1:2006), scaled so that ``L + M`` is
the luminance in cd/m² (its data files and its default D65 background, ``L + M = 1`` per cd/m²).
Here:

* the fundamentals l̄, m̄, s̄ are the energy-based, peak-normalised 2° functions of
  colour-science (``"Stockman & Sharpe 2 Degree Cone Fundamentals"``, 390-830 nm at 1 nm), taken
  at the grid's bin centres and zero below 390 nm, where CIE 170-1 does not define them;
* L and M are weighted by 0.68990272 and 0.34832189, the CIE 170-1:2006 2° luminous efficiency
  ``V_F(λ) = 0.68990272·l̄ + 0.34832189·m̄`` (colour-science's "CIE 2008 2 Degree Physiologically
  Relevant LEF" equals this sum to 1e-6), times Km = 683 lm/W: so ``L + M`` of a spectral
  radiance in W·sr⁻¹·m⁻²·nm⁻¹ is its luminance in cd/m² by that observer (within a few per cent of
  the CIE 1931 luminance of broad spectra);
* S is scaled so that CIE illuminant D65 has ``S/(L + M) = 1/50.9875``: castleCSF's yellow-violet
  mechanism ``−L − M + 50.9875·S`` is balanced for its D65 grey (the release's ``lms2dkl_d65``
  grey gives ``(L + M)/S = 50.9875`` and ``L/M = 2.3112``, the two free cells of its mechanism
  matrix), so a pure luminance change of D65 drives only the achromatic mechanism. This puts S
  5 % below the CIE 170-2 MacLeod-Boynton scaling (max s/V_F = 1, which gives D65
  ``S/(L + M) = 0.0207``); the release's own data files use ``S/(L + M)`` of 0.0196-0.0239 for
  their "D65" displays. CIE D65 comes out with ``L/M = 2.3126`` (castleCSF: 2.3112).

References
----------
- CIE 170-1:2006, "Fundamental chromaticity diagram with physiological axes — Part 1": the 2°
  cone fundamentals and V_F(λ); A. Stockman, L. T. Sharpe (2000), "The spectral sensitivities of
  the middle- and long-wavelength-sensitive cones derived from measurements in observers of
  known genotype", Vision Research 40(13), 1711-1737. *implementation*: colour-science's tables.
- CIE 170-2:2015, Part 2 (MacLeod-Boynton scaling of s), for the comparison above (*memory*).
- M. Ashraf et al. (2024), castleCSF, Journal of Vision 24(4):5, release v0.2.4: the LMS
  convention (``CSF_base.m`` default D65 background, ``lms2dkl_d65.m``, ``CSF_castleCSF.m``).
"""

from __future__ import annotations

from functools import lru_cache

import numpy as np
import numpy.typing as npt

from render.colour.observers import KM_LM_PER_W
from render.colour.spectra import BIN_WIDTH_NM, WAVELENGTHS_NM

__all__ = [
    "CONE_ROD_RESPONSES",
    "L_WEIGHT",
    "M_WEIGHT",
    "S_OVER_LUMINANCE_D65",
    "cone_fundamentals",
    "cone_rod_weights",
    "cone_signals",
]

#: Weights of l̄ and m̄ in V_F(λ) (CIE 170-1:2006, 2°).
L_WEIGHT = 0.68990272
M_WEIGHT = 0.34832189
#: S/(L + M) of D65 for which castleCSF's yellow-violet mechanism is balanced (1/50.9875).
S_OVER_LUMINANCE_D65 = 1.0 / 50.9875
#: The columns of :func:`cone_rod_weights`.
CONE_ROD_RESPONSES = ("L", "M", "S", "scotopic")


def _peak_normalised_fundamentals() -> np.ndarray:
    import colour

    sd = colour.MSDS_CMFS["Stockman & Sharpe 2 Degree Cone Fundamentals"]
    w = np.asarray(sd.wavelengths, dtype=np.float64)
    v = np.asarray(sd.values, dtype=np.float64)
    return np.stack([np.interp(WAVELENGTHS_NM, w, v[:, k], left=0.0, right=0.0) for k in range(3)], axis=-1)


@lru_cache(maxsize=1)
def cone_fundamentals() -> np.ndarray:
    """(N_BINS, 3) L, M, S weights: ``cone_signals = Σ radiance·weights·Δλ``, L + M in cd/m².

    Read-only. See the module text for the scaling.
    """
    from render.colour.materials import d65_on_grid

    f = _peak_normalised_fundamentals()
    lms = np.empty_like(f)
    lms[:, 0] = KM_LM_PER_W * L_WEIGHT * f[:, 0]
    lms[:, 1] = KM_LM_PER_W * M_WEIGHT * f[:, 1]
    d65 = d65_on_grid()
    luminance = d65 @ (lms[:, 0] + lms[:, 1])
    lms[:, 2] = f[:, 2] * (S_OVER_LUMINANCE_D65 * luminance / (d65 @ f[:, 2]))
    lms.setflags(write=False)
    return lms


def cone_signals(spectral_radiance: npt.ArrayLike) -> np.ndarray:
    """L, M, S of spectral radiances (W·sr⁻¹·m⁻²·nm⁻¹ on the grid; last axis wavelength).

    Returns the last axis replaced by (L, M, S), with L + M the luminance in cd/m².
    """
    return np.asarray(spectral_radiance, dtype=np.float64) @ cone_fundamentals() * BIN_WIDTH_NM


@lru_cache(maxsize=1)
def cone_rod_weights() -> np.ndarray:
    """(N_BINS, 4) observer weights L, M, S (:func:`cone_fundamentals`) and K'm·V'(λ) (scotopic
    luminance, CIE 1951): the columns :data:`CONE_ROD_RESPONSES` of a response table
    (:func:`render.colour.colorimetry.response_table`), so that the light buffers give each
    pixel's cone signals (L + M in cd/m²) and scotopic luminance (cd/m²). Read-only."""
    from render.colour.observers import KM_SCOTOPIC_LM_PER_W, scotopic_lef

    w = np.concatenate([cone_fundamentals(), KM_SCOTOPIC_LM_PER_W * scotopic_lef()[:, None]], axis=1)
    w.setflags(write=False)
    return w
