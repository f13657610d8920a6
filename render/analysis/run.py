"""Running the colour analysis: one rendered view under several setups, to a record and pictures.

Used by ``lampcast colours`` and by the comparison (:mod:`render.output.comparison`). The
inputs come from the renderer's light buffers (object ids and materials per camera sample) and
from the vision stage's display results (the adaptation state each image was made with); the
result is a :class:`~render.analysis.colours.ColourAnalysis`, written as JSON by
:func:`write_colour_json` and drawn by :func:`colour_pictures` (the drawing itself is
:mod:`render.output.colour_pictures`).

References
----------
The methods are those of :mod:`render.analysis.colours` (CIELAB, CIEDE2000, CIE 191:2010 MES2)
and :mod:`render.analysis.naming`; this module only gathers their inputs.
"""

from __future__ import annotations

import json
from collections.abc import Mapping, Sequence
from pathlib import Path
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
from render.fileio import atomic_write_text

if TYPE_CHECKING:
    from render.light.integrator import LightBuffers
    from render.study import RenderedView, Study
    from render.vision.observer import ObserverSettings
    from render.vision.pipeline import DisplayResult

__all__ = ["analyse_view_colours", "colour_pictures", "pixel_object_ids", "tagged_objects", "write_colour_json"]


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


def colour_pictures(
    result: ColourAnalysis,
    rendered: Sequence[RenderedView],
    displays: Sequence[DisplayResult],
    lamps: Sequence[tuple[str, np.ndarray]],
    out_dir: Path,
    prefix: str = "",
    text: Mapping[str, str] | None = None,
) -> dict[str, Path]:
    """Outlined view, swatch sheet, ΔE00 heat map and spectrum strips for ``result``; returns
    the paths written by picture (``outlined``, ``swatches``, ``heatmap``, ``spectra``)."""
    from render.output import colour_pictures as pictures

    out_dir.mkdir(parents=True, exist_ok=True)
    names = result.object_names
    setups = list(result.setups)
    written: dict[str, Path] = {}
    object_id = pixel_object_ids(rendered[0].buffers)
    written["outlined"] = pictures.outlined_view(
        displays[-1].srgb8,
        object_id,
        {o.id: o.name for o in result.objects},
        out_dir / f"{prefix}objects.png",
        title=f"tagged objects ({setups[-1]})",
        png_text=text,
    )
    labs = np.full((len(names), 1 + len(setups), 3), np.nan)
    terms: list[list[str | None]] = [[None] * (1 + len(setups)) for _ in names]
    for i, name in enumerate(names):
        day = result.daylight.objects[name]
        labs[i, 0] = day.lab
        terms[i][0] = day.name
        for j, s in enumerate(setups):
            seen = result.setups[s].objects[name]
            if seen.lab is not None:
                labs[i, j + 1] = seen.lab
            terms[i][j + 1] = seen.name
    written["swatches"] = pictures.swatch_sheet(
        names,
        ["daylight (D65)", *setups],
        labs,
        out_dir / f"{prefix}swatches.png",
        terms=terms,
        title="object colours: daylight and as seen at night",
        png_text=text,
    )
    matrices = {"daylight (D65)": _matrix_array(result.daylight.delta_e00)}
    for s in setups:
        matrices[s] = _matrix_array(result.setups[s].delta_e00)
    written["heatmap"] = pictures.delta_e_heatmap(
        matrices, names, out_dir / f"{prefix}delta-e00.png", title="CIEDE2000 between tagged objects", png_text=text
    )
    written["spectra"] = pictures.spectrum_strip_figure(
        list(lamps),
        out_dir / f"{prefix}spectrum-strips.png",
        title="the lamps' light spread by a grating",
        png_text=text,
    )
    return written


def _matrix_array(matrix) -> np.ndarray:
    """A published ΔE00 matrix as floats, NaN where undefined."""
    return np.array([[np.nan if v is None else v for v in row] for row in matrix], dtype=float)


def write_colour_json(result: ColourAnalysis, path: Path) -> Path:
    """Write :meth:`ColourAnalysis.to_json` to ``path`` (atomically, UTF-8); return the path."""
    return atomic_write_text(path, json.dumps(result.to_json(), ensure_ascii=False, indent=1) + "\n")
