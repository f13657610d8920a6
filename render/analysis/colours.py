"""Telling colours apart at night: object colours, CIEDE2000 matrices, confusions, contrast.

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
not (CIEDE2000 has no luminance-level term) -- the thresholds below are therefore optimistic at
night. Lightness is relative to the white at the same light level; the absolute level is
reported separately as luminance and Weber contrast.

Why the object mean is taken in XYZ
-----------------------------------
XYZ is linear in light: the mean XYZ over an object's pixels is the colour of the light the
object sends to the eye as a whole (what an observer integrates over a small, shaded object),
and it does not depend on how the pixels are split. CIELAB is non-linear, so a mean of Lab
values is biased by shading and noise toward darker, less colourful values. The mean is taken
first, then converted.

Thresholds (CIEDE2000 units)
----------------------------
* :data:`IMPERCEPTIBLE_DE00` = 1.0: about one just-noticeable difference for surface colours
  in CIE 142-2001's reference conditions (common practice, no source for the exact value).
* :data:`HARD_DE00` = 3.0: "hard to tell apart" unless the two are side by side (common
  practice in colour tolerancing, no source).
* :data:`DISTINCT_IN_DAYLIGHT_DE00` = 10.0: our choice. Ten JNDs: two surfaces this far apart
  are clearly different colours at a glance in daylight, so a pair that falls below 3 at night
  has lost a difference a resident relies on. Pairs below 10 in daylight are left out of the
  confusion list (they are in the matrices).

Luminance contrast
------------------
Weber contrast ``C = (L_obj − L_bg)/L_bg`` (:func:`luminance_contrast`) on the **mesopic**
luminance (the perceived Y in cd/m², CIE 191:2010), with the background chosen by the caller: a
named background object (kerb against road) or a ring of pixels around the object
(:func:`ring_background`).

The result and its JSON structure
---------------------------------
:func:`colour_analysis` returns a :class:`ColourAnalysis` (frozen records: :class:`SetupColours`,
:class:`SeenColour`, :class:`DaylightColour`, :class:`Confusion`, :class:`NameChange`) holding
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
                              "xyz_relative": [...], "name": "brown", "name_margin": 1.1,
                              "name_runner_up": "green", "daylight_name": "green",
                              "name_changed": true, "delta_e00_to_daylight": 23.4,
                              "luminance_cd_m2": 0.41, "background": "ring 4 px",
                              "background_luminance_cd_m2": 0.22, "weber_contrast": 0.86}, ...},
          "delta_e00": [[...], ...],
          "confusions": [{"a": "car", "b": "hedge", "daylight_delta_e00": 18.2,
                          "delta_e00": 2.1, "level": "hard"}, ...],
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
"""

from __future__ import annotations

import math
from collections.abc import Mapping, Sequence
from dataclasses import dataclass, field, fields, replace
from functools import lru_cache
from typing import TYPE_CHECKING, Any

import numpy as np
from numpy.typing import ArrayLike

from render.colour import observers
from render.colour.spectra import N_BINS

if TYPE_CHECKING:
    from render.vision.adaptation import AdaptationState
    from render.vision.observer import ObserverSettings
    from render.vision.pipeline import PerceivedView, ViewLight
    from render.vision.view import ViewGeometry

__all__ = [
    "CAVEAT",
    "DISTINCT_IN_DAYLIGHT_DE00",
    "GREY_WORLD_FRACTION",
    "HARD_DE00",
    "IMPERCEPTIBLE_DE00",
    "MIN_PIXELS",
    "NAMING_ADAPTATIONS",
    "RING_WIDTH_PX",
    "ROUND_CONTRAST",
    "ROUND_DE",
    "ROUND_LAB",
    "SIGNIFICANT_LUMINANCE",
    "AnalysedObject",
    "ColourAnalysis",
    "ColourThresholds",
    "Confusion",
    "DaylightColour",
    "DaylightColours",
    "Matrix",
    "NameChange",
    "SeenColour",
    "SetupColours",
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

#: ΔE00 below which two colours are taken as indistinguishable (≈ 1 JND; common practice).
IMPERCEPTIBLE_DE00 = 1.0
#: ΔE00 below which two colours are hard to tell apart (common practice, no source).
HARD_DE00 = 3.0
#: ΔE00 from which two colours count as clearly distinct in daylight (our choice; see module).
DISTINCT_IN_DAYLIGHT_DE00 = 10.0
#: What the thresholds leave out (stated with every analysis).
CAVEAT = (
    "CIEDE2000 has no light-level term: thresholds rise at low luminance, so night "
    "differences read as more visible than they are"
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
    daylight_de: ArrayLike,
    night_de: ArrayLike,
    names: Sequence[str],
    hard: float = HARD_DE00,
    imperceptible: float = IMPERCEPTIBLE_DE00,
    distinct_in_daylight: float = DISTINCT_IN_DAYLIGHT_DE00,
) -> list[Confusion]:
    """Pairs that are distinct in daylight and hard to tell apart under a setup.

    A pair (i, j) is listed when ``daylight_de[i, j] ≥ distinct_in_daylight`` and
    ``night_de[i, j] < hard``; its ``level`` is ``"imperceptible"`` below ``imperceptible``,
    else ``"hard"``. Pairs with an undefined (NaN) difference are skipped. Sorted by the
    night difference, smallest first. Thresholds: see the module text.
    """
    day = np.asarray(daylight_de, dtype=np.float64)
    night = np.asarray(night_de, dtype=np.float64)
    n = len(names)
    if day.shape != (n, n) or night.shape != (n, n):
        raise ValueError("both matrices must be (n, n) for n names")
    out = []
    for i in range(n):
        for j in range(i + 1, n):
            d, e = day[i, j], night[i, j]
            if not (np.isfinite(d) and np.isfinite(e)):
                continue
            if d >= distinct_in_daylight and e < hard:
                level = "imperceptible" if e < imperceptible else "hard"
                out.append(Confusion(names[i], names[j], float(d), float(e), level))
    out.sort(key=lambda p: (p.delta_e00, p.a, p.b))
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
    """

    perceived_xyz_cd_m2: np.ndarray
    object_id: np.ndarray
    state: AdaptationState
    observer: ObserverSettings
    white_photopic_cd_m2: float | None = None
    white_scotopic_cd_m2: float | None = None
    luminance_cd_m2: np.ndarray | None = None
    exclude: np.ndarray | None = None

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
    """The ΔE00 thresholds of :func:`confusions` (values and sources: the module text)."""

    imperceptible_delta_e00: float = IMPERCEPTIBLE_DE00
    hard_delta_e00: float = HARD_DE00
    distinct_in_daylight_delta_e00: float = DISTINCT_IN_DAYLIGHT_DE00


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
    """An object as seen under one setup: colour, name, difference to daylight, contrast.

    ``lab``, ``lch``, ``xyz_relative``, the name fields and ``delta_e00_to_daylight`` are
    ``None`` when the object has fewer visible pixels than the analysis asks for
    (``visible`` false). ``background`` says what the contrast is taken against.
    """

    visible: bool
    pixels: int
    lab: Triple | None
    lch: Triple | None
    xyz_relative: Triple | None
    name: str | None
    name_margin: float | None
    name_runner_up: str | None
    daylight_name: str | None
    name_changed: bool
    delta_e00_to_daylight: float | None
    luminance_cd_m2: float | None
    background: str
    background_luminance_cd_m2: float | None
    weber_contrast: float | None

    def to_json(self) -> dict[str, Any]:
        return _record_json(self)


@dataclass(frozen=True)
class Confusion:
    """A pair distinct in daylight that is hard to tell apart under a setup (:func:`confusions`).

    ``level`` is ``"imperceptible"`` or ``"hard"``.
    """

    a: str
    b: str
    daylight_delta_e00: float | None
    delta_e00: float | None
    level: str

    def to_json(self) -> dict[str, Any]:
        return _record_json(self)


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
    confusions, name_changes
        The confusable pairs (smallest ΔE00 first) and the names that change.
    """

    state: AdaptationState = field(repr=False)
    white_mesopic_cd_m2: float | None
    objects: Mapping[str, SeenColour]
    delta_e00: Matrix
    confusions: tuple[Confusion, ...]
    name_changes: tuple[NameChange, ...]

    def to_json(self) -> dict[str, Any]:
        adaptation = _json_safe(self.state.as_dict()) if hasattr(self.state, "as_dict") else {}
        adaptation["white_mesopic_cd_m2"] = self.white_mesopic_cd_m2
        return {
            "adaptation": adaptation,
            "objects": {name: c.to_json() for name, c in self.objects.items()},
            "delta_e00": _matrix_json(self.delta_e00),
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
        The ΔE00 thresholds the confusions were found with.
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
        t = self.thresholds
        notes = method_notes(t.hard_delta_e00, t.imperceptible_delta_e00, t.distinct_in_daylight_delta_e00)
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
        """Every confusable pair under every setup, in setup order then smallest ΔE00 first:
        ``{"setup", "a", "b", "daylight_delta_e00", "delta_e00", "level"}`` (empty: none)."""
        return [{"setup": label, **c.to_json()} for label, s in self.setups.items() for c in s.confusions]

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


def method_notes(
    hard: float = HARD_DE00,
    imperceptible: float = IMPERCEPTIBLE_DE00,
    distinct_in_daylight: float = DISTINCT_IN_DAYLIGHT_DE00,
) -> dict[str, Any]:
    """The method statements that go with every analysis (JSON-safe)."""
    from render.analysis.naming import naming_model_notes

    return {
        "colour_as_seen": "mean over the visible pixels of the object's main surface of the vision stage's perceived XYZ "
        "(CIE 191 MES2 luminance, rod intrusion, glare, acuity), after its chromatic "
        "adaptation to the display white, relative to a perfect white diffuser under the "
        "setup's light (Y = 100); mean taken in XYZ, then CIELAB",
        "daylight_reference": "the main surface's reflectance under CIE D65, CIE 1931 2 degree observer, perfect diffuser "
        "Y = 100, complete adaptation",
        "colour_difference": "CIEDE2000 (CIE 142-2001) on those CIELAB values",
        "thresholds": {
            "imperceptible_delta_e00": imperceptible,
            "imperceptible_source": "about one just-noticeable difference (common practice, no source)",
            "hard_delta_e00": hard,
            "hard_source": "hard to tell apart unless side by side (common practice, no source)",
            "distinct_in_daylight_delta_e00": distinct_in_daylight,
            "distinct_in_daylight_source": "lampcast's choice: ten JNDs, clearly different at a glance",
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


def _seen_in(sv: SetupView, ids: list[int], min_pixels: int, erode_px: int, naming_adaptation: str) -> _SeenIn:
    """Colour statistics and luminances of the objects ``ids`` in one setup view."""
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
    return _SeenIn(stats, naming_stats, lum, lum_obj, np.asarray(sv.object_id))


def colour_analysis(
    objects: Sequence[TaggedObject],
    setups: Mapping[str, SetupView | Mapping[int, SetupView]],
    *,
    object_views: Mapping[int, str] | None = None,
    min_pixels: int = MIN_PIXELS,
    erode_px: int = 0,
    hard: float = HARD_DE00,
    imperceptible: float = IMPERCEPTIBLE_DE00,
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
    hard, imperceptible, distinct_in_daylight
        ΔE00 thresholds of :func:`confusions`.
    naming_adaptation
        ``"as-seen"`` (default): names of the colours as the vision stage predicts them seen;
        ``"discounted"``: names after complete adaptation to the setup's light
        (:func:`discount_light_colour`) -- the observer who has fully discounted the light's
        colour. Colours, ΔE00 and confusions are always as seen.
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
            nm = colour_name_details(naming_stats[o.id]["lab"]) if st["visible"] else None
            lum, oid, sv = views_of[o.id].lum, views_of[o.id].oid, per_object[o.id]
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
            per_obj[o.name] = SeenColour(
                visible=bool(st["visible"]),
                pixels=int(st["pixels"]),
                lab=_vec(st["lab"], ROUND_LAB),
                lch=_vec(None if st["lab"] is None else lab_to_lch(st["lab"]), ROUND_LAB),
                xyz_relative=_vec(st["xyz"], ROUND_LAB),
                name=None if nm is None else nm["term"],
                name_margin=None if nm is None else _num(nm["margin"], ROUND_DE),
                name_runner_up=None if nm is None else nm["runner_up"],
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
            )
            if changed:
                changes.append(NameChange(o.name, day_names[i]["term"], nm["term"]))
        conf = tuple(
            replace(c, daylight_delta_e00=_num(c.daylight_delta_e00, ROUND_DE), delta_e00=_num(c.delta_e00, ROUND_DE))
            for c in confusions(day_de, de, names, hard, imperceptible, distinct_in_daylight)
        )
        out_setups[label] = SetupColours(
            state=first.state,
            white_mesopic_cd_m2=_sig(white),
            objects=per_obj,
            delta_e00=_matrix(de, ROUND_DE),
            confusions=conf,
            name_changes=tuple(changes),
        )

    return ColourAnalysis(
        thresholds=ColourThresholds(imperceptible, hard, distinct_in_daylight),
        naming_adaptation=naming_adaptation,
        objects=tuple(AnalysedObject(o.id, o.name, (object_views or {}).get(o.id)) for o in objects),
        daylight=daylight,
        setups=out_setups,
    )
