"""A specular layer for wet or polished surfaces, over the Lambertian base.

Microfacet reflection after Walter, Marschner, Li & Torrance (2007), "Microfacet models for
refraction through rough surfaces" (EGSR): the GGX distribution

    D(h) = α² / (π·(cos²θ_h·(α² − 1) + 1)²),

the separable Smith shadowing G = G1(l)·G1(v) with G1(x) = 2·cosθ_x / (cosθ_x + √(α² + (1 − α²)·cos²θ_x)),
and Schlick's (1994) approximation of the Fresnel factor F = F0 + (1 − F0)·(1 − v·h)⁵. The
specular BRDF is f_s = D·G·F / (4·cosθ_i·cosθ_o) (1/sr), so a surface lit with illuminance E
from one direction shows the specular luminance L_s = f_s·E (cd/m²).

The layer is spectrally neutral (the Fresnel reflectance of water or a clear coat hardly varies
over the visible range), so its light has the colour of the lamp: the light buffers keep it as a
second value per sample with the white response. The Lambertian base under it receives what the
interface transmits, E·(1 − F(n·l)) (a common layering approximation, no source).

A film of water (n ≈ 1.33) has F0 = ((n − 1)/(n + 1))² ≈ 0.020 (Fresnel equations at normal
incidence, analytic). The roughness used for a wet street, α = 0.1, is common practice, no
source.

References
----------
- B. Walter, S. R. Marschner, H. Li, K. E. Torrance (2007), "Microfacet models for refraction
  through rough surfaces", Eurographics Symposium on Rendering: GGX distribution (eq. 33),
  Smith G1 for GGX (eq. 34), the microfacet BRDF (eq. 20) **(equation numbers from memory)**.
- C. Schlick (1994), "An inexpensive BRDF model for physically-based rendering", Computer
  Graphics Forum 13(3): the Fresnel approximation.
- Fresnel equations at normal incidence, R = ((n₁ − n₂)/(n₁ + n₂))² (analytic).
"""

from __future__ import annotations

import math

import numba
import numpy as np
import numpy.typing as npt

__all__ = [
    "WATER_F0",
    "WET_ROUGHNESS",
    "fresnel_one",
    "ggx_d",
    "schlick_fresnel",
    "smith_g1",
    "specular_brdf",
    "specular_one",
]

#: F0 of water (n = 1.333): ((n - 1) / (n + 1))², analytic.
WATER_F0 = ((1.333 - 1.0) / (1.333 + 1.0)) ** 2
#: GGX roughness α used for a wet street (common practice, no source).
WET_ROUGHNESS = 0.1


# The formulas, once, as numba scalar functions; the array functions below and the light
# kernels (render.light.integrator) call them.


@numba.njit(cache=True, nogil=True)
def fresnel_one(cos_theta: float, f0: float) -> float:
    """Schlick's Fresnel reflectance at incidence cosine ``cos_theta`` (clipped to 0 … 1)."""
    c = min(max(cos_theta, 0.0), 1.0)
    return f0 + (1.0 - f0) * math.pow(1.0 - c, 5.0)


@numba.njit(cache=True, nogil=True)
def _ggx_one(cos_h: float, alpha: float) -> float:
    a2 = alpha * alpha
    c2 = cos_h * cos_h
    s = c2 * (a2 - 1.0) + 1.0
    return a2 / (math.pi * (s * s))


@numba.njit(cache=True, nogil=True)
def _g1_one(cos_x: float, alpha: float) -> float:
    c = min(max(cos_x, 1e-9), 1.0)
    a2 = alpha * alpha
    return 2.0 * c / (c + math.sqrt(a2 + (1.0 - a2) * c * c))


@numba.njit(cache=True, nogil=True)
def specular_one(nx, ny, nz, lx, ly, lz, vx, vy, vz, f0, alpha):
    """f_s (1/sr) for one unit normal ``n``, direction toward the light ``l`` and toward the eye
    ``v``; 0 where either direction is below the surface."""
    ci = nx * lx + ny * ly + nz * lz
    co = nx * vx + ny * vy + nz * vz
    hx = lx + vx
    hy = ly + vy
    hz = lz + vz
    h = max(math.sqrt(hx * hx + hy * hy + hz * hz), 1e-12)
    hx /= h
    hy /= h
    hz /= h
    if not (ci > 0.0 and co > 0.0):
        return 0.0
    ch = nx * hx + ny * hy + nz * hz
    vh = vx * hx + vy * hy + vz * hz
    f = _ggx_one(ch, alpha) * _g1_one(ci, alpha) * _g1_one(co, alpha) * fresnel_one(vh, f0)
    return f / (4.0 * max(ci, 1e-9) * max(co, 1e-9))


@numba.njit(cache=True, nogil=True)
def _pairs(kind, a, b, out):
    for i in range(out.shape[0]):
        if kind == 0:
            out[i] = fresnel_one(a[i], b[i])
        elif kind == 1:
            out[i] = _ggx_one(a[i], b[i])
        else:
            out[i] = _g1_one(a[i], b[i])


@numba.njit(cache=True, nogil=True)
def _brdf_many(n, l, v, f0, alpha, out):
    for i in range(out.shape[0]):
        out[i] = specular_one(
            n[i, 0], n[i, 1], n[i, 2], l[i, 0], l[i, 1], l[i, 2], v[i, 0], v[i, 1], v[i, 2], f0[i], alpha[i]
        )


def _elementwise(kind: int, a: npt.ArrayLike, b: npt.ArrayLike) -> np.ndarray:
    x, y = np.broadcast_arrays(np.asarray(a, np.float64), np.asarray(b, np.float64))
    out = np.empty(x.shape)
    _pairs(kind, np.ascontiguousarray(x).reshape(-1), np.ascontiguousarray(y).reshape(-1), out.reshape(-1))
    return out[()] if out.ndim == 0 else out


def schlick_fresnel(cos_theta: npt.ArrayLike, f0: npt.ArrayLike) -> np.ndarray:
    """Schlick's approximation of Fresnel reflectance at incidence cosine ``cos_theta``."""
    return _elementwise(0, cos_theta, f0)


def ggx_d(cos_h: npt.ArrayLike, alpha: npt.ArrayLike) -> np.ndarray:
    """GGX normal distribution D(h) (1/sr) for the cosine of the half-vector angle."""
    return _elementwise(1, cos_h, alpha)


def smith_g1(cos_x: npt.ArrayLike, alpha: npt.ArrayLike) -> np.ndarray:
    """Smith masking G1 for GGX, one direction, at the cosine ``cos_x`` to the normal."""
    return _elementwise(2, cos_x, alpha)


def specular_brdf(
    normal: npt.ArrayLike, to_light: npt.ArrayLike, to_eye: npt.ArrayLike, f0: npt.ArrayLike, alpha: npt.ArrayLike
) -> np.ndarray:
    """f_s (1/sr) for unit vectors (N, 3): surface normal, toward the light, toward the eye;
    0 where either direction is below the surface."""
    n, l, v = (np.ascontiguousarray(x, np.float64).reshape(-1, 3) for x in (normal, to_light, to_eye))
    m = max(n.shape[0], l.shape[0], v.shape[0])
    n, l, v = (np.ascontiguousarray(np.broadcast_to(x, (m, 3))) for x in (n, l, v))
    f = np.ascontiguousarray(np.broadcast_to(np.asarray(f0, np.float64), (m,)))
    a = np.ascontiguousarray(np.broadcast_to(np.asarray(alpha, np.float64), (m,)))
    out = np.empty(m)
    _brdf_many(n, l, v, f, a, out)
    return out
