"""The colour analysis of one view under several setups, from rendered views to JSON and pictures.

Used by ``lampcast colours`` and by the comparison report. The inputs come from the renderer's
light buffers (object ids and materials per camera sample) and from the vision stage's display
results (the adaptation state each image was made with).
"""

from __future__ import annotations

import json
from pathlib import Path

import numpy as np

from render.analysis.colours import SetupView, TaggedObject, colour_analysis, mixture_reflectance, perceived_view
from render.fileio import atomic_write_text


def pixel_object_ids(buffers) -> np.ndarray:
    """(H, W) object index per pixel where every camera sample of the pixel sees the same
    object and no luminous opening, else -1 (edges and mixed pixels are left out)."""
    ids = buffers.object_id.reshape(-1, buffers.spp)
    same = np.all(ids == ids[:, :1], axis=1)
    em = (buffers.emitter.reshape(-1, buffers.spp) >= 0).any(axis=1)
    out = np.where(same & ~em, ids[:, 0], -1)
    return out.reshape(buffers.height_px, buffers.width_px).astype(np.int32)


def tagged_objects(study, buffers) -> list[TaggedObject]:
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


def analyse_view_colours(study, rendered: list, displays: list, observer, labels: list[str] | None = None) -> dict:
    """The JSON-safe colour analysis (:func:`render.analysis.colours.colour_analysis`) of one view
    rendered under several setups, using the adaptation state of each displayed image."""
    from render.vision.view import ViewGeometry

    labels = labels or [r.setup or "scene" for r in rendered]
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
    result: dict,
    rendered: list,
    displays: list,
    lamps: list[tuple[str, np.ndarray]],
    out_dir: Path,
    prefix: str = "",
    text: dict[str, str] | None = None,
) -> dict[str, Path]:
    """Outlined view, swatch sheet, ΔE00 heat map and spectrum strips for ``result``."""
    from render.output import colour_pictures as pictures

    out_dir.mkdir(parents=True, exist_ok=True)
    names = [o["name"] for o in result["objects"]]
    setups = list(result["setups"])
    written: dict[str, Path] = {}
    object_id = pixel_object_ids(rendered[0].buffers)
    labels = {o["id"]: o["name"] for o in result["objects"]}
    written["outlined"] = pictures.outlined_view(
        displays[-1].srgb8,
        object_id,
        labels,
        out_dir / f"{prefix}objects.png",
        title=f"tagged objects ({setups[-1]})",
        png_text=text,
    )
    labs = np.full((len(names), 1 + len(setups), 3), np.nan)
    terms = [[None] * (1 + len(setups)) for _ in names]
    for i, name in enumerate(names):
        day = result["daylight"]["objects"][name]
        labs[i, 0] = day["lab"]
        terms[i][0] = day["name"]
        for j, s in enumerate(setups):
            seen = result["setups"][s]["objects"][name]
            if seen["lab"] is not None:
                labs[i, j + 1] = seen["lab"]
            terms[i][j + 1] = seen["name"]
    written["swatches"] = pictures.swatch_sheet(
        names,
        ["daylight (D65)", *setups],
        labs,
        out_dir / f"{prefix}swatches.png",
        terms=terms,
        title="object colours: daylight and as seen at night",
        png_text=text,
    )
    matrices = {"daylight (D65)": np.array(result["daylight"]["delta_e00"], dtype=float)}
    for s in setups:
        matrices[s] = np.array(
            [[np.nan if v is None else v for v in row] for row in result["setups"][s]["delta_e00"]], dtype=float
        )
    written["heatmap"] = pictures.delta_e_heatmap(
        matrices, names, out_dir / f"{prefix}delta-e00.png", title="CIEDE2000 between tagged objects", png_text=text
    )
    written["spectra"] = pictures.spectrum_strip_figure(
        lamps, out_dir / f"{prefix}spectrum-strips.png", title="the lamps' light spread by a grating", png_text=text
    )
    return written


def write_colour_json(result: dict, path: Path) -> Path:
    return atomic_write_text(path, json.dumps(result, ensure_ascii=False, indent=1) + "\n")


def colour_report_section(result: dict, pictures: dict[str, Path], out_dir: Path) -> dict:
    """An ``extra_sections`` entry of the comparison report: the "name it" table, the pairs that
    become hard to tell apart, and the pictures."""
    setups = list(result["setups"])
    rows = []
    for o in result["objects"]:
        name = o["name"]
        day = result["daylight"]["objects"][name]
        row = [name, day["name"]]
        for s in setups:
            seen = result["setups"][s]["objects"][name]
            row += [seen["name"] if seen["visible"] else "not visible", seen["weber_contrast"]]
        rows.append(row)
    columns = ["object", "daylight name"]
    for s in setups:
        columns += [f"seen under {s}", f"contrast ({s})"]
    confusion_rows = []
    for s in setups:
        for c in result["setups"][s]["confusions"]:
            confusion_rows.append([s, c["a"], c["b"], c["daylight_delta_e00"], c["delta_e00"], c["level"]])
    t = result["method"]["thresholds"]
    paragraphs = [
        "Each tagged object's colour as a resident would see it after adapting to the street (night-vision "
        "stage: mesopic luminance, rod intrusion, adaptation) is compared with its colour in daylight. Names are "
        "the eleven basic colour terms predicted from the nearest published colour-name centroid (Centore 2020).",
        f"Pairs listed below are at least {t['distinct_in_daylight_delta_e00']:g} CIEDE2000 apart in "
        f"daylight but below {t['hard_delta_e00']:g} (hard to tell apart) or "
        f"{t['imperceptible_delta_e00']:g} (imperceptible) under a setup (common practice thresholds). "
        "Contrast is Weber luminance contrast against the object's surroundings: lightness survives where hue does not. "
        + result["method"]["caveat"]
        + ".",
    ]
    changes = [c["text"] for s in setups for c in result["setups"][s]["name_changes"]]
    if changes:
        paragraphs.append("Names that change at night: " + "; ".join(sorted(set(changes))) + ".")
    return {
        "title": "Telling colours apart",
        "html_id": "colours",
        "paragraphs": paragraphs,
        "tables": [
            {"caption": "Name it: daylight name and predicted night name per object", "columns": columns, "rows": rows},
            {
                "caption": "Pairs that become hard to tell apart",
                "columns": ["setup", "object", "object", "ΔE00 daylight", "ΔE00 seen", "level"],
                "rows": confusion_rows,
            },
        ],
        "images": [str(p.relative_to(out_dir)) for p in pictures.values()],
    }
