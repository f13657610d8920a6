"""Direct lighting in absolute units, and the light buffers a view keeps.

For direct light the geometry does not depend on wavelength. At a surface point with reflectance
ρ(λ) lit by channel ``c`` (illuminance E_c in lx, lamp spectrum s_c(λ) normalised to
Km·Σ s_c V Δλ = 1):

    L(λ) = ρ(λ)/π · Σ_c E_c · s_c(λ)                      (Lambertian reflection)
    X, Y, Z, Y' = Σ_c (E_c/π) · R[ρ, s_c]                   R = Km·Σ ρ s_c x̄ȳz̄ Δλ (K'm·V' for Y')

so a view needs only, per camera sample, the value ``E_c/π`` (the luminance a perfect white
diffuser would have, cd/m²) for each channel and *which* reflectance it was. Visible luminous
openings are stored the same way with the luminance of the opening and the response of a white
(ρ = 1) surface. The colorimetric tables R (:mod:`render.colour.colorimetry`) are computed once on the
1 nm grid, so the spectral resolution costs nothing per pixel, and relighting (new lamps,
lumens or dimming per group) needs no ray at all.

Where the scene gives the carriageway an r-table (:mod:`render.light.rtable`) and the view is
one it applies to, the carriageway's samples keep ``E_c·q/ρ̄`` instead of ``E_c/π``, with q the
table's luminance coefficient for that luminaire's direction and the view's direction, and ρ̄
the material's equal-energy luminous reflectance: the response table still multiplies by ρ(λ),
so the buffers stay independent of the lamp and relighting stays a gather-multiply.

Point illuminance follows the inverse-square and cosine laws, E = I(C, γ)·cos θ / d², with
I from the luminaire's LM-63 table (:mod:`render.light.photometry`) in its oriented frame and a shadow
ray per contributing luminaire.

Luminaires whose *unshadowed* contribution at a point is below ``negligible_lx`` are skipped
there (no shadow ray): the error per skipped luminaire is below that bound by construction. A
uniform grid over the ground plane lists, per cell, the luminaires whose conservative bound
(largest intensity at or beyond the smallest possible γ, over the smallest possible distance) can
reach the bound in that cell; so the work per point grows with the luminaires *near* it, not
with all of them.

References
----------
- Inverse-square and cosine laws of illuminance from a point source, E = I·cos θ / d²
  (analytic; the photometric distance law).
- Lambertian reflection, L = ρ·E/π (analytic).
- Road reflection tables, L = q·E with q = r/cos³γ: CIE 140-2000 (:mod:`render.light.rtable`)
  **(from memory)**.
- Luminance of a luminous opening seen at angle θ from its normal, L = I / (A·cos θ): the
  definition of luminance (CIE S 017:2020, ILV) **(from memory)**.
- ANSI/IESNA LM-63-2002, IES LM-63-2019: the C-γ intensity tables (:mod:`render.light.photometry`)
  **(from memory)**.
- The culling bound and grid are our own construction (the bound never underestimates a
  contribution), no source.
"""

from __future__ import annotations

import math
from dataclasses import dataclass
from typing import TYPE_CHECKING

import numba
import numpy as np
from numba import prange

from render.geometry.mesh import TriangleMesh
from render.light.luminaires import Channel, LuminaireSet
from render.light.photometry import direction_to_c_gamma, intensity_lookup
from render.progress import progress_bar
from render.rays.bvh import (
    BVH,
    build_bvh,
    face_forward,
    geometric_normal,
    interpolate_normal,
    intersect_any,
    intersect_closest,
)

if TYPE_CHECKING:
    from render.light.rtable import RoadShading
    from render.rays.cameras import Camera

__all__ = [
    "CELL_M",
    "NEGLIGIBLE_LX",
    "SHADOW_CLEARANCE_M",
    "SURFACE_OFFSET_M",
    "CullGrid",
    "DirectPairs",
    "LightBuffers",
    "cast_view",
    "cull_grid",
    "direct_illuminance_lx",
    "direct_pairs",
    "emitter_triangles",
    "evaluate_light",
]

#: Default bound below which a luminaire's unshadowed contribution is skipped, lx. 1e-3 lx is
#: far below the lowest maintained-illuminance minimum of the residential lighting classes
#: (0.4 lx; EN 13201-2 P6, from memory) and below full-moon illuminance (~0.1-0.3 lx, common
#: practice, no source).
NEGLIGIBLE_LX = 1e-3
#: Shadow rays stop this far short of the luminous opening centre (plus half its diagonal), m,
#: so that the luminaire's own housing does not shadow its light.
SHADOW_CLEARANCE_M = 0.05
#: Offset of shadow-ray origins along the geometric normal, m.
SURFACE_OFFSET_M = 1e-4
#: Culling grid cell size, m.
CELL_M = 8.0


# ------------------------------------------------------------------------------------------
# Kernels
# ------------------------------------------------------------------------------------------


@numba.njit(cache=True, nogil=True)
def _intensity(lights_rot, c_grid, g_grid, n_c, n_g, cd, k, t, dx, dy, dz):
    """Intensity (cd) of luminaire k (table t) toward the world direction (dx, dy, dz)."""
    c, g = direction_to_c_gamma(lights_rot[k], dx, dy, dz)
    return intensity_lookup(c_grid[t, : n_c[t]], g_grid[t, : n_g[t]], cd[t, : n_c[t], : n_g[t]], c, g)


@numba.njit(cache=True, nogil=True)
def _cell_of(x, y, x0, y0, cell, nx, ny):
    ix = int((x - x0) / cell)
    iy = int((y - y0) / cell)
    ix = min(max(ix, 0), nx - 1)
    iy = min(max(iy, 0), ny - 1)
    return iy * nx + ix


@numba.njit(cache=True, nogil=True, parallel=True)
def _cell_lists(x0, y0, cell, nx, ny, z_lo, z_hi, pos, tilt_abs, table, scale, g_grid, n_g, beyond, eps, out_mask):
    """out_mask[cell, k] = luminaire k may give more than eps somewhere in the cell."""
    L = pos.shape[0]
    for ci in prange(nx * ny):
        ix = ci % nx
        iy = ci // nx
        ax = x0 + ix * cell
        ay = y0 + iy * cell
        for k in range(L):
            px = pos[k, 0]
            py = pos[k, 1]
            pz = pos[k, 2]
            rx = max(ax - px, 0.0, px - (ax + cell))
            ry = max(ay - py, 0.0, py - (ay + cell))
            r_min = math.sqrt(rx * rx + ry * ry)
            dz = max(z_lo - pz, 0.0, pz - z_hi)
            d2 = r_min * r_min + dz * dz
            if pz > z_lo:
                g_world = math.degrees(math.atan2(r_min, pz - z_lo))
            else:
                g_world = 90.0
            g_min = g_world - tilt_abs[k]
            t = table[k]
            j = 0
            for jj in range(n_g[t]):
                if g_grid[t, jj] <= g_min:
                    j = jj
            bound = scale[k] * beyond[t, j]
            if d2 > 0.0:
                bound = bound / d2
            else:
                bound = np.inf
            out_mask[ci, k] = bound >= eps


@numba.njit(cache=True, nogil=True, parallel=True)
def _candidates(
    points,
    normals,
    active,
    rot,
    pos,
    scale,
    table,
    c_grid,
    g_grid,
    n_c,
    n_g,
    cd,
    clearance,
    x0,
    y0,
    cell,
    nx,
    ny,
    cell_start,
    cell_items,
    eps,
    counts,
    out_lum,
    out_e,
    out_dir,
    out_tmax,
):
    """Per point, the luminaires whose unshadowed contribution reaches ``eps``: written to row
    ``i`` of the (N, K) outputs (K = the longest cell list), their number to ``counts[i]``."""
    N = points.shape[0]
    for i in prange(N):
        counts[i] = 0
        if not active[i]:
            continue
        px = points[i, 0]
        py = points[i, 1]
        pz = points[i, 2]
        nx_ = normals[i, 0]
        ny_ = normals[i, 1]
        nz_ = normals[i, 2]
        ci = _cell_of(px, py, x0, y0, cell, nx, ny)
        w = 0
        for q in range(cell_start[ci], cell_start[ci + 1]):
            k = cell_items[q]
            dx = px - pos[k, 0]
            dy = py - pos[k, 1]
            dz = pz - pos[k, 2]
            d2 = dx * dx + dy * dy + dz * dz
            if d2 <= 1e-12:
                continue
            d = math.sqrt(d2)
            cos_s = -(nx_ * dx + ny_ * dy + nz_ * dz) / d
            if cos_s <= 0.0:
                continue
            inten = _intensity(rot, c_grid, g_grid, n_c, n_g, cd, k, table[k], dx, dy, dz)
            e = scale[k] * inten * cos_s / d2
            if e < eps:
                continue
            out_lum[i, w] = k
            out_e[i, w] = e
            out_dir[i, w, 0] = -dx / d
            out_dir[i, w, 1] = -dy / d
            out_dir[i, w, 2] = -dz / d
            out_tmax[i, w] = max(d - clearance[k], 0.0)
            w += 1
        counts[i] = w


@numba.njit(cache=True, nogil=True)
def _scatter_add(out, rows, cols, values):
    for w in range(rows.shape[0]):
        out[rows[w], cols[w]] += values[w]


@numba.njit(cache=True, nogil=True, parallel=True)
def _emitter_values(directions, lum_of, rot, pos, scale, table, c_grid, g_grid, n_c, n_g, cd, area, channel, out):
    """Luminance (cd/m²) of visible luminous openings: I toward the eye / projected area."""
    for i in prange(directions.shape[0]):
        k = lum_of[i]
        if k < 0:
            continue
        # Direction from the luminaire toward the eye is -ray direction.
        dx = -directions[i, 0]
        dy = -directions[i, 1]
        dz = -directions[i, 2]
        # Opening normal: the luminaire's nadir, rotation @ (0, 0, -1).
        cos_v = -(rot[k, 0, 2] * dx + rot[k, 1, 2] * dy + rot[k, 2, 2] * dz)
        if cos_v <= 1e-3:
            continue
        inten = _intensity(rot, c_grid, g_grid, n_c, n_g, cd, k, table[k], dx, dy, dz)
        out[i, channel[k]] = scale[k] * inten / (area[k] * cos_v)


# ------------------------------------------------------------------------------------------
# Direct illuminance at points
# ------------------------------------------------------------------------------------------


@dataclass
class CullGrid:
    """Luminaires that can matter, per cell of a uniform grid over the ground plane.

    Cell ``(ix, iy)`` (index ``iy * nx + ix``) covers x in ``[x0 + ix·cell_m, x0 + (ix+1)·cell_m)``
    and likewise in y; its luminaires are ``cell_items[cell_start[i] : cell_start[i + 1]]``."""

    x0: float
    y0: float
    cell_m: float
    nx: int
    ny: int
    cell_start: np.ndarray
    cell_items: np.ndarray

    @property
    def mean_per_cell(self) -> float:
        """Mean number of listed luminaires per cell."""
        return float(self.cell_items.size) / max(self.nx * self.ny, 1)


def cull_grid(
    lights: LuminaireSet, points_m: np.ndarray, negligible_lx: float = NEGLIGIBLE_LX, cell_m: float = CELL_M
) -> CullGrid:
    """Per ground-plane cell over the points' extent, the luminaires that can matter there."""
    pts = np.asarray(points_m, np.float64).reshape(-1, 3)
    finite = np.all(np.isfinite(pts), axis=1)
    if not np.any(finite) or lights.n_luminaires == 0:
        return CullGrid(0.0, 0.0, cell_m, 1, 1, np.zeros(2, np.int64), np.zeros(0, np.int64))
    lo = pts[finite].min(axis=0)
    hi = pts[finite].max(axis=0)
    nx = max(1, int(math.ceil((hi[0] - lo[0]) / cell_m + 1e-9)))
    ny = max(1, int(math.ceil((hi[1] - lo[1]) / cell_m + 1e-9)))
    mask = np.zeros((nx * ny, lights.n_luminaires), np.bool_)
    # Angle between each luminaire's own z axis and world z (its tilt), degrees.
    tilt = np.degrees(np.arccos(np.clip(lights.rotation[:, 2, 2], -1.0, 1.0)))
    _cell_lists(
        float(lo[0]),
        float(lo[1]),
        float(cell_m),
        nx,
        ny,
        float(lo[2]),
        float(hi[2]),
        lights.position_m,
        tilt,
        lights.table,
        lights.scale,
        lights.g_grid,
        lights.n_g,
        lights.i_max_beyond,
        float(negligible_lx),
        mask,
    )
    counts = mask.sum(axis=1)
    start = np.concatenate([[0], np.cumsum(counts)]).astype(np.int64)
    items = np.nonzero(mask)[1].astype(np.int64)
    return CullGrid(float(lo[0]), float(lo[1]), float(cell_m), nx, ny, start, items)


def _clearance(lights: LuminaireSet) -> np.ndarray:
    return SHADOW_CLEARANCE_M + 0.5 * np.hypot(lights.opening_m[:, 0], lights.opening_m[:, 1])


@dataclass
class DirectPairs:
    """Unshadowed luminaire contributions above the bound at each point, and which are shadowed.

    ``point`` (M,) index of the receiving point, ``lum`` (M,) luminaire, ``e_lx`` (M,) its
    illuminance at full output (maintenance factor applied), ``direction`` (M, 3) unit vector
    from the point toward the luminaire, ``blocked`` (M,) shadowed."""

    point: np.ndarray
    lum: np.ndarray
    e_lx: np.ndarray
    direction: np.ndarray
    blocked: np.ndarray


def direct_pairs(
    points_m: np.ndarray,
    normals: np.ndarray,
    lights: LuminaireSet,
    bvh: BVH | None,
    *,
    active: np.ndarray | None = None,
    negligible_lx: float = NEGLIGIBLE_LX,
    grid: CullGrid | None = None,
    offset_normals: np.ndarray | None = None,
    shadow_offset_m: float = SURFACE_OFFSET_M,
) -> DirectPairs:
    """The (point, luminaire) pairs of :func:`direct_illuminance_lx`, before summing."""
    pts = np.ascontiguousarray(points_m, np.float64).reshape(-1, 3)
    nrm = np.ascontiguousarray(normals, np.float64).reshape(-1, 3)
    n = pts.shape[0]
    empty = DirectPairs(
        np.zeros(0, np.int64), np.zeros(0, np.int64), np.zeros(0), np.zeros((0, 3)), np.zeros(0, np.bool_)
    )
    if n == 0 or lights.n_luminaires == 0:
        return empty
    act = np.ones(n, np.bool_) if active is None else np.ascontiguousarray(active, np.bool_)
    act = act & np.all(np.isfinite(pts), axis=1)
    if grid is None:
        grid = cull_grid(lights, pts[act], negligible_lx)
    clearance = _clearance(lights)
    K = int(np.diff(grid.cell_start).max()) if grid.cell_items.size else 0
    if K == 0:
        return empty
    counts = np.zeros(n, np.int64)
    lum_k = np.zeros((n, K), np.int64)
    e_k = np.zeros((n, K))
    dir_k = np.zeros((n, K, 3))
    tmax_k = np.zeros((n, K))
    _candidates(
        pts,
        nrm,
        act,
        lights.rotation,
        lights.position_m,
        lights.scale,
        lights.table,
        lights.c_grid,
        lights.g_grid,
        lights.n_c,
        lights.n_g,
        lights.cd_table,
        clearance,
        grid.x0,
        grid.y0,
        grid.cell_m,
        grid.nx,
        grid.ny,
        grid.cell_start,
        grid.cell_items,
        float(negligible_lx),
        counts,
        lum_k,
        e_k,
        dir_k,
        tmax_k,
    )
    valid = np.arange(K)[None, :] < counts[:, None]
    point, slot = np.nonzero(valid)
    m = point.size
    if m == 0:
        return empty
    lum = lum_k[point, slot]
    e = e_k[point, slot]
    direction = dir_k[point, slot]
    tmax = tmax_k[point, slot]
    if bvh is not None and bvh.n_triangles:
        off = nrm if offset_normals is None else np.ascontiguousarray(offset_normals, np.float64).reshape(-1, 3)
        # Offset along the receiving side of the geometric normal.
        side = np.sign(np.einsum("ij,ij->i", off[point], direction))
        origins = pts[point] + (shadow_offset_m * side)[:, None] * off[point]
        # Trace luminaire by luminaire: consecutive shadow rays from neighbouring points toward
        # one luminaire are coherent, which the packet traversal rewards.
        order = np.argsort(lum, kind="stable")
        blocked = np.empty(m, np.bool_)
        blocked[order] = intersect_any(bvh, origins[order], direction[order], t_max=tmax[order], t_min=0.0)
    else:
        blocked = np.zeros(m, np.bool_)
    return DirectPairs(point, lum, e, direction, blocked)


def direct_illuminance_lx(
    points_m: np.ndarray,
    normals: np.ndarray,
    lights: LuminaireSet,
    bvh: BVH | None,
    *,
    active: np.ndarray | None = None,
    negligible_lx: float = NEGLIGIBLE_LX,
    grid: CullGrid | None = None,
    offset_normals: np.ndarray | None = None,
    shadow_offset_m: float = SURFACE_OFFSET_M,
) -> np.ndarray:
    """Direct illuminance (lx) per light channel at points on surfaces with the given normals.

    Parameters
    ----------
    points_m, normals
        (N, 3) positions (m) and unit normals of the receiving surface (the side that receives).
    lights
        From :func:`render.light.luminaires.luminaire_set`.
    bvh
        Occluders for shadow rays (None: no shadows).
    active
        (N,) bool, points to evaluate (others get 0).
    negligible_lx
        Skip a luminaire at a point when its unshadowed contribution is below this.
    offset_normals
        Normals to offset shadow-ray origins along (default ``normals``; use the geometric
        normal for rendered surfaces).
    shadow_offset_m
        How far along them shadow rays start (calculation points use a larger offset so that
        layers a few millimetres proud of a surface, such as road markings, do not shadow it).

    Returns
    -------
    (N, n_channels) float64 illuminance in lx at full output (channel dimming not applied;
    maintenance factor applied).
    """
    n = np.asarray(points_m).reshape(-1, 3).shape[0]
    out = np.zeros((n, lights.n_channels))
    pairs = direct_pairs(
        points_m,
        normals,
        lights,
        bvh,
        active=active,
        negligible_lx=negligible_lx,
        grid=grid,
        offset_normals=offset_normals,
        shadow_offset_m=shadow_offset_m,
    )
    if pairs.point.size:
        lit = ~pairs.blocked
        _scatter_add(out, pairs.point[lit], lights.channel[pairs.lum[lit]], pairs.e_lx[lit])
    return out


# ------------------------------------------------------------------------------------------
# Luminous openings as geometry
# ------------------------------------------------------------------------------------------


def emitter_triangles(lights: LuminaireSet, drop_m: float = 0.002) -> np.ndarray:
    """(2L, 3, 3) triangles of each luminous opening: a rectangle (length along C0, width along
    C90) ``drop_m`` below the opening centre along the nadir, facing the nadir."""
    tris = np.zeros((2 * lights.n_luminaires, 3, 3))
    for k in range(lights.n_luminaires):
        r = lights.rotation[k]
        ex, ey, nadir = r[:, 0], r[:, 1], -r[:, 2]
        c = lights.position_m[k] + drop_m * nadir
        a = 0.5 * lights.opening_m[k, 0] * ex
        b = 0.5 * lights.opening_m[k, 1] * ey
        p = [c - a - b, c + a - b, c + a + b, c - a + b]
        # Counter-clockwise seen from below (from the nadir side).
        tris[2 * k] = [p[0], p[2], p[1]]
        tris[2 * k + 1] = [p[0], p[3], p[2]]
    return tris


# ------------------------------------------------------------------------------------------
# Light buffers of a view
# ------------------------------------------------------------------------------------------


@dataclass
class LightBuffers:
    """What a view keeps so that it can be re-coloured and re-lit without casting camera rays.

    Samples are pixel-major (the ``spp`` samples of pixel ``p`` are ``p*spp ... p*spp+spp-1``).

    Attributes
    ----------
    width_px, height_px, spp
    response : (S,) int32 -- material index of the surface seen, ``emitter_response`` for a
        luminous opening, -1 for nothing (night sky).
    value_cd_m2 : (S, C) float32 -- per channel, E/π of the surface (cd/m², the luminance of a
        white diffuser there) or the opening's luminance, at full output.
    point_m, normal, geo_normal : (S, 3) float32 -- hit points and normals (for re-evaluation
        with other photometry and for later analyses).
    emitter : (S,) int32 -- luminaire index of a visible opening, else -1.
    direction : (S, 3) float32 -- camera ray directions.
    object_id : (S,) int32 -- object index of the surface seen (-1 none).
    material_names : names behind ``response``.
    channels : the light channels behind the second axis of ``value_cd_m2``.
    spec_cd_m2 : (S, C) float32 -- per channel, the luminance of the specular layer
        (:mod:`render.light.gloss`; spectrally neutral, white response), at full output.
    material_gloss : (M, 2) -- per material index, the specular layer's F0 and GGX α
        (F0 = 0: none).
    road : the r-table shading of the carriageway in this view
        (:class:`render.light.rtable.RoadShading`), or None: its samples keep E·q/ρ̄ per
        channel instead of E/π.
    """

    width_px: int
    height_px: int
    spp: int
    response: np.ndarray
    value_cd_m2: np.ndarray
    point_m: np.ndarray
    normal: np.ndarray
    geo_normal: np.ndarray
    emitter: np.ndarray
    direction: np.ndarray
    object_id: np.ndarray
    material_names: list[str]
    channels: list[Channel]
    spec_cd_m2: np.ndarray | None = None
    material_gloss: np.ndarray | None = None
    road: RoadShading | None = None

    @property
    def emitter_response(self) -> int:
        """The ``response`` value that marks a visible luminous opening."""
        return len(self.material_names)

    @property
    def n_samples(self) -> int:
        """Number of camera samples, S."""
        return int(self.response.shape[0])


def cast_view(
    mesh: TriangleMesh,
    bvh: BVH,
    lights: LuminaireSet,
    camera: Camera,
    spp: int,
    seed: int,
    *,
    tile_rows: int = 32,
    progress: bool = False,
    road: RoadShading | None = None,
) -> LightBuffers:
    """Primary rays of a view: hits against the scene and the luminous openings.

    ``road``: the view's r-table shading of the carriageway
    (:func:`render.light.rtable.view_road_shading`), kept in the buffers for every evaluation.
    Returns a :class:`LightBuffers` with zero ``value_cd_m2``; fill it with
    :func:`evaluate_light`."""
    from render.rays.cameras import camera_rays, tile_pixels

    W, H = camera.width_px, camera.height_px
    S = W * H * spp
    response = np.full(S, -1, np.int32)
    obj = np.full(S, -1, np.int32)
    emitter = np.full(S, -1, np.int32)
    point = np.full((S, 3), np.nan, np.float32)
    normal = np.zeros((S, 3), np.float32)
    geo = np.zeros((S, 3), np.float32)
    dirs = np.zeros((S, 3), np.float32)
    em_tris = emitter_triangles(lights)
    em_bvh = build_bvh(em_tris) if lights.n_luminaires else None
    n_mat = len(mesh.material_names)
    rows = progress_bar(range(0, H, tile_rows), "camera rays", quiet=not progress, unit="tile")
    k = np.arange(spp, dtype=np.int64)
    for y0 in rows:
        y1 = min(H, y0 + tile_rows)
        # 4 x 4 pixel blocks keep consecutive rays coherent for the packet traversal.
        pixels = tile_pixels(camera, 0, y0, W, y1, block_px=4)
        o, d, _ = camera_rays(camera, spp, seed, pixels)
        sl = (pixels[:, None] * spp + k[None, :]).reshape(-1)
        hits = intersect_closest(bvh, o, d)
        hit = hits.hit
        if em_bvh is not None:
            eh = intersect_closest(em_bvh, o, d, t_max=hits.t)
            is_em = eh.hit
        else:
            is_em = np.zeros(hit.shape, bool)
        surf = hit & ~is_em
        r = np.full(hit.shape, -1, np.int32)
        r[surf] = mesh.material_id[hits.triangle[surf]]
        r[is_em] = n_mat
        response[sl] = r
        ob = np.full(hit.shape, -1, np.int32)
        ob[surf] = mesh.object_id[hits.triangle[surf]]
        obj[sl] = ob
        em = np.full(hit.shape, -1, np.int32)
        if em_bvh is not None:
            em[is_em] = eh.triangle[is_em] // 2
        emitter[sl] = em
        p = hits.points_m(o, d)
        p[~surf] = np.nan
        point[sl] = p
        ng = face_forward(geometric_normal(mesh.triangles_m, hits), d)
        ns = face_forward(interpolate_normal(mesh.normals, hits), d)
        # Shading normals that face away from the eye are replaced by the geometric normal.
        bad = np.einsum("ij,ij->i", ns, d) > 0
        ns[bad] = ng[bad]
        normal[sl] = ns
        geo[sl] = ng
        dirs[sl] = d
    gloss = getattr(mesh, "material_gloss", None)
    if gloss is None:
        gloss = np.tile([0.0, 1.0], (len(mesh.material_names), 1))
    return LightBuffers(
        W,
        H,
        spp,
        response,
        np.zeros((S, lights.n_channels), np.float32),
        point,
        normal,
        geo,
        emitter,
        dirs,
        obj,
        list(mesh.material_names),
        list(lights.channels),
        np.zeros((S, lights.n_channels), np.float32),
        np.asarray(gloss, np.float64),
        road,
    )


def evaluate_light(
    buffers: LightBuffers,
    lights: LuminaireSet,
    bvh: BVH,
    *,
    negligible_lx: float = NEGLIGIBLE_LX,
    chunk: int = 1 << 18,
    progress: bool = False,
) -> LightBuffers:
    """Fill ``buffers.value_cd_m2`` from ``lights`` (direct light with shadows, and visible
    openings). Returns the same object (values replaced)."""
    buffers.channels = list(lights.channels)
    S = buffers.n_samples
    value = np.zeros((S, lights.n_channels), np.float32)
    surf = buffers.response >= 0
    surf &= buffers.response != buffers.emitter_response
    pts_all = buffers.point_m.astype(np.float64)
    grid = cull_grid(lights, pts_all[surf], negligible_lx) if np.any(surf) else None
    if grid is not None and grid.cell_items.size:
        # Keep the per-point candidate arrays (chunk × longest cell list) to a few million entries.
        chunk = max(4096, min(chunk, (1 << 22) // max(int(np.diff(grid.cell_start).max()), 1)))
    starts = progress_bar(range(0, S, chunk), "direct light", quiet=not progress, unit="chunk")
    gloss = (
        buffers.material_gloss
        if buffers.material_gloss is not None
        else np.tile([0.0, 1.0], (len(buffers.material_names), 1))
    )
    spec = np.zeros((S, lights.n_channels), np.float32)
    for s0 in starts:
        sl = slice(s0, min(S, s0 + chunk))
        act = surf[sl]
        if not np.any(act):
            continue
        nrm = buffers.normal[sl].astype(np.float64)
        pairs = direct_pairs(
            pts_all[sl],
            nrm,
            lights,
            bvh,
            active=act,
            negligible_lx=negligible_lx,
            grid=grid,
            offset_normals=buffers.geo_normal[sl].astype(np.float64),
        )
        if not pairs.point.size:
            continue
        lit = ~pairs.blocked
        p, k, e, l = pairs.point[lit], pairs.lum[lit], pairs.e_lx[lit], pairs.direction[lit]
        mat = buffers.response[sl][p]
        f0 = gloss[mat, 0]
        glossy = f0 > 0.0
        diffuse = e.copy()
        chunk_spec = np.zeros((sl.stop - sl.start, lights.n_channels))
        if np.any(glossy):
            from render.light.gloss import schlick_fresnel, specular_brdf

            g = np.nonzero(glossy)[0]
            n_g = nrm[p[g]]
            cos_i = np.einsum("ij,ij->i", n_g, l[g])
            # The base receives what the interface transmits.
            diffuse[g] = e[g] * (1.0 - schlick_fresnel(cos_i, f0[g]))
            to_eye = -buffers.direction[sl][p[g]].astype(np.float64)
            f_s = specular_brdf(n_g, l[g], to_eye, f0[g], gloss[mat[g], 1])
            _scatter_add(chunk_spec, p[g], lights.channel[k[g]], e[g] * f_s)
        if buffers.road is not None:
            # The carriageway's base reflects by the r-table, L = q·E (render.light.rtable):
            # its value becomes E·q/ρ̄ in place of E/π; a water film's layer stays on top.
            road = np.nonzero(buffers.object_id[sl][p] == buffers.road.object_id)[0]
            if road.size:
                from render.light.rtable import road_q_sr

                q = road_q_sr(
                    buffers.road.table,
                    buffers.direction[sl][p[road]].astype(np.float64),
                    l[road],
                    buffers.road.q_scale,
                )
                diffuse[road] *= buffers.road.diffuse_factor(q)
        chunk_e = np.zeros((sl.stop - sl.start, lights.n_channels))
        _scatter_add(chunk_e, p, lights.channel[k], diffuse)
        value[sl] = (chunk_e / math.pi).astype(np.float32)
        spec[sl] = chunk_spec.astype(np.float32)
    buffers.spec_cd_m2 = spec
    em = buffers.emitter
    if lights.n_luminaires and np.any(em >= 0):
        area = lights.opening_m[:, 0] * lights.opening_m[:, 1]
        out = np.zeros((S, lights.n_channels))
        _emitter_values(
            buffers.direction.astype(np.float64),
            em,
            lights.rotation,
            lights.position_m,
            lights.scale,
            lights.table,
            lights.c_grid,
            lights.g_grid,
            lights.n_c,
            lights.n_g,
            lights.cd_table,
            area,
            lights.channel,
            out,
        )
        sel = em >= 0
        value[sel] = out[sel].astype(np.float32)
    buffers.value_cd_m2 = value
    return buffers
