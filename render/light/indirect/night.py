"""The night's light besides the luminaires: urban sky glow and moonlight as ambient terms.

Both are lamp-independent light terms that the path tracer (:mod:`render.light.indirect.paths`)
stores beside the luminaires' channels, on the same 5 nm transport basis, per unit level:

* **Sky glow** -- a uniform dome of luminance ``L_sky`` over the upper hemisphere (directions
  with a positive z component; a ray that leaves the scene below the horizon sees nothing).
  A cosine-sampled direction from a surface point that leaves the scene upward adds ``L_sky``
  to the point's white-diffuser luminance ``E/π``: with the cosine pdf the estimator of
  ``E/π = (1/π)·∫ L cos θ dω`` is ``L·V(ω)``, V the visibility. So an unobstructed horizontal
  plane receives ``E = π·L_sky`` and a white diffuser on it has luminance ``L_sky`` (analytic).
  The estimate is made at the camera's surface (vertex 0, the sky's direct light) and at every
  bounce vertex (its interreflected light), up to the bounce limit; pixels that see the sky
  show ``L_sky`` with the sky's spectrum (white response).
* **Moonlight** -- a parallel beam of normal illuminance ``E_n`` from elevation ``h`` and
  azimuth ``a``; at every vertex (the camera's surface included) one shadow ray toward the
  moon, adding ``E_n·cos θ/π`` where it is not shadowed, so horizontal ground in the open gets
  ``E = E_n·sin h`` and a wall of height ``H`` casts a shadow ``H/tan h`` long. The moon's disc
  is not drawn in the image, nor its specular glint on glossy surfaces (the gloss layer lets
  through ``1 − F`` to the Lambertian base, as for the luminaires).

Both are stored for unit level (1 cd/m² of sky, 1 lx of moon) and for spectra of one photopic
unit, so a new sky luminance or moon illuminance is a multiply at resolve time. A view keeps
them resolved per pixel (:mod:`render.light.indirect.view`: their spectra are fixed by
``[night]`` and no street-lamp change alters them), so there a new sky spectrum, moon CCT or
window lamp traces the view again; points keep node values, for which a new spectrum is a new
response table (no ray). A new moon direction, or turning a term on that was off when the
view was traced, traces the paths again. The luminaires' channels leave out the
camera surface's own (direct) light, which the direct-light integrator computes; the ambient
channels include it, since nothing else computes it.

**Spectra.** The sky glow takes a lamp spectrum (a built-in lamp id or a lamp file): the sky
of a lit town scatters its lamps' light. The moon reflects sunlight, slightly reddened by the
lunar surface, whose reflectance rises toward the red; it is modelled as a Planckian radiator
at ``moon_cct_k`` (default 4100 K **(from memory: moonlight's correlated colour temperature is
commonly given as about 4100 K)**), an approximation of "daylight scaled and reddened" that
needs no tabulated data.

References
----------
- Planck's law, M(λ, T) ∝ λ⁻⁵ / (exp(c₂/(λT)) − 1) with c₂ = 1.438 776 877 × 10⁻² m·K
  (CODATA 2018 value of the second radiation constant).
- Illuminance from a uniform sky of luminance L on an unobstructed horizontal plane,
  E = π·L (analytic: the cosine-weighted integral over the hemisphere).
- Moonlight's typical figures (full moon at high elevation about 0.1-0.3 lx; CCT about 4100 K)
  **(from memory)**.
"""

from __future__ import annotations

import math

import numpy as np

from render.colour.spectra import WAVELENGTHS_NM
from render.scene.model import NightLight

__all__ = [
    "C2_M_K",
    "MOON_CHANNEL",
    "SHOP_WINDOW_CHANNEL",
    "SKY_CHANNEL",
    "WINDOW_CHANNEL",
    "NightLight",
    "ambient_channel_count",
    "ambient_levels",
    "describe_night",
    "moon_direction",
    "planckian_spectrum",
]

#: Ambient channels stored after the luminaires' channels: sky glow, moonlight, then one per
#: window lamp (:attr:`NightLight.window_lamps`): the houses' windows, the shops' windows and
#: the further lamps frontages name (:mod:`render.light.indirect.windows`);
#: :func:`ambient_channel_count` says how many.
SKY_CHANNEL = 0
MOON_CHANNEL = 1
WINDOW_CHANNEL = 2
SHOP_WINDOW_CHANNEL = 3
#: Second radiation constant c₂ = h·c/k, m·K (CODATA 2018).
C2_M_K = 1.438776877e-2


def moon_direction(night: NightLight) -> np.ndarray:
    """Unit vector toward the moon: elevation above the horizon (z up), azimuth from +y toward
    +x."""
    h = math.radians(night.moon_elevation_deg)
    a = math.radians(night.moon_azimuth_deg)
    return np.array([math.cos(h) * math.sin(a), math.cos(h) * math.cos(a), math.sin(h)])


def planckian_spectrum(cct_k: float) -> np.ndarray:
    """Relative spectral exitance of a Planckian radiator at ``cct_k`` on the 1 nm grid (peak
    1; Planck's law)."""
    lam = np.asarray(WAVELENGTHS_NM, np.float64) * 1e-9
    m = lam**-5.0 / np.expm1(C2_M_K / (lam * float(cct_k)))
    return m / m.max()


def describe_night(night: NightLight) -> str:
    """One line for provenance and the report, e.g. "night light: sky glow 0.005 cd/m²
    (sodium-high-pressure-cie-hp1), moonlight 0.2 lx from 35° elevation, 180° azimuth
    (Planckian 4100 K)"; "" when off."""
    parts = []
    if night.sky_on:
        parts.append(f"sky glow {night.sky_luminance_cd_m2:g} cd/m² ({night.sky_spectrum})")
    if night.moon_on:
        parts.append(
            f"moonlight {night.moon_illuminance_lx:g} lx normal illuminance from {night.moon_elevation_deg:g}° "
            f"elevation, {night.moon_azimuth_deg:g}° azimuth (Planckian {night.moon_cct_k:g} K)"
        )
    if night.windows_on:
        parts.append(
            f"lit windows {night.window_lit_fraction:.0%} at {night.window_luminance_cd_m2:g} cd/m² "
            f"({night.window_lamp}), shop windows {night.shop_window_lit_fraction:.0%} at "
            f"{night.shop_window_luminance_cd_m2:g} cd/m² ({night.shop_window_lamp}), seed {night.window_seed}"
        )
        if night.frontages:
            # (A frontage on a further window lamp names it; the two scene-wide lamps are above.)
            parts[-1] += ", windows of their own: " + "; ".join(
                f"{f.name} {f.lit_fraction:.0%} at {f.luminance_cd_m2:g} cd/m²"
                + (f" ({f.lamp})" if f.channel >= 2 else "")
                + (f", {len(f.lit)} lit, {len(f.dark)} dark" if f.lit or f.dark else "")
                + (f", {len(f.window_luminance_cd_m2)} of their own luminance" if f.window_luminance_cd_m2 else "")
                for f in night.frontages
            )
    return "night light: " + ", ".join(parts) if parts else ""


def ambient_channel_count(night: NightLight) -> int:
    """How many ambient channels the night light has: sky glow, moonlight and one per window
    lamp (four with the two scene-wide window lamps alone)."""
    return WINDOW_CHANNEL + len(night.window_lamps)


def ambient_levels(night: NightLight) -> np.ndarray:
    """(:func:`ambient_channel_count`,) the levels the ambient channels are scaled by: the sky's
    luminance (cd/m²), the moon's normal illuminance (lx), then each window lamp's level
    (cd/m²; :attr:`NightLight.window_levels`: the houses' and shops' scene-wide window
    luminances, then each further lamp's first frontage's)."""
    return np.array([night.sky_luminance_cd_m2, night.moon_illuminance_lx, *night.window_levels], np.float64)
