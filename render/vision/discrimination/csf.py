"""castleCSF for static foveal stimuli: the three mechanisms, their contrasts and discs.

The equations of castleCSF (Ashraf, Mantiuk, Chapiro & Wuerger 2024) written out for a stimulus
that does not flicker (0 Hz) and is looked at (eccentricity 0); the fitted parameters are in
:mod:`render.vision.discrimination.castle_params`. Sensitivities are 1/threshold contrast of one
mechanism.

Mechanisms
----------
Cone signals (L, M, S: CIE 2006 cone fundamentals scaled so that L + M is luminance in cd/m²,
:mod:`render.vision.discrimination.cones`) go to three mechanisms through the fixed matrix
:data:`~render.vision.discrimination.castle_params.MECHANISM_MATRIX`: achromatic A = L + M,
red-green R = L − 2.3112·M, yellow-violet Y = −L − M + 50.9875·S. A pattern of mean ``lms_mean``
and modulation ``lms_delta`` has the mechanism contrasts ``C_k = |(M·Δ)_k| / |(M·mean)_A|``:
each is divided by the *achromatic* mean (the release's ``alpha = 0``).

Sensitivity of one mechanism to a Gabor of frequency ρ (cycles/degree) and area A (deg²) at
background luminance L (cd/m²)::

    S(ρ, L, A) = S_max(L) · P(ρ; f_max(L), bw) · sqrt(A_c / (1 + A_c/A)) · ρ,
    A_c = A_0 / (1 + (ρ/f_0)²)                       (Rovamo et al. 1993)
    P   = 10^(−(log10 ρ − log10 f_max)² / 2^bw)      (truncated log-parabola)

The chromatic parabola is held at 1 below its peak frequency; the achromatic one at ``1 − a``
where it would fall below that. ``S_max(L)`` and ``f_max(L)`` follow
:func:`luminance_dependence`. The achromatic mechanism adds a sustained and a transient part;
at 0 Hz the sustained response is 1 and the transient response is
``exp(−|ω_0|^(2β)/σ)`` with ``ω_0 = 2.41482·log10 L + 4.7036`` (the release's
``|0^β − ω_0^β|²``, which stays real because the modulus is taken).

A pattern is at threshold when ``(Σ_k (C_k·S_k)²)^(1/2) = 1`` (Minkowski summation over the three
mechanisms, exponent 2); that sum is the pattern's **multiple of threshold**.

Discs
-----
The objects of a street are uniform patches, not Gabors. castleCSF's release models a disc of
radius r (degrees) as the best Gabor over 64 log-spaced frequencies from 0.125 to 16 cpd, each at
a fixed area of 2.42437 deg², scaled by ``r^(1/3.01142)`` (Ashraf, Mantiuk & Chapiro 2023;
``sensitivity_edge`` of ``CSF_castleCSF.m``)::

    multiple_disc = r^(1/β_d) · max_ρ (Σ_k (C_k·S_k(ρ, L, A_d))²)^(1/2)

:func:`disc_sensitivities` gives the per-mechanism factors ``r^(1/β_d)·S_k(ρ, L, A_d)`` on that
frequency grid.

References
----------
- M. Ashraf, R. K. Mantiuk, A. Chapiro, S. Wuerger (2024), "castleCSF — A contrast sensitivity
  function of color, area, spatiotemporal frequency, luminance and eccentricity", Journal of
  Vision 24(4):5; the MIT-licensed MATLAB release v0.2.4 (``CSF_castleCSF.m``,
  ``CSF_castleCSF_chrom.m``, ``CSF_stelaCSF_lum_peak.m``, ``CSF_base.m``): equations read there
  and written anew here.
- R. K. Mantiuk, M. Ashraf, A. Chapiro (2022), "stelaCSF — A unified model of contrast
  sensitivity as the function of spatio-temporal frequency, eccentricity, luminance and area",
  ACM Transactions on Graphics 41(4), 145: the achromatic structure castleCSF extends.
- M. Ashraf, R. K. Mantiuk, A. Chapiro (2023), "Modeling contrast sensitivity of discs", IS&T
  Electronic Imaging, HVEI-246: the disc model.
- J. Rovamo, O. Luntinen, R. Näsänen (1993), "Modelling the dependence of contrast sensitivity on
  grating area and spatial frequency", Vision Research 33(18), 2773-2788: the area term.
"""

from __future__ import annotations

from functools import lru_cache

import numpy as np
import numpy.typing as npt

from render.vision.discrimination import castle_params as P

__all__ = [
    "CHANNELS",
    "disc_frequencies_cpd",
    "disc_sensitivities",
    "gabor_sensitivity",
    "luminance_dependence",
    "mechanism_contrasts",
    "mechanism_matrix",
]

#: The three mechanisms, in the order of every per-channel array.
CHANNELS = ("achromatic", "red-green", "yellow-violet")


def luminance_dependence(params: tuple[float, ...], luminance_cd_m2: npt.ArrayLike) -> np.ndarray:
    """castleCSF's family of luminance dependences (``get_lum_dep``), broadcast over L.

    1 parameter: constant; 2: ``p2·L^p1``; 3: ``p1·(1 + p2/L)^(−p3)``;
    5: ``p1·(1 + p2/L)^(−p3)·(1 − (1 + p4/L)^(−p5))``.
    """
    lum = np.asarray(luminance_cd_m2, dtype=np.float64)
    p = params
    if len(p) == 1:
        return np.full(lum.shape, p[0])
    if len(p) == 2:
        return p[1] * lum ** p[0]
    if len(p) == 3:
        return p[0] * (1.0 + p[1] / lum) ** (-p[2])
    if len(p) == 5:
        return p[0] * (1.0 + p[1] / lum) ** (-p[2]) * (1.0 - (1.0 + p[3] / lum) ** (-p[4]))
    raise ValueError(f"no luminance dependence with {len(p)} parameters")


def _mechanism(
    params: P.ChannelParameters, freq: np.ndarray, lum: np.ndarray, area: np.ndarray, chromatic: bool
) -> np.ndarray:
    s_max = luminance_dependence(params.peak_sensitivity, lum)
    f_max = luminance_dependence(params.peak_frequency, lum)
    parabola = 10.0 ** (-((np.log10(freq) - np.log10(f_max)) ** 2) / 2.0**params.bandwidth)
    if chromatic:
        parabola = np.where(freq < f_max, 1.0, parabola)
    else:
        floor = 1.0 - params.plateau
        parabola = np.where((freq < f_max) & (parabola < floor), floor, parabola)
    a_c = params.critical_area_deg2 / (1.0 + (freq / params.critical_frequency_cpd) ** 2)
    return s_max * parabola * np.sqrt(a_c / (1.0 + a_c / area)) * freq


def _transient_response_static(lum: np.ndarray) -> np.ndarray:
    t = P.ACHROMATIC_TRANSIENT_PEAK
    omega0 = t["omega_slope"] * np.log10(lum) + t["omega_intercept"]
    return np.exp(-(np.abs(omega0) ** (2.0 * t["beta"])) / t["sigma"])


def gabor_sensitivity(
    channel: str, frequency_cpd: npt.ArrayLike, luminance_cd_m2: npt.ArrayLike, area_deg2: npt.ArrayLike
) -> np.ndarray:
    """Sensitivity (1/threshold mechanism contrast) of one mechanism to a static foveal Gabor.

    Parameters
    ----------
    channel
        One of :data:`CHANNELS`.
    frequency_cpd
        Spatial frequency, cycles per degree (> 0).
    luminance_cd_m2
        Background luminance, cd/m² (> 0).
    area_deg2
        Area of the Gabor, deg² (castleCSF's ``area = π·σ²`` of the Gaussian envelope).

    The three arguments broadcast against each other.
    """
    f = np.asarray(frequency_cpd, dtype=np.float64)
    lum = np.asarray(luminance_cd_m2, dtype=np.float64)
    area = np.asarray(area_deg2, dtype=np.float64)
    if channel == "achromatic":
        sustained = _mechanism(P.ACHROMATIC_SUSTAINED, f, lum, area, chromatic=False)
        transient = _mechanism(P.ACHROMATIC_TRANSIENT, f, lum, area, chromatic=False)
        return sustained + _transient_response_static(lum) * transient
    if channel == "red-green":
        return _mechanism(P.RED_GREEN, f, lum, area, chromatic=True)
    if channel == "yellow-violet":
        return _mechanism(P.YELLOW_VIOLET, f, lum, area, chromatic=True)
    raise ValueError(f"unknown channel {channel!r}; expected one of {', '.join(CHANNELS)}")


@lru_cache(maxsize=1)
def mechanism_matrix() -> np.ndarray:
    """The cone-to-mechanism matrix (rows: achromatic, red-green, yellow-violet), read-only."""
    m = np.array(P.MECHANISM_MATRIX, dtype=np.float64)
    m.setflags(write=False)
    return m


def mechanism_contrasts(lms_mean: npt.ArrayLike, lms_delta: npt.ArrayLike) -> np.ndarray:
    """castleCSF's mechanism contrasts ``|(M·Δ)_k| / |(M·mean)_A|`` (last axis: the three channels).

    ``lms_mean`` and ``lms_delta`` have L, M, S on their last axis and broadcast. A mean with no
    achromatic signal gives NaN.
    """
    m = mechanism_matrix()
    mean = np.asarray(lms_mean, dtype=np.float64) @ m.T
    delta = np.asarray(lms_delta, dtype=np.float64) @ m.T
    a = np.abs(mean[..., :1])
    with np.errstate(invalid="ignore", divide="ignore"):
        return np.where(a > 0, np.abs(delta) / np.where(a > 0, a, 1.0), np.nan)


@lru_cache(maxsize=1)
def disc_frequencies_cpd() -> np.ndarray:
    """The frequencies over which the disc model takes its peak, cycles/degree (read-only)."""
    lo, hi, n = P.DISC_FREQUENCIES_CPD
    f = np.logspace(np.log10(lo), np.log10(hi), int(n))
    f.setflags(write=False)
    return f


def disc_sensitivities(luminance_cd_m2: npt.ArrayLike, radius_deg: npt.ArrayLike) -> np.ndarray:
    """Per-mechanism disc factors ``r^(1/β_d)·S_k(ρ, L, A_d)`` on :func:`disc_frequencies_cpd`.

    Returns an array of shape ``broadcast(L, r).shape + (3, n_frequencies)``; the channel axis
    follows :data:`CHANNELS`. The multiple of threshold of a disc with mechanism contrasts ``C``
    is ``max over ρ of sqrt(Σ_k (C_k·S[k, ρ])²)``; the threshold of one mechanism alone is
    ``1 / max over ρ of S[k, ρ]``.
    """
    lum, r = np.broadcast_arrays(
        np.asarray(luminance_cd_m2, dtype=np.float64), np.asarray(radius_deg, dtype=np.float64)
    )
    f = disc_frequencies_cpd()
    lum_b = lum[..., None]
    per_channel = [gabor_sensitivity(c, f, lum_b, P.DISC_AREA_DEG2) for c in CHANNELS]
    s = np.stack(per_channel, axis=-2)  # (..., 3, n_f)
    return s * (r[..., None, None] ** (1.0 / P.DISC_EXPONENT))
