"""The stored spectral transport of interreflected light, and its response tables.

A camera sample that sees material ``k0`` receives interreflected light whose spectral radiance
toward the eye is

    L(λ) = ρ_k0(λ) · Σ_c (E_c/π)·T_c(λ)·s_c(λ)

with ``s_c`` the channel's lamp spectrum (unit photopic, as in :mod:`render.colour.colorimetry`),
``E_c/π`` the white-diffuser luminance of the direct light at the path's last vertex and
``T_c(λ)`` the product of the reflectances met between that vertex and the camera's surface
(itself excluded). ``ρ_k0`` and ``s_c`` stay on the 1 nm grid, applied exactly in the response
tables; only the transport ``T_c`` -- a product of reflectances, smooth in λ -- is stored on a
coarser basis, so that relighting (new lamp, lumens, dimming) stays a gather-multiply.

**Basis.** Hat functions ``h_j`` on nodes every :data:`NODE_STEP_NM` (81 nodes from 380 to
780 nm), with ``T`` represented by its L2 projection onto their span: the stored values are the
hat-weighted means ``b_j = Σ_λ h_j(λ)·T(λ) / Σ_λ h_j(λ)`` (computed from the 1 nm throughput the
path tracer carries), and the reconstruction is ``T̃(λ) = Σ_j b_j·φ_j(λ)`` with the dual
functions ``φ_j = w_j·Σ_i (G⁻¹)_ij h_i`` (``G`` the Gram matrix of the hats on the 1 nm grid,
``w_j = Σ_λ h_j``). The response table at the nodes is therefore

    Q[k, l, j, :] = Σ_λ ρ_k(λ)·s_l(λ)·φ_j(λ)·w(λ)·Δλ      (w: Km·x̄, Km·ȳ, Km·z̄, K'm·V')

made by :func:`render.colour.colorimetry.response_table` with node weights. Measured over every
built-in lamp against the exact 1 nm product, with the last reflectance factored out as here:
products of one library reflectance reach a worst luminance error of 0.05 % (point sampling
at the nodes: 0.33 %), of two 0.34 % (0.87 %), of three 1.6 % (3.3 %) -- the worst cases being
dark red products under the narrow-band amber LED and low-pressure sodium, whose lines sit on
the red materials' steep edge. A node step of 1 nm gives the identity basis: the exact
reference the checks compare with.

**Storage.** Per pixel (the mean over its interreflection paths) and per channel, the node
values are kept as float16 relative to a float32 scale per pixel (the largest value of the
pixel), so neither overflow nor subnormal rounding can occur: 81·2 bytes per pixel and channel.
numba has no float16, so the kernels read the bits through a 65 536-entry table
(:func:`half_table`). Channels whose spectrum is fixed when they are traced (the night's
ambient channels) need no relighting by lamp: :func:`resolve_channels` turns their float64
node values into responses per pixel and channel right after tracing, and only those are kept.

References
----------
- Piecewise-linear (hat) finite elements and the L2 projection with their Gram ("mass")
  matrix: standard numerical analysis (e.g. Strang & Fix, *An Analysis of the Finite Element
  Method*, 1973) **(from memory)**.
- IEEE 754-2008 binary16 for the stored values.
- The measurements above: our own, over the material library and lamp catalogue
  (``python -m render.bench indirect --storage``).
"""

from __future__ import annotations

from dataclasses import dataclass
from functools import lru_cache

import numba
import numpy as np
from numba import prange
from numpy.typing import ArrayLike

from render.colour.colorimetry import colorimetric_weights, response_table
from render.colour.spectra import BIN_WIDTH_NM, N_BINS, WAVELENGTH_MIN_NM

__all__ = [
    "NODE_STEP_NM",
    "TransportBasis",
    "half_table",
    "resolve_channels",
    "resolve_transport",
    "transport_basis",
    "transport_table",
]

#: Spacing of the stored transport's nodes, nm (81 nodes over 380-780 nm).
NODE_STEP_NM = 5
# Pixels per parallel work item of the resolve kernel (its scratch is made once per item).
_RESOLVE_CHUNK = 64


@dataclass(frozen=True)
class TransportBasis:
    """Hat functions every ``step_nm`` on the 1 nm grid and their L2 duals.

    ``band_start[j]`` is the first 1 nm bin where hat ``j`` is non-zero and ``band_weight[j]``
    its normalised weights over ``band_weight.shape[1]`` bins (zero past the grid): the stored
    value of node ``j`` is ``Σ band_weight[j, i]·T[band_start[j] + i]``. ``reconstruction``
    (n_nodes, N_BINS) are the dual functions φ_j: ``T̃ = Σ_j b_j φ_j``."""

    step_nm: int
    nodes_nm: np.ndarray
    band_start: np.ndarray
    band_weight: np.ndarray
    reconstruction: np.ndarray

    @property
    def n_nodes(self) -> int:
        return int(self.nodes_nm.size)

    def project(self, transport: ArrayLike) -> np.ndarray:
        """Stored node values of transports (..., N_BINS) on the 1 nm grid."""
        t = np.asarray(transport, np.float64)
        out = np.zeros(t.shape[:-1] + (self.n_nodes,))
        for i in range(self.band_weight.shape[1]):
            idx = np.minimum(self.band_start + i, N_BINS - 1)
            out += self.band_weight[:, i] * t[..., idx]
        return out

    def reconstruct(self, nodes: ArrayLike) -> np.ndarray:
        """The transport (..., N_BINS) the node values (..., n_nodes) stand for."""
        return np.asarray(nodes, np.float64) @ self.reconstruction


@lru_cache(maxsize=4)
def transport_basis(step_nm: int = NODE_STEP_NM) -> TransportBasis:
    """The hat basis every ``step_nm`` nm (a whole number dividing 400; 1 is the identity)."""
    step = int(step_nm)
    span = int(round((N_BINS - 1) * BIN_WIDTH_NM))
    if step < 1 or span % step:
        raise ValueError(f"node step must be a whole number of nm dividing {span}, got {step_nm!r}")
    bins = np.arange(N_BINS, dtype=np.float64)
    centres = np.arange(0, N_BINS, step, dtype=np.float64)
    hats = np.clip(1.0 - np.abs(bins[None, :] - centres[:, None]) / step, 0.0, None)
    sums = hats.sum(axis=1)
    width = 2 * step - 1
    start = np.maximum(centres.astype(np.int64) - (step - 1), 0)
    weight = np.zeros((centres.size, width))
    for j in range(centres.size):
        stop = min(start[j] + width, N_BINS)
        weight[j, : stop - start[j]] = hats[j, start[j] : stop] / sums[j]
    gram = hats @ hats.T
    dual = sums[:, None] * np.linalg.solve(gram, hats)
    for a in (start, weight, dual):
        a.setflags(write=False)
    nodes = WAVELENGTH_MIN_NM + centres * BIN_WIDTH_NM
    nodes.setflags(write=False)
    return TransportBasis(step, nodes, start, weight, dual)


def transport_table(
    reflectances: ArrayLike, lamp_spds: ArrayLike, basis: TransportBasis, weights: ArrayLike | None = None
) -> np.ndarray:
    """``Q`` (K, M, n_nodes, J): per unit stored node value, the response of a surface of
    reflectance ``k`` lit through the transport by lamp ``l`` (reflectances and lamps on the
    1 nm grid, lamps normalised to one photopic unit as for direct light), for observer
    ``weights`` (N_BINS, J) -- by default :func:`render.colour.colorimetry.colorimetric_weights`,
    the absolute X, Y, Z, Y'."""
    w = colorimetric_weights() if weights is None else np.asarray(weights, np.float64).reshape(N_BINS, -1)
    nodes = basis.reconstruction.T[:, :, None] * w[:, None, :]
    table = response_table(reflectances, lamp_spds, weights=nodes)
    return np.ascontiguousarray(table[:-1])


@lru_cache(maxsize=1)
def half_table() -> np.ndarray:
    """float64 value of every float16 bit pattern (numba reads stored values through it)."""
    table = np.arange(1 << 16, dtype=np.uint32).astype(np.uint16).view(np.float16).astype(np.float64)
    table.setflags(write=False)
    return table


@numba.njit(cache=True, nogil=True, parallel=True)
def _resolve_kernel(response, n_materials, spp, bits, half, scale, factors, lamp_of_channel, table, out):
    """out[p, :] += Σ over the pixel's samples seeing a surface of material k, over channels c
    and nodes j: factor_c · stored[p, c, j] · Q[k, lamp_c, j, :] / spp. Samples of a pixel
    that see the same material are gathered first (usually one group); the responses are
    summed four at a time (``table``'s last axis is a multiple of four)."""
    n_pix = out.shape[0]
    C = bits.shape[1]
    n = bits.shape[2]
    J = table.shape[3]
    inv = 1.0 / spp
    n_chunks = (n_pix + _RESOLVE_CHUNK - 1) // _RESOLVE_CHUNK
    for chunk in prange(n_chunks):
        mats = np.empty(spp, np.int64)
        counts = np.empty(spp)
        for p in range(chunk * _RESOLVE_CHUNK, min(n_pix, (chunk + 1) * _RESOLVE_CHUNK)):
            g = 0
            for s in range(spp):
                k = response[p * spp + s]
                if k < 0 or k >= n_materials:
                    continue
                found = -1
                for q in range(g):
                    if mats[q] == k:
                        found = q
                        break
                if found < 0:
                    mats[g] = k
                    counts[g] = 1.0
                    g += 1
                else:
                    counts[found] += 1.0
            for jj in range(0, J, 4):
                a0 = 0.0
                a1 = 0.0
                a2 = 0.0
                a3 = 0.0
                for q in range(g):
                    k = mats[q]
                    w = counts[q] * inv * scale[p]
                    if w == 0.0:
                        continue
                    for c in range(C):
                        f = w * factors[c]
                        if f == 0.0:
                            continue
                        l = lamp_of_channel[c]
                        for j in range(n):
                            v = half[bits[p, c, j]]
                            if v == 0.0:
                                continue
                            v *= f
                            a0 += v * table[k, l, j, jj]
                            a1 += v * table[k, l, j, jj + 1]
                            a2 += v * table[k, l, j, jj + 2]
                            a3 += v * table[k, l, j, jj + 3]
                out[p, jj] += a0
                out[p, jj + 1] += a1
                out[p, jj + 2] += a2
                out[p, jj + 3] += a3


def resolve_transport(
    response: np.ndarray,
    spp: int,
    values: np.ndarray,
    scale: np.ndarray,
    factors: ArrayLike,
    table: np.ndarray,
    lamp_of_channel: np.ndarray,
    out: np.ndarray,
) -> np.ndarray:
    """Add the interreflected responses of every pixel to ``out`` (n_pix, J).

    ``response`` (S,) the camera samples' materials (values outside ``table``'s materials --
    nothing seen, a luminous opening -- get none); ``values`` (n_pix, C, n_nodes) float16 node
    values relative to ``scale`` (n_pix,); ``table`` (K, M, n_nodes, J) from
    :func:`transport_table`."""
    if values.dtype != np.float16:
        raise TypeError("the stored transport is float16")
    J = table.shape[3]
    pad = (-J) % 4
    padded = np.concatenate([table, np.zeros(table.shape[:3] + (pad,))], axis=3) if pad else table
    acc = np.zeros((out.shape[0], J + pad))
    _resolve_kernel(
        np.ascontiguousarray(response, np.int32),
        int(table.shape[0]),
        int(spp),
        np.ascontiguousarray(values).view(np.uint16),
        half_table(),
        np.ascontiguousarray(scale, np.float64),
        np.ascontiguousarray(factors, np.float64),
        np.ascontiguousarray(lamp_of_channel, np.int64),
        np.ascontiguousarray(padded, np.float64),
        acc,
    )
    out += acc[:, :J]
    return out


def resolve_channels(response: np.ndarray, spp: int, moments: np.ndarray, table: np.ndarray) -> np.ndarray:
    """Each channel's responses per pixel, (P, A, J) float64, from float64 node values
    ``moments`` (P, A, n_nodes) and a response table (K, A, n_nodes, J) of
    :func:`transport_table` whose lamp axis is the channels (channel ``a`` lit by spectrum
    ``a``): Σ over the pixel's ``spp`` camera samples ``response`` (P·spp,) seeing material k
    of Σ_j moments[p, a, j]·Q[k, a, j, :] / spp -- what :func:`resolve_transport` gives each
    channel at factor 1, without the float16 rounding of the stored values (samples outside
    ``table``'s materials get none). Computed per material among the pixels that see it."""
    P, A, n = moments.shape
    K = table.shape[0]
    if table.shape[1:3] != (A, n):
        raise ValueError(f"a table for {table.shape[1]} channels of {table.shape[2]} nodes, values {moments.shape}")
    out = np.zeros((P, A, table.shape[3]))
    mat = np.asarray(response).reshape(P, int(spp))
    valid = (mat >= 0) & (mat < K)
    for k in np.unique(mat[valid]):
        count = (mat == k).sum(axis=1)
        rows = np.flatnonzero(count)
        part = np.matmul(moments[rows].transpose(1, 0, 2), table[k])  # (A, rows, J)
        out[rows] += (count[rows] / spp)[:, None, None] * part.transpose(1, 0, 2)
    return out
