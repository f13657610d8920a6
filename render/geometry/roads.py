"""Roads along polylines: centrelines, offset bands and junctions.

A road (``[[roads]]``, :class:`~render.scene.model.Road`) is a :class:`~render.scene.model.Street`
cross-section swept along a centreline polyline. This module makes its geometry:

* :func:`centreline`: the polyline with each interior point optionally replaced by a circular
  arc of ``corner_radius_m`` tangent to both segments, tessellated into chords that stay within
  ``max_chord_error_m`` of the arc (the sagitta ``r·(1 − cos(φ/2))`` of a chord subtending φ),
  taken at the road's reach (:func:`road_reach_m`: centreline to the farther building line) so
  that every band edge on the outside of a bend keeps within it too, with the distance ``s``
  along it and a unit normal per segment (+ to the left).
* Offset curves: the point at lateral offset ``d`` of vertex ``i`` is ``p_i + d·m_i`` with the
  mitre vector ``m_i = (n_a + n_b)/(1 + n_a·n_b)`` of the normals of the two segments meeting
  there, so that each offset segment lies at exactly ``d`` from its centreline segment. A
  sharp corner's mitre is at most :data:`MITER_LIMIT` times the offset. An offset curve *folds*
  where one of its segments points backwards (``d`` beyond the local radius of a bend on the
  inside); :func:`fold_problem` reports it.
* :func:`add_roads`: every band of every road (carriageway, kerb faces as vertical walls, kerb
  tops, verges, footways, front gardens, the centre line) as triangle strips between offset
  curves, one object per road and band, named as the ``[street]`` builder names them
  (:func:`render.geometry.build.compile_scene`), the carriageway of each road listed in
  ``mesh.carriageway_objects``; and the junctions (:func:`find_arms`): where a road's end lies
  on another road's centreline the ending road's carriageway stops at the through road's kerb
  line, the two corners are rounded with the ending road's ``junction_kerb_radius_m`` (the
  circle tangent to both kerb lines), the mouth between them is filled, the through road's side
  bands are cut back between the corners' tangent points and the side bands follow each arc.
  Supported: T junctions at 20°–160° and two roads ending at one point of a third from
  opposite sides (a cross junction).
* :class:`Centreline` ``frame``/``point``: positions along a road (s, offset) for luminaire
  rows, objects, markings and calculation fields.

A ``[street]`` is the road from (0, 0) to (``length_m``, 0) (:func:`street_as_road`); built this
way it gives the ``[street]`` builder's triangles exactly (``tests/test_roads.py``).

References
----------
- Offset curves of polylines with mitre joins, and the fold of an inner offset where the offset
  exceeds the radius of curvature: analytic plane geometry (e.g. Farouki and Neff, "Analytic
  properties of plane offset curves", Computer Aided Geometric Design 7, 1990).
- Mitre limit 4 (the ratio of mitre length to offset): the default ``stroke-miterlimit`` of
  W3C SVG 1.1 (Second Edition), 2011, section 11.4.
- Fillet circle tangent to two lines, sagitta of a chord: analytic plane geometry.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field
from pathlib import Path

import numpy as np

from render.errors import input_error
from render.scene.model import Road, Street

__all__ = [
    "DEFAULT_CHORD_ERROR_M",
    "DEFAULT_JUNCTION_KERB_RADIUS_M",
    "JUNCTION_TOLERANCE_M",
    "MAX_JUNCTION_ANGLE_DEG",
    "MIN_JUNCTION_ANGLE_DEG",
    "MITER_LIMIT",
    "Arm",
    "Centreline",
    "RoadError",
    "add_roads",
    "bend_along",
    "centreline",
    "find_arms",
    "fold_problem",
    "path_along",
    "road_centreline",
    "road_reach_m",
    "side_offsets",
    "street_as_road",
]

#: Default largest distance between an arc and its chords, m.
DEFAULT_CHORD_ERROR_M = 0.01
#: Default kerb radius at a junction's corners, m (residential streets 4–10 m; common practice,
#: no source).
DEFAULT_JUNCTION_KERB_RADIUS_M = 6.0
#: Largest mitre length over the offset at a sharp corner (W3C SVG 1.1's default miter limit):
#: a turn of at most 2·acos(1/4) ≈ 151°.
MITER_LIMIT = 4.0
#: A road's end within this distance of another road's centreline meets it, m.
JUNCTION_TOLERANCE_M = 0.001
#: Angles between two roads at a junction that are built (narrower corners would need kerb
#: radii far larger than the carriageways; own choice).
MIN_JUNCTION_ANGLE_DEG = 20.0
MAX_JUNCTION_ANGLE_DEG = 160.0
#: The last band of each side runs this far under the building line (as the [street] builder).
_UNDER_BUILDING_LINE_M = 0.1
#: Width of the centre line and its dashes, m (as the [street] builder; common practice, no source).
_LINE_WIDTH_M = 0.1
_DASH_M, _GAP_M, _FIRST_DASH_M = 3.0, 6.0, 1.0
_SIDES = ("left", "right")


class RoadError(ValueError):
    """A road that cannot be built: ``key`` is the road's key at fault (``"points_m"`` …)."""

    def __init__(self, key: str, message: str, where: str | None = None):
        super().__init__(message)
        self.key = key
        self.where = where  # the road's key path when the message concerns several roads


def _rot90(v: np.ndarray) -> np.ndarray:
    """Vectors turned 90° anticlockwise (the left normal of a direction)."""
    v = np.asarray(v, dtype=np.float64)
    return np.stack([-v[..., 1], v[..., 0]], axis=-1)


def _cross(a: np.ndarray, b: np.ndarray) -> np.ndarray:
    return a[..., 0] * b[..., 1] - a[..., 1] * b[..., 0]


@dataclass(frozen=True)
class Centreline:
    """A road's tessellated centreline.

    ``points`` (n, 2) vertices; ``s`` (n,) distance along the polyline from the first vertex;
    ``tangents``/``normals`` (n − 1, 2) unit direction and left normal of each segment;
    ``miters`` (n, 2) the mitre vector of each vertex (the segment normal at the ends and where
    the polyline does not turn); ``bends`` (n,) whether the polyline turns at the vertex."""

    points: np.ndarray
    s: np.ndarray
    tangents: np.ndarray
    normals: np.ndarray
    miters: np.ndarray
    bends: np.ndarray

    @property
    def length_m(self) -> float:
        """Length of the polyline, m."""
        return float(self.s[-1])

    def segment(self, s_m) -> np.ndarray:
        """Index of the segment holding each distance ``s_m`` (a vertex belongs to the segment
        after it, the last vertex to the last segment)."""
        i = np.searchsorted(self.s, np.asarray(s_m, dtype=np.float64), side="right") - 1
        return np.clip(i, 0, len(self.s) - 2)

    def frame(self, s_m) -> tuple[np.ndarray, np.ndarray]:
        """(points, unit tangents), each (…, 2), of the centreline at distances ``s_m``."""
        s = np.asarray(s_m, dtype=np.float64)
        i = self.segment(s)
        t = self.tangents[i]
        return self.points[i] + (s - self.s[i])[..., None] * t, t

    def point(self, s_m, offset_m) -> np.ndarray:
        """World (x, y) (…, 2) at distances ``s_m`` along and ``offset_m`` across (+ left): the
        continuous map of the road's own frame, within segment i at fraction f of it
        ``(1 − f)·(p_i + d·m_i) + f·(p_(i+1) + d·m_(i+1))`` with the vertices' mitre vectors m.
        A line of constant offset d is the offset curve (:meth:`offset`), so a point keeps its
        offset from the drawn kerb; round an arc the offset direction turns with the arc (on a
        segment's own normal a point would stray by up to d·φ/2 for chords subtending φ); on
        a straight stretch it is the point at d along the normal, except next to a bend, where
        the offset direction starts to turn and moves the point by at most d·tan(τ/2)/2 along
        the road (τ the turn at the nearer vertex: half a chord's angle where an arc begins).
        Beyond the ends the first and last segments are continued straight."""
        s = np.asarray(s_m, dtype=np.float64)
        d = np.asarray(offset_m, dtype=np.float64)[..., None]
        i = self.segment(s)
        u = (s - self.s[i])[..., None]
        f = u / (self.s[i + 1] - self.s[i])[..., None]
        m = self.miters[i] + f * (self.miters[i + 1] - self.miters[i])  # exactly the normal where both agree
        return self.points[i] + u * self.tangents[i] + d * m

    def across(self, s_m) -> np.ndarray:
        """(…, 2) unit direction across the road (+ left) at distances ``s_m``: that in which
        :meth:`point` moves with the offset (the blended mitre vectors), the segment's normal on
        a straight stretch; the direction along the road is this turned 90° clockwise."""
        s = np.asarray(s_m, dtype=np.float64)
        i = self.segment(s)
        f = ((s - self.s[i]) / (self.s[i + 1] - self.s[i]))[..., None]
        m = self.miters[i] + f * (self.miters[i + 1] - self.miters[i])
        return m / np.linalg.norm(m, axis=-1, keepdims=True)

    def locate(self, xy) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
        """(s, signed offset (+ left), distance) of the nearest point of the polyline to each of
        the points ``xy`` (k, 2)."""
        p = np.asarray(xy, dtype=np.float64).reshape(-1, 2)
        a = self.points[:-1]
        seg_len = np.diff(self.s)
        rel = p[:, None, :] - a[None, :, :]
        u = np.clip(np.einsum("kij,ij->ki", rel, self.tangents), 0.0, seg_len)
        near = a[None] + u[..., None] * self.tangents[None]
        dist = np.hypot(*(p[:, None, :] - near).transpose(2, 0, 1))
        i = np.argmin(dist, axis=1)
        k = np.arange(p.shape[0])
        side = _cross(self.tangents[i], p - near[k, i])
        return self.s[i] + u[k, i], np.where(side >= 0, 1.0, -1.0) * dist[k, i], dist[k, i]

    def offset(self, d_m: float) -> np.ndarray:
        """The offset curve at ``d_m`` (+ left): (n, 2), one point per vertex."""
        return self.points + d_m * self.miters

    def index(self, s_m: float) -> int:
        """The vertex at distance ``s_m`` (inserted by :meth:`refined`)."""
        return int(np.argmin(np.abs(self.s - s_m)))

    def straight_between(self, s0_m: float, s1_m: float, tol_m: float = 1e-9) -> bool:
        """Whether the polyline does not turn strictly between ``s0_m`` and ``s1_m``."""
        lo, hi = min(s0_m, s1_m), max(s0_m, s1_m)
        inside = (self.s > lo + tol_m) & (self.s < hi - tol_m)
        return not bool(np.any(self.bends & inside))

    def refined(self, extra_s_m) -> Centreline:
        """The same polyline with vertices added at distances ``extra_s_m`` (where there is
        none within 1 nm): straight vertices, so every band can start or stop there."""
        extra = np.unique(np.asarray(extra_s_m, dtype=np.float64).ravel())
        extra = extra[(extra > 0) & (extra < self.length_m)]
        if extra.size:
            near = np.min(np.abs(extra[:, None] - self.s[None, :]), axis=1)
            extra = extra[near > 1e-9]
        if extra.size == 0:
            return self
        p_new, _ = self.frame(extra)
        s = np.concatenate([self.s, extra])
        order = np.argsort(s, kind="stable")
        s = s[order]
        points = np.concatenate([self.points, p_new])[order]
        mid = 0.5 * (s[:-1] + s[1:])
        seg = self.segment(mid)
        new_seg = self.segment(extra)
        miters = np.concatenate([self.miters, self.normals[new_seg]])[order]
        bends = np.concatenate([self.bends, np.zeros(extra.size, bool)])[order]
        return Centreline(points, s, self.tangents[seg], self.normals[seg], miters, bends)


def _from_vertices(points: np.ndarray, bends: np.ndarray) -> Centreline:
    seg = np.diff(points, axis=0)
    length = np.hypot(seg[:, 0], seg[:, 1])
    t = seg / length[:, None]
    n = _rot90(t)
    s = np.concatenate([[0.0], np.cumsum(length)])
    miters = np.empty_like(points)
    miters[0], miters[-1] = n[0], n[-1]
    a, b = n[:-1], n[1:]
    same = np.all(a == b, axis=1)
    denom = 1.0 + np.einsum("ij,ij->i", a, b)
    with np.errstate(divide="ignore", invalid="ignore"):
        miters[1:-1] = np.where(same[:, None], b, (a + b) / denom[:, None])
    return Centreline(points, s, t, n, miters, bends & ~np.concatenate([[True], same, [True]]))


def centreline(
    points_m,
    corner_radius_m: float | None = None,
    max_chord_error_m: float = DEFAULT_CHORD_ERROR_M,
    reach_m: float = 0.0,
) -> Centreline:
    """The tessellated centreline of ``points_m`` (at least two points, consecutive points
    apart), with interior corners rounded by arcs of ``corner_radius_m`` (None: sharp,
    mitred corners). The arcs are cut into chords fine enough that every offset curve out to
    ``reach_m`` on the outside of a bend (radius r + reach) stays within ``max_chord_error_m``
    of its true arc, the centreline itself too.

    Raises
    ------
    RoadError
        Too few or repeated points, a corner turning back on itself or beyond the mitre limit,
        or arcs that do not fit on the segments between them."""
    p = np.asarray(points_m, dtype=np.float64).reshape(-1, 2)
    if p.shape[0] < 2:
        raise RoadError("points_m", "a road needs at least two points")
    seg = np.diff(p, axis=0)
    length = np.hypot(seg[:, 0], seg[:, 1])
    if np.any(length < 1e-3):
        k = int(np.argmax(length < 1e-3))
        raise RoadError("points_m", f"points {k} and {k + 1} are less than 1 mm apart")
    d = seg / length[:, None]
    turn = np.arctan2(_cross(d[:-1], d[1:]), np.einsum("ij,ij->i", d[:-1], d[1:]))  # at interior points
    for k, angle in enumerate(turn, start=1):
        if abs(angle) > math.pi - 1e-6:
            raise RoadError("points_m", f"the road turns back on itself at point {k}")
        if corner_radius_m is None and 1.0 / math.cos(0.5 * angle) > MITER_LIMIT:
            raise RoadError(
                "points_m",
                f"the road turns by {math.degrees(abs(angle)):.0f}° at point {k}; sharp corners turn at most "
                f"{math.degrees(2 * math.acos(1 / MITER_LIMIT)):.0f}°: give corner_radius_m to round it",
            )
    if corner_radius_m is None or turn.size == 0:
        bends = np.zeros(p.shape[0], bool)
        bends[1:-1] = np.abs(turn) > 0
        return _from_vertices(p, bends)
    r = float(corner_radius_m)
    tangent = r * np.tan(0.5 * np.abs(turn))
    used = np.concatenate([[0.0], tangent]) + np.concatenate([tangent, [0.0]])
    for k in np.nonzero(used > length * (1 + 1e-12))[0]:
        raise RoadError(
            "corner_radius_m",
            f"arcs of {r:g} m at the corners of points_m[{k}] and points_m[{k + 1}] need {used[k]:.3f} m of the "
            f"{length[k]:.3f} m between them: give a smaller radius or points further apart",
        )
    phi_max = 2.0 * math.acos(max(1.0 - max_chord_error_m / (r + max(reach_m, 0.0)), -1.0))
    verts: list[np.ndarray] = [p[:1]]
    bend_flags: list[np.ndarray] = [np.zeros(1, bool)]
    for k in range(1, p.shape[0] - 1):
        angle = float(turn[k - 1])
        if angle == 0.0:
            continue
        start = p[k] - tangent[k - 1] * d[k - 1]
        end = p[k] + tangent[k - 1] * d[k]
        centre = start + math.copysign(r, angle) * _rot90(d[k - 1])
        m = max(1, math.ceil(abs(angle) / phi_max - 1e-12))
        a = np.arange(m + 1) * (angle / m)
        rel = start - centre
        c, s = np.cos(a), np.sin(a)
        arc = centre + np.stack([c * rel[0] - s * rel[1], s * rel[0] + c * rel[1]], axis=1)
        arc[0], arc[-1] = start, end
        verts.append(arc)
        bend_flags.append(np.ones(m + 1, bool))
    verts.append(p[-1:])
    bend_flags.append(np.zeros(1, bool))
    v = np.concatenate(verts)
    flags = np.concatenate(bend_flags)
    keep = np.concatenate([[True], np.hypot(*np.diff(v, axis=0).T) > 1e-9])
    return _from_vertices(v[keep], flags[keep])


def _split_at(tris: np.ndarray, normals: np.ndarray, c: float) -> tuple[np.ndarray, np.ndarray]:
    """Triangles (n, 3, 3) and their vertex normals cut by the plane x = ``c``: a triangle with
    vertices on both sides becomes two (one vertex on the plane) or three, with the same
    winding; the new vertices lie on the plane (x = ``c`` exactly), their normals interpolated.
    The point on an edge is computed from its endpoint on the lower side, so two triangles
    sharing the edge get the same point."""
    side = tris[:, :, 0] - c
    eps = 1e-12 * max(1.0, abs(c))
    sign = np.where(side > eps, 1, np.where(side < -eps, -1, 0))
    cross = np.any(sign > 0, axis=1) & np.any(sign < 0, axis=1)
    if not np.any(cross):
        return tris, normals
    keep_t, keep_n = [tris[~cross]], [normals[~cross]]

    def cut(a, b, na, nb, sa, sb):
        low = (sa < 0)[:, None]  # from the endpoint below the plane
        lo, hi = np.where(low, a, b), np.where(low, b, a)
        nlo, nhi = np.where(low, na, nb), np.where(low, nb, na)
        slo, shi = np.where(low[:, 0], sa, sb), np.where(low[:, 0], sb, sa)
        t = (-slo / (shi - slo))[:, None]
        p = lo + t * (hi - lo)
        p[:, 0] = c
        return p, nlo + t * (nhi - nlo)

    T, N, S, G = tris[cross], normals[cross], side[cross], sign[cross]
    on = np.any(G == 0, axis=1)
    for mask, first in ((on, np.argmin(np.abs(G), axis=1)), (~on, None)):
        if not np.any(mask):
            continue
        t, n, sd, g = T[mask], N[mask], S[mask], G[mask]
        if first is None:  # the vertex alone on its side
            first = np.array(
                [[i for i in range(3) if row[i] != row[(i + 1) % 3] and row[i] != row[(i + 2) % 3]][0] for row in g]
            )
        else:
            first = first[mask]
        order = (first[:, None] + np.arange(3)[None]) % 3
        k = np.arange(len(t))[:, None]
        t, n, sd = t[k, order], n[k, order], sd[k, order]
        v0, v1, v2 = t[:, 0], t[:, 1], t[:, 2]
        n0, n1, n2 = n[:, 0], n[:, 1], n[:, 2]
        if mask is on:
            p, np_ = cut(v1, v2, n1, n2, sd[:, 1], sd[:, 2])
            keep_t += [np.stack([v0, v1, p], 1), np.stack([v0, p, v2], 1)]
            keep_n += [np.stack([n0, n1, np_], 1), np.stack([n0, np_, n2], 1)]
        else:
            p1, m1 = cut(v0, v1, n0, n1, sd[:, 0], sd[:, 1])
            p2, m2 = cut(v0, v2, n0, n2, sd[:, 0], sd[:, 2])
            keep_t += [np.stack([v0, p1, p2], 1), np.stack([p1, v1, v2], 1), np.stack([p1, v2, p2], 1)]
            keep_n += [np.stack([n0, m1, m2], 1), np.stack([m1, n1, n2], 1), np.stack([m1, n2, m2], 1)]
    return np.concatenate(keep_t), np.concatenate(keep_n)


def bend_along(cl: Centreline, triangles, normals) -> tuple[np.ndarray, np.ndarray]:
    """Triangles (n, 3, 3) given in a road's own frame (x the distance along the centreline,
    y the offset across it, + left, z up) and their vertex normals, laid along the road: cut
    at every vertex of the centreline they span (where the map changes), each vertex placed by
    :meth:`Centreline.point` (a face of constant offset becomes the offset curve at that
    distance from the curved kerb; the cut faces of two neighbours coincide, so a row of
    buildings bends without gaps or overlaps) and the normals turned with the road."""
    t = np.asarray(triangles, np.float64).reshape(-1, 3, 3)
    n = np.asarray(normals, np.float64).reshape(-1, 3, 3)
    if t.shape[0] == 0:
        return t, n
    lo, hi = float(t[:, :, 0].min()), float(t[:, :, 0].max())
    for c in cl.s[(cl.s > lo) & (cl.s < hi)]:
        t, n = _split_at(t, n, float(c))
    flat = t.reshape(-1, 3)
    xy = cl.point(flat[:, 0], flat[:, 1])
    world = np.column_stack([xy, flat[:, 2]]).reshape(t.shape)
    _, tangent = cl.frame(t[:, :, 0].mean(axis=1))  # per triangle: the segment it lies on
    left = _rot90(tangent)
    nw = n[:, :, :1] * tangent[:, None, :] + n[:, :, 1:2] * left[:, None, :]
    nrm = np.concatenate([nw, n[:, :, 2:]], axis=2)
    length = np.linalg.norm(nrm, axis=2, keepdims=True)
    return world, nrm / np.where(length > 0, length, 1.0)


def path_along(cl: Centreline, points, closed: bool = False) -> np.ndarray:
    """World (x, y) points (k, 2) of a path given as ``[s, offset]`` points along ``cl``: each
    piece between two points follows the centreline's vertices between them, its offset
    passing linearly from one point's to the next's (``closed``: back to the first point)."""
    q = np.asarray(points, dtype=np.float64).reshape(-1, 2)
    if closed:
        q = np.vstack([q, q[:1]])
    s_out, o_out = [q[0, 0]], [q[0, 1]]
    for (s0, o0), (s1, o1) in zip(q[:-1], q[1:]):
        lo, hi = min(s0, s1), max(s0, s1)
        between = cl.s[(cl.s > lo + 1e-9) & (cl.s < hi - 1e-9)]
        if s1 < s0:
            between = between[::-1]
        f = (between - s0) / (s1 - s0) if s1 != s0 else np.zeros(0)
        s_out.extend(between)
        o_out.extend(o0 + f * (o1 - o0))
        s_out.append(s1)
        o_out.append(o1)
    xy = cl.point(np.array(s_out), np.array(o_out))
    return xy[:-1] if closed else xy


def road_reach_m(section: Street) -> float:
    """Distance from the centreline to the farther building line of ``section`` (the last
    band's outer edge), m: the reach within which :func:`road_centreline` keeps arcs true."""
    return 0.5 * section.carriageway_width_m + max(side_depth_m(section, "left"), side_depth_m(section, "right"))


def road_centreline(road: Road) -> Centreline:
    """The tessellated centreline of ``road``: its arcs in chords that keep every band edge and
    the building lines within ``max_chord_error_m`` of their true arcs."""
    return centreline(road.points_m, road.corner_radius_m, road.max_chord_error_m, road_reach_m(road.section))


def street_as_road(street: Street, name: str = "street") -> Road:
    """The road a ``[street]`` is: from (0, 0) to (``length_m``, 0), the same cross-section."""
    return Road(
        name=name,
        points_m=((0.0, 0.0), (street.length_m, 0.0)),
        section=street,
        corner_radius_m=None,
        max_chord_error_m=DEFAULT_CHORD_ERROR_M,
        junction_kerb_radius_m=DEFAULT_JUNCTION_KERB_RADIUS_M,
        where="street",
    )


@dataclass(frozen=True)
class SideBand:
    """One ground band of a side: lateral offsets ``d0 < d1`` (+ left), material, object name."""

    name: str  # object name ("kerb left", "verge left", "footway left", "front gardens left")
    material: str
    d0: float
    d1: float
    depth0: float  # distance of its inner edge from the kerb face, m
    depth1: float


def side_offsets(section: Street, side: str) -> list[SideBand]:
    """The four ground bands of ``side`` from the kerb outwards (kerb top, verge, footway,
    front gardens, the last running :data:`_UNDER_BUILDING_LINE_M` under the building line),
    zero widths included, with the ``[street]`` builder's arithmetic."""
    sign = 1.0 if side == "left" else -1.0
    s = section.side(side)
    half = 0.5 * section.carriageway_width_m
    widths = [
        (section.kerb_width_m, section.kerb_material, f"kerb {side}"),
        (s.verge_width_m, s.verge_material, f"verge {side}"),
        (s.footway_width_m, s.footway_material, f"footway {side}"),
        (s.frontage_depth_m, s.frontage_material, f"front gardens {side}"),
    ]
    out = []
    y = half
    for k, (width, material, name) in enumerate(widths):
        if width > 0 and k == len(widths) - 1:
            width += _UNDER_BUILDING_LINE_M
        y0, y1 = sorted((sign * y, sign * (y + width)))
        out.append(SideBand(name, material, y0, y1, y - half, y + width - half))
        y += width
    return out


def side_depth_m(section: Street, side: str) -> float:
    """Distance from the kerb face to the outer edge of the last band of ``side``, m."""
    return side_offsets(section, side)[-1].depth1


def fold_problem(road: Road, cl: Centreline | None = None) -> str | None:
    """Why the offset curves of ``road`` fold (a bend tighter than the distance from the
    centreline to a band's outer edge), or None."""
    cl = road_centreline(road) if cl is None else cl
    half = 0.5 * road.section.carriageway_width_m
    for side, sign in (("left", 1.0), ("right", -1.0)):
        d = sign * (half + side_depth_m(road.section, side))
        o = cl.offset(d)
        forward = np.einsum("ij,ij->i", np.diff(o, axis=0), cl.tangents)
        bad = np.nonzero(forward <= 1e-9)[0]
        if bad.size:
            i = int(bad[0])
            x, y = cl.points[i]
            return (
                f"the road bends too tightly near ({x:.2f}, {y:.2f}) m, {cl.s[i]:.2f} m along it: the {side} side "
                f"reaches {abs(d):.2f} m from the centreline (carriageway half-width and the {side} bands), more than "
                "the bend's radius there, so its edges would fold over; give a larger corner_radius_m, points further "
                "apart or narrower bands"
            )
    return None


# --------------------------------------------------------------------------------------------
# Triangles


def _ground_strip(lo: np.ndarray, hi: np.ndarray, z: float) -> np.ndarray:
    """Triangles (2(k − 1), 3, 3) between two curves (k, 2), ``lo`` to the right of ``hi``
    (the lower offset), up-facing; per segment the two triangles of the [street] builder's quad."""
    k = lo.shape[0]
    zz = np.full((k, 1), z)
    a = np.hstack([lo, zz])
    b = np.hstack([hi, zz])
    t0 = np.stack([a[:-1], a[1:], b[1:]], axis=1)
    t1 = np.stack([a[:-1], b[1:], b[:-1]], axis=1)
    return np.stack([t0, t1], axis=1).reshape(-1, 3, 3)


def _wall(curve: np.ndarray, z0: float, z1: float, facing_left: bool) -> np.ndarray:
    """A vertical wall standing on ``curve`` (k, 2) from ``z0`` to ``z1``, facing left of the
    curve's direction (``facing_left``) or right."""
    lo = np.hstack([curve, np.full((curve.shape[0], 1), z0)])
    hi = np.hstack([curve, np.full((curve.shape[0], 1), z1)])
    if facing_left:
        q = (lo[1:], lo[:-1], hi[:-1], hi[1:])
    else:
        q = (lo[:-1], lo[1:], hi[1:], hi[:-1])
    t0 = np.stack([q[0], q[1], q[2]], axis=1)
    t1 = np.stack([q[0], q[2], q[3]], axis=1)
    return np.stack([t0, t1], axis=1).reshape(-1, 3, 3)


def _up(tris: np.ndarray) -> np.ndarray:
    """Ground triangles turned to face up, those of no area left out."""
    e1 = tris[:, 1, :2] - tris[:, 0, :2]
    e2 = tris[:, 2, :2] - tris[:, 0, :2]
    area = _cross(e1, e2)
    tris = tris[np.abs(area) > 1e-12]
    flip = area[np.abs(area) > 1e-12] < 0
    tris[flip] = tris[flip][:, [0, 2, 1]]
    return tris


def _kept(length: float, cuts: list[tuple[float, float]]) -> list[tuple[float, float]]:
    """The parts of [0, ``length``] outside the ``cuts``."""
    out = []
    start = 0.0
    for a, b in sorted(cuts):
        if a > start:
            out.append((start, a))
        start = max(start, b)
    if start < length:
        out.append((start, length))
    return [(a, b) for a, b in out if b - a > 1e-9]


def _sub_curve(cl: Centreline, sa: float, sb: float, d: float) -> np.ndarray:
    """The offset curve at ``d`` from distance ``sa`` to ``sb``: its ends on their segments'
    normals, the vertices between on their mitres."""
    inside = (cl.s > sa + 1e-9) & (cl.s < sb - 1e-9)
    ends = cl.point(np.array([sa, sb]), np.array([d, d]))
    return np.vstack([ends[:1], cl.offset(d)[inside], ends[1:]])


@dataclass(frozen=True)
class Arm:
    """A road (``branch``) ending on another (``through``) at ``s_through_m`` along it;
    ``at_start``: the branch's first point is the one on the through road."""

    through: int
    branch: int
    at_start: bool
    s_through_m: float


@dataclass
class _Cuts:
    """Distances along a road where its bands are left out (junction mouths)."""

    carriageway: list[tuple[float, float]] = field(default_factory=list)
    sides: dict[str, list[tuple[float, float]]] = field(default_factory=lambda: {"left": [], "right": []})

    def stations(self) -> list[float]:
        spans = self.carriageway + self.sides["left"] + self.sides["right"]
        return [v for span in spans for v in span]


def _project(cl: Centreline, xy: np.ndarray) -> tuple[float, float]:
    """(distance of ``xy`` from the polyline, s of its nearest point)."""
    a = cl.points[:-1]
    seg_len = np.diff(cl.s)
    u = np.clip(np.einsum("ij,ij->i", xy - a, cl.tangents), 0.0, seg_len)
    nearest = a + u[:, None] * cl.tangents
    dist = np.hypot(*(nearest - xy).T)
    i = int(np.argmin(dist))
    return float(dist[i]), float(cl.s[i] + u[i])


def find_arms(roads: list[Road], cls: list[Centreline]) -> list[Arm]:
    """The junction arms of ``roads``: each end of a road lying on another road's centreline.

    Raises
    ------
    RoadError
        (through the message, with the road's ``where``) Two roads meeting end to end."""
    arms = []
    for j, (road, cl) in enumerate(zip(roads, cls)):
        for at_start, end in ((True, cl.points[0]), (False, cl.points[-1])):
            met_end = None
            on_through = False
            for i, (other, ocl) in enumerate(zip(roads, cls)):
                if i == j:
                    continue
                dist, s = _project(ocl, end)
                if dist > JUNCTION_TOLERANCE_M:
                    continue
                if s <= JUNCTION_TOLERANCE_M or s >= ocl.length_m - JUNCTION_TOLERANCE_M:
                    met_end = other
                    continue
                arms.append(Arm(i, j, at_start, s))
                on_through = True
            if met_end is not None and not on_through:  # ends meeting on a third road form a cross
                raise RoadError(
                    "points_m",
                    f"{road.where} ({road.name!r}) meets {met_end.where} ({met_end.name!r}) end to end; "
                    "join them into one road's points_m (a road may bend) or end one on the other's centreline",
                    road.where,
                )
    return arms


@dataclass
class _ArmShape:
    """What one arm changes: cuts on both roads and the pieces of the mouth and the corners."""

    arm: Arm
    side: str  # the through road's side the branch leaves from
    through_span: tuple[float, float]
    branch_carriageway: tuple[float, float]
    branch_sides: dict[str, tuple[float, float]]
    corners: list[dict]  # per corner: centre, tangent points' s on both roads, branch side


def _arm_shape(arm: Arm, roads: list[Road], cls: list[Centreline]) -> _ArmShape:
    A, B = roads[arm.through], roads[arm.branch]
    clA, clB = cls[arm.through], cls[arm.branch]
    p, tA = clA.frame(arm.s_through_m)
    nA = _rot90(tA)
    u = clB.tangents[0] if arm.at_start else -clB.tangents[-1]
    nu = _rot90(u)
    sin_angle = float(_cross(tA, u))
    angle = math.degrees(math.atan2(sin_angle, float(np.dot(tA, u))))
    if not MIN_JUNCTION_ANGLE_DEG <= abs(angle) <= MAX_JUNCTION_ANGLE_DEG:
        raise RoadError(
            "points_m",
            f"{B.where} ({B.name!r}) meets {A.where} ({A.name!r}) at {abs(angle):.0f}°; junctions are built for "
            f"angles from {MIN_JUNCTION_ANGLE_DEG:g}° to {MAX_JUNCTION_ANGLE_DEG:g}°",
        )
    sigma = 1.0 if sin_angle > 0 else -1.0
    side = "left" if sigma > 0 else "right"
    hA, hB = 0.5 * A.section.carriageway_width_m, 0.5 * B.section.carriageway_width_m
    R = B.junction_kerb_radius_m
    rho = 1.0 if arm.at_start else -1.0
    corners = []
    for e in (1.0, -1.0):
        beta = sigma * (hA + R)
        alpha = (e * (hB + R) - beta * float(np.dot(nA, nu))) / float(np.dot(tA, nu))
        centre = p + alpha * tA + beta * nA
        lam = float(np.dot(centre - p, u))
        b_side = "left" if e * rho > 0 else "right"
        depth = max(side_depth_m(A.section, side), side_depth_m(B.section, b_side))
        if not R > depth:
            raise RoadError(
                "junction_kerb_radius_m",
                f"the kerb radius {R:g} m where {B.where} ({B.name!r}) meets {A.name!r} must exceed the {depth:.2f} m "
                "from kerb face to building line at that corner (kerb, verge, footway and front gardens): give a "
                "larger junction_kerb_radius_m or shallower bands",
            )
        corners.append(
            {"centre": centre, "s_through": arm.s_through_m + alpha, "lam": lam, "e": e, "b_side": b_side, "R": R}
        )
    span = (min(c["s_through"] for c in corners), max(c["s_through"] for c in corners))
    mouth = max(c["lam"] for c in corners)
    if not (span[0] > 0 and span[1] < clA.length_m):
        raise RoadError("points_m", f"{B.where} ({B.name!r}) ends too near the end of {A.name!r} for its junction")
    if not 0 < mouth < clB.length_m:
        raise RoadError("points_m", f"{B.where} ({B.name!r}) is too short for its junction with {A.name!r}")
    if not clA.straight_between(span[0], span[1], tol_m=-1e-9):
        raise RoadError(
            "points_m",
            f"{A.where} ({A.name!r}) bends within the mouth of its junction with {B.name!r} "
            f"({span[0]:.2f} to {span[1]:.2f} m along it); a junction needs the through road straight there",
        )

    def along(lam: float) -> float:
        return lam if arm.at_start else clB.length_m - lam

    if not clB.straight_between(along(0.0), along(mouth), tol_m=-1e-9):
        raise RoadError(
            "points_m",
            f"{B.where} ({B.name!r}) bends within {mouth:.2f} m of its junction with {A.name!r}; a junction needs "
            "the ending road straight there",
        )
    for c in corners:
        c["s_branch"] = along(c["lam"])
    b_sides = {c["b_side"]: tuple(sorted((along(0.0), along(c["lam"])))) for c in corners}
    return _ArmShape(arm, side, span, tuple(sorted((along(0.0), along(mouth)))), b_sides, corners)


def _arc(centre: np.ndarray, start: np.ndarray, end: np.ndarray, chord_error_m: float) -> np.ndarray:
    """Unit directions from ``centre`` sweeping the short way from ``start`` to ``end`` (both
    included), as many as keep chords of the larger radius within ``chord_error_m``."""
    a = (start - centre) / np.hypot(*(start - centre))
    b = (end - centre) / np.hypot(*(end - centre))
    delta = math.atan2(float(_cross(a, b)), float(np.dot(a, b)))
    r = float(np.hypot(*(start - centre)))
    phi_max = 2.0 * math.acos(max(1.0 - chord_error_m / r, -1.0))
    m = max(1, math.ceil(abs(delta) / phi_max - 1e-12))
    ang = np.arange(m + 1) * (delta / m)
    c, s = np.cos(ang), np.sin(ang)
    return np.stack([c * a[0] - s * a[1], s * a[0] + c * a[1]], axis=1)


# --------------------------------------------------------------------------------------------
# Building


def _build_road(b, road: Road, cl: Centreline, cuts: _Cuts, where: str) -> dict[str, int]:
    """Add the bands of one road; returns its object indices by name."""
    sec = road.section
    half = 0.5 * sec.carriageway_width_m
    kh = sec.kerb_height_m
    L = cl.length_m
    objects: dict[str, int] = {}

    def obj(name: str) -> int:
        if name not in objects:
            objects[name] = b.new_object(name, "street", False, where)
        return objects[name]

    def pieces(spans):
        for sa, sb in _kept(L, spans):
            yield cl.index(sa), cl.index(sb) + 1

    carriageway = obj("carriageway")
    b.carriageway_objects.append(carriageway)
    b.carriageway_of[where] = carriageway
    for i0, i1 in pieces(cuts.carriageway):
        part = slice(i0, i1)
        b.add(_ground_strip(cl.offset(-half)[part], cl.offset(half)[part], 0.0), sec.carriageway_material, carriageway)
    for side in _SIDES:
        sign = 1.0 if side == "left" else -1.0
        kerb = obj(f"kerb {side}")
        bands = side_offsets(sec, side)
        spans = list(pieces(cuts.sides[side]))
        if kh > 0:
            for i0, i1 in spans:
                b.add(
                    _wall(cl.offset(sign * half)[i0:i1], 0.0, kh, facing_left=side == "right"), sec.kerb_material, kerb
                )
        for band in bands:
            if band.d1 - band.d0 <= 0:
                continue
            o = obj(band.name)
            for i0, i1 in spans:
                b.add(_ground_strip(cl.offset(band.d0)[i0:i1], cl.offset(band.d1)[i0:i1], kh), band.material, o)
    if sec.centre_line != "none":
        from render.geometry.build import MARKING_LIFT_M

        line = obj("centre line")
        w = _LINE_WIDTH_M
        if sec.centre_line == "solid":
            dashes = [(0.0, L)]
        else:
            dashes = []
            x = _FIRST_DASH_M
            while x < L:
                dashes.append((x, min(x + _DASH_M, L)))
                x += _DASH_M + _GAP_M
        kept = _kept(L, cuts.carriageway)
        for sa, sb in dashes:
            for ka, kb in kept:
                a, c = max(sa, ka), min(sb, kb)
                if c - a > 1e-9:
                    strip = _ground_strip(_sub_curve(cl, a, c, -w / 2), _sub_curve(cl, a, c, w / 2), MARKING_LIFT_M)
                    b.add(strip, sec.line_material, line)
    return objects


def _corner_curve(centre, radius, dirs, t, depth_from, depth_to, first, last) -> np.ndarray:
    """Points at ``dirs`` from ``centre`` at the kerb radius less a depth passing linearly
    (``t`` 0 to 1) from ``depth_from`` to ``depth_to``; the ends set to ``first`` and ``last``
    (the straight bands' own points, so that the pieces share their vertices)."""
    cur = centre + (radius - ((1 - t) * depth_from + t * depth_to)) * dirs
    cur[0], cur[-1] = first, last
    return cur


def _build_arm(
    b, shape: _ArmShape, roads: list[Road], cls: list[Centreline], objects: list[dict[str, int]], new_object
):
    """The mouth of one junction arm and its two corners."""
    arm = shape.arm
    A, B = roads[arm.through], roads[arm.branch]
    clA, clB = cls[arm.through], cls[arm.branch]
    sigma = 1.0 if shape.side == "left" else -1.0
    hA, hB = 0.5 * A.section.carriageway_width_m, 0.5 * B.section.carriageway_width_m
    rho = 1.0 if arm.at_start else -1.0
    error = min(A.max_chord_error_m, B.max_chord_error_m)
    mouth_s = shape.branch_carriageway[1] if arm.at_start else shape.branch_carriageway[0]
    outline = []
    kerb_arcs = []
    for c in shape.corners:
        e = c["e"]
        t_a = clA.offset(sigma * hA)[clA.index(c["s_through"])]
        t_b = clB.offset(e * rho * hB)[clB.index(c["s_branch"])]
        dirs = _arc(c["centre"], t_b, t_a, error)
        arc = c["centre"] + c["R"] * dirs
        arc[0], arc[-1] = t_b, t_a
        kerb_arcs.append(arc)
        edge = clB.offset(e * rho * hB)[clB.index(mouth_s)]
        piece = [edge, *arc]
        outline.extend(piece if e > 0 else piece[::-1])
    pts = [outline[0]]
    for q in outline[1:]:
        if np.hypot(*(q - pts[-1])) > 1e-9:
            pts.append(q)
    if np.hypot(*(pts[0] - pts[-1])) <= 1e-9:
        pts.pop()
    from render.geometry.shapes import triangulate_polygon

    poly = np.asarray(pts)
    try:
        idx = triangulate_polygon(poly, name="the junction mouth")
    except ValueError as err:
        raise RoadError("points_m", f"{B.where} ({B.name!r}) at {A.name!r}: {err}") from None
    tris = np.concatenate([poly[idx], np.zeros((*idx.shape, 1))], axis=2)
    b.add(_up(tris), B.section.carriageway_material, objects[arm.branch]["carriageway"])
    # Corners: the through road's side bands follow each arc, their depths passing to the branch's.
    kh = A.section.kerb_height_m
    a_bands = side_offsets(A.section, shape.side)
    for c, arc in zip(shape.corners, kerb_arcs):
        b_bands = side_offsets(B.section, c["b_side"])
        b_sign = 1.0 if c["b_side"] == "left" else -1.0
        ia, ib = clA.index(c["s_through"]), clB.index(c["s_branch"])
        n = arc.shape[0]
        t = np.linspace(0.0, 1.0, n)[:, None]  # 0 at the branch, 1 at the through road
        dirs = (arc - c["centre"]) / c["R"]
        kerb_obj = objects[arm.through].get(f"kerb {shape.side}")
        if kerb_obj is None:
            kerb_obj = new_object(arm.through, f"kerb {shape.side}")
        if kh > 0:
            wall = _wall(arc, 0.0, kh, facing_left=True)
            nrm = np.cross(wall[:, 1] - wall[:, 0], wall[:, 2] - wall[:, 0])[:, :2]
            out = wall.mean(axis=1)[:, :2] - c["centre"]
            flip = np.einsum("ij,ij->i", nrm, out) < 0
            wall[flip] = wall[flip][:, [0, 2, 1]]
            b.add(wall, A.section.kerb_material, kerb_obj)

        for band_a, band_b in zip(a_bands, b_bands):
            if band_a.depth1 - band_a.depth0 <= 0 and band_b.depth1 - band_b.depth0 <= 0:
                continue
            inner_a, outer_a = (band_a.d0, band_a.d1) if sigma > 0 else (band_a.d1, band_a.d0)
            inner_b, outer_b = (band_b.d0, band_b.d1) if b_sign > 0 else (band_b.d1, band_b.d0)
            ends = [
                (clB.offset(inner_b)[ib], clA.offset(inner_a)[ia]),
                (clB.offset(outer_b)[ib], clA.offset(outer_a)[ia]),
            ]
            inner = _corner_curve(c["centre"], c["R"], dirs, t, band_b.depth0, band_a.depth0, *ends[0])
            outer = _corner_curve(c["centre"], c["R"], dirs, t, band_b.depth1, band_a.depth1, *ends[1])
            o = objects[arm.through].get(band_a.name)
            if o is None:
                o = new_object(arm.through, band_a.name)
            b.add(_up(_ground_strip(inner, outer, kh)), band_a.material, o)


def _crossing(roads: list[Road], cls: list[Centreline], arms: list[Arm]) -> tuple[str, str] | None:
    """(key, message) for two roads whose centrelines cross away from a junction arm's point."""
    meeting = [cls[a.branch].points[0 if a.at_start else -1] for a in arms]
    for i in range(len(roads)):
        for j in range(i + 1, len(roads)):
            p, r = cls[i].points[:-1], np.diff(cls[i].points, axis=0)
            q, s = cls[j].points[:-1], np.diff(cls[j].points, axis=0)
            denom = _cross(r[:, None], s[None, :])
            qp = q[None, :] - p[:, None]
            with np.errstate(divide="ignore", invalid="ignore"):
                t = _cross(qp, s[None, :]) / denom
                u = _cross(qp, r[:, None]) / denom
            hit = (denom != 0) & (t >= 0) & (t <= 1) & (u >= 0) & (u <= 1)
            for a, k in zip(*np.nonzero(hit)):
                x = p[a] + t[a, k] * r[a]
                at_end = any(np.hypot(*(x - m)) <= 2 * JUNCTION_TOLERANCE_M for m in meeting)
                if not at_end:
                    return (
                        f"{roads[j].where}.points_m",
                        f"{roads[j].name!r} crosses {roads[i].name!r} at ({x[0]:.2f}, {x[1]:.2f}) m away from their "
                        "ends; split one of them at the crossing so that both parts end on the other (a cross junction)",
                    )
    return None


def add_roads(b, roads: list[Road], source: str | Path) -> dict[str, dict[str, list[tuple[float, float]]]]:
    """Add every road of the scene and their junctions to the builder ``b``
    (:class:`render.geometry.build._Builder`); a road that cannot be built is an InputError
    naming its key. Returns, per road (its key path) and side, the spans along it where its
    side bands are cut back for a junction (where no frontage may stand)."""
    cls = []
    for road in roads:
        try:
            cls.append(road_centreline(road))
        except RoadError as err:
            raise input_error(source, f"{road.where}.{err.key}", str(err)) from None
    try:
        arms = find_arms(roads, cls)
    except RoadError as err:
        raise input_error(source, f"{err.where}.{err.key}", str(err)) from None
    shapes = []
    for arm in arms:
        try:
            shapes.append(_arm_shape(arm, roads, cls))
        except RoadError as err:
            raise input_error(source, f"{roads[arm.branch].where}.{err.key}", str(err)) from None
    crossing = _crossing(roads, cls, arms)
    if crossing is not None:
        raise input_error(source, crossing[0], crossing[1])
    cuts = [_Cuts() for _ in roads]
    for shape in shapes:
        arm = shape.arm
        span = shape.through_span
        for other in cuts[arm.through].sides[shape.side]:
            if span[0] < other[1] and other[0] < span[1]:
                road = roads[arm.branch]
                raise input_error(
                    source,
                    f"{road.where}.points_m",
                    f"the junction of {road.name!r} with {roads[arm.through].name!r} overlaps another junction on "
                    f"the same side ({span[0]:.2f}–{span[1]:.2f} m along it)",
                )
        cuts[arm.through].sides[shape.side].append(span)
        cuts[arm.branch].carriageway.append(shape.branch_carriageway)
        for side, s_span in shape.branch_sides.items():
            cuts[arm.branch].sides[side].append(s_span)
    cls = [cl.refined(c.stations()) for cl, c in zip(cls, cuts)]
    objects = [_build_road(b, road, cl, c, road.where) for road, cl, c in zip(roads, cls, cuts)]

    def new_object(road_index: int, name: str) -> int:
        objects[road_index][name] = b.new_object(name, "street", False, roads[road_index].where)
        return objects[road_index][name]

    for shape in shapes:
        try:
            _build_arm(b, shape, roads, cls, objects, new_object)
        except RoadError as err:
            road = roads[shape.arm.branch]
            raise input_error(source, f"{road.where}.{err.key}", str(err)) from None
    return {road.where: {side: sorted(c.sides[side]) for side in _SIDES} for road, c in zip(roads, cuts)}
