"""The built-in lamp catalogue: the data file ``render/data/lamps/catalogue.toml`` made into lamps.

The catalogue is data: one ``[[lamp]]`` table per built-in lamp with its id, name, type,
description, source, notes and how its spectrum is built (the file's header comment documents
the keys). This module reads it as package data with :mod:`importlib.resources` and builds each
spectrum by its ``kind``:

* ``table`` -- a CIE 015:2018 illuminant table or a measured lamp of the NIST CQS 7.4
  spreadsheet, as bundled with colour-science (``colour.SDS_ILLUMINANTS``,
  ``colour.SDS_LIGHT_SOURCES``), tabulated at 5 nm and moved onto the 1 nm grid with
  :func:`render.colour.spectra.density_on_grid` (band powers conserved; a table starting at
  380 nm or ending at 780 nm holds its end value over the grid's outer half bin). At 5 nm a
  discharge lamp's emission lines are smeared into 10 nm wide triangles; the lamps concerned say
  so in their notes.
* ``lines`` -- emission lines at NIST Atomic Spectra Database wavelengths, relative powers as
  the catalogue states their origin (:class:`render.colour.lamps.model.LineSpectrum`).
* ``lines-from-table`` -- line powers and a continuum estimated from a 5 nm table
  (:func:`lines_from_table`).
* ``bands`` -- sums of asymmetric Gaussian bands (:func:`gaussian_band`), for lamps with no
  open measured spectrum.

The lamps are built once per process (:func:`builtin_lamps` is cached) and are immutable.

References
----------
- CIE 015:2018 *Colorimetry*, 4th ed., Tables 10-12 (fluorescent, high-pressure discharge and
  LED illuminants).
- Y. Ohno and W. Davis, NIST CQS simulation 7.4 spreadsheet (2008), lamp spectra.
- NIST Atomic Spectra Database (line wavelengths in air).
- colour-science, ``colour.SDS_ILLUMINANTS`` and ``colour.SDS_LIGHT_SOURCES`` (the bundled
  copies of those tables), stored in ``render/data/colour/spectra.csv`` by
  ``tools/make_colour_tables.py`` so that building the lamps does not import colour-science.
"""

from __future__ import annotations

import math
import tomllib
from collections.abc import Mapping, Sequence
from dataclasses import dataclass
from functools import lru_cache
from importlib.resources import files
from typing import Any

import numpy as np
from numpy.typing import ArrayLike

from render.colour.lamps.model import Lamp, LineSpectrum, make_lamp
from render.colour.spectra import (
    BIN_WIDTH_NM,
    WAVELENGTH_MAX_NM,
    WAVELENGTH_MIN_NM,
    bin_density,
    density_on_grid,
)
from render.colour.tables import reference_spectrum

__all__ = [
    "CATALOGUE_RESOURCE",
    "CatalogueEntry",
    "builtin_lamps",
    "catalogue_entries",
    "dataset_aliases",
    "gaussian_band",
    "lines_from_table",
]

#: Where the catalogue lives, as package data of :mod:`render`.
CATALOGUE_RESOURCE = ("data", "lamps", "catalogue.toml")

_KINDS = ("table", "lines", "lines-from-table", "bands")


@dataclass(frozen=True)
class CatalogueEntry:
    """One ``[[lamp]]`` table of the catalogue, its texts resolved.

    Attributes
    ----------
    id, name, type, description
        As in the file.
    source
        The provenance text, with ``{table}`` replaced by the table citation.
    notes
        Shared notes first, then the lamp's own.
    spectrum
        The ``spectrum`` table as read (its keys depend on ``spectrum["kind"]``).
    dataset
        ``(attribute, key)`` of the colour-science table the lamp is built from (e.g.
        ``("SDS_ILLUMINANTS", "HP1")``), or ``None`` for models without a table.
    """

    id: str
    name: str
    type: str
    description: str
    source: str
    notes: tuple[str, ...]
    spectrum: Mapping[str, Any]
    dataset: tuple[str, str] | None


def _read_catalogue() -> dict[str, Any]:
    resource = files("render").joinpath(*CATALOGUE_RESOURCE)
    return tomllib.loads(resource.read_text(encoding="utf-8"))


def _citation(table: Mapping[str, Any], key: str) -> str:
    entry = str(table["entry"]).replace("{key}", key)
    return (
        f"{table['citation']}, {entry}; via colour-science colour.{table['colour_science']}['{key}'] "
        f"({table['interval_nm']:g} nm)"
    )


@lru_cache(maxsize=1)
def catalogue_entries() -> dict[str, CatalogueEntry]:
    """The catalogue's entries by id, in file order (read once).

    Raises ``ValueError`` naming the entry for a mistake in the data file (a missing key, an
    unknown kind, table or shared note, a repeated id): the catalogue is part of the program.
    """
    data = _read_catalogue()
    shared, tables = data.get("notes", {}), data.get("tables", {})
    out: dict[str, CatalogueEntry] = {}
    for i, raw in enumerate(data.get("lamp", [])):
        where = f"catalogue lamp {i} ({raw.get('id', '?')})"
        missing = [k for k in ("id", "name", "type", "description", "spectrum") if k not in raw]
        if missing:
            raise ValueError(f"{where}: missing {', '.join(missing)}")
        spectrum = raw["spectrum"]
        if spectrum.get("kind") not in _KINDS:
            raise ValueError(f"{where}: spectrum kind must be one of {', '.join(_KINDS)}")
        citation = dataset = None
        if "table" in spectrum:
            if spectrum["table"] not in tables:
                raise ValueError(f"{where}: unknown table {spectrum['table']!r}")
            table = tables[spectrum["table"]]
            citation = _citation(table, spectrum["key"])
            dataset = (table["colour_science"], spectrum["key"])
        source = raw.get("source", citation)
        if source is None:
            raise ValueError(f"{where}: a lamp without a table needs a source")
        if citation is not None:
            source = source.replace("{table}", citation)
        unknown = [k for k in raw.get("shared_notes", []) if k not in shared]
        if unknown:
            raise ValueError(f"{where}: unknown shared notes {unknown}")
        if raw["id"] in out:
            raise ValueError(f"{where}: id {raw['id']!r} given twice")
        out[raw["id"]] = CatalogueEntry(
            id=raw["id"],
            name=raw["name"],
            type=raw["type"],
            description=raw["description"],
            source=source,
            notes=tuple(shared[k] for k in raw.get("shared_notes", [])) + tuple(raw.get("notes", [])),
            spectrum=spectrum,
            dataset=dataset,
        )
    return out


# --- spectrum builders -------------------------------------------------------------------------


def _table(entry: CatalogueEntry) -> tuple[np.ndarray, np.ndarray]:
    """``(wavelengths_nm, values)`` of the colour-science table an entry is built from, as
    stored in ``render/data/colour/spectra.csv`` (:mod:`render.colour.tables`)."""
    attribute, key = entry.dataset
    return reference_spectrum(attribute, key)


def lines_from_table(
    wavelengths_nm: ArrayLike,
    density: ArrayLike,
    line_groups: Sequence[Sequence[tuple[float, float]]],
    window_nm: float,
) -> tuple[list[tuple[float, float]], np.ndarray]:
    """Estimate emission-line powers and the continuum from a coarsely sampled spectrum.

    For each group of lines ``[(wavelength_nm, share), ...]`` the samples within ``window_nm``
    of the group are replaced by a straight line between the neighbouring samples (the
    continuum); the excess above it, integrated with the trapezoid rule (exact for the
    piecewise-linear reading of the table), is the group's line power, shared among its lines by
    the given shares.

    Returns
    -------
    lines
        ``(wavelength_nm, power)`` in the table's unit times nm.
    continuum
        The continuum density at the table's wavelengths.
    """
    x = np.asarray(wavelengths_nm, dtype=np.float64)
    y = np.asarray(density, dtype=np.float64)

    def window(group: Sequence[tuple[float, float]]) -> np.ndarray:
        wl = [w for w, _ in group]
        return (x > min(wl) - window_nm) & (x < max(wl) + window_nm)

    masked = np.zeros(x.size, dtype=bool)
    for group in line_groups:
        masked |= window(group)
    continuum = y.copy()
    continuum[masked] = np.interp(x[masked], x[~masked], y[~masked])
    excess = np.clip(y - continuum, 0.0, None)
    lines: list[tuple[float, float]] = []
    for group in line_groups:
        power = float(np.trapezoid(np.where(window(group), excess, 0.0), x))
        lines += [(w, power * share) for w, share in group]
    return lines, continuum


def gaussian_band(peak_nm: float, hwhm_below_nm: float, hwhm_above_nm: float) -> np.ndarray:
    """A Gaussian band with different half widths at half maximum below and above its peak,
    sampled every 0.1 nm, moved onto the grid and scaled to unit power (density, nm⁻¹)."""
    x = np.arange(WAVELENGTH_MIN_NM - 0.5, WAVELENGTH_MAX_NM + 0.55, 0.1)
    sigma = np.where(x < peak_nm, hwhm_below_nm, hwhm_above_nm) / math.sqrt(2.0 * math.log(2.0))
    band = bin_density(x, np.exp(-0.5 * ((x - peak_nm) / sigma) ** 2))
    return band / (band.sum() * BIN_WIDTH_NM)


def _spectrum(entry: CatalogueEntry) -> LineSpectrum | np.ndarray:
    spec = entry.spectrum
    kind = spec["kind"]
    if kind == "table":
        wavelengths, values = _table(entry)
        return density_on_grid(wavelengths, values)
    if kind == "lines":
        return LineSpectrum([(float(line["nm"]), float(line["power"])) for line in spec["lines"]])
    if kind == "lines-from-table":
        wavelengths, values = _table(entry)
        groups = [[(float(line["nm"]), float(line["share"])) for line in group] for group in spec["line_groups"]]
        lines, continuum = lines_from_table(wavelengths, values, groups, float(spec["window_nm"]))
        return LineSpectrum(lines, (wavelengths, continuum))
    return sum(
        float(b["weight"]) * gaussian_band(float(b["peak_nm"]), float(b["hwhm_below_nm"]), float(b["hwhm_above_nm"]))
        for b in spec["bands"]
    )


@lru_cache(maxsize=1)
def _builtin_lamps() -> dict[str, Lamp]:
    return {
        e.id: make_lamp(e.id, e.name, e.type, e.description, e.source, e.notes, _spectrum(e))
        for e in catalogue_entries().values()
    }


def builtin_lamps() -> dict[str, Lamp]:
    """The built-in lamps by id, in catalogue order (sodium, mercury, metal halide, fluorescent,
    LED). A new dict each call; the lamps themselves are shared and immutable."""
    return dict(_builtin_lamps())


def dataset_aliases() -> dict[str, str]:
    """Lowercased dataset keys (``hp1``, ``led-b3``, ``hps`` ...) -> the id of the first built-in
    lamp made from that table (for hints when someone types a dataset key)."""
    out: dict[str, str] = {}
    for entry in catalogue_entries().values():
        if entry.dataset is not None:
            out.setdefault(entry.dataset[1].lower(), entry.id)
    return out
