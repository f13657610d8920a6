"""Low-light acuity loss (render.vision.acuity).

Sources: Ward Larson, Rushmeier & Piatko (1997) acuity function after Shaler (1937),
R(L) = 17.25·atan(1.4·log10 L + 0.35) + 25.72 cycles/degree (from memory, as in the module);
the Fourier transform of a Gaussian (analytic: a sinusoid's amplitude is multiplied by
exp(−2π²σ²ν²)).
"""

import math

import numpy as np
import pytest

from render.vision.acuity import BLUR_LEVELS_PX, apply_acuity, blur_sigma_deg, resolvable_frequency_cpd
from render.vision.view import ViewGeometry


def shaler_ward_larson(lum):
    return 17.25 * math.atan(1.4 * math.log10(lum) + 0.35) + 25.72


@pytest.mark.parametrize("lum", [1e-3, 1e-2, 0.1, 1.0, 10.0, 100.0, 1e4])
def test_resolvable_frequency_formula(lum):
    assert resolvable_frequency_cpd(lum) == pytest.approx(shaler_ward_larson(lum), rel=1e-12)


def test_frequency_rises_with_luminance():
    r = resolvable_frequency_cpd(np.geomspace(1e-4, 1e4, 50))
    assert np.all(np.diff(r) > 0)
    # Limits of the arctangent form: below 52.8 cycles/degree.
    assert r.max() < 17.25 * math.pi / 2 + 25.72


def _grating(geometry, cycles_per_degree, mean_cd_m2, contrast=0.5):
    x_deg = (np.arange(geometry.width_px) + 0.5 - geometry.width_px / 2) * geometry.deg_per_px_centre
    row = mean_cd_m2 * (1 + contrast * np.sin(2 * math.pi * cycles_per_degree * x_deg))
    img = np.broadcast_to(row, (geometry.height_px, geometry.width_px)).copy()
    return np.repeat(img[..., None], 3, axis=-1)


def _contrast(img):
    mid = img[img.shape[0] // 2, 40:-40, 1]
    return (mid.max() - mid.min()) / (mid.max() + mid.min())


def test_grating_contrast_follows_gaussian_mtf():
    # Narrow view (2° over 200 px, 0.01°/px), 5 cycles/degree grating, uniform low luminance.
    # A Gaussian of σ multiplies the grating's amplitude by exp(−2π²σ²ν²); the module blends the
    # two blur levels that bracket the required σ linearly, so the contrast is the same blend of
    # the two levels' factors.
    g = ViewGeometry(2.0, 200, 40)
    nu = 5.0
    lum = 1e-3
    img = _grating(g, nu, lum)
    out, sigma_px = apply_acuity(img, np.full(img.shape[:2], lum), g)
    sigma_deg = float(sigma_px.mean()) * g.deg_per_px_centre
    assert sigma_deg == pytest.approx(float(blur_sigma_deg(lum)), rel=1e-9)
    levels = np.array(BLUR_LEVELS_PX)
    s_px = float(sigma_px.mean())
    k = int(np.searchsorted(levels, s_px, side="right") - 1)
    t = (s_px - levels[k]) / (levels[k + 1] - levels[k])
    mtf = [math.exp(-2 * math.pi**2 * (lv * g.deg_per_px_centre) ** 2 * nu**2) for lv in levels[k : k + 2]]
    expected = 0.5 * ((1 - t) * mtf[0] + t * mtf[1])
    assert _contrast(out) == pytest.approx(expected, rel=0.02)
    assert _contrast(out) < 0.5 * 0.6


def test_bright_scene_keeps_detail_and_mean():
    g = ViewGeometry(2.0, 200, 40)
    img = _grating(g, 5.0, 100.0)
    out, sigma_px = apply_acuity(img, np.full(img.shape[:2], 100.0), g)
    assert _contrast(out) > 0.5 * 0.98
    assert out[..., 1].mean() == pytest.approx(img[..., 1].mean(), rel=1e-6)


def test_blend_equals_whole_image_gaussian_blurs_where_levels_are_needed_in_patches():
    # A dark patch in a bright view needs the wider blur levels only around it; the module
    # blurs over less than the image there. Reference: every level blurred over the whole
    # image with scipy.ndimage.gaussian_filter (mode "nearest", the module's documented
    # filter) and blended as the module text says (linear in σ between the bracketing levels).
    from scipy.ndimage import gaussian_filter

    g = ViewGeometry(3.0, 120, 80)
    rng = np.random.default_rng(4)
    img = rng.uniform(0.0, 1.0, (80, 120, 3))
    lum = np.full((80, 120), 100.0)
    lum[10:25, 90:115] = 1e-4  # a dark corner: σ of several pixels there
    lum[60:70, 5:12] = 1e-2
    out, sigma_px = apply_acuity(img, lum, g)
    levels = np.array(BLUR_LEVELS_PX)
    s = np.clip(sigma_px, 0.0, levels[-1])
    k = np.clip(np.searchsorted(levels, s, side="right") - 1, 0, len(levels) - 2)
    t = (s - levels[k]) / (levels[k + 1] - levels[k])
    blurred = [img if lv == 0 else gaussian_filter(img, (lv, lv, 0), mode="nearest") for lv in levels]
    ref = np.zeros_like(img)
    for i in range(len(levels)):
        wgt = np.where(k == i, 1.0 - t, 0.0) + np.where(k + 1 == i, t, 0.0)
        ref += wgt[..., None] * blurred[i]
    assert len(set(k.ravel())) >= 3  # several levels in play, the wide ones in patches only
    assert np.allclose(out, ref, rtol=1e-14, atol=0.0)
