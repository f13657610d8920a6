"""The specular layer of the surface the camera sees: the second, white transport.

Sources of the expected values:
* Schlick's Fresnel approximation (analytic): a smooth layer seen at cos θ_v under a uniform sky
  of luminance L reflects F(cos θ_v)·L, F = F0 + (1 − F0)·(1 − cos θ_v)⁵; the base under it,
  lit through the interface, receives (1 − F0)·20/21 of E/π = L
  (``render.light.gloss.BASE_ALBEDO_PER_TRANSMITTANCE``, Schlick integrated, analytic);
* the GGX layer's directional albedo at finite roughness by the numpy quadrature of
  ``tests/test_indirect_gloss.py`` (Walter et al. 2007, independent of the renderer's sampler);
* a mirror reflects a lit window at F(cos θ_v) times its luminance where the mirrored view
  direction meets the window (analytic).
* the memory estimate: 81 float16 node values per pixel and channel plus a float32 scale and an
  int32 index per glossy pixel (the storage's definition).
"""

from __future__ import annotations

import math
from dataclasses import replace

import numpy as np
import pytest
from indirect_scenes import isotropic_source, mesh_of
from test_indirect_gloss import _ggx_albedo, _room

from render.colour.spectra import N_BINS
from render.geometry import shapes
from render.light.indirect import IndirectSettings, PathTracer, transport_at_points
from render.light.indirect.night import NightLight
from render.light.indirect.paths import WINDOW_BOUNCE_ONLY, WINDOW_CONNECTION_ONLY, WINDOW_MIS
from render.light.indirect.windows import LitWindows
from render.limits import render_memory_estimate
from render.rays.bvh import build_bvh

SKY, WINDOW = 1, 3
BAND = 40


def _schlick(cos, f0):
    return f0 + (1.0 - f0) * (1.0 - cos) ** 5


def _view(theta_deg, n):
    t = math.radians(theta_deg)
    return np.tile([math.sin(t), 0.0, math.cos(t)], (n, 1))


def _on_wet_floor(
    f0, alpha, rho, theta_deg, night, windows=None, paths=2048, n=48, seed=5, half=5000.0, window_mis=WINDOW_MIS
):
    """Base and specular transports (per point, band BAND) at ``n`` points on a wet floor seen
    at ``theta_deg`` from the normal."""
    s = half
    a, b, c, d = (-s, -s, 0.0), (s, -s, 0.0), (s, s, 0.0), (-s, s, 0.0)
    parts = [[shapes.flat_part(np.array([[a, b, c], [a, c, d]], np.float64), "body")]]
    names = ["floor"]
    if windows is not None:
        a, b, c, d = (-1.0, -1.0, 2.0), (-1.0, 1.0, 2.0), (1.0, 1.0, 2.0), (1.0, -1.0, 2.0)  # facing down
        parts.append([shapes.flat_part(np.array([[a, b, c], [a, c, d]], np.float64), "body")])
        names.append("glass")
    mesh = mesh_of(parts, names)
    mesh.material_gloss = np.array([[f0, alpha], [0.0, 1.0]][: len(names)], np.float64)
    bvh = build_bvh(mesh.triangles_m)
    st = IndirectSettings(bounces=1, samples_per_pixel=paths, night=night)
    rho_k = np.vstack([np.full(N_BINS, float(rho)), np.zeros(N_BINS)])[: len(names)]
    tracer = PathTracer(
        mesh, bvh, isotropic_source([0.0, 0.0, 50000.0]), rho_k, st, windows=windows, window_mis=window_mis
    )
    rng = np.random.default_rng(seed)
    pts = np.column_stack([rng.uniform(-0.3, 0.3, (n, 2)), np.zeros(n)])
    nrm = np.tile([0.0, 0.0, 1.0], (n, 1))
    spec = np.zeros((n, tracer.n_channels + tracer.n_ambient, tracer.basis.n_nodes))
    m, _ = transport_at_points(
        pts, nrm, np.zeros(n, np.int32), tracer, seed, view_dirs=_view(theta_deg, n), specular_out=spec
    )
    return m[:, :, BAND], spec[:, :, BAND]


def _mean_err(x):
    return x.mean(axis=0), x.std(axis=0, ddof=1) / math.sqrt(x.shape[0])


@pytest.mark.parametrize("theta_deg", [0.0, 80.0])
def test_smooth_wet_floor_reflects_the_sky_at_fresnel(theta_deg):
    # Black base, α = 0.01: the camera sees F(cos θ_v)·L_sky in the floor (Schlick, analytic),
    # within 1 % and within 4 σ of the GGX quadrature (masking at α = 0.01).
    f0 = 0.02
    base, spec = _on_wet_floor(f0, 0.01, 0.0, theta_deg, NightLight(sky_luminance_cd_m2=1.0))
    mean, err = _mean_err(spec)
    cos = math.cos(math.radians(theta_deg))
    ref, ref_err = _ggx_albedo(cos, f0, 0.01)
    assert abs(mean[SKY] - ref) < 4.0 * math.hypot(err[SKY], ref_err) + 1e-9
    assert abs(mean[SKY] / _schlick(cos, f0) - 1.0) < 0.01


@pytest.mark.parametrize("theta_deg", [30.0, 75.0])
def test_grey_wet_floor_splits_base_and_layer(theta_deg):
    # ρ = 0.5 under a rough water layer (α = 0.1): the base's transport stays (1 − F0)·20/21
    # of the sky (analytic, as without the layer's share), the layer's is its directional
    # albedo A(θ_v) (quadrature).
    f0, alpha = 0.02, 0.1
    base, spec = _on_wet_floor(f0, alpha, 0.5, theta_deg, NightLight(sky_luminance_cd_m2=1.0))
    mb, eb = _mean_err(base)
    ms, es = _mean_err(spec)
    expected_base = (1.0 - f0) * 20.0 / 21.0
    assert abs(mb[SKY] - expected_base) < 4.0 * eb[SKY] + 1e-3
    ref, ref_err = _ggx_albedo(math.cos(math.radians(theta_deg)), f0, alpha)
    assert abs(ms[SKY] - ref) < 4.0 * math.hypot(es[SKY], ref_err)


def _window_above():
    """A 2 m × 2 m lit window 2 m above the floor, facing down."""
    e1, e2 = np.array([0.0, 2.0, 0.0]), np.array([2.0, 0.0, 0.0])
    nrm_w = np.cross(e1, e2)
    area = float(np.linalg.norm(nrm_w))
    return LitWindows(
        np.concatenate([[-1.0, -1.0, 2.0], e1, e2, nrm_w / area, [area]])[None],
        np.zeros(1, np.int64),
        np.zeros(1, np.int64),
        (1, 0),
    )


def test_mirror_wet_floor_shows_a_lit_window_at_fresnel_times_its_luminance():
    # A nearly smooth layer (α = 0.02, F0 = 0.5, black base) seen at 10° from the normal: the
    # mirrored view direction meets a 2 m × 2 m lit window 2 m up, so the camera sees
    # F(cos θ_v)·L_window in the floor (analytic).
    f0, theta = 0.5, 10.0
    win = _window_above()
    base, spec = _on_wet_floor(f0, 0.02, 0.0, theta, NightLight(window_lit_fraction=1.0), windows=win, paths=512)
    mean, err = _mean_err(spec)
    expected = _schlick(math.cos(math.radians(theta)), f0)
    assert abs(mean[WINDOW] / expected - 1.0) < 0.01 + 4.0 * err[WINDOW] / expected


@pytest.mark.parametrize(
    ("f0", "alpha", "rho", "as_good"),
    [(0.02, 0.1, 0.1, True), (0.02, 0.3, 0.5, True), (0.5, 0.02, 0.0, False)],
)
def test_camera_window_strategies_agree_and_mis_is_not_noisier(f0, alpha, rho, as_good):
    # The camera surface's layer reflecting a lit window (seen at 10°): the connection alone,
    # the direction drawn from the layer alone and both weighted by the power heuristic have
    # one mean (MIS is unbiased whatever the weights, Veach & Guibas 1995; within 4 σ). What
    # the camera sees per unit luminance is ρ·T + S (the base's transport takes the floor's
    # reflectance, the layer's is white). The weighted estimate's variance per path stays
    # within Veach's bound for one sample of each of two strategies, σ² ≤ σ²_best + μ²/2
    # (E. Veach, thesis 1997, ch. 9, for the balance heuristic; from memory), and for a wet
    # road and a rough layer its standard error is at most 1.2 times the better strategy's
    # (common practice for the margin, as at bounce vertices). Under a nearly mirror-like
    # layer (α = 0.02) the drawn direction alone is better (its reflected cone lies wholly in
    # the window): MIS is held to the bound only there.
    paths, n = 256, 48
    runs = {}
    for s in (WINDOW_MIS, WINDOW_CONNECTION_ONLY, WINDOW_BOUNCE_ONLY):
        base, spec = _on_wet_floor(
            f0, alpha, rho, 10.0, NightLight(window_lit_fraction=1.0), windows=_window_above(), paths=paths, n=n,
            window_mis=s,
        )  # fmt: skip
        runs[s] = _mean_err(rho * base[:, WINDOW] + spec[:, WINDOW])
    m0, e0 = runs[WINDOW_MIS]
    for s in (WINDOW_CONNECTION_ONLY, WINDOW_BOUNCE_ONLY):
        m, e = runs[s]
        assert abs(m - m0) < 4.0 * math.hypot(e, e0), (s, m, m0, e, e0)
    best = min(runs[WINDOW_CONNECTION_ONLY][1], runs[WINDOW_BOUNCE_ONLY][1])
    assert e0**2 <= best**2 + m0**2 / (2 * paths * n), runs
    if as_good:
        assert e0 <= 1.2 * best, runs
    print({s: r for s, r in runs.items()})


def test_start_surfaces_without_a_layer_keep_their_bits():
    # Camera surfaces (materials given) with F0 = 0 keep the bits of no layer, and their
    # specular transport is zero.
    plain = _room(None, start_materials=True)
    assert np.array_equal(plain, _room([[0.0, 1.0], [0.0, 0.3], [0.0, 0.1]], start_materials=True))
    # ... and a layer on a camera surface changes them (the check can fail).
    assert not np.array_equal(plain, _room([[0.02, 0.1], [0.0, 1.0], [0.0, 1.0]], start_materials=True))


def test_memory_estimate_counts_the_gloss_pixels():
    # 162 bytes per glossy pixel and channel plus 8 (scale and index).
    w, h, spp, c = 1920, 1080, 4, 2
    none = render_memory_estimate(w, h, spp, c, True).bytes
    half = render_memory_estimate(w, h, spp, c, True, 0.5).bytes
    assert half - none == math.ceil(0.5 * w * h) * (8 + 162 * c)


def test_wet_road_view_adds_the_layer_and_relights_by_a_multiply():
    # The demo street with its asphalt wet (water, α = 0.1): the road's pixels keep a second
    # transport, it adds light (the reflection left out before), and relighting stays linear
    # in the channels' factors (a relight is a multiply; common practice, no source).
    from render.light.indirect import indirect_xyz, trace_view
    from render.light.luminaires import channel_factors
    from render.resources import demo_scene_path
    from render.study import Study

    study = Study(demo_scene_path())
    gloss = np.tile([0.0, 1.0], (len(study.mesh.material_names), 1))
    gloss[study.mesh.material_names.index("asphalt-worn")] = (0.02, 0.1)
    study.mesh.material_gloss = gloss
    rendered = study.render_view(None, "sodium", width_px=64, samples_per_pixel=2)
    b, lights = rendered.buffers, rendered.lights
    ind = trace_view(b, lights, study.bvh, study.reflectances, IndirectSettings(bounces=2, samples_per_pixel=4), seed=2)
    assert ind.spec_index is not None and 0 < ind.spec_index.size < b.width_px * b.height_px
    f, lamps = channel_factors(lights, study.setup("sodium"))
    f = np.asarray(f, np.float64)
    spds = study.lamp_spds(lamps)
    full = indirect_xyz(ind, b.response, f, spds, study.reflectances)
    bare = indirect_xyz(
        replace(ind, spec_index=None, spec_values=None, spec_scale=None), b.response, f, spds, study.reflectances
    )
    assert full[..., 1].sum() > bare[..., 1].sum()
    np.testing.assert_allclose(indirect_xyz(ind, b.response, 2.5 * f, spds, study.reflectances), 2.5 * full, rtol=1e-12)


def test_gloss_share_of_a_view_is_estimated_from_above():
    # The memory estimate's share of pixels that see a layer, from a coarse pass of the camera
    # (one ray per coarse pixel, grown by one coarse pixel): never below the share the view's
    # own camera samples give (a pixel counts when any of its samples sees the layer), and
    # not the whole view as before; 0 without a layer (the definition of the stored pixels).
    from render.light.gloss import view_gloss_share
    from render.resources import demo_scene_path
    from render.study import Study

    study = Study(demo_scene_path())
    view = study.scene.views[0].name
    camera = study.camera(view, 256)
    assert view_gloss_share(study.mesh, study.bvh, camera, width_px=64) == 0.0
    gloss = np.tile([0.0, 1.0], (len(study.mesh.material_names), 1))
    gloss[study.mesh.material_names.index("asphalt-worn")] = (0.02, 0.1)
    study.mesh.material_gloss = gloss
    estimate = view_gloss_share(study.mesh, study.bvh, camera, width_px=64)
    rendered = study.render_view(view, "sodium", width_px=256, samples_per_pixel=4)
    b = rendered.buffers
    response = b.response.reshape(-1, b.spp)
    f0 = np.append(gloss[:, 0], 0.0)
    actual = (f0[np.where((response >= 0) & (response < len(gloss)), response, len(gloss))] > 0.0).any(axis=1).mean()
    assert 0.0 < actual <= estimate < 1.0, (actual, estimate)
    print(actual, estimate)
