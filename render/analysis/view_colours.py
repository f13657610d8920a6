"""Colour analysis of a rendered view: its inputs gathered from the renderer and the vision stage.

Used by ``lampcast colours`` and by the comparison (:mod:`render.output.comparison`). The
inputs come from the renderer's light buffers (object ids and materials per camera sample) and
from the vision stage's display results (the adaptation state each image was made with); the
result is a :class:`~render.analysis.colours.ColourAnalysis`. Its files (``colours.json`` and
the pictures) are written by :mod:`render.output.colour_files`.

References
----------
The methods are those of :mod:`render.analysis.colours` (CIELAB, CIEDE2000, CIE 191:2010 MES2)
and :mod:`render.analysis.naming`; this module only gathers their inputs.
"""

from __future__ import annotations

from collections.abc import Sequence
from typing import TYPE_CHECKING

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
    from render.study import RenderedView, Study
    from render.vision.observer import ObserverSettings
    from render.vision.pipeline import DisplayResult

__all__ = ["analyse_view_colours", "pixel_object_ids", "tagged_objects"]


def pixel_object_ids(buffers: LightBuffers) -> np.ndarray:
    """(H, W) object index per pixel where every camera sample of the pixel sees the same
    object and no luminous opening, else -1 (edges and mixed pixels are left out)."""
    ids = buffers.object_id.reshape(-1, buffers.spp)
    same = np.all(ids == ids[:, :1], axis=1)
    em = (buffers.emitter.reshape(-1, buffers.spp) >= 0).any(axis=1)
    out = np.where(same & ~em, ids[:, 0], -1)
    return out.reshape(buffers.height_px, buffers.width_px).astype(np.int32)


def tagged_objects(study: Study, buffers: LightBuffers) -> list[TaggedObject]:
    """The scene's objects flagged ``inspect``, each with the pixel-count weighted mixture of the
    reflectances seen on it (a car: body paint, glass, tyres as they appear in the view)."""
    objects = []
    for index, info in enumerate(study.mesh.objects):
        if not info.inspect:
            continue
        sel = buffers.object_id == index
        mats = buffers.response[sel]
        mats = mats[(mats >= 0) & (mats < len(study.mesh.material_names))]
        if mats.size:
            ids, counts = np.unique(mats, return_counts=True)
            refl = mixture_reflectance(study.reflectances[ids], counts)
        else:
            # Not seen in this view (reported as not visible): its daylight reference is the
            # surface-area weighted mixture of all its materials.
            tris = study.mesh.triangles_m[study.mesh.object_id == index]
            area = 0.5 * np.linalg.norm(np.cross(tris[:, 1] - tris[:, 0], tris[:, 2] - tris[:, 0]), axis=1)
            mat = study.mesh.material_id[study.mesh.object_id == index]
            ids = np.unique(mat)
            refl = mixture_reflectance(study.reflectances[ids], np.array([area[mat == i].sum() for i in ids]))
        objects.append(TaggedObject(index, info.name, refl))
    return objects


def analyse_view_colours(
    study: Study,
    rendered: Sequence[RenderedView],
    displays: Sequence[DisplayResult],
    observer: ObserverSettings,
    labels: Sequence[str] | None = None,
) -> ColourAnalysis:
    """The colour analysis (:func:`render.analysis.colours.colour_analysis`) of one view
    rendered under several setups, using the adaptation state of each displayed image."""
    from render.vision.view import ViewGeometry

    labels = list(labels or [r.setup or "scene" for r in rendered])
    object_id = pixel_object_ids(rendered[0].buffers)
    objects = tagged_objects(study, rendered[0].buffers)
    setups = {}
    for label, r, d in zip(labels, rendered, displays):
        pv = perceived_view(study.view_light(r), ViewGeometry.of(r.camera), observer, state=d.state)
        c = r.colorimetry
        kwargs = {"exclude": c.luminaire_mask}
        if c.white_xyz is not None:
            kwargs.update(white_photopic_cd_m2=float(c.white_xyz[1]), white_scotopic_cd_m2=c.white_scotopic)
        setups[label] = SetupView.from_view(pv, object_id, **kwargs)
    return colour_analysis(objects, setups)
