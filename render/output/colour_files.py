"""Files of the colour analysis: ``colours.json`` and the four pictures, written atomically.

``lampcast colours`` and the comparison's ``colours/`` folder write what
:func:`render.analysis.view_colours.analyse_view_colours` found: the record as JSON
(:meth:`~render.analysis.colours.ColourAnalysis.to_json`, :func:`write_colour_json`) and the
pictures (:func:`write_colour_pictures`): the view with the tagged objects outlined, the swatch
sheet, the ΔE00 heat map (or, when it would be too wide to read at report width, the closest
pairs ranked) and the lamps' spectrum strips, each with its alt text
(:func:`colour_picture_alt_texts`, also the PNG's ``Description``). This module gathers each picture's
inputs from the analysis record and the rendered views; the drawing is
:mod:`render.output.colour_pictures`.

References
----------
The figures are those of :mod:`render.analysis.colours` (CIELAB, CIEDE2000) and
:mod:`render.analysis.naming`; the pictures' methods are listed in
:mod:`render.output.colour_pictures`.
"""

from __future__ import annotations

import json
from collections.abc import Mapping, Sequence
from pathlib import Path
from typing import TYPE_CHECKING

import numpy as np

from render.analysis.view_colours import pixel_object_ids
from render.fileio import atomic_write_text
from render.output import colour_pictures as pictures

if TYPE_CHECKING:
    from render.analysis.colours import ColourAnalysis
    from render.study import RenderedView
    from render.vision.pipeline import DisplayResult

__all__ = ["CLOSEST_PAIRS", "colour_picture_alt_texts", "write_colour_json", "write_colour_pictures"]

#: Pairs shown when the ΔE00 matrices are too wide for the report (the closest first).
CLOSEST_PAIRS = 15


def write_colour_pictures(
    result: ColourAnalysis,
    rendered: Sequence[RenderedView],
    displays: Sequence[DisplayResult],
    lamps: Sequence[tuple[str, np.ndarray]],
    out_dir: Path,
    prefix: str = "",
    text: Mapping[str, str] | None = None,
) -> dict[str, Path]:
    """Write the outlined view, swatch sheet, ΔE00 heat map and spectrum strips of ``result``
    into ``out_dir`` (file names start with ``prefix``; ``text``: PNG provenance text); returns
    the paths written by picture (``outlined``, ``swatches``, ``heatmap``, ``spectra``)."""
    out_dir.mkdir(parents=True, exist_ok=True)
    names = result.object_names
    setups = list(result.setups)
    written: dict[str, Path] = {}
    alt = colour_picture_alt_texts(result, [name for name, _ in lamps])

    def described(key: str) -> dict[str, str]:
        return {**(text or {}), "Description": alt[key]}

    object_id = pixel_object_ids(rendered[0].buffers)
    written["outlined"] = pictures.outlined_view(
        displays[-1].srgb8,
        object_id,
        {o.id: o.name for o in result.objects},
        out_dir / f"{prefix}objects.png",
        title=f"tagged objects ({setups[-1]})",
        png_text=described("outlined"),
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
            terms[i][j + 1] = _swatch_term(seen)
    written["swatches"] = pictures.swatch_sheet(
        names,
        ["daylight (D65)", *setups],
        labs,
        out_dir / f"{prefix}swatches.png",
        terms=terms,
        title="object colours: daylight and as seen at night",
        png_text=described("swatches"),
    )
    matrices = {"daylight (D65)": _matrix_array(result.daylight.delta_e00)}
    for s in setups:
        matrices[s] = _matrix_array(result.setups[s].delta_e00)
    # The matrices when they can be read at report width, else the closest pairs ranked.
    heatmap_path = out_dir / f"{prefix}delta-e00.png"
    if pictures.heatmap_fits(names, len(matrices)):
        written["heatmap"] = pictures.delta_e_heatmap(
            matrices, names, heatmap_path, title="CIEDE2000 between tagged objects", png_text=described("heatmap")
        )
    else:
        shown = min(CLOSEST_PAIRS, len(names) * (len(names) - 1) // 2)
        written["heatmap"] = pictures.closest_pairs_figure(
            matrices,
            names,
            heatmap_path,
            count=CLOSEST_PAIRS,
            title=f"the {shown} closest pairs of tagged objects (CIEDE2000)",
            png_text=described("heatmap"),
        )
    written["spectra"] = pictures.spectrum_strip_figure(
        list(lamps),
        out_dir / f"{prefix}spectrum-strips.png",
        title="the lamps' light spread by a grating",
        png_text=described("spectra"),
    )
    return written


def colour_picture_alt_texts(result: ColourAnalysis, lamp_names: Sequence[str] = ()) -> dict[str, str]:
    """What each picture of :func:`write_colour_pictures` shows, in words (alt text), keyed
    like its result (``outlined``, ``swatches``, ``heatmap``, ``spectra``); also written into
    each PNG as its ``Description``."""
    names = result.object_names
    setups = list(result.setups)
    last = setups[-1] if setups else "the scene's light"
    views = sorted({o.view for o in result.objects if o.view is not None})
    where = f" in view{'s' if len(views) > 1 else ''} {', '.join(repr(v) for v in views)}" if views else ""
    seen = [n for n in names if setups and result.setups[last].objects[n].visible]
    hidden = [n for n in names if n not in seen]
    outlined = f"The street{where} under {last} with {_count(len(seen), 'tagged object')} outlined and labelled"
    outlined += f": {', '.join(seen)}." if seen else "."
    if hidden:
        outlined += f" Not visible there: {', '.join(hidden)}."
    changes = []
    for r in result.name_change_rows():
        under = "; ".join(f"{label}: {r['setups'][label]}" for label in r["changed"])
        changes.append(f"{r['object']} ({under})")
    swatches = (
        f"Colour swatches of {_count(len(names), 'tagged object')}, one row per object: its daylight colour, then "
        f"its colour as seen under {', '.join(setups) or 'no lighting'}, each with its predicted colour name. "
        + (f"Names that change at night: {', '.join(changes)}." if changes else "No name changes at night.")
    )
    pairs = [
        f"{c['a']} and {c['b']} under {c['setup']} ({c['verdict']}: {_multiple_words(c)}, ΔE00 {c['delta_e00']:.1f})"
        for c in result.confusion_rows()
    ]
    pair_count = len(names) * (len(names) - 1) // 2
    whole = pictures.heatmap_fits(names, 1 + len(setups))
    heatmap = (
        (
            "CIEDE2000 colour differences between every pair of tagged objects"
            if whole
            else f"The {min(CLOSEST_PAIRS, pair_count)} closest of the {pair_count} pairs of tagged objects, "
            "ranked by their smallest CIEDE2000 colour difference at night, with their differences"
        )
        + ", in daylight and under "
        f"{', '.join(setups) or 'no lighting'}. CIEDE2000 has no light-level term; which pairs become hard to tell "
        "apart is judged by a model of contrast sensitivity at the street's light level. "
        + (
            f"Pairs that become hard to tell apart: {', '.join(pairs)}."
            if pairs
            else "No pair becomes hard to tell apart."
        )
    )
    spectra = (
        f"The light of {', '.join(lamp_names)} spread by wavelength from violet to red, one strip per lamp: "
        "a lamp whose light is a few narrow lines renders few hues."
        if lamp_names
        else "The lamps' light spread by wavelength from violet to red, one strip per lamp."
    )
    return {"outlined": outlined, "swatches": swatches, "heatmap": heatmap, "spectra": spectra}


def _swatch_term(seen) -> str | None:
    """The term printed on a swatch: the night name's term, marked where hue is not available."""
    if seen.name_term is None or seen.hue == "available":
        return seen.name_term
    return f"{seen.name_term} (hue unsure)"


def _multiple_words(pair: Mapping) -> str:
    if pair.get("threshold_multiple") is not None:
        return f"{pair['threshold_multiple']:.3g} times threshold"
    if pair.get("upper_bound") is not None:
        return f"below the model's range, at most {pair['upper_bound']:.2g} times threshold"
    return "not judged"


def _count(n: int, noun: str) -> str:
    return f"{n} {noun}" + ("" if n == 1 else "s")


def _matrix_array(matrix: Sequence[Sequence[float | None]]) -> np.ndarray:
    """A published ΔE00 matrix as floats, NaN where undefined."""
    return np.array([[np.nan if v is None else v for v in row] for row in matrix], dtype=float)


def write_colour_json(result: ColourAnalysis, path: Path) -> Path:
    """Write :meth:`ColourAnalysis.to_json` to ``path`` (atomically, UTF-8); return the path."""
    return atomic_write_text(path, json.dumps(result.to_json(), ensure_ascii=False, indent=1) + "\n")
