"""Light to the sky (render.calc.sky): upward flux, reflected flux and spectral sky-glow weights."""

from __future__ import annotations

import dataclasses
import json
import math

import numpy as np
import pytest
from colour.colorimetry import SDS_LEFS_PHOTOPIC

from render.calc.sky import (
    direct_upward_flux_lm,
    notch_filterable_fraction,
    rayleigh_weight_per_lm,
    reflected_upward_flux_lm,
    scotopic_weight_per_lm,
    sky_figures,
    sky_glow_relative,
    upward_flux_lm,
)
from render.colour.lamps import make_lamp
from render.colour.lamps.model import LAMP_TYPES, LineSpectrum
from render.colour.materials import luminous_reflectance
from render.colour.spectra import WAVELENGTHS_NM
from render.light.photometry import load_photometry, luminous_flux_lm, ulor
from render.light.photometry.model import frozen_array


def _mono(nm: float) -> np.ndarray:
    s = np.zeros(WAVELENGTHS_NM.size)
    s[int(np.argmin(np.abs(WAVELENGTHS_NM - nm)))] = 1.0
    return s


def test_isotropic_source_sends_half_up():
    # Analytic: an isotropic source sends half its flux into each hemisphere, at any tilt.
    p = load_photometry("generic-isotropic")
    total = luminous_flux_lm(p)
    assert ulor(p) == pytest.approx(0.5, rel=1e-9)
    assert upward_flux_lm(p) / total == pytest.approx(0.5, rel=1e-9)
    assert upward_flux_lm(p, tilt_deg=15.0) / total == pytest.approx(0.5, rel=1e-4)
    # Two of them, the second dimmed to 50 %: 0.5·Φ·(1 + 0.5) up (dimming scales the flux).
    assert direct_upward_flux_lm([p, p], [0.0, 15.0], [1.0, 0.5]) == pytest.approx(0.75 * total, rel=1e-4)


def test_full_cutoff_sends_nothing_up_untilted_but_some_when_tilted():
    # Definition of full cut-off (CIE 126:1997, from memory): no intensity at or above 90°.
    p = load_photometry("generic-full-cutoff")
    assert upward_flux_lm(p) == 0.0
    assert direct_upward_flux_lm([p, p], [0.0, 0.0], [1.0, 0.5]) == 0.0
    assert upward_flux_lm(p, tilt_deg=20.0) > 0.0


def _cosine_photometry() -> object:
    """I(γ) = 1000 cd · cos γ below the horizontal, 0 above (a downward Lambertian emitter)."""
    base = load_photometry("generic-isotropic")
    c = np.arange(0.0, 360.0 + 1e-9, 15.0)
    g = np.arange(0.0, 180.0 + 1e-9, 0.25)
    table = np.tile(np.where(g <= 90.0, 1000.0 * np.cos(np.radians(np.minimum(g, 90.0))), 0.0), (c.size, 1))
    return dataclasses.replace(base, c_deg=frozen_array(c), gamma_deg=frozen_array(g), candela_cd=frozen_array(table))


@pytest.mark.parametrize("tilt_deg", [10.0, 30.0])
def test_tilted_lambertian_emitter_matches_the_view_factor(tilt_deg):
    # Analytic: a downward Lambertian emitter (flux π·I0) tilted by t sends the share
    # (1 − cos t)/2 of its flux above the horizon (view factor of a tilted plane to the sky,
    # Howell, Siegel & Mengüç, from memory).
    p = _cosine_photometry()
    assert luminous_flux_lm(p) == pytest.approx(math.pi * 1000.0, rel=1e-5)
    expected = math.pi * 1000.0 * (1.0 - math.cos(math.radians(tilt_deg))) / 2.0
    assert upward_flux_lm(p, tilt_deg) == pytest.approx(expected, rel=5e-4)


def test_reflected_upward_flux_of_a_lit_plane():
    # Analytic: a matt plane of 100 m² at 20 lx with ρ = 0.1 reflects ρ·E·A = 200 lm, all upward;
    # a vertical wall sends half of it up.
    e = np.full(50, 20.0)
    a = np.full(50, 2.0)
    assert reflected_upward_flux_lm(e, 0.1, a) == pytest.approx(200.0, rel=1e-12)
    assert reflected_upward_flux_lm(e, np.full(50, 0.1), a, normal_z=np.zeros(50)) == pytest.approx(100.0, rel=1e-12)
    assert reflected_upward_flux_lm([10.0, 30.0], [0.2, 0.1], [1.0, 3.0]) == pytest.approx(2.0 + 9.0, rel=1e-12)


def test_photometric_reflectance_under_a_lamp():
    # Analytic: a grey reflectance keeps its value under any lamp; under monochromatic light the
    # photometric reflectance is the reflectance at that line.
    lamp = _mono(589.0) + 0.5 * _mono(450.0)
    assert luminous_reflectance(np.full(WAVELENGTHS_NM.size, 0.3), lamp) == pytest.approx(0.3, rel=1e-12)
    step = np.where(WAVELENGTHS_NM < 500.0, 0.8, 0.1)
    assert luminous_reflectance(step, _mono(589.0)) == pytest.approx(0.1, rel=1e-12)
    # By hand with colour-science's V table: Σ ρ s V / Σ s V for two lines.
    v450 = SDS_LEFS_PHOTOPIC["CIE 1924 Photopic Standard Observer"][450]
    v589 = SDS_LEFS_PHOTOPIC["CIE 1924 Photopic Standard Observer"][589]
    expected = (0.8 * 0.5 * v450 + 0.1 * v589) / (0.5 * v450 + v589)
    assert luminous_reflectance(step, lamp) == pytest.approx(expected, rel=1e-9)


def test_rayleigh_weight_of_monochromatic_lines_by_hand():
    # By hand: per lumen, w ∝ λ⁻⁴ / V(λ); so w(450)/w(600) = (600/450)⁴ · V(600)/V(450),
    # V from colour-science's CIE 1924 table (reference library); λ⁻⁴: Rayleigh (1899).
    v = SDS_LEFS_PHOTOPIC["CIE 1924 Photopic Standard Observer"]
    expected = (600.0 / 450.0) ** 4 * v[600] / v[450]
    assert rayleigh_weight_per_lm(_mono(450.0)) / rayleigh_weight_per_lm(_mono(600.0)) == pytest.approx(
        expected, rel=1e-9
    )
    # Normalisation stated in the module: monochromatic 555 nm weighs 1 per lumen.
    assert rayleigh_weight_per_lm(_mono(555.0)) == pytest.approx(1.0, rel=1e-9)


def test_scotopic_weight_is_the_sp_ratio_by_hand():
    # By hand: monochromatic 507 nm has S/P = 1700·V'(507) / (683·V(507)) with CIE tables from
    # colour-science (V'(507) = 1 at the scotopic peak).
    from colour.colorimetry import SDS_LEFS_SCOTOPIC

    vs = SDS_LEFS_SCOTOPIC["CIE 1951 Scotopic Standard Observer"][507]
    vp = SDS_LEFS_PHOTOPIC["CIE 1924 Photopic Standard Observer"][507]
    assert scotopic_weight_per_lm(_mono(507.0)) == pytest.approx(1700.0 * vs / (683.0 * vp), rel=1e-9)


def test_notch_fraction_of_a_two_line_lamp():
    # Analytic: 60 % of the power in one line at 589 nm, 40 % at 450 nm: an ideal notch on the
    # strongest line removes 0.6 of the power.
    lamp = make_lamp(
        "two-lines", "Two lines", LAMP_TYPES[0], "test", "model", (), LineSpectrum([(589.0, 0.6), (450.0, 0.4)])
    )
    assert notch_filterable_fraction(lamp) == pytest.approx(0.6, rel=1e-9)


def test_setup_figures_and_relative_sky_glow_by_hand():
    # By hand: before 300 lm up (200 direct + 100 reflected) at 600 nm over 100 m -> 3 lm/m;
    # option 150 lm at 450 nm: the Rayleigh ratio is 0.5 · (600/450)⁴ · V(600)/V(450).
    v = SDS_LEFS_PHOTOPIC["CIE 1924 Photopic Standard Observer"]
    before = sky_figures([200.0], [100.0], [_mono(600.0)], 100.0, notch_fractions=[1.0])
    option = sky_figures([50.0], [100.0], [_mono(450.0)], 100.0)
    assert before.upward_lm == 300.0
    assert before.upward_lm_per_m == pytest.approx(3.0, rel=1e-12)
    assert before.notch_fraction == 1.0
    rel = sky_glow_relative(before, option)
    assert rel.upward == pytest.approx(0.5, rel=1e-12)
    assert rel.rayleigh_weighted == pytest.approx(0.5 * (600.0 / 450.0) ** 4 * v[600] / v[450], rel=1e-9)
    json.dumps(before.to_json())
    json.dumps(rel.to_json())


def test_the_upward_total_takes_the_upward_exitance_map():
    # By hand: two lamps, 100 and 20 lm direct, the ground's figure 300 and 100 lm; the map
    # measures 200 lm through its plane, split 3:1 as the ground's figure is (150 and 50 lm):
    # upward 100 + 20 + 200 = 320 lm over 80 m = 4 lm/m; the ground's figure kept beside it.
    # The weighted figures follow the split: Rayleigh weight of (100 + 150) lm at 600 nm and
    # (20 + 50) lm at 450 nm.
    spds = [_mono(600.0), _mono(450.0)]
    ground = sky_figures([100.0, 20.0], [300.0, 100.0], spds, 80.0)
    fig = sky_figures([100.0, 20.0], [300.0, 100.0], spds, 80.0, reflected_upward_map_lm=200.0)
    assert ground.reflected_upward_source == "ground patches" and ground.upward_lm == 520.0
    assert fig.reflected_upward_source == "upward exitance map"
    assert fig.upward_lm == pytest.approx(320.0, rel=1e-12)
    assert fig.upward_lm_per_m == pytest.approx(4.0, rel=1e-12)
    assert fig.reflected_upward_lm == 400.0 and fig.reflected_upward_map_lm == 200.0
    alone = [sky_figures([d], [r], [s], 80.0) for d, r, s in ((100.0, 150.0, spds[0]), (20.0, 50.0, spds[1]))]
    assert fig.rayleigh_weighted_lm == pytest.approx(sum(a.rayleigh_weighted_lm for a in alone), rel=1e-12)
