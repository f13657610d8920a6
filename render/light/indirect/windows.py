"""Lit windows and shop fronts: Lambertian area emitters chosen by a seeded share.

The houses' and shops' window panels (slot ``window`` of :mod:`render.geometry.objects`, kept
by the mesh builder as ``mesh.window_parts``) are thin boxes standing proud of the facade; the
face away from the building (the one farther from the centroid of its object's triangles) is
the window's rectangle. A share of them is lit: ``round(fraction · n)`` panels of each kind
(houses' windows; shops' windows -- the shop front's own window, on the ground floor of a
shop, and the windows above it alike), chosen by a permutation seeded with ``window_seed`` and
the kind, so the same scene and seed light the same windows.

**Frontages and windows of their own** (``[[night.frontages]]``,
:class:`render.scene.model.FrontageWindows`): a named frontage (or house or shop object) may
replace the scene-wide share and luminance for its own windows, and name windows (numbered
from 1 in the order its fronts are built) lit, dark or of a luminance of their own. Its share
is ``round(fraction · n)`` of its windows not named, chosen by a permutation seeded with
``window_seed`` and its object; other frontages keep exactly the windows they light without
it. Its lamp may be any lamp: **each distinct window lamp is a window channel of its own**
(:attr:`render.scene.model.NightLight.window_lamps`: the houses' ``window_lamp`` and the
shops' ``shop_window_lamp`` first, then each further lamp a frontage names, in the order of
first naming, at most :data:`render.limits.MAX_WINDOW_LAMPS`), an ambient channel a view keeps resolved
(:mod:`render.light.indirect.view`, 32 bytes per pixel); windows of one lamp share its channel. The
kernel takes any number of window channels (``kind`` is the channel).

**What relights by a multiply.** Each window channel is stored per unit of its level: the
scene-wide luminance of its lamp's kind (``window_luminance_cd_m2`` or
``shop_window_luminance_cd_m2``) for the two scene-wide lamps, the ``luminance_cd_m2`` of the
first frontage naming it for a further lamp; a window of another luminance is an emitter of
weight ``L_w / level`` (column 13 of the kernel's rows), in its light and in the choice of
window alike. So a new level scales every window of that lamp at once -- the frontages' and
windows' own luminances keep their ratio to it. A new lamp for a window channel is a new
response table at calculation points (no ray); a view keeps the channel resolved, so there it
traces again. Changing one frontage's or window's luminance relative to the others
of its lamp, which windows are lit, or which lamp a frontage takes, traces again.

A lit window is a Lambertian emitter of luminance ``L`` (cd/m²) with a lamp's spectrum. Its
light reaches a surface point ``x`` by next-event estimation
(:mod:`render.light.indirect.paths`): one window chosen by the light tree over the lit windows
(:mod:`render.light.indirect.window_tree`, O(log n) per vertex): down from the root by the
nodes' importance bounds, then among a leaf's few windows with probability proportional to an
approximate unshadowed illuminance from its centre,

    ẽ_w = A_w · max(cos θ_x, 0.02) · max(cos θ_w, 0.02) / (d² + A_w)

(the floors, there and in the nodes' bounds, keep every window's probability ``p_w`` above
zero, so the estimate stays unbiased where the centre is out of sight but part of the window
is not; with at most eight lit windows the tree is one leaf and ``p_w = ẽ_w / Σ ẽ``), a point
``y`` uniform on its rectangle, and one shadow ray; the estimate of the white-diffuser
luminance per unit window luminance is

    E/(π·L) = cos θ_x · cos θ_y · A_w / (π · |x − y|² · p_w)

(times the window's weight ``L_w / level``, which multiplies ẽ_w and the nodes' power too: a
window is chosen by its approximate illuminance times its luminance, its power's share at the
point).

A bounce ray that meets a lit window finds the glass (it reflects as any surface). From a
vertex without a specular layer it adds no emission: window light arrives by these
connections only, so nothing is counted twice. From a vertex with a layer (a wet road, where
a nearly smooth lobe makes a uniform point on the window a poor guess) the direction drawn
from the layer adds the window's luminance too, and the two strategies are weighted by the
power heuristic (multiple importance sampling); :func:`window_triangles` tells the kernel
which triangles are a lit window's rectangle. The camera's own view of a lit window
shows its luminance with its lamp's spectrum (white response), like a luminous opening.

References
----------
- Configuration factor of a differential area to a rectangle and E = π·L·F for a Lambertian
  emitter: J. R. Howell, *A Catalog of Radiation Heat Transfer Configuration Factors*
  **(from memory)**; the area-sampling estimator: Pharr, Jakob, Humphreys, *Physically Based
  Rendering*, 3rd ed., ch. 14 (area lights) **(from memory)**.
- E. Veach, L. J. Guibas, "Optimally combining sampling techniques for Monte Carlo
  rendering", SIGGRAPH 1995: multiple importance sampling, the power heuristic
  **(from memory)**.
- A. Conty Estevez, C. Kulla, "Importance Sampling of Many Lights with Adaptive Tree
  Splitting", HPG 2018: the light tree, through :mod:`render.light.indirect.window_tree`
  **(from memory)**.
- Typical luminances of lit windows and shop windows at night (the defaults, 10 and
  50 cd/m²): **from memory, no source**; give the site's.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from render.errors import input_error
from render.geometry.mesh import TriangleMesh, face_normals
from render.scene.model import NightLight
from render.scene.schema import shown

__all__ = [
    "HOUSE",
    "SHOP",
    "WINDOW_COLUMNS",
    "LitWindows",
    "lit_windows",
    "window_panels",
    "window_seen_shares",
    "window_triangles",
    "windows_seen",
]

#: Window kinds: houses' windows, shops' windows (their scene-wide lamps' channels among the
#: ambient ones; a further window lamp's channel is 2, 3, … in the order frontages name it).
HOUSE = 0
SHOP = 1
#: Columns of a window row in the kernel's array: corner (3), edges e1 (3), e2 (3), outward
#: unit normal (3), area (1), luminance relative to its channel's level (1).
WINDOW_COLUMNS = 14
# The relative luminance's column (rows given with 13 columns take 1).
RELATIVE = 13
# Triangles of a box panel (render.geometry.shapes.box).
_BOX_TRIANGLES = 12
# A camera hit lies on a window's rectangle when it is this close to its plane, m.
_ON_PLANE_M = 2e-3


@dataclass(frozen=True)
class LitWindows:
    """Rectangles of windows: ``rect`` (W, 14) corner, two edges, outward unit normal, area,
    luminance relative to the channel's level (rows of 13 columns are taken at 1); ``kind``
    (W,) the window channel, :data:`HOUSE` or :data:`SHOP` (the houses' or the shops' window
    lamp) or 2, 3, … (a further lamp, :attr:`render.scene.model.NightLight.window_lamps`);
    ``obj`` (W,) object index; ``panels`` the windows of each kind in the scene (lit or
    not)."""

    rect: np.ndarray
    kind: np.ndarray
    obj: np.ndarray
    panels: tuple[int, int] = (0, 0)

    def __post_init__(self) -> None:
        rect = np.asarray(self.rect, np.float64)
        if rect.ndim == 2 and rect.shape[1] == WINDOW_COLUMNS - 1:
            rect = np.column_stack([rect, np.ones(rect.shape[0])])
        object.__setattr__(self, "rect", rect)

    @property
    def n(self) -> int:
        return int(self.rect.shape[0])

    @property
    def relative(self) -> np.ndarray:
        """(W,) each window's luminance over its channel's level (the scene-wide luminance of
        its lamp's kind)."""
        return self.rect[:, RELATIVE]

    def subset(self, index: np.ndarray) -> LitWindows:
        return LitWindows(self.rect[index], self.kind[index], self.obj[index], self.panels)


def _empty() -> LitWindows:
    return LitWindows(np.zeros((0, WINDOW_COLUMNS)), np.zeros(0, np.int64), np.zeros(0, np.int64))


def _rectangle(tris: np.ndarray, centre: np.ndarray) -> np.ndarray | None:
    """The outward rectangle of a box panel's triangles (T, 3, 3): of its largest pair of
    opposite faces, the one farther from ``centre``; None if it is not a box."""
    n = face_normals(tris)
    area = 0.5 * np.linalg.norm(np.cross(tris[:, 1] - tris[:, 0], tris[:, 2] - tris[:, 0]), axis=1)
    big = n[np.argmax(area)]
    front = []
    for sign in (1.0, -1.0):
        sel = np.abs(n @ (sign * big) - 1.0) < 1e-6
        if sel.sum() < 2:
            return None
        front.append(sel)
    dist = [np.linalg.norm(tris[sel].reshape(-1, 3).mean(axis=0) - centre) for sel in front]
    sel = front[int(np.argmax(dist))]
    corners = np.unique(np.round(tris[sel].reshape(-1, 3), 9), axis=0)
    if corners.shape[0] != 4:
        return None
    p0 = corners[0]
    far = int(np.argmax(np.linalg.norm(corners - p0, axis=1)))
    e1, e2 = (corners[i] - p0 for i in range(1, 4) if i != far)
    normal = np.cross(e1, e2)
    a = float(np.linalg.norm(normal))
    if a <= 0.0:
        return None
    normal /= a
    if normal @ n[sel][0] < 0:
        normal = -normal
    return np.concatenate([p0, e1, e2, normal, [a, 1.0]])


def window_panels(mesh: TriangleMesh) -> LitWindows:
    """Every window panel of the mesh's houses and shops (``mesh.window_parts``) as a
    rectangle, with its kind."""
    parts = getattr(mesh, "window_parts", None) or []
    objects = getattr(mesh, "objects", None) or []
    rows, kinds, objs = [], [], []
    centres: dict[int, np.ndarray] = {}
    for first, count, obj in parts:
        if obj not in centres:
            centres[obj] = mesh.triangles_m[mesh.object_id == obj].reshape(-1, 3).mean(axis=0)
        kind_name = objects[obj].kind if obj < len(objects) else ""
        # A part may hold several panels (parts of one slot are merged): boxes of 12 triangles.
        for start in range(first, first + count - _BOX_TRIANGLES + 1, _BOX_TRIANGLES):
            r = _rectangle(mesh.triangles_m[start : start + _BOX_TRIANGLES], centres[obj])
            if r is None:
                continue
            rows.append(r)
            kinds.append(SHOP if "shop" in kind_name else HOUSE)
            objs.append(obj)
    if not rows:
        return _empty()
    kind = np.array(kinds, np.int64)
    return LitWindows(
        np.array(rows), kind, np.array(objs, np.int64), (int((kind == HOUSE).sum()), int((kind == SHOP).sum()))
    )


def lit_windows(mesh: TriangleMesh, night: NightLight) -> LitWindows:
    """The lit windows: ``round(fraction · n)`` of each kind's ``n`` panels, chosen by a
    permutation seeded with ``night.window_seed`` and the kind."""
    panels = window_panels(mesh)
    chosen = []
    for kind, fraction, level in (
        (HOUSE, night.window_lit_fraction, night.window_luminance_cd_m2),
        (SHOP, night.shop_window_lit_fraction, night.shop_window_luminance_cd_m2),
    ):
        index = np.flatnonzero(panels.kind == kind)
        k = int(round(fraction * index.size)) if level > 0.0 else 0
        if k:
            order = np.random.default_rng([int(night.window_seed), kind]).permutation(index.size)
            chosen.append(index[np.sort(order[:k])])
    if night.frontages:
        return _with_frontages(mesh, night, panels, chosen)
    if not chosen:
        return LitWindows(panels.rect[:0], panels.kind[:0], panels.obj[:0], panels.panels)
    return panels.subset(np.concatenate(chosen))


def _with_frontages(mesh: TriangleMesh, night: NightLight, panels: LitWindows, chosen: list) -> LitWindows:
    """The scene-wide choice with each ``[[night.frontages]]`` entry's windows replaced by its
    own: its share of the windows it does not number (``round(fraction · n)``, a permutation
    seeded with ``window_seed`` and the frontage's object), its ``lit`` and ``dark`` windows,
    and those of a luminance of their own; each lit window's luminance over its channel's
    level in the relative column. Other frontages keep the windows they have without it."""
    lum = np.zeros(panels.n)
    if chosen:
        index = np.concatenate(chosen)
        lum[index] = np.where(
            panels.kind[index] == HOUSE, night.window_luminance_cd_m2, night.shop_window_luminance_cd_m2
        )
    kind = panels.kind.copy()
    levels = np.asarray(night.window_levels, np.float64)
    names = [getattr(o, "name", None) for o in (getattr(mesh, "objects", None) or [])]
    for f in night.frontages:
        objs = [i for i, name in enumerate(names) if name == f.name]
        idx = np.flatnonzero(np.isin(panels.obj, objs))
        n = idx.size
        for key, numbers in (
            ("lit", f.lit),
            ("dark", f.dark),
            ("window_luminance_cd_m2", [k for k, _ in f.window_luminance_cd_m2]),
        ):
            beyond = [k for k in numbers if k > n]
            if beyond:
                raise input_error(
                    f.source or "scene",
                    f"{f.where}.{key}",
                    f"window {beyond[0]} of {shown(f.name)}, which has {n} window{'s' if n != 1 else ''} (numbered from 1 "
                    "in the order its fronts are built)",
                )
        own = np.full(n, np.nan)
        for k, level in f.window_luminance_cd_m2:
            own[k - 1] = level
        named = ~np.isnan(own)
        named[[k - 1 for k in f.lit + f.dark]] = True
        free = np.flatnonzero(~named)
        mine = np.zeros(n)
        k = int(round(f.lit_fraction * free.size)) if f.luminance_cd_m2 > 0.0 else 0
        if k:
            order = np.random.default_rng([int(night.window_seed), 2, int(min(objs))]).permutation(free.size)
            mine[free[order[:k]]] = f.luminance_cd_m2
        mine[[k_ - 1 for k_ in f.lit]] = f.luminance_cd_m2
        mine[[k_ - 1 for k_ in f.dark]] = 0.0
        mine = np.where(np.isnan(own), mine, own)
        lum[idx] = mine
        kind[idx] = f.channel
    index = np.flatnonzero(lum > 0.0)
    rect = panels.rect[index].copy()
    rect[:, RELATIVE] = lum[index] / levels[kind[index]]
    return LitWindows(rect, kind[index], panels.obj[index], panels.panels)


def windows_seen(windows: LitWindows, point: np.ndarray, direction: np.ndarray, object_id: np.ndarray) -> np.ndarray:
    """(n,) the kind of lit window each camera sample sees (its hit on the window's outward
    rectangle, seen from in front), -1 for none."""
    row = _rows_seen(windows, point, direction, object_id)
    return np.where(row >= 0, windows.kind[np.maximum(row, 0)] if windows.n else -1, -1)


def window_seen_shares(
    windows: LitWindows,
    point: np.ndarray,
    direction: np.ndarray,
    object_id: np.ndarray,
    spp: int,
    channels: int,
) -> np.ndarray:
    """(n / spp, ``channels``) per pixel of ``spp`` camera samples, the mean over its samples of
    the luminance relative to its channel's level of the lit window each sees, for each window
    channel (the share of samples seeing one where every window is at its channel's level)."""
    row = _rows_seen(windows, point, direction, object_id)
    out = np.zeros((point.shape[0] // spp, channels))
    if windows.n == 0:
        return out
    safe = np.maximum(row, 0)
    kind = np.where(row >= 0, windows.kind[safe], -1)
    rel = windows.relative[safe]
    for q in range(channels):
        out[:, q] = np.where(kind == q, rel, 0.0).reshape(-1, spp).mean(axis=1)
    return out


def _rectangle_coordinates(
    rect: np.ndarray, points: np.ndarray
) -> tuple[np.ndarray, np.ndarray, np.ndarray, np.ndarray]:
    """``points`` (..., 3) in the frame of a window row ``rect``: (u, v) along its two edges (0..1
    on the rectangle), h the height above its plane along its normal, and the normal."""
    rel = points - rect[0:3]
    e1, e2, n = rect[3:6], rect[6:9], rect[9:12]
    return rel @ e1 / (e1 @ e1), rel @ e2 / (e2 @ e2), rel @ n, n


def _rows_seen(windows: LitWindows, point: np.ndarray, direction: np.ndarray, object_id: np.ndarray) -> np.ndarray:
    """(n,) the row of the lit window each camera sample sees, -1 for none."""
    out = np.full(point.shape[0], -1, np.int64)
    if windows.n == 0:
        return out
    for obj in np.unique(windows.obj):
        idx = np.flatnonzero(object_id == obj)
        if idx.size == 0:
            continue
        p = point[idx].astype(np.float64)
        dvec = direction[idx].astype(np.float64)
        for w in np.flatnonzero(windows.obj == obj):
            u, v, h, n = _rectangle_coordinates(windows.rect[w], p)
            on = (np.abs(h) < _ON_PLANE_M) & (u >= 0) & (u <= 1) & (v >= 0) & (v <= 1) & (dvec @ n < 0)
            out[idx[on]] = w
    return out


def window_triangles(windows: LitWindows, mesh: TriangleMesh) -> np.ndarray:
    """(F,) the lit window (row of ``windows``) each triangle of ``mesh`` is part of -- a
    triangle of the window's object whose vertices lie on its rectangle and whose normal faces
    its outward side -- or -1."""
    out = np.full(mesh.n_triangles, -1, np.int64)
    eps = 1e-6
    for obj in np.unique(windows.obj):
        idx = np.flatnonzero(mesh.object_id == obj)
        if idx.size == 0:
            continue
        tri = mesh.triangles_m[idx].astype(np.float64)
        facing = face_normals(tri)
        for w in np.flatnonzero(windows.obj == obj):
            u, v, h, n = _rectangle_coordinates(windows.rect[w], tri)
            on = (
                np.all(np.abs(h) < _ON_PLANE_M, axis=1)
                & np.all((u >= -eps) & (u <= 1 + eps) & (v >= -eps) & (v <= 1 + eps), axis=1)
                & (facing @ n > 0.5)
            )
            out[idx[on]] = w
    return out
