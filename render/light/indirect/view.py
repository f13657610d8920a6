"""Interreflected light of a view or of points: tracing, storage, and images from it.

:func:`trace_view` casts a view's camera samples again tile by tile (they depend only on the
camera, the samples per pixel and the seed; :mod:`render.light.integrator`), traces
``samples_per_pixel`` interreflection paths per pixel from them
(:func:`render.light.indirect.paths.trace_paths`) and keeps, per pixel and light channel, the
node values of the transport (:mod:`render.light.indirect.transport`) as float16 relative to a
per-pixel scale: :class:`IndirectBuffers`, 162 bytes per pixel and channel plus 8 per pixel;
the pixels whose camera samples see a specular layer keep a second, white transport of what
that layer reflects (as much again per such pixel, plus its int32 index), resolved with the
white response and added. The night's ambient channels (sky glow, moonlight, one per window
lamp: :mod:`render.light.indirect.night`) are not relit by lamp -- their spectra are fixed
when traced and only their levels change, a multiply -- so they are kept resolved instead:
right after each batch of paths is traced, each channel's node values (the specular layer's
reflection included) become the pixel's responses for the observer weights the pipeline
resolves views with (:func:`ambient_response_weights`: X, Y, Z, Y' and the cone signals L,
M, S), float32 per unit level, 28 bytes per pixel and channel instead of 162.
:func:`indirect_xyz` turns them into absolute X, Y, Z, Y' for any lamps, lumens and dimming per
channel, to be added to the direct light's (a relight casts no ray).

Per pixel rather than per camera sample: the paths of a pixel start on its camera samples in
turn and their mean transport is applied to each sample's own material. Where a pixel's
samples see several materials (edges), each path is weighted by its sample's reflectance over
the pixel's mean reflectance, so that the result is the mean of each sample's reflectance
times its own transport, exactly on the 1 nm grid; what remains is the node representation of
that weighted mean. The errors of this and of other layouts (a plain per-pixel mean, 2 × 2
blocks, per camera sample) are measured by ``python -m render.bench indirect --storage``
(stated in DEVELOPERS.md).

:func:`transport_at_points` is the same tracing at arbitrary surface points (the checks, and
calculations that include interreflected light); :func:`illuminance_from_transport` turns its
luminaires' channels into illuminance for any lamps, lumens and dimming, and
:func:`ambient_illuminance_per_unit_lx` its night-light channels into illuminance per unit
level of each term (times :func:`render.light.indirect.night.ambient_levels` for the scene's levels: a new sky luminance,
moon illuminance or window luminance is a multiply). :func:`without_luminaires` lets a tracer
carry the night light alone.

References
----------
The methods are those of :mod:`render.light.indirect.paths` and
:mod:`render.light.indirect.transport`.
"""

from __future__ import annotations

from collections.abc import Iterator, Sequence
from dataclasses import dataclass, field, replace
from functools import lru_cache
from typing import TYPE_CHECKING

import numba
import numpy as np
from numpy.typing import ArrayLike

from render.colour.colorimetry import colorimetric_weights, lamps_of_channels, response_table
from render.colour.materials import luminous_reflectance
from render.colour.spectra import N_BINS
from render.geometry.mesh import TriangleMesh, face_normals
from render.light.indirect.night import (
    SKY_CHANNEL,
    WINDOW_CHANNEL,
    NightLight,
    ambient_channel_count,
    ambient_levels,
    moon_direction,
)
from render.light.indirect.paths import RR_FIRST_BOUNCE, WINDOW_MIS, trace_paths
from render.light.indirect.transport import (
    NODE_STEP_NM,
    TransportBasis,
    resolve_channels,
    resolve_transport,
    transport_basis,
    transport_table,
)
from render.light.indirect.window_tree import window_tree
from render.light.indirect.windows import LitWindows, lit_windows, window_seen_shares, window_triangles
from render.light.integrator import (
    NEGLIGIBLE_LX,
    SURFACE_OFFSET_M,
    LightBuffers,
    _cast_tiles,
    _luminaire_args,
    _material_gloss,
    scene_cull_grid,
)
from render.light.luminaires import LuminaireSet
from render.rays.bvh import BVH
from render.rays.cameras import seed_key

if TYPE_CHECKING:
    from render.scene.model import Setup
    from render.study import Study

__all__ = [
    "DEFAULT_BOUNCES",
    "DEFAULT_PATHS_PER_PIXEL",
    "IndirectBuffers",
    "IndirectSettings",
    "PathTracer",
    "StoredTransport",
    "ambient_illuminance_per_unit_lx",
    "ambient_response_weights",
    "ambient_responses",
    "illuminance_from_transport",
    "indirect_responses",
    "indirect_xyz",
    "pack_rows",
    "trace_view",
    "transport_at_points",
    "view_transport_tiles",
    "without_luminaires",
]

#: Interreflections a path may have at most when the scene does not say (vertices after the
#: surface the camera sees).
DEFAULT_BOUNCES = 3
#: Interreflection paths per pixel when the scene does not say.
DEFAULT_PATHS_PER_PIXEL = 8
# Salt of the paths' hash key, so that they never reuse the camera jitter's random numbers.
_KEY_SALT = np.uint64(0xA5C3_96E1_D2B4_F078)
# Pixels per parallel work item handed to a thread at a time.
_CHUNK_PIXELS = 16
# Pixels traced per call of the path tracer in a view (a tile of camera samples is traced in
# batches of these): its float64 node values and specular transport are (batch, C + A, 81),
# about 4 MB per channel, whatever the tile (the bits do not depend on it).
_TRACE_BATCH_PIXELS = 8192
# Pixels per block when the resolved ambient responses are scaled and added (float64 copies).
_AMBIENT_BLOCK_PIXELS = 1 << 16


@lru_cache(maxsize=1)
def ambient_response_weights() -> np.ndarray:
    """(N_BINS, 7) the observer weights the night's ambient channels are kept resolved for:
    those of every response a view is resolved with -- the image's
    (:func:`render.colour.colorimetry.colorimetric_weights`: Km·x̄, Km·ȳ, Km·z̄, K'm·V') and
    the colour analysis's (:func:`render.vision.discrimination.cones.cone_rod_weights`: L, M,
    S, K'm·V'), the column they share once. Read-only."""
    from render.vision.discrimination.cones import cone_rod_weights

    columns: list[np.ndarray] = []
    for col in np.concatenate([colorimetric_weights(), cone_rod_weights()], axis=1).T:
        if not any(np.array_equal(col, c) for c in columns):
            columns.append(col)
    w = np.ascontiguousarray(np.stack(columns, axis=1))
    w.setflags(write=False)
    return w


def _ambient_combination(weights: np.ndarray) -> np.ndarray:
    """(7, J): the stored responses' combination giving those of observer ``weights``
    (N_BINS, J): a stored column itself where one equals it, else the least-squares
    combination, refused (ValueError) unless it reproduces the weights to 1e-9."""
    stored = ambient_response_weights()
    out = np.zeros((stored.shape[1], weights.shape[1]))
    for j, col in enumerate(weights.T):
        same = [i for i in range(stored.shape[1]) if np.array_equal(stored[:, i], col)]
        if same:
            out[same[0], j] = 1.0
            continue
        coef = np.linalg.lstsq(stored, col, rcond=None)[0]
        if np.abs(stored @ coef - col).max() > 1e-9 * max(np.abs(col).max(), 1e-300):
            raise ValueError(
                "the night light is kept resolved for X, Y, Z, Y' and the cone signals L, M, S only: "
                "other observer weights need the view traced again"
            )
        out[:, j] = coef
    return out


@dataclass(frozen=True)
class IndirectSettings:
    """How interreflected light is traced: ``bounces`` (at most; ≥ 1, or 0 with night light:
    its direct part only), ``samples_per_pixel`` paths per pixel (or per point), the
    transport's node step (nm), where Russian roulette starts (see
    :data:`render.light.indirect.paths.RR_FIRST_BOUNCE`) and the night's sky glow and
    moonlight (:mod:`render.light.indirect.night`; None or off: none)."""

    bounces: int = DEFAULT_BOUNCES
    samples_per_pixel: int = DEFAULT_PATHS_PER_PIXEL
    node_step_nm: int = NODE_STEP_NM
    rr_first_bounce: int = RR_FIRST_BOUNCE
    night: NightLight | None = None

    @property
    def ambient(self) -> bool:
        """Whether the paths carry the night's ambient channels."""
        return self.night is not None and self.night.on

    @property
    def basis(self) -> TransportBasis:
        return transport_basis(self.node_step_nm)

    def describe(self) -> str:
        """One line for an output's provenance or caption, e.g. "interreflected light: up to
        3 bounces, 8 paths per pixel (Monte Carlo), transport every 5 nm" (the night light is
        described by :func:`render.light.indirect.night.describe_night`)."""
        paths = f"{self.samples_per_pixel} path{'s' if self.samples_per_pixel != 1 else ''} per pixel (Monte Carlo)"
        if self.bounces <= 0:
            return f"no interreflected light (night light only, {paths})"
        return (
            f"interreflected light: up to {self.bounces} bounce{'s' if self.bounces != 1 else ''}, "
            f"{paths}, transport every {self.node_step_nm} nm"
        )


@dataclass
class IndirectBuffers:
    """A view's interreflected transport, at full output per light channel.

    ``values`` (n_pix, C, n_nodes) float16 node values of E_ind/π·T (cd/m² per unit
    transport) relative to ``scale`` (n_pix,) float32 (a pixel's largest value); ``paths``
    (n_pix,) the paths averaged in each pixel; ``spp`` the view's camera samples per pixel;
    ``settings`` and ``seed`` how the paths were traced. With night light
    (``settings.ambient``): ``ambient_resolved`` (n_pix, A, 7) float32 the sky glow's,
    moonlight's and lit windows' (one channel per window lamp: houses', shops', further lamps
    :attr:`render.scene.model.NightLight.window_lamps`) responses per unit level (1 cd/m² of
    sky or window, 1 lx normal illuminance of moon) for :func:`ambient_response_weights`, the
    camera surface's direct light, its reflectance (``ambient_reflectances``, the materials
    traced) and its specular layer's reflection included; ``sky_seen`` (n_pix,) float32 the
    share of a pixel's camera samples that see the sky, ``window_seen`` (n_pix, K) float32 that
    see a lit window of each of the K window lamps (at its luminance over its channel's level);
    ``ambient_spds`` (2 + K, N_BINS) the spectra of the ambient channels; ``ambient_channels``
    which of them ``ambient_resolved`` keeps (the A that were on when traced: a term off then
    stays dark at any level). For the pixels whose camera samples see
    a specular layer, ``spec_index`` (n_g,) int32: the light that layer reflects, white (no
    reflectance to apply), as ``spec_values`` (n_g, C, n_nodes) float16 relative to
    ``spec_scale`` (n_g,) float32 (162 bytes per such pixel and channel plus 8; the ambient
    channels' is in ``ambient_resolved``). The denoise filters ``spec_values`` with ``values``
    and keeps the ambient responses as traced."""

    width_px: int
    height_px: int
    spp: int
    settings: IndirectSettings
    seed: int
    values: np.ndarray
    scale: np.ndarray
    paths: np.ndarray
    channels: list = field(default_factory=list)
    ambient_resolved: np.ndarray | None = None
    ambient_reflectances: np.ndarray | None = None
    sky_seen: np.ndarray | None = None
    ambient_spds: np.ndarray | None = None
    window_seen: np.ndarray | None = None
    ambient_channels: tuple[int, ...] = ()
    spec_index: np.ndarray | None = None
    spec_values: np.ndarray | None = None
    spec_scale: np.ndarray | None = None

    @property
    def nbytes(self) -> int:
        """Bytes held by the stored transport."""
        extra = sum(
            a.nbytes
            for a in (
                self.ambient_resolved,
                self.sky_seen,
                self.window_seen,
                self.spec_index,
                self.spec_values,
                self.spec_scale,
            )
            if a is not None
        )
        return int(self.values.nbytes + self.scale.nbytes + self.paths.nbytes + extra)


class PathTracer:
    """The path-tracing kernel's arguments for one scene, BVH, luminaire set and reflectances
    (built once; :meth:`trace` runs it on any start samples)."""

    def __init__(
        self,
        mesh: TriangleMesh,
        bvh: BVH,
        lights: LuminaireSet,
        reflectances: ArrayLike,
        settings: IndirectSettings,
        *,
        negligible_lx: float = NEGLIGIBLE_LX,
        offset_m: float = SURFACE_OFFSET_M,
        windows: LitWindows | None = None,
        window_mis: int = WINDOW_MIS,
    ) -> None:
        if settings.bounces < 1 and not settings.ambient:
            raise ValueError("interreflection needs at least one bounce")
        self.settings = settings
        #: The luminaires' channels traced (none without bounces), then the ambient ones.
        self.n_channels = lights.n_channels if settings.bounces > 0 else 0
        self.n_ambient = ambient_channel_count(settings.night) if settings.ambient else 0
        night = settings.night if settings.ambient else None
        self.sky_on = bool(night is not None and night.sky_on)
        self.moon_on = bool(night is not None and night.moon_on)
        self.moon = moon_direction(night) if night is not None else np.zeros(3)
        #: The lit windows (``windows`` overrides the mesh's, for checks).
        if windows is None:
            windows = lit_windows(mesh, night) if night is not None and night.windows_on else None
        self.windows = windows
        w = windows if windows is not None and self.n_ambient else None
        if w is not None and w.n and int(w.kind.max()) >= self.n_ambient - WINDOW_CHANNEL:
            # (The kernel writes window channel k at ambient channel 2 + k.)
            raise ValueError(
                f"a lit window of window channel {int(w.kind.max())}, but the night light has "
                f"{self.n_ambient - WINDOW_CHANNEL} window lamps"
            )
        #: The lit windows' light tree (:mod:`render.light.indirect.window_tree`); the kernel's
        #: window rows are in its order.
        self.window_tree = window_tree(w.rect if w is not None else np.zeros((0, 14)))
        if w is not None:
            w = w.subset(self.window_tree.order)
        self.win = np.ascontiguousarray(w.rect if w is not None else np.zeros((0, 14)), np.float64)
        self.win_kind = np.ascontiguousarray(w.kind if w is not None else np.zeros(0), np.int64)
        #: The lit window (tree row) each triangle is part of (-1: none), and how a vertex with
        #: a specular layer gathers their light (:data:`render.light.indirect.paths.WINDOW_MIS`).
        self.tri_window = np.ascontiguousarray(
            window_triangles(w, mesh) if w is not None else np.full(mesh.n_triangles, -1), np.int64
        )
        self.window_mis = int(window_mis)
        basis = settings.basis
        self.basis = basis
        self.rho = np.ascontiguousarray(reflectances, np.float64)
        gloss = _material_gloss(mesh)
        self.f0 = np.ascontiguousarray(gloss[:, 0], np.float64)
        if self.f0.shape[0] != self.rho.shape[0]:
            raise ValueError(f"{self.rho.shape[0]} reflectances for {self.f0.shape[0]} materials")
        #: The specular layer's GGX α, and the base's luminous reflectance (the choice between the
        #: two lobes at a bounce vertex, :func:`render.light.gloss.specular_lobe_probability`).
        self.alpha = np.ascontiguousarray(gloss[:, 1], np.float64)
        self.rho_lum = np.ascontiguousarray(
            np.atleast_1d(luminous_reflectance(self.rho)) if self.rho.shape[0] else np.zeros(0), np.float64
        )
        self.tri_normal = np.ascontiguousarray(face_normals(mesh.triangles_m), np.float64)
        self.tri_material = np.ascontiguousarray(mesh.material_id, np.int32)
        self.tree = (bvh.wide_nodes, bvh.wide_nodes_i32, bvh.tri_vertices, bvh.tri_index, bvh.tri_lanes)
        self.wide_stack = int(bvh.wide_stack)
        self.lum = _luminaire_args(lights)
        grid = scene_cull_grid(lights, bvh, negligible_lx) if bvh.n_triangles else None
        self.grid = grid.kernel_args() if grid is not None else None
        if self.grid is None and self.n_ambient and bvh.n_triangles:
            # No luminaires: a grid whose box holds no point, so every vertex sees no candidate.
            self.grid = (np.array([0.0, 0.0, 1.0, 0.0]), 1.0, 1, 1, np.zeros(2, np.int64), np.zeros(0, np.int64))
        self.offset_m = float(offset_m)

    def trace(
        self,
        point: np.ndarray,
        normal: np.ndarray,
        geo: np.ndarray,
        material: np.ndarray,
        item_id: np.ndarray,
        spp: int,
        seed: int,
        *,
        per_sample: bool = False,
        start_gloss: bool = True,
        view: np.ndarray | None = None,
        spec: np.ndarray | None = None,
    ) -> tuple[np.ndarray, np.ndarray]:
        """Mean node values (rows, C + A, n_nodes) float64 and paths (rows,) of items of ``spp``
        consecutive start samples (rows: items, or samples with ``per_sample``): the
        luminaires' C channels (none without bounces), then the A ambient ones (sky glow,
        moonlight, one per window lamp) with night light; ``start_gloss``: the start surfaces' specular layer takes
        its share of the light (False: the light arriving, as at calculation points);
        ``view`` (samples, 3) unit directions toward the camera (default: along ``normal``);
        ``spec`` (rows, C + A, n_nodes) float64, if given, receives the light the start
        surfaces' specular layer reflects (white; zero where they have none)."""
        n_items = int(item_id.shape[0])
        rows = n_items * spp if per_sample else n_items
        out = np.zeros((rows, self.n_channels + self.n_ambient, self.basis.n_nodes))
        paths = np.zeros(rows, np.int64)
        if spec is None:
            spec = np.zeros((0,) + out.shape[1:])
        elif spec.shape != out.shape or spec.dtype != np.float64 or not spec.flags.c_contiguous:
            raise ValueError(f"the specular transport needs a C-contiguous float64 array of shape {out.shape}")
        else:
            spec[:] = 0.0
        if self.grid is None or n_items == 0 or out.shape[1] == 0:
            return out, paths
        key = seed_key(seed) ^ _KEY_SALT
        # Points and normals as float64 (a view's float32 ones convert exactly, and the kernel
        # reads them as float64): one compiled signature for views and calculation points.
        with numba.parallel_chunksize(_CHUNK_PIXELS):
            trace_paths(
                np.ascontiguousarray(point, np.float64),
                np.ascontiguousarray(normal, np.float64),
                np.ascontiguousarray(geo, np.float64),
                np.ascontiguousarray(normal if view is None else view, np.float64),
                np.ascontiguousarray(material, np.int32),
                np.ascontiguousarray(item_id, np.int64),
                int(spp),
                int(self.settings.samples_per_pixel),
                key,
                int(self.settings.bounces),
                int(self.settings.rr_first_bounce),
                bool(per_sample),
                bool(start_gloss),
                self.rho,
                self.f0,
                self.alpha,
                self.rho_lum,
                self.basis.band_start,
                self.basis.band_weight,
                self.tri_normal,
                self.tri_material,
                self.tree,
                self.wide_stack,
                self.lum,
                self.grid,
                self.offset_m,
                self.n_ambient,
                self.sky_on,
                self.moon_on,
                self.moon,
                self.win,
                self.window_tree.nodes,
                self.window_tree.links,
                self.win_kind,
                self.tri_window,
                self.window_mis,
                out,
                spec,
                paths,
            )
        return out, paths


def pack_rows(moments: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Rows (rows, C, n) as float16 relative to their largest magnitude, and that scale
    (float32; rows of zeros keep scale 0)."""
    m = np.asarray(moments, np.float64)
    top = np.abs(m).reshape(m.shape[0], -1).max(axis=1) if m.size else np.zeros(m.shape[0])
    scale = top.astype(np.float32)
    inv = np.divide(1.0, scale.astype(np.float64), out=np.zeros(m.shape[0]), where=scale > 0)
    return (m * inv[:, None, None]).astype(np.float16), scale


def view_transport_tiles(
    buffers: LightBuffers, tracer: PathTracer, seed: int, *, per_sample: bool = False, progress: bool = False
) -> Iterator[tuple[np.ndarray, np.ndarray, np.ndarray]]:
    """Per tile of the view's camera samples (cast again): the tile's sample indices, and the
    mean node values and path counts per pixel (or per sample with ``per_sample``)."""
    for tile, moments, paths in _transport_tiles(buffers, tracer, seed, per_sample, progress):
        yield tile.index, moments, paths


def _transport_tiles(buffers: LightBuffers, tracer: PathTracer, seed: int, per_sample: bool, progress: bool):
    if buffers.rays is None:
        raise ValueError("these light buffers do not keep how to cast their camera samples")
    spp = buffers.spp
    for tile in _cast_tiles(buffers.rays, spp, progress=progress, label="interreflection"):
        pixel = tile.index[::spp] // spp
        # The kept ids: the materials of the first cast (the same hits).
        material = buffers.response[tile.index]
        moments, paths = tracer.trace(
            tile.point, tile.normal, tile.geo, material, pixel, spp, seed, per_sample=per_sample
        )
        yield tile, moments, paths


def trace_view(
    buffers: LightBuffers,
    lights: LuminaireSet,
    bvh: BVH,
    reflectances: ArrayLike,
    settings: IndirectSettings,
    seed: int,
    *,
    negligible_lx: float = NEGLIGIBLE_LX,
    progress: bool = False,
    ambient_spds: ArrayLike | None = None,
) -> IndirectBuffers:
    """The view's interreflected transport per pixel (see the module text); ``buffers`` from
    :func:`render.light.integrator.render_buffers` or :func:`~render.light.integrator.cast_view`
    with the same ``lights``. With night light (``settings.ambient``) also its ambient
    transport and the share of each pixel's samples that see the sky or each window lamp's lit
    windows, and ``ambient_spds`` (2 + K, N_BINS) the sky's, the moon's and the K window lamps'
    spectra (:meth:`render.study.Study.night_spectra`; needed then)."""
    mesh = buffers.rays.mesh if buffers.rays is not None else None
    if mesh is None:
        raise ValueError("these light buffers do not keep how to cast their camera samples")
    W, H, spp = buffers.width_px, buffers.height_px, buffers.spp
    tracer = PathTracer(mesh, bvh, lights, reflectances, settings, negligible_lx=negligible_lx)
    C, A, n = tracer.n_channels, tracer.n_ambient, tracer.basis.n_nodes
    if A and ambient_spds is None:
        raise ValueError("night light needs the sky's and the moon's spectra")
    values = np.zeros((W * H, C, n), np.float16)
    scale = np.zeros(W * H, np.float32)
    paths = np.zeros(W * H, np.int32)
    # Only the ambient channels that are on are kept (the others would hold zeros), resolved.
    active = [c for c, on in enumerate(settings.night.terms) if on] if A else []
    rho = np.ascontiguousarray(reflectances, np.float64)
    obs = ambient_response_weights()
    spds = np.ascontiguousarray(ambient_spds, np.float64).reshape(A, N_BINS) if A else None
    if active:
        table = transport_table(rho, spds[active], tracer.basis, obs)
        white = transport_table(np.ones((1, N_BINS)), spds[active], tracer.basis, obs)[0]
    amb = np.zeros((W * H, len(active), obs.shape[1]), np.float32) if A else None
    sky_seen = np.zeros(W * H, np.float32) if A else None
    lit = tracer.windows if A and tracer.windows is not None and tracer.windows.n else None
    window_seen = np.zeros((W * H, A - WINDOW_CHANNEL), np.float32) if A else None
    glossy_material = tracer.f0 > 0.0
    g_index, g_values, g_scale = [], [], []
    amb_cols = [C + c for c in active]
    for tile in _cast_tiles(buffers.rays, spp, progress=progress, label="interreflection"):
        n_tile = tile.index.shape[0] // spp
        for p0 in range(0, n_tile, _TRACE_BATCH_PIXELS):
            s0, s1 = p0 * spp, min(n_tile, p0 + _TRACE_BATCH_PIXELS) * spp
            pixel = tile.index[s0:s1:spp] // spp
            material = buffers.response[tile.index[s0:s1]]
            k = material.astype(np.int64)
            seen = (k >= 0) & (k < glossy_material.shape[0])
            gloss_sample = np.zeros(k.shape, np.bool_)
            gloss_sample[seen] = glossy_material[k[seen]]
            any_gloss = bool(gloss_sample.any())
            spec = np.zeros((pixel.shape[0], C + A, n)) if any_gloss else None
            moments, count = tracer.trace(
                tile.point[s0:s1],
                tile.normal[s0:s1],
                tile.geo[s0:s1],
                material,
                pixel,
                spp,
                seed,
                view=-tile.direction[s0:s1],
                spec=spec,
            )
            values[pixel], scale[pixel] = pack_rows(moments[:, :C])
            rows = gloss_sample.reshape(-1, spp).any(axis=1) if any_gloss else None
            if any_gloss:
                g_index.append(pixel[rows].astype(np.int32))
                v, sc = pack_rows(spec[rows][:, :C])
                g_values.append(v)
                g_scale.append(sc)
            paths[pixel] = count
            if A:
                if active:
                    # Each ambient channel resolved per pixel at unit level, its specular
                    # layer's white reflection added (the responses are linear in the light).
                    part = resolve_channels(material, spp, moments[:, amb_cols], table)
                    if any_gloss:
                        g = spec[rows][:, amb_cols]
                        part[rows] += np.matmul(g.transpose(1, 0, 2), white).transpose(1, 0, 2)
                    amb[pixel] = part
                # Samples that leave the scene upward see the sky dome (below the horizon: nothing).
                up = (tile.response[s0:s1] < 0) & (tile.direction[s0:s1, 2] > 0.0)
                sky_seen[pixel] = up.reshape(-1, spp).mean(axis=1)
                if lit is not None:
                    # (Each window at its luminance relative to its channel's level.)
                    window_seen[pixel] = window_seen_shares(
                        lit,
                        tile.point[s0:s1],
                        tile.direction[s0:s1],
                        tile.object_id[s0:s1],
                        spp,
                        A - WINDOW_CHANNEL,
                    )
    if g_index:
        spec_index = np.concatenate(g_index)
        spec_values, spec_scale = np.concatenate(g_values), np.concatenate(g_scale)
    else:
        spec_index = spec_values = spec_scale = None
    return IndirectBuffers(
        W,
        H,
        spp,
        settings,
        int(seed),
        values,
        scale,
        paths,
        list(lights.channels),
        amb,
        rho if A else None,
        sky_seen,
        spds,
        window_seen,
        tuple(active),
        spec_index,
        spec_values,
        spec_scale,
    )


def indirect_xyz(
    indirect: IndirectBuffers,
    response: np.ndarray,
    factors: ArrayLike,
    lamp_spds: Sequence[np.ndarray],
    reflectances: ArrayLike,
) -> np.ndarray:
    """Absolute X, Y, Z, Y' (H, W, 4) of the view's interreflected light for per-channel
    ``factors`` (dimming, lumens) and lamps; ``response`` (S,) the camera samples' materials
    (``LightBuffers.response``), ``reflectances`` (K, N_BINS) per material."""
    return indirect_responses(indirect, response, factors, lamp_spds, reflectances)


def indirect_responses(
    indirect: IndirectBuffers,
    response: np.ndarray,
    factors: ArrayLike,
    lamp_spds: Sequence[np.ndarray],
    reflectances: ArrayLike,
    weights: ArrayLike | None = None,
) -> np.ndarray:
    """The view's interreflected light (H, W, J) for observer ``weights`` (N_BINS, J), as
    :func:`render.colour.colorimetry.resolve_responses` gives the direct light's (default: the
    colorimetric weights, X, Y, Z, Y'; the night light's part, kept resolved, takes
    combinations of :func:`ambient_response_weights` only); the other arguments as for
    :func:`indirect_xyz`."""
    distinct, lamp_of_channel = lamps_of_channels(lamp_spds)
    n_pix = indirect.width_px * indirect.height_px
    w = colorimetric_weights() if weights is None else np.asarray(weights, np.float64).reshape(N_BINS, -1)
    out = np.zeros((n_pix, w.shape[1]))
    if distinct and indirect.values.shape[1]:
        table = transport_table(reflectances, np.array(distinct), indirect.settings.basis, w)
        resolve_transport(response, indirect.spp, indirect.values, indirect.scale, factors, table, lamp_of_channel, out)
        if indirect.spec_index is not None and indirect.spec_index.size:
            white = transport_table(np.ones((1, N_BINS)), np.array(distinct), indirect.settings.basis, w)
            _add_specular(
                indirect.spec_index, indirect.spec_values, indirect.spec_scale, factors, white, lamp_of_channel, out
            )
    if indirect.ambient_resolved is not None:
        _add_ambient(indirect, response, reflectances, w, indirect.settings.night, out)
    return out.reshape(indirect.height_px, indirect.width_px, w.shape[1])


def ambient_responses(
    indirect: IndirectBuffers,
    response: np.ndarray,
    reflectances: ArrayLike,
    night: NightLight | None = None,
    weights: ArrayLike | None = None,
) -> np.ndarray:
    """The night light's part alone (H, W, J) of the view (sky glow and moonlight on the
    surfaces seen, and the sky seen), at the levels of ``night`` (default: those traced; a new
    sky luminance or moon illuminance is a multiply; its moon direction, spectra and which
    terms are on are those traced), for observer ``weights`` that are combinations of
    :func:`ambient_response_weights` (the responses kept; others a ValueError) and the
    reflectances traced. Zero without night light."""
    w = colorimetric_weights() if weights is None else np.asarray(weights, np.float64).reshape(N_BINS, -1)
    out = np.zeros((indirect.width_px * indirect.height_px, w.shape[1]))
    if indirect.ambient_resolved is not None:
        _add_ambient(indirect, response, reflectances, w, night or indirect.settings.night, out)
    return out.reshape(indirect.height_px, indirect.width_px, w.shape[1])


def _add_ambient(
    indirect: IndirectBuffers, response: np.ndarray, reflectances: ArrayLike, w: np.ndarray, night, out: np.ndarray
) -> None:
    """Add the ambient channels at ``night``'s levels (the sky's luminance, the moon's normal
    illuminance, the windows' luminances; their responses per unit level times the level) and
    the sky and lit windows seen (their luminance, white response) to ``out`` (n_pix, J).
    ``reflectances`` must be those the channels were resolved with (a ValueError if not)."""
    levels = ambient_levels(night)
    spds = indirect.ambient_spds
    if levels.shape[0] != spds.shape[0]:
        raise ValueError(
            f"the night light has {levels.shape[0] - WINDOW_CHANNEL} window lamps, the view was traced with "
            f"{spds.shape[0] - WINDOW_CHANNEL}: a window lamp added or taken away traces again"
        )
    kept = list(indirect.ambient_channels)
    if kept:
        traced = indirect.ambient_reflectances
        rho = np.asarray(reflectances, np.float64)
        if traced is not None and (traced.shape != rho.shape or not np.array_equal(traced, rho)):
            raise ValueError("the night light was resolved with other reflectances: new materials trace again")
        combine = _ambient_combination(w)
        resolved = indirect.ambient_resolved
        for p0 in range(0, out.shape[0], _AMBIENT_BLOCK_PIXELS):
            p1 = min(out.shape[0], p0 + _AMBIENT_BLOCK_PIXELS)
            for a, c in enumerate(kept):
                if levels[c] != 0.0:
                    out[p0:p1] += levels[c] * (resolved[p0:p1, a].astype(np.float64) @ combine)
    # What the camera sees of the sky and of lit windows: their luminance, a white (ρ = 1)
    # response of their spectrum at one photopic unit.
    white = response_table(np.zeros((0, N_BINS)), spds, weights=w)[-1]
    seen = [(SKY_CHANNEL, indirect.sky_seen)]
    if indirect.window_seen is not None:
        seen += [(WINDOW_CHANNEL + q, indirect.window_seen[:, q]) for q in range(indirect.window_seen.shape[1])]
    for c, share in seen:
        if levels[c] > 0.0 and share is not None and share.any():
            out += (levels[c] * share.astype(np.float64))[:, None] * white[c][None, :]


def _add_specular(
    index: np.ndarray,
    values: np.ndarray,
    scale: np.ndarray,
    factors: ArrayLike,
    white: np.ndarray,
    lamp_of_channel: np.ndarray,
    out: np.ndarray,
) -> None:
    """Add the light the camera surfaces' specular layer reflects (``values`` relative to
    ``scale`` for the pixels ``index``) resolved with the white (ρ ≡ 1) response table
    ``white`` (1, M, n_nodes, J) to ``out`` (n_pix, J)."""
    part = np.zeros((index.shape[0], out.shape[1]))
    resolve_transport(np.zeros(index.shape[0], np.int32), 1, values, scale, factors, white, lamp_of_channel, part)
    out[index] += part


def transport_at_points(
    points_m: ArrayLike,
    normals: ArrayLike,
    materials: ArrayLike | None,
    tracer: PathTracer,
    seed: int,
    *,
    geo_normals: ArrayLike | None = None,
    first_id: int = 0,
    view_dirs: ArrayLike | None = None,
    specular_out: np.ndarray | None = None,
) -> tuple[np.ndarray, np.ndarray]:
    """Interreflected transport at surface points: (N, C, n_nodes) mean node values of
    E_ind/π·T per channel (cd/m² per unit transport, full output) and the paths per point.

    ``normals`` (N, 3) unit normals on the side that receives (``geo_normals`` the geometric
    ones, default the same), ``materials`` (N,) the points' material indices, whose specular
    layer lets through its share of the light (their reflectance itself is not in the result);
    None: the light arriving at bare points (calculation points). Point ``i`` hashes id
    ``first_id + i``. ``view_dirs`` (N, 3) unit directions toward the viewer (default: the
    normals); ``specular_out`` (N, C, n_nodes) float64, if given, receives the light the
    points' specular layer reflects toward them (white: no reflectance to apply)."""
    pts = np.ascontiguousarray(points_m, np.float64).reshape(-1, 3)
    nrm = np.ascontiguousarray(normals, np.float64).reshape(-1, 3)
    geo = nrm if geo_normals is None else np.ascontiguousarray(geo_normals, np.float64).reshape(-1, 3)
    bare = materials is None
    mat = np.zeros(pts.shape[0], np.int32) if bare else np.ascontiguousarray(materials, np.int32).reshape(-1)
    ids = first_id + np.arange(pts.shape[0], dtype=np.int64)
    view = None if view_dirs is None else np.ascontiguousarray(view_dirs, np.float64).reshape(-1, 3)
    return tracer.trace(pts, nrm, geo, mat, ids, 1, seed, start_gloss=not bare, view=view, spec=specular_out)


def illuminance_from_transport(
    moments: np.ndarray, factors: ArrayLike, lamp_spds: Sequence[np.ndarray], basis: TransportBasis
) -> np.ndarray:
    """Photopic illuminance (lx) of interreflected light from node values (N, C, n_nodes) of
    :func:`transport_at_points`, with per-channel ``factors`` and lamps: π·Σ_c f_c Σ_j b_cj·Y_j
    with Y_j the luminance a white diffuser returns per unit node value of lamp c."""
    distinct, lamp_of_channel = lamps_of_channels(lamp_spds)
    out = np.zeros(moments.shape[0])
    if not distinct:
        return out
    white = transport_table(np.ones((1, basis.reconstruction.shape[1])), np.array(distinct), basis)
    f = np.asarray(factors, np.float64)
    for c in range(moments.shape[1]):
        out += f[c] * (moments[:, c, :] @ white[0, lamp_of_channel[c], :, 1])
    return np.pi * out


@dataclass(frozen=True)
class StoredTransport:
    """Interreflected transport at a set of bare points, kept so that the light of any lamps,
    lumens and dimming is a multiply: ``moments`` (N, C, n_nodes) of
    :func:`transport_at_points` (float64, full output per channel of ``lights``), the
    luminaires ``lights`` it was traced with (their photometric distributions) and the
    ``settings`` (bounces, paths, basis). A setup that changes a photometric distribution
    needs a new trace (:func:`render.light.luminaires.needs_new_evaluation`)."""

    moments: np.ndarray
    lights: LuminaireSet
    settings: IndirectSettings

    def illuminance_lx(self, study: Study, setup: Setup | None = None) -> np.ndarray:
        """(N,) photopic illuminance (lx) of the interreflected light under ``setup`` (lamps,
        lumens and dimming per group, :func:`render.light.luminaires.channel_factors`; the
        study gives the lamps' spectra): :func:`illuminance_from_transport`, no ray. A
        ValueError when ``setup`` changes a photometric distribution."""
        from render.light.luminaires import channel_factors, needs_new_evaluation

        if needs_new_evaluation(self.lights, setup):
            raise ValueError("the setup changes a photometric distribution: the transport must be traced again")
        factors, lamps = channel_factors(self.lights, setup)
        return illuminance_from_transport(self.moments, factors, study.lamp_spds(lamps), self.settings.basis)

    def combined(self, weights: np.ndarray, points: np.ndarray) -> StoredTransport:
        """Weighted sums of the points' transport: ``weights`` (k,) over ``points`` (k, M)
        indices gives M new points, Σ_j w_j·T[points[j, m]] (transport is linear in the light,
        so resolving the sum equals summing the resolved values, up to rounding)."""
        w = np.asarray(weights, np.float64)
        idx = np.asarray(points, np.int64)
        moments = np.einsum("k,kmcn->mcn", w, self.moments[idx])
        return replace(self, moments=moments)

    def subset(self, points: np.ndarray | slice) -> StoredTransport:
        """The transport at some of the points."""
        return replace(self, moments=self.moments[points])


def without_luminaires(lights: LuminaireSet) -> LuminaireSet:
    """``lights`` with no luminaire and no channel (the photometric tables kept), for a tracer
    that carries the night's ambient channels alone: no connection to a luminaire is made,
    and the ambient channels draw the same random numbers as with them (counter-based)."""
    return replace(
        lights,
        names=[],
        channels=[],
        position_m=lights.position_m[:0],
        rotation=lights.rotation[:0],
        scale=lights.scale[:0],
        table=lights.table[:0],
        channel=lights.channel[:0],
        opening_m=lights.opening_m[:0],
        cull_grids={},
    )


def ambient_illuminance_per_unit_lx(moments: np.ndarray, ambient_spds: ArrayLike, basis: TransportBasis) -> np.ndarray:
    """(N, A) photopic illuminance (lx) at bare points per unit level of each ambient channel,
    from its node values (N, A, n_nodes) of :func:`transport_at_points` (the channels after
    the luminaires' ones, sky glow, moonlight, one per window lamp: per 1 cd/m² of sky, per
    1 lx of the moon's normal illuminance, per 1 cd/m² of window) and their spectra
    ``ambient_spds`` (A, N_BINS), any scale (each at one photopic unit): π·Σ_j b_aj·Y_aj with
    Y_aj the luminance a white diffuser returns per unit node value of spectrum a. Times
    :func:`render.light.indirect.night.ambient_levels` (summed over a) it is the night light's illuminance."""
    m = np.asarray(moments, np.float64)
    spds = np.asarray(ambient_spds, np.float64).reshape(-1, N_BINS)
    if spds.shape[0] != m.shape[1]:
        raise ValueError(f"{spds.shape[0]} spectra for {m.shape[1]} ambient channels")
    white = transport_table(np.ones((1, N_BINS)), spds, basis)[0, :, :, 1]  # (A, n_nodes) photopic
    return np.pi * np.einsum("paj,aj->pa", m, white)
