"""The lamp library: built-in street-lamp spectra and user lamp files.

A :class:`Lamp` holds a **relative spectral power density** on the one grid of
:mod:`render.colour.spectra` (401 bins of 1 nm, 380-780 nm), **normalised to unit total power**:
``lamp.spd.sum() * BIN_WIDTH_NM == 1`` over 380-780 nm, so ``lamp.spd`` is in nm⁻¹ (share of the
visible power per nm). Absolute spectra follow from a photometric quantity, e.g.
``render.colour.observers.scale_to_photopic(lamp.spd, 12000.0)`` is the spectral flux in W/nm of a lamp
emitting 12 000 lm, and ``render.colour.observers.photopic(lamp.spd)`` is its luminous efficacy of
radiation in lm/W.

Built-in lamps
--------------
:func:`builtin_lamps` returns them by id (our own lowercase-with-hyphens names). Their data come
from three kinds of source, always named in ``Lamp.source``:

* CIE 015:2018 illuminant tables (HP1-HP5 high-pressure discharge, FL fluorescent, LED-B/BH/V
  LEDs), as bundled with colour-science (``colour.SDS_ILLUMINANTS``), tabulated at 5 nm;
* measured lamps of the NIST CQS 7.4 spreadsheet (Ohno & Davis 2008), as bundled with
  colour-science (``colour.SDS_LIGHT_SOURCES``), also at 5 nm;
* models: emission lines at NIST Atomic Spectra Database wavelengths with relative powers that
  are marked "from memory" or derived from a named table, or analytic bands (amber LEDs).

A tabulated spectrum is a density sampled every 5 nm; it is moved onto the grid with
:func:`render.colour.spectra.bin_density` (joined by straight lines and integrated over each 1 nm bin,
so band powers are conserved). A table that starts at 380 nm or ends at 780 nm holds its end
value over the grid's outer half bin (379.5-380 nm, 780-780.5 nm). At 5 nm a discharge lamp's
emission lines are smeared into 10 nm wide triangles; the lamps concerned say so in their notes.

A line source is a :class:`LineSpectrum` -- lines ``(wavelength_nm, relative power)`` plus an
optional continuum density -- put on the grid with :func:`render.colour.spectra.deposit_lines`, which
conserves each line's power and mean wavelength.

Lamp files
----------
:func:`load_lamp_file` reads two plain-text (UTF-8) formats. In both, blank lines are ignored,
``#`` starts a comment line, and comment lines *before the first data row* of the form
``# key: value`` set the lamp's ``name``, ``description``, ``type`` (one of :data:`LAMP_TYPES`),
``source`` and ``notes`` (may be repeated, one note each). Other comments are ignored, except
that a key that looks like a misspelt known key is an error. Fields are separated by commas (or
by white space in a line without a comma).

1. **Spectrum CSV** (a continuum): rows ``wavelength_nm, relative_power_per_nm``, after an
   optional row of column names. Wavelengths strictly increasing and covering at least
   400-700 nm; powers finite and non-negative. The samples are joined by straight lines, taken
   as zero outside the file's range, and integrated over each 1 nm bin; anything outside
   380-780 nm is not modelled. Example::

       # name: Kerbside LED sample
       # type: phosphor LED
       # source: our own spectroradiometer reading, 2024-05-02
       wavelength_nm, relative_power
       380, 0.001
       385, 0.002
       ...

2. **Lines file**: every data row starts with a keyword::

       line, wavelength_nm, relative_power
       continuum, wavelength_nm, relative_power_per_nm

   ``line`` rows are emission lines of negligible width, in any order, no wavelength twice;
   lines outside 380-780 nm are left out (with a note on the lamp). ``continuum`` rows are
   optional (at least two if any, increasing wavelength) and give a background density in the
   same relative power unit per nm, zero outside their range.

Either way the result is normalised to unit total power over 380-780 nm. The lamp's id is the
file name without its extension, lowercased with hyphens (``Kerbside_LED.csv`` ->
``kerbside-led``); its type defaults to ``other``. A mistake raises
:class:`render.errors.InputError` naming the file and line.
"""

from __future__ import annotations

import math
import re
from collections.abc import Sequence
from dataclasses import dataclass, field
from functools import lru_cache
from pathlib import Path

import numpy as np

from render.colour.spectra import (
    BIN_WIDTH_NM,
    N_BINS,
    WAVELENGTH_MAX_NM,
    WAVELENGTH_MIN_NM,
    bin_density,
    deposit_lines,
)
from render.errors import ProblemList, did_you_mean, input_error
from render.fileio import read_user_text

#: Lamp types known to lampcast; a lamp file's ``# type:`` must be one of these.
LAMP_TYPES = (
    "low-pressure sodium",
    "high-pressure sodium",
    "colour-improved high-pressure sodium",
    "mercury vapour",
    "metal halide",
    "fluorescent",
    "phosphor LED",
    "violet-pumped LED",
    "amber LED",
    "other",
)

#: A continuum lamp file must cover at least this band, nm.
FILE_MIN_COVERAGE_NM = (400.0, 700.0)

_HEADER_KEYS = ("name", "description", "type", "source", "notes")


@dataclass(frozen=True, eq=False)
class Lamp:
    """One lamp spectrum with its provenance.

    Attributes
    ----------
    id
        Our own identifier, lowercase with hyphens (user files: from the file name).
    name
        Short human-readable name.
    type
        One of :data:`LAMP_TYPES`.
    description
        One or two sentences on what the lamp is.
    source
        Where the spectral data come from (standard, dataset and key, or "model").
    notes
        Caveats: resolution of the data, values from memory, modelling choices.
    spd
        Relative spectral power density on :data:`render.colour.spectra.WAVELENGTHS_NM`, nm⁻¹,
        normalised so that ``spd.sum() * BIN_WIDTH_NM == 1`` (read-only).
    lines
        For modelled line sources: ``(wavelength_nm, share of total power)`` of each line, in
        the same normalisation as ``spd``; empty for tabulated spectra.
    origin
        ``"built-in"`` or the path of the lamp file.
    """

    id: str
    name: str
    type: str
    description: str
    source: str
    notes: tuple[str, ...]
    spd: np.ndarray = field(repr=False)
    lines: tuple[tuple[float, float], ...] = ()
    origin: str = "built-in"

    def spd_peak_normalised(self) -> np.ndarray:
        """The spectrum scaled to a peak bin of 1 (for plots)."""
        return self.spd / self.spd.max()


@dataclass(frozen=True)
class LineSpectrum:
    """A line source: emission lines plus an optional continuum.

    Parameters
    ----------
    lines
        ``(wavelength_nm, power)`` pairs, power in any relative unit.
    continuum
        Optional ``(wavelengths_nm, density)`` samples of a background density in the same
        relative unit per nm (joined by straight lines, zero outside their range).
    """

    lines: Sequence[tuple[float, float]]
    continuum: tuple[Sequence[float], Sequence[float]] | None = None

    def visible_lines(self) -> list[tuple[float, float]]:
        """The lines that fall on the grid (bin centres 380-780 nm)."""
        return [(w, p) for w, p in self.lines if WAVELENGTH_MIN_NM <= w <= WAVELENGTH_MAX_NM]

    def density(self) -> np.ndarray:
        """Density on the grid (relative power per nm), not normalised."""
        kept = self.visible_lines()
        out = np.zeros(N_BINS)
        if kept:
            wl, p = zip(*kept)
            out += deposit_lines(wl, p)
        if self.continuum is not None:
            out += density_on_grid(*self.continuum)
        return out


def density_on_grid(wavelengths_nm, density) -> np.ndarray:
    """Move a sampled spectral density onto the grid with :func:`render.colour.spectra.bin_density`.

    Samples starting exactly at 380 nm (ending exactly at 780 nm) are extended by holding the
    end value over the grid's outer half bin, so that a table covering 380-780 nm fills the
    first and last bins; otherwise the density is zero outside the samples.
    """
    x = np.asarray(wavelengths_nm, dtype=np.float64)
    y = np.asarray(density, dtype=np.float64)
    half = 0.5 * BIN_WIDTH_NM
    if abs(x[0] - WAVELENGTH_MIN_NM) < 1e-9:
        x, y = np.concatenate([[WAVELENGTH_MIN_NM - half], x]), np.concatenate([[y[0]], y])
    if abs(x[-1] - WAVELENGTH_MAX_NM) < 1e-9:
        x, y = np.concatenate([x, [WAVELENGTH_MAX_NM + half]]), np.concatenate([y, [y[-1]]])
    return bin_density(x, y)


def _normalise(density: np.ndarray) -> tuple[np.ndarray, float]:
    total = float(density.sum() * BIN_WIDTH_NM)
    if not total > 0:
        raise ValueError("spectrum has no power in 380-780 nm")
    out = density / total
    out.setflags(write=False)
    return out, total


def make_lamp(
    id: str,
    name: str,
    type: str,
    description: str,
    source: str,
    notes: Sequence[str],
    spectrum,
    origin: str = "built-in",
) -> Lamp:
    """Build a :class:`Lamp` from a :class:`LineSpectrum` or a gridded density (normalised here)."""
    if type not in LAMP_TYPES:
        raise ValueError(f"unknown lamp type {type!r}")
    if isinstance(spectrum, LineSpectrum):
        spd, total = _normalise(spectrum.density())
        lines = tuple((float(w), float(p) / total) for w, p in spectrum.visible_lines())
    else:
        spd, _ = _normalise(np.asarray(spectrum, dtype=np.float64))
        lines = ()
    return Lamp(id, name, type, description, source, tuple(notes), spd, lines, origin)


# --- built-in data ---------------------------------------------------------------------------

_CIE_TABLE = {
    "HP": "CIE 015:2018 Colorimetry, 4th ed., Table 11 (high-pressure discharge lamps)",
    "FL": "CIE 015:2018 Colorimetry, 4th ed., Tables 10.1-10.3 (fluorescent lamps)",
    "LED": "CIE 015:2018 Colorimetry, 4th ed., Tables 12.1-12.2 (LED illuminants)",
}
_NIST_CQS = "NIST CQS simulation 7.4 spreadsheet (Ohno & Davis 2008)"

NOTE_5NM_LINES = (
    "Tabulated at 5 nm: emission lines are smeared into 10 nm wide triangles, so line positions "
    "are uncertain by up to 2.5 nm and peaks are about 5 times lower than a 1 nm spectrum would "
    "show (band powers are conserved; the notch-filterable fraction is understated)."
)
NOTE_5NM_SMOOTH = "Tabulated at 5 nm; the spectrum is smooth, so 5 nm sampling loses little."

#: Sodium (Na I) and neon (Ne I) lines of the low-pressure sodium model:
#: (wavelength_nm in air, relative power, what).
SODIUM_LOW_PRESSURE_LINES = (
    (588.995, 1.0, "Na I D2 3p 2P3/2 - 3s"),
    (589.592, 0.5, "Na I D1 3p 2P1/2 - 3s"),
    (568.263, 0.0035, "Na I 4d - 3p1/2"),
    (568.821, 0.007, "Na I 4d - 3p3/2"),
    (615.423, 0.0015, "Na I 5s - 3p1/2"),
    (616.075, 0.003, "Na I 5s - 3p3/2"),
    (497.854, 0.001, "Na I 5d - 3p1/2"),
    (498.281, 0.002, "Na I 5d - 3p3/2"),
    (514.884, 0.0007, "Na I 6s - 3p1/2"),
    (515.340, 0.0014, "Na I 6s - 3p3/2"),
    (585.249, 0.001, "Ne I (starter gas)"),
    (640.225, 0.0005, "Ne I (starter gas)"),
)

#: Mercury (Hg I) visible lines (NIST ASD, air wavelengths, nm), grouped as they share samples
#: of a 5 nm table, with each line's share of its group's power. A 5 nm table cannot resolve
#: the doublets; the shares 0.85/0.15 (404.66/407.78 nm) and 0.48/0.52 (576.96/579.07 nm) are
#: from memory.
MERCURY_LINE_GROUPS = (
    ((404.656, 0.85), (407.783, 0.15)),
    ((435.833, 1.0),),
    ((491.607, 1.0),),
    ((546.074, 1.0),),
    ((576.960, 0.48), (579.066, 0.52)),
)


def _colour_sd(kind: str, key: str):
    import colour

    table = colour.SDS_ILLUMINANTS if kind == "illuminant" else colour.SDS_LIGHT_SOURCES
    return table[key]


def _tabulated(kind: str, key: str) -> np.ndarray:
    sd = _colour_sd(kind, key)
    return density_on_grid(sd.wavelengths, sd.values)


def mercury_lines_from_table(wavelengths_nm, density) -> tuple[list[tuple[float, float]], np.ndarray]:
    """Estimate mercury line powers and the continuum from a coarsely sampled spectrum.

    For each group of lines in :data:`MERCURY_LINE_GROUPS` the samples within 7.5 nm of the
    group are replaced by a straight line between the neighbouring samples (the continuum); the
    excess above it, integrated with the trapezoid rule (exact for the piecewise-linear
    reading of the table), is the group's line power, shared among its lines by the fixed
    shares of :data:`MERCURY_LINE_GROUPS`.

    Returns
    -------
    lines
        ``(wavelength_nm, power)`` in the table's unit times nm.
    continuum
        The continuum density at the table's wavelengths.
    """
    x = np.asarray(wavelengths_nm, dtype=np.float64)
    y = np.asarray(density, dtype=np.float64)

    def window(group):
        wl = [w for w, _ in group]
        return (x > min(wl) - 7.5) & (x < max(wl) + 7.5)

    masked = np.zeros(x.size, dtype=bool)
    for group in MERCURY_LINE_GROUPS:
        masked |= window(group)
    continuum = y.copy()
    continuum[masked] = np.interp(x[masked], x[~masked], y[~masked])
    excess = np.clip(y - continuum, 0.0, None)
    lines = []
    for group in MERCURY_LINE_GROUPS:
        power = float(np.trapezoid(np.where(window(group), excess, 0.0), x))
        lines += [(w, power * share) for w, share in group]
    return lines, continuum


def _band(centre_nm: float, hwhm_below_nm: float, hwhm_above_nm: float) -> np.ndarray:
    """A Gaussian band with different half widths at half maximum below and above its peak,
    sampled every 0.1 nm, moved onto the grid and scaled to unit power."""
    x = np.arange(WAVELENGTH_MIN_NM - 0.5, WAVELENGTH_MAX_NM + 0.55, 0.1)
    sigma = np.where(x < centre_nm, hwhm_below_nm, hwhm_above_nm) / math.sqrt(2.0 * math.log(2.0))
    band = bin_density(x, np.exp(-0.5 * ((x - centre_nm) / sigma) ** 2))
    return band / (band.sum() * BIN_WIDTH_NM)


def _cie(key: str, table: str) -> str:
    return f"{_CIE_TABLE[table]}, illuminant {key}; via colour-science colour.SDS_ILLUMINANTS['{key}'] (5 nm)"


def _nist(key: str) -> str:
    return f"{_NIST_CQS}, lamp '{key}'; via colour-science colour.SDS_LIGHT_SOURCES['{key}'] (5 nm)"


def _builtin_specs():
    """Yield the keyword arguments of :func:`make_lamp` for every built-in lamp."""
    # Low-pressure sodium, modelled from its lines.
    yield dict(
        id="sodium-low-pressure",
        name="Low-pressure sodium (line model)",
        type="low-pressure sodium",
        description="Low-pressure sodium lamp: near-monochromatic yellow light from the sodium D "
        "doublet, with the weak visible sodium lines and neon starter-gas lines.",
        source="Model. Line wavelengths: NIST Atomic Spectra Database (Na I D lines 588.995 and "
        "589.592 nm; the weak Na I and Ne I lines from memory of NIST ASD to 0.01 nm).",
        notes=(
            "D2:D1 power 2:1, the optically thin ratio (HyperPhysics 'Sodium spectrum', from NIST "
            "line intensities); in a real lamp self-absorption moves it towards 1:1 (from memory) "
            "-- this shifts the doublet's mean wavelength by 0.1 nm, well within one bin.",
            "Weak-line powers: 568.82 nm at 0.7 % of D2 (HyperPhysics, from NIST line intensities); "
            "the other Na I lines at half of that or less, and the Ne I starter-gas lines "
            "(585.25, 640.22 nm, strong only while the lamp warms up), from memory.",
            "Self-absorption broadening and self-reversal of the D lines (about 1 nm wide in a "
            "burning lamp, from memory) are not modelled: the doublet is deposited into the 589 "
            "and 590 nm bins.",
            "The strong near-infrared Na I lines at 818.3/819.5 nm lie outside 380-780 nm and are "
            "not modelled; the spectrum is normalised over 380-780 nm only.",
        ),
        spectrum=LineSpectrum([(w, p) for w, p, _ in SODIUM_LOW_PRESSURE_LINES]),
    )
    # High-pressure sodium.
    yield dict(
        id="sodium-high-pressure-cie-hp1",
        name="High-pressure sodium, CIE HP1",
        type="high-pressure sodium",
        description="CIE illuminant HP1, a standard high-pressure sodium lamp (about 1960 K): "
        "broadened, self-reversed sodium emission around 560-620 nm.",
        source=_cie("HP1", "HP"),
        notes=(NOTE_5NM_LINES, "The self-reversal dip at 589 nm is only partly resolved at 5 nm."),
        spectrum=_tabulated("illuminant", "HP1"),
    )
    yield dict(
        id="sodium-high-pressure-measured",
        name="High-pressure sodium, measured",
        type="high-pressure sodium",
        description="A measured standard high-pressure sodium lamp (about 2070 K).",
        source=_nist("HPS"),
        notes=(NOTE_5NM_LINES,),
        spectrum=_tabulated("light source", "HPS"),
    )
    yield dict(
        id="sodium-high-pressure-100w-measured",
        name="High-pressure sodium 100 W, measured",
        type="high-pressure sodium",
        description="A measured 100 W standard high-pressure sodium lamp (about 1970 K).",
        source=_nist("C100S54 (HPS)"),
        notes=(NOTE_5NM_LINES,),
        spectrum=_tabulated("light source", "C100S54 (HPS)"),
    )
    # Colour-improved HPS.
    yield dict(
        id="sodium-high-pressure-improved-measured",
        name="Colour-improved high-pressure sodium, measured",
        type="colour-improved high-pressure sodium",
        description="A measured colour-improved high-pressure sodium lamp (about 2240 K): higher "
        "sodium pressure, wider self-reversal, more red and blue than a standard lamp.",
        source=_nist("C100S54C (HPS)"),
        notes=(NOTE_5NM_LINES,),
        spectrum=_tabulated("light source", "C100S54C (HPS)"),
    )
    yield dict(
        id="sodium-high-pressure-white-cie-hp2",
        name="White high-pressure sodium, CIE HP2",
        type="colour-improved high-pressure sodium",
        description="CIE illuminant HP2, a colour-enhanced ('white') high-pressure sodium lamp (about 2500 K).",
        source=_cie("HP2", "HP"),
        notes=(NOTE_5NM_LINES,),
        spectrum=_tabulated("illuminant", "HP2"),
    )
    yield dict(
        id="sodium-high-pressure-white-measured",
        name="White high-pressure sodium 100 W, measured",
        type="colour-improved high-pressure sodium",
        description="A measured 100 W 'white' high-pressure sodium lamp (about 2510 K).",
        source=_nist("SDW-T 100W/LV (Super HPS)"),
        notes=(NOTE_5NM_LINES,),
        spectrum=_tabulated("light source", "SDW-T 100W/LV (Super HPS)"),
    )
    # Mercury vapour.
    hg = _colour_sd("light source", "H38HT-100 (Mercury)")
    hg_lines, hg_continuum = mercury_lines_from_table(hg.wavelengths, hg.values)
    yield dict(
        id="mercury-vapour-lines",
        name="Clear mercury vapour (line model)",
        type="mercury vapour",
        description="Clear high-pressure mercury lamp modelled as the visible Hg I lines "
        "(404.66, 407.78, 435.83, 491.61, 546.07, 576.96, 579.07 nm) on a weak continuum.",
        source="Model. Line wavelengths: NIST Atomic Spectra Database (Hg I, air). Line powers and "
        f"continuum estimated from {_nist('H38HT-100 (Mercury)')}.",
        notes=(
            "Line powers are the excess of the 5 nm table above a continuum interpolated under "
            "each line group. The table cannot resolve the doublets; they are split 0.85/0.15 "
            "(404.66/407.78 nm) and 0.48/0.52 (576.96/579.07 nm), from memory. Pressure "
            "broadening of the lines is not modelled.",
            "The continuum is the 5 nm table with the line regions bridged by straight lines.",
        ),
        spectrum=LineSpectrum(hg_lines, (hg.wavelengths, hg_continuum)),
    )
    yield dict(
        id="mercury-vapour-clear-measured",
        name="Clear mercury vapour 100 W, measured",
        type="mercury vapour",
        description="A measured clear high-pressure mercury lamp: blue-green lines, almost no red.",
        source=_nist("H38HT-100 (Mercury)"),
        notes=(NOTE_5NM_LINES,),
        spectrum=_tabulated("light source", "H38HT-100 (Mercury)"),
    )
    yield dict(
        id="mercury-vapour-coated-measured",
        name="Phosphor-coated mercury vapour, measured",
        type="mercury vapour",
        description="A measured phosphor-coated (colour-corrected) high-pressure mercury lamp: the "
        "mercury lines plus a red phosphor band near 615-620 nm.",
        source=_nist("Mercury"),
        notes=(NOTE_5NM_LINES,),
        spectrum=_tabulated("light source", "Mercury"),
    )
    yield dict(
        id="mercury-vapour-deluxe-measured",
        name="De-luxe mercury vapour 100 W, measured",
        type="mercury vapour",
        description="A measured de-luxe (warm phosphor-coated) high-pressure mercury lamp.",
        source=_nist("H38JA-100/DX (Mercury DX)"),
        notes=(NOTE_5NM_LINES,),
        spectrum=_tabulated("light source", "H38JA-100/DX (Mercury DX)"),
    )
    # Metal halide.
    for key, cct in (("HP3", 3100), ("HP4", 4000), ("HP5", 4000)):
        yield dict(
            id=f"metal-halide-cie-{key.lower()}",
            name=f"Metal halide, CIE {key}",
            type="metal halide",
            description=f"CIE illuminant {key}, a metal halide lamp (about {cct} K).",
            source=_cie(key, "HP"),
            notes=(NOTE_5NM_LINES,),
            spectrum=_tabulated("illuminant", key),
        )
    yield dict(
        id="metal-halide-measured",
        name="Metal halide, measured",
        type="metal halide",
        description="A measured quartz metal halide lamp (about 4300 K).",
        source=_nist("Metal Halide"),
        notes=(NOTE_5NM_LINES,),
        spectrum=_tabulated("light source", "Metal Halide"),
    )
    for key, cct in (("MHC100/U/MP/3K", 3000), ("MHC100/U/MP/4K", 4000)):
        yield dict(
            id=f"metal-halide-ceramic-{cct}k-measured",
            name=f"Ceramic metal halide {cct} K 100 W, measured",
            type="metal halide",
            description=f"A measured 100 W ceramic metal halide lamp (about {cct} K).",
            source=_nist(key),
            notes=(NOTE_5NM_LINES,),
            spectrum=_tabulated("light source", key),
        )
    # Fluorescent.
    for key, what in (
        ("FL2", "cool white halophosphate fluorescent lamp (about 4200 K)"),
        ("FL7", "broadband daylight fluorescent lamp (about 6500 K)"),
        ("FL11", "three-band fluorescent lamp (about 4000 K)"),
        ("FL3.1", "standard halophosphate fluorescent lamp (about 2930 K)"),
        ("FL3.8", "three-band fluorescent lamp (about 4000 K)"),
        ("FL3.12", "multi-band fluorescent lamp (about 3000 K)"),
    ):
        yield dict(
            id=f"fluorescent-cie-{key.lower().replace('.', '-')}",
            name=f"Fluorescent, CIE {key}",
            type="fluorescent",
            description=f"CIE illuminant {key}, a {what}.",
            source=_cie(key, "FL"),
            notes=(
                NOTE_5NM_LINES,
                "The mercury lines (404.66, 435.83, 546.07, 576.96/579.07 nm) sit on the phosphor "
                "bands; at 5 nm they appear as triangles on the 405, 435, 545 and 575/580 nm samples.",
            ),
            spectrum=_tabulated("illuminant", key),
        )
    # Phosphor LEDs.
    for key, cct in (("LED-B1", 2700), ("LED-B2", 3000), ("LED-B3", 4000), ("LED-B4", 5000), ("LED-B5", 6500)):
        yield dict(
            id=f"led-{cct}k-cie-{key.split('-')[1].lower()}",
            name=f"Phosphor LED {cct} K, CIE {key}",
            type="phosphor LED",
            description=f"CIE illuminant {key}: a typical blue-pumped white phosphor LED (about {cct} K).",
            source=_cie(key, "LED"),
            notes=(NOTE_5NM_SMOOTH,),
            spectrum=_tabulated("illuminant", key),
        )
    yield dict(
        id="led-2850k-hybrid-cie-bh1",
        name="Hybrid LED 2850 K, CIE LED-BH1",
        type="phosphor LED",
        description="CIE illuminant LED-BH1: a blue-pumped phosphor LED mixed with a red LED (about 2850 K).",
        source=_cie("LED-BH1", "LED"),
        notes=(NOTE_5NM_SMOOTH, "The red LED band near 630 nm is narrow (about 20 nm) but resolved at 5 nm."),
        spectrum=_tabulated("illuminant", "LED-BH1"),
    )
    for key, cct in (("LED-V1", 2700), ("LED-V2", 4000)):
        yield dict(
            id=f"led-{cct}k-violet-cie-{key.split('-')[1].lower()}",
            name=f"Violet-pumped LED {cct} K, CIE {key}",
            type="violet-pumped LED",
            description=f"CIE illuminant {key}: a violet-pumped white phosphor LED (about {cct} K).",
            source=_cie(key, "LED"),
            notes=(NOTE_5NM_SMOOTH,),
            spectrum=_tabulated("illuminant", key),
        )
    yield dict(
        id="led-6800k-yag-measured",
        name="Phosphor LED 6800 K (YAG), measured",
        type="phosphor LED",
        description="A measured cool white LED: blue die with a YAG:Ce phosphor (about 6800 K).",
        source=_nist("Phosphor LED YAG"),
        notes=(NOTE_5NM_SMOOTH,),
        spectrum=_tabulated("light source", "Phosphor LED YAG"),
    )
    yield dict(
        id="led-2900k-measured",
        name="Phosphor LED 2900 K, measured",
        type="phosphor LED",
        description="A measured warm white phosphor LED (about 2900 K).",
        source=_nist("Luxeon WW 2880"),
        notes=(NOTE_5NM_SMOOTH,),
        spectrum=_tabulated("light source", "Luxeon WW 2880"),
    )
    # Amber LEDs (modelled).
    yield dict(
        id="led-amber-phosphor-converted",
        name="Phosphor-converted amber LED (model)",
        type="amber LED",
        description="Phosphor-converted amber LED: a blue die almost fully converted by an amber "
        "phosphor -- one broad band peaking near 600 nm.",
        source="Model (no open measured spectrum bundled): asymmetric Gaussian band peaking at "
        "602 nm, FWHM 35 nm below and 45 nm above the peak (80 nm in all), plus 0.5 % residual "
        "blue pump at 450 nm (FWHM 20 nm).",
        notes=(
            "Modelled; band position, widths and the residual blue share are from memory of "
            "published PC-amber spectra, not a measurement.",
        ),
        spectrum=0.995 * _band(602.0, 35.0, 45.0) + 0.005 * _band(450.0, 10.0, 10.0),
    )
    yield dict(
        id="led-amber-narrow-band",
        name="Narrow-band amber LED (model)",
        type="amber LED",
        description="Direct-emitting (AlInGaP) amber LED: a narrow band centred at 590 nm.",
        source="Model (no open measured spectrum bundled): Gaussian band centred at 590 nm, FWHM 15 nm.",
        notes=("Modelled; centre and width are from memory of typical amber LED data sheets.",),
        spectrum=_band(590.0, 7.5, 7.5),
    )


@lru_cache(maxsize=1)
def _builtin_lamps() -> dict[str, Lamp]:
    out: dict[str, Lamp] = {}
    for spec in _builtin_specs():
        lamp = make_lamp(**spec)
        if lamp.id in out:
            raise RuntimeError(f"duplicate built-in lamp id {lamp.id}")
        out[lamp.id] = lamp
    return out


def builtin_lamps() -> dict[str, Lamp]:
    """The built-in lamps by id, in a fixed order (sodium, mercury, metal halide, fluorescent, LED)."""
    return dict(_builtin_lamps())


def _dataset_aliases() -> dict[str, str]:
    """Dataset keys ('HP1', 'LED-B3', 'HPS' ...) of the tabulated built-ins -> lamp id (for hints)."""
    out = {}
    for lamp in _builtin_lamps().values():
        for key in re.findall(r"\['([^']+)'\]", lamp.source):
            out.setdefault(key.lower(), lamp.id)
    return out


# --- resolving references ----------------------------------------------------------------------

_PATH_SUFFIXES = (".csv", ".txt", ".tsv", ".dat", ".spd", ".lines")


def _looks_like_path(ref: str) -> bool:
    return "/" in ref or "\\" in ref or ref.lower().endswith(_PATH_SUFFIXES)


def get_lamp(ref: str | Path, base_dir: str | Path | None = None, *, source: str = "lamp", where: str = "") -> Lamp:
    """Resolve a lamp reference: a built-in id or the path of a lamp file.

    Parameters
    ----------
    ref
        Built-in lamp id (see :func:`builtin_lamps`) or a file path; a relative path is taken
        relative to ``base_dir`` (default: the current folder).
    base_dir
        Folder that relative paths are relative to, e.g. the folder of the scene file.
    source, where
        How to name the reference in an error (e.g. ``"street.toml"``,
        ``"luminaires.rows[0].lamp"``).

    Raises
    ------
    InputError
        Unknown id (with a did-you-mean hint), missing file, or a bad lamp file.
    """
    text = str(ref).strip()
    lamps = _builtin_lamps()
    if text in lamps:
        return lamps[text]
    if text.lower() in lamps:
        return lamps[text.lower()]
    path = Path(text).expanduser()
    if not path.is_absolute() and base_dir is not None:
        path = Path(base_dir) / path
    if path.is_file():
        return load_lamp_file(path)
    if path.exists():
        raise input_error(source, where, f"{path} is not a lamp file (it is a folder)")
    if isinstance(ref, Path) or _looks_like_path(text):
        raise input_error(source, where, f"lamp file not found: {path}")
    hint = did_you_mean(text.lower(), lamps)
    alias = _dataset_aliases().get(text.lower())
    if alias:
        hint = f" (the built-in lamp made from the '{text}' table is '{alias}')"
    raise input_error(
        source,
        where,
        f"unknown lamp '{text}'{hint}; give a built-in lamp id (list them with 'lampcast lamps') "
        "or the path of a lamp file (.csv)",
    )


# --- lamp files ------------------------------------------------------------------------------

_KEY_LINE = re.compile(r"^#\s*([A-Za-z][A-Za-z_-]*)\s*:\s*(.*?)\s*$")


def _split(line: str) -> list[str]:
    return [f.strip() for f in line.split(",")] if "," in line else line.split()


def _number(text: str) -> float | None:
    try:
        value = float(text)
    except ValueError:
        return None
    return value


def _slug(text: str) -> str:
    slug = re.sub(r"[^a-z0-9]+", "-", text.lower()).strip("-")
    return slug or "lamp"


def load_lamp_file(path: str | Path) -> Lamp:
    """Read a lamp file (spectrum CSV or lines file; see the module docstring).

    Raises
    ------
    InputError
        Naming the file and line: unreadable or empty file, non-numeric or missing fields,
        unsorted or repeated wavelengths, negative or non-finite power, a spectrum not covering
        400-700 nm, no power in 380-780 nm, an unknown lamp type.
    """
    path = Path(path)
    src = str(path)
    text = read_user_text(path, "lamp file", "a UTF-8 lamp file (plain ASCII is fine)")
    n_lines = len(text.splitlines())

    problems = ProblemList(src)
    header: dict[str, str] = {}
    header_line: dict[str, int] = {}
    notes: list[str] = []
    rows: list[tuple[int, list[str]]] = []
    for number, raw in enumerate(text.splitlines(), start=1):
        line = raw.strip()
        if not line:
            continue
        if line.startswith("#"):
            match = _KEY_LINE.match(line)
            if match and not rows:
                key = match.group(1).lower()
                if key in _HEADER_KEYS:
                    if key == "notes":
                        notes.append(match.group(2))
                    else:
                        header[key] = match.group(2)
                        header_line[key] = number
                elif did_you_mean(key, _HEADER_KEYS):
                    problems.add(
                        f"line {number}",
                        f"unknown header key '{match.group(1)}'{did_you_mean(key, _HEADER_KEYS)}; "
                        f"header keys are {', '.join(_HEADER_KEYS)}",
                    )
            continue
        rows.append((number, _split(line)))

    canonical_types = {t.lower(): t for t in LAMP_TYPES}
    if "type" in header and header["type"].lower() in canonical_types:
        header["type"] = canonical_types[header["type"].lower()]
    elif "type" in header:
        problems.add(
            f"line {header_line['type']}",
            f"unknown lamp type '{header['type']}'{did_you_mean(header['type'], LAMP_TYPES)}; "
            f"expected one of: {', '.join(LAMP_TYPES)}",
        )
    # An optional row of column names (no numeric field) before the data.
    if rows and all(_number(f) is None for f in rows[0][1]) and rows[0][1][0].lower() not in ("line", "continuum"):
        rows = rows[1:]
    if not rows:
        problems.add(
            f"lines 1-{n_lines}" if n_lines else "",
            "no data rows; expected rows of 'wavelength_nm, relative_power' (or 'line, wavelength_nm, power')",
        )
        problems.raise_if_any()

    is_lines = any(fields[0].lower() in ("line", "continuum") for _, fields in rows)
    if is_lines:
        spectrum, file_notes = _parse_lines_rows(rows, problems)
    else:
        spectrum, file_notes = _parse_spectrum_rows(rows, problems)
    problems.raise_if_any()

    first, last = rows[0][0], rows[-1][0]
    density = spectrum.density() if isinstance(spectrum, LineSpectrum) else spectrum
    if not float(density.sum()) > 0:
        raise input_error(
            src, f"lines {first}-{last}", "no power between 380 and 780 nm; a lamp must emit visible light"
        )
    return make_lamp(
        id=_slug(path.stem),
        name=header.get("name") or path.stem,
        type=header.get("type", "other"),
        description=header.get("description", ""),
        source=header.get("source") or f"user file {path.name}",
        notes=tuple(notes) + tuple(file_notes),
        spectrum=spectrum,
        origin=src,
    )


def _parse_numbers(number: int, fields: list[str], names: Sequence[str], problems: ProblemList) -> list[float] | None:
    if len(fields) != len(names):
        problems.add(f"line {number}", f"expected {len(names)} fields ({', '.join(names)}), found {len(fields)}")
        return None
    values = []
    for name, text in zip(names, fields):
        value = _number(text)
        if value is None:
            problems.add(f"line {number}", f"{name} '{text}' is not a number")
            return None
        if not math.isfinite(value):
            problems.add(f"line {number}", f"{name} must be finite, found '{text}'")
            return None
        values.append(value)
    return values


def _check_power(number: int, what: str, value: float, problems: ProblemList) -> bool:
    if value < 0:
        problems.add(f"line {number}", f"{what} must be non-negative, found {value:g}")
        return False
    return True


def _check_increasing(samples: list[tuple[int, float, float]], what: str, problems: ProblemList) -> None:
    """Report the first row whose wavelength does not increase (later ones usually follow from it)."""
    for (_, w0, _), (n1, w1, _) in zip(samples, samples[1:]):
        if w1 == w0:
            problems.add(
                f"line {n1}",
                f"wavelength {w1:g} nm repeats the previous row; {what} wavelengths must be strictly increasing",
            )
            return
        if w1 < w0:
            problems.add(
                f"line {n1}", f"wavelength {w1:g} nm follows {w0:g} nm; {what} wavelengths must be strictly increasing"
            )
            return


#: Row problems reported per file before the rest of the rows are skipped.
MAX_ROW_PROBLEMS = 10


def _too_many(problems: ProblemList, number: int) -> bool:
    if len(problems.items) < MAX_ROW_PROBLEMS:
        return False
    problems.add(f"line {number}", f"more than {MAX_ROW_PROBLEMS} problems; the rest of the file was not checked")
    return True


def _parse_spectrum_rows(rows, problems: ProblemList):
    samples: list[tuple[int, float, float]] = []
    for number, fields in rows:
        if _too_many(problems, number):
            break
        values = _parse_numbers(number, fields, ("wavelength_nm", "relative_power"), problems)
        if values is None:
            continue
        w, p = values
        if w <= 0:
            problems.add(f"line {number}", f"wavelength must be positive, found {w:g} nm")
            continue
        if _check_power(number, "relative power", p, problems):
            samples.append((number, w, p))
    if problems or not samples:
        return None, []
    _check_increasing(samples, "spectrum", problems)
    if problems:
        return None, []
    lo, hi = FILE_MIN_COVERAGE_NM
    if samples[0][1] > lo:
        problems.add(
            f"line {samples[0][0]}",
            f"spectrum starts at {samples[0][1]:g} nm; a lamp spectrum must cover at least {lo:g}-{hi:g} nm",
        )
    if samples[-1][1] < hi:
        problems.add(
            f"line {samples[-1][0]}",
            f"spectrum ends at {samples[-1][1]:g} nm; a lamp spectrum must cover at least {lo:g}-{hi:g} nm",
        )
    if problems:
        return None, []
    w = [s[1] for s in samples]
    p = [s[2] for s in samples]
    notes = []
    if w[0] > WAVELENGTH_MIN_NM or w[-1] < WAVELENGTH_MAX_NM:
        notes.append(f"The file covers {w[0]:g}-{w[-1]:g} nm; the spectrum is taken as zero outside it.")
    return density_on_grid(w, p), notes


def _parse_lines_rows(rows, problems: ProblemList):
    lines: list[tuple[int, float, float]] = []
    continuum: list[tuple[int, float, float]] = []
    for number, fields in rows:
        if _too_many(problems, number):
            break
        kind = fields[0].lower()
        if kind not in ("line", "continuum"):
            problems.add(
                f"line {number}",
                f"row starts with '{fields[0]}'; in a lines file every row starts with 'line' or 'continuum'",
            )
            continue
        names = ("wavelength_nm", "relative_power") if kind == "line" else ("wavelength_nm", "relative_power_per_nm")
        if len(fields) != 3:
            problems.add(f"line {number}", f"expected '{kind}, {names[0]}, {names[1]}', found {len(fields)} fields")
            continue
        values = _parse_numbers(number, fields[1:], names, problems)
        if values is None:
            continue
        w, p = values
        if w <= 0:
            problems.add(f"line {number}", f"wavelength must be positive, found {w:g} nm")
            continue
        if _check_power(number, names[1].replace("_", " "), p, problems):
            (lines if kind == "line" else continuum).append((number, w, p))
    seen: dict[float, int] = {}
    for number, w, _ in lines:
        if w in seen:
            problems.add(f"line {number}", f"a line at {w:g} nm is already given on line {seen[w]}")
        seen.setdefault(w, number)
    if continuum:
        if len(continuum) < 2:
            problems.add(f"line {continuum[0][0]}", "a continuum needs at least two 'continuum' rows")
        _check_increasing(continuum, "continuum", problems)
    if problems:
        return None, []
    notes = []
    outside = [w for _, w, _ in lines if not WAVELENGTH_MIN_NM <= w <= WAVELENGTH_MAX_NM]
    if outside:
        notes.append("Lines outside 380-780 nm left out: " + ", ".join(f"{w:g} nm" for w in outside) + ".")
    spectrum = LineSpectrum(
        [(w, p) for _, w, p in lines],
        ([w for _, w, _ in continuum], [p for _, _, p in continuum]) if continuum else None,
    )
    return spectrum, notes
