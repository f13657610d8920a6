"""Small synthetic light buffers for checks and demonstrations of the vision stage.

Surfaces of known spectral reflectance (e.g. the colour-science ColorChecker averages) lit by a
known lamp spectrum are turned into the buffer contract of the stage (absolute XYZ and
scotopic luminance in cd/m²) with :mod:`render.colour.observers`. A Lambertian surface of reflectance
ρ(λ) under spectral irradiance E(λ) has spectral radiance ρ(λ)E(λ)/π; the lamp spectrum is
scaled so that a perfect white diffuser has the requested luminance.
"""

from __future__ import annotations

import numpy as np

from render.colour import observers
from render.colour.spectra import BIN_WIDTH_NM, WAVELENGTHS_NM


def _shape():
    import colour

    return colour.SpectralShape(float(WAVELENGTHS_NM[0]), float(WAVELENGTHS_NM[-1]), BIN_WIDTH_NM)


def illuminant_spd(name: str) -> np.ndarray:
    """Relative spectral power of a colour-science illuminant (``colour.SDS_ILLUMINANTS``)
    on the lampcast grid (colour-science interpolation/extrapolation)."""
    import colour

    sd = colour.SDS_ILLUMINANTS[name].copy()
    sd.interpolator = colour.LinearInterpolator
    return np.asarray(sd.align(_shape()).values, dtype=np.float64)


def colour_checker_reflectances(name: str = "ColorChecker N Ohta") -> tuple[list[str], np.ndarray]:
    """Patch names and reflectances (24, N_BINS) of a colour-science colour checker."""
    import colour

    sds = colour.SDS_COLOURCHECKERS[name]
    names = list(sds.keys())
    refl = np.stack([np.asarray(sds[k].copy().align(_shape()).values, dtype=np.float64) for k in names])
    return names, np.clip(refl, 0.0, 1.0)


def surface_buffers(reflectances: np.ndarray, spd: np.ndarray, white_luminance_cd_m2: float):
    """Absolute XYZ (…, 3) and scotopic luminance (…) of Lambertian surfaces, cd/m².

    ``spd`` is scaled so that a perfect white diffuser (ρ = 1) has photopic luminance
    ``white_luminance_cd_m2``; returns ``(xyz_cd_m2, scotopic_cd_m2, white_xyz, white_scotopic)``.
    """
    radiance_white = observers.scale_to_photopic(np.asarray(spd, dtype=np.float64), white_luminance_cd_m2)
    radiance = np.asarray(reflectances, dtype=np.float64) * radiance_white
    xyz = observers.tristimulus(radiance)
    scot = observers.scotopic(radiance)
    return xyz, scot, observers.tristimulus(radiance_white), float(observers.scotopic(radiance_white))


def patch_image(
    values: np.ndarray, rows: int, cols: int, patch_px: int, gap_px: int = 0, background=None
) -> np.ndarray:
    """Lay ``rows·cols`` per-patch values (N, ...) out as an image of square patches.

    ``background`` fills the gaps (default zeros).
    """
    values = np.asarray(values, dtype=np.float64)
    tail = values.shape[1:]
    h = rows * patch_px + (rows + 1) * gap_px
    w = cols * patch_px + (cols + 1) * gap_px
    img = np.zeros((h, w) + tail)
    if background is not None:
        img[...] = background
    for k in range(rows * cols):
        r, c = divmod(k, cols)
        y0 = gap_px + r * (patch_px + gap_px)
        x0 = gap_px + c * (patch_px + gap_px)
        img[y0 : y0 + patch_px, x0 : x0 + patch_px] = values[k]
    return img
