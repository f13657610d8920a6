"""Disability glare: light scattered in the eye veils the retinal image (CIE 146:2002).

Glare spread functions (θ the angle between glare source and line of sight, degrees;
``L_veil / E_glare`` in sr⁻¹, E_glare the illuminance at the eye from the source on a plane
perpendicular to the line of sight):

* CIE 146:2002 general disability glare equation, 0.1° < θ < 100°, age A (years), eye
  pigmentation p (0 very dark, 0.5 brown, 1.0 light, 1.2 very light blue eyes):
  ``10/θ³ + (5/θ² + 0.1·p/θ)·(1 + (A/62.5)⁴) + 0.0025·p``
* CIE 146:2002 age-adjusted Stiles-Holladay equation, 1° < θ < 30°:
  ``10·(1 + (A/70)⁴)/θ²``.

Applying it to an image
-----------------------
Every pixel is a glare source: its illuminance at the eye on the plane perpendicular to the
direction of pixel x is ``E = L·dΩ·cos θ`` (dΩ the pixel's exact solid angle from
:class:`ViewGeometry`), and ``L_veil(x) = Σ_sources L·dΩ·cos θ·f(θ)``. The sum is a convolution
once pixel positions are expressed as angles. A pinhole image is not equiangular (a pixel 30°
off axis spans 0.75× the angle of a central one radially), so the source illuminances are
first spread (bilinear splat, which conserves their sum) onto an **azimuthal equidistant**
grid about the optical axis with the central pixel pitch; angles in that map are exact from
the axis and within sin θ/θ (0.95 at 30°) across it. The kernel ``f(θ)·max(cos θ, 0)`` is
averaged over each grid cell (supersampled near the centre, where it changes fast), set to
zero below the model's lower angle and above its upper one (90° at most: a source behind the
plane does not illuminate it), and applied by zero-padded FFT convolution (no wrap-around:
a grid of ``g`` cells and a kernel reaching ``h`` cells need transforms of at least ``g + h``
points, not the ``g + 2h`` of the full linear convolution, because only the grid's own cells
are read back). The veil is read back at each pixel by bilinear interpolation.

Cost: the kernel, its spectrum and every pixel's place on the grid depend on the view and the
eye only (:class:`GlareOptics`); they are made once per view and shared by the images of every
setup seen from it. The transforms stay in double precision: single precision leaves
round-off of about 1e-7 of the brightest veil everywhere, which shows where the veil must be
zero (beyond the 30° reach of the Stiles-Holladay equation) and in the darkest corners of a
view with a lantern in it.

Energy: the direct image is **attenuated** by the fraction of light the model scatters away
from a point's image into angles between its limits, ``F = ∫ f(θ)·cos θ dΩ`` (numerical
quadrature), and the veil adds that light back spread out. So a uniform field stays uniform
(apart from light that would arrive from outside the view, which is not rendered), and the
total light reaching the retina is conserved instead of growing by F (about 25 % for the
general equation at 25 years, most of it within 1° of the source). Veil and attenuation are
applied identically to X, Y, Z and the scotopic luminance (the spread is taken as wavelength
independent; the pigmentation term's reddish bias is ignored).

References
----------
- CIE 146:2002, "CIE equations for disability glare" (CIE Collection on Glare 2002): the
  three equations and their domains. The domains and the role of p above 30° are as in the
  CIE's published summary; the general equation's coefficients and the pigmentation scale are
  from secondary sources (docs/references.md).
- J. J. Vos (2003), "On the cause of disability glare and its dependence on glare angle, age
  and ocular pigmentation", Clinical and Experimental Optometry 86(6), 363-370: the
  age-adjusted Stiles-Holladay equation as printed in its abstract.
- J. P. Snyder (1987), "Map Projections: A Working Manual", USGS Professional Paper 1395:
  the azimuthal equidistant projection.
"""

from __future__ import annotations

import math
from collections.abc import Callable
from dataclasses import dataclass
from functools import lru_cache

import numba
import numpy as np
import numpy.typing as npt
import scipy.fft

from render.vision.view import ViewGeometry

__all__ = [
    "CIE146_GENERAL_RANGE_DEG",
    "STILES_HOLLADAY_RANGE_DEG",
    "GlareOptics",
    "apply_glare",
    "glare_kernel",
    "glare_optics",
    "gsf_cie146_general",
    "gsf_stiles_holladay_age",
    "retinal_channels",
    "scattered_fraction",
    "spread_function",
    "veiling_luminance",
]

#: Validity ranges (degrees) of the two spread functions (CIE 146:2002).
CIE146_GENERAL_RANGE_DEG = (0.1, 100.0)
STILES_HOLLADAY_RANGE_DEG = (1.0, 30.0)


def gsf_cie146_general(theta_deg: npt.ArrayLike, age_years: float, pigmentation: float) -> np.ndarray:
    """CIE 146:2002 general disability glare equation, ``L_veil/E_glare`` in sr⁻¹.

    ``10/θ³ + (5/θ² + 0.1·p/θ)·(1 + (A/62.5)⁴) + 0.0025·p``, θ in degrees (valid 0.1°-100°).
    """
    t = np.asarray(theta_deg, dtype=np.float64)
    age = 1.0 + (age_years / 62.5) ** 4
    with np.errstate(divide="ignore"):
        return 10.0 / t**3 + (5.0 / t**2 + 0.1 * pigmentation / t) * age + 0.0025 * pigmentation


def gsf_stiles_holladay_age(theta_deg: npt.ArrayLike, age_years: float) -> np.ndarray:
    """CIE 146:2002 age-adjusted Stiles-Holladay, ``10·(1 + (A/70)⁴)/θ²`` sr⁻¹ (1°-30°)."""
    t = np.asarray(theta_deg, dtype=np.float64)
    with np.errstate(divide="ignore"):
        return 10.0 * (1.0 + (age_years / 70.0) ** 4) / t**2


def spread_function(
    model: str, age_years: float, pigmentation: float
) -> tuple[Callable[[npt.ArrayLike], np.ndarray], tuple[float, float]]:
    """``(f(θ_deg), (θ_min, θ_max))`` for a model name (see :data:`render.vision.observer.GLARE_MODELS`)."""
    if model == "cie146-general":
        return (lambda t: gsf_cie146_general(t, age_years, pigmentation)), CIE146_GENERAL_RANGE_DEG
    if model == "stiles-holladay":
        return (lambda t: gsf_stiles_holladay_age(t, age_years)), STILES_HOLLADAY_RANGE_DEG
    raise ValueError(f"unknown glare model {model!r}")


def _windowed(f, lo, hi):
    hi = min(hi, 90.0)

    def k(t):
        t = np.asarray(t, dtype=np.float64)
        inside = (t >= lo) & (t <= hi)
        safe = np.where(inside, t, 1.0)
        return np.where(inside, f(safe) * np.cos(np.radians(safe)), 0.0)

    return k


@lru_cache(maxsize=32)
def scattered_fraction(model: str, age_years: float, pigmentation: float) -> float:
    """Fraction of a point source's light put into the veil: ``2π∫ f(θ)·cos θ·sin θ dθ``
    over the model's angle range (at most 90°), θ in radians for the measure."""
    f, (lo, hi) = spread_function(model, age_years, pigmentation)
    hi = min(hi, 90.0)
    # f falls like θ⁻³ near lo: integrate on a log grid (Simpson, 4001 points; < 1e-8 relative).
    t = np.geomspace(lo, hi, 4001)
    g = f(t) * np.cos(np.radians(t)) * np.sin(np.radians(t)) * np.radians(t)  # d(theta) = theta d(ln theta)
    from scipy.integrate import simpson

    return float(2.0 * math.pi * simpson(g, x=np.log(t)))


def _kernel_quadrant(
    deg_per_cell: float,
    half_size: tuple[int, int],
    model: str,
    age_years: float,
    pigmentation: float,
    supersample: int,
    supersample_radius: int,
) -> np.ndarray:
    """The kernel's cells at offsets ``(0..hy, 0..hx)``: the kernel is symmetric in both axes
    (it depends on the distance from the centre only), so this quarter gives all of it."""
    f, (lo, hi) = spread_function(model, age_years, pigmentation)
    k = _windowed(f, lo, hi)
    hy, hx = half_size
    y = np.arange(0, hy + 1, dtype=np.float64)
    x = np.arange(0, hx + 1, dtype=np.float64)
    X, Y = np.meshgrid(x, y)
    out = k(np.hypot(X, Y) * deg_per_cell)
    r = supersample_radius
    for dy in range(0, min(r, hy) + 1):
        for dx in range(0, min(r, hx) + 1):
            n = supersample * (4 if max(dx, dy) <= 1 else 1)
            s = (np.arange(n) + 0.5) / n - 0.5
            sx, sy = np.meshgrid(dx + s, dy + s)
            out[dy, dx] = k(np.hypot(sx, sy) * deg_per_cell).mean()
    return out


def glare_kernel(
    deg_per_cell: float,
    half_size: tuple[int, int],
    model: str,
    age_years: float,
    pigmentation: float,
    supersample: int = 8,
    supersample_radius: int = 8,
) -> np.ndarray:
    """Kernel on an equiangular grid: mean of ``f(θ)·max(cos θ, 0)`` over each cell, sr⁻¹.

    Shape ``(2·hy + 1, 2·hx + 1)``, centre cell at ``(hy, hx)``; cells within
    ``supersample_radius`` cells of the centre are averaged over ``supersample²`` points
    (``4·supersample²`` for the 3×3 cells around the centre).
    """
    q = _kernel_quadrant(deg_per_cell, half_size, model, age_years, pigmentation, supersample, supersample_radius)
    top = np.concatenate([q[:, :0:-1], q], axis=1)
    return np.concatenate([top[:0:-1], top], axis=0)


def _wrapped_kernel(quadrant: np.ndarray, fft_shape: tuple[int, int]) -> np.ndarray:
    """The kernel with its centre at ``(0, 0)`` and negative offsets wrapped to the far ends of
    an array of ``fft_shape`` (the layout whose discrete Fourier transform is real)."""
    hy, hx = quadrant.shape[0] - 1, quadrant.shape[1] - 1
    ny, nx = fft_shape
    out = np.zeros(fft_shape)
    out[: hy + 1, : hx + 1] = quadrant
    out[ny - hy :, : hx + 1] = quadrant[:0:-1]
    out[: hy + 1, nx - hx :] = quadrant[:, :0:-1]
    out[ny - hy :, nx - hx :] = quadrant[:0:-1, :0:-1]
    return out


@numba.njit(cache=True, nogil=True)
def _splat_kernel(gx, gy, channels, solid_angle, out):
    """Bilinear splat of ``channels[i]·solid_angle[i]`` at grid coordinates ``(gx[i], gy[i])``
    onto ``out`` (C, h, w), adding to it (conserves sums)."""
    c = channels.shape[1]
    for i in range(gx.size):
        x0 = int(math.floor(gx[i]))
        y0 = int(math.floor(gy[i]))
        fx = gx[i] - x0
        fy = gy[i] - y0
        w00 = (1.0 - fx) * (1.0 - fy)
        w01 = fx * (1.0 - fy)
        w10 = (1.0 - fx) * fy
        w11 = fx * fy
        for k in range(c):
            e = channels[i, k] * solid_angle[i]
            out[k, y0, x0] += e * w00
            out[k, y0, x0 + 1] += e * w01
            out[k, y0 + 1, x0] += e * w10
            out[k, y0 + 1, x0 + 1] += e * w11


@numba.njit(cache=True, nogil=True)
def _sample_kernel(grid, gx, gy, out):
    """Bilinear interpolation of ``grid`` (C, h, w) at ``(gx[i], gy[i])`` into ``out`` (N, C)."""
    c, h, w = grid.shape
    for i in range(gx.size):
        x0 = min(max(int(math.floor(gx[i])), 0), w - 2)
        y0 = min(max(int(math.floor(gy[i])), 0), h - 2)
        fx = gx[i] - x0
        fy = gy[i] - y0
        for k in range(c):
            out[i, k] = (
                grid[k, y0, x0] * (1.0 - fx) * (1.0 - fy)
                + grid[k, y0, x0 + 1] * fx * (1.0 - fy)
                + grid[k, y0 + 1, x0] * (1.0 - fx) * fy
                + grid[k, y0 + 1, x0 + 1] * fx * fy
            )


@dataclass(frozen=True, eq=False)
class GlareOptics:
    """What the glare convolution of one view needs apart from the light: the equidistant grid,
    where each pixel falls on it, and the kernel's spectrum for one eye (model, age,
    pigmentation). Made once per view and observer by :func:`glare_optics` and shared by every
    image of that view (the before setup and every option).

    Attributes
    ----------
    geometry, model, age_years, pigmentation
        What it was made for.
    grid_shape
        ``(gh, gw)`` cells of the azimuthal equidistant grid, one central pixel pitch each.
    half_size
        ``(hy, hx)``: the kernel reaches this many cells from its centre.
    fft_shape
        Size of the zero-padded transforms: at least ``(gh + hy, gw + hx)``, the least size
        at which the circular convolution equals the linear one on the grid.
    grid_x, grid_y
        (H·W,) each pixel's position on the grid, in cells.
    solid_angle_sr
        (H·W,) each pixel's exact solid angle.
    kernel_spectrum
        (fft_shape[0], fft_shape[1] // 2 + 1) real discrete Fourier transform of the kernel
        centred on cell (0, 0) (real: the kernel is even in both axes).
    """

    geometry: ViewGeometry
    model: str
    age_years: float
    pigmentation: float
    grid_shape: tuple[int, int]
    half_size: tuple[int, int]
    fft_shape: tuple[int, int]
    grid_x: np.ndarray
    grid_y: np.ndarray
    solid_angle_sr: np.ndarray
    kernel_spectrum: np.ndarray

    def serves(self, geometry: ViewGeometry, model: str, age_years: float, pigmentation: float) -> bool:
        """Whether this was made for that view and eye."""
        return (self.geometry, self.model, self.age_years, self.pigmentation) == (
            geometry,
            model,
            float(age_years),
            float(pigmentation),
        )


def glare_optics(
    geometry: ViewGeometry, *, age_years: float, pigmentation: float, model: str = "cie146-general"
) -> GlareOptics:
    """The :class:`GlareOptics` of a view for one eye (grid, pixel positions, kernel spectrum)."""
    delta = geometry.deg_per_px_centre
    u, v = geometry.azimuthal_equidistant_deg()
    # Grid origin chosen so that the optical axis falls on a grid node.
    u0 = -delta * (math.ceil(-u.min() / delta) + 1)
    v0 = delta * (math.ceil(v.max() / delta) + 1)
    gx = np.ascontiguousarray(((u - u0) / delta).reshape(-1))
    gy = np.ascontiguousarray(((v0 - v) / delta).reshape(-1))
    gw = int(math.ceil(gx.max())) + 2
    gh = int(math.ceil(gy.max())) + 2
    _, (lo, hi) = spread_function(model, age_years, pigmentation)
    reach = int(math.ceil(min(hi, 90.0) / delta)) + 1
    hy, hx = min(gh - 1, reach), min(gw - 1, reach)
    shape = (scipy.fft.next_fast_len(gh + hy, real=True), scipy.fft.next_fast_len(gw + hx, real=True))
    quadrant = _kernel_quadrant(delta, (hy, hx), model, age_years, pigmentation, 8, 8)
    spectrum = np.ascontiguousarray(scipy.fft.rfft2(_wrapped_kernel(quadrant, shape)).real)
    for a in (gx, gy, spectrum):
        a.setflags(write=False)
    om = np.ascontiguousarray(geometry.solid_angle_sr().reshape(-1))
    om.setflags(write=False)
    return GlareOptics(
        geometry, model, float(age_years), float(pigmentation), (gh, gw), (hy, hx), shape, gx, gy, om, spectrum
    )


def _convolve(grid: np.ndarray, optics: GlareOptics) -> np.ndarray:
    """Linear convolution of ``grid`` (gh, gw) with the kernel, on the grid's cells: zero-padded
    real transforms, the padding rows left out of the transforms where they are known zero."""
    gh, gw = optics.grid_shape
    ny, nx = optics.fft_shape
    rows = scipy.fft.rfft(grid, nx, axis=1)
    spec = scipy.fft.fft(rows, ny, axis=0, overwrite_x=True)
    spec *= optics.kernel_spectrum
    back = scipy.fft.ifft(spec, axis=0, overwrite_x=True)[:gh]
    return scipy.fft.irfft(back, nx, axis=1)[:, :gw]


def veiling_luminance(
    channels_cd_m2: np.ndarray,
    geometry: ViewGeometry,
    *,
    age_years: float,
    pigmentation: float,
    model: str = "cie146-general",
    optics: GlareOptics | None = None,
) -> np.ndarray:
    """Veiling luminance (H, W, C) that the view's own light scatters in the eye, cd/m².

    ``channels_cd_m2`` is (H, W, C): any luminance-like channels (X, Y, Z, scotopic) that
    scatter alike. ``optics``: the view's :func:`glare_optics` for this eye, if already made
    (it is made here otherwise). See the module text for the method.
    """
    ch = np.asarray(channels_cd_m2, dtype=np.float64)
    if ch.ndim == 2:
        ch = ch[..., None]
    h, w, c = ch.shape
    if (h, w) != (geometry.height_px, geometry.width_px):
        raise ValueError("buffer size does not match the view geometry")
    if optics is None:
        optics = glare_optics(geometry, age_years=age_years, pigmentation=pigmentation, model=model)
    elif not optics.serves(geometry, model, age_years, pigmentation):
        raise ValueError("the glare optics were made for another view or eye")
    gh, gw = optics.grid_shape
    # L·dΩ per pixel (lx-like; cos θ is in the kernel), spread onto the grid.
    grid = np.zeros((c, gh, gw))
    _splat_kernel(optics.grid_x, optics.grid_y, np.ascontiguousarray(ch.reshape(-1, c)), optics.solid_angle_sr, grid)
    veil = np.empty_like(grid)
    for i in range(c):
        veil[i] = _convolve(grid[i], optics)
    np.maximum(veil, 0.0, out=veil)  # FFT round-off
    out = np.empty((h * w, c))
    _sample_kernel(veil, optics.grid_x, optics.grid_y, out)
    return out.reshape(h, w, c)


def retinal_channels(
    channels_cd_m2: np.ndarray,
    geometry: ViewGeometry,
    *,
    age_years: float,
    pigmentation: float,
    model: str = "cie146-general",
    optics: GlareOptics | None = None,
) -> tuple[np.ndarray, np.ndarray, float]:
    """Channels (H, W, C) as imaged on the retina: ``(channels·(1 − F) + veil, veil, F)``
    (``optics`` as in :func:`veiling_luminance`)."""
    ch = np.asarray(channels_cd_m2, dtype=np.float64)
    veil = veiling_luminance(ch, geometry, age_years=age_years, pigmentation=pigmentation, model=model, optics=optics)
    frac = scattered_fraction(model, float(age_years), float(pigmentation))
    return ch * (1.0 - frac) + veil, veil, frac


def apply_glare(
    xyz_cd_m2: np.ndarray,
    scotopic_cd_m2: np.ndarray,
    geometry: ViewGeometry,
    *,
    age_years: float,
    pigmentation: float,
    model: str = "cie146-general",
) -> tuple[np.ndarray, np.ndarray, np.ndarray, float]:
    """Retinal image with disability glare: ``(xyz, scotopic, veil_Y, F)``.

    ``xyz·(1 − F) + veil`` and likewise for the scotopic buffer, with F the scattered
    fraction (:func:`scattered_fraction`); ``veil_Y`` is the photopic veiling luminance, cd/m².
    """
    xyz = np.asarray(xyz_cd_m2, dtype=np.float64)
    s = np.asarray(scotopic_cd_m2, dtype=np.float64)
    stack = np.concatenate([xyz, s[..., None]], axis=-1)
    out, veil, frac = retinal_channels(stack, geometry, age_years=age_years, pigmentation=pigmentation, model=model)
    return out[..., :3], out[..., 3], veil[..., 1], frac
