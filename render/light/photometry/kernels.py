"""Photometry lookups: luminaire orientation and intensity interpolation, with numba kernels.

A luminaire is oriented by a 3x3 luminaire-to-world matrix (:func:`luminaire_rotation`): first a
tilt about the luminaire's own x axis (C 0°; positive tilt swings the nadir axis toward C 90°,
i.e. raises the street-side front of the optic), then a rotation about the world z axis
(anticlockwise seen from above). In the lampcast world frame (x along the street, y across it)
a luminaire with ``rotation_deg = 0`` throws its street side toward +y.

The intensity toward a direction is the bilinear interpolant of the
:class:`~render.light.photometry.model.Photometry` table in C (periodic) and γ, 0 cd outside the
measured γ range. The numba kernels (:func:`direction_to_c_gamma`, :func:`intensity_lookup`,
:func:`intensity_toward`) take the plain arrays of :func:`lookup_tables` so that other kernels
(:mod:`render.light.integrator`) can call them; :func:`intensity_cd` and
:func:`world_to_c_gamma` are the array forms.

References
----------
- ANSI/IESNA LM-63-2002, IES LM-63-2019 and CIE 121:1996: the C-γ system of directions
  **(from memory)**; the frame conventions are in :mod:`render.light.photometry.model`.
- Rotation matrices about the coordinate axes: elementary vector geometry.
"""

from __future__ import annotations

import math

import numba
import numpy as np
import numpy.typing as npt

from render.light.photometry.model import Photometry, local_to_c_gamma, luminaire_rotation

__all__ = [
    "direction_to_c_gamma",
    "intensity_cd",
    "intensity_lookup",
    "intensity_toward",
    "lookup_tables",
    "luminaire_rotation",
    "world_to_c_gamma",
]


# --------------------------------------------------------------------------------------------
# Orientation
# --------------------------------------------------------------------------------------------


def world_to_c_gamma(directions_world: npt.ArrayLike, rotation: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Angles (C, γ) in degrees of world directions (N, 3) from the luminaire toward points.

    ``rotation`` is the luminaire-to-world matrix of :func:`luminaire_rotation`. Directions need
    not be unit length (zero vectors give C = γ = 0). C is in [0, 360), γ in [0, 180].
    """
    d = np.asarray(directions_world, dtype=np.float64)
    local = d @ np.asarray(rotation, dtype=np.float64)  # row vectors: R^T d
    return local_to_c_gamma(local)


@numba.njit(cache=True, nogil=True)
def direction_to_c_gamma(rotation: np.ndarray, dx: float, dy: float, dz: float) -> tuple[float, float]:
    """Numba kernel: (C, γ) in degrees of the world direction (dx, dy, dz) for a luminaire whose
    luminaire-to-world matrix is ``rotation`` (3x3 float64). Same result as
    :func:`world_to_c_gamma`."""
    lx = rotation[0, 0] * dx + rotation[1, 0] * dy + rotation[2, 0] * dz
    ly = rotation[0, 1] * dx + rotation[1, 1] * dy + rotation[2, 1] * dz
    lz = rotation[0, 2] * dx + rotation[1, 2] * dy + rotation[2, 2] * dz
    gamma = math.degrees(math.atan2(math.sqrt(lx * lx + ly * ly), -lz))
    c = math.degrees(math.atan2(ly, lx))
    if c < 0.0:
        c += 360.0
    if c >= 360.0:
        c -= 360.0
    return c, gamma


# --------------------------------------------------------------------------------------------
# Intensity lookup
# --------------------------------------------------------------------------------------------


@numba.njit(cache=True, nogil=True)
def _bracket(grid: np.ndarray, x: float) -> tuple[int, float]:
    n = grid.shape[0]
    if x <= grid[0]:
        return 0, 0.0
    if x >= grid[n - 1]:
        return n - 2, 1.0
    lo = 0
    hi = n - 1
    while hi - lo > 1:
        mid = (lo + hi) // 2
        if grid[mid] <= x:
            lo = mid
        else:
            hi = mid
    return lo, (x - grid[lo]) / (grid[lo + 1] - grid[lo])


@numba.njit(cache=True, nogil=True)
def intensity_lookup(c_grid: np.ndarray, g_grid: np.ndarray, cd_table: np.ndarray, c: float, g: float) -> float:
    """Numba kernel: luminous intensity, cd, at (C, γ) degrees by bilinear interpolation.

    ``c_grid`` (n_c,) runs 0..360 inclusive, ``g_grid`` (n_g,) over the measured γ range,
    ``cd_table`` is (n_c, n_g); the arrays of :func:`lookup_tables`. C is periodic; γ outside
    ``g_grid`` (the unmeasured hemisphere) gives 0.
    """
    ng = g_grid.shape[0]
    if not (g >= g_grid[0] - 1e-9 and g <= g_grid[ng - 1] + 1e-9):
        return 0.0
    cc = c % 360.0
    if cc < 0.0:
        cc += 360.0
    i, u = _bracket(c_grid, cc)
    j, v = _bracket(g_grid, g)
    a = (1.0 - v) * cd_table[i, j] + v * cd_table[i, j + 1]
    b = (1.0 - v) * cd_table[i + 1, j] + v * cd_table[i + 1, j + 1]
    return (1.0 - u) * a + u * b


@numba.njit(cache=True, nogil=True)
def _lookup_many(
    c_grid: np.ndarray, g_grid: np.ndarray, cd_table: np.ndarray, c: np.ndarray, g: np.ndarray, out: np.ndarray
) -> None:
    for k in range(c.shape[0]):
        out[k] = intensity_lookup(c_grid, g_grid, cd_table, c[k], g[k])


@numba.njit(cache=True, nogil=True)
def intensity_toward(
    rotation: np.ndarray,
    c_grid: np.ndarray,
    g_grid: np.ndarray,
    cd_table: np.ndarray,
    dx: float,
    dy: float,
    dz: float,
) -> float:
    """Numba kernel: intensity, cd, of an oriented luminaire toward world direction (dx, dy, dz)."""
    c, g = direction_to_c_gamma(rotation, dx, dy, dz)
    return intensity_lookup(c_grid, g_grid, cd_table, c, g)


def _read_only(a: npt.ArrayLike) -> np.ndarray:
    """A contiguous float64 read-only view (a copy where ``a`` is not one already)."""
    out = np.ascontiguousarray(a, np.float64).view()
    out.flags.writeable = False
    return out


def lookup_tables(photometry: Photometry) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """``(c_grid, g_grid, cd_table)`` as contiguous read-only float64 arrays for the numba
    kernels: always the same array types, so each kernel is compiled for one (numba compiles a
    function again for each layout and each of writable and read-only)."""
    return _read_only(photometry.c_deg), _read_only(photometry.gamma_deg), _read_only(photometry.candela_cd)


def intensity_cd(photometry: Photometry, c_deg: npt.ArrayLike, gamma_deg: npt.ArrayLike) -> float | np.ndarray:
    """Luminous intensity, cd, at angles (C, γ) in degrees (broadcast arrays or scalars),
    by bilinear interpolation in C (periodic) and γ; 0 outside the measured γ range."""
    c, g = np.broadcast_arrays(np.asarray(c_deg, dtype=np.float64), np.asarray(gamma_deg, dtype=np.float64))
    out = np.empty(c.size, dtype=np.float64)
    # Fresh writable copies of the angles, whatever was given: one compiled type.
    _lookup_many(*lookup_tables(photometry), np.array(c, np.float64).ravel(), np.array(g, np.float64).ravel(), out)
    out = out.reshape(c.shape)
    return float(out) if out.ndim == 0 else out
