"""False-colour luminance maps: the colour ramp and the mapping of luminance in cd/m² onto it.

The colour ramp is lampcast's own: a path in OkLCh (Oklab, Ottosson 2020, in polar form) from a
dark blue-violet to a light yellow through teal,

    L(t) = 0.22 + 0.72·t,   h(t) = 275° − 180°·t,   C(t) = 0.075 + 0.055·sin(π·t),

each point brought into the sRGB gamut at constant lightness and hue
(:func:`render.vision.display.gamut_map_oklab`), then re-spaced so that consecutive entries are
equally far apart in Oklab (perceptually even steps). Lightness rises monotonically from end to
end, which is the cue that survives colour-vision deficiency; hue runs along the blue-yellow
direction that protan and deutan observers keep. ``tests/test_vision_falsecolour.py`` checks
monotone CIE L* for normal vision and under the Machado et al. (2009) simulations of
protanopia, deuteranopia and tritanopia.

Luminance is mapped on a log10 scale between two decades (automatic: the decades around the
0.5th and 99.5th percentiles of the positive values, at least one decade apart, or given).
The legend that labels the ramp in cd/m² is a picture, drawn by
:mod:`render.output.luminance_legend`.

References
----------
- B. Ottosson (2020), "A perceptual color space for image processing" (Oklab, OkLCh).
- G. M. Machado, M. M. Oliveira, L. A. F. Fernandes (2009), "A physiologically-based model
  for simulation of color vision deficiency", IEEE TVCG 15(6): the simulations the tests use
  (through colour-science).
- The ramp itself and the decade range are our own design, no source.
"""

from __future__ import annotations

import math
from collections.abc import Iterable
from functools import lru_cache

import numpy as np
import numpy.typing as npt

from render.colour.oklab import oklab_to_xyz, xyz_to_oklab
from render.vision.display import gamut_map_oklab

__all__ = [
    "RAMP_CHROMA",
    "RAMP_HUE_DEG",
    "RAMP_LIGHTNESS",
    "auto_range_decades",
    "false_colour",
    "luminance_ramp",
    "shared_range_decades",
]

#: OkLCh lightness, hue (degrees) and chroma of the ramp's two ends (chroma: base and bulge).
RAMP_LIGHTNESS = (0.22, 0.94)
RAMP_HUE_DEG = (275.0, 95.0)
RAMP_CHROMA = (0.075, 0.055)


def _ramp_raw(t: np.ndarray) -> np.ndarray:
    lightness = RAMP_LIGHTNESS[0] + (RAMP_LIGHTNESS[1] - RAMP_LIGHTNESS[0]) * t
    hue = np.radians(RAMP_HUE_DEG[0] + (RAMP_HUE_DEG[1] - RAMP_HUE_DEG[0]) * t)
    chroma = RAMP_CHROMA[0] + RAMP_CHROMA[1] * np.sin(np.pi * t)
    lab = np.stack([lightness, chroma * np.cos(hue), chroma * np.sin(hue)], axis=-1)
    rgb, _ = gamut_map_oklab(oklab_to_xyz(lab))
    return rgb


@lru_cache(maxsize=8)
def luminance_ramp(n: int = 256) -> np.ndarray:
    """The false-colour ramp, (n, 3) linear sRGB, perceptually evenly spaced (Oklab)."""
    from render.vision.display import linear_srgb_to_xyz

    t = np.linspace(0.0, 1.0, 2001)
    rgb = _ramp_raw(t)
    lab = xyz_to_oklab(linear_srgb_to_xyz(rgb))
    arc = np.concatenate([[0.0], np.cumsum(np.linalg.norm(np.diff(lab, axis=0), axis=1))])
    even = np.interp(np.linspace(0.0, arc[-1], n), arc, t)
    out = _ramp_raw(even)
    out.setflags(write=False)
    return out


def auto_range_decades(luminance_cd_m2: npt.ArrayLike) -> tuple[float, float]:
    """(lo, hi) in cd/m², whole decades bracketing the 0.5-99.5 % range of positive values."""
    v = np.asarray(luminance_cd_m2, dtype=np.float64)
    v = v[np.isfinite(v) & (v > 0)]
    if v.size == 0:
        return 0.01, 10.0
    lo = math.floor(math.log10(np.percentile(v, 0.5)))
    hi = math.ceil(math.log10(np.percentile(v, 99.5)))
    if hi <= lo:
        hi = lo + 1
    return 10.0**lo, 10.0**hi


def shared_range_decades(luminances_cd_m2: Iterable[npt.ArrayLike]) -> tuple[float, float]:
    """One (lo, hi) in cd/m² for several images: the widest of their
    :func:`auto_range_decades`, at most four decades below the top."""
    ranges = [auto_range_decades(y) for y in luminances_cd_m2]
    hi = max(h for _, h in ranges)
    return max(min(lo for lo, _ in ranges), hi * 1e-4), hi


def false_colour(luminance_cd_m2: npt.ArrayLike, lo_cd_m2: float, hi_cd_m2: float, n: int = 256) -> np.ndarray:
    """Linear sRGB false-colour image (..., 3) of luminance on a log scale [lo, hi]."""
    ramp = luminance_ramp(n)
    v = np.maximum(np.asarray(luminance_cd_m2, dtype=np.float64), 1e-300)
    t = (np.log10(v) - math.log10(lo_cd_m2)) / (math.log10(hi_cd_m2) - math.log10(lo_cd_m2))
    idx = np.clip(np.rint(t * (n - 1)), 0, n - 1).astype(np.int64)
    return ramp[idx]
