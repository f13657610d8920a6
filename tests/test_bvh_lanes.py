"""The single-ray traversal's leaf test of four triangles at once (``tri_lanes``): the layout,
and hits against the one-by-one test (to the bit) and against brute force.

Sources: the brute-force reference is Möller & Trumbore, "Fast, minimum storage ray-triangle
intersection", Journal of Graphics Tools 2(1), 1997, over every triangle (``test_bvh.py``'s
``brute_force``); the lane test must reproduce the watertight test of Woop, Benthin & Wald,
"Watertight Ray/Triangle Intersection", JCGT 2(1), 2013, exactly, since it is the same
arithmetic per lane (the rule that equal hits go to the lowest triangle index is the
traversal's own contract: common practice, no source)."""

import numpy as np
import pytest
from test_bvh import _compare_with_brute_force, random_soup

from render.rays.bvh import Hits, build_bvh
from render.rays.bvh.layout import WIDE
from render.rays.bvh.simd import LANES
from render.rays.bvh.single import any_one, closest_one


def _leaf_sizes(bvh):
    wi = bvh.wide_nodes_i32
    ch, cnt = wi[:, 6 * WIDE : 7 * WIDE], wi[:, 7 * WIDE :]
    return cnt[(ch < 0) & (cnt > 0)]


@pytest.fixture(scope="module")
def big_leaves():
    # A cheap triangle test in the SAH makes leaves of up to 16 triangles: several groups of
    # LANES per leaf, partial last groups, and the zero columns after the last triangle read.
    rng = np.random.default_rng(2024)
    tris = random_soup(rng, 600, spread=4.0, size=0.6)
    bvh = build_bvh(tris, max_leaf_size=16, intersection_cost=0.05)
    sizes = _leaf_sizes(bvh)
    assert sizes.max() > 2 * LANES and np.any(sizes % LANES != 0)
    return tris, bvh


def _trace(bvh, o, d, t_max, lanes):
    n = max(bvh.wide_stack, 8)
    st_node, st_t, work = np.empty(n, np.int64), np.empty(n), np.empty(2 * WIDE)
    args = (bvh.wide_nodes, bvh.wide_nodes_i32, bvh.tri_vertices)
    tl = (bvh.tri_lanes,) if lanes else ()
    out_t, out_j, out_u, out_v, occ = [], [], [], [], []
    for i in range(len(o)):
        oi, di = np.ascontiguousarray(o[i]), np.ascontiguousarray(d[i])
        t, j, u, v = closest_one(*args, bvh.tri_index, oi, di, 0.0, t_max, st_node, st_t, work, WIDE, *tl)
        out_t.append(t if j >= 0 else np.inf)
        out_j.append(j)
        out_u.append(u)
        out_v.append(v)
        occ.append(any_one(*args, oi, di, 0.0, t_max, st_node, work, WIDE, *tl))
    hits = Hits(np.array(out_t), np.array(out_j, np.int32), np.array(out_u), np.array(out_v))
    return hits, np.array(occ)


def _rays(seed, n=1500):
    rng = np.random.default_rng(seed)
    return rng.uniform(-6, 6, (n, 3)), rng.normal(size=(n, 3))


def test_lanes_are_the_vertices_by_component(big_leaves):
    tris, bvh = big_leaves
    m = len(tris)
    assert bvh.tri_lanes.shape == (9, m + LANES - 1) and bvh.tri_lanes.flags.c_contiguous
    np.testing.assert_array_equal(bvh.tri_lanes[:, :m], bvh.tri_vertices.T)
    assert not np.any(bvh.tri_lanes[:, m:])


def test_lane_hits_match_brute_force(big_leaves):
    # Reference: brute-force Möller-Trumbore over every triangle.
    tris, bvh = big_leaves
    o, d = _rays(7)
    hits, occ = _trace(bvh, o, d, np.inf, lanes=True)
    _compare_with_brute_force(tris, o, d, hits)
    np.testing.assert_array_equal(occ, hits.triangle >= 0)


@pytest.mark.parametrize("t_max", [np.inf, 2.0])
def test_lane_hits_equal_one_by_one_to_the_bit(big_leaves, t_max):
    # The same float64 operations per lane: t, triangle, u, v and occlusion identical.
    tris, bvh = big_leaves
    o, d = _rays(8)
    lanes, occ_lanes = _trace(bvh, o, d, t_max, lanes=True)
    single, occ_single = _trace(bvh, o, d, t_max, lanes=False)
    assert (lanes.triangle >= 0).mean() > 0.15
    for a, b in zip((lanes.t, lanes.triangle, lanes.u, lanes.v), (single.t, single.triangle, single.u, single.v)):
        np.testing.assert_array_equal(a.view(np.uint8), b.view(np.uint8))
    np.testing.assert_array_equal(occ_lanes, occ_single)


def test_equal_hits_go_to_the_lowest_index_within_a_leaf():
    # Ten triangles (0, 0, 0), (s, 0, 0), (0, s, 0), s = 1, 2, 4 .. 512, in one leaf (three
    # groups) and ten copies 10 km away in the other leaf of the root; the ray from
    # (0.25, 0.125, 1) straight down hits the ten at t = 1 (analytic: the plane z = 0) with
    # barycentrics u = 0.25 / s, v = 0.125 / s, all exact in binary, so the ten hits are equal.
    # With the leaf positions given original indices in several orders, the position holding
    # the lowest index among the ten wins, whatever its group.
    s = 2.0 ** np.arange(10)
    near = np.zeros((10, 3, 3))
    near[:, 1, 0] = s
    near[:, 2, 1] = s
    tris = np.concatenate([near, near + [1e4, 0.0, 0.0]])
    bvh = build_bvh(tris, max_leaf_size=16, intersection_cost=0.05)
    assert _leaf_sizes(bvh).tolist() == [10, 10]
    o, d = np.array([0.25, 0.125, 1.0]), np.array([0.0, 0.0, -1.0])
    n = max(bvh.wide_stack, 8)
    st_node, st_t, work = np.empty(n, np.int64), np.empty(n), np.empty(2 * WIDE)
    hit_rows = np.flatnonzero(bvh.tri_vertices[:, 0] < 5e3)
    rng = np.random.default_rng(5)
    for ti in [np.arange(20), np.arange(20)[::-1], *(rng.permutation(20) for _ in range(8))]:
        ti = np.ascontiguousarray(ti, np.int32)
        row = hit_rows[np.argmin(ti[hit_rows])]
        size = bvh.tri_vertices[row, 3]
        for lanes in ((bvh.tri_lanes,), ()):
            t, j, u, v = closest_one(
                bvh.wide_nodes,
                bvh.wide_nodes_i32,
                bvh.tri_vertices,
                ti,
                o,
                d,
                0.0,
                np.inf,
                st_node,
                st_t,
                work,
                WIDE,
                *lanes,
            )
            assert (t, j) == (1.0, ti[row])
            assert (u, v) == (0.25 / size, 0.125 / size)


@pytest.mark.parametrize("kind", ["float32", "column order"])
def test_wrong_lanes_do_not_compile(kind):
    # The lanes are handed on as a data pointer and read as C-ordered float64 rows: any other
    # array must be refused when compiled, not read as the wrong numbers (the code's own
    # contract: common practice, no source).
    import numba

    tris = np.array([[[0.0, -1.0, -1.0], [0.0, 1.0, -1.0], [0.0, 0.0, 1.0]]])
    bvh = build_bvh(tris)
    lanes = bvh.tri_lanes.astype(np.float32) if kind == "float32" else np.asfortranarray(bvh.tri_lanes)
    n = max(bvh.wide_stack, 8)
    st_node, st_t, work = np.empty(n, np.int64), np.empty(n), np.empty(2 * WIDE)
    o, d = np.array([-1.0, 0.0, 0.0]), np.array([1.0, 0.0, 0.0])
    args = (bvh.wide_nodes, bvh.wide_nodes_i32, bvh.tri_vertices)
    with pytest.raises(numba.core.errors.TypingError):
        closest_one(*args, bvh.tri_index, o, d, 0.0, np.inf, st_node, st_t, work, WIDE, lanes)
    with pytest.raises(numba.core.errors.TypingError):
        any_one(*args, o, d, 0.0, np.inf, st_node, work, WIDE, lanes)
