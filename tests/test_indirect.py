"""Interreflected light: analytic enclosures, energy balance, colour bleeding, convergence.

Sources of the expected values:
* integrating sphere (analytic; ../shared/reference-notes.md, "Analytic results for
  validation"): in a closed sphere of wall area A and reflectance ρ(λ) with flux Φ inside, the
  illuminance from reflected light is E_ind = ρΦ / (A(1 − ρ)) at every point of the wall, per
  wavelength; after n reflections at most, Φ/A·(ρ + … + ρⁿ) (the same sum truncated: each
  reflection from a uniformly lit sphere wall lights the wall uniformly with E·ρ);
* conservation of energy: in a closed enclosure of uniform reflectance every lumen is finally
  absorbed, so ∫E_ind dA = Φ·ρ/(1 − ρ) (analytic); in an open scene, per wavelength,
  emitted = escaped directly + absorbed + escaped after reflection;
* colour bleeding: light reflected by a surface carries its reflectance (Lambertian reflection,
  L = ρE/π, analytic), so a white floor beside a red wall receives light whose chromaticity
  moves toward red (sign only);
* Monte Carlo error of independent samples falls as 1/√N (central limit theorem).

Scenes are built here from triangles (:mod:`render.geometry.shapes`) with the isotropic
generic source of ``scenes/tests/point_over_plane.toml`` (10 000 lm, its intensity stored as
79.57747 cd per 1000 lm, 1.9e-8 below 1000/(4π)) moved where each check needs it.
"""

from __future__ import annotations

import math

import numpy as np
import pytest
from indirect_scenes import FLUX_LM, box_faces_inside, grid_on_rectangle, isotropic_source, mesh_of, reflectance

from render.geometry import shapes
from render.light.indirect import IndirectSettings, PathTracer, illuminance_from_transport, transport_at_points
from render.light.integrator import direct_illuminance_lx
from render.rays.bvh import build_bvh, intersect_closest

# ------------------------------------------------------------------------------------------
# Integrating sphere
# ------------------------------------------------------------------------------------------


@pytest.fixture(scope="module")
def sphere():
    centre = np.array([0.0, 0.0, 5.0])
    parts = shapes.sphere(centre, 2.0, subdivisions=5)
    mesh = mesh_of([parts], ["wall"])
    rho = reflectance("object-yellow")[None]  # 0.05 to 0.80 across the visible range
    rng = np.random.default_rng(3)
    tri = mesh.triangles_m[rng.choice(mesh.n_triangles, 240, replace=False)]
    w = rng.dirichlet(np.ones(3), len(tri))
    pts = np.einsum("tv,tvc->tc", w, tri)
    inward = centre - pts
    inward /= np.linalg.norm(inward, axis=1, keepdims=True)
    return mesh, build_bvh(mesh.triangles_m), isotropic_source(centre), rho, pts, inward, shapes.surface_area_m2(parts)


def _sphere_indirect_lx(sphere, bounces, paths, step_nm=5, seed=1):
    mesh, bvh, lights, rho, pts, inward, _ = sphere
    st = IndirectSettings(bounces=bounces, samples_per_pixel=paths, node_step_nm=step_nm)
    tracer = PathTracer(mesh, bvh, lights, rho, st)
    m, n = transport_at_points(pts, inward, np.zeros(len(pts)), tracer, seed)
    assert np.all(n == paths)
    # Stored E_ind/π per unit photopic spectrum: the illuminance per band is π times it.
    return math.pi * m[:, 0, :], st.basis


@pytest.mark.parametrize("bounces", [1, 2, 3])
def test_sphere_truncated_series(sphere, bounces):
    # Φ/A·(ρ + … + ρⁿ) per band: the first two reflections carry no roulette and the sphere
    # lights every point alike, so the estimate is exact up to the tessellation (under 1e-3
    # here: 20 480 flat triangles, each point closer to the source than the radius).
    # Roulette decides at the third vertex, which adds noise: 1 % with 256 paths.
    *_, area = sphere
    e_ind, basis = _sphere_indirect_lx(sphere, bounces, 64 if bounces < 3 else 256)
    rho = sphere[3][0]
    expected = FLUX_LM / area * basis.project(sum(rho**j for j in range(1, bounces + 1)))
    mean = e_ind.mean(axis=0)
    tol = 1e-3 if bounces < 3 else 1e-2
    np.testing.assert_allclose(mean, expected, rtol=tol)
    if bounces < 3:
        # Uniform: every point of the wall alike.
        np.testing.assert_allclose(e_ind, np.broadcast_to(expected, e_ind.shape), rtol=tol)


def test_sphere_all_reflections(sphere):
    # E_ind = ρΦ / (A(1 − ρ)) per 5 nm band within 1 %, with enough reflections that the rest
    # is negligible (ρ ≤ 0.80: 0.8¹⁰⁰ ≈ 2e-10) and enough paths.
    *_, area = sphere
    e_ind, basis = _sphere_indirect_lx(sphere, 100, 256)
    rho = sphere[3][0]
    expected = FLUX_LM / area * basis.project(rho / (1.0 - rho))
    np.testing.assert_allclose(e_ind.mean(axis=0), expected, rtol=0.01)
    # Uniform: the wall's halves (above and below the source) agree within their noise.
    pts = sphere[4]
    upper = pts[:, 2] > 5.0
    a, b = e_ind[upper].mean(axis=0), e_ind[~upper].mean(axis=0)
    lum = slice(30, 50)  # the 530-625 nm bands, where the material is brightest
    np.testing.assert_allclose(a[lum], b[lum], rtol=0.03)


def test_sphere_photopic_illuminance(sphere):
    # The same sphere as illuminance under a lamp: E = (Φ/A)·Km·Σ s(λ)·ρ/(1 − ρ)·V(λ)·Δλ with s
    # normalised to one photopic unit (analytic; CIE 15 for Km and V), within 1 %; bare points
    # (the light arriving) and a setup dimmed by half gives half (the stored values per channel
    # at full output, scaled afterwards).
    from render.colour.colorimetry import unit_photopic
    from render.colour.lamps import get_lamp
    from render.colour.observers import photopic_lef

    mesh, bvh, lights, rho, pts, inward, area = sphere
    st = IndirectSettings(bounces=100, samples_per_pixel=256)
    m, _ = transport_at_points(pts, inward, None, PathTracer(mesh, bvh, lights, rho, st), 1)
    spd = get_lamp("sodium-high-pressure-cie-hp1").spd
    e = illuminance_from_transport(m, [1.0], [spd], st.basis)
    expected = FLUX_LM / area * 683.0 * float(np.sum(unit_photopic(spd) * rho[0] / (1.0 - rho[0]) * photopic_lef()))
    assert abs(e.mean() / expected - 1.0) < 0.01
    np.testing.assert_allclose(illuminance_from_transport(m, [0.5], [spd], st.basis), 0.5 * e, rtol=1e-12)


def test_error_falls_as_inverse_square_root_of_paths(sphere):
    # Independent estimates at one band (600 nm) from 200 points, for 4 … 256 paths each:
    # the RMS error against the analytic value falls as N^-1/2 (slope -0.5 on log-log axes).
    *_, area = sphere
    rho = sphere[3][0]
    j = 44  # node at 600 nm
    errors = []
    counts = [4, 16, 64, 256]
    for paths in counts:
        e_ind, basis = _sphere_indirect_lx(sphere, 100, paths, seed=11)
        expected = FLUX_LM / area * basis.project(rho / (1.0 - rho))[j]
        errors.append(math.sqrt(np.mean((e_ind[:, j] / expected - 1.0) ** 2)))
    slope = np.polyfit(np.log(counts), np.log(errors), 1)[0]
    assert -0.62 < slope < -0.38, (errors, slope)


# ------------------------------------------------------------------------------------------
# Energy balance: a closed box and an open corner
# ------------------------------------------------------------------------------------------


def test_closed_box_conserves_energy():
    # Every lumen is absorbed in the end: ∫E_ind dA = Φ·ρ/(1 − ρ) at every wavelength (1 nm
    # nodes, so the balance holds bin by bin). Quadrature on a 12 × 12 grid per face; the
    # direct part's own quadrature (∫E_dir dA = Φ) bounds the grid's error.
    lo, hi = (-2.0, -3.0, 3.0), (3.0, 2.0, 8.0)
    mesh = mesh_of([shapes.box(min_m=lo, max_m=hi)], ["wall"])
    bvh = build_bvh(mesh.triangles_m)
    lights = isotropic_source((0.0, 0.0, 5.0))
    rho = reflectance("object-yellow")
    pts, area, nrm = box_faces_inside(lo, hi, 12)
    e_dir = direct_illuminance_lx(pts, nrm, lights, bvh)[:, 0]
    quad_err = abs(float(e_dir @ area) / FLUX_LM - 1.0)
    assert quad_err < 0.01
    st = IndirectSettings(bounces=100, samples_per_pixel=64, node_step_nm=1)
    tracer = PathTracer(mesh, bvh, lights, rho[None], st)
    m, _ = transport_at_points(pts, nrm, np.zeros(len(pts)), tracer, 5)
    e_ind = math.pi * m[:, 0, :]
    total = area @ e_ind
    expected = FLUX_LM * rho / (1.0 - rho)
    # Standard error of the quadrature sum from the points' scatter about a smooth field is
    # not available; the paths' noise per point is: take it from two independent halves.
    m2, _ = transport_at_points(pts, nrm, np.zeros(len(pts)), tracer, 6)
    noise = np.abs(area @ (math.pi * m2[:, 0, :]) - total) / math.sqrt(2.0)
    bands = slice(150, 380)  # 530-760 nm, where ρ ≥ 0.6 and the interreflection dominates
    tol = 4.0 * noise[bands] + (quad_err + 0.005) * expected[bands]
    assert np.all(np.abs(total[bands] - expected[bands]) < tol)
    np.testing.assert_allclose(total[bands], expected[bands], rtol=0.03)


def _cosine_escape_fraction(bvh, pts, nrm, n_dirs, seed):
    """Fraction of cosine-weighted directions from each point that hit nothing (independent of
    the path tracer: the batch query and numpy's generator)."""
    rng = np.random.default_rng(seed)
    out = np.zeros(len(pts))
    for i, (p, n) in enumerate(zip(pts, nrm)):
        u1, u2 = rng.random(n_dirs), rng.random(n_dirs)
        r, phi = np.sqrt(u1), 2.0 * np.pi * u2
        t1 = np.cross(n, [1.0, 0.0, 0.0] if abs(n[0]) < 0.9 else [0.0, 1.0, 0.0])
        t1 /= np.linalg.norm(t1)
        t2 = np.cross(n, t1)
        d = (r * np.cos(phi))[:, None] * t1 + (r * np.sin(phi))[:, None] * t2 + np.sqrt(1.0 - u1)[:, None] * n
        hits = intersect_closest(bvh, np.tile(p + 1e-4 * n, (n_dirs, 1)), d)
        out[i] = np.mean(~hits.hit)
    return out


def test_open_scene_energy_balance():
    # Per wavelength: Φ = escaped directly + absorbed + escaped after reflection, with
    #   escaped directly  = Φ × the share of the (isotropic) source's directions that hit nothing,
    #   absorbed          = ∫(1 − ρ)(E_dir + E_ind) dA,
    #   escaped reflected = ∫ρ(E_dir + E_ind)·f_esc dA  (f_esc: cosine-weighted share of the
    #                       hemisphere that sees no surface),
    # each found independently (source rays and escape fractions from numpy's generator and
    # the batch query; E_ind from the path tracer). A floor and two walls of a corner.
    floor = shapes.box(min_m=(-4.0, -4.0, -0.2), max_m=(4.0, 4.0, 0.0))
    wall_a = shapes.box(min_m=(-4.0, 4.0, -0.2), max_m=(4.0, 4.2, 4.0))
    wall_b = shapes.box(min_m=(-4.2, -4.0, -0.2), max_m=(-4.0, 4.2, 4.0))
    mesh = mesh_of([floor, wall_a + wall_b], ["floor", "wall"])
    bvh = build_bvh(mesh.triangles_m)
    source = np.array([0.0, 0.0, 3.0])
    lights = isotropic_source(source)
    rho = np.vstack([reflectance("concrete-paving-light"), reflectance("object-yellow")])
    grids = [
        grid_on_rectangle((-4, -4, 0), (8, 0, 0), (0, 8, 0), 16, 16, (0, 0, 1)),
        grid_on_rectangle((-4, 4, 0), (8, 0, 0), (0, 0, 4), 16, 8, (0, -1, 0)),
        grid_on_rectangle((-4, -4, 0), (0, 8, 0), (0, 0, 4), 16, 8, (1, 0, 0)),
    ]
    pts, area, nrm = (np.concatenate(x) for x in zip(*grids))
    mat = np.concatenate([np.zeros(256, np.int32), np.ones(256, np.int32)])
    e_dir = direct_illuminance_lx(pts, nrm, lights, bvh)[:, 0]
    st = IndirectSettings(bounces=60, samples_per_pixel=128, node_step_nm=1)
    tracer = PathTracer(mesh, bvh, lights, rho, st)
    m, _ = transport_at_points(pts, nrm, mat, tracer, 9)
    e_tot = e_dir[:, None] + math.pi * m[:, 0, :]
    r = rho[mat]
    absorbed = area @ ((1.0 - r) * e_tot)
    f_esc = _cosine_escape_fraction(bvh, pts, nrm, 512, 2)
    escaped_reflected = (area * f_esc) @ (r * e_tot)
    rng = np.random.default_rng(4)
    v = rng.normal(size=(200_000, 3))
    v /= np.linalg.norm(v, axis=1, keepdims=True)
    share_missing = float(np.mean(~intersect_closest(bvh, np.tile(source, (len(v), 1)), v).hit))
    escaped_direct = FLUX_LM * share_missing
    balance = (escaped_direct + absorbed + escaped_reflected) / FLUX_LM
    # Errors: source-ray share ±0.1 % of Φ (binomial, 200 000 rays), escape fractions ±2 % of
    # a term under 20 % of Φ, the grid's quadrature of E_dir about 1 %: within 2 % in all.
    np.testing.assert_allclose(balance, 1.0, atol=0.02)


# ------------------------------------------------------------------------------------------
# Colour bleeding and shadows
# ------------------------------------------------------------------------------------------


def _chromaticity_x(spectral_radiance):
    from render.colour.observers import cmfs_xyz

    xyz = spectral_radiance @ cmfs_xyz()
    return xyz[..., 0] / xyz.sum(axis=-1)


def _floor_beside_wall(wall: str, bounces: int) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """Direct illuminance and stored transport (1 nm nodes) at three points of a white floor
    0.5 m from a 5 m wall of material ``wall``, lit from above; and the reflectances."""
    floor = shapes.box(min_m=(-6.0, -6.0, -0.2), max_m=(6.0, 6.0, 0.0))
    side = shapes.box(min_m=(-6.0, 1.0, 0.0), max_m=(6.0, 1.2, 5.0))
    mesh = mesh_of([floor, side], ["object-white", wall])
    bvh = build_bvh(mesh.triangles_m)
    lights = isotropic_source((0.0, -0.5, 4.0))
    rho = np.vstack([reflectance("object-white"), reflectance(wall)])
    pts = np.array([[0.0, 0.5, 0.0], [1.0, 0.5, 0.0], [-1.0, 0.5, 0.0]])
    up = np.tile([0.0, 0.0, 1.0], (len(pts), 1))
    e_dir = direct_illuminance_lx(pts, up, lights, bvh)[:, 0]
    st = IndirectSettings(bounces=bounces, samples_per_pixel=512, node_step_nm=1)
    m, _ = transport_at_points(pts, up, np.zeros(len(pts), np.int32), PathTracer(mesh, bvh, lights, rho, st), 2)
    return e_dir, m[:, 0, :], rho


def test_one_reflection_carries_the_reflecting_surface_spectrum():
    # From a point of a flat floor, the only surface in view is the wall: after one reflection
    # the transport is the wall's reflectance times a constant (L = ρE/π), bin by bin.
    _, m, rho = _floor_beside_wall("object-red", 1)
    ratio = m / rho[1]
    np.testing.assert_allclose(ratio, np.broadcast_to(ratio[:, :1], ratio.shape), rtol=1e-9)


def _floor_beside_wall_x_shift(wall: str) -> np.ndarray:
    """CIE x of the white floor's reflected light with interreflection minus without."""
    e_dir, m, rho = _floor_beside_wall(wall, 3)
    from render.colour.lamps import get_lamp

    s = get_lamp("led-4000k-cie-b3").spd
    direct_only = rho[0] * s * e_dir[:, None]
    with_bounces = rho[0] * s * (e_dir[:, None] + math.pi * m)
    return _chromaticity_x(with_bounces) - _chromaticity_x(direct_only)


@pytest.mark.parametrize(("wall", "sign"), [("object-red", 1.0), ("object-blue", -1.0)])
def test_coloured_wall_tints_white_floor(wall, sign):
    # With interreflection a white floor beside a coloured wall receives light whose CIE x
    # moves toward the wall's colour (up for red, down for blue), against the same floor beside
    # a white wall (whose own slight tint is the baseline).
    shift = _floor_beside_wall_x_shift(wall)
    baseline = _floor_beside_wall_x_shift("object-white")
    assert np.all(sign * (shift - baseline) > 2e-3), (shift, baseline)
    assert np.all(sign * shift > 0.0), shift


def test_shadow_is_not_black_with_bounces():
    # A floor point in a box's shadow gets no direct light but interreflected light from the
    # lit floor around it (and none without bounces: the stored values then do not exist).
    floor = shapes.box(min_m=(-6.0, -6.0, -0.2), max_m=(6.0, 6.0, 0.0))
    block = shapes.box(min_m=(-0.5, -0.5, 1.0), max_m=(0.5, 0.5, 2.0))
    mesh = mesh_of([floor, block], ["object-white", "object-white"])
    bvh = build_bvh(mesh.triangles_m)
    lights = isotropic_source((0.0, 0.0, 4.0))
    pt = np.array([[0.0, 0.0, 0.0]])
    up = np.array([[0.0, 0.0, 1.0]])
    assert direct_illuminance_lx(pt, up, lights, bvh)[0, 0] == 0.0
    rho = np.vstack([reflectance("object-white")] * 2)
    m, _ = transport_at_points(pt, up, [0], PathTracer(mesh, bvh, lights, rho, IndirectSettings(2, 256)), 1)
    assert np.all(m[0, 0] > 0.0)


# ------------------------------------------------------------------------------------------
# Determinism
# ------------------------------------------------------------------------------------------


def test_points_independent_of_batch_and_threads(sphere):
    # Counter-based random numbers: a point's paths depend on its id only, not on the batch it
    # is traced in nor on the number of threads (the bits are equal).
    import numba

    mesh, bvh, lights, rho, pts, inward, _ = sphere
    tracer = PathTracer(mesh, bvh, lights, rho, IndirectSettings(bounces=6, samples_per_pixel=8))
    whole, _ = transport_at_points(pts, inward, np.zeros(len(pts)), tracer, 4)
    part, _ = transport_at_points(pts[100:130], inward[100:130], np.zeros(30), tracer, 4, first_id=100)
    assert np.array_equal(whole[100:130], part)
    threads = numba.get_num_threads()
    try:
        numba.set_num_threads(1)
        serial, _ = transport_at_points(pts, inward, np.zeros(len(pts)), tracer, 4)
    finally:
        numba.set_num_threads(threads)
    assert np.array_equal(whole, serial)
    other, _ = transport_at_points(pts, inward, np.zeros(len(pts)), tracer, 5)
    assert not np.array_equal(whole, other)
