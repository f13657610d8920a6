"""Road luminance: the luminance of the carriageway seen by the standard observer.

**r-tables** (:mod:`render.light.rtable`): the reduced luminance coefficient r(β, tan γ) of a
road surface, in lampcast's own CSV layout; none is shipped (the user supplies one).

**Road luminance** (:func:`road_luminance_cd_m2`) at points of the road is
L = Σ_k r(β_k, tan γ_k)·I_k/h_k² over the luminaires above the point, with I_k the intensity
toward the point (the setup's lumens, dimming and maintenance factor) and h_k the mounting
height above the point. The observer enters only through β (the fixed 1° viewing angle of the
r-table convention). Shadows are ignored for road luminance, as in the standard calculation.
Without an r-table the result is the Lambertian one, L = ρ·E/π with E the horizontal
illuminance (``model = "lambertian"`` in the result, labelled as such).

:func:`evaluate_luminance_field` places the standard observer 1.5 m above the road at the
centre of each lane in turn, for one direction of traffic: ``direction = +1`` (traffic along
+x) puts the eye 60 m before the field's start looking along +x, ``direction = -1`` (traffic
along −x) 60 m beyond the field's end looking along −x. On a road (a field laid along its
centreline, :func:`render.calc.fields.lay_along`) "along" is along the road toward its last
point, and the 60 m are measured along the centreline (continued straight beyond the road's
ends), the eye at the lane centre's offset there: the standard defines the observer for
straight roads, and this is lampcast's reading for bends (*own*). For each position it gives the
luminance over all the lanes' points, L̄, Lmin, U0 = Lmin/L̄, and the longitudinal uniformity
Ul = Lmin/Lmax along the centre line of the observer's lane (the middle row of three points
across the lane), the same line whichever way the observer looks. The direction enters the
luminance only through β, the angle between the vertical plane through the eye and the point
and the vertical plane through the point and the luminaire; a two-way road is judged by the
worst figure over both directions (:func:`render.calc.ti.road_worst_case`).

References
----------
* CIE 140-2000 *Road lighting calculations* and EN 13201-3:2015: L = Σ r·I/h², the r-table
  layout (β 0–180°, tan γ 0–12, values × 10⁴), Q0, the observer 1.5 m high and 60 m before the
  field at each lane's centre (for each direction of traffic on a two-way road), U0 and Ul.
  *memory*.
* r = q·cos³γ and the Lambertian r = (ρ/π)·cos³γ: derived from L = q·E, E = I·cos³γ/h²
  (*own*).
"""

from __future__ import annotations

import math
from dataclasses import dataclass
from typing import Any

import numpy as np

from render.calc.fields import CalculationField
from render.errors import input_error
from render.light.luminaires import LuminaireSet, channel_factors
from render.light.photometry import intensity_cd, world_to_c_gamma
from render.light.rtable import RTable, r_value
from render.scene.model import Setup

__all__ = [
    "DIRECTIONS",
    "OBSERVER_DISTANCE_M",
    "OBSERVER_HEIGHT_M",
    "LuminanceResult",
    "evaluate_luminance_field",
    "lane_observer_m",
    "lane_observers",
    "luminaire_intensities_cd",
    "road_luminance_cd_m2",
    "traffic_direction",
]

#: Eye height of the standard observer above the road, m (CIE 140 / EN 13201-3, memory).
OBSERVER_HEIGHT_M = 1.5
#: Distance of the standard observer before the field's start, m (CIE 140 / EN 13201-3, memory).
OBSERVER_DISTANCE_M = 60.0
#: The two directions of traffic along the street: +1 along +x, −1 along −x.
DIRECTIONS = (1, -1)


def traffic_direction(direction: int) -> int:
    """``direction`` checked to be +1 (traffic along +x) or −1 (along −x), as an int."""
    if direction not in DIRECTIONS:
        raise ValueError(f"direction of traffic must be +1 or -1, got {direction!r}")
    return int(direction)


def luminaire_intensities_cd(lights: LuminaireSet, points_m: np.ndarray, setup: Setup | None = None) -> np.ndarray:
    """(L, N) intensity, cd, of each luminaire toward each point, under ``setup`` (lumens,
    dimming and maintenance factor applied; no shadows)."""
    pts = np.asarray(points_m, dtype=np.float64).reshape(-1, 3)
    factors, _ = channel_factors(lights, setup)
    out = np.zeros((lights.n_luminaires, len(pts)))
    for k in range(lights.n_luminaires):
        c, g = world_to_c_gamma(pts - lights.position_m[k], lights.rotation[k])
        photometry = lights.photometries[int(lights.table[k])]
        scale = float(lights.scale[k]) * float(factors[int(lights.channel[k])])
        out[k] = np.asarray(intensity_cd(photometry, c, g)).reshape(-1) * scale
    return out


def road_luminance_cd_m2(
    lights: LuminaireSet,
    points_m: np.ndarray,
    observer_m: np.ndarray,
    setup: Setup | None = None,
    r_table: RTable | None = None,
    reflectance: float | None = None,
    road_q0_sr: float | None = None,
) -> np.ndarray:
    """Luminance (cd/m²) of the road at ``points_m`` (N, 3) seen from ``observer_m`` (3,).

    With ``r_table``: L = Σ r(β, tan γ)·I/h² (scaled by ``road_q0_sr``/Q0 of the table when
    ``road_q0_sr`` is given). Without: the Lambertian L = ρ·E/π with ``reflectance`` ρ.
    Luminaires at or below a point's height add nothing; shadows are ignored."""
    pts = np.asarray(points_m, dtype=np.float64).reshape(-1, 3)
    eye = np.asarray(observer_m, dtype=np.float64)
    intensity = luminaire_intensities_cd(lights, pts, setup)
    h = lights.position_m[:, 2:3] - pts[None, :, 2]  # (L, N)
    dx = lights.position_m[:, 0:1] - pts[None, :, 0]
    dy = lights.position_m[:, 1:2] - pts[None, :, 1]
    horizontal = np.hypot(dx, dy)
    above = h > 1e-9
    h_safe = np.where(above, h, 1.0)
    tan_g = horizontal / h_safe
    if r_table is None:
        if reflectance is None:
            raise ValueError("road luminance needs an r-table or a reflectance")
        cos3 = (1.0 / np.sqrt(1.0 + tan_g * tan_g)) ** 3
        r = reflectance / math.pi * cos3
    else:
        vx = pts[:, 0] - eye[0]
        vy = pts[:, 1] - eye[1]
        view = np.arctan2(vy, vx)[None, :]
        incidence = np.arctan2(dy, dx)
        beta = np.degrees(incidence - view)
        beta = np.where(horizontal > 1e-9, beta, 0.0)
        r = r_value(r_table, beta, tan_g)
        if road_q0_sr is not None:
            if r_table.q0_sr is None:
                raise input_error(
                    r_table.source, "q0", "the r-table gives no Q0, so it cannot be scaled to the road's Q0"
                )
            r = r * (road_q0_sr / r_table.q0_sr)
    contributions = np.where(above, r * intensity / (h_safe * h_safe), 0.0)
    return contributions.sum(axis=0)


@dataclass(frozen=True)
class LuminanceResult:
    """Road luminance over a carriageway's lane fields seen from one observer position."""

    observer_lane: str
    observer_m: tuple[float, float, float]
    direction: int  # +1: the observer looks along +x, −1: along −x
    model: str  # "r-table" or "lambertian"
    luminance_cd_m2: dict[str, np.ndarray]  # lane name -> (along, across)
    mean_cd_m2: float
    min_cd_m2: float
    u0: float  # Lmin / L̄ over all lanes (0 when L̄ is 0)
    ul: float  # Lmin / Lmax along the observer's lane centre line (0 when Lmax is 0)

    def to_json(self) -> dict[str, Any]:
        """The result as plain JSON types."""
        return {
            "observer_lane": self.observer_lane,
            "observer_m": list(self.observer_m),
            "direction": self.direction,
            "model": self.model,
            "luminance_cd_m2": {k: v.tolist() for k, v in self.luminance_cd_m2.items()},
            "mean_cd_m2": self.mean_cd_m2,
            "min_cd_m2": self.min_cd_m2,
            "u0": self.u0,
            "ul": self.ul,
        }


def _eye_at(lane: CalculationField, along_m: float) -> np.ndarray:
    """The eye 1.5 m above the lane's centre at distance ``along_m`` along the street or road
    (a road's centreline continued straight beyond its ends)."""
    across = float(lane.across.mean())
    z = float(lane.points_m[:, 2].mean()) + OBSERVER_HEIGHT_M
    if lane.path is None:
        return np.array([along_m, across, z])
    x, y = lane.path.point(along_m, across)
    return np.array([float(x), float(y), z])


def lane_observer_m(lane: CalculationField, direction: int = 1) -> np.ndarray:
    """The standard observer for a lane field: at the lane's centre, 1.5 m above the road,
    60 m upstream of the field for traffic in ``direction``: before the field's start for +1
    (the first grid row is D/2 after the start), beyond its end for −1 (the last row is D/2
    before the end). On a road the 60 m are measured along its centreline (continued straight
    beyond its ends) and the eye stands at the lane centre's offset there."""
    d = traffic_direction(direction)
    along = lane.along
    half = lane.spacing_m[0] / 2.0
    entry = float(along.min()) - half if d > 0 else float(along.max()) + half
    return _eye_at(lane, entry - d * OBSERVER_DISTANCE_M)


def lane_observers(lane: CalculationField, direction: int = 1) -> list[tuple[np.ndarray, np.ndarray]]:
    """The moving observer of the threshold increment (:func:`render.calc.ti.threshold_increment`):
    per row of the lane's grid points, the eye 60 m upstream of the row (as
    :func:`lane_observer_m`, along a road's centreline) and the horizontal unit direction of its
    line of sight: along ±x on a [street]; on a road toward the lane centre's point of that row
    (the same direction on a straight stretch; own choice for bends, where the standard's
    observer is defined for straight roads)."""
    d = traffic_direction(direction)
    rows = np.unique(np.round(lane.along, 9))
    out = []
    for s in rows:
        eye = _eye_at(lane, float(s) - d * OBSERVER_DISTANCE_M)
        if lane.path is None:
            sight = np.array([float(d), 0.0])
        else:
            ahead = _eye_at(lane, float(s))[:2] - eye[:2]
            sight = ahead / np.hypot(*ahead)
        out.append((eye, sight))
    return out


def evaluate_luminance_field(
    lights: LuminaireSet,
    lanes: list[CalculationField],
    setup: Setup | None = None,
    r_table: RTable | None = None,
    reflectance: float | None = None,
    road_q0_sr: float | None = None,
    direction: int = 1,
) -> list[LuminanceResult]:
    """Road luminance over the lane fields of one carriageway field, one result per observer
    position (the standard observer at the centre of each lane in turn, for traffic in
    ``direction``: +1 along +x, −1 along −x)."""
    d = traffic_direction(direction)
    model = "lambertian" if r_table is None else "r-table"
    results = []
    for lane in lanes:
        eye = lane_observer_m(lane, d)
        grids = {
            other.name: road_luminance_cd_m2(
                lights, other.points_m, eye, setup, r_table, reflectance, road_q0_sr
            ).reshape(other.shape)
            for other in lanes
        }
        values = np.concatenate([g.ravel() for g in grids.values()])
        mean = float(values.mean())
        lmin = float(values.min())
        centre = grids[lane.name][:, lane.shape[1] // 2]
        lmax_centre = float(centre.max())
        results.append(
            LuminanceResult(
                observer_lane=lane.name,
                observer_m=(float(eye[0]), float(eye[1]), float(eye[2])),
                direction=d,
                model=model,
                luminance_cd_m2=grids,
                mean_cd_m2=mean,
                min_cd_m2=lmin,
                u0=lmin / mean if mean > 0 else 0.0,
                ul=float(centre.min()) / lmax_centre if lmax_centre > 0 else 0.0,
            )
        )
    return results
