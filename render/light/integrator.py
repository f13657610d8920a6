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
with all of them. A point outside the grid's box tests every luminaire, so a grid built once
over the scene's bounds serves every view (:func:`scene_cull_grid`, kept with the luminaires).

**One pass per sample.** A view is rendered in tiles of camera samples: rays, closest hits,
what each hit sees (:func:`render.rays.bvh.shade_hits`), then one numba kernel per sample that
culls, looks up the intensity, traces the shadow ray, applies the gloss layer and the r-table
and adds the result into the sample's per-channel sums, with no per-(point, luminaire) arrays.
Hit points, normals and ray directions are kept as float32 and the light is evaluated at these
float32 values (in float64 arithmetic), so a view re-evaluated from its kept samples and a
view rendered afresh agree to the bit. Only what colorimetry and the analyses read stays per
sample (material, object, opening, and the light values); the hit geometry of a view is cast
again on request (:meth:`LightBuffers.sample_geometry`), so memory does not hold it.

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
import sys
import threading
from collections.abc import Callable
from dataclasses import dataclass
from typing import TYPE_CHECKING

import numba
import numpy as np

from render.geometry.mesh import TriangleMesh
from render.light.gloss import fresnel_one, specular_one
from render.light.luminaires import Channel, LuminaireSet
from render.light.rtable import road_q_one
from render.progress import progress_bar
from render.rays.bvh import BVH, build_bvh, intersect_any, intersect_closest, shade_hits
from render.rays.bvh.layout import STACK_SIZE, WIDE
from render.rays.bvh.packet import LANE_FIELDS, PACKET, PACKET_COS_ANY, lane_result, packet_load, packet_trace
from render.rays.bvh.single import any_one
from render.rays.bvh.slab import valid_ray
from render.threads import kernel_threads, run_split

if TYPE_CHECKING:
    from render.light.indirect import IndirectBuffers
    from render.light.rtable import RoadShading
    from render.rays.cameras import Camera

__all__ = [
    "CELL_M",
    "NEGLIGIBLE_LX",
    "SHADOW_CLEARANCE_M",
    "SURFACE_OFFSET_M",
    "TILE_SAMPLES",
    "CullGrid",
    "DirectPairs",
    "LightBuffers",
    "SampleGeometry",
    "ViewRays",
    "cast_view",
    "compile_light_kernels",
    "cull_grid",
    "direct_illuminance_lx",
    "direct_pairs",
    "emitter_triangles",
    "evaluate_light",
    "render_buffers",
    "scene_cull_grid",
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
#: Culling grid cell size, m (larger where the grid would otherwise exceed _MAX_CELLS).
CELL_M = 8.0
#: Camera samples per tile: what a render holds at a time besides its per-sample results.
TILE_SAMPLES = 1 << 17
# Most cells of a culling grid (its mask is cells × luminaires booleans).
_MAX_CELLS = 1 << 16
# Samples per block of the light kernel (scratch arrays are made once per block).
_BLOCK = 64
# Points (or cells, or samples) per work item of the other kernels here.
_ITEM = 256
# Margin around the scene's bounds for its culling grid, m.
_GRID_MARGIN_M = 0.01
# Relative margin of the light kernel's intensity bound: a bilinear interpolation of values up
# to M, rounded, exceeds M by a few units in the last place at most (2**-53 each).
_BOUND_MARGIN = 1e-9
# Bins of the cosine from the nadir over which the light kernel bounds a table's intensity.
_COS_BINS = 256
# How far each bin's range is widened, in cosine and in γ (degrees), before its bound is taken:
# far above the rounding of the kernel's cosine and of the lookup's γ (and its 1e-9°
# tolerance), so that no direction is given a bound below its intensity.
_COS_MARGIN = 1e-9
_GAMMA_MARGIN_DEG = 1e-6


# ------------------------------------------------------------------------------------------
# Kernels
# ------------------------------------------------------------------------------------------


@numba.njit(cache=True, nogil=True, _nrt=False)
def _cell(grid, t, n, inv_step, x):
    """``render.light.photometry.kernels._bracket`` on row t of a padded grid of n values, for
    x strictly inside it: the same cell (the one i with grid[i] <= x < grid[i + 1]) found from a
    guess on an even spacing and corrected, and the same fraction."""
    i = int((x - grid[t, 0]) * inv_step)
    i = min(max(i, 0), n - 2)
    while i > 0 and grid[t, i] > x:
        i -= 1
    while i < n - 2 and grid[t, i + 1] <= x:
        i += 1
    return i, (x - grid[t, i]) / (grid[t, i + 1] - grid[t, i])


@numba.njit(cache=True, nogil=True, _nrt=False)
def _intensity_fast(rot, c_grid, g_grid, n_c, n_g, inv_c, inv_g, cd, k, t, dx, dy, dz):
    """Intensity (cd) of luminaire k (table t) toward the world direction (dx, dy, dz): the value
    :func:`render.light.photometry.intensity_lookup` gives at the (C, γ) of
    :func:`render.light.photometry.direction_to_c_gamma`, to the bit, with the table cells found
    by :func:`_cell`. (C, γ) are computed from the rotation's elements directly (no 3 × 3 view
    per call); C is already in [0, 360), so the lookup's ``C % 360`` is left out.

    This and :func:`_cell` are compiled without numba's reference counting (``_nrt=False``;
    they take arrays but make none): a function that takes arrays otherwise counts a reference
    to each on entry and releases it on every way out, two atomic operations per array and
    call, which in the light kernel's pair loop took as much time as the rest of it."""
    lx = rot[k, 0, 0] * dx + rot[k, 1, 0] * dy + rot[k, 2, 0] * dz
    ly = rot[k, 0, 1] * dx + rot[k, 1, 1] * dy + rot[k, 2, 1] * dz
    lz = rot[k, 0, 2] * dx + rot[k, 1, 2] * dy + rot[k, 2, 2] * dz
    g = math.degrees(math.atan2(math.sqrt(lx * lx + ly * ly), -lz))
    ng = n_g[t]
    if not (g >= g_grid[t, 0] - 1e-9 and g <= g_grid[t, ng - 1] + 1e-9):
        return 0.0
    cc = math.degrees(math.atan2(ly, lx))
    if cc < 0.0:
        cc += 360.0
    if cc >= 360.0:
        cc -= 360.0
    nc = n_c[t]
    if cc <= c_grid[t, 0]:
        i, u = 0, 0.0
    elif cc >= c_grid[t, nc - 1]:
        i, u = nc - 2, 1.0
    else:
        i, u = _cell(c_grid, t, nc, inv_c[t], cc)
    if g <= g_grid[t, 0]:
        j, v = 0, 0.0
    elif g >= g_grid[t, ng - 1]:
        j, v = ng - 2, 1.0
    else:
        j, v = _cell(g_grid, t, ng, inv_g[t], g)
    a = (1.0 - v) * cd[t, i, j] + v * cd[t, i, j + 1]
    b = (1.0 - v) * cd[t, i + 1, j] + v * cd[t, i + 1, j + 1]
    return (1.0 - u) * a + u * b


@numba.njit(cache=True, nogil=True)
def _cell_of(x, y, z, box, cell, nx, ny):
    """Cell index of a point, or -1 outside the grid's box ``(x0, y0, z_lo, z_hi)`` (every
    luminaire is then a candidate)."""
    if not (z >= box[2] and z <= box[3]):
        return -1
    fx = (x - box[0]) / cell
    fy = (y - box[1]) / cell
    if not (fx >= 0.0 and fy >= 0.0 and fx < nx and fy < ny):
        return -1
    return int(fy) * nx + int(fx)


@numba.njit(cache=True, nogil=True)
def _cell_lists(
    x0, y0, cell, nx, ny, z_lo, z_hi, pos, tilt_abs, table, scale, g_grid, n_g, beyond, eps, out_mask, first, stride
):
    """out_mask[cell, k] = luminaire k may give more than eps somewhere in the cell; cells
    ``first, first + stride, ...`` (:func:`render.threads.run_split`)."""
    L = pos.shape[0]
    for ci in range(first, nx * ny, stride):
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


@numba.njit(cache=True, nogil=True, inline="always")
def _unshadowed(px, py, pz, nx_, ny_, nz_, k, lum):
    """Luminaire k's unshadowed illuminance (lx) at a point with unit normal n, and the
    distance to it; (0, 0) when it is behind the surface or at the point."""
    rot, pos, scale, table, c_grid, g_grid, n_c, n_g, inv_c, inv_g, cd, channel, clearance = lum
    dx = px - pos[k, 0]
    dy = py - pos[k, 1]
    dz = pz - pos[k, 2]
    d2 = dx * dx + dy * dy + dz * dz
    if d2 <= 1e-12:
        return 0.0, 0.0
    d = math.sqrt(d2)
    cos_s = -(nx_ * dx + ny_ * dy + nz_ * dz) / d
    if cos_s <= 0.0:
        return 0.0, 0.0
    inten = _intensity_fast(rot, c_grid, g_grid, n_c, n_g, inv_c, inv_g, cd, k, table[k], dx, dy, dz)
    return scale[k] * inten * cos_s / d2, d


@numba.njit(cache=True, nogil=True)
def _candidates(points, normals, active, lum, grid, eps, counts, out_lum, out_e, out_dir, out_tmax, first, stride):
    """Per point, the luminaires whose unshadowed contribution reaches ``eps``: written to row
    ``i`` of the (N, K) outputs, their number to ``counts[i]`` (``lum`` and ``grid`` as for
    :func:`_direct_light`). Points in items of :data:`_ITEM`, items ``first, first + stride,
    ...`` (:func:`render.threads.run_split`). A serial kernel, which compiles in a fraction of a
    ``prange`` loop's time. It serves the calculations' few thousand points, so it calls
    :func:`_unshadowed` (whose tuple unpacking numba counts references for) rather than
    writing its arithmetic out as :func:`_direct_light` does for the render's millions."""
    pos = lum[1]
    clearance = lum[12]
    box, cell, nx, ny, cell_start, cell_items = grid
    n = points.shape[0]
    for item in range(first, (n + _ITEM - 1) // _ITEM, stride):
        for i in range(item * _ITEM, min(n, (item + 1) * _ITEM)):
            counts[i] = 0
            if not active[i]:
                continue
            px = points[i, 0]
            py = points[i, 1]
            pz = points[i, 2]
            ci = _cell_of(px, py, pz, box, cell, nx, ny)
            q0 = cell_start[ci] if ci >= 0 else 0
            q1 = cell_start[ci + 1] if ci >= 0 else pos.shape[0]
            w = 0
            for q in range(q0, q1):
                k = cell_items[q] if ci >= 0 else q
                e, d = _unshadowed(px, py, pz, normals[i, 0], normals[i, 1], normals[i, 2], k, lum)
                if e < eps or d == 0.0:
                    continue
                out_lum[i, w] = k
                out_e[i, w] = e
                out_dir[i, w, 0] = -(px - pos[k, 0]) / d
                out_dir[i, w, 1] = -(py - pos[k, 1]) / d
                out_dir[i, w, 2] = -(pz - pos[k, 2]) / d
                out_tmax[i, w] = max(d - clearance[k], 0.0)
                w += 1
            counts[i] = w


@numba.njit(cache=True, nogil=True, error_model="numpy")
def _shadow_block(tree, n_pairs, lum_of, origin, direction, t_max, blocked, scratch, n_lanes, width):
    """Shadow rays of one block's (point, luminaire) pairs: the rays toward one luminaire are
    traced together, :data:`PACKET` at a time, through the binary tree when their directions
    agree (:func:`render.rays.bvh.packet.packet_trace`), else one by one through the wide tree;
    either way each ray's answer is the same (:mod:`render.rays.bvh.query`). ``n_lanes`` and
    ``width`` (= PACKET and WIDE, at run time) make the traversal kernels the same
    specialisations :func:`render.rays.bvh.query._trace_batch` compiles."""
    nb, ni, wb, wi, tv, ti, tl = tree
    lane, st_node, work, ro, rd, rt, members, done = scratch
    zero = np.int64(0)  # not the literal 0: a literal argument is a kernel of its own
    occlusion = np.bool_(True)
    for p in range(n_pairs):
        done[p] = False
    for first in range(n_pairs):
        if done[first]:
            continue
        k = lum_of[first]
        p = first
        while p < n_pairs:
            # Gather the next packet of pairs toward luminaire k.
            n = 0
            while p < n_pairs and n < PACKET:
                if not done[p] and lum_of[p] == k:
                    for c in range(3):
                        ro[n, c] = origin[p, c]
                        rd[n, c] = direction[p, c]
                    rt[n] = t_max[p]
                    members[n] = p
                    done[p] = True
                    n += 1
                p += 1
            if n == 0:
                break
            coherent = False
            axes = (0, 0, 0)
            if n > 1:
                coherent, axes = packet_load(lane, ro, rd, rt, zero, n, PACKET_COS_ANY)
            if coherent:
                packet_trace(nb, ni, tv, ti, lane, n_lanes, 0.0, axes, st_node, occlusion)
                for r in range(n):
                    blocked[members[r]] = lane_result(lane, r)[1] > 0
            else:
                for r in range(n):
                    blocked[members[r]] = valid_ray(ro, rd, r) and any_one(
                        wb, wi, tv, ro[r], rd[r], 0.0, rt[r], st_node, work, width, tl
                    )


@numba.njit(cache=True, nogil=True, error_model="numpy")
def _direct_light(
    points,
    normals,
    offset_normals,
    view_dirs,
    material,
    obj,
    active,
    lum,
    bounds,
    grid,
    tree,
    wide_stack,
    shadows,
    shadow_offset,
    eps,
    gloss,
    road,
    road_object,
    road_scale,
    road_factor,
    divisor,
    out_value,
    out_spec,
    n_lanes,
    width,
    first,
    stride,
):
    """Direct light at N points, one pass per block of :data:`_BLOCK` points: culling per
    (point, luminaire), the block's shadow rays (:func:`_shadow_block`), then per point the
    intensity of the pairs not shadowed, the gloss layer and the r-table, summed per channel.
    Only the block's pairs are held. Blocks ``first, first + stride, ...``
    (:func:`render.threads.run_split`).

    ``lum`` = the luminaire arrays (rotation, position, scale, table, C and γ grids and their
    lengths, candela tables, channel, shadow clearance); ``bounds`` = the intensity bounds of
    :func:`_luminaire_bounds`; ``grid`` = (box, cell size, nx, ny, cell_start, cell_items) of a
    :class:`CullGrid`; ``tree`` = the BVH's binary nodes, their int32 view, the wide nodes, their
    int32 view, triangle vertices and triangle index. ``out_value[i, c]`` gets the channel's sum
    of the diffuse part over ``divisor`` (π: the white diffuser's luminance; 1: illuminance),
    ``out_spec[i, c]`` the specular layer's luminance (when ``out_spec`` has rows). The sums run
    over the luminaires in index order, in float64. ``n_lanes`` and ``width`` as for
    :func:`_shadow_block`.

    A serial kernel (it compiles in about half the time of the same loop as a ``prange``
    kernel, whose body numba types and optimises twice). Its loops over points and pairs make
    no array variables and call no function that takes arrays with reference counting (the
    tuples are unpacked once, the lookup is :func:`_intensity_fast`): numba counts a reference
    to an array each time one is bound to a new name or passed to a function, an atomic
    operation, and in the pair loop those took 40 % of the serial kernel's time (measured),
    which a ``prange`` body largely escapes. The scratch arrays are made once per call and
    grown when a block needs more room."""
    rot, pos, scale, table, c_grid, g_grid, n_c, n_g, inv_c, inv_g, cd, channel, clearance = lum
    i_bound, bins_per_cos = bounds
    last_bin = i_bound.shape[1] - 1
    box, cell, nx, ny, cell_start, cell_items = grid
    road_beta, road_tan, road_r = road
    n = points.shape[0]
    n_lum = pos.shape[0]
    n_ch = out_value.shape[1]
    n_gloss = gloss.shape[0]
    with_spec = out_spec.shape[0] > 0
    n_blocks = (n + _BLOCK - 1) // _BLOCK
    # Room for a block's candidates (each point's cell list, or every luminaire); grown below.
    size = np.int64(_BLOCK * min(n_lum, 16))
    count = np.zeros(_BLOCK, np.int64)
    lum_of = np.empty(size, np.int64)
    origin = np.empty((size, 3))
    direction = np.empty((size, 3))
    t_max = np.empty(size)
    blocked = np.zeros(size, np.bool_)
    done = np.empty(size, np.bool_)
    lane = np.empty(LANE_FIELDS * PACKET)
    st_node = np.empty(max(STACK_SIZE, wide_stack), np.int64)
    work = np.empty(2 * WIDE)
    ro = np.empty((PACKET, 3))
    rd = np.empty((PACKET, 3))
    rt = np.empty(PACKET)
    members = np.empty(PACKET, np.int64)
    acc = np.zeros(n_ch)
    acc_s = np.zeros(n_ch)
    for b in range(first, n_blocks, stride):
        i0 = b * _BLOCK
        i1 = min(n, i0 + _BLOCK)
        cap = np.int64(0)
        for i in range(i0, i1):
            if active[i]:
                ci = _cell_of(points[i, 0], points[i, 1], points[i, 2], box, cell, nx, ny)
                cap += cell_start[ci + 1] - cell_start[ci] if ci >= 0 else n_lum
        if cap > size:
            size = max(cap, 2 * size)
            lum_of = np.empty(size, np.int64)
            origin = np.empty((size, 3))
            direction = np.empty((size, 3))
            t_max = np.empty(size)
            blocked = np.zeros(size, np.bool_)
            done = np.empty(size, np.bool_)
        # Candidates: pairs whose unshadowed contribution may reach eps, by a bound that never
        # underestimates it (w an int64 from the start: with the literal 0, type inference would
        # also compile _shadow_block for 0 pairs). The intensity itself is looked up after the
        # shadow rays, for the pairs that are not shadowed only.
        w = np.int64(0)
        for i in range(i0, i1):
            count[i - i0] = 0
            px = points[i, 0]
            py = points[i, 1]
            pz = points[i, 2]
            if not (active[i] and np.isfinite(px) and np.isfinite(py) and np.isfinite(pz)):
                continue
            snx = normals[i, 0]
            sny = normals[i, 1]
            snz = normals[i, 2]
            # Shadow-ray origins are offset along the receiving side of the geometric normal.
            gx = offset_normals[i, 0]
            gy = offset_normals[i, 1]
            gz = offset_normals[i, 2]
            ci = _cell_of(px, py, pz, box, cell, nx, ny)
            q0 = cell_start[ci] if ci >= 0 else 0
            q1 = cell_start[ci + 1] if ci >= 0 else n_lum
            start = w
            for q in range(q0, q1):
                k = cell_items[q] if ci >= 0 else q
                # As _unshadowed, up to the intensity: behind the surface or at the point, none.
                dx = px - pos[k, 0]
                dy = py - pos[k, 1]
                dz = pz - pos[k, 2]
                d2 = dx * dx + dy * dy + dz * dz
                if d2 <= 1e-12:
                    continue
                d = math.sqrt(d2)
                cos_s = -(snx * dx + sny * dy + snz * dz) / d
                if cos_s <= 0.0:
                    continue
                if eps > 0.0:
                    # Surely below eps (or outside the table's γ range: a bound of 0).
                    down = -(rot[k, 0, 2] * dx + rot[k, 1, 2] * dy + rot[k, 2, 2] * dz) / d
                    bin_ = min(max(int((down + 1.0) * bins_per_cos), 0), last_bin)
                    if scale[k] * i_bound[table[k], bin_] * cos_s / d2 < eps:
                        continue
                lx = -(px - pos[k, 0]) / d
                ly = -(py - pos[k, 1]) / d
                lz = -(pz - pos[k, 2]) / d
                step = shadow_offset * np.sign(gx * lx + gy * ly + gz * lz)
                origin[w, 0] = px + step * gx
                origin[w, 1] = py + step * gy
                origin[w, 2] = pz + step * gz
                direction[w, 0] = lx
                direction[w, 1] = ly
                direction[w, 2] = lz
                t_max[w] = max(d - clearance[k], 0.0)
                lum_of[w] = k
                blocked[w] = False
                w += 1
            count[i - i0] = w - start
        if shadows:
            scratch = (lane, st_node, work, ro, rd, rt, members, done)
            _shadow_block(tree, w, lum_of, origin, direction, t_max, blocked, scratch, n_lanes, width)
        # Sums per point, in candidate (luminaire index) order; the illuminance as _unshadowed
        # computes it.
        w = 0
        for i in range(i0, i1):
            m = material[i]
            f0 = gloss[m, 0] if m >= 0 and m < n_gloss else 0.0
            on_road = road_object >= 0 and obj[i] == road_object
            for c in range(n_ch):
                acc[c] = 0.0
                acc_s[c] = 0.0
            px = points[i, 0]
            py = points[i, 1]
            pz = points[i, 2]
            snx = normals[i, 0]
            sny = normals[i, 1]
            snz = normals[i, 2]
            for _ in range(count[i - i0]):
                if blocked[w]:
                    w += 1
                    continue
                k = lum_of[w]
                dx = px - pos[k, 0]
                dy = py - pos[k, 1]
                dz = pz - pos[k, 2]
                d2 = dx * dx + dy * dy + dz * dz
                cos_s = -(snx * dx + sny * dy + snz * dz) / math.sqrt(d2)
                inten = _intensity_fast(rot, c_grid, g_grid, n_c, n_g, inv_c, inv_g, cd, k, table[k], dx, dy, dz)
                e = scale[k] * inten * cos_s / d2
                if e < eps:
                    w += 1
                    continue
                lx = direction[w, 0]
                ly = direction[w, 1]
                lz = direction[w, 2]
                w += 1
                ch = channel[k]
                diffuse = e
                if f0 > 0.0:
                    # The base receives what the interface transmits (render.light.gloss).
                    diffuse = e * (1.0 - fresnel_one(snx * lx + sny * ly + snz * lz, f0))
                    if with_spec:
                        f_s = specular_one(
                            snx,
                            sny,
                            snz,
                            lx,
                            ly,
                            lz,
                            -view_dirs[i, 0],
                            -view_dirs[i, 1],
                            -view_dirs[i, 2],
                            f0,
                            gloss[m, 1],
                        )
                        acc_s[ch] += e * f_s
                if on_road:
                    # L = q·E (render.light.rtable): the value becomes E·q/ρ̄ in place of E/π.
                    qv = road_q_one(
                        view_dirs[i, 0], view_dirs[i, 1], lx, ly, lz, road_beta, road_tan, road_r, road_scale
                    )
                    diffuse *= qv * road_factor
                acc[ch] += diffuse
            for c in range(n_ch):
                out_value[i, c] = acc[c] / divisor
                if with_spec:
                    out_spec[i, c] = acc_s[c]


@numba.njit(cache=True, nogil=True)
def _emitter_values(
    directions,
    lum_of,
    rot,
    pos,
    scale,
    table,
    c_grid,
    g_grid,
    n_c,
    n_g,
    inv_c,
    inv_g,
    cd,
    area,
    channel,
    out,
    first,
    stride,
):
    """Luminance (cd/m²) of visible luminous openings: I toward the eye / projected area
    (samples in items of :data:`_ITEM`, ``first, first + stride, ...``)."""
    n = directions.shape[0]
    for item in range(first, (n + _ITEM - 1) // _ITEM, stride):
        for i in range(item * _ITEM, min(n, (item + 1) * _ITEM)):
            # int64 as in the other kernels, so that _intensity_fast is compiled once.
            k = np.int64(lum_of[i])
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
            inten = _intensity_fast(rot, c_grid, g_grid, n_c, n_g, inv_c, inv_g, cd, k, table[k], dx, dy, dz)
            out[i, channel[k]] = scale[k] * inten / (area[k] * cos_v)


# ------------------------------------------------------------------------------------------
# Culling grids
# ------------------------------------------------------------------------------------------


@dataclass
class CullGrid:
    """Luminaires that can matter, per cell of a uniform grid over the ground plane.

    Cell ``(ix, iy)`` (index ``iy * nx + ix``) covers x in ``[x0 + ix·cell_m, x0 + (ix+1)·cell_m)``
    and likewise in y, for heights ``z_lo`` to ``z_hi``; its luminaires are
    ``cell_items[cell_start[i] : cell_start[i + 1]]``. A point outside that box takes every
    luminaire as a candidate."""

    x0: float
    y0: float
    cell_m: float
    nx: int
    ny: int
    cell_start: np.ndarray
    cell_items: np.ndarray
    z_lo: float = 0.0
    z_hi: float = 0.0

    @property
    def mean_per_cell(self) -> float:
        """Mean number of listed luminaires per cell."""
        return float(self.cell_items.size) / max(self.nx * self.ny, 1)

    def kernel_args(self) -> tuple:
        """The grid as the light kernels take it."""
        box = np.array([self.x0, self.y0, self.z_lo, self.z_hi], np.float64)
        return box, float(self.cell_m), int(self.nx), int(self.ny), self.cell_start, self.cell_items


def _grid_over(lights: LuminaireSet, lo: np.ndarray, hi: np.ndarray, negligible_lx: float, cell_m: float) -> CullGrid:
    """The culling grid over the box ``lo``-``hi`` (metres); cells grow past ``cell_m`` where
    the grid would have more than ``_MAX_CELLS``."""
    span_x = max(float(hi[0] - lo[0]), 0.0)
    span_y = max(float(hi[1] - lo[1]), 0.0)
    cell = float(cell_m)
    while math.ceil(span_x / cell + 1e-9) * math.ceil(span_y / cell + 1e-9) > _MAX_CELLS:
        cell *= 2.0
    nx = max(1, int(math.ceil(span_x / cell + 1e-9)))
    ny = max(1, int(math.ceil(span_y / cell + 1e-9)))
    mask = np.zeros((nx * ny, lights.n_luminaires), np.bool_)
    # Angle between each luminaire's own z axis and world z (its tilt), degrees.
    tilt = np.degrees(np.arccos(np.clip(lights.rotation[:, 2, 2], -1.0, 1.0)))
    run_split(
        _cell_lists,
        nx * ny,
        float(lo[0]),
        float(lo[1]),
        cell,
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
    return CullGrid(float(lo[0]), float(lo[1]), cell, nx, ny, start, items, float(lo[2]), float(hi[2]))


def cull_grid(
    lights: LuminaireSet, points_m: np.ndarray, negligible_lx: float = NEGLIGIBLE_LX, cell_m: float = CELL_M
) -> CullGrid:
    """Per ground-plane cell over the points' extent, the luminaires that can matter there."""
    pts = np.asarray(points_m, np.float64).reshape(-1, 3)
    finite = np.all(np.isfinite(pts), axis=1)
    if not np.any(finite) or lights.n_luminaires == 0:
        return CullGrid(0.0, 0.0, cell_m, 1, 1, np.zeros(2, np.int64), np.zeros(0, np.int64))
    return _grid_over(lights, pts[finite].min(axis=0), pts[finite].max(axis=0), negligible_lx, cell_m)


def scene_cull_grid(lights: LuminaireSet, bvh: BVH, negligible_lx: float = NEGLIGIBLE_LX) -> CullGrid | None:
    """The culling grid over the bounds of ``bvh``'s triangles (with a 1 cm margin), built once
    per luminaire set, bound and scene (kept in ``lights.cull_grids``); None without triangles
    or luminaires."""
    if bvh.n_triangles == 0 or lights.n_luminaires == 0:
        return None
    tv = bvh.tri_vertices.reshape(-1, 3, 3)
    lo = tv.min(axis=(0, 1)) - _GRID_MARGIN_M
    hi = tv.max(axis=(0, 1)) + _GRID_MARGIN_M
    key = (float(negligible_lx), tuple(lo.tolist()), tuple(hi.tolist()))
    if key not in lights.cull_grids:
        lights.cull_grids[key] = _grid_over(lights, lo, hi, negligible_lx, CELL_M)
    return lights.cull_grids[key]


def _run_direct_light(*args) -> None:
    """:func:`_direct_light` on :func:`render.threads.run_split`'s threads, the blocks
    interleaved (block b on thread b mod threads)."""
    run_split(_direct_light, _n_items(args[0].shape[0], _BLOCK), *args, PACKET, WIDE)


def _n_items(n: int, per_item: int) -> int:
    """Work items of ``per_item`` for ``n`` elements."""
    return (int(n) + per_item - 1) // per_item


def _clearance(lights: LuminaireSet) -> np.ndarray:
    return SHADOW_CLEARANCE_M + 0.5 * np.hypot(lights.opening_m[:, 0], lights.opening_m[:, 1])


def _luminaire_args(lights: LuminaireSet) -> tuple:
    return (
        lights.rotation,
        lights.position_m,
        lights.scale,
        lights.table,
        lights.c_grid,
        lights.g_grid,
        lights.n_c,
        lights.n_g,
        _inverse_step(lights.c_grid, lights.n_c),
        _inverse_step(lights.g_grid, lights.n_g),
        lights.cd_table,
        lights.channel,
        _clearance(lights),
    )


def _luminaire_bounds(lights: LuminaireSet) -> tuple[np.ndarray, float]:
    """What lets :func:`_direct_light` pass over a (point, luminaire) pair before looking its
    intensity up: per table, a bound on the intensity toward directions whose cosine from the
    nadir falls in each of :data:`_COS_BINS` equal bins over [-1, 1] (0 where the bin lies
    outside the measured γ range), and the bins per unit of cosine. Each bin's γ range is
    widened by :data:`_COS_MARGIN` in cosine and :data:`_GAMMA_MARGIN_DEG` in angle (more than
    the rounding of the kernel's cosine and of the lookup's γ, and its 1e-9° tolerance), and its
    bound is the largest table value of every γ row an interpolation there can use, a little
    more (:data:`_BOUND_MARGIN`): so it is never below the intensity looked up."""
    n_tables = lights.cd_table.shape[0]
    bound = np.zeros((n_tables, _COS_BINS))
    edges = np.linspace(-1.0, 1.0, _COS_BINS + 1)
    for t in range(n_tables):
        nc, ng = int(lights.n_c[t]), int(lights.n_g[t])
        g = lights.g_grid[t, :ng]
        row_max = lights.cd_table[t, :nc, :ng].max(axis=0)
        for b in range(_COS_BINS):
            # γ from the bin's upper cosine (nearest the nadir) to its lower one.
            g_lo = math.degrees(math.acos(min(1.0, edges[b + 1] + _COS_MARGIN))) - _GAMMA_MARGIN_DEG
            g_hi = math.degrees(math.acos(max(-1.0, edges[b] - _COS_MARGIN))) + _GAMMA_MARGIN_DEG
            if g_hi < g[0] or g_lo > g[ng - 1]:
                continue
            j0 = max(int(np.searchsorted(g, g_lo, side="right")) - 1, 0)
            j1 = min(int(np.searchsorted(g, g_hi, side="left")), ng - 1)
            bound[t, b] = float(row_max[j0 : j1 + 1].max()) * (1.0 + _BOUND_MARGIN)
    return bound, 0.5 * _COS_BINS


def _inverse_step(grid: np.ndarray, n: np.ndarray) -> np.ndarray:
    """Per table row, 1 / the mean spacing of its n values (the guess of :func:`_cell`)."""
    out = np.ones(grid.shape[0])
    for t in range(grid.shape[0]):
        span = grid[t, n[t] - 1] - grid[t, 0] if n[t] > 1 else 0.0
        out[t] = (n[t] - 1) / span if span > 0.0 else 0.0
    return out


_NO_TREE = (
    np.zeros((1, 16), np.float32),
    np.zeros((1, 16), np.int32),
    np.zeros((1, 64), np.float32),
    np.zeros((1, 64), np.int32),
    np.zeros((1, 9)),
    np.zeros(1, np.int32),
    np.zeros((9, 4)),
)


def _tree_args(bvh: BVH | None) -> tuple[tuple, int, bool]:
    if bvh is None or not bvh.n_triangles:
        return _NO_TREE, 1, False
    return bvh.kernel_arrays, int(bvh.wide_stack), True


# ------------------------------------------------------------------------------------------
# Direct illuminance at points
# ------------------------------------------------------------------------------------------


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
    box, cell, gnx, gny, start, items = grid.kernel_args()
    # Candidates per point: at most the longest cell list, or every luminaire for a point
    # outside the grid's box.
    inside = (
        (pts[:, 2] >= box[2])
        & (pts[:, 2] <= box[3])
        & (pts[:, 0] >= box[0])
        & (pts[:, 1] >= box[1])
        & ((pts[:, 0] - box[0]) / cell < gnx)
        & ((pts[:, 1] - box[1]) / cell < gny)
    )
    K = int(np.diff(start).max()) if items.size else 0
    if np.any(act & ~inside):
        K = lights.n_luminaires
    if K == 0:
        return empty
    counts = np.zeros(n, np.int64)
    lum_k = np.zeros((n, K), np.int64)
    e_k = np.zeros((n, K))
    dir_k = np.zeros((n, K, 3))
    tmax_k = np.zeros((n, K))
    run_split(
        _candidates,
        _n_items(n, _ITEM),
        pts,
        nrm,
        act,
        _luminaire_args(lights),
        grid.kernel_args(),
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
    grid
        The culling grid (default: one over the points' extent).
    offset_normals
        Normals to offset shadow-ray origins along (default ``normals``; use the geometric
        normal for rendered surfaces).
    shadow_offset_m
        How far along them shadow rays start (calculation points use a larger offset so that
        layers a few millimetres proud of a surface, such as road markings, do not shadow it).

    Returns
    -------
    (N, n_channels) float64 illuminance in lx at full output (channel dimming not applied;
    maintenance factor applied): the sum, over the luminaires in index order, of the pairs of
    :func:`direct_pairs` that are not shadowed.
    """
    pts = np.ascontiguousarray(points_m, np.float64).reshape(-1, 3)
    nrm = np.ascontiguousarray(normals, np.float64).reshape(-1, 3)
    n = pts.shape[0]
    out = np.zeros((n, lights.n_channels))
    if n == 0 or lights.n_luminaires == 0:
        return out
    act = np.ones(n, np.bool_) if active is None else np.ascontiguousarray(active, np.bool_).reshape(-1)
    if grid is None:
        grid = cull_grid(lights, pts[act], negligible_lx)
    off = nrm if offset_normals is None else np.ascontiguousarray(offset_normals, np.float64).reshape(-1, 3)
    tree, stack, shadows = _tree_args(bvh)
    no_ids = np.full(n, -1, np.int32)
    _run_direct_light(
        pts,
        nrm,
        off,
        nrm,
        no_ids,
        no_ids,
        act,
        _luminaire_args(lights),
        _luminaire_bounds(lights),
        grid.kernel_args(),
        tree,
        stack,
        shadows,
        float(shadow_offset_m),
        float(negligible_lx),
        _NO_GLOSS,
        _NO_ROAD,
        -1,
        1.0,
        0.0,
        1.0,
        out,
        np.zeros((0, lights.n_channels)),
    )
    return out


_NO_GLOSS = np.array([[0.0, 1.0]])
_NO_ROAD = (np.zeros(2), np.zeros(2), np.zeros((2, 2)))


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
class SampleGeometry:
    """What the camera samples of a view hit: (S, 3) float32 hit points (NaN where no surface
    is seen), shading and geometric normals turned toward the eye, and ray directions."""

    point_m: np.ndarray
    normal: np.ndarray
    geo_normal: np.ndarray
    direction: np.ndarray


@dataclass
class ViewRays:
    """How a view's camera samples are cast, so that they can be cast again (they depend only
    on the camera, the samples per pixel and the seed): the scene, its BVH, the luminous
    openings' BVH (None without luminaires)."""

    mesh: TriangleMesh
    bvh: BVH
    camera: Camera
    seed: int
    emitter_bvh: BVH | None


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
    emitter : (S,) int32 -- luminaire index of a visible opening, else -1.
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
    rays : how the samples were cast (:class:`ViewRays`), to cast them again.
    geometry : the samples' :class:`SampleGeometry` when kept (:func:`cast_view` keeps it;
        :func:`render_buffers` does not, and :meth:`sample_geometry` casts it on request).
        ``point_m``, ``normal``, ``geo_normal`` and ``direction`` read it.
    indirect : the view's interreflected light per pixel and channel
        (:class:`render.light.indirect.IndirectBuffers`), or None for direct light only.
    """

    width_px: int
    height_px: int
    spp: int
    response: np.ndarray
    value_cd_m2: np.ndarray
    emitter: np.ndarray
    object_id: np.ndarray
    material_names: list[str]
    channels: list[Channel]
    spec_cd_m2: np.ndarray | None = None
    material_gloss: np.ndarray | None = None
    road: RoadShading | None = None
    rays: ViewRays | None = None
    geometry: SampleGeometry | None = None
    indirect: IndirectBuffers | None = None

    @property
    def emitter_response(self) -> int:
        """The ``response`` value that marks a visible luminous opening."""
        return len(self.material_names)

    @property
    def n_samples(self) -> int:
        """Number of camera samples, S."""
        return int(self.response.shape[0])

    def sample_geometry(self) -> SampleGeometry:
        """The samples' hit geometry: kept, or cast again from :attr:`rays` (and then kept)."""
        if self.geometry is None:
            if self.rays is None:
                raise ValueError("these light buffers keep neither the samples' geometry nor how to cast it")
            geometry = _empty_geometry(self.n_samples)
            _for_each_tile(self.rays, self.spp, lambda tile: _keep_geometry(geometry, tile))
            self.geometry = geometry
        return self.geometry

    @property
    def point_m(self) -> np.ndarray:
        """(S, 3) float32 hit points, NaN where no surface is seen."""
        return self.sample_geometry().point_m

    @property
    def normal(self) -> np.ndarray:
        """(S, 3) float32 shading normals, toward the eye."""
        return self.sample_geometry().normal

    @property
    def geo_normal(self) -> np.ndarray:
        """(S, 3) float32 geometric normals, toward the eye."""
        return self.sample_geometry().geo_normal

    @property
    def direction(self) -> np.ndarray:
        """(S, 3) float32 camera ray directions."""
        return self.sample_geometry().direction


@dataclass
class _Tile:
    """One tile of camera samples: where they go in the view (``index``) and what they hit."""

    index: np.ndarray
    point: np.ndarray
    normal: np.ndarray
    geo: np.ndarray
    direction: np.ndarray
    response: np.ndarray
    object_id: np.ndarray
    emitter: np.ndarray


def _empty_geometry(n: int) -> SampleGeometry:
    return SampleGeometry(
        np.full((n, 3), np.nan, np.float32),
        np.zeros((n, 3), np.float32),
        np.zeros((n, 3), np.float32),
        np.zeros((n, 3), np.float32),
    )


def _put_rows(dst: np.ndarray, index: np.ndarray, src: np.ndarray) -> None:
    """``dst[index] = src`` for (n, m) rows: through views of each row as one opaque item where
    both are C-contiguous arrays of one type (numpy copies a short row in one move instead of
    element by element; several times quicker for rows of 2-3 float32), the same bytes."""
    if (
        dst.ndim == 2
        and src.ndim == 2
        and dst.dtype == src.dtype
        and dst.shape[1] == src.shape[1]
        and dst.flags.c_contiguous
        and src.flags.c_contiguous
        and dst.shape[1] > 0
    ):
        row = np.dtype((np.void, dst.dtype.itemsize * dst.shape[1]))
        dst.view(row).reshape(-1)[index] = src.view(row).reshape(-1)
    else:
        dst[index] = src


def _keep_geometry(geometry: SampleGeometry, tile: _Tile) -> None:
    _put_rows(geometry.point_m, tile.index, tile.point)
    _put_rows(geometry.normal, tile.index, tile.normal)
    _put_rows(geometry.geo_normal, tile.index, tile.geo)
    _put_rows(geometry.direction, tile.index, tile.direction)


def _view_rays(mesh: TriangleMesh, bvh: BVH, lights: LuminaireSet, camera: Camera, seed: int) -> ViewRays:
    em_bvh = build_bvh(emitter_triangles(lights)) if lights.n_luminaires else None
    return ViewRays(mesh, bvh, camera, int(seed), em_bvh)


def _tile_rows(width_px: int, spp: int, threads: int = 1) -> int:
    """Pixel rows per tile: about :data:`TILE_SAMPLES` / ``threads`` samples, a multiple of 4
    rows (the 4 × 4 pixel blocks of the ray order)."""
    rows = max(1, TILE_SAMPLES // max(1, width_px * spp * max(1, threads)))
    return max(4, rows - rows % 4)


class _TilePlan:
    """What casting a view's camera samples needs, made once per pass over its tiles: the
    mesh's arrays as the shading kernel takes them and the first pixel row of each tile."""

    def __init__(self, rays: ViewRays, spp: int, rows: int) -> None:
        mesh = rays.mesh
        self.rays = rays
        self.spp = int(spp)
        self.rows = int(rows)
        self.starts = range(0, rays.camera.height_px, self.rows)
        self.k = np.arange(spp, dtype=np.int64)
        self.triangles = np.ascontiguousarray(mesh.triangles_m, np.float64).reshape(-1, 3, 3)
        self.vertex_normals = np.ascontiguousarray(mesh.normals, np.float64).reshape(-1, 3, 3)
        self.material_id = np.ascontiguousarray(mesh.material_id, np.int32)
        self.object_id = np.ascontiguousarray(mesh.object_id, np.int32)
        self.n_mat = len(mesh.material_names)

    def cast(self, y0: int) -> _Tile:
        """The tile of pixel rows ``y0`` to ``y0 + rows``: camera rays, closest hits against the
        scene and the luminous openings, and what each hit sees."""
        from render.rays.cameras import camera_rays, tile_pixels

        rays, spp = self.rays, self.spp
        camera = rays.camera
        y1 = min(camera.height_px, y0 + self.rows)
        # 4 x 4 pixel blocks keep consecutive rays coherent for the packet traversal.
        pixels = tile_pixels(camera, 0, y0, camera.width_px, y1, block_px=4)
        o, d, _ = camera_rays(camera, spp, rays.seed, pixels)
        hits = intersect_closest(rays.bvh, o, d)
        if rays.emitter_bvh is not None:
            em = intersect_closest(rays.emitter_bvh, o, d, t_max=hits.t).triangle
        else:
            em = np.full(o.shape[0], -1, np.int32)
        n = o.shape[0]
        tile = _Tile(
            (pixels[:, None] * spp + self.k[None, :]).reshape(-1),
            np.empty((n, 3), np.float32),
            np.empty((n, 3), np.float32),
            np.empty((n, 3), np.float32),
            np.empty((n, 3), np.float32),
            np.empty(n, np.int32),
            np.empty(n, np.int32),
            np.empty(n, np.int32),
        )
        shade_hits(
            o,
            d,
            hits.t,
            hits.triangle,
            hits.u,
            hits.v,
            self.triangles,
            self.vertex_normals,
            self.material_id,
            self.object_id,
            em,
            self.n_mat,
            tile.point,
            tile.normal,
            tile.geo,
            tile.direction,
            tile.response,
            tile.object_id,
            tile.emitter,
        )
        return tile


def _cast_tiles(rays: ViewRays, spp: int, *, progress: bool = False, label: str = "camera rays"):
    """Cast the view's camera samples tile by tile; yields a :class:`_Tile` per tile."""
    plan = _TilePlan(rays, spp, _tile_rows(rays.camera.width_px, spp))
    for y0 in progress_bar(plan.starts, label, quiet=not progress, unit="tile"):
        yield plan.cast(y0)


def _for_each_tile(
    rays: ViewRays, spp: int, work: Callable[[_Tile], None], *, progress: bool = False, label: str = "camera rays"
) -> None:
    """``work(tile)`` for every tile of the view's camera samples, cast as :func:`_cast_tiles`
    casts them, the tiles shared among :func:`render.threads.kernel_threads` threads: each
    thread takes the next tile not yet taken and runs everything of it (camera rays, hits,
    shading, ``work``) with its kernels on that thread alone, so no thread waits for another
    between kernels. With n threads the tiles are 1/n of :data:`TILE_SAMPLES`, so as many
    samples are in flight as before. ``work`` must write only the tile's own samples; as every
    sample's value is computed alike whichever thread and tile take it, the results are the
    same whatever the number of threads."""
    threads = kernel_threads()
    rows = _tile_rows(rays.camera.width_px, spp, threads)
    plan = _TilePlan(rays, spp, rows)
    if threads == 1 or len(plan.starts) == 1:
        for y0 in progress_bar(plan.starts, label, quiet=not progress, unit="tile"):
            work(plan.cast(y0))
        return
    starts = iter(progress_bar(plan.starts, label, quiet=not progress, unit="tile"))
    lock = threading.Lock()
    failed = threading.Event()

    def one_thread(first: int, stride: int) -> None:
        before = numba.get_num_threads()
        numba.set_num_threads(1)  # this thread's own setting: its kernels run on it alone
        try:
            while not failed.is_set():
                with lock:
                    y0 = next(starts, None)
                if y0 is None:
                    return
                work(plan.cast(y0))
        except BaseException:
            failed.set()
            raise
        finally:
            numba.set_num_threads(before)

    run_split(one_thread, threads)


def _material_gloss(mesh: TriangleMesh) -> np.ndarray:
    gloss = getattr(mesh, "material_gloss", None)
    if gloss is None:
        gloss = np.tile([0.0, 1.0], (len(mesh.material_names), 1))
    return np.ascontiguousarray(gloss, np.float64)


def _new_buffers(
    mesh: TriangleMesh, lights: LuminaireSet, rays: ViewRays, spp: int, road: RoadShading | None
) -> LightBuffers:
    camera = rays.camera
    S = camera.width_px * camera.height_px * spp
    C = lights.n_channels
    return LightBuffers(
        camera.width_px,
        camera.height_px,
        spp,
        np.full(S, -1, np.int32),
        np.zeros((S, C), np.float32),
        np.full(S, -1, np.int32),
        np.full(S, -1, np.int32),
        list(mesh.material_names),
        list(lights.channels),
        np.zeros((S, C), np.float32),
        _material_gloss(mesh),
        road,
        rays,
    )


class _LightPass:
    """The light kernels' arguments for one luminaire set, BVH and view (built once)."""

    def __init__(self, buffers: LightBuffers, lights: LuminaireSet, bvh: BVH, negligible_lx: float) -> None:
        self.lights = lights
        self.n_channels = lights.n_channels
        self.lum = _luminaire_args(lights)
        self.bounds = _luminaire_bounds(lights)
        grid = scene_cull_grid(lights, bvh, negligible_lx)
        self.grid = grid.kernel_args() if grid is not None else None
        self.tree, self.stack, self.shadows = _tree_args(bvh)
        self.negligible_lx = float(negligible_lx)
        self.gloss = (
            buffers.material_gloss
            if buffers.material_gloss is not None
            else np.tile([0.0, 1.0], (len(buffers.material_names), 1))
        )
        # One kernel pass per r-table (render.light.rtable.RoadShading.groups): (table arrays,
        # the carriageway objects it shades, Q0 scale, value factor).
        self.road_groups = [
            (
                tuple(np.ascontiguousarray(a, np.float64) for a in (g.table.beta_deg, g.table.tan_gamma, g.table.r_sr)),
                np.asarray(g.shaded_objects, np.int32),
                float(g.q_scale),
                g.value_factor,
            )
            for g in (buffers.road.groups if buffers.road is not None else ())
        ]
        self.area = lights.opening_m[:, 0] * lights.opening_m[:, 1]
        # Without a specular layer anywhere the layer's values are all zero: not computed,
        # not stored (the buffers' zeros stay).
        self.with_spec = bool(np.any(self.gloss[:, 0] > 0.0))
        self._ready = False
        self._ready_lock = threading.Lock()

    def _wait_for_kernel(self) -> None:
        """On a first run the light kernel may be compiling in a helper process: wait for it
        once (the tiles' other threads wait here for the first)."""
        if self._ready:
            return
        with self._ready_lock:
            if not self._ready:
                warmup = sys.modules.get("render.warmup")
                if warmup is not None:
                    warmup.wait_for_light_kernel()
                self._ready = True

    def _passes(self, object_id, surf):
        """The light kernel's passes over a tile: (active samples, object ids, r-table arrays,
        shaded object, Q0 scale, value factor). Without r-tables, or with one table on one
        carriageway, one pass over every sample as ever; otherwise one pass per table over the
        samples on its carriageways (their ids mapped to one shaded id) and one over the rest."""
        groups = self.road_groups
        if not groups:
            return [(surf, object_id, _NO_ROAD, -1, 1.0, 0.0)]
        if len(groups) == 1 and groups[0][1].size == 1:
            road, ids, scale, factor = groups[0]
            return [(surf, object_id, road, int(ids[0]), scale, factor)]
        passes = []
        rest = surf.copy()
        for road, ids, scale, factor in groups:
            on = surf & np.isin(object_id, ids)
            rest &= ~on
            passes.append((on, np.where(on, ids[0], -1).astype(np.int32), road, int(ids[0]), scale, factor))
        return [(rest, object_id, _NO_ROAD, -1, 1.0, 0.0), *passes]

    def evaluate(self, point, normal, geo, direction, response, object_id, emitter, emitter_response):
        """(value, spec) float32 (n, C) for n samples given as float32 geometry and int32 ids;
        spec is None where no material has a specular layer (it would be all zero)."""
        n = response.shape[0]
        value = np.zeros((n, self.n_channels))
        spec = np.zeros((n if self.with_spec else 0, self.n_channels))
        surf = (response >= 0) & (response != emitter_response)
        if self.grid is not None and np.any(surf):
            view_dirs = direction.astype(np.float64)
            self._wait_for_kernel()
            for active, obj, road, road_object, road_scale, road_factor in self._passes(object_id, surf):
                out_value, out_spec = (value, spec) if active is surf else (np.zeros_like(value), np.zeros_like(spec))
                _run_direct_light(
                    point.astype(np.float64),
                    normal.astype(np.float64),
                    geo.astype(np.float64),
                    view_dirs,
                    response,
                    obj,
                    active,
                    self.lum,
                    self.bounds,
                    self.grid,
                    self.tree,
                    self.stack,
                    self.shadows,
                    SURFACE_OFFSET_M,
                    self.negligible_lx,
                    self.gloss,
                    road,
                    road_object,
                    road_scale,
                    road_factor,
                    math.pi,
                    out_value,
                    out_spec,
                )
                if active is not surf:  # the kernel leaves 0 at the samples it does not evaluate
                    value += out_value
                    spec += out_spec
        value = value.astype(np.float32)
        spec = spec.astype(np.float32) if self.with_spec else None
        lights = self.lights
        sel = emitter >= 0
        if lights.n_luminaires and np.any(sel):
            out = _opening_values(direction, emitter, lights, self.area)
            value[sel] = out[sel].astype(np.float32)
        return value, spec


def _opening_values(direction: np.ndarray, emitter: np.ndarray, lights: LuminaireSet, area: np.ndarray) -> np.ndarray:
    """(n, C) float64 luminance of the luminous opening each sample sees (``emitter`` >= 0),
    per channel; 0 elsewhere."""
    out = np.zeros((emitter.shape[0], lights.n_channels))
    run_split(
        _emitter_values,
        _n_items(emitter.shape[0], _ITEM),
        direction.astype(np.float64),
        emitter,
        lights.rotation,
        lights.position_m,
        lights.scale,
        lights.table,
        lights.c_grid,
        lights.g_grid,
        lights.n_c,
        lights.n_g,
        _inverse_step(lights.c_grid, lights.n_c),
        _inverse_step(lights.g_grid, lights.n_g),
        lights.cd_table,
        area,
        lights.channel,
        out,
    )
    return out


def compile_light_kernels(lights: LuminaireSet, which: tuple[str, ...] = ("direct", "openings", "pairs")) -> None:
    """Compile (or load from numba's cache) the light kernels for the argument types a render
    and a calculation of ``lights`` pass them, by running each on one sample without shadows:
    ``direct`` light (:func:`direct_illuminance_lx`), luminous ``openings`` and the
    candidate ``pairs`` of :func:`direct_pairs`. Used by :mod:`render.warmup`."""
    if lights.n_luminaires == 0:
        return
    # One point above a grid of no height: outside it, so every luminaire is a candidate.
    point = np.array([[0.0, 0.0, 1.0]])
    normal = np.array([[0.0, 0.0, 1.0]])
    grid = cull_grid(lights, np.zeros((0, 3)))
    if "openings" in which:
        direction = np.array([[0.0, 0.0, 1.0]], np.float32)
        _opening_values(direction, np.zeros(1, np.int32), lights, lights.opening_m[:, 0] * lights.opening_m[:, 1])
    if "direct" in which:
        direct_illuminance_lx(point, normal, lights, None, grid=grid)
    if "pairs" in which:
        direct_pairs(point, normal, lights, None, grid=grid)


def render_buffers(
    mesh: TriangleMesh,
    bvh: BVH,
    lights: LuminaireSet,
    camera: Camera,
    spp: int,
    seed: int,
    *,
    road: RoadShading | None = None,
    negligible_lx: float = NEGLIGIBLE_LX,
    keep_geometry: bool = False,
    progress: bool = False,
) -> LightBuffers:
    """Render a view's light buffers in one pass over tiles of camera samples: cast, shade the
    hits and evaluate the light (direct light with shadows, visible openings) per tile, so that
    only the per-sample results grow with the view (the hit geometry is kept only with
    ``keep_geometry``; :meth:`LightBuffers.sample_geometry` casts it again on request).

    ``road``: the view's r-table shading of the carriageway
    (:func:`render.light.rtable.view_road_shading`). The result is the same, to the bit, as
    :func:`cast_view` followed by :func:`evaluate_light`."""
    rays = _view_rays(mesh, bvh, lights, camera, seed)
    buffers = _new_buffers(mesh, lights, rays, spp, road)
    if keep_geometry:
        buffers.geometry = _empty_geometry(buffers.n_samples)
    light = _LightPass(buffers, lights, bvh, negligible_lx)

    def work(tile: _Tile) -> None:
        i = tile.index
        buffers.response[i] = tile.response
        buffers.object_id[i] = tile.object_id
        buffers.emitter[i] = tile.emitter
        value, spec = light.evaluate(
            tile.point,
            tile.normal,
            tile.geo,
            tile.direction,
            tile.response,
            tile.object_id,
            tile.emitter,
            buffers.emitter_response,
        )
        _put_rows(buffers.value_cd_m2, i, value)
        if spec is not None:
            _put_rows(buffers.spec_cd_m2, i, spec)
        if keep_geometry:
            _keep_geometry(buffers.geometry, tile)

    _for_each_tile(rays, spp, work, progress=progress)
    return buffers


def cast_view(
    mesh: TriangleMesh,
    bvh: BVH,
    lights: LuminaireSet,
    camera: Camera,
    spp: int,
    seed: int,
    *,
    progress: bool = False,
    road: RoadShading | None = None,
) -> LightBuffers:
    """Primary rays of a view: hits against the scene and the luminous openings, with their
    geometry kept.

    ``road``: the view's r-table shading of the carriageway
    (:func:`render.light.rtable.view_road_shading`), kept in the buffers for every evaluation.
    Returns a :class:`LightBuffers` with zero ``value_cd_m2``; fill it with
    :func:`evaluate_light` (:func:`render_buffers` does both in one pass)."""
    rays = _view_rays(mesh, bvh, lights, camera, seed)
    buffers = _new_buffers(mesh, lights, rays, spp, road)
    buffers.geometry = _empty_geometry(buffers.n_samples)

    def work(tile: _Tile) -> None:
        buffers.response[tile.index] = tile.response
        buffers.object_id[tile.index] = tile.object_id
        buffers.emitter[tile.index] = tile.emitter
        _keep_geometry(buffers.geometry, tile)

    _for_each_tile(rays, spp, work, progress=progress)
    return buffers


def evaluate_light(
    buffers: LightBuffers,
    lights: LuminaireSet,
    bvh: BVH,
    *,
    negligible_lx: float = NEGLIGIBLE_LX,
    chunk: int = TILE_SAMPLES,
    progress: bool = False,
) -> LightBuffers:
    """Fill ``buffers.value_cd_m2`` and ``spec_cd_m2`` from ``lights`` (direct light with
    shadows, and visible openings) at the samples' kept geometry, or, where the buffers do not
    keep it, casting the camera samples again tile by tile (the same hits, so the same values).
    Returns the same object (values replaced)."""
    buffers.channels = list(lights.channels)
    S = buffers.n_samples
    value = np.zeros((S, lights.n_channels), np.float32)
    spec = np.zeros((S, lights.n_channels), np.float32)
    light = _LightPass(buffers, lights, bvh, negligible_lx)
    resp, obj, em = buffers.response, buffers.object_id, buffers.emitter
    if buffers.geometry is not None:
        g = buffers.geometry
        starts = progress_bar(range(0, S, chunk), "direct light", quiet=not progress, unit="chunk")
        for s0 in starts:
            sl = slice(s0, min(S, s0 + chunk))
            value[sl], chunk_spec = light.evaluate(
                g.point_m[sl],
                g.normal[sl],
                g.geo_normal[sl],
                g.direction[sl],
                resp[sl],
                obj[sl],
                em[sl],
                buffers.emitter_response,
            )
            if chunk_spec is not None:
                spec[sl] = chunk_spec
    elif buffers.rays is not None:

        def work(tile: _Tile) -> None:
            i = tile.index
            # The kept ids, not the new cast's: the openings are those of the first cast.
            tile_value, tile_spec = light.evaluate(
                tile.point, tile.normal, tile.geo, tile.direction, resp[i], obj[i], em[i], buffers.emitter_response
            )
            _put_rows(value, i, tile_value)
            if tile_spec is not None:
                _put_rows(spec, i, tile_spec)

        _for_each_tile(buffers.rays, buffers.spp, work, progress=progress, label="direct light")
    else:
        raise ValueError("these light buffers keep neither the samples' geometry nor how to cast them")
    buffers.value_cd_m2 = value
    buffers.spec_cd_m2 = spec
    return buffers
