"""From light buffers to absolute colorimetry: X, Y, Z (Y in cd/m²), scotopic luminance, or
any other observer's responses.

The **response table** ``R[k, l, c]`` holds, for reflectance ``k``, lamp ``l`` and observer
weight ``w_c``, the response to the light a surface of that reflectance returns per cd/m² of
"white-diffuser luminance" (E/π) of that lamp's light:

    R[k, l, c] = Σ ρ_k(λ) s_l(λ) w_c(λ) Δλ

with ``s_l`` the lamp's spectral power distribution normalised so that Km·Σ s_l V Δλ = 1 and
``w_c`` any weights on the grid (one column per response). The colorimetric weights
(:func:`colorimetric_weights`) are Km·x̄, Km·ȳ, Km·z̄ and K'm·V':

    R[k, l] = (Km·Σ ρ_k s_l x̄ Δλ, Km·Σ ρ_k s_l ȳ Δλ, Km·Σ ρ_k s_l z̄ Δλ, K'm·Σ ρ_k s_l V' Δλ)

whose ``Y`` entry is the luminous reflectance of ``k`` under lamp ``l`` and whose ``Y'`` entry
for ρ = 1 is the lamp's S/P ratio. Other weights give other responses from the same buffers
with the same code: the colour-discrimination analysis passes the CIE 2006 cone fundamentals
beside V' (:func:`render.vision.discrimination.cones.cone_rod_weights`); weights with more axes
(``(N_BINS, n_nodes, C)``, e.g. each observer function times a hat function on coarser spectral
nodes) give a table with those axes, ``(K + 1, M, n_nodes, C)``. The last row (ρ = 1) serves
visible luminous openings and the spectrally neutral specular layer. The tables cost
``n_materials × n_lamps`` integrals on the 1 nm grid, once; per pixel the cost is independent of
the number of wavelength bins.

:func:`resolve` combines buffers, per-channel factors and lamps into the colorimetric images
(:class:`ViewColorimetry`); :func:`resolve_responses` does the same for any weights.

References
----------
- CIE 15:2004 / CIE 015:2018 *Colorimetry*: tristimulus values X, Y, Z with the CIE 1931 2°
  colour-matching functions and Km = 683 lm/W.
- CIE 1951 scotopic luminous efficiency V'(λ) with K'm = 1700 lm/W (scotopic luminance).
"""

from __future__ import annotations

from collections.abc import Sequence
from dataclasses import dataclass
from typing import TYPE_CHECKING

import numba
import numpy as np
from numpy.typing import ArrayLike

from render.colour.observers import KM_LM_PER_W, KM_SCOTOPIC_LM_PER_W, cmfs_xyz, photopic_lef, scotopic_lef
from render.colour.spectra import BIN_WIDTH_NM
from render.threads import run_split

if TYPE_CHECKING:
    from render.light.integrator import LightBuffers

__all__ = [
    "ViewColorimetry",
    "coarsen",
    "colorimetric_weights",
    "lamps_of_channels",
    "resolve",
    "resolve_responses",
    "response_table",
    "unit_photopic",
]


def unit_photopic(spd: ArrayLike) -> np.ndarray:
    """A lamp spectrum scaled so that Km·Σ s V Δλ = 1 (one photopic unit)."""
    spd = np.asarray(spd, np.float64)
    p = KM_LM_PER_W * float(spd @ photopic_lef()) * BIN_WIDTH_NM
    if not p > 0:
        raise ValueError("lamp spectrum has no photopic content")
    return spd / p


def coarsen(values: ArrayLike, step_bins: int, mean: bool) -> np.ndarray:
    """Spectra on a coarser grid of ``step_bins`` 1 nm bins per band (last axis): band sums of
    densities (power conserved) or band means of reflectances and observer functions."""
    v = np.asarray(values, np.float64)
    n = v.shape[-1]
    pad = (-n) % step_bins
    if pad:
        v = np.concatenate([v, np.zeros(v.shape[:-1] + (pad,))], axis=-1)
    bands = v.reshape(v.shape[:-1] + (-1, step_bins))
    counts = np.full(bands.shape[-2], step_bins, np.float64)
    if pad:
        counts[-1] = step_bins - pad
    return bands.sum(axis=-1) / counts if mean else bands.sum(axis=-1)


def colorimetric_weights() -> np.ndarray:
    """(N_BINS, 4) weights Km·x̄, Km·ȳ, Km·z̄, K'm·V': the response table's default columns,
    absolute X, Y, Z and scotopic Y' in cd/m² (CIE 15:2004, CIE 1951 scotopic)."""
    return np.concatenate([KM_LM_PER_W * cmfs_xyz(), KM_SCOTOPIC_LM_PER_W * scotopic_lef()[:, None]], axis=1)


def response_table(
    reflectances: ArrayLike, lamp_spds: ArrayLike, step_nm: int = 1, weights: ArrayLike | None = None
) -> np.ndarray:
    """``R`` of shape (K + 1, M, *C) for K reflectances (K, N_BINS), M lamps (M, N_BINS) and
    observer ``weights`` of shape (N_BINS, *C) (default :func:`colorimetric_weights`, C = 4);
    row K is the white (ρ = 1) response used for luminous openings.

    ``step_nm`` > 1 evaluates the integrals on a coarser grid (band means of reflectance and
    observer functions, band powers of the lamps), e.g. 5 nm to compare with 1 nm; lampcast
    uses 1 nm, which costs the same per pixel."""
    n = photopic_lef().size
    rho = np.vstack([np.asarray(reflectances, np.float64).reshape(-1, n), np.ones((1, n))])
    s = np.vstack([unit_photopic(x) for x in np.asarray(lamp_spds, np.float64).reshape(-1, n)]) * BIN_WIDTH_NM
    w = colorimetric_weights() if weights is None else np.asarray(weights, np.float64)
    if w.ndim < 1 or w.shape[0] != n:
        raise ValueError(f"weights must have {n} rows, one per bin of the grid; got shape {w.shape}")
    tail = w.shape[1:]
    w = w.reshape(n, -1)
    if step_nm > 1:
        k = int(round(step_nm / BIN_WIDTH_NM))
        rho, s, w = coarsen(rho, k, True), coarsen(s, k, False), coarsen(w.T, k, True).T
    # (K+1, N) x (M, N) x (N, C) -> (K+1, M, C)
    table = np.einsum("kn,mn,nc->kmc", rho, s, w)
    return table.reshape(table.shape[:2] + tail)


#: Responses the resolve kernel accumulates at once (tables are padded to a multiple of it).
_GROUP = 4


@numba.njit(cache=True, nogil=True, _nrt=False)
def _resolve_pixel(p, row, response, value, spec, factors, lamp_of_channel, table, spp, out):
    """Pixel ``p``'s responses into ``out[row]``. Four responses at a time in registers;
    ``table`` (K + 1, M, J) and ``out`` (P, J) have J a multiple of four. With J = 4 the sums
    run in the same order as one pass per response. Compiled without numba's reference
    counting (it takes arrays and makes none): a call per pixel would otherwise count a
    reference to each array on entry and release it on return, atomic operations."""
    C = value.shape[1]
    white = table.shape[0] - 1
    inv = 1.0 / spp
    for j in range(0, table.shape[2], 4):
        a0 = 0.0
        a1 = 0.0
        a2 = 0.0
        a3 = 0.0
        for s in range(p * spp, p * spp + spp):
            k = response[s]
            if k < 0:
                continue
            for c in range(C):
                v = value[s, c] * factors[c]
                if v == 0.0:
                    continue
                l = lamp_of_channel[c]
                a0 += v * table[k, l, j]
                a1 += v * table[k, l, j + 1]
                a2 += v * table[k, l, j + 2]
                a3 += v * table[k, l, j + 3]
            # The specular layer is spectrally neutral: the lamp's own light (white response).
            for c in range(C):
                v = spec[s, c] * factors[c]
                if v == 0.0:
                    continue
                l = lamp_of_channel[c]
                a0 += v * table[white, l, j]
                a1 += v * table[white, l, j + 1]
                a2 += v * table[white, l, j + 2]
                a3 += v * table[white, l, j + 3]
        out[row, j] = a0 * inv
        out[row, j + 1] = a1 * inv
        out[row, j + 2] = a2 * inv
        out[row, j + 3] = a3 * inv


#: Pixels per work item of the resolve kernel.
_ITEM = 256


@numba.njit(cache=True, nogil=True)
def _resolve_items(response, value, spec, factors, lamp_of_channel, table, spp, pixels, out, first, stride):
    """Pixel ``pixels[i]`` into ``out[i]``, or with no ``pixels`` (an empty list) every pixel
    ``i`` into ``out[i]``; rows in items of :data:`_ITEM`, items ``first, first + stride, ...``
    (:func:`render.threads.run_split`). A serial kernel for both uses, so that
    :func:`_resolve_pixel` is compiled once and no ``prange`` loop is compiled."""
    n = out.shape[0]
    every = pixels.shape[0] == 0
    for item in range(first, (n + _ITEM - 1) // _ITEM, stride):
        for i in range(item * _ITEM, min(n, (item + 1) * _ITEM)):
            p = i if every else pixels[i]
            _resolve_pixel(p, i, response, value, spec, factors, lamp_of_channel, table, spp, out)


@numba.njit(cache=True, nogil=True)
def _surface_sums(response, value, emitter_response):
    """Number of samples seeing a surface, and the per-channel sum of their values."""
    n = 0
    sums = np.zeros(value.shape[1])
    for s in range(response.shape[0]):
        k = response[s]
        if k < 0 or k == emitter_response:
            continue
        n += 1
        for c in range(value.shape[1]):
            sums[c] += value[s, c]
    return n, sums


def _any_per_pixel(emitter: np.ndarray, spp: int) -> np.ndarray:
    """Per pixel: does any of its ``spp`` consecutive samples see a luminous opening (numpy:
    one pass, and no kernel to compile on first use)."""
    n_pix = emitter.shape[0] // spp
    return np.asarray(emitter[: n_pix * spp].reshape(n_pix, spp) >= 0).any(axis=1)


@dataclass
class ViewColorimetry:
    """Absolute colorimetry of a view.

    ``xyz_cd_m2`` (H, W, 3): CIE 1931 XYZ, Y = photopic luminance in cd/m².
    ``scotopic_cd_m2`` (H, W): scotopic luminance (K'm·Σ L V' Δλ), cd/m².
    """

    xyz_cd_m2: np.ndarray
    scotopic_cd_m2: np.ndarray
    luminaire_mask: np.ndarray | None = None  # (H, W) bool: a luminous opening is seen
    white_xyz: np.ndarray | None = None  # (3,) the lamp light on a white diffuser, cd/m²
    white_scotopic: float | None = None

    @property
    def luminance_cd_m2(self) -> np.ndarray:
        return self.xyz_cd_m2[..., 1]


def lamps_of_channels(lamp_spds: Sequence[np.ndarray]) -> tuple[list[np.ndarray], np.ndarray]:
    """The distinct spectra among the channels' (each once, in order of first use) and, per
    channel, the index of its spectrum among them."""
    spd_list: list[np.ndarray] = []
    lamp_of_channel = np.zeros(len(lamp_spds), np.int64)
    for c, spd in enumerate(lamp_spds):
        for j, other in enumerate(spd_list):
            if other is spd or np.array_equal(other, spd):
                lamp_of_channel[c] = j
                break
        else:
            lamp_of_channel[c] = len(spd_list)
            spd_list.append(np.asarray(spd))
    return spd_list, lamp_of_channel


def _resolve_table(
    buffers: LightBuffers,
    factors: ArrayLike,
    lamp_of_channel: np.ndarray,
    table: np.ndarray,
    pixels: np.ndarray | None = None,
):
    """(H, W, J) per-pixel responses of a flat table (K + 1, M, J) over the buffers; with
    ``pixels`` ((H, W) bool) only those pixels are resolved and the others are 0."""
    n_pix = buffers.width_px * buffers.height_px
    n_out = table.shape[2]
    pad = (-n_out) % _GROUP
    if pad:
        table = np.concatenate([table, np.zeros(table.shape[:2] + (pad,))], axis=2)
    spec = buffers.spec_cd_m2 if buffers.spec_cd_m2 is not None else np.zeros_like(buffers.value_cd_m2)
    args = (
        buffers.response,
        buffers.value_cd_m2,
        spec,
        np.ascontiguousarray(factors, np.float64),
        lamp_of_channel,
        np.ascontiguousarray(table),
        buffers.spp,
    )
    if pixels is None:
        out = np.zeros((n_pix, n_out + pad))
        run_split(_resolve_items, (n_pix + _ITEM - 1) // _ITEM, *args, np.zeros(0, np.int64), out)
    else:
        mask = np.asarray(pixels, dtype=bool)
        if mask.shape != (buffers.height_px, buffers.width_px):
            raise ValueError(f"pixels must be an (H, W) mask of the buffers' {buffers.height_px}×{buffers.width_px}")
        where = np.flatnonzero(mask).astype(np.int64)
        some = np.zeros((where.size, n_out + pad))
        run_split(_resolve_items, (where.size + _ITEM - 1) // _ITEM, *args, where, some)
        out = np.zeros((n_pix, n_out + pad))
        out[where] = some
    return out[:, :n_out].reshape(buffers.height_px, buffers.width_px, n_out)


def _channel_table(
    lamp_spds: Sequence[np.ndarray], reflectances: ArrayLike, step_nm: int, weights: np.ndarray
) -> tuple[np.ndarray, np.ndarray]:
    """The flat response table (K + 1, M, J) of the channels' distinct lamps and each
    channel's lamp index."""
    spd_list, lamp_of_channel = lamps_of_channels(lamp_spds)
    n_out = int(np.prod(weights.shape[1:], dtype=np.int64))
    if spd_list:
        table = response_table(reflectances, np.array(spd_list), step_nm, weights).reshape(
            len(reflectances) + 1, len(spd_list), n_out
        )
    else:
        table = np.zeros((len(reflectances) + 1, 1, n_out))
    return table, lamp_of_channel


def resolve_responses(
    buffers: LightBuffers,
    factors: ArrayLike,
    lamp_spds: Sequence[np.ndarray],
    reflectances: ArrayLike,
    weights: ArrayLike,
    step_nm: int = 1,
    *,
    pixels: ArrayLike | None = None,
) -> np.ndarray:
    """Per-pixel responses of any observer ``weights`` (N_BINS, *C) from light buffers:
    (H, W, *C), the mean over each pixel's samples of Σ_channels value·factor·R[k, lamp]
    (:func:`response_table`). Arguments as :func:`resolve`; e.g. the CIE 2006 cone signals and
    scotopic luminance of :func:`render.vision.discrimination.cones.cone_rod_weights`.
    ``pixels``: an (H, W) bool mask; only those pixels are resolved (the same values, to the
    bit, as resolving every pixel) and the others are 0, for callers that read a few objects'
    pixels of the image."""
    w = np.asarray(weights, np.float64)
    table, lamp_of_channel = _channel_table(lamp_spds, reflectances, step_nm, w)
    out = _resolve_table(buffers, factors, lamp_of_channel, table, None if pixels is None else np.asarray(pixels))
    return out.reshape(out.shape[:2] + w.shape[1:])


def resolve(
    buffers: LightBuffers,
    factors: ArrayLike,
    lamp_spds: Sequence[np.ndarray],
    reflectances: ArrayLike,
    step_nm: int = 1,
) -> ViewColorimetry:
    """Images from light buffers.

    Parameters
    ----------
    buffers
        :class:`render.light.integrator.LightBuffers`.
    factors
        (C,) multiplier per channel (dimming, lumens change).
    lamp_spds
        One spectrum (N_BINS,) per channel (any scale; each is normalised to unit photopic).
    reflectances
        (K, N_BINS) reflectance per material index of the buffers.
    step_nm
        Spectral band width of the colorimetric integrals (see :func:`response_table`).
    """
    table, lamp_of_channel = _channel_table(lamp_spds, reflectances, step_nm, colorimetric_weights())
    out = _resolve_table(buffers, factors, lamp_of_channel, table)
    # The illuminant's colour: each channel's mean white-diffuser luminance over the lit surfaces
    # seen, times the white response of its lamp.
    n_surf, sums = _surface_sums(buffers.response, buffers.value_cd_m2, buffers.emitter_response)
    white = np.zeros(4)
    if n_surf:
        mean = sums / n_surf * factors
        for c in range(len(lamp_spds)):
            white += mean[c] * table[-1, lamp_of_channel[c]]
    mask = _any_per_pixel(buffers.emitter, buffers.spp).reshape(buffers.height_px, buffers.width_px)
    return ViewColorimetry(
        np.ascontiguousarray(out[..., :3]),
        np.ascontiguousarray(out[..., 3]),
        mask,
        white[:3] if white[1] > 0 else None,
        float(white[3]) if white[1] > 0 else None,
    )
