"""Loss of visual acuity at low luminance (Ward Larson, Rushmeier & Piatko 1997).

Ward Larson et al. (IEEE TVCG 3(4), 1997, "A visibility matching tone reproduction operator
for high dynamic range scenes") take the highest resolvable spatial frequency as a function of
the adaptation luminance from Shaler's (1937) acuity data,

    R(L_a) = 17.25·atan(1.4·log10(L_a) + 0.35) + 25.72   cycles/degree

(from memory), and blur each part of the image so that detail finer than R(L_a) is lost: they
interpolate an image pyramid at the level whose sample spacing is half a period of R, i.e.
1/(2R) degrees. Here that is done with a few Gaussian-blurred copies of the image blended per
pixel: the Gaussian has the variance of a box one sample spacing wide,
``σ = 1/(2R·√12)`` degrees (variance match: our choice), converted to pixels with the view's
central pixel pitch. The local adaptation luminance is the photopic luminance averaged over a
1° field (Gaussian, σ = 0.5°: the "foveal" sample of Ward Larson et al.).

Typical values: R ≈ 31 cycles/degree at 1 cd/m², 5 at 0.01 and 3 at 0.001 cd/m², so σ is
0.007°, 0.03° and 0.05°; at the pixel pitch of a wide street view (~0.1°) the blur only shows
at very low light or in narrow (zoomed) views, which is the honest result: the display itself
cannot show detail the eye would resolve.

References
----------
- G. Ward Larson, H. Rushmeier, C. Piatko (1997), "A visibility matching tone reproduction
  operator for high dynamic range scenes", IEEE TVCG 3(4): the acuity function R(L_a) and
  the foveal sample **(from memory)**.
- S. Shaler (1937), "The relation between visual acuity and illumination", Journal of
  General Physiology 21: the data behind R(L_a) (cited through Ward Larson et al.).
"""

from __future__ import annotations

import math
from collections.abc import Sequence

import numba
import numpy as np
import numpy.typing as npt
from scipy.ndimage import gaussian_filter

from render.vision.view import ViewGeometry

__all__ = [
    "BLUR_LEVELS_PX",
    "FOVEAL_FIELD_DEG",
    "apply_acuity",
    "blur_sigma_deg",
    "local_adaptation_cd_m2",
    "resolvable_frequency_cpd",
]

#: Blur levels (σ in pixels) blended per pixel; level 0 is the unblurred image.
BLUR_LEVELS_PX = (0.0, 0.5, 1.0, 2.0, 4.0, 8.0, 16.0)
#: Full width of the foveal field for the local adaptation luminance, degrees.
FOVEAL_FIELD_DEG = 1.0


def resolvable_frequency_cpd(adaptation_cd_m2: npt.ArrayLike) -> np.ndarray:
    """Highest resolvable spatial frequency, cycles/degree (Ward Larson et al. 1997 after
    Shaler 1937; from memory): ``17.25·atan(1.4·log10 L + 0.35) + 25.72``, floored at 0.5."""
    la = np.maximum(np.asarray(adaptation_cd_m2, dtype=np.float64), 1e-12)
    r = 17.25 * np.arctan(1.4 * np.log10(la) + 0.35) + 25.72
    return np.maximum(r, 0.5)


def blur_sigma_deg(adaptation_cd_m2: npt.ArrayLike) -> np.ndarray:
    """Gaussian σ, degrees, that removes detail above the resolvable frequency: 1/(2R·√12)."""
    return 1.0 / (2.0 * resolvable_frequency_cpd(adaptation_cd_m2) * math.sqrt(12.0))


def local_adaptation_cd_m2(luminance_cd_m2: npt.ArrayLike, geometry: ViewGeometry) -> np.ndarray:
    """Photopic luminance averaged over a 1° foveal field around each pixel, cd/m²."""
    sigma_px = 0.5 * FOVEAL_FIELD_DEG / geometry.deg_per_px_centre
    return gaussian_filter(np.asarray(luminance_cd_m2, dtype=np.float64), sigma_px, mode="nearest")


def apply_acuity(
    image: npt.ArrayLike,
    local_luminance_cd_m2: npt.ArrayLike,
    geometry: ViewGeometry,
    levels_px: Sequence[float] = BLUR_LEVELS_PX,
) -> tuple[np.ndarray, np.ndarray]:
    """Blur ``image`` (H, W, C) by the luminance-dependent acuity loss.

    Each pixel gets the blend of the two blurred copies whose σ (pixels) bracket its required
    ``σ = blur_sigma_deg(L_local)/pitch`` (linear in σ); σ beyond the last level uses the
    last. Returns ``(blurred image, σ in pixels (H, W))``.
    """
    img = np.asarray(image, dtype=np.float64)
    sigma_px = blur_sigma_deg(local_luminance_cd_m2) / geometry.deg_per_px_centre
    levels = np.asarray(levels_px, dtype=np.float64)
    shape = img.shape[:2]
    sigma = np.ascontiguousarray(np.broadcast_to(sigma_px, shape))
    lower = np.empty(shape, dtype=np.int64)
    frac = np.empty(shape)
    used = np.zeros(len(levels), dtype=np.bool_)
    _bracket_levels(sigma, levels, lower, frac, used)
    out = np.zeros(img.shape)
    for i in np.flatnonzero(used):
        if levels[i] == 0.0:
            _add_level(out, np.ascontiguousarray(img), 0, 0, lower, frac, i)
            continue
        # The blur is needed only where some pixel uses this level (its own level or the one
        # below is this level's lower neighbour): over their bounding box widened by the
        # kernel's reach (scipy's radius, 4σ), the same values as a blur of the whole image,
        # since each output value reads input within the reach only and the image's own edges
        # are extended alike.
        near = (lower == i) | (lower == i - 1)
        rows, cols = np.flatnonzero(near.any(axis=1)), np.flatnonzero(near.any(axis=0))
        reach = int(4.0 * float(levels[i]) + 0.5)
        y0, y1 = max(int(rows[0]) - reach, 0), min(int(rows[-1]) + reach + 1, shape[0])
        x0, x1 = max(int(cols[0]) - reach, 0), min(int(cols[-1]) + reach + 1, shape[1])
        blurred = gaussian_filter(img[y0:y1, x0:x1], sigma=(levels[i], levels[i], 0), mode="nearest")
        _add_level(out, blurred, y0, x0, lower, frac, i)
    return out, sigma_px


@numba.njit(cache=True, nogil=True)
def _bracket_levels(sigma, levels, lower, frac, used):
    """Per pixel the blur level below its σ (clipped to the levels' range) and the linear
    weight of the level above; ``used[i]``: some pixel gives level i a weight above 0."""
    n = levels.size
    for y in range(sigma.shape[0]):
        for x in range(sigma.shape[1]):
            s = min(max(sigma[y, x], 0.0), levels[n - 1])
            k = np.searchsorted(levels, s, side="right") - 1
            k = min(max(k, 0), n - 2)
            t = (s - levels[k]) / (levels[k + 1] - levels[k])
            lower[y, x] = k
            frac[y, x] = t
            if 1.0 - t > 0.0:
                used[k] = True
            if t > 0.0:
                used[k + 1] = True


@numba.njit(cache=True, nogil=True)
def _add_level(out, blurred, y0, x0, lower, frac, level):
    """Add blur level ``level`` with its per-pixel weight (1 − t below, t above) to ``out``;
    ``blurred`` covers the pixels from ``(y0, x0)`` on, every pixel that uses the level."""
    for y in range(blurred.shape[0]):
        for x in range(blurred.shape[1]):
            k = lower[y0 + y, x0 + x]
            if k == level:
                w = 1.0 - frac[y0 + y, x0 + x]
            elif k + 1 == level:
                w = frac[y0 + y, x0 + x]
            else:
                continue
            for c in range(out.shape[2]):
                out[y0 + y, x0 + x, c] += w * blurred[y, x, c]
