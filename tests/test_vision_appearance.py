"""Colour appearance under rod intrusion (render.vision.appearance).

Sources: structure of Cao, Pokorny, Smith & Zele (2008) / Kirk & O'Brien (2011) as documented
in the module; CIE 191:2010 (photopic above 5 cd/m²); CIEDE2000 (CIE 142-2001) via
colour-science ``colour.delta_E``; CIELAB via colour-science; ColorChecker reflectances and CIE
illuminants from colour-science.
"""

import colour
import numpy as np
import pytest
import synthetic

from render.colour.observers import cmfs_xyz
from render.vision.adaptation import adaptation_state
from render.vision.appearance import (
    CAO_2008_CONE_PEAKS,
    XYZ_TO_LMS,
    cone_peak_sensitivities,
    extra_channel_weights,
    rod_intrusion,
    xyz_to_lms,
)
from render.vision.mesopic import mesopic_image
from render.vision.view import ViewGeometry

NAMES, REFL = synthetic.colour_checker_reflectances()
CHROMATIC = slice(0, 18)  # the 18 coloured patches; 18-23 are the neutral series


def scene(lamp, white_cd_m2):
    """Patches on a N5 ground: buffers, geometry and the adaptation state measured from them."""
    xyz, s, wx, ws = synthetic.surface_buffers(REFL, synthetic.illuminant_spd(lamp), white_cd_m2)
    img = synthetic.patch_image(xyz, 4, 6, 6, 2, background=xyz[21])
    simg = synthetic.patch_image(s, 4, 6, 6, 2, background=s[21])
    g = ViewGeometry(20.0, img.shape[1], img.shape[0])
    state = adaptation_state(img, simg, g, field_deg=60.0, white_xyz=wx, white_scotopic=ws)
    return xyz, s, wx, ws, state


def perceived_lab(lamp, white_cd_m2):
    """CIELAB of the perceived patches relative to the perceived white (relative colorimetry)."""
    xyz, s, wx, ws, st = scene(lamp, white_cd_m2)
    out = rod_intrusion(xyz, s, mesopic_image(xyz[:, 1], s, st.m), st)
    white_mes = float(mesopic_image(wx[1], ws, st.m))
    ref_xy = colour.XYZ_to_xy(np.asarray(st.white_xyz))
    lab = colour.XYZ_to_Lab(out / white_mes, ref_xy)
    lab_photopic = colour.XYZ_to_Lab(xyz / wx[1], ref_xy)
    return lab, lab_photopic, st


def test_cone_transform_units_match_cao():
    # Cao et al. (2008) Table 1 L and M peaks (from memory) equal the peaks of the
    # Smith-Pokorny/MacLeod-Boynton transform on the CIE 1931 CMFs: same troland units.
    peaks = cone_peak_sensitivities()
    assert peaks[0] == pytest.approx(CAO_2008_CONE_PEAKS[0], rel=5e-3)
    assert peaks[1] == pytest.approx(CAO_2008_CONE_PEAKS[1], rel=5e-3)
    # MacLeod-Boynton scaling: L + M = Y (luminance) for any stimulus.
    xyz = np.array([[0.3, 0.5, 0.9], [1.0, 1.0, 1.0], [0.2, 0.1, 0.05]])
    lms = xyz_to_lms(xyz)
    assert np.allclose(lms[:, 0] + lms[:, 1], xyz[:, 1], rtol=1e-4)


def test_extra_channel_matches_xyz_transform():
    # The optional exact-cone channel (Smith & Pokorny 1975 fundamentals from colour-science)
    # agrees with the XYZ transform to within the Judd-Vos vs CIE 1931 difference.
    w = extra_channel_weights()
    from_xyz = 683.0 * cmfs_xyz() @ XYZ_TO_LMS.T
    lm = slice(20, 341)  # 400-720 nm: where the two CMF sets agree closely
    scale = np.abs(from_xyz[:, :2]).max()
    assert np.max(np.abs(w[lm, :2] - from_xyz[lm, :2])) < 0.05 * scale
    # Equal-energy white: S/(L+M) = 1 in both.
    assert w[:, 2].sum() / (w[:, 0] + w[:, 1]).sum() == pytest.approx(1.0, rel=1e-9)


@pytest.mark.parametrize("lamp", ["D65", "LED-B2", "A"])
@pytest.mark.parametrize("white_cd_m2", [50.0, 100.0])
def test_photopic_identity(lamp, white_cd_m2):
    # Adaptation above 10 cd/m² is photopic (CIE 191: m = 1 above 5 cd/m²), where the step must
    # not change colours: within 0.5 CIEDE2000 (colour-science).
    lab, lab0, st = perceived_lab(lamp, white_cd_m2)
    assert st.mesopic_cd_m2 > 10.0
    assert np.max(colour.delta_E(lab, lab0, method="CIE 2000")) < 0.5


def test_mesopic_changes_colours():
    # The same comparison at a mesopic level must show a clear change (the test above can fail).
    lab, lab0, st = perceived_lab("LED-B2", 1.0)
    assert 0.0 < st.m < 1.0
    assert np.max(colour.delta_E(lab, lab0, method="CIE 2000")) > 3.0


@pytest.mark.parametrize("lamp", ["D65", "LED-B2"])
def test_chroma_falls_monotonically_when_dimmed(lamp):
    # Loss of colourfulness with falling luminance (Cao et al. 2008; Kirk & O'Brien 2011):
    # CIELAB chroma of every coloured patch does not rise as the scene is dimmed 3 -> 0.01 cd/m².
    levels = np.geomspace(3.0, 0.01, 12)
    chroma = []
    for lv in levels:
        lab, _, _ = perceived_lab(lamp, lv)
        chroma.append(np.hypot(lab[CHROMATIC, 1], lab[CHROMATIC, 2]))
    chroma = np.array(chroma)  # (levels, patches)
    assert np.all(np.diff(chroma, axis=0) <= 1e-6)
    assert chroma[-1].mean() < 0.5 * chroma[0].mean()


def test_neutrals_stay_neutral_and_scotopic_is_monochrome():
    # Neutral patches have the adapting white's rod/cone ratio: no rod hue (re-referencing to
    # the white, module text). At scotopic adaptation every patch has the white's chromaticity.
    lab, _, st = perceived_lab("LED-B2", 0.3)
    assert np.max(np.hypot(lab[18:, 1], lab[18:, 2])) < 1.0
    lab, _, st = perceived_lab("LED-B2", 0.005)
    assert st.m == 0.0
    assert np.max(np.hypot(lab[:, 1], lab[:, 2])) < 0.05


def test_blue_brightens_relative_to_red_when_dimmed():
    # Purkinje shift, from CIE 191's V_mes: a blue patch gains lightness relative to a red one.
    i_blue, i_red = NAMES.index("blue"), NAMES.index("red")
    lab_hi, _, _ = perceived_lab("D65", 30.0)
    lab_lo, _, _ = perceived_lab("D65", 0.3)
    assert (lab_lo[i_blue, 0] - lab_lo[i_red, 0]) > (lab_hi[i_blue, 0] - lab_hi[i_red, 0]) + 5.0


def test_luminance_is_mesopic():
    xyz, s, wx, ws, st = scene("LED-B2", 1.0)
    lmes = mesopic_image(xyz[:, 1], s, st.m)
    out = rod_intrusion(xyz, s, lmes, st)
    assert np.allclose(out[:, 1], lmes, rtol=1e-12)
    off = rod_intrusion(xyz, s, lmes, st, enabled=False)
    assert np.allclose(colour.XYZ_to_xy(off), colour.XYZ_to_xy(xyz), atol=1e-12)
