"""Direct lighting in absolute units: analytic laws, flux conservation, shadows, relighting.

Sources of the expected values:
* inverse-square and cosine laws for a point source: E = I·cos θ / d²; over a plane at height h
  and horizontal distance r, E = I·h / (h² + r²)^(3/2) (analytic; docs/references.md);
* Lambertian reflection L = ρ·E/π (analytic);
* photometric constants Km = 683 lm/W and K'm = 1700 lm/W (CIE 15:2018; docs/references.md);
* flux conservation: all the flux of a source inside a closed surface lands on it
  (Gauss / conservation of energy), compared with the LM-63 distribution's integral;
* the shadow of a square occluder from a point source is its central projection (analytic).

Tolerances are what the method guarantees, not a margin for error. Direct light is evaluated
analytically in float64, so the only rounding is (a) the LM-63 file's 7 significant figures:
the isotropic test source is stored as 79.57747 cd per 1000 lm, 1.9e-8 below 1000/(4π); and
(b) the light buffers, which are float32 (a relative rounding of at most 2⁻²⁴ = 6.0e-8 each).
No check involves sampling noise: every expected value is computed at the very points the
renderer sampled.
"""

from __future__ import annotations

import math
from pathlib import Path

import numpy as np
import pytest

from render.colour.observers import cmfs_xyz, photopic_lef, scotopic_lef
from render.study import Study

SCENES = Path(__file__).resolve().parents[1] / "scenes" / "tests"

#: Relative rounding of one float32 value (half an ulp), the precision of the light buffers.
FLOAT32_ROUNDING = 2.0**-24
#: Relative error of the isotropic test source's stored intensity (79.57747 vs 1000/(4π) cd).
TABLE_ROUNDING = 1.95e-8
#: CIE photometric constants, written here from the standard rather than imported, so that a
#: wrong constant in the code shows up (CIE 15:2018: Km = 683 lm/W, K'm = 1700 lm/W).
KM_CIE = 683.0
KM_SCOTOPIC_CIE = 1700.0


@pytest.fixture(scope="module")
def plane():
    return Study(SCENES / "point_over_plane.toml")


def test_point_source_over_plane_inverse_square_and_cosine(plane):
    # Isotropic 10 000 lm: I = 10000 / (4π) cd (analytic).
    intensity = 10000.0 / (4.0 * math.pi)
    h = 5.0
    r = np.linspace(0.0, 40.0, 81)
    pts = np.stack([r * math.cos(0.3), r * math.sin(0.3), np.zeros_like(r)], axis=1)
    e = plane.illuminance_lx(pts, np.tile([0.0, 0.0, 1.0], (r.size, 1)))
    expected = intensity * h / (h * h + r * r) ** 1.5
    # Float64 throughout: only the file's 7-figure intensity differs from 10000/(4π) (1.9e-8).
    np.testing.assert_allclose(e, expected, rtol=1e-7)
    # A vertical surface 1 m above the ground facing the source: cos θ = r / d (analytic).
    pts_v = pts[1:] + [0.0, 0.0, 1.0]
    normals = -pts_v[:, :2] / np.linalg.norm(pts_v[:, :2], axis=1, keepdims=True)
    normals = np.concatenate([normals, np.zeros((normals.shape[0], 1))], axis=1)
    ev = plane.illuminance_lx(pts_v, normals)
    d2 = (h - 1.0) ** 2 + r[1:] ** 2
    np.testing.assert_allclose(ev, intensity * (r[1:] / np.sqrt(d2)) / d2, rtol=1e-7)


def test_rendered_luminance_is_rho_e_over_pi(plane):
    view = plane.render_view("above")
    b = view.buffers
    surf = b.response == 0  # the ground's material
    assert surf.mean() > 0.5
    p = b.point_m[surf].astype(np.float64)
    intensity = 10000.0 / (4.0 * math.pi)
    d2 = ((p - [0.0, 0.0, 5.0]) ** 2).sum(axis=1)
    e_expected = intensity * 5.0 / d2**1.5  # cos θ = h / d on the plane
    # Buffers hold E/π of a white diffuser, cd/m², in float32; the light was evaluated at these
    # very (float32) hit points, so the error is one float32 rounding plus the file's rounding.
    value = b.value_cd_m2.astype(np.float64)  # float32 × a Python float would stay float32
    np.testing.assert_allclose(value[surf, 0] * math.pi, e_expected, rtol=FLOAT32_ROUNDING + TABLE_ROUNDING)
    # Colorimetry: Y = ρ_v·E/π with ρ_v the luminous reflectance under the lamp, computed here
    # independently from the material and lamp spectra: Σρ s V / Σ s V.
    from render.colour.lamps import get_lamp
    from render.colour.materials import get_material

    rho = get_material("object-white").reflectance
    s = get_lamp("led-4000k-cie-b3").spd
    rho_v = float((rho * s * photopic_lef()).sum() / (s * photopic_lef()).sum())
    spp = b.spp
    per_pixel = np.where(surf, value[:, 0] * rho_v, np.nan).reshape(-1, spp)
    full = np.all(np.isfinite(per_pixel), axis=1)
    Y = view.colorimetry.luminance_cd_m2.reshape(-1)
    # Same buffer values on both sides and float64 sums: only the order of summation differs.
    np.testing.assert_allclose(Y[full], per_pixel[full].mean(axis=1), rtol=1e-12)
    # X and Z follow the same integral with x̄ and z̄; scotopic with V' and K'm (definitions).
    X = view.colorimetry.xyz_cd_m2[..., 0].reshape(-1)
    rho_x = float((rho * s * cmfs_xyz()[:, 0]).sum() / (s * photopic_lef()).sum())
    np.testing.assert_allclose(X[full], per_pixel[full].mean(axis=1) * rho_x / rho_v, rtol=1e-12)
    Ys = view.colorimetry.scotopic_cd_m2.reshape(-1)
    # Y'/Y = K'm·Σρ s V' / (Km·Σρ s V) with the CIE constants (a wrong Km or K'm in the code
    # changes this ratio by the same relative amount).
    sp = KM_SCOTOPIC_CIE * float((rho * s * scotopic_lef()).sum()) / (KM_CIE * float((rho * s * photopic_lef()).sum()))
    np.testing.assert_allclose(Ys[full], Y[full] * sp, rtol=1e-12)


def test_flux_conservation_in_closed_box():
    from render.light.photometry import luminous_flux_lm

    study = Study(SCENES / "closed_box.toml")
    lights = study.lights()
    flux = luminous_flux_lm(lights.photometries[0])
    n = 120
    u = (np.arange(n) + 0.5) / n * 10.0 - 5.0
    a, b = np.meshgrid(u, u, indexing="ij")
    a, b = a.ravel(), b.ravel()
    dA = (10.0 / n) ** 2
    total = 0.0
    # Inner faces of the cube: (fixed axis, value, inward normal).
    for axis, value in [(0, -5.0), (0, 5.0), (1, -5.0), (1, 5.0), (2, 0.0), (2, 10.0)]:
        pts = np.zeros((a.size, 3))
        others = [i for i in range(3) if i != axis]
        pts[:, others[0]] = a
        pts[:, others[1]] = b + (5.0 if others[1] == 2 else 0.0)
        pts[:, axis] = value
        normal = np.zeros(3)
        normal[axis] = -1.0 if value > 0.0 else 1.0
        e = study.illuminance_lx(pts, np.tile(normal, (a.size, 1)))
        total += float(e.sum() * dA)
    # The flux is the exact integral of the interpolated table (render.light.photometry
    # .integrals); the face sums are the midpoint rule on 120 × 120 cells, whose error falls as
    # the cell size squared: 8.3e-5, 2.7e-5 and 7.1e-6 with 60, 120 and 240 cells a side.
    assert total == pytest.approx(flux, rel=1e-4)


def test_points_in_shadow_get_no_direct_light():
    study = Study(SCENES / "occluder.toml")
    g = np.linspace(-4.0, 4.0, 81)
    x, y = np.meshgrid(g, g, indexing="ij")
    pts = np.stack([x.ravel(), y.ravel(), np.zeros(x.size)], axis=1)
    e = study.illuminance_lx(pts, np.tile([0.0, 0.0, 1.0], (x.size, 1)))
    ax, ay = np.abs(pts[:, 0]), np.abs(pts[:, 1])
    umbra = (ax < 1.99) & (ay < 1.99)  # central projection of the 2 m slab from 4 m: ±2 m
    lit = (ax > 2.12) | (ay > 2.12)  # beyond the projection of the slab's top edge (±2.105 m)
    assert np.all(e[umbra] == 0.0)
    assert np.all(e[lit] > 0.0)
    free = study.illuminance_lx(pts, np.tile([0.0, 0.0, 1.0], (x.size, 1)), shadows=False)
    np.testing.assert_allclose(e[lit], free[lit], rtol=1e-12)


def test_relight_equals_fresh_render(plane):
    base = plane.render_view("above")
    # Relighting scales the kept float32 buffers by float64 factors; a fresh render rounds the
    # scaled values to float32 once: two roundings of 2⁻²⁴ at most (sums of positive terms keep
    # the relative bound).
    rtol = 2 * FLOAT32_ROUNDING
    for setup in ("sodium", "dimmed-hps", "road-optic"):
        relit = plane.relight(base, setup)
        fresh = plane.render_view("above", setup)
        np.testing.assert_allclose(relit.colorimetry.xyz_cd_m2, fresh.colorimetry.xyz_cd_m2, rtol=rtol, atol=1e-9)
        np.testing.assert_allclose(
            relit.colorimetry.scotopic_cd_m2, fresh.colorimetry.scotopic_cd_m2, rtol=rtol, atol=1e-9
        )


def test_dimming_and_lumens_scale_linearly(plane):
    base = plane.render_view("above", "sodium")
    dimmed = plane.relight(base, "dimmed-hps")
    hps = plane.relight(
        base,
        plane.scene.setups["dimmed-hps"].__class__(
            "hps", "", {"*": type(plane.scene.setups["dimmed-hps"].groups["*"])(lamp="sodium-high-pressure-cie-hp1")}
        ),
    )
    # 6000 lm at half output is 0.3 of 10 000 lm at full output (definition of the setup).
    # Both are the same float32 buffers times a float64 factor: float64 rounding only.
    np.testing.assert_allclose(
        dimmed.colorimetry.luminance_cd_m2, 0.3 * hps.colorimetry.luminance_cd_m2, rtol=1e-12, atol=1e-12
    )


def test_visible_opening_has_intensity_over_projected_area():
    # Look up at the opening from below: L = I / (A·cos θ) (definition of luminance).
    from render.light.integrator import cast_view, evaluate_light
    from render.rays.cameras import Camera

    study = Study(SCENES / "point_over_plane.toml")
    lights = study.lights()
    cam = Camera(position_m=(3.0, 0.0, 1.0), target_m=(0.0, 0.0, 5.0), hfov_deg=20.0, width_px=64, height_px=64)
    b = evaluate_light(cast_view(study.mesh, study.bvh, lights, cam, 1, 0), lights, study.bvh)
    em = b.emitter >= 0
    assert em.sum() > 10
    d = -b.direction[em].astype(np.float64)
    cos_v = -d[:, 2]  # the opening faces straight down (0, 0, -1)
    intensity = 10000.0 / (4.0 * math.pi)
    area = lights.opening_m[0, 0] * lights.opening_m[0, 1]
    # The buffer is float32 and the file's intensity has 7 figures; cos_v is computed from the
    # same float32 ray directions the renderer used.
    np.testing.assert_allclose(
        b.value_cd_m2[em, 0].astype(np.float64), intensity / (area * cos_v), rtol=FLOAT32_ROUNDING + TABLE_ROUNDING
    )


def test_same_seed_same_buffers(plane):
    a = plane.render_view("above")
    b = plane.render_view("above")
    assert np.array_equal(a.buffers.value_cd_m2, b.buffers.value_cd_m2)
    assert np.array_equal(a.colorimetry.xyz_cd_m2, b.colorimetry.xyz_cd_m2)


def test_negligible_luminaires_skipped_within_bound():
    study = Study(SCENES / "point_over_plane.toml", negligible_lx=0.05)
    exact = Study(SCENES / "point_over_plane.toml", negligible_lx=0.0)
    r = np.linspace(0.0, 100.0, 201)
    pts = np.stack([r, np.zeros_like(r), np.zeros_like(r)], axis=1)
    n = np.tile([0.0, 0.0, 1.0], (r.size, 1))
    e_skip = study.illuminance_lx(pts, n)
    e_all = exact.illuminance_lx(pts, n)
    assert np.all(np.abs(e_all - e_skip) <= 0.05)
    assert np.any(e_skip == 0.0) and np.all(e_all > 0.0)


def test_culling_grid_never_drops_more_than_the_bound():
    # Each luminaire skipped at a point gives less than negligible_lx there (by construction of
    # the bound); compare with no culling at all on the demo street with a tilted lantern row.
    from render.scene import load_scene

    scene = load_scene(SCENES.parent / "demo" / "linden_row.toml")
    for lum in scene.luminaires:
        lum.tilt_deg = 10.0
    eps = 0.01
    culled = Study(scene, negligible_lx=eps)
    exact = Study(scene, negligible_lx=0.0)
    rng = np.random.default_rng(5)
    pts = np.stack([rng.uniform(-20, 120, 4000), rng.uniform(-9, 9, 4000), rng.uniform(0.0, 8.0, 4000)], axis=1)
    n = rng.normal(size=(4000, 3))
    n /= np.linalg.norm(n, axis=1, keepdims=True)
    a = culled.illuminance_lx(pts, n, shadows=False)
    b = exact.illuminance_lx(pts, n, shadows=False)
    assert np.all(b - a <= eps * len(scene.luminaires) + 1e-12)
    assert np.all(a <= b + 1e-12)
