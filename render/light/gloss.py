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

import numpy as np
import numpy.typing as npt

__all__ = ["WATER_F0", "WET_ROUGHNESS", "ggx_d", "schlick_fresnel", "smith_g1", "specular_brdf"]

#: F0 of water (n = 1.333): ((n - 1) / (n + 1))², analytic.
WATER_F0 = ((1.333 - 1.0) / (1.333 + 1.0)) ** 2
#: GGX roughness α used for a wet street (common practice, no source).
WET_ROUGHNESS = 0.1


def schlick_fresnel(cos_theta: npt.ArrayLike, f0: npt.ArrayLike) -> np.ndarray:
    """Schlick's approximation of Fresnel reflectance at incidence cosine ``cos_theta``."""
    c = np.clip(np.asarray(cos_theta, np.float64), 0.0, 1.0)
    return f0 + (1.0 - f0) * (1.0 - c) ** 5


def ggx_d(cos_h: npt.ArrayLike, alpha: npt.ArrayLike) -> np.ndarray:
    """GGX normal distribution D(h) (1/sr) for the cosine of the half-vector angle."""
    a2 = np.asarray(alpha, np.float64) ** 2
    c2 = np.asarray(cos_h, np.float64) ** 2
    return a2 / (np.pi * (c2 * (a2 - 1.0) + 1.0) ** 2)


def smith_g1(cos_x: npt.ArrayLike, alpha: npt.ArrayLike) -> np.ndarray:
    """Smith masking G1 for GGX, one direction, at the cosine ``cos_x`` to the normal."""
    c = np.clip(np.asarray(cos_x, np.float64), 1e-9, 1.0)
    a2 = np.asarray(alpha, np.float64) ** 2
    return 2.0 * c / (c + np.sqrt(a2 + (1.0 - a2) * c * c))


def specular_brdf(
    normal: npt.ArrayLike, to_light: npt.ArrayLike, to_eye: npt.ArrayLike, f0: npt.ArrayLike, alpha: npt.ArrayLike
) -> np.ndarray:
    """f_s (1/sr) for unit vectors (N, 3): surface normal, toward the light, toward the eye;
    0 where either direction is below the surface."""
    n = np.asarray(normal, np.float64)
    l = np.asarray(to_light, np.float64)
    v = np.asarray(to_eye, np.float64)
    ci = np.einsum("ij,ij->i", n, l)
    co = np.einsum("ij,ij->i", n, v)
    h = l + v
    h /= np.maximum(np.linalg.norm(h, axis=1, keepdims=True), 1e-12)
    ch = np.einsum("ij,ij->i", n, h)
    vh = np.einsum("ij,ij->i", v, h)
    ok = (ci > 0) & (co > 0)
    f = ggx_d(ch, alpha) * smith_g1(ci, alpha) * smith_g1(co, alpha) * schlick_fresnel(vh, f0)
    return np.where(ok, f / (4.0 * np.maximum(ci, 1e-9) * np.maximum(co, 1e-9)), 0.0)
