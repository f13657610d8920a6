"""Interreflected light by path tracing with next-event estimation, spectral at 1 nm.

From a surface point ``x0`` seen by the camera (or a calculation point), a path samples a
cosine-distributed direction (pdf cos θ/π) over the Lambertian base, finds the closest surface
``x1`` with the single-ray traversal of the wide BVH, multiplies its throughput by the
reflectance ``ρ_1(λ)`` on the 1 nm grid, and at ``x1`` connects to one luminaire chosen by
importance with a shadow ray (next-event estimation); then it bounces again from ``x1``, up to
a bounce limit, with Russian roulette from the third vertex on. With cosine sampling the
cosine and 1/π of the Lambertian BRDF cancel, so a path adds, per vertex ``x_j``,

    β(λ) · E_k(x_j) / (π·p_k)        β(λ) = Π_{i=1..j} ρ_i(λ) / (roulette survival probabilities)

to its start point's ``E_ind(λ)/π`` for the channel of luminaire ``k`` (Russian roulette lets a
path go on past a vertex with probability q = min(1, max_λ β(λ)) and divides β by q) -- the
interreflected counterpart of the value the light buffers keep for direct light (the
white-diffuser luminance, cd/m²). The start point's own reflectance is not in β: the response
tables apply it exactly (:mod:`render.light.indirect.transport`).

**Choosing the luminaire.** The candidates at ``x_j`` are the luminaires of its culling cell
(:func:`render.light.integrator.scene_cull_grid`: those whose unshadowed light can reach the
negligible bound somewhere in the cell; every luminaire outside the grid's box), so the work
per vertex grows with the luminaires near it, not with all of them. Each candidate's
unshadowed illuminance ``E_k = I_k(C, γ)·cos θ_k / d_k²`` is evaluated from its photometric
table with :func:`render.light.photometry.intensity_lookup` (the lookup the direct light
uses), and ``k`` is chosen with probability ``p_k = E_k / Σ_m E_m``, so that ``E_k/p_k = Σ_m E_m``
whatever the choice: the only noise left from the choice is whether the chosen luminaire is
shadowed. Luminaires left out of a cell contribute below the same bound as for direct light.

**Surfaces.** Bounce vertices use the triangle's geometric normal, turned toward the arriving
ray; the camera vertex samples around its shading normal and drops directions below its
geometric surface. At a bounce vertex whose material has a specular layer
(:mod:`render.light.gloss`) the path reflects off both lobes: it picks the specular one with
probability :func:`~render.light.gloss.specular_lobe_probability` (F(cos θ_v) against the base's
albedo under the layer, from its luminous reflectance) and draws a GGX visible normal, or the
base's cosine distribution otherwise, and its throughput takes
``(f_s·cos θ + ρ(λ)·(1 − F(cos θ))·cos θ/π) / pdf`` with the mixture pdf (the one-sample model),
in place of ρ(λ); its next-event connections (luminaires, the moon, lit windows) add
``β·(ρ(λ)·(1 − F(n·l))/π + f_s(l, v))·E`` (weight 1 for the luminaires and the moon, delta
lights no direction can meet). A lit window is an area: at such a vertex its light is gathered
by both strategies, the connection and a drawn direction that meets the window's rectangle
(``tri_window``), each weighted by the power heuristic of the two solid-angle pdfs (the
connection's p_w·d²/(A·cos θ_w), the layer's mixture pdf), which is what keeps a nearly smooth
wet road reflecting a window from being all noise (multiple importance sampling; after the
last vertex, where no direction is drawn, the connection takes weight 1). The lobe's random number is on a hash dimension of
its own (7), drawn only there, so scenes without a layer keep their bits. The camera vertex
with a layer draws its direction the same way (toward the camera's view; the lobe's number on
a hash dimension drawn only there) and keeps the two parts apart: the base's share
(``ρ_0(λ)·base/pdf``, ρ_0 left to the response tables; ``1 − F`` of the light arriving when
the specular lobe is never chosen) in the transport, the layer's (``spec/pdf``, white) in a
second transport for such samples (``out_spec``). Its connection to the moon keeps the base's
part only (the moon's glint is the direct light's). A lit window reflected there is gathered,
as at bounce vertices, by both the connection (its base part (1 − F) to the transport, its
layer's π·f_s to the second one) and the drawn direction meeting the window (its base/pdf and
spec/pdf alike), weighted by the power heuristic of the same two pdfs. The road's r-table
applies to direct light only: interreflected light reaches the carriageway from every
direction and is reflected by its Lambertian base (and its layer, where it has one).

**Lit windows.** Each vertex, the camera's surface included, also connects to one lit window
(:mod:`render.light.indirect.windows`): chosen by the light tree over the lit windows
(:mod:`render.light.indirect.window_tree`: down from its root by the nodes' importance bounds,
then among a leaf's few windows by their approximate illuminance), so the work per vertex
grows with the logarithm of the number of lit windows; the estimate divides by the window's
probability (the product of the choices on the way), every window's being above zero.

**Night light.** With sky glow and moonlight on (:mod:`render.light.indirect.night`) the same
paths also carry two lamp-independent ambient channels: a direction that leaves the scene
upward adds β times the sky's unit luminance (from the camera's surface too, the sky's direct
light, and once more after the last bounce vertex), and every vertex, the camera's surface
included, casts one shadow ray toward the moon and adds β·cos θ/π. They use no random number
of their own, so with them off the paths are those without them, bit for bit.

**Seeding.** Every random number is a SplitMix64 hash of (seed key, pixel or point, path,
bounce, dimension): a path depends on nothing else, so tiles, threads and reruns give the same
bits.

References
----------
- J. T. Kajiya, "The rendering equation", SIGGRAPH 1986 (path tracing).
- E. Veach, *Robust Monte Carlo Methods for Light Transport Simulation*, PhD thesis, Stanford
  1997: next-event estimation, Russian roulette and the one-sample model of a vertex's two
  lobes **(from memory; section numbers not checked)**.
- E. Heitz (2018), "Sampling the GGX distribution of visible normals", JCGT 7(4), through
  :mod:`render.light.gloss`.
- E. Veach, L. J. Guibas, "Optimally combining sampling techniques for Monte Carlo rendering",
  SIGGRAPH 1995: multiple importance sampling and the power heuristic **(from memory)**.
- Cosine-weighted hemisphere sampling by projecting a uniform disc sample (Malley's method):
  M. Pharr, W. Jakob, G. Humphreys, *Physically Based Rendering*, 3rd ed., sec. 13.6.3
  **(section number from memory)**.
- T. Duff et al., "Building an orthonormal basis, revisited", JCGT 6(1), 2017.
- G. L. Steele, D. Lea, C. H. Flood, "Fast splittable pseudorandom number generators",
  OOPSLA 2014 (SplitMix64, :mod:`render.rays.cameras`).
"""

from __future__ import annotations

import math

import numba
import numpy as np
from numba import prange

from render.light.gloss import (
    fresnel_one,
    layered_one,
    layered_pdf_one,
    power_heuristic,
    specular_lobe_probability,
    specular_one,
    vndf_sample_one,
)
from render.light.indirect.window_tree import LEAF_WINDOWS, _choose_window, _window_probability
from render.light.integrator import _cell_of, _unshadowed
from render.rays.bvh.layout import STACK_SIZE, WIDE
from render.rays.bvh.single import any_one, closest_one
from render.rays.cameras import _mix64

__all__ = ["RR_FIRST_BOUNCE", "WINDOW_BOUNCE_ONLY", "WINDOW_CONNECTION_ONLY", "WINDOW_MIS", "trace_paths"]

#: Russian roulette decides whether a path goes on from this bounce vertex (1 = the first
#: surface after the camera's): from the third vertex on.
RR_FIRST_BOUNCE = 2
#: How a vertex with a specular layer gathers a lit window's light: both strategies weighted by
#: the power heuristic (the default), or (for checks) the connection alone or the sampled
#: direction meeting the window alone. Vertices without a layer use the connection alone.
WINDOW_MIS = 0
WINDOW_CONNECTION_ONLY = 1
WINDOW_BOUNCE_ONLY = 2
# Hash fields: path index, bounce, dimension (bits).
_BOUNCE_SHIFT = np.uint64(8)
_PATH_SHIFT = np.uint64(24)
_TO_UNIT = 1.0 / 9007199254740992.0  # 2⁻⁵³
# Shadow rays toward a lit window stop this far short of its rectangle, m.
_WINDOW_CLEARANCE_M = 2e-3
# Items (pixels) per parallel work item: scratch arrays are made once per chunk.
_ITEMS_PER_CHUNK = 16
# The small functions below (and the window tree's) are ordinary compiled calls, which LLVM
# inlines where it pays: numba's own inlining (``inline="always"``) copied them into the
# parallel kernel's body before its passes and tripled its compile time, for the same bits.


@numba.njit(cache=True, nogil=True)
def _rand(key, item, path, bounce, dim):
    """Uniform float64 in [0, 1) from (key, item, path, bounce, dimension)."""
    c = (np.uint64(path) << _PATH_SHIFT) | (np.uint64(bounce) << _BOUNCE_SHIFT) | np.uint64(dim)
    h = _mix64(_mix64(key ^ _mix64(np.uint64(item))) ^ c)
    return np.float64(h >> np.uint64(11)) * _TO_UNIT


@numba.njit(cache=True, nogil=True)
def _frame(nx, ny, nz):
    """Two unit tangents t1, t2 completing the unit normal n to an orthonormal basis (Duff et
    al. 2017)."""
    sign = math.copysign(1.0, nz)
    a = -1.0 / (sign + nz)
    b = nx * ny * a
    return 1.0 + sign * nx * nx * a, sign * b, -sign * nx, b, sign + ny * ny * a, -ny


@numba.njit(cache=True, nogil=True)
def _cosine_direction(nx, ny, nz, u1, u2):
    """Cosine-distributed unit direction about the unit normal n (pdf cos θ / π)."""
    t1x, t1y, t1z, t2x, t2y, t2z = _frame(nx, ny, nz)
    r = math.sqrt(u1)
    phi = 2.0 * math.pi * u2
    lx = r * math.cos(phi)
    ly = r * math.sin(phi)
    lz = math.sqrt(max(0.0, 1.0 - u1))
    return (
        lx * t1x + ly * t2x + lz * nx,
        lx * t1y + ly * t2y + lz * ny,
        lx * t1z + ly * t2z + lz * nz,
    )


@numba.njit(cache=True, nogil=True)
def _layered_direction(nx, ny, nz, vx, vy, vz, f0, alpha, rho_lum, u_lobe, u1, u2):
    """A direction leaving a vertex with a specular layer (unit normal n, ``v`` toward where the
    path came from): the specular lobe (GGX visible normals, :func:`render.light.gloss.
    vndf_sample_one`) with probability :func:`~render.light.gloss.specular_lobe_probability`,
    the base's cosine distribution otherwise. Returns (l, spec·cos/pdf, base·cos/pdf) with the
    mixture pdf (:func:`~render.light.gloss.layered_pdf_one`) and the layered values of
    :func:`~render.light.gloss.layered_one`, so that the throughput takes
    ``spec + ρ(λ)·base``, and the pdf; all 0 where the direction has no density."""
    p_spec = specular_lobe_probability(nx * vx + ny * vy + nz * vz, f0, rho_lum)
    if u_lobe < p_spec:
        t1x, t1y, t1z, t2x, t2y, t2z = _frame(nx, ny, nz)
        # The view in the local frame (z the normal), the sampled direction back.
        ax = vx * t1x + vy * t1y + vz * t1z
        ay = vx * t2x + vy * t2y + vz * t2z
        az = vx * nx + vy * ny + vz * nz
        ex, ey, ez, _ = vndf_sample_one(ax, ay, az, alpha, u1, u2)
        lx = ex * t1x + ey * t2x + ez * nx
        ly = ex * t1y + ey * t2y + ez * ny
        lz = ex * t1z + ey * t2z + ez * nz
    else:
        lx, ly, lz = _cosine_direction(nx, ny, nz, u1, u2)
    pdf = layered_pdf_one(nx, ny, nz, lx, ly, lz, vx, vy, vz, alpha, p_spec)
    spec, base = layered_one(nx, ny, nz, lx, ly, lz, vx, vy, vz, f0, alpha)
    if not (pdf > 0.0):
        return lx, ly, lz, 0.0, 0.0, 0.0
    return lx, ly, lz, spec / pdf, base / pdf, pdf


@numba.njit(cache=True, nogil=True)
def _deposit(acc, a, ch, beta, v, mixed, ratio, q_first):
    """acc[a, ch] += β(λ)·v (times the sample's reflectance ratio when the item's samples see
    several materials): light arriving at a vertex without a specular layer."""
    if mixed:
        for n in range(beta.shape[0]):
            acc[a, ch, n] += beta[n] * ratio[q_first, n] * v
    else:
        for n in range(beta.shape[0]):
            acc[a, ch, n] += beta[n] * v


@numba.njit(cache=True, nogil=True)
def _deposit_flat(acc, a, ch, v, mixed, ratio, q_first):
    """acc[a, ch] += v (times the sample's reflectance ratio where mixed): light at the camera
    surface itself, whose reflectance the response tables apply."""
    if mixed:
        for n in range(acc.shape[2]):
            acc[a, ch, n] += ratio[q_first, n] * v
    else:
        for n in range(acc.shape[2]):
            acc[a, ch, n] += v


@numba.njit(cache=True, nogil=True)
def _deposit_layered(acc, a, ch, beta, rho, k, base, spec, mixed, ratio, q_first):
    """acc[a, ch] += β(λ)·(ρ_k(λ)·base + spec) (times the sample's reflectance ratio when the
    item's samples see several materials): light reflected at a vertex with a specular layer."""
    for n in range(beta.shape[0]):
        t = beta[n] * (rho[k, n] * base + spec)
        if mixed:
            t *= ratio[q_first, n]
        acc[a, ch, n] += t


@numba.njit(cache=True, nogil=True)
def _drawn_window_mis(win, nodes, links, e_win, w, px, py, pz, sx, sy, sz, wx, wy, wz, t, l_pdf, window_mis):
    """The weight of lit window ``w`` (tree row) met at distance ``t`` by a direction (wx, wy, wz)
    drawn with pdf ``l_pdf`` from a gloss layer at ``x`` (the normal ``s`` its connection used):
    the power heuristic against connecting to the window (its probability from the window
    tree, :func:`render.light.indirect.window_tree._window_probability`; 1 without multiple
    importance sampling), or -1 when the direction meets its back."""
    cos_w = -(wx * win[w, 9] + wy * win[w, 10] + wz * win[w, 11])
    if not cos_w > 0.0:
        return -1.0
    if window_mis == WINDOW_MIS:
        p, total, e = _window_probability(win, nodes, links, e_win, w, px, py, pz, sx, sy, sz)
        if total > 0.0:
            p_light = p * e / total * t * t / (win[w, 12] * cos_w)
            return power_heuristic(1.0, l_pdf, 1.0, p_light)
    return 1.0


@numba.njit(cache=True, nogil=True)
def _window_connection(
    px, py, pz, sx, sy, sz, gx, gy, gz, win, nodes, links, e_win, u0, u1, u2, wb, wi, tv, tl, o, d, offset, st_node,
    work,
):  # fmt: skip
    """Next-event estimation to one lit window (:mod:`render.light.indirect.windows`): the
    window chosen by the window tree (:func:`render.light.indirect.window_tree._choose_window`:
    by the nodes' importance down to a leaf, then by the leaf's windows' approximate
    illuminance, in ``e_win`` scratch), a point uniform on its rectangle, one shadow ray.
    Returns (window (tree row), estimate of E/(π·L) per unit of the channel's level (each
    window's luminance over it in column 13, which weighs its choice too))."""
    pick, p, total, e = _choose_window(win, nodes, links, e_win, px, py, pz, sx, sy, sz, u0)
    if not (total > 0.0):
        return -1, 0.0
    lx = win[pick, 0] + u1 * win[pick, 3] + u2 * win[pick, 6] - px
    ly = win[pick, 1] + u1 * win[pick, 4] + u2 * win[pick, 7] - py
    lz = win[pick, 2] + u1 * win[pick, 5] + u2 * win[pick, 8] - pz
    d2 = lx * lx + ly * ly + lz * lz
    dist = math.sqrt(d2)
    if not (dist > 0.0):
        return pick, 0.0
    lx /= dist
    ly /= dist
    lz /= dist
    cos_x = lx * sx + ly * sy + lz * sz
    cos_w = -(lx * win[pick, 9] + ly * win[pick, 10] + lz * win[pick, 11])
    if cos_x <= 0.0 or cos_w <= 0.0 or lx * gx + ly * gy + lz * gz <= 0.0:
        return pick, 0.0
    o[0] = px + offset * gx
    o[1] = py + offset * gy
    o[2] = pz + offset * gz
    # The shadow ray starts offset along the normal: aimed from there at the window's point and
    # ending the clearance short of it (aimed from the point, it would meet the window itself).
    d[0] = px + lx * dist - o[0]
    d[1] = py + ly * dist - o[1]
    d[2] = pz + lz * dist - o[2]
    reach = math.sqrt(d[0] * d[0] + d[1] * d[1] + d[2] * d[2])
    d[0] /= reach
    d[1] /= reach
    d[2] /= reach
    if any_one(wb, wi, tv, o, d, 0.0, max(reach - _WINDOW_CLEARANCE_M, 0.0), st_node, work, WIDE, tl):
        return pick, 0.0
    # The window's probability is p·e/total (p = 1 when the tree is one leaf: then this is the
    # arithmetic of choosing among every window, bit for bit).
    return pick, cos_x * cos_w * win[pick, 12] * total / (math.pi * d2 * (p * e)) * win[pick, 13]


@numba.njit(cache=True, nogil=True, parallel=True, error_model="numpy")
def trace_paths(
    point,
    normal,
    geo,
    view,
    material,
    item_id,
    spp,
    n_paths,
    key,
    max_bounces,
    rr_first,
    per_sample,
    start_gloss,
    rho,
    f0,
    alpha,
    rho_lum,
    band_start,
    band_weight,
    tri_normal,
    tri_material,
    tree,
    wide_stack,
    lum,
    grid,
    offset,
    n_amb,
    sky_on,
    moon_on,
    moon,
    win,
    win_nodes,
    win_links,
    win_kind,
    tri_window,
    window_mis,
    out,
    out_spec,
    out_paths,
):
    """Interreflected transport of G items of ``spp`` start samples each (a pixel's camera
    samples, or one calculation point).

    ``point``, ``normal`` (shading), ``geo`` (geometric) (G·spp, 3), both facing the side seen,
    ``view`` (G·spp, 3) unit directions toward the camera (used where a start sample's material
    has a specular layer), and ``material`` (G·spp,) of the start samples (outside 0 … K − 1: no path starts there);
    ``item_id`` (G,) the id each item's random numbers hash (the view's pixel index).
    ``n_paths`` paths per item start on its valid samples in turn; ``max_bounces`` vertices
    after the start at most, Russian roulette deciding from vertex ``rr_first`` on whether to
    go on; ``start_gloss``: the start samples' own specular layer lets through 1 − F of the
    light they receive (surfaces seen; False for the light arriving at calculation points).
    ``rho`` (K, N) reflectances, ``f0`` (K,) the specular layer's F0 (0: none), ``alpha`` (K,)
    its GGX roughness, ``rho_lum`` (K,) the base's luminous reflectance (the lobe choice);
    ``band_start``, ``band_weight`` the stored basis (:class:`~render.light.indirect.transport.
    TransportBasis`); ``tri_normal`` (F, 3) unit geometric normals and ``tri_material`` (F,) by
    original triangle index; ``tree`` = (wide nodes, their int32 view, triangle vertices,
    triangle index, triangle lanes); ``lum`` as :func:`render.light.integrator._luminaire_args`; ``grid`` a
    culling grid's kernel arguments; ``offset`` the ray-origin offset along the normal, m.

    ``n_amb`` ambient channels (0, or 2 + K: sky glow, moonlight and K window lamps,
    :mod:`render.light.indirect.night`) follow the luminaires' channels in ``out``, for unit
    level: with ``sky_on`` a direction that leaves the scene upward adds the sky's unit
    luminance (from the start sample too, and one more direction after the last bounce
    vertex), with ``moon_on`` every vertex, the start sample included, casts a shadow ray
    along ``moon`` (unit vector toward the moon) and adds cos θ/π. With ``n_amb`` 2 + K the lit
    windows ``win`` (W, 14) of window channels ``win_kind`` (W,) (0 the houses' window lamp, 1
    the shops', 2 … K − 1 further lamps), each at its luminance over its channel's level
    (column 13), in the order of their light tree ``win_nodes``, ``win_links``
    (:class:`render.light.indirect.window_tree.WindowTree`), are K more channels: every vertex, the start sample included, connects to
    one of them chosen by the tree (:func:`_window_connection`); ``tri_window`` (F,) the lit
    window (tree row) each triangle lies on
    (-1: none): a direction drawn from a vertex's specular layer that meets one adds its
    luminance, and the two are weighted by the power heuristic (``window_mis``,
    :data:`WINDOW_MIS`; the other values keep one strategy, for checks). Off (``n_amb`` 0), the paths and their random numbers are
    those without these terms.

    Writes ``out`` (rows, C, n_nodes): the mean over a row's paths of the node values of
    E_ind/π·T per channel (rows are items, or samples with ``per_sample``), and ``out_paths``
    (rows,) the number of paths averaged; ``out_spec`` (rows, C, n_nodes), or (0, C, n_nodes)
    for none, the same for the light the start samples' specular layer reflects (white: no
    reflectance of the start sample to apply; zero for samples without a layer, whose random
    numbers are those of before). With ``start_gloss`` a start sample with a layer draws its
    direction from both lobes (:func:`_layered_direction`, the lobe's number on "bounce" 1,
    dimension 7) and splits the path's light at its end: the base's share to ``out``, the
    layer's to ``out_spec``; a lit window met by that direction adds its light, both parts,
    weighted by the power heuristic against the start sample's connection to it (which adds
    both parts too; ``window_mis`` as at bounce vertices). An item's row weighs each start sample alike (as the
    response tables do) and, where its samples see several materials, each path's transport by
    its sample's reflectance over the samples' mean reflectance ρ̄(λ), so that ρ̄·(the row) is
    the mean of ρ_s·T_s over the samples, exactly at 1 nm."""
    wb, wi, tv, ti, tl = tree
    rot, pos, scale, table, c_grid, g_grid, n_c, n_g, inv_c, inv_g, cd, channel, clearance = lum
    box, cell, gnx, gny, cell_start, cell_items = grid
    G = item_id.shape[0]
    K = rho.shape[0]
    N = rho.shape[1]
    C = out.shape[1]
    c_sky = C - n_amb
    c_moon = c_sky + 1
    do_sky = n_amb > 0 and sky_on
    do_moon = n_amb > 0 and moon_on
    do_win = n_amb > 2 and win.shape[0] > 0
    c_win = c_sky + 2
    mx = moon[0]
    my = moon[1]
    mz = moon[2]
    # The sky needs one more direction after the last bounce vertex (its light reflected
    # max_bounces times); luminaires and the moon are connected at vertices 1 … max_bounces.
    last = max_bounces + 1 if do_sky else max_bounces
    n_nodes = out.shape[2]
    width = band_weight.shape[1]
    n_lum = pos.shape[0]
    rows = spp if per_sample else 1
    do_spec = out_spec.shape[0] > 0
    n_chunks = (G + _ITEMS_PER_CHUNK - 1) // _ITEMS_PER_CHUNK
    for chunk in prange(n_chunks):
        # Scratch for the chunk's items, made once.
        valid = np.empty(spp, np.int64)
        # (Row ``rows``: one path's scratch, split between the two transports at its end.)
        acc = np.empty((rows + 1, C, N))
        accs = np.empty((rows, C, N))
        count = np.empty(rows, np.int64)
        beta = np.empty(N)
        n_mat = min(spp, K)
        ratio = np.empty((n_mat, N))
        mats = np.empty(n_mat, np.int64)
        mat_of = np.empty(spp, np.int64)
        mean = np.empty(N)
        e_cand = np.empty(max(n_lum, 1))
        e_win = np.empty(LEAF_WINDOWS)
        st_node = np.empty(max(STACK_SIZE, wide_stack), np.int64)
        st_t = np.empty(wide_stack)
        work = np.empty(2 * WIDE)
        o = np.empty(3)
        d = np.empty(3)
        for g in range(chunk * _ITEMS_PER_CHUNK, min(G, (chunk + 1) * _ITEMS_PER_CHUNK)):
            s0 = g * spp
            r0 = g * rows
            nv = 0
            for s in range(spp):
                k0 = material[s0 + s]
                if k0 >= 0 and k0 < K and np.isfinite(point[s0 + s, 0]):
                    valid[nv] = s
                    nv += 1
            for r in range(r0, r0 + rows):
                out_paths[r] = 0
                for c in range(C):
                    for j in range(n_nodes):
                        out[r, c, j] = 0.0
                        if do_spec:
                            out_spec[r, c, j] = 0.0
            if nv == 0 or n_paths == 0:
                continue
            acc[:] = 0.0
            accs[:] = 0.0
            count[:] = 0
            # Each valid start sample stands for 1/nv of the item, as it does in the response
            # tables (which apply each sample's own reflectance): what a path from sample v adds
            # is weighted by n_paths / (used · paths of v), and, where the samples see several
            # materials, by ρ_v(λ) / ρ̄(λ) (ρ̄ their mean reflectance), so that ρ̄ times the
            # item's mean transport is the mean over samples of ρ_v·T_v, exactly at 1 nm. (Not
            # in the throughput: Russian roulette decides as it would for the sample alone.)
            used = min(nv, n_paths)
            m = 0
            for v_ in range(nv):
                k0 = material[s0 + valid[v_]]
                q = 0
                while q < m and mats[q] != k0:
                    q += 1
                if q == m:
                    mats[m] = k0
                    m += 1
                mat_of[v_] = q
            mixed = m > 1 and not per_sample
            if mixed:
                mean[:] = 0.0
                for v_ in range(nv):
                    for n in range(N):
                        mean[n] += rho[mats[mat_of[v_]], n] / nv
                for q in range(m):
                    for n in range(N):
                        ratio[q, n] = rho[mats[q], n] / mean[n] if mean[n] > 0.0 else 1.0
            gid = item_id[g]
            for i in range(n_paths):
                first = i % used
                s = valid[first]
                a = s if per_sample else 0
                count[a] += 1
                f = 1.0
                if not per_sample:
                    f = n_paths / (used * (n_paths // used + (1 if first < n_paths % used else 0)))
                q_first = mat_of[first]
                idx = s0 + s
                px = np.float64(point[idx, 0])
                py = np.float64(point[idx, 1])
                pz = np.float64(point[idx, 2])
                sx = np.float64(normal[idx, 0])
                sy = np.float64(normal[idx, 1])
                sz = np.float64(normal[idx, 2])
                gx = np.float64(geo[idx, 0])
                gy = np.float64(geo[idx, 1])
                gz = np.float64(geo[idx, 2])
                k_prev = material[idx]
                for n in range(N):
                    beta[n] = 1.0
                weight = 1.0
                # The direction the path arrived along (used at vertices with a specular layer).
                wx = wy = wz = 0.0
                if do_moon:
                    # The moon's direct light at the start sample (its shading normal, above
                    # its geometric surface): one shadow ray.
                    cm = mx * sx + my * sy + mz * sz
                    if cm > 0.0 and mx * gx + my * gy + mz * gz > 0.0:
                        o[0] = px + offset * gx
                        o[1] = py + offset * gy
                        o[2] = pz + offset * gz
                        d[0] = mx
                        d[1] = my
                        d[2] = mz
                        if not any_one(wb, wi, tv, o, d, 0.0, np.inf, st_node, work, WIDE, tl):
                            v = f * cm / math.pi
                            if f0[k_prev] > 0.0 and start_gloss:
                                v *= 1.0 - fresnel_one(cm, f0[k_prev])
                            _deposit_flat(acc, a, c_moon, v, mixed, ratio, q_first)
                if do_win:
                    # The lit windows' direct light at the start sample (random numbers of
                    # "bounce" 0, dimensions 4-6).
                    wpick, v = _window_connection(
                        px, py, pz, sx, sy, sz, gx, gy, gz, win, win_nodes, win_links, e_win,
                        _rand(key, gid, i, 0, 4), _rand(key, gid, i, 0, 5), _rand(key, gid, i, 0, 6),
                        wb, wi, tv, tl, o, d, offset, st_node, work,
                    )  # fmt: skip
                    if v > 0.0:
                        v *= f
                        cw_ = c_win + win_kind[wpick]
                        if f0[k_prev] > 0.0 and start_gloss:
                            # The camera surface's layer: the base's part (1 − F) to the
                            # transport, the layer's π·f_s to the white one, both weighted by
                            # the power heuristic against the direction drawn from the layer
                            # below (weight 1 where none is drawn or for the connection alone).
                            cl = d[0] * sx + d[1] * sy + d[2] * sz
                            v0x = np.float64(view[idx, 0])
                            v0y = np.float64(view[idx, 1])
                            v0z = np.float64(view[idx, 2])
                            wc = 1.0
                            if window_mis == WINDOW_BOUNCE_ONLY and last >= 1:
                                wc = 0.0
                            elif window_mis == WINDOW_MIS and last >= 1:
                                p_light = cl * f * win[wpick, 13] / (math.pi * v)
                                p_bsdf = layered_pdf_one(
                                    sx, sy, sz, d[0], d[1], d[2], v0x, v0y, v0z, alpha[k_prev],
                                    specular_lobe_probability(v0x * sx + v0y * sy + v0z * sz, f0[k_prev], rho_lum[k_prev]),
                                )  # fmt: skip
                                wc = power_heuristic(1.0, p_light, 1.0, p_bsdf)
                            if wc > 0.0:
                                vs = (
                                    v
                                    * wc
                                    * math.pi
                                    * specular_one(
                                        sx, sy, sz, d[0], d[1], d[2], v0x, v0y, v0z, f0[k_prev], alpha[k_prev]
                                    )
                                )
                                v *= wc * (1.0 - fresnel_one(cl, f0[k_prev]))
                                _deposit_flat(acc, a, cw_, v, mixed, ratio, q_first)
                                if do_spec:
                                    for n in range(N):
                                        accs[a, cw_, n] += vs
                        else:
                            _deposit_flat(acc, a, cw_, v, mixed, ratio, q_first)
                # A camera surface with a specular layer: the path's light is split at its end
                # between the base's transport (to take ρ_0(λ)) and the layer's white one; until
                # then it gathers in the scratch row.
                split = start_gloss and f0[k_prev] > 0.0
                pm = mixed and not split
                a_out = a
                frac_s = 0.0
                if split:
                    a = rows
                    acc[a] = 0.0
                for b in range(1, last + 1):
                    if (b > 1 and f0[k_prev] > 0.0) or (b == 1 and split):
                        # A vertex with a specular layer: one of its two lobes (the lobe's random
                        # number on dimension 7, drawn only here), the throughput times
                        # (f_s·cos + ρ(λ)·(1 − F)·cos/π) / (mixture pdf); at the camera vertex
                        # (toward the camera) the two parts are kept apart, ρ_0 left out.
                        if b == 1:
                            vx = np.float64(view[idx, 0])
                            vy = np.float64(view[idx, 1])
                            vz = np.float64(view[idx, 2])
                        else:
                            vx, vy, vz = -wx, -wy, -wz
                        wx, wy, wz, l_spec, l_base, l_pdf = _layered_direction(
                            sx, sy, sz, vx, vy, vz, f0[k_prev], alpha[k_prev], rho_lum[k_prev],
                            _rand(key, gid, i, b, 7), _rand(key, gid, i, b, 0), _rand(key, gid, i, b, 1),
                        )  # fmt: skip
                        if wx * gx + wy * gy + wz * gz <= 0.0 or not (l_spec + l_base > 0.0):
                            break
                        if b == 1:
                            weight = l_spec + l_base
                            frac_s = l_spec / weight
                        else:
                            for n in range(N):
                                beta[n] *= l_spec + rho[k_prev, n] * l_base
                    else:
                        wx, wy, wz = _cosine_direction(sx, sy, sz, _rand(key, gid, i, b, 0), _rand(key, gid, i, b, 1))
                        if wx * gx + wy * gy + wz * gz <= 0.0:
                            break
                    o[0] = px + offset * gx
                    o[1] = py + offset * gy
                    o[2] = pz + offset * gz
                    d[0] = wx
                    d[1] = wy
                    d[2] = wz
                    t, j, _, _ = closest_one(wb, wi, tv, ti, o, d, 0.0, np.inf, st_node, st_t, work, WIDE, tl)
                    if (
                        do_win
                        and b == 1
                        and split
                        and j >= 0
                        and tri_window[j] >= 0
                        and window_mis != WINDOW_CONNECTION_ONLY
                    ):
                        # The camera surface's layer: the drawn direction meets a lit window;
                        # its layer's part to the white transport, its base's to the transport,
                        # weighted by the power heuristic against the connection above.
                        w_ = tri_window[j]
                        wd = _drawn_window_mis(
                            win,
                            win_nodes,
                            win_links,
                            e_win,
                            w_,
                            px,
                            py,
                            pz,
                            sx,
                            sy,
                            sz,
                            wx,
                            wy,
                            wz,
                            t,
                            l_pdf,
                            window_mis,
                        )
                        if wd >= 0.0:
                            v = f * wd * win[w_, 13]
                            cw_ = c_win + win_kind[w_]
                            if do_spec:
                                for n in range(N):
                                    accs[a_out, cw_, n] += v * l_spec
                            _deposit_flat(acc, a_out, cw_, v * l_base, mixed, ratio, q_first)
                    if (
                        do_win
                        and b > 1
                        and f0[k_prev] > 0.0
                        and j >= 0
                        and tri_window[j] >= 0
                        and window_mis != WINDOW_CONNECTION_ONLY
                    ):
                        # A direction drawn from the layer meets a lit window: its unit luminance,
                        # weighted by the power heuristic against the connection to it.
                        w_ = tri_window[j]
                        mis = _drawn_window_mis(
                            win,
                            win_nodes,
                            win_links,
                            e_win,
                            w_,
                            px,
                            py,
                            pz,
                            sx,
                            sy,
                            sz,
                            wx,
                            wy,
                            wz,
                            t,
                            l_pdf,
                            window_mis,
                        )
                        if mis >= 0.0:
                            v = weight * f * mis * win[w_, 13]
                            cw_ = c_win + win_kind[w_]
                            _deposit(acc, a, cw_, beta, v, pm, ratio, q_first)
                    if j < 0:
                        if do_sky and wz > 0.0:
                            # Left the scene toward the sky dome: its unit luminance.
                            v = weight * f
                            _deposit(acc, a, c_sky, beta, v, pm, ratio, q_first)
                        break
                    if b > max_bounces:
                        break
                    px = o[0] + t * wx
                    py = o[1] + t * wy
                    pz = o[2] + t * wz
                    gx = tri_normal[j, 0]
                    gy = tri_normal[j, 1]
                    gz = tri_normal[j, 2]
                    if gx * wx + gy * wy + gz * wz > 0.0:
                        gx, gy, gz = -gx, -gy, -gz
                    sx, sy, sz = gx, gy, gz
                    k = tri_material[j]
                    glossy = f0[k] > 0.0
                    if not glossy:
                        for n in range(N):
                            beta[n] *= rho[k, n]
                    # Next-event estimation: one luminaire of the vertex's culling cell.
                    ci = _cell_of(px, py, pz, box, cell, gnx, gny)
                    q0 = cell_start[ci] if ci >= 0 else 0
                    q1 = cell_start[ci + 1] if ci >= 0 else n_lum
                    total = 0.0
                    for q in range(q0, q1):
                        kk = cell_items[q] if ci >= 0 else q
                        e, _ = _unshadowed(px, py, pz, gx, gy, gz, kk, lum)
                        e_cand[q - q0] = e
                        total += e
                    if total > 0.0:
                        u = _rand(key, gid, i, b, 2) * total
                        pick = q0
                        run = e_cand[0]
                        while run <= u and pick < q1 - 1:
                            pick += 1
                            run += e_cand[pick - q0]
                        while e_cand[pick - q0] == 0.0:
                            pick -= 1
                        kk = cell_items[pick] if ci >= 0 else pick
                        lx = pos[kk, 0] - px
                        ly = pos[kk, 1] - py
                        lz = pos[kk, 2] - pz
                        dist = math.sqrt(lx * lx + ly * ly + lz * lz)
                        lx /= dist
                        ly /= dist
                        lz /= dist
                        o[0] = px + offset * gx
                        o[1] = py + offset * gy
                        o[2] = pz + offset * gz
                        d[0] = lx
                        d[1] = ly
                        d[2] = lz
                        if not any_one(wb, wi, tv, o, d, 0.0, max(dist - clearance[kk], 0.0), st_node, work, WIDE, tl):
                            # E_k / p_k = Σ E: the cell's whole unshadowed light.
                            v = weight * total / math.pi
                            ch = channel[kk]
                            v *= f
                            if glossy:
                                # The layered surface: ρ(λ)·(1 − F(n·l))/π + f_s(l, v), with E.
                                _deposit_layered(
                                    acc, a, ch, beta, rho, k,
                                    v * (1.0 - fresnel_one(gx * lx + gy * ly + gz * lz, f0[k])),
                                    v * math.pi * specular_one(gx, gy, gz, lx, ly, lz, -wx, -wy, -wz, f0[k], alpha[k]),
                                    pm, ratio, q_first,
                                )  # fmt: skip
                            else:
                                _deposit(acc, a, ch, beta, v, pm, ratio, q_first)
                    if do_moon:
                        cm = mx * gx + my * gy + mz * gz
                        if cm > 0.0:
                            o[0] = px + offset * gx
                            o[1] = py + offset * gy
                            o[2] = pz + offset * gz
                            d[0] = mx
                            d[1] = my
                            d[2] = mz
                            if not any_one(wb, wi, tv, o, d, 0.0, np.inf, st_node, work, WIDE, tl):
                                v = weight * f * cm / math.pi
                                if glossy:
                                    _deposit_layered(
                                        acc, a, c_moon, beta, rho, k, v * (1.0 - fresnel_one(cm, f0[k])),
                                        v * math.pi * specular_one(gx, gy, gz, mx, my, mz, -wx, -wy, -wz, f0[k], alpha[k]),
                                        pm, ratio, q_first,
                                    )  # fmt: skip
                                else:
                                    _deposit(acc, a, c_moon, beta, v, pm, ratio, q_first)
                    if do_win:
                        wpick, v = _window_connection(
                            px, py, pz, gx, gy, gz, gx, gy, gz, win, win_nodes, win_links, e_win,
                            _rand(key, gid, i, b, 4), _rand(key, gid, i, b, 5), _rand(key, gid, i, b, 6),
                            wb, wi, tv, tl, o, d, offset, st_node, work,
                        )  # fmt: skip
                        if v > 0.0:
                            v *= weight * f
                            cw_ = c_win + win_kind[wpick]
                            if glossy:
                                # Weighted against a direction drawn from the layer meeting the
                                # window (power heuristic; pdf of the connection in solid angle
                                # cos θ_x / (π·v) per unit of the estimate's factor).
                                vw = 0.0
                                if window_mis == WINDOW_MIS and b < last:
                                    cl = d[0] * gx + d[1] * gy + d[2] * gz
                                    p_light = cl * weight * f * win[wpick, 13] / (math.pi * v)
                                    p_bsdf = layered_pdf_one(
                                        gx, gy, gz, d[0], d[1], d[2], -wx, -wy, -wz, alpha[k],
                                        specular_lobe_probability(-(wx * gx + wy * gy + wz * gz), f0[k], rho_lum[k]),
                                    )  # fmt: skip
                                    vw = v * power_heuristic(1.0, p_light, 1.0, p_bsdf)
                                elif window_mis == WINDOW_CONNECTION_ONLY or b >= last:
                                    # (No direction is drawn after the last vertex.)
                                    vw = v
                                v = vw
                            if glossy and v > 0.0:
                                _deposit_layered(
                                    acc, a, cw_, beta, rho, k, v * (1.0 - fresnel_one(d[0] * gx + d[1] * gy + d[2] * gz, f0[k])),
                                    v * math.pi * specular_one(gx, gy, gz, d[0], d[1], d[2], -wx, -wy, -wz, f0[k], alpha[k]),
                                    pm, ratio, q_first,
                                )  # fmt: skip
                            else:
                                _deposit(acc, a, cw_, beta, v, pm, ratio, q_first)
                    if b >= last:
                        break
                    if b >= rr_first:
                        top = 0.0
                        for n in range(N):
                            top = max(top, beta[n])
                        survive = min(1.0, top * weight)
                        if not (survive > 0.0) or _rand(key, gid, i, b, 3) >= survive:
                            break
                        weight /= survive
                    k_prev = k
                if split:
                    # The path's light: the base's share to the transport (ρ_0 applied later,
                    # with the sample's reflectance ratio), the layer's to the white one.
                    for c in range(C):
                        for n in range(N):
                            t = acc[rows, c, n]
                            tb = t * (1.0 - frac_s)
                            if mixed:
                                tb *= ratio[q_first, n]
                            acc[a_out, c, n] += tb
                            accs[a_out, c, n] += t * frac_s
            for a in range(rows):
                if count[a] == 0:
                    continue
                r = r0 + a
                out_paths[r] = count[a]
                inv = 1.0 / count[a]
                for c in range(C):
                    for j in range(n_nodes):
                        v = 0.0
                        vs = 0.0
                        for w in range(width):
                            n = band_start[j] + w
                            if n < N:
                                v += band_weight[j, w] * acc[a, c, n]
                                vs += band_weight[j, w] * accs[a, c, n]
                        out[r, c, j] = v * inv
                        if do_spec:
                            out_spec[r, c, j] = vs * inv
