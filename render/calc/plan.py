"""Illuminance plan: horizontal illuminance on a regular grid over the whole street.

Where the calculation fields (:mod:`render.calc.fields`) sample the street between two
luminaires by the standard's rules, the *plan* covers all of it: every x from 0 to the street's
length and every y from the back of the right footway to the back of the left one (carriageway,
kerbs, verges and footways), on a regular grid of spacing at most ``spacing_m`` (0.5 m by
default) with points on the edges. Each point lies on the walkable surface
(z = :meth:`render.scene.model.Street.ground_z`) facing up, and its horizontal illuminance is
the scene's direct light under the setup (:meth:`render.study.Study.illuminance_lx`, the same
light as the fields: the setup's lumens, dimming and maintenance factor, shadows from the
geometry).

The result, :class:`PlanResult`, also carries what a plan drawing needs: the luminaires'
positions, the carriageway edges, the footways' edges and the calculation fields' points
(:class:`PlanField`, empty when the scene has no row with two luminaires). Drawing it is the
business of :mod:`render.output.calc_pictures`.

The number of points is bounded by :data:`render.limits.MAX_PLAN_POINTS`.

**On a road.** A scene whose first luminaire row stands along a road (or, without a
``[street]``, its first road) gets the plan of that road *developed*: x is the distance along
its centreline (0 to its length), y the offset across it (+ left), the grid regular in these
coordinates and each point placed at its offset along the local normal
(:meth:`~render.geometry.roads.Centreline.point`), so the drawing is the road straightened out
(:attr:`PlanResult.road` names it). The luminaires are drawn at their offsets from the
centreline, a row's at its stations along the road and others where they project onto the
centreline, those within 5 m of the plan's edges; the fields at their distances and offsets.

References
----------
Point-source illuminance E = I(θ)·cos θ / d² (inverse-square and cosine laws), as evaluated by
:mod:`render.light.integrator`; the fields' grid rules of EN 13201-3:2015 / CIE 140-2000 are
those of :mod:`render.calc.fields`.
"""

from __future__ import annotations

import math
from dataclasses import dataclass
from typing import TYPE_CHECKING

import numpy as np

from render.calc.fields import row_fields, row_road
from render.errors import InputError, input_error
from render.limits import MAX_PLAN_POINTS, check_count
from render.scene.model import Road, Scene, Setup, Street

if TYPE_CHECKING:
    from render.study import Study

__all__ = [
    "DEFAULT_PLAN_SPACING_M",
    "PlanField",
    "PlanResult",
    "compute_plan",
    "plan_axes",
    "plan_fields",
    "plan_road",
]

#: Largest spacing of the plan's points, m (along and across the street).
DEFAULT_PLAN_SPACING_M = 0.5
#: A developed road plan draws the luminaires projecting within this distance of its edges, m.
_LUMINAIRE_MARGIN_M = 5.0


@dataclass(frozen=True)
class PlanField:
    """Where a calculation field's points are: their x (along) and y (across) coordinates, m,
    and the spacings (D along, d across); the field's outline is half a spacing beyond them."""

    name: str
    x_m: np.ndarray  # (along,)
    y_m: np.ndarray  # (across,)
    spacing_m: tuple[float, float]

    @property
    def extent_m(self) -> tuple[float, float, float, float]:
        """The field's outline (x0, x1, y0, y1), m."""
        d_along, d_across = self.spacing_m
        return (
            float(self.x_m[0] - 0.5 * d_along),
            float(self.x_m[-1] + 0.5 * d_along),
            float(self.y_m[0] - 0.5 * d_across),
            float(self.y_m[-1] + 0.5 * d_across),
        )


@dataclass(frozen=True)
class PlanResult:
    """Horizontal illuminance over the street under one setup (``setup`` None: the scene's own).

    ``illuminance_lx[j, i]`` is the value at (``x_m[i]``, ``y_m[j]``) (rows across the street,
    columns along it, as image and contour routines take them)."""

    setup: str | None
    x_m: np.ndarray  # (nx,)
    y_m: np.ndarray  # (ny,)
    illuminance_lx: np.ndarray  # (ny, nx)
    luminaires_xy_m: np.ndarray  # (n, 2)
    kerb_y_m: tuple[float, float]  # the carriageway's edges (right, left)
    footway_y_m: tuple[tuple[float, float], ...]  # (inner, outer) edge of each footway with a width
    fields: tuple[PlanField, ...]  # the calculation fields (empty without a row of two luminaires)
    street_length_m: float
    #: The road the plan is developed along (x its distance along, y its offset), or None: the
    #: [street] (x and y the world's).
    road: str | None = None


def _axis(lo: float, hi: float, spacing_m: float) -> np.ndarray:
    """Points from ``lo`` to ``hi`` inclusive, evenly spaced at most ``spacing_m`` apart."""
    n = max(2, math.ceil((hi - lo) / spacing_m - 1e-9) + 1)
    return np.linspace(lo, hi, n)


def _span_y(street: Street) -> tuple[float, float]:
    """y of the back of the right and of the left footway (or of the kerb where none)."""
    half = 0.5 * street.carriageway_width_m + street.kerb_width_m
    right = street.side("right")
    left = street.side("left")
    return (
        -(half + right.verge_width_m + right.footway_width_m),
        half + left.verge_width_m + left.footway_width_m,
    )


def plan_axes(street: Street, spacing_m: float = DEFAULT_PLAN_SPACING_M) -> tuple[np.ndarray, np.ndarray]:
    """The plan's (x, y) axes over ``street``: x from 0 to its length, y over both footways."""
    if not (math.isfinite(spacing_m) and spacing_m > 0):
        raise ValueError(f"plan spacing must be a positive number of metres, got {spacing_m!r}")
    y0, y1 = _span_y(street)
    return _axis(0.0, float(street.length_m), spacing_m), _axis(y0, y1, spacing_m)


def plan_fields(scene: Scene) -> tuple[PlanField, ...]:
    """The calculation fields of the scene's first row (:func:`render.calc.fields.row_fields`)
    as :class:`PlanField`, or none when the scene has no row with two luminaires."""
    try:
        fields = row_fields(scene)
    except InputError:  # no [street], no row, fewer than two luminaires: no fields
        return ()
    out = []
    for f in fields:
        along, across = f.along.reshape(f.shape), f.across.reshape(f.shape)
        out.append(PlanField(f.name, along[:, 0].copy(), across[0, :].copy(), f.spacing_m))
    return tuple(out)


def plan_road(scene: Scene) -> Road | None:
    """The road the plan is developed along: the first luminaire row's, or without a
    ``[street]`` the first road; None for the ``[street]``'s plan."""
    road = row_road(scene, 0)
    if road is None and scene.street is None and scene.roads:
        road = scene.roads[0]
    return road


def compute_plan(
    study: Study, setup: str | Setup | None = None, *, spacing_m: float = DEFAULT_PLAN_SPACING_M
) -> PlanResult:
    """Horizontal illuminance (lx) on the plan grid of the scene's street under ``setup`` (the
    module text); an :class:`~render.errors.InputError` without a ``[street]`` or with more
    points than :data:`~render.limits.MAX_PLAN_POINTS`."""
    scene = study.scene
    road = plan_road(scene)
    street = road.section if road is not None else scene.street
    if street is None:
        raise input_error(scene.path, "street", "an illuminance plan needs a [street] section or [[roads]]")
    if not (math.isfinite(spacing_m) and spacing_m > 0):
        raise input_error(scene.path, "plan spacing", f"expected a positive number of metres, got {spacing_m!r}")
    y0, y1 = _span_y(street)
    n_points = (math.ceil(street.length_m / spacing_m) + 1) * (math.ceil((y1 - y0) / spacing_m) + 1)
    check_count(n_points, MAX_PLAN_POINTS, scene.path, "plan spacing", "the number of illuminance plan points", 1)
    xs, ys = plan_axes(street, spacing_m)
    gy, gx = np.meshgrid(ys, xs, indexing="ij")
    gz = np.broadcast_to(np.array([street.ground_z(float(y)) for y in ys])[:, None], gx.shape)
    points = np.stack([gx.ravel(), gy.ravel(), gz.ravel()], axis=1)
    cl = None
    if road is not None:
        from render.geometry.roads import road_centreline

        cl = road_centreline(road)
        points[:, :2] = cl.point(points[:, 0], points[:, 1])
    normals = np.broadcast_to(np.array([0.0, 0.0, 1.0]), points.shape)
    e = np.asarray(study.illuminance_lx(points, normals, setup), np.float64).reshape(gx.shape)
    half = 0.5 * street.carriageway_width_m
    footways = []
    for side, sign in (("right", -1.0), ("left", 1.0)):
        s = street.side(side)
        if s.footway_width_m > 0:
            inner = half + street.kerb_width_m + s.verge_width_m
            footways.append((sign * inner, sign * (inner + s.footway_width_m)))
    luminaires = np.array([lum.position_m[:2] for lum in scene.luminaires], np.float64).reshape(-1, 2)
    if cl is not None and luminaires.size:
        along, across, _ = cl.locate(luminaires)
        # A row's luminaire keeps its station along the road (the nearest point of the
        # centreline differs from it round a bend by a fraction of the chords' angle).
        own = np.array(
            [lum.s_m if lum.road == road.name and lum.s_m is not None else np.nan for lum in scene.luminaires]
        )
        along = np.where(np.isfinite(own), own, along)
        near = (across >= y0 - _LUMINAIRE_MARGIN_M) & (across <= y1 + _LUMINAIRE_MARGIN_M)
        luminaires = np.column_stack([along, across])[near]
    return PlanResult(
        setup=setup.name if isinstance(setup, Setup) else setup,
        x_m=xs,
        y_m=ys,
        illuminance_lx=e,
        luminaires_xy_m=luminaires,
        kerb_y_m=(-half, half),
        footway_y_m=tuple(footways),
        fields=plan_fields(scene),
        street_length_m=float(street.length_m),
        road=road.name if road is not None else None,
    )
