"""Pictures of a calculation: isolux plan, grid heat map and a bar chart of the headline figures.

:func:`write_calc_pictures` draws, for a :class:`~render.calc.run.CalculationReport` and the
illuminance plans of its setups (:class:`~render.calc.plan.PlanResult`), three PNG files, each
with one panel per setup so the setups compare at a glance:

* ``isolux.png`` -- the **isolux plan**: contour lines of horizontal illuminance over the whole
  street at lux levels of a 1-2-5 series chosen from the data (:func:`lux_levels`, the same
  levels for every setup), labelled in lx; the carriageway and footways shaded with their
  edges drawn, the luminaires marked and the calculation fields (between the first two
  luminaires of the first row) outlined; x and y in metres at equal scale.
* ``grid-illuminance.png`` -- the **calculation grids** as a heat map: every field of
  :attr:`~render.calc.run.SetupCalculation.fields` at its place across the street, one cell per
  grid point, annotated with its value in lx when the cells are large enough; one colour
  scale (0 to the largest value of any setup) and one colour bar for all setups.
* ``figures.png`` -- a **bar chart of the headline figures**
  (:meth:`~render.calc.run.SetupCalculation.headline`): one small panel per figure with its
  unit in the title, one bar per setup with its value; a figure that was not computed says so
  in its panel; where a class check exists, the class limit of the matching criterion is a
  dashed line, its value in the panel's title (criteria compared in mesopic photometry are
  left out: their bars are photopic).

* ``upward-exitance.png`` (when the calculation has the upward exitance map,
  :class:`render.calc.sky.UpwardExitanceMap`) -- the **light the street sends up**, seen from
  above: the upward exitance through the measuring plane over the scene in lm/m², one cell
  per map cell, x and y in metres at equal scale, one colour scale (0 to the largest cell of
  any setup) and one colour bar for all setups, each panel titled with its total reflected
  upward flux; the scene's outline (the bounds the plane covers before its margin) dashed.
  Direct light of luminous openings is not in it; with ``--bounces N`` it includes the
  interreflected light, and its title and metadata say so.

* ``night-light.png`` (when the scene has ``[night]`` light and the calculation took it,
  :mod:`render.calc.night`) -- the **night light alone** (sky glow, moonlight, lit windows) on
  the calculation points, kept apart from the luminaires' pictures: the fields' horizontal
  illuminance laid out as in the grid heat map, and the footways' semicylindrical and vertical
  illuminance at the face height facing each way along the field, values in lx written in the
  cells, on a colour scale and colour map of its own (magma, not the luminaires' viridis); one
  panel pair for all setups (the night light does not depend on the luminaires), titled and
  captioned as not the luminaires' light and not part of the class check, with the levels it
  is stated at. The numbers are the :class:`~render.calc.night.NightGrid` illuminances the text,
  CSV and JSON give.

The other pictures are direct light; when the calculation also took interreflected light
(``lampcast calc --bounces N``) each says so in its title and metadata
(:func:`interreflection_note`). With the scene's night light they stay the luminaires' light
too, and their metadata says where the night light's figures are (:func:`night_note`).
Without night light no picture changes.

The figures and fields are read through the report's public records only, so figures added to
the headline later appear without changes here. Colour maps are perceptually uniform and keep
their order in greyscale (viridis; Smith and van der Walt 2015). Pictures are drawn with
matplotlib's object-oriented API and written by :func:`render.output.images.write_figure_png`
at a fixed resolution, without timestamps: the same report gives the same bytes.

References
----------
* N. Smith and S. van der Walt (2015), "A better default colormap for Matplotlib" (viridis; magma
  from the same work).
* The 1-2-5 series of contour levels: common practice for isolux plots (no source).
"""

from __future__ import annotations

import math
import os
from collections.abc import Mapping, Sequence
from pathlib import Path
from typing import TYPE_CHECKING

import numpy as np

from render.output.images import write_figure_png
from render.output.report.numbers import format_value

if TYPE_CHECKING:
    from matplotlib.figure import Figure

    from render.calc.night import NightGrid
    from render.calc.plan import PlanField, PlanResult
    from render.calc.run import CalculationReport, SetupCalculation

__all__ = [
    "CALC_PICTURES",
    "NIGHT_PICTURE",
    "UPWARD_PICTURE",
    "CLASS_LIMIT_FIGURES",
    "bar_chart",
    "calc_picture_alt_texts",
    "class_limits",
    "grid_heatmap",
    "interreflection_note",
    "night_light_figure",
    "night_light_map",
    "night_note",
    "isolux_plan",
    "lux_levels",
    "setup_label",
    "upward_exitance_map",
    "write_calc_pictures",
]

#: The files :func:`write_calc_pictures` writes, in order (and :data:`UPWARD_PICTURE` last when
#: the calculation has the upward exitance map).
CALC_PICTURES = ("isolux.png", "grid-illuminance.png", "figures.png")
#: The upward exitance map's picture.
UPWARD_PICTURE = "upward-exitance.png"
#: The night light's picture (when the calculation has the scene's ``[night]`` light).
NIGHT_PICTURE = "night-light.png"

#: Headline figure key a class criterion limits, per criterion key (the M series' U0 is the
#: road luminance's, the others' the carriageway illuminance's); criteria not listed get no line.
CLASS_LIMIT_FIGURES: Mapping[str, str] = {
    "mean_luminance_cd_m2": "road_mean_cd_m2",
    "mean_illuminance_lx": "carriageway_mean_lx",
    "min_illuminance_lx": "carriageway_min_lx",
    "overall_uniformity": "carriageway_u0",
    "overall_uniformity/M": "road_u0",
    "longitudinal_uniformity": "road_ul",
    "threshold_increment_pct": "ti_max_percent",
    "edge_illuminance_ratio": "edge_ratio",
}

#: Resolution of every picture, dots per inch (fixed: part of what makes the bytes repeatable).
DPI = 90.0
#: Width of every picture, inches (at :data:`DPI`: 810 px, within the report's column).
WIDTH_IN = 9.0
#: Colour map of illuminance (perceptually uniform, ordered in greyscale).
CMAP = "viridis"
#: Colour map of the night light's illuminance: perceptually uniform and ordered in greyscale
#: too, and unlike the luminaires' so that the two are not read on one scale.
NIGHT_CMAP = "magma"
#: Shades of the street in the plans: carriageway, footways (light greys, so lines read on them).
CARRIAGEWAY_GREY = "#e4e4e4"
FOOTWAY_GREY = "#f3f3f3"
#: Lowest isolux level drawn, lx.
ISOLUX_FLOOR_LX = 0.1
#: Narrowest cell, inches, that gets its value written in the heat map (about five 5.5 pt figures).
_CELL_TEXT_IN = 0.3


def setup_label(setup: str | None, labels: Mapping[str | None, str] | None = None) -> str:
    """How a setup is named in the pictures: ``labels[setup]`` if given, else its name
    (``None``: "the scene as given")."""
    if labels and setup in labels:
        return labels[setup]
    return "the scene as given" if setup is None else str(setup)


def lux_levels(max_lx: float, count: int = 7, floor_lx: float = ISOLUX_FLOOR_LX) -> list[float]:
    """Contour levels for an isolux plan: the largest ``count`` values of the 1-2-5 series
    (…, 0.5, 1, 2, 5, 10, …) not above ``max_lx`` and not below ``floor_lx``, ascending; none when
    ``max_lx`` is below ``floor_lx`` (common practice, no source).

    >>> lux_levels(37.0)
    [0.2, 0.5, 1.0, 2.0, 5.0, 10.0, 20.0]
    """
    if not (math.isfinite(max_lx) and max_lx >= floor_lx):
        return []
    levels = []
    decade = math.floor(math.log10(max_lx))
    while len(levels) < count:
        for m in (5.0, 2.0, 1.0):
            v = float(f"{m * 10.0**decade:.6g}")
            if floor_lx <= v <= max_lx and len(levels) < count:
                levels.append(v)
        if 10.0**decade < floor_lx:
            break
        decade -= 1
    return sorted(levels)


def _figure(width_in: float, height_in: float):
    from matplotlib.figure import Figure

    return Figure(figsize=(width_in, height_in), dpi=DPI, layout="constrained")


def _png_text(report: CalculationReport, what: str, text: Mapping[str, str] | None) -> dict[str, str]:
    """PNG text of a calculation picture: what it shows, the scene file's name, the setups."""
    return {
        "lampcast.mode": f"calculation {what}",
        "lampcast.scene": Path(report.scene).name,
        "lampcast.setups": "; ".join(setup_label(s.setup) for s in report.setups),
        **({"lampcast.light": interreflection_note(report)} if report.options.bounces > 0 else {}),
        **({"lampcast.night_light": night_note(report)} if report.options.night is not None else {}),
        **(text or {}),
    }


def night_note(report: CalculationReport) -> str:
    """What the luminaires' pictures show when the scene has night light: the luminaires' light
    only; the night light's figures on the calculation points are in the text, CSV and JSON and
    in its own picture (:data:`NIGHT_PICTURE`)."""
    from render.calc.night import NIGHT_LABEL

    return (
        "The luminaires' light only. The night light on the calculation points is in the text, CSV and JSON "
        f"and in {NIGHT_PICTURE}: {NIGHT_LABEL}."
    )


def interreflection_note(report: CalculationReport) -> str:
    """What the pictures show when the calculation also took interreflected light: they stay
    direct light; the figures with interreflected light are in the text, CSV and JSON."""
    from render.calc.fields import INTERREFLECTED_LABEL

    return (
        "Direct light only, as EN 13201 calculates it. The fields' and footway faces' figures with interreflected light "
        f"(up to {report.options.bounces} bounces) are in the text, CSV and JSON: {INTERREFLECTED_LABEL}."
    )


def _write(fig, path: Path, report: CalculationReport, what: str, text: Mapping[str, str] | None) -> Path:
    """Write a calculation picture, labelled when the calculation also took interreflected light."""
    if report.options.bounces > 0:
        fig.suptitle(interreflection_note(report), fontsize=7, wrap=True)
    return write_figure_png(fig, path, _png_text(report, what, text))


def _street_panel(ax, plan: PlanResult) -> None:
    """Shade the carriageway and footways of ``plan`` and draw their edges."""
    x0, x1 = 0.0, plan.street_length_m
    lo, hi = plan.kerb_y_m
    ax.axhspan(lo, hi, xmin=0, xmax=1, color=CARRIAGEWAY_GREY, zorder=0, linewidth=0)
    for inner, outer in plan.footway_y_m:
        ax.axhspan(min(inner, outer), max(inner, outer), color=FOOTWAY_GREY, zorder=0, linewidth=0)
        ax.hlines([inner, outer], x0, x1, colors="#8a8a8a", linewidths=0.6, zorder=1)
    ax.hlines([lo, hi], x0, x1, colors="#404040", linewidths=0.9, zorder=1)


def isolux_plan(
    report: CalculationReport,
    plans: Mapping[str | None, PlanResult],
    path: str | os.PathLike,
    *,
    labels: Mapping[str | None, str] | None = None,
    text: Mapping[str, str] | None = None,
) -> Path:
    """The isolux plan of every setup of ``report`` (module text) to ``path``."""
    from matplotlib.lines import Line2D
    from matplotlib.patches import Rectangle

    setups = [s.setup for s in report.setups]
    shown = [plans[s] for s in setups]
    peak = max(float(np.max(p.illuminance_lx)) for p in shown)
    levels = lux_levels(peak, count=5)
    colours = [_cmap()(v) for v in np.linspace(0.0, 0.85, max(len(levels), 1))]
    first = shown[0]
    span_y = float(first.y_m[-1] - first.y_m[0])
    lum_y = [float(v) for p in shown for v in p.luminaires_xy_m[:, 1]]
    y_lo = min([float(first.y_m[0]), *lum_y]) - 0.5
    y_hi = max([float(first.y_m[-1]), *lum_y]) + 0.5
    axes_w = WIDTH_IN - 0.9
    panel_h = min(4.0, max(0.9, axes_w * (y_hi - y_lo) / max(first.street_length_m, span_y)))
    fig = _figure(WIDTH_IN, len(shown) * (panel_h + 0.55) + 0.55)
    axes = fig.subplots(len(shown), 1, squeeze=False)[:, 0]
    for ax, setup, plan in zip(axes, setups, shown):
        _street_panel(ax, plan)
        if levels:
            cs = ax.contour(plan.x_m, plan.y_m, plan.illuminance_lx, levels=levels, colors=colours, linewidths=0.9)
            ax.clabel(cs, fmt=lambda v: f"{v:g}", fontsize=7, inline_spacing=2)
        for field in plan.fields:
            fx0, fx1, fy0, fy1 = field.extent_m
            ax.add_patch(
                Rectangle(
                    (fx0, fy0), fx1 - fx0, fy1 - fy0, fill=False, edgecolor="black", linewidth=0.8, linestyle="--"
                )
            )
        ax.plot(
            plan.luminaires_xy_m[:, 0],
            plan.luminaires_xy_m[:, 1],
            linestyle="none",
            marker="o",
            markersize=5,
            markerfacecolor="black",
            markeredgecolor="white",
            zorder=5,
        )
        ax.set_xlim(0.0, plan.street_length_m)
        ax.set_ylim(y_lo, y_hi)
        ax.set_aspect("equal", adjustable="box")
        peak_here = float(np.max(plan.illuminance_lx))
        ax.set_title(
            f"{setup_label(setup, labels)} — largest {format_value(peak_here, 'sig3')} lx", fontsize=9, loc="left"
        )
        ax.set_ylabel("y across (m)", fontsize=8)
        ax.tick_params(labelsize=7)
    axes[-1].set_xlabel(
        "x along the street (m)"
        if first.road is None
        else f"distance along the road '{first.road}' (m), the road drawn straight; y across it",
        fontsize=8,
    )
    handles = [
        Line2D(
            [], [], linestyle="none", marker="o", markerfacecolor="black", markeredgecolor="white", label="luminaire"
        ),
        Rectangle((0, 0), 1, 1, fill=False, edgecolor="black", linestyle="--", label="calculation fields"),
        Rectangle((0, 0), 1, 1, color=CARRIAGEWAY_GREY, label="carriageway"),
        Rectangle((0, 0), 1, 1, color=FOOTWAY_GREY, ec="#8a8a8a", label="footways"),
    ]
    caption = (
        "isolux lines (lx): " + ", ".join(f"{v:g}" for v in levels)
        if levels
        else f"no isolux lines: no point reaches {ISOLUX_FLOOR_LX:g} lx"
    )
    fig.legend(handles=handles, loc="outside lower center", ncols=5, fontsize=7, frameon=False, title=caption)
    fig.legends[0].get_title().set_fontsize(7)
    return _write(fig, path, report, "isolux plan", text)


def _cmap():
    from matplotlib import colormaps

    return colormaps[CMAP]


def _rows_across(fields: Sequence[PlanField]) -> tuple[dict[str, np.ndarray], np.ndarray, np.ndarray]:
    """The heat map's rows across the street: every grid row one unit high, fields in their
    order across the street (−y at the bottom) with half a unit between them. Returns per field
    the row edges, and the (metre, row) pairs that map a y in metres to the drawing (by linear
    interpolation, clamped at the ends)."""
    edges: dict[str, np.ndarray] = {}
    metres, drawn = [], []
    at = 0.0
    for f in sorted(fields, key=lambda f: float(f.y_m[0])):
        n = len(f.y_m)
        edges[f.name] = at + np.arange(n + 1, dtype=np.float64)
        y0, y1 = f.extent_m[2], f.extent_m[3]
        metres += [y0, y1]
        drawn += [at, at + n]
        at += n + 0.5
    return edges, np.array(metres), np.array(drawn)


def _cells(ax, pf: PlanField, ye: np.ndarray, values: np.ndarray, cmap, norm, x_scale: float):
    """Draw one field's grid ``values`` (along, across) as cells at the field's places along
    the street (``pf``) between the row edges ``ye``, each annotated with its value when the
    cells are wide enough; returns the drawn mesh (for a colour bar)."""
    d_along = pf.spacing_m[0]
    xe = np.concatenate([pf.x_m - 0.5 * d_along, [pf.x_m[-1] + 0.5 * d_along]])
    grid = np.asarray(values, np.float64)  # (along, across)
    mesh = ax.pcolormesh(xe, ye, grid.T, cmap=cmap, norm=norm, edgecolors="white", linewidth=0.3)
    if d_along * x_scale >= _CELL_TEXT_IN:
        for i, x in enumerate(pf.x_m):
            for j in range(grid.shape[1]):
                v = float(grid[i, j])
                ax.text(
                    x,
                    ye[j] + 0.5,
                    format_value(v, "sig3"),
                    ha="center",
                    va="center",
                    fontsize=5.5,
                    color="black" if norm(v) > 0.55 else "white",
                ).set_in_layout(False)
    return mesh


def grid_heatmap(
    report: CalculationReport,
    plans: Mapping[str | None, PlanResult],
    path: str | os.PathLike,
    *,
    labels: Mapping[str | None, str] | None = None,
    text: Mapping[str, str] | None = None,
) -> Path:
    """The calculation grids of every setup of ``report`` as a heat map (module text) to ``path``.

    The fields keep their places along the street (x in metres) and their order across it;
    across the street every grid row is drawn the same height (the footways' rows are narrower
    than the lanes' in reality), so every value can be written in its cell."""
    from matplotlib.colors import Normalize

    layout = next((p for p in plans.values() if p.fields), None)
    if layout is None:
        raise ValueError("no plan holds the calculation fields' layout")
    where = {f.name: f for f in layout.fields}
    rows, metres, drawn = _rows_across(layout.fields)
    vmax = max((float(f.illuminance_lx.max()) for s in report.setups for f in s.fields), default=0.0)
    norm = Normalize(0.0, vmax if vmax > 0 else 1.0)
    cmap = _cmap()
    x0 = min(f.extent_m[0] for f in layout.fields)
    x1 = max(f.extent_m[1] for f in layout.fields)
    lums = layout.luminaires_xy_m
    near = lums[(lums[:, 0] >= x0 - 1e-6) & (lums[:, 0] <= x1 + 1e-6)]
    top = float(drawn[-1])
    panel_h = min(3.2, max(1.0, 0.17 * top + 0.2))
    x_scale = (WIDTH_IN - 2.2) / (x1 - x0)  # inches per metre along
    fig = _figure(WIDTH_IN, len(report.setups) * (panel_h + 0.4) + 0.5)
    axes = fig.subplots(len(report.setups), 1, squeeze=False)[:, 0]
    mesh = None
    for ax, s in zip(axes, report.setups):
        for f in s.fields:
            if f.name not in where:
                continue
            pf = where[f.name]
            ye = rows[f.name]
            mesh = _cells(ax, pf, ye, f.illuminance_lx, cmap, norm, x_scale)
        if len(near):
            ax.plot(
                near[:, 0],
                np.interp(near[:, 1], metres, drawn),
                linestyle="none",
                marker="o",
                markersize=5,
                markerfacecolor="black",
                markeredgecolor="white",
                clip_on=False,
                zorder=5,
            )
        ax.set_xlim(x0, x1)
        ax.set_ylim(-0.25, top + 0.25)
        ax.set_yticks([float(rows[f.name].mean()) for f in layout.fields], [f.name for f in layout.fields])
        ax.tick_params(axis="y", length=0)
        ax.set_title(setup_label(s.setup, labels), fontsize=9, loc="left")
        ax.tick_params(labelsize=7)
    axes[-1].set_xlabel("x along the street (m); dots: luminaires; rows across the street not to scale", fontsize=8)
    if mesh is not None:
        bar = fig.colorbar(mesh, ax=list(axes), shrink=0.9, pad=0.01)
        bar.set_label("horizontal illuminance (lx)", fontsize=8)
        bar.ax.tick_params(labelsize=7)
    return _write(fig, path, report, "grid heat map", text)


def class_limits(s: SetupCalculation) -> dict[str, tuple[float, str]]:
    """Headline key -> (class limit, label) of the setup's class check (photopic criteria)."""
    check = s.class_check
    if check is None:
        return {}
    data = check.to_json()
    out = {}
    for c in data.get("criteria", ()):
        if c.get("photometry") != "photopic" or c.get("required") is None:
            continue
        key = c["key"]
        figure = CLASS_LIMIT_FIGURES.get(f"{key}/{data.get('series')}", CLASS_LIMIT_FIGURES.get(key))
        if figure is not None:
            out[figure] = (float(c["required"]), f"{data.get('class')} {c.get('bound')}")
    return out


def bar_chart(
    report: CalculationReport,
    path: str | os.PathLike,
    *,
    labels: Mapping[str | None, str] | None = None,
    text: Mapping[str, str] | None = None,
    columns: int = 4,
) -> Path:
    """The headline figures of every setup of ``report`` as small bar charts (module text)."""
    from matplotlib.patches import Patch

    heads = [s.headline() for s in report.setups]
    figures = heads[0]
    n = len(report.setups)
    colours = [_cmap()(v) for v in (np.linspace(0.15, 0.8, n) if n > 1 else [0.4])]
    limits: dict[str, tuple[float, str]] = {}
    for s in report.setups:
        limits.update(class_limits(s))
    rows = math.ceil(len(figures) / columns)
    fig = _figure(WIDTH_IN, rows * 1.75 + 0.6)
    axes = fig.subplots(rows, columns, squeeze=False).ravel()
    for k, ax in enumerate(axes):
        if k >= len(figures):
            ax.set_axis_off()
            continue
        h = figures[k]
        values = [head[k].value for head in heads]
        unit = f" ({h.unit})" if h.unit else ""
        limit_text = ""
        if h.key in limits:
            limit_text = f"\n- - {limits[h.key][1]} {format_value(limits[h.key][0], 'sig3')}"
        ax.set_title(f"{h.label}{unit}{limit_text}", fontsize=7.5)
        shown = [v for v in values if v is not None and math.isfinite(v)]
        top = max([*shown, 0.0])
        if h.key in limits:
            top = max(top, limits[h.key][0])
        top = top if top > 0 else 1.0
        for i, v in enumerate(values):
            if v is None or not math.isfinite(v):
                ax.text(i, 0.05 * top, "not\ncomputed", ha="center", va="bottom", fontsize=6, color="#505050")
                continue
            ax.bar(i, v, color=colours[i], width=0.7)
            ax.text(
                i,
                v,
                format_value(v, "sig3"),
                ha="center",
                va="bottom",
                fontsize=6.5,
                zorder=4,
                bbox={"facecolor": "white", "edgecolor": "none", "pad": 0.6},
            ).set_in_layout(False)
        if h.key in limits:
            ax.axhline(limits[h.key][0], color="black", linestyle="--", linewidth=0.9)
        ax.set_xlim(-0.6, n - 0.4)
        ax.set_ylim(0.0, 1.18 * top)
        ax.set_xticks([])
        ax.tick_params(labelsize=6.5)
    handles = [Patch(color=colours[i], label=setup_label(s.setup, labels)) for i, s in enumerate(report.setups)]
    fig.legend(handles=handles, loc="outside lower center", ncols=min(n, 4), fontsize=7.5, frameon=False)
    return _write(fig, path, report, "headline figures", text)


def _has_upward_maps(report: CalculationReport) -> bool:
    return bool(report.setups) and all(s.upward_map is not None for s in report.setups)


def upward_light_note(report: CalculationReport) -> str:
    """What the upward exitance map holds: reflected light only, and which reflections."""
    first = report.setups[0].upward_map
    bounces = first.bounces if first is not None else 0
    from render.calc.fields import INTERREFLECTED_LABEL

    which = (
        f"direct light reflected once and interreflected light up to {bounces} bounces ({INTERREFLECTED_LABEL})"
        if bounces
        else "direct light reflected once (no interreflection)"
    )
    return f"Reflected light only: {which}; the luminaires' own upward light is the direct upward flux, not in the map."


def upward_exitance_map(
    report: CalculationReport,
    path: str | os.PathLike,
    *,
    labels: Mapping[str | None, str] | None = None,
    text: Mapping[str, str] | None = None,
) -> Path:
    """The upward exitance map of every setup of ``report`` (module text) to ``path``."""
    from matplotlib.colors import Normalize
    from matplotlib.patches import Rectangle

    maps = [s.upward_map for s in report.setups]
    if any(m is None for m in maps):
        raise ValueError("the calculation has no upward exitance map")
    vmax = max(float(m.exitance_lm_m2.max()) for m in maps)
    norm = Normalize(0.0, vmax if vmax > 0 else 1.0)
    first = maps[0]
    x0, x1, y0, y1 = first.extent_m
    axes_w = WIDTH_IN - 1.6
    panel_h = min(4.5, max(1.0, axes_w * (y1 - y0) / (x1 - x0)))
    fig = _figure(WIDTH_IN, len(maps) * (panel_h + 0.45) + 0.8)
    axes = fig.subplots(len(maps), 1, squeeze=False)[:, 0]
    image = None
    for ax, s, m in zip(axes, report.setups, maps):
        image = ax.imshow(
            m.exitance_lm_m2, cmap=_cmap(), norm=norm, extent=m.extent_m, origin="upper", interpolation="nearest"
        )
        bx0, bx1, by0, by1 = m.bounds_m
        ax.add_patch(
            Rectangle((bx0, by0), bx1 - bx0, by1 - by0, fill=False, edgecolor="white", linewidth=0.7, linestyle="--")
        )
        ax.set_aspect("equal", adjustable="box")
        ax.set_title(
            f"{setup_label(s.setup, labels)} — reflected upward {format_value(m.reflected_upward_lm, 'sig3')} lm "
            f"(largest {format_value(float(m.exitance_lm_m2.max()), 'sig3')} lm/m²)",
            fontsize=9,
            loc="left",
        )
        ax.set_ylabel("y (m)", fontsize=8)
        ax.tick_params(labelsize=7)
    axes[-1].set_xlabel(
        f"x (m); a plane {format_value(first.plane_z_m, 'sig3')} m up, cells of {format_value(first.cell_m, 'sig3')} m, "
        f"{first.rays_per_cell} rays each; dashed: the scene's bounds",
        fontsize=8,
    )
    if image is not None:
        bar = fig.colorbar(image, ax=list(axes), shrink=0.9, pad=0.01)
        bar.set_label("upward exitance (lm/m²)", fontsize=8)
        bar.ax.tick_params(labelsize=7)
    note = upward_light_note(report)
    fig.suptitle(note, fontsize=7, wrap=True)
    # "lampcast.light" labels interreflected light, as on the other calculation pictures (where
    # the map holds it); what the map holds is always under "lampcast.map".
    light = {"lampcast.light": note} if first.bounces else {}
    return write_figure_png(
        fig, path, _png_text(report, "upward exitance map", {"lampcast.map": note, **light, **(text or {})})
    )


def _has_night(report: CalculationReport) -> bool:
    return bool(report.setups) and any(f.night is not None for s in report.setups for f in s.fields)


def _night_face_rows(s: SetupCalculation) -> list[tuple[str, str, NightGrid]]:
    """The night light's face grids of one setup: (row label, footway field, grid), per face
    grid its semicylindrical and then its vertical grid."""
    out = []
    for face in s.faces:
        if face.night_semicylindrical is None or face.night_vertical is None:
            continue
        way = "+x" if face.facing[0] >= 0 else "−x"
        out.append((f"{face.name}, E_sc facing {way}", face.name, face.night_semicylindrical))
        out.append((f"{face.name}, E_v facing {way}", face.name, face.night_vertical))
    return out


def _night_grids(s: SetupCalculation) -> list[tuple[str, NightGrid]]:
    """Every night light grid of one setup, (label, grid): the fields', then the faces'."""
    return [(f.name, f.night) for f in s.fields if f.night is not None] + [
        (label, g) for label, _, g in _night_face_rows(s)
    ]


def _night_groups(report: CalculationReport) -> list[tuple[list[str | None], SetupCalculation]]:
    """The setups with night light, those with equal night grids together (traced once per run
    it is the same for every setup: one group)."""
    groups: list[tuple[list[str | None], SetupCalculation]] = []
    for s in report.setups:
        mine = _night_grids(s)
        if not mine:
            continue
        for names, first in groups:
            theirs = _night_grids(first)
            if [k for k, _ in theirs] == [k for k, _ in mine] and all(
                np.array_equal(a.illuminance_lx, b.illuminance_lx) for (_, a), (_, b) in zip(theirs, mine)
            ):
                names.append(s.setup)
                break
        else:
            groups.append(([s.setup], s))
    return groups


def night_light_map(
    report: CalculationReport,
    plans: Mapping[str | None, PlanResult],
    path: str | os.PathLike,
    *,
    labels: Mapping[str | None, str] | None = None,
    text: Mapping[str, str] | None = None,
) -> Path:
    """The night light's map of ``report`` (:func:`night_light_figure`) to ``path``."""
    fig, meta = night_light_figure(report, plans, labels=labels)
    return write_figure_png(fig, path, _png_text(report, "night light", {**meta, **(text or {})}))


def night_light_figure(
    report: CalculationReport,
    plans: Mapping[str | None, PlanResult],
    *,
    labels: Mapping[str | None, str] | None = None,
) -> tuple[Figure, dict[str, str]]:
    """The night light's illuminance on the calculation points (:attr:`FieldResult.night
    <render.calc.fields.FieldResult.night>`, :attr:`FaceResult.night_semicylindrical
    <render.calc.fields.FaceResult.night_semicylindrical>` and ``night_vertical``, their
    :attr:`~render.calc.night.NightGrid.illuminance_lx`) to ``path``: per group of setups with
    the same night light (one: it does not depend on the luminaires) a panel of the fields'
    horizontal illuminance laid out as in :func:`grid_heatmap`, and one of the footways'
    semicylindrical and vertical illuminance at the face height facing each way, on one colour
    scale of its own (:data:`NIGHT_CMAP`, 0 to the largest value), labelled as not the
    luminaires' light and not part of the class check. Returns the figure (not drawn on any
    shared state) and the PNG text saying what it holds."""
    from matplotlib.colors import Normalize

    from render.calc.fields import INTERREFLECTED_LABEL
    from render.calc.night import NIGHT_LABEL
    from render.light.indirect.night import describe_night

    groups = _night_groups(report)
    if not groups:
        raise ValueError("the calculation has no night light")
    layout = next((p for p in plans.values() if p.fields), None)
    if layout is None:
        raise ValueError("no plan holds the calculation fields' layout")
    where = {f.name: f for f in layout.fields}
    rows, _, drawn = _rows_across(layout.fields)
    vmax = max(float(g.illuminance_lx.max()) for _, s in groups for _, g in _night_grids(s))
    norm = Normalize(0.0, vmax if vmax > 0 else 1.0)
    cmap = _night_cmap()
    x0 = min(f.extent_m[0] for f in layout.fields)
    x1 = max(f.extent_m[1] for f in layout.fields)
    x_scale = (WIDTH_IN - 2.2) / (x1 - x0)
    top = float(drawn[-1])
    face_rows = _night_face_rows(groups[0][1])
    face_top = sum(g.illuminance_lx.shape[1] + 0.5 for *_, g in face_rows) - 0.5 if face_rows else 0.0
    heights = [min(3.2, max(1.0, 0.17 * top + 0.2))]
    if face_rows:
        heights.append(min(4.5, max(1.0, 0.17 * face_top + 0.2)))
    fig = _figure(WIDTH_IN, len(groups) * (sum(heights) + 0.4 * len(heights)) + 1.0)
    axes = fig.subplots(len(groups) * len(heights), 1, squeeze=False, height_ratios=heights * len(groups))[:, 0]
    mesh = None
    night = report.options.night
    bounces = report.options.bounces
    for g_index, (names, s) in enumerate(groups):
        ax = axes[g_index * len(heights)]
        who = ", ".join(setup_label(n, labels) for n in names)
        for f in s.fields:
            if f.night is None or f.name not in where:
                continue
            mesh = _cells(ax, where[f.name], rows[f.name], f.night.illuminance_lx, cmap, norm, x_scale)
        ax.set_xlim(x0, x1)
        ax.set_ylim(-0.25, top + 0.25)
        ax.set_yticks([float(rows[f.name].mean()) for f in layout.fields], [f.name for f in layout.fields])
        ax.tick_params(axis="y", length=0)
        ax.tick_params(labelsize=7)
        ax.set_title(
            "Night light, horizontal illuminance on the fields: not the luminaires' light, not in the class "
            f"check\n(the same for {who}: it does not depend on the luminaires)",
            fontsize=9,
            loc="left",
        )
        if len(heights) < 2:
            continue
        ax = axes[g_index * len(heights) + 1]
        at = 0.0
        ticks, names_y = [], []
        for label, field, grid in _night_face_rows(s):
            n = grid.illuminance_lx.shape[1]
            edges = at + np.arange(n + 1, dtype=np.float64)
            mesh = _cells(ax, where[field], edges, grid.illuminance_lx, cmap, norm, x_scale)
            ticks.append(float(edges.mean()))
            names_y.append(label)
            at += n + 0.5
        ax.set_xlim(x0, x1)
        ax.set_ylim(-0.25, face_top + 0.25)
        ax.set_yticks(ticks, names_y)
        ax.tick_params(axis="y", length=0)
        ax.tick_params(labelsize=7)
        height = next((face.height_m for face in s.faces), 0.0)
        ax.set_title(
            f"Night light at {format_value(height, 'sig3')} m above the footways: semicylindrical (E_sc) and "
            "vertical (E_v) illuminance",
            fontsize=9,
            loc="left",
        )
    axes[-1].set_xlabel(
        "x along the street (m); facing +x / −x along the field's frame; rows across not to scale", fontsize=8
    )
    if mesh is not None:
        bar = fig.colorbar(mesh, ax=list(axes), shrink=0.9, pad=0.01)
        bar.set_label("night light illuminance (lx)", fontsize=8)
        bar.ax.tick_params(labelsize=7)
    which = f"with up to {bounces} interreflections" if bounces > 0 else "its direct part only"
    stated = describe_night(night) if night is not None else "night light"
    note = f"{stated}; traced {which}. {NIGHT_LABEL}."
    fig.suptitle(note, fontsize=7, wrap=True)
    meta = {"lampcast.night_light": note}
    if bounces > 0:
        meta["lampcast.light"] = f"Night light with up to {bounces} interreflections: {INTERREFLECTED_LABEL}."
    return fig, meta


def _night_cmap():
    from matplotlib import colormaps

    return colormaps[NIGHT_CMAP]


def calc_picture_alt_texts(report: CalculationReport, labels: Mapping[str | None, str] | None = None) -> list[str]:
    """What each picture of :data:`CALC_PICTURES` (and :data:`UPWARD_PICTURE` when the
    calculation has the map, :data:`NIGHT_PICTURE` when it has night light) shows, in words
    (the report's alt texts)."""
    names = ", ".join(setup_label(s.setup, labels) for s in report.setups)
    out = [
        f"Isolux plan of the street, one panel per lighting ({names}): lines of equal horizontal illuminance "
        "in lux, luminaire positions and the calculation fields outlined",
        f"Heat map of the calculation grids' horizontal illuminance in lux, one panel per lighting ({names}), "
        "on one colour scale",
        f"Bar charts of the headline figures, one bar per lighting ({names}), with their units",
    ]
    if _has_upward_maps(report):
        out.append(
            f"Map of the light the street reflects upward, seen from above, one panel per lighting ({names}): "
            "upward exitance in lumens per square metre on one colour scale, with each lighting's total"
        )
    if _has_night(report):
        out.append(
            "Heat map of the night light alone (sky glow, moonlight, lit windows) on the calculation points, "
            "in lux on a colour scale of its own: horizontal illuminance on the fields and the footways' "
            "semicylindrical and vertical illuminance; not the luminaires' light and not part of the class check"
        )
    return out


def write_calc_pictures(
    report: CalculationReport,
    plans: dict[str | None, PlanResult],
    out_dir: str | os.PathLike,
    *,
    labels: Mapping[str | None, str] | None = None,
    text: Mapping[str, str] | None = None,
) -> list[Path]:
    """Write the isolux plan, the grid heat map and the headline bar chart of ``report``
    (:data:`CALC_PICTURES`), the upward exitance map (:data:`UPWARD_PICTURE`) when the
    report has it and the night light's map (:data:`NIGHT_PICTURE`) when it has night light,
    into ``out_dir``; ``plans`` maps each setup of the report (its
    :attr:`~render.calc.run.SetupCalculation.setup`) to its plan
    (:func:`render.calc.plan.compute_plan`). ``labels`` names the setups in the pictures
    (default: their names); ``text`` is added to each PNG's metadata. Returns the paths."""
    missing = [s.setup for s in report.setups if s.setup not in plans]
    if missing:
        raise ValueError(f"no plan for setup(s) {', '.join(setup_label(m) for m in missing)}")
    out = Path(out_dir)
    out.mkdir(parents=True, exist_ok=True)
    isolux, grid, bars = (out / name for name in CALC_PICTURES)
    paths = [
        isolux_plan(report, plans, isolux, labels=labels, text=text),
        grid_heatmap(report, plans, grid, labels=labels, text=text),
        bar_chart(report, bars, labels=labels, text=text),
    ]
    if _has_upward_maps(report):
        paths.append(upward_exitance_map(report, out / UPWARD_PICTURE, labels=labels, text=text))
    if _has_night(report):
        paths.append(night_light_map(report, plans, out / NIGHT_PICTURE, labels=labels, text=text))
    return paths
