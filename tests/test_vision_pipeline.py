"""The vision stage end to end (render.vision.pipeline): modes and their promises.

Sources: Ward (1994) contrast-based scale factor (linear operator: a shared scale keeps
luminance ratios exactly; sf·L_wa rises with L_wa, so a dimmer scene is shown dimmer even to an
observer adapted to it) -- an analytic property of the published formula, checked against the
formula written out here; Blackwell's threshold model as used by Ward; IEC 61966-2-1 (colour-
science) to recover display luminance from the output; CIE 146:2002 for the glare effect on
adaptation.
"""

import numpy as np
import pytest
import synthetic
from PIL import Image

from render.errors import InputError
from render.output.images import write_png
from render.vision import ObserverSettings, ViewGeometry, ViewLight, render_display, shared_display
from render.vision.display import linear_srgb_to_xyz
from render.vision.tonemap import blackwell_threshold_cd_m2, highlight_rolloff, ward_scale_factor

G = ViewGeometry(30.0, 48, 32)


def street_like(scale=1.0, lantern=False):
    """A grey ground (ρ ≈ 0.09, like asphalt) under LED-B2 at 1 cd/m² white, with a white
    square; optionally a small bright lantern. Demo data."""
    spd = synthetic.illuminant_spd("LED-B2")
    refl = np.stack([np.full(spd.size, 0.09), np.full(spd.size, 0.8)])
    xyz, s, wx, ws = synthetic.surface_buffers(refl, spd, 1.0 * scale)
    img = np.broadcast_to(xyz[0], (32, 48, 3)).copy()
    simg = np.full((32, 48), s[0])
    img[12:20, 20:28] = xyz[1]
    simg[12:20, 20:28] = s[1]
    if lantern:
        img[2:4, 23:25] = xyz[1] / xyz[1][1] * 2e5
        simg[2:4, 23:25] = s[1] / xyz[1][1] * 2e5
    return ViewLight(img, simg)


def display_luminance(result):
    return linear_srgb_to_xyz(result.linear_srgb)[..., 1]


def test_ward_formula():
    # Ward (1994): sf = [(1.219 + L_da^0.4)/(1.219 + L_wa^0.4)]^2.5, L_da = peak/2.
    for lwa in (0.01, 0.3, 1.0, 50.0, 300.0):
        assert ward_scale_factor(lwa, 100.0) == pytest.approx(((1.219 + 50**0.4) / (1.219 + lwa**0.4)) ** 2.5)
    assert ward_scale_factor(50.0, 100.0) == pytest.approx(1.0)
    assert float(blackwell_threshold_cd_m2(0.0)) == pytest.approx(0.0594 * 1.219**2.5)
    # Roll-off: identity below the knee, continuous slope, below 1 above.
    x = np.array([0.5, 0.8, 0.8 + 1e-7, 3.0, 1e6])
    y = highlight_rolloff(x)
    assert y[0] == 0.5 and y[1] == 0.8 and (y[2] - y[1]) / 1e-7 == pytest.approx(1.0, rel=1e-5)
    assert y[3] < 1.0 and y[4] <= 1.0 and y[4] == pytest.approx(1.0)


def test_shared_mode_keeps_brightness_ratio():
    dim, bright = street_like(0.25), street_like(1.0)
    obs = ObserverSettings(glare=False, acuity=False)
    r_dim, r_bright = shared_display([dim, bright], G, obs)
    # One luminance adaptation (each view keeps its own light's colour as its adapting white).
    for key in ("photopic_cd_m2", "scotopic_cd_m2", "mesopic_cd_m2", "m", "pupil_diameter_mm"):
        assert getattr(r_dim.state, key) == getattr(r_bright.state, key)
    # One adaptation state (one m, one scale factor) and a linear operator below the knee: the
    # ground's displayed luminance keeps the scene ratio (with one spectrum and one m the MES2
    # luminance is proportional to the scene luminance).
    ratio = display_luminance(r_bright)[28, 5] / display_luminance(r_dim)[28, 5]
    assert ratio == pytest.approx(4.0, rel=1e-3)


def test_adapted_mode_still_shows_dim_as_dim():
    obs = ObserverSettings(glare=False, acuity=False)
    r_dim = render_display(street_like(0.1), G, obs, "adapted")
    r_bright = render_display(street_like(1.0), G, obs, "adapted")
    ratio = display_luminance(r_bright)[28, 5] / display_luminance(r_dim)[28, 5]
    assert 1.5 < ratio < 10.0  # dimmer, but less than the scene ratio: the eye adapts partly
    assert r_dim.state.mesopic_cd_m2 < r_bright.state.mesopic_cd_m2


def test_glare_raises_adaptation_and_veils():
    obs_on = ObserverSettings(acuity=False, age_years=70.0)
    obs_off = ObserverSettings(acuity=False, glare=False)
    on = render_display(street_like(lantern=True), G, obs_on)
    off = render_display(street_like(lantern=True), G, obs_off)
    assert on.state.photopic_cd_m2 > off.state.photopic_cd_m2
    assert on.diagnostics["glare_veil_max_cd_m2"] > 0
    # The lantern is excluded from the field: without glare the adaptation is the ground's.
    assert off.state.photopic_cd_m2 < 1.0


def test_photometric_mode_and_png_metadata(tmp_path):
    res = render_display(street_like(), G, ObserverSettings(), "photometric")
    assert res.linear_srgb.shape == (32, 48 + 120, 3)
    assert res.state is None and res.diagnostics["quantity"] == "photopic"
    adapted = render_display(street_like(), G, ObserverSettings(), "adapted")
    path = write_png(tmp_path / "view.png", adapted.srgb16, adapted.png_text())
    with Image.open(path) as im:
        assert float(im.text["lampcast.adaptation_photopic_cd_m2"]) == pytest.approx(
            adapted.state.photopic_cd_m2, rel=1e-5
        )
        assert im.text["lampcast.mode"] == "adapted"


def test_mode_errors():
    with pytest.raises(InputError) as err:
        render_display(street_like(), G, ObserverSettings(), "adapt")
    assert "did you mean 'adapted'" in str(err.value)
    with pytest.raises(InputError):
        render_display(street_like(), G, ObserverSettings(), "fixed")
    with pytest.raises(ValueError):
        render_display(street_like(), G, ObserverSettings(), "shared")
    with pytest.raises(ValueError):
        render_display(street_like(), ViewGeometry(30.0, 10, 10), ObserverSettings())


def test_kept_perceived_images_are_what_the_analysis_would_compute_and_diagnostics_are_per_display():
    # A display keeps the perceived image it was made from; the colour analysis reads it
    # instead of running the stage again, so it must be exactly what perceived_view computes
    # with the display's state (render.analysis.colours, same steps in the same order). One
    # retina serves a shared and an adapted display: each keeps its own mode and scale.
    from render.analysis.colours import perceived_view
    from render.vision.pipeline import retinal_images

    views = [street_like(0.3, lantern=True), street_like(1.0, lantern=True)]
    obs = ObserverSettings()
    retinas = retinal_images(views, [G, G], obs)
    shared = shared_display(views, G, obs, retinas=retinas)
    adapted = [render_display(v, G, obs, "adapted", retina=r) for v, r in zip(views, retinas)]
    for v, d in zip(views, shared + adapted):
        again = perceived_view(v, G, obs, state=d.state)
        assert np.array_equal(d.perceived.xyz_cd_m2, again.xyz_cd_m2)
        assert np.array_equal(d.perceived.mesopic_cd_m2, again.mesopic_cd_m2)
        assert d.perceived.state == d.state and d.perceived.observer == obs
    for s, a in zip(shared, adapted):
        assert s.diagnostics["mode"] == "shared" and a.diagnostics["mode"] == "adapted"
        assert s.diagnostics["display_scale"] == pytest.approx(ward_scale_factor(s.state.mesopic_cd_m2, 100.0))
        assert a.diagnostics["display_scale"] == pytest.approx(ward_scale_factor(a.state.mesopic_cd_m2, 100.0))


def test_shared_and_adapted_on_threads_equals_the_modes_one_by_one():
    # shared_and_adapted makes the same images as shared_display and render_display in
    # "adapted" mode, whichever thread makes each (each image is a pure function of its
    # inputs; common practice, no source).
    from render.vision.pipeline import shared_and_adapted

    views = [street_like(0.2, lantern=True), street_like(1.0), street_like(3.0, lantern=True)]
    obs = ObserverSettings()
    shared = shared_display(views, G, obs)
    adapted = [render_display(v, G, obs, "adapted") for v in views]
    for workers in (1, 2):
        s2, a2 = shared_and_adapted(views, G, obs, workers=workers)
        for one, two in zip(shared + adapted, s2 + a2):
            assert np.array_equal(one.srgb16, two.srgb16) and np.array_equal(one.linear_srgb, two.linear_srgb)
            assert one.state == two.state and one.diagnostics == two.diagnostics
