"""Pictures for the colour analysis: outlined view, swatch sheet, ΔE00 heat map, spectrum strips.

Pictures are drawn with matplotlib's object-oriented API (``matplotlib.figure.Figure``; no
pyplot state) and written by :func:`render.output.images.write_figure_png`.

Spectrum strip (what a diffraction grating would show)
------------------------------------------------------
A grating spreads light by wavelength: in the first order at small angles the position on the
screen is nearly proportional to wavelength (``sin θ = λ/d``), so the strip maps wavelength
linearly to the horizontal axis (380-780 nm by default). Each column shows

* **colour**: the chromaticity of the monochromatic light at the column's centre wavelength
  (CIE 1931 2° colour-matching functions, :func:`render.colour.observers.cmfs_xyz`), brought into
  sRGB by *hue-preserving desaturation*: the most saturated sRGB colour with the same Oklab
  hue (Ottosson 2020), found on the gamut's ring of full-saturation colours
  (:func:`monochromatic_display_rgb`), largest channel 1.
* **intensity**: the lamp's spectral power in the column (the density integrated over the
  column's wavelength span, exact for the 1 nm grid), relative to the strongest column, as a
  linear-light factor before sRGB encoding. This is radiometric power, not luminance: a real
  grating's strip also dims toward both ends by V(λ); showing power lets the reader see the
  violet and deep-red parts of a spectrum, which matter for colour rendering.

A low-pressure sodium lamp then shows a single yellow line at 589 nm and black elsewhere: every
surface reflects only that light, so every surface has that one chromaticity -- the strip shows
why a line source cannot render hue.
"""

from __future__ import annotations

import textwrap
from collections.abc import Mapping, Sequence
from dataclasses import dataclass
from functools import lru_cache
from pathlib import Path

import numpy as np

from render.colour.oklab import xyz_to_oklab
from render.colour.spectra import BIN_EDGES_NM, BIN_WIDTH_NM, WAVELENGTHS_NM
from render.output.images import write_figure_png

#: Outline colours of the outlined view (our own palette; cycled).
OUTLINE_COLOURS = ("#ffd23f", "#3bceac", "#ee4266", "#7c9cff", "#f9a03f", "#b5e48c", "#f78fb3", "#c8b6ff")

#: ΔE00 classes of the heat map: upper bounds, colours and labels (our own colour scale). The
#: labels name ΔE00 bands only: CIEDE2000 has no light-level term, so whether a pair can be told
#: apart at night is the discrimination model's verdict (the tables), not these bands.
HEATMAP_CLASSES = (
    (1.0, "#7b1e3a", "< 1 (about one JND in daylight)"),
    (3.0, "#d9622b", "1-3"),
    (10.0, "#f1d38a", "3-10"),
    (20.0, "#9fd0c7", "10-20"),
    (np.inf, "#3c7a96", "≥ 20"),
)
#: Title of the heat maps' legend.
HEATMAP_LEGEND_TITLE = "CIEDE2000 (no light-level term: see the verdicts in the tables)"


# ------------------------------------------------------------------------------- helpers


def _overlap(a: tuple[float, float, float, float], b: tuple[float, float, float, float]) -> float:
    """Overlap area of two boxes ``(x0, y0, x1, y1)``."""
    return max(0.0, min(a[2], b[2]) - max(a[0], b[0])) * max(0.0, min(a[3], b[3]) - max(a[1], b[1]))


def place_labels(
    anchors: Sequence[tuple[float, float, float]],
    sizes: Sequence[tuple[float, float]],
    width: float,
    height: float,
    gap: float = 0.0,
) -> list[tuple[float, float, float, float]]:
    """Boxes ``(x0, y0, x1, y1)`` (image coordinates, y down) for labels that do not overlap,
    by greedy placement (our own simple scheme, no source).

    Each label ``k`` belongs to an object spanning ``anchors[k] = (centre_x, top_y, bottom_y)``
    and has size ``sizes[k] = (w, h)``. Labels are placed in order of their object's top edge
    (then centre, then index); each takes the first candidate that lies in the image and
    overlaps no label placed before: just above its object, just below, then further above and
    further below in steps of its height. When every candidate overlaps, the one with the least
    overlap is used. Boxes are kept horizontally inside the image where they fit.
    """
    boxes: list[tuple[float, float, float, float] | None] = [None] * len(anchors)
    order = sorted(range(len(anchors)), key=lambda k: (anchors[k][1], anchors[k][0], k))
    placed: list[tuple[float, float, float, float]] = []
    for k in order:
        cx, top, bottom = anchors[k]
        w, h = sizes[k]
        x0 = min(max(cx - 0.5 * w, 0.0), max(width - w, 0.0))
        steps = int(np.ceil(height / max(h, 1e-9))) + 1
        tops = []
        for i in range(steps):
            tops += [top - gap - (i + 1) * h, bottom + gap + i * h]
        candidates = [(x0, y, x0 + w, y + h) for y in tops]
        inside = [c for c in candidates if c[1] >= 0.0 and c[3] <= height] or candidates[:2]
        best = next((c for c in inside if all(_overlap(c, q) == 0.0 for q in placed)), None)
        if best is None:
            best = min(inside, key=lambda c: sum(_overlap(c, q) for q in placed))
        boxes[k] = best
        placed.append(best)
    return [b for b in boxes if b is not None]


def _figure(width_in: float, height_in: float, dpi: float = 100.0):
    from matplotlib.figure import Figure

    return Figure(figsize=(width_in, height_in), dpi=dpi)


def _save(fig, path, dpi: float | None = None, text: Mapping[str, str] | None = None) -> Path:
    """PNG, written atomically, with ``text`` as PNG text metadata (how the picture was made)."""
    return write_figure_png(fig, path, text, dpi=dpi)


def _as_float_rgb(srgb) -> np.ndarray:
    img = np.asarray(srgb)
    if img.ndim != 3 or img.shape[2] < 3:
        raise ValueError("expected an (H, W, 3) sRGB image")
    img = img[..., :3]
    if img.dtype == np.uint8:
        return img.astype(np.float64) / 255.0
    if img.dtype == np.uint16:
        return img.astype(np.float64) / 65535.0
    return np.clip(img.astype(np.float64), 0.0, 1.0)


def lab_to_display_srgb(lab) -> np.ndarray:
    """Encoded sRGB (..., 3) in [0, 1] of CIELAB colours relative to a D65 white.

    CIELAB -> XYZ with the sRGB display white (the white the vision stage adapts to), then the
    vision stage's own Oklab gamut mapping (constant lightness and hue) and IEC 61966-2-1
    encoding. NaN gives NaN.
    """
    import colour

    from render.vision.display import display_white_xyz, gamut_map_oklab, srgb_encode

    lab = np.asarray(lab, dtype=np.float64)
    shape = lab.shape
    flat = lab.reshape(-1, 3)
    ok = np.all(np.isfinite(flat), axis=1)
    out = np.full(flat.shape, np.nan)
    if ok.any():
        w = display_white_xyz()
        xyz = np.asarray(colour.Lab_to_XYZ(flat[ok], colour.XYZ_to_xy(w)), dtype=np.float64)
        rgb, _ = gamut_map_oklab(np.atleast_2d(xyz))
        out[ok] = srgb_encode(rgb)
    return out.reshape(shape)


def _text_colour(rgb) -> str:
    rgb = np.asarray(rgb, dtype=np.float64)
    if not np.all(np.isfinite(rgb)):
        return "black"
    lin = np.where(rgb <= 0.04045, rgb / 12.92, ((rgb + 0.055) / 1.055) ** 2.4)
    return "black" if float(lin @ [0.2126, 0.7152, 0.0722]) > 0.22 else "white"


# --------------------------------------------------------------------------- outlined view


def outlined_view(
    srgb,
    object_id,
    labels: Mapping[int, str],
    path,
    *,
    min_width_px: int = 960,
    title: str | None = None,
    line_px: float = 2.0,
    png_text: Mapping[str, str] | None = None,
) -> Path:
    """The view with tagged objects outlined and labelled, as a PNG.

    Parameters
    ----------
    srgb
        (H, W, 3) display image (uint8, uint16 or floats in [0, 1], already encoded).
    object_id
        (H, W) integer object-id image of the view.
    labels
        id -> label text for each object to outline (objects without visible pixels are
        skipped).
    path
        Output PNG (written atomically).
    min_width_px
        Small images are enlarged by an integer factor (nearest neighbour) to at least this
        width, so outlines and labels stay legible.
    title
        Optional caption above the image.
    line_px
        Outline width, output pixels.
    """
    import matplotlib.patheffects as pe

    img = _as_float_rgb(srgb)
    oid = np.asarray(object_id)
    if oid.shape != img.shape[:2]:
        raise ValueError("object_id must match the image size")
    h, w = oid.shape
    scale = max(1, int(np.ceil(min_width_px / w)))
    dpi = 100.0
    title_in = 0.45 if title else 0.0
    fig = _figure(w * scale / dpi, h * scale / dpi + title_in, dpi)
    fig.patch.set_facecolor("#1b1b1b")
    ax = fig.add_axes([0.0, 0.0, 1.0, (h * scale / dpi) / (h * scale / dpi + title_in)])
    ax.imshow(img, interpolation="nearest", extent=(0, w, h, 0))
    ax.set_xlim(0, w)
    ax.set_ylim(h, 0)
    ax.set_axis_off()
    if title:
        fig.text(
            0.5,
            1.0 - 0.5 * title_in / (h * scale / dpi + title_in),
            title,
            ha="center",
            va="center",
            color="white",
            fontsize=12,
        )
    xs = np.arange(w) + 0.5
    ys = np.arange(h) + 0.5
    lw = line_px * 72.0 / dpi
    stroke = [pe.Stroke(linewidth=lw + 2.0, foreground="black"), pe.Normal()]
    # Label boxes in image pixels: a 10 pt label is about 0.6 em per character wide and 1.7 em
    # high with its padding (common practice, no source), at this figure's output scale.
    em_px = 10.0 * dpi / 72.0 / scale
    shown_labels = []
    for n, (k, text) in enumerate(labels.items()):
        mask = oid == int(k)
        if mask.any():
            rows, cols = np.nonzero(mask)
            anchor = (0.5 * (cols.min() + cols.max() + 1), float(rows.min()), float(rows.max() + 1))
            size = ((0.62 * len(str(text)) + 0.8) * em_px, 1.75 * em_px)
            shown_labels.append((n, str(text), mask, anchor, size))
    boxes = place_labels([s[3] for s in shown_labels], [s[4] for s in shown_labels], w, h, gap=0.01 * h)
    for (n, text, mask, _, _), box in zip(shown_labels, boxes):
        colour = OUTLINE_COLOURS[n % len(OUTLINE_COLOURS)]
        padded = np.pad(mask.astype(float), 1)
        cs = ax.contour(
            np.concatenate([[xs[0] - 1], xs, [xs[-1] + 1]]),
            np.concatenate([[ys[0] - 1], ys, [ys[-1] + 1]]),
            padded,
            levels=[0.5],
            colors=[colour],
            linewidths=lw,
        )
        cs.set_path_effects(stroke)
        ax.text(
            0.5 * (box[0] + box[2]),
            0.5 * (box[1] + box[3]),
            text,
            ha="center",
            va="center",
            fontsize=10,
            color="black",
            clip_on=True,
            bbox=dict(boxstyle="round,pad=0.25", facecolor=colour, edgecolor="black", linewidth=0.8),
        )
    return _save(fig, path, text=png_text)


# ----------------------------------------------------------------------------- swatch sheet


def swatch_sheet(
    object_names: Sequence[str],
    column_labels: Sequence[str],
    labs,
    path,
    *,
    terms=None,
    title: str | None = None,
    png_text: Mapping[str, str] | None = None,
) -> Path:
    """Swatch sheet: one row per object, one column per condition (daylight | before | after).

    Parameters
    ----------
    object_names
        n row labels.
    column_labels
        m column labels, e.g. ``["daylight (D65)", "before: HPS", "after: LED 3000 K"]``.
    labs
        (n, m, 3) CIELAB relative to a D65 white; NaN for "not visible".
    terms
        Optional (n, m) basic colour terms printed on the swatches (names that differ from
        the first column are marked with an arrow).
    path
        Output PNG (written atomically).
    title
        Optional title.

    Each swatch is the colour shown as it appears to the adapted observer, brought to display
    (:func:`lab_to_display_srgb`), with L*, C*, h below it.
    """
    from matplotlib.patches import Rectangle

    labs = np.asarray(labs, dtype=np.float64)
    n, m = len(object_names), len(column_labels)
    if labs.shape != (n, m, 3):
        raise ValueError(f"labs must be ({n}, {m}, 3)")
    rgb = lab_to_display_srgb(labs)
    cell_w, cell_h = 1.75, 0.95
    label_w = 0.3 + 0.085 * max((len(str(s)) for s in object_names), default=4)
    header_lines = max((len(textwrap.wrap(str(c), 20)) for c in column_labels), default=1)
    top_in = (0.55 if title else 0.15) + 0.2 * header_lines + 0.15
    fig = _figure(label_w + m * cell_w + 0.2, top_in + n * cell_h + 0.15)
    fig.patch.set_facecolor("white")
    ax = fig.add_axes([0, 0, 1, 1])
    W, H = label_w + m * cell_w + 0.2, top_in + n * cell_h + 0.15
    ax.set_xlim(0, W)
    ax.set_ylim(H, 0)
    ax.set_axis_off()
    if title:
        ax.text(W / 2, 0.3, title, ha="center", va="center", fontsize=12, weight="bold")
    for j, lab in enumerate(column_labels):
        ax.text(
            label_w + (j + 0.5) * cell_w,
            top_in - 0.12,
            "\n".join(textwrap.wrap(str(lab), 20)) or " ",
            ha="center",
            va="bottom",
            fontsize=9,
            weight="bold",
            linespacing=1.1,
        )
    for i, name in enumerate(object_names):
        y0 = top_in + i * cell_h
        ax.text(label_w - 0.12, y0 + 0.38, name, ha="right", va="center", fontsize=10)
        for j in range(m):
            x0 = label_w + j * cell_w + 0.08
            sw, sh = cell_w - 0.16, 0.6
            c = rgb[i, j]
            if not np.all(np.isfinite(c)):
                ax.add_artist(  # the limits are fixed: add_patch would only recompute the data limits
                    Rectangle(
                        (x0, y0 + 0.08), sw, sh, facecolor="#e6e6e6", edgecolor="#999999", hatch="///", linewidth=0.8
                    )
                )
                ax.text(
                    x0 + sw / 2,
                    y0 + 0.08 + sh / 2,
                    "not visible",
                    ha="center",
                    va="center",
                    fontsize=8,
                    color="#555555",
                )
                continue
            ax.add_artist(Rectangle((x0, y0 + 0.08), sw, sh, facecolor=c, edgecolor="#777777", linewidth=0.6))
            if terms is not None:
                t = terms[i][j]
                base = terms[i][0]
                text = "" if t is None else (f"→ {t}" if j > 0 and t != base else t)
                ax.text(
                    x0 + sw / 2,
                    y0 + 0.08 + sh / 2,
                    text,
                    ha="center",
                    va="center",
                    fontsize=9,
                    color=_text_colour(c),
                    weight="bold" if text.startswith("→") else "normal",
                )
            L, C, h = (
                labs[i, j, 0],
                np.hypot(labs[i, j, 1], labs[i, j, 2]),
                np.degrees(np.arctan2(labs[i, j, 2], labs[i, j, 1])) % 360,
            )
            ax.text(
                x0 + sw / 2,
                y0 + 0.08 + sh + 0.1,
                f"L* {L:.0f}  C* {C:.0f}  h {h:.0f}°",
                ha="center",
                va="center",
                fontsize=7,
                color="#333333",
            )
    return _save(fig, path, text=png_text)


# ---------------------------------------------------------------------------- ΔE00 heat map


#: Width of the report's pictures, inches at 100 dpi (the report's 72 rem column at 16 px).
REPORT_WIDTH_IN = 11.5
#: Side of one heat-map cell, inches.
HEATMAP_CELL_IN = 0.48


def _heatmap_name_in(names: Sequence[str]) -> float:
    return 0.12 + 0.075 * max((len(s) for s in names), default=1)


def heatmap_width_in(names: Sequence[str], panels: int) -> float:
    """Width of :func:`delta_e_heatmap`'s figure, inches (at 100 dpi: pixels / 100)."""
    n = len(names)
    return _heatmap_name_in(names) + panels * n * HEATMAP_CELL_IN + (panels - 1) * 0.35 + 0.3


def heatmap_fits(names: Sequence[str], panels: int, width_in: float = REPORT_WIDTH_IN) -> bool:
    """Whether the heat map is at most ``width_in`` wide, so its 8 pt numbers are read at
    report width without being scaled down."""
    return heatmap_width_in(names, panels) <= width_in


def closest_pairs(matrices: Mapping[str, np.ndarray], names: Sequence[str], count: int) -> list[tuple[int, int]]:
    """The ``count`` pairs ``(i, j)``, i < j, with the smallest ΔE00 under any condition but the
    first (the daylight reference); pairs undefined everywhere (not visible) last, then by
    index."""
    mats = [np.asarray(m, dtype=np.float64) for m in list(matrices.values())[1:]] or [
        np.asarray(m, dtype=np.float64) for m in matrices.values()
    ]
    n = len(names)
    keys = []
    for i in range(n):
        for j in range(i + 1, n):
            vals = [m[i, j] for m in mats if np.isfinite(m[i, j])]
            keys.append((min(vals) if vals else np.inf, i, j))
    keys.sort()
    return [(i, j) for _, i, j in keys[:count]]


def closest_pairs_figure(
    matrices: Mapping[str, np.ndarray],
    names: Sequence[str],
    path,
    *,
    count: int = 15,
    title: str | None = None,
    width_in: float = REPORT_WIDTH_IN,
    png_text: Mapping[str, str] | None = None,
) -> Path:
    """The ``count`` closest pairs of objects (:func:`closest_pairs`) as a ranked table: one row
    per pair, one column per condition with its ΔE00 in a cell coloured by
    :data:`HEATMAP_CLASSES` ("n/v": not visible). Fits ``width_in`` for any number of objects:
    what the heat map becomes when it is too wide to read at report width."""
    from matplotlib.colors import to_rgb
    from matplotlib.patches import Patch, Rectangle

    names = list(names)
    n = len(names)
    panels = list(matrices.items())
    for label, mat in panels:
        if np.shape(mat) != (n, n):
            raise ValueError(f"matrix {label!r} must be ({n}, {n})")
    pairs = closest_pairs(matrices, names, count)
    row_in = 0.3
    top_in = 0.95 if title else 0.55
    height = top_in + (len(pairs) + 1) * row_in + 0.8
    fig = _figure(width_in, height)
    fig.patch.set_facecolor("white")
    if title:
        fig.text(0.5, 1 - 0.3 / height, title, ha="center", va="center", fontsize=12, weight="bold")
    ax = fig.add_axes([0.02, 0.8 / height, 0.96, (len(pairs) + 1) * row_in / height])
    pair_w = 0.42
    col_w = (1.0 - pair_w) / max(len(panels), 1)
    ax.set_xlim(0, 1)
    ax.set_ylim(len(pairs) + 1, 0)
    ax.set_axis_off()
    ax.text(0.005, 0.5, "pair (closest first)", ha="left", va="center", fontsize=9, weight="bold")
    for p, (label, _) in enumerate(panels):
        ax.text(pair_w + (p + 0.5) * col_w, 0.5, label, ha="center", va="center", fontsize=9, weight="bold")
    bounds = [b for b, _, _ in HEATMAP_CLASSES]
    for r, (i, j) in enumerate(pairs, start=1):
        ax.text(0.005, r + 0.5, f"{r}. {names[i]} / {names[j]}", ha="left", va="center", fontsize=9)
        for p, (_, mat) in enumerate(panels):
            v = float(np.asarray(mat, dtype=np.float64)[i, j])
            x0 = pair_w + p * col_w
            if not np.isfinite(v):
                ax.add_artist(Rectangle((x0 + 0.004, r + 0.06), col_w - 0.008, 0.88, facecolor="#eeeeee"))
                ax.text(x0 + 0.5 * col_w, r + 0.5, "n/v", ha="center", va="center", fontsize=9, color="#666666")
                continue
            bg = HEATMAP_CLASSES[min(int(np.searchsorted(bounds, v, side="right")), len(HEATMAP_CLASSES) - 1)][1]
            ax.add_artist(Rectangle((x0 + 0.004, r + 0.06), col_w - 0.008, 0.88, facecolor=bg))
            txt = _text_colour(np.array(to_rgb(bg)))
            ax.text(x0 + 0.5 * col_w, r + 0.5, f"{v:.1f}", ha="center", va="center", fontsize=9, color=txt)
    handles = [Patch(facecolor=c, edgecolor="#888888", label=t) for _, c, t in HEATMAP_CLASSES]
    fig.legend(
        handles=handles,
        loc="lower center",
        ncol=len(handles),
        fontsize=8,
        frameon=False,
        title=HEATMAP_LEGEND_TITLE,
        title_fontsize=8,
        bbox_to_anchor=(0.5, 0.0),
    )
    return _save(fig, path, text=png_text)


def delta_e_heatmap(
    matrices: Mapping[str, np.ndarray],
    names: Sequence[str],
    path,
    *,
    title: str | None = None,
    png_text: Mapping[str, str] | None = None,
) -> Path:
    """Heat map(s) of pairwise ΔE00, one panel per condition, values written in the cells.

    Colour scale (ours): :data:`HEATMAP_CLASSES` -- ΔE00 below 1 (about one just-noticeable
    difference in daylight), 1-3, 3-10, 10-20, 20 and above. The diagonal is left blank;
    NaN (an object not visible) is shown hatched as "n/v".
    """
    from matplotlib.colors import BoundaryNorm, ListedColormap, to_rgb
    from matplotlib.patches import Patch, Rectangle

    names = list(names)
    n = len(names)
    panels = list(matrices.items())
    for label, mat in panels:
        if np.shape(mat) != (n, n):
            raise ValueError(f"matrix {label!r} must be ({n}, {n})")
    bounds = [0.0] + [b for b, _, _ in HEATMAP_CLASSES[:-1]] + [1e9]
    cmap = ListedColormap([c for _, c, _ in HEATMAP_CLASSES])
    norm = BoundaryNorm(bounds, cmap.N)
    cell = HEATMAP_CELL_IN
    name_in = _heatmap_name_in(names)
    panel_w = n * cell
    width = heatmap_width_in(names, len(panels))
    top_in = 0.95 if title else 0.55
    height = top_in + n * cell + name_in + 0.75
    fig = _figure(width, height)
    fig.patch.set_facecolor("white")
    if title:
        fig.text(0.5, 1 - 0.3 / height, title, ha="center", va="center", fontsize=12, weight="bold")
    for p, (label, mat) in enumerate(panels):
        mat = np.asarray(mat, dtype=np.float64)
        left = name_in + p * (panel_w + 0.35)
        ax = fig.add_axes([left / width, (name_in + 0.75) / height, panel_w / width, n * cell / height])
        shown = np.where(np.eye(n, dtype=bool), np.nan, mat)
        ax.imshow(np.ma.masked_invalid(shown), cmap=cmap, norm=norm, interpolation="nearest", extent=(0, n, n, 0))
        for i in range(n):
            for j in range(n):
                v = mat[i, j]
                if i == j:
                    ax.add_patch(Rectangle((j, i), 1, 1, facecolor="#f4f4f4", edgecolor="none"))
                elif not np.isfinite(v):
                    ax.add_patch(
                        Rectangle((j, i), 1, 1, facecolor="#eeeeee", hatch="///", edgecolor="#aaaaaa", linewidth=0)
                    )
                    ax.text(j + 0.5, i + 0.5, "n/v", ha="center", va="center", fontsize=7, color="#666666")
                else:
                    k = int(np.searchsorted(bounds[1:], v, side="right"))
                    bg = HEATMAP_CLASSES[min(k, len(HEATMAP_CLASSES) - 1)][1]
                    txt = _text_colour(np.array(to_rgb(bg)))
                    ax.text(
                        j + 0.5,
                        i + 0.5,
                        f"{v:.1f}" if v < 10 else f"{v:.0f}",
                        ha="center",
                        va="center",
                        fontsize=8,
                        color=txt,
                    )
        ax.set_xticks(np.arange(n) + 0.5)
        ax.set_yticks(np.arange(n) + 0.5)
        ax.set_xticklabels(names, rotation=60, ha="right", fontsize=8)
        ax.set_yticklabels(names if p == 0 else [], fontsize=8)
        ax.tick_params(length=0)
        ax.set_xticks(np.arange(n + 1), minor=True)
        ax.set_yticks(np.arange(n + 1), minor=True)
        ax.grid(which="minor", color="white", linewidth=1.0)
        ax.tick_params(which="minor", length=0)
        for s in ax.spines.values():
            s.set_visible(False)
        ax.set_title(label, fontsize=10, pad=6)
    handles = [Patch(facecolor=c, edgecolor="#888888", label=t) for _, c, t in HEATMAP_CLASSES]
    fig.legend(
        handles=handles,
        loc="lower center",
        ncol=min(5, len(handles)),
        fontsize=8,
        frameon=False,
        title=HEATMAP_LEGEND_TITLE,
        title_fontsize=8,
        bbox_to_anchor=(0.5, 0.0),
    )
    return _save(fig, path, text=png_text)


# --------------------------------------------------------------------------- spectrum strips


@lru_cache(maxsize=1)
def _hue_ring(samples_per_edge: int = 256) -> tuple[np.ndarray, np.ndarray]:
    """The sRGB gamut's ring of most saturated colours (red-yellow-green-cyan-blue-magenta,
    one channel 1 and one 0) with its Oklab hue, unwrapped to increase from red's."""
    from render.vision.display import linear_srgb_to_xyz

    corners = np.array([[1, 0, 0], [1, 1, 0], [0, 1, 0], [0, 1, 1], [0, 0, 1], [1, 0, 1], [1, 0, 0]], float)
    t = np.linspace(0.0, 1.0, samples_per_edge, endpoint=False)[:, None]
    ring = np.concatenate([a + t * (b - a) for a, b in zip(corners[:-1], corners[1:])])
    lab = xyz_to_oklab(linear_srgb_to_xyz(ring))
    hue = np.unwrap(np.arctan2(lab[:, 2], lab[:, 1]))
    hue = np.maximum.accumulate(hue)  # guard against tiny non-monotonic wiggles
    return hue, ring


def monochromatic_display_rgb(wavelengths_nm) -> np.ndarray:
    """Linear sRGB (n, 3), largest channel 1, of monochromatic light at each wavelength.

    The spectral colour (CIE 1931 2° colour-matching functions) lies outside sRGB; it is shown
    as the most saturated sRGB colour of the same **Oklab hue** (Ottosson 2020): the point of
    the gamut's ring of full-saturation colours (one channel 1, one 0 -- where the gamut's
    chroma cusp lies for each hue) with that hue. Constant Oklab hue is the hue-preserving
    desaturation the vision stage's gamut mapping also uses; a straight line to white in xy
    keeps the dominant wavelength but not the perceived hue (Abney effect) and turns the
    long-wave reds pink.
    """
    from render.colour.observers import cmfs_xyz

    wl = np.atleast_1d(np.asarray(wavelengths_nm, dtype=np.float64))
    cmf = cmfs_xyz()
    xyz = np.stack([np.interp(wl, WAVELENGTHS_NM, cmf[:, c]) for c in range(3)], axis=-1)
    xyz = xyz / np.maximum(xyz.sum(axis=-1, keepdims=True), 1e-300)
    lab = xyz_to_oklab(xyz)
    hue = np.arctan2(lab[:, 2], lab[:, 1])
    ring_hue, ring = _hue_ring()
    h = ring_hue[0] + np.mod(hue - ring_hue[0], 2.0 * np.pi)
    rgb = np.stack([np.interp(h, ring_hue, ring[:, c]) for c in range(3)], axis=-1)
    return rgb / np.maximum(rgb.max(axis=-1, keepdims=True), 1e-300)


@dataclass
class SpectrumStrip:
    """A lamp's spectrum spread out as a grating would show it.

    Attributes
    ----------
    image
        (height_px, width_px, 3) encoded sRGB in [0, 1].
    wavelengths_nm
        (width_px,) centre wavelength of each column, nm.
    column_power
        (width_px,) spectral power in each column (the density integrated over the column's
        span; unit of the density × nm). Sums to the density's power over the strip range.
    column_rgb
        (width_px, 3) linear sRGB colour of each column before intensity (largest channel 1).
    """

    image: np.ndarray
    wavelengths_nm: np.ndarray
    column_power: np.ndarray
    column_rgb: np.ndarray


def column_power(density, edges_nm) -> np.ndarray:
    """Power of a gridded density (N_BINS,) in each interval between ``edges_nm``: the integral
    of the piecewise-constant density (the grid's 1 nm bins), exact."""
    d = np.asarray(density, dtype=np.float64)
    cumulative = np.concatenate([[0.0], np.cumsum(d * BIN_WIDTH_NM)])
    at = np.interp(np.asarray(edges_nm, dtype=np.float64), BIN_EDGES_NM, cumulative)
    return np.diff(at)


def spectrum_strip(
    spd, width_px: int = 800, height_px: int = 48, wavelength_range_nm: tuple[float, float] = (380.0, 780.0)
) -> SpectrumStrip:
    """The spectrum strip of a lamp (see module text).

    Parameters
    ----------
    spd
        (N_BINS,) spectral power density on the lampcast grid (any scale).
    width_px, height_px
        Strip size, pixels.
    wavelength_range_nm
        Wavelengths at the left and right edges, nm (within 379.5-780.5).
    """
    from render.vision.display import srgb_encode

    lo, hi = map(float, wavelength_range_nm)
    if not (BIN_EDGES_NM[0] - 1e-9 <= lo < hi <= BIN_EDGES_NM[-1] + 1e-9):
        raise ValueError("wavelength range must lie within the grid")
    edges = np.linspace(lo, hi, int(width_px) + 1)
    centres = 0.5 * (edges[1:] + edges[:-1])
    power = column_power(spd, edges)
    rgb = monochromatic_display_rgb(centres)
    peak = power.max()
    rel = power / peak if peak > 0 else np.zeros_like(power)
    row = srgb_encode(rgb * rel[:, None])
    image = np.broadcast_to(row[None], (int(height_px), int(width_px), 3)).copy()
    return SpectrumStrip(image, centres, power, rgb)


def spectrum_strip_figure(
    lamps: Sequence[tuple[str, np.ndarray]],
    path,
    *,
    title: str | None = None,
    wavelength_range_nm: tuple[float, float] = (380.0, 780.0),
    width_px: int = 800,
    png_text: Mapping[str, str] | None = None,
) -> Path:
    """One panel per lamp: its relative spectral power (curve filled with the spectral colours)
    above the spectrum strip a grating would show. ``lamps``: ``(label, spd)`` pairs."""
    from matplotlib.patches import Polygon

    lo, hi = wavelength_range_nm
    k = len(lamps)
    if k == 0:
        raise ValueError("need at least one lamp")
    panel_h, strip_h, gap = 1.55, 0.42, 0.75
    top_in = 0.6 if title else 0.25
    height = top_in + k * (panel_h + strip_h + gap)
    width = 8.4
    fig = _figure(width, height)
    fig.patch.set_facecolor("white")
    if title:
        fig.text(0.5, 1 - 0.3 / height, title, ha="center", va="center", fontsize=12, weight="bold")
    left, right = 0.9 / width, 1 - 0.25 / width
    rainbow_wl = np.linspace(lo, hi, width_px)
    rainbow = monochromatic_display_rgb(rainbow_wl)
    from render.vision.display import srgb_encode

    rainbow_img = srgb_encode(rainbow)[None]
    for i, (label, spd) in enumerate(lamps):
        y_top = height - top_in - i * (panel_h + strip_h + gap)
        strip = spectrum_strip(spd, width_px, 40, wavelength_range_nm)
        rel = strip.column_power / strip.column_power.max()
        ax = fig.add_axes([left, (y_top - panel_h) / height, right - left, panel_h / height])
        ax.imshow(rainbow_img, extent=(lo, hi, 0, 1.05), aspect="auto", interpolation="bilinear")
        poly = Polygon(
            np.column_stack(
                [np.r_[strip.wavelengths_nm[0], strip.wavelengths_nm, strip.wavelengths_nm[-1]], np.r_[0, rel, 0]]
            ),
            closed=True,
            transform=ax.transData,
            facecolor="none",
            edgecolor="none",
        )
        ax.add_patch(poly)
        ax.images[0].set_clip_path(poly)
        ax.plot(strip.wavelengths_nm, rel, color="#222222", linewidth=0.9)
        ax.set_xlim(lo, hi)
        ax.set_ylim(0, 1.05)
        ax.set_ylabel("relative power", fontsize=8)
        ax.set_title(label, fontsize=10, loc="left")
        ax.tick_params(labelsize=8, labelbottom=False)
        ax.grid(axis="x", color="#dddddd", linewidth=0.6)
        ax.set_axisbelow(True)
        ax2 = fig.add_axes([left, (y_top - panel_h - strip_h) / height, right - left, strip_h * 0.92 / height])
        ax2.imshow(strip.image, extent=(lo, hi, 0, 1), aspect="auto", interpolation="nearest")
        ax2.set_yticks([])
        ax2.set_xlim(lo, hi)
        ax2.tick_params(labelsize=8)
        ax2.set_xlabel("wavelength (nm) — as a diffraction grating spreads the light", fontsize=8)
        for s in ax2.spines.values():
            s.set_color("#444444")
    return _save(fig, path, text=png_text)
