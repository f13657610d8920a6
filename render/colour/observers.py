"""Observer functions and photometric constants on the lampcast grid.

* CIE 1931 2 degree colour-matching functions x̄, ȳ, z̄ (ȳ = V(λ), CIE 1924 photopic).
* CIE 1951 scotopic luminous efficiency V'(λ).
* Km = 683 lm/W (photopic) and K'm = 1700 lm/W (scotopic); CIE 15:2018 / CIE 18:2019 give
  K'm = 1700 lm/W (1699 is also seen). These are the constants for absolute photometry
  throughout lampcast: luminance in cd/m², illuminance in lx, flux in lm.

Data come from colour-science (``colour.MSDS_CMFS``, ``SDS_LEFS_*``), tabulated at 1 nm, and are
taken at the grid's bin centres (the tables are smooth at 1 nm, so centre value and bin mean
agree to well below 0.1 %); they are stored in ``render/data/colour/observers.csv``
(:mod:`render.colour.tables`), so that using them does not import colour-science.

References
----------
- CIE 015:2018 *Colorimetry*, 4th ed.: the CIE 1931 2° standard observer, Km and K'm.
- CIE 18:2019 *The basis of physical photometry*, 3rd ed.: Km = 683 lm/W, K'm = 1700 lm/W.
- CIE 1924 photopic V(λ) and CIE 1951 scotopic V'(λ) luminous efficiency functions, as
  tabulated in colour-science (``colour.MSDS_CMFS``, ``SDS_LEFS_PHOTOPIC``,
  ``SDS_LEFS_SCOTOPIC``).
"""

from __future__ import annotations

from functools import lru_cache

import numpy as np
from numpy.typing import ArrayLike

from render.colour.spectra import BIN_WIDTH_NM
from render.colour.tables import observer_table

__all__ = [
    "KM_LM_PER_W",
    "KM_SCOTOPIC_LM_PER_W",
    "cmfs_xyz",
    "photopic",
    "photopic_lef",
    "scale_to_photopic",
    "scale_to_scotopic",
    "scotopic",
    "scotopic_lef",
    "sp_ratio",
    "tristimulus",
]

#: Maximum photopic luminous efficacy, lm/W (CIE).
KM_LM_PER_W = 683.0
#: Maximum scotopic luminous efficacy, lm/W (CIE 15:2018).
KM_SCOTOPIC_LM_PER_W = 1700.0


@lru_cache(maxsize=1)
def cmfs_xyz() -> np.ndarray:
    """CIE 1931 2° colour-matching functions on the grid, shape (N_BINS, 3)."""
    table = observer_table()
    out = np.ascontiguousarray(np.column_stack([table["x_bar"], table["y_bar"], table["z_bar"]]))
    out.setflags(write=False)
    return out


def photopic_lef() -> np.ndarray:
    """CIE 1924 photopic luminous efficiency V(λ) on the grid (read-only)."""
    return observer_table()["v_photopic"]


def scotopic_lef() -> np.ndarray:
    """CIE 1951 scotopic luminous efficiency V'(λ) on the grid (read-only)."""
    return observer_table()["v_scotopic"]


def photopic(density: ArrayLike) -> np.ndarray:
    """Photopic quantity Km·Σ S(λ)V(λ)Δλ of gridded densities (last axis = wavelength).

    W/nm gives lm; W/(sr·nm) gives cd; W/(m²·sr·nm) gives cd/m²; W/(m²·nm) gives lx.
    """
    return KM_LM_PER_W * np.asarray(density, dtype=np.float64) @ photopic_lef() * BIN_WIDTH_NM


def scotopic(density: ArrayLike) -> np.ndarray:
    """Scotopic quantity K'm·Σ S(λ)V'(λ)Δλ of gridded densities (last axis = wavelength)."""
    return KM_SCOTOPIC_LM_PER_W * np.asarray(density, dtype=np.float64) @ scotopic_lef() * BIN_WIDTH_NM


def tristimulus(density: ArrayLike) -> np.ndarray:
    """Absolute CIE XYZ, Km·Σ S(λ)·x̄ȳz̄(λ)Δλ, of gridded densities; Y is photopic (e.g. cd/m²)."""
    return KM_LM_PER_W * np.asarray(density, dtype=np.float64) @ cmfs_xyz() * BIN_WIDTH_NM


def sp_ratio(density: ArrayLike) -> np.ndarray:
    """Scotopic-to-photopic ratio S/P = K'm∫SV' / Km∫SV (dimensionless)."""
    return scotopic(density) / photopic(density)


def scale_to_photopic(density: ArrayLike, target: ArrayLike) -> np.ndarray:
    """Scale a relative spectral density so that its photopic integral equals ``target``.

    With a relative spectral power distribution and ``target`` a luminous flux in lm the result
    is in W/nm; with a luminance in cd/m² it is W/(m²·sr·nm).
    """
    density = np.asarray(density, dtype=np.float64)
    p = photopic(density)
    if not np.all(p > 0):
        raise ValueError("spectrum has no photopic content to scale")
    return (
        density * (np.asarray(target, dtype=np.float64) / p)[..., None] if density.ndim > 1 else density * (target / p)
    )


def scale_to_scotopic(density: ArrayLike, target: float) -> np.ndarray:
    """Scale a relative spectral density so that its scotopic integral equals ``target``."""
    density = np.asarray(density, dtype=np.float64)
    s = float(scotopic(density))
    if not s > 0:
        raise ValueError("spectrum has no scotopic content to scale")
    return density * (target / s)
