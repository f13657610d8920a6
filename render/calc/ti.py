"""Threshold increment: disability glare from the luminaires for the standard road observer.

The veiling luminance at the eye of an observer of age A years is

    Lv = K(A)·Σ_k E_k/θ_k²,   K(A) = 9.86·(1 + (A/66.4)⁴)   (cd/m², E in lx, θ in degrees)

with E_k the illuminance at the eye from luminaire k on the plane perpendicular to the line of
sight (E_k = I_k·cos θ_k/d_k², I_k its intensity toward the eye) and θ_k the angle between the
line of sight and the direction to the luminaire. K(23) ≈ 10.0, the classic Stiles–Holladay
constant. The threshold increment, in percent, from the average road luminance L̄:

    TI = 65·Lv/L̄^0.8   for L̄ ≤ 5 cd/m²,   TI = 95·Lv/L̄^1.05   above.

lampcast's observer (:func:`threshold_increment`) stands at each lane's centre, the eye
1.5 m above the road, and moves along the street over the field: one position 60 m before
each row of the field's grid points (the luminance observer moved forward by the grid
spacing D each time); TI is the largest over these positions. The line of sight is along +x,
1° below the horizontal toward the road. The vehicle roof screens the sky: a luminaire whose
direction, projected on the vertical plane of the line of sight, is more than 20° above the
line of sight (above the screening plane through the eye that holds the lateral direction)
is not counted, nor a luminaire behind the eye (θ ≥ 90°). Shadows from other geometry are
ignored. The equation is used beyond its 1.5°–60° range of validity without warning.

References
----------
* CIE 140-2000 *Road lighting calculations* and EN 13201-3:2015: the veiling-luminance
  equation with 9.86 and 66.4, the two TI forms with 65, 0.8, 95, 1.05 and the 5 cd/m² limit,
  the 20° screening angle, the 1° line of sight, the observer moving over the field; default
  age 23 years. *memory*, with *secondary* notes quoting the TI forms: none of these constants
  was checked against the documents. The placement of the screening plane relative to the
  line of sight (rather than the horizontal) is lampcast's reading (*own*).
* CIE 146:2002 / Vos (2003): the Stiles–Holladay constant 10 that K(23) reproduces
  (*summary*, see docs/references.md).
"""

from __future__ import annotations

import math
from dataclasses import dataclass
from typing import Any

import numpy as np

from render.calc.fields import CalculationField
from render.calc.road import OBSERVER_DISTANCE_M, OBSERVER_HEIGHT_M, luminaire_intensities_cd
from render.light.luminaires import LuminaireSet
from render.scene.model import Setup

__all__ = [
    "DEFAULT_AGE_YEARS",
    "LINE_OF_SIGHT_DOWN_DEG",
    "SCREENING_ANGLE_DEG",
    "TIResult",
    "TI_LUMINANCE_LIMIT_CD_M2",
    "age_factor",
    "threshold_increment",
    "ti_percent",
    "veiling_luminance_cd_m2",
]

#: Observer age of the standard calculation, years (CIE 140 / EN 13201-3, memory).
DEFAULT_AGE_YEARS = 23.0
#: Angle above the line of sight beyond which luminaires are screened, degrees (memory).
SCREENING_ANGLE_DEG = 20.0
#: Line of sight below the horizontal, degrees (CIE 140, memory).
LINE_OF_SIGHT_DOWN_DEG = 1.0
#: Average luminance (cd/m²) at which the TI equation changes form (CIE 140, memory).
TI_LUMINANCE_LIMIT_CD_M2 = 5.0


def age_factor(age_years: float = DEFAULT_AGE_YEARS) -> float:
    """K(A) = 9.86·(1 + (A/66.4)⁴) of the veiling-luminance equation (θ in degrees)."""
    return 9.86 * (1.0 + (age_years / 66.4) ** 4)


def _line_of_sight() -> np.ndarray:
    a = math.radians(LINE_OF_SIGHT_DOWN_DEG)
    return np.array([math.cos(a), 0.0, -math.sin(a)])


def veiling_luminance_cd_m2(
    lights: LuminaireSet,
    eye_m: np.ndarray,
    setup: Setup | None = None,
    age_years: float = DEFAULT_AGE_YEARS,
) -> float:
    """Veiling luminance (cd/m²) at ``eye_m`` looking along +x, 1° down, with the 20°
    screening angle above the line of sight."""
    eye = np.asarray(eye_m, dtype=np.float64).reshape(3)
    sight = _line_of_sight()
    down = math.radians(LINE_OF_SIGHT_DOWN_DEG)
    up = np.array([math.sin(down), 0.0, math.cos(down)])  # perpendicular to the sight, upward
    intensity = luminaire_intensities_cd(lights, eye[None, :], setup)[:, 0]
    total = 0.0
    for k in range(lights.n_luminaires):
        d = lights.position_m[k] - eye
        dist = float(np.linalg.norm(d))
        if dist <= 0.0:
            continue
        u = d / dist
        cos_t = float(u @ sight)
        if cos_t <= 0.0:
            continue  # behind the eye
        # elevation above the line of sight, in the vertical plane of the line of sight
        elevation = math.degrees(math.atan2(float(u @ up), cos_t))
        if elevation > SCREENING_ANGLE_DEG:
            continue
        theta_deg = math.degrees(math.acos(min(1.0, cos_t)))
        if theta_deg <= 0.0:
            continue
        e_eye = float(intensity[k]) * cos_t / (dist * dist)
        total += e_eye / (theta_deg * theta_deg)
    return age_factor(age_years) * total


def ti_percent(veiling_cd_m2: float, mean_luminance_cd_m2: float) -> float:
    """TI (%) = 65·Lv/L̄^0.8 for L̄ ≤ 5 cd/m², else 95·Lv/L̄^1.05."""
    if mean_luminance_cd_m2 <= 0.0:
        raise ValueError("TI needs a positive average road luminance")
    if mean_luminance_cd_m2 <= TI_LUMINANCE_LIMIT_CD_M2:
        return 65.0 * veiling_cd_m2 / mean_luminance_cd_m2**0.8
    return 95.0 * veiling_cd_m2 / mean_luminance_cd_m2**1.05


@dataclass(frozen=True)
class TIResult:
    """The largest threshold increment over the observer positions of one lane."""

    lane: str
    ti_percent: float
    veiling_cd_m2: float
    eye_m: tuple[float, float, float]
    age_years: float

    def to_json(self) -> dict[str, Any]:
        """The result as plain JSON types."""
        return {
            "lane": self.lane,
            "ti_percent": self.ti_percent,
            "veiling_cd_m2": self.veiling_cd_m2,
            "eye_m": list(self.eye_m),
            "age_years": self.age_years,
        }


def threshold_increment(
    lights: LuminaireSet,
    lane: CalculationField,
    mean_luminance_cd_m2: float,
    setup: Setup | None = None,
    age_years: float = DEFAULT_AGE_YEARS,
) -> TIResult:
    """The largest TI for the observer at ``lane``'s centre moving over the field (one eye
    position 60 m before each row of grid points), with the road's average luminance L̄."""
    pts = lane.points_m
    y = float(pts[:, 1].mean())
    z = float(pts[:, 2].mean()) + OBSERVER_HEIGHT_M
    rows_x = np.unique(np.round(pts[:, 0], 9))
    best: tuple[float, np.ndarray] | None = None
    for x in rows_x:
        eye = np.array([x - OBSERVER_DISTANCE_M, y, z])
        lv = veiling_luminance_cd_m2(lights, eye, setup, age_years)
        if best is None or lv > best[0]:
            best = (lv, eye)
    assert best is not None
    lv, eye = best
    return TIResult(
        lane=lane.name,
        ti_percent=ti_percent(lv, mean_luminance_cd_m2),
        veiling_cd_m2=lv,
        eye_m=(float(eye[0]), float(eye[1]), float(eye[2])),
        age_years=age_years,
    )
