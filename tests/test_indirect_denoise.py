"""The edge-aware denoise of a view's interreflected light (render.light.indirect.denoise).

What each check rests on:
* the weights of a pixel are normalised to sum one (Dammertz et al. 2010, eq. of the
  edge-avoiding à-trous pass): a constant transport stays constant, to float precision
  (analytic);
* the filter is linear with weights from the geometry alone, so it commutes with any linear
  map applied alike to every pixel -- here the relit, demodulated light of a setup (a white
  diffuser's illuminance from the transport, :func:`illuminance_from_transport`) -- to float
  precision (linear algebra, analytic);
* edge-stopping (Dammertz et al. 2010): no light is carried across a corner or a step of a
  rendered scene whose two sides carry transports 100 times apart (common practice, no
  source for the bound: below 1e-6 of the other side);
* against a reference of the same view traced with many more paths (its own noise measured
  from two independent halves and taken out, statistics): the RMS error of the interreflected
  luminance falls at least 2-fold (measured about 3.2-fold at 128 px and 3.9-fold at 256 px,
  ``python -m render.bench denoise``; the bound is our own choice, common practice, no
  source);
* the specular layer's white transport S is filtered with the same weights among the pixels
  that see a layer only: a constant S stays constant up to the layer's edges (normalised
  weights, analytic), and it is the float64 filter of those pixels' rows to float16 precision
  (the same linear map; storage rounding 2⁻¹¹ of a pixel's largest value);
* calculations never filtered: their figures with the scene key on equal those with it off
  to the bit; same scene, same seed, same bytes whatever the threads (common practice, no
  source).
"""

from __future__ import annotations

from dataclasses import replace
from pathlib import Path

import numba
import numpy as np
import pytest
from indirect_scenes import isotropic_source, mesh_of

from render.geometry import shapes
from render.light import integrator
from render.light.indirect import IndirectSettings, illuminance_from_transport, indirect_xyz, trace_view
from render.light.indirect.denoise import (
    DenoisedSettings,
    DenoiseGuides,
    DenoiseSettings,
    denoise_view,
    filter_rows,
    filter_specular,
    filter_transport,
    view_guides,
)
from render.light.indirect.transport import half_table
from render.light.luminaires import channel_factors
from render.rays.bvh import build_bvh
from render.rays.cameras import Camera
from render.resources import demo_scene_path
from render.scene import load_scene
from render.study import Study

MINIMAL = Path(__file__).resolve().parent.parent / "scenes" / "tests" / "minimal_street.toml"


def _decode(values: np.ndarray, scale: np.ndarray) -> np.ndarray:
    return half_table()[values.view(np.uint16)] * scale.astype(np.float64)[:, None, None]


@pytest.fixture(scope="module")
def demo_view():
    study = Study(demo_scene_path())
    rendered = study.render_view(None, "sodium", width_px=64, samples_per_pixel=4, bounces=0)
    buffers = rendered.buffers
    buffers.indirect = trace_view(
        buffers, rendered.lights, study.bvh, study.reflectances, IndirectSettings(3, 8), seed=1
    )
    return study, rendered, view_guides(buffers)


# Weights
# ------------------------------------------------------------------------------------------


def test_constant_transport_stays_constant(demo_view):
    # On the demo's real guides (edges everywhere), every pass's weights sum to one.
    _, rendered, guides = demo_view
    n_pix = guides.width_px * guides.height_px
    rows = np.tile(np.linspace(0.5, 2.0, 12), (n_pix, 1))
    out = filter_rows(rows, guides, DenoiseSettings(passes=5))
    np.testing.assert_allclose(out, rows, rtol=1e-14, atol=0.0)
    # The stored path: float32 filtering and float16 storage of a constant node value.
    values = np.ones((n_pix, 2, 81), np.float16)
    scale = np.full(n_pix, 0.25, np.float32)
    v, s = filter_transport(values, scale, guides)
    np.testing.assert_allclose(_decode(v, s), 0.25, rtol=1e-6)


def _edge_scene(parts: list, camera: Camera, source):
    mesh = mesh_of(parts, ["object-white", "object-grey"][: len(parts)])
    bvh = build_bvh(mesh.triangles_m)
    buffers = integrator.render_buffers(mesh, bvh, isotropic_source(source), camera, 4, 3)
    return buffers, view_guides(buffers)


@pytest.mark.parametrize("kind", ["corner", "step"])
def test_no_light_carried_across_a_geometric_edge(kind):
    # A floor meeting a wall (corner), or a floor and the top of a 0.15 m block on it (step):
    # the pixels of the two sides get transports 100 times apart; after filtering, each side
    # keeps its own to 1e-6.
    floor = shapes.box(min_m=(-5.0, -5.0, -0.2), max_m=(5.0, 5.0, 0.0))
    if kind == "corner":
        other = shapes.box(min_m=(-5.0, 1.0, 0.0), max_m=(5.0, 1.2, 4.0))
        camera = Camera(position_m=(0.0, -4.0, 2.0), target_m=(0.0, 1.0, 0.8), hfov_deg=60, width_px=48, height_px=36)
    else:
        other = shapes.box(min_m=(-5.0, 0.0, 0.0), max_m=(5.0, 5.0, 0.15))
        camera = Camera(position_m=(0.0, -3.0, 3.0), target_m=(0.0, 0.5, 0.0), hfov_deg=60, width_px=48, height_px=36)
    buffers, guides = _edge_scene([floor, other], camera, (0.0, -1.0, 3.0))
    up = guides.valid & (guides.normal[:, 2] > 0.9)
    on_floor = up & (guides.position_m[:, 2] < 0.075)
    far_side = guides.valid & ~on_floor
    assert on_floor.sum() > 100 and far_side.sum() > 100
    n_pix = guides.width_px * guides.height_px
    rows = np.where(on_floor, 1.0, 100.0)[:, None] * np.ones((n_pix, 3))
    out = filter_rows(rows, guides, DenoiseSettings(passes=5))
    np.testing.assert_allclose(out[on_floor], 1.0, rtol=1e-6)
    np.testing.assert_allclose(out[far_side], 100.0, rtol=1e-6)
    # The guide of a pixel on the edge is one side's, not a blend: every guide lies on a surface.
    z = guides.position_m[guides.valid, 2]
    if kind == "step":
        assert np.all((np.abs(z) < 1e-4) | (np.abs(z - 0.15) < 1e-4) | (guides.normal[guides.valid, 2] < 0.5))


# Linearity and relighting
# ------------------------------------------------------------------------------------------


def test_filter_then_relight_equals_relight_then_filter(demo_view):
    # Two setups' demodulated light (white diffuser illuminance): filtering the transport once
    # and relighting equals filtering each relit image.
    study, rendered, guides = demo_view
    ind = rendered.buffers.indirect
    moments = _decode(ind.values, ind.scale)
    filtered = filter_rows(moments, guides)
    for setup, lamp in (("sodium", None), ("sodium", "led-4000k-cie-b3"), ("led-3000k-half", None)):
        factors, lamps = channel_factors(rendered.lights, study.setup(setup))
        spds = study.lamp_spds([lamp] * len(lamps) if lamp else lamps)
        after = illuminance_from_transport(filtered, factors, spds, ind.settings.basis)
        before = filter_rows(illuminance_from_transport(moments, factors, spds, ind.settings.basis), guides)
        assert after.max() > 0.0
        np.testing.assert_allclose(after, before, rtol=1e-12, atol=1e-12 * after.max())
    # The stored path is the same filter up to its float16 storage (two roundings).
    v, s = filter_transport(ind.values, ind.scale, guides)
    stored = _decode(v, s)
    top = np.abs(filtered).reshape(len(s), -1).max(axis=1)
    assert np.all(np.abs(stored - filtered).reshape(len(s), -1).max(axis=1) <= 2e-3 * top + 1e-30)


def test_denoised_view_relights_without_casting(demo_view):
    # The denoised buffers relit for a new lamp equal the response of the filtered transport:
    # one filter per view serves every setup, and the provenance line says so.
    study, rendered, guides = demo_view
    buffers = replace(rendered.buffers)
    buffers.indirect = denoise_view(rendered.buffers, guides=guides)
    assert isinstance(buffers.indirect.settings, DenoisedSettings)
    assert "edge-aware denoise" in buffers.indirect.settings.describe()
    assert rendered.buffers.indirect.values is not buffers.indirect.values
    factors, lamps = channel_factors(rendered.lights, study.setup("sodium"))
    for lamp in (None, "led-4000k-cie-b3"):
        spds = study.lamp_spds([lamp] * len(lamps) if lamp else lamps)
        img = indirect_xyz(buffers.indirect, buffers.response, factors, spds, study.reflectances)
        noisy = indirect_xyz(rendered.buffers.indirect, buffers.response, factors, spds, study.reflectances)
        assert img[..., 1].sum() == pytest.approx(noisy[..., 1].sum(), rel=0.1)  # light is moved, not made
        assert np.std(img[..., 1]) < np.std(noisy[..., 1])


def test_error_against_a_reference_falls(demo_view):
    # 8 paths per pixel, filtered and not, against 2 × 64 paths of other seeds.
    study, rendered, guides = demo_view
    buffers, lights = rendered.buffers, rendered.lights
    factors, lamps = channel_factors(lights, study.setup("sodium"))
    spds = study.lamp_spds(lamps)

    def luminance(ind):
        return indirect_xyz(ind, buffers.response, factors, spds, study.reflectances)[..., 1].reshape(-1)

    def trace(paths, seed):
        return trace_view(buffers, lights, study.bvh, study.reflectances, IndirectSettings(3, paths), seed)

    r1, r2 = luminance(trace(64, 101)), luminance(trace(64, 102))
    seen = guides.valid
    reference = 0.5 * (r1 + r2)
    var_ref = np.mean((r1 - r2)[seen] ** 2) / 4.0
    errors = []
    for seed in (1, 2):
        noisy = trace(8, seed)
        v, s = filter_transport(noisy.values, noisy.scale, guides)
        errors.append(
            [
                np.mean((luminance(x) - reference)[seen] ** 2) - var_ref
                for x in (noisy, replace(noisy, values=v, scale=s))
            ]
        )
    before, after = np.sqrt(np.mean(errors, axis=0))
    assert before / after >= 2.0, (before, after)


# Calculations, keys, reproducibility
# ------------------------------------------------------------------------------------------


def test_calculations_never_filtered():
    from render.calc.run import CalcOptions, run_calculation

    figures = []
    for on in (False, True):
        scene = load_scene(MINIMAL)
        scene.render.indirect_denoise = on
        study = Study(scene)
        pts = np.array([[10.0, 1.0, 0.0], [12.0, -1.0, 0.0], [15.0, 2.0, 0.0]])
        up = np.tile([0.0, 0.0, 1.0], (3, 1))
        points = study.interreflected_illuminance_lx(pts, up, bounces=2, paths=16)
        report = run_calculation(study, [None], CalcOptions(bounces=1))
        figures.append((points, [f.interreflected_lx for f in report.setups[0].fields]))
    np.testing.assert_array_equal(figures[0][0], figures[1][0])
    for a, b in zip(figures[0][1], figures[1][1], strict=True):
        np.testing.assert_array_equal(a, b)


def test_scene_key_and_command_line(tmp_path):
    import argparse

    from render.cli import _study, build_parser
    from render.errors import InputError

    text = (Path(__file__).resolve().parents[1] / "scenes" / "tests" / "point_over_plane.toml").read_text("utf-8")
    assert load_scene(demo_scene_path()).render.indirect_denoise is False
    path = tmp_path / "on.toml"
    path.write_text(text.replace("[render]\n", "[render]\nbounces = 1\nindirect_denoise = true\n"), "utf-8")
    assert load_scene(path).render.indirect_denoise is True
    path.write_text(text.replace("[render]\n", '[render]\nindirect_denoise = "yes"\n'), "utf-8")
    with pytest.raises(InputError, match="indirect_denoise"):
        load_scene(path)
    scene = str(Path(__file__).resolve().parents[1] / "scenes" / "tests" / "point_over_plane.toml")
    assert _study(argparse.Namespace(scene=scene, bounces=1, denoise=True)).scene.render.indirect_denoise is True
    assert _study(argparse.Namespace(scene=scene, bounces=1, denoise=False)).scene.render.indirect_denoise is False
    for command in ("render", "compare", "demo"):
        args = build_parser().parse_args([command] + ([scene] if command != "demo" else []) + ["--denoise"])
        assert args.denoise is True
    with pytest.raises(SystemExit):
        build_parser().parse_args(["calc", scene, "--denoise"])


def test_render_with_the_key_and_relight_with_new_optics():
    # A render with the key on keeps the filtered light, stated; a new photometric
    # distribution traces it again and filters it again (equal to a fresh render).
    from render.scene.model import GroupSetting, Setup

    scene = load_scene(demo_scene_path())
    scene.render.bounces = 2
    scene.render.indirect_samples_per_pixel = 4
    scene.render.indirect_denoise = True
    study = Study(scene)
    first = study.render_view(None, "sodium", width_px=48, samples_per_pixel=2)
    assert "edge-aware denoise" in first.buffers.indirect.settings.describe()
    # The comparison's cautions and render settings read the study's settings: stated there too.
    assert "edge-aware denoise" in study.indirect_settings().describe()
    optic = Setup("optic", "", {"*": GroupSetting(photometry="generic-full-cutoff")})
    relit = study.relight(first, optic)
    fresh = study.render_view(None, optic, width_px=48, samples_per_pixel=2)
    assert isinstance(relit.buffers.indirect.settings, DenoisedSettings)
    assert np.array_equal(relit.buffers.indirect.values, fresh.buffers.indirect.values)


def test_bits_reproducible_whatever_the_threads(demo_view):
    _, rendered, guides = demo_view
    ind = rendered.buffers.indirect
    first = filter_transport(ind.values, ind.scale, guides)
    numba.set_num_threads(1)
    try:
        one = filter_transport(ind.values, ind.scale, guides)
    finally:
        numba.set_num_threads(numba.config.NUMBA_NUM_THREADS)
    again = filter_transport(ind.values.copy(), ind.scale.copy(), guides, overwrite=True)
    for other in (one, again):
        assert np.array_equal(first[0].view(np.uint16), other[0].view(np.uint16))
        assert np.array_equal(first[1], other[1])
    # Pixels that see nothing keep their stored values to the bit.
    keep = ~guides.valid
    assert keep.any()
    assert np.array_equal(first[0][keep].view(np.uint16), ind.values[keep].view(np.uint16))


def test_guides_must_fit_the_view():
    g = DenoiseGuides(4, 2, np.zeros((8, 3)), np.tile([0.0, 0.0, 1.0], (8, 1)), np.ones(8, bool))
    with pytest.raises(ValueError, match="pixels"):
        filter_rows(np.zeros((9, 2)), g)
    with pytest.raises(ValueError):
        DenoiseSettings(passes=0)


def test_night_ambient_light_kept_as_traced():
    # The night's ambient channels hold the camera surface's own sky light and moonlight with
    # their sharp shadows: the filter leaves them as traced, to the bit.
    night = {}
    for on in (False, True):
        scene = load_scene(demo_scene_path())
        scene.render.bounces = 1
        scene.render.indirect_samples_per_pixel = 2
        scene.render.indirect_denoise = on
        scene.night = replace(scene.night, sky_luminance_cd_m2=0.01, moon_illuminance_lx=0.1)
        night[on] = Study(scene).render_view(None, "sodium", width_px=32, samples_per_pixel=2).buffers.indirect
    assert night[True].ambient_resolved is not None
    assert np.array_equal(night[True].ambient_resolved.view(np.uint32), night[False].ambient_resolved.view(np.uint32))
    assert not np.array_equal(night[True].values.view(np.uint16), night[False].values.view(np.uint16))


# The specular layer's transport
# ------------------------------------------------------------------------------------------


def _layer_pixels(guides):
    """The valid pixels of the lower half of the image, as if they saw a wet road."""
    n_pix = guides.width_px * guides.height_px
    lower = (np.arange(n_pix) // guides.width_px) >= guides.height_px // 2
    return np.flatnonzero(lower & guides.valid).astype(np.int32)


def test_specular_transport_filtered_among_layer_pixels_only(demo_view):
    # A constant S on the layer's pixels stays constant, up to the layer's edge (pixels
    # without a layer have no S, not an S of zero); the result is the float64 filter of those
    # pixels' rows alone, to float16 storage precision.
    _, _, guides = demo_view
    index = _layer_pixels(guides)
    assert 100 < index.size < guides.valid.sum()
    values = np.ones((index.size, 2, 81), np.float16)
    scale = np.full(index.size, 0.25, np.float32)
    v, sc = filter_specular(index, values, scale, guides)
    np.testing.assert_allclose(_decode(v, sc), 0.25, rtol=1e-6)
    rng = np.random.default_rng(4)
    rows = rng.uniform(0.0, 1.0, (index.size, 2, 81))
    top = rows.reshape(index.size, -1).max(axis=1)
    values = (rows / top[:, None, None]).astype(np.float16)
    scale = top.astype(np.float32)
    v, sc = filter_specular(index, values, scale, guides)
    n_pix = guides.width_px * guides.height_px
    full = np.zeros((n_pix, 2, 81))
    full[index] = _decode(values, scale)
    has = np.zeros(n_pix, np.bool_)
    has[index] = True
    expected = filter_rows(full, replace(guides, valid=guides.valid & has))[index]
    got = _decode(v, sc)
    assert np.abs(got - expected).max() <= 2.0**-10 * np.abs(expected).max()
    assert np.abs(got - full[index]).max() > 0.05  # it did filter


def test_denoise_view_filters_the_specular_transport(demo_view):
    # denoise_view filters S with T (the night's ambient S is kept as traced, as its T is):
    # on a view whose road is wet, S differs from as traced, is what filter_specular gives,
    # and the luminaires' T is unchanged by filtering S.
    study, rendered, guides = demo_view
    b = rendered.buffers
    gloss = np.tile([0.0, 1.0], (len(study.mesh.material_names), 1))
    gloss[study.mesh.material_names.index("asphalt-worn")] = (0.02, 0.1)
    kept = getattr(study.mesh, "material_gloss", None)
    study.mesh.material_gloss = gloss
    try:
        ind = trace_view(b, rendered.lights, study.bvh, study.reflectances, IndirectSettings(2, 4), seed=2)
    finally:
        study.mesh.material_gloss = kept
    assert ind.spec_index is not None and ind.spec_index.size > 20
    saved = replace(b, indirect=ind)
    out = denoise_view(saved, guides=guides)
    v, sc = filter_specular(ind.spec_index, ind.spec_values, ind.spec_scale, guides)
    np.testing.assert_array_equal(out.spec_values, v)
    np.testing.assert_array_equal(out.spec_scale, sc)
    assert not np.array_equal(out.spec_values, ind.spec_values)
    plain = denoise_view(
        replace(b, indirect=replace(ind, spec_index=None, spec_values=None, spec_scale=None)), guides=guides
    )
    np.testing.assert_array_equal(out.values, plain.values)
    off = denoise_view(saved, DenoiseSettings(specular=False), guides=guides)
    np.testing.assert_array_equal(off.spec_values, ind.spec_values)
