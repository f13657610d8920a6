"""Obtrusive light: vertical illuminance on house fronts and luminous intensity toward windows.

Light that reaches the fronts of houses, and above all their upstairs windows, is the part of a
street's lighting that residents notice indoors. This module places points on the facades of
the scene's frontages and computes at each:

* the **vertical illuminance** E_v (lx) on the facade plane, facing the street (direct light
  with shadows from the scene's geometry, as :meth:`render.study.Study.illuminance_lx`: the
  setup's lumens, dimming and maintenance factor);
* the **luminous intensity** I (cd) of each luminaire toward the point
  (:func:`render.calc.road.luminaire_intensities_cd`: the photometric table looked up at the
  (C, γ) of the direction in the luminaire's own frame, with its rotation and tilt). A
  luminaire behind the facade plane (that cannot shine on its front) counts 0 cd.

Facade points: each frontage's facade stands on the building line
(:meth:`render.scene.model.Street.building_line_y`, where :mod:`render.geometry.build` puts the
fronts), from the frontage's start over its length, its foot at the kerb height. Points lie
every ``spacing_m`` along it (the first half a spacing from its start) at the given heights
above its foot (by default 1.5 m, a ground-floor window, and 4.5 m, an upstairs window;
heights at or above the frontage's height are left out), ``FACADE_OFFSET_M`` in front of the
facade so that the facade and its proud window parts do not shadow them.

A frontage along a road (``frontages.road``) gets the same points in the road's own frame (x
the distance along it, y the offset across), laid along its centreline: in front of the
curved facade, facing the road (:func:`facade_fields`).

Both figures are compared with limits the user chooses (:class:`ObtrusiveLimits`): lampcast
claims no default values. Published limits (e.g. per environmental zone, before and after a
curfew) are for the user to look up in the edition they work to and enter.

References
----------
* CIE 150:2017 *Guide on the limitation of the effects of obtrusive light from outdoor lighting
  installations*: vertical illuminance on properties and luminous intensity toward potentially
  obtrusive directions as the two figures for light intrusion (*memory*; its limit values are
  not reproduced here).
* Inverse-square and cosine laws of a point source, E_v = I·cos θ/d² (analytic).
"""

from __future__ import annotations

import math
from dataclasses import dataclass
from typing import TYPE_CHECKING, Any

import numpy as np

from render.calc.fields import CalculationField, lay_along
from render.calc.road import luminaire_intensities_cd
from render.errors import input_error
from render.scene.model import Frontage, Scene, Setup, Street

if TYPE_CHECKING:
    from render.study import Study

__all__ = [
    "FACADE_OFFSET_M",
    "ObtrusiveLimits",
    "ObtrusiveResult",
    "evaluate_obtrusive",
    "facade_field",
    "facade_fields",
]

#: Distance (m) of the points in front of the facade plane, so that neither the facade nor the
#: window and door parts built a few centimetres proud of it shadow them (render.geometry.objects).
FACADE_OFFSET_M = 0.05
#: Default window heights (m) above the facade's foot: ground floor and upstairs (own choice).
WINDOW_HEIGHTS_M = (1.5, 4.5)
#: Default spacing (m) of the points along a facade (own choice).
FACADE_SPACING_M = 3.0


@dataclass(frozen=True)
class ObtrusiveLimits:
    """User-chosen limits; ``None`` leaves a figure unchecked. No defaults are claimed."""

    max_vertical_lx: float | None = None
    max_intensity_cd: float | None = None

    def __post_init__(self) -> None:
        for name in ("max_vertical_lx", "max_intensity_cd"):
            v = getattr(self, name)
            if v is not None and not (math.isfinite(v) and v >= 0):
                raise ValueError(f"{name} must be a finite number ≥ 0, got {v}")


@dataclass(frozen=True)
class ObtrusiveResult:
    """Vertical illuminance and intensities at the points of one facade, against the limits."""

    name: str
    setup: str | None
    points_m: np.ndarray  # (n, 3)
    vertical_lx: np.ndarray  # (n,)
    luminaires: list[str]
    intensity_cd: np.ndarray  # (L, n): luminaire k toward point i
    limits: ObtrusiveLimits

    @property
    def max_vertical_lx(self) -> float:
        return float(self.vertical_lx.max()) if self.vertical_lx.size else 0.0

    @property
    def max_intensity_cd(self) -> float:
        return float(self.intensity_cd.max()) if self.intensity_cd.size else 0.0

    @property
    def vertical_exceeds(self) -> np.ndarray:
        """(n,) True where E_v is above the limit (all False without one)."""
        lim = self.limits.max_vertical_lx
        return self.vertical_lx > lim if lim is not None else np.zeros(self.vertical_lx.shape, bool)

    @property
    def intensity_exceeds(self) -> np.ndarray:
        """(L, n) True where a luminaire's intensity toward a point is above the limit."""
        lim = self.limits.max_intensity_cd
        return self.intensity_cd > lim if lim is not None else np.zeros(self.intensity_cd.shape, bool)

    @property
    def passes(self) -> bool:
        return not (self.vertical_exceeds.any() or self.intensity_exceeds.any())

    def to_json(self) -> dict[str, Any]:
        """The result as plain JSON types, with the maxima and the exceedances."""
        return {
            "name": self.name,
            "setup": self.setup,
            "points_m": self.points_m.tolist(),
            "vertical_lx": self.vertical_lx.tolist(),
            "max_vertical_lx": self.max_vertical_lx,
            "luminaires": list(self.luminaires),
            "intensity_cd": self.intensity_cd.tolist(),
            "max_intensity_cd": self.max_intensity_cd,
            "limit_vertical_lx": self.limits.max_vertical_lx,
            "limit_intensity_cd": self.limits.max_intensity_cd,
            "vertical_exceeds": self.vertical_exceeds.tolist(),
            "intensity_exceeds": self.intensity_exceeds.tolist(),
            "passes": self.passes,
        }


def facade_field(
    street: Street,
    frontage: Frontage,
    *,
    spacing_m: float = FACADE_SPACING_M,
    heights_m: tuple[float, ...] = WINDOW_HEIGHTS_M,
) -> CalculationField:
    """Points on the street face of ``frontage``: shape (along, heights), normals toward the street."""
    if not spacing_m > 0:
        raise ValueError(f"facade point spacing must be positive, got {spacing_m}")
    hs = np.array([h for h in heights_m if 0 < h < frontage.height_m], np.float64)
    n_along = max(1, round(frontage.length_m / spacing_m))
    d_along = frontage.length_m / n_along
    xs = frontage.start_m + d_along * (np.arange(n_along) + 0.5)
    toward_street = -1.0 if frontage.side == "left" else 1.0
    y = street.building_line_y(frontage.side) + toward_street * FACADE_OFFSET_M
    gx, gh = np.meshgrid(xs, hs, indexing="ij")
    pts = np.stack([gx.ravel(), np.full(gx.size, y), street.kerb_height_m + gh.ravel()], axis=1)
    normals = np.tile([0.0, toward_street, 0.0], (pts.shape[0], 1))
    d_up = float(hs[1] - hs[0]) if hs.size > 1 else 0.0
    return CalculationField(frontage.tag.name, pts, normals, (n_along, int(hs.size)), (d_along, d_up))


def facade_fields(
    scene: Scene, *, spacing_m: float = FACADE_SPACING_M, heights_m: tuple[float, ...] = WINDOW_HEIGHTS_M
) -> list[CalculationField]:
    """One :func:`facade_field` per frontage of ``scene`` (in the scene file's order); a
    frontage along a road gets the field of the road's cross-section laid along its centreline
    (:func:`render.calc.fields.lay_along`: points at their distance along the road, in front
    of the curved facade, normals toward the road)."""
    from render.geometry.roads import road_centreline

    if not scene.frontages:
        raise input_error(
            scene.path,
            "frontages",
            "facade points need at least one [[frontages]] entry (along the [street] or a road)",
        )
    roads = {r.name: r for r in scene.roads}
    out = []
    for f in scene.frontages:
        if f.road is not None:
            road = roads[f.road]
            field = facade_field(road.section, f, spacing_m=spacing_m, heights_m=heights_m)
            out.append(lay_along(field, road_centreline(road)))
            continue
        if scene.street is None:
            raise input_error(scene.path, "street", "facade points need a [street] section (the building line)")
        out.append(facade_field(scene.street, f, spacing_m=spacing_m, heights_m=heights_m))
    return out


def evaluate_obtrusive(
    study: Study,
    field: CalculationField,
    setup: str | Setup | None = None,
    limits: ObtrusiveLimits | None = None,
) -> ObtrusiveResult:
    """E_v on ``field`` (facing its normals, with shadows) and each luminaire's intensity toward
    its points (0 for luminaires behind a point's plane), under ``setup``, against ``limits``."""
    s = study.setup(setup)
    lights = study.lights(s)
    pts = np.ascontiguousarray(field.points_m, np.float64).reshape(-1, 3)
    nrm = np.asarray(field.normals, np.float64).reshape(-1, 3)
    e_v = np.asarray(study.illuminance_lx(pts, nrm, s), np.float64)
    intensity = luminaire_intensities_cd(lights, pts, s)
    to_lum = lights.position_m[:, None, :] - pts[None, :, :]  # (L, n, 3)
    in_front = np.einsum("lnk,nk->ln", to_lum, nrm) > 0
    return ObtrusiveResult(
        name=field.name,
        setup=s.name if s is not None else None,
        points_m=pts,
        vertical_lx=e_v,
        luminaires=list(lights.names),
        intensity_cd=np.where(in_front, intensity, 0.0),
        limits=limits if limits is not None else ObtrusiveLimits(),
    )
