"""Photometry sheet: key figures of a luminous intensity distribution, as text, JSON and a polar plot.

:func:`summarise` gathers the figures of a :class:`render.light.photometry.Photometry` into a
:class:`PhotometrySummary` (flux by exact integration of the interpolated table, upward flux and
ULOR, peak intensity, efficacy, the file's header data); :meth:`PhotometrySummary.to_json` gives
them as plain JSON values, :func:`format_summary` as the text ``lampcast photometry`` prints, and
:func:`polar_figure` / :func:`plot_polar` draw the C0–C180 and C90–C270 planes of the distribution
inside a round outer ring above the peak, with the planes named in the legend and an alt text.

References
----------
- ANSI/IESNA LM-63-2002 and IES LM-63-2019, EULUMDAT (see :mod:`render.light.photometry.eulumdat`):
  the header fields shown (editions, symmetry, luminous opening, tilt) **(from memory)**.
- Polar intensity diagram in two C planes, γ = 0 at the bottom, rings at round values: common
  practice for luminaire data sheets, no source.
"""

from __future__ import annotations

import dataclasses
import os
from dataclasses import dataclass
from pathlib import Path
from typing import Any

import numpy as np

from render.light.photometry import (
    Photometry,
    intensity_cd,
    load_photometry,
    luminous_flux_lm,
    peak_intensity,
    ulor,
    zonal_flux_lm,
)
from render.output.images import write_figure_png

__all__ = [
    "POLAR_PLANES",
    "PhotometrySummary",
    "describe_photometry_file",
    "format_summary",
    "plot_polar",
    "polar_figure",
    "round_ring_above",
    "summarise",
]

_VERTICAL_TEXT = {"downward": "downward only (γ 0-90)", "upward": "upward only (γ 90-180)", "full": "γ 0-180"}
_SYMMETRY_TEXT = {
    "rotational": "rotationally symmetric (one C plane)",
    "quadrant": "symmetric in each quadrant (C 0-90)",
    "bilateral-0-180": "bilateral about the C 0-180 plane (C 0-180)",
    "bilateral-90-270": "bilateral about the C 90-270 plane (C 90-270)",
    "none": "no lateral symmetry (C 0-360)",
    "b-none": "type B, no symmetry (H -90..90, V -90..90)",
    "b-h": "type B, mirror symmetric in H (H 0..90, V -90..90)",
    "b-v": "type B, mirror symmetric in V (H -90..90, V 0..90)",
    "b-hv": "type B, mirror symmetric in H and V (H 0..90, V 0..90)",
}


@dataclass(frozen=True)
class PhotometrySummary:
    """Key figures of a distribution (see :func:`summarise`).

    Attributes
    ----------
    source, name, edition, photometric_type, symmetry, vertical_range, absolute, lamp_count
        As in :class:`render.light.photometry.Photometry` (``absolute`` is ``is_absolute``).
    flux_lm
        Luminous flux, lm: the exact integral of the interpolated table over the sphere.
    rated_lm, flux_ratio
        Rated lamp flux, lm, and flux / rated (the light output ratio); ``None`` for absolute
        photometry.
    upward_flux_lm, ulor
        Flux above the horizontal (γ > 90°), lm, and its share of the total.
    peak_cd, peak_c_deg, peak_gamma_deg
        The largest tabulated intensity, cd, and its direction.
    input_watts, efficacy_lm_per_w
        Input power, W (0: not given), and flux per watt (``None`` without a power).
    opening_shape, opening_width_m, opening_length_m, opening_height_m
        The luminous opening.
    tilt
        Origin of the tilt data (``"INCLUDE"`` or the tilt file), ``None`` without tilt data.
    manufacturer, luminaire
        The ``[MANUFAC]`` and ``[LUMINAIRE]`` keywords (empty when absent).
    """

    source: str
    name: str
    edition: str
    photometric_type: str
    symmetry: str
    vertical_range: str
    absolute: bool
    lamp_count: int
    flux_lm: float
    rated_lm: float | None
    flux_ratio: float | None
    upward_flux_lm: float
    ulor: float
    peak_cd: float
    peak_c_deg: float
    peak_gamma_deg: float
    input_watts: float
    efficacy_lm_per_w: float | None
    opening_shape: str
    opening_width_m: float
    opening_length_m: float
    opening_height_m: float
    tilt: str | None
    manufacturer: str
    luminaire: str

    def to_json(self) -> dict[str, str | int | float | bool | None]:
        """The figures as a flat dict of JSON values, keyed by the attribute names."""
        return dataclasses.asdict(self)


def summarise(photometry: Photometry) -> PhotometrySummary:
    """Key figures of a distribution (flux by exact integration of the interpolated table)."""
    ph = photometry
    flux = luminous_flux_lm(ph)
    rated = ph.rated_lumens_lm
    peak_cd, peak_c, peak_g = peak_intensity(ph)
    return PhotometrySummary(
        source=ph.source,
        name=ph.name,
        edition=ph.edition,
        photometric_type=ph.photometric_type,
        symmetry=ph.symmetry,
        vertical_range=ph.vertical_range,
        absolute=ph.is_absolute,
        lamp_count=int(ph.lamp_count),
        flux_lm=flux,
        rated_lm=rated,
        flux_ratio=(flux / rated) if rated else None,
        upward_flux_lm=zonal_flux_lm(ph, 90.0, 180.0),
        ulor=ulor(ph),
        peak_cd=peak_cd,
        peak_c_deg=peak_c,
        peak_gamma_deg=peak_g,
        input_watts=ph.input_watts,
        efficacy_lm_per_w=(flux / ph.input_watts) if ph.input_watts > 0 else None,
        opening_shape=ph.opening_shape,
        opening_width_m=ph.opening_width_m,
        opening_length_m=ph.opening_length_m,
        opening_height_m=ph.opening_height_m,
        tilt=None if ph.tilt is None else ph.tilt.origin,
        manufacturer=ph.keywords.get("MANUFAC", ""),
        luminaire=ph.keywords.get("LUMINAIRE", ""),
    )


def format_summary(summary: PhotometrySummary) -> str:
    """Plain-text rendering of a :class:`PhotometrySummary` for the command line."""
    s = summary
    lines = [
        f"photometry      {s.name}  ({s.source})",
        f"format          {s.edition}, type {s.photometric_type}, "
        f"{_SYMMETRY_TEXT.get(s.symmetry, s.symmetry)}, {_VERTICAL_TEXT[s.vertical_range]}",
    ]
    if s.luminaire:
        lines.append(f"luminaire       {s.luminaire.splitlines()[0]}")
    if s.manufacturer:
        lines.append(f"maker           {s.manufacturer.splitlines()[0]}")
    lines.append(f"flux            {s.flux_lm:.1f} lm (integrated over the sphere)")
    if s.absolute:
        lines.append("rated lumens    none: absolute photometry (the values are the luminaire's own)")
    else:
        lines.append(f"rated lumens    {s.rated_lm:.1f} lm ({s.lamp_count} lamp(s)); flux / rated = {s.flux_ratio:.4f}")
    lines.append(f"upward          {s.upward_flux_lm:.1f} lm; ULOR (upward / total) = {s.ulor:.4f}")
    lines.append(f"peak            {s.peak_cd:.1f} cd at C {s.peak_c_deg:.1f}°, γ {s.peak_gamma_deg:.1f}°")
    if s.input_watts > 0:
        lines.append(f"input power     {s.input_watts:.1f} W; {s.efficacy_lm_per_w:.1f} lm/W")
    else:
        lines.append("input power     not given")
    lines.append(
        f"opening         {s.opening_shape}, width {s.opening_width_m:.3f} m, "
        f"length {s.opening_length_m:.3f} m, height {s.opening_height_m:.3f} m"
    )
    lines.append(f"tilt data       {s.tilt or 'none'}")
    return "\n".join(lines)


def round_ring_above(value: float) -> tuple[float, float]:
    """The outer ring of a polar plot and its ring step: the first multiple of a round step
    (1, 2, 2.5 or 5 × 10^k, about four to eight rings) strictly above ``value`` (1 and 0.25 for
    a value ≤ 0)."""
    if not (value > 0 and np.isfinite(value)):
        return 1.0, 0.25
    exponent = 10.0 ** np.floor(np.log10(value))
    for mantissa in (0.1, 0.2, 0.25, 0.5, 1.0, 2.0):
        step = mantissa * exponent
        if value / step <= 8.0:
            break
    outer = (np.floor(value / step) + 1.0) * step
    return float(outer), float(step)


#: The two planes drawn: (plane to the right, plane to the left), line style, legend label.
POLAR_PLANES = (((0.0, 180.0), "-", "C0–C180"), ((90.0, 270.0), "--", "C90–C270"))


def polar_figure(photometry: Photometry, title: str | None = None) -> tuple[Any, str]:
    """The polar intensity diagram of the C0–C180 and C90–C270 planes as a matplotlib figure,
    and its alt text (what it shows: the file, the planes, the peak, the outer ring).

    γ = 0 (nadir) points down; C0 / C90 are drawn to the right, C180 / C270 to the left.
    Relative photometry is drawn in cd per 1000 lm of rated lamp flux, absolute photometry in cd.
    The outer ring is a round value above the peak intensity (:func:`round_ring_above`), so the
    whole curve lies inside it.
    """
    from matplotlib.figure import Figure

    ph = photometry
    g = np.linspace(0.0, 180.0, 361)
    if ph.is_absolute:
        k, unit, unit_short = 1.0, "cd", "cd"
    else:
        k, unit, unit_short = 1000.0 / ph.rated_lumens_lm, "cd per 1000 lm (rated lamp flux)", "cd/klm"
    peak_cd, peak_c, peak_g = peak_intensity(ph)
    peak = peak_cd * k
    fig = Figure(figsize=(6.0, 6.4), dpi=120)
    ax = fig.add_subplot(projection="polar")
    ax.set_theta_zero_location("S")
    ax.set_theta_direction(1)
    drawn = 0.0
    for (c_right, c_left), style, label in POLAR_PLANES:
        right = intensity_cd(ph, c_right, g) * k
        left = intensity_cd(ph, c_left, g) * k
        theta = np.radians(np.concatenate([-g[::-1], g]))
        r = np.concatenate([left[::-1], right])
        drawn = max(drawn, float(np.max(r)))
        ax.plot(theta, r, style, lw=1.6, label=label)
    outer, step = round_ring_above(max(peak, drawn))
    ax.set_thetagrids(range(0, 360, 30), labels=[f"{a if a <= 180 else 360 - a}°" for a in range(0, 360, 30)])
    ax.set_rticks(np.arange(step, outer + 0.5 * step, step))
    ax.set_ylim(0.0, outer)
    ax.set_rlabel_position(100)
    name = Path(ph.source).name
    peak_text = f"peak {peak:.4g} {unit_short} at C {peak_c:g}°, γ {peak_g:g}°"
    ax.set_title(title or f"{ph.name} ({name})\n{peak_text}", pad=14, fontsize=10)
    ax.legend(loc="upper right", bbox_to_anchor=(1.12, 1.08), fontsize=8, title="plane", title_fontsize=8)
    fig.text(0.5, 0.02, f"radius: {unit}; outer ring {outer:g}; γ = 0° at the bottom (nadir)", ha="center", fontsize=8)
    alt = (
        f"Polar intensity diagram of {name}: the C0–C180 plane (solid) and the C90–C270 plane "
        f"(dashed), γ = 0° (straight down) at the bottom, C0 and C90 to the right; {peak_text}; "
        f"outer ring {outer:g} {unit_short}."
    )
    return fig, alt


def plot_polar(photometry: Photometry, path: str | os.PathLike, title: str | None = None) -> Path:
    """Write the polar intensity diagram of :func:`polar_figure` as a PNG, atomically, with its
    title and alt text in the PNG's ``Title`` and ``Description`` text chunks."""
    fig, alt = polar_figure(photometry, title)
    heading = fig.axes[0].get_title().replace("\n", "; ")
    return write_figure_png(fig, Path(path), {"Title": heading, "Description": alt})


def describe_photometry_file(
    ref: str | os.PathLike, base_dir: str | os.PathLike | None = None, plot_path: str | os.PathLike | None = None
) -> str:
    """What ``lampcast photometry FILE`` prints: load ``ref`` (built-in id or path), optionally
    write a polar plot to ``plot_path``, and return the formatted summary."""
    ph = load_photometry(ref, base_dir=base_dir)
    text = format_summary(summarise(ph))
    if plot_path is not None:
        written = plot_polar(ph, plot_path)
        text += f"\npolar plot      {written}"
    return text
