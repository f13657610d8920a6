"""Display encoding and the end-to-end colorimetric check (render.vision.display, pipeline).

Sources: IEC 61966-2-1 sRGB as implemented by colour-science (``cctf_encoding``,
``XYZ_to_sRGB``); CAT16 chromatic adaptation as implemented by colour-science
(``chromatic_adaptation`` Von Kries/CAT16, ``chromatic_adaptation_Zhai2018``); Oklab via
colour-science; sodium D lines from NIST ASD (docs/references.md); ColorChecker reflectances and
CIE illuminants D65 and A from colour-science, integrated by ``colour.sd_to_XYZ``. (The PNG
writer's tests are in ``test_images.py``.)
"""

import colour
import numpy as np
import pytest
import synthetic

from render.colour import observers
from render.colour.spectra import WAVELENGTHS_NM, deposit_lines
from render.vision import ObserverSettings, ViewGeometry, ViewLight, render_display
from render.vision.display import (
    chromatic_adaptation_cat16,
    display_white_xyz,
    gamut_map_oklab,
    linear_srgb_to_xyz,
    quantise,
    srgb_decode,
    srgb_encode,
    xyz_to_linear_srgb,
)


def test_srgb_curve_matches_colour_science():
    x = np.linspace(0.0, 1.0, 2001)
    assert np.allclose(srgb_encode(x), colour.cctf_encoding(x, function="sRGB"), atol=1e-12)
    v = np.linspace(0.0, 1.0, 2001)
    assert np.allclose(srgb_decode(v), colour.cctf_decoding(v, function="sRGB"), atol=1e-12)
    assert np.allclose(srgb_decode(srgb_encode(x)), x, atol=1e-12)


def test_matrix_matches_colour_science():
    xyz = np.random.default_rng(0).uniform(0.0, 1.0, (50, 3))
    ref = colour.XYZ_to_sRGB(xyz, chromatic_adaptation_transform=None, apply_cctf_encoding=False)
    assert np.allclose(xyz_to_linear_srgb(xyz), ref, atol=1e-12)
    # The display white is R = G = B = 1 and has the IEC 61966-2-1 D65 chromaticity
    # (0.3127, 0.3290) to within the 4-digit matrix's precision.
    rgb_white = xyz_to_linear_srgb(display_white_xyz())
    assert np.ptp(rgb_white) < 1e-12 and rgb_white[1] == pytest.approx(1.0, abs=1e-4)
    assert np.allclose(colour.XYZ_to_xy(display_white_xyz()), [0.3127, 0.3290], atol=1e-4)


def test_cat16_full_and_partial_match_colour_science():
    xyz = np.random.default_rng(1).uniform(0.05, 0.9, (20, 3))
    w_a = colour.xy_to_XYZ(colour.CCS_ILLUMINANTS["CIE 1931 2 Degree Standard Observer"]["A"])
    w_d = display_white_xyz()
    ref = colour.adaptation.chromatic_adaptation(xyz, w_a, w_d, method="Von Kries", transform="CAT16")
    assert np.allclose(chromatic_adaptation_cat16(xyz, w_a, 1.0), ref, atol=1e-12)
    # Partial adaptation D = 0.7 toward the display white: Zhai & Luo (2018) two-step CAT16 with
    # the baseline illuminant equal to the display white and D_d = 1 is the same one-step form.
    ref = (
        colour.adaptation.chromatic_adaptation_Zhai2018(
            xyz * 100, w_a * 100, w_d * 100, D_b=0.7, D_d=1.0, XYZ_wo=w_d * 100, transform="CAT16"
        )
        / 100
    )
    assert np.allclose(chromatic_adaptation_cat16(xyz, w_a, 0.7), ref, atol=1e-10)
    # The display white is a fixed point for any D.
    assert np.allclose(chromatic_adaptation_cat16(w_d, w_d, 0.3), w_d, atol=1e-14)


def test_gamut_mapping_keeps_oklab_lightness_and_hue_for_sodium():
    # Low-pressure sodium: the D doublet 588.995 / 589.592 nm (NIST ASD), equal powers.
    spd = deposit_lines([588.995, 589.592], [1.0, 1.0])
    xyz = observers.tristimulus(spd)
    xyz = xyz / xyz[1] * 0.4
    rgb0 = xyz_to_linear_srgb(xyz)
    assert rgb0.min() < -0.01  # far outside sRGB
    rgb, was_out = gamut_map_oklab(xyz[None])
    assert was_out[0]
    assert rgb.min() >= 0.0 and rgb.max() <= 1.0
    lab0 = colour.XYZ_to_Oklab(xyz)
    lab1 = colour.XYZ_to_Oklab(linear_srgb_to_xyz(rgb[0]))
    assert lab1[0] == pytest.approx(lab0[0], abs=1e-6)
    assert np.arctan2(lab1[2], lab1[1]) == pytest.approx(np.arctan2(lab0[2], lab0[1]), abs=1e-5)
    assert np.hypot(lab1[1], lab1[2]) < np.hypot(lab0[1], lab0[2])
    # At the boundary: one channel at 0 or 1.
    assert min(rgb[0].min(), 1 - rgb[0].max()) < 1e-6


def test_in_gamut_colours_unchanged():
    rgb_in = np.random.default_rng(2).uniform(0.02, 0.98, (40, 3))
    xyz = linear_srgb_to_xyz(rgb_in)
    rgb, out = gamut_map_oklab(xyz)
    assert not out.any()
    assert np.allclose(rgb, rgb_in, atol=1e-12)


def test_quantise():
    assert quantise(np.array([0.0, 0.5, 1.0, 1.2]), 8).tolist() == [0, 128, 255, 255]
    assert quantise(np.array([0.0, 0.5, 1.0]), 16).tolist() == [0, 32768, 65535]


# --------------------------------------------------------------------- end to end


def _patch_scene(lamp: str, patch: str, white_cd_m2: float):
    names, refl = synthetic.colour_checker_reflectances()
    spd = synthetic.illuminant_spd(lamp)
    rho = refl[names.index(patch)]
    xyz, s, wx, ws = synthetic.surface_buffers(np.stack([rho, np.ones_like(rho)]), spd, white_cd_m2)
    img = np.empty((9, 9, 3))
    img[:] = xyz[0]
    simg = np.full((9, 9), s[0])
    return ViewLight(img, simg, white_xyz=wx, white_scotopic=ws), rho, spd


def _colour_science_srgb(rho, spd, degree):
    """Reference: colour.sd_to_XYZ of the same gridded reflectance and lamp (CIE 1931 2°),
    then colour.XYZ_to_sRGB with CAT16 from the lamp white to D65 (D = 1), or Zhai2018 (D < 1)."""
    shape = colour.SpectralShape(380, 780, 1)
    cmfs = colour.MSDS_CMFS["CIE 1931 2 Degree Standard Observer"].copy().trim(shape)
    ill = colour.SpectralDistribution(spd, WAVELENGTHS_NM)
    xyz = colour.sd_to_XYZ(colour.SpectralDistribution(rho, WAVELENGTHS_NM), cmfs, ill) / 100.0
    xyz_w = colour.sd_to_XYZ(colour.SpectralDistribution(np.ones_like(rho), WAVELENGTHS_NM), cmfs, ill) / 100.0
    if degree == 1.0:
        return colour.XYZ_to_sRGB(xyz, illuminant=colour.XYZ_to_xy(xyz_w), chromatic_adaptation_transform="CAT16")
    d65 = display_white_xyz()
    adapted = (
        colour.adaptation.chromatic_adaptation_Zhai2018(
            xyz * 100, xyz_w * 100, d65 * 100, D_b=degree, D_d=1.0, XYZ_wo=d65 * 100, transform="CAT16"
        )
        / 100
    )
    return colour.XYZ_to_sRGB(adapted, chromatic_adaptation_transform=None)


@pytest.mark.filterwarnings("ignore:.*shape could not be honoured")
@pytest.mark.parametrize(
    "lamp,patch,degree",
    [
        ("D65", "moderate red", 1.0),
        ("D65", "blue sky", 1.0),
        ("D65", "neutral 6.5 (.44 D)", 1.0),
        ("A", "moderate red", 1.0),
        ("A", "foliage", 1.0),
        ("A", "purple", 0.7),
    ],
)
def test_end_to_end_patch_matches_colour_science(lamp, patch, degree):
    # Photopic (white 200 cd/m², adaptation ~ patch level), glare and acuity off, fixed linear
    # exposure putting the white diffuser at the display peak.
    white = 200.0
    buffers, rho, spd = _patch_scene(lamp, patch, white)
    g = ViewGeometry(10.0, 9, 9)
    obs = ObserverSettings(glare=False, acuity=False, chromatic_adaptation_degree=degree, adaptation_cd_m2=100.0)
    res = render_display(buffers, g, obs, mode="fixed", exposure=obs.display_peak_cd_m2 / white)
    ref = _colour_science_srgb(rho, spd, degree)
    got = srgb_encode(res.linear_srgb[4, 4])
    assert res.state.m == 1.0
    assert np.allclose(got, ref, atol=2e-4), (got, ref)
    assert np.all(np.abs(res.srgb8[4, 4].astype(int) - np.rint(np.asarray(ref) * 255).astype(int)) <= 1)


@pytest.mark.parametrize("lamp", ["D65", "E"])
def test_neutral_is_grey_at_default_settings(lamp):
    # A spectrally flat (neutral) surface at photopic level, default observer (partial
    # adaptation D < 1): under D65 (the display white) it is a neutral grey, R = G = B. Under the
    # equal-energy illuminant E, only full adaptation makes it neutral (CAT16, D = 1); with the
    # default D it keeps a trace of E's colour relative to D65 (pinkish: R > G).
    spd = synthetic.illuminant_spd(lamp)
    xyz, s, wx, ws = synthetic.surface_buffers(np.full((1, spd.size), 0.2), spd, 300.0)
    buffers = ViewLight(
        np.broadcast_to(xyz[0], (9, 9, 3)).copy(), np.full((9, 9), s[0]), white_xyz=wx, white_scotopic=ws
    )
    g = ViewGeometry(10.0, 9, 9)
    res = render_display(buffers, g, ObserverSettings(glare=False), mode="adapted")
    rgb = res.linear_srgb[4, 4]
    full = render_display(buffers, g, ObserverSettings(glare=False, chromatic_adaptation_degree=1.0)).linear_srgb[4, 4]
    assert np.ptp(full) < 1e-9
    if lamp == "D65":
        assert np.ptp(rgb) < 2e-4
        assert len(set(res.srgb8[4, 4].tolist())) == 1
    else:
        assert rgb[0] > rgb[1]


def test_incomplete_adaptation_keeps_coloured_light_coloured():
    # Hunt's cone-specific incomplete adaptation (RLAB form, Fairchild 1996; from memory): a
    # grey surface under near-monochromatic low-pressure sodium light still looks strongly
    # yellow-orange after adaptation (common observation, no source), while under the display
    # white's own light (D65) the step is the identity.
    import colour
    from synthetic import surface_buffers

    from render.colour.lamps import get_lamp
    from render.vision.display import chromatic_adaptation_incomplete, incomplete_adaptation_gains

    grey = np.full((1, 401), 0.2)
    xyz, _, white, _ = surface_buffers(grey, get_lamp("sodium-low-pressure").spd, 1.0)
    adapted = chromatic_adaptation_incomplete(xyz[0], white, 1.0)
    lch = colour.Lab_to_LCHab(colour.XYZ_to_Lab(adapted / white[1], [0.3127, 0.3290]))
    assert lch[1] > 40.0 and 40.0 < lch[2] < 100.0  # still chromatic, hue between orange and yellow
    d65 = np.asarray(colour.xy_to_XYZ([0.3127, 0.3290]))
    np.testing.assert_allclose(incomplete_adaptation_gains(d65, 1.0), 1.0, rtol=1e-3)
    # Less adaptation at lower light: the sodium white keeps more of its chroma at 0.01 cd/m².
    dim = chromatic_adaptation_incomplete(xyz[0], white, 0.01)
    bright = chromatic_adaptation_incomplete(xyz[0], white, 100.0)
    c_dim = colour.Lab_to_LCHab(colour.XYZ_to_Lab(dim / white[1], [0.3127, 0.3290]))[1]
    c_bright = colour.Lab_to_LCHab(colour.XYZ_to_Lab(bright / white[1], [0.3127, 0.3290]))[1]
    assert c_dim > c_bright
