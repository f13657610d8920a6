"""Relighting with interreflected light: the stored spectral transport against exact references.

Sources of the expected values:
* CIEDE2000 (CIE 142-2001) through colour-science's ``delta_E(method="CIE 2000")``, CIELAB
  relative to the lamp's light on a white diffuser at the view's mean illuminance (the white
  the direct light's colorimetry reports);
* the goal: a relit image within ΔE00 0.5 and 0.5 % luminance of one computed afresh with the
  new lamp (common practice for "no visible difference", no source);
* properties of the L2 projection onto hat functions (analytic): it reproduces every function
  in their span -- constants and piecewise-linear functions with knots at the nodes -- so a
  constant transport gives the direct light's response table exactly;
* the weighting of a pixel's samples is algebra (analytic): the mean over samples of each
  sample's reflectance times its own transport.

The reference of a relit image is the same view traced with nodes every 1 nm (the identity
basis: no spectral approximation) and the same seed. The paths do not depend on the lamp (only
on geometry, photometry and the seed), so a render afresh with the new lamp stores the very
values the relight reuses: their only difference from the exact result is the stored basis.
"""

from __future__ import annotations

from pathlib import Path

import numba
import numpy as np
import pytest
from indirect_scenes import isotropic_source, mesh_of

from render.colour.colorimetry import resolve, response_table
from render.colour.lamps.catalogue import builtin_lamps
from render.colour.materials import material_library
from render.geometry import shapes
from render.light import integrator
from render.light.indirect import IndirectSettings, PathTracer, indirect_xyz, trace_view, transport_table
from render.light.indirect.transport import transport_basis
from render.rays.bvh import build_bvh
from render.resources import demo_scene_path
from render.study import Study

GOAL_DELTA_E00 = 0.5
GOAL_LUMINANCE = 0.005


@pytest.fixture(scope="module")
def demo_view():
    study = Study(demo_scene_path())
    rendered = study.render_view(None, "sodium", width_px=96, samples_per_pixel=4)
    traced = {
        step: trace_view(
            rendered.buffers,
            rendered.lights,
            study.bvh,
            study.reflectances,
            IndirectSettings(bounces=3, samples_per_pixel=8, node_step_nm=step),
            seed=2,
        )
        for step in (5, 1)
    }
    return study, rendered, traced


def _lab(xyz, white):
    import colour

    return colour.XYZ_to_Lab(xyz / white[1], colour.XYZ_to_xy(white))


def test_relight_every_builtin_lamp_within_goal(demo_view):
    # Every lamp of the catalogue (low- and high-pressure sodium, mercury, metal halide,
    # fluorescent, LED): the view relit from the 5 nm transport against the exact one.
    import colour

    study, rendered, traced = demo_view
    buffers = rendered.buffers
    C = rendered.lights.n_channels
    ones = np.ones(C)
    lamps = builtin_lamps()
    assert "sodium-low-pressure" in lamps
    worst_de, worst_lum = 0.0, 0.0
    for lamp in lamps.values():
        spds = [lamp.spd] * C
        direct = resolve(buffers, ones, spds, study.reflectances)
        relit = direct.xyz_cd_m2 + indirect_xyz(traced[5], buffers.response, ones, spds, study.reflectances)[..., :3]
        exact = direct.xyz_cd_m2 + indirect_xyz(traced[1], buffers.response, ones, spds, study.reflectances)[..., :3]
        assert np.any(exact[..., 1] > 1.001 * direct.xyz_cd_m2[..., 1])  # the bounces show
        de = colour.delta_E(_lab(relit, direct.white_xyz), _lab(exact, direct.white_xyz), method="CIE 2000")
        seen = exact[..., 1] > 0
        lum = np.abs(relit[..., 1][seen] / exact[..., 1][seen] - 1.0)
        worst_de = max(worst_de, float(de.max()))
        worst_lum = max(worst_lum, float(lum.max()))
    assert worst_de < GOAL_DELTA_E00
    assert worst_lum < GOAL_LUMINANCE


def test_other_observer_weights(demo_view):
    # Responses are linear in the observer weights: any columns of the colorimetric weights, in
    # any number (five here, not a multiple of the kernel's four), give those columns of X, Y,
    # Z, Y' (analytic).
    from render.colour.colorimetry import colorimetric_weights
    from render.light.indirect import indirect_responses

    study, rendered, traced = demo_view
    b = rendered.buffers
    ones = np.ones(rendered.lights.n_channels)
    spds = study.lamp_spds(["led-3000k-cie-b2"] * len(ones))
    xyz = indirect_xyz(traced[5], b.response, ones, spds, study.reflectances)
    cols = [1, 0, 2, 3, 1]
    other = indirect_responses(traced[5], b.response, ones, spds, study.reflectances, colorimetric_weights()[:, cols])
    np.testing.assert_allclose(other, xyz[..., cols], rtol=1e-12, atol=1e-15)


def test_constant_transport_gives_the_direct_response():
    # Constants are in the hats' span: a transport of 1 at every node reproduces the direct
    # light's response table exactly (the partition of unity of the duals), for every material.
    lib = material_library()
    rho = np.array([lib[k].reflectance for k in ("object-red", "brick", "asphalt-worn", "tcs09-strong-red")])
    spds = np.array([builtin_lamps()[k].spd for k in ("sodium-low-pressure", "led-3000k-cie-b2")])
    direct = response_table(rho, spds)[:-1]
    nodes = transport_table(rho, spds, transport_basis(5)).sum(axis=2)
    np.testing.assert_allclose(nodes, direct, rtol=1e-10, atol=1e-14)


def test_projection_reproduces_piecewise_linear_transport():
    # A transport piecewise linear between the 5 nm nodes is stored without error: projecting
    # and reconstructing returns it (analytic property of the L2 projection onto the span).
    basis = transport_basis(5)
    rng = np.random.default_rng(0)
    nodes = rng.uniform(0.0, 1.0, basis.n_nodes)
    wavelengths = np.arange(380.0, 781.0)
    t = np.interp(wavelengths, basis.nodes_nm, nodes)
    np.testing.assert_allclose(basis.reconstruct(basis.project(t)), t, rtol=1e-12, atol=1e-12)
    # The identity basis at 1 nm stores every bin as it is.
    ident = transport_basis(1)
    np.testing.assert_array_equal(ident.reconstruct(ident.project(t)), t)


def test_pixel_of_mixed_materials_equals_mean_of_its_samples():
    # Samples of one pixel that see different materials: the kept row times the pixel's mean
    # reflectance is the mean over samples of each one's reflectance times its own transport
    # (1 nm nodes: exact up to rounding). The start samples are on a lit floor and wall.
    floor = shapes.box(min_m=(-6.0, -6.0, -0.2), max_m=(6.0, 6.0, 0.0))
    wall = shapes.box(min_m=(-6.0, 1.0, 0.0), max_m=(6.0, 1.2, 5.0))
    mesh = mesh_of([floor, wall], ["floor", "wall"])
    lib = material_library()
    rho = np.vstack([lib["object-white"].reflectance, lib["object-red"].reflectance])
    tracer = PathTracer(
        mesh,
        build_bvh(mesh.triangles_m),
        isotropic_source((0.0, -0.5, 4.0)),
        rho,
        IndirectSettings(3, 7, node_step_nm=1),
    )
    # Two "pixels" of three samples: floor, wall, floor (uneven paths: 3, 2, 2) and all floor.
    point = np.array([[0.0, 0.5, 0.0], [0.0, 1.0, 1.0], [0.3, 0.4, 0.0], [1.0, 0.0, 0.0], [1.1, 0.0, 0.0], [1.2, 0, 0]])
    normal = np.array([[0, 0, 1.0], [0, -1.0, 0], [0, 0, 1.0], [0, 0, 1.0], [0, 0, 1.0], [0, 0, 1.0]])
    material = np.array([0, 1, 0, 0, 0, 0], np.int32)
    ids = np.array([5, 6], np.int64)
    row, _ = tracer.trace(point, normal, normal, material, ids, 3, 1)
    each, _ = tracer.trace(point, normal, normal, material, ids, 3, 1, per_sample=True)
    for p in range(2):
        mean_rho = rho[material[3 * p : 3 * p + 3]].mean(axis=0)
        expected = np.mean([rho[material[3 * p + s]] * each[3 * p + s, 0] for s in range(3)], axis=0)
        np.testing.assert_allclose(mean_rho * row[p, 0], expected, rtol=1e-12, atol=1e-15)


def test_view_bits_independent_of_tiles_and_threads(demo_view, monkeypatch):
    # Counter-based random numbers: the stored transport of a view is the same, to the bit,
    # with smaller tiles and on one thread.
    study, rendered, traced = demo_view
    settings = IndirectSettings(bounces=3, samples_per_pixel=8)
    monkeypatch.setattr(integrator, "TILE_SAMPLES", 1 << 11)
    threads = numba.get_num_threads()
    try:
        numba.set_num_threads(1)
        again = trace_view(rendered.buffers, rendered.lights, study.bvh, study.reflectances, settings, seed=2)
    finally:
        numba.set_num_threads(threads)
    assert np.array_equal(again.values.view(np.uint16), traced[5].values.view(np.uint16))
    assert np.array_equal(again.scale, traced[5].scale)
    other = trace_view(rendered.buffers, rendered.lights, study.bvh, study.reflectances, settings, seed=3)
    assert not np.array_equal(other.values.view(np.uint16), traced[5].values.view(np.uint16))


# ------------------------------------------------------------------------------------------
# In renders: the scene's [render] bounces
# ------------------------------------------------------------------------------------------


def _demo_with_bounces(bounces: int) -> Study:
    from render.scene import load_scene

    scene = load_scene(demo_scene_path())
    scene.render.bounces = bounces
    scene.render.indirect_samples_per_pixel = 4
    return Study(scene)


def test_bounces_off_leaves_direct_light_unchanged():
    # With bounces off the view is what the direct light alone gives (render_buffers and
    # resolve, the code before interreflection), to the bit; with bounces on its direct part is
    # the same and the image differs from it by exactly the interreflected term (to 1e-6).
    from render.light.luminaires import channel_factors

    off = _demo_with_bounces(0)
    assert off.scene.render.bounces == 0
    view_off = off.render_view(None, "sodium", width_px=64, samples_per_pixel=2)
    assert view_off.buffers.indirect is None
    lights = off.lights("sodium")
    alone = integrator.render_buffers(off.mesh, off.bvh, lights, view_off.camera, 2, off.scene.render.seed)
    factors, lamps = channel_factors(lights, off.setup("sodium"))
    before = resolve(alone, factors, off.lamp_spds(lamps), off.reflectances)
    assert np.array_equal(view_off.colorimetry.xyz_cd_m2, before.xyz_cd_m2)
    assert np.array_equal(view_off.colorimetry.scotopic_cd_m2, before.scotopic_cd_m2)

    on = _demo_with_bounces(2)
    view_on = on.render_view(None, "sodium", width_px=64, samples_per_pixel=2)
    assert view_on.buffers.indirect is not None
    assert np.array_equal(view_on.buffers.value_cd_m2, view_off.buffers.value_cd_m2)
    extra = indirect_xyz(
        view_on.buffers.indirect, view_on.buffers.response, factors, on.lamp_spds(lamps), on.reflectances
    )
    assert extra[..., 1].max() > 0.0
    np.testing.assert_allclose(view_on.colorimetry.xyz_cd_m2 - extra[..., :3], before.xyz_cd_m2, rtol=1e-6, atol=1e-12)
    assert view_on.buffers.indirect.settings.describe() == (
        "interreflected light: up to 2 bounces, 4 paths per pixel (Monte Carlo), transport every 5 nm"
    )
    # The keyword overrides the scene: bounces=0 gives the direct light alone.
    again = on.render_view(None, "sodium", width_px=64, samples_per_pixel=2, bounces=0)
    assert np.array_equal(again.colorimetry.xyz_cd_m2, before.xyz_cd_m2)


def test_relight_equals_fresh_render_with_interreflection():
    # A new lamp: the relit view equals a render afresh with it (the paths do not depend on the
    # lamp). A new photometric distribution: the relight traces the interreflection again and
    # equals a render afresh too. (Lumens or dimming changed per group alter the luminaires'
    # relative importance, hence the paths: equal only in expectation.)
    from render.scene.model import GroupSetting, Setup

    study = _demo_with_bounces(2)
    first = study.render_view(None, "sodium", width_px=64, samples_per_pixel=2)
    lamp = Setup("led", "", {"*": GroupSetting(lamp="led-4000k-cie-b3")})
    relit = study.relight(first, lamp)
    fresh = study.render_view(None, lamp, width_px=64, samples_per_pixel=2)
    np.testing.assert_allclose(relit.colorimetry.xyz_cd_m2, fresh.colorimetry.xyz_cd_m2, rtol=1e-12, atol=1e-15)
    optic = Setup("optic", "", {"*": GroupSetting(photometry="generic-full-cutoff")})
    relit = study.relight(first, optic)
    fresh = study.render_view(None, optic, width_px=64, samples_per_pixel=2)
    assert relit.buffers.indirect is not first.buffers.indirect
    assert np.array_equal(relit.buffers.indirect.values, fresh.buffers.indirect.values)
    np.testing.assert_allclose(relit.colorimetry.xyz_cd_m2, fresh.colorimetry.xyz_cd_m2, rtol=1e-12, atol=1e-15)


def test_render_keys_of_interreflection(tmp_path):
    # [render] bounces and indirect_samples_per_pixel: read with their defaults (off, 8 paths),
    # bounded by render.limits (a mistake names the key).
    from render.errors import InputError
    from render.limits import MAX_BOUNCES
    from render.scene import load_scene

    text = (Path(__file__).resolve().parents[1] / "scenes" / "tests" / "point_over_plane.toml").read_text("utf-8")
    assert load_scene(demo_scene_path()).render.bounces == 0
    path = tmp_path / "on.toml"
    path.write_text(text.replace("[render]\n", "[render]\nbounces = 3\nindirect_samples_per_pixel = 16\n"), "utf-8")
    render = load_scene(path).render
    assert (render.bounces, render.indirect_samples_per_pixel) == (3, 16)
    for bad, key in ((f"bounces = {MAX_BOUNCES + 1}", "bounces"), ("indirect_samples_per_pixel = 0", "indirect")):
        path.write_text(text.replace("[render]\n", f"[render]\n{bad}\n"), "utf-8")
        with pytest.raises(InputError, match=key):
            load_scene(path)


def test_study_interreflected_illuminance_scales_with_dimming():
    # The demo's road between its luminaires: interreflected light is there, and the setup
    # dimmed to 50 % gives exactly half of the same setup at full output (same lumens and lamp,
    # the same paths; dimming is a factor on the stored values).
    study = _demo_with_bounces(0)
    pts = np.array([[20.0, 0.0, 0.0], [24.0, 2.0, 0.0], [30.0, -1.5, 0.0]])
    up = np.tile([0.0, 0.0, 1.0], (3, 1))
    full = study.interreflected_illuminance_lx(pts, up, "led-3000k", paths=64)
    half = study.interreflected_illuminance_lx(pts, up, "led-3000k-half", paths=64)
    assert np.all(full > 0.0)
    np.testing.assert_allclose(half, 0.5 * full, rtol=1e-12)


def test_command_line_bounces(tmp_path, capsys):
    # --bounces overrides the scene's render.bounces for the rendering commands; out of range it
    # is a usage error (exit 2) naming the option.
    from render.cli import BARE_BOUNCES, main

    scene = str(Path(__file__).resolve().parents[1] / "scenes" / "tests" / "point_over_plane.toml")
    assert main(["render", scene, "--width", "16", "--bounces", "1", "--out", str(tmp_path), "-q"]) == 0
    assert (tmp_path / "above-scene.exr").exists()
    import argparse

    from render.cli import _study

    assert _study(argparse.Namespace(scene=scene, bounces=2)).scene.render.bounces == 2
    assert _study(argparse.Namespace(scene=scene, bounces=None)).scene.render.bounces == 0
    with pytest.raises(SystemExit) as exit_info:
        main(["render", scene, "--bounces", "65"])
    assert exit_info.value.code == 2
    assert "--bounces" in capsys.readouterr().err
    # --bounces alone: the default limit.
    from render.cli import build_parser
    from render.light.indirect import DEFAULT_BOUNCES

    assert build_parser().parse_args(["render", scene, "--bounces"]).bounces == BARE_BOUNCES
    assert DEFAULT_BOUNCES >= 3
