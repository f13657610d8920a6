"""Bundled resources and per-user folders: the data that ships with lampcast.

The reflectance library (``materials/``) and the example scenes (``scenes/``) live at the top of
the source tree, where contributors edit them. ``render/bundled/materials`` and
``render/bundled/scenes`` are links to them, so that a built wheel carries the same files as
package data and an installed lampcast finds them with :mod:`importlib.resources` wherever it
is installed (editable or not). The photometric distributions and the lamp catalogue are package
data under ``render/data/``.

numba's compiled-kernel cache is written next to the sources by default. An installation in a
read-only folder (a system site-packages, a container image) would lose the cache, so
:func:`numba_cache_dir` chooses a per-user folder instead when ``NUMBA_CACHE_DIR`` is unset and
the package folder cannot be written; :mod:`render` applies it before numba is imported.

References
----------
- Python documentation, :mod:`importlib.resources` and :mod:`importlib.metadata`.
- numba documentation, "Environment variables": ``NUMBA_CACHE_DIR``.
- XDG Base Directory Specification (``XDG_CACHE_HOME``, default ``~/.cache``).
"""

from __future__ import annotations

import os
from collections.abc import Callable, Mapping
from functools import lru_cache
from importlib.resources import files
from pathlib import Path

__all__ = [
    "DISTRIBUTION",
    "bundled_path",
    "demo_scene_path",
    "installed_version",
    "numba_cache_dir",
    "package_dir",
    "user_cache_dir",
]

DISTRIBUTION = "lampcast"
"""The name lampcast is installed under (``pyproject.toml``)."""

_UNKNOWN_VERSION = "0+unknown"


@lru_cache(maxsize=1)
def installed_version() -> str:
    """lampcast's version, read from the installed distribution's metadata (``pyproject.toml``
    is its one source); ``0+unknown`` when the package runs from a folder that was never
    installed. Read once per process, when first asked for (:mod:`importlib.metadata` takes
    longer to import than the rest of a quick command's start)."""
    import importlib.metadata

    try:
        return importlib.metadata.version(DISTRIBUTION)
    except importlib.metadata.PackageNotFoundError:
        return _UNKNOWN_VERSION


def package_dir() -> Path:
    """The folder of the ``render`` package (a real folder: lampcast is not run from a zip)."""
    return Path(str(files("render")))


def bundled_path(*parts: str) -> Path:
    """A file or folder shipped with lampcast, e.g. ``bundled_path("materials")`` or
    ``bundled_path("scenes", "demo", "linden_row.toml")``."""
    return package_dir().joinpath("bundled", *parts)


def demo_scene_path() -> Path:
    """The bundled demo street scene."""
    return bundled_path("scenes", "demo", "linden_row.toml")


def user_cache_dir(env: Mapping[str, str] | None = None) -> Path:
    """lampcast's per-user cache folder: ``$XDG_CACHE_HOME/lampcast`` (default
    ``~/.cache/lampcast``)."""
    env = os.environ if env is None else env
    base = env.get("XDG_CACHE_HOME", "").strip()
    root = Path(base).expanduser() if base else Path.home() / ".cache"
    return root / DISTRIBUTION


def _writable(folder: Path) -> bool:
    return os.access(folder, os.W_OK | os.X_OK)


def numba_cache_dir(
    env: Mapping[str, str] | None = None,
    folder: Path | None = None,
    writable: Callable[[Path], bool] | None = None,
) -> Path | None:
    """Where numba should cache compiled kernels, or None to keep numba's own choice.

    None when ``NUMBA_CACHE_DIR`` is already set (the user's choice wins) or the package folder
    is writable (numba caches in ``__pycache__`` beside the sources); otherwise a folder in the
    per-user cache, one per lampcast version so that stale kernels are never mixed in.
    """
    env = os.environ if env is None else env
    writable = _writable if writable is None else writable
    if env.get("NUMBA_CACHE_DIR", "").strip():
        return None
    folder = package_dir() if folder is None else folder
    if writable(folder):
        return None
    return user_cache_dir(env) / f"numba-{installed_version()}"
