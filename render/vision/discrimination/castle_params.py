"""castleCSF: the fitted parameters, as published (data only; the equations are in ``csf.py``).

Every constant below is a fitted parameter of castleCSF (Ashraf, Mantiuk, Chapiro & Wuerger,
Journal of Vision 24(4):5, 2024), read from the authors' MIT-licensed MATLAB release
(:data:`CASTLE_RELEASE`). The parameter values are those of release v0.2.0 (2024-03-27, "version
used in Ashraf et al. (2024)") and are unchanged in v0.2.4; the file that holds each block is
named beside it. Only the terms lampcast evaluates are kept: static stimuli (0 Hz) seen in the
fovea (eccentricity 0), so the temporal-frequency and eccentricity parameters of the release
are left out except the ones a static stimulus still uses.

The luminance dependences are ``get_lum_dep`` of ``matlab/CSF_base.m`` with 1, 2, 3 or 5
parameters (:func:`render.vision.discrimination.csf.luminance_dependence`).

References
----------
- M. Ashraf, R. K. Mantiuk, A. Chapiro, S. Wuerger (2024), "castleCSF — A contrast sensitivity
  function of color, area, spatiotemporal frequency, luminance and eccentricity", Journal of
  Vision 24(4):5; code and data released under the MIT licence (:data:`CASTLE_RELEASE`).
- M. Ashraf, R. K. Mantiuk, A. Chapiro (2023), "Modeling contrast sensitivity of discs",
  IS&T Electronic Imaging, Human Vision and Electronic Imaging, HVEI-246: the disc parameters.
"""

from __future__ import annotations

from dataclasses import dataclass

__all__ = [
    "ACHROMATIC_SUSTAINED",
    "ACHROMATIC_TRANSIENT",
    "ACHROMATIC_TRANSIENT_PEAK",
    "CASTLE_RELEASE",
    "CHROMATIC_LUMINANCE_RANGE_CD_M2",
    "CHROMATIC_MINKOWSKI_EXPONENT",
    "DISC_AREA_DEG2",
    "DISC_EXPONENT",
    "DISC_FREQUENCIES_CPD",
    "DISC_RADIUS_RANGE_DEG",
    "ACHROMATIC_LUMINANCE_RANGE_CD_M2",
    "MECHANISM_MATRIX",
    "MODEL_LUMINANCE_RANGE_CD_M2",
    "RED_GREEN",
    "YELLOW_VIOLET",
    "ChannelParameters",
]

#: The release the constants were read from.
CASTLE_RELEASE = (
    "castleCSF v0.2.4 (MATLAB code, commit f4b0b722af83001d7af979281e06ca642d36e4e8, "
    "2025-10-16; fitted parameters as in v0.2.0, the version of Ashraf et al. 2024)"
)


@dataclass(frozen=True)
class ChannelParameters:
    """One mechanism's fitted parameters for a static stimulus.

    Attributes
    ----------
    peak_sensitivity
        ``S_max``: parameters of its luminance dependence (1, 2, 3 or 5 numbers).
    peak_frequency
        ``f_max``, cycles per degree: parameters of its luminance dependence.
    bandwidth
        ``bw`` of the truncated log-parabola (the parabola is divided by ``2**bw``).
    plateau
        ``a``: below the peak frequency the achromatic parabola is held at ``1 − a`` where it
        would fall lower (0 and unused for the chromatic channels, held at 1 there).
    critical_area_deg2, critical_frequency_cpd
        ``A_0`` and ``f_0`` of the stimulus-size model after Rovamo et al. (1993).
    """

    peak_sensitivity: tuple[float, ...]
    peak_frequency: tuple[float, ...]
    bandwidth: float
    plateau: float
    critical_area_deg2: float
    critical_frequency_cpd: float


# --- matlab/CSF_stelaCSF_lum_peak.m, get_default_par (= CSF_castleCSF.m, p.ach.*) -------------
#: Achromatic sustained mechanism (``p.ach_sust``).
ACHROMATIC_SUSTAINED = ChannelParameters(
    peak_sensitivity=(56.4947, 7.54726, 0.144532, 5.58341e-07, 9.66862e09),
    peak_frequency=(1.78119, 91.5718, 0.256682),
    bandwidth=0.000213047,
    plateau=0.100207,
    critical_area_deg2=157.103,
    critical_frequency_cpd=0.702338,
)
#: Achromatic transient mechanism (``p.ach_trans``).
ACHROMATIC_TRANSIENT = ChannelParameters(
    peak_sensitivity=(0.193434, 2748.09),
    peak_frequency=(0.000316696,),
    bandwidth=2.6761,
    plateau=0.000241177,
    critical_area_deg2=3.81611,
    critical_frequency_cpd=3.01389,
)
#: Temporal response of the transient mechanism at 0 Hz: ``sigma_trans``, the slope and
#: intercept of its peak frequency ``omega_0 = slope·log10(L) + intercept`` and the exponent
#: ``beta_trans`` (a literal in ``get_sust_trans_resp``). The sustained response is 1 at 0 Hz.
ACHROMATIC_TRANSIENT_PEAK = {
    "sigma": 0.0844836,
    "omega_slope": 2.41482,
    "omega_intercept": 4.7036,
    "beta": 0.1898,
}

# --- matlab/CSF_castleCSF_chrom.m, get_default_par('rg') and ('yv') (= CSF_castleCSF.m) -------
#: Red-green mechanism (``p.rg``); its sustained temporal response is 1 at 0 Hz.
RED_GREEN = ChannelParameters(
    peak_sensitivity=(681.434, 38.0038, 0.480386),
    peak_frequency=(0.0178364,),
    bandwidth=2.42104,
    plateau=0.0,
    critical_area_deg2=2816.44,
    critical_frequency_cpd=0.0711058,
)
#: Yellow-violet mechanism (``p.yv``).
YELLOW_VIOLET = ChannelParameters(
    peak_sensitivity=(166.683, 62.8974, 0.41193),
    peak_frequency=(0.00425753,),
    bandwidth=2.68197,
    plateau=0.0,
    critical_area_deg2=2.82789e07,
    critical_frequency_cpd=0.000635093,
)

# --- matlab/CSF_castleCSF.m: colour mechanisms and their combination --------------------------
#: Cone (L, M, S) to mechanism (achromatic, red-green, yellow-violet) matrix: ``Mones`` with
#: ``colmat = [2.3112 0 0 50.9875]`` in the free cells and ``get_lms2acc``'s signs.
MECHANISM_MATRIX = (
    (1.0, 1.0, 0.0),
    (1.0, -2.3112, 0.0),
    (-1.0, -1.0, 50.9875),
)
#: ``chrom_ch_beta``: the three normalised mechanism contrasts add as a Minkowski sum.
CHROMATIC_MINKOWSKI_EXPONENT = 2.0
#: ``Y_min``, ``Y_max``: the luminance domain the code accepts, cd/m².
MODEL_LUMINANCE_RANGE_CD_M2 = (0.001, 10000.0)

# --- matlab/CSF_castleCSF.m, sensitivity_edge: discs (Ashraf, Mantiuk & Chapiro 2023) ---------
#: Fixed Gabor area the disc model evaluates, deg².
DISC_AREA_DEG2 = 2.42437
#: Exponent of the radius factor ``radius**(1/beta)``.
DISC_EXPONENT = 3.01142
#: Frequencies over which the disc model takes the peak: 64 log-spaced, 0.125-16 cpd.
DISC_FREQUENCIES_CPD = (0.125, 16.0, 64)

# --- data/data_aggregated_merged.csv of the same release: the range the model was fitted in ---
#: Background luminance of the chromatic (red-green and yellow-violet) measurements, cd/m²
#: (the 'hdr_csf' and 'kim2013' datasets reach down to 0.02 cd/m²).
CHROMATIC_LUMINANCE_RANGE_CD_M2 = (0.02, 10000.0)
#: Background luminance of the achromatic measurements, cd/m² ('hdrvdp_csf' to 2e-5 cd/m²).
ACHROMATIC_LUMINANCE_RANGE_CD_M2 = (2e-5, 10000.0)
#: Radius of the disc stimuli the model was fitted to, degrees ('hdr_csf_disc' 1/12-1°,
#: 'hansen2009' 4°, 'kong2018' 5°).
DISC_RADIUS_RANGE_DEG = (1.0 / 12.0, 5.0)
