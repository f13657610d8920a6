"""Photometric integrals of a distribution: flux, zonal flux, ULOR, peak, lumen scaling, tilt.

Flux is the exact integral of the same bilinear interpolant that the lookups evaluate
(:func:`render.light.photometry.intensity_cd`): Φ = ∫∫ I(C, γ) sin γ dγ dC. The interpolant is
linear in C on each cell, so trapezoid weights in C are exact; in γ the cell integrals
∫ (γ − a) sin γ dγ = [sin γ − (γ − a) cos γ] and ∫ sin γ dγ = [−cos γ] give exact weights,
including cells cut by a zone limit. So the flux of a table does not depend on a quadrature
step, and a distribution scaled to a lumen figure emits exactly that flux as the renderer sees it.

References
----------
- Luminous flux of an intensity distribution, Φ = ∮ I dΩ, and zonal flux: CIE 121:1996
  **(from memory)**; the cell integrals are elementary calculus.
- Upward light output ratio (ULOR): CIE 126:1997, "Guidelines for minimizing sky glow"
  **(from memory)**.
- Tilt multiplying factors and relative versus absolute photometry: ANSI/IESNA LM-63-2002,
  IES LM-63-2019 **(from memory)**.
"""

from __future__ import annotations

import math
from dataclasses import replace

import numpy as np

from render.light.photometry.model import Photometry, frozen_array

__all__ = [
    "apply_tilt",
    "luminous_flux_lm",
    "peak_intensity",
    "scale_to_lumens",
    "tilt_factor",
    "ulor",
    "zonal_flux_lm",
]


def _gamma_weights(g_deg: np.ndarray, lo_deg: float, hi_deg: float) -> np.ndarray:
    """Weights w (n_g,) with Σ w_j f_j = ∫ f̂(γ) sin γ dγ over [lo, hi] (radians), f̂ the
    piecewise-linear interpolant of f_j: exact for the lookup's interpolation in γ.

    On a cell [a, b] with Δ = b − a, ∫ (γ − a) sin γ dγ = [sin γ − (γ − a) cos γ] and
    ∫ sin γ dγ = [−cos γ] (elementary integrals).
    """
    g = np.radians(np.asarray(g_deg, dtype=np.float64))
    lo, hi = math.radians(lo_deg), math.radians(hi_deg)
    a, b = g[:-1], g[1:]
    s = np.clip(a, lo, hi)
    e = np.clip(b, lo, hi)
    delta = b - a
    p = (np.sin(e) - (e - a) * np.cos(e)) - (np.sin(s) - (s - a) * np.cos(s))
    total = np.cos(s) - np.cos(e)
    w = np.zeros(g.size)
    np.add.at(w, np.arange(1, g.size), p / delta)
    np.add.at(w, np.arange(0, g.size - 1), total - p / delta)
    return w


def _c_weights(c_deg: np.ndarray) -> np.ndarray:
    """Trapezoid weights in C (radians): exact for the interpolant, which is linear in C."""
    dc = np.diff(np.radians(np.asarray(c_deg, dtype=np.float64)))
    w = np.zeros(len(c_deg))
    w[:-1] += dc / 2.0
    w[1:] += dc / 2.0
    return w


def zonal_flux_lm(photometry: Photometry, gamma_lo_deg: float = 0.0, gamma_hi_deg: float = 180.0) -> float:
    """Luminous flux, lm, emitted between γ = ``gamma_lo_deg`` and ``gamma_hi_deg``:
    Φ = ∫∫ I(C, γ) sin γ dγ dC of the bilinear interpolant (the one
    :func:`render.light.photometry.kernels.intensity_cd` evaluates), integrated exactly cell
    by cell."""
    lo = max(gamma_lo_deg, float(photometry.gamma_deg[0]))
    hi = min(gamma_hi_deg, float(photometry.gamma_deg[-1]))
    if hi <= lo:
        return 0.0
    wc = _c_weights(photometry.c_deg)
    wg = _gamma_weights(photometry.gamma_deg, lo, hi)
    return float(wc @ photometry.candela_cd @ wg)


def luminous_flux_lm(photometry: Photometry) -> float:
    """Total luminous flux, lm: Φ = ∮ I dΩ (the exact integral of the interpolated table).

    For relative photometry compare with ``photometry.rated_lumens_lm`` (the ratio is the
    light output ratio); for absolute photometry there is no rated flux to compare with."""
    return zonal_flux_lm(photometry, 0.0, 180.0)


def ulor(photometry: Photometry) -> float:
    """Upward fraction of the luminaire's flux: Φ(γ > 90°) / Φ(all), dimensionless.

    This is the upward light output ratio when the rated lamp flux equals the luminaire flux
    (LOR = 1, as in the built-in files); CIE's ULOR proper is upward flux over lamp flux,
    i.e. ``ulor × flux / rated lumens`` for relative photometry. 0 for an all-zero table.
    """
    total = luminous_flux_lm(photometry)
    if total <= 0:
        return 0.0
    return zonal_flux_lm(photometry, 90.0, 180.0) / total


def peak_intensity(photometry: Photometry) -> tuple[float, float, float]:
    """``(peak_cd, c_deg, gamma_deg)``: the largest tabulated intensity and where it is (the
    lowest C, then lowest γ, when several directions share it)."""
    t = photometry.candela_cd
    i, j = np.unravel_index(int(np.argmax(t)), t.shape)
    return float(t[i, j]), float(photometry.c_deg[i]), float(photometry.gamma_deg[j])


def scale_to_lumens(photometry: Photometry, lumens: float) -> Photometry:
    """A copy scaled for a lumens override (e.g. a scene's lamp lumens).

    * Relative photometry: ``lumens`` replaces the rated lamp flux; intensities scale by
      ``lumens / rated_lumens_lm`` (the light output ratio is kept, so the luminaire emits
      LOR × lumens) and ``lumens_per_lamp`` becomes ``lumens / lamp_count``.
    * Absolute photometry: ``lumens`` is the luminaire's emitted flux; intensities scale by
      ``lumens / luminous_flux_lm``; the copy stays absolute.

    Raises ``ValueError`` for ``lumens ≤ 0``, an absolute file emitting no flux, or a scale
    that would make an intensity overflow (callers validate user input and report it as
    :class:`render.errors.InputError`).
    """
    lumens = float(lumens)
    if not (lumens > 0 and math.isfinite(lumens)):
        raise ValueError(f"lumens must be a positive number, got {lumens}")
    if photometry.is_absolute:
        flux = luminous_flux_lm(photometry)
        if flux <= 0:
            raise ValueError(f"{photometry.source}: the distribution emits no flux; cannot scale it")
        k = lumens / flux
        per_lamp = photometry.lumens_per_lamp
    else:
        k = lumens / photometry.rated_lumens_lm
        per_lamp = lumens / photometry.lamp_count
    peak = float(np.max(photometry.candela_cd, initial=0.0))
    if not (math.isfinite(k) and math.isfinite(peak * k * 4.0 * math.pi)):
        raise ValueError(
            f"{photometry.source}: scaling to {lumens:g} lm multiplies the intensities by {k:.4g}; "
            "they would not stay finite"
        )
    return replace(
        photometry,
        candela_cd=frozen_array(photometry.candela_cd * k),
        file_candela_cd=frozen_array(photometry.file_candela_cd * k),
        lumens_per_lamp=per_lamp,
    )


def tilt_factor(photometry: Photometry, tilt_deg: float) -> float:
    """Candela multiplying factor for a luminaire tilted by ``tilt_deg`` (1 without tilt data).

    Linear in the file's tilt angles, held at the end values outside them; the sign of the tilt
    is ignored."""
    if photometry.tilt is None:
        return 1.0
    t = photometry.tilt
    return float(np.interp(abs(float(tilt_deg)), t.angles_deg, t.factors))


def apply_tilt(photometry: Photometry, tilt_deg: float) -> Photometry:
    """A copy with the tilt multiplying factor for ``tilt_deg`` folded into the candela."""
    k = tilt_factor(photometry, tilt_deg)
    if k == 1.0:
        return photometry
    return replace(
        photometry,
        candela_cd=frozen_array(photometry.candela_cd * k),
        file_candela_cd=frozen_array(photometry.file_candela_cd * k),
    )
