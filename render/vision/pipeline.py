"""The night-vision stage end to end: absolute light buffers -> honest sRGB images.

Order of the steps (each a pure function of explicit inputs, in its own module):

1. **Disability glare** (:mod:`~render.vision.glare`, CIE 146:2002): light scattered in the eye
   veils the retinal image. It comes first because it is optics: the veil reaches the retina
   and so counts in the adaptation level and in the cone and rod signals.
2. **Adaptation** (:mod:`~render.vision.adaptation`, CIE TN 007:2017 / CIE 191:2010): mean
   photopic and scotopic luminance of the central field of the veiled view, luminaires
   excluded, or the observer's override; MES2 solve for m; adapting white; pupil; degree D.
3. **Mesopic luminance** per pixel with that m (:mod:`~render.vision.mesopic`, CIE 191:2010).
4. **Colour appearance under rod intrusion** (:mod:`~render.vision.appearance`, Cao et al.
   2008 / Kirk & O'Brien 2011).
5. **Acuity loss** (:mod:`~render.vision.acuity`, Ward Larson et al. 1997).
6. **Display** (:mod:`~render.vision.tonemap`, :mod:`~render.vision.display`): CAT16 to the
   display white with degree D, Ward (1994) contrast-based scale factor (or a fixed exposure),
   highlight roll-off, Oklab gamut mapping, IEC 61966-2-1 encoding, 8- and 16-bit arrays
   (written as PNGs by :mod:`render.output.images`, with :meth:`DisplayResult.png_text`).

Modes: ``adapted`` (each image for an observer adapted to it), ``shared`` (one adaptation state
and one scale factor for a set of images, :func:`shared_display`), ``photometric`` (false-colour
luminance with a legend: ramp and mapping in :mod:`~render.vision.falsecolour`, the legend, a
picture with text, drawn by :mod:`render.output.luminance_legend`) and ``fixed`` (a given linear
exposure, no highlight roll-off: for checks against colorimetry).

Work shared between images: the glare optics of a view (grid, pixel places, kernel spectrum;
:func:`glare_optics`) serve every setup seen from it (:func:`retinal_images`); one
:class:`Retina` serves the shared and the adapted display of an image
(:func:`shared_and_adapted`); and each display keeps the perceived image it was made from
(:attr:`DisplayResult.perceived`), which the colour analysis reads instead of running steps
1-5 again. Images are independent once the shared state is known, so the functions that make
several take ``workers``: that many threads, each image the same whichever thread makes it
(the numba kernels of the stage are serial and safe to run side by side).

References
----------
The sources of each step are listed in its module: CIE 146:2002 (glare), CIE 191:2010 and
CIE TN 007:2017 (adaptation, mesopic luminance), Cao et al. 2008 and Kirk & O'Brien 2011
(rod intrusion), Ward Larson, Rushmeier & Piatko 1997 (acuity), Ward 1994 (tone scale), CAT16
(Li et al. 2017), Ottosson 2020 (Oklab) and IEC 61966-2-1:1999 (sRGB); docs/references.md
says how each was checked.
"""

from __future__ import annotations

from collections.abc import Callable, Sequence
from concurrent.futures import ThreadPoolExecutor
from dataclasses import dataclass, field, replace
from typing import NamedTuple, TypeVar

import numpy as np
import numpy.typing as npt

from render.errors import InputError, Problem, did_you_mean
from render.vision import acuity as _acuity
from render.vision import adaptation as _adaptation
from render.vision import appearance as _appearance
from render.vision import display as _display
from render.vision import glare as _glare
from render.vision import mesopic as _mesopic
from render.vision import tonemap as _tonemap
from render.vision.observer import ObserverSettings
from render.vision.view import ViewGeometry

__all__ = [
    "DISPLAY_WORKERS",
    "MODES",
    "PHOTOMETRIC_QUANTITIES",
    "DisplayResult",
    "PerceivedView",
    "Retina",
    "ViewLight",
    "adapt_to_display_white",
    "display_scale",
    "exclusion_mask",
    "glare_optics",
    "measure_adaptation",
    "perceived_xyz",
    "photometric_display",
    "render_display",
    "retinal_image",
    "retinal_images",
    "shared_and_adapted",
    "shared_display",
    "to_display",
]

#: Display modes of the vision stage (module text).
MODES = ("adapted", "shared", "photometric", "fixed")

#: Threads :func:`shared_and_adapted` is given by the Python API (two images at a time: each
#: thread holds one image's intermediates, a few hundred MB at 4K).
DISPLAY_WORKERS = 2

_T = TypeVar("_T")


def _each(fn: Callable[..., _T], items: Sequence[tuple], workers: int) -> list[_T]:
    """``fn(*item)`` for every item, in order, on up to ``workers`` threads. The steps spend
    their time in numpy, scipy and numba code that releases the interpreter lock, and each
    image is a pure function of its inputs, so the results do not depend on the threads."""
    if workers <= 1 or len(items) <= 1:
        return [fn(*item) for item in items]
    with ThreadPoolExecutor(max_workers=min(int(workers), len(items))) as pool:
        return list(pool.map(lambda item: fn(*item), items))


#: Luminances a false-colour (photometric) image can show.
PHOTOMETRIC_QUANTITIES = ("photopic", "mesopic", "scotopic")


@dataclass
class ViewLight:
    """The renderer's output for one view (the vision stage's input contract).

    Attributes
    ----------
    xyz_cd_m2
        (H, W, 3) absolute CIE 1931 XYZ, Y = photopic luminance in cd/m², luminaire openings
        included at their true luminance.
    scotopic_cd_m2
        (H, W) scotopic luminance K'm·Σ L(λ)V'(λ)Δλ, cd/m² (scotopic).
    luminaire_mask
        Optional (H, W) bool, true on luminaire openings (else found by a luminance threshold).
    lms_cd_m2
        Optional (H, W, 3) exact cone signals, the renderer's integral against
        :func:`render.vision.appearance.extra_channel_weights`.
    white_xyz, white_scotopic
        Optional adapting white (e.g. the lamp light on a perfect white diffuser): XYZ (3,)
        and scotopic luminance on one scale. Default: grey world over the adaptation field.
    """

    xyz_cd_m2: np.ndarray
    scotopic_cd_m2: np.ndarray
    luminaire_mask: np.ndarray | None = None
    lms_cd_m2: np.ndarray | None = None
    white_xyz: np.ndarray | None = None
    white_scotopic: float | None = None

    def check(self, geometry: ViewGeometry) -> None:
        """Raise ``ValueError`` (a renderer bug, not a user mistake) on inconsistent shapes."""
        h, w = geometry.height_px, geometry.width_px
        if np.shape(self.xyz_cd_m2) != (h, w, 3):
            raise ValueError(f"xyz_cd_m2 has shape {np.shape(self.xyz_cd_m2)}, expected {(h, w, 3)}")
        if np.shape(self.scotopic_cd_m2) != (h, w):
            raise ValueError(f"scotopic_cd_m2 has shape {np.shape(self.scotopic_cd_m2)}, expected {(h, w)}")
        if self.luminaire_mask is not None and np.shape(self.luminaire_mask) != (h, w):
            raise ValueError("luminaire_mask must be (H, W)")
        if self.lms_cd_m2 is not None and np.shape(self.lms_cd_m2) != (h, w, 3):
            raise ValueError("lms_cd_m2 must be (H, W, 3)")


@dataclass
class PerceivedView:
    """One view seen by the observer: the vision stage's steps 1-5 (no display mapping).

    Attributes
    ----------
    xyz_cd_m2
        (H, W, 3) perceived XYZ, cd/m², Y = MES2 mesopic luminance (:func:`perceived_xyz`, after
        the acuity loss if the observer has it on).
    mesopic_cd_m2
        (H, W) mesopic luminance (before the acuity blur), cd/m².
    state
        The adaptation state used.
    observer
        The observer settings used.
    """

    xyz_cd_m2: np.ndarray
    mesopic_cd_m2: np.ndarray
    state: _adaptation.AdaptationState
    observer: ObserverSettings


class Retina(NamedTuple):
    """Step 1 for one image (:func:`retinal_image`): the view as imaged on the retina.

    Attributes
    ----------
    xyz_cd_m2, scotopic_cd_m2, lms_cd_m2
        Retinal XYZ (H, W, 3), scotopic luminance (H, W) and cone signals (H, W, 3) or ``None``.
    diagnostics
        Glare figures (veil, scattered fraction), copied into each display's diagnostics.
    local_adaptation_cd_m2
        (H, W) photopic luminance over the foveal field of each pixel (the acuity step's
        input), made once here when the observer has the acuity loss on, else ``None``.
    """

    xyz_cd_m2: np.ndarray
    scotopic_cd_m2: np.ndarray
    lms_cd_m2: np.ndarray | None
    diagnostics: dict[str, object]
    local_adaptation_cd_m2: np.ndarray | None = None


@dataclass
class DisplayResult:
    """Display-referred output of the vision stage for one view.

    Attributes
    ----------
    linear_srgb
        (H, W', 3) linear sRGB in [0, 1] (W' > W in photometric mode: legend to the right).
    srgb8, srgb16
        IEC 61966-2-1 encoded, quantised to uint8 and uint16.
    state
        The adaptation state used (``None`` in photometric mode).
    diagnostics
        Numbers worth reporting (scale factor, glare fraction, out-of-gamut share, ...).
    perceived
        What the observer perceives before the display mapping (steps 1-5 with ``state``),
        kept so that analyses of the same image (the colour analysis) need not run the stage
        again; ``None`` in photometric mode.
    """

    linear_srgb: np.ndarray
    srgb8: np.ndarray
    srgb16: np.ndarray
    state: _adaptation.AdaptationState | None
    diagnostics: dict = field(default_factory=dict)
    perceived: PerceivedView | None = None

    def png_text(self, extra: dict[str, str] | None = None) -> dict[str, str]:
        """tEXt metadata describing how the image was made."""
        text = {"Software": "lampcast vision stage"}
        for key, value in self.diagnostics.items():
            text[f"lampcast.{key}"] = _fmt(value)
        if self.state is not None:
            for key, value in self.state.as_dict().items():
                text[f"lampcast.{key}"] = _fmt(value)
        text.update(extra or {})
        return text


def _fmt(value) -> str:
    if isinstance(value, float):
        return f"{value:.6g}"
    if isinstance(value, (list, tuple)):
        return " ".join(_fmt(v) for v in value)
    return str(value)


def _check_mode(mode: str) -> None:
    if mode not in MODES:
        raise InputError(
            Problem(
                "vision", "mode", f"expected one of {', '.join(MODES)}, got {mode!r}" + did_you_mean(str(mode), MODES)
            )
        )


# ------------------------------------------------------------------------------ the steps


def _local_adaptation(xyz: np.ndarray, geometry: ViewGeometry, observer: ObserverSettings) -> np.ndarray | None:
    return _acuity.local_adaptation_cd_m2(xyz[..., 1], geometry) if observer.acuity else None


def glare_optics(geometry: ViewGeometry, observer: ObserverSettings) -> _glare.GlareOptics | None:
    """The view's :class:`~render.vision.glare.GlareOptics` for the observer's eye (``None``
    when the observer has glare off): make it once and pass it to every :func:`retinal_image`
    of the view."""
    if not observer.glare:
        return None
    return _glare.glare_optics(
        geometry, age_years=observer.age_years, pigmentation=observer.pigmentation, model=observer.glare_model
    )


def retinal_image(
    buffers: ViewLight,
    geometry: ViewGeometry,
    observer: ObserverSettings,
    optics: _glare.GlareOptics | None = None,
) -> Retina:
    """Step 1: the view as imaged on the retina, with disability glare if enabled.

    ``optics``: the view's :func:`glare_optics`, if already made (else made here).
    """
    xyz = np.asarray(buffers.xyz_cd_m2, dtype=np.float64)
    scot = np.asarray(buffers.scotopic_cd_m2, dtype=np.float64)
    lms = None if buffers.lms_cd_m2 is None else np.asarray(buffers.lms_cd_m2, dtype=np.float64)
    if not observer.glare:
        return Retina(xyz, scot, lms, {"glare": "off"}, _local_adaptation(xyz, geometry, observer))
    parts = [xyz, scot[..., None]] + ([lms] if lms is not None else [])
    out, veil, frac = _glare.retinal_channels(
        np.concatenate(parts, axis=-1),
        geometry,
        age_years=observer.age_years,
        pigmentation=observer.pigmentation,
        model=observer.glare_model,
        optics=optics,
    )
    diag = {
        "glare": observer.glare_model,
        "glare_scattered_fraction": frac,
        "glare_veil_max_cd_m2": float(veil[..., 1].max()),
        "glare_veil_mean_cd_m2": float(veil[..., 1].mean()),
    }
    # Each channel group contiguous: the later steps read them many times.
    xyz_r = np.ascontiguousarray(out[..., :3])
    return Retina(
        xyz_r,
        np.ascontiguousarray(out[..., 3]),
        (np.ascontiguousarray(out[..., 4:7]) if lms is not None else None),
        diag,
        _local_adaptation(xyz_r, geometry, observer),
    )


def retinal_images(
    buffers_list: Sequence[ViewLight],
    geometries: Sequence[ViewGeometry],
    observer: ObserverSettings,
    workers: int = 1,
) -> list[Retina]:
    """:func:`retinal_image` of several images, the glare optics made once per distinct view
    geometry and shared (e.g. one view under a before setup and every option); ``workers``
    threads (module text)."""
    optics: dict[ViewGeometry, _glare.GlareOptics | None] = {}
    for b, g in zip(buffers_list, geometries, strict=True):
        b.check(g)
        if g not in optics:
            optics[g] = glare_optics(g, observer)
    items = [(b, g, observer, optics[g]) for b, g in zip(buffers_list, geometries)]
    return _each(retinal_image, items, workers)


def exclusion_mask(buffers: ViewLight, observer: ObserverSettings) -> np.ndarray:
    """Luminaire openings to leave out of the adaptation field (mask, else threshold)."""
    if buffers.luminaire_mask is not None:
        return np.asarray(buffers.luminaire_mask, dtype=bool)
    return _adaptation.luminaire_mask(buffers.xyz_cd_m2, observer.luminaire_threshold_cd_m2)


def measure_adaptation(
    retina_xyz: npt.ArrayLike,
    retina_scot: npt.ArrayLike,
    geometry: ViewGeometry,
    observer: ObserverSettings,
    exclude: np.ndarray | None,
    buffers: ViewLight | None = None,
) -> _adaptation.AdaptationState:
    """Step 2: the adaptation state of one view (see :func:`render.vision.adaptation.adaptation_state`)."""
    white = (None, None) if buffers is None else (buffers.white_xyz, buffers.white_scotopic)
    return _adaptation.adaptation_state(
        retina_xyz,
        retina_scot,
        geometry,
        field_deg=observer.adaptation_field_deg,
        exclude=exclude,
        override_cd_m2=observer.adaptation_cd_m2,
        white_xyz=white[0],
        white_scotopic=white[1],
        chromatic_adaptation_degree=observer.chromatic_adaptation_degree,
    )


def perceived_xyz(
    retina_xyz: np.ndarray,
    retina_scot: np.ndarray,
    state: _adaptation.AdaptationState,
    observer: ObserverSettings,
    lms: np.ndarray | None = None,
) -> tuple[np.ndarray, np.ndarray]:
    """Steps 3-4: perceived colour as XYZ with Y = MES2 luminance; returns ``(xyz, L_mes)``."""
    lmes = _mesopic.mesopic_image(retina_xyz[..., 1], retina_scot, state.m)
    xyz = _appearance.rod_intrusion(retina_xyz, retina_scot, lmes, state, lms_cd_m2=lms, enabled=observer.rod_intrusion)
    return xyz, lmes


def display_scale(
    state: _adaptation.AdaptationState, observer: ObserverSettings, mode: str, exposure: float | None
) -> float:
    """Display cd/m² per perceived scene cd/m²: Ward (1994) for the state, or ``exposure``."""
    if mode == "fixed":
        if exposure is None or not exposure > 0:
            raise InputError(
                Problem("vision", "exposure", "mode 'fixed' needs an exposure > 0 (display cd/m² per scene cd/m²)")
            )
        return float(exposure)
    return _tonemap.ward_scale_factor(state.mesopic_cd_m2, observer.display_peak_cd_m2)


def adapt_to_display_white(
    xyz_perceived: npt.ArrayLike, state: _adaptation.AdaptationState, observer: ObserverSettings
) -> np.ndarray:
    """Step 6a: chromatic adaptation from the adapting white to the display white.

    Default (``observer.chromatic_adaptation_degree`` unset): sensory, cone-specific incomplete
    adaptation at the MES2 adaptation luminance (Hunt; RLAB form, Fairchild 1996), so coloured
    light keeps its colour; with a degree given: CAT16 with that degree D.
    """
    if observer.chromatic_adaptation_degree is None:
        return _display.chromatic_adaptation_incomplete(xyz_perceived, state.white_xyz, state.mesopic_cd_m2)
    return _display.chromatic_adaptation_cat16(xyz_perceived, state.white_xyz, state.chromatic_adaptation_degree)


def to_display(
    xyz_perceived: npt.ArrayLike,
    state: _adaptation.AdaptationState,
    observer: ObserverSettings,
    scale: float,
    rolloff: bool = True,
) -> tuple[np.ndarray, dict[str, float]]:
    """Step 6: chromatic adaptation, tone scale, gamut mapping -> linear sRGB in [0, 1]."""
    adapted = adapt_to_display_white(xyz_perceived, state, observer)
    rel = _tonemap.to_display_relative(
        adapted, scale, observer.display_peak_cd_m2, knee=_tonemap.HIGHLIGHT_KNEE if rolloff else None
    )
    rgb, out = _display.gamut_map_oklab(rel)
    return rgb, {"display_scale": scale, "out_of_gamut_fraction": float(out.mean())}


def _encode(linear):
    return _display.srgb_quantised(linear)


def _map_with_state(buffers, geometry, observer, state, retina, mode, exposure):
    retina = Retina(*retina)
    xyz_r, scot_r, lms_r = retina.xyz_cd_m2, retina.scotopic_cd_m2, retina.lms_cd_m2
    diag = dict(retina.diagnostics)  # each display its own (one retina may serve several)
    xyz_p, lmes = perceived_xyz(xyz_r, scot_r, state, observer, lms_r)
    if observer.acuity:
        local = retina.local_adaptation_cd_m2
        if local is None:
            local = _acuity.local_adaptation_cd_m2(xyz_r[..., 1], geometry)
        xyz_p, sigma = _acuity.apply_acuity(xyz_p, local, geometry)
        diag["acuity_sigma_px_max"] = float(sigma.max())
    else:
        diag["acuity"] = "off"
    scale = display_scale(state, observer, mode, exposure)
    rgb, d2 = to_display(xyz_p, state, observer, scale, rolloff=(mode != "fixed"))
    diag.update(d2)
    diag["mode"] = mode
    diag["mesopic_mean_cd_m2"] = float(lmes.mean())
    s8, s16 = _encode(rgb)
    return DisplayResult(rgb, s8, s16, state, diag, PerceivedView(xyz_p, lmes, state, observer))


def photometric_display(
    buffers: ViewLight,
    geometry: ViewGeometry,
    observer: ObserverSettings,
    *,
    quantity: str = "photopic",
    range_cd_m2: tuple[float, float] | None = None,
    state: _adaptation.AdaptationState | None = None,
) -> DisplayResult:
    """False-colour map of the physical luminance (no eye effects) with a cd/m² legend.

    ``quantity``: ``photopic`` (Y), ``scotopic`` or ``mesopic`` (MES2 with the view's
    adaptation state, measured without glare unless ``state`` is given).
    """
    buffers.check(geometry)
    if quantity not in PHOTOMETRIC_QUANTITIES:
        raise InputError(
            Problem(
                "vision",
                "quantity",
                f"expected one of {', '.join(PHOTOMETRIC_QUANTITIES)}, "
                f"got {quantity!r}" + did_you_mean(str(quantity), PHOTOMETRIC_QUANTITIES),
            )
        )
    xyz = np.asarray(buffers.xyz_cd_m2, dtype=np.float64)
    scot = np.asarray(buffers.scotopic_cd_m2, dtype=np.float64)
    if quantity == "photopic":
        lum, label = xyz[..., 1], "luminance (cd/m²)"
    elif quantity == "scotopic":
        lum, label = scot, "scotopic luminance (cd/m²)"
    else:
        if state is None:
            state = measure_adaptation(xyz, scot, geometry, observer, exclusion_mask(buffers, observer), buffers)
        lum, label = _mesopic.mesopic_image(xyz[..., 1], scot, state.m), "mesopic luminance (cd/m²)"
    # The ramp and the mapping are this stage's (render.vision.falsecolour); the legend beside
    # them is a picture with text, drawn by the output layer.
    from render.output.luminance_legend import false_colour_with_legend

    img, (lo, hi) = false_colour_with_legend(lum, range_cd_m2, label)
    s8, s16 = _encode(img)
    return DisplayResult(
        img, s8, s16, None, {"mode": "photometric", "quantity": quantity, "range_lo_cd_m2": lo, "range_hi_cd_m2": hi}
    )


def render_display(
    buffers: ViewLight,
    view_geometry: ViewGeometry,
    observer: ObserverSettings | None = None,
    mode: str = "adapted",
    *,
    state: _adaptation.AdaptationState | None = None,
    exposure: float | None = None,
    photometric_quantity: str = "photopic",
    photometric_range_cd_m2: tuple[float, float] | None = None,
    retina: Retina | None = None,
) -> DisplayResult:
    """Turn one view's light buffers into a display image.

    Parameters
    ----------
    buffers
        The renderer's :class:`ViewLight`.
    view_geometry
        The view's :class:`ViewGeometry`.
    observer
        :class:`ObserverSettings` (default settings if ``None``).
    mode
        ``adapted``, ``shared`` (needs ``state``; see :func:`shared_display`), ``photometric``
        or ``fixed`` (needs ``exposure``).
    state
        An adaptation state to use instead of measuring one (``shared`` mode).
    exposure
        ``fixed`` mode: display cd/m² per perceived scene cd/m².
    photometric_quantity, photometric_range_cd_m2
        ``photometric`` mode: which luminance and the legend range (default automatic).
    retina
        The :class:`Retina` of :func:`retinal_image` for these buffers, if already computed.

    Returns
    -------
    DisplayResult
        Linear and encoded sRGB, the adaptation state and diagnostics.
    """
    observer = observer or ObserverSettings()
    _check_mode(mode)
    buffers.check(view_geometry)
    if mode == "photometric":
        return photometric_display(
            buffers, view_geometry, observer, quantity=photometric_quantity, range_cd_m2=photometric_range_cd_m2
        )
    if mode == "shared" and state is None:
        raise ValueError("mode 'shared' needs the shared adaptation state; use shared_display()")
    retina = retinal_image(buffers, view_geometry, observer) if retina is None else retina
    if state is None:
        state = measure_adaptation(
            retina[0], retina[1], view_geometry, observer, exclusion_mask(buffers, observer), buffers
        )
    return _map_with_state(buffers, view_geometry, observer, state, retina, mode, exposure)


def _shared_states(
    buffers_list: Sequence[ViewLight],
    view_geometries: Sequence[ViewGeometry],
    observer: ObserverSettings,
    retinas: Sequence[Retina],
) -> tuple[list[_adaptation.AdaptationState], list[_adaptation.AdaptationState]]:
    """Each view's state in the shared display, and its own (adapted) state."""
    own = [
        measure_adaptation(r[0], r[1], g, observer, exclusion_mask(b, observer), b)
        for b, g, r in zip(buffers_list, view_geometries, retinas)
    ]
    return _shared_from_own(buffers_list, view_geometries, observer, retinas, own), own


def _shared_from_own(
    buffers_list: Sequence[ViewLight],
    view_geometries: Sequence[ViewGeometry],
    observer: ObserverSettings,
    retinas: Sequence[Retina],
    own: Sequence[_adaptation.AdaptationState],
) -> list[_adaptation.AdaptationState]:
    """Each view's state in the shared display, given each view's own (adapted) state."""
    first = buffers_list[0]
    state = _adaptation.shared_adaptation_state(
        [(r[0], r[1], g, exclusion_mask(b, observer)) for r, g, b in zip(retinas, view_geometries, buffers_list)],
        field_deg=observer.adaptation_field_deg,
        override_cd_m2=observer.adaptation_cd_m2,
        white_xyz=first.white_xyz,
        white_scotopic=first.white_scotopic,
        chromatic_adaptation_degree=observer.chromatic_adaptation_degree,
    )
    # One luminance adaptation for all views; each keeps the colour of its own light as its
    # adapting white (an observer in each street adapts to that street's light).
    return [replace(state, white_xyz=o.white_xyz, white_sp_ratio=o.white_sp_ratio) for o in own]


def _views_and_retinas(buffers_list, view_geometries, observer, retinas, workers):
    observer = observer or ObserverSettings()
    if isinstance(view_geometries, ViewGeometry):
        view_geometries = [view_geometries] * len(buffers_list)
    if len(view_geometries) != len(buffers_list):
        raise ValueError("one view geometry per buffer set")
    if retinas is None:
        retinas = retinal_images(buffers_list, view_geometries, observer, workers)
    return list(view_geometries), observer, list(retinas)


def shared_display(
    buffers_list: Sequence[ViewLight],
    view_geometries: Sequence[ViewGeometry] | ViewGeometry,
    observer: ObserverSettings | None = None,
    retinas: Sequence[Retina] | None = None,
    workers: int = 1,
) -> list[DisplayResult]:
    """Map a set of views (e.g. before and after) with **one** adaptation state and scale.

    The state comes from the views' adaptation fields averaged with equal weight
    (:func:`render.vision.adaptation.shared_adaptation_state`), after glare; then every view
    is mapped with it, so their true brightness relation is kept. ``retinas``: the views'
    :func:`retinal_images`, if already computed; ``workers`` threads (module text).
    """
    geoms, observer, retinas = _views_and_retinas(buffers_list, view_geometries, observer, retinas, workers)
    states, _ = _shared_states(buffers_list, geoms, observer, retinas)
    items = [(b, g, observer, st, r, "shared", None) for b, g, r, st in zip(buffers_list, geoms, retinas, states)]
    return _each(_map_with_state, items, workers)


def shared_and_adapted(
    buffers_list: Sequence[ViewLight],
    view_geometries: Sequence[ViewGeometry] | ViewGeometry,
    observer: ObserverSettings | None = None,
    retinas: Sequence[Retina] | None = None,
    workers: int = 1,
) -> tuple[list[DisplayResult], list[DisplayResult]]:
    """``(shared, adapted)``: :func:`shared_display` of the views and each view in ``adapted``
    mode (:func:`render_display`), the same images, made from one retina per view and the
    same adaptation measurements; ``workers`` threads (module text). With several threads the
    work is queued as it becomes possible: each image's adapted display as soon as its retina
    and its own adaptation state are made, the shared displays once every retina is (the
    shared state needs them all), so the threads do not wait for the slowest retina."""
    observer = observer or ObserverSettings()
    if isinstance(view_geometries, ViewGeometry):
        view_geometries = [view_geometries] * len(buffers_list)
    geoms = list(view_geometries)
    if len(geoms) != len(buffers_list):
        raise ValueError("one view geometry per buffer set")
    if workers <= 1 or len(buffers_list) <= 1:
        geoms, observer, retinas = _views_and_retinas(buffers_list, geoms, observer, retinas, workers)
        shared_states, own_states = _shared_states(buffers_list, geoms, observer, retinas)
        items = [
            (b, g, observer, st, r, mode, None)
            for mode, states in (("shared", shared_states), ("adapted", own_states))
            for b, g, r, st in zip(buffers_list, geoms, retinas, states)
        ]
        maps = _each(_map_with_state, items, workers)
        return maps[: len(buffers_list)], maps[len(buffers_list) :]
    optics: dict[ViewGeometry, _glare.GlareOptics | None] = {}
    for b, g in zip(buffers_list, geoms, strict=True):
        b.check(g)
        if retinas is None and g not in optics:
            optics[g] = glare_optics(g, observer)

    def retina_and_own(k: int) -> tuple[Retina, _adaptation.AdaptationState]:
        b, g = buffers_list[k], geoms[k]
        r = retinas[k] if retinas is not None else retinal_image(b, g, observer, optics[g])
        return r, measure_adaptation(r[0], r[1], g, observer, exclusion_mask(b, observer), b)

    with ThreadPoolExecutor(max_workers=int(workers)) as pool:
        first = [pool.submit(retina_and_own, k) for k in range(len(buffers_list))]
        made: list[tuple[Retina, _adaptation.AdaptationState]] = []
        adapted = []
        for k, f in enumerate(first):
            r, own = f.result()
            made.append((r, own))
            adapted.append(pool.submit(_map_with_state, buffers_list[k], geoms[k], observer, own, r, "adapted", None))
        shared_states = _shared_from_own(buffers_list, geoms, observer, [r for r, _ in made], [o for _, o in made])
        shared = [
            pool.submit(_map_with_state, b, g, observer, st, r, "shared", None)
            for b, g, st, (r, _) in zip(buffers_list, geoms, shared_states, made)
        ]
        return [f.result() for f in shared], [f.result() for f in adapted]
