"""Colour analysis of rendered views: its inputs gathered from the renderer and the vision stage.

Used by ``lampcast colours`` and by the comparison (:mod:`render.output.comparison`). The
inputs come from the renderer's light buffers (object ids and materials per camera sample, and
the absolute light from which :func:`cone_rod_image` resolves each pixel's CIE 2006 cone signals
and scotopic luminance for the discrimination model) and from the vision stage's display
results (the adaptation state each image was made with, and what the observer perceives in it,
so the stage is not run again); the result is a :class:`~render.analysis.colours.ColourAnalysis`.

The discrimination model judges each setup at the adaptation of an observer adapted to that
setup alone. Images made in shared exposure carry the shared state (the mean of the setups):
the callers pass each setup's own state (``own_states``: the states of the adapted images of
the same views, which :func:`render.vision.pipeline.shared_and_adapted` makes together);
without them it is measured here (:func:`own_adaptation_state`: the glare step and the
adaptation measurement of the stage, as for an adapted image).

An object's colour is that of its main surface (:attr:`render.geometry.build.ObjectInfo.main_material`:
the kind's ``main_slot`` or the scene's ``colour_slot``): its daylight reference is that
material's reflectance, its colour seen only the pixels whose every camera sample sees that
surface (:func:`pixel_main_surface_ids`). Over several views (:func:`analyse_colours`) each
object is analysed in the chosen view or in the one showing most of its main surface
(:func:`best_views`). Its files (``colours.json`` and
the pictures) are written by :mod:`render.output.colour_files`.

References
----------
The methods are those of :mod:`render.analysis.colours` (CIELAB, CIEDE2000, CIE 191:2010 MES2,
castleCSF through :mod:`render.vision.discrimination`) and :mod:`render.analysis.naming`; this
module only gathers their inputs.
"""

from __future__ import annotations

from collections.abc import Mapping, Sequence
from typing import TYPE_CHECKING

import numba
import numpy as np

from render.analysis.colours import (
    ColourAnalysis,
    SetupView,
    TaggedObject,
    colour_analysis,
    mixture_reflectance,
    perceived_view,
)

if TYPE_CHECKING:
    from render.light.integrator import LightBuffers
    from render.scene.model import Setup
    from render.study import RenderedView, Study
    from render.vision.adaptation import AdaptationState
    from render.vision.observer import ObserverSettings
    from render.vision.pipeline import DisplayResult

__all__ = [
    "analyse_colours",
    "analyse_view_colours",
    "best_views",
    "cone_rod_image",
    "main_surface_pixels",
    "main_material_indices",
    "own_adaptation_state",
    "pixel_main_surface_ids",
    "pixel_object_ids",
    "tagged_objects",
]


@numba.njit(cache=True, nogil=True)
def _pixel_ids_kernel(object_id, emitter, response, main, spp, whole, on_main):
    """Per pixel of ``spp`` consecutive samples: ``whole[p]`` the object every sample sees when
    they all see the same one and none a luminous opening, else -1; ``on_main[p]`` that object
    when moreover every sample sees its main surface (material ``main[object]``), else -1."""
    n_main = main.shape[0]
    for p in range(whole.shape[0]):
        start = p * spp
        first = object_id[start]
        same = True
        lit = False
        all_main = True
        for s in range(start, start + spp):
            o = object_id[s]
            if o != first:
                same = False
            if emitter[s] >= 0:
                lit = True
            surface = main[o] if 0 <= o < n_main else -2
            if not (response[s] == surface and surface >= 0):
                all_main = False
        w = first if same and not lit else -1
        whole[p] = w
        on_main[p] = w if all_main else -1


def _pixel_ids(buffers: LightBuffers, main_material: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """:func:`pixel_object_ids` and :func:`pixel_main_surface_ids` in one pass over the samples."""
    n_pix = buffers.height_px * buffers.width_px
    whole = np.empty(n_pix, dtype=np.int32)
    on_main = np.empty(n_pix, dtype=np.int32)
    _pixel_ids_kernel(
        np.ascontiguousarray(buffers.object_id.reshape(-1)),
        np.ascontiguousarray(buffers.emitter.reshape(-1)),
        np.ascontiguousarray(buffers.response.reshape(-1)),
        np.ascontiguousarray(main_material, dtype=np.int32).reshape(-1),
        int(buffers.spp),
        whole,
        on_main,
    )
    shape = (buffers.height_px, buffers.width_px)
    return whole.reshape(shape), on_main.reshape(shape)


def pixel_object_ids(buffers: LightBuffers) -> np.ndarray:
    """(H, W) object index per pixel where every camera sample of the pixel sees the same
    object and no luminous opening, else -1 (edges and mixed pixels are left out)."""
    return _pixel_ids(buffers, np.zeros(0, dtype=np.int32))[0]


def main_material_indices(study: Study) -> np.ndarray:
    """(n_objects,) index into the mesh's materials of each object's main surface
    (:attr:`render.geometry.build.ObjectInfo.main_material`), -1 where it has none."""
    names = list(study.mesh.material_names)
    return np.array(
        [names.index(o.main_material) if o.main_material in names else -1 for o in study.mesh.objects], dtype=np.int32
    ).reshape(-1)


def pixel_main_surface_ids(buffers: LightBuffers, main_material: np.ndarray) -> np.ndarray:
    """(H, W) object index per pixel where every camera sample of the pixel sees the same
    object's main surface (its material is ``main_material[object]``) and no luminous opening,
    else -1: the pixels an object's colour as seen is taken from (glass, tyres, edges and mixed
    pixels are left out)."""
    return _pixel_ids(buffers, main_material)[1]


def tagged_objects(study: Study) -> list[TaggedObject]:
    """The scene's objects flagged ``inspect``, each with the reflectance of its main surface
    (a car's body paint, a sign's face; :attr:`~render.geometry.build.ObjectInfo.main_material`):
    the daylight reference does not depend on the view. An object without a main surface gets
    the surface-area weighted mixture of its materials."""
    main = main_material_indices(study)
    objects = []
    for index, info in enumerate(study.mesh.objects):
        if not info.inspect:
            continue
        if main[index] >= 0:
            refl = np.asarray(study.reflectances[main[index]], dtype=np.float64)
        else:
            tris = study.mesh.triangles_m[study.mesh.object_id == index]
            area = 0.5 * np.linalg.norm(np.cross(tris[:, 1] - tris[:, 0], tris[:, 2] - tris[:, 0]), axis=1)
            mat = study.mesh.material_id[study.mesh.object_id == index]
            ids = np.unique(mat)
            refl = mixture_reflectance(study.reflectances[ids], np.array([area[mat == i].sum() for i in ids]))
        objects.append(TaggedObject(index, info.name, refl))
    return objects


def main_surface_pixels(study: Study, rendered: RenderedView, surface_ids: np.ndarray | None = None) -> dict[int, int]:
    """Tagged object id -> number of pixels showing only its main surface in ``rendered``
    (``surface_ids``: its :func:`pixel_main_surface_ids`, if already made)."""
    ids = pixel_main_surface_ids(rendered.buffers, main_material_indices(study)) if surface_ids is None else surface_ids
    counts = np.bincount(ids[ids >= 0].ravel(), minlength=len(study.mesh.objects))
    return {i: int(counts[i]) for i, o in enumerate(study.mesh.objects) if o.inspect}


def best_views(
    study: Study,
    views: Mapping[str, RenderedView],
    view: str | None = None,
    surface_ids: Mapping[str, np.ndarray] | None = None,
) -> dict[int, str]:
    """Tagged object id -> the view it is analysed in: ``view`` for every object when given,
    else the view showing most pixels of the object's main surface (the first such view on a
    tie, the first view when no view shows it). ``surface_ids``: each view's
    :func:`pixel_main_surface_ids`, if already made."""
    names = list(views)
    if not names:
        raise ValueError("no views to choose from")
    if view is not None:
        if view not in views:
            raise ValueError(f"view {view!r} is not among the rendered views {names}")
        return {i: view for i, o in enumerate(study.mesh.objects) if o.inspect}
    surface_ids = surface_ids or {}
    counts = {name: main_surface_pixels(study, r, surface_ids.get(name)) for name, r in views.items()}
    return {k: max(names, key=lambda n: (counts[n][k], -names.index(n))) for k in counts[names[0]]}


def cone_rod_image(
    study: Study, rendered: RenderedView, setup: str | Setup | None = None, pixels: np.ndarray | None = None
) -> np.ndarray:
    """(H, W, 4) per pixel the CIE 2006 cone signals L, M, S (L + M in cd/m²) and the scotopic
    luminance (cd/m²) of ``rendered`` under ``setup``'s lamps, lumens and dimming (default: the
    setup it was rendered with), from its light buffers
    (:func:`render.colour.colorimetry.resolve_responses` with
    :func:`render.vision.discrimination.cone_rod_weights`), with the view's interreflected light
    where the buffers keep it (``buffers.indirect``, resolved by
    :func:`render.light.indirect.indirect_responses` with the same weights). ``pixels``: an
    (H, W) bool mask; the direct light is resolved there only (the same values) and is 0
    elsewhere, e.g. the tagged objects' pixels, all that the colour analysis reads."""
    from render.colour.colorimetry import resolve_responses
    from render.light.luminaires import channel_factors
    from render.vision.discrimination import cone_rod_weights

    s = study.setup(rendered.setup if setup is None else setup)
    factors, lamps = channel_factors(rendered.lights, s)
    buffers = rendered.buffers
    spds = study.lamp_spds(lamps)
    weights = cone_rod_weights()
    out = resolve_responses(buffers, factors, spds, study.reflectances, weights, pixels=pixels)
    if buffers.indirect is not None:
        from render.light.indirect import indirect_responses

        out = out + indirect_responses(buffers.indirect, buffers.response, factors, spds, study.reflectances, weights)
    return out


def own_adaptation_state(study: Study, rendered: RenderedView, observer: ObserverSettings) -> AdaptationState:
    """The adaptation state of an observer adapted to ``rendered`` alone: the vision stage's
    glare step and adaptation measurement (as for an adapted image)."""
    from render.vision import pipeline
    from render.vision.view import ViewGeometry

    light = study.view_light(rendered)
    geometry = ViewGeometry.of(rendered.camera)
    retina = pipeline.retinal_image(light, geometry, observer)
    return pipeline.measure_adaptation(
        retina.xyz_cd_m2,
        retina.scotopic_cd_m2,
        geometry,
        observer,
        pipeline.exclusion_mask(light, observer),
        light,
    )


def _setup_views(
    study: Study,
    rendered: Sequence[RenderedView],
    displays: Sequence[DisplayResult],
    observer: ObserverSettings,
    tagged: np.ndarray,
    object_id: np.ndarray | None = None,
    setups: Sequence[str | Setup | None] | None = None,
    own_states: Sequence[AdaptationState] | None = None,
) -> list[SetupView]:
    """One :class:`SetupView` per setup of one view: main-surface pixels as object ids, the
    luminous openings and the tagged objects' other surfaces (glass, tyres) never background;
    the cone signals of each setup (``setups``: the setups the views were rendered with, when
    they are not the scene's own), the pixels' solid angles and each setup's own adaptation
    state (``own_states``, else measured when the displays share one)."""
    from render.vision.view import ViewGeometry

    buffers = rendered[0].buffers
    if object_id is None:
        object_id = pixel_main_surface_ids(buffers, main_material_indices(study))
    other_surfaces = np.isin(pixel_object_ids(buffers), tagged) & (object_id < 0)
    # The analysis reads the cone signals at the tagged objects' main-surface pixels only.
    on_tagged = np.isin(object_id, tagged)
    solid = ViewGeometry.of(rendered[0].camera).solid_angle_sr()
    out = []
    for n, (r, d) in enumerate(zip(rendered, displays)):
        pv = d.perceived
        if pv is None or pv.observer != observer or pv.state != d.state:
            # Only a display without what it was made from runs the stage again.
            pv = perceived_view(study.view_light(r), ViewGeometry.of(r.camera), observer, state=d.state)
        c = r.colorimetry
        exclude = other_surfaces if c.luminaire_mask is None else (np.asarray(c.luminaire_mask, bool) | other_surfaces)
        kwargs: dict = {"exclude": exclude}
        if c.white_xyz is not None:
            kwargs.update(white_photopic_cd_m2=float(c.white_xyz[1]), white_scotopic_cd_m2=c.white_scotopic)
        if own_states is not None:
            own = own_states[n]
        elif pv.state.how.startswith("shared"):
            own = own_adaptation_state(study, r, observer)
        else:
            own = pv.state
        kwargs.update(
            cone_rod_cd_m2=cone_rod_image(study, r, None if setups is None else setups[n], on_tagged),
            solid_angle_sr=solid,
            own_state=own,
        )
        out.append(SetupView.from_view(pv, object_id, **kwargs))
    return out


def analyse_colours(
    study: Study,
    views: Mapping[str, tuple[Sequence[RenderedView], Sequence[DisplayResult]]],
    observer: ObserverSettings,
    labels: Sequence[str],
    view: str | None = None,
    *,
    setups: Sequence[str | Setup | None] | None = None,
    own_states: Mapping[str, Sequence[AdaptationState]] | None = None,
) -> ColourAnalysis:
    """The colour analysis of the tagged objects over several views, each view rendered under
    the same setups (``labels``, in order): each object is analysed in ``view`` if given, else
    in the scene's ``[colour] view``, else in the view showing most of its main surface
    (:func:`best_views`). The record's objects name the view each was analysed in.

    ``setups``: the setups behind ``labels`` when they are not the scene's own (e.g. a lamp id
    given on the command line; default: each rendered view's own). ``own_states``: per view,
    each setup's own adaptation state (e.g. the states of the adapted images); measured when
    not given and the displays share one state."""
    scene_view = study.scene.colour_view
    chosen = view if view is not None else (scene_view if scene_view in views else None)
    main = main_material_indices(study)
    surface_ids = {
        name: pixel_main_surface_ids(r[0].buffers, main)
        for name, (r, _) in views.items()
        if chosen is None or name == chosen
    }
    where = best_views(study, {name: r[0] for name, (r, _) in views.items()}, chosen, surface_ids)
    objects = tagged_objects(study)
    tagged = np.array([o.id for o in objects], dtype=np.int32)
    used = [name for name in views if name in where.values()]
    per_view = {
        name: _setup_views(
            study, *views[name], observer, tagged, surface_ids[name], setups, (own_states or {}).get(name)
        )
        for name in used
    }
    setups = {label: {o.id: per_view[where[o.id]][j] for o in objects} for j, label in enumerate(labels)}
    return colour_analysis(objects, setups, object_views=where)


def analyse_view_colours(
    study: Study,
    rendered: Sequence[RenderedView],
    displays: Sequence[DisplayResult],
    observer: ObserverSettings,
    labels: Sequence[str] | None = None,
    *,
    setups: Sequence[str | Setup | None] | None = None,
    own_states: Sequence[AdaptationState] | None = None,
) -> ColourAnalysis:
    """The colour analysis (:func:`render.analysis.colours.colour_analysis`) of one view
    rendered under several setups, using the adaptation state of each displayed image for the
    colours and each setup's own state for the discrimination model (``setups`` and
    ``own_states`` as in :func:`analyse_colours`)."""
    labels = list(labels or [r.setup or "scene" for r in rendered])
    objects = tagged_objects(study)
    tagged = np.array([o.id for o in objects], dtype=np.int32)
    views = _setup_views(study, rendered, displays, observer, tagged, None, setups, own_states)
    return colour_analysis(objects, dict(zip(labels, views)))
