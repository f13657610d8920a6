"""Lamp model: a relative spectrum with its provenance, line sources and the lamp types.

A :class:`Lamp` holds a **relative spectral power density** on the one grid of
:mod:`render.colour.spectra` (401 bins of 1 nm, 380-780 nm), **normalised to unit total power**:
``lamp.spd.sum() * BIN_WIDTH_NM == 1`` over 380-780 nm, so ``lamp.spd`` is in nm⁻¹ (share of the
visible power per nm). Absolute spectra follow from a photometric quantity, e.g.
``render.colour.observers.scale_to_photopic(lamp.spd, 12000.0)`` is the spectral flux in W/nm of a
lamp emitting 12 000 lm, and ``render.colour.observers.photopic(lamp.spd)`` is its luminous
efficacy of radiation in lm/W.

A line source is a :class:`LineSpectrum` -- lines ``(wavelength_nm, relative power)`` plus an
optional continuum density -- put on the grid with :func:`render.colour.spectra.deposit_lines`,
which conserves each line's power and mean wavelength. A tabulated density is put on the grid
with :func:`render.colour.spectra.density_on_grid` (band powers conserved).

References
----------
- CIE 015:2018 *Colorimetry*, 4th ed.: relative spectral power distributions of light sources.
"""

from __future__ import annotations

from collections.abc import Sequence
from dataclasses import dataclass, field

import numpy as np
from numpy.typing import ArrayLike

from render.colour.spectra import (
    BIN_WIDTH_NM,
    N_BINS,
    WAVELENGTH_MAX_NM,
    WAVELENGTH_MIN_NM,
    density_on_grid,
    deposit_lines,
)

__all__ = ["LAMP_TYPES", "Lamp", "LineSpectrum", "make_lamp"]

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
    continuum: tuple[ArrayLike, ArrayLike] | None = None

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
    spectrum: LineSpectrum | ArrayLike,
    origin: str = "built-in",
) -> Lamp:
    """Build a :class:`Lamp` from a :class:`LineSpectrum` or a gridded density (normalised here).

    Raises ``ValueError`` for a type not in :data:`LAMP_TYPES` or a spectrum without power in
    380-780 nm (callers reading user input check both first and raise ``InputError``).
    """
    if type not in LAMP_TYPES:
        raise ValueError(f"unknown lamp type {type!r}")
    if isinstance(spectrum, LineSpectrum):
        spd, total = _normalise(spectrum.density())
        lines = tuple((float(w), float(p) / total) for w, p in spectrum.visible_lines())
    else:
        spd, _ = _normalise(np.asarray(spectrum, dtype=np.float64))
        lines = ()
    return Lamp(id, name, type, description, source, tuple(notes), spd, lines, origin)
