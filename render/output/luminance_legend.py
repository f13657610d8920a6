"""Luminance legend: the false-colour ramp as a labelled strip in cd/m², and a map with its legend.

The ramp and the mapping of luminance to its colours are the vision stage's
(:mod:`render.vision.falsecolour`); this module draws the picture that explains them: a vertical
colour bar on a logarithmic scale with a tick and a label at every whole decade, drawn with
matplotlib's object-oriented API (no pyplot state) and returned as a linear-sRGB array so that it
can be joined to a false-colour image (:func:`false_colour_with_legend`) before encoding.

References
----------
- The ramp: :mod:`render.vision.falsecolour` (Oklab, Ottosson 2020).
- A logarithmic colour bar with decade ticks: common practice for luminance maps, no source.
"""

from __future__ import annotations

import math

import numpy as np
import numpy.typing as npt

from render.vision.display import srgb_decode, srgb_encode
from render.vision.falsecolour import auto_range_decades, false_colour, luminance_ramp

__all__ = ["false_colour_with_legend", "legend_strip"]


def _format_cd(v: float) -> str:
    if v >= 1:
        return f"{v:g}"
    return f"{v:.{max(0, -math.floor(math.log10(v)))}f}".rstrip("0").rstrip(".") if v >= 1e-4 else f"{v:.0e}"


def legend_strip(
    height_px: int, lo_cd_m2: float, hi_cd_m2: float, label: str = "luminance (cd/m²)", width_px: int = 120
) -> np.ndarray:
    """A vertical legend (height_px, width_px, 3), linear sRGB: the ramp with decade ticks."""
    import matplotlib.cm as cm
    from matplotlib.backends.backend_agg import FigureCanvasAgg
    from matplotlib.colors import ListedColormap, LogNorm
    from matplotlib.figure import Figure

    dpi = 100.0
    fig = Figure(figsize=(width_px / dpi, height_px / dpi), dpi=dpi, facecolor="white")
    canvas = FigureCanvasAgg(fig)
    h = max(height_px, 1)
    pad_px = min(12.0, 0.08 * h)
    ax = fig.add_axes([0.08, pad_px / h, 0.18, max(1.0 - 2 * pad_px / h, 0.05)])
    cmap = ListedColormap(srgb_encode(luminance_ramp(256)))
    sm = cm.ScalarMappable(norm=LogNorm(lo_cd_m2, hi_cd_m2), cmap=cmap)
    cb = fig.colorbar(sm, cax=ax)
    decades = range(round(math.log10(lo_cd_m2)), round(math.log10(hi_cd_m2)) + 1)
    ticks = [10.0**d for d in decades]
    cb.set_ticks(ticks)
    cb.set_ticklabels([_format_cd(t) for t in ticks])
    cb.minorticks_off()
    fontsize = max(5.0, min(9.0, h / 30.0))
    ax.tick_params(labelsize=fontsize)
    cb.set_label(label, fontsize=fontsize)
    canvas.draw()
    rgba = np.asarray(canvas.buffer_rgba())[..., :3].astype(np.float64) / 255.0
    if rgba.shape[0] != height_px or rgba.shape[1] != width_px:  # rounding of figure size
        out = np.ones((height_px, width_px, 3))
        hh, ww = min(height_px, rgba.shape[0]), min(width_px, rgba.shape[1])
        out[:hh, :ww] = rgba[:hh, :ww]
        rgba = out
    return srgb_decode(rgba)


def false_colour_with_legend(
    luminance_cd_m2: npt.ArrayLike,
    range_cd_m2: tuple[float, float] | None = None,
    label: str = "luminance (cd/m²)",
    legend_width_px: int = 120,
) -> tuple[np.ndarray, tuple[float, float]]:
    """False-colour image with its legend to the right: ``(image (H, W + legend, 3) linear
    sRGB, (lo, hi))``."""
    lo, hi = auto_range_decades(luminance_cd_m2) if range_cd_m2 is None else range_cd_m2
    if not (0 < lo < hi):
        raise ValueError("false-colour range must satisfy 0 < lo < hi (cd/m²)")
    img = false_colour(luminance_cd_m2, lo, hi)
    legend = legend_strip(img.shape[0], lo, hi, label, legend_width_px)
    return np.concatenate([img, legend], axis=1), (lo, hi)
