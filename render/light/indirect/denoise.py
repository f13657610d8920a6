"""Edge-aware denoising of a view's interreflected light, once per view, exact under relighting.

A view's interreflected light is kept as a transport per pixel and light channel
(:class:`render.light.indirect.IndirectBuffers`): node values of E_ind/π·T on the 5 nm hat
basis, without the reflectance of the surface the camera sees, which the response tables apply
exactly (:mod:`render.light.indirect.transport`). That transport is already *demodulated*, like
irradiance: texture and material edges on a continuous surface are not in it, only the
geometry's. Its Monte Carlo noise is what :func:`denoise_view` smooths.

**The filter.** The edge-avoiding à-trous wavelet transform of Dammertz et al. (2010): passes
``i = 0 … passes-1`` of the 5 × 5 B3-spline kernel h = (1/16, 1/4, 3/8, 1/4, 1/16) with holes,
its taps ``2^i`` pixels apart, each tap weighed by edge-stopping functions and the weights of a
pixel normalised to sum one. Of the paper's three edge-stopping functions only the geometric
ones are kept:

* normals: ``exp(-|n_p - n_q|² / σ_n²)`` (the paper's normal term), with the mean shading
  normal of the pixel's main surface (below), turned toward the eye;
* planes: ``exp(-s² / σ_x²)`` with ``s = max(|n_p·Δx|, |n_q·Δx|)`` (m), how far each pixel's
  mean hit point lies from the other's tangent plane -- in place of the paper's
  ``exp(-|Δx|² / σ_x²)`` on the distance itself, which would also stop the filter along one
  plane (the hit points are exact, so a plane gives 0 at any distance, while a kerb, a step or
  an object in front of a wall gives its height or depth; our choice, no source for this form:
  σ_x = 2 cm, below the kerbs and steps of a street).

A pixel's guide is its *main surface* (:func:`view_guides`): a pixel on an edge takes one
side's point and normal rather than a blend that matches neither side and would leave it as
noisy as traced.

The paper's third term, on the noisy colour itself, is left out on purpose: with it the weights
would depend on the light and the filter would no longer be linear in the transport. Without
it the weights depend only on the camera samples' geometry, which no lamp, lumen or dimming
changes, so the filter F is one fixed linear map of the transport: for any setup's resolve R
(linear per pixel) ``R(F·T)`` is the filtered light of that setup, filtering once per view
serves every setup relit afterwards, and filter-then-relight equals relight-then-filter of the
demodulated light to float precision (``tests/test_indirect_denoise.py``). For the same reason
scikit-image's bilateral and non-local-means filters, whose weights come from the image's own
values, are not used: they would have to run again on every relit image and would not commute
with relighting. Nor are object or material ids used as edges: a material boundary on one
plane (a marking on a road) does not interrupt the irradiance the transport stands for.

**The specular layer's transport.** Pixels whose camera samples see a specular layer (a wet
road) keep a second, white transport S beside T (:class:`render.light.indirect.IndirectBuffers`
``spec_*``): the interreflected light the layer reflects toward the eye. It is filtered with the
same geometric weights, among those pixels only (a pixel without a layer has no S, and counting
it as zero would darken the layer's edges), so it stays one fixed linear map and relights
exactly (:func:`filter_specular`). S depends on the view direction as well, which the weights
do not look at; over the filter's reach (at most ``2·(2^passes − 1)`` pixels, about 0.7° of
view across a 1280-pixel, 60° image with 3 passes) the view direction turns far less than the
width of a wet road's lobe (GGX α = 0.1, ``render.light.gloss.WET_ROUGHNESS``), so what it
blurs is mostly noise; a nearly smooth layer's sharp reflections are blurred by that much.

Only the luminaires' interreflected transport of a view (T, and S where kept) is ever filtered: not the night's
ambient channels (:mod:`render.light.indirect.night`), which also hold the camera surface's
direct sky light, moonlight and window light, whose shadows are sharp; and never
calculations, which (points through :func:`render.light.indirect.transport_at_points`,
:meth:`render.study.Study.interreflected_illuminance_lx`) take the Monte Carlo estimate as
it is. The filter trades noise for bias (light is averaged over
up to ``2·(2^passes - 1)`` pixels of one plane): an image option, ``[render] indirect_denoise``
or ``--denoise``, stated in the image's provenance (:class:`DenoisedSettings`).

**Storage.** A pixel's values are filtered in float32, as many at a time as two buffers of
:data:`_GROUP_BYTES` (0.5 GB) allow -- all of them up to about 0.4 million pixels with two
channels; 1920 × 1080: 32 at a time -- and kept as float16 against a per-pixel scale; with
several groups a pixel's groups are put on its one scale again (then two float16 roundings
where the traced transport has one). Memory is therefore the stored transport (once more
without ``overwrite``) and those buffers. Every output pixel is the same arithmetic whatever
the threads: the result is reproducible to the bit.

References
----------
- H. Dammertz, D. Sewtz, J. Hanika, H. P. A. Lensch, "Edge-avoiding À-Trous wavelet transform
  for fast global illumination filtering", Proc. High Performance Graphics 2010, 67-75 (the
  kernel with holes, the B3-spline taps, the normal and position edge-stopping functions).
- M. Holschneider et al., "A real-time algorithm for signal analysis with the help of the
  wavelet transform", Wavelets, Springer 1989 (the algorithme à trous) **(from memory)**.
- C. Tomasi, R. Manduchi, "Bilateral filtering for gray and color images", ICCV 1998 (range
  weights on the image's values: the non-linear alternative not used here).
"""

from __future__ import annotations

from dataclasses import dataclass, fields, replace
from typing import TYPE_CHECKING

import numba
import numpy as np

from render.light.indirect.view import IndirectBuffers, IndirectSettings
from render.threads import run_split

if TYPE_CHECKING:
    from render.light.integrator import LightBuffers

__all__ = [
    "DEFAULT_DENOISE",
    "DenoiseGuides",
    "DenoiseSettings",
    "DenoisedSettings",
    "denoise_view",
    "denoised_settings",
    "filter_rows",
    "filter_specular",
    "filter_transport",
    "view_guides",
]

# The B3-spline taps of the à-trous kernel (Dammertz et al. 2010, after Holschneider et al.).
_B3 = np.array([1.0 / 16.0, 1.0 / 4.0, 3.0 / 8.0, 1.0 / 4.0, 1.0 / 16.0])
# Taps of one pass (5 × 5).
_TAPS = 25
# Bytes of the two float32 buffers of the values filtered at a time: groups of a pixel's
# values as wide as this allows (all of them up to about 0.4 million pixels with two channels),
# at least _MIN_GROUP wide.
_GROUP_BYTES = 1 << 29
_MIN_GROUP = 27
# Pixels per band of the conversions around the filter (bounds their temporaries).
_BAND_PIXELS = 1 << 16


@dataclass(frozen=True)
class DenoiseSettings:
    """The filter's passes (tap spacing 1, 2, 4 … pixels) and the widths of its edge-stopping
    functions: ``sigma_normal`` on the distance between unit normals, ``sigma_plane_m`` on the
    distance of a pixel's point from the other's tangent plane (see the module text);
    ``specular``: the white transport of the pixels that see a specular layer is filtered too,
    among those pixels only (:func:`filter_specular`)."""

    passes: int = 3
    sigma_normal: float = 0.3
    sigma_plane_m: float = 0.02
    specular: bool = True

    def __post_init__(self) -> None:
        if not 1 <= self.passes <= 12:
            raise ValueError(f"passes must be 1 to 12, got {self.passes}")
        if not (self.sigma_normal > 0 and self.sigma_plane_m > 0):
            raise ValueError("the edge-stopping widths must be positive")

    @property
    def radius_px(self) -> int:
        """How far, in pixels, light may be carried from (2·(2^passes − 1))."""
        return 2 * ((1 << self.passes) - 1)

    def describe(self) -> str:
        """One line, e.g. "edge-aware denoise of the image (à-trous, 5 passes, normals and
        planes)"."""
        return f"edge-aware denoise of the image (à-trous, {self.passes} passes, normals and planes)"


#: The filter of ``[render] indirect_denoise``.
DEFAULT_DENOISE = DenoiseSettings()


@dataclass(frozen=True)
class DenoisedSettings(IndirectSettings):
    """How a view's interreflected light was traced and then filtered (``filter``): its
    :meth:`describe` adds the filter to the provenance line."""

    filter: DenoiseSettings = DEFAULT_DENOISE

    def describe(self) -> str:
        return f"{super().describe()}; {self.filter.describe()}"


def denoised_settings(settings: IndirectSettings, filter: DenoiseSettings = DEFAULT_DENOISE) -> DenoisedSettings:
    """``settings`` with the filter added (whatever else they hold is kept)."""
    return DenoisedSettings(
        **{f.name: getattr(settings, f.name) for f in fields(IndirectSettings) if f.init}, filter=filter
    )


@dataclass
class DenoiseGuides:
    """Per pixel of a view (row-major, ``width_px`` × ``height_px``): the mean hit point (m)
    and the mean unit shading normal (toward the eye) of the camera samples on the pixel's main
    surface (:func:`view_guides`), and ``valid`` where it sees one; other pixels are neither
    filtered nor used."""

    width_px: int
    height_px: int
    position_m: np.ndarray
    normal: np.ndarray
    valid: np.ndarray


def view_guides(buffers: LightBuffers, settings: DenoiseSettings = DEFAULT_DENOISE) -> DenoiseGuides:
    """The guides of a rendered view from its camera samples (their kept geometry, or the
    samples cast again tile by tile: the same samples the transport started from).

    A pixel's guide is its *main surface*: the sample that the most of the pixel's samples
    would not be stopped from (the filter's own edge-stopping weight above one half; ties go
    to the first) and the mean point and normal of those samples. A pixel on an edge so takes
    the guide of one side rather than a blend that matches neither side, which would leave it
    alone and as noisy as traced."""
    from render.light.integrator import _cast_tiles

    W, H, spp = buffers.width_px, buffers.height_px, buffers.spp
    n_pix = W * H
    n_mat = buffers.emitter_response
    pos = np.zeros((n_pix, 3))
    nrm = np.zeros((n_pix, 3))
    valid = np.zeros(n_pix, np.bool_)
    inv_n2, inv_x2 = 1.0 / settings.sigma_normal**2, 1.0 / settings.sigma_plane_m**2

    def add(index: np.ndarray, point: np.ndarray, normal: np.ndarray, response: np.ndarray) -> None:
        ok = (response >= 0) & (response < n_mat) & np.isfinite(point).all(axis=1)
        pixel = np.ascontiguousarray(index[::spp] // spp)
        _pixel_guides(
            np.ascontiguousarray(point, np.float64),
            np.ascontiguousarray(normal, np.float64),
            ok,
            spp,
            pixel,
            inv_n2,
            inv_x2,
            pos,
            nrm,
            valid,
        )

    if buffers.geometry is not None:
        g = buffers.geometry
        add(np.arange(buffers.n_samples), g.point_m, g.normal, buffers.response)
    else:
        if buffers.rays is None:
            raise ValueError("these light buffers keep neither the samples' geometry nor how to cast it")
        for tile in _cast_tiles(buffers.rays, spp):
            add(tile.index, tile.point, tile.normal, tile.response)
    return DenoiseGuides(W, H, pos, nrm, valid)


@numba.njit(cache=True, nogil=True)
def _edge_exponent(xa, na, a, xb, nb, b, inv_n2, inv_x2):
    """The exponent of the edge-stopping weight between point ``a`` of (xa, na) and point
    ``b`` of (xb, nb): |Δn|²/σ_n² + s²/σ_x² (see the module text)."""
    a0 = na[a, 0] - nb[b, 0]
    a1 = na[a, 1] - nb[b, 1]
    a2 = na[a, 2] - nb[b, 2]
    e = (a0 * a0 + a1 * a1 + a2 * a2) * inv_n2
    d0 = xb[b, 0] - xa[a, 0]
    d1 = xb[b, 1] - xa[a, 1]
    d2 = xb[b, 2] - xa[a, 2]
    sa = abs(na[a, 0] * d0 + na[a, 1] * d1 + na[a, 2] * d2)
    sb = abs(nb[b, 0] * d0 + nb[b, 1] * d1 + nb[b, 2] * d2)
    s = max(sa, sb)
    e += s * s * inv_x2
    return e


@numba.njit(cache=True, nogil=True)
def _pixel_guides(point, normal, ok, spp, pixel, inv_n2, inv_x2, pos, nrm, valid):
    """Per pixel ``pixel[i]`` of samples ``i·spp …``: the main surface's mean point and unit
    normal (see :func:`view_guides`)."""
    limit = np.log(2.0)
    for i in range(pixel.shape[0]):
        first = i * spp
        best = -1
        best_n = 0
        for s in range(first, first + spp):
            if not ok[s]:
                continue
            c = 0
            for t in range(first, first + spp):
                if ok[t] and _edge_exponent(point, normal, s, point, normal, t, inv_n2, inv_x2) < limit:
                    c += 1
            if c > best_n:
                best_n = c
                best = s
        p = pixel[i]
        if best < 0:
            valid[p] = False
            continue
        x0 = 0.0
        x1 = 0.0
        x2 = 0.0
        n0 = 0.0
        n1 = 0.0
        n2 = 0.0
        for t in range(first, first + spp):
            if ok[t] and _edge_exponent(point, normal, best, point, normal, t, inv_n2, inv_x2) < limit:
                x0 += point[t, 0]
                x1 += point[t, 1]
                x2 += point[t, 2]
                n0 += normal[t, 0]
                n1 += normal[t, 1]
                n2 += normal[t, 2]
        length = np.sqrt(n0 * n0 + n1 * n1 + n2 * n2)
        valid[p] = length > 0.0
        if length > 0.0:
            pos[p, 0] = x0 / best_n
            pos[p, 1] = x1 / best_n
            pos[p, 2] = x2 / best_n
            nrm[p, 0] = n0 / length
            nrm[p, 1] = n1 / length
            nrm[p, 2] = n2 / length


@numba.njit(cache=True, nogil=True)
def _taps(p, W, H, step, valid, position, normal, inv_n2, inv_x2, tap_q, tap_w):
    """Pixel ``p``'s taps in one pass: their pixels and normalised weights; returns how many."""
    x = p % W
    y = p // W
    count = 0
    total = 0.0
    for dy in range(-2, 3):
        yy = y + dy * step
        if yy < 0 or yy >= H:
            continue
        for dx in range(-2, 3):
            xx = x + dx * step
            if xx < 0 or xx >= W:
                continue
            q = yy * W + xx
            if not valid[q]:
                continue
            w = _B3[dy + 2] * _B3[dx + 2]
            if q != p:
                w *= np.exp(-_edge_exponent(position, normal, p, position, normal, q, inv_n2, inv_x2))
            tap_q[count] = q
            tap_w[count] = w
            total += w
            count += 1
    inv = 1.0 / total
    for i in range(count):
        tap_w[i] *= inv
    return count


@numba.njit(cache=True, nogil=True)
def _pass_rows(src, valid, position, normal, W, H, step, inv_n2, inv_x2, out, first, stride):
    """One pass of the same filter over float64 rows ``src`` (n_pix, D) into ``out``; pixels
    that are not valid are copied; image rows ``first, first + stride, …``."""
    D = src.shape[1]
    tap_q = np.empty(_TAPS, np.int64)
    tap_w = np.empty(_TAPS)
    tap_f = np.empty(_TAPS, src.dtype)
    for y in range(first, H, stride):
        for x in range(W):
            p = y * W + x
            if not valid[p]:
                for d in range(D):
                    out[p, d] = src[p, d]
                continue
            for d in range(D):
                out[p, d] = 0.0
            k = _taps(p, W, H, step, valid, position, normal, inv_n2, inv_x2, tap_q, tap_w)
            for i in range(k):
                tap_f[i] = tap_w[i]
            for i in range(k):
                q = tap_q[i]
                f = tap_f[i]
                for d in range(D):
                    out[p, d] += f * src[q, d]


def _guide_args(guides: DenoiseGuides, settings: DenoiseSettings) -> tuple:
    return (
        np.ascontiguousarray(guides.valid, np.bool_),
        np.ascontiguousarray(guides.position_m, np.float64),
        np.ascontiguousarray(guides.normal, np.float64),
        int(guides.width_px),
        int(guides.height_px),
    ), (
        1.0 / settings.sigma_normal**2,
        1.0 / settings.sigma_plane_m**2,
    )


def _run_passes(src: np.ndarray, dst: np.ndarray, guides: DenoiseGuides, settings: DenoiseSettings) -> np.ndarray:
    """Every pass on ``src`` (n_pix, D), ``dst`` the second buffer; returns the one holding
    the result (their content is lost)."""
    (valid, pos, nrm, W, H), inv = _guide_args(guides, settings)
    for i in range(settings.passes):
        run_split(_pass_rows, H, src, valid, pos, nrm, W, H, 1 << i, *inv, dst)
        src, dst = dst, src
    return src


def filter_rows(rows: np.ndarray, guides: DenoiseGuides, settings: DenoiseSettings = DEFAULT_DENOISE) -> np.ndarray:
    """The filter in float64 on any per-pixel values ``rows`` (n_pix, ...) (e.g. a relit
    image's demodulated light): the same weights as :func:`filter_transport`, no storage
    rounding."""
    a = np.array(rows, np.float64, order="C")
    n_pix = guides.width_px * guides.height_px
    if a.shape[0] != n_pix:
        raise ValueError(f"{a.shape[0]} rows for a view of {n_pix} pixels")
    src = a.reshape(n_pix, -1)
    return _run_passes(src, np.empty_like(src), guides, settings).reshape(a.shape)


def filter_transport(
    values: np.ndarray,
    scale: np.ndarray,
    guides: DenoiseGuides,
    settings: DenoiseSettings = DEFAULT_DENOISE,
    *,
    overwrite: bool = False,
) -> tuple[np.ndarray, np.ndarray]:
    """The filtered stored transport: float16 ``values`` (n_pix, C, n) relative to float32
    ``scale`` (n_pix,) in, the same format out.

    A pixel's C·n values are filtered in float32 a group at a time (the filter acts on each
    value alone), the groups as wide as :data:`_GROUP_BYTES` of buffers allow; with several
    groups each is kept as float16 against its own per-pixel scale, then a pixel's groups are
    put on its one scale again (two float16 roundings, relative 2⁻¹¹ of the pixel's largest
    value each, where the traced transport has one). ``overwrite``: the result is written into
    ``values`` and ``scale`` (no second copy of the transport)."""
    if values.dtype != np.float16:
        raise TypeError("the stored transport is float16")
    n_pix, C, n = values.shape
    if n_pix != guides.width_px * guides.height_px:
        raise ValueError(f"{n_pix} pixels of transport for a view of {guides.width_px * guides.height_px}")
    out = values if overwrite else np.empty_like(values)
    flat_in = values.reshape(n_pix, C * n)
    flat_out = out.reshape(n_pix, C * n)
    width = min(C * n, max(_MIN_GROUP, _GROUP_BYTES // (8 * max(1, n_pix))))
    groups = [(k, min(C * n, k + width)) for k in range(0, C * n, width)] if width else []
    group_scale = np.zeros((n_pix, len(groups)), np.float32)
    keep = ~np.asarray(guides.valid, np.bool_)
    kept_values, kept_scale = values[keep], scale[keep]
    buffers = (np.empty((n_pix, width), np.float32), np.empty((n_pix, width), np.float32))
    for g, (k0, k1) in enumerate(groups):
        src, dst = buffers if k1 - k0 == width else (np.empty((n_pix, k1 - k0), np.float32) for _ in range(2))
        for p0 in range(0, n_pix, _BAND_PIXELS):
            p1 = min(n_pix, p0 + _BAND_PIXELS)
            src[p0:p1] = flat_in[p0:p1, k0:k1].astype(np.float32) * scale[p0:p1, None]
        res = _run_passes(src, dst, guides, settings)
        for p0 in range(0, n_pix, _BAND_PIXELS):
            p1 = min(n_pix, p0 + _BAND_PIXELS)
            rows = res[p0:p1].astype(np.float64)
            top = np.abs(rows).max(axis=1).astype(np.float32)
            inv = np.divide(1.0, top.astype(np.float64), out=np.zeros(p1 - p0), where=top > 0)
            flat_out[p0:p1, k0:k1] = (rows * inv[:, None]).astype(np.float16)
            group_scale[p0:p1, g] = top
    new_scale = group_scale.max(axis=1) if groups else np.zeros(n_pix, np.float32)
    # With several groups, each on the pixel's one scale (their largest: no value exceeds one).
    for g, (k0, k1) in enumerate(groups if len(groups) > 1 else []):
        ratio = np.divide(group_scale[:, g].astype(np.float64), new_scale, out=np.zeros(n_pix), where=new_scale > 0)
        for p0 in range(0, n_pix, _BAND_PIXELS):
            p1 = min(n_pix, p0 + _BAND_PIXELS)
            block = flat_out[p0:p1, k0:k1].astype(np.float64)
            flat_out[p0:p1, k0:k1] = (block * ratio[p0:p1, None]).astype(np.float16)
    # Pixels that see no surface keep their values as they were, to the bit.
    out[keep] = kept_values
    new_scale[keep] = kept_scale
    if overwrite:
        scale[:] = new_scale
        return out, scale
    return out, new_scale


def denoise_view(
    buffers: LightBuffers,
    settings: DenoiseSettings = DEFAULT_DENOISE,
    *,
    guides: DenoiseGuides | None = None,
    overwrite: bool = False,
) -> IndirectBuffers:
    """The view's interreflected light (``buffers.indirect``) filtered (see the module text),
    as new :class:`IndirectBuffers` whose settings say so (:class:`DenoisedSettings`).
    Only the luminaires' interreflected transport (and its specular layer's, ``spec_values``,
    with ``settings.specular``): the night's ambient channels, which hold
    the camera surface's own sky light, moonlight and window light with their sharp shadows,
    are kept as traced. ``guides`` default to :func:`view_guides`; ``overwrite`` lets the
    filter use the kept transport's arrays."""
    indirect = buffers.indirect
    if indirect is None:
        raise ValueError("these light buffers keep no interreflected light")
    g = view_guides(buffers) if guides is None else guides
    values, scale = filter_transport(indirect.values, indirect.scale, g, settings, overwrite=overwrite)
    spec_values, spec_scale = indirect.spec_values, indirect.spec_scale
    if settings.specular and indirect.spec_index is not None and indirect.spec_index.size:
        spec_values, spec_scale = filter_specular(indirect.spec_index, spec_values, spec_scale, g, settings)
    return replace(
        indirect,
        values=values,
        scale=scale,
        spec_values=spec_values,
        spec_scale=spec_scale,
        settings=denoised_settings(indirect.settings, settings),
    )


def filter_specular(
    index: np.ndarray,
    values: np.ndarray,
    scale: np.ndarray,
    guides: DenoiseGuides,
    settings: DenoiseSettings = DEFAULT_DENOISE,
) -> tuple[np.ndarray, np.ndarray]:
    """The white transport S of the pixels ``index`` (n_g,) that see a specular layer,
    float16 ``values`` (n_g, C, n) relative to ``scale`` (n_g,), filtered as
    :func:`filter_transport` filters T, with the same geometric weights but among these pixels
    only (a pixel without a layer has no S, not an S of zero): the same linear map for every
    setup, so relighting stays exact. Returns the same format, in the same order. Memory: one
    float16 copy of S over the whole view while it runs."""
    n_pix = guides.width_px * guides.height_px
    full = np.zeros((n_pix, *values.shape[1:]), np.float16)
    full[index] = values
    full_scale = np.zeros(n_pix, np.float32)
    full_scale[index] = scale
    has = np.zeros(n_pix, np.bool_)
    has[index] = True
    among = replace(guides, valid=np.asarray(guides.valid, np.bool_) & has)
    out, out_scale = filter_transport(full, full_scale, among, settings, overwrite=True)
    return out[index], out_scale[index]
