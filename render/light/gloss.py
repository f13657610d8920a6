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

**Sampling for bounced light.** A path tracer that bounces off the layer needs more than its
value: :func:`vndf_sample_one` draws the reflected direction from the GGX normals visible from
the view direction (Heitz 2018), in the local frame whose z axis is the normal (the caller
turns directions into and out of that frame), and returns its solid-angle pdf

    pdf(l) = G1(v)·max(0, v·h)·D(h) / (cos θ_v · 4·(v·h)),

which :func:`vndf_pdf_one` evaluates for any direction (e.g. one toward an area emitter, to
weight it by multiple importance sampling). With F = 1 the estimate f_s·cos θ_l/pdf is G1(l):
its variance is from masking only. :func:`layered_one` gives, for a pair of directions,
f_s·cos θ_l (white) and the base's (1 − F(n·l))·cos θ_l/π (times ρ(λ)): the layering of the
direct light, kept so that bounced and direct light agree. The approximation: the two lobes add;
the base receives what the interface transmits toward it and its light leaves unattenuated
(no 1 − F(n·v) factor, no light reflected back down at the interface), so at grazing views over a
pale base the albedo can exceed 1 (water-wet, α = 0.1, ρ = 0.8: 0.99 at 80°, 1.06 at 85°, by
quadrature). A vertex picks one lobe (the one-sample model of Veach 1997): the specular with
probability :func:`specular_lobe_probability`, F(cos θ_v) against the base's albedo under the
layer ρ̄·(1 − F0)·20/21 (ρ̄ its luminous reflectance), and divides by the mixture pdf
:func:`layered_pdf_one`; :func:`balance_heuristic` and :func:`power_heuristic` weight a
direction that two strategies could have drawn (a bounce that reaches an area emitter, and a
connection sampled on the emitter).

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
- E. Heitz (2018), "Sampling the GGX distribution of visible normals", Journal of Computer
  Graphics Techniques 7(4): the sampler (its listing, sections 3–4) and the pdf of the
  reflected direction **(section numbers from memory)**.
- E. Heitz (2014), "Understanding the masking-shadowing function in microfacet-based BRDFs",
  JCGT 3(2): the distribution of visible normals G1(v)·max(0, v·h)·D(h)/cos θ_v, normalised
  (the weak white furnace).
- E. Veach (1997), *Robust Monte Carlo methods for light transport simulation*, PhD thesis,
  Stanford, ch. 9: multiple importance sampling, the balance and power heuristics and the
  one-sample model (sec. 9.2) **(section number from memory)**.
"""

from __future__ import annotations

import math

import numba
import numpy as np
import numpy.typing as npt

from render.light.water import WATER_F0, WET_ROUGHNESS

__all__ = [
    "BASE_ALBEDO_PER_TRANSMITTANCE",
    "WATER_F0",
    "WET_ROUGHNESS",
    "balance_heuristic",
    "fresnel_one",
    "ggx_d",
    "layered_eval",
    "layered_one",
    "layered_pdf",
    "layered_pdf_one",
    "power_heuristic",
    "schlick_fresnel",
    "smith_g1",
    "specular_brdf",
    "specular_lobe_probability",
    "specular_one",
    "vndf_pdf",
    "vndf_pdf_one",
    "vndf_sample",
    "vndf_sample_one",
    "view_gloss_share",
]

#: Width in pixels of the coarse camera pass that estimates a view's share of pixels seeing a
#: specular layer (:func:`view_gloss_share`).
GLOSS_SHARE_WIDTH_PX = 128

#: The base's directional albedo under the layer over its reflectance ρ, per unit 1 − F0:
#: ∫ (1 − F(cos θ))·cos θ/π dω = (1 − F0)·(1 − 2·B(2, 6)) = (1 − F0)·20/21 for Schlick's F
#: (B the beta function; analytic).
BASE_ALBEDO_PER_TRANSMITTANCE = 20.0 / 21.0


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


# Sampling blocks for light bounced off the layer (path tracing): the visible-normal sampler
# and its pdf, the one-sample choice between the two lobes, the heuristics that weight two
# strategies, and the layered surface's value for a pair of directions.


@numba.njit(cache=True, nogil=True)
def vndf_sample_one(vx, vy, vz, alpha, u1, u2):
    """A direction ``l`` reflected about a GGX normal sampled from the normals visible from ``v``
    (Heitz 2018), in the local frame whose z axis is the surface normal; ``v`` unit, toward the
    eye, ``u1, u2`` uniform in [0, 1). Returns ``(lx, ly, lz, pdf)``, the pdf of ``l`` in solid
    angle (1/sr, :func:`vndf_pdf_one`). ``l`` may point below the surface (``lz <= 0``: the
    layer reflects nothing there; the pdf still counts it). ``vz <= 0``: ``(0, 0, 0, 0)``."""
    if not (vz > 0.0):
        return 0.0, 0.0, 0.0, 0.0
    # The view direction in the hemisphere configuration (the ellipsoid stretched to a sphere).
    hx = alpha * vx
    hy = alpha * vy
    hz = vz
    inv = 1.0 / math.sqrt(hx * hx + hy * hy + hz * hz)
    hx *= inv
    hy *= inv
    hz *= inv
    # A basis about it (any perpendicular when it is the pole).
    lensq = hx * hx + hy * hy
    if lensq > 0.0:
        r_ = 1.0 / math.sqrt(lensq)
        t1x, t1y, t1z = -hy * r_, hx * r_, 0.0
    else:
        t1x, t1y, t1z = 1.0, 0.0, 0.0
    t2x = hy * t1z - hz * t1y
    t2y = hz * t1x - hx * t1z
    t2z = hx * t1y - hy * t1x
    # A point of the projected hemisphere: a disc sample, its second half squeezed into the
    # projection of the half-disc seen edge-on.
    r = math.sqrt(u1)
    phi = 2.0 * math.pi * u2
    p1 = r * math.cos(phi)
    p2 = r * math.sin(phi)
    s = 0.5 * (1.0 + hz)
    p2 = (1.0 - s) * math.sqrt(max(0.0, 1.0 - p1 * p1)) + s * p2
    # Back onto the hemisphere, then to the ellipsoid configuration: the microfacet normal m.
    pn = math.sqrt(max(0.0, 1.0 - p1 * p1 - p2 * p2))
    nx = p1 * t1x + p2 * t2x + pn * hx
    ny = p1 * t1y + p2 * t2y + pn * hy
    nz = p1 * t1z + p2 * t2z + pn * hz
    mx = alpha * nx
    my = alpha * ny
    mz = max(0.0, nz)
    inv = 1.0 / math.sqrt(mx * mx + my * my + mz * mz)
    mx *= inv
    my *= inv
    mz *= inv
    vm = vx * mx + vy * my + vz * mz
    lx = 2.0 * vm * mx - vx
    ly = 2.0 * vm * my - vy
    lz = 2.0 * vm * mz - vz
    if not (vm > 0.0 and mz > 0.0):
        return lx, ly, lz, 0.0
    # pdf(l) = G1(v)·D(m)·(v·m)/cos θ_v · 1/(4·(v·m)): the visible normals' density times the
    # Jacobian of the reflection.
    return lx, ly, lz, _g1_one(vz, alpha) * _ggx_one(mz, alpha) / (4.0 * vz)


@numba.njit(cache=True, nogil=True)
def vndf_pdf_one(nx, ny, nz, lx, ly, lz, vx, vy, vz, alpha):
    """Solid-angle pdf (1/sr) of direction ``l`` under :func:`vndf_sample_one` about the unit
    normal ``n`` for the view ``v`` (any common frame): G1(v)·max(0, v·h)·D(h) /
    (cos θ_v · 4·(v·h)) with ``h`` the unit half vector of ``l`` and ``v``; 0 where ``v`` is below
    the surface or ``h`` is (no microfacet reflects ``v`` into ``l``)."""
    cv = nx * vx + ny * vy + nz * vz
    if not (cv > 0.0):
        return 0.0
    hx = lx + vx
    hy = ly + vy
    hz = lz + vz
    h = math.sqrt(hx * hx + hy * hy + hz * hz)
    if not (h > 1e-12):
        return 0.0
    ch = (nx * hx + ny * hy + nz * hz) / h
    vh = (vx * hx + vy * hy + vz * hz) / h
    if not (ch > 0.0 and vh > 0.0):
        return 0.0
    return _g1_one(cv, alpha) * max(0.0, vh) * _ggx_one(ch, alpha) / (cv * 4.0 * vh)


@numba.njit(cache=True, nogil=True)
def layered_one(nx, ny, nz, lx, ly, lz, vx, vy, vz, f0, alpha):
    """The layered surface for light arriving from ``l`` and leaving toward ``v`` (unit vectors,
    unit normal ``n``): ``(spec_cos, base_cos)``, both times cos θ_l (1/sr), so that
    f·cos θ_l = spec_cos + ρ(λ)·base_cos. ``spec_cos`` = f_s·cos θ_l (:func:`specular_one`, white);
    ``base_cos`` = (1 − F(n·l))·cos θ_l/π, the Lambertian base under what the interface
    transmits, as the direct light has it (no factor for the way out through the interface).
    Without a layer (``f0 <= 0``): ``(0, cos θ_l/π)``. Both 0 where ``l`` is below the surface."""
    cl = nx * lx + ny * ly + nz * lz
    if not (cl > 0.0):
        return 0.0, 0.0
    if not (f0 > 0.0):
        return 0.0, cl / math.pi
    spec = specular_one(nx, ny, nz, lx, ly, lz, vx, vy, vz, f0, alpha) * cl
    return spec, (1.0 - fresnel_one(cl, f0)) * cl / math.pi


@numba.njit(cache=True, nogil=True)
def specular_lobe_probability(cos_v, f0, base_reflectance):
    """Probability of sampling the specular lobe rather than the base at a vertex seen from a
    direction at cosine ``cos_v``: the two lobes' estimated albedos, F(cos θ_v) for the specular
    layer (its albedo for F0 = 1 is below 1 by masking only) against ρ̄·(1 − F0)·20/21 for the
    base (exact under this layering, :data:`BASE_ALBEDO_PER_TRANSMITTANCE`), ``base_reflectance``
    ρ̄ the base's luminous reflectance. 0 without a layer (``f0 <= 0``) or when neither lobe
    reflects."""
    if not (f0 > 0.0):
        return 0.0
    fs = fresnel_one(cos_v, f0)
    fb = max(base_reflectance, 0.0) * (1.0 - f0) * BASE_ALBEDO_PER_TRANSMITTANCE
    total = fs + fb
    return fs / total if total > 0.0 else 0.0


@numba.njit(cache=True, nogil=True)
def layered_pdf_one(nx, ny, nz, lx, ly, lz, vx, vy, vz, alpha, p_spec):
    """Solid-angle pdf (1/sr) of ``l`` when a vertex samples the specular lobe
    (:func:`vndf_sample_one`) with probability ``p_spec`` and the base's cosine distribution
    (cos θ/π) otherwise: p·pdf_s + (1 − p)·max(0, cos θ_l)/π."""
    cl = max(0.0, nx * lx + ny * ly + nz * lz)
    p_s = vndf_pdf_one(nx, ny, nz, lx, ly, lz, vx, vy, vz, alpha) if p_spec > 0.0 else 0.0
    return p_spec * p_s + (1.0 - p_spec) * cl / math.pi


@numba.njit(cache=True, nogil=True)
def balance_heuristic(n_a, pdf_a, n_b, pdf_b):
    """Weight of a sample of strategy a (``n_a`` samples, pdf ``pdf_a``) combined with strategy
    b: n_a·p_a / (n_a·p_a + n_b·p_b) (Veach 1997); 0 where neither could have drawn it. Pdfs
    finite: light from a point luminaire or the moon (no direction can hit it) takes weight 1
    without a heuristic."""
    a = n_a * pdf_a
    t = a + n_b * pdf_b
    return a / t if t > 0.0 else 0.0


@numba.njit(cache=True, nogil=True)
def power_heuristic(n_a, pdf_a, n_b, pdf_b):
    """As :func:`balance_heuristic` with the power heuristic, exponent 2 (Veach 1997):
    (n_a·p_a)² / ((n_a·p_a)² + (n_b·p_b)²)."""
    a = n_a * pdf_a
    b = n_b * pdf_b
    a *= a
    t = a + b * b
    return a / t if t > 0.0 else 0.0


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


@numba.njit(cache=True, nogil=True)
def _vndf_many(v, alpha, u, out_l, out_pdf):
    for i in range(out_pdf.shape[0]):
        lx, ly, lz, p = vndf_sample_one(v[i, 0], v[i, 1], v[i, 2], alpha[i], u[i, 0], u[i, 1])
        out_l[i, 0] = lx
        out_l[i, 1] = ly
        out_l[i, 2] = lz
        out_pdf[i] = p


@numba.njit(cache=True, nogil=True)
def _directional_many(kind, n, l, v, f0, alpha, out_a, out_b):
    for i in range(out_a.shape[0]):
        nx, ny, nz = n[i, 0], n[i, 1], n[i, 2]
        lx, ly, lz = l[i, 0], l[i, 1], l[i, 2]
        vx, vy, vz = v[i, 0], v[i, 1], v[i, 2]
        if kind == 0:
            out_a[i] = vndf_pdf_one(nx, ny, nz, lx, ly, lz, vx, vy, vz, alpha[i])
        elif kind == 1:
            a, b = layered_one(nx, ny, nz, lx, ly, lz, vx, vy, vz, f0[i], alpha[i])
            out_a[i] = a
            out_b[i] = b
        else:
            # f0 carries the probability of the specular lobe here.
            out_a[i] = layered_pdf_one(nx, ny, nz, lx, ly, lz, vx, vy, vz, alpha[i], f0[i])


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


def _rows(
    vectors: tuple[npt.ArrayLike, ...], scalars: tuple[npt.ArrayLike, ...]
) -> tuple[list[np.ndarray], list[np.ndarray]]:
    """Unit vectors as contiguous (m, 3) rows and scalars as (m,), broadcast to one length m."""
    vs = [np.ascontiguousarray(x, np.float64).reshape(-1, 3) for x in vectors]
    ss = [np.asarray(x, np.float64).reshape(-1) for x in scalars]
    m = max(x.shape[0] for x in vs + ss)
    vs = [np.ascontiguousarray(np.broadcast_to(x, (m, 3))) for x in vs]
    ss = [np.ascontiguousarray(np.broadcast_to(x, (m,))) for x in ss]
    return vs, ss


def vndf_sample(to_eye: npt.ArrayLike, alpha: npt.ArrayLike, u: npt.ArrayLike) -> tuple[np.ndarray, np.ndarray]:
    """:func:`vndf_sample_one` for rows: unit directions toward the eye (N, 3) in the local frame
    (z the normal), α, uniform numbers (N, 2). Returns the reflected directions (N, 3) and their
    solid-angle pdfs (N,), 1/sr."""
    uv = np.asarray(u, np.float64).reshape(-1, 2)
    (v,), (a, u1, u2) = _rows((to_eye,), (alpha, uv[:, 0], uv[:, 1]))
    uu = np.stack([u1, u2], axis=1)
    out_l = np.empty((v.shape[0], 3))
    out_pdf = np.empty(v.shape[0])
    _vndf_many(v, a, uu, out_l, out_pdf)
    return out_l, out_pdf


def vndf_pdf(normal: npt.ArrayLike, to_light: npt.ArrayLike, to_eye: npt.ArrayLike, alpha: npt.ArrayLike) -> np.ndarray:
    """:func:`vndf_pdf_one` for rows of unit vectors (N, 3): 1/sr."""
    (n, l, v), (a,) = _rows((normal, to_light, to_eye), (alpha,))
    out = np.empty(n.shape[0])
    _directional_many(0, n, l, v, a, a, out, out)
    return out


def layered_eval(
    normal: npt.ArrayLike, to_light: npt.ArrayLike, to_eye: npt.ArrayLike, f0: npt.ArrayLike, alpha: npt.ArrayLike
) -> tuple[np.ndarray, np.ndarray]:
    """:func:`layered_one` for rows of unit vectors (N, 3): (specular f_s·cos θ_l, the base's
    (1 − F(n·l))·cos θ_l/π), both 1/sr."""
    (n, l, v), (f, a) = _rows((normal, to_light, to_eye), (f0, alpha))
    spec = np.empty(n.shape[0])
    base = np.empty(n.shape[0])
    _directional_many(1, n, l, v, f, a, spec, base)
    return spec, base


def layered_pdf(
    normal: npt.ArrayLike,
    to_light: npt.ArrayLike,
    to_eye: npt.ArrayLike,
    alpha: npt.ArrayLike,
    p_spec: npt.ArrayLike,
) -> np.ndarray:
    """:func:`layered_pdf_one` for rows of unit vectors (N, 3): 1/sr."""
    (n, l, v), (a, p) = _rows((normal, to_light, to_eye), (alpha, p_spec))
    out = np.empty(n.shape[0])
    _directional_many(2, n, l, v, p, a, out, out)
    return out


def view_gloss_share(mesh, bvh, camera, *, width_px: int = GLOSS_SHARE_WIDTH_PX) -> float:
    """An estimate from above of the share of a view's pixels whose camera samples see a
    specular layer (the pixels that keep a second, white transport), for the memory estimate
    before the view is cast: one ray through the centre of each pixel of a coarse copy of the
    camera (``width_px`` wide, the height in proportion), and a coarse pixel counted when it
    or one of its eight neighbours sees a layer, so that the fine pixels along a layer's edge,
    whose samples may see it or not, are counted too. 0 without a layer; the whole view is
    counted where the camera is smaller than the coarse one. A layered surface narrower than
    a coarse pixel (about 0.5° across a 60° view) may be missed; its pixels are then few."""
    from dataclasses import replace

    from render.light.integrator import _material_gloss
    from render.rays.bvh import intersect_closest
    from render.rays.cameras import camera_rays

    f0 = _material_gloss(mesh)[:, 0]
    if not np.any(f0 > 0.0):
        return 0.0
    if camera.width_px <= width_px:
        return 1.0
    w = int(width_px)
    h = max(1, round(camera.height_px * w / camera.width_px))
    origins, directions, _ = camera_rays(replace(camera, width_px=w, height_px=h), 1, 0, jitter=False)
    hits = intersect_closest(bvh, origins, directions)
    tri = hits.triangle
    material = np.asarray(mesh.material_id)[np.maximum(tri, 0)]
    seen = ((tri >= 0) & (f0[material] > 0.0)).reshape(h, w)
    grown = seen.copy()
    grown[1:] |= seen[:-1]
    grown[:-1] |= seen[1:]
    wide = grown.copy()
    wide[:, 1:] |= grown[:, :-1]
    wide[:, :-1] |= grown[:, 1:]
    return float(wide.mean())
