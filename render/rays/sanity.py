"""Probe rays for the scene check: is a point inside a closed solid, does a view see lit ground?

A point inside a closed solid whose faces point outwards (counter-clockwise seen from outside,
:class:`~render.geometry.mesh.TriangleMesh`) sees only back faces: the closest hit of a ray
from it lies on a triangle whose geometric normal points away from the ray's origin
(``dot(normal, direction) > 0``). :func:`back_face_fraction` casts a few rays from each point
through the BVH and counts those; ``lampcast check`` uses it to find a camera placed inside a
car or a house.

The check needs only a handful of rays, so it first tests them against every triangle with
numpy (:func:`probe_rays`: Möller–Trumbore, no BVH and so no compiler) and keeps a ray's answer
only where it is *robust*: the closest hit lies at least :data:`ROBUST_M` inside its triangle's
edges, nearer than any other triangle grown by that margin, away from the ray's ends, and the
ray is not nearly parallel to the face. Where every ray is robust (or the undecided ones cannot
change the count's verdict), the BVH's answer is the same; otherwise the caller asks the BVH.
The margin is orders of magnitude above the traversal's rounding (float32 hit points: about
1e-5 m at 100 m from the origin).

:func:`sample_rays` gives the camera rays of chosen pixels at one sample per pixel as
:func:`render.rays.cameras.camera_rays` makes them (the same counter-based jitter and
arithmetic, checked equal in ``tests/test_check_probes.py``), without its kernel.

References
----------
- T. Möller and B. Trumbore (1997), "Fast, minimum storage ray-triangle intersection",
  Journal of Graphics Tools 2(1) **(from memory)**.
- SplitMix64's finaliser: G. L. Steele, D. Lea and C. H. Flood (2014), "Fast splittable
  pseudorandom number generators", OOPSLA (as in :mod:`render.rays.cameras`).
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import TYPE_CHECKING

import numpy as np

if TYPE_CHECKING:
    from render.rays.bvh import BVH

__all__ = [
    "AXIS_DIRECTIONS",
    "ROBUST_M",
    "Probes",
    "Soup",
    "back_face_fraction",
    "probe_rays",
    "robust_back_face_count",
    "sample_rays",
    "segment_clear",
]

#: The six axis directions (+x, -x, +y, -y, +z, -z).
AXIS_DIRECTIONS = np.array(
    [[1.0, 0.0, 0.0], [-1.0, 0.0, 0.0], [0.0, 1.0, 0.0], [0.0, -1.0, 0.0], [0.0, 0.0, 1.0], [0.0, 0.0, -1.0]]
)
#: Margin of a robust answer, m: a hit this far inside its triangle, other triangles grown by
#: it, the ray's ends kept this far away (common practice, no source: far above float32
#: rounding of street-sized coordinates, far below any modelled detail).
ROBUST_M = 1e-3
#: A ray whose direction makes |cos| below this with a face's normal is nearly parallel to it:
#: its answer there is not robust.
_PARALLEL_COS = 1e-6
#: Triangles per group of the pre-test, and the cell size that orders them into groups, m.
_GROUP = 32
_GROUP_CELL_M = 4.0


@dataclass(frozen=True)
class Soup:
    """A mesh's triangles (F, 3, 3) with what the probes need of each: first vertex, edges,
    normal (not unit), twice the area, the barycentric change per metre of moving each edge
    outward (3, F), and a bounding sphere (centre, radius grown by :data:`ROBUST_M`)."""

    tris: np.ndarray
    v0: np.ndarray
    e1: np.ndarray
    e2: np.ndarray
    normal: np.ndarray
    area2: np.ndarray
    per_m: np.ndarray
    centre: np.ndarray
    radius: np.ndarray
    members: np.ndarray  # (G, _GROUP) triangle indices of each group of nearby triangles, -1 padded
    group_centre: np.ndarray
    group_radius: np.ndarray

    @classmethod
    def of(cls, triangles_m: np.ndarray) -> Soup:
        tris = np.asarray(triangles_m, dtype=np.float64).reshape(-1, 3, 3)
        v0 = tris[:, 0]
        e1 = tris[:, 1] - v0
        e2 = tris[:, 2] - v0
        n = np.cross(e1, e2)
        area2 = np.linalg.norm(n, axis=1)
        safe = np.where(area2 > 0, area2, np.inf)
        # A barycentric coordinate is the distance to its edge over the height onto that edge
        # (twice the area over the edge's length).
        lengths = np.stack(
            [np.linalg.norm(tris[:, 2] - tris[:, 1], axis=1), np.linalg.norm(e2, axis=1), np.linalg.norm(e1, axis=1)]
        )
        centre = tris.mean(axis=1)
        radius = np.max(np.linalg.norm(tris - centre[:, None, :], axis=2), axis=1) + 2.0 * ROBUST_M
        # Groups of _GROUP triangles, in the order of their centres' cells (x, then y, then z),
        # each in a sphere holding its triangles' spheres: a one-level hierarchy for the pre-test.
        cells = np.floor((centre - centre.min(axis=0)) / _GROUP_CELL_M).astype(np.int64)
        order = np.lexsort((cells[:, 2], cells[:, 1], cells[:, 0]))
        n_groups = -(-order.size // _GROUP)
        members = np.full(n_groups * _GROUP, -1, np.int64)
        members[: order.size] = order
        members = members.reshape(n_groups, _GROUP)
        safe_m = np.where(members >= 0, members, members[:, :1])
        lo = np.min(centre[safe_m] - radius[safe_m, None], axis=1)
        hi = np.max(centre[safe_m] + radius[safe_m, None], axis=1)
        g_centre = 0.5 * (lo + hi)
        g_radius = np.max(np.linalg.norm(centre[safe_m] - g_centre[:, None, :], axis=2) + radius[safe_m], axis=1)
        return cls(tris, v0, e1, e2, n, area2, lengths / safe[None, :], centre, radius, members, g_centre, g_radius)


@dataclass(frozen=True)
class Probes:
    """Closest hits of a few rays against every triangle: ``triangle`` (-1: none within the
    ray's length), ``t`` (m), barycentrics ``u``, ``v`` of the hit; ``robust``: whether the
    BVH's closest hit is sure to be the same triangle (or the same miss); ``facing``: +1 when
    the BVH's closest hit within the length is surely a back face (normal along the ray), -1
    when it is surely a front face or a miss, 0 when that cannot be told here."""

    triangle: np.ndarray
    t: np.ndarray
    u: np.ndarray
    v: np.ndarray
    robust: np.ndarray
    facing: np.ndarray


def _near(centre: np.ndarray, radius: np.ndarray, o: np.ndarray, d: np.ndarray, length: np.ndarray) -> np.ndarray:
    """(S, R) whether sphere s comes within its radius of segment r. The squared gap between a
    centre c and the segment's nearest point o + a·d (a the projection clipped to the segment)
    is |c - o|² - 2a·(c - o)·d + a², from matrix products; the radius is taken a little larger
    for their rounding."""
    proj = centre @ d.T - np.einsum("rk,rk->r", o, d)[None, :]
    rel2 = np.einsum("sk,sk->s", centre, centre)[:, None] - 2.0 * (centre @ o.T) + np.einsum("rk,rk->r", o, o)[None, :]
    a = np.clip(proj, -ROBUST_M, length[None, :] + ROBUST_M)
    gap2 = rel2 - 2.0 * a * proj + a * a
    return gap2 <= ((radius * (1.0 + 1e-9) + 1e-6) ** 2)[:, None]


def _pairs(soup: Soup, o: np.ndarray, d: np.ndarray, length: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """(ray, triangle) index pairs whose bounding sphere comes within its radius of the
    segment (a conservative pre-test: every other pair misses), through the groups' spheres."""
    g, r = np.nonzero(_near(soup.group_centre, soup.group_radius, o, d, length))
    f = soup.members[g].reshape(-1)
    r = np.repeat(r, soup.members.shape[1])
    keep = f >= 0
    f, r = f[keep], r[keep]
    c = soup.centre[f] - o[r]
    proj = np.einsum("pk,pk->p", c, d[r])
    a = np.clip(proj, -ROBUST_M, length[r] + ROBUST_M)
    gap2 = np.einsum("pk,pk->p", c, c) - 2.0 * a * proj + a * a
    near = gap2 <= (soup.radius[f] * (1.0 + 1e-9) + 1e-6) ** 2
    return r[near], f[near]


def _hits(soup: Soup, f: np.ndarray, o: np.ndarray, d: np.ndarray):
    """Möller–Trumbore for pairs of rays (origins ``o``, directions ``d``, one row per pair)
    and triangles ``f``: ``(t, u, v, ok, cos)``. Pairs nearly parallel (|cos| below
    _PARALLEL_COS, cos the signed cosine between ray and normal) or with a degenerate triangle
    are not ``ok``."""
    e1, e2, v0 = soup.e1[f], soup.e2[f], soup.v0[f]
    area2 = soup.area2[f]
    cos = np.einsum("pk,pk->p", d, soup.normal[f]) / np.where(area2 > 0, area2, 1.0)
    ok = (np.abs(cos) >= _PARALLEL_COS) & (area2 > 0)
    p = np.cross(d, e2)
    det = np.einsum("pk,pk->p", p, e1)
    inv = np.divide(1.0, det, out=np.zeros_like(det), where=ok)
    s = o - v0
    u = np.einsum("pk,pk->p", s, p) * inv
    q = np.cross(s, e1)
    v = np.einsum("pk,pk->p", d, q) * inv
    t = np.einsum("pk,pk->p", e2, q) * inv
    return t, u, v, ok, cos


def _inside(soup: Soup, f: np.ndarray, u: np.ndarray, v: np.ndarray, ok: np.ndarray, grow_m: float) -> np.ndarray:
    """Pairs whose hit lies inside the triangle with each edge moved out by ``grow_m`` metres
    (in, for a negative ``grow_m``)."""
    k = soup.per_m[:, f]
    return ok & (1.0 - u - v >= -grow_m * k[0]) & (u >= -grow_m * k[1]) & (v >= -grow_m * k[2])


def _grazes(soup: Soup, f: np.ndarray, o: np.ndarray, ok: np.ndarray) -> np.ndarray:
    """Pairs nearly parallel to a triangle whose plane the ray's origin is within ROBUST_M of
    (with the pre-test, the ray may run along the face: not decidable here)."""
    area2 = soup.area2[f]
    off = np.abs(np.einsum("pk,pk->p", o - soup.v0[f], soup.normal[f])) / np.where(area2 > 0, area2, 1.0)
    return ~ok & (off <= ROBUST_M)


def probe_rays(
    soup: Soup,
    origins_m: np.ndarray,
    directions: np.ndarray,
    max_distance_m: np.ndarray | float,
) -> Probes:
    """Closest hits of rays (unit ``directions``) within ``max_distance_m`` against every
    triangle of ``soup``, with numpy. See the module text for ``robust``."""
    o = np.asarray(origins_m, dtype=np.float64).reshape(-1, 3)
    d = np.asarray(directions, dtype=np.float64).reshape(-1, 3)
    R = d.shape[0]
    length = np.broadcast_to(np.asarray(max_distance_m, dtype=np.float64), (R,)).copy()
    r, f = _pairs(soup, o, d, length)
    t, u, v, ok, cos = _hits(soup, f, o[r], d[r])
    span = (t > -ROBUST_M) & (t <= length[r] + ROBUST_M)
    strict = _inside(soup, f, u, v, ok, -ROBUST_M) & span
    grown = _inside(soup, f, u, v, ok, ROBUST_M) & span
    graze = np.zeros(R, bool)
    graze[r[_grazes(soup, f, o[r], ok)]] = True
    best_t = np.full(R, np.inf)
    np.minimum.at(best_t, r[strict], t[strict])
    pick = strict & (t == best_t[r])
    best_f = np.full(R, -1, np.int64)
    best_u = np.zeros(R)
    best_v = np.zeros(R)
    best_f[r[pick]] = f[pick]
    best_u[r[pick]] = u[pick]
    best_v[r[pick]] = v[pick]
    # Contenders: every grown hit not behind the best strict one by more than the margin.
    contender = grown & (t <= best_t[r] + ROBUST_M)
    first_t = np.full(R, np.inf)
    np.minimum.at(first_t, r[contender], t[contender])
    others = np.zeros(R, np.int64)
    np.add.at(others, r[contender & (f != best_f[r])], 1)
    found = np.isfinite(best_t)
    any_grown = np.zeros(R, bool)
    any_grown[r[grown]] = True
    robust = np.where(found, (first_t > ROBUST_M) & (best_t < length - ROBUST_M) & (others == 0), ~any_grown)
    robust &= ~graze
    # Facing: every contender with the same clear sign, the first of them clear of both ends.
    sign = np.where(np.abs(cos) >= _PARALLEL_COS, np.sign(cos), 0.0)
    lo = np.full(R, np.inf)
    hi = np.full(R, -np.inf)
    np.minimum.at(lo, r[contender], sign[contender])
    np.maximum.at(hi, r[contender], sign[contender])
    agree = found & (lo == hi) & (lo != 0) & (first_t > ROBUST_M) & (best_t < length - ROBUST_M)
    facing = np.where(agree, lo, np.where(~any_grown, -1.0, 0.0)).astype(np.int64)
    facing[graze] = 0
    hit = found & (best_t <= length)
    return Probes(np.where(hit, best_f, -1), np.where(hit, best_t, np.inf), best_u, best_v, robust, facing)


def robust_back_face_count(
    soup: Soup, origin_m: np.ndarray, directions: np.ndarray, max_distance_m: float
) -> tuple[int, int]:
    """``(sure, unsure)``: of the rays from ``origin_m`` along ``directions`` (any length), how
    many surely meet a back face first within ``max_distance_m`` (as
    :func:`back_face_fraction` counts them), and how many cannot be told without the BVH."""
    d = np.asarray(directions, dtype=np.float64).reshape(-1, 3)
    d = d / np.linalg.norm(d, axis=1, keepdims=True)
    o = np.broadcast_to(np.asarray(origin_m, dtype=np.float64), d.shape)
    facing = probe_rays(soup, o, d, max_distance_m).facing
    return int(np.count_nonzero(facing > 0)), int(np.count_nonzero(facing == 0))


def segment_clear(
    soup: Soup, origins_m: np.ndarray, directions: np.ndarray, length_m: np.ndarray, skip: np.ndarray
) -> np.ndarray:
    """(R,) segments surely free of every triangle (but ``skip``, one per segment): none of
    them, grown by :data:`ROBUST_M`, meets the segment lengthened by that margin at both ends,
    and none runs along it."""
    o = np.asarray(origins_m, dtype=np.float64).reshape(-1, 3)
    d = np.asarray(directions, dtype=np.float64).reshape(-1, 3)
    length = np.asarray(length_m, dtype=np.float64).reshape(-1)
    r, f = _pairs(soup, o, d, length)
    keep = f != np.asarray(skip, np.int64)[r]
    r, f = r[keep], f[keep]
    t, u, v, ok, _ = _hits(soup, f, o[r], d[r])
    meet = _inside(soup, f, u, v, ok, ROBUST_M) & (t >= -ROBUST_M) & (t <= length[r] + ROBUST_M)
    meet |= _grazes(soup, f, o[r], ok)
    clear = np.ones(d.shape[0], bool)
    clear[r[meet]] = False
    return clear


# Counter-based random numbers of the camera's jitter (render.rays.cameras), in numpy uint64.
_GOLDEN = np.uint64(0x9E3779B97F4A7C15)
_MIX1 = np.uint64(0xBF58476D1CE4E5B9)
_MIX2 = np.uint64(0x94D049BB133111EB)


def _mix64(z: np.ndarray) -> np.ndarray:
    with np.errstate(over="ignore"):
        z = z + _GOLDEN
        z = (z ^ (z >> np.uint64(30))) * _MIX1
        z = (z ^ (z >> np.uint64(27))) * _MIX2
    return z ^ (z >> np.uint64(31))


def _uniform(key: np.uint64, pixel: np.ndarray, counter: int) -> np.ndarray:
    h = _mix64(_mix64(key ^ _mix64(pixel)) ^ np.uint64(counter))
    return (h >> np.uint64(11)).astype(np.float64) * (1.0 / 9007199254740992.0)


def sample_rays(
    position_m, target_m, hfov_deg: float, width_px: int, height_px: int, seed: int, pixels: np.ndarray
) -> tuple[np.ndarray, np.ndarray]:
    """``(origins, directions)`` (N, 3) of the one jittered sample per pixel that
    :func:`render.rays.cameras.camera_rays` gives a camera (up +z) at ``samples_per_pixel=1``
    for the flat pixel indices ``pixels``."""
    import math

    pos = np.asarray(position_m, dtype=np.float64)
    f = np.asarray(target_m, dtype=np.float64) - pos
    f = f / np.linalg.norm(f)
    r = np.cross(f, np.array([0.0, 0.0, 1.0]))
    r = r / np.linalg.norm(r)
    u = np.cross(r, f)
    half_w = math.tan(math.radians(hfov_deg) / 2.0)
    half_h = half_w * height_px / width_px
    rng = np.random.default_rng(seed)
    key = np.uint64(rng.integers(0, np.iinfo(np.uint64).max, dtype=np.uint64, endpoint=True))
    p = np.asarray(pixels, dtype=np.int64)
    pu = p.astype(np.uint64)
    x = (p % width_px).astype(np.float64) + _uniform(key, pu, 0)
    y = (p // width_px).astype(np.float64) + _uniform(key, pu, 1)
    a = (2.0 * x / width_px - 1.0) * half_w
    b = (1.0 - 2.0 * y / height_px) * half_h
    d = f[None, :] + a[:, None] * r[None, :] + b[:, None] * u[None, :]
    inv = 1.0 / np.sqrt(d[:, 0] * d[:, 0] + d[:, 1] * d[:, 1] + d[:, 2] * d[:, 2])
    return np.broadcast_to(pos, d.shape).copy(), d * inv[:, None]


def back_face_fraction(
    bvh: BVH, triangles_m: np.ndarray, origin_m: np.ndarray, directions: np.ndarray, max_distance_m: float
) -> float:
    """The fraction of rays from ``origin_m`` along ``directions`` ((N, 3), any length) whose
    closest hit within ``max_distance_m`` is a back face (geometric normal pointing away from
    the origin), through the BVH. Rays that miss, or hit farther, count as not hitting a back
    face."""
    from render.rays.bvh import geometric_normal, intersect_closest

    d = np.asarray(directions, dtype=np.float64).reshape(-1, 3)
    d = d / np.linalg.norm(d, axis=1, keepdims=True)
    o = np.broadcast_to(np.asarray(origin_m, dtype=np.float64), d.shape).copy()
    hits = intersect_closest(bvh, o, d, 0.0, max_distance_m, packets=False)
    normals = geometric_normal(triangles_m, hits)
    back = hits.hit & (np.einsum("ij,ij->i", normals, d) > 0.0)
    return float(np.count_nonzero(back)) / d.shape[0]
