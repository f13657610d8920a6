"""Tone reproduction: from perceived scene luminance to display luminance.

Operator: Ward's contrast-based scale factor (G. Ward, "A contrast-based scalefactor for
luminance display", Graphics Gems IV, 1994, pp. 415-421). It is linear -- contrasts and
chromaticities are kept -- and chosen so that a contrast just visible at the world adaptation
luminance L_wa is just visible at the display adaptation luminance L_da, using Blackwell's
threshold-versus-intensity model (CIE 19/2.1, 1981) ``ΔL(L_a) = 0.0594·(1.219 + L_a^0.4)^2.5``:

    L_display = sf·L_world,   sf = ΔL(L_da)/ΔL(L_wa) = [(1.219 + L_da^0.4)/(1.219 + L_wa^0.4)]^2.5,

with L_da = half the display peak (Ward 1994; formulas from memory). Because sf grows more
slowly than 1/L_wa, it honours the absolute adaptation level: a street at 0.1 cd/m² is shown
darker than one at 1 cd/m² even when each is shown to an observer adapted to it, and with one
shared sf (``shared`` mode) the true brightness ratio between images is kept exactly below the
highlight knee.

The world luminance fed to it is the CIE 191 mesopic luminance (the appearance step's Y), and
L_wa the MES2 adaptation luminance.

Highlights: a linear map puts luminaire openings far above the display's white; values above
``knee`` (default 0.8 of peak) are compressed smoothly toward the peak,
``y = k + (1 − k)·(1 − exp(−(x − k)/(1 − k)))`` (value and slope continuous at the knee;
common practice, no source). Chromaticity is kept; colours that leave the gamut are handled by
:func:`render.vision.display.gamut_map_oklab`.

References
----------
- G. Ward (1994), "A contrast-based scalefactor for luminance display", Graphics Gems IV,
  pp. 415-421 **(from memory)**.
- CIE 19/2.1 (1981), "An analytic model for describing the influence of lighting parameters
  upon visual performance": Blackwell's threshold-versus-intensity function, as used by Ward
  **(from memory)**.
"""

from __future__ import annotations

import numpy as np
import numpy.typing as npt

__all__ = [
    "HIGHLIGHT_KNEE",
    "blackwell_threshold_cd_m2",
    "highlight_rolloff",
    "to_display_relative",
    "ward_scale_factor",
]

#: Highlight knee as a fraction of display peak (common practice, no source).
HIGHLIGHT_KNEE = 0.8


def blackwell_threshold_cd_m2(adaptation_cd_m2: npt.ArrayLike) -> np.ndarray:
    """Blackwell (CIE 1981) just-visible luminance difference, ``0.0594·(1.219 + L^0.4)^2.5``."""
    la = np.maximum(np.asarray(adaptation_cd_m2, dtype=np.float64), 0.0)
    return 0.0594 * (1.219 + la**0.4) ** 2.5


def ward_scale_factor(world_adaptation_cd_m2: float, display_peak_cd_m2: float) -> float:
    """Ward (1994) contrast-based scale factor: display cd/m² per world cd/m²."""
    l_da = 0.5 * display_peak_cd_m2
    return float(blackwell_threshold_cd_m2(l_da) / blackwell_threshold_cd_m2(world_adaptation_cd_m2))


def highlight_rolloff(y: npt.ArrayLike, knee: float = HIGHLIGHT_KNEE) -> np.ndarray:
    """Compress relative display luminance above ``knee`` smoothly toward 1 (C¹ at the knee)."""
    y = np.asarray(y, dtype=np.float64)
    if knee >= 1.0:
        return np.minimum(y, 1.0)
    out = np.array(y)
    above = y > knee  # the exponential only where it applies
    over = y[above] - knee
    out[above] = knee + (1.0 - knee) * (1.0 - np.exp(-over / (1.0 - knee)))
    return out


def to_display_relative(
    xyz_cd_m2: npt.ArrayLike, scale: float, display_peak_cd_m2: float, knee: float | None = HIGHLIGHT_KNEE
) -> np.ndarray:
    """Display-relative XYZ (Y = 1 at the display peak) of scene XYZ in cd/m².

    ``Y_rel = scale·Y/peak``, then :func:`highlight_rolloff` on Y with chromaticity kept
    (``knee=None``: no roll-off; luminance above peak is clipped to the peak).
    """
    xyz = np.asarray(xyz_cd_m2, dtype=np.float64) * (scale / display_peak_cd_m2)
    y = xyz[..., 1]
    y_new = np.minimum(y, 1.0) if knee is None else highlight_rolloff(y, knee)
    changed = (y_new != y) & (y > 0)  # elsewhere the ratio is 1: the colour stays as it is
    xyz[changed] *= (y_new[changed] / y[changed])[:, None]
    return xyz
