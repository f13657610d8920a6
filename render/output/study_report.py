"""The study summary: options ranked by the objective, the Pareto front, plots and the table.

One self-contained HTML page (``study.html`` in the study's output folder; jinja2 template
``report/templates/study.html.j2``, autoescaped, pictures inline as PNG data) and the plots as
PNG files beside it: annual energy against the class margin, and against the smallest colour
difference where the colour figures were computed, Pareto-front rows marked.
"""

from __future__ import annotations

import base64
import math
from pathlib import Path
from typing import Any

from render.calc.classes import CAUTION
from render.fileio import atomic_write_text
from render.studies.rank import criteria_present, pareto_front, ranked
from render.studies.spec import StudySpec

__all__ = ["write_study_report"]

#: Columns of the page's table (those the study has), in this order; the CSV has them all.
SHOWN = (
    "label",
    "setup",
    "note",
    "annual_kwh",
    "annual_cost",
    "currency",
    "class_name",
    "class_verdict",
    "class_margin_min",
    "carriageway_mean_lx",
    "carriageway_u0",
    "road_mean_cd_m2",
    "ti_max_percent",
    "upward_lm_per_m",
    "colour_hard_pairs",
    "colour_min_delta_e00",
)


def _format(value: Any) -> tuple[str, bool]:
    if value is None:
        return "–", False
    if isinstance(value, bool) or isinstance(value, str):
        return str(value), True
    if isinstance(value, float):
        if not math.isfinite(value):
            return str(value), False
        return (f"{value:,.0f}" if abs(value) >= 100 else f"{value:.3g}"), False
    return str(value), False


def _plot(table: dict, front: list[bool], y: str, y_label: str, path: Path) -> Path | None:
    from matplotlib.figure import Figure

    from render.output.images import write_figure_png

    xs, ys, fs = [], [], []
    for x_v, y_v, f in zip(table.get("annual_kwh", []), table.get(y, []), front, strict=False):
        if isinstance(x_v, int | float) and isinstance(y_v, int | float) and not isinstance(y_v, bool):
            xs.append(float(x_v))
            ys.append(float(y_v))
            fs.append(f)
    if not xs:
        return None
    fig = Figure(figsize=(6.0, 4.0), dpi=90)
    ax = fig.add_subplot()
    ax.scatter(
        [x for x, f in zip(xs, fs, strict=True) if not f],
        [v for v, f in zip(ys, fs, strict=True) if not f],
        s=18,
        color="#9a9a9a",
        label="other options",
    )
    ax.scatter(
        [x for x, f in zip(xs, fs, strict=True) if f],
        [v for v, f in zip(ys, fs, strict=True) if f],
        s=30,
        color="#2a6f97",
        label="Pareto front",
    )
    ax.set_xlabel("annual energy (kWh/year)")
    ax.set_ylabel(y_label)
    ax.grid(True, linewidth=0.4, color="#dddddd")
    ax.legend(loc="best", fontsize=8)
    fig.tight_layout()
    return write_figure_png(fig, path)


def write_study_report(spec: StudySpec, table: dict[str, list[Any]], out_dir: str | Path) -> Path:
    """Write ``study.html`` and its plots into ``out_dir``; returns the page's path."""
    from render.output.report.document import template_environment

    out = Path(out_dir)
    order = ranked(table, spec.objective, spec.goal)
    front = pareto_front(table)
    columns = [c for c in SHOWN if c in table]
    rows = []
    for rank, i in enumerate(order, start=1):
        cells = []
        for c in columns:
            text, is_text = _format(table[c][i])
            cells.append({"value": text, "text": is_text})
        rows.append({"rank": rank, "front": front[i], "cells": cells})
    pictures = []
    plots = [("class_margin_min", "smallest class margin (≥ 0 meets the class)", "energy-vs-class-margin.png")]
    if "colour_min_delta_e00" in table:
        plots.append(("colour_min_delta_e00", "smallest ΔE00 of distinct objects", "energy-vs-colour.png"))
    for column, label, name in plots:
        path = _plot(table, front, column, label, out / name)
        if path is not None:
            uri = "data:image/png;base64," + base64.b64encode(path.read_bytes()).decode("ascii")
            pictures.append({"uri": uri, "alt": f"Annual energy against {label}; Pareto-front options in blue."})
    crit = criteria_present(table)
    front_text = ", ".join(f"{c} {'lower' if g == 'min' else 'higher'} is better" for c, g in crit) or "no criteria"
    html = (
        template_environment()
        .get_template("study.html.j2")
        .render(
            title=f"Study: {spec.name}",
            description=spec.description,
            caution=CAUTION,
            objective=spec.objective,
            goal=spec.goal,
            columns=columns,
            rows=rows,
            pictures=pictures,
            front_text=front_text,
            notes=[
                f"{len(table.get('key', []))} rows (scene variant × setup); every figure is in results.csv and "
                "results.parquet, units in the column names.",
                "class_margin_min is the smallest margin over the class's criteria: 0 at a limit, below 0 a shortfall.",
                "Energy figures come from each setup's input watts and dimming schedule and the scene's [energy].",
            ],
        )
    )
    return atomic_write_text(out / "study.html", html)
