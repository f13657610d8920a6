"""Stored reference tables: the CIE observer functions, illuminant and lamp spectra, lamp figures.

lampcast takes these tables from colour-science, whose import alone takes longer than a quick
command may (it loads its plotting too). ``tools/make_colour_tables.py`` copies what lampcast
uses into ``render/data/colour/`` -- numbers written with Python's shortest round-trip repr, so
that reading them back gives the same doubles -- and ``tests/test_colour_tables.py`` checks the
stored tables against colour-science:

* ``observers.csv`` -- the CIE 1931 2° colour-matching functions x̄, ȳ, z̄, the CIE 1924
  photopic V(λ) and CIE 1951 scotopic V'(λ) at the grid's bin centres, 380-780 nm (1 nm);
* ``spectra.csv`` -- every colour-science table the lamp catalogue builds a lamp from, and CIE
  D65, at the table's own wavelengths (``dataset, key, wavelength_nm, value`` rows);
* ``lamp_figures.json`` -- the figures of :mod:`render.colour.lamp_figures` computed with
  colour-science for every built-in lamp, keyed by the SHA-256 of the lamp's spectrum, so that a
  lamp whose spectrum changed is computed afresh rather than given stale figures;
* ``naming_prototypes.json`` -- CIELAB of the colour-naming prototypes (Munsell renotation with
  colour-science, :func:`render.analysis.naming.munsell_to_lab`), each with the notation it was
  computed from.

Each file is read once per process and its arrays are read-only.

References
----------
- CIE 015:2018 *Colorimetry*, 4th ed. (observer functions, illuminants D65 and the HP, FL and
  LED tables); Y. Ohno and W. Davis, NIST CQS 7.4 spreadsheet (2008) -- as bundled with
  colour-science (``colour.MSDS_CMFS``, ``SDS_LEFS_PHOTOPIC``, ``SDS_LEFS_SCOTOPIC``,
  ``SDS_ILLUMINANTS``, ``SDS_LIGHT_SOURCES``).
"""

from __future__ import annotations

import hashlib
import json
from functools import lru_cache
from importlib.resources import files
from typing import Any

import numpy as np

__all__ = [
    "OBSERVER_COLUMNS",
    "TABLES_RESOURCE",
    "observer_table",
    "reference_spectrum",
    "spectrum_key",
    "stored_lamp_figures",
    "stored_prototype_lab",
]

#: Where the tables live, as package data of :mod:`render`.
TABLES_RESOURCE = ("data", "colour")
#: The columns of ``observers.csv`` after ``wavelength_nm``.
OBSERVER_COLUMNS = ("x_bar", "y_bar", "z_bar", "v_photopic", "v_scotopic")


def _text(name: str) -> str:
    return files("render").joinpath(*TABLES_RESOURCE, name).read_text(encoding="utf-8")


def _data_rows(text: str) -> list[list[str]]:
    """The comma-separated rows after the ``#`` comments and the column row."""
    rows = [line.split(",") for line in text.splitlines() if line and not line.startswith("#")]
    return rows[1:]


@lru_cache(maxsize=1)
def observer_table() -> dict[str, np.ndarray]:
    """``wavelength_nm`` and :data:`OBSERVER_COLUMNS` on the grid, each (N_BINS,), read-only."""
    rows = _data_rows(_text("observers.csv"))
    values = np.array([[float(v) for v in row] for row in rows], dtype=np.float64)
    out = {"wavelength_nm": values[:, 0].copy()}
    for k, name in enumerate(OBSERVER_COLUMNS, start=1):
        out[name] = values[:, k].copy()
    for array in out.values():
        array.setflags(write=False)
    return out


@lru_cache(maxsize=1)
def _spectra() -> dict[tuple[str, str], tuple[np.ndarray, np.ndarray]]:
    grouped: dict[tuple[str, str], list[tuple[float, float]]] = {}
    for dataset, key, wavelength, value in _data_rows(_text("spectra.csv")):
        grouped.setdefault((dataset, key), []).append((float(wavelength), float(value)))
    out = {}
    for name, samples in grouped.items():
        w, v = (np.array(c, dtype=np.float64) for c in zip(*samples))
        w.setflags(write=False)
        v.setflags(write=False)
        out[name] = (w, v)
    return out


def reference_spectrum(dataset: str, key: str) -> tuple[np.ndarray, np.ndarray]:
    """``(wavelengths_nm, values)`` of colour-science's ``colour.<dataset>[key]`` as stored
    (read-only); ``KeyError`` for a table not stored (``tools/make_colour_tables.py`` stores
    those the lamp catalogue names, and D65)."""
    return _spectra()[(dataset, key)]


def spectrum_key(spd: np.ndarray) -> str:
    """The key of a gridded spectrum in ``lamp_figures.json``: SHA-256 of its float64 bytes."""
    return hashlib.sha256(np.ascontiguousarray(spd, dtype=np.float64).tobytes()).hexdigest()


@lru_cache(maxsize=1)
def _lamp_figures() -> dict[str, Any]:
    return json.loads(_text("lamp_figures.json"))["lamps"]


@lru_cache(maxsize=1)
def _naming_prototypes() -> dict[str, Any]:
    return json.loads(_text("naming_prototypes.json"))["prototypes"]


def stored_prototype_lab(term: str, munsell: str) -> np.ndarray | None:
    """The stored CIELAB of colour-naming prototype ``term`` (read-only), or None when none is
    stored for that Munsell notation (a changed notation is computed afresh)."""
    entry = _naming_prototypes().get(term)
    if entry is None or entry["munsell"] != munsell:
        return None
    lab = np.array(entry["lab"], dtype=np.float64)
    lab.setflags(write=False)
    return lab


def stored_lamp_figures(spd: np.ndarray) -> tuple[dict, tuple[str, ...], dict] | None:
    """The stored ``(values, notes, undefined)`` of :func:`render.colour.lamp_figures.lamp_figures`
    for this spectrum, or None when it is not a stored built-in lamp's."""
    entry = _lamp_figures().get(spectrum_key(spd))
    if entry is None:
        return None
    return dict(entry["values"]), tuple(entry["notes"]), dict(entry["undefined"])
