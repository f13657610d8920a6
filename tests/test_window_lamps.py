"""Lit windows of any number of lamps: each distinct window lamp is an ambient channel of its own.

Sources of the expected values:
* a surface lit by one light source alone reflects the source's spectrum times its reflectance
  (Lambertian reflection, analytic: the geometry only scales it), so its chromaticity is that
  of s(λ)·ρ(λ), computed here with colour-science (a reference library from the registry:
  ``colour.sd_to_XYZ`` with the CIE 1931 2° observer, the CIE FL2 illuminant and the CIE 13.3
  test colour sample 9 as colour-science ships them); a lit window seen directly shows its
  lamp's chromaticity;
* a Lambertian emitter of luminance L gives E = π·L·F with F the configuration factor of a
  differential element parallel to a rectangle a × b at distance c, opposite one corner,
  F = (1/2π)·[X/√(1+X²)·atan(Y/√(1+X²)) + Y/√(1+Y²)·atan(X/√(1+Y²))], X = a/c, Y = b/c
  (J. R. Howell, *A Catalog of Radiation Heat Transfer Configuration Factors*, differential
  element to a parallel rectangle **(from memory)**; as in tests/test_night.py, where the
  transcription is checked to give 1/4 for an infinite quadrant);
* the memory figures are the sizes of the arrays a view keeps (float16 node values and float32
  shares; arithmetic, no source); relighting is linear in the level (analytic).
"""

from __future__ import annotations

import math
from dataclasses import replace
from pathlib import Path

import numpy as np
import pytest
from indirect_scenes import isotropic_source, mesh_of

from render.colour.spectra import N_BINS
from render.geometry import shapes
from render.light.indirect import IndirectSettings, PathTracer, transport_at_points
from render.light.indirect.night import NightLight
from render.light.indirect.view import ambient_responses
from render.rays.bvh import build_bvh
from render.scene.model import FrontageWindows

MINIMAL = Path(__file__).resolve().parent.parent / "scenes" / "tests" / "minimal_street.toml"
THIRD_LAMP = "fluorescent-cie-fl2"
# Ambient channels: sky, moon, houses' lamp, shops' lamp, the third lamp.
THIRD = 4


def _scene(tmp_path: Path, night: str, street: str = "", name: str = "lamps") -> Path:
    """The minimal street with a terrace (left), shops (right, 0-20 m) and a launderette (right,
    20-40 m), and a [night] table, written to ``name``.toml."""
    text = MINIMAL.read_text(encoding="utf-8")
    if street:
        text = text.replace("carriageway_width_m = 6.0\n", "carriageway_width_m = 6.0\n" + street)
    text += (
        '\n[[frontages]]\nname = "terrace"\nside = "left"\nstart_m = 0.0\nlength_m = 40.0\nunits = 6\n'
        'height_m = 5.6\n\n[[frontages]]\nname = "shops"\nside = "right"\nkind = "shop"\nstart_m = 0.0\n'
        'length_m = 20.0\nunits = 2\nheight_m = 7.0\n\n[[frontages]]\nname = "launderette"\nside = "right"\n'
        'kind = "shop"\nstart_m = 20.0\nlength_m = 20.0\nunits = 2\nheight_m = 7.0\n'
    )
    p = tmp_path / f"{name}.toml"
    p.write_text(text + "\n[night]\n" + night, encoding="utf-8")
    return p


def _launderette(luminance: float = 40.0, lit_fraction: float = 1.0) -> str:
    return (
        f'[[night.frontages]]\nname = "launderette"\nlamp = "{THIRD_LAMP}"\nluminance_cd_m2 = {luminance}\n'
        f"lit_fraction = {lit_fraction}\n"
    )


THREE_LAMPS = "window_lit_fraction = 1.0\nshop_window_lit_fraction = 1.0\n"


def test_three_window_lamps_render(tmp_path):
    # Houses' and shops' scene-wide lamps keep channels 2 and 3; the launderette's lamp is a
    # fifth channel; pixels seeing its windows show their luminance; the provenance line names
    # every window lamp.
    from render.light.indirect.night import ambient_levels, describe_night
    from render.study import Study

    s = Study(_scene(tmp_path, THREE_LAMPS + _launderette()))
    night = s.scene.night
    assert night.window_lamps == ("led-2700k-cie-b1", "led-3000k-cie-b2", THIRD_LAMP)
    np.testing.assert_array_equal(ambient_levels(night), [0.0, 0.0, 10.0, 50.0, 40.0])
    r = s.render_view("look", width_px=48, samples_per_pixel=1)
    ind = r.buffers.indirect
    assert ind.ambient_channels == (2, 3, 4)
    assert ind.ambient_spds.shape == (5, N_BINS) and ind.window_seen.shape == (48 * 27, 3)
    np.testing.assert_array_equal(ind.ambient_spds[THIRD], s.lamp_spds([THIRD_LAMP])[0])
    y = ambient_responses(ind, r.buffers.response, s.reflectances)[..., 1].reshape(-1)
    for q, level in ((0, 10.0), (1, 50.0), (2, 40.0)):
        seen = ind.window_seen[:, q] > 0
        assert seen.sum() >= 3, q
        # (The glass also reflects the other windows' light: a few per cent.)
        np.testing.assert_allclose(y[seen], level, rtol=0.05)
    assert f"launderette 100% at 40 cd/m² ({THIRD_LAMP})" in describe_night(night)
    from render.output.provenance import image_metadata
    from render.vision.observer import ObserverSettings

    meta = image_metadata(s, r, "", ObserverSettings(), 1, 1)["lampcast.night_light"]
    for lamp in night.window_lamps:
        assert lamp in meta


def _chromaticity(xyz: np.ndarray) -> np.ndarray:
    return xyz[..., :2] / xyz[..., :3].sum(axis=-1, keepdims=True)


def _reference_xy(reflectance) -> tuple[np.ndarray, float]:
    """xy of FL2 × ``reflectance`` (None: FL2 alone) by colour-science at 1 nm over 380-780 nm,
    and the spread of that xy between Sprague and linear interpolation of the 5 nm tables."""
    colour = pytest.importorskip("colour")
    shape = colour.SpectralShape(380, 780, 1)
    cmfs = colour.MSDS_CMFS["CIE 1931 2 Degree Standard Observer"].copy().align(shape)
    out = []
    for method in (colour.SpragueInterpolator, colour.LinearInterpolator):
        sd = colour.SDS_ILLUMINANTS["FL2"].copy().interpolate(shape, interpolator=method)
        if reflectance is not None:
            rho = colour.quality.datasets.tcs.SDS_TCS["CIE 1995"][reflectance].copy()
            sd = sd * rho.interpolate(shape, interpolator=method)
        out.append(colour.XYZ_to_xy(colour.sd_to_XYZ(sd, cmfs, method="Integration")))
    return out[0], float(np.abs(out[0] - out[1]).max())


def test_a_surface_lit_by_the_third_lamp_has_its_chromaticity(tmp_path):
    # Only the launderette's windows (the third lamp, CIE FL2) light a red street (CIE 13.3
    # TCS09): every street pixel has the chromaticity of FL2 × TCS09, every window pixel that
    # of FL2 (colour-science). Tolerance: 3 × the spread between Sprague and linear
    # interpolation of the 5 nm tables (lampcast resamples them its own way) and at least
    # 5e-4 (its 380-780 nm range and stored observer tables); the light's geometry is the same
    # at every wavelength, so nothing else separates the two.
    from render.study import Study

    red = 'carriageway_material = "tcs09-strong-red"\n'
    s = Study(_scene(tmp_path, _launderette(), street=red))
    assert s.scene.night.terms == (False, False, False, False, True)
    r = s.render_view("look", width_px=48, samples_per_pixel=1)
    ind = r.buffers.indirect
    assert ind.ambient_channels == (THIRD,)
    xyz = ambient_responses(ind, r.buffers.response, s.reflectances).reshape(-1, 4)
    red_id = s.mesh.material_names.index("tcs09-strong-red")
    street = (r.buffers.response == red_id) & (xyz[:, 1] > 1e-3)
    assert street.sum() >= 20
    expected, spread = _reference_xy("TCS09")
    tol = max(3 * spread, 5e-4)
    got = _chromaticity(xyz[street])
    assert np.abs(got - expected).max() < tol, (got.mean(axis=0), expected, tol)
    # It is the third lamp's colour, not the shops' lamp's: FL2 × TCS09 against LED B2 × TCS09.
    led = s.lamp_spds(["led-3000k-cie-b2"])[0] * s.reflectances[red_id]
    from render.colour.colorimetry import colorimetric_weights

    other = _chromaticity(led @ colorimetric_weights())
    assert np.abs(other - expected).max() > 10 * tol
    window = ind.window_seen[:, 2] > 0
    assert window.sum() >= 3
    fl2, spread = _reference_xy(None)
    assert np.abs(_chromaticity(xyz[window]) - fl2).max() < max(3 * spread, 5e-4)


def test_third_lamp_window_configuration_factor():
    # One window of the third lamp's channel 1 m × 1.5 m, 2 m above a point below its corner:
    # E/(π·L) = F (Howell); the other window channels receive nothing.
    from render.light.indirect.windows import LitWindows

    def howell(X, Y):
        return (
            X / math.sqrt(1 + X * X) * math.atan(Y / math.sqrt(1 + X * X))
            + Y / math.sqrt(1 + Y * Y) * math.atan(X / math.sqrt(1 + Y * Y))
        ) / (2 * math.pi)

    a, b, c = 1.5, 1.0, 2.0
    e1, e2 = np.array([0.0, b, 0.0]), np.array([a, 0.0, 0.0])
    n = np.cross(e1, e2)
    row = np.concatenate([[0.0, 0.0, c], e1, e2, n / np.linalg.norm(n), [a * b, 1.0]])
    win = LitWindows(row[None], np.array([2]), np.zeros(1, np.int64), (0, 1))
    night = NightLight(frontages=(FrontageWindows("launderette", 2, 1.0, 40.0, lamp=THIRD_LAMP),))
    assert night.terms == (False, False, False, False, True)
    corners = np.array([(-50.0, -50.0, 0.0), (50.0, -50.0, 0.0), (50.0, 50.0, 0.0), (-50.0, 50.0, 0.0)])
    ground = shapes.flat_part(corners[[[0, 1, 2], [0, 2, 3]]], "body")
    mesh = mesh_of([[ground]], ["ground"])
    tracer = PathTracer(
        mesh,
        build_bvh(mesh.triangles_m),
        isotropic_source([0.0, 0.0, 5000.0]),
        np.zeros((1, N_BINS)),
        IndirectSettings(bounces=0, samples_per_pixel=256, night=night),
        windows=win,
    )
    assert tracer.n_ambient == 5
    # 64 points at the corner's foot on the ground, facing up (ids give them their own paths).
    pts = np.zeros((64, 3))
    nrm = np.tile([0.0, 0.0, 1.0], (64, 1))
    m, _ = transport_at_points(pts, nrm, None, tracer, 5)
    est = m[:, -1, 40]
    mean, se = est.mean(), est.std(ddof=1) / math.sqrt(len(est))
    F = howell(a / c, b / c)
    assert abs(mean - F) < 4 * se + 1e-9, (mean, F, se)
    assert se < 0.01 * F
    np.testing.assert_array_equal(m[:, -3:-1], 0.0)


def test_relighting_the_third_channel_equals_a_fresh_render(tmp_path):
    # A new level of the third lamp (its first frontage's luminance) is a multiply: equal to a
    # render traced with it, to rounding; the stored transport per unit level is the same bits.
    from render.study import Study

    a = Study(_scene(tmp_path, THREE_LAMPS + _launderette(40.0), name="a"))
    b = Study(_scene(tmp_path, THREE_LAMPS + _launderette(80.0), name="b"))
    ra = a.render_view("look", width_px=40, samples_per_pixel=2)
    rb = b.render_view("look", width_px=40, samples_per_pixel=2)
    ia, ib = ra.buffers.indirect, rb.buffers.indirect
    np.testing.assert_array_equal(ia.ambient_resolved, ib.ambient_resolved)
    np.testing.assert_array_equal(ia.window_seen, ib.window_seen)
    relit = ambient_responses(ia, ra.buffers.response, a.reflectances, b.scene.night)
    fresh = ambient_responses(ib, rb.buffers.response, b.reflectances)
    np.testing.assert_allclose(relit, fresh, rtol=1e-12, atol=1e-15)
    # and the third channel alone doubled: the difference is the 40 cd/m² render's share of it
    diff = relit - ambient_responses(ia, ra.buffers.response, a.reflectances)
    only_third = replace(a.scene.night, window_luminance_cd_m2=0.0, shop_window_luminance_cd_m2=0.0)
    np.testing.assert_allclose(
        diff, ambient_responses(ia, ra.buffers.response, a.reflectances, only_third), rtol=1e-9, atol=1e-12
    )
    # A night light with another number of window lamps is refused (it traces again).
    with pytest.raises(ValueError, match="window lamps"):
        ambient_responses(ia, ra.buffers.response, a.reflectances, replace(a.scene.night, frontages=()))


LAMPS = (
    "sodium-low-pressure",
    "sodium-high-pressure-cie-hp1",
    "mercury-vapour-lines",
    "metal-halide-cie-hp3",
    "fluorescent-cie-fl2",
    "fluorescent-cie-fl7",
    "fluorescent-cie-fl11",
)


def _many_lamps(tmp_path: Path, n: int) -> Path:
    """The minimal street with ``n`` one-house frontages, each naming a lamp of its own."""
    text = MINIMAL.read_text(encoding="utf-8")
    for k in range(n):
        text += f'\n[[frontages]]\nname = "house {k}"\nside = "left"\nstart_m = {5.0 * k}\nlength_m = 5.0\nunits = 1\n'
    text += "\n[night]\nwindow_lit_fraction = 0.5\n"
    for k in range(n):
        text += f'[[night.frontages]]\nname = "house {k}"\nlamp = "{LAMPS[k]}"\n'
    p = tmp_path / f"many{n}.toml"
    p.write_text(text, encoding="utf-8")
    return p


def test_window_lamps_are_bounded(tmp_path):
    # Eight window lamps load (render.limits.MAX_WINDOW_LAMPS); a ninth is refused naming the
    # frontage's lamp key, the limit and the lamps it may take instead (common practice, no
    # source).
    from render import limits
    from render.errors import InputError
    from render.scene import load_scene

    assert limits.MAX_WINDOW_LAMPS == 8
    scene = load_scene(_many_lamps(tmp_path, 6))
    assert scene.night.window_lamps == ("led-2700k-cie-b1", "led-3000k-cie-b2", *LAMPS[:6])
    assert [f.channel for f in scene.night.frontages] == [2, 3, 4, 5, 6, 7]
    with pytest.raises(InputError) as info:
        load_scene(_many_lamps(tmp_path, 7))
    (problem,) = info.value.problems
    assert problem.where == "night.frontages[6].lamp", problem
    assert "window lamp 9" in problem.message and "at most 8" in problem.message
    assert "expected one of" in problem.message and "'fluorescent-cie-fl7'" in problem.message


@pytest.mark.parametrize(
    ("table", "where", "words"),
    [
        (
            '[[night.frontages]]\nname = "launderette"\nlamp = "led-4000k-cie-b33"\n',
            "night.frontages[0].lamp",
            "unknown lamp",
        ),
        (
            '[[night.frontages]]\nname = "launderette"\nlamp = "fluorescent-cie-fl2"\nluminance_cd_m2 = 0.0\n'
            '[[night.frontages]]\nname = "shops"\nlamp = "fluorescent-cie-fl2"\nluminance_cd_m2 = 20.0\n'
            "lit_fraction = 1.0\n",
            "night.frontages[0].luminance_cd_m2",
            "above 0",
        ),
    ],
)
def test_a_further_lamp_is_checked(tmp_path, table, where, words):
    # A further lamp is checked as a lamp, and its level (the first frontage's luminance) must
    # be positive when its windows light (common practice, no source).
    from render.errors import InputError
    from render.scene import load_scene

    with pytest.raises(InputError) as info:
        load_scene(_scene(tmp_path, table))
    (problem,) = info.value.problems
    assert problem.where == where and words in problem.message, problem


def test_memory_counts_every_window_lamp(tmp_path, monkeypatch):
    # Each further window lamp that is lit costs 28 bytes per pixel of its channel's seven
    # float32 responses (X, Y, Z, Y', L, M, S, kept resolved) and 4 of its float32 share seen:
    # 1920 × 1080 × 32 B = 63.3 MiB; a view that would not fit with it is refused before it
    # starts, naming the view.
    from render import limits
    from render.errors import InputError
    from render.study import Study

    two = limits.render_memory_estimate(1920, 1080, 4, 2, True, 0.0, ambient_channels=4, window_lamps=2)
    three = limits.render_memory_estimate(1920, 1080, 4, 2, True, 0.0, ambient_channels=5, window_lamps=3)
    assert three.bytes - two.bytes == 1920 * 1080 * 32
    assert "5 night-light channels" in three.what
    s3 = Study(_scene(tmp_path, THREE_LAMPS + _launderette()))
    s2 = Study(_scene(tmp_path, THREE_LAMPS, name="two"))
    w, h, spp = 48, 27, 1
    ch = s3.lights(None).n_channels
    # (Sky and moon off: the houses' and shops' channels, and the launderette's.)
    assert (s2.scene.night.terms_on, s3.scene.night.terms_on) == (2, 3)
    e2 = limits.render_memory_estimate(w, h, spp, ch, True, 0.0, ambient_channels=2, window_lamps=2).bytes
    e3 = limits.render_memory_estimate(w, h, spp, ch, True, 0.0, ambient_channels=3, window_lamps=3).bytes
    assert e3 - e2 == w * h * 32
    monkeypatch.setattr(limits, "available_memory_bytes", lambda: (e2 + e3) // 2)
    s2.render_view("look", width_px=w, samples_per_pixel=spp, bounces=0)
    with pytest.raises(InputError) as info:
        s3.render_view("look", width_px=w, samples_per_pixel=spp, bounces=0)
    (problem,) = info.value.problems
    assert "view 'look'" in problem.where and "3 night-light channels" in problem.message, problem


def test_calculation_sums_every_window_lamp(tmp_path):
    # lampcast calc's night light on the fields has a term per window lamp; its figures are
    # their sum (linear), the text row names the further lamp's term.
    from render.calc.run import calc_options, run_calculation
    from render.output.calc_text import format_calculation
    from render.study import Study

    s = Study(_scene(tmp_path, THREE_LAMPS + _launderette()))
    report = run_calculation(s, [None], calc_options(s.scene, bounces=0))
    (setup,) = report.setups
    lane = setup.fields[0].night
    assert lane.per_unit_lx.shape[-1] == 5 and [t for t, _ in lane.terms][-1] == "lit_windows_3"
    np.testing.assert_allclose(lane.illuminance_lx, (lane.per_unit_lx * [0, 0, 10, 50, 40]).sum(axis=-1), rtol=1e-12)
    assert lane.term_means_lx()["lit_windows_3"] > 0
    js = lane.to_json()
    assert js["levels"]["lit_windows_3"] == {"value": 40.0, "unit": "cd/m²"}
    assert ", window lamp 3 " in format_calculation(report)
    # The report's night table has a column for it, its cells the term's mean.
    from render.output.report.page import _night_table

    table = _night_table([{"fields": [{"name": "lane 1", "night": js}]}], {})
    assert [h.text for h in table.head][-1] == "window lamp 3, mean (lx)"
    assert table.rows[0].cells[-1].value == lane.term_means_lx()["lit_windows_3"]
    two = replace(lane, per_unit_lx=lane.per_unit_lx[..., :4], levels=lane.levels[:4]).to_json()
    assert len(_night_table([{"fields": [{"name": "lane 1", "night": two}]}], {}).head) == 8
    # Relit at another level of the third lamp: a multiply.
    night = replace(
        s.scene.night,
        frontages=tuple(replace(f, luminance_cd_m2=80.0) for f in s.scene.night.frontages),
    )
    relit = lane.relit(night)
    np.testing.assert_allclose(
        relit.illuminance_lx - lane.illuminance_lx, 40.0 * lane.per_unit_lx[..., 4], rtol=1e-9, atol=1e-12
    )


def test_two_window_lamps_keep_their_channels(tmp_path):
    # Without a further lamp the night light has the four channels it always had, and a
    # frontage naming the other scene-wide lamp takes that lamp's channel.
    from render.light.indirect.night import ambient_channel_count
    from render.scene import load_scene

    scene = load_scene(
        _scene(tmp_path, THREE_LAMPS + '[[night.frontages]]\nname = "terrace"\nlamp = "led-3000k-cie-b2"\n')
    )
    assert scene.night.window_lamps == ("led-2700k-cie-b1", "led-3000k-cie-b2")
    assert ambient_channel_count(scene.night) == 4 and len(scene.night.terms) == 4
    assert scene.night.frontages[0].channel == 1
