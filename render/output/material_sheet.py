"""Material sheet: the surface materials as a text table, as JSON records, and reflectance plots.

The materials are read and validated by :mod:`render.colour.materials`; this module only presents
them. :func:`material_table` gives the records ``lampcast materials --json`` prints
(:meth:`render.colour.materials.Material.to_json`, in id order), :func:`format_material_table`
the table ``lampcast materials`` prints, and :func:`plot_material` a reflectance plot.

References
----------
- CIE 15:2004 *Colorimetry*: luminous reflectance Y/100 under CIE illuminant D65 (the ``Y(D65)``
  column, computed in :func:`render.colour.materials.luminous_reflectance`).
- Fixed-width tables: common practice, no source.
"""

from __future__ import annotations

from collections.abc import Mapping, Sequence
from pathlib import Path
from typing import Any

import numpy as np

from render.colour.materials import Material, luminous_reflectance
from render.colour.spectra import WAVELENGTH_MAX_NM, WAVELENGTH_MIN_NM, WAVELENGTHS_NM

__all__ = ["format_material_table", "material_table", "plot_material"]


def material_table(lib: Mapping[str, Material]) -> list[dict[str, Any]]:
    """One JSON-ready record per material (:meth:`~render.colour.materials.Material.to_json`), in
    id order."""
    return [lib[mid].to_json() for mid in sorted(lib)]


def _clip_text(text: str, width: int) -> str:
    return text if len(text) <= width else text[: width - 3] + "..."


def _short_source(source: str) -> str:
    """The dataset and version part of a ``source`` line (text before ' (' or ',')."""
    return source.split(" (")[0].split(",")[0].strip()


def format_material_table(rows: Sequence[Mapping[str, Any]]) -> str:
    """Plain-text table of :func:`material_table` rows: id, category, luminous reflectance
    under D65, measured range, source and name."""
    head = ("id", "category", "Y(D65)", "measured nm", "source", "name")
    body = []
    for r in rows:
        lo, hi = r["measured_range_nm"]
        body.append(
            (
                r["id"],
                r["category"],
                f"{r['luminous_reflectance_d65']:.3f}",
                f"{lo:g}-{hi:g}",
                _clip_text(_short_source(r["source"]), 40),
                _clip_text(r["name"], 44),
            )
        )
    widths = [max(len(h), *(len(b[i]) for b in body)) if body else len(h) for i, h in enumerate(head)]
    align_right = {2}

    def fmt(cells: Sequence[str]) -> str:
        return "  ".join(
            c.rjust(w) if i in align_right else c.ljust(w) for i, (c, w) in enumerate(zip(cells, widths))
        ).rstrip()

    lines = [fmt(head), fmt(["-" * w for w in widths])]
    lines += [fmt(b) for b in body]
    lines.append("")
    lines.append(
        f"{len(rows)} materials. Y(D65): photopic luminous reflectance under CIE illuminant D65 "
        "(CIE 1931 2-degree observer). Sources, sample ids and licences: `lampcast materials --json` "
        "or materials/README.md."
    )
    return "\n".join(lines)


def plot_material(material: Material, path: str | Path) -> Path:
    """Write a PNG plot of a material's reflectance (grid and source samples).

    The range outside the measurement (filled by the stated completion) is shaded. Written to a
    temporary file in the same folder and moved into place with :func:`os.replace`, so a
    half-written plot never carries the final name. Returns the path.
    """
    from matplotlib.backends.backend_agg import FigureCanvasAgg
    from matplotlib.figure import Figure

    path = Path(path)
    fig = Figure(figsize=(6.4, 3.6), dpi=100)
    FigureCanvasAgg(fig)
    ax = fig.add_subplot(1, 1, 1)
    lo, hi = material.measured_range_nm
    if lo > WAVELENGTH_MIN_NM:
        ax.axvspan(WAVELENGTH_MIN_NM, min(lo, WAVELENGTH_MAX_NM), color="0.9", lw=0, label="completed")
    if hi < WAVELENGTH_MAX_NM:
        ax.axvspan(
            max(hi, WAVELENGTH_MIN_NM),
            WAVELENGTH_MAX_NM,
            color="0.9",
            lw=0,
            label=None if lo > WAVELENGTH_MIN_NM else "completed",
        )
    ax.plot(WAVELENGTHS_NM, material.reflectance, color="k", lw=1.2, label="on the 1 nm grid")
    sel = (material.sample_wavelengths_nm >= WAVELENGTH_MIN_NM) & (material.sample_wavelengths_nm <= WAVELENGTH_MAX_NM)
    ax.plot(
        material.sample_wavelengths_nm[sel], material.sample_values[sel], "o", ms=2.5, color="C0", label="file samples"
    )
    top = float(np.max(material.reflectance))
    ax.set_xlim(WAVELENGTH_MIN_NM, WAVELENGTH_MAX_NM)
    ax.set_ylim(0.0, 1.0 if top > 0.5 else max(0.05, 1.15 * top))
    ax.set_xlabel("wavelength (nm)")
    ax.set_ylabel("reflectance")
    y = luminous_reflectance(material.reflectance)
    ax.set_title(f"{material.id}: {_clip_text(material.name, 60)}  (Y(D65) = {y:.3f})", fontsize=9)
    ax.legend(fontsize=7, loc="best")
    fig.tight_layout(rect=(0.0, 0.04, 1.0, 1.0))
    fig.text(0.01, 0.01, _clip_text(f"{material.source} | {material.sample_id}", 120), fontsize=6, color="0.35")

    from render.output.images import write_figure_png  # numba comes with it: only when plotting

    write_figure_png(fig, path)
    return path
