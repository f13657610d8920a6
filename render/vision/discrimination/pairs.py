"""Can two surfaces be told apart? castleCSF thresholds for a pair seen side by side.

For two surfaces seen under one lighting -- each described by its absolute spectral radiance, or
by its cone signals and scotopic luminance -- at the observer's adaptation luminance and at the
angular size at which they are seen, :func:`discriminate` returns a
:class:`PairDiscrimination`: the contrast along castleCSF's three mechanisms (achromatic,
red-green, yellow-violet), the threshold of each mechanism alone, the multiple of threshold of
the pair and a plain verdict.

The stimulus
------------
The two surfaces are taken as a disc of one on a background of the other: the modulation is
their difference ``Δ = lms_a − lms_b`` and the mean about which it is measured is their mean
``(lms_a + lms_b)/2`` (symmetric in a and b; for small differences the disc-on-background contrast
of castleCSF's disc data). Contrasts follow :func:`~render.vision.discrimination.csf.mechanism_contrasts`.
The sensitivities are castleCSF's at the **adaptation luminance** given by the caller (the
state of the eye: the view's adaptation luminance), for a foveal, static disc whose radius is
half the pair's angular size (:func:`disc_diameter_deg` turns an object's angular area into
that size). The multiple of threshold is castleCSF's disc rule: the best frequency of the Minkowski
sum (exponent 2) of the three mechanism responses, times ``r^(1/3.01142)``
(:mod:`render.vision.discrimination.csf`). The threshold reported per mechanism is that
mechanism's own disc threshold (its best frequency); the combined multiple is at most the
Minkowski sum of the per-mechanism multiples, and equals it when the mechanisms peak at one
frequency.

Where the model holds
---------------------
castleCSF was fitted to chromatic data with backgrounds from 0.02 to 10 000 cd/m² and achromatic
data from 2·10⁻⁵ cd/m²; its disc data have radii from 1/12° to 5°
(:mod:`~render.vision.discrimination.castle_params`). Here:

* **Below 0.02 cd/m²** (the lowest chromatic data) nothing is extrapolated: thresholds and the
  multiple are NaN and ``in_range`` is false. The verdict is ``"likely cannot"`` when an upper
  bound is below 1 and ``"unknown"`` otherwise. The bound is the multiple at 0.02 cd/m² with the
  achromatic contrast replaced by the larger of the photopic (L + M) and the scotopic (rod)
  contrast: it assumes only that no sensitivity grows as the light falls (true of every
  channel over the fitted range, and of rod vision) and that detection by rods is no more
  sensitive than the achromatic mechanism at 0.02 cd/m², where the model's achromatic data on
  white backgrounds already include the rods' part.
* **Above 10 000 cd/m²**: not extrapolated either; verdict ``"unknown"``.
* **Radius outside 1/12°-5°**: clamped to that interval (the flag ``size_clamped`` says so).
  Larger objects are then judged as 5° discs (slightly pessimistic); smaller ones as 1/12°
  discs (optimistic).

Verdicts (:func:`verdict`)
--------------------------
``"easy"`` at 3 or more times threshold, ``"hard"`` from 1 to 3 times, ``"cannot"`` below 1
(common practice, no source: threshold is laboratory detection, known place and unhurried; a
few times threshold is needed to see a difference at a glance). At daylight levels these
thresholds are finer than CIEDE2000's unit: side by side at 100 cd/m² (D65) and 2°, mixtures of
two library materials at ΔE00 = 0.5 from one of them came out at 0.5-9 times threshold (median
3; 200 random pairs, most along the achromatic mechanism) -- CIEDE2000 was fitted to
supra-threshold differences. Library pairs with ΔE00 > 10 are all at least 12 times threshold.

Under a near-monochromatic light all surfaces have one L:M:S ratio, so two surfaces of equal
luminance have no contrast at all. castleCSF's mechanism weights are fixed (balanced for D65),
so a pure *luminance* difference under a non-white light also drives the chromatic mechanisms a
little (at 589 nm: red-green 0.29 and yellow-violet 1.0 times the achromatic contrast); the
multiple is then 1.03 times the achromatic mechanism's alone (at 1 cd/m², 2°), because the
chromatic thresholds for those contrasts are much higher.

Hue at an adaptation state (:func:`hue_availability`)
-----------------------------------------------------
castleCSF has no rods. Hue is reported ``"none"`` in rod vision (CIE 191 MES2 m = 0),
``"unreliable"`` below castleCSF's chromatic data -- photopic adaptation luminance under
0.02 cd/m² or MES2 m under :data:`HUE_MIN_M` -- and ``"available"`` otherwise.
:data:`HUE_MIN_M` is the MES2 state of the dimmest chromatic background in castleCSF's data
(0.02 cd/m² photopic, 0.0534 cd/m² scotopic: ``data/backgrounds.csv`` id 3 of the release),
m = 0.288 by :func:`render.vision.mesopic.solve_mes2`.

References
----------
- M. Ashraf, R. K. Mantiuk, A. Chapiro, S. Wuerger (2024), "castleCSF — A contrast sensitivity
  function of color, area, spatiotemporal frequency, luminance and eccentricity", Journal of
  Vision 24(4):5, release v0.2.4: the model, its disc rule, its fitted range and data.
- M. Ashraf, R. K. Mantiuk, A. Chapiro (2023), "Modeling contrast sensitivity of discs", IS&T
  Electronic Imaging, HVEI-246.
- CIE 191:2010 (MES2): the adaptation coefficient m (:mod:`render.vision.mesopic`).
- CIE 142-2001 (CIEDE2000), for the comparison above.
"""

from __future__ import annotations

import math
from dataclasses import asdict, dataclass
from functools import lru_cache
from typing import Any

import numpy as np
import numpy.typing as npt

from render.vision.discrimination import castle_params as P
from render.vision.discrimination.cones import cone_signals
from render.vision.discrimination.csf import CHANNELS, disc_frequencies_cpd, disc_sensitivities, mechanism_contrasts

__all__ = [
    "EASY_MULTIPLE",
    "HARD_MULTIPLE",
    "HUE_LEVELS",
    "HUE_MIN_M",
    "HUE_MIN_PHOTOPIC_CD_M2",
    "HUE_MIN_SCOTOPIC_CD_M2",
    "VERDICTS",
    "HueAvailability",
    "PairDiscrimination",
    "SurfaceSignals",
    "disc_diameter_deg",
    "discriminate",
    "discriminate_all",
    "discriminate_signals",
    "hue_availability",
    "surface_signals",
    "verdict",
]

#: Multiple of threshold from which a pair is "easy" to tell apart (common practice, no source).
EASY_MULTIPLE = 3.0
#: Multiple of threshold below which a pair "cannot" be told apart (threshold itself).
HARD_MULTIPLE = 1.0
#: Every verdict :func:`discriminate` can give.
VERDICTS = ("easy", "hard", "cannot", "likely cannot", "unknown")
#: Photopic and scotopic luminance of the dimmest chromatic background in castleCSF's data, cd/m².
HUE_MIN_PHOTOPIC_CD_M2 = P.CHROMATIC_LUMINANCE_RANGE_CD_M2[0]
HUE_MIN_SCOTOPIC_CD_M2 = 0.0534186096965401
#: Levels of :func:`hue_availability`.
HUE_LEVELS = ("available", "unreliable", "none")


@lru_cache(maxsize=1)
def _hue_min_m() -> float:
    from render.vision.mesopic import solve_mes2

    _, m = solve_mes2(HUE_MIN_PHOTOPIC_CD_M2, HUE_MIN_SCOTOPIC_CD_M2)
    return float(m)


#: MES2 adaptation coefficient of that background (CIE 191:2010), 0.288.
HUE_MIN_M = _hue_min_m()


@dataclass(frozen=True)
class SurfaceSignals:
    """What the model needs of one surface as seen.

    Attributes
    ----------
    lms
        (L, M, S) cone signals, L + M the luminance in cd/m²
        (:func:`render.vision.discrimination.cones.cone_signals`).
    scotopic_cd_m2
        Scotopic luminance, cd/m² (K'm·Σ L(λ)V'(λ)Δλ).
    """

    lms: tuple[float, float, float]
    scotopic_cd_m2: float


def surface_signals(spectral_radiance: npt.ArrayLike) -> SurfaceSignals:
    """:class:`SurfaceSignals` of a spectral radiance, W·sr⁻¹·m⁻²·nm⁻¹ on the grid, shape (N_BINS,)."""
    from render.colour.observers import scotopic

    radiance = np.asarray(spectral_radiance, dtype=np.float64)
    if radiance.ndim != 1:
        raise ValueError("expected one spectral radiance, shape (N_BINS,)")
    lms = cone_signals(radiance)
    return SurfaceSignals((float(lms[0]), float(lms[1]), float(lms[2])), float(scotopic(radiance)))


@dataclass(frozen=True)
class PairDiscrimination:
    """How well two surfaces can be told apart (see the module text for every figure).

    Attributes
    ----------
    contrast
        Mechanism contrasts (achromatic, red-green, yellow-violet), dimensionless.
    threshold
        Each mechanism's threshold contrast alone for this disc and luminance (NaN out of range).
    channel_multiple
        ``contrast / threshold`` per mechanism (NaN out of range).
    multiple
        The pair's multiple of threshold by castleCSF's disc rule (NaN out of range).
    peak_frequency_cpd
        The frequency at which that rule peaks, cycles/degree (NaN out of range or no contrast).
    scotopic_contrast
        ``|ΔL_s| / mean L_s`` of the two surfaces (rods), dimensionless.
    upper_bound
        Out of range below: the bound of the module text; ``None`` otherwise.
    verdict
        One of :data:`VERDICTS`.
    in_range
        False when the adaptation luminance is outside the model's chromatic range.
    note
        Empty, or why the verdict is limited.
    adaptation_cd_m2, size_deg, radius_deg
        The luminance and size asked for, and the disc radius used (after clamping).
    size_clamped
        True when the radius was clamped to the disc data's range.
    """

    contrast: tuple[float, float, float]
    threshold: tuple[float, float, float]
    channel_multiple: tuple[float, float, float]
    multiple: float
    peak_frequency_cpd: float
    scotopic_contrast: float
    upper_bound: float | None
    verdict: str
    in_range: bool
    note: str
    adaptation_cd_m2: float
    size_deg: float
    radius_deg: float
    size_clamped: bool

    def as_dict(self) -> dict[str, Any]:
        """Plain numbers, strings and lists, with the channel names."""
        out = asdict(self)
        out["channels"] = list(CHANNELS)
        return out


def verdict(multiple: float, *, easy: float = EASY_MULTIPLE, hard: float = HARD_MULTIPLE) -> str:
    """``"easy"`` (≥ easy), ``"hard"`` (≥ hard), ``"cannot"`` (below), ``"unknown"`` (NaN)."""
    if not math.isfinite(multiple):
        return "unknown"
    if multiple >= easy:
        return "easy"
    if multiple >= hard:
        return "hard"
    return "cannot"


def disc_diameter_deg(area_deg2: float) -> float:
    """Diameter of the disc with a given angular area (deg²), degrees: ``2·sqrt(A/π)``."""
    return 2.0 * math.sqrt(max(float(area_deg2), 0.0) / math.pi)


def _triple(v) -> tuple[float, float, float]:
    return (float(v[0]), float(v[1]), float(v[2]))


def _combined(contrast: np.ndarray, sens: np.ndarray) -> tuple[float, float]:
    per_f = np.sqrt(np.sum((contrast[:, None] * sens) ** 2, axis=0))
    k = int(np.argmax(per_f))
    return float(per_f[k]), (float(disc_frequencies_cpd()[k]) if per_f[k] > 0 else math.nan)


def discriminate_signals(
    a: SurfaceSignals, b: SurfaceSignals, adaptation_cd_m2: float, size_deg: float
) -> PairDiscrimination:
    """The model for two surfaces given by their :class:`SurfaceSignals`.

    Parameters
    ----------
    a, b
        The two surfaces as seen.
    adaptation_cd_m2
        Photopic adaptation luminance of the observer, cd/m² (≥ 0).
    size_deg
        Angular size of the pair, degrees: the diameter of a disc of the smaller object's
        angular area (:func:`disc_diameter_deg`) is a good choice.
    """
    lum = float(adaptation_cd_m2)
    size = float(size_deg)
    if not (math.isfinite(lum) and lum >= 0.0):
        raise ValueError(f"adaptation luminance must be finite and >= 0, got {adaptation_cd_m2!r}")
    if not (math.isfinite(size) and size > 0.0):
        raise ValueError(f"angular size must be finite and > 0, got {size_deg!r}")
    la = np.asarray(a.lms, dtype=np.float64)
    lb = np.asarray(b.lms, dtype=np.float64)
    contrast = mechanism_contrasts(0.5 * (la + lb), la - lb)
    sa, sb = float(a.scotopic_cd_m2), float(b.scotopic_cd_m2)
    mean_s = 0.5 * (sa + sb)
    scot = abs(sa - sb) / mean_s if mean_s > 0 else math.nan

    r_lo, r_hi = P.DISC_RADIUS_RANGE_DEG
    radius = min(max(0.5 * size, r_lo), r_hi)
    clamped = radius != 0.5 * size
    nan3 = (math.nan, math.nan, math.nan)
    lo, hi = P.CHROMATIC_LUMINANCE_RANGE_CD_M2
    common = dict(
        contrast=_triple(contrast),
        scotopic_contrast=scot,
        adaptation_cd_m2=lum,
        size_deg=size,
        radius_deg=radius,
        size_clamped=clamped,
    )
    if not np.all(np.isfinite(contrast)):
        return PairDiscrimination(
            threshold=nan3,
            channel_multiple=nan3,
            multiple=math.nan,
            peak_frequency_cpd=math.nan,
            upper_bound=None,
            verdict="unknown",
            in_range=lo <= lum <= hi,
            note="no light from the pair: contrast undefined",
            **common,
        )
    if lum < lo:
        bound_contrast = contrast.copy()
        if math.isfinite(scot):
            bound_contrast[0] = max(bound_contrast[0], scot)
        bound, _ = _combined(bound_contrast, disc_sensitivities(lo, radius))
        return PairDiscrimination(
            threshold=nan3,
            channel_multiple=nan3,
            multiple=math.nan,
            peak_frequency_cpd=math.nan,
            upper_bound=bound,
            verdict="likely cannot" if bound < HARD_MULTIPLE else "unknown",
            in_range=False,
            note=f"below the model's range ({lo:g} cd/m²): not extrapolated",
            **common,
        )
    if lum > hi:
        return PairDiscrimination(
            threshold=nan3,
            channel_multiple=nan3,
            multiple=math.nan,
            peak_frequency_cpd=math.nan,
            upper_bound=None,
            verdict="unknown",
            in_range=False,
            note=f"above the model's range ({hi:g} cd/m²): not extrapolated",
            **common,
        )
    sens = disc_sensitivities(lum, radius)
    threshold = 1.0 / sens.max(axis=-1)
    multiple, peak = _combined(contrast, sens)
    return PairDiscrimination(
        threshold=_triple(threshold),
        channel_multiple=_triple(contrast / threshold),
        multiple=multiple,
        peak_frequency_cpd=peak,
        upper_bound=None,
        verdict=verdict(multiple),
        in_range=True,
        note="",
        **common,
    )


def discriminate(
    radiance_a: npt.ArrayLike, radiance_b: npt.ArrayLike, adaptation_cd_m2: float, size_deg: float
) -> PairDiscrimination:
    """The model for two spectral radiances (W·sr⁻¹·m⁻²·nm⁻¹ on the grid, shape (N_BINS,)).

    See :func:`discriminate_signals` for the other arguments.
    """
    return discriminate_signals(surface_signals(radiance_a), surface_signals(radiance_b), adaptation_cd_m2, size_deg)


def discriminate_all(
    surfaces: list[SurfaceSignals], adaptation_cd_m2: float, sizes_deg: npt.ArrayLike
) -> dict[tuple[int, int], PairDiscrimination]:
    """Every pair ``(i, j)``, ``i < j``, of surfaces seen in one view at one adaptation luminance.

    ``sizes_deg[i]`` is the angular size of surface i; a pair is judged at the smaller of its
    two sizes (the smaller patch limits the comparison; our choice).
    """
    sizes = np.asarray(sizes_deg, dtype=np.float64).reshape(-1)
    if sizes.size != len(surfaces):
        raise ValueError("one size per surface expected")
    out = {}
    for i in range(len(surfaces)):
        for j in range(i + 1, len(surfaces)):
            out[(i, j)] = discriminate_signals(
                surfaces[i], surfaces[j], adaptation_cd_m2, float(min(sizes[i], sizes[j]))
            )
    return out


@dataclass(frozen=True)
class HueAvailability:
    """Whether hue can be named at an adaptation state.

    Attributes
    ----------
    level
        ``"available"``, ``"unreliable"`` or ``"none"`` (:data:`HUE_LEVELS`).
    reason
        A short sentence saying why (empty when available).
    """

    level: str
    reason: str

    @property
    def available(self) -> bool:
        """True when hue can be named."""
        return self.level == "available"


def hue_availability(photopic_cd_m2: float, m: float) -> HueAvailability:
    """Is hue available at this adaptation state (photopic luminance, MES2 m)? Module text."""
    lp = float(photopic_cd_m2)
    mm = float(m)
    if mm <= 0.0:
        return HueAvailability("none", "rod vision (CIE 191 MES2 m = 0): no colour")
    if lp < HUE_MIN_PHOTOPIC_CD_M2 or mm < HUE_MIN_M:
        return HueAvailability(
            "unreliable",
            f"below the chromatic model's data ({HUE_MIN_PHOTOPIC_CD_M2:g} cd/m², MES2 m {HUE_MIN_M:.2f}): "
            "colour not reliable at this light level",
        )
    return HueAvailability("available", "")
