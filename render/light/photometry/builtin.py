"""Built-in generic distributions, and loading a distribution by id or by file path.

lampcast ships four generic LM-63 files (``generic-isotropic``, ``generic-full-cutoff``,
``generic-post-top``, ``generic-road-asymmetric``) as package data in
``render/data/photometry/``. They are analytic models of our own, not the data of any product;
``render/data/photometry/README.md`` describes the models and ``tools/make_generic_photometry.py``
writes them. They are found with :mod:`importlib.resources`, so an installed wheel reads them
wherever it is installed.

A scene names a distribution either by a built-in id or by the path of an LM-63 or EULUMDAT
file (:func:`load_photometry`). A path ending in ``.ldt`` is read by
:func:`render.light.photometry.eulumdat.read_eulumdat`, one ending in ``.ies`` (and the built-in
files) by :func:`render.light.photometry.lm63.read_lm63`; any other name by the reader whose
format the start of the file resembles (:func:`render.light.photometry.formats.guess_photometric_format`),
LM-63 when it resembles neither.

References
----------
- ANSI/IESNA LM-63-2002, "Standard file format for the electronic transfer of photometric data"
  (the format of the built-in files) **(from memory)**.
- Python documentation, :mod:`importlib.resources` (package data).
"""

from __future__ import annotations

import importlib.resources
import os
from functools import lru_cache
from importlib.resources.abc import Traversable
from pathlib import Path

import numpy as np

from render.errors import InputError, Problem, did_you_mean
from render.fileio import read_user_bytes
from render.light.photometry.eulumdat import parse_eulumdat, read_eulumdat
from render.light.photometry.formats import guess_photometric_format
from render.light.photometry.lm63 import _decode, parse_lm63, read_lm63, require_inside
from render.light.photometry.model import Photometry

__all__ = ["BUILTIN_PHOTOMETRY_DIR", "builtin_photometry_ids", "load_photometry"]

#: Folder of the built-in generic LM-63 files (``<id>.ies``), package data of ``render``.
BUILTIN_PHOTOMETRY_DIR: Traversable = importlib.resources.files("render") / "data" / "photometry"

_SUFFIX = ".ies"


def builtin_photometry_ids() -> list[str]:
    """Ids of the generic distributions shipped in ``render/data/photometry``, sorted."""
    return sorted(
        entry.name[: -len(_SUFFIX)]
        for entry in BUILTIN_PHOTOMETRY_DIR.iterdir()
        if entry.name.endswith(_SUFFIX) and entry.is_file()
    )


@lru_cache(maxsize=32)
def _read_builtin(ident: str) -> Photometry:
    """A shipped distribution, parsed once per process (package data does not change; its
    arrays are made read-only so that no caller can alter the shared copy)."""
    with importlib.resources.as_file(BUILTIN_PHOTOMETRY_DIR / f"{ident}{_SUFFIX}") as path:
        photometry = read_lm63(path)
    for value in vars(photometry).values():
        if isinstance(value, np.ndarray):
            value.setflags(write=False)
    return photometry


def load_photometry(
    ref: str | os.PathLike,
    base_dir: str | os.PathLike | None = None,
    *,
    allowed_root: str | os.PathLike | None = None,
) -> Photometry:
    """Load a built-in distribution by id (see :func:`builtin_photometry_ids`) or an LM-63 or
    EULUMDAT file (module notes) by path (relative paths are taken from ``base_dir``, default the current folder).

    With ``allowed_root`` (strict paths) a photometric file (and an LM-63 file's tilt file) must
    lie inside that folder; built-in ids are always allowed.

    Raises
    ------
    InputError
        If ``ref`` is neither a built-in id nor an existing file (with a suggestion for a
        misspelt id), is not a regular file within the size limit, or is malformed.
    """
    text = str(ref)
    ids = builtin_photometry_ids()
    if text in ids:
        return _read_builtin(text)
    path = Path(text)
    if not path.is_absolute() and base_dir is not None:
        path = Path(base_dir) / path
    if "\x00" in text or path.exists():  # read_lm63 explains a NUL, a device or a folder
        return _read_file(path, allowed_root)
    raise InputError(
        Problem(
            text,
            "",
            f"no built-in photometry of that name and no file at {path}; built-in ids are "
            f"{', '.join(ids)}{did_you_mean(text, ids)}",
        )
    )


def _read_file(path: Path, allowed_root: str | os.PathLike | None) -> Photometry:
    """Read ``path`` with the reader its extension, else its content, calls for (module notes)."""
    suffix = path.suffix.lower()
    if suffix == ".ldt":
        return read_eulumdat(path, allowed_root=allowed_root)
    if suffix == ".ies" or "\x00" in str(path):
        return read_lm63(path, allowed_root=allowed_root)
    require_inside(path, allowed_root)
    text = _decode(read_user_bytes(path, "photometric file"))  # read once, then parsed by its format
    if guess_photometric_format(text) == "eulumdat":
        return parse_eulumdat(text, source=str(path))
    return parse_lm63(text, source=str(path), base_dir=path.parent, allowed_root=allowed_root)
