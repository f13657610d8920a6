"""Interreflected light off the specular layer: bounce vertices with a GGX layer over the base.

Sources of the expected values:
* Schlick's Fresnel approximation integrated over the hemisphere (analytic): a smooth layer
  under a uniform sky of luminance L shows, cosine-averaged over the directions a downward
  facing point sees, 2·∫ F(μ)·μ dμ = F0 + (1 − F0)·2·B(2, 6) = F0 + (1 − F0)/21 times L
  (B the beta function); the base under it, lit through the interface, adds
  ρ·(1 − F0)·20/21·L (``render.light.gloss.BASE_ALBEDO_PER_TRANSMITTANCE``);
* the GGX microfacet BRDF of Walter et al. (2007) (GGX D, separable Smith G1, Schlick F),
  integrated here independently by Monte Carlo in numpy (half vectors drawn from D(h)·cos θ_h,
  the textbook estimator F·G·(v·h)/(cos θ_v·cos θ_h)) for the directional albedo at finite
  roughness, which the layer loses to masking (single scattering only);
* the white furnace (common practice, no source): under a uniform sky (a closed enclosure of
  uniform luminance) a surface of albedo 1 shows the sky's luminance. With ρ = 1 under the
  layer the two lobes' cosine-averaged albedo is (1 − F0)·20/21 + F0 + (1 − F0)/21 = 1 exactly
  in the smooth limit (analytic, although the layering's albedo is above 1 at grazing views and
  below 1 at steep ones), and below 1 by the masking loss at finite roughness.

Scenes: one large floor (±5 km) and points 1 m above it facing down, so every path meets the
floor once and the layer's reflection of the sky (sampled escapes) or of the moon (next-event
estimation, a delta light) is all they see.
"""

from __future__ import annotations

import math

import numpy as np
import pytest
from indirect_scenes import isotropic_source, mesh_of, reflectance

from render.colour.spectra import N_BINS
from render.geometry import shapes
from render.light.indirect import IndirectSettings, PathTracer, transport_at_points
from render.light.indirect.night import NightLight
from render.light.indirect.paths import WINDOW_BOUNCE_ONLY, WINDOW_CONNECTION_ONLY, WINDOW_MIS
from render.light.indirect.windows import LitWindows
from render.rays.bvh import build_bvh

# Channels with one luminaire and night light: luminaire, sky, moon, house and shop windows.
SKY, MOON = 1, 2
WINDOW = 3  # the house windows' channel
BAND = 40  # a node in mid-spectrum (the reflectances here are flat)


def _floor(half_m: float = 5000.0) -> shapes.Part:
    s = half_m
    a, b, c, d = (-s, -s, 0.0), (s, -s, 0.0), (s, s, 0.0), (-s, s, 0.0)
    return shapes.flat_part(np.array([[a, b, c], [a, c, d]], np.float64), "body")


def _over_floor(f0, alpha, rho, night, paths=4096, n=64, seed=1):
    """Mean and standard error over ``n`` points 1 m above a glossy floor, facing down, of the
    stored E/π per unit sky luminance or moon illuminance (one bounce)."""
    mesh = mesh_of([[_floor()]], ["floor"])
    mesh.material_gloss = np.array([[f0, alpha]], np.float64)
    bvh = build_bvh(mesh.triangles_m)
    lights = isotropic_source([0.0, 0.0, 50000.0])  # far away: its channel is not looked at
    st = IndirectSettings(bounces=1, samples_per_pixel=paths, night=night)
    tracer = PathTracer(mesh, bvh, lights, np.full((1, N_BINS), float(rho)), st)
    rng = np.random.default_rng(seed)
    pts = np.column_stack([rng.uniform(-10.0, 10.0, (n, 2)), np.full(n, 1.0)])
    nrm = np.tile([0.0, 0.0, -1.0], (n, 1))
    m, _ = transport_at_points(pts, nrm, None, tracer, seed)
    return m[:, :, BAND].mean(axis=0), m[:, :, BAND].std(axis=0, ddof=1) / math.sqrt(n)


def _ggx_albedo(mu_v, f0, alpha, n=1_000_000, seed=0):
    """Directional albedo ∫ f_s·cos θ_l dω of the GGX layer (Walter et al. 2007) for views of
    cosine ``mu_v`` (scalar or (n,) array), by numpy Monte Carlo independent of the renderer's
    sampler: mean and standard error."""
    rng = np.random.default_rng(seed)
    mu = np.broadcast_to(np.asarray(mu_v, np.float64), (n,))
    u1, u2 = rng.random(n), rng.random(n)
    a2 = alpha * alpha
    ch = np.sqrt((1.0 - u1) / (1.0 + (a2 - 1.0) * u1))  # D(h)·cos θ_h sampling
    sh = np.sqrt(np.maximum(0.0, 1.0 - ch * ch))
    phi = 2.0 * np.pi * u2
    h = np.stack([sh * np.cos(phi), sh * np.sin(phi), ch], 1)
    v = np.stack([np.sqrt(1.0 - mu * mu), np.zeros(n), mu], 1)
    vh = np.sum(v * h, 1)
    lz = 2.0 * vh * ch - mu

    def g1(c):
        c = np.clip(c, 1e-9, 1.0)
        return 2.0 * c / (c + np.sqrt(a2 + (1.0 - a2) * c * c))

    fres = f0 + (1.0 - f0) * (1.0 - np.clip(vh, 0.0, 1.0)) ** 5
    w = np.where((lz > 0.0) & (vh > 0.0), fres * g1(mu) * g1(lz) * vh / (mu * ch), 0.0)
    return float(w.mean()), float(w.std() / math.sqrt(n))


def _ggx_albedo_cosine_mean(f0, alpha):
    """∫ A(μ)·2μ dμ: the albedo averaged over views as a downward-facing point sees them."""
    mu = np.sqrt(np.random.default_rng(11).random(1_000_000))
    return _ggx_albedo(mu, f0, alpha)


@pytest.mark.parametrize(("f0", "alpha"), [(0.02, 0.01), (0.5, 0.01)])
def test_mirror_floor_shows_the_sky_times_fresnel(f0, alpha):
    # A smooth layer over a black base: the sky seen in it is F·L; averaged over the cosine
    # of a downward-facing point, F0 + (1 − F0)/21 (analytic), less the masking of α = 0.01
    # (numpy quadrature of the GGX BRDF, 0.7 % and 0.1 %).
    mean, err = _over_floor(f0, alpha, 0.0, NightLight(sky_luminance_cd_m2=1.0))
    limit = f0 + (1.0 - f0) / 21.0
    ref, ref_err = _ggx_albedo_cosine_mean(f0, alpha)
    assert abs(ref - limit) < 0.01 * limit  # the quadrature's own check against the limit
    assert abs(mean[SKY] - ref) < 4.0 * math.hypot(err[SKY], ref_err)
    assert abs(mean[SKY] - limit) < 0.01 * limit


@pytest.mark.parametrize("alpha", [0.01, 0.1, 0.3])
def test_white_furnace_under_the_layer(alpha):
    # ρ = 1 base under a water layer (F0 = 0.02) under a uniform sky: 1 in the smooth limit
    # (analytic), below by the GGX single-scattering loss at finite α (numpy quadrature):
    # expected (1 − F0)·20/21 + ∫A(μ)·2μ dμ; measured 0.9996 / 0.9858 / 0.9645.
    f0 = 0.02
    mean, err = _over_floor(f0, alpha, 1.0, NightLight(sky_luminance_cd_m2=1.0))
    spec, spec_err = _ggx_albedo_cosine_mean(f0, alpha)
    expected = (1.0 - f0) * 20.0 / 21.0 + spec
    assert abs(mean[SKY] - expected) < 4.0 * math.hypot(err[SKY], spec_err)
    assert mean[SKY] < 1.0 + 4.0 * err[SKY]  # nothing created
    if alpha <= 0.01:
        assert abs(mean[SKY] - 1.0) < 0.002


@pytest.mark.parametrize("rho", [0.0, 0.5])
@pytest.mark.parametrize("elevation_deg", [30.0, 60.0])
def test_moon_reflected_by_a_rough_wet_floor(rho, elevation_deg):
    # Next-event estimation to a delta light at a layered vertex: by reciprocity, a downward
    # facing point over an infinite floor lit by the moon (unit normal illuminance, cos θ_m
    # on the floor) receives E/π = cos θ_m·(A(cos θ_m) + ρ·(1 − F(cos θ_m)))/π, A the layer's
    # directional albedo (numpy quadrature of the GGX BRDF), F Schlick's.
    f0, alpha = 0.02, 0.3
    night = NightLight(moon_illuminance_lx=1.0, moon_elevation_deg=elevation_deg, moon_azimuth_deg=30.0)
    mean, err = _over_floor(f0, alpha, rho, night)
    mu = math.sin(math.radians(elevation_deg))
    spec, spec_err = _ggx_albedo(mu, f0, alpha)
    fres = f0 + (1.0 - f0) * (1.0 - mu) ** 5
    expected = mu * (spec + rho * (1.0 - fres)) / math.pi
    assert abs(mean[MOON] - expected) < 4.0 * math.hypot(err[MOON], mu * spec_err / math.pi)
    assert abs(mean[MOON] - expected) < 0.02 * expected


def _room(gloss, start_materials=False):
    # A closed room with a floor slab, a pillar and one lit window: luminaire, sky (none
    # reaches it), moon and window channels all traced.
    box = shapes.box(min_m=(-4.0, -3.0, 0.0), max_m=(4.0, 3.0, 6.0))
    slab = shapes.box(min_m=(-3.0, -2.0, 0.0), max_m=(3.0, 2.0, 0.2))
    pillar = shapes.box(min_m=(1.0, 0.5, 0.2), max_m=(1.5, 1.0, 3.0))
    mesh = mesh_of([box, slab, pillar], ["wall", "slab", "pillar"])
    if gloss is not None:
        mesh.material_gloss = np.asarray(gloss, np.float64)
    yellow = reflectance("object-yellow")
    rho = np.stack([yellow, 0.9 * yellow, np.full(N_BINS, 0.5), np.full(N_BINS, 0.7)])[: len(mesh.material_names)]
    if gloss is not None and len(gloss) > len(rho):
        rho = np.vstack([rho, np.full((len(gloss) - len(rho), N_BINS), 0.7)])
        mesh.material_names = list(mesh.material_names) + ["unused"] * (len(gloss) - len(mesh.material_names))
    corner, e1, e2 = np.array([-3.99, -1.0, 2.0]), np.array([0.0, 2.0, 0.0]), np.array([0.0, 0.0, 1.5])
    n = np.cross(e1, e2)
    area = float(np.linalg.norm(n))
    win = LitWindows(
        np.concatenate([corner, e1, e2, n / area, [area]])[None], np.zeros(1, np.int64), np.zeros(1, np.int64), (1, 0)
    )
    bvh = build_bvh(mesh.triangles_m)
    night = NightLight(
        sky_luminance_cd_m2=1.0, moon_illuminance_lx=1.0, moon_elevation_deg=40.0, window_lit_fraction=1.0
    )
    st = IndirectSettings(bounces=4, samples_per_pixel=16, night=night)
    tracer = PathTracer(mesh, bvh, isotropic_source((0.5, -1.0, 4.5)), rho, st, windows=win)
    rng = np.random.default_rng(4)
    pts = np.column_stack([rng.uniform(-3.5, 3.5, 60), rng.uniform(-2.5, 2.5, 60), rng.uniform(0.5, 5.5, 60)])
    nrm = rng.normal(size=(60, 3))
    nrm /= np.linalg.norm(nrm, axis=1, keepdims=True)
    # (start_materials: the points are surfaces seen, of the first three materials in turn.)
    mats = np.arange(60, dtype=np.int32) % 3 if start_materials else None
    return transport_at_points(pts, nrm, mats, tracer, 7)[0]


def test_a_layer_no_path_meets_changes_no_bit():
    # The layer's random numbers are drawn only at vertices with a layer: F0 = 0 everywhere,
    # or a layer on a material no triangle has, gives the bits of no layer at all.
    plain = _room(None)
    assert np.array_equal(plain, _room([[0.0, 1.0], [0.0, 0.3], [0.0, 0.1]]))
    assert np.array_equal(plain, _room([[0.0, 1.0], [0.0, 1.0], [0.0, 1.0], [0.5, 0.05]]))
    # ... and a layer the paths do meet changes them (the check can fail).
    assert not np.array_equal(plain, _room([[0.0, 1.0], [0.02, 0.1], [0.0, 1.0]]))


# ------------------------------------------------------------------------------------------
# A lit window seen in a wet floor: multiple importance sampling
# ------------------------------------------------------------------------------------------


def _floor_and_window(f0, alpha, rho, strategy, paths=1024, n=48, seed=3, bounces=2):
    """E/π per unit window luminance at ``n`` points 1 m above a glossy floor (facing down)
    under a 2 m × 2 m lit window 2 m up facing down (its glass black), gathered with
    ``strategy``: per point, and the mean and standard error."""
    s = 5000.0
    a, b, c, d = (-s, -s, 0.0), (s, -s, 0.0), (s, s, 0.0), (-s, s, 0.0)
    floor = shapes.flat_part(np.array([[a, b, c], [a, c, d]], np.float64), "body")
    a, b, c, d = (-1.0, -1.0, 2.0), (-1.0, 1.0, 2.0), (1.0, 1.0, 2.0), (1.0, -1.0, 2.0)  # facing down
    glass = shapes.flat_part(np.array([[a, b, c], [a, c, d]], np.float64), "body")
    mesh = mesh_of([[floor], [glass]], ["floor", "glass"])
    mesh.material_gloss = np.array([[f0, alpha], [0.0, 1.0]], np.float64)
    e1, e2 = np.array([0.0, 2.0, 0.0]), np.array([2.0, 0.0, 0.0])
    nrm_w = np.cross(e1, e2)
    area = float(np.linalg.norm(nrm_w))
    win = LitWindows(
        np.concatenate([[-1.0, -1.0, 2.0], e1, e2, nrm_w / area, [area]])[None],
        np.zeros(1, np.int64),
        np.zeros(1, np.int64),
        (1, 0),
    )
    bvh = build_bvh(mesh.triangles_m)
    night = NightLight(window_lit_fraction=1.0)
    st = IndirectSettings(bounces=bounces, samples_per_pixel=paths, night=night)
    rho_k = np.vstack([np.full(N_BINS, float(rho)), np.zeros(N_BINS)])
    tracer = PathTracer(mesh, bvh, isotropic_source([0.0, 0.0, 50000.0]), rho_k, st, windows=win, window_mis=strategy)
    assert np.array_equal(tracer.tri_window, [-1, -1, 0, 0])
    rng = np.random.default_rng(seed)
    pts = np.column_stack([rng.uniform(-0.3, 0.3, (n, 2)), np.full(n, 1.0)])
    m, _ = transport_at_points(pts, np.tile([0.0, 0.0, -1.0], (n, 1)), None, tracer, seed)
    e = m[:, WINDOW, BAND]
    return pts, e, e.mean(), e.std(ddof=1) / math.sqrt(n)


def _mirror_image_factor(p, f0, n=600):
    """E/(π·L) at ``p`` (facing down) from the window's mirror image in a smooth floor of
    Schlick reflectance: (1/π)·∫ F(cos θ)·cos θ_p·cos θ_w / r² dA over the image (z = −2),
    midpoint rule (the definition, integrated numerically)."""
    u = (np.arange(n) + 0.5) / n * 2.0 - 1.0
    x, y = np.meshgrid(u, u, indexing="ij")
    depth = p[2] + 2.0
    r2 = (x - p[0]) ** 2 + (y - p[1]) ** 2 + depth * depth
    cos = depth / np.sqrt(r2)
    fres = f0 + (1.0 - f0) * (1.0 - cos) ** 5
    return float(np.sum(fres * cos * cos / r2) * (2.0 / n) ** 2 / math.pi)


def test_window_in_a_mirror_floor_is_fresnel_times_its_luminance():
    # A nearly smooth layer (α = 0.02) over a black base mirrors the lit window: per point,
    # the window's image weighted by F(cos θ) (Schlick, analytic; the image's configuration
    # integral by the midpoint rule). Masking and the lobe's blur of the image's edges stay
    # below 1 %.
    f0 = 0.5
    pts, e, mean, err = _floor_and_window(f0, 0.02, 0.0, WINDOW_MIS)
    expected = np.array([_mirror_image_factor(p, f0) for p in pts])
    assert abs(mean - expected.mean()) < 4.0 * err + 0.01 * expected.mean()
    assert abs(mean / expected.mean() - 1.0) < 0.02


@pytest.mark.parametrize(("alpha", "rho"), [(0.02, 0.0), (0.3, 0.5)])
def test_window_strategies_agree_and_mis_is_not_noisier(alpha, rho):
    # Multiple importance sampling is unbiased whatever the weights (Veach 1997): the
    # connection alone, the sampled direction alone and both weighted by the power heuristic
    # have one mean (within 4 σ); the weighted one's variance is at most the smaller of the two
    # (within a factor 1.2 of sampling noise; measured in DEVELOPERS.md).
    runs = {s: _floor_and_window(0.02, alpha, rho, s) for s in (WINDOW_MIS, WINDOW_CONNECTION_ONLY, WINDOW_BOUNCE_ONLY)}
    m0, e0 = runs[WINDOW_MIS][2:]
    for s in (WINDOW_CONNECTION_ONLY, WINDOW_BOUNCE_ONLY):
        m, e = runs[s][2:]
        assert abs(m - m0) < 4.0 * math.hypot(e, e0), (s, m, m0, e, e0)
    assert e0 <= 1.2 * min(runs[WINDOW_CONNECTION_ONLY][3], runs[WINDOW_BOUNCE_ONLY][3])
    print({s: (r[2], r[3]) for s, r in runs.items()})
