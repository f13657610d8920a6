"""The one wavelength grid of lampcast, and moving spectra onto it.

Every spectrum in the program -- lamp emission, surface reflectance, observer functions -- lives
on :data:`WAVELENGTHS_NM`: 401 bins of 1 nm centred on 380, 381, ... 780 nm. Bin ``i`` covers
``[380 + i - 0.5, 380 + i + 0.5)`` nm.

Two kinds of spectral quantity are distinguished:

* **Densities** (spectral power in W/nm, spectral radiance, relative power per nm): moved onto
  the grid by integrating over each bin (:func:`bin_density`), so the power in every band is
  conserved. Point-sampling would make a narrow emission line vanish or double depending on where
  it falls.
* **Lines** (emission lines of negligible width with a power in W): deposited by
  :func:`deposit_lines`, which splits each line's power between the two nearest bin centres in
  inverse proportion to distance. Total power *and* power-weighted mean wavelength are then exact.

Reflectances (dimensionless, 0-1) are moved with the same band integral divided by the bin width,
i.e. as the bin's mean value (:func:`bin_mean`).

Photometric constants and the observer functions are in :mod:`render.colour.observers`.

References
----------
- CIE 015:2018 *Colorimetry*, 4th ed.: the visible range 380-780 nm and 1 nm (or 5 nm) tables.
- Piecewise-linear interpolation of tabulated spectra with exact integration over each bin, and
  the two-bin deposition of lines: our own choices, checked analytically in
  ``tests/test_spectra.py``.
"""

from __future__ import annotations

import numpy as np
from numpy.typing import ArrayLike

__all__ = [
    "BIN_EDGES_NM",
    "BIN_WIDTH_NM",
    "N_BINS",
    "WAVELENGTHS_NM",
    "WAVELENGTH_MAX_NM",
    "WAVELENGTH_MIN_NM",
    "band_power",
    "bin_density",
    "bin_mean",
    "centroid_nm",
    "density_on_grid",
    "deposit_lines",
]

#: First and last bin centre of the grid, nm.
WAVELENGTH_MIN_NM = 380.0
WAVELENGTH_MAX_NM = 780.0
#: Bin width, nm.
BIN_WIDTH_NM = 1.0
#: Bin centres, nm (401 values).
WAVELENGTHS_NM = np.arange(WAVELENGTH_MIN_NM, WAVELENGTH_MAX_NM + 0.5 * BIN_WIDTH_NM, BIN_WIDTH_NM)
WAVELENGTHS_NM.setflags(write=False)
#: Number of bins.
N_BINS = WAVELENGTHS_NM.size
#: Bin edges, nm (402 values).
BIN_EDGES_NM = np.concatenate([WAVELENGTHS_NM - 0.5 * BIN_WIDTH_NM, [WAVELENGTHS_NM[-1] + 0.5 * BIN_WIDTH_NM]])
BIN_EDGES_NM.setflags(write=False)


def _piecewise_linear_integral(x: np.ndarray, y: np.ndarray, edges: np.ndarray) -> np.ndarray:
    """Exact integral of the piecewise-linear interpolant through ``(x, y)`` over each interval
    between consecutive ``edges``. The interpolant is zero outside ``[x[0], x[-1]]``."""
    inside = edges[(edges > x[0]) & (edges < x[-1])]
    knots = np.union1d(x, inside)
    values = np.interp(knots, x, y)
    segment = 0.5 * (values[1:] + values[:-1]) * np.diff(knots)
    cumulative = np.concatenate([[0.0], np.cumsum(segment)])
    # Cumulative integral at each edge: exact because every edge inside the data is a knot and
    # the cumulative integral is constant outside the data.
    at_edges = np.interp(edges, knots, cumulative, left=0.0, right=cumulative[-1])
    return np.diff(at_edges)


def _check_samples(wavelengths_nm: ArrayLike, values: ArrayLike) -> tuple[np.ndarray, np.ndarray]:
    x = np.asarray(wavelengths_nm, dtype=np.float64)
    y = np.asarray(values, dtype=np.float64)
    if x.ndim != 1 or y.shape != x.shape or x.size < 2:
        raise ValueError("need two 1-D arrays of equal length >= 2 (wavelength nm, value)")
    if not np.all(np.diff(x) > 0):
        raise ValueError("wavelengths must be strictly increasing")
    return x, y


def bin_density(wavelengths_nm: ArrayLike, density: ArrayLike) -> np.ndarray:
    """Move a spectral density onto the grid, conserving the power in every bin.

    The samples are joined by straight lines (zero outside the sampled range) and the result is
    integrated exactly over each 1 nm bin; the returned array is that power per nm.

    Parameters
    ----------
    wavelengths_nm
        Strictly increasing sample wavelengths, nm.
    density
        Spectral density at those wavelengths (e.g. W/nm or relative power per nm).

    Returns
    -------
    ndarray, shape (N_BINS,)
        Mean density in each bin, same unit as ``density``.
    """
    x, y = _check_samples(wavelengths_nm, density)
    return _piecewise_linear_integral(x, y, BIN_EDGES_NM) / BIN_WIDTH_NM


def density_on_grid(wavelengths_nm: ArrayLike, density: ArrayLike) -> np.ndarray:
    """Move a tabulated spectral density onto the grid with :func:`bin_density`, ends held.

    Samples starting exactly at 380 nm (ending exactly at 780 nm) are extended by holding the
    end value over the grid's outer half bin, so that a table covering 380-780 nm fills the
    first and last bins; otherwise the density is zero outside the samples.
    """
    x = np.asarray(wavelengths_nm, dtype=np.float64)
    y = np.asarray(density, dtype=np.float64)
    half = 0.5 * BIN_WIDTH_NM
    if abs(x[0] - WAVELENGTH_MIN_NM) < 1e-9:
        x, y = np.concatenate([[WAVELENGTH_MIN_NM - half], x]), np.concatenate([[y[0]], y])
    if abs(x[-1] - WAVELENGTH_MAX_NM) < 1e-9:
        x, y = np.concatenate([x, [WAVELENGTH_MAX_NM + half]]), np.concatenate([y, [y[-1]]])
    return bin_density(x, y)


def bin_mean(wavelengths_nm: ArrayLike, values: ArrayLike) -> np.ndarray:
    """Mean of a smooth quantity (e.g. reflectance) over each bin.

    Unlike :func:`bin_density` the samples must cover the whole grid, ``[380, 780]`` nm, with
    the outer half bins held at the end values; anything else raises ``ValueError`` so that a
    caller completes the range explicitly and documents how.
    """
    x, y = _check_samples(wavelengths_nm, values)
    if x[0] > WAVELENGTH_MIN_NM + 1e-9 or x[-1] < WAVELENGTH_MAX_NM - 1e-9:
        raise ValueError(
            f"samples cover {x[0]:g}-{x[-1]:g} nm; the grid needs {WAVELENGTH_MIN_NM:g}-{WAVELENGTH_MAX_NM:g} nm"
        )
    # Hold end values over the outer half bins.
    lo, hi = BIN_EDGES_NM[0], BIN_EDGES_NM[-1]
    if x[0] > lo:
        x, y = np.concatenate([[lo], x]), np.concatenate([[y[0]], y])
    if x[-1] < hi:
        x, y = np.concatenate([x, [hi]]), np.concatenate([y, [y[-1]]])
    return _piecewise_linear_integral(x, y, BIN_EDGES_NM) / BIN_WIDTH_NM


def deposit_lines(wavelengths_nm: ArrayLike, powers: ArrayLike) -> np.ndarray:
    """Put emission lines onto the grid as a density (power per nm).

    Each line's power is shared between the two nearest bin centres with weights ``1 - |d|``
    (``d`` the distance in bins), so the total power and the power-weighted mean wavelength of
    every line are preserved exactly.

    Parameters
    ----------
    wavelengths_nm
        Line wavelengths, nm, within the grid's centres ``[380, 780]``.
    powers
        Power of each line (W, or relative), non-negative.

    Returns
    -------
    ndarray, shape (N_BINS,)
        Density, power per nm.
    """
    wl = np.atleast_1d(np.asarray(wavelengths_nm, dtype=np.float64))
    p = np.atleast_1d(np.asarray(powers, dtype=np.float64))
    if wl.shape != p.shape:
        raise ValueError("one power per line wavelength")
    if np.any((wl < WAVELENGTH_MIN_NM) | (wl > WAVELENGTH_MAX_NM)):
        raise ValueError(f"line wavelengths must lie in {WAVELENGTH_MIN_NM:g}-{WAVELENGTH_MAX_NM:g} nm")
    if np.any(p < 0):
        raise ValueError("line powers must be non-negative")
    position = (wl - WAVELENGTH_MIN_NM) / BIN_WIDTH_NM
    lower = np.minimum(np.floor(position).astype(np.int64), N_BINS - 2)
    frac = position - lower
    out = np.zeros(N_BINS)
    np.add.at(out, lower, p * (1.0 - frac))
    np.add.at(out, lower + 1, p * frac)
    return out / BIN_WIDTH_NM


def band_power(density: ArrayLike, lo_nm: float = WAVELENGTH_MIN_NM, hi_nm: float = WAVELENGTH_MAX_NM) -> float:
    """Power of a gridded density over the bins whose centres lie in ``[lo_nm, hi_nm]``."""
    density = np.asarray(density, dtype=np.float64)
    sel = (WAVELENGTHS_NM >= lo_nm - 1e-9) & (WAVELENGTHS_NM <= hi_nm + 1e-9)
    return float(density[..., sel].sum(axis=-1) * BIN_WIDTH_NM)


def centroid_nm(density: ArrayLike, lo_nm: float = WAVELENGTH_MIN_NM, hi_nm: float = WAVELENGTH_MAX_NM) -> float:
    """Power-weighted mean wavelength of a gridded density within ``[lo_nm, hi_nm]``, nm."""
    density = np.asarray(density, dtype=np.float64)
    sel = (WAVELENGTHS_NM >= lo_nm - 1e-9) & (WAVELENGTHS_NM <= hi_nm + 1e-9)
    w = density[sel]
    return float((w * WAVELENGTHS_NM[sel]).sum() / w.sum())
