"""Threshold increment: disability glare from the luminaires for the standard road observer.

The veiling luminance at the eye of an observer of age A years is

    Lv = K(A)·Σ_k E_k/θ_k²,   K(A) = 9.86·(1 + (A/66.4)⁴)   (cd/m², E in lx, θ in degrees)

with E_k the illuminance at the eye from luminaire k on the plane perpendicular to the line of
sight (E_k = I_k·cos θ_k/d_k², I_k its intensity toward the eye) and θ_k the angle between the
line of sight and the direction to the luminaire. K(23) ≈ 10.0, the classic Stiles–Holladay
constant. The threshold increment, in percent, from the average road luminance L̄:

    TI = 65·Lv/L̄^0.8   for L̄ ≤ 5 cd/m²,   TI = 95·Lv/L̄^1.05   above.

lampcast's observer (:func:`threshold_increment`) stands at each lane's centre, the eye
1.5 m above the road, and moves along the street over the field in the direction of traffic:
one position 60 m upstream of each row of the field's grid points (the luminance observer
moved forward by the grid spacing D each time); TI is the largest over these positions. For
``direction = +1`` (traffic along +x) the eye is 60 m before the row and the line of sight is
along +x; for ``direction = -1`` it is 60 m beyond the row, looking along −x; either way the
line of sight is 1° below the horizontal toward the road. The vehicle roof screens the sky:
a luminaire whose direction, projected on the vertical plane of the line of sight, is more
than 20° above the line of sight (above the screening plane through the eye that holds the
lateral direction) is not counted, nor a luminaire behind the eye (θ ≥ 90°). Shadows from other geometry are
ignored. The equation is used beyond its 1.5°–60° range of validity without warning. On a
road (a lane field laid along its centreline) the eye stands 60 m upstream of each row along
the centreline and looks toward the lane centre of that row
(:func:`render.calc.road.lane_observers`).

A two-way road is judged by its worst observer: :func:`road_worst_case` takes the luminance
results and TI results of every lane and direction and gives the lowest L̄, U0 and Ul and the
highest TI, each with the observer (lane, direction) that gave it.

References
----------
* CIE 140-2000 *Road lighting calculations* and EN 13201-3:2015: the veiling-luminance
  equation with 9.86 and 66.4, the two TI forms with 65, 0.8, 95, 1.05 and the 5 cd/m² limit,
  the 20° screening angle, the 1° line of sight, the observer moving over the field, the
  observer positions for each direction of traffic; default age 23 years. *memory*, with
  *secondary* notes quoting the TI forms: none of these constants was checked against the
  documents. The placement of the screening plane relative to the line of sight (rather than
  the horizontal) is lampcast's reading (*own*).
* CIE 146:2002 / Vos (2003): the Stiles–Holladay constant 10 that K(23) reproduces
  (*summary*, see docs/references.md).
"""

from __future__ import annotations

import math
from collections.abc import Iterable
from dataclasses import dataclass
from typing import Any

import numpy as np

from render.calc.fields import CalculationField
from render.calc.road import (
    LuminanceResult,
    lane_observers,
    luminaire_intensities_cd,
    traffic_direction,
)
from render.light.luminaires import LuminaireSet
from render.scene.model import Setup

__all__ = [
    "DEFAULT_AGE_YEARS",
    "LINE_OF_SIGHT_DOWN_DEG",
    "SCREENING_ANGLE_DEG",
    "TIResult",
    "TI_LUMINANCE_LIMIT_CD_M2",
    "RoadWorstCase",
    "age_factor",
    "road_worst_case",
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


def _sight_and_up(direction: int, heading=None) -> tuple[np.ndarray, np.ndarray]:
    """The line of sight (along ``direction``·x, or along the horizontal unit vector
    ``heading``, 1° down) and the unit vector perpendicular to it in its vertical plane, pointing up."""
    a = math.radians(LINE_OF_SIGHT_DOWN_DEG)
    hx, hy = (float(direction), 0.0) if heading is None else (float(heading[0]), float(heading[1]))
    return np.array([hx * math.cos(a), hy * math.cos(a), -math.sin(a)]), np.array(
        [hx * math.sin(a), hy * math.sin(a), math.cos(a)]
    )


def veiling_luminance_cd_m2(
    lights: LuminaireSet,
    eye_m: np.ndarray,
    setup: Setup | None = None,
    age_years: float = DEFAULT_AGE_YEARS,
    direction: int = 1,
    heading=None,
) -> float:
    """Veiling luminance (cd/m²) at ``eye_m`` looking along +x (``direction`` +1) or −x (−1),
    or along the horizontal unit vector ``heading`` (a road), 1° down, with the 20° screening
    angle above the line of sight."""
    eye = np.asarray(eye_m, dtype=np.float64).reshape(3)
    sight, up = _sight_and_up(traffic_direction(direction), heading)
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
    """The largest threshold increment over the observer positions of one lane and direction."""

    lane: str
    ti_percent: float
    veiling_cd_m2: float
    eye_m: tuple[float, float, float]
    direction: int  # +1: the observer looks along +x, −1: along −x
    age_years: float

    def to_json(self) -> dict[str, Any]:
        """The result as plain JSON types."""
        return {
            "lane": self.lane,
            "ti_percent": self.ti_percent,
            "veiling_cd_m2": self.veiling_cd_m2,
            "eye_m": list(self.eye_m),
            "direction": self.direction,
            "age_years": self.age_years,
        }


def threshold_increment(
    lights: LuminaireSet,
    lane: CalculationField,
    mean_luminance_cd_m2: float,
    setup: Setup | None = None,
    age_years: float = DEFAULT_AGE_YEARS,
    direction: int = 1,
) -> TIResult:
    """The largest TI for the observer at ``lane``'s centre moving over the field in
    ``direction`` (+1: one eye position 60 m before each row of grid points, looking along +x;
    −1: 60 m beyond each row, looking along −x), with the road's average luminance L̄ (for
    the same lane and direction)."""
    d = traffic_direction(direction)
    best: tuple[float, np.ndarray] | None = None
    for eye, sight in lane_observers(lane, d):  # along x on a street; along its centreline on a road
        lv = veiling_luminance_cd_m2(lights, eye, setup, age_years, d, None if lane.path is None else sight)
        if best is None or lv > best[0]:
            best = (lv, eye)
    assert best is not None
    lv, eye = best
    return TIResult(
        lane=lane.name,
        ti_percent=ti_percent(lv, mean_luminance_cd_m2),
        veiling_cd_m2=lv,
        eye_m=(float(eye[0]), float(eye[1]), float(eye[2])),
        direction=d,
        age_years=age_years,
    )


@dataclass(frozen=True)
class RoadWorstCase:
    """The worst road-luminance figures and TI over every observer of a carriageway (each lane
    and direction of traffic), each with the observer that gave it as (lane, direction).

    ``ti_percent`` and ``ti_observer`` are None when no TI was computed."""

    mean_cd_m2: float  # lowest L̄
    mean_observer: tuple[str, int]
    u0: float  # lowest U0 of luminance
    u0_observer: tuple[str, int]
    ul: float  # lowest Ul
    ul_observer: tuple[str, int]
    ti_percent: float | None  # highest TI
    ti_observer: tuple[str, int] | None

    def to_json(self) -> dict[str, Any]:
        """The figures as plain JSON types, each observer as {"lane", "direction"}."""

        def who(o: tuple[str, int] | None) -> dict[str, Any] | None:
            return None if o is None else {"lane": o[0], "direction": o[1]}

        return {
            "mean_cd_m2": self.mean_cd_m2,
            "mean_observer": who(self.mean_observer),
            "u0": self.u0,
            "u0_observer": who(self.u0_observer),
            "ul": self.ul,
            "ul_observer": who(self.ul_observer),
            "ti_percent": self.ti_percent,
            "ti_observer": who(self.ti_observer),
        }


def road_worst_case(luminance: Iterable[LuminanceResult], ti: Iterable[TIResult] = ()) -> RoadWorstCase:
    """The lowest L̄, U0 and Ul over ``luminance`` and the highest TI over ``ti`` (results for
    any lanes and directions), each with its observer; on a tie the first result wins."""
    lum = list(luminance)
    if not lum:
        raise ValueError("the worst case needs at least one luminance result")
    tis = list(ti)

    def at(r: LuminanceResult) -> tuple[str, int]:
        return (r.observer_lane, r.direction)

    mean = min(lum, key=lambda r: r.mean_cd_m2)
    u0 = min(lum, key=lambda r: r.u0)
    ul = min(lum, key=lambda r: r.ul)
    worst_ti = max(tis, key=lambda t: t.ti_percent) if tis else None
    return RoadWorstCase(
        mean_cd_m2=mean.mean_cd_m2,
        mean_observer=at(mean),
        u0=u0.u0,
        u0_observer=at(u0),
        ul=ul.ul,
        ul_observer=at(ul),
        ti_percent=worst_ti.ti_percent if worst_ti is not None else None,
        ti_observer=(worst_ti.lane, worst_ti.direction) if worst_ti is not None else None,
    )
