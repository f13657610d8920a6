"""Response tables and the resolve step (render.colour.colorimetry), each check naming its source.

The tables take any observer weights on the grid: the colorimetric ones (x̄ȳz̄ and V'), the CIE
2006 cone fundamentals of the colour-discrimination analysis, or weights with more axes (observer
functions times hat functions on coarser nodes). The buffers below are written by hand: a few
pixels, each sample seeing one material under one or two light channels.
"""

from __future__ import annotations

import numpy as np
import pytest

from render.colour.colorimetry import (
    colorimetric_weights,
    resolve,
    resolve_responses,
    response_table,
    unit_photopic,
)
from render.colour.lamps import get_lamp
from render.colour.materials import d65_on_grid, material_library
from render.colour.observers import scotopic
from render.colour.spectra import N_BINS, WAVELENGTHS_NM
from render.light.integrator import LightBuffers
from render.vision.discrimination.cones import cone_rod_weights, cone_signals


def _reflectances() -> np.ndarray:
    lib = material_library()
    return np.stack([lib[k].reflectance for k in ("object-red", "object-green", "object-blue", "asphalt-worn")])


def _buffers() -> LightBuffers:
    # 3 × 2 pixels, 2 samples each, 2 light channels; one sample sees nothing, one an opening
    # (response 4 = the white row), the rest materials 0-3 with a specular layer on some.
    response = np.array([0, 1, 2, 3, 0, -1, 1, 1, 4, 2, 3, 3], np.int32)
    rng_values = np.array(
        [[1.0, 0.5], [2.0, 0.0], [0.3, 0.7], [0.1, 0.1], [5.0, 1.0], [0.0, 0.0],
         [0.2, 0.9], [1.5, 1.5], [40.0, 0.0], [0.8, 0.2], [0.05, 0.0], [0.6, 0.4]],
        np.float32,
    )  # fmt: skip
    spec = np.zeros_like(rng_values)
    spec[[1, 7, 9]] = [[0.2, 0.0], [0.05, 0.1], [0.0, 0.3]]
    return LightBuffers(
        width_px=3,
        height_px=2,
        spp=2,
        response=response,
        value_cd_m2=rng_values,
        emitter=np.where(response == 4, 0, -1).astype(np.int32),
        object_id=np.zeros(12, np.int32),
        material_names=["red", "green", "blue", "asphalt"],
        channels=[],
        spec_cd_m2=spec,
    )


LAMPS = [get_lamp("sodium-high-pressure-cie-hp1").spd, get_lamp("led-4000k-violet-cie-v2").spd]
FACTORS = np.array([0.8, 1.3])


def test_resolve_responses_with_the_colorimetric_weights_is_resolve():
    # Source: the definition (one kernel, one table): the general route with the default weights
    # gives resolve's X, Y, Z and Y' to the bit.
    b, refl = _buffers(), _reflectances()
    c = resolve(b, FACTORS, LAMPS, refl)
    r = resolve_responses(b, FACTORS, LAMPS, refl, colorimetric_weights())
    assert r.shape == (2, 3, 4)
    assert r[..., :3].tobytes() == c.xyz_cd_m2.tobytes()
    assert r[..., 3].tobytes() == c.scotopic_cd_m2.tobytes()


def test_resolve_responses_is_the_sum_over_samples_and_channels():
    # Source: analytic -- each pixel is the mean over its samples of Σ_c value·factor·R[k, lamp_c]
    # plus the specular layer with the white row; the cone signals of a sample are those of the
    # spectral radiance value·factor·ρ·s_unit (CIE 2006 fundamentals, render.vision.discrimination).
    b, refl = _buffers(), _reflectances()
    got = resolve_responses(b, FACTORS, LAMPS, refl, cone_rod_weights()).reshape(-1, 4)
    rho = np.vstack([refl, np.ones(N_BINS)])
    units = [unit_photopic(s) for s in LAMPS]
    want = np.zeros((6, 4))
    for s in range(12):
        k = b.response[s]
        if k < 0:
            continue
        for c in range(2):
            for value, row in ((b.value_cd_m2[s, c], rho[k]), (b.spec_cd_m2[s, c], rho[-1])):
                radiance = float(value) * FACTORS[c] * row * units[c]
                want[s // 2, :3] += cone_signals(radiance) / 2
                want[s // 2, 3] += scotopic(radiance) / 2
    np.testing.assert_allclose(got, want, rtol=1e-12, atol=0)


def test_weights_with_more_axes_give_tables_with_those_axes():
    # Source: analytic. Hat functions on nodes every 5 nm sum to one at every wavelength (a
    # partition of unity), so the node tables sum to the plain table; and a transport T(λ)
    # linear between the nodes is reproduced exactly by its node values, so Σ_n T_n·R_n is the
    # table of the reflectance ρ·T.
    refl = _reflectances()
    nodes = np.arange(380.0, 781.0, 5.0)
    hats = np.clip(1.0 - np.abs(WAVELENGTHS_NM[:, None] - nodes[None, :]) / 5.0, 0.0, None)  # (N, n)
    np.testing.assert_allclose(hats.sum(axis=1), 1.0, rtol=0, atol=1e-12)
    w = colorimetric_weights()
    node_weights = hats[:, :, None] * w[:, None, :]  # (N, n_nodes, 4)
    table = response_table(refl, np.array(LAMPS), weights=node_weights)
    assert table.shape == (refl.shape[0] + 1, 2, nodes.size, 4)
    plain = response_table(refl, np.array(LAMPS))
    np.testing.assert_allclose(table.sum(axis=2), plain, rtol=1e-12, atol=1e-15)
    t_nodes = 0.5 + 0.4 * np.sin(nodes / 37.0)
    t = np.interp(WAVELENGTHS_NM, nodes, t_nodes)
    with_t = response_table(refl * t, np.array(LAMPS))
    np.testing.assert_allclose(np.einsum("kmnc,n->kmc", table, t_nodes)[:-1], with_t[:-1], rtol=1e-12)
    # On a coarser integration grid the extra axes are kept too.
    assert response_table(refl, np.array(LAMPS), 5, node_weights).shape == table.shape
    with pytest.raises(ValueError, match="rows"):
        response_table(refl, np.array(LAMPS), weights=np.ones((10, 3)))


def test_cone_table_of_a_white_diffuser_under_d65():
    # Source: colour-science's "CIE 2008 2 Degree Physiologically Relevant LEF" (CIE 170-1:2006
    # V_F): L + M of the white row per unit CIE 1931 luminance of D65 is Σ D65·V_F / Σ D65·V.
    # castleCSF's D65 grey (release v0.2.4, lms2dkl_d65): (L + M)/S = 50.9875.
    import colour

    d65 = d65_on_grid()
    table = response_table(np.zeros((0, N_BINS)), d65[None, :], weights=cone_rod_weights())
    lum, m, s, scot = table[0, 0]
    lef = colour.colorimetry.SDS_LEFS_PHOTOPIC["CIE 2008 2 Degree Physiologically Relevant LEF"]
    v_f = np.interp(WAVELENGTHS_NM, lef.wavelengths, lef.values, left=0.0, right=0.0)
    v = colour.colorimetry.SDS_LEFS_PHOTOPIC["CIE 1924 Photopic Standard Observer"]
    v = np.interp(WAVELENGTHS_NM, v.wavelengths, v.values, left=0.0, right=0.0)
    assert lum + m == pytest.approx(float(d65 @ v_f) / float(d65 @ v), rel=1e-5)
    assert (lum + m) / s == pytest.approx(50.9875, rel=1e-9)
    # The scotopic column is the S/P ratio of D65 (the colorimetric table's Y').
    assert scot == pytest.approx(response_table(np.zeros((0, N_BINS)), d65[None, :])[0, 0, 3], rel=1e-12)
