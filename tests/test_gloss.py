"""The specular layer for wet surfaces (render.light.gloss).

Sources: the GGX distribution is normalised, ∫ D(h) cos θ_h dω_h = 1 (Walter et al. 2007, eq. 4;
analytic); Fresnel reflectance of water at normal incidence ((n-1)/(n+1))² (analytic); for a
smooth surface the directional albedo of the microfacet BRDF tends to the Fresnel reflectance
(energy of a mirror reflection; analytic limit); the highlight of a point light on a glossy
plane lies at the mirror point (law of reflection).
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
    d, d_omega = _hemisphere(2000, 64)
    assert np.sum(ggx_d(d[:, 2], alpha) * d[:, 2] * d_omega) == pytest.approx(1.0, rel=2e-3)


def test_water_f0():
    assert WATER_F0 == pytest.approx(((1.333 - 1) / (1.333 + 1)) ** 2) and 0.019 < WATER_F0 < 0.021
    assert schlick_fresnel(1.0, WATER_F0) == pytest.approx(WATER_F0) and schlick_fresnel(
        0.0, WATER_F0
    ) == pytest.approx(1.0)


@pytest.mark.parametrize("theta_deg", [0.0, 30.0, 60.0])
def test_directional_albedo_tends_to_fresnel_and_never_exceeds_one(theta_deg):
    d, d_omega = _hemisphere(1200, 240)
    t = np.radians(theta_deg)
    light = np.tile([np.sin(t), 0.0, np.cos(t)], (d.shape[0], 1))
    normal = np.tile([0.0, 0.0, 1.0], (d.shape[0], 1))
    albedo = np.sum(specular_brdf(normal, light, d, 0.04, 0.03) * d[:, 2] * d_omega)
    assert albedo == pytest.approx(float(schlick_fresnel(np.cos(t), 0.04)), rel=0.05)
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
    assert brightest[0] == pytest.approx(10.0 * 1.5 / 6.5, abs=0.3) and abs(brightest[1]) < 0.3
    # Relighting carries the specular layer: equals a fresh render.
    relit = study.relight(view, "sodium")
    fresh = study.render_view("low", "sodium")
    np.testing.assert_allclose(relit.colorimetry.xyz_cd_m2, fresh.colorimetry.xyz_cd_m2, rtol=1e-6, atol=1e-9)


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
    assert gloss["asphalt-worn"] == pytest.approx(WATER_F0) and gloss["concrete-kerb"] == 0.0
