"""Lamp sheet: lamp figures as a text table, as JSON, and a lamp's spectrum as a plot.

The figures are computed by :func:`render.colour.lamp_figures.lamp_figures`; this module only
presents them. :func:`format_lamp_table` is the table ``lampcast lamps`` prints,
:func:`lamp_figures_json` the JSON ``lampcast lamps --json`` prints (the records of
:meth:`render.colour.lamp_figures.LampFigures.to_json`), and :func:`plot_lamp_spectrum` draws a
lamp's spectrum with the photopic and scotopic luminous efficiency functions.

References
----------
- CIE 1924 photopic V(λ) and CIE 1951 scotopic V'(λ) luminous efficiency functions (the curves
  drawn beside the spectrum).
- Fixed-width tables with units in a second header row: common practice, no source.
"""

from __future__ import annotations

import json
from collections.abc import Sequence
from pathlib import Path

import numpy as np

from render.colour.lamp_figures import LampFigures, lamp_figures
from render.colour.lamps import Lamp
from render.colour.observers import photopic_lef, scotopic_lef
from render.colour.spectra import BIN_EDGES_NM, BIN_WIDTH_NM, WAVELENGTHS_NM

__all__ = ["format_lamp_table", "lamp_figures_json", "plot_lamp_spectrum"]

_TABLE_COLUMNS = (
    # (header, unit, figure, width, format)
    ("lamp", "", "id", 0, None),
    ("CCT", "K", "cct_K", 6, "{:.0f}"),
    ("Duv", "", "duv", 7, "{:+.4f}"),
    ("Ra", "", "ra", 6, "{:.1f}"),
    ("R9", "", "r9", 6, "{:.0f}"),
    ("Rf", "CIE224", "rf_cie2017", 6, "{:.1f}"),
    ("Rg", "TM-30", "rg_tm30", 6, "{:.1f}"),
    ("S/P", "", "sp_ratio", 5, "{:.2f}"),
    ("LER", "lm/W", "ler_lm_per_w", 5, "{:.0f}"),
    ("blue", "<500nm%", "blue_fraction", 7, "{:.1%}"),
    ("notch", "±2nm%", "notch_fraction", 6, "{:.1%}"),
    ("x", "", "x", 6, "{:.4f}"),
    ("y", "", "y", 6, "{:.4f}"),
)


def format_lamp_table(figures: Sequence[LampFigures]) -> str:
    """A fixed-width text table of lamp figures, one lamp per row.

    Undefined figures show as ``n/a``; a ``*`` marks a figure with a warning. Reasons and
    warnings are listed under the table.
    """
    id_width = max([len("lamp")] + [len(f.id) for f in figures])
    widths = [
        id_width if key == "id" else max(width, len(head), len(unit)) for head, unit, key, width, _ in _TABLE_COLUMNS
    ]
    head = "  ".join(h.ljust(w) if k == "id" else h.rjust(w) for (h, _, k, _, _), w in zip(_TABLE_COLUMNS, widths))
    units = "  ".join(u.ljust(w) if k == "id" else u.rjust(w) for (_, u, k, _, _), w in zip(_TABLE_COLUMNS, widths))
    lines = [head, units, "-" * len(head)]
    footnotes: list[str] = []
    for fig in figures:
        cells = []
        flagged = {"ra", "r9"} if any(w.startswith("CIE 13.3") for w in fig.warnings) else set()
        for (_, _, key, _, fmt), width in zip(_TABLE_COLUMNS, widths):
            if key == "id":
                cells.append(fig.id.ljust(width))
                continue
            value = getattr(fig, key)
            text = "n/a" if value is None else fmt.format(value).replace("%", "")
            if key in flagged and value is not None:
                text += "*"
            cells.append(text.rjust(width))
        lines.append("  ".join(cells).rstrip())
        reasons: dict[str, list[str]] = {}
        for key, why in fig.undefined.items():
            reasons.setdefault(why, []).append(key)
        for why, keys in reasons.items():
            footnotes.append(f"{fig.id}: {', '.join(keys)} n/a -- {why}")
        for w in fig.warnings:
            footnotes.append(f"{fig.id}: {'* ' if w.startswith('CIE 13.3') else ''}{w}")
    if footnotes:
        lines += ["", *footnotes]
    return "\n".join(lines)


def lamp_figures_json(figures: Sequence[LampFigures]) -> str:
    """JSON text of lamp figures: a list of :meth:`~render.colour.lamp_figures.LampFigures.to_json`
    records (stable key order, floats rounded, ``null`` for undefined figures, never NaN)."""
    return json.dumps([f.to_json() for f in figures], indent=2, ensure_ascii=False, allow_nan=False)


def _title(lamp: Lamp, fig: LampFigures) -> str:
    parts = []
    parts.append("CCT n/a" if fig.cct_K is None else f"{fig.cct_K:.0f} K")
    parts.append("Ra n/a" if fig.ra is None else f"Ra {fig.ra:.0f}")
    parts.append(f"S/P {fig.sp_ratio:.2f}")
    parts.append(f"{fig.ler_lm_per_w:.0f} lm/W")
    return f"{lamp.id}\n{lamp.name} -- " + ", ".join(parts)


def plot_lamp_spectrum(lamp: Lamp, path: str | Path, dpi: int = 110) -> Path:
    """Write a PNG of the lamp's relative spectrum with V(λ) and V'(λ).

    Top panel: the spectrum per 1 nm bin scaled to a peak of 1 (steps), V(λ) and V'(λ); the
    modelled emission lines are marked. Bottom panel: the same spectrum on a log scale, so that
    weak lines and the continuum are visible. The file is written atomically (temporary file
    in the same folder, then ``os.replace``).

    Returns the path written.
    """
    from matplotlib.backends.backend_agg import FigureCanvasAgg
    from matplotlib.figure import Figure

    path = Path(path)
    fig_values = lamp_figures(lamp)
    rel = lamp.spd_peak_normalised()
    peak = float(lamp.spd.max())
    edges = BIN_EDGES_NM

    figure = Figure(figsize=(8.0, 5.6))
    FigureCanvasAgg(figure)
    top, bottom = figure.subplots(2, 1, sharex=True, gridspec_kw={"height_ratios": [2.2, 1.0]})
    top.stairs(rel, edges, fill=True, color="0.25", alpha=0.35, linewidth=0)
    top.stairs(rel, edges, color="0.1", linewidth=0.9, label="lamp, relative power per nm")
    top.plot(WAVELENGTHS_NM, photopic_lef(), color="tab:green", linewidth=1.2, label="V(λ) photopic")
    top.plot(WAVELENGTHS_NM, scotopic_lef(), color="tab:blue", linewidth=1.2, linestyle="--", label="V'(λ) scotopic")
    if lamp.lines:
        wl = np.array([w for w, _ in lamp.lines])
        height = np.array([p for _, p in lamp.lines]) / BIN_WIDTH_NM / peak
        top.vlines(wl, 0.0, np.minimum(height, 1.0), color="tab:red", linewidth=1.0, label="emission lines")
        top.plot(wl, np.minimum(height, 1.0), "v", color="tab:red", markersize=4)
    top.set_ylim(0.0, 1.08)
    top.set_ylabel("relative (peak = 1)")
    top.legend(loc="best", fontsize=7, framealpha=0.85)
    top.set_title(_title(lamp, fig_values), fontsize=9)

    floor = 1e-5
    bottom.stairs(np.maximum(rel, floor), edges, color="0.1", linewidth=0.8, baseline=floor)
    if lamp.lines:
        bottom.plot(wl, np.clip(height, floor, None), "v", color="tab:red", markersize=3)
    bottom.set_yscale("log")
    bottom.set_ylim(floor, 2.0)
    bottom.set_ylabel("log scale")
    bottom.set_xlabel("wavelength (nm)")
    bottom.set_xlim(WAVELENGTHS_NM[0] - 0.5, WAVELENGTHS_NM[-1] + 0.5)
    for ax in (top, bottom):
        ax.set_axisbelow(True)
        ax.grid(True, color="0.9", linewidth=0.6)
    figure.subplots_adjust(left=0.09, right=0.98, top=0.9, bottom=0.09, hspace=0.08)

    from render.output.images import write_figure_png  # numba comes with it: only when plotting

    write_figure_png(figure, path, dpi=dpi)
    return path
