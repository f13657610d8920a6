"""The night's ambient channels kept resolved per pixel (render.light.indirect.view).

A view keeps its sky glow's, moonlight's and window lamps' light as responses per pixel and
channel per unit level (X, Y, Z, Y' and the cone signals L, M, S), made right after tracing,
instead of as spectral transport. Checks:

- resolved responses equal the same paths' node values resolved the spectral way (float16
  node values through the response table, as the luminaires' channels are) within the float16
  rounding of that way, and the float64 node values resolved in float64 within float32
  rounding (the same sums in another order; common practice, no source);
- relighting (a new street lamp, lumens and dimming, a new sky luminance or moon illuminance)
  casts no ray, and a level is a multiply (linearity of light in its source; analytic);
- the memory estimate counts the arrays a view really keeps.

Relative float16 and float32 rounding (2⁻¹¹ and 2⁻²⁴ of a value) from IEEE 754-2008.
"""

from __future__ import annotations

from dataclasses import replace

import numpy as np
import pytest

from render.colour.colorimetry import colorimetric_weights
from render.colour.spectra import N_BINS
from render.light.indirect.night import ambient_levels
from render.light.indirect.transport import resolve_transport, transport_table
from render.light.indirect.view import (
    PathTracer,
    _add_specular,
    ambient_response_weights,
    ambient_responses,
    indirect_responses,
    pack_rows,
)
from render.light.integrator import _cast_tiles
from render.resources import demo_scene_path
from render.scene.loader import load_scene
from render.study import Study

NIGHT = dict(
    sky_luminance_cd_m2=0.01,
    moon_illuminance_lx=0.2,
    window_lit_fraction=0.3,
    shop_window_lit_fraction=1.0,
)


@pytest.fixture(scope="module")
def night_view():
    scene = load_scene(demo_scene_path())
    scene.render.bounces = 1
    scene.render.indirect_samples_per_pixel = 2
    scene.night = replace(scene.night, **NIGHT)
    study = Study(scene)
    # The asphalt wet (water, α = 0.1), so that some camera samples see a specular layer.
    gloss = np.tile([0.0, 1.0], (len(study.mesh.material_names), 1))
    gloss[study.mesh.material_names.index("asphalt-worn")] = (0.02, 0.1)
    study.mesh.material_gloss = gloss
    rendered = study.render_view("footway", "sodium", width_px=64, samples_per_pixel=2)
    return study, rendered


def _spectral_way(study, rendered):
    """The old way on the same paths: each ambient channel's node values as float16 against a
    per-pixel scale, resolved through the response table (and the specular layer's white
    table), plus float64 node values resolved in float64."""
    b, ind = rendered.buffers, rendered.buffers.indirect
    spp, settings = ind.spp, ind.settings
    tracer = PathTracer(b.rays.mesh, study.bvh, rendered.lights, study.reflectances, settings)
    C, A, n = tracer.n_channels, tracer.n_ambient, tracer.basis.n_nodes
    n_pix = ind.width_px * ind.height_px
    cols = [C + c for c in ind.ambient_channels]
    moments = np.zeros((n_pix, len(cols), n))
    spec = np.zeros((n_pix, len(cols), n))
    for tile in _cast_tiles(b.rays, spp):
        pixel = tile.index[::spp] // spp
        sp = np.zeros((pixel.shape[0], C + A, n))
        m, _ = tracer.trace(
            tile.point,
            tile.normal,
            tile.geo,
            b.response[tile.index],
            pixel,
            spp,
            ind.seed,
            view=-tile.direction,
            spec=sp,
        )
        moments[pixel] = m[:, cols]
        spec[pixel] = sp[:, cols]
    w = ambient_response_weights()
    spds = ind.ambient_spds[list(ind.ambient_channels)]
    table = transport_table(study.reflectances, spds, settings.basis, w)
    white = transport_table(np.ones((1, N_BINS)), spds, settings.basis, w)
    out16 = np.zeros((n_pix, len(cols), w.shape[1]))
    exact = np.zeros_like(out16)
    glossy = np.flatnonzero(np.abs(spec).reshape(n_pix, -1).max(axis=1) > 0)
    for a in range(len(cols)):
        one = np.zeros(len(cols))
        one[a] = 1.0
        values, scale = pack_rows(moments)
        resolve_transport(b.response, spp, values, scale, one, table, np.arange(len(cols)), out16[:, a])
        sv, ss = pack_rows(spec[glossy])
        _add_specular(glossy, sv, ss, one, white, np.arange(len(cols)), out16[:, a])
        mat = b.response.reshape(n_pix, spp)
        for s in range(spp):
            k = mat[:, s]
            ok = (k >= 0) & (k < table.shape[0])
            exact[ok, a] += np.einsum("pn,pnj->pj", moments[ok, a], table[k[ok], a]) / spp
        exact[:, a] += spec[:, a] @ white[0, a]
    return out16, exact, glossy.size


def test_resolved_equals_the_spectral_resolve_on_the_same_paths(night_view):
    study, rendered = night_view
    ind = rendered.buffers.indirect
    assert ind.ambient_channels == (0, 1, 2, 3)
    out16, exact, n_glossy = _spectral_way(study, rendered)
    assert n_glossy > 0  # the check covers the specular layer's part
    kept = ind.ambient_resolved.astype(np.float64)
    assert ind.ambient_resolved.dtype == np.float32 and kept.shape == exact.shape
    # Against float64 node values resolved in float64: float32 rounding of each pixel's
    # largest response of the channel.
    top = np.abs(exact).max(axis=2, keepdims=True)
    assert np.all(np.abs(kept - exact) <= 2.0**-23 * top + 1e-30)
    # Against the float16 node values (the old way: one float16 scale per pixel for all the
    # ambient channels, 2⁻¹¹ relative per value): per pixel and response within 2e-3 of the
    # largest channel's (measured 4.8e-4), and so the image at the scene's levels.
    largest = np.abs(exact).max(axis=1)
    err = np.abs(out16 - exact).max(axis=1) / np.where(largest > 0, largest, 1.0)
    assert 0.0 < err.max() <= 2e-3  # (above 0: the float16 way does round, the check sees it)
    levels = ambient_levels(study.scene.night)
    image, image16 = np.einsum("paj,a->pj", exact, levels), np.einsum("paj,a->pj", out16, levels)
    lit = image[:, 1] > 0
    assert np.all(np.abs(image16 - image)[lit] <= 2e-3 * np.abs(image[lit]))  # (measured 4.7e-4)


def test_observer_weights_kept_and_refused(night_view):
    study, rendered = night_view
    b = rendered.buffers
    xyz = ambient_responses(b.indirect, b.response, study.reflectances)
    # A sum of kept columns is their combination; weights outside them need a new trace.
    w = colorimetric_weights()
    both = ambient_responses(b.indirect, b.response, study.reflectances, weights=w[:, :1] + w[:, 1:2])
    np.testing.assert_allclose(both[..., 0], xyz[..., 0] + xyz[..., 1], rtol=1e-9, atol=1e-15)
    shifted = np.roll(w[:, 1:2], 5, axis=0)
    with pytest.raises(ValueError, match="traced again"):
        ambient_responses(b.indirect, b.response, study.reflectances, weights=shifted)
    with pytest.raises(ValueError, match="other reflectances"):
        ambient_responses(b.indirect, b.response, study.reflectances * 0.5)


def test_relighting_the_night_view_casts_no_ray(night_view, monkeypatch):
    study, rendered = night_view
    b = rendered.buffers
    base = ambient_responses(b.indirect, b.response, study.reflectances)

    def no_ray(*args, **kwargs):
        raise AssertionError("a ray was cast")

    import render.light.indirect.view as view
    import render.light.integrator as integrator

    for module, name in ((view, "trace_paths"), (view, "_cast_tiles"), (integrator, "_cast_tiles")):
        monkeypatch.setattr(module, name, no_ray)
    # A new street lamp, lumens and dimming: the night part is the same to the bit.
    relit = study.relight(rendered, "led-warm")
    assert relit.buffers is rendered.buffers
    night_only = indirect_responses(
        b.indirect, b.response, np.zeros(rendered.lights.n_channels), [], study.reflectances
    )
    np.testing.assert_array_equal(night_only, base)
    # A dimmed street lamp: the luminaires' part scales, the night's does not.
    from render.light.luminaires import channel_factors

    factors, lamps = channel_factors(rendered.lights, study.setup("sodium"))
    spds = study.lamp_spds(lamps)
    full = indirect_responses(b.indirect, b.response, factors, spds, study.reflectances)
    dimmed = indirect_responses(b.indirect, b.response, 0.5 * np.asarray(factors), spds, study.reflectances)
    np.testing.assert_allclose(full - base, 2.0 * (dimmed - base), rtol=1e-9, atol=1e-12)
    # New sky luminance and moon illuminance: each term's part scales by its level.
    night = study.scene.night
    dark = replace(night, window_luminance_cd_m2=0.0, shop_window_luminance_cd_m2=0.0)
    sky_moon = ambient_responses(b.indirect, b.response, study.reflectances, dark)
    brighter = ambient_responses(
        b.indirect,
        b.response,
        study.reflectances,
        replace(dark, sky_luminance_cd_m2=0.03, moon_illuminance_lx=0.6),
    )
    np.testing.assert_allclose(brighter, 3.0 * sky_moon, rtol=1e-12, atol=1e-18)
    moon_off = ambient_responses(b.indirect, b.response, study.reflectances, replace(dark, moon_illuminance_lx=0.0))
    assert np.all(sky_moon[..., 1] >= moon_off[..., 1]) and (sky_moon[..., 1] > moon_off[..., 1]).any()


def test_memory_estimate_counts_the_kept_arrays(night_view):
    from render import limits

    _, rendered = night_view
    ind = rendered.buffers.indirect
    n_pix = ind.width_px * ind.height_px
    A, K = len(ind.ambient_channels), ind.window_seen.shape[1]
    kept = ind.ambient_resolved.nbytes + ind.sky_seen.nbytes + ind.window_seen.nbytes
    per_pixel = (
        limits._BYTES_PER_PIXEL_CHANNEL_AMBIENT * A
        + limits._BYTES_PER_PIXEL_AMBIENT
        + limits._BYTES_PER_PIXEL_WINDOW_LAMP * max(2, K)
    )
    assert kept == n_pix * per_pixel
    assert limits._BYTES_PER_PIXEL_CHANNEL_AMBIENT == 4 * ambient_response_weights().shape[1] == 28
    # The gloss pixels keep nothing more for the night light.
    args = (1920, 1080, 4, 2, True, 0.5)
    without = limits.render_memory_estimate(*args).bytes
    night = limits.render_memory_estimate(*args, ambient_channels=4, window_lamps=2).bytes
    assert night - without == 1920 * 1080 * (28 * 4 + 4 + 4 * 2)
