"""Calculation fields: grids of points on the lanes and footways between two luminaires.

A *field* covers the street between two consecutive luminaires of a row, of length S (the
spacing). Points lie on a regular grid, in the middle of cells, so that the grid is the same
whichever luminaire one starts from:

* **along the street**: N points spaced D = S/N, N = 10 for S ≤ 30 m, otherwise the smallest
  integer N with D ≤ 3 m; the first point D/2 from the field's start (the first luminaire);
* **across each lane** of width W (the carriageway split into ``street.lanes`` equal lanes):
  three points spaced d = W/3, the first d/2 from the lane's edge;
* **across a footway** of width W: n points spaced d = W/n, the first d/2 from its edge, with
  n = 3 unless the footway is wider than 4.5 m, where n is the smallest integer with d ≤ 1.5 m
  (the rule for areas other than driving lanes as remembered from EN 13201-3; with the
  footway widths of residential streets it gives three points).

Coordinates are the scene's: x along the street, y across (+y is the left side), z up. Lane
points lie on the carriageway (z = 0), footway points on the footway surface (z = the kerb
height). Lanes are numbered from the right (−y) kerb: "lane 1" is the rightmost.

:func:`evaluate_field` gives the horizontal illuminance at the points with the scene's direct
light (:func:`render.study.Study.illuminance_lx`: the setup's lumens, dimming and maintenance
factor, shadows from the geometry), and its mean Ē, minimum, maximum and overall uniformity
U0 = Emin/Ē. Interreflected light is not included, as in the standard's calculation; nor is the
night's other light (sky glow, moonlight, lit windows: :mod:`render.calc.night`), which a
result may hold beside its figures (``night``).

On footways, :func:`evaluate_face_field` gives the semicylindrical and vertical illuminance at
1.5 m above the field's points (for recognising faces), facing one horizontal direction (call it
once for +x and once for −x: the two directions along the street, as remembered from
EN 13201-3). The semicylindrical illuminance is the illuminance averaged over the curved face
of a small vertical half-cylinder, i.e. (1/π) ∫ E_v(φ) dφ over the vertical planes facing
φ ∈ [−π/2, π/2] from the facing direction. For one luminaire seen at elevation ε and azimuth α
from the facing direction, with normal illuminance E_n = I/d², the integral is closed:
E_sc = E_n·cos ε·(1 + cos α)/π. It is evaluated per (point, luminaire) pair from the kernel's
horizontal illuminance E_h = E_n·sin ε and the unit direction u toward the luminaire:
E_sc = E_h/u_z·(|u_xy| + u·f)/π (f the facing direction), so luminaires at or below the
point's height are not counted (none in a street layout).

**Along a road.** A row along a road (``luminaire_rows.road``) gets the same grids laid along
the road's centreline between two of its luminaires (:func:`road_row_fields`), straight or
curved: the field's length S is the distance along the centreline between the two luminaires'
stations (arc lengths measured along the drawn chords), the N points along it are spaced
D = S/N in distance along the centreline by the rules above, and the points across a lane or
footway lie at their offsets from the centreline along its local normal, so that each point
keeps its stated distance from the curved kerb (the kerb is the offset curve at half the
carriageway width). A field so laid (:func:`lay_along`) keeps its distances along and across
(``along_m``, ``across_m``) and the centreline (``path``); the observers of the road
luminance and TI, the edge strips, the facade points and the illuminance plan use them.
Facing directions of the face fields are then given in the road's frame: x along the road
(toward its last point), y across (+ left), z up.

Elsewhere: the luminance grid's observer positions (:mod:`render.calc.road`), the edge
illuminance ratio (:mod:`render.calc.edge`). Not done: fields of staggered or opposite rows (a
field is taken between consecutive luminaires of one row only).

References
----------
* EN 13201-3:2015 *Road lighting — Part 3: Calculation of performance*, and CIE 140-2000
  *Road lighting calculations*: the field between two luminaires of a row, N and D along, three
  points per lane at d = W/3, the first points at D/2 and d/2. *memory* (with secondary notes
  that quote the same rules); the footway rule for widths over 4.5 m, the 1.5 m height and the
  two facing directions along the street are *memory* only. The closed form of the
  semicylindrical illuminance of a point source is derived above (*own*).
"""

from __future__ import annotations

import math
from dataclasses import dataclass, replace
from typing import TYPE_CHECKING, Any

import numpy as np

from render.errors import input_error
from render.light.integrator import direct_pairs
from render.light.luminaires import channel_factors
from render.scene.model import Road, Scene, Setup, Street

if TYPE_CHECKING:
    from render.calc.night import NightGrid
    from render.geometry.roads import Centreline
    from render.study import Study

__all__ = [
    "FACE_PLANES",
    "INTERREFLECTED_LABEL",
    "CalculationField",
    "FaceResult",
    "FieldResult",
    "evaluate_face_field",
    "evaluate_field",
    "face_plane_directions",
    "footway_across",
    "half_circle_rule",
    "lane_across",
    "lay_along",
    "points_along",
    "road_row_fields",
    "row_fields",
    "row_road",
    "row_section",
    "row_positions",
    "semicylindrical_illuminance_lx",
    "street_fields",
]

#: Longest spacing (m) with ten points along; beyond it D ≤ 3 m (EN 13201-3 / CIE 140, memory).
TEN_POINT_SPACING_M = 30.0
#: Largest point spacing along the street for S > 30 m (EN 13201-3 / CIE 140, memory).
MAX_ALONG_M = 3.0
#: Largest point spacing across areas other than lanes (EN 13201-3, memory).
MAX_ACROSS_M = 1.5
#: Points across a lane, and the fewest across a footway (EN 13201-3 / CIE 140, memory).
POINTS_ACROSS = 3
#: Height (m) above the footway of the semicylindrical and vertical illuminance (EN 13201-3, memory).
FACE_HEIGHT_M = 1.5
#: Tolerance on the spacing rules so that 36 m / 12 = 3 m counts as D ≤ 3 m.
_RULE_EPS = 1e-9
#: The label of every figure that includes interreflected light (text, CSV, JSON, pictures).
INTERREFLECTED_LABEL = "includes interreflected light (not part of the EN 13201 calculation)"
#: Vertical planes round a face point at which light arriving from every direction (the night
#: light, interreflected light) is taken: every 10°, both facings along the field among them;
#: the semicylindrical illuminance integrates over half of them (:func:`half_circle_rule`).
FACE_PLANES = 36


@dataclass(frozen=True)
class CalculationField:
    """A grid of calculation points on one lane or footway.

    ``points_m`` and ``normals`` are (n, 3) in row-major order of ``shape`` = (along, across):
    point ``i * shape[1] + j`` is the i-th along the street and the j-th across (from −y)."""

    name: str
    points_m: np.ndarray
    normals: np.ndarray
    shape: tuple[int, int]
    spacing_m: tuple[float, float]  # (D along, d across)
    #: The road's centreline the field is laid along (None: the [street], x along, y across).
    path: Centreline | None = None
    #: (n,) distance along the road and offset across it of each point (None: x and y).
    along_m: np.ndarray | None = None
    across_m: np.ndarray | None = None

    @property
    def along(self) -> np.ndarray:
        """(n,) distance of each point along the street or road, m."""
        return self.points_m[:, 0] if self.along_m is None else self.along_m

    @property
    def across(self) -> np.ndarray:
        """(n,) offset of each point across the street or road (+ left), m."""
        return self.points_m[:, 1] if self.across_m is None else self.across_m

    def to_world(self, vectors: np.ndarray) -> np.ndarray:
        """(n, 3) directions given in the field's frame (x along, y across, z up) per point, in
        the world (unchanged on a [street])."""
        v = np.broadcast_to(np.asarray(vectors, np.float64), self.points_m.shape)
        if self.path is None:
            return np.array(v)
        n = self.path.across(self.along)  # turning with the road between a bend's vertices
        t = np.stack([n[:, 1], -n[:, 0]], axis=1)
        xy = v[:, :1] * t + v[:, 1:2] * n
        return np.column_stack([xy, v[:, 2]])


@dataclass(frozen=True)
class FieldResult:
    """Horizontal illuminance on one field, with its summary figures."""

    name: str
    setup: str | None
    illuminance_lx: np.ndarray  # (along, across)
    mean_lx: float
    min_lx: float
    max_lx: float
    u0: float  # Emin / Ē (0 when Ē is 0)
    # Interreflected light alone on the same grid (None: not computed, direct light only). The
    # figures above stay direct light, as the standard's calculation takes it.
    interreflected_lx: np.ndarray | None = None
    # The night's other light (sky glow, moonlight, lit windows) on the same grid, per unit
    # level of each term (None: no [night]); shown beside the figures above, never in them.
    night: NightGrid | None = None

    @property
    def with_interreflected_lx(self) -> np.ndarray | None:
        """Direct plus interreflected horizontal illuminance (None when not computed)."""
        return None if self.interreflected_lx is None else self.illuminance_lx + self.interreflected_lx

    def to_json(self) -> dict[str, Any]:
        """The result as plain JSON types (the grid as a list of rows along the street); with
        interreflected light, its grid and the figures with it, labelled
        (:data:`INTERREFLECTED_LABEL`)."""
        out = {
            "name": self.name,
            "setup": self.setup,
            "illuminance_lx": self.illuminance_lx.tolist(),
            "mean_lx": self.mean_lx,
            "min_lx": self.min_lx,
            "max_lx": self.max_lx,
            "u0": self.u0,
        }
        total = self.with_interreflected_lx
        if total is not None:
            assert self.interreflected_lx is not None
            mean = float(total.mean())
            out["with_interreflected"] = {
                "label": INTERREFLECTED_LABEL,
                "interreflected_lx": self.interreflected_lx.tolist(),
                "illuminance_lx": total.tolist(),
                "mean_lx": mean,
                "min_lx": float(total.min()),
                "max_lx": float(total.max()),
                "u0": float(total.min()) / mean if mean > 0 else 0.0,
            }
        if self.night is not None:
            out["night"] = self.night.to_json(self.illuminance_lx)
        return out


@dataclass(frozen=True)
class FaceResult:
    """Semicylindrical and vertical illuminance on a footway field at a height, facing one way."""

    name: str
    setup: str | None
    facing: tuple[float, float, float]
    height_m: float
    semicylindrical_lx: np.ndarray  # (along, across)
    vertical_lx: np.ndarray  # (along, across)
    # The night's other light on the same points and facing (None: no [night]), beside them.
    night_semicylindrical: NightGrid | None = None
    night_vertical: NightGrid | None = None
    # The luminaires' interreflected light alone on the same points and facing (None: not
    # computed); the grids above stay direct light (render.calc.interreflection).
    interreflected_semicylindrical_lx: np.ndarray | None = None
    interreflected_vertical_lx: np.ndarray | None = None

    @property
    def with_interreflected_semicylindrical_lx(self) -> np.ndarray | None:
        """Direct plus interreflected semicylindrical illuminance (None when not computed)."""
        extra = self.interreflected_semicylindrical_lx
        return None if extra is None else self.semicylindrical_lx + extra

    @property
    def with_interreflected_vertical_lx(self) -> np.ndarray | None:
        """Direct plus interreflected vertical illuminance (None when not computed)."""
        extra = self.interreflected_vertical_lx
        return None if extra is None else self.vertical_lx + extra

    def to_json(self) -> dict[str, Any]:
        """The result as plain JSON types, with the mean and minimum of each grid (and the
        night light's grids beside them, labelled, when the scene has it; with interreflected
        light its grids and the figures with it, labelled :data:`INTERREFLECTED_LABEL`)."""
        out = {
            "name": self.name,
            "setup": self.setup,
            "facing": list(self.facing),
            "height_m": self.height_m,
            "semicylindrical_lx": self.semicylindrical_lx.tolist(),
            "semicylindrical_mean_lx": float(self.semicylindrical_lx.mean()),
            "semicylindrical_min_lx": float(self.semicylindrical_lx.min()),
            "vertical_lx": self.vertical_lx.tolist(),
            "vertical_mean_lx": float(self.vertical_lx.mean()),
            "vertical_min_lx": float(self.vertical_lx.min()),
        }
        sc, v = self.with_interreflected_semicylindrical_lx, self.with_interreflected_vertical_lx
        if sc is not None and v is not None:
            assert self.interreflected_semicylindrical_lx is not None and self.interreflected_vertical_lx is not None
            out["with_interreflected"] = {
                "label": INTERREFLECTED_LABEL,
                "interreflected_semicylindrical_lx": self.interreflected_semicylindrical_lx.tolist(),
                "interreflected_vertical_lx": self.interreflected_vertical_lx.tolist(),
                "semicylindrical_lx": sc.tolist(),
                "semicylindrical_mean_lx": float(sc.mean()),
                "semicylindrical_min_lx": float(sc.min()),
                "vertical_lx": v.tolist(),
                "vertical_mean_lx": float(v.mean()),
                "vertical_min_lx": float(v.min()),
            }
        if self.night_semicylindrical is not None and self.night_vertical is not None:
            out["night"] = {
                "semicylindrical": self.night_semicylindrical.to_json(self.semicylindrical_lx),
                "vertical": self.night_vertical.to_json(self.vertical_lx),
            }
        return out


def points_along(spacing_m: float) -> tuple[int, float]:
    """(N, D): the number of points and their spacing along a field of length ``spacing_m``."""
    if not spacing_m > 0:
        raise ValueError(f"field length must be positive, got {spacing_m}")
    if spacing_m <= TEN_POINT_SPACING_M:
        n = 10
    else:
        n = math.ceil(spacing_m / MAX_ALONG_M - _RULE_EPS)
    return n, spacing_m / n


def lane_across(width_m: float) -> tuple[int, float]:
    """(n, d) across a driving lane: three points, d = W/3."""
    if not width_m > 0:
        raise ValueError(f"lane width must be positive, got {width_m}")
    return POINTS_ACROSS, width_m / POINTS_ACROSS


def footway_across(width_m: float) -> tuple[int, float]:
    """(n, d) across a footway: at least three points, more when d would exceed 1.5 m."""
    if not width_m > 0:
        raise ValueError(f"footway width must be positive, got {width_m}")
    n = max(POINTS_ACROSS, math.ceil(width_m / MAX_ACROSS_M - _RULE_EPS))
    return n, width_m / n


def _grid(name: str, x0: float, length_m: float, y0: float, width_m: float, z: float, across) -> CalculationField:
    n_along, d_along = points_along(length_m)
    n_across, d_across = across(width_m)
    xs = x0 + d_along * (np.arange(n_along) + 0.5)
    ys = y0 + d_across * (np.arange(n_across) + 0.5)
    gx, gy = np.meshgrid(xs, ys, indexing="ij")
    pts = np.stack([gx.ravel(), gy.ravel(), np.full(gx.size, z)], axis=1)
    normals = np.tile([0.0, 0.0, 1.0], (pts.shape[0], 1))
    return CalculationField(name, pts, normals, (n_along, n_across), (d_along, d_across))


def street_fields(street: Street, x_start_m: float, spacing_m: float) -> list[CalculationField]:
    """The fields of ``street`` from ``x_start_m`` over ``spacing_m``: one per lane ("lane 1"
    at −y first), then "footway right" and "footway left" where the footway has a width."""
    half = 0.5 * street.carriageway_width_m
    lane_w = street.carriageway_width_m / street.lanes
    fields = [
        _grid(f"lane {k + 1}", x_start_m, spacing_m, -half + k * lane_w, lane_w, 0.0, lane_across)
        for k in range(street.lanes)
    ]
    for side in ("right", "left"):
        s = street.side(side)
        if s.footway_width_m <= 0:
            continue
        inner = half + street.kerb_width_m + s.verge_width_m
        y0 = inner if side == "left" else -(inner + s.footway_width_m)
        fields.append(
            _grid(f"footway {side}", x_start_m, spacing_m, y0, s.footway_width_m, street.kerb_height_m, footway_across)
        )
    return fields


def row_positions(scene: Scene, row: int = 0) -> np.ndarray:
    """(n, 3) positions of the luminaires of the scene's ``luminaire_rows[row]``, sorted along x."""
    where = f"luminaire_rows[{row}]"
    pos = [lum.position_m for lum in scene.luminaires if lum.where == where]
    if not pos:
        raise input_error(scene.path, where, "no such luminaire row: calculation fields need a row of luminaires")
    p = np.array(pos, dtype=np.float64).reshape(-1, 3)
    return p[np.argsort(p[:, 0], kind="stable")]


def lay_along(field: CalculationField, path: Centreline) -> CalculationField:
    """``field`` given in a road's own frame (x the distance along its centreline, y the offset
    across it, + left) laid along the centreline ``path``: each point at its offset along the
    local normal (:meth:`~render.geometry.roads.Centreline.point`), normals turned with the road."""
    along = field.points_m[:, 0].copy()
    across = field.points_m[:, 1].copy()
    xy = path.point(along, across)
    laid = CalculationField(
        field.name,
        np.column_stack([xy, field.points_m[:, 2]]),
        field.normals,
        field.shape,
        field.spacing_m,
        path,
        along,
        across,
    )
    return replace(laid, normals=laid.to_world(field.normals))


def row_road(scene: Scene, row: int = 0) -> Road | None:
    """The road ``luminaire_rows[row]`` stands along, or None (a row on the [street], or no such row)."""
    where = f"luminaire_rows[{row}]"
    name = next((lum.road for lum in scene.luminaires if lum.where == where and lum.road is not None), None)
    return next((r for r in scene.roads if r.name == name), None) if name is not None else None


def row_section(scene: Scene, row: int = 0) -> tuple[Street, Centreline | None, Road | None]:
    """(cross-section, centreline, road) the fields of ``luminaire_rows[row]`` lie on: a row
    along a road gives the road's; otherwise the [street] (centreline and road None). An
    InputError without either."""
    road = row_road(scene, row)
    if road is not None:
        from render.geometry.roads import road_centreline

        return road.section, road_centreline(road), road
    if scene.street is None:
        raise input_error(scene.path, "street", "calculation fields need a [street] section or a row along a road")
    return scene.street, None, None


def road_row_fields(scene: Scene, row: int = 0, pair: int = 0) -> list[CalculationField]:
    """The fields between luminaires ``pair`` and ``pair + 1`` (along the road) of a row on a
    road (``luminaire_rows[row].road``): :func:`street_fields` of the road's cross-section over
    the distance along its centreline between the two stations, laid along it
    (:func:`lay_along`), on straight and curved stretches alike."""
    from render.geometry.roads import road_centreline

    where = f"luminaire_rows[{row}]"
    lums = [lum for lum in scene.luminaires if lum.where == where]
    road = row_road(scene, row)
    assert road is not None
    s = np.unique([lum.s_m for lum in lums])
    if not 0 <= pair < len(s) - 1:
        raise input_error(
            scene.path, where, f"a field needs positions {pair} and {pair + 1} along the row; it has {len(s)}"
        )
    s0, s1 = float(s[pair]), float(s[pair + 1])
    cl = road_centreline(road)
    return [lay_along(f, cl) for f in street_fields(road.section, s0, s1 - s0)]


def row_fields(scene: Scene, row: int = 0, pair: int = 0) -> list[CalculationField]:
    """The fields between luminaires ``pair`` and ``pair + 1`` (along x) of ``luminaire_rows[row]``
    (a row along a road: :func:`road_row_fields`)."""
    where = f"luminaire_rows[{row}]"
    if any(lum.where == where and lum.road is not None for lum in scene.luminaires):
        return road_row_fields(scene, row, pair)
    if scene.street is None:
        raise input_error(scene.path, "street", "calculation fields need a [street] section")
    pos = row_positions(scene, row)
    if not 0 <= pair < len(pos) - 1:
        raise input_error(
            scene.path, where, f"a field needs luminaires {pair} and {pair + 1} of the row; it has {len(pos)}"
        )
    x0, x1 = float(pos[pair, 0]), float(pos[pair + 1, 0])
    if not x1 > x0:
        raise input_error(scene.path, where, "two luminaires of the row stand at the same x: no field between them")
    return street_fields(scene.street, x0, x1 - x0)


def evaluate_field(
    study: Study, field: CalculationField, setup: str | Setup | None = None, *, bounces: int = 0
) -> FieldResult:
    """Horizontal illuminance on ``field`` under ``setup`` (direct light, shadows, the setup's
    lumens, dimming and maintenance factor), with Ē, Emin, Emax and U0 = Emin/Ē. With
    ``bounces`` > 0 also the interreflected light on the same points
    (:meth:`render.study.Study.interreflected_illuminance_lx`, up to ``bounces``
    interreflections, the scene's ``indirect_samples_per_pixel`` paths per point and its seed),
    kept apart in ``interreflected_lx``."""
    e = np.asarray(study.illuminance_lx(field.points_m, field.normals, setup), np.float64)
    grid = e.reshape(field.shape)
    mean = float(grid.mean())
    lo = float(grid.min())
    extra = None
    if bounces > 0:
        extra = np.asarray(
            study.interreflected_illuminance_lx(field.points_m, field.normals, setup, bounces=bounces), np.float64
        ).reshape(field.shape)
    return FieldResult(
        name=field.name,
        setup=setup.name if isinstance(setup, Setup) else setup,
        illuminance_lx=grid,
        mean_lx=mean,
        min_lx=lo,
        max_lx=float(grid.max()),
        u0=lo / mean if mean > 0 else 0.0,
        interreflected_lx=extra,
    )


def semicylindrical_illuminance_lx(
    study: Study, points_m: np.ndarray, facing: np.ndarray, setup: str | Setup | None = None
) -> np.ndarray:
    """(N,) semicylindrical illuminance (lx) at ``points_m`` of small vertical half-cylinders
    facing the horizontal directions ``facing`` ((3,) or (N, 3)), under ``setup``, with shadows
    (the closed form per luminaire in the module text)."""
    pts = np.ascontiguousarray(points_m, np.float64).reshape(-1, 3)
    n = pts.shape[0]
    f = np.broadcast_to(np.asarray(facing, np.float64), (n, 3)).copy()
    f[:, 2] = 0.0
    f /= np.linalg.norm(f, axis=1, keepdims=True)
    s = study.setup(setup)
    lights = study.lights(s)
    up = np.tile([0.0, 0.0, 1.0], (n, 1))
    pairs = direct_pairs(
        pts, up, lights, study.bvh, negligible_lx=study.negligible_lx, shadow_offset_m=study.shadow_offset_m
    )
    u = pairs.direction
    keep = ~pairs.blocked & (u[:, 2] > 0)
    u = u[keep]
    point = pairs.point[keep]
    factors, _ = channel_factors(lights, s)
    e_n = pairs.e_lx[keep] / u[:, 2] * factors[lights.channel[pairs.lum[keep]]]
    shape = np.hypot(u[:, 0], u[:, 1]) + np.einsum("ij,ij->i", u, f[point])
    return np.bincount(point, weights=e_n * shape / np.pi, minlength=n)


def face_plane_directions(n: int = FACE_PLANES) -> np.ndarray:
    """(n, 3) horizontal unit directions in a field's frame, every 360°/n from +x: the normals
    of the vertical planes round a face point (``n`` a multiple of 4, so that ±x and the ends of
    the half circles round them are among them)."""
    if n % 4:
        raise ValueError(f"the face planes must be a multiple of 4, got {n}")
    phi = 2.0 * math.pi * np.arange(n) / n
    return np.column_stack([np.cos(phi), np.sin(phi), np.zeros(n)])


def half_circle_rule(n: int, centre: int) -> tuple[np.ndarray, np.ndarray]:
    """(indices, weights) of the trapezoidal rule for the semicylindrical illuminance
    E_sc = (1/π)·∫ E_v(φ) dφ over the half circle of vertical planes φ ∈ [−π/2, π/2] round the
    plane ``centre`` of :func:`face_plane_directions` (``n``): the n/2 + 1 planes from −90° to
    +90°, the ends weighted half, each weight h/π = 2/n (for one parallel beam straight ahead
    the rule gives h·cot(h/2)/2 of the exact value, −0.25 % at h = 10°)."""
    half = n // 2
    w = np.ones(half + 1)
    w[[0, -1]] = 0.5
    w /= half
    idx = (centre + np.arange(-half // 2, half // 2 + 1)) % n
    return idx, w


def evaluate_face_field(
    study: Study,
    field: CalculationField,
    setup: str | Setup | None = None,
    *,
    facing: tuple[float, float, float] = (1.0, 0.0, 0.0),
    height_m: float = FACE_HEIGHT_M,
) -> FaceResult:
    """Semicylindrical and vertical illuminance ``height_m`` above the points of ``field``
    (a footway), facing the horizontal direction ``facing``, under ``setup``; on a field laid
    along a road ``facing`` is in the road's frame (x along it, y across), so it turns with the
    road from point to point."""
    f = np.array(facing, np.float64)
    f[2] = 0.0
    f /= np.linalg.norm(f)
    pts = field.points_m + [0.0, 0.0, height_m]
    normals = field.to_world(f)
    e_sc = semicylindrical_illuminance_lx(study, pts, normals, setup)
    e_v = np.asarray(study.illuminance_lx(pts, normals, setup), np.float64)
    return FaceResult(
        name=field.name,
        setup=setup.name if isinstance(setup, Setup) else setup,
        facing=(float(f[0]), float(f[1]), float(f[2])),
        height_m=float(height_m),
        semicylindrical_lx=e_sc.reshape(field.shape),
        vertical_lx=e_v.reshape(field.shape),
    )
