"""Upward exitance map: the downward hemisphere camera and the light the scene sends up.

Sources of the expected values:
* solid angle of a rectangle seen from a point at height h above its plane: for a rectangle
  with one corner at the foot of the perpendicular and sides a, b,
  Ω = arctan(ab / (h·√(h² + a² + b²))) (analytic; e.g. R. J. Mathar, "Solid angle of a
  rectangular plate", 2014, **from memory**); any other rectangle by adding and subtracting
  such corner rectangles. The light an isotropic source of intensity I sends onto the
  rectangle is I·Ω; a Lambertian surface of reflectance ρ reflects ρ·I·Ω, and all of it goes
  up through a plane just above the rectangle (analytic);
* a Lambertian surface under illuminance E has exitance M = ρE (the definition of
  reflectance with the Lambertian law, L = ρE/π and M = πL; analytic); the illuminance of a
  point source is E = I·cos θ / d² (inverse-square and cosine laws; analytic);
* a vertical wall of height H, long along y, lit uniformly to exitance M_w = ρE: the share of
  its light that crosses the horizontal strip of width X on top of it, sharing its top edge, is
  the view factor of two perpendicular strips sharing an edge, F = (1 + X/H − √(1 + (X/H)²))/2,
  by Hottel's crossed-string method (Hottel & Sarofim, *Radiative Transfer*, 1967; Howell,
  Siegel & Mengüç, *Thermal Radiation Heat Transfer*, **from memory**); as X → ∞, F → ½: half
  the wall's light goes up, the other half down;
* cosine-weighted directions: the mean of cos θ over a cosine-weighted hemisphere is 2/3, of
  cos² θ one half (analytic);
* same seed, same bytes; a setup relit equals the same setup cast afresh (the light buffers'
  definition: common practice, no source).
"""

from __future__ import annotations

import math

import numpy as np
import pytest
from indirect_scenes import FLUX_LM, isotropic_source, mesh_of

from render.calc.sky import UpwardLight, exitance_lm_m2, upward_buffers, upward_plane
from render.colour.lamps import get_lamp
from render.colour.spectra import N_BINS
from render.geometry import shapes
from render.light.luminaires import channel_factors
from render.rays.bvh import build_bvh
from render.rays.cameras import DownwardHemisphereCamera, camera_rays, tile_pixels

INTENSITY_CD = FLUX_LM / (4.0 * math.pi)


def quad(corners) -> shapes.Part:
    """A flat quadrilateral of four corners (counter-clockwise seen from its front)."""
    c = np.asarray(corners, float)
    return shapes.flat_part(np.array([[c[0], c[1], c[2]], [c[0], c[2], c[3]]]), "face")


def flat(rho: float) -> np.ndarray:
    return np.full((1, N_BINS), rho)


def map_of(parts, rho, source_m, plane, rays, seed=1, negligible_lx=None):
    mesh = mesh_of([parts], ["surface"])
    lights = isotropic_source(source_m)
    buffers = upward_buffers(mesh, build_bvh(mesh.triangles_m), lights, plane, rays, seed, negligible_lx=negligible_lx)
    factors, lamps = channel_factors(lights)
    return exitance_lm_m2(buffers, factors, [get_lamp(lamps[0]).spd], flat(rho))


def corner_solid_angle(a, b, h):
    return math.atan(a * b / (h * math.sqrt(h * h + a * a + b * b)))


def rectangle_solid_angle(x0, x1, y0, y1, h):
    """Ω of [x0, x1] × [y0, y1] seen from (0, 0, h), signed corner rectangles added."""
    g = corner_solid_angle
    return g(x1, y1, h) - g(x0, y1, h) - g(x1, y0, h) + g(x0, y0, h)


# ------------------------------------------------------------------------------------------
# The camera's samples
# ------------------------------------------------------------------------------------------


def test_samples_start_in_their_cell_and_are_cosine_weighted():
    cam = DownwardHemisphereCamera(origin_xy_m=(2.0, -1.0), plane_z_m=4.0, cell_m=0.5, width_px=6, height_px=4)
    o, d, p = camera_rays(cam, 16, 7)
    col, row = p % 6, 3 - p // 6  # image row 0 is the largest y
    assert np.all((o[:, 0] >= 2.0 + 0.5 * col) & (o[:, 0] < 2.0 + 0.5 * (col + 1)))
    assert np.all((o[:, 1] >= -1.0 + 0.5 * row) & (o[:, 1] < -1.0 + 0.5 * (row + 1)))
    np.testing.assert_array_equal(o[:, 2], 4.0)
    np.testing.assert_allclose(np.linalg.norm(d, axis=1), 1.0, rtol=1e-12)
    assert np.all(d[:, 2] < 0.0)
    # Cosine-weighted: E[cos θ] = 2/3, E[cos² θ] = 1/2 (stratified: close with 384 samples).
    c = -d[:, 2]
    assert c.mean() == pytest.approx(2.0 / 3.0, abs=0.01)
    assert (c * c).mean() == pytest.approx(0.5, abs=0.01)
    # The samples of a cell fall in distinct strata of the direction square (u1 = sin² θ).
    u1 = 1.0 - c * c
    for cell in range(cam.n_pixels):
        strata = np.floor(4 * u1[p == cell]) * 4 + np.floor(
            4 * (np.arctan2(d[p == cell, 1], d[p == cell, 0]) / (2 * math.pi) % 1.0)
        )
        assert len(np.unique(strata)) == 16


def test_a_cells_rays_do_not_depend_on_the_tile():
    cam = DownwardHemisphereCamera(origin_xy_m=(0.0, 0.0), plane_z_m=1.0, cell_m=1.0, width_px=9, height_px=7)
    o, d, p = camera_rays(cam, 4, 3)
    some = tile_pixels(cam, 2, 1, 7, 5, block_px=4)
    o2, d2, p2 = camera_rays(cam, 4, 3, some)
    index = (some[:, None] * 4 + np.arange(4)).ravel()
    np.testing.assert_array_equal(o2, o[index])
    np.testing.assert_array_equal(d2, d[index])


# ------------------------------------------------------------------------------------------
# Analytic checks
# ------------------------------------------------------------------------------------------


def test_point_over_rectangle_reflects_rho_i_omega():
    # Rectangle [0, 4] × [0, 3] at z = 0, ρ = 0.6, an isotropic source at (1, 0.5, 2) off the
    # centre; the plane 1 cm above, 0.5 m beyond the rectangle: Σ M·A = ρ·I·Ω within 1 %.
    rho, source = 0.6, np.array([1.0, 0.5, 2.0])
    parts = [quad([[0, 0, 0], [4, 0, 0], [4, 3, 0], [0, 3, 0]])]
    plane = DownwardHemisphereCamera(origin_xy_m=(-0.5, -0.5), plane_z_m=0.01, cell_m=0.1, width_px=50, height_px=40)
    m = map_of(parts, rho, source, plane, 16)
    total = m.sum() * plane.cell_area_m2
    omega = rectangle_solid_angle(-1.0, 3.0, -0.5, 2.5, 2.0)
    expected = rho * INTENSITY_CD * omega
    assert total == pytest.approx(expected, rel=0.01)


def test_lit_plane_has_exitance_rho_e_everywhere():
    # A far source (50 m up) lights a 6 × 6 m plane almost uniformly; every cell of the plane
    # 1 cm above it has M = ρ·E, E = I·cos θ/d² at the cell's centre, within 0.3 %.
    rho, h = 0.35, 50.0
    parts = [quad([[-3, -3, 0], [3, -3, 0], [3, 3, 0], [-3, 3, 0]])]
    plane = DownwardHemisphereCamera(origin_xy_m=(-2.5, -2.5), plane_z_m=0.01, cell_m=0.5, width_px=10, height_px=10)
    m = map_of(parts, rho, (0.0, 0.0, h), plane, 4)
    x = -2.5 + 0.5 * (np.arange(10) + 0.5)
    y = (-2.5 + 0.5 * (np.arange(10) + 0.5))[::-1]  # image row 0 is the largest y
    d2 = x[None, :] ** 2 + y[:, None] ** 2 + h * h
    e = INTENSITY_CD * h / d2**1.5
    np.testing.assert_allclose(m, rho * e, rtol=0.003)


def hottel_share(x_m: float, h_m: float) -> float:
    """View factor from a strip of width h to a perpendicular strip of width x sharing an edge."""
    w = x_m / h_m
    return (1.0 + w - math.sqrt(1.0 + w * w)) / 2.0


def test_wall_sends_up_what_the_crossed_strings_say():
    # A wall x = 0 facing +x, 3 m high and 40 m long, lit by a source 1 km away on its normal
    # (E uniform within 0.06 % over the wall); the plane 1 mm above its top, x from 0 to 6 m,
    # y from −2 to 2 m: the flux through x < X per metre of wall is ρ·E·H·F(X/H).
    rho, h = 0.8, 3.0
    parts = [quad([[0, -20, 0], [0, 20, 0], [0, 20, h], [0, -20, h]])]
    plane = DownwardHemisphereCamera(
        origin_xy_m=(0.0, -2.0), plane_z_m=h + 1e-3, cell_m=0.25, width_px=24, height_px=16
    )
    m = map_of(parts, rho, (1000.0, 0.0, h / 2), plane, 64, negligible_lx=0.0)
    e = INTENSITY_CD / 1000.0**2
    per_metre = np.cumsum(m.sum(axis=0)) * plane.cell_area_m2 / 4.0  # through x < 0.25 (k + 1)
    for k in (1, 3, 7, 15, 23):
        x = 0.25 * (k + 1)
        assert per_metre[k] == pytest.approx(rho * e * h * hottel_share(x, h), rel=0.015), x
    # The total over the strip is below half the wall's light (F → 1/2 only as X → ∞).
    assert per_metre[-1] < 0.5 * rho * e * h


def test_luminous_openings_seen_from_above_are_left_out():
    # A source tilted to face up (150°), below the plane, over a black floor: the plane sees
    # its luminous opening, but no surface reflects anything, so the map is zero (common
    # practice, no source: direct light is not reflected light).
    from dataclasses import replace

    from indirect_scenes import SCENES

    from render.light.luminaires import luminaire_set
    from render.scene import load_scene

    scene = load_scene(SCENES / "point_over_plane.toml")
    scene.luminaires = [replace(scene.luminaires[0], position_m=(0.0, 0.0, 1.0), tilt_deg=150.0)]
    lights = luminaire_set(scene)
    parts = [quad([[-3, -3, 0], [3, -3, 0], [3, 3, 0], [-3, 3, 0]])]
    plane = DownwardHemisphereCamera(origin_xy_m=(-3.0, -3.0), plane_z_m=2.0, cell_m=0.5, width_px=12, height_px=12)
    mesh = mesh_of([parts], ["surface"])
    bvh = build_bvh(mesh.triangles_m)
    factors, lamps = channel_factors(lights)
    spds = [get_lamp(lamps[0]).spd]
    # The same cast keeping the openings: they are seen, and luminous.
    from render.colour.colorimetry import resolve
    from render.light.integrator import render_buffers

    kept = render_buffers(mesh, bvh, lights, plane, 16, 1)
    assert np.any(kept.emitter >= 0)
    assert resolve(kept, factors, spds, flat(0.0)).xyz_cd_m2[..., 1].max() > 0.0
    m = exitance_lm_m2(upward_buffers(mesh, bvh, lights, plane, 16, 1), factors, spds, flat(0.0))
    assert np.all(m == 0.0)


# ------------------------------------------------------------------------------------------
# Seeds and relighting
# ------------------------------------------------------------------------------------------


@pytest.fixture(scope="module")
def point_scene(tmp_path_factory):
    """The isotropic test scene with a setup that changes the photometric distribution; no
    negligible illuminance, so that a cast under a dimmer setup culls nothing a brighter one
    keeps (the culling threshold applies to each cast's own full output)."""
    from indirect_scenes import SCENES

    from render.study import Study

    text = (SCENES / "point_over_plane.toml").read_text()
    text += '\n[setups.asymmetric]\nlamp = "sodium-low-pressure"\nphotometry = "generic-road-asymmetric"\n'
    path = tmp_path_factory.mktemp("upward") / "scene.toml"
    path.write_text(text)
    return Study(path, negligible_lx=0.0)


def test_same_seed_same_bytes(point_scene):
    a = UpwardLight(point_scene, cell_m=4.0, rays_per_cell=4, seed=5).exitance("sodium")
    b = UpwardLight(point_scene, cell_m=4.0, rays_per_cell=4, seed=5).exitance("sodium")
    c = UpwardLight(point_scene, cell_m=4.0, rays_per_cell=4, seed=6).exitance("sodium")
    assert a.exitance_lm_m2.tobytes() == b.exitance_lm_m2.tobytes()
    assert a.exitance_lm_m2.tobytes() != c.exitance_lm_m2.tobytes()


@pytest.mark.parametrize("setup", ["dimmed-hps", "asymmetric"])
def test_relit_setup_equals_a_fresh_cast(point_scene, setup):
    # Lamp, lumens and dimming (no ray) and a new photometric distribution (evaluated again at
    # the same hits) against a cast under the setup itself.
    cast = UpwardLight(point_scene, "sodium", cell_m=4.0, rays_per_cell=4, seed=2)
    fresh = UpwardLight(point_scene, setup, cell_m=4.0, rays_per_cell=4, seed=2).exitance(setup)
    relit = cast.exitance(setup)
    assert fresh.reflected_upward_lm > 0.0
    np.testing.assert_allclose(relit.exitance_lm_m2, fresh.exitance_lm_m2, rtol=1e-5, atol=0.0)
    # The cast's own setup is unchanged by the relighting.
    np.testing.assert_allclose(
        cast.exitance("sodium").exitance_lm_m2,
        UpwardLight(point_scene, "sodium", cell_m=4.0, rays_per_cell=4, seed=2).exitance("sodium").exitance_lm_m2,
        rtol=1e-6,
    )


def test_plane_covers_the_bounds_above_the_highest_surface():
    tri = np.array([[[0.0, 0.0, 0.0], [10.2, 0.0, 0.0], [0.0, 3.1, 7.0]]])
    plane = upward_plane(tri, cell_m=0.5, clearance_m=0.05, margin_heights=0.0)
    x0, x1, y0, y1 = plane.extent_m
    assert x0 <= 0.0 and x1 >= 10.2 and y0 <= 0.0 and y1 >= 3.1
    assert (plane.width_px, plane.height_px) == (21, 7)
    assert plane.plane_z_m == pytest.approx(7.05)
    # One height of margin: 7.05 m beyond the bounds on every side.
    wide = upward_plane(tri, cell_m=0.5, clearance_m=0.05, margin_heights=1.0)
    x0, x1, y0, y1 = wide.extent_m
    assert x0 <= -7.05 and x1 >= 17.25 and y0 <= -7.05 and y1 >= 10.15
    assert x1 - x0 < 24.3 + 0.5 and y1 - y0 < 17.2 + 0.5
    coarse = upward_plane(tri, cell_m=0.5, max_cells=20)
    assert coarse.n_pixels <= 20 and coarse.cell_m > 0.5


# ------------------------------------------------------------------------------------------
# Interreflected light: a sphere with an opening at the top
# ------------------------------------------------------------------------------------------


@pytest.mark.parametrize("bounces", [0, 3])
def test_sphere_with_an_opening_sends_out_the_reflection_series(bounces):
    # An integrating sphere (radius 2 m, ρ = 0.5) cut open at the top, 0.5 m below its pole:
    # every element of a sphere's inside sees any part of it in proportion to that part's area
    # (the sphere's view factor F = A_j/A, analytic), so with f the opening's share of the area
    # and Φ_w = Φ(1 − f) the source's direct light on the wall (the source at the centre sees
    # the opening in the same proportion), the reflected light leaving through the opening
    # after up to N interreflections is ρ·f·Φ_w·Σ_{k=0..N} (ρ(1 − f))^k (the integrating
    # sphere's series, truncated; e.g. Goebel, "Generalized integrating-sphere theory", Appl.
    # Opt. 6, 1967, from memory). Within 1 % (the tessellation and Monte Carlo noise; measured
    # 0.35 % below with one reflection, 0.2 % below with three interreflections).
    from render.light.indirect import IndirectSettings, trace_view

    rho, centre = 0.5, np.array([0.0, 0.0, 5.0])
    parts = shapes.sphere(centre, 2.0, subdivisions=5)
    full = shapes.surface_area_m2(parts)
    tri = np.concatenate([p.triangles_m for p in parts])
    nrm = np.concatenate([p.normals for p in parts])
    keep = tri[:, :, 2].max(axis=1) <= centre[2] + 1.5
    cut = [shapes.Part(tri[keep], nrm[keep], "wall")]
    f = 1.0 - shapes.surface_area_m2(cut) / full
    mesh = mesh_of([cut], ["wall"])
    bvh = build_bvh(mesh.triangles_m)
    lights = isotropic_source(centre)
    lights.opening_m[:] = 1e-3  # a point source: its opening hides nothing from the plane
    top = float(mesh.triangles_m[:, :, 2].max())
    plane = DownwardHemisphereCamera(
        origin_xy_m=(-1.5, -1.5), plane_z_m=top + 1e-3, cell_m=0.1, width_px=30, height_px=30
    )
    buffers = upward_buffers(mesh, bvh, lights, plane, 16, 1)
    if bounces:
        buffers.indirect = trace_view(
            buffers, lights, bvh, flat(rho), IndirectSettings(bounces=bounces, samples_per_pixel=32), 1
        )
    factors, lamps = channel_factors(lights)
    m = exitance_lm_m2(buffers, factors, [get_lamp(lamps[0]).spd], flat(rho))
    out = m.sum() * plane.cell_area_m2
    series = sum((rho * (1.0 - f)) ** k for k in range(bounces + 1))
    expected = rho * f * FLUX_LM * (1.0 - f) * series
    assert out == pytest.approx(expected, rel=0.01), (f, out, expected)
