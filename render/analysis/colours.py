"""Telling colours apart at night: object colours, CIEDE2000, discrimination, confusions, contrast.

What is compared
----------------
For every tagged object and every lighting setup, the analysis compares

* its **colour as seen**: the mean over the visible pixels of the object's main surface (a
  car's body paint, a sign's face: :attr:`render.geometry.build.ObjectInfo.main_material`;
  glass and tyres left out) of the perceived colour the night-vision stage computes, in the
  stage's adapted viewing condition (below), and
* its **daylight reference**: the main surface's reflectance under CIE illuminant D65 at a
  comfortable photopic level, CIE 1931 2° observer, perfect diffuser Y = 100
  (:func:`reference_colour`), computed once from the reflectance, not from a view.

The adapted viewing condition (which step of the vision stage, and why)
----------------------------------------------------------------------
The vision stage (:mod:`render.vision.pipeline`) turns light into appearance in steps; the
colour analysis taps it **after steps 1-5 and the chromatic-adaptation part of step 6**:

1. ``retinal_image`` (disability glare), 2. ``measure_adaptation`` (the
   :class:`~render.vision.adaptation.AdaptationState`: m, adapting white, ...),
3-4. ``perceived_xyz`` -- absolute XYZ in cd/m² whose Y is the CIE 191 MES2 mesopic luminance
   and whose chromaticity carries rod intrusion (Cao et al. 2008), 5. acuity loss (optional),
6a. the chromatic adaptation that ``to_display`` applies before tone mapping: from the
   adapting white to the sRGB display white (a D65 white), :func:`adapted_xyz`.

Everything after that (Ward's scale factor, highlight roll-off, gamut mapping) is about the
display, not about the observer, and is left out. The adapted XYZ is then made *relative*
(:func:`relative_colour_image`): scaled so that a perfect white diffuser under the scene's
light, put through the same steps, has ``Y_white = 100`` (its perceived luminance from
:func:`white_mesopic_cd_m2`), and converted to CIELAB with the display white as reference
white. CIEDE2000 (CIE 142-2001, ISO/CIE 11664-6) is
computed on those CIELAB values. So a colour difference at night is measured as a daylight
observer would measure it between the two *appearances* the vision stage predicts: the loss of
hue under a line source and the loss of colourfulness from rod intrusion and incomplete
adaptation are included; the general rise of discrimination thresholds at low luminance is
not (CIEDE2000 has no luminance-level term), so ΔE00 overstates how visible a difference is at
night. That rise is what the discrimination model below adds. Lightness is relative to the
white at the same light level; the absolute level is reported separately as luminance and
Weber contrast.

Why the object mean is taken in XYZ
-----------------------------------
XYZ is linear in light: the mean XYZ over an object's pixels is the colour of the light the
object sends to the eye as a whole (what an observer integrates over a small, shaded object),
and it does not depend on how the pixels are split. CIELAB is non-linear, so a mean of Lab
values is biased by shading and noise toward darker, less colourful values. The mean is taken
first, then converted.

Can the pair be told apart at this light level? (the discrimination model)
------------------------------------------------------------------------------
Beside CIEDE2000, every pair of visible objects under every setup is judged by castleCSF
(:mod:`render.vision.discrimination`: Ashraf, Mantiuk, Chapiro & Wuerger 2024), whose
thresholds depend on the light level and the size of what is seen:

* **signals**: per object the mean over its main-surface pixels of the CIE 2006 cone signals
  L, M, S (L + M in cd/m²) and the scotopic luminance, from the light buffers (the absolute
  spectral radiance through :func:`render.colour.colorimetry.resolve_responses`), not from the
  display image; the glare veil is not added to them (it would lower both contrasts alike and
  is in the adaptation luminance);
* **size**: the diameter of the disc with the angular area of the object's main-surface pixels
  (exact pixel solid angles of the view, :meth:`render.vision.view.ViewGeometry.solid_angle_sr`);
  a pair is judged at the smaller of its two sizes;
* **adaptation**: the photopic adaptation luminance of an observer adapted to that setup alone
  (the view's measured :class:`~render.vision.adaptation.AdaptationState`, with glare), not the
  shared state of the side-by-side images; a pair whose objects are analysed in two views is
  judged at the lower of the two views' levels (as if seen side by side: our choice);
* **result**: the pair's multiple of threshold and a verdict: ``easy`` (at least 3 times
  threshold), ``hard`` (1-3), ``cannot`` (below 1); below castleCSF's fitted range (chromatic
  data from 0.02 cd/m²) no multiple is extrapolated: ``likely cannot`` when an upper bound is
  below 1, else ``unknown``, and the pair's note says so
  (:func:`render.vision.discrimination.discriminate_signals`).

The same adaptation state decides whether hue can be named
(:func:`render.vision.discrimination.hue_availability`): where it cannot, the night name says
"looks grey; colour not reliable at this light level" with the nearest achromatic term by
lightness (:func:`render.analysis.naming.night_name`) instead of a hue.

Pairs that become hard to tell apart
------------------------------------
:func:`confusions` lists the pairs at least :data:`DISTINCT_IN_DAYLIGHT_DE00` = 10 CIEDE2000
apart in daylight (our choice: ten JNDs, clearly different colours at a glance, so a pair lost
at night is a difference a resident relies on) whose verdict under a setup is ``hard``,
``cannot`` or ``likely cannot`` (:data:`CONFUSED_VERDICTS`). Pairs closer than 10 in daylight
are left out of the list (their figures are in :attr:`SetupColours.pairs`).

Luminance contrast
------------------
Weber contrast ``C = (L_obj − L_bg)/L_bg`` (:func:`luminance_contrast`) on the **mesopic**
luminance (the perceived Y in cd/m², CIE 191:2010), with the background chosen by the caller: a
named background object (kerb against road) or a ring of pixels around the object
(:func:`ring_background`).

The result and its JSON structure
---------------------------------
:func:`colour_analysis` returns a :class:`ColourAnalysis` (frozen records: :class:`SetupColours`,
:class:`SeenColour`, :class:`DaylightColour`, :class:`SetupDiscrimination`,
:class:`PairDifference`, :class:`NameChange`) holding
the figures as published; :meth:`ColourAnalysis.to_json` gives the JSON-safe dict written to
``colours.json`` (floats rounded, ``None`` for anything not defined, keys in a fixed order)::

    {
      "method": {...},                           # colour space, thresholds and their sources
      "objects": [{"id": 3, "name": "car", "view": "kerb"}, ...],  # matrix order; view: where analysed
      "daylight": {
        "conditions": "...",
        "objects": {"car": {"lab": [L, a, b], "lch": [L, C, h], "name": "green",
                            "name_margin": 4.2, "name_runner_up": "blue"}, ...},
        "delta_e00": [[...], ...]},
      "setups": {
        "LED 3000 K": {
          "adaptation": {...},                   # AdaptationState.as_dict() + white luminance
          "objects": {"car": {"visible": true, "pixels": 812, "lab": [...], "lch": [...],
                              "xyz_relative": [...], "name": "brown", "name_term": "brown",
                              "name_margin": 1.1, "name_runner_up": "green", "hue": "available",
                              "daylight_name": "green", "name_changed": true,
                              "delta_e00_to_daylight": 23.4, "luminance_cd_m2": 0.41,
                              "background": "ring 4 px", "background_luminance_cd_m2": 0.22,
                              "weber_contrast": 0.86, "cone_lms": [L, M, S],
                              "scotopic_cd_m2": 0.6, "size_deg": 1.9}, ...},
          "delta_e00": [[...], ...],
          "discrimination": {"adaptation_cd_m2": 0.45, "mes2_m": 0.63, "in_range": true,
                             "note": "", "hue": "available", "hue_reason": "",
                             "threshold_multiple": [[...], ...]},
          "pairs": [{"a": "car", "b": "hedge", "daylight_delta_e00": 18.2, "delta_e00": 2.1,
                     "threshold_multiple": 1.7, "verdict": "hard", "upper_bound": null,
                     "size_deg": 1.9, "adaptation_cd_m2": 0.45, "note": ""}, ...],
          "confusions": [...],                   # the pairs of the list above, hardest first
          "name_changes": [{"object": "car", "daylight": "green", "seen": "brown",
                            "text": "car: green → brown"}, ...]},
        ...}
    }

References
----------
* CIE 15:2004, Colorimetry (CIELAB, CIE 1931 2° observer, illuminant D65).
* CIE 142-2001 / ISO/CIE 11664-6:2014, the CIEDE2000 colour-difference formula.
* CIE 191:2010, recommended system for mesopic photometry (MES2).
* CIE 159:2004, CIECAM02 (typical background Y_b = 20).
* Li, Li, Wang, Zu, Luo, Cui, Melgosa, Brill & Pointer (2017), comprehensive colour solutions:
  CAM16, CAT16 and CAM16-UCS, Color Research & Application 42.
* Cao, Pokorny, Smith & Zele (2008), rod contributions to colour perception, Vision Research 48.
* Ashraf, Mantiuk, Chapiro & Wuerger (2024), castleCSF, Journal of Vision 24(4):5 (release
  v0.2.4), through :mod:`render.vision.discrimination`.
"""

from __future__ import annotations

import math
from collections.abc import Mapping, Sequence
from dataclasses import dataclass, field, fields
from functools import lru_cache
from typing import TYPE_CHECKING, Any

import numpy as np
from numpy.typing import ArrayLike

from render.colour import observers
from render.colour.spectra import N_BINS
from render.vision.discrimination.pairs import EASY_MULTIPLE, HARD_MULTIPLE

if TYPE_CHECKING:
    from render.vision.adaptation import AdaptationState
    from render.vision.discrimination import HueAvailability, SurfaceSignals
    from render.vision.observer import ObserverSettings
    from render.vision.pipeline import PerceivedView, ViewLight
    from render.vision.view import ViewGeometry

__all__ = [
    "CAVEAT",
    "CONFUSED_VERDICTS",
    "DISTINCT_IN_DAYLIGHT_DE00",
    "GREY_WORLD_FRACTION",
    "MIN_PIXELS",
    "NAMING_ADAPTATIONS",
    "RING_WIDTH_PX",
    "ROUND_CONTRAST",
    "ROUND_DE",
    "ROUND_LAB",
    "SIGNIFICANT_LUMINANCE",
    "SIGNIFICANT_MULTIPLE",
    "AnalysedObject",
    "ColourAnalysis",
    "ColourThresholds",
    "DaylightColour",
    "DaylightColours",
    "Matrix",
    "NameChange",
    "PairDifference",
    "SeenColour",
    "SetupColours",
    "SetupDiscrimination",
    "SetupView",
    "TaggedObject",
    "Triple",
    "adapted_white_xyz",
    "adapted_xyz",
    "colour_analysis",
    "confusions",
    "daylight_white_xyz",
    "delta_e_matrix",
    "discount_light_colour",
    "lab_to_lch",
    "luminance_contrast",
    "method_notes",
    "mixture_reflectance",
    "object_colour_stats",
    "object_mean",
    "perceived_view",
    "reference_colour",
    "reference_colour_mixture",
    "reference_xyz",
    "relative_colour_image",
    "ring_background",
    "viewing_white_xyz",
    "white_mesopic_cd_m2",
    "xyz_to_lab",
]

#: ΔE00 from which two colours count as clearly distinct in daylight (our choice; see module).
DISTINCT_IN_DAYLIGHT_DE00 = 10.0
#: Verdicts of the discrimination model that put a pair distinct in daylight on the list of
#: pairs that become hard to tell apart (:func:`confusions`).
CONFUSED_VERDICTS = ("hard", "cannot", "likely cannot")
#: What the figures leave out (stated with every analysis).
CAVEAT = (
    "CIEDE2000 has no light-level term, so at night its differences read as more visible than they are; the "
    "verdicts (easy, hard, cannot) come from a published model of a typical observer's contrast sensitivity "
    "(castleCSF, fitted to laboratory data down to 0.02 cd/m²), for two surfaces seen side by side and looked at; "
    "real observers, ages, glances and eye conditions differ"
)
#: Default minimum number of visible pixels for an object to be given a colour.
MIN_PIXELS = 20
#: Default width of the background ring around an object, pixels.
RING_WIDTH_PX = 4
#: CIECAM02/CAM16 relative background luminance Y_b = 20 (CIE 159:2004 typical conditions):
#: the adaptation field is taken as a 20 % grey when no white luminance is given.
GREY_WORLD_FRACTION = 0.2

#: Options of :func:`colour_analysis` for the colours that are named.
NAMING_ADAPTATIONS = ("as-seen", "discounted")

#: Decimal places used in :func:`colour_analysis` output.
ROUND_LAB = 2
ROUND_DE = 2
ROUND_CONTRAST = 3
SIGNIFICANT_LUMINANCE = 4
#: Significant figures of a published multiple of threshold.
SIGNIFICANT_MULTIPLE = 3


# ------------------------------------------------------------------------ whites and CIELAB


@lru_cache(maxsize=1)
def daylight_white_xyz() -> np.ndarray:
    """XYZ of the perfect diffuser under CIE D65, Y = 100, CIE 1931 2° (render.colour.observers)."""
    from render.colour.materials import d65_on_grid

    xyz = observers.tristimulus(d65_on_grid())
    out = 100.0 * xyz / xyz[1]
    out.setflags(write=False)
    return out


def viewing_white_xyz() -> np.ndarray:
    """Reference white of the night colours, Y = 100: the sRGB display white the vision stage
    adapts to (D65 chromaticity to within 1e-4 in x, y)."""
    from render.vision.display import display_white_xyz

    return 100.0 * display_white_xyz()


def xyz_to_lab(xyz: ArrayLike, white_xyz: ArrayLike) -> np.ndarray:
    """CIELAB (CIE 15:2004) of XYZ (..., 3) on the scale of ``white_xyz`` (3,) (e.g. Y = 100)."""
    import colour

    w = np.asarray(white_xyz, dtype=np.float64)
    xyz = np.asarray(xyz, dtype=np.float64) / w[1]
    return np.asarray(colour.XYZ_to_Lab(xyz, colour.XYZ_to_xy(w / w[1])), dtype=np.float64)


def lab_to_lch(lab: ArrayLike) -> np.ndarray:
    """CIE LCh_ab (lightness, chroma, hue angle in degrees 0-360) of CIELAB (..., 3)."""
    lab = np.asarray(lab, dtype=np.float64)
    c = np.hypot(lab[..., 1], lab[..., 2])
    h = np.degrees(np.arctan2(lab[..., 2], lab[..., 1])) % 360.0
    return np.stack([lab[..., 0], c, h], axis=-1)


# ----------------------------------------------------------------------- daylight reference


def reference_xyz(reflectance: ArrayLike) -> np.ndarray:
    """XYZ (..., 3) of reflectance(s) (..., N_BINS) under D65, perfect diffuser Y = 100."""
    from render.colour.materials import d65_on_grid

    rho = np.asarray(reflectance, dtype=np.float64)
    if rho.shape[-1] != N_BINS:
        raise ValueError(f"reflectance must have {N_BINS} values on the lampcast grid")
    s = d65_on_grid()
    return 100.0 * observers.tristimulus(rho * s) / observers.tristimulus(s)[1]


def reference_colour(reflectance: ArrayLike) -> np.ndarray:
    """Daylight reference colour: CIELAB of reflectance(s) under CIE D65.

    CIE 1931 2° observer (:func:`render.colour.observers.cmfs_xyz`), D65 from colour-science on the
    lampcast grid (:func:`render.colour.materials.d65_on_grid`), perfect diffuser Y = 100 and
    reference white = that diffuser: the colour of the surface at a comfortable photopic level
    with complete adaptation (CIELAB is relative, so the level itself does not enter).

    Parameters
    ----------
    reflectance
        (..., N_BINS) spectral reflectance, 0-1.

    Returns
    -------
    (..., 3) CIELAB L*, a*, b*.
    """
    return xyz_to_lab(reference_xyz(reflectance), daylight_white_xyz())


def mixture_reflectance(reflectances: ArrayLike, pixel_counts: ArrayLike) -> np.ndarray:
    """Pixel-count weighted mean reflectance of an object seen with several materials.

    An object whose visible pixels show ``k`` materials (a car: paint, glass, tyres) reflects,
    as a whole, the area-weighted mean of their reflectances; with equal lighting over the
    object this is exactly the reflectance whose colour is the XYZ mean over its pixels (XYZ
    is linear in reflectance), i.e. the same averaging as :func:`object_colour_stats`.

    Parameters
    ----------
    reflectances
        (k, N_BINS) reflectances.
    pixel_counts
        (k,) visible pixels of each material (any non-negative weights, not all zero).
    """
    r = np.asarray(reflectances, dtype=np.float64)
    w = np.asarray(pixel_counts, dtype=np.float64)
    if r.ndim != 2 or r.shape[1] != N_BINS or w.shape != (r.shape[0],):
        raise ValueError("need (k, N_BINS) reflectances and k pixel counts")
    if np.any(w < 0) or not w.sum() > 0:
        raise ValueError("pixel counts must be non-negative and not all zero")
    return (w[:, None] * r).sum(axis=0) / w.sum()


def reference_colour_mixture(reflectances: ArrayLike, pixel_counts: ArrayLike) -> np.ndarray:
    """:func:`reference_colour` of :func:`mixture_reflectance` (CIELAB, (3,))."""
    return reference_colour(mixture_reflectance(reflectances, pixel_counts))


# ---------------------------------------------------------------- the vision stage's colours


def adapted_xyz(xyz_perceived_cd_m2: ArrayLike, state: AdaptationState, observer: ObserverSettings) -> np.ndarray:
    """The vision stage's chromatic adaptation (first part of ``to_display``), XYZ in cd/m².

    The same step as the display (:func:`render.vision.pipeline.adapt_to_display_white`).
    """
    from render.vision.pipeline import adapt_to_display_white

    return adapt_to_display_white(np.asarray(xyz_perceived_cd_m2, dtype=np.float64), state, observer)


def white_mesopic_cd_m2(
    state: AdaptationState, white_photopic_cd_m2: float | None = None, white_scotopic_cd_m2: float | None = None
) -> float:
    """Perceived (MES2 mesopic) luminance of the reference white, cd/m²: ``Y_white`` before
    scaling to 100.

    The reference white is a perfect white diffuser under the scene's light. Give its
    photopic (and scotopic) luminance, e.g. ``E/π`` for an illuminance E lx at the objects,
    or the renderer's ``white_xyz[1]``/``white_scotopic``; the scotopic value defaults to
    photopic × the adapting white's S/P. With neither given, the adaptation field is taken as
    a 20 % grey (CIECAM02's Y_b = 20, :data:`GREY_WORLD_FRACTION`): white = adaptation
    luminance / 0.2. MES2 with the state's m (CIE 191:2010), as for every pixel.
    """
    from render.vision.mesopic import mesopic_luminance

    if white_photopic_cd_m2 is None:
        lp = state.photopic_cd_m2 / GREY_WORLD_FRACTION
        ls = state.scotopic_cd_m2 / GREY_WORLD_FRACTION
    else:
        lp = float(white_photopic_cd_m2)
        ls = lp * state.white_sp_ratio if white_scotopic_cd_m2 is None else float(white_scotopic_cd_m2)
    out = float(mesopic_luminance(state.m, lp, ls))
    if not out > 0:
        raise ValueError("the reference white has no luminance")
    return out


def relative_colour_image(
    xyz_perceived_cd_m2: ArrayLike,
    state: AdaptationState,
    observer: ObserverSettings,
    white_cd_m2: float | None = None,
) -> np.ndarray:
    """Perceived colours in the adapted viewing condition, relative to the white (Y = 100).

    The reference white is a perfect white diffuser under the setup's light: its perceived
    colour is the adapting white's chromaticity (the rod-intrusion step keeps the white's
    colour) at the perceived luminance ``white_cd_m2`` (:func:`white_mesopic_cd_m2`; its
    grey-world default if ``None``). Every pixel and the white go through
    :func:`adapted_xyz`, and the result is scaled so that the adapted white has Y = 100
    exactly (incomplete adaptation to a strongly coloured light changes Y a little). This is
    what :func:`object_colour_stats` expects; its CIELAB white is :func:`viewing_white_xyz`.
    """
    white = white_mesopic_cd_m2(state) if white_cd_m2 is None else float(white_cd_m2)
    white_adapted = adapted_white_xyz(state, observer)
    return adapted_xyz(xyz_perceived_cd_m2, state, observer) * (100.0 / (white * white_adapted[1]))


def adapted_white_xyz(state: AdaptationState, observer: ObserverSettings) -> np.ndarray:
    """The reference white after :func:`adapted_xyz`, for a perceived luminance of 1 (3,)."""
    return adapted_xyz(np.asarray(state.white_xyz, dtype=np.float64), state, observer)


def discount_light_colour(xyz_relative: ArrayLike, state: AdaptationState, observer: ObserverSettings) -> np.ndarray:
    """Colours re-adapted completely to the setup's white: CAT16 with D = 1 from the adapted
    white (:func:`adapted_white_xyz`) to the viewing white, white kept at Y = 100.

    The vision stage's adaptation may be incomplete (a warm light leaves a warm cast, as it
    does on the display); an observer naming surface colours partly discounts the light's
    colour. This gives the other limit -- full discounting -- for the naming option
    ``naming_adaptation="discounted"`` of :func:`colour_analysis`. Under a line source it
    makes every colour neutral (all surfaces share the light's chromaticity).
    """
    from render.vision.display import chromatic_adaptation_cat16

    w = adapted_white_xyz(state, observer)
    return chromatic_adaptation_cat16(xyz_relative, w, 1.0, viewing_white_xyz())


def perceived_view(
    buffers: ViewLight,
    geometry: ViewGeometry,
    observer: ObserverSettings | None = None,
    state: AdaptationState | None = None,
) -> PerceivedView:
    """Run the vision stage up to the perceived colour for one view.

    Calls :func:`render.vision.pipeline.retinal_image`, ``measure_adaptation`` (unless
    ``state`` is given: pass ``DisplayResult.state`` of the image shown, so that the analysis
    and the picture share one adaptation), ``perceived_xyz`` and, if ``observer.acuity``, the
    acuity step -- the same calls, in the same order, as ``render_display``.
    """
    from render.vision import acuity as _acuity
    from render.vision import pipeline as _pipeline
    from render.vision.observer import ObserverSettings

    observer = observer or ObserverSettings()
    buffers.check(geometry)
    retina = _pipeline.retinal_image(buffers, geometry, observer)
    xyz_r, scot_r = retina.xyz_cd_m2, retina.scotopic_cd_m2
    if state is None:
        state = _pipeline.measure_adaptation(
            xyz_r, scot_r, geometry, observer, _pipeline.exclusion_mask(buffers, observer), buffers
        )
    xyz_p, lmes = _pipeline.perceived_xyz(xyz_r, scot_r, state, observer, retina.lms_cd_m2)
    if observer.acuity:
        xyz_p, _ = _acuity.apply_acuity(xyz_p, retina.local_adaptation_cd_m2, geometry)
    return _pipeline.PerceivedView(xyz_p, lmes, state, observer)


# ------------------------------------------------------------------------- object statistics


def _object_masks(object_id: np.ndarray, object_ids: Sequence[int], erode_px: int):
    from scipy.ndimage import binary_erosion

    oid = np.asarray(object_id)
    if oid.ndim != 2:
        raise ValueError("object_id must be an (H, W) integer image")
    for k in object_ids:
        mask = oid == int(k)
        if erode_px > 0 and mask.any():
            mask = binary_erosion(mask, iterations=int(erode_px), border_value=1)
        yield int(k), mask


def object_colour_stats(
    perceived_xyz: ArrayLike,
    object_id: ArrayLike,
    object_ids: Sequence[int],
    min_pixels: int = MIN_PIXELS,
    *,
    erode_px: int = 0,
    white_xyz: ArrayLike | None = None,
) -> dict[int, dict[str, Any]]:
    """Mean colour of each tagged object over its visible pixels.

    Parameters
    ----------
    perceived_xyz
        (H, W, 3) perceived XYZ relative to the adapted white, Y_white = 100
        (:func:`relative_colour_image` of the vision stage's ``perceived_xyz``).
    object_id
        (H, W) integer object-id image (the renderer's id buffer); other ids are ignored.
    object_ids
        The tagged ids to report.
    min_pixels
        Objects with fewer visible pixels are reported as not visible (no colour).
    erode_px
        Shrink each object's mask by this many pixels first (to drop edge pixels mixed with
        the background by anti-aliasing or the acuity blur). Default 0.
    white_xyz
        CIELAB reference white (Y = 100); default :func:`viewing_white_xyz`.

    Returns
    -------
    dict id -> {"visible": bool, "pixels": int, "xyz": (3,) or None, "lab": (3,) or None}
        ``xyz`` is the mean over the pixels (taken in XYZ, see module text), ``lab`` its
        CIELAB.
    """
    xyz = np.asarray(perceived_xyz, dtype=np.float64)
    if xyz.ndim != 3 or xyz.shape[2] != 3 or xyz.shape[:2] != np.shape(object_id):
        raise ValueError("perceived_xyz must be (H, W, 3) matching the (H, W) object_id image")
    white = viewing_white_xyz() if white_xyz is None else np.asarray(white_xyz, dtype=np.float64)
    out: dict[int, dict] = {}
    for k, mask in _object_masks(object_id, object_ids, erode_px):
        n = int(mask.sum())
        if n < max(int(min_pixels), 1):
            out[k] = {"visible": False, "pixels": n, "xyz": None, "lab": None}
            continue
        mean = xyz[mask].mean(axis=0)
        out[k] = {"visible": True, "pixels": n, "xyz": mean, "lab": xyz_to_lab(mean, white)}
    return out


def object_mean(
    values: ArrayLike, object_id: ArrayLike, object_ids: Sequence[int], min_pixels: int = 1, *, erode_px: int = 0
) -> dict[int, float | None]:
    """Mean of a scalar image (e.g. luminance, cd/m²) over each object's pixels (None if fewer
    than ``min_pixels``)."""
    v = np.asarray(values, dtype=np.float64)
    out = {}
    for k, mask in _object_masks(object_id, object_ids, erode_px):
        out[k] = float(v[mask].mean()) if mask.sum() >= max(min_pixels, 1) else None
    return out


def ring_background(
    mask: ArrayLike, luminance: ArrayLike, width_px: float = RING_WIDTH_PX, exclude: ArrayLike | None = None
) -> tuple[float | None, int]:
    """Mean luminance of the ring of pixels around an object: its local background.

    The ring is every pixel outside ``mask`` within ``width_px`` (Euclidean distance between
    pixel centres) of it, less the pixels where ``exclude`` is true (luminaire openings, other
    objects). Returns ``(mean luminance or None, number of ring pixels)``.
    """
    from scipy.ndimage import distance_transform_edt

    m = np.asarray(mask, dtype=bool)
    lum = np.asarray(luminance, dtype=np.float64)
    if m.shape != lum.shape:
        raise ValueError("mask and luminance must have one shape")
    if not m.any():
        return None, 0
    # The ring lies within width_px of the mask: the distances there are the same over the
    # mask's bounding box widened by that much as over the whole image, and the ring's pixels
    # come in the same order.
    box: tuple[slice, slice] = (slice(None), slice(None))
    if math.isfinite(float(width_px)):
        reach = int(math.ceil(float(width_px))) + 1
        rows, cols = np.flatnonzero(m.any(axis=1)), np.flatnonzero(m.any(axis=0))
        box = (
            slice(max(int(rows[0]) - reach, 0), int(rows[-1]) + reach + 1),
            slice(max(int(cols[0]) - reach, 0), int(cols[-1]) + reach + 1),
        )
    d = distance_transform_edt(~m[box])
    ring = (d > 0) & (d <= float(width_px))
    if exclude is not None:
        ring &= ~np.asarray(exclude, dtype=bool)[box]
    n = int(ring.sum())
    return (float(lum[box][ring].mean()) if n else None), n


def luminance_contrast(object_luminance: ArrayLike, background_luminance: ArrayLike) -> float | np.ndarray:
    """Weber contrast ``(L_obj − L_bg) / L_bg`` (dimensionless; NaN where L_bg ≤ 0).

    Positive: the object is brighter than its background; −1: a black object. Broadcasts.
    """
    lo = np.asarray(object_luminance, dtype=np.float64)
    lb = np.asarray(background_luminance, dtype=np.float64)
    out = np.divide(lo - lb, lb, out=np.full(np.broadcast(lo, lb).shape, np.nan), where=lb > 0)
    return float(out) if out.ndim == 0 else out


# ------------------------------------------------------------------------ colour differences


def delta_e_matrix(labs: ArrayLike) -> np.ndarray:
    """Pairwise CIEDE2000 (CIE 142-2001; colour-science ``delta_E(method="CIE 2000")``).

    ``labs`` (n, 3) CIELAB; rows of NaN (objects not visible) give NaN rows and columns.
    Returns the symmetric (n, n) matrix with a zero diagonal for defined colours.
    """
    import colour

    lab = np.asarray(labs, dtype=np.float64).reshape(-1, 3)
    with np.errstate(invalid="ignore"):
        de = np.asarray(colour.delta_E(lab[:, None, :], lab[None, :, :], method="CIE 2000"), dtype=np.float64)
    de = 0.5 * (de + de.T)  # CIEDE2000 is symmetric up to rounding
    ok = np.all(np.isfinite(lab), axis=1)
    de[np.ix_(ok, ok)] = np.where(np.eye(int(ok.sum()), dtype=bool), 0.0, de[np.ix_(ok, ok)])
    return de


def confusions(
    pairs: Sequence[PairDifference], distinct_in_daylight: float = DISTINCT_IN_DAYLIGHT_DE00
) -> list[PairDifference]:
    """Pairs that are distinct in daylight and hard to tell apart under a setup.

    A pair is listed when its ``daylight_delta_e00 ≥ distinct_in_daylight`` and its verdict
    (the discrimination model's, at the setup's light level and the pair's size) is one of
    :data:`CONFUSED_VERDICTS`. Sorted hardest first: by the multiple of threshold (or, below
    the model's range, its upper bound), then by name.
    """
    out = [
        p
        for p in pairs
        if p.daylight_delta_e00 is not None
        and p.daylight_delta_e00 >= distinct_in_daylight
        and p.verdict in CONFUSED_VERDICTS
    ]

    def hardness(p: PairDifference) -> float:
        x = p.threshold_multiple if p.threshold_multiple is not None else p.upper_bound
        return math.inf if x is None else float(x)

    out.sort(key=lambda p: (hardness(p), p.a, p.b))
    return out


# ------------------------------------------------------------------------------ the analysis


@dataclass(frozen=True)
class TaggedObject:
    """An object whose colour is analysed.

    Attributes
    ----------
    id
        Its value in the object-id image.
    name
        Label for tables and pictures ("car", "kerb").
    reflectance
        (N_BINS,) reflectance for the daylight reference; for several materials pass
        :func:`mixture_reflectance` of them.
    background
        ``None``: a ring of ``ring_px`` pixels around the object; or the id of a named
        background object (the road behind a kerb, the footway behind a pedestrian).
    ring_px
        Ring width, pixels.
    """

    id: int
    name: str
    reflectance: np.ndarray = field(repr=False)
    background: int | None = None
    ring_px: float = RING_WIDTH_PX


@dataclass
class SetupView:
    """One lighting setup as seen, the input :func:`colour_analysis` needs per setup.

    Attributes
    ----------
    perceived_xyz_cd_m2
        (H, W, 3) the vision stage's perceived XYZ, cd/m² (:attr:`render.vision.pipeline.PerceivedView.xyz_cd_m2`).
    object_id
        (H, W) integer object-id image of the same view.
    state
        The :class:`~render.vision.adaptation.AdaptationState` used for the view.
    observer
        The :class:`~render.vision.observer.ObserverSettings` used (for the adaptation step).
    white_photopic_cd_m2, white_scotopic_cd_m2
        Luminance of a perfect white diffuser under the setup's light at the objects
        (see :func:`white_mesopic_cd_m2`); ``None``: grey-world default.
    luminance_cd_m2
        (H, W) luminance for the contrasts; default the perceived Y (MES2 mesopic luminance).
    exclude
        (H, W) bool, pixels never used as background (luminaire openings, sky).
    cone_rod_cd_m2
        (H, W, 4) the CIE 2006 cone signals L, M, S (L + M in cd/m²) and the scotopic luminance
        (cd/m²) of each pixel from the light buffers
        (:func:`render.vision.discrimination.cone_rod_weights`); only the tagged objects'
        pixels are read, so the other pixels may be left 0; ``None``: pairs not judged.
    solid_angle_sr
        (H, W) solid angle of each pixel, sr (:meth:`render.vision.view.ViewGeometry.solid_angle_sr`);
        ``None``: pairs not judged.
    own_state
        The adaptation state of an observer adapted to this setup alone, which the
        discrimination model and the hue rule use; ``None``: ``state``.
    """

    perceived_xyz_cd_m2: np.ndarray
    object_id: np.ndarray
    state: AdaptationState
    observer: ObserverSettings
    white_photopic_cd_m2: float | None = None
    white_scotopic_cd_m2: float | None = None
    luminance_cd_m2: np.ndarray | None = None
    exclude: np.ndarray | None = None
    cone_rod_cd_m2: np.ndarray | None = None
    solid_angle_sr: np.ndarray | None = None
    own_state: AdaptationState | None = None

    @property
    def discrimination_state(self) -> AdaptationState:
        """The state the discrimination model and the hue rule use (``own_state`` or ``state``)."""
        return self.own_state if self.own_state is not None else self.state

    @classmethod
    def from_view(cls, view: PerceivedView, object_id: np.ndarray, **kwargs: Any) -> SetupView:
        """Build from :func:`perceived_view`'s result."""
        return cls(view.xyz_cd_m2, object_id, view.state, view.observer, **kwargs)


# ------------------------------------------------------------------------------ the result

#: A CIELAB, LCh or XYZ triple as published (rounded; ``None`` for an undefined component).
Triple = tuple[float | None, float | None, float | None]
#: A square ΔE00 matrix as published, in the order of :attr:`ColourAnalysis.objects`.
Matrix = tuple[tuple[float | None, ...], ...]


@dataclass(frozen=True)
class ColourThresholds:
    """The thresholds of :func:`confusions` and the verdicts (values and sources: the module
    text and :mod:`render.vision.discrimination.pairs`)."""

    distinct_in_daylight_delta_e00: float = DISTINCT_IN_DAYLIGHT_DE00
    easy_multiple: float = EASY_MULTIPLE
    hard_multiple: float = HARD_MULTIPLE


@dataclass(frozen=True)
class AnalysedObject:
    """One tagged object of the analysis: its id in the object-id image, its label and the
    view it was analysed in (``None`` when the analysis had one unnamed view)."""

    id: int
    name: str
    view: str | None = None

    def to_json(self) -> dict[str, Any]:
        out: dict[str, Any] = {"id": self.id, "name": self.name}
        if self.view is not None:
            out["view"] = self.view
        return out


@dataclass(frozen=True)
class DaylightColour:
    """An object's daylight reference colour (:func:`reference_colour`) and its name."""

    lab: Triple
    lch: Triple
    name: str | None
    name_margin: float | None
    name_runner_up: str | None

    def to_json(self) -> dict[str, Any]:
        return _record_json(self)


@dataclass(frozen=True)
class SeenColour:
    """An object as seen under one setup: colour, name, difference to daylight, contrast, and
    what the discrimination model is given.

    ``lab``, ``lch``, ``xyz_relative``, the name fields and ``delta_e00_to_daylight`` are
    ``None`` when the object has fewer visible pixels than the analysis asks for
    (``visible`` false). ``background`` says what the contrast is taken against. ``name`` is
    the night name as shown: the basic term ``name_term``, or, where ``hue`` (the
    :func:`render.vision.discrimination.hue_availability` level of the object's view) is not
    ``"available"``, "looks TERM; colour not reliable at this light level" with an achromatic
    term. ``cone_lms`` (L + M in cd/m²), ``scotopic_cd_m2`` and ``size_deg`` are the object's
    mean cone signals, scotopic luminance and angular size (``None``: not given).
    """

    visible: bool
    pixels: int
    lab: Triple | None
    lch: Triple | None
    xyz_relative: Triple | None
    name: str | None
    name_term: str | None
    name_margin: float | None
    name_runner_up: str | None
    hue: str | None
    daylight_name: str | None
    name_changed: bool
    delta_e00_to_daylight: float | None
    luminance_cd_m2: float | None
    background: str
    background_luminance_cd_m2: float | None
    weber_contrast: float | None
    cone_lms: Triple | None = None
    scotopic_cd_m2: float | None = None
    size_deg: float | None = None

    def to_json(self) -> dict[str, Any]:
        return _record_json(self)


@dataclass(frozen=True)
class PairDifference:
    """Two objects under one setup: CIEDE2000 beside the light-level-aware verdict.

    Attributes
    ----------
    a, b
        The objects' names (in the order of :attr:`ColourAnalysis.objects`).
    daylight_delta_e00, delta_e00
        CIEDE2000 in daylight and between the colours as seen.
    threshold_multiple
        The pair's multiple of threshold (castleCSF); ``None`` when not judged or outside the
        model's range.
    verdict
        ``easy``, ``hard``, ``cannot``, ``likely cannot`` or ``unknown``
        (:data:`render.vision.discrimination.VERDICTS`).
    upper_bound
        Below the model's range: the upper bound of the multiple; else ``None``.
    size_deg, adaptation_cd_m2
        The angular size and photopic adaptation luminance the pair was judged at.
    note
        Empty, or why the verdict is limited (e.g. below the model's range).
    """

    a: str
    b: str
    daylight_delta_e00: float | None
    delta_e00: float | None
    threshold_multiple: float | None
    verdict: str
    upper_bound: float | None = None
    size_deg: float | None = None
    adaptation_cd_m2: float | None = None
    note: str = ""

    def to_json(self) -> dict[str, Any]:
        return _record_json(self)

    @classmethod
    def from_json(cls, data: Mapping[str, Any]) -> PairDifference:
        """The record of :meth:`to_json`'s content (missing fields take their defaults)."""
        given = {f.name: data[f.name] for f in fields(cls) if f.name in data}
        given.setdefault("threshold_multiple", None)
        given.setdefault("verdict", "unknown")
        return cls(**given)


@dataclass(frozen=True)
class SetupDiscrimination:
    """The discrimination model under one setup: the adaptation state the pairs were judged at
    (of the first object's view; pairs across views name their own level), whether that is
    within the model's range, whether hue is available there, and the matrix of multiples of
    threshold (``None`` where not judged)."""

    adaptation_cd_m2: float | None
    mes2_m: float | None
    in_range: bool
    note: str
    hue: str
    hue_reason: str
    threshold_multiple: Matrix

    def to_json(self) -> dict[str, Any]:
        out = _record_json(self)
        out["threshold_multiple"] = _matrix_json(self.threshold_multiple)
        return out

    @classmethod
    def from_json(cls, data: Mapping[str, Any]) -> SetupDiscrimination:
        """The record of :meth:`to_json`'s content."""
        return cls(
            data.get("adaptation_cd_m2"),
            data.get("mes2_m"),
            bool(data.get("in_range")),
            str(data.get("note") or ""),
            str(data.get("hue") or ""),
            str(data.get("hue_reason") or ""),
            tuple(tuple(row) for row in data.get("threshold_multiple") or ()),
        )


@dataclass(frozen=True)
class NameChange:
    """An object whose predicted colour name under a setup differs from its daylight name."""

    object: str
    daylight: str | None
    seen: str | None

    @property
    def text(self) -> str:
        """E.g. ``"car: green → brown"``."""
        return f"{self.object}: {self.daylight} → {self.seen}"

    def to_json(self) -> dict[str, Any]:
        return {**_record_json(self), "text": self.text}


@dataclass(frozen=True)
class DaylightColours:
    """The daylight reference of every object and their pairwise ΔE00."""

    conditions: str
    objects: Mapping[str, DaylightColour]
    delta_e00: Matrix

    def to_json(self) -> dict[str, Any]:
        return {
            "conditions": self.conditions,
            "objects": {name: c.to_json() for name, c in self.objects.items()},
            "delta_e00": _matrix_json(self.delta_e00),
        }


@dataclass(frozen=True)
class SetupColours:
    """Everything the analysis finds for one setup.

    Attributes
    ----------
    state
        The adaptation state the colours were seen with
        (:class:`~render.vision.adaptation.AdaptationState`; anything without ``as_dict``
        is published as an empty mapping).
    white_mesopic_cd_m2
        Perceived luminance of the reference white (:func:`white_mesopic_cd_m2`).
    objects
        Object name -> :class:`SeenColour`, in the order of :attr:`ColourAnalysis.objects`.
    delta_e00
        Pairwise ΔE00 of the colours as seen (``None`` where an object is not visible).
    discrimination
        The discrimination model's state and matrix (:class:`SetupDiscrimination`).
    pairs
        Every pair of visible objects (:class:`PairDifference`), in matrix order.
    confusions, name_changes
        The pairs that become hard to tell apart (:func:`confusions`, hardest first) and the
        names that change.
    """

    state: AdaptationState = field(repr=False)
    white_mesopic_cd_m2: float | None
    objects: Mapping[str, SeenColour]
    delta_e00: Matrix
    discrimination: SetupDiscrimination
    pairs: tuple[PairDifference, ...]
    confusions: tuple[PairDifference, ...]
    name_changes: tuple[NameChange, ...]

    def to_json(self) -> dict[str, Any]:
        adaptation = _json_safe(self.state.as_dict()) if hasattr(self.state, "as_dict") else {}
        adaptation["white_mesopic_cd_m2"] = self.white_mesopic_cd_m2
        return {
            "adaptation": adaptation,
            "objects": {name: c.to_json() for name, c in self.objects.items()},
            "delta_e00": _matrix_json(self.delta_e00),
            "discrimination": self.discrimination.to_json(),
            "pairs": [c.to_json() for c in self.pairs],
            "confusions": [c.to_json() for c in self.confusions],
            "name_changes": [c.to_json() for c in self.name_changes],
        }


@dataclass(frozen=True)
class ColourAnalysis:
    """The colour analysis of one view under several setups (:func:`colour_analysis`).

    Figures are held as they are published (rounded: :data:`ROUND_LAB`, :data:`ROUND_DE`,
    :data:`ROUND_CONTRAST` decimals, :data:`SIGNIFICANT_LUMINANCE` significant figures for
    luminances); :meth:`to_json` gives the JSON structure of the module text.

    Attributes
    ----------
    thresholds
        The thresholds the confusions were found with.
    naming_adaptation
        One of :data:`NAMING_ADAPTATIONS`.
    objects
        The tagged objects, in the order of every matrix.
    daylight
        Their daylight reference colours.
    setups
        Setup label -> :class:`SetupColours`, in the order given.
    """

    thresholds: ColourThresholds
    naming_adaptation: str
    objects: tuple[AnalysedObject, ...]
    daylight: DaylightColours
    setups: Mapping[str, SetupColours]

    @property
    def object_names(self) -> list[str]:
        return [o.name for o in self.objects]

    def method_notes(self) -> dict[str, Any]:
        """The method statements of this analysis (JSON-safe; :func:`method_notes`)."""
        notes = method_notes(self.thresholds.distinct_in_daylight_delta_e00)
        return {**notes, "naming_adaptation": self.naming_adaptation}

    def name_rows(self) -> list[dict[str, Any]]:
        """The rows of :func:`render.output.colour_text.format_name_table`: per object the view
        it was analysed in (``None``: the one view), its daylight name, the name seen under each setup (``None``: not visible) and the setups under which
        the name changes."""
        rows = []
        for obj in self.objects:
            name = obj.name
            seen = {label: s.objects[name] for label, s in self.setups.items()}
            rows.append(
                {
                    "object": name,
                    "view": obj.view,
                    "daylight": self.daylight.objects[name].name,
                    "setups": {label: c.name if c.visible else None for label, c in seen.items()},
                    "changed": [label for label, c in seen.items() if c.visible and c.name_changed],
                }
            )
        return rows

    def name_change_rows(self) -> list[dict[str, Any]]:
        """The rows of :meth:`name_rows` whose name changes under at least one setup: one
        column per lighting (``setups``: the name seen under each, ``None``: not visible;
        ``changed``: the setups under which it differs from the daylight name)."""
        return [r for r in self.name_rows() if r["changed"]]

    def confusion_rows(self) -> list[dict[str, Any]]:
        """Every pair that becomes hard to tell apart under every setup, in setup order then
        hardest first: ``{"setup", **PairDifference.to_json()}`` (empty: none)."""
        return [{"setup": label, **c.to_json()} for label, s in self.setups.items() for c in s.confusions]

    def pair_rows(self) -> list[dict[str, Any]]:
        """Every pair of objects, in matrix order, with its figures under each setup:
        ``{"a", "b", "daylight_delta_e00", "setups": {label: PairDifference or None}}``
        (``None``: an object of the pair is not visible under that setup)."""
        names = self.object_names
        found = {label: {(p.a, p.b): p for p in s.pairs} for label, s in self.setups.items()}
        day = self.daylight.delta_e00
        return [
            {
                "a": names[i],
                "b": names[j],
                "daylight_delta_e00": day[i][j],
                "setups": {label: found[label].get((names[i], names[j])) for label in self.setups},
            }
            for i in range(len(names))
            for j in range(i + 1, len(names))
        ]

    def to_json(self) -> dict[str, Any]:
        """The JSON structure of the module text (JSON-safe: no NaN, keys in a fixed order)."""
        return {
            "method": self.method_notes(),
            "objects": [o.to_json() for o in self.objects],
            "daylight": self.daylight.to_json(),
            "setups": {label: s.to_json() for label, s in self.setups.items()},
        }


def _record_json(record) -> dict[str, Any]:
    """A flat record's fields in declaration order, tuples as lists."""
    return {f.name: _json_value(getattr(record, f.name)) for f in fields(record)}


def _json_value(value):
    return [_json_value(v) for v in value] if isinstance(value, tuple) else value


def _matrix_json(m: Matrix) -> list[list[float | None]]:
    return [list(row) for row in m]


# ------------------------------------------------------------------------------ the analysis


def _num(x, digits: int) -> float | None:
    if x is None:
        return None
    x = float(x)
    return round(x, digits) if np.isfinite(x) else None


def _sig(x, digits: int = SIGNIFICANT_LUMINANCE) -> float | None:
    if x is None or not np.isfinite(x):
        return None
    x = float(x)
    return float(f"{x:.{digits}g}")


def _vec(v, digits: int) -> Triple | None:
    return None if v is None else tuple(_num(x, digits) for x in np.asarray(v, dtype=np.float64))


def _matrix(m, digits: int) -> Matrix:
    return tuple(tuple(_num(x, digits) for x in row) for row in np.asarray(m, dtype=np.float64))


def _json_safe(value):
    if isinstance(value, dict):
        return {str(k): _json_safe(v) for k, v in value.items()}
    if isinstance(value, (list, tuple)):
        return [_json_safe(v) for v in value]
    if isinstance(value, (np.floating, float)):
        return _sig(value, 6)
    if isinstance(value, (np.integer,)):
        return int(value)
    if isinstance(value, np.bool_):
        return bool(value)
    return value


def method_notes(distinct_in_daylight: float = DISTINCT_IN_DAYLIGHT_DE00) -> dict[str, Any]:
    """The method statements that go with every analysis (JSON-safe)."""
    from render.analysis.naming import naming_model_notes
    from render.vision.discrimination import castle_params as castle

    lo, hi = castle.CHROMATIC_LUMINANCE_RANGE_CD_M2
    r_lo, r_hi = castle.DISC_RADIUS_RANGE_DEG
    return {
        "colour_as_seen": "mean over the visible pixels of the object's main surface of the vision stage's perceived XYZ "
        "(CIE 191 MES2 luminance, rod intrusion, glare, acuity), after its chromatic "
        "adaptation to the display white, relative to a perfect white diffuser under the "
        "setup's light (Y = 100); mean taken in XYZ, then CIELAB",
        "daylight_reference": "the main surface's reflectance under CIE D65, CIE 1931 2 degree observer, perfect diffuser "
        "Y = 100, complete adaptation",
        "colour_difference": "CIEDE2000 (CIE 142-2001) on those CIELAB values; no light-level term",
        "discrimination": {
            "model": f"castleCSF (Ashraf, Mantiuk, Chapiro & Wuerger 2024, Journal of Vision 24(4):5), "
            f"{castle.CASTLE_RELEASE}: achromatic, red-green and yellow-violet mechanisms, disc rule of "
            "Ashraf, Mantiuk & Chapiro 2023",
            "signals": "mean CIE 2006 cone signals (L + M in cd/m2) and scotopic luminance over the object's "
            "main-surface pixels, from the rendered spectral radiance (light buffers), glare veil not added",
            "stimulus": "the two surfaces as a disc of one on the other, looked at, static; disc diameter from the "
            "smaller object's angular area",
            "adaptation": "the photopic adaptation luminance of an observer adapted to that setup alone (the view's "
            "measured adaptation state, glare included); pairs across two views at the lower level",
            "verdicts": f"easy at {EASY_MULTIPLE:g} or more times threshold, hard from {HARD_MULTIPLE:g} to "
            f"{EASY_MULTIPLE:g}, cannot below {HARD_MULTIPLE:g} (lampcast's cut-offs, no source: threshold is "
            "laboratory detection)",
            "fitted_range": f"chromatic data {lo:g}-{hi:g} cd/m2, disc radii {r_lo:.3g}-{r_hi:g} degrees (sizes "
            f"outside clamped); below {lo:g} cd/m2 nothing is extrapolated: 'likely cannot' when an upper bound is "
            "below 1, else 'unknown'",
            "hue": "hue is named only where available (CIE 191 MES2 m at least that of the model's dimmest "
            f"chromatic data and adaptation at least {lo:g} cd/m2); elsewhere the night name says "
            "'looks TERM; colour not reliable at this light level' with an achromatic term",
        },
        "thresholds": {
            "distinct_in_daylight_delta_e00": distinct_in_daylight,
            "distinct_in_daylight_source": "lampcast's choice: ten JNDs, clearly different at a glance",
            "hard_to_tell_apart": "pairs distinct in daylight whose verdict under a setup is "
            + ", ".join(CONFUSED_VERDICTS),
        },
        "contrast": "Weber contrast (L_obj - L_bg)/L_bg of the mesopic luminance; background a ring "
        "around the object or a named background object",
        "caveat": CAVEAT,
        "naming": naming_model_notes(),
    }


@dataclass(frozen=True)
class _SeenIn:
    """The per-view figures :func:`colour_analysis` takes an object's colour from."""

    stats: dict[int, dict[str, Any]]
    naming_stats: dict[int, dict[str, Any]]
    lum: np.ndarray
    lum_obj: dict[int, float | None]
    oid: np.ndarray
    signals: dict[int, SurfaceSignals]
    size_deg: dict[int, float]
    state: AdaptationState
    hue: HueAvailability


def _seen_in(sv: SetupView, ids: list[int], min_pixels: int, erode_px: int, naming_adaptation: str) -> _SeenIn:
    """Colour statistics, luminances and discrimination inputs of the objects ``ids`` in one
    setup view."""
    from render.vision.discrimination import SurfaceSignals, disc_diameter_deg, hue_availability

    white = white_mesopic_cd_m2(sv.state, sv.white_photopic_cd_m2, sv.white_scotopic_cd_m2)
    rel = relative_colour_image(sv.perceived_xyz_cd_m2, sv.state, sv.observer, white)
    stats = object_colour_stats(rel, sv.object_id, ids, min_pixels, erode_px=erode_px)
    if naming_adaptation == "discounted":
        naming_stats = object_colour_stats(
            discount_light_colour(rel, sv.state, sv.observer), sv.object_id, ids, min_pixels, erode_px=erode_px
        )
    else:
        naming_stats = stats
    lum = (
        np.asarray(sv.perceived_xyz_cd_m2, dtype=np.float64)[..., 1]
        if sv.luminance_cd_m2 is None
        else np.asarray(sv.luminance_cd_m2, dtype=np.float64)
    )
    lum_obj = object_mean(lum, sv.object_id, ids, min_pixels, erode_px=erode_px)
    signals: dict[int, SurfaceSignals] = {}
    if sv.cone_rod_cd_m2 is not None:
        cone_rod = np.asarray(sv.cone_rod_cd_m2, dtype=np.float64)
        if cone_rod.shape != np.shape(sv.object_id) + (4,):
            raise ValueError("cone_rod_cd_m2 must be (H, W, 4) matching the (H, W) object_id image")
        for k, mask in _object_masks(sv.object_id, ids, erode_px):
            if stats[k]["visible"]:
                lms_s = cone_rod[mask].mean(axis=0)
                signals[k] = SurfaceSignals((float(lms_s[0]), float(lms_s[1]), float(lms_s[2])), float(lms_s[3]))
    size_deg: dict[int, float] = {}
    if sv.solid_angle_sr is not None:
        solid = np.asarray(sv.solid_angle_sr, dtype=np.float64)
        for k, mask in _object_masks(sv.object_id, ids, 0):
            if stats[k]["visible"]:
                size_deg[k] = disc_diameter_deg(float(solid[mask].sum()) * math.degrees(1.0) ** 2)
    state = sv.discrimination_state
    hue = hue_availability(state.photopic_cd_m2, state.m)
    return _SeenIn(stats, naming_stats, lum, lum_obj, np.asarray(sv.object_id), signals, size_deg, state, hue)


def _judge_pair(a: _SeenIn, b: _SeenIn, i: int, j: int):
    """The discrimination model for objects ``i`` (seen in ``a``) and ``j`` (seen in ``b``), or
    ``None`` and why not when an input is missing."""
    from render.vision.discrimination import discriminate_signals

    if i not in a.signals or j not in b.signals:
        return None, "no light buffers: not judged"
    if i not in a.size_deg or j not in b.size_deg:
        return None, "angular size unknown: not judged"
    adaptation = min(a.state.photopic_cd_m2, b.state.photopic_cd_m2)
    size = min(a.size_deg[i], b.size_deg[j])
    if not size > 0:
        return None, "no angular size: not judged"
    return discriminate_signals(a.signals[i], b.signals[j], adaptation, size), ""


def _name_seen(lab, hue: HueAvailability) -> dict[str, Any] | None:
    """The night name of a colour: its basic term where hue is available, else the achromatic
    term by lightness said as "looks TERM; colour not reliable at this light level"."""
    from render.analysis.naming import colour_name_details, lightness_name_details, night_name

    if hue.available:
        nm = colour_name_details(lab)
        return None if nm is None else {**nm, "name": nm["term"]}
    nm = lightness_name_details(lab)
    return None if nm is None else {**nm, "name": night_name(nm["term"])}


def colour_analysis(
    objects: Sequence[TaggedObject],
    setups: Mapping[str, SetupView | Mapping[int, SetupView]],
    *,
    object_views: Mapping[int, str] | None = None,
    min_pixels: int = MIN_PIXELS,
    erode_px: int = 0,
    distinct_in_daylight: float = DISTINCT_IN_DAYLIGHT_DE00,
    naming_adaptation: str = "as-seen",
) -> ColourAnalysis:
    """The whole colour analysis (its JSON structure: the module text).

    Parameters
    ----------
    objects
        The tagged objects (their order is the order of every matrix).
    setups
        Setup label -> :class:`SetupView` (kept in the given order), or -> object id ->
        :class:`SetupView` when each object is seen in its own view (the setup's adaptation
        state and white are then those of the first object's view).
    object_views
        Object id -> name of the view it is analysed in (published with the objects).
    min_pixels, erode_px
        See :func:`object_colour_stats`.
    distinct_in_daylight
        Daylight ΔE00 from which a pair can be listed by :func:`confusions`.
    naming_adaptation
        ``"as-seen"`` (default): names of the colours as the vision stage predicts them seen;
        ``"discounted"``: names after complete adaptation to the setup's light
        (:func:`discount_light_colour`) -- the observer who has fully discounted the light's
        colour. Colours, ΔE00 and the pairs' verdicts are always as seen.
    """
    if naming_adaptation not in NAMING_ADAPTATIONS:
        raise ValueError(f"naming_adaptation must be one of {NAMING_ADAPTATIONS}")
    from render.analysis.naming import colour_name_details

    objects = list(objects)
    ids = [int(o.id) for o in objects]
    if len(set(ids)) != len(ids):
        raise ValueError("object ids must be unique")
    names = [o.name for o in objects]
    if len(set(names)) != len(names):
        raise ValueError("object names must be unique")

    day_lab = np.stack([reference_colour(o.reflectance) for o in objects]) if objects else np.zeros((0, 3))
    day_de = delta_e_matrix(day_lab)
    day_names = [colour_name_details(lab) for lab in day_lab]
    daylight = DaylightColours(
        conditions="CIE D65, CIE 1931 2 degree observer, perfect diffuser Y = 100",
        objects={
            o.name: DaylightColour(
                lab=_vec(lab, ROUND_LAB),
                lch=_vec(lab_to_lch(lab), ROUND_LAB),
                name=nm["term"],
                name_margin=_num(nm["margin"], ROUND_DE),
                name_runner_up=nm["runner_up"],
            )
            for o, lab, nm in zip(objects, day_lab, day_names)
        },
        delta_e00=_matrix(day_de, ROUND_DE),
    )

    out_setups = {}
    for label, given in setups.items():
        per_object = {k: given for k in ids} if isinstance(given, SetupView) else {k: given[k] for k in ids}
        first = given if isinstance(given, SetupView) else (per_object[ids[0]] if ids else None)
        if first is None:
            raise ValueError("a setup given per object needs at least one object")
        seen_in: dict[int, _SeenIn] = {}
        for sv in {id(v): v for v in per_object.values()}.values():
            group = [k for k in ids if per_object[k] is sv]
            seen_in[id(sv)] = _seen_in(sv, group, min_pixels, erode_px, naming_adaptation)
        views_of = {k: seen_in[id(per_object[k])] for k in ids}
        stats = {k: views_of[k].stats[k] for k in ids}
        naming_stats = {k: views_of[k].naming_stats[k] for k in ids}
        lum_obj = {k: views_of[k].lum_obj[k] for k in ids}
        white = white_mesopic_cd_m2(first.state, first.white_photopic_cd_m2, first.white_scotopic_cd_m2)
        labs = (
            np.stack([stats[k]["lab"] if stats[k]["visible"] else np.full(3, np.nan) for k in ids])
            if ids
            else np.zeros((0, 3))
        )
        de = delta_e_matrix(labs)
        per_obj = {}
        changes = []
        for i, o in enumerate(objects):
            st = stats[o.id]
            seen = views_of[o.id]
            nm = _name_seen(naming_stats[o.id]["lab"], seen.hue) if st["visible"] else None
            lum, oid, sv = seen.lum, seen.oid, per_object[o.id]
            if o.background is None:
                bg_l, _ = ring_background(oid == o.id, lum, o.ring_px, sv.exclude)
                bg_label = f"ring {o.ring_px:g} px"
            else:
                bg_l = object_mean(lum, oid, [o.background], 1).get(int(o.background))
                bg_name = next((p.name for p in objects if p.id == o.background), f"id {o.background}")
                bg_label = f"object {bg_name}"
            contrast = (
                luminance_contrast(lum_obj[o.id], bg_l) if lum_obj[o.id] is not None and bg_l is not None else None
            )
            changed = bool(nm is not None and nm["term"] != day_names[i]["term"])
            signals = seen.signals.get(o.id)
            per_obj[o.name] = SeenColour(
                visible=bool(st["visible"]),
                pixels=int(st["pixels"]),
                lab=_vec(st["lab"], ROUND_LAB),
                lch=_vec(None if st["lab"] is None else lab_to_lch(st["lab"]), ROUND_LAB),
                xyz_relative=_vec(st["xyz"], ROUND_LAB),
                name=None if nm is None else nm["name"],
                name_term=None if nm is None else nm["term"],
                name_margin=None if nm is None else _num(nm["margin"], ROUND_DE),
                name_runner_up=None if nm is None else nm["runner_up"],
                hue=seen.hue.level,
                daylight_name=day_names[i]["term"],
                name_changed=changed,
                delta_e00_to_daylight=(
                    None
                    if st["lab"] is None
                    else _num(delta_e_matrix(np.stack([st["lab"], day_lab[i]]))[0, 1], ROUND_DE)
                ),
                luminance_cd_m2=_sig(lum_obj[o.id]),
                background=bg_label,
                background_luminance_cd_m2=_sig(bg_l),
                weber_contrast=_num(contrast, ROUND_CONTRAST),
                cone_lms=None if signals is None else tuple(_sig(x) for x in signals.lms),
                scotopic_cd_m2=None if signals is None else _sig(signals.scotopic_cd_m2),
                size_deg=_sig(seen.size_deg.get(o.id)),
            )
            if changed:
                changes.append(NameChange(o.name, day_names[i]["term"], nm["name"]))
        multiples = np.full((len(ids), len(ids)), np.nan)
        pairs = []
        for i in range(len(ids)):
            for j in range(i + 1, len(ids)):
                a, b = ids[i], ids[j]
                if not (stats[a]["visible"] and stats[b]["visible"]):
                    continue
                result, why = _judge_pair(views_of[a], views_of[b], a, b)
                if result is not None:
                    multiples[i, j] = multiples[j, i] = result.multiple
                pairs.append(
                    PairDifference(
                        a=names[i],
                        b=names[j],
                        daylight_delta_e00=_num(day_de[i, j], ROUND_DE),
                        delta_e00=_num(de[i, j], ROUND_DE),
                        threshold_multiple=None if result is None else _sig(result.multiple, SIGNIFICANT_MULTIPLE),
                        verdict="unknown" if result is None else result.verdict,
                        upper_bound=None if result is None else _sig(result.upper_bound, SIGNIFICANT_MULTIPLE),
                        size_deg=None if result is None else _sig(result.size_deg),
                        adaptation_cd_m2=None if result is None else _sig(result.adaptation_cd_m2),
                        note=why if result is None else result.note,
                    )
                )
        first_seen = views_of[ids[0]] if ids else _seen_in(first, [], min_pixels, erode_px, naming_adaptation)
        out_setups[label] = SetupColours(
            state=first.state,
            white_mesopic_cd_m2=_sig(white),
            objects=per_obj,
            delta_e00=_matrix(de, ROUND_DE),
            discrimination=_setup_discrimination(first_seen, multiples),
            pairs=tuple(pairs),
            confusions=tuple(confusions(pairs, distinct_in_daylight)),
            name_changes=tuple(changes),
        )

    return ColourAnalysis(
        thresholds=ColourThresholds(distinct_in_daylight),
        naming_adaptation=naming_adaptation,
        objects=tuple(AnalysedObject(o.id, o.name, (object_views or {}).get(o.id)) for o in objects),
        daylight=daylight,
        setups=out_setups,
    )


def _setup_discrimination(seen: _SeenIn, multiples: np.ndarray) -> SetupDiscrimination:
    """The :class:`SetupDiscrimination` of a setup whose (first) view is ``seen``."""
    from render.vision.discrimination import castle_params as castle

    lo, hi = castle.CHROMATIC_LUMINANCE_RANGE_CD_M2
    lum = float(seen.state.photopic_cd_m2)
    in_range = lo <= lum <= hi
    if lum < lo:
        note = (
            f"adaptation {lum:.3g} cd/m² is below the discrimination model's fitted range ({lo:g} cd/m²): "
            "multiples of threshold are not extrapolated"
        )
    elif lum > hi:
        note = f"adaptation {lum:.3g} cd/m² is above the discrimination model's fitted range ({hi:g} cd/m²)"
    else:
        note = ""
    diag = np.eye(multiples.shape[0], dtype=bool)
    m = np.where(diag, 0.0, multiples)
    return SetupDiscrimination(
        adaptation_cd_m2=_sig(lum),
        mes2_m=_num(seen.state.m, 3),
        in_range=in_range,
        note=note,
        hue=seen.hue.level,
        hue_reason=seen.hue.reason,
        threshold_multiple=tuple(tuple(_sig(x, SIGNIFICANT_MULTIPLE) for x in row) for row in m),
    )
