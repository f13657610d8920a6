"""Colour discrimination that depends on the light level: castleCSF for pairs of surfaces.

Whether an observer can tell two surfaces apart at the luminance and angular size at which they
are seen, from their spectral radiances, with the luminance-dependent contrast sensitivity model
castleCSF (achromatic, red-green and yellow-violet mechanisms; Ashraf et al. 2024). CIEDE2000
has no light-level term; this model's thresholds rise as the light falls. The modules, in the
order data flows through them:

* :mod:`~render.vision.discrimination.cones` -- CIE 2006 cone signals (L + M in cd/m²) of
  spectral radiances on the lampcast grid;
* :mod:`~render.vision.discrimination.castle_params` -- castleCSF's fitted parameters and the
  range of its data (data only);
* :mod:`~render.vision.discrimination.csf` -- castleCSF's equations for static foveal Gabors and
  discs, and its mechanism contrasts;
* :mod:`~render.vision.discrimination.pairs` -- a pair's contrasts, thresholds, multiple of
  threshold and verdict (:func:`discriminate`), and whether hue is available at an adaptation
  state (:func:`hue_availability`).

Fitted range: chromatic data 0.02-10 000 cd/m², achromatic from 2·10⁻⁵ cd/m², discs of radius
1/12°-5°; below 0.02 cd/m² the model is not extrapolated (``pairs`` says what it reports then).

References
----------
- M. Ashraf, R. K. Mantiuk, A. Chapiro, S. Wuerger (2024), "castleCSF — A contrast sensitivity
  function of color, area, spatiotemporal frequency, luminance and eccentricity", Journal of
  Vision 24(4):5; MIT-licensed release v0.2.4 (fitted parameters of v0.2.0).
- M. Ashraf, R. K. Mantiuk, A. Chapiro (2023), "Modeling contrast sensitivity of discs", IS&T
  Electronic Imaging, HVEI-246.
- CIE 170-1:2006 and Stockman & Sharpe (2000): the cone fundamentals.
- CIE 191:2010 (MES2): the adaptation coefficient behind :func:`hue_availability`.
"""

from render.vision.discrimination.cones import CONE_ROD_RESPONSES, cone_fundamentals, cone_rod_weights, cone_signals
from render.vision.discrimination.csf import CHANNELS, disc_sensitivities, gabor_sensitivity, mechanism_contrasts
from render.vision.discrimination.pairs import (
    EASY_MULTIPLE,
    HARD_MULTIPLE,
    HUE_MIN_M,
    VERDICTS,
    HueAvailability,
    PairDiscrimination,
    SurfaceSignals,
    disc_diameter_deg,
    discriminate,
    discriminate_all,
    discriminate_signals,
    hue_availability,
    surface_signals,
    verdict,
)

__all__ = [
    "CHANNELS",
    "CONE_ROD_RESPONSES",
    "EASY_MULTIPLE",
    "HARD_MULTIPLE",
    "HUE_MIN_M",
    "VERDICTS",
    "HueAvailability",
    "PairDiscrimination",
    "SurfaceSignals",
    "cone_fundamentals",
    "cone_rod_weights",
    "cone_signals",
    "disc_diameter_deg",
    "disc_sensitivities",
    "discriminate",
    "discriminate_all",
    "discriminate_signals",
    "gabor_sensitivity",
    "hue_availability",
    "mechanism_contrasts",
    "surface_signals",
    "verdict",
]
