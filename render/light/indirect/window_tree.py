"""A light tree over the lit windows: choosing one of many in O(log n) at a path vertex.

Next-event estimation to the lit windows (:mod:`render.light.indirect.windows`) chooses one
window per vertex with a probability ``p_w`` and divides its light by it; the estimate is
unbiased for any choice in which every window that can light the vertex has ``p_w > 0``. Looking
at every lit window (``p_w ∝ ẽ_w``, the approximate illuminance below) costs O(n) per vertex; a
street has hundreds. The tree keeps most of that importance for O(log n):

**The tree** (:func:`window_tree`, built once per tracer in numpy). A binary tree whose leaves
hold at most :data:`LEAF_WINDOWS` windows, contiguous in the tree's order (the kernel's window
rows are reordered by :attr:`WindowTree.order`). Each node keeps the bounding box of its
windows' corners (centre, half extents) and its sphere (radius = half the box's
diagonal), a cone bounding their
outward normals (unit axis = the normalised mean normal, half-angle θ_o = the largest angle
between it and a normal), and its power Σ A_w·L_w/level (the windows' flux per unit level is
π·Σ A_w·L_w). A node is split where the sum over its two children of power × orientation
measure × bounding-box area is least (the surface area orientation heuristic), among planes
at even spacing and at the median of the windows' centres along each axis and, where the
normals differ, a split by normal.

**The choice** (:func:`_choose_window`). From the root, at each node one child is taken with
probability proportional to an importance bound from the vertex ``x`` (normal ``n``):

    I = Φ · max(cos θ'_w, f) · max(cos θ'_x, f) / (d² + r²)

with ``d`` the distance from ``x`` to the node's centre, ``r`` its radius, θ_u the half-angle
the sphere subtends (sin θ_u = r/d; no bound on the angles when ``x`` is inside it),
θ'_w = max(0, θ − θ_o − θ_u) (θ the angle between the cone's axis and the direction from the
centre to ``x``) bounding the emitted angle from below, θ'_x = max(0, θ_i − θ_u) (θ_i the angle
between ``n`` and the direction to the centre) bounding the received angle -- each cosine
taken as 0 where the node's box lies wholly behind ``x``'s plane, or (for a node whose windows
share one normal, as a facade's do) ``x`` lies wholly behind the box's windows: the sphere's
bounds alone leave up to half of the choices to the facade behind a point -- and the floor
``f`` = :data:`COS_FLOOR`: every node's importance, and so every window's probability, is above
zero, even where the bounds say the node faces away (then its windows' light is zero and the
estimate with it; the floor only costs samples). In the leaf reached, a window is chosen as
before with probability ∝ ẽ_w = A_w·max(cos θ_x, f)·max(cos θ_w, f)/(d² + A_w)·L_w/level
from its centre. ``p_w`` is the product of the ratios along the way and of ẽ_w over the leaf's
sum. With at most :data:`LEAF_WINDOWS` windows the root is a leaf, and the choice and its
arithmetic are those of looking at every window, bit for bit.

**The probability of a given window** (:func:`_window_probability`), needed by the power
heuristic where a direction drawn from a gloss layer meets a window: the walk from the root to
its leaf, taking at each node the child whose range of rows holds the window, with the same
arithmetic as the choice, so that the two agree to the bit.

Cost per vertex: two node importances per level (about log₂(n/8) levels) and the leaf's
windows; no allocation (the leaf's weights in the chunk's scratch of :data:`LEAF_WINDOWS`).

References
----------
- A. Conty Estevez, C. Kulla, "Importance Sampling of Many Lights with Adaptive Tree
  Splitting", Proc. ACM Comput. Graph. Interact. Tech. 1(2), 2018 (HPG 2018): the light tree,
  its nodes' bounds (box, power, normal cone with θ_o and the emission half-angle θ_e, here
  π/2 for Lambertian windows), the importance with θ' = max(0, θ − θ_o − θ_u), the
  orientation measure M_Ω = 2π(1 − cos θ_o) + π/2·(2θ_w sin θ_o − cos(θ_o − 2θ_w) −
  2θ_o sin θ_o + cos θ_o), θ_w = min(θ_o + θ_e, π), and the surface area orientation
  heuristic **(from memory; the orientation measure derived again from its definition, the
  cosine falloff integrated over the sphere, and checked in the tests: π at θ_o = 0)**. Not
  taken: their adaptive splitting (one window per vertex here) and their distance bound; the
  regulariser r² in the distance, the two plane tests of the box, the floor and leaves of
  several windows are ours.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numba
import numpy as np

__all__ = [
    "COS_FLOOR",
    "LEAF_WINDOWS",
    "NODE_COLUMNS",
    "WindowTree",
    "orientation_measure",
    "window_choices",
    "window_probabilities",
    "window_tree",
]

#: Windows a leaf holds at most (chosen among by their approximate illuminance).
LEAF_WINDOWS = 8
#: The floor of the cosines in the importances (of a node and of a window).
COS_FLOOR = 0.02
#: Columns of a node row: box centre (3), radius (1), normal cone's unit axis (3), cos θ_o,
#: sin θ_o, power Σ A·L/level (1), the box's half extents (3).
NODE_COLUMNS = 13
# Link columns: first row (tree order), number of rows, left child (-1: a leaf; right = left + 1).
_FIRST, _COUNT, _LEFT = 0, 1, 2
# Planes at even spacing along each axis among the split candidates.
_PLANES = 4
# cos θ_o at or above which a node's windows share one normal (up to rounding).
_ONE_NORMAL = 1.0 - 1e-9
# The largest float64 below 1.
_ONE_BELOW = 1.0 - 2.0**-53


@dataclass(frozen=True)
class WindowTree:
    """The light tree of a set of lit windows: ``order`` (W,) the window rows in tree order
    (tree row i is window ``order[i]``), ``nodes`` (M, :data:`NODE_COLUMNS`) float64 bounds,
    ``links`` (M, 3) int64: first tree row, number of rows, left child (-1 for a leaf; the
    right child follows it). The root is node 0."""

    order: np.ndarray
    nodes: np.ndarray
    links: np.ndarray

    @property
    def n_nodes(self) -> int:
        return int(self.nodes.shape[0])

    @property
    def depth(self) -> int:
        """Nodes on the longest path from the root to a leaf (0 without windows)."""
        if self.n_nodes == 0:
            return 0
        depth = np.zeros(self.n_nodes, np.int64)
        depth[0] = 1
        for m in range(self.n_nodes):
            left = self.links[m, _LEFT]
            if left >= 0:
                depth[left] = depth[left + 1] = depth[m] + 1
        return int(depth.max())


def orientation_measure(theta_o: np.ndarray | float) -> np.ndarray:
    """The orientation measure M_Ω of a normal cone of half-angle θ_o (radians) of Lambertian
    emitters (θ_e = π/2): ∫ over the sphere of 1 within θ_o of the axis and cos(θ − θ_o)
    beyond, to θ_w = min(θ_o + π/2, π) (π for one normal)."""
    t = np.asarray(theta_o, np.float64)
    w = np.minimum(t + 0.5 * np.pi, np.pi)
    return 2.0 * np.pi * (1.0 - np.cos(t)) + 0.5 * np.pi * (
        2.0 * w * np.sin(t) - np.cos(t - 2.0 * w) - 2.0 * t * np.sin(t) + np.cos(t)
    )


def _cone(normals: np.ndarray) -> tuple[np.ndarray, float]:
    """Unit axis and half-angle (radians) of a cone holding the unit ``normals`` (k, 3)."""
    mean = normals.mean(axis=0)
    length = float(np.linalg.norm(mean))
    axis = mean / length if length > 1e-9 else normals[0]
    cos_o = float(np.clip((normals @ axis).min(), -1.0, 1.0))
    return axis, math.acos(cos_o)


def _box_area(lo: np.ndarray, hi: np.ndarray) -> float:
    e = hi - lo
    return float(2.0 * (e[0] * e[1] + e[1] * e[2] + e[2] * e[0]))


def _cost(sel: np.ndarray, lo: np.ndarray, hi: np.ndarray, normals: np.ndarray, power: np.ndarray) -> float:
    """Power × orientation measure × box area of the windows ``sel`` (the heuristic's cost)."""
    _, theta = _cone(normals[sel])
    return float(power[sel].sum() * orientation_measure(theta) * _box_area(lo[sel].min(axis=0), hi[sel].max(axis=0)))


def _split(centre: np.ndarray, lo: np.ndarray, hi: np.ndarray, normals: np.ndarray, power: np.ndarray) -> np.ndarray:
    """The left child's windows (a boolean mask, neither all nor none) of a node's windows."""
    n = centre.shape[0]
    candidates = []
    for axis in range(3):
        c = centre[:, axis]
        a, b = float(c.min()), float(c.max())
        if b <= a:
            continue
        for k in range(1, _PLANES):
            candidates.append(c < a + (b - a) * k / _PLANES)
        candidates.append(np.argsort(np.argsort(c, kind="stable"), kind="stable") < n // 2)
    _, theta = _cone(normals)
    if theta > 1e-3:
        # Normals apart: split along the direction they vary most.
        dev = normals - normals.mean(axis=0)
        v = np.linalg.svd(dev, full_matrices=False)[2][0]
        candidates.append(dev @ v < 0.0)
    best, best_cost = None, math.inf
    for sel in candidates:
        k = int(sel.sum())
        if k == 0 or k == n:
            continue
        cost = _cost(sel, lo, hi, normals, power) + _cost(~sel, lo, hi, normals, power)
        if cost < best_cost:
            best, best_cost = sel, cost
    if best is None:  # every centre alike: halves in row order
        best = np.arange(n) < n // 2
    return best


def window_tree(rect: np.ndarray) -> WindowTree:
    """The light tree (module text) of window rows ``rect`` (W, 14) of
    :mod:`render.light.indirect.windows` (corner, edges, outward unit normal, area, luminance
    over the channel's level)."""
    rect = np.asarray(rect, np.float64)
    W = rect.shape[0]
    if W == 0:
        return WindowTree(np.zeros(0, np.int64), np.zeros((0, NODE_COLUMNS)), np.zeros((0, 3), np.int64))
    p0, e1, e2 = rect[:, 0:3], rect[:, 3:6], rect[:, 6:9]
    corners = np.stack([p0, p0 + e1, p0 + e2, p0 + e1 + e2], axis=1)
    lo_w, hi_w = corners.min(axis=1), corners.max(axis=1)
    centre_w = p0 + 0.5 * (e1 + e2)
    normals = rect[:, 9:12]
    power = rect[:, 12] * rect[:, 13]
    order = np.arange(W, dtype=np.int64)
    nodes: list[np.ndarray | None] = [None]
    links: list[tuple[int, int, int] | None] = [None]
    stack = [(0, 0, W)]
    while stack:
        m, a, b = stack.pop()
        idx = order[a:b]
        lo, hi = lo_w[idx].min(axis=0), hi_w[idx].max(axis=0)
        axis, theta = _cone(normals[idx])
        nodes[m] = np.concatenate(
            [
                0.5 * (lo + hi),
                [0.5 * np.linalg.norm(hi - lo)],
                axis,
                [math.cos(theta), math.sin(theta)],
                [power[idx].sum()],
                0.5 * (hi - lo),
            ]
        )
        if b - a <= LEAF_WINDOWS:
            links[m] = (a, b - a, -1)
            continue
        left = _split(centre_w[idx], lo_w[idx], hi_w[idx], normals[idx], power[idx])
        order[a:b] = np.concatenate([idx[left], idx[~left]])
        k = int(left.sum())
        child = len(nodes)
        nodes += [None, None]
        links += [None, None]
        links[m] = (a, b - a, child)
        stack.append((child + 1, a + k, b))
        stack.append((child, a, a + k))
    return WindowTree(order, np.array(nodes, np.float64), np.array(links, np.int64))


@numba.njit(cache=True, nogil=True)
def _window_weight(win, w, px, py, pz, sx, sy, sz):
    """ẽ_w: window ``w``'s approximate illuminance at ``x`` (unit normal s) from its centre,
    times its luminance over its channel's level."""
    lx = win[w, 0] + 0.5 * (win[w, 3] + win[w, 6]) - px
    ly = win[w, 1] + 0.5 * (win[w, 4] + win[w, 7]) - py
    lz = win[w, 2] + 0.5 * (win[w, 5] + win[w, 8]) - pz
    d2 = lx * lx + ly * ly + lz * lz
    dist = math.sqrt(d2)
    cx = 1.0
    cw = 1.0
    if dist > 0.0:
        cx = (lx * sx + ly * sy + lz * sz) / dist
        cw = -(lx * win[w, 9] + ly * win[w, 10] + lz * win[w, 11]) / dist
    a = win[w, 12]
    return a * max(cx, COS_FLOOR) * max(cw, COS_FLOOR) / (d2 + a) * win[w, 13]


@numba.njit(cache=True, nogil=True)
def _leaf_weights(win, first, count, e_win, px, py, pz, sx, sy, sz):
    """ẽ of a leaf's windows into ``e_win[0:count]``; returns their sum."""
    total = 0.0
    for q in range(count):
        e = _window_weight(win, first + q, px, py, pz, sx, sy, sz)
        e_win[q] = e
        total += e
    return total


@numba.njit(cache=True, nogil=True)
def _node_importance(nodes, m, px, py, pz, nx, ny, nz):
    """The importance bound I of node ``m`` at ``x`` (unit normal n) (module text)."""
    vx = nodes[m, 0] - px
    vy = nodes[m, 1] - py
    vz = nodes[m, 2] - pz
    d2 = vx * vx + vy * vy + vz * vz
    r = nodes[m, 3]
    r2 = r * r
    e_cos = 1.0
    r_cos = 1.0
    if d2 > r2:
        d = math.sqrt(d2)
        sin_u = r / d
        cos_u = math.sqrt(max(0.0, 1.0 - sin_u * sin_u))
        # Emitted: θ between the cone's axis and the direction from the centre to x.
        cos_t = -(vx * nodes[m, 4] + vy * nodes[m, 5] + vz * nodes[m, 6]) / d
        cos_o = nodes[m, 7]
        sin_o = nodes[m, 8]
        if cos_t < cos_o:
            sin_t = math.sqrt(max(0.0, 1.0 - cos_t * cos_t))
            c1 = cos_t * cos_o + sin_t * sin_o  # cos(θ − θ_o)
            if c1 < cos_u:
                s1 = sin_t * cos_o - cos_t * sin_o
                e_cos = c1 * cos_u + s1 * sin_u  # cos(θ − θ_o − θ_u)
        # Received: θ_i between n and the direction to the centre.
        cos_i = (vx * nx + vy * ny + vz * nz) / d
        if cos_i < cos_u:
            sin_i = math.sqrt(max(0.0, 1.0 - cos_i * cos_i))
            r_cos = cos_i * cos_u + sin_i * sin_u  # cos(θ_i − θ_u)
    # The box wholly behind x's plane: no window is above its horizon.
    hx = nodes[m, 10]
    hy = nodes[m, 11]
    hz = nodes[m, 12]
    if vx * nx + vy * ny + vz * nz + abs(nx) * hx + abs(ny) * hy + abs(nz) * hz <= 0.0:
        r_cos = 0.0
    # One normal (a facade's windows) and x wholly behind the box's windows: none faces it.
    ax = nodes[m, 4]
    ay = nodes[m, 5]
    az = nodes[m, 6]
    if nodes[m, 7] >= _ONE_NORMAL and abs(ax) * hx + abs(ay) * hy + abs(az) * hz <= vx * ax + vy * ay + vz * az:
        e_cos = 0.0
    return nodes[m, 9] * max(e_cos, COS_FLOOR) * max(r_cos, COS_FLOOR) / (d2 + r2)


@numba.njit(cache=True, nogil=True)
def _children_importance(nodes, left, px, py, pz, sx, sy, sz):
    """The importance of the children ``left`` and ``left + 1`` of a node from ``x`` (unit
    normal s), and their sum: what both the choice and the probability of a window walk by."""
    il = _node_importance(nodes, left, px, py, pz, sx, sy, sz)
    ir = _node_importance(nodes, left + 1, px, py, pz, sx, sy, sz)
    return il, ir, il + ir


@numba.njit(cache=True, nogil=True)
def _choose_window(win, nodes, links, e_win, px, py, pz, sx, sy, sz, u):
    """One window by the tree from ``x`` (unit normal s) and a uniform ``u``: returns (its tree
    row, the product of the children's probabilities on the way, its leaf's ẽ sum, its ẽ);
    its probability is ``p·e/total``. ``e_win`` scratch of at least :data:`LEAF_WINDOWS`."""
    m = 0
    p = 1.0
    while links[m, 2] >= 0:
        left = links[m, 2]
        il, ir, s = _children_importance(nodes, left, px, py, pz, sx, sy, sz)
        pl = il / s
        if u < pl:
            u = u / pl
            p *= pl
            m = left
        else:
            pr = ir / s
            u = (u - pl) / pr
            p *= pr
            m = left + 1
        u = min(u, _ONE_BELOW)
    first = links[m, 0]
    count = links[m, 1]
    total = _leaf_weights(win, first, count, e_win, px, py, pz, sx, sy, sz)
    uu = u * total
    pick = 0
    run = e_win[0]
    while run <= uu and pick < count - 1:
        pick += 1
        run += e_win[pick]
    return first + pick, p, total, e_win[pick]


@numba.njit(cache=True, nogil=True)
def _window_probability(win, nodes, links, e_win, w, px, py, pz, sx, sy, sz):
    """For tree row ``w``, what :func:`_choose_window` from ``x`` gives on choosing it: (the
    product of the children's probabilities on the way, its leaf's ẽ sum, its ẽ), with the same
    arithmetic."""
    m = 0
    p = 1.0
    while links[m, 2] >= 0:
        left = links[m, 2]
        il, ir, s = _children_importance(nodes, left, px, py, pz, sx, sy, sz)
        if w < links[left + 1, 0]:
            p *= il / s
            m = left
        else:
            p *= ir / s
            m = left + 1
    first = links[m, 0]
    total = _leaf_weights(win, first, links[m, 1], e_win, px, py, pz, sx, sy, sz)
    return p, total, e_win[w - first]


@numba.njit(cache=True, nogil=True)
def _probabilities(win, nodes, links, points, normals, out):
    e_win = np.empty(LEAF_WINDOWS)
    for i in range(points.shape[0]):
        for w in range(win.shape[0]):
            p, total, e = _window_probability(
                win, nodes, links, e_win, w, points[i, 0], points[i, 1], points[i, 2],
                normals[i, 0], normals[i, 1], normals[i, 2],
            )  # fmt: skip
            out[i, w] = p * e / total


@numba.njit(cache=True, nogil=True)
def _choices(win, nodes, links, point, normal, u, out_row, out_p):
    e_win = np.empty(LEAF_WINDOWS)
    for i in range(u.shape[0]):
        w, p, total, e = _choose_window(
            win, nodes, links, e_win, point[0], point[1], point[2], normal[0], normal[1], normal[2], u[i]
        )
        out_row[i] = w
        out_p[i] = p * e / total


def window_probabilities(tree: WindowTree, rect: np.ndarray, points: np.ndarray, normals: np.ndarray) -> np.ndarray:
    """(P, W) the probability of choosing each window (rows of ``rect``, in their own order) at
    each point (unit normals), by the walk of :func:`_window_probability` (for checks)."""
    win = np.ascontiguousarray(np.asarray(rect, np.float64)[tree.order])
    pts = np.ascontiguousarray(points, np.float64).reshape(-1, 3)
    out = np.zeros((pts.shape[0], win.shape[0]))
    if win.shape[0]:
        _probabilities(win, tree.nodes, tree.links, pts, np.ascontiguousarray(normals, np.float64).reshape(-1, 3), out)
    back = np.empty_like(out)
    back[:, tree.order] = out
    return back


def window_choices(
    tree: WindowTree, rect: np.ndarray, point: np.ndarray, normal: np.ndarray, u: np.ndarray
) -> tuple[np.ndarray, np.ndarray]:
    """The windows (rows of ``rect``) :func:`_choose_window` chooses from one point for each
    uniform number of ``u``, and the probability it returns with each (for checks)."""
    win = np.ascontiguousarray(np.asarray(rect, np.float64)[tree.order])
    uu = np.ascontiguousarray(u, np.float64).reshape(-1)
    row = np.zeros(uu.shape[0], np.int64)
    p = np.zeros(uu.shape[0])
    _choices(win, tree.nodes, tree.links, np.asarray(point, np.float64), np.asarray(normal, np.float64), uu, row, p)
    return tree.order[row], p
