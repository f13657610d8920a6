"""Primitive shapes as triangle soup, placed in a local frame.

Every generator returns a list of :class:`Part`: triangles (metres), per-vertex shading
normals and a material *slot* name (``"body"``, ``"glass"``, ``"tyre"`` ...) that the scene
builder maps to a material. Conventions are those of :mod:`render.geometry.mesh`: right-handed, z up,
triangles counter-clockwise seen from the front, so the face normal points outward. Closed
solids (boxes, cylinders with caps, spheres, extrusions) are watertight: every edge is shared
by exactly two triangles that traverse it in opposite directions.

Smooth surfaces (sphere, the sides of cylinders and cones) carry smooth per-vertex normals;
flat faces carry their face normal.

Bad arguments (non-finite numbers, zero or negative sizes, self-intersecting outlines) raise
:class:`ValueError` with a message naming the argument; the scene layer, which knows the key
path, turns that into an :class:`render.errors.InputError`. Users' OBJ files are read by
:mod:`render.geometry.objfile` into the same :class:`Part` lists.

Placement: objects are built with their origin at the ground-contact centre, +x their forward
direction and z up, then placed with :func:`transform_parts` (heading measured from +x towards
+y, i.e. counter-clockwise seen from above).

References
----------
- Meisters, G. H. (1975), "Polygons have ears", Amer. Math. Monthly 82: ear clipping
  (:func:`triangulate_polygon`).
- Newell's method for the normal of a (nearly) planar polygon, as described in Sutherland,
  Sproull and Schumacker (1974), "A characterization of ten hidden-surface algorithms",
  ACM Computing Surveys 6(1).
- Shoelace formula (polygon area) and the divergence theorem (enclosed volume of a closed
  triangle surface): standard results.
"""

from __future__ import annotations

import math
from collections.abc import Callable, Iterable, Mapping
from dataclasses import dataclass

import numpy as np
from numpy.typing import ArrayLike

from render.geometry.mesh import flat_normals

__all__ = [
    "Part",
    "PartsLike",
    "flat_part",
    "merge_parts",
    "count_triangles",
    "bounds_m",
    "signed_volume_m3",
    "surface_area_m2",
    "rotation_z",
    "affine_parts",
    "transform_parts",
    "transform_points",
    "transform_directions",
    "polygon_area_m2",
    "triangulate_polygon",
    "triangulate_polygon_3d",
    "hexahedron",
    "box",
    "lathe",
    "cylinder",
    "frustum",
    "cone",
    "sphere",
    "ellipsoid",
    "extrude",
    "sweep_rect",
    "flat_region",
    "strip",
    "quad",
    "panel",
]


# ---------------------------------------------------------------------------------------------
# The part record and whole-part utilities
# ---------------------------------------------------------------------------------------------


@dataclass
class Part:
    """Triangles of one material slot.

    Attributes
    ----------
    triangles_m
        (F, 3, 3) float64 vertices, metres, counter-clockwise seen from the front.
    normals
        (F, 3, 3) float64 unit shading normals per vertex.
    slot
        Material slot name, mapped to a material by the scene builder.
    """

    triangles_m: np.ndarray
    normals: np.ndarray
    slot: str

    def __post_init__(self):
        self.triangles_m = np.ascontiguousarray(self.triangles_m, dtype=np.float64).reshape(-1, 3, 3)
        self.normals = np.ascontiguousarray(self.normals, dtype=np.float64).reshape(-1, 3, 3)
        if self.normals.shape != self.triangles_m.shape:
            raise ValueError("a Part needs one normal per triangle vertex")
        if not isinstance(self.slot, str) or not self.slot:
            raise ValueError("a Part's slot must be a non-empty string")

    @property
    def n_triangles(self) -> int:
        return int(self.triangles_m.shape[0])


#: What the whole-part measures accept: one part, several, or an (F, 3, 3) triangle array.
PartsLike = Part | Iterable[Part] | np.ndarray


def flat_part(triangles_m: np.ndarray, slot: str) -> Part:
    """A :class:`Part` whose shading normals are the face normals."""
    t = np.asarray(triangles_m, dtype=np.float64).reshape(-1, 3, 3)
    return Part(t, flat_normals(t), slot)


def merge_parts(parts: Iterable[Part]) -> list[Part]:
    """Join parts of the same slot (order of first appearance kept); empty parts are dropped."""
    groups: dict[str, list[Part]] = {}
    for p in parts:
        if p.n_triangles:
            groups.setdefault(p.slot, []).append(p)
    return [
        Part(np.concatenate([p.triangles_m for p in ps]), np.concatenate([p.normals for p in ps]), slot)
        for slot, ps in groups.items()
    ]


def count_triangles(parts: Iterable[Part]) -> int:
    return int(sum(p.n_triangles for p in parts))


def _all_triangles(parts_or_triangles: PartsLike) -> np.ndarray:
    if isinstance(parts_or_triangles, np.ndarray):
        return parts_or_triangles.reshape(-1, 3, 3)
    if isinstance(parts_or_triangles, Part):
        return parts_or_triangles.triangles_m
    parts = list(parts_or_triangles)
    if not parts:
        return np.zeros((0, 3, 3))
    return np.concatenate([p.triangles_m for p in parts])


def bounds_m(parts: PartsLike) -> tuple[np.ndarray, np.ndarray]:
    """Axis-aligned bounds ``(min_xyz, max_xyz)`` of parts (or a triangle array), metres."""
    t = _all_triangles(parts).reshape(-1, 3)
    if t.shape[0] == 0:
        raise ValueError("no triangles")
    return t.min(axis=0), t.max(axis=0)


def signed_volume_m3(parts: PartsLike) -> float:
    """Enclosed volume by the divergence theorem, V = Σ v0·(v1 × v2) / 6.

    Positive for a closed surface whose normals point outward; meaningless for open surfaces.
    """
    t = _all_triangles(parts)
    return float(np.einsum("ij,ij->i", t[:, 0], np.cross(t[:, 1], t[:, 2])).sum() / 6.0)


def surface_area_m2(parts: PartsLike) -> float:
    """Total triangle area, m²."""
    t = _all_triangles(parts)
    return float(0.5 * np.linalg.norm(np.cross(t[:, 1] - t[:, 0], t[:, 2] - t[:, 0]), axis=1).sum())


# ---------------------------------------------------------------------------------------------
# Transforms
# ---------------------------------------------------------------------------------------------


def rotation_z(heading_deg: float) -> np.ndarray:
    """3×3 rotation about +z by ``heading_deg`` (from +x towards +y)."""
    a = math.radians(_finite("heading_deg", heading_deg))
    c, s = math.cos(a), math.sin(a)
    return np.array([[c, -s, 0.0], [s, c, 0.0], [0.0, 0.0, 1.0]])


def affine_parts(parts: Iterable[Part], matrix: ArrayLike, offset_m: ArrayLike = (0.0, 0.0, 0.0)) -> list[Part]:
    """Apply ``x -> matrix @ x + offset_m`` to parts.

    Normals are transformed by the inverse transpose and renormalised; a mirroring matrix
    (negative determinant) also reverses the vertex order so that fronts stay counter-clockwise.
    """
    m = np.asarray(matrix, dtype=np.float64).reshape(3, 3)
    off = _vector("offset_m", offset_m)
    det = float(np.linalg.det(m))
    if not np.all(np.isfinite(m)) or abs(det) < 1e-300:
        raise ValueError("transform matrix must be finite and invertible")
    inv = np.linalg.inv(m)
    out = []
    for p in parts:
        t = p.triangles_m @ m.T + off
        n = p.normals @ inv
        length = np.linalg.norm(n, axis=-1, keepdims=True)
        n = np.divide(n, length, out=np.zeros_like(n), where=length > 0)
        if det < 0:
            t = t[:, [0, 2, 1]]
            n = n[:, [0, 2, 1]]
        out.append(Part(t, n, p.slot))
    return out


def transform_parts(
    parts: Iterable[Part], position_m: ArrayLike = (0.0, 0.0, 0.0), heading_deg: float = 0.0, scale: float = 1.0
) -> list[Part]:
    """Place parts built in a local frame: uniform ``scale``, turn by ``heading_deg`` about +z
    (from +x towards +y), then move the local origin to ``position_m``."""
    s = _positive("scale", scale)
    return affine_parts(parts, rotation_z(heading_deg) * s, position_m)


def transform_points(
    points_m: ArrayLike, position_m: ArrayLike = (0.0, 0.0, 0.0), heading_deg: float = 0.0, scale: float = 1.0
) -> np.ndarray:
    """The same placement as :func:`transform_parts` for points (..., 3)."""
    p = np.asarray(points_m, dtype=np.float64)
    s = _positive("scale", scale)
    return p @ (rotation_z(heading_deg) * s).T + _vector("position_m", position_m)


def transform_directions(directions: ArrayLike, heading_deg: float = 0.0) -> np.ndarray:
    """Turn direction vectors (..., 3) by ``heading_deg`` about +z (no scale, no move)."""
    return np.asarray(directions, dtype=np.float64) @ rotation_z(heading_deg).T


# ---------------------------------------------------------------------------------------------
# Argument checks (ValueError naming the argument)
# ---------------------------------------------------------------------------------------------


def _finite(name: str, value) -> float:
    try:
        v = float(value)
    except (TypeError, ValueError):
        raise ValueError(f"{name} must be a number, got {value!r}") from None
    if isinstance(value, bool) or not math.isfinite(v):
        raise ValueError(f"{name} must be a finite number, got {value!r}")
    return v


def _positive(name: str, value) -> float:
    v = _finite(name, value)
    if v <= 0:
        raise ValueError(f"{name} must be > 0, got {value!r}")
    return v


def _non_negative(name: str, value) -> float:
    v = _finite(name, value)
    if v < 0:
        raise ValueError(f"{name} must be >= 0, got {value!r}")
    return v


def _vector(name: str, value, dim: int = 3) -> np.ndarray:
    try:
        v = np.asarray(value, dtype=np.float64).reshape(-1)
    except (TypeError, ValueError):
        raise ValueError(f"{name} must be {dim} numbers, got {value!r}") from None
    if v.shape != (dim,):
        raise ValueError(f"{name} must be {dim} numbers, got {value!r}")
    if not np.all(np.isfinite(v)):
        raise ValueError(f"{name} must be finite, got {value!r}")
    return v


def _points(name: str, value, dim: int, minimum: int) -> np.ndarray:
    try:
        p = np.asarray(value, dtype=np.float64)
    except (TypeError, ValueError):
        raise ValueError(f"{name} must be a list of points with {dim} coordinates") from None
    if p.ndim != 2 or p.shape[1] != dim:
        raise ValueError(f"{name} must be a list of points with {dim} coordinates, got shape {p.shape}")
    if p.shape[0] < minimum:
        raise ValueError(f"{name} needs at least {minimum} points, got {p.shape[0]}")
    if not np.all(np.isfinite(p)):
        raise ValueError(f"{name} has a non-finite coordinate")
    return p


def _segments(name: str, value, minimum: int = 3) -> int:
    if isinstance(value, bool) or not isinstance(value, (int, np.integer)) or value < minimum:
        raise ValueError(f"{name} must be an integer >= {minimum}, got {value!r}")
    return int(value)


def _unit(v: np.ndarray) -> np.ndarray:
    return v / np.linalg.norm(v)


# ---------------------------------------------------------------------------------------------
# Polygons: area, simplicity, ear clipping
# ---------------------------------------------------------------------------------------------


def polygon_area_m2(outline_xy: ArrayLike) -> float:
    """Signed area of a 2-D polygon by the shoelace formula (positive if counter-clockwise)."""
    p = np.asarray(outline_xy, dtype=np.float64).reshape(-1, 2)
    x, y = p[:, 0], p[:, 1]
    return float(0.5 * (np.dot(x, np.roll(y, -1)) - np.dot(y, np.roll(x, -1))))


def _cross2(a: np.ndarray, b: np.ndarray) -> np.ndarray:
    return a[..., 0] * b[..., 1] - a[..., 1] * b[..., 0]


def _check_simple(p: np.ndarray, name: str) -> None:
    """ValueError unless the closed polygon ``p`` (n, 2) is simple (no repeated points, spikes
    or crossing/touching edges)."""
    n = p.shape[0]
    a = p
    b = np.roll(p, -1, axis=0)
    d = b - a
    length = np.linalg.norm(d, axis=1)
    scale = float(np.max(np.ptp(p, axis=0))) or 1.0
    tol = 1e-12 * scale
    if np.any(length <= tol):
        i = int(np.argmax(length <= tol))
        raise ValueError(f"{name}: point {i} repeats point {(i + 1) % n}")
    # Spikes: an edge doubling back along the previous one.
    prev = np.roll(d, 1, axis=0)
    spike = (np.abs(_cross2(prev, d)) <= tol * (length + np.roll(length, 1))) & (np.einsum("ij,ij->i", prev, d) < 0)
    if np.any(spike):
        raise ValueError(f"{name}: the outline doubles back on itself at point {int(np.argmax(spike))}")
    if n < 4:
        return
    eps = tol * scale
    block = max(1, 250_000 // n)  # rows per block, to bound memory for long outlines
    for r0 in range(0, n, block):
        rows = np.arange(r0, min(n, r0 + block))
        ai, bi, di = a[rows, None, :], b[rows, None, :], d[rows, None, :]
        aj, bj, dj = a[None, :, :], b[None, :, :], d[None, :, :]
        o1 = _cross2(di, aj - ai)
        o2 = _cross2(di, bj - ai)
        o3 = _cross2(dj, ai - aj)
        o4 = _cross2(dj, bi - aj)
        o1, o2, o3, o4 = (np.where(np.abs(o) <= eps, 0.0, o) for o in (o1, o2, o3, o4))
        hit = (o1 * o2 <= 0) & (o3 * o4 <= 0)
        collinear = (o1 == 0) & (o2 == 0) & (o3 == 0) & (o4 == 0)
        if np.any(collinear):
            # Collinear pairs intersect only if their extents overlap along the common line.
            t_a = np.sum((aj - ai) * di, axis=-1)
            t_b = np.sum((bj - ai) * di, axis=-1)
            dd = np.sum(di * di, axis=-1)
            overlap = (np.maximum(t_a, t_b) >= -eps) & (np.minimum(t_a, t_b) <= dd + eps)
            hit = np.where(collinear, overlap, hit)
        j = np.arange(n)[None, :]
        i = rows[:, None]
        hit &= ~((i == j) | ((i + 1) % n == j) | ((j + 1) % n == i))
        if np.any(hit):
            ii, jj = np.argwhere(hit)[0]
            ii, jj = int(rows[ii]), int(jj)
            raise ValueError(
                f"{name}: the outline crosses itself (edge {ii}-{(ii + 1) % n} meets edge {jj}-{(jj + 1) % n})"
            )


def triangulate_polygon(outline_xy: ArrayLike, *, name: str = "outline") -> np.ndarray:
    """Triangulate a simple 2-D polygon (convex or concave, no holes) by ear clipping.

    Parameters
    ----------
    outline_xy
        (n, 2) points, either orientation, not repeating the first point at the end.

    Returns
    -------
    (n - 2, 3) int indices into ``outline_xy``; every triangle is counter-clockwise (positive
    area). Collinear points on an edge are kept (so that neighbouring faces share them).

    Method: ear clipping (Meisters, "Polygons have ears", Amer. Math. Monthly 82, 1975): a
    convex vertex whose triangle with its neighbours contains no other non-convex vertex is cut
    off, until three vertices remain.
    """
    p = _points(name, outline_xy, 2, 3)
    n = p.shape[0]
    _check_simple(p, name)
    area = polygon_area_m2(p)
    scale = float(np.max(np.ptp(p, axis=0)))
    if abs(area) <= 1e-12 * scale * scale or scale == 0:
        raise ValueError(f"{name}: the polygon has zero area")
    idx = list(range(n)) if area > 0 else list(range(n - 1, -1, -1))
    eps = 1e-12 * scale * scale
    tris: list[tuple[int, int, int]] = []
    while len(idx) > 3:
        q = p[idx]
        prev = np.roll(q, 1, axis=0)
        nxt = np.roll(q, -1, axis=0)
        cross = _cross2(q - prev, nxt - q)
        convex = cross > eps
        others_mask = ~convex
        m = len(idx)
        cut = -1
        for k in np.flatnonzero(convex):
            k = int(k)
            a, b, c = prev[k], q[k], nxt[k]
            mask = others_mask.copy()
            mask[[(k - 1) % m, k, (k + 1) % m]] = False
            pts = q[mask]
            if pts.shape[0]:
                # Inside or on the boundary of triangle abc (counter-clockwise).
                e1 = _cross2(b - a, pts - a)
                e2 = _cross2(c - b, pts - b)
                e3 = _cross2(a - c, pts - c)
                inside = (e1 >= -eps) & (e2 >= -eps) & (e3 >= -eps)
                # A point coinciding with a, b or c is not inside.
                same = (np.linalg.norm(pts - a, axis=1) <= 1e-12 * scale) | (
                    np.linalg.norm(pts - c, axis=1) <= 1e-12 * scale
                )
                if np.any(inside & ~same):
                    continue
            cut = k
            break
        if cut < 0:
            raise ValueError(f"{name}: could not triangulate the polygon (nearly degenerate outline)")
        tris.append((idx[(cut - 1) % m], idx[cut], idx[(cut + 1) % m]))
        del idx[cut]
    tris.append((idx[0], idx[1], idx[2]))
    return np.asarray(tris, dtype=np.int64)


def _polygon_basis(points: np.ndarray) -> tuple[np.ndarray, np.ndarray, np.ndarray, float]:
    """Newell normal of a 3-D polygon and an in-plane basis (u, v) with u × v = normal."""
    a = points
    b = np.roll(points, -1, axis=0)
    newell = np.array(
        [
            np.sum((a[:, 1] - b[:, 1]) * (a[:, 2] + b[:, 2])),
            np.sum((a[:, 2] - b[:, 2]) * (a[:, 0] + b[:, 0])),
            np.sum((a[:, 0] - b[:, 0]) * (a[:, 1] + b[:, 1])),
        ]
    )
    size = float(np.linalg.norm(newell))
    if size == 0.0:
        return newell, newell, newell, 0.0
    nrm = newell / size
    helper = np.eye(3)[int(np.argmin(np.abs(nrm)))]
    u = _unit(np.cross(helper, nrm))
    v = np.cross(nrm, u)
    return nrm, u, v, 0.5 * size


def triangulate_polygon_3d(points: np.ndarray, name: str = "polygon") -> np.ndarray:
    """Indices (k, 3) triangulating a planar-ish 3-D polygon (n, 3), keeping its winding.

    Strictly convex polygons are fanned; others are projected onto their Newell plane and ear
    clipped (:func:`triangulate_polygon`). A polygon of zero area gives no triangles.
    """
    n = points.shape[0]
    if n == 3:
        return np.array([[0, 1, 2]])
    nrm, u, v, area = _polygon_basis(points)
    if area == 0.0:
        return np.zeros((0, 3), dtype=np.int64)
    q = np.stack([points @ u, points @ v], axis=1)
    d = np.roll(q, -1, axis=0) - q
    d1 = np.roll(d, -1, axis=0)
    turn = _cross2(d, d1)
    # Strictly convex (every turn left, total turning one full circle, so not a star): fan.
    if np.all(turn > 0) and abs(np.arctan2(turn, np.einsum("ij,ij->i", d, d1)).sum() - 2 * np.pi) < 1e-6:
        return np.array([[0, i, i + 1] for i in range(1, n - 1)])
    return triangulate_polygon(q, name=name)


# ---------------------------------------------------------------------------------------------
# Boxes and hexahedra
# ---------------------------------------------------------------------------------------------

# Corner i of a hexahedron has bits (x, y, z) = (i & 1, i >> 1 & 1, i >> 2 & 1); each face is a
# quad counter-clockwise seen from outside.
_HEX_FACES = {
    "-x": (0, 4, 6, 2),
    "+x": (1, 3, 7, 5),
    "-y": (0, 1, 5, 4),
    "+y": (2, 6, 7, 3),
    "-z": (0, 2, 3, 1),
    "+z": (4, 5, 7, 6),
}


def hexahedron(corners_m: ArrayLike, *, slot: str = "body", face_slots: Mapping[str, str] | None = None) -> list[Part]:
    """A closed six-faced solid from 8 corners (a box, a tapered bin body, a tilted lantern).

    Parameters
    ----------
    corners_m
        (8, 3) corners; corner ``i`` is the one at ``(i & 1, (i >> 1) & 1, (i >> 2) & 1)`` of a
        unit cube deformed into place (so corner 0 is min x, min y, min z and corner 7 the
        opposite). The deformation must keep the orientation (no mirroring).
    face_slots
        Optional slot per face name ``"-x" "+x" "-y" "+y" "-z" "+z"`` (faces of the unit cube);
        other faces get ``slot``.
    """
    c = _points("corners_m", corners_m, 3, 8)
    if c.shape[0] != 8:
        raise ValueError(f"corners_m must hold 8 corners, got {c.shape[0]}")
    face_slots = dict(face_slots or {})
    unknown = set(face_slots) - set(_HEX_FACES)
    if unknown:
        raise ValueError(f"face_slots: unknown face {sorted(unknown)[0]!r}; faces are {list(_HEX_FACES)}")
    parts = []
    for face, (a, b, cc, d) in _HEX_FACES.items():
        tri = np.array([[c[a], c[b], c[cc]], [c[a], c[cc], c[d]]])
        parts.append(flat_part(tri, face_slots.get(face, slot)))
    return merge_parts(parts)


def box(
    *,
    centre_m: ArrayLike | None = None,
    size_m: ArrayLike | None = None,
    min_m: ArrayLike | None = None,
    max_m: ArrayLike | None = None,
    yaw_deg: float = 0.0,
    slot: str = "body",
    face_slots: Mapping[str, str] | None = None,
) -> list[Part]:
    """A closed box, 12 triangles, flat normals.

    Give either ``centre_m`` and ``size_m`` (3 numbers, each > 0) or ``min_m`` and ``max_m``
    corners; ``yaw_deg`` turns the box about the vertical axis through its centre (from +x
    towards +y). ``face_slots`` as in :func:`hexahedron` (faces of the unturned box).
    """
    if centre_m is not None or size_m is not None:
        if min_m is not None or max_m is not None or centre_m is None or size_m is None:
            raise ValueError("box: give either centre_m and size_m, or min_m and max_m")
        centre = _vector("centre_m", centre_m)
        size = _vector("size_m", size_m)
        if np.any(size <= 0):
            raise ValueError(f"box: size_m must be > 0 in every axis, got {list(size)}")
        lo, hi = centre - size / 2, centre + size / 2
    else:
        if min_m is None or max_m is None:
            raise ValueError("box: give either centre_m and size_m, or min_m and max_m")
        lo = _vector("min_m", min_m)
        hi = _vector("max_m", max_m)
        if np.any(hi <= lo):
            raise ValueError(f"box: max_m must exceed min_m in every axis, got {list(lo)} and {list(hi)}")
        centre = (lo + hi) / 2
    bits = np.array([[(i >> k) & 1 for k in range(3)] for i in range(8)], dtype=bool)
    corners = np.where(bits, hi, lo)
    if yaw_deg:
        corners = (corners - centre) @ rotation_z(yaw_deg).T + centre
    return hexahedron(corners, slot=slot, face_slots=face_slots)


# ---------------------------------------------------------------------------------------------
# Surfaces of revolution: cylinder, frustum, cone
# ---------------------------------------------------------------------------------------------


def _axis_basis(axis: np.ndarray, start_dir) -> np.ndarray:
    """Columns (e1, e2, a): right-handed orthonormal basis with e1 along ``start_dir``."""
    a = _unit(axis)
    if start_dir is None:
        helper = np.eye(3)[int(np.argmin(np.abs(a)))]
    else:
        helper = _vector("start_dir", start_dir)
    e1 = helper - np.dot(helper, a) * a
    if np.linalg.norm(e1) <= 1e-9 * max(np.linalg.norm(helper), 1e-300):
        raise ValueError("start_dir must not be parallel to the axis")
    e1 = _unit(e1)
    e2 = np.cross(a, e1)
    return np.stack([e1, e2, a], axis=1)


def _revolve(profile: np.ndarray, n: int, cap_from: int, cap_to: int, smooth: bool):
    """Triangles/normals (local frame, axis z) of a revolved polyline ``profile`` (m, 2) of
    (r, z); segments with index < cap_from or >= cap_to are caps (returned separately)."""
    k = np.arange(n)
    theta = 2 * np.pi * k / n
    c, s = np.cos(theta), np.sin(theta)
    c1, s1 = np.roll(c, -1), np.roll(s, -1)
    mid = 2 * np.pi * (k + 0.5) / n
    cm, sm = np.cos(mid), np.sin(mid)
    body_t, body_n, cap_t, cap_n = [], [], [], []
    for i in range(profile.shape[0] - 1):
        r0, z0 = profile[i]
        r1, z1 = profile[i + 1]
        dr, dz = r1 - r0, z1 - z0
        length = math.hypot(dr, dz)
        nr, nz = dz / length, -dr / length
        A = np.stack([r0 * c, r0 * s, np.full(n, z0)], axis=1)
        B = np.stack([r0 * c1, r0 * s1, np.full(n, z0)], axis=1)
        C = np.stack([r1 * c1, r1 * s1, np.full(n, z1)], axis=1)
        D = np.stack([r1 * c, r1 * s, np.full(n, z1)], axis=1)
        nA = np.stack([nr * c, nr * s, np.full(n, nz)], axis=1)
        nB = np.stack([nr * c1, nr * s1, np.full(n, nz)], axis=1)
        nM = np.stack([nr * cm, nr * sm, np.full(n, nz)], axis=1)
        tris, nrms = [], []
        if r0 > 0 and r1 > 0:
            tris += [np.stack([A, B, C], 1), np.stack([A, C, D], 1)]
            nrms += [np.stack([nA, nB, nB], 1), np.stack([nA, nB, nA], 1)]
        elif r0 == 0 and r1 > 0:
            tris.append(np.stack([A, C, D], 1))
            nrms.append(np.stack([nM, nB, nA], 1))
        elif r0 > 0 and r1 == 0:
            tris.append(np.stack([A, B, C], 1))
            nrms.append(np.stack([nA, nB, nM], 1))
        else:
            continue
        tri = np.concatenate(tris)
        nrm = np.concatenate(nrms) if smooth else flat_normals(tri)
        if cap_from <= i < cap_to:
            body_t.append(tri)
            body_n.append(nrm)
        else:
            cap_t.append(tri)
            cap_n.append(flat_normals(tri))
    empty = np.zeros((0, 3, 3))
    cat = lambda xs: np.concatenate(xs) if xs else empty  # noqa: E731
    return cat(body_t), cat(body_n), cat(cap_t), cat(cap_n)


def lathe(
    profile_rz: ArrayLike,
    *,
    base_m: ArrayLike = (0.0, 0.0, 0.0),
    axis: ArrayLike = (0.0, 0.0, 1.0),
    segments: int = 16,
    capped: bool = True,
    start_dir: ArrayLike | None = None,
    smooth: bool = True,
    slot: str = "body",
    cap_slot: str | None = None,
) -> list[Part]:
    """A surface of revolution: the polyline ``profile_rz`` of (radius_m, height_m) points,
    turned about the line through ``base_m`` along ``axis``.

    Parameters
    ----------
    profile_rz
        (m, 2) points (r >= 0, z along the axis from ``base_m``), listed from one end to the
        other; the order is fixed internally so that the surface faces outward.
    segments
        Number of facets around the axis (>= 3).
    capped
        Close the ends whose radius is non-zero with flat discs (slot ``cap_slot`` or ``slot``).
    start_dir
        Direction (perpendicular to the axis after projection) of the first facet vertex; e.g.
        ``(0, 0, -1)`` puts a vertex at the bottom of a horizontal wheel so that it touches the
        ground exactly.
    smooth
        Smooth normals around the axis (each profile segment keeps its own slope), else flat.
    """
    prof = _points("profile_rz", profile_rz, 2, 2)
    n = _segments("segments", segments)
    if np.any(prof[:, 0] < 0):
        raise ValueError("profile_rz: radii must be >= 0")
    if np.any(np.hypot(*np.diff(prof, axis=0).T) == 0):
        raise ValueError("profile_rz: consecutive points must differ")
    ax = _vector("axis", axis)
    if np.linalg.norm(ax) == 0:
        raise ValueError("axis must be non-zero")
    base = _vector("base_m", base_m)
    # Orientation: the region bounded by the profile and the axis must be counter-clockwise in
    # (r, z) so that outward is to the right of the direction of travel.
    closed = np.vstack([prof, [[0.0, prof[-1, 1]], [0.0, prof[0, 1]]]])
    area = polygon_area_m2(closed)
    if area < 0:
        prof = prof[::-1]
    cap_from, cap_to = 0, prof.shape[0] - 1
    if capped:
        if prof[0, 0] > 0:
            prof = np.vstack([[0.0, prof[0, 1]], prof])
            cap_from, cap_to = 1, cap_to + 1
        if prof[-1, 0] > 0:
            prof = np.vstack([prof, [0.0, prof[-1, 1]]])
    bt, bn, ct, cn = _revolve(prof, n, cap_from, cap_to, smooth)
    basis = _axis_basis(ax, start_dir)
    parts = [Part(bt @ basis.T + base, bn @ basis.T, slot)]
    if ct.shape[0]:
        parts.append(Part(ct @ basis.T + base, cn @ basis.T, cap_slot or slot))
    return merge_parts(parts)


def frustum(
    p0_m: ArrayLike,
    p1_m: ArrayLike,
    radius0_m: float,
    radius1_m: float,
    *,
    segments: int = 16,
    capped: bool = True,
    start_dir: ArrayLike | None = None,
    slot: str = "body",
    cap_slot: str | None = None,
) -> list[Part]:
    """A truncated cone from ``p0_m`` (radius ``radius0_m``) to ``p1_m`` (radius ``radius1_m``);
    one radius may be 0 (a cone). Inscribed regular ``segments``-gon cross-sections; smooth
    side normals, flat caps."""
    p0 = _vector("p0_m", p0_m)
    p1 = _vector("p1_m", p1_m)
    r0 = _non_negative("radius0_m", radius0_m)
    r1 = _non_negative("radius1_m", radius1_m)
    if r0 == 0 and r1 == 0:
        raise ValueError("frustum: at least one radius must be > 0")
    length = float(np.linalg.norm(p1 - p0))
    if length == 0:
        raise ValueError("frustum: p0_m and p1_m must differ")
    return lathe(
        [[r0, 0.0], [r1, length]],
        base_m=p0,
        axis=p1 - p0,
        segments=segments,
        capped=capped,
        start_dir=start_dir,
        slot=slot,
        cap_slot=cap_slot,
    )


def cylinder(
    p0_m: ArrayLike,
    p1_m: ArrayLike,
    radius_m: float,
    *,
    segments: int = 16,
    capped: bool = True,
    start_dir: ArrayLike | None = None,
    slot: str = "body",
    cap_slot: str | None = None,
) -> list[Part]:
    """A cylinder with axis ``p0_m`` -> ``p1_m``; the cross-section is the regular
    ``segments``-gon inscribed in the circle of ``radius_m``. Smooth side normals, flat caps."""
    r = _positive("radius_m", radius_m)
    return frustum(
        p0_m, p1_m, r, r, segments=segments, capped=capped, start_dir=start_dir, slot=slot, cap_slot=cap_slot
    )


def cone(
    base_m: ArrayLike,
    apex_m: ArrayLike,
    radius_m: float,
    *,
    segments: int = 16,
    capped: bool = True,
    start_dir: ArrayLike | None = None,
    slot: str = "body",
    cap_slot: str | None = None,
) -> list[Part]:
    """A cone with its base disc (``radius_m``) centred at ``base_m`` and its tip at ``apex_m``."""
    r = _positive("radius_m", radius_m)
    return frustum(
        base_m, apex_m, r, 0.0, segments=segments, capped=capped, start_dir=start_dir, slot=slot, cap_slot=cap_slot
    )


# ---------------------------------------------------------------------------------------------
# Spheres and ellipsoids
# ---------------------------------------------------------------------------------------------


def _icosahedron() -> tuple[np.ndarray, np.ndarray]:
    """Unit icosahedron with vertices at both poles: (12, 3) vertices, (20, 3) faces."""
    z = 1 / math.sqrt(5)
    rho = 2 / math.sqrt(5)
    upper = [(rho * math.cos(2 * math.pi * k / 5), rho * math.sin(2 * math.pi * k / 5), z) for k in range(5)]
    lower = [
        (rho * math.cos(2 * math.pi * (k + 0.5) / 5), rho * math.sin(2 * math.pi * (k + 0.5) / 5), -z) for k in range(5)
    ]
    v = np.array([(0.0, 0.0, 1.0)] + upper + lower + [(0.0, 0.0, -1.0)])
    faces = []
    for k in range(5):
        u0, u1 = 1 + k, 1 + (k + 1) % 5
        l0, l1 = 6 + k, 6 + (k + 1) % 5
        faces += [(0, u0, u1), (u0, l0, u1), (u1, l0, l1), (11, l1, l0)]
    return v, np.array(faces)


def _subdivide(v: np.ndarray, f: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    verts = list(map(tuple, v))
    cache: dict[tuple[int, int], int] = {}

    def mid(a: int, b: int) -> int:
        key = (a, b) if a < b else (b, a)
        if key not in cache:
            m = (np.asarray(verts[a]) + np.asarray(verts[b])) / 2
            verts.append(tuple(m / np.linalg.norm(m)))
            cache[key] = len(verts) - 1
        return cache[key]

    out = []
    for a, b, c in f:
        ab, bc, ca = mid(a, b), mid(b, c), mid(c, a)
        out += [(a, ab, ca), (b, bc, ab), (c, ca, bc), (ab, bc, ca)]
    return np.array(verts), np.array(out)


def _unit_sphere(method: str, subdivisions: int, segments: int) -> tuple[np.ndarray, np.ndarray]:
    if method == "ico":
        if (
            isinstance(subdivisions, bool)
            or not isinstance(subdivisions, (int, np.integer))
            or not 0 <= subdivisions <= 6
        ):
            raise ValueError(f"subdivisions must be an integer in 0..6, got {subdivisions!r}")
        v, f = _icosahedron()
        for _ in range(int(subdivisions)):
            v, f = _subdivide(v, f)
    elif method == "uv":
        n = _segments("segments", segments)
        stacks = max(2, n // 2)
        phi = np.pi * np.arange(1, stacks) / stacks
        theta = 2 * np.pi * np.arange(n) / n
        ring = np.stack(
            [
                np.outer(np.sin(phi), np.cos(theta)).ravel(),
                np.outer(np.sin(phi), np.sin(theta)).ravel(),
                np.repeat(np.cos(phi), n),
            ],
            axis=1,
        )
        v = np.vstack([[0.0, 0.0, 1.0], ring, [0.0, 0.0, -1.0]])
        south = v.shape[0] - 1
        f = []
        for k in range(n):
            k1 = (k + 1) % n
            f.append((0, 1 + k, 1 + k1))
            for j in range(stacks - 2):
                a, b = 1 + j * n + k, 1 + j * n + k1
                c, d = a + n, b + n
                f += [(a, c, d), (a, d, b)]
            a, b = 1 + (stacks - 2) * n + k, 1 + (stacks - 2) * n + k1
            f.append((a, south, b))
        f = np.array(f)
    else:
        raise ValueError(f"method must be 'ico' or 'uv', got {method!r}")
    # Outward winding (the unit sphere is convex and centred on the origin).
    t = v[f]
    wrong = np.einsum("ij,ij->i", np.cross(t[:, 1] - t[:, 0], t[:, 2] - t[:, 0]), t.mean(axis=1)) < 0
    f[wrong] = f[wrong][:, [0, 2, 1]]
    return v, f


def sphere(
    centre_m: ArrayLike,
    radius_m: float,
    *,
    method: str = "ico",
    subdivisions: int = 2,
    segments: int = 16,
    slot: str = "body",
) -> list[Part]:
    """A closed sphere with smooth (radial) normals; all vertices lie on the sphere.

    ``method="ico"``: subdivided icosahedron, 20·4^subdivisions triangles, with a vertex at
    each pole. ``method="uv"``: ``segments`` around and ``segments // 2`` stacks
    (2·segments·(stacks − 1) triangles).
    """
    return ellipsoid(
        centre_m, (radius_m, radius_m, radius_m), method=method, subdivisions=subdivisions, segments=segments, slot=slot
    )


def ellipsoid(
    centre_m: ArrayLike,
    radii_m: ArrayLike,
    *,
    method: str = "ico",
    subdivisions: int = 2,
    segments: int = 16,
    slot: str = "body",
    warp: Callable[[np.ndarray], np.ndarray] | None = None,
) -> list[Part]:
    """A closed axis-aligned ellipsoid (semi-axes ``radii_m``), smooth normals.

    ``warp``, if given, is a function of the unit directions (k, 3) returning radial factors
    (k,) applied before the scaling (used for lumpy tree canopies); normals are then the
    area-weighted averages of the adjoining face normals.
    """
    c = _vector("centre_m", centre_m)
    radii = _vector("radii_m", radii_m)
    if np.any(radii <= 0):
        raise ValueError(f"radii_m must be > 0, got {list(radii)}")
    v, f = _unit_sphere(method, subdivisions, segments)
    if warp is None:
        pts = v * radii
        nrm = v / radii
        nrm /= np.linalg.norm(nrm, axis=1, keepdims=True)
    else:
        factor = np.asarray(warp(v), dtype=np.float64).reshape(-1)
        if factor.shape[0] != v.shape[0] or not np.all(np.isfinite(factor)) or np.any(factor <= 0):
            raise ValueError("warp must return a positive finite factor per vertex")
        pts = v * factor[:, None] * radii
        nrm = _vertex_normals(pts, f)
    return [Part(pts[f] + c, nrm[f], slot)]


def _vertex_normals(v: np.ndarray, f: np.ndarray) -> np.ndarray:
    """Area-weighted vertex normals of an indexed mesh."""
    t = v[f]
    fn = np.cross(t[:, 1] - t[:, 0], t[:, 2] - t[:, 0])
    acc = np.zeros_like(v)
    for j in range(3):
        np.add.at(acc, f[:, j], fn)
    return acc / np.linalg.norm(acc, axis=1, keepdims=True)


# ---------------------------------------------------------------------------------------------
# Extrusions, sweeps and flat regions
# ---------------------------------------------------------------------------------------------


def extrude(
    outline_xy: ArrayLike,
    height_m: float,
    *,
    z0_m: float = 0.0,
    slot: str = "body",
    top_slot: str | None = None,
    bottom_slot: str | None = None,
) -> list[Part]:
    """A closed prism: the simple polygon ``outline_xy`` (either orientation, may be concave)
    raised from ``z0_m`` by ``height_m``. Caps by ear clipping (:func:`triangulate_polygon`);
    flat normals everywhere. Volume = polygon area × height exactly.
    """
    p = _points("outline_xy", outline_xy, 2, 3)
    h = _positive("height_m", height_m)
    z0 = _finite("z0_m", z0_m)
    tri_idx = triangulate_polygon(p, name="outline_xy")
    if polygon_area_m2(p) < 0:
        p = p[::-1]
        tri_idx = (p.shape[0] - 1) - tri_idx  # same triangles, indices into the reversed list
    bottom = np.column_stack([p, np.full(len(p), z0)])
    top = bottom + [0.0, 0.0, h]
    top_tris = top[tri_idx]
    bottom_tris = bottom[tri_idx][:, [0, 2, 1]]
    nxt = np.roll(np.arange(len(p)), -1)
    sides = np.concatenate(
        [
            np.stack([bottom, bottom[nxt], top[nxt]], axis=1),
            np.stack([bottom, top[nxt], top], axis=1),
        ]
    )
    return merge_parts(
        [
            flat_part(sides, slot),
            flat_part(bottom_tris, bottom_slot or slot),
            flat_part(top_tris, top_slot or slot),
        ]
    )


def sweep_rect(
    path_xy: ArrayLike,
    width_m: float,
    height_m: float,
    *,
    z0_m: float = 0.0,
    slot: str = "body",
    top_slot: str | None = None,
    max_miter: float = 4.0,
) -> list[Part]:
    """A rectangle profile (``width_m`` across, ``height_m`` up) swept along an open polyline in
    the ground plane, with mitred joints: a kerb, a low wall, a hedge along a curve.

    The swept solid of a vertical rectangle along a planar path is the prism over the path's
    offset outline, so this is :func:`extrude` of that outline (closed, flat normals). A joint
    whose mitre would exceed ``max_miter`` × half the width, or a path whose outline crosses
    itself, raises ValueError.
    """
    path = _points("path_xy", path_xy, 2, 2)
    w = _positive("width_m", width_m)
    d = np.diff(path, axis=0)
    length = np.linalg.norm(d, axis=1)
    if np.any(length == 0):
        raise ValueError("path_xy: consecutive points must differ")
    t = d / length[:, None]
    left = np.stack([-t[:, 1], t[:, 0]], axis=1)
    offsets = np.empty_like(path)
    offsets[0] = left[0]
    offsets[-1] = left[-1]
    for i in range(1, len(path) - 1):
        m = left[i - 1] + left[i]
        norm = np.linalg.norm(m)
        cos_half = norm / 2
        if norm == 0 or 1 / cos_half > max_miter:
            raise ValueError(f"path_xy: the turn at point {i} is too sharp for a mitred joint")
        offsets[i] = m / norm / cos_half
    right_side = path - offsets * w / 2
    left_side = path + offsets * w / 2
    outline = np.vstack([right_side, left_side[::-1]])
    return extrude(outline, height_m, z0_m=z0_m, slot=slot, top_slot=top_slot)


def flat_region(outline_xy: ArrayLike, z_m: float = 0.0, *, slot: str = "marking") -> list[Part]:
    """A flat, up-facing polygon at height ``z_m`` (road marking, cycle-lane surfacing): the
    outline may be given in either orientation and may be concave; one-sided, normal +z."""
    p = _points("outline_xy", outline_xy, 2, 3)
    z = _finite("z_m", z_m)
    idx = triangulate_polygon(p, name="outline_xy")
    pts = np.column_stack([p, np.full(len(p), z)])
    tri = pts[idx]
    nrm = np.zeros_like(tri)
    nrm[..., 2] = 1.0
    return [Part(tri, nrm, slot)]


def strip(p0_xy: ArrayLike, p1_xy: ArrayLike, width_m: float, z_m: float = 0.0, *, slot: str = "marking") -> list[Part]:
    """An up-facing rectangle of ``width_m`` centred on the segment ``p0_xy`` -> ``p1_xy`` at
    height ``z_m`` (a line marking, a dash)."""
    a = _vector("p0_xy", p0_xy, 2)
    b = _vector("p1_xy", p1_xy, 2)
    w = _positive("width_m", width_m)
    d = b - a
    if np.linalg.norm(d) == 0:
        raise ValueError("strip: p0_xy and p1_xy must differ")
    n = np.array([-d[1], d[0]]) / np.linalg.norm(d) * w / 2
    return flat_region([a - n, b - n, b + n, a + n], z_m, slot=slot)


def quad(p0_m: ArrayLike, p1_m: ArrayLike, p2_m: ArrayLike, p3_m: ArrayLike, *, slot: str = "body") -> list[Part]:
    """A one-sided quadrilateral, counter-clockwise seen from its front: triangles
    (p0, p1, p2) and (p0, p2, p3); flat normals."""
    pts = [_vector(f"p{i}_m", p) for i, p in enumerate((p0_m, p1_m, p2_m, p3_m))]
    tri = np.array([[pts[0], pts[1], pts[2]], [pts[0], pts[2], pts[3]]])
    if np.any(np.linalg.norm(np.cross(tri[:, 1] - tri[:, 0], tri[:, 2] - tri[:, 0]), axis=1) == 0):
        raise ValueError("quad: the corners are degenerate (zero-area triangle)")
    return [flat_part(tri, slot)]


def panel(points_m: ArrayLike, *, facing: ArrayLike | None = None, slot: str = "body") -> list[Part]:
    """A one-sided flat polygon from (n, 3) corners (convex or concave, nearly planar).

    The winding gives the front (counter-clockwise seen from the front); if ``facing`` is
    given, the panel is turned to face that direction instead.
    """
    p = _points("points_m", points_m, 3, 3)
    nrm, u, v, area = _polygon_basis(p)
    if area == 0:
        raise ValueError("panel: the polygon has zero area")
    if facing is not None and np.dot(nrm, _vector("facing", facing)) < 0:
        p = p[::-1]
    tri = p[triangulate_polygon_3d(p, "points_m")]
    return [flat_part(tri, slot)]
