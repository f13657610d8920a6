"""Sampling the specular layer for bounced light (render.light.gloss).

Sources, beside each check:
- GGX normalisation ∫ D(h) cos θ_h dω_h = 1 (Walter, Marschner, Li & Torrance 2007, EGSR; the
  projected microfacet area equals the macro-surface's).
- The weak white furnace ∫ G1(v)·D(h)·max(0, v·h)/cos θ_v dω_h = 1 for every v (Heitz 2014,
  "Understanding the masking-shadowing function in microfacet-based BRDFs", JCGT 3(2): the
  projected visible microfacet area equals the projected macro-surface's).
- The visible-normal sampler (Heitz 2018, "Sampling the GGX distribution of visible normals",
  JCGT 7(4)) draws directions with the density its pdf states: Pearson's chi-square test of a
  histogram against the pdf integrated over each bin (the goodness-of-fit test of sampling
  routines is common practice in renderers' test suites, no source for the bins), at the 1 %
  significance level per case, fixed seed; and the estimator mean of f·cos θ/pdf is the directional
  albedo, computed by quadrature (Monte Carlo estimation is unbiased: analytic), within four
  standard errors.
- The one-sample model of multiple importance sampling (Veach 1997, PhD thesis, ch. 9, the
  one-sample model **(section from memory)**): sampling either lobe and dividing by the mixture
  pdf is unbiased; the balance and power heuristics of two strategies sum to 1 (by their
  definitions, Veach 1997 ch. 9 **(from memory)**).
- The base's albedo under Schlick's Fresnel, (1 − F0)·20/21 (2·∫(1 − c)⁵·c dc = 2·B(2, 6) = 1/21,
  the beta function; analytic).

Quadratures are Gauss-Legendre on panels graded with the roughness α (accurate to about 1e-6
here: halving the panels' node spacing moves the results by less than that). Random numbers come
from numpy's counter-based Philox generator with fixed seeds, so every run draws the same numbers.
"""

from __future__ import annotations

import math

import numpy as np
import pytest
from scipy import stats

from render.light.gloss import (
    BASE_ALBEDO_PER_TRANSMITTANCE,
    WATER_F0,
    balance_heuristic,
    ggx_d,
    layered_eval,
    layered_pdf,
    power_heuristic,
    schlick_fresnel,
    smith_g1,
    specular_brdf,
    specular_lobe_probability,
    vndf_pdf,
    vndf_sample,
)

UP = np.array([0.0, 0.0, 1.0])
# Panel edges in units of α (tan θ_h / α for the distribution; angles / α about a lobe's axis).
GRADE = np.array([0.0, 0.25, 0.5, 1.0, 2.0, 4.0, 8.0, 16.0, 64.0, 256.0])
ALPHAS = [0.02, 0.1, 0.3, 0.6, 1.0]
VIEW_DEG = [0.0, 30.0, 60.0, 80.0, 89.0]
# Pearson's chi-square: reject at this significance (per case).
SIGNIFICANCE = 0.01


def _rng(seed: int) -> np.random.Generator:
    return np.random.Generator(np.random.Philox(seed))


def _panels(edges: np.ndarray, k: int) -> tuple[np.ndarray, np.ndarray]:
    """Gauss-Legendre nodes and weights, ``k`` per panel between sorted distinct ``edges``."""
    x0, w0 = np.polynomial.legendre.leggauss(k)
    e = np.unique(edges)
    a, b = e[:-1, None], e[1:, None]
    return ((b - a) / 2 * x0 + (a + b) / 2).ravel(), ((b - a) / 2 * w0).ravel()


def _theta_h(alpha: float, k: int = 16) -> tuple[np.ndarray, np.ndarray]:
    return _panels(np.r_[np.arctan(alpha * GRADE), np.pi / 2], k)


def _view(deg: float) -> np.ndarray:
    t = math.radians(deg)
    return np.array([math.sin(t), 0.0, math.cos(t)])


def _sphere(theta: np.ndarray, phi: np.ndarray) -> np.ndarray:
    return np.stack([np.sin(theta) * np.cos(phi), np.sin(theta) * np.sin(phi), np.cos(theta)], axis=-1)


def _upper_hemisphere(alpha: float, view_deg: float, k: int = 16) -> tuple[np.ndarray, np.ndarray]:
    """Directions and solid-angle weights over the upper hemisphere, panels graded about the
    mirror direction of ``v`` (θ = θ_v, φ = π) so that the lobe is resolved."""
    tv = math.radians(view_deg)
    steps = np.r_[-GRADE[::-1], GRADE] * alpha
    t, wt = _panels(np.clip(tv + steps, 0.0, np.pi / 2), k)
    p, wp = _panels(np.clip(np.pi + steps / max(math.sin(tv), alpha), 0.0, 2 * np.pi), k)
    T, P = np.meshgrid(t, p, indexing="ij")
    return _sphere(T, P).reshape(-1, 3), (np.sin(T) * wt[:, None] * wp[None, :]).reshape(-1)


def _albedo_by_quadrature(f0: float, alpha: float, view_deg: float) -> float:
    """∫ f_s(l, v)·cos θ_l dω_l over the upper hemisphere (the specular layer's directional albedo)."""
    l, w = _upper_hemisphere(alpha, view_deg)
    return float(np.sum(specular_brdf(UP, l, _view(view_deg), f0, alpha) * l[:, 2] * w))


@pytest.mark.parametrize("alpha", ALPHAS)
def test_ggx_normalised(alpha):
    # Walter et al. 2007: ∫ D(h) cos θ_h dω_h = 1.
    t, w = _theta_h(alpha)
    total = np.sum(2 * np.pi * ggx_d(np.cos(t), alpha) * np.cos(t) * np.sin(t) * w)
    assert total == pytest.approx(1.0, abs=1e-9)


@pytest.mark.parametrize("alpha", ALPHAS)
@pytest.mark.parametrize("view_deg", VIEW_DEG)
def test_weak_white_furnace(alpha, view_deg):
    # Heitz 2014: ∫ G1(v)·D(h)·max(0, v·h)/cos θ_v dω_h = 1. The kink of max(0, v·h) limits the
    # uniform φ rule to about 1e-6 at 256 points (1e-7 at 1024).
    v = _view(view_deg)
    t, wt = _theta_h(alpha)
    n_phi = 256
    phi = (np.arange(n_phi) + 0.5) / n_phi * 2 * np.pi
    T, P = np.meshgrid(t, phi, indexing="ij")
    vh = np.maximum(_sphere(T, P) @ v, 0.0)
    g = smith_g1(v[2], alpha) * ggx_d(np.cos(T), alpha) * vh / v[2] * np.sin(T)
    total = np.sum(g * wt[:, None]) * 2 * np.pi / n_phi
    assert total == pytest.approx(1.0, abs=1e-5)


def _mirror_frame(v: np.ndarray) -> np.ndarray:
    """Rows e1, e2, e3: an orthonormal frame with e3 the mirror direction of ``v`` about z."""
    e3 = np.array([-v[0], -v[1], v[2]])
    a = np.array([0.0, 1.0, 0.0])
    e1 = np.cross(a, e3)
    e1 /= np.linalg.norm(e1)
    return np.stack([e1, np.cross(e3, e1), e3])


@pytest.mark.parametrize(
    ("alpha", "view_deg"), [(0.1, 0.0), (0.1, 45.0), (0.3, 70.0), (0.6, 30.0), (1.0, 80.0), (0.05, 85.0)]
)
def test_vndf_histogram_matches_pdf(alpha, view_deg):
    # Bins over the whole sphere about the mirror direction: polar angle graded with α, 16
    # azimuths; expected counts by Gauss-Legendre quadrature of the pdf, 4 × 4 panels of 8 × 8
    # points per bin (the pdf jumps to 0 across the edge of its support, where no microfacet
    # faces v: 12 × 12 points per bin left errors of 3 % in bins crossing it).
    n = 200_000
    v = _view(view_deg)
    frame = _mirror_frame(v)
    l, _ = vndf_sample(v, alpha, _rng(1).random((n, 2)))
    local = l @ frame.T
    theta = np.arccos(np.clip(local[:, 2], -1.0, 1.0))
    phi = np.mod(np.arctan2(local[:, 1], local[:, 0]), 2 * np.pi)
    t_edges = np.unique(np.r_[np.clip(alpha * GRADE[:8], 0.0, np.pi), np.pi])
    p_edges = np.linspace(0.0, 2 * np.pi, 17)
    observed, _, _ = np.histogram2d(theta, phi, bins=(t_edges, p_edges))
    sub, k = 4, 8

    def refined(edges):
        fine = np.r_[np.ravel(edges[:-1, None] + np.diff(edges)[:, None] * np.arange(sub) / sub), edges[-1]]
        return _panels(fine, k)

    tt, wt = refined(t_edges)
    pp, wp = refined(p_edges)
    T, P = np.meshgrid(tt, pp, indexing="ij")
    d = _sphere(T, P).reshape(-1, 3) @ frame
    mass = (vndf_pdf(UP, d, v, alpha) * (np.sin(T) * np.outer(wt, wp)).reshape(-1)).reshape(tt.size, pp.size)
    per = sub * k
    expected = mass.reshape(len(t_edges) - 1, per, len(p_edges) - 1, per).sum(axis=(1, 3))
    # The pdf integrates to 1 over the sphere (up to the quadrature across the edge of its
    # support, where no microfacet faces v).
    assert expected.sum() == pytest.approx(1.0, abs=5e-4)
    expected *= n / expected.sum()
    # Pearson's test on bins expecting at least 5, the rest pooled.
    big = expected >= 5.0
    obs = np.r_[observed[big], observed[~big].sum()]
    exp = np.r_[expected[big], expected[~big].sum()]
    if exp[-1] < 5.0:
        obs, exp = obs[:-1], exp[:-1]
    chi2 = np.sum((obs - exp) ** 2 / exp)
    p_value = stats.chi2.sf(chi2, len(obs) - 1)
    assert len(obs) > 20
    assert p_value > SIGNIFICANCE, (chi2, len(obs), p_value)


@pytest.mark.parametrize("alpha", [0.05, 0.1, 0.3, 0.6, 1.0])
@pytest.mark.parametrize("view_deg", [0.0, 45.0, 75.0])
def test_vndf_estimates_directional_albedo(alpha, view_deg):
    # With F = 1 (F0 = 1), the mean of f_s·cos θ_l / pdf over sampled directions is the albedo.
    n = 100_000
    v = _view(view_deg)
    l, pdf = vndf_sample(v, alpha, _rng(2).random((n, 2)))
    spec, _ = layered_eval(UP, l, v, 1.0, alpha)
    x = np.where(pdf > 0.0, spec / np.where(pdf > 0.0, pdf, 1.0), 0.0)
    reference = _albedo_by_quadrature(1.0, alpha, view_deg)
    error = x.std() / math.sqrt(n)
    assert abs(x.mean() - reference) < 4.0 * error + 1e-6, (x.mean(), reference, error)


def test_albedo_quadrature_closed_form():
    # α = 1, v = n, F = 1: D = 1/π, the visible normals have pdf cos θ_h/π, l makes the angle
    # 2θ_h with n, and f_s·cos θ_l/pdf = G1(l) = 2c/(c + 1); with x = cos²θ_h the albedo is
    # ∫_{1/2}^{1} 2(2x − 1)/(2x) dx = 1 − ln 2 (analytic, derived from the definitions above).
    assert _albedo_by_quadrature(1.0, 1.0, 0.0) == pytest.approx(1.0 - math.log(2.0), abs=1e-9)


@pytest.mark.parametrize("alpha", [0.02, 0.1, 0.5, 1.0])
def test_sampled_pdf_equals_pdf_function(alpha):
    # The pdf the sampler returns (from its microfacet normal) and the pdf function (from the
    # half vector of l and v) agree to rounding; directions are unit vectors.
    rng = _rng(3)
    n = 20_000
    tv = np.arccos(rng.uniform(0.02, 1.0, n))
    pv = rng.uniform(0.0, 2 * np.pi, n)
    v = _sphere(tv, pv)
    l, pdf = vndf_sample(v, alpha, rng.random((n, 2)))
    assert np.all(pdf > 0.0)
    assert np.allclose(np.linalg.norm(l, axis=1), 1.0, rtol=0, atol=1e-12)
    np.testing.assert_allclose(vndf_pdf(UP, l, v, alpha), pdf, rtol=1e-9)


def test_base_albedo_under_layer():
    # ∫ (1 − F(cos θ))·cos θ/π dω = (1 − F0)·20/21 for Schlick's F (beta function; analytic).
    assert BASE_ALBEDO_PER_TRANSMITTANCE == pytest.approx(1.0 - 2.0 * math.gamma(2) * math.gamma(6) / math.gamma(8))
    t, w = _panels(np.linspace(0.0, np.pi / 2, 9), 16)
    for f0 in (WATER_F0, 0.05, 0.5):
        l = _sphere(t, np.zeros_like(t))
        _, base = layered_eval(UP, l, UP, f0, 0.1)
        total = np.sum(2 * np.pi * base * np.sin(t) * w)
        assert total == pytest.approx((1.0 - f0) * BASE_ALBEDO_PER_TRANSMITTANCE, rel=1e-12)


def test_layered_eval_as_direct_light():
    # The layered value follows the direct light's layering (render.light.integrator: f_s for the
    # specular part, 1 − F(n·l) on the base); a consistency check, no external source.
    rng = _rng(4)
    n = 1000
    l = _sphere(np.arccos(rng.uniform(-0.3, 1.0, n)), rng.uniform(0, 2 * np.pi, n))
    v = _sphere(np.arccos(rng.uniform(0.01, 1.0, n)), rng.uniform(0, 2 * np.pi, n))
    spec, base = layered_eval(UP, l, v, WATER_F0, 0.1)
    up = l[:, 2] > 0.0
    np.testing.assert_array_equal(spec[up], specular_brdf(UP, l, v, WATER_F0, 0.1)[up] * l[up, 2])
    np.testing.assert_allclose(base[up], (1.0 - schlick_fresnel(l[up, 2], WATER_F0)) * l[up, 2] / np.pi, rtol=1e-15)
    assert not spec[~up].any() and not base[~up].any()
    spec0, base0 = layered_eval(UP, l, v, 0.0, 0.1)
    assert not spec0.any()
    np.testing.assert_allclose(base0[up], l[up, 2] / np.pi, rtol=1e-15)


@pytest.mark.parametrize(("f0", "alpha", "rho", "view_deg"), [(0.05, 0.1, 0.6, 30.0), (WATER_F0, 0.1, 0.2, 80.0)])
def test_one_sample_lobe_choice_is_unbiased(f0, alpha, rho, view_deg):
    # One-sample model (Veach 1997): choose the specular lobe with probability p, else the
    # base's cosine distribution (Malley's method); divide f·cos θ by the mixture pdf. The mean
    # is the layered surface's albedo: the specular part by quadrature, the base's analytic.
    n = 200_000
    v = _view(view_deg)
    p = specular_lobe_probability(v[2], f0, rho)
    assert 0.0 < p < 1.0
    rng = _rng(5)
    u = rng.random((n, 3))
    l_spec, _ = vndf_sample(v, alpha, u[:, 1:])
    r = np.sqrt(u[:, 1])
    phi = 2 * np.pi * u[:, 2]
    l_base = np.stack([r * np.cos(phi), r * np.sin(phi), np.sqrt(np.maximum(0.0, 1.0 - u[:, 1]))], axis=1)
    l = np.where((u[:, 0] < p)[:, None], l_spec, l_base)
    spec, base = layered_eval(UP, l, v, f0, alpha)
    pdf = layered_pdf(UP, l, v, alpha, p)
    x = np.where(pdf > 0.0, (spec + rho * base) / np.where(pdf > 0.0, pdf, 1.0), 0.0)
    reference = _albedo_by_quadrature(f0, alpha, view_deg) + rho * (1.0 - f0) * BASE_ALBEDO_PER_TRANSMITTANCE
    error = x.std() / math.sqrt(n)
    assert abs(x.mean() - reference) < 4.0 * error + 1e-6, (x.mean(), reference, error)


def test_lobe_probability_limits():
    # No layer: the base only; a black base: the specular lobe only; else between.
    assert specular_lobe_probability(0.7, 0.0, 0.5) == 0.0
    assert specular_lobe_probability(0.7, WATER_F0, 0.0) == 1.0
    assert specular_lobe_probability(0.0, WATER_F0, 0.0) == 1.0
    p = [specular_lobe_probability(c, WATER_F0, 0.3) for c in np.linspace(0.0, 1.0, 11)]
    assert all(0.0 < x < 1.0 for x in p) and np.all(np.diff(p) < 0.0)


def test_mis_weights_sum_to_one():
    # Balance and power heuristics of two strategies sum to 1 wherever either could have drawn
    # the sample (Veach 1997, ch. 9, from memory); 0 where neither could.
    rng = _rng(6)
    n_a = rng.integers(1, 5, 1000).astype(float)
    n_b = rng.integers(1, 5, 1000).astype(float)
    pa = rng.lognormal(0.0, 4.0, 1000)
    pb = rng.lognormal(0.0, 4.0, 1000)
    pa[:50] = 0.0
    for h in (balance_heuristic, power_heuristic):
        s = np.array([h(n_a[i], pa[i], n_b[i], pb[i]) + h(n_b[i], pb[i], n_a[i], pa[i]) for i in range(1000)])
        np.testing.assert_allclose(s, 1.0, rtol=0, atol=1e-15)
        assert h(1.0, 0.0, 1.0, 0.0) == 0.0
    # The definitions at one point: 1/(1 + 3) and 1/(1 + 9).
    assert balance_heuristic(1.0, 1.0, 1.0, 3.0) == pytest.approx(0.25, rel=1e-15)
    assert power_heuristic(1.0, 1.0, 1.0, 3.0) == pytest.approx(0.1, rel=1e-15)
    # The two strategies of a glossy vertex, the visible normals and the cosine, at directions
    # of the hemisphere.
    v = _view(40.0)
    l = _sphere(np.arccos(rng.uniform(0.0, 1.0, 500)), rng.uniform(0, 2 * np.pi, 500))
    ps = vndf_pdf(UP, l, v, 0.1)
    pc = l[:, 2] / np.pi
    for h in (balance_heuristic, power_heuristic):
        s = np.array([h(1.0, ps[i], 1.0, pc[i]) + h(1.0, pc[i], 1.0, ps[i]) for i in range(500)])
        np.testing.assert_allclose(s, 1.0, rtol=0, atol=1e-15)
