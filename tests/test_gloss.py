"""The specular layer for wet surfaces (render.light.gloss).

Sources: the GGX distribution is normalised, ∫ D(h) cos θ_h dω_h = 1 (Walter et al. 2007, eq. 4;
analytic); Fresnel reflectance of water at normal incidence ((n-1)/(n+1))² (analytic); for a
smooth surface the directional albedo of the microfacet BRDF tends to the Fresnel reflectance
(energy of a mirror reflection; analytic limit); the highlight of a point light on a glossy
plane lies at the mirror point (law of reflection).

Tolerances say what the method guarantees: the quadratures' leading error terms are derived
(Euler-Maclaurin for the midpoint rule), the finite-roughness deviations from the smooth limit
are second order in the roughness α, and positions are known to a pixel's footprint.
"""

from __future__ import annotations

from pathlib import Path

import numpy as np
import pytest

from render.light.gloss import WATER_F0, ggx_d, schlick_fresnel, specular_brdf
from render.study import Study

SCENES = Path(__file__).resolve().parents[1] / "scenes" / "tests"


def _hemisphere(n_theta=400, n_phi=200):
    theta = (np.arange(n_theta) + 0.5) / n_theta * (np.pi / 2)
    phi = (np.arange(n_phi) + 0.5) / n_phi * 2 * np.pi
    t, p = np.meshgrid(theta, phi, indexing="ij")
    d = np.stack([np.sin(t) * np.cos(p), np.sin(t) * np.sin(p), np.cos(t)], axis=-1).reshape(-1, 3)
    d_omega = (np.sin(t) * (np.pi / 2 / n_theta) * (2 * np.pi / n_phi)).reshape(-1)
    return d, d_omega


@pytest.mark.parametrize("alpha", [0.05, 0.2, 0.6])
def test_ggx_distribution_is_normalised(alpha):
    n_theta = 2000
    d, d_omega = _hemisphere(n_theta, 64)
    total = np.sum(ggx_d(d[:, 2], alpha) * d[:, 2] * d_omega)
    # The midpoint rule in θ overestimates ∫g by (Δ²/24)·(g'(0) − g'(π/2)) + O(Δ⁴) (Euler-
    # Maclaurin); with g = 2π·D·cos θ·sin θ, g'(0) = 2/α² and g'(π/2) = −2α² (D(1) = 1/(πα²),
    # D(0) = α²/π), so the sum is 1 + (Δ²/12)(α⁻² + α²). The O(Δ⁴) remainder is about
    # 0.03·(Δ/α)⁴ (it quarters twice when Δ halves); the φ sum of an isotropic D is exact.
    step = (np.pi / 2) / n_theta
    leading = step**2 / 12.0 * (alpha**-2 + alpha**2)
    assert total == pytest.approx(1.0 + leading, rel=(step / alpha) ** 4 / 10.0 + 1e-12)


def test_water_f0():
    # Closed forms evaluated in float64: equal to rounding.
    assert WATER_F0 == pytest.approx(((1.333 - 1) / (1.333 + 1)) ** 2, rel=1e-15) and 0.019 < WATER_F0 < 0.021
    assert schlick_fresnel(1.0, WATER_F0) == pytest.approx(WATER_F0, rel=1e-15)
    assert schlick_fresnel(0.0, WATER_F0) == pytest.approx(1.0, abs=1e-15)


# Smooth-limit deviation allowed at α = 0.03, by incidence angle. The albedo tends to F(θ) as
# α → 0; at finite α the deviation is second order in α. Near normal incidence it is the
# share of GGX facets steeper than 45° (their reflection leaves below the horizon), exactly
# α²/(1 + α²) = 9.0e-4 of the projected area, plus masking; Fresnel hardly varies there: 2α².
# At 60° Schlick's F curves strongly (F''/F ≈ 28), and averaging it over the spread of facet
# angles (variance of order α²) raises the albedo: 0.88 % with a converged quadrature: 1e-2.
ALBEDO_DEVIATION = {0.0: 2 * 0.03**2, 30.0: 2 * 0.03**2, 60.0: 1e-2}


@pytest.mark.parametrize("theta_deg", [0.0, 30.0, 60.0])
def test_directional_albedo_tends_to_fresnel_and_never_exceeds_one(theta_deg):
    # 1200 × 960 directions resolve the α = 0.03 lobe to 4e-5 (240 azimuth steps left a 0.2 %
    # quadrature error at 60°, where the lobe is narrow in azimuth).
    d, d_omega = _hemisphere(1200, 960)
    t = np.radians(theta_deg)
    light = np.tile([np.sin(t), 0.0, np.cos(t)], (d.shape[0], 1))
    normal = np.tile([0.0, 0.0, 1.0], (d.shape[0], 1))
    albedo = np.sum(specular_brdf(normal, light, d, 0.04, 0.03) * d[:, 2] * d_omega)
    assert albedo == pytest.approx(float(schlick_fresnel(np.cos(t), 0.04)), rel=ALBEDO_DEVIATION[theta_deg])
    rough = np.sum(specular_brdf(normal, light, d, 1.0, 0.5) * d[:, 2] * d_omega)
    assert rough <= 1.0


def test_highlight_at_the_mirror_point_and_relight_is_exact():
    study = Study(SCENES / "wet_plane.toml")
    view = study.render_view("low")
    b = view.buffers
    spec = b.spec_cd_m2[:, 0]
    assert spec.max() > 0
    brightest = b.point_m[int(np.argmax(spec))].astype(float)
    # Camera (0, 0, 1.5), light (10, 0, 5): the mirror point on z = 0 is at x = 10·1.5/6.5.
    # One sample per pixel; a pixel covers about 0.046 m along x and 0.025 m across there, and
    # the fall-off of the illuminance across the highlight (α = 0.02, about 0.15 m wide) moves
    # its peak by under 0.01 m: the brightest sample lies within two footprints of the point.
    assert brightest[0] == pytest.approx(10.0 * 1.5 / 6.5, abs=0.1) and abs(brightest[1]) < 0.05
    # Relighting carries the specular layer: equals a fresh render, to the two float32
    # roundings of the buffers (see tests/test_light.py).
    relit = study.relight(view, "sodium")
    fresh = study.render_view("low", "sodium")
    np.testing.assert_allclose(relit.colorimetry.xyz_cd_m2, fresh.colorimetry.xyz_cd_m2, rtol=2.0**-23, atol=1e-9)


def test_wet_street_flag_adds_a_water_layer(tmp_path):
    from render.geometry.build import compile_scene
    from render.scene import load_scene

    p = tmp_path / "wet.toml"
    p.write_text(
        '[street]\nlength_m = 20.0\ncarriageway_width_m = 6.0\nwet = true\n\n[[views]]\nname = "v"\n'
        "position_m = [1.0, 0.0]\ntarget_m = [10.0, 0.0, 0.0]\n"
    )
    mesh = compile_scene(load_scene(p))
    gloss = dict(zip(mesh.material_names, mesh.material_gloss[:, 0]))
    assert gloss["asphalt-worn"] == WATER_F0 and gloss["concrete-kerb"] == 0.0  # a float64 copy
