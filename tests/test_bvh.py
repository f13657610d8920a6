"""Ray casting: BVH build and queries checked against analytic geometry and a brute-force
reference (Möller & Trumbore, "Fast, minimum storage ray-triangle intersection", Journal of
Graphics Tools 2(1), 1997, evaluated over every triangle with numpy)."""

from __future__ import annotations

import numpy as np
import pytest

from render.bench.scenes import box_triangles, uv_sphere_triangles
from render.geometry.mesh import flat_normals
from render.rays.bvh import (
    build_bvh,
    face_forward,
    geometric_normal,
    interpolate_normal,
    intersect_any,
    intersect_closest,
)

# --------------------------------------------------------------------------------------------
# Helpers
# --------------------------------------------------------------------------------------------


def brute_force(origins, directions, tris):
    """Möller-Trumbore 1997 against every triangle. Returns (t (N, F) with inf for no hit,
    barycentric u and v (N, F)) with u the weight of v1, v of v2."""
    v0 = tris[:, 0]
    e1 = tris[:, 1] - v0
    e2 = tris[:, 2] - v0
    p = np.cross(directions[:, None, :], e2[None])
    det = np.einsum("fk,nfk->nf", e1, p)
    with np.errstate(divide="ignore", invalid="ignore"):
        inv = 1.0 / det
        s = origins[:, None, :] - v0[None]
        u = np.einsum("nfk,nfk->nf", s, p) * inv
        q = np.cross(s, e1[None])
        v = np.einsum("nk,nfk->nf", directions, q) * inv
        t = np.einsum("fk,nfk->nf", e2, q) * inv
    ok = (det != 0) & (u >= 0) & (v >= 0) & (u + v <= 1) & (t > 0)
    return np.where(ok, t, np.inf), u, v


def random_soup(rng, n, spread=5.0, size=0.8):
    centres = rng.uniform(-spread, spread, (n, 1, 3))
    return centres + rng.normal(0.0, size, (n, 3, 3))


def coherent_rays(rng, n, origin, target_centre, spread):
    """Rays from one point towards a small patch: consecutive rays have close directions, so
    they go through the packet path of the caster."""
    targets = target_centre + np.cumsum(rng.uniform(-spread, spread, (n, 3)) * 0.02, axis=0) % spread
    o = np.repeat(np.asarray(origin, float)[None], n, 0)
    return o, targets - o


@pytest.fixture(scope="module")
def soup_scene():
    rng = np.random.default_rng(12345)
    tris = random_soup(rng, 400)
    return tris, build_bvh(tris, max_leaf_size=4)


# --------------------------------------------------------------------------------------------
# Analytic cases
# --------------------------------------------------------------------------------------------


def test_ray_plane_distance_and_barycentrics():
    # Analytic geometry: a ray o + t d meets the plane z = h at t = (h - o_z) / d_z.
    h = 0.75
    quad = np.array([[[-10, -10, h], [10, -10, h], [10, 10, h]], [[-10, -10, h], [10, 10, h], [-10, 10, h]]], float)
    bvh = build_bvh(quad)
    rng = np.random.default_rng(1)
    o = np.column_stack([rng.uniform(-3, 3, (500, 2)), rng.uniform(2, 6, 500)])
    d = np.column_stack(
        [rng.uniform(-0.5, 0.5, (500, 2)), -rng.uniform(0.5, 2.0, 500)]
    )  # not unit length; all within the quad
    hits = intersect_closest(bvh, o, d)
    assert np.all(hits.hit)
    np.testing.assert_allclose(hits.t, (h - o[:, 2]) / d[:, 2], rtol=1e-12)
    # The barycentrics reproduce the hit point: (1-u-v) v0 + u v1 + v v2 = o + t d.
    tri = quad[hits.triangle]
    p = (1 - hits.u - hits.v)[:, None] * tri[:, 0] + hits.u[:, None] * tri[:, 1] + hits.v[:, None] * tri[:, 2]
    np.testing.assert_allclose(p, hits.points_m(o, d), atol=1e-12)
    # Rays pointing away from the plane miss.
    assert not np.any(intersect_closest(bvh, o, -d).hit)


def test_ray_sphere_within_tessellation_bound():
    # Analytic: ray/sphere |o + t d|^2 = r^2. The flat triangles of a tessellated sphere whose
    # vertices lie on the sphere (radius R) lie in the shell R cos(g) <= |p| <= R, where g is the
    # largest angle between two vertices of one triangle (every point of a triangle is a convex
    # combination of its vertices, so its projection on the unit vector of any vertex is at
    # least R cos g). Hence a ray's first hit lies between its entries into the spheres of
    # radius R and R cos(g), and rays missing the outer sphere miss the mesh.
    radius = 2.0
    tris = uv_sphere_triangles((0.0, 0.0, 0.0), radius, 48, 96)
    unit = tris / np.linalg.norm(tris, axis=2, keepdims=True)
    cos_g = min(np.einsum("fk,fk->f", unit[:, a], unit[:, b]).min() for a, b in ((0, 1), (1, 2), (0, 2)))
    r_in = radius * cos_g
    assert 1 - cos_g < 5e-3  # the bound is tight enough to be a real check (0.43 % of R here)
    bvh = build_bvh(tris)
    rng = np.random.default_rng(2)
    n = 2000
    dirs_o = rng.normal(size=(n, 3))
    o = 3.0 * radius * dirs_o / np.linalg.norm(dirs_o, axis=1, keepdims=True)
    aim = rng.uniform(-1.2 * radius, 1.2 * radius, (n, 3))
    d = aim - o
    d /= np.linalg.norm(d, axis=1, keepdims=True)

    def entry(r):
        b = np.einsum("ij,ij->i", o, d)
        disc = b * b - (np.einsum("ij,ij->i", o, o) - r * r)
        return np.where(disc >= 0, -b - np.sqrt(np.maximum(disc, 0)), np.inf)

    t_out, t_in = entry(radius), entry(r_in)
    hits = intersect_closest(bvh, o, d)
    assert not np.any(hits.hit[~np.isfinite(t_out)])
    inner = np.isfinite(t_in)
    assert inner.sum() > 500 and np.all(hits.hit[inner])
    assert np.all(hits.t[inner] >= t_out[inner] - 1e-12) and np.all(hits.t[inner] <= t_in[inner] + 1e-12)
    r_hit = np.linalg.norm(hits.points_m(o, d)[hits.hit], axis=1)
    assert np.all(r_hit <= radius * (1 + 1e-12)) and np.all(r_hit >= r_in * (1 - 1e-12))


def test_ray_box_distance_and_normals():
    # Analytic: slab method (Kay & Kajiya 1986) for the entry distance of an axis-aligned box;
    # the face entered is the slab with the largest entry distance, its outward normal is the
    # axis unit vector with the sign opposite to the ray direction.
    lo, hi = np.array([-1.0, -2.0, 0.0]), np.array([1.5, 1.0, 2.5])
    tris = box_triangles(lo, hi)
    bvh = build_bvh(tris)
    rng = np.random.default_rng(3)
    n = 1000
    o = rng.uniform(-8, 8, (n, 3))
    o[np.all((o > lo - 0.5) & (o < hi + 0.5), axis=1)] += 10.0  # start outside
    d = rng.uniform(lo, hi, (n, 3)) - o
    with np.errstate(divide="ignore"):
        t1, t2 = (lo - o) / d, (hi - o) / d
    tn = np.minimum(t1, t2)
    t_enter = tn.max(axis=1)
    axis = tn.argmax(axis=1)
    hits = intersect_closest(bvh, o, d)
    assert np.all(hits.hit)
    np.testing.assert_allclose(hits.t, t_enter, rtol=1e-12)
    expected = np.zeros((n, 3))
    expected[np.arange(n), axis] = -np.sign(d[np.arange(n), axis])
    # Avoid rays that enter within 1e-9 of an edge, where the face is ambiguous.
    clear = np.sort(tn, axis=1)[:, -1] - np.sort(tn, axis=1)[:, -2] > 1e-9
    np.testing.assert_allclose(geometric_normal(tris, hits)[clear], expected[clear], atol=1e-12)
    np.testing.assert_allclose(interpolate_normal(flat_normals(tris), hits)[clear], expected[clear], atol=1e-12)
    # Axis-parallel rays (zero direction components) hit the face they point at.
    ax = intersect_closest(
        bvh,
        np.array([[5.0, 0.0, 1.0], [0.0, 0.0, 9.0], [0.0, -7.0, 1.0]]),
        np.array([[-1.0, 0, 0], [0, 0, -2.0], [0, 1.0, 0]]),
    )
    np.testing.assert_allclose(ax.t, [3.5, 3.25, 5.0], rtol=1e-15)


# --------------------------------------------------------------------------------------------
# Brute force
# --------------------------------------------------------------------------------------------


def _compare_with_brute_force(tris, o, d, hits):
    t_all, u_all, v_all = brute_force(o, d, tris)
    best = t_all.argmin(axis=1)
    t_ref = t_all[np.arange(len(o)), best]
    tri_ref = np.where(np.isfinite(t_ref), best, -1)
    # Exclude exact-tie-like cases: a second triangle within 1e-9 relative of the first, or a
    # hit within 1e-9 of a triangle edge (where two different formulas may round differently).
    second = np.partition(t_all, 1, axis=1)[:, 1] if tris.shape[0] > 1 else np.full(len(o), np.inf)
    u = u_all[np.arange(len(o)), best]
    v = v_all[np.arange(len(o)), best]
    near_edge = np.isfinite(t_ref) & (np.minimum(np.minimum(u, v), 1 - u - v) < 1e-9)
    with np.errstate(invalid="ignore"):
        tie = np.isfinite(second) & (np.abs(second - t_ref) <= 1e-9 * np.abs(t_ref))
    ok = ~(tie | near_edge)
    assert ok.mean() > 0.95
    np.testing.assert_array_equal(hits.triangle[ok], tri_ref[ok])
    hit = ok & np.isfinite(t_ref)
    assert hit.sum() > 0.2 * len(o)
    np.testing.assert_allclose(hits.t[hit], t_ref[hit], rtol=1e-9)
    np.testing.assert_allclose(hits.u[hit], u[hit], atol=1e-7)
    np.testing.assert_allclose(hits.v[hit], v[hit], atol=1e-7)
    assert np.all(np.isinf(hits.t[tri_ref == -1][ok[tri_ref == -1]]))


def test_closest_matches_brute_force_random_rays(soup_scene):
    # Reference: brute-force Möller-Trumbore over every triangle.
    tris, bvh = soup_scene
    rng = np.random.default_rng(4)
    o = rng.uniform(-7, 7, (1500, 3))
    d = rng.normal(size=(1500, 3))
    _compare_with_brute_force(tris, o, d, intersect_closest(bvh, o, d))


def test_closest_matches_brute_force_coherent_rays(soup_scene):
    # Reference: brute force; coherent rays exercise the packet traversal, which must give the
    # same bits as single-ray traversal.
    tris, bvh = soup_scene
    rng = np.random.default_rng(5)
    o, d = coherent_rays(rng, 1600, (-12.0, 0.3, 0.5), np.array([0.0, -2.0, -2.0]), 4.0)
    hits = intersect_closest(bvh, o, d)
    _compare_with_brute_force(tris, o, d, hits)
    single = intersect_closest(bvh, o, d, packets=False)
    for name in ("t", "triangle", "u", "v"):
        np.testing.assert_array_equal(getattr(hits, name), getattr(single, name))


def test_t_bounds_are_exclusive(soup_scene):
    # Definition of the query: hits only for t_min < t < t_max (per ray).
    tris, bvh = soup_scene
    rng = np.random.default_rng(6)
    o = rng.uniform(-7, 7, (800, 3))
    d = rng.normal(size=(800, 3))
    full = intersect_closest(bvh, o, d)
    m = full.hit
    cut = intersect_closest(bvh, o[m], d[m], t_max=full.t[m])
    assert not np.any(cut.hit)
    later = intersect_closest(bvh, o[m], d[m], t_min=0.0, t_max=np.full(m.sum(), np.inf))
    np.testing.assert_array_equal(later.triangle, full.triangle[m])
    # t_min beyond the first hit finds the next one (or nothing), never the first.
    skip = intersect_closest(bvh, o[m][:1], d[m][:1], t_min=float(full.t[m][0]))
    assert skip.triangle[0] != full.triangle[m][0] or not skip.hit[0]


def test_any_agrees_with_closest(soup_scene):
    # Consistency of the two queries: occluded iff the closest hit is before t_max.
    tris, bvh = soup_scene
    rng = np.random.default_rng(7)
    for o, d in (
        (rng.uniform(-7, 7, (1200, 3)), rng.normal(size=(1200, 3))),
        coherent_rays(rng, 1200, (0.0, 12.0, 1.0), np.array([0.0, 0.0, 0.0]), 4.0),
    ):
        closest = intersect_closest(bvh, o, d)
        t_max = rng.uniform(0.0, 25.0, len(o))
        clear = ~(np.abs(closest.t - t_max) <= 1e-9 * t_max)
        occluded = intersect_any(bvh, o, d, t_max)
        np.testing.assert_array_equal(occluded[clear], (closest.t < t_max)[clear])
        np.testing.assert_array_equal(occluded, intersect_any(bvh, o, d, t_max, packets=False))
        assert 0.05 < occluded.mean() < 0.95  # both outcomes occur
    # A scalar t_max applies to every ray.
    np.testing.assert_array_equal(intersect_any(bvh, o, d, 3.0), closest.t < 3.0)


# --------------------------------------------------------------------------------------------
# Edge cases
# --------------------------------------------------------------------------------------------


def test_shared_edge_and_vertex_are_watertight():
    # Woop, Benthin & Wald 2013 (JCGT 2(1)): rays through a shared edge or vertex of a mesh
    # never slip between the triangles. Unit square z = 0 split along the diagonal x = y; rays
    # aim at points exactly on the interior of the diagonal from many directions. (The two
    # ends of the diagonal are corners of the quad's outer boundary, where a ray may rightly
    # pass outside.) A plain floating-point Möller-Trumbore test misses about 13 % of these
    # rays, so the check discriminates.
    quad = np.array([[[0, 0, 0], [1, 0, 0], [1, 1, 0]], [[0, 0, 0], [1, 1, 0], [0, 1, 0]]], float)
    bvh = build_bvh(quad)
    rng = np.random.default_rng(8)
    s = np.concatenate([np.linspace(0.0, 1.0, 257)[1:-1], [2.0**-20, 0.1, 1 / 3, 0.7]])
    targets = np.column_stack([s, s, np.zeros_like(s)])
    for _ in range(20):
        o = np.column_stack([rng.uniform(-3, 4, (len(s), 2)), rng.uniform(0.5, 5.0, len(s))])
        for packets in (True, False):
            hits = intersect_closest(bvh, o, targets - o, packets=packets)
            assert np.all(hits.hit), "a ray through the shared edge slipped through"
            assert np.all(np.isin(hits.triangle, [0, 1]))
            np.testing.assert_allclose(hits.t, 1.0, rtol=1e-12)  # target at t = 1 (analytic)
            # Exactly one triangle reported per ray; on a true tie the lower index wins.
            both = intersect_any(bvh, o, targets - o, 2.0)
            assert np.all(both)


def test_fan_around_a_vertex_is_watertight():
    # Same property for a vertex shared by 7 triangles (a fan of a convex polygon around the
    # origin): rays at the shared vertex and along the spokes always hit.
    ang = np.linspace(0, 2 * np.pi, 8)[:-1]
    ring = np.column_stack([np.cos(ang), np.sin(ang), np.zeros(7)])
    tris = np.array([[np.zeros(3), ring[i], ring[(i + 1) % 7]] for i in range(7)])
    bvh = build_bvh(tris)
    rng = np.random.default_rng(9)
    o = np.column_stack([rng.uniform(-2, 2, (400, 2)), rng.uniform(0.5, 3, 400)])
    spoke = rng.integers(0, 7, 400)
    frac = rng.choice([0.0, 0.25, 0.5], 400)
    target = frac[:, None] * ring[spoke]
    hits = intersect_closest(bvh, o, target - o)
    assert np.all(hits.hit)


def test_rays_parallel_to_a_face():
    # Analytic: a ray lying in the plane of a triangle, or parallel to it above, meets it in no
    # point of positive area measure; the caster reports a miss (and no NaN).
    tri = np.array([[[0, 0, 0], [1, 0, 0], [0, 1, 0]]], float)
    bvh = build_bvh(tri)
    o = np.array([[-1.0, 0.25, 0.0], [-1.0, 0.25, 1e-9], [-1.0, 0.25, -0.3]])
    d = np.array([[1.0, 0.0, 0.0], [1.0, 0.0, 0.0], [1.0, 0.1, 0.0]])
    hits = intersect_closest(bvh, o, d)
    assert not np.any(hits.hit)
    assert np.all(np.isinf(hits.t)) and not np.any(np.isnan(hits.u))
    assert not np.any(intersect_any(bvh, o, d, 10.0))


def test_ray_in_a_box_face_plane_with_zero_direction_components():
    # Analytic: a vertical triangle in the plane y = 5 with its edge from (1, 5, 0) to (1, 5, 1)
    # on the line x = 1, which is the upper x face of every box holding it. Rays starting on
    # that face plane (x = 1, direction with zero x component) towards points of the edge meet
    # it at t = 1 (direction = target - origin); the watertight test includes edges (Woop,
    # Benthin & Wald 2013), so each is a hit at t = 1 exactly. A zero direction component once
    # gave the box a far distance of 0 there, so one-by-one rays missed; packets too are checked
    # (a packet entered the box if any lane did). Also the lower face (x = 0 edge of a mirrored
    # triangle) and rays with two zero direction components.
    tri = np.array(
        [
            [[0.0, 5.0, 0.0], [1.0, 5.0, 0.0], [1.0, 5.0, 1.0]],  # edge on x = 1 (upper x face)
            [[0.0, 9.0, 0.0], [1.0, 9.0, 0.0], [0.0, 9.0, 1.0]],  # edge on x = 0 (lower x face)
        ]
    )
    bvh = build_bvh(tri)
    z = np.array([0.25, 0.5, 0.75, 1.0 / 3.0])
    o_up = np.column_stack([np.ones_like(z), np.zeros_like(z), z + np.array([0.0, 0.1, -0.2, 0.0])])
    t_up = np.column_stack([np.ones_like(z), np.full_like(z, 5.0), z])
    o_lo = np.column_stack([np.zeros_like(z), np.full_like(z, 12.0), z])
    t_lo = np.column_stack([np.zeros_like(z), np.full_like(z, 9.0), z])
    o = np.concatenate([o_up, o_lo])
    d = np.concatenate([t_up - o_up, t_lo - o_lo])
    assert np.all(d[:, 0] == 0.0) and np.all(d[4:, 2] == 0.0)  # zero x (and for some z) components
    for packets in (False, True):
        hits = intersect_closest(bvh, o, d, packets=packets)
        assert np.all(hits.hit), f"a ray in a box face plane missed (packets={packets})"
        np.testing.assert_array_equal(hits.triangle, [0, 0, 0, 0, 1, 1, 1, 1])
        np.testing.assert_allclose(hits.t, 1.0, rtol=1e-15)
        assert np.all(intersect_any(bvh, o, d, 2.0, packets=packets))


def test_zero_and_one_triangle():
    empty = build_bvh(np.zeros((0, 3, 3)))
    assert empty.n_nodes == 0 and empty.n_triangles == 0
    o = np.array([[0.2, 0.2, 1.0], [5.0, 5.0, 1.0]])
    d = np.array([[0.0, 0.0, -1.0], [0.0, 0.0, -1.0]])
    h = intersect_closest(empty, o, d)
    np.testing.assert_array_equal(h.triangle, [-1, -1])
    assert not np.any(intersect_any(empty, o, d, 10.0))
    one = build_bvh(np.array([[[0, 0, 0], [1, 0, 0], [0, 1, 0]]], float))
    h = intersect_closest(one, o, d)
    np.testing.assert_array_equal(h.triangle, [0, -1])
    np.testing.assert_allclose(h.t[0], 1.0, rtol=1e-15)  # analytic plane distance
    np.testing.assert_allclose([h.u[0], h.v[0]], [0.2, 0.2], rtol=1e-12)  # point (0.2, 0.2, 0)
    np.testing.assert_array_equal(intersect_any(one, o, d, [0.5, 10.0]), [False, False])
    np.testing.assert_array_equal(intersect_any(one, o, d, [1.5, 10.0]), [True, False])
    assert intersect_closest(one, np.zeros((0, 3)), np.zeros((0, 3))).t.shape == (0,)


def test_degenerate_and_duplicate_triangles():
    # Zero-area triangles are never hit (they have no interior); 100 identical copies of a
    # triangle (no SAH split exists) build, and the lowest index wins the exact tie.
    tri = np.array([[0, 0, 0], [1, 0, 0], [0, 1, 0]], float)
    degenerate = np.array([[[0, 0, 0], [1, 1, 0], [2, 2, 0]], [[0.3, 0.3, 0.0]] * 3], float)
    tris = np.concatenate([degenerate, np.repeat(tri[None], 100, axis=0)])
    bvh = build_bvh(tris, max_leaf_size=2)
    rng = np.random.default_rng(10)
    target = np.column_stack([rng.uniform(0, 0.45, (300, 2)), np.zeros(300)])
    o = target + np.array([0.1, -0.2, 1.0])
    for packets in (True, False):
        hits = intersect_closest(bvh, o, target - o, packets=packets)
        np.testing.assert_array_equal(hits.triangle, 2)
    exact = intersect_closest(
        bvh, np.array([[0.5, 0.5, 1.0], [0.3, 0.3, 1.0]]), np.array([[-1.0, -1.0, -2.0], [0.0, 0.0, -1.0]])
    )
    assert np.all(exact.triangle == 2)


def test_interpolated_shading_normals():
    # Phong normal interpolation: n = normalise((1-u-v) n0 + u n1 + v n2) (Phong, CACM 18(6),
    # 1975); at a vertex it is that vertex's normal. Geometric normal of a CCW triangle in z = 0
    # seen from +z is +z (right-hand rule).
    tri = np.array([[[0, 0, 0], [1, 0, 0], [0, 1, 0]]], float)
    n = np.array([[[0, 0, 1], [1, 0, 1], [0, 1, 1]]], float)
    n /= np.linalg.norm(n, axis=2, keepdims=True)
    bvh = build_bvh(tri)
    pts = np.array([[0.0, 0.0], [1.0, 0.0], [0.25, 0.5], [0.1, 0.2]])
    o = np.column_stack([pts, np.ones(len(pts))])
    hits = intersect_closest(bvh, o, np.tile([0.0, 0.0, -1.0], (len(pts), 1)))
    got = interpolate_normal(n, hits)
    u, v = pts[:, 0], pts[:, 1]
    want = (1 - u - v)[:, None] * n[0, 0] + u[:, None] * n[0, 1] + v[:, None] * n[0, 2]
    want /= np.linalg.norm(want, axis=1, keepdims=True)
    np.testing.assert_allclose(got, want, atol=1e-12)
    np.testing.assert_allclose(geometric_normal(tri, hits), np.tile([0, 0, 1.0], (len(pts), 1)), atol=1e-15)
    # face_forward turns normals against the incoming ray.
    np.testing.assert_allclose(
        face_forward(np.tile([0, 0, 1.0], (2, 1)), np.array([[0, 0, 1.0], [0, 0, -1.0]])), [[0, 0, -1.0], [0, 0, 1.0]]
    )


def test_bvh_covers_every_triangle_once(soup_scene):
    # Structural invariant: the leaves partition the triangles, and every child box contains
    # the boxes of its triangles (float32 bounds rounded outwards).
    tris, bvh = soup_scene
    np.testing.assert_array_equal(np.sort(bvh.tri_index), np.arange(len(tris)))
    np.testing.assert_array_equal(bvh.tri_vertices.reshape(-1, 3, 3), tris[bvh.tri_index])
    for n in range(bvh.n_nodes):
        for c in range(2):
            ch = bvh.node_child[n, c]
            if ch < 0:
                first, cnt = -ch - 1, bvh.node_count[n, c]
                v = bvh.tri_vertices[first : first + cnt].reshape(-1, 3)
                if cnt:
                    assert np.all(v >= bvh.node_bounds[n, :3, c].astype(float)) and np.all(
                        v <= bvh.node_bounds[n, 3:, c].astype(float)
                    )
    assert bvh.depth < 128 and bvh.nbytes > 0


def test_wide_tree_covers_the_same_leaves(soup_scene):
    # Structural invariant of the collapsed 8-wide tree: its leaves are exactly the binary
    # tree's leaves, and every slot box contains its leaf's triangles.
    tris, bvh = soup_scene
    width = bvh.wide_nodes.shape[1] // 8
    wi = bvh.wide_nodes_i32
    leaves = []
    for n in range(bvh.wide_nodes.shape[0]):
        for c in range(width):
            ch, cnt = wi[n, 6 * width + c], wi[n, 7 * width + c]
            if ch < 0 and cnt > 0:
                first = -ch - 1
                leaves.append((first, cnt))
                v = bvh.tri_vertices[first : first + cnt].reshape(-1, 3)
                lo = bvh.wide_nodes[n, [c, width + c, 2 * width + c]].astype(float)
                hi = bvh.wide_nodes[n, [3 * width + c, 4 * width + c, 5 * width + c]].astype(float)
                assert np.all(v >= lo) and np.all(v <= hi)
    binary = [(-ch - 1, cnt) for ch, cnt in zip(bvh.node_child.ravel(), bvh.node_count.ravel()) if ch < 0 and cnt > 0]
    assert sorted(leaves) == sorted(binary)
    assert sum(cnt for _, cnt in leaves) == len(tris)


def test_adversarial_depth_is_bounded():
    # Triangles at geometrically growing distances make the SAH peel off one triangle per
    # level; the builder must switch to median splits so that traversal stacks cannot
    # overflow, and queries must stay exact (reference: brute force).
    x = 1.3 ** np.arange(300)
    tri = np.array([[0.0, -0.5, -0.5], [0.0, 0.5, -0.5], [0.0, 0.0, 0.5]])
    tris = tri[None] + np.column_stack([x, np.zeros((300, 2))])[:, None, :]
    bvh = build_bvh(tris, max_leaf_size=1, n_bins=2)
    assert 64 < bvh.depth < 128  # the SAH chain reached the depth limit, then median splits
    rng = np.random.default_rng(11)
    o = np.column_stack([rng.uniform(-1, 1e30, 500), rng.uniform(-0.3, 0.3, (500, 2))])
    d = np.tile([1.0, 0.0, 0.0], (500, 1)) * rng.choice([-1.0, 1.0], (500, 1))
    hits = intersect_closest(bvh, o, d)
    t_all, _, _ = brute_force(o, d, tris)
    np.testing.assert_array_equal(hits.triangle, np.where(np.isfinite(t_all.min(1)), t_all.argmin(1), -1))
    np.testing.assert_array_equal(intersect_any(bvh, o, d, np.inf), np.isfinite(t_all.min(1)))


def test_invalid_rays_hit_nothing():
    # Documented behaviour: zero or non-finite directions and non-finite origins never hit
    # (whether alone or inside a run of rays that would otherwise form a packet).
    bvh = build_bvh(np.array([[[0, 0, 0], [1, 0, 0], [0, 1, 0]]], float))
    o = np.tile([0.2, 0.2, 1.0], (20, 1))
    d = np.tile([0.0, 0.0, -1.0], (20, 1))
    d[3] = 0.0
    d[5, 0] = np.nan
    o[7, 1] = np.inf
    bad = np.zeros(20, bool)
    bad[[3, 5, 7]] = True
    for packets in (True, False):
        hits = intersect_closest(bvh, o, d, packets=packets)
        np.testing.assert_array_equal(hits.hit, ~bad)
        np.testing.assert_array_equal(intersect_any(bvh, o, d, 2.0, packets=packets), ~bad)
    with pytest.raises(ValueError, match="t_max"):
        intersect_any(bvh, np.zeros((2, 3)), np.ones((2, 3)), np.ones(3))
