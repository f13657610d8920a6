"""The night's other light: urban sky glow as a uniform sky dome and moonlight as a parallel beam.

Sources of the expected values:
* a uniform sky of luminance L over an unobstructed horizontal plane gives E = π·L (analytic:
  ∫ L cos θ dω over the hemisphere), so a white (ρ = 1) Lambertian diffuser there has the
  luminance ρE/π = L (Lambertian reflection, analytic);
* sky view factor at the centre line of a long street canyon of width W and height H,
  SVF = cos β with tan β = 2H/W, and at a distance d from the foot of one long wall of height
  H, SVF = (1 + d/√(d² + H²))/2: the configuration factor of a differential strip to an
  infinitely long surface in 2-D, F = (sin φ₂ − sin φ₁)/2 with φ measured from the normal
  (Siegel & Howell, *Thermal Radiation Heat Transfer*, configuration factors of infinitely long
  geometries **(from memory)**; the canyon's form cos β is the street-canyon sky view factor of
  urban climatology, T. R. Oke **(from memory)**); derived again in the comments below;
* a parallel beam of normal illuminance E_n from elevation h gives E_n·sin h on horizontal
  ground (cosine law, analytic) and a wall of height H casts a shadow H/tan h long
  (elementary geometry);
* Monte Carlo error of independent Bernoulli samples, √(p(1 − p)/N) (binomial variance);
* a Lambertian emitter of luminance L gives E = π·L·F with F the configuration factor; for a
  differential element parallel to a rectangle a × b at distance c, opposite one corner,
  F = (1/2π)·[X/√(1+X²)·atan(Y/√(1+X²)) + Y/√(1+Y²)·atan(X/√(1+Y²))], X = a/c, Y = b/c
  (J. R. Howell, *A Catalog of Radiation Heat Transfer Configuration Factors*, differential
  element to a parallel rectangle **(from memory)**; it gives 1/4 for an infinite quadrant);
  for an element perpendicular to a rectangle, the definition F = ∫ cos θ₁ cos θ₂ /(π r²) dA
  integrated by the midpoint rule (analytic definition, numerical quadrature).
"""

from __future__ import annotations

import math
from dataclasses import replace
from pathlib import Path

import numpy as np
import pytest
from indirect_scenes import isotropic_source, mesh_of

from render.colour.colorimetry import colorimetric_weights
from render.colour.spectra import N_BINS
from render.geometry import shapes
from render.light.indirect import IndirectSettings, PathTracer, trace_view, transport_at_points
from render.light.indirect.night import NightLight, planckian_spectrum
from render.light.indirect.view import ambient_responses, indirect_responses
from render.light.integrator import render_buffers
from render.rays.bvh import build_bvh
from render.rays.cameras import Camera

SKY, MOON = 0, 1


def _quad(a, b, c, d) -> shapes.Part:
    tri = np.array([[a, b, c], [a, c, d]], np.float64)
    return shapes.flat_part(tri, "body")


def _ground(half_m: float = 2000.0) -> shapes.Part:
    s = half_m
    return _quad((-s, -s, 0.0), (s, -s, 0.0), (s, s, 0.0), (-s, s, 0.0))


def _wall(y_m: float, height_m: float, half_length_m: float = 2000.0, thickness_m: float = 0.2) -> list[shapes.Part]:
    """A thin box along x from y_m to y_m + thickness (its faces outward)."""
    L = half_length_m
    return shapes.box(min_m=(-L, y_m, 0.0), max_m=(L, y_m + thickness_m, height_m))


def _tracer(parts_by_material, night: NightLight, bounces: int = 0, paths: int = 256, rho=None):
    mesh = mesh_of(parts_by_material, [f"m{i}" for i in range(len(parts_by_material))])
    bvh = build_bvh(mesh.triangles_m)
    # The luminaire is far away: its own channel is not looked at here.
    lights = isotropic_source([0.0, 0.0, 5000.0])
    if rho is None:
        rho = np.zeros((len(parts_by_material), N_BINS))
    st = IndirectSettings(bounces=bounces, samples_per_pixel=paths, night=night)
    return mesh, bvh, lights, rho, PathTracer(mesh, bvh, lights, rho, st)


def _up_points(xy) -> tuple[np.ndarray, np.ndarray]:
    xy = np.atleast_2d(np.asarray(xy, np.float64))
    pts = np.column_stack([xy, np.zeros(len(xy))])
    return pts, np.tile([0.0, 0.0, 1.0], (len(xy), 1))


# ------------------------------------------------------------------------------------------
# Sky glow
# ------------------------------------------------------------------------------------------


def test_open_plane_receives_pi_times_sky_luminance():
    # E = π·L on an unobstructed horizontal plane: the stored value is E/π per unit sky
    # luminance, 1 in every band (every upward direction leaves the scene: no noise at all).
    night = NightLight(sky_luminance_cd_m2=1.0)
    *_, tracer = _tracer([[_ground()]], night, bounces=0, paths=64)
    pts, nrm = _up_points(np.random.default_rng(2).uniform(-20, 20, (50, 2)))
    m, n = transport_at_points(pts, nrm, None, tracer, 1)
    # No luminaire channel without bounces: sky, moon, house windows, shop windows.
    assert m.shape == (50, 4, tracer.basis.n_nodes)
    np.testing.assert_allclose(m[:, SKY], 1.0, rtol=1e-12)
    np.testing.assert_array_equal(m[:, MOON], 0.0)


def test_white_diffuser_under_the_sky_shows_the_sky_luminance():
    # In a view: a white (ρ = 1) Lambertian plane under a uniform sky of L has luminance L
    # (Lambertian reflection of E = π·L), and the pixels that see the sky show L; a new sky
    # luminance scales both exactly (relighting: a multiply).
    night = NightLight(sky_luminance_cd_m2=0.004, sky_spectrum="led-4000k-cie-b3")
    rho = np.ones((1, N_BINS))
    mesh, bvh, lights, rho, _ = _tracer([[_ground()]], night, rho=rho)
    camera = Camera(position_m=(0.0, 0.0, 1.6), target_m=(30.0, 0.0, 1.0), hfov_deg=60.0, width_px=24, height_px=16)
    buffers = render_buffers(mesh, bvh, lights, camera, 2, 0)
    from render.colour.lamps import get_lamp

    spds = np.stack([get_lamp("led-4000k-cie-b3").spd, planckian_spectrum(4100.0)] * 2)
    st = IndirectSettings(bounces=0, samples_per_pixel=8, night=night)
    ind = trace_view(buffers, lights, bvh, rho, st, 0, ambient_spds=spds)
    y = ambient_responses(ind, buffers.response, rho)[..., 1]
    ground = (buffers.response.reshape(-1, 2) == 0).all(axis=1).reshape(16, 24)
    sky = (buffers.response.reshape(-1, 2) < 0).all(axis=1).reshape(16, 24)
    assert ground.sum() > 50 and sky.sum() > 50
    np.testing.assert_allclose(y[ground], 0.004, rtol=2e-3)  # float16 storage of the transport
    np.testing.assert_allclose(y[sky], 0.004, rtol=1e-12)
    brighter = ambient_responses(ind, buffers.response, rho, replace(night, sky_luminance_cd_m2=0.04))
    np.testing.assert_allclose(brighter, 10.0 * ambient_responses(ind, buffers.response, rho), rtol=1e-12)
    # The luminaires' part does not hold the night light, and it adds to it.
    full = indirect_responses(ind, buffers.response, [1.0], [get_lamp("led-4000k-cie-b3").spd], rho)
    np.testing.assert_array_equal(full, ambient_responses(ind, buffers.response, rho))


def _fraction_escaping(tracer, pts, nrm, seed=3):
    m, n = transport_at_points(pts, nrm, None, tracer, seed)
    return m[:, SKY, 40], int(n.sum())


def test_canyon_centre_sky_view_factor():
    # Centre line of a canyon W wide between walls H high: the walls are seen from
    # φ₁ = β (tan β = (W/2)/H measured from the vertical ... ) -- in the 2-D configuration factor
    # F = (sin φ₂ − sin φ₁)/2 of a horizontal strip, each wall spans φ from atan((W/2)/H) to 90°,
    # so F_wall = (1 − (W/2)/√((W/2)² + H²))/2 and SVF = 1 − 2·F_wall = (W/2)/√((W/2)² + H²)
    # = cos β with tan β = 2H/W. Walls black, no bounces: the sky's direct part alone.
    W, H = 10.0, 10.0
    night = NightLight(sky_luminance_cd_m2=1.0)
    *_, tracer = _tracer([[_ground()], [*_wall(W / 2, H), *_wall(-W / 2 - 0.2, H)]], night, paths=512)
    pts, nrm = _up_points(np.column_stack([np.linspace(-30, 30, 64), np.zeros(64)]))
    f, n = _fraction_escaping(tracer, pts, nrm)
    svf = math.cos(math.atan(2 * H / W))  # 0.4472
    sigma = math.sqrt(svf * (1 - svf) / n)
    assert abs(f.mean() - svf) < 4 * sigma, (f.mean(), svf, sigma)


@pytest.mark.parametrize("d", [0.0, 3.0])
def test_foot_of_a_long_wall_sky_view_factor(d):
    # A point d from the foot of one long wall of height H: the wall spans φ from
    # atan(d/H) to 90° from the vertical, F_wall = (1 − d/√(d² + H²))/2 and
    # SVF = (1 + d/√(d² + H²))/2 (1/2 at the foot).
    H = 6.0
    night = NightLight(sky_luminance_cd_m2=1.0)
    *_, tracer = _tracer([[_ground()], _wall(0.0, H)], night, paths=512)
    # Points on the open side (y < 0) of the wall face y = 0, d before it (a millimetre off
    # the foot for d = 0).
    y = -max(d, 0.001)
    pts, nrm = _up_points(np.column_stack([np.linspace(-30, 30, 64), np.full(64, y)]))
    f, n = _fraction_escaping(tracer, pts, nrm)
    svf = (1 + d / math.hypot(d, H)) / 2
    sigma = math.sqrt(svf * (1 - svf) / n)
    assert abs(f.mean() - svf) < 4 * sigma, (f.mean(), svf, sigma)


def test_sky_reaches_shadows_through_bounces_and_scales_with_reflectance():
    # Under a white wall the bounced sky adds to the direct part: with bounces the canyon floor
    # receives more than its view factor; its light after one bounce is bounded by the wall's
    # share of the view (1 − SVF) times the wall's reflectance and the sky the wall sees (< 1).
    W, H = 10.0, 10.0
    night = NightLight(sky_luminance_cd_m2=1.0)
    rho = np.stack([np.zeros(N_BINS), np.full(N_BINS, 0.8)])
    walls = [*_wall(W / 2, H), *_wall(-W / 2 - 0.2, H)]
    *_, t0 = _tracer([[_ground()], walls], night, bounces=0, paths=512, rho=rho)
    *_, t1 = _tracer([[_ground()], walls], night, bounces=1, paths=512, rho=rho)
    pts, nrm = _up_points(np.column_stack([np.linspace(-30, 30, 64), np.zeros(64)]))
    f0, _ = _fraction_escaping(t0, pts, nrm)
    m1, _ = transport_at_points(pts, nrm, None, t1, 3)
    svf = math.cos(math.atan(2 * H / W))
    extra = m1[:, 1 + SKY, 40].mean() - f0.mean()  # channel 0 is the luminaire's
    assert 0.05 < extra < 0.8 * (1 - svf)


# ------------------------------------------------------------------------------------------
# Moonlight
# ------------------------------------------------------------------------------------------


@pytest.mark.parametrize("elevation", [20.0, 55.0])
def test_moon_on_open_ground(elevation):
    # E = E_n·sin h on horizontal ground (cosine law): stored E/π per unit E_n.
    night = NightLight(moon_illuminance_lx=1.0, moon_elevation_deg=elevation, moon_azimuth_deg=123.0)
    *_, tracer = _tracer([[_ground()]], night, paths=4)
    pts, nrm = _up_points(np.random.default_rng(4).uniform(-20, 20, (20, 2)))
    m, _ = transport_at_points(pts, nrm, None, tracer, 1)
    np.testing.assert_allclose(m[:, MOON], math.sin(math.radians(elevation)) / math.pi, rtol=1e-12)
    np.testing.assert_array_equal(m[:, SKY], 0.0)


def test_moon_shadow_behind_a_wall():
    # Moon toward −y (azimuth 180°, elevation h): a wall of height H whose back face is y = 0
    # shades the ground from y = 0 to y = H/tan h and no further.
    H, h = 4.0, 30.0
    night = NightLight(moon_illuminance_lx=1.0, moon_elevation_deg=h, moon_azimuth_deg=180.0)
    *_, tracer = _tracer([[_ground()], _wall(-0.2, H)], night, paths=1)
    length = H / math.tan(math.radians(h))  # 6.93 m
    y = np.concatenate([np.linspace(0.05, length - 0.02, 40), np.linspace(length + 0.02, 2 * length, 40)])
    pts, nrm = _up_points(np.column_stack([np.zeros_like(y), y]))
    m, _ = transport_at_points(pts, nrm, None, tracer, 1)
    lit = m[:, MOON, 0] > 0
    np.testing.assert_array_equal(lit, y > length)
    np.testing.assert_allclose(m[lit, MOON], math.sin(math.radians(h)) / math.pi, rtol=1e-12)


# ------------------------------------------------------------------------------------------
# Relighting, seeding, bounces
# ------------------------------------------------------------------------------------------


def test_night_light_does_not_depend_on_the_luminaires():
    # The ambient channels hold no luminaire: another luminaire (traced again) gives the same
    # ambient transport to the bit, so a new lamp, lumens, dimming or photometry leaves them.
    W, H = 10.0, 8.0
    night = NightLight(sky_luminance_cd_m2=1.0, moon_illuminance_lx=1.0, moon_elevation_deg=40.0)
    rho = np.stack([np.full(N_BINS, 0.3), np.full(N_BINS, 0.6)])
    parts = [[_ground()], [*_wall(W / 2, H), *_wall(-W / 2 - 0.2, H)]]
    mesh, bvh, lights, rho, tracer = _tracer(parts, night, bounces=3, paths=32, rho=rho)
    moved = isotropic_source([3.0, 1.0, 6.0])
    other = PathTracer(mesh, bvh, moved, rho, tracer.settings)
    pts, nrm = _up_points(np.column_stack([np.linspace(-30, 30, 32), np.linspace(-4, 4, 32)]))
    a, _ = transport_at_points(pts, nrm, None, tracer, 9)
    b, _ = transport_at_points(pts, nrm, None, other, 9)
    np.testing.assert_array_equal(a[:, 1:], b[:, 1:])
    assert not np.array_equal(a[:, 0], b[:, 0])
    # Same seed, same bits; the night light off leaves the luminaires' channel as it was.
    np.testing.assert_array_equal(transport_at_points(pts, nrm, None, tracer, 9)[0], a)
    plain = PathTracer(mesh, bvh, lights, rho, replace(tracer.settings, night=None))
    c, _ = transport_at_points(pts, nrm, None, plain, 9)
    assert c.shape[1] == 1
    np.testing.assert_array_equal(c[:, 0], a[:, 0])


def test_colorimetric_weights_of_the_sky_pixels():
    # The sky seen has the sky spectrum's chromaticity: X/Y and Z/Y of the white response
    # (CIE 15 colorimetry of the lamp spectrum).
    from render.colour.lamps import get_lamp

    spd = get_lamp("sodium-high-pressure-cie-hp1").spd
    w = colorimetric_weights()
    x, y, z = (spd @ w[:, :3]) / (spd @ w[:, 1])
    night = NightLight(sky_luminance_cd_m2=0.01)
    mesh, bvh, lights, rho, _ = _tracer([[_ground(50.0)]], night)
    camera = Camera(position_m=(0.0, 0.0, 1.6), target_m=(0.0, 10.0, 20.0), hfov_deg=40.0, width_px=8, height_px=8)
    buffers = render_buffers(mesh, bvh, lights, camera, 1, 0)
    ind = trace_view(
        buffers, lights, bvh, rho, IndirectSettings(0, 2, night=night), 0,
        ambient_spds=np.stack([spd, planckian_spectrum(4100.0)] * 2),
    )  # fmt: skip
    xyz = ambient_responses(ind, buffers.response, rho)
    sky = buffers.response < 0
    assert sky.all()
    np.testing.assert_allclose(xyz[..., 1], 0.01, rtol=1e-12)
    np.testing.assert_allclose(xyz[..., 0] / xyz[..., 1], x, rtol=1e-12)
    np.testing.assert_allclose(xyz[..., 2] / xyz[..., 1], z, rtol=1e-12)


# ------------------------------------------------------------------------------------------
# Scene keys and the wiring of a render
# ------------------------------------------------------------------------------------------

MINIMAL = Path(__file__).resolve().parent.parent / "scenes" / "tests" / "minimal_street.toml"


def _scene_with(tmp_path, night_table: str) -> Path:
    p = tmp_path / "night.toml"
    p.write_text(MINIMAL.read_text(encoding="utf-8") + "\n[night]\n" + night_table, encoding="utf-8")
    return p


@pytest.mark.parametrize(
    ("table", "where", "words"),
    [
        ("sky_luminance_cd_m2 = -0.01\n", "night.sky_luminance_cd_m2", "cd/m²"),
        ("moon_illuminance_lx = 100.0\n", "night.moon_illuminance_lx", "lx"),
        ("moon_elevation_deg = 0.0\n", "night.moon_elevation_deg", "deg"),
        ('sky_spectrum = "led-4000k-cie-b33"\n', "night.sky_spectrum", "unknown lamp"),
        ("moon_lux = 0.1\n", "night.moon_lux", "moon_"),
    ],
)
def test_night_keys_are_checked(tmp_path, table, where, words):
    # Bad input names its key and what was expected (common practice, no source).
    from render.errors import InputError
    from render.scene import load_scene

    with pytest.raises(InputError) as info:
        load_scene(_scene_with(tmp_path, table))
    (problem,) = info.value.problems
    assert problem.where == where and words in problem.message, problem


def test_off_by_default_and_on_without_bounces(tmp_path):
    # A scene without [night] has none; with it and [render] bounces = 0 the night light is
    # still traced (its direct part), the sky pixels show its luminance and the luminaires'
    # direct light is unchanged to the bit.
    from render.scene import load_scene
    from render.study import Study

    assert not load_scene(MINIMAL).night.on
    off = Study(MINIMAL)
    on = Study(_scene_with(tmp_path, "sky_luminance_cd_m2 = 0.002\nmoon_illuminance_lx = 0.2\n"))
    a = off.render_view("look", width_px=32, samples_per_pixel=1)
    b = on.render_view("look", width_px=32, samples_per_pixel=1)
    assert a.buffers.indirect is None
    ind = b.buffers.indirect
    assert ind.settings.bounces == 0 and ind.values.shape[1] == 0
    assert ind.ambient_channels == (0, 1)  # only the terms on are kept: sky and moon
    np.testing.assert_array_equal(a.buffers.value_cd_m2, b.buffers.value_cd_m2)
    # Camera samples that leave the scene upward see the sky; below the horizon (past the
    # street's end) they see nothing.
    miss = b.buffers.response < 0
    up = b.buffers.direction[:, 2] > 0
    sky, below = miss & up, miss & ~up
    assert sky.any() and below.any()
    lum = b.colorimetry.luminance_cd_m2.reshape(-1)
    np.testing.assert_allclose(lum[sky], 0.002, rtol=1e-9)
    np.testing.assert_array_equal(lum[below], 0.0)
    assert np.all(lum[~miss] > a.colorimetry.luminance_cd_m2.reshape(-1)[~miss])
    assert ind.settings.describe().startswith("no interreflected light")
    # Image provenance states it (common practice, no source).
    from render.output.provenance import image_metadata
    from render.vision.observer import ObserverSettings

    meta = image_metadata(on, b, "", ObserverSettings(), 1, 1)
    assert meta["lampcast.night_light"].startswith("night light: sky glow 0.002 cd/m²")
    assert "moonlight 0.2 lx" in meta["lampcast.night_light"]
    assert "lampcast.interreflection" not in meta  # no bounces traced
    assert "lampcast.night_light" not in image_metadata(off, a, "", ObserverSettings(), 1, 1)
    # The comparison's cautions state it (and that no interreflection was traced).
    from render.output.comparison import CAUTIONS, light_cautions

    cautions = light_cautions(on.indirect_settings())
    assert len(cautions) == 4 and CAUTIONS[1] not in cautions
    assert cautions[1].startswith("Light reflected between surfaces is left out")
    assert "sky glow 0.002 cd/m²" in cautions[2] and "moonlight 0.2 lx" in cautions[2]
    assert light_cautions(off.indirect_settings()) == CAUTIONS


# ------------------------------------------------------------------------------------------
# Lit windows
# ------------------------------------------------------------------------------------------

HOUSE_WINDOW = 2  # the house windows' channel after sky and moon (no luminaire channel)


def _window(corner, e1, e2):
    from render.light.indirect.windows import LitWindows

    corner, e1, e2 = (np.asarray(v, np.float64) for v in (corner, e1, e2))
    n = np.cross(e1, e2)
    area = float(np.linalg.norm(n))
    row = np.concatenate([corner, e1, e2, n / area, [area]])
    return LitWindows(row[None], np.zeros(1, np.int64), np.zeros(1, np.int64), (1, 0))


def _window_estimate(window, pts, nrm, paths=256, seed=5):
    night = NightLight(window_lit_fraction=1.0)
    mesh = mesh_of([[_ground(50.0)]], ["ground"])
    bvh = build_bvh(mesh.triangles_m)
    lights = isotropic_source([0.0, 0.0, 5000.0])
    st = IndirectSettings(bounces=0, samples_per_pixel=paths, night=night)
    tracer = PathTracer(mesh, bvh, lights, np.zeros((1, N_BINS)), st, windows=window)
    m, n = transport_at_points(pts, nrm, None, tracer, seed)
    est = m[:, HOUSE_WINDOW, 40]
    return est.mean(), est.std(ddof=1) / math.sqrt(len(est))


@pytest.mark.parametrize(("a", "b", "c"), [(2.0, 1.0, 1.5), (0.8, 1.2, 4.0)])
def test_lit_rectangle_parallel_configuration_factor(a, b, c):
    # A rectangle a × b at height c facing down, the point below one corner: E/(π·L) = F.
    def howell(X, Y):
        return (
            X / math.sqrt(1 + X * X) * math.atan(Y / math.sqrt(1 + X * X))
            + Y / math.sqrt(1 + Y * Y) * math.atan(X / math.sqrt(1 + Y * Y))
        ) / (2 * math.pi)

    # The formula as transcribed gives a quarter for an infinite quadrant.
    assert howell(1e9, 1e9) == pytest.approx(0.25, abs=1e-6)
    F = howell(a / c, b / c)
    window = _window((0.0, 0.0, c), (0.0, b, 0.0), (a, 0.0, 0.0))  # e2 × e1 order: normal down
    assert window.rect[0, 11] == -1.0
    pts, nrm = _up_points(np.zeros((64, 2)))
    mean, se = _window_estimate(window, pts + [0.0, 0.0, 0.0], nrm)
    assert abs(mean - F) < 4 * se + 1e-9, (mean, F, se)
    assert se < 0.01 * F


def test_lit_rectangle_perpendicular_configuration_factor():
    # A window 1.2 m wide and 1.4 m high in a facade (plane y = 6, facing −y) with its sill at
    # 0.9 m, and a point on the ground in front of it, off to one side.
    corner, e1, e2 = (1.0, 6.0, 0.9), (1.2, 0.0, 0.0), (0.0, 0.0, 1.4)  # normal −y
    window = _window(corner, e1, e2)
    assert window.rect[0, 10] == -1.0
    x = np.array([0.3, 2.0, 0.0])
    # Midpoint rule on the definition, 400 × 400 cells.
    u = (np.arange(400) + 0.5) / 400
    uu, vv = np.meshgrid(u, u, indexing="ij")
    y = np.array(corner) + uu[..., None] * np.array(e1) + vv[..., None] * np.array(e2)
    r = y - x
    d2 = (r * r).sum(axis=-1)
    cos1 = r[..., 2] / np.sqrt(d2)
    cos2 = r[..., 1] / np.sqrt(d2)  # toward the window's outward normal −y, reversed
    F = float((cos1 * cos2 / (math.pi * d2)).mean() * 1.2 * 1.4)
    pts, nrm = _up_points(np.tile(x[:2], (64, 1)))
    mean, se = _window_estimate(window, pts, nrm)
    assert abs(mean - F) < 4 * se + 1e-9, (mean, F, se)


def _frontage_scene(tmp_path, night_table: str) -> Path:
    text = MINIMAL.read_text(encoding="utf-8") + (
        '\n[[frontages]]\nname = "terrace"\nside = "left"\nstart_m = 0.0\nlength_m = 40.0\nunits = 6\n'
        'height_m = 5.6\n\n[[frontages]]\nname = "shops"\nside = "right"\nkind = "shop"\nstart_m = 0.0\n'
        "length_m = 40.0\nunits = 4\nheight_m = 7.0\n"
    )
    p = tmp_path / "windows.toml"
    p.write_text(text + "\n[night]\n" + night_table, encoding="utf-8")
    return p


def test_lit_share_reproducible_by_seed(tmp_path):
    # round(fraction · n) windows of each kind are lit; the same seed lights the same ones.
    from render.light.indirect.windows import HOUSE, SHOP, lit_windows, window_panels
    from render.study import Study

    s = Study(_frontage_scene(tmp_path, "window_lit_fraction = 0.3\nshop_window_lit_fraction = 0.5\n"))
    panels = window_panels(s.mesh)
    n_house, n_shop = panels.panels
    # 6 houses of 2 storeys of 2 windows, the door in one ground-floor place; 4 shops of one
    # shop window and 2 upper windows (the builders' defaults).
    assert (n_house, n_shop) == (6 * 3, 4 * 3)
    lit = lit_windows(s.mesh, s.scene.night)
    assert (lit.kind == HOUSE).sum() == round(0.3 * n_house)
    assert (lit.kind == SHOP).sum() == round(0.5 * n_shop)
    again = lit_windows(s.mesh, s.scene.night)
    np.testing.assert_array_equal(lit.rect, again.rect)
    other = lit_windows(s.mesh, replace(s.scene.night, window_seed=1))
    assert not np.array_equal(lit.rect, other.rect)
    # Each rectangle faces the street (the terrace on the left, +y side, faces −y).
    left = lit.rect[lit.kind == HOUSE]
    assert np.all(left[:, 10] < -0.99)


def test_lit_windows_in_a_view(tmp_path):
    # Pixels that see a lit window show its luminance (white response of its lamp), the
    # street in front receives its light, and a new window luminance scales it exactly.
    from render.study import Study

    s = Study(_frontage_scene(tmp_path, "window_lit_fraction = 1.0\nwindow_luminance_cd_m2 = 20.0\n"))
    r = s.render_view("look", width_px=48, samples_per_pixel=1)
    ind = r.buffers.indirect
    assert ind.ambient_channels == (2,)  # only the houses' windows are on
    seen = ind.window_seen[:, 0] > 0
    assert seen.sum() >= 5
    y = ambient_responses(ind, r.buffers.response, s.reflectances)[..., 1].reshape(-1)
    # The window glass's own reflection of the other night light is zero here: only windows on.
    np.testing.assert_allclose(y[seen], 20.0 + np.zeros(seen.sum()), rtol=0.05)
    ground = (r.buffers.response >= 0) & ~seen
    assert np.all(y[ground] >= 0) and y[ground].max() > 0
    brighter = ambient_responses(
        ind, r.buffers.response, s.reflectances, replace(s.scene.night, window_luminance_cd_m2=40.0)
    )
    np.testing.assert_allclose(brighter, 2 * ambient_responses(ind, r.buffers.response, s.reflectances), rtol=1e-12)


# Windows of their own per frontage and per window
# ------------------------------------------------------------------------------------------


@pytest.mark.parametrize(
    ("table", "where", "words"),
    [
        ('[[night.frontages]]\nname = "terace"\n', "night.frontages[0].name", "did you mean"),
        (
            'window_lit_fraction = 0.2\n[[night.frontages]]\nname = "terrace"\nlamp = "led-4000k-cie-b33"\n',
            "night.frontages[0].lamp",
            "unknown lamp",
        ),
        (
            'window_luminance_cd_m2 = 0.0\n[[night.frontages]]\nname = "terrace"\nlit_fraction = 0.5\n'
            "luminance_cd_m2 = 20.0\n",
            "night.frontages[0]",
            "window_luminance_cd_m2 is 0",
        ),
        ('[[night.frontages]]\nname = "terrace"\nlit = [0, 2]\n', "night.frontages[0].lit[0]", "window number"),
        (
            '[[night.frontages]]\nname = "terrace"\nwindow_luminance_cd_m2 = { 3 = -1.0 }\n',
            "night.frontages[0].window_luminance_cd_m2.3",
            "luminance",
        ),
        ('[[night.frontages]]\nname = "terrace"\nlit_share = 0.5\n', "night.frontages[0].lit_share", "lit_fraction"),
    ],
)
def test_frontage_window_keys_are_checked(tmp_path, table, where, words):
    # Bad input names its key and what was expected (common practice, no source).
    from render.errors import InputError
    from render.scene import load_scene

    with pytest.raises(InputError) as info:
        load_scene(_frontage_scene(tmp_path, table))
    (problem,) = info.value.problems
    assert problem.where == where and words in problem.message, problem


def test_window_number_beyond_the_frontage_is_named(tmp_path):
    # A window number the frontage does not have names its key and the count (18 windows:
    # 6 houses of 3, as in test_lit_share_reproducible_by_seed).
    from render.errors import InputError
    from render.light.indirect.windows import lit_windows
    from render.study import Study

    s = Study(_frontage_scene(tmp_path, '[[night.frontages]]\nname = "terrace"\nlit = [2, 19]\n'))
    with pytest.raises(InputError) as info:
        lit_windows(s.mesh, s.scene.night)
    (problem,) = info.value.problems
    assert problem.where == "night.frontages[0].lit" and "window 19" in problem.message and "18" in problem.message


def test_frontage_and_window_overrides(tmp_path):
    # A frontage's own share and luminance replace the scene-wide ones for its windows alone:
    # the other frontage keeps the very windows it has without the override; windows named
    # lit, dark or with a luminance of their own are so; luminances are stored over the
    # channel's level (the scene-wide luminance of the lamp's kind).
    from render.light.indirect.windows import HOUSE, SHOP, lit_windows, window_panels
    from render.study import Study

    plain = "window_lit_fraction = 0.5\nshop_window_lit_fraction = 0.5\n"
    own = (
        plain + '[[night.frontages]]\nname = "terrace"\nlit_fraction = 0.0\nluminance_cd_m2 = 30.0\nlit = [1, 4]\n'
        "dark = [2]\nwindow_luminance_cd_m2 = { 2 = 5.0, 7 = 25.0 }\n"
    )
    s0 = Study(_frontage_scene(tmp_path, plain))
    s1 = Study(_frontage_scene(tmp_path, own))
    a = lit_windows(s0.mesh, s0.scene.night)
    b = lit_windows(s1.mesh, s1.scene.night)
    assert np.all(a.relative == 1.0)
    # The shops (not named) are lit as before, at the channel's level.
    np.testing.assert_array_equal(a.rect[a.kind == SHOP], b.rect[b.kind == SHOP])
    # The terrace: windows 1 and 4 at 30 cd/m² (3 × the houses' 10), window 7 at 25, window 2
    # at its own 5 (a luminance of its own wins over `dark`), nothing else.
    panels = window_panels(s1.mesh)
    terrace = panels.rect[panels.kind == HOUSE]
    house = b.rect[b.kind == HOUSE]
    lit_rows = [int(np.flatnonzero(np.abs(terrace[:, :3] - r[:3]).sum(axis=1) < 1e-9)[0]) for r in house]
    assert sorted(lit_rows) == [0, 1, 3, 6]
    rel = dict(zip(lit_rows, house[:, 13]))
    assert rel == {0: 3.0, 1: 0.5, 3: 3.0, 6: 2.5}
    from render.light.indirect.night import describe_night

    assert "windows of their own: terrace 0% at 30 cd/m², 2 lit, 1 dark, 2 of their own luminance" in describe_night(
        s1.scene.night
    )
    # Channel on with the houses' scene-wide share at 0 when a frontage lights windows.
    night = replace(s1.scene.night, window_lit_fraction=0.0)
    assert night.terms[2]


def test_two_windows_of_their_own_luminances(tmp_path):
    # Two rectangles above a point, luminances 1 and 3 times the channel's level: E/(π·L_ref)
    # = F₁ + 3·F₂ (E = π·Σ L_w·F_w for Lambertian emitters; F by Howell's parallel-rectangle
    # factor, differences of corner rectangles, as above). The window of three times the
    # luminance is chosen three times as often (its power), so the estimate stays as good.
    from render.light.indirect.windows import LitWindows

    def howell(X, Y):
        return (
            X / math.sqrt(1 + X * X) * math.atan(Y / math.sqrt(1 + X * X))
            + Y / math.sqrt(1 + Y * Y) * math.atan(X / math.sqrt(1 + Y * Y))
        ) / (2 * math.pi)

    c = 2.0
    rows = []
    for x0, lum in ((0.0, 1.0), (-1.5, 3.0)):  # a 1 × 1 m window at x 0…1 and a 1.5 × 1 m at −1.5…0
        width = 1.0 if x0 == 0.0 else 1.5
        e1, e2 = np.array([0.0, 1.0, 0.0]), np.array([width, 0.0, 0.0])
        n = np.cross(e1, e2)
        rows.append(np.concatenate([[x0, 0.0, c], e1, e2, n / np.linalg.norm(n), [width, lum]]))
    win = LitWindows(np.array(rows), np.zeros(2, np.int64), np.zeros(2, np.int64), (2, 0))
    f1 = howell(1.0 / c, 1.0 / c)
    f2 = howell(1.5 / c, 1.0 / c)
    pts, nrm = _up_points(np.zeros((64, 2)))
    mean, se = _window_estimate(win, pts, nrm)
    expected = f1 + 3.0 * f2
    assert abs(mean - expected) < 4 * se + 1e-9, (mean, expected, se)
    assert se < 0.01 * expected


def test_frontage_luminance_in_a_view(tmp_path):
    # Pixels that see the terrace's windows show the frontage's own luminance (30 cd/m², three
    # times the houses' level of 10); a new scene-wide luminance is a multiply of the whole
    # channel, the frontage's windows keeping their ratio to it (what relights without a ray).
    from render.study import Study

    night = (
        "window_lit_fraction = 0.0\nwindow_luminance_cd_m2 = 10.0\n"
        '[[night.frontages]]\nname = "terrace"\nlit_fraction = 1.0\nluminance_cd_m2 = 30.0\n'
    )
    s = Study(_frontage_scene(tmp_path, night))
    r = s.render_view("look", width_px=48, samples_per_pixel=1)
    ind = r.buffers.indirect
    assert ind.ambient_channels == (2,)
    seen = ind.window_seen[:, 0] > 0
    assert seen.sum() >= 5
    y = ambient_responses(ind, r.buffers.response, s.reflectances)[..., 1].reshape(-1)
    np.testing.assert_allclose(y[seen], 30.0 + np.zeros(seen.sum()), rtol=0.05)
    brighter = ambient_responses(
        ind, r.buffers.response, s.reflectances, replace(s.scene.night, window_luminance_cd_m2=20.0)
    )
    np.testing.assert_allclose(brighter, 2 * ambient_responses(ind, r.buffers.response, s.reflectances), rtol=1e-12)
