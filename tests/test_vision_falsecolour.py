"""False-colour luminance maps (render.vision.falsecolour) and their legend (render.output.luminance_legend).

Sources: CIELAB lightness and Oklab from colour-science; colour-vision-deficiency simulation of
Machado, Oliveira & Fernandes (2009) as implemented by colour-science
(``colour.blindness.matrix_cvd_Machado2009``, severity 1).
"""

import warnings

import colour
import numpy as np
import pytest

from render.output.luminance_legend import false_colour_with_legend, legend_strip
from render.vision.display import linear_srgb_to_xyz
from render.vision.falsecolour import auto_range_decades, false_colour, luminance_ramp


def lightness(rgb_linear):
    return colour.XYZ_to_Lab(linear_srgb_to_xyz(rgb_linear))[:, 0]


def test_ramp_in_gamut_monotone_and_even():
    ramp = luminance_ramp(256)
    assert ramp.min() >= 0.0 and ramp.max() <= 1.0
    assert np.all(np.diff(lightness(ramp)) > 0)
    ok = colour.XYZ_to_Oklab(linear_srgb_to_xyz(ramp))
    steps = np.linalg.norm(np.diff(ok, axis=0), axis=1)
    assert steps.max() / steps.min() < 1.1  # perceptually even steps (Oklab)
    assert lightness(ramp)[-1] - lightness(ramp)[0] > 60


@pytest.mark.parametrize("deficiency", ["Protanomaly", "Deuteranomaly", "Tritanomaly"])
def test_ramp_survives_colour_vision_deficiency(deficiency):
    ramp = luminance_ramp(256)
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        m = colour.blindness.matrix_cvd_Machado2009(deficiency, 1.0)
    sim = np.clip(ramp @ m.T, 0.0, 1.0)
    assert np.all(np.diff(lightness(sim)) > 0.05)


def test_mapping_positions():
    ramp = luminance_ramp(256)
    out = false_colour(np.array([0.01, 0.1, 10.0, 1e-9, 1e9]), 0.01, 10.0)
    assert np.allclose(out[0], ramp[0]) and np.allclose(out[2], ramp[-1])
    assert np.allclose(out[1], ramp[85])  # one decade of three: index round(255/3)
    assert np.allclose(out[3], ramp[0]) and np.allclose(out[4], ramp[-1])


def test_auto_range_and_legend():
    lum = np.geomspace(0.03, 400.0, 1000)
    assert auto_range_decades(lum) == (0.01, 1000.0)
    leg = legend_strip(200, 0.01, 1000.0)
    assert leg.shape == (200, 120, 3)
    assert leg.min() < 0.05 and leg.max() > 0.9  # dark tick labels on white
    img, rng = false_colour_with_legend(lum.reshape(20, 50))
    assert img.shape == (20, 170, 3) and rng == (0.01, 1000.0)
