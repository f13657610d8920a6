"""Colour appearance under rod intrusion (mesopic colour shift and loss of colour).

Published structure (Cao, Pokorny, Smith & Zele 2008, Vision Research 48(26), "Rod
contributions to color perception: linear with rod contrast"; applied to images by Kirk &
O'Brien 2011, ACM TOG 30(4) 42, "Perceptually based tone mapping for low-light conditions"):

1. Photoreceptor signals: cone excitations ``q = (L, M, S)`` in MacLeod-Boynton trolands
   (L + M = photopic retinal illuminance; S scaled so that S/(L+M) = 1 for the equal-energy
   white) and the rod excitation ``q_R`` in scotopic trolands.
2. Each cone pathway has a gain control that the rod signal shares:
   ``g_X = [1 + 0.33·(q_X + κ_X·q_R)/m_X]^(−1/2)``, ``κ = (κ1, κ1, κ2)``, ``m_X`` the peak
   sensitivity of the X fundamental in these units. The gains are set by the steady
   adapting field (Cao et al. measured rod-driven changes about a fixed background), so they
   are evaluated once, for the adapting white at the adaptation luminance: the rod signal then
   acts linearly ("linear with rod contrast"), with gains that depend on the light level.
3. The rod signal enters the three post-receptoral pathways -- red-green (PC, M−L),
   blue-yellow (KC, S−(L+M)) and luminance (MC, L+M) -- linearly:

       ΔO = (K/S)·A·(κ ⊙ g ⊙ q_R / m),
       A = [[−(k3 + r_w), 1 + k3·r_w, 0],
            [p·k3,        (1 − p)·k3, 1],
            [p·S,         (1 − p)·S,  0]]

   and is added to the cone opponent signals; back in cone terms
   ``ΔL = (ΔO_lum − ΔO_rg)/2``, ``ΔM = (ΔO_lum + ΔO_rg)/2``, ``ΔS = ΔO_by + ΔO_lum``.

Constants (all **from memory** of the two papers -- the same values appear in public
implementations of Kirk & O'Brien -- not checked against the papers' text):
K = 45, S = 10 (static saturation), k3 = 0.6 (surround strength), r_w = 0.139 (ratio of
responses to white), p = 0.6189 (relative L-cone weight), gain constant 0.33, rod strengths
κ1 = 0.2, κ2 = 0.3 (Kirk & O'Brien hold these constant; uncertain).
Cao et al.'s Table 1 peaks, m = (0.63721, 0.39242, 1.6064), are recomputed here from the cone
transform below (0.6368, 0.3928, 1.7826): L and M agree to 0.1 %, which confirms the troland
units; S differs by 11 % because we take S ∝ Z.

What lampcast adds (our choices, documented so they can be changed):

* **Strength from CIE 191.** Kirk & O'Brien scale ΔO by a free gain. Here the rod part is
  scaled so that, for the adapting white, its share of the luminance signal equals the rod
  share of the MES2 mesopic luminance of the adaptation state,
  ``w_r = (1 − m)·V'(λ0)·L_s / [m·L_p + (1 − m)·V'(λ0)·L_s]``, and the cone part by
  ``w_c = 1 − w_r``: ``q̂ = w_c·q + w_r·n·ΔQ(q, q_R)`` with ``n`` normalising the white's rod
  part to the white's L + M. So the effect is nil where CIE 191 says vision is photopic
  (m = 1, L ≥ 5 cd/m²: the step is then exactly the identity) and grows as m falls; at m = 0
  every colour is the rod signal alone (monochrome).
* **Re-referenced to the adapting white.** The rod signal has no counterpart in the colour of
  any light (in these units it would sit outside the spectrum locus), and Cao et al. measured
  shifts *relative to the adapting field*. So the rod-modified signals are divided, von Kries
  fashion, by those of the adapting white and multiplied by the white's cone signals: the white
  keeps its colour, colours with more rod excitation than the white (blues, greens) move toward
  the rod direction (greener, bluer), the others away, and all lose colourfulness as the rod
  share grows. The lamp colour itself is left to the chromatic adaptation of the display step.
* **Luminance from CIE 191.** The result is rescaled per pixel so that its Y is the pixel's
  MES2 mesopic luminance (with the adaptation state's m): the appearance model sets the
  chromaticity, CIE 191 the luminance.

Cone transform: Smith & Pokorny (1975) fundamentals in MacLeod & Boynton (1979) scaling as a
transform of CIE XYZ (from memory; it is exact for the Judd-Vos modified XYZ and a close
approximation for CIE 1931):  L = 0.15514 X + 0.54312 Y − 0.03286 Z,
M = −0.15514 X + 0.45684 Y + 0.03286 Z, and S = Z (so S/(L+M) = 1 for the equal-energy white).
The renderer may instead integrate :func:`extra_channel_weights` to give exact cone signals.

References
----------
- D. Cao, J. Pokorny, V. C. Smith, A. J. Zele (2008), "Rod contributions to color perception:
  linear with rod contrast", Vision Research 48(26): the pathway model and its constants
  **(from memory)**.
- A. G. Kirk, J. F. O'Brien (2011), "Perceptually based tone mapping for low-light
  conditions", ACM Transactions on Graphics 30(4), 42: the model applied to images
  **(from memory)**.
- V. C. Smith, J. Pokorny (1975), "Spectral sensitivity of the foveal cone photopigments
  between 400 and 500 nm", Vision Research 15: the cone fundamentals (colour-science's table
  for :func:`extra_channel_weights`; the XYZ transform from memory).
- D. I. A. MacLeod, R. M. Boynton (1979), "Chromaticity diagram showing cone excitation by
  stimuli of equal luminance", JOSA 69(8): the troland scaling of the cone signals.
- CIE 191:2010 (MES2): the rod share and the output luminance.
"""

from __future__ import annotations

from functools import lru_cache

import numba
import numpy as np
import numpy.typing as npt

from render.colour.matrices import apply_matrix
from render.vision.adaptation import AdaptationState
from render.vision.mesopic import V_PRIME_LAMBDA0

__all__ = [
    "CAO_2008_CONE_PEAKS",
    "GAIN_CONSTANT",
    "LMS_TO_XYZ",
    "OPPONENT_TO_LMS",
    "PATHWAY_K",
    "PATHWAY_L_WEIGHT",
    "PATHWAY_STATIC_SATURATION",
    "PATHWAY_SURROUND_K3",
    "PATHWAY_WHITE_RATIO",
    "ROD_STRENGTH",
    "XYZ_TO_LMS",
    "cone_peak_sensitivities",
    "extra_channel_weights",
    "lms_to_xyz",
    "pathway_gains",
    "rod_increment_per_troland",
    "rod_intrusion",
    "rod_share",
    "xyz_to_lms",
]

#: XYZ -> MacLeod-Boynton LMS (Smith & Pokorny 1975 fundamentals; S = Z). From memory.
XYZ_TO_LMS = np.array(
    [
        [0.15514, 0.54312, -0.03286],
        [-0.15514, 0.45684, 0.03286],
        [0.0, 0.0, 1.0],
    ]
)
LMS_TO_XYZ = np.linalg.inv(XYZ_TO_LMS)

#: Cao et al. (2008) Table 1 peak cone sensitivities, for comparison only (from memory).
CAO_2008_CONE_PEAKS = (0.63721, 0.39242, 1.6064)
#: Pathway constants of Cao et al. (2008) as used by Kirk & O'Brien (2011); from memory.
PATHWAY_K = 45.0
PATHWAY_STATIC_SATURATION = 10.0
PATHWAY_SURROUND_K3 = 0.6
PATHWAY_WHITE_RATIO = 0.139
PATHWAY_L_WEIGHT = 0.6189
GAIN_CONSTANT = 0.33
#: Rod input strengths κ1 (to L and M pathways) and κ2 (to S); from memory, uncertain.
ROD_STRENGTH = np.array([0.2, 0.2, 0.3])


@lru_cache(maxsize=1)
def cone_peak_sensitivities() -> np.ndarray:
    """Peak of each cone fundamental (L, M, S) of :data:`XYZ_TO_LMS` on the lampcast grid."""
    from render.colour.observers import cmfs_xyz

    return (cmfs_xyz() @ XYZ_TO_LMS.T).max(axis=0)


@lru_cache(maxsize=1)
def extra_channel_weights() -> np.ndarray:
    """Optional renderer channel: exact cone signals from spectral radiance, (N_BINS, 3).

    ``lms_cd_m2 = Km·Σ L(λ)·w(λ)·Δλ`` with ``w`` the Smith & Pokorny (1975) cone
    fundamentals (colour-science ``MSDS_CMFS_LMS['Smith & Pokorny 1975 Normal Trichromats']``,
    interpolated to 1 nm), in MacLeod-Boynton scaling: L and M weighted so that L + M best fits
    V(λ) (least squares on the grid), S scaled so that S/(L+M) = 1 for the equal-energy white.
    Units then match :data:`XYZ_TO_LMS` applied to XYZ in cd/m².
    """
    import colour

    from render.colour.observers import KM_LM_PER_W, photopic_lef
    from render.colour.spectra import BIN_WIDTH_NM, WAVELENGTHS_NM

    sd = colour.colorimetry.MSDS_CMFS_LMS["Smith & Pokorny 1975 Normal Trichromats"].copy()
    sd = sd.align(colour.SpectralShape(float(WAVELENGTHS_NM[0]), float(WAVELENGTHS_NM[-1]), BIN_WIDTH_NM))
    lms = np.asarray(sd.values, dtype=np.float64)
    ab, *_ = np.linalg.lstsq(lms[:, :2], photopic_lef(), rcond=None)
    out = lms.copy()
    out[:, 0] *= ab[0]
    out[:, 1] *= ab[1]
    out[:, 2] *= (out[:, 0] + out[:, 1]).sum() / lms[:, 2].sum()
    out *= KM_LM_PER_W
    out.setflags(write=False)
    return out


def xyz_to_lms(xyz: npt.ArrayLike) -> np.ndarray:
    """MacLeod-Boynton cone signals from XYZ (last axis), same units as XYZ."""
    return apply_matrix(XYZ_TO_LMS, xyz)


def lms_to_xyz(lms: npt.ArrayLike) -> np.ndarray:
    """Inverse of :func:`xyz_to_lms`."""
    return apply_matrix(LMS_TO_XYZ, lms)


def _pathway_matrix() -> np.ndarray:
    k3, rw, p, s = PATHWAY_SURROUND_K3, PATHWAY_WHITE_RATIO, PATHWAY_L_WEIGHT, PATHWAY_STATIC_SATURATION
    a = np.array(
        [
            [-(k3 + rw), 1.0 + k3 * rw, 0.0],
            [p * k3, (1.0 - p) * k3, 1.0],
            [p * s, (1.0 - p) * s, 0.0],
        ]
    )
    return (PATHWAY_K / s) * a


#: Opponent (M−L, S−(L+M), L+M) increments back to (L, M, S) increments.
OPPONENT_TO_LMS = np.array(
    [
        [-0.5, 0.0, 0.5],
        [0.5, 0.0, 0.5],
        [0.0, 1.0, 1.0],
    ]
)


def pathway_gains(q_adapt_td: npt.ArrayLike, q_rod_adapt_td: float) -> np.ndarray:
    """Cone-pathway gains ``g_X = [1 + 0.33·(q_X + κ_X·q_R)/m_X]^(−1/2)`` (Cao et al. 2008)
    for the adapting field's cone (3,) and rod excitations, trolands."""
    q = np.maximum(np.asarray(q_adapt_td, dtype=np.float64), 0.0)
    qr = max(float(q_rod_adapt_td), 0.0)
    return 1.0 / np.sqrt(1.0 + GAIN_CONSTANT * (q + ROD_STRENGTH * qr) / cone_peak_sensitivities())


def rod_increment_per_troland(gains: npt.ArrayLike) -> np.ndarray:
    """Cone-signal increments (ΔL, ΔM, ΔS) per scotopic troland of rod excitation
    (Cao et al. 2008 pathway model with the given gains), before any strength scaling."""
    x = ROD_STRENGTH * np.asarray(gains, dtype=np.float64) / cone_peak_sensitivities()
    return OPPONENT_TO_LMS @ (_pathway_matrix() @ x)


def rod_share(state: AdaptationState, v0: float = V_PRIME_LAMBDA0) -> float:
    """Rod share of the adapting white's MES2 luminance, ``(1−m)V'L_s / (mL_p + (1−m)V'L_s)``."""
    cone = state.m * state.photopic_cd_m2
    rod = (1.0 - state.m) * v0 * state.scotopic_cd_m2
    if cone + rod <= 0:
        return 1.0 - state.m
    return rod / (cone + rod)


def rod_intrusion(
    xyz_cd_m2: npt.ArrayLike,
    scotopic_cd_m2: npt.ArrayLike,
    mesopic_cd_m2: npt.ArrayLike,
    state: AdaptationState,
    lms_cd_m2: npt.ArrayLike | None = None,
    enabled: bool = True,
) -> np.ndarray:
    """Perceived colour (as absolute XYZ, cd/m², Y = mesopic luminance) under rod intrusion.

    Parameters
    ----------
    xyz_cd_m2
        (..., 3) absolute CIE 1931 XYZ of the stimuli, cd/m².
    scotopic_cd_m2
        (...) scotopic luminance, cd/m² (scotopic).
    mesopic_cd_m2
        (...) per-pixel MES2 luminance for the state's m (:func:`render.vision.mesopic.mesopic_image`).
    state
        The adaptation state (m, adaptation luminances, adapting white, pupil).
    lms_cd_m2
        Optional (..., 3) exact cone signals from :func:`extra_channel_weights`; default
        :func:`xyz_to_lms` of ``xyz_cd_m2``.
    enabled
        ``False`` keeps the photopic chromaticity and only sets Y to the mesopic luminance.

    Returns
    -------
    (..., 3) XYZ, cd/m², whose Y is ``mesopic_cd_m2`` and whose chromaticity is the
    rod-modified appearance (see module text). Exactly the input when m = 1.
    """
    xyz = np.asarray(xyz_cd_m2, dtype=np.float64)
    shape = np.broadcast_shapes(xyz.shape[:-1], np.shape(mesopic_cd_m2), np.shape(scotopic_cd_m2))
    xyz = np.ascontiguousarray(np.broadcast_to(xyz, (*shape, 3)).reshape(-1, 3))
    lmes = np.ascontiguousarray(np.broadcast_to(np.asarray(mesopic_cd_m2, dtype=np.float64), shape).reshape(-1))
    white = np.asarray(state.white_xyz, dtype=np.float64)
    w_r = rod_share(state) if enabled else 0.0
    # Per-pixel work in one pass (_rod_kernel); the constants of the adapting white here.
    rod_unit = np.zeros(3)
    gain = np.ones(3)
    w_c = 1.0
    lms = np.zeros((0, 3))
    qr = np.zeros(0)
    if w_r > 0.0:
        area_mm2 = np.pi * (0.5 * state.pupil_diameter_mm) ** 2
        if lms_cd_m2 is not None:
            lms = np.asarray(lms_cd_m2, dtype=np.float64)
            lms = np.ascontiguousarray(np.broadcast_to(lms, (*shape, 3)).reshape(-1, 3))
        qr = np.asarray(scotopic_cd_m2, dtype=np.float64)
        qr = np.ascontiguousarray(np.broadcast_to(qr, shape).reshape(-1))
        lw = max(state.photopic_cd_m2, 1e-12)
        # Adapting white at the adaptation luminance: cone and rod signals (cd/m² units; the
        # pupil area only matters for the gains, which need trolands).
        q_w = xyz_to_lms(white * lw)
        qr_w = max(state.white_sp_ratio * lw, 1e-300)
        d = rod_increment_per_troland(pathway_gains(q_w * area_mm2, qr_w * area_mm2))
        # Rod part normalised so that, for the white, it carries the white's L + M.
        rod_unit = d * ((q_w[0] + q_w[1]) / (d[0] + d[1]) / qr_w)
        w_c = 1.0 - w_r
        q_hat_w = w_c * q_w + w_r * qr_w * rod_unit
        gain = q_w / q_hat_w
    out = np.empty_like(xyz)
    _rod_kernel(xyz, lms, qr, lmes, XYZ_TO_LMS, LMS_TO_XYZ, rod_unit, gain, w_c, w_r, white, out)
    return out.reshape(*shape, 3)


@numba.njit(cache=True, nogil=True)
def _rod_kernel(xyz, lms, qr, lmes, to_lms, to_xyz, rod_unit, gain, w_c, w_r, white, out):
    """Per pixel: ``q̂ = w_c·max(q, 0) + w_r·max(q_R, 0)·rod_unit``, back to XYZ with the white's
    von Kries gain, then scaled to the pixel's mesopic luminance (:func:`rod_intrusion`).
    ``w_r = 0`` keeps the input XYZ; ``lms`` empty: cone signals from XYZ."""
    for i in range(xyz.shape[0]):
        x = xyz[i, 0]
        y = xyz[i, 1]
        z = xyz[i, 2]
        if w_r > 0.0:
            if lms.shape[0] > 0:
                l0 = lms[i, 0]
                l1 = lms[i, 1]
                l2 = lms[i, 2]
            else:
                l0 = to_lms[0, 0] * x + to_lms[0, 1] * y + to_lms[0, 2] * z
                l1 = to_lms[1, 0] * x + to_lms[1, 1] * y + to_lms[1, 2] * z
                l2 = to_lms[2, 0] * x + to_lms[2, 1] * y + to_lms[2, 2] * z
            r = w_r * max(qr[i], 0.0)
            h0 = (w_c * max(l0, 0.0) + r * rod_unit[0]) * gain[0]
            h1 = (w_c * max(l1, 0.0) + r * rod_unit[1]) * gain[1]
            h2 = (w_c * max(l2, 0.0) + r * rod_unit[2]) * gain[2]
            x = to_xyz[0, 0] * h0 + to_xyz[0, 1] * h1 + to_xyz[0, 2] * h2
            y = to_xyz[1, 0] * h0 + to_xyz[1, 1] * h1 + to_xyz[1, 2] * h2
            z = to_xyz[2, 0] * h0 + to_xyz[2, 1] * h1 + to_xyz[2, 2] * h2
        lm = max(lmes[i], 0.0)
        if y > 1e-300:
            scale = lm / y
            out[i, 0] = x * scale
            out[i, 1] = y * scale
            out[i, 2] = z * scale
        else:
            # No photopic signal at all: the white's chromaticity at the pixel's L_mes.
            out[i, 0] = white[0] * lm
            out[i, 1] = white[1] * lm
            out[i, 2] = white[2] * lm
