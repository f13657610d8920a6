"""Footprints with courtyards: prisms of a polygon with holes.

A building mapped as a multipolygon (an outer ring and inner rings, its courtyards) becomes an
``extrusion`` with ``holes_m`` (:func:`extrude_with_holes`): walls along the outer ring facing
out and along each inner ring facing into the courtyard, a roof and a floor covering the
polygon less its holes. The caps are cut into trapezoids between the vertical lines through
every vertex (each slab between two such lines meets the polygon's edges in an even number of
crossings, paired inside-outside in order across the slab), each trapezoid two triangles; the
walls are split at the same lines, so caps and walls share their vertices (no T-junctions).
The volume is the area (outer less holes) times the height exactly.

:func:`rings_problem` says why an outline and holes do not make such a polygon (a hole
crossing the outline or another hole, lying outside the outline or inside another hole).

References
----------
- Trapezoidal decomposition of a polygon by vertical lines through its vertices, and the
  even-odd (crossing-parity) rule for the inside of a polygon with holes: de Berg, Cheong, van
  Kreveld and Overmars, *Computational Geometry*, 3rd ed., Springer 2008, chapter 6 (analytic
  plane geometry).
- Shoelace formula for polygon areas (analytic).
"""

from __future__ import annotations

import numpy as np

from render.geometry.shapes import Part, polygon_area_m2, triangulate_polygon

__all__ = ["extrude_with_holes", "holed_area_m2", "rings_problem"]


def _ring(points) -> np.ndarray:
    p = np.asarray(points, dtype=np.float64).reshape(-1, 2)
    if p.shape[0] > 1 and np.all(p[0] == p[-1]):
        p = p[:-1]
    return p


def _segments_cross(a: np.ndarray, b: np.ndarray) -> bool:
    """Whether any edge of ring ``a`` meets any edge of ring ``b`` (touching counts)."""
    p, r = a, np.roll(a, -1, axis=0) - a
    q, s = b, np.roll(b, -1, axis=0) - b

    def cross(u, v):
        return u[..., 0] * v[..., 1] - u[..., 1] * v[..., 0]

    denom = cross(r[:, None], s[None, :])
    qp = q[None, :] - p[:, None]
    t_num = cross(qp, s[None, :])
    u_num = cross(qp, r[:, None])
    with np.errstate(divide="ignore", invalid="ignore"):
        t = t_num / denom
        u = u_num / denom
    proper = (denom != 0) & (t >= 0) & (t <= 1) & (u >= 0) & (u <= 1)
    collinear = (denom == 0) & (t_num == 0)
    if np.any(collinear):  # overlapping collinear edges: project and compare
        for i, j in zip(*np.nonzero(collinear)):
            rr = float(r[i] @ r[i])
            t0 = float((q[j] - p[i]) @ r[i]) / rr
            t1 = float((q[j] + s[j] - p[i]) @ r[i]) / rr
            if max(t0, t1) >= 0 and min(t0, t1) <= 1:
                return True
    return bool(np.any(proper))


def _inside(point: np.ndarray, ring: np.ndarray) -> bool:
    """Whether ``point`` lies inside ``ring`` (even-odd rule)."""
    x, y = point
    a, b = ring, np.roll(ring, -1, axis=0)
    straddle = (a[:, 1] > y) != (b[:, 1] > y)
    with np.errstate(divide="ignore", invalid="ignore"):
        xc = a[:, 0] + (y - a[:, 1]) * (b[:, 0] - a[:, 0]) / (b[:, 1] - a[:, 1])
    return bool(np.count_nonzero(straddle & (xc > x)) % 2)


def rings_problem(outline, holes) -> tuple[int, str] | None:
    """(index of the hole at fault, why) when ``holes`` are not courtyards of the simple
    polygon ``outline`` (each hole simple, strictly inside the outline, apart from the outline
    and from the other holes); None when they are."""
    outer = _ring(outline)
    rings = [_ring(h) for h in holes]
    for k, h in enumerate(rings):
        try:
            triangulate_polygon(h, name=f"courtyard {k + 1}")
        except ValueError as err:
            return k, str(err)
        if _segments_cross(outer, h):
            return k, "the courtyard touches or crosses the outline"
        if not _inside(h[0], outer):
            return k, "the courtyard lies outside the outline"
        for j in range(k):
            if _segments_cross(rings[j], h):
                return k, f"the courtyard touches or crosses courtyard {j + 1}"
            if _inside(h[0], rings[j]) or _inside(rings[j][0], h):
                return k, f"the courtyard lies inside courtyard {j + 1} (or it inside this one)"
    return None


def holed_area_m2(outline, holes=()) -> float:
    """Area of ``outline`` less its ``holes``, m² (shoelace)."""
    return abs(polygon_area_m2(_ring(outline))) - sum(abs(polygon_area_m2(_ring(h))) for h in holes)


def _y_at(a: np.ndarray, b: np.ndarray, x: float) -> float:
    """y of the edge a–b at ``x``, from its endpoint of lower x (the same value for both
    triangles and walls that use the edge), exact at the endpoints."""
    if a[0] > b[0]:
        a, b = b, a
    if x == a[0]:
        return float(a[1])
    if x == b[0]:
        return float(b[1])
    return float(a[1] + (x - a[0]) * (b[1] - a[1]) / (b[0] - a[0]))


def _cap(rings: list[np.ndarray], xs: np.ndarray) -> np.ndarray:
    """Up-facing triangles (k, 3, 2) covering the polygon with holes, trapezoid by trapezoid."""
    edges = [(r[i], r[(i + 1) % len(r)]) for r in rings for i in range(len(r))]
    edges = [(a, b) for a, b in edges if a[0] != b[0]]
    lo = np.array([min(a[0], b[0]) for a, b in edges])
    hi = np.array([max(a[0], b[0]) for a, b in edges])
    tris = []
    for x0, x1 in zip(xs[:-1], xs[1:]):
        active = np.nonzero((lo <= x0) & (hi >= x1))[0]
        xm = 0.5 * (x0 + x1)
        order = sorted(active, key=lambda e: _y_at(*edges[e], xm))
        for e_low, e_up in zip(order[0::2], order[1::2]):
            a = (x0, _y_at(*edges[e_low], x0))
            b = (x1, _y_at(*edges[e_low], x1))
            c = (x1, _y_at(*edges[e_up], x1))
            d = (x0, _y_at(*edges[e_up], x0))
            for t in ((a, b, c), (a, c, d)):
                (ax, ay), (bx, by), (cx, cy) = t
                if (bx - ax) * (cy - ay) - (by - ay) * (cx - ax) > 0:
                    tris.append(t)
    return np.asarray(tris, dtype=np.float64).reshape(-1, 3, 2)


def extrude_with_holes(outline_xy, holes_xy, height_m: float, *, z0_m: float = 0.0, slot: str = "body") -> list[Part]:
    """A closed prism of ``outline_xy`` less the ``holes_xy`` (courtyards), from ``z0_m`` up
    ``height_m``: outer walls facing out, courtyard walls facing into the courtyards, roof and
    floor (module text). Flat normals. Raises ValueError for rings that are not courtyards of
    the outline (:func:`rings_problem`) or a height that is not positive."""
    if not (np.isfinite(height_m) and height_m > 0):
        raise ValueError(f"height_m must be a positive number, got {height_m!r}")
    outer = _ring(outline_xy)
    triangulate_polygon(outer, name="outline_xy")
    holes = [_ring(h) for h in holes_xy]
    problem = rings_problem(outer, holes)
    if problem is not None:
        raise ValueError(f"holes_xy[{problem[0]}]: {problem[1]}")
    if polygon_area_m2(outer) < 0:
        outer = outer[::-1]
    rings = [outer] + [h if polygon_area_m2(h) < 0 else h[::-1] for h in holes]  # holes clockwise
    xs = np.unique(np.concatenate([r[:, 0] for r in rings]))
    cap = _cap(rings, xs)
    z1 = z0_m + height_m
    top = np.concatenate([cap, np.full((*cap.shape[:2], 1), z1)], axis=2)
    bottom = np.concatenate([cap, np.full((*cap.shape[:2], 1), z0_m)], axis=2)[:, [0, 2, 1]]
    walls = []
    for r in rings:
        for i in range(len(r)):
            a, b = r[i], r[(i + 1) % len(r)]
            inner = xs[(xs > min(a[0], b[0])) & (xs < max(a[0], b[0]))]
            if a[0] > b[0]:
                inner = inner[::-1]
            pts = [a, *[np.array([x, _y_at(a, b, x)]) for x in inner], b]
            for p, q in zip(pts[:-1], pts[1:]):
                p0, q0 = (*p, z0_m), (*q, z0_m)
                p1, q1 = (*p, z1), (*q, z1)
                walls += [(p0, q0, q1), (p0, q1, p1)]
    tris = np.concatenate([top, bottom, np.asarray(walls, dtype=np.float64).reshape(-1, 3, 3)])
    e1, e2 = tris[:, 1] - tris[:, 0], tris[:, 2] - tris[:, 0]
    n = np.cross(e1, e2)
    n /= np.linalg.norm(n, axis=1, keepdims=True)
    return [Part(tris, np.repeat(n[:, None, :], 3, axis=1), slot)]
