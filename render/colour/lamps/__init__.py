"""The lamp library: built-in street-lamp spectra and user lamp files.

A lamp is a relative spectral power density on the 1 nm grid, normalised to unit power over
380-780 nm, with its provenance (:class:`Lamp`). The package holds:

* :mod:`render.colour.lamps.model` -- :class:`Lamp`, :class:`LineSpectrum`, :func:`make_lamp`
  and the lamp types;
* :mod:`render.colour.lamps.catalogue` -- the built-in lamps, built from the data file
  ``render/data/lamps/catalogue.toml`` (:func:`builtin_lamps`);
* :mod:`render.colour.lamps.files` -- a user's lamp file, a spectrum CSV or a list of lines
  (:func:`load_lamp_file`).

:func:`get_lamp` resolves what a scene or the command line names: a built-in id or the path of
a lamp file.

References
----------
- CIE 015:2018 *Colorimetry*, 4th ed.; NIST CQS 7.4 spreadsheet (Ohno & Davis 2008); NIST
  Atomic Spectra Database -- the sources of the built-in lamps (see
  :mod:`render.colour.lamps.catalogue`).
"""

from __future__ import annotations

from pathlib import Path

from render.colour.lamps.catalogue import builtin_lamps, dataset_aliases
from render.colour.lamps.files import load_lamp_file
from render.colour.lamps.model import LAMP_TYPES, Lamp, LineSpectrum, make_lamp
from render.errors import did_you_mean, input_error
from render.fileio import looks_like_path

__all__ = [
    "LAMP_TYPES",
    "Lamp",
    "LineSpectrum",
    "builtin_lamps",
    "get_lamp",
    "load_lamp_file",
    "make_lamp",
]


def get_lamp(ref: str | Path, base_dir: str | Path | None = None, *, source: str = "lamp", where: str = "") -> Lamp:
    """Resolve a lamp reference: a built-in id or the path of a lamp file.

    Parameters
    ----------
    ref
        Built-in lamp id (see :func:`builtin_lamps`; case does not matter) or a file path; a
        relative path is taken relative to ``base_dir`` (default: the current folder).
    base_dir
        Folder that relative paths are relative to, e.g. the folder of the scene file.
    source, where
        How to name the reference in an error (e.g. ``"street.toml"``,
        ``"luminaires.rows[0].lamp"``).

    Raises
    ------
    InputError
        Unknown id (with a did-you-mean hint, or the built-in lamp made from a dataset key such
        as ``HP1``), missing file, or a bad lamp file.
    """
    text = str(ref).strip()
    lamps = builtin_lamps()
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
    if isinstance(ref, Path) or looks_like_path(text):
        raise input_error(source, where, f"lamp file not found: {path}")
    hint = did_you_mean(text.lower(), lamps)
    alias = dataset_aliases().get(text.lower())
    if alias:
        hint = f" (the built-in lamp made from the '{text}' table is '{alias}')"
    raise input_error(
        source,
        where,
        f"unknown lamp '{text}'{hint}; give a built-in lamp id (list them with 'lampcast lamps') "
        "or the path of a lamp file (.csv)",
    )
