"""The light tree over lit windows (render/light/indirect/window_tree.py) and the light of many
windows through it.

Checks, each against something outside the code:

* the orientation measure of a normal cone against its definition integrated numerically
  (analytic: π for one normal, the cosine-weighted hemisphere; 4π for every direction);
* every window's probability at a point is above zero and they sum to 1 (the definition of a
  discrete distribution), and the tree's choices occur with those probabilities (Pearson's
  chi-square test, common practice), the probability returned with a choice equal to the one
  the walk to that window gives, to the bit (what the power heuristic relies on);
* with 200 lit windows on two facades, the estimate of E/(π·L) at points equals the sum over
  the windows of their luminance times the configuration factor of a differential area to the
  window (Lambert's contour formula for a polygon, itself checked against Howell's
  parallel-rectangle factor and the definition integrated by the midpoint rule), within
  4 standard errors of the mean (the Monte Carlo error; the standard error below 1 % of the
  value, so the check can fail);
* with many small windows seen in a nearly mirror-like wet floor, multiple importance sampling
  (which needs each window's probability from the tree) agrees with each strategy alone.
"""

from __future__ import annotations

import math

import numpy as np
import pytest
from indirect_scenes import isotropic_source, mesh_of
from scipy import stats

from render.colour.spectra import N_BINS
from render.geometry import shapes
from render.light.indirect import IndirectSettings, PathTracer, transport_at_points
from render.light.indirect.night import NightLight
from render.light.indirect.paths import WINDOW_BOUNCE_ONLY, WINDOW_CONNECTION_ONLY, WINDOW_MIS
from render.light.indirect.window_tree import (
    LEAF_WINDOWS,
    orientation_measure,
    window_choices,
    window_probabilities,
    window_tree,
)
from render.light.indirect.windows import LitWindows
from render.rays.bvh import build_bvh

HOUSE_WINDOW = 2  # the house windows' channel after sky and moon (no luminaire channel)
BAND = 40  # a node of the stored transport (every band carries the same white throughput here)


def _rows(corners, e1, e2, relative) -> np.ndarray:
    """Window rows (corner, edges, outward normal e1 × e2, area, relative luminance)."""
    corners = np.asarray(corners, np.float64)
    e1 = np.broadcast_to(np.asarray(e1, np.float64), corners.shape)
    e2 = np.broadcast_to(np.asarray(e2, np.float64), corners.shape)
    n = np.cross(e1, e2)
    area = np.linalg.norm(n, axis=1)
    return np.column_stack([corners, e1, e2, n / area[:, None], area, np.asarray(relative, np.float64)])


def _street_windows(seed: int = 7) -> np.ndarray:
    """200 windows 1.2 m × 1.4 m: 120 on a facade at y = 6 facing −y (20 along, 6 storeys) and
    80 on one at y = −6 facing +y (20 along, 4 storeys), sills from 0.9 m, 3 m apart; each of
    a luminance 0.5 to 3 times the channel's level."""
    rows = []
    rng = np.random.default_rng(seed)
    for y, storeys, e1 in ((6.0, 6, (1.2, 0.0, 0.0)), (-6.0, 4, (-1.2, 0.0, 0.0))):
        x0 = 0.0 if y > 0 else 1.2  # the +y facade's corner at its left end seen from the street
        corners = [(x0 + 3.0 * i - 30.0, y, 0.9 + 3.0 * k) for i in range(20) for k in range(storeys)]
        rows.append(_rows(corners, e1, (0.0, 0.0, 1.4), rng.uniform(0.5, 3.0, len(corners))))
    rect = np.vstack(rows)
    assert rect.shape[0] == 200
    assert np.all(rect[:120, 10] == -1.0) and np.all(rect[120:, 10] == 1.0)
    return rect


def lambert_factor(x: np.ndarray, n: np.ndarray, polygon: np.ndarray) -> float:
    """Configuration factor from a differential area at ``x`` (unit normal ``n``) to a polygon
    (k, 3) wholly in front of it: F = (1/2π)·|Σ_i γ_i n·(R_i × R_{i+1})/|R_i × R_{i+1}||, γ_i
    the angle between R_i and R_{i+1}, the vectors from x to consecutive vertices (Lambert's
    contour integral; e.g. Howell's catalogue, differential element to a polygon) **from
    memory**, checked below against Howell's parallel-rectangle factor and the definition."""
    r = polygon - x
    r = r / np.linalg.norm(r, axis=1, keepdims=True)
    total = 0.0
    for i in range(len(r)):
        a, b = r[i], r[(i + 1) % len(r)]
        c = np.cross(a, b)
        total += math.atan2(np.linalg.norm(c), float(a @ b)) * float(n @ c) / np.linalg.norm(c)
    return abs(total) / (2.0 * math.pi)


def _howell_parallel(X, Y):
    """Howell's factor from a differential element to a parallel rectangle above one corner."""
    return (
        X / math.sqrt(1 + X * X) * math.atan(Y / math.sqrt(1 + X * X))
        + Y / math.sqrt(1 + Y * Y) * math.atan(X / math.sqrt(1 + Y * Y))
    ) / (2 * math.pi)


def _corners(row: np.ndarray) -> np.ndarray:
    p0, e1, e2 = row[0:3], row[3:6], row[6:9]
    return np.array([p0, p0 + e1, p0 + e1 + e2, p0 + e2])


def _contribution(row: np.ndarray, x, n) -> float:
    """L_w/level · F_w at x for a window wholly in front of x's plane and facing it, else 0."""
    x, n = np.asarray(x, np.float64), np.asarray(n, np.float64)
    c = _corners(row)
    h = (c - x) @ n
    facing = (x - c.mean(axis=0)) @ row[9:12] > 0.0
    if np.all(h > 0.0) and facing:
        return float(row[13] * lambert_factor(x, n, c))
    # Not used at the points below: a window straddling the plane and facing x.
    assert np.all(h <= 0.0) or not facing
    return 0.0


def _expected(rect: np.ndarray, x, n) -> float:
    """Σ_w L_w/level · F_w at x."""
    return sum(_contribution(row, x, n) for row in rect)


def test_lambert_factor_against_howell_and_the_definition():
    # Parallel: a 2 × 1 rectangle 1.5 above the point, its corner above the point.
    c = np.array([[0.0, 0.0, 1.5], [2.0, 0.0, 1.5], [2.0, 1.0, 1.5], [0.0, 1.0, 1.5]])
    f = lambert_factor(np.zeros(3), np.array([0.0, 0.0, 1.0]), c)
    assert f == pytest.approx(_howell_parallel(2.0 / 1.5, 1.0 / 1.5), rel=1e-12)
    # Perpendicular: a window in the plane y = 6 seen from the ground off to one side, against
    # the definition by the midpoint rule (400 × 400 cells).
    row = _rows([(1.0, 6.0, 0.9)], (1.2, 0.0, 0.0), (0.0, 0.0, 1.4), [1.0])[0]
    x = np.array([0.3, 2.0, 0.0])
    u = (np.arange(400) + 0.5) / 400
    uu, vv = np.meshgrid(u, u, indexing="ij")
    y = row[0:3] + uu[..., None] * row[3:6] + vv[..., None] * row[6:9]
    r = y - x
    d2 = (r * r).sum(axis=-1)
    quad = float((r[..., 2] * r[..., 1] / (math.pi * d2 * d2)).mean() * 1.2 * 1.4)
    assert lambert_factor(x, np.array([0.0, 0.0, 1.0]), _corners(row)) == pytest.approx(quad, rel=1e-4)


def test_orientation_measure_against_its_definition():
    # π for one normal (∫ cos θ dω over a hemisphere), 4π when the cone holds every direction.
    assert orientation_measure(0.0) == pytest.approx(math.pi, rel=1e-12)
    assert orientation_measure(math.pi) == pytest.approx(4 * math.pi, rel=1e-12)
    for t in (0.3, 1.1, 2.0):
        th = (np.arange(200000) + 0.5) / 200000 * math.pi
        f = np.where(th <= t, 1.0, np.where(th <= min(t + math.pi / 2, math.pi), np.cos(th - t), 0.0))
        quad = float((2 * math.pi * f * np.sin(th)).sum() * math.pi / 200000)
        assert float(orientation_measure(t)) == pytest.approx(quad, rel=1e-6)


def test_tree_bounds_hold_their_windows():
    # Structure (common practice, no source): every window in exactly one leaf of at most
    # LEAF_WINDOWS, each node's sphere, normal cone and power bounding its windows.
    rect = _street_windows()
    tree = window_tree(rect)
    assert sorted(tree.order.tolist()) == list(range(200))
    assert 2 < tree.depth <= 12
    win = rect[tree.order]
    leaves = 0
    for m in range(tree.n_nodes):
        first, count, left = tree.links[m]
        rows = win[first : first + count]
        node = tree.nodes[m]
        corners = np.concatenate([_corners(r) for r in rows])
        assert np.all(np.linalg.norm(corners - node[0:3], axis=1) <= node[3] * (1 + 1e-12))
        assert np.all(rows[:, 9:12] @ node[4:7] >= node[7] - 1e-12)
        assert node[9] == pytest.approx((rows[:, 12] * rows[:, 13]).sum(), rel=1e-12)
        assert np.all(np.abs(corners - node[0:3]) <= node[10:13] * (1 + 1e-12) + 1e-12)
        if left < 0:
            leaves += 1
            assert 1 <= count <= LEAF_WINDOWS
        else:
            assert tree.links[left, 0] == first and tree.links[left + 1, 0] == first + tree.links[left, 1]
            assert tree.links[left, 1] + tree.links[left + 1, 1] == count
    assert leaves >= 200 // LEAF_WINDOWS
    # The two facades are apart below the root's children's level: no node mixes them but the
    # root (they face opposite ways: the heuristic's split by normal).
    for m in range(1, tree.n_nodes):
        first, count, _ = tree.links[m]
        assert len(set(np.sign(win[first : first + count, 10]))) == 1


def _points():
    """Points and normals: on the ground between the facades and beyond their ends, on a wall
    facing +y, and behind the +y facade (every one of its windows facing away)."""
    pts = np.array(
        [[0.0, 0.0, 0.0], [-25.0, 4.5, 0.0], [40.0, -3.0, 0.0], [5.0, 0.0, 1.5], [0.0, 9.0, 0.0], [3.0, -5.9, 0.0]]
    )
    nrm = np.array([[0, 0, 1], [0, 0, 1], [0, 0, 1], [0, 1, 0], [0, 0, 1], [0, 0, 1]], np.float64)
    return pts, nrm


def test_every_window_has_a_probability_and_they_sum_to_one():
    rect = _street_windows()
    tree = window_tree(rect)
    pts, nrm = _points()
    p = window_probabilities(tree, rect, pts, nrm)
    assert p.shape == (len(pts), 200)
    assert np.all(p > 0.0), p.min(axis=1)
    np.testing.assert_allclose(p.sum(axis=1), 1.0, rtol=0, atol=1e-12)
    # The importance is kept (our own bound, no source): the choice's relative second moment
    # Σ_w s_w²/p_w, s_w = L_w·F_w / Σ L·F each window's share of the light at the point, is 1
    # for a choice in proportion to each window's light and the variance's factor over it
    # otherwise; within 2.5 at every point (the sphere's bounds without the box's plane tests
    # give 3.9 at the wall point, half of its choices going to the facade behind it).
    for i in range(len(pts)):
        share = np.array([_contribution(row, pts[i], nrm[i]) for row in rect])
        share /= share.sum()
        assert (share**2 / p[i]).sum() < 2.5, (i, (share**2 / p[i]).sum())


def test_choices_follow_the_probabilities():
    # At each point 200 000 choices of the tree; their counts against n·p (Pearson's chi-square
    # test, failing below p-value 1e-6), and the probability returned
    # with each choice equal to the walk's for that window, to the bit.
    rect = _street_windows()
    tree = window_tree(rect)
    pts, nrm = _points()
    p_all = window_probabilities(tree, rect, pts, nrm)
    rng = np.random.default_rng(11)
    for i in (0, 3, 5):
        u = rng.random(200000)
        row, p = window_choices(tree, rect, pts[i], nrm[i], u)
        assert np.array_equal(p, p_all[i, row])
        counts = np.bincount(row, minlength=200).astype(np.float64)
        expected = len(u) * p_all[i]
        # Windows expected fewer than 5 times pooled into one category (the test's usual rule).
        few = expected < 5.0
        if few.any():
            counts = np.append(counts[~few], counts[few].sum())
            expected = np.append(expected[~few], expected[few].sum())
        chi2 = float(((counts - expected) ** 2 / expected).sum())
        assert stats.chi2.sf(chi2, len(counts) - 1) > 1e-6, (i, chi2, len(counts))


def _window_light(rect, pts, nrm, copies=128, paths=256, seed=5):
    """Mean and standard error of E/(π·L_level) over ``copies`` of each point, windows only,
    no bounce (the ground of the scene as the one surface)."""
    s = 200.0
    ground = shapes.flat_part(
        np.array([[(-s, -s, 0.0), (s, -s, 0.0), (s, s, 0.0)], [(-s, -s, 0.0), (s, s, 0.0), (-s, s, 0.0)]]), "body"
    )
    mesh = mesh_of([[ground]], ["ground"])
    win = LitWindows(rect, np.zeros(len(rect), np.int64), np.zeros(len(rect), np.int64), (len(rect), 0))
    st = IndirectSettings(bounces=0, samples_per_pixel=paths, night=NightLight(window_lit_fraction=1.0))
    tracer = PathTracer(
        mesh, build_bvh(mesh.triangles_m), isotropic_source([0.0, 0.0, 5000.0]), np.zeros((1, N_BINS)), st, windows=win
    )
    m, _ = transport_at_points(np.repeat(pts, copies, axis=0), np.repeat(nrm, copies, axis=0), None, tracer, seed)
    est = m[:, HOUSE_WINDOW, BAND].reshape(len(pts), copies)
    return est.mean(axis=1), est.std(axis=1, ddof=1) / math.sqrt(copies)


def test_many_windows_light_equals_the_sum_of_configuration_factors():
    rect = _street_windows()
    pts, nrm = _points()
    mean, se = _window_light(rect, pts, nrm)
    for i in range(len(pts)):
        expected = _expected(rect, pts[i], nrm[i])
        assert expected > 1e-3
        assert abs(mean[i] - expected) < 4 * se[i], (i, mean[i], expected, se[i])
        assert se[i] < 0.01 * expected, (i, se[i], expected)


# ------------------------------------------------------------------------------------------
# Many windows seen in a wet floor: the tree's probabilities in the power heuristic
# ------------------------------------------------------------------------------------------


def _floor_under_windows(strategy, paths=512, n=48, seed=3):
    """E/π per unit window luminance at points 1 m above a nearly mirror-like floor (α = 0.02,
    F0 = 0.5, black base), facing down, under a ceiling of 10 × 10 windows 0.3 m wide, 0.4 m
    apart, 2 m up, facing down (their glass black): per strategy, mean and standard error."""
    s = 5000.0
    a, b, c, d = (-s, -s, 0.0), (s, -s, 0.0), (s, s, 0.0), (-s, s, 0.0)
    floor = shapes.flat_part(np.array([[a, b, c], [a, c, d]], np.float64), "body")
    corners = [(-2.0 + 0.4 * i, -2.0 + 0.4 * k, 2.0) for i in range(10) for k in range(10)]
    rect = _rows(corners, (0.0, 0.3, 0.0), (0.3, 0.0, 0.0), np.ones(100))  # e1 × e2 = −z
    glass = []
    for row in rect:
        p0, p1, p2, p3 = _corners(row)
        glass.append(shapes.flat_part(np.array([[p0, p1, p2], [p0, p2, p3]], np.float64), "body"))
    mesh = mesh_of([[floor], glass], ["floor", "glass"])
    mesh.material_gloss = np.array([[0.5, 0.02], [0.0, 1.0]], np.float64)
    win = LitWindows(rect, np.zeros(100, np.int64), np.zeros(100, np.int64), (100, 0))
    st = IndirectSettings(bounces=2, samples_per_pixel=paths, night=NightLight(window_lit_fraction=1.0))
    tracer = PathTracer(
        mesh,
        build_bvh(mesh.triangles_m),
        isotropic_source([0.0, 0.0, 50000.0]),
        np.zeros((2, N_BINS)),
        st,
        windows=win,
        window_mis=strategy,
    )
    assert np.count_nonzero(tracer.tri_window >= 0) == 200
    rng = np.random.default_rng(seed)
    pts = np.column_stack([rng.uniform(-1.0, 1.0, (n, 2)), np.full(n, 1.0)])
    m, _ = transport_at_points(pts, np.tile([0.0, 0.0, -1.0], (n, 1)), None, tracer, seed)
    e = m[:, 1 + HOUSE_WINDOW, BAND]  # after the luminaire's channel
    return e.mean(), e.std(ddof=1) / math.sqrt(n)


def test_many_windows_in_a_wet_floor_strategies_agree():
    # Multiple importance sampling weighs the drawn direction meeting a window by the tree's
    # probability of that window: the three estimates of the same integral agree within 4σ
    # (Veach & Guibas 1995: each strategy alone is unbiased), and MIS is not noisier than the
    # better strategy alone by more than 20 %.
    runs = {s: _floor_under_windows(s) for s in (WINDOW_MIS, WINDOW_CONNECTION_ONLY, WINDOW_BOUNCE_ONLY)}
    mis, se_mis = runs[WINDOW_MIS]
    for s in (WINDOW_CONNECTION_ONLY, WINDOW_BOUNCE_ONLY):
        other, se = runs[s]
        assert abs(mis - other) < 4 * math.hypot(se_mis, se), (s, mis, other, se_mis, se)
    assert se_mis < 1.2 * min(runs[WINDOW_CONNECTION_ONLY][1], runs[WINDOW_BOUNCE_ONLY][1])
