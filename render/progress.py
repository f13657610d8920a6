"""Progress bars: shown only to a person watching a terminal.

Long loops (camera-ray tiles, direct-light chunks) wrap their iterable in :func:`progress_bar`.
The caller says whether it wants a bar (``quiet=False``); the bar is drawn on standard error only
when that is a terminal, so logs, pipes and test captures never receive bar text. The choice is
passed down as an argument from the command line's ``--quiet`` flag; there is no global switch.

References
----------
- tqdm documentation, ``tqdm.tqdm`` (``disable``, ``leave``, ``file``).
"""

from __future__ import annotations

import sys
from collections.abc import Iterable
from typing import TextIO, TypeVar

__all__ = ["progress_bar", "shows_progress"]

T = TypeVar("T")


def shows_progress(quiet: bool, stream: TextIO | None = None) -> bool:
    """Whether a bar would be drawn: not ``quiet`` and ``stream`` (default standard error) is a
    terminal."""
    stream = sys.stderr if stream is None else stream
    if quiet or stream is None:
        return False
    isatty = getattr(stream, "isatty", None)
    try:
        return bool(isatty and isatty())
    except ValueError:  # a closed stream
        return False


def progress_bar(iterable: Iterable[T], desc: str, *, quiet: bool, unit: str = "it") -> Iterable[T]:
    """``iterable`` with a transient progress bar labelled ``desc`` on standard error, or
    ``iterable`` itself when ``quiet`` or standard error is not a terminal."""
    if not shows_progress(quiet):
        return iterable
    from tqdm import tqdm

    return tqdm(iterable, desc=desc, unit=unit, leave=False, file=sys.stderr)
