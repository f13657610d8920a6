"""User-facing errors.

Every mistake in a user's input (a scene file, a lamp CSV, a photometric file, a material) is
reported as an :class:`InputError` holding one or more :class:`Problem` records. Each problem
names the file, the place in it (a line number or a key path such as
``luminaires.rows[1].spacing_m``) and what was expected. The command line prints these and exits
with status 2; it never shows a traceback for a user mistake.

Internal bugs stay ordinary Python exceptions.

References
----------
- Python documentation, :func:`difflib.get_close_matches` (Ratcliff-Obershelp similarity) for
  the did-you-mean suggestions.
"""

from __future__ import annotations

import difflib
from collections.abc import Iterable, Sequence
from dataclasses import dataclass
from pathlib import Path

__all__ = ["InputError", "Problem", "ProblemList", "did_you_mean", "input_error"]


@dataclass(frozen=True)
class Problem:
    """One mistake in one input.

    Parameters
    ----------
    source
        The file (or other named input, e.g. ``"--lamp"``) the mistake is in.
    where
        Line (``"line 12"``) or key path (``"views.kerbside.fov_deg"``); empty if the whole
        input is at fault.
    message
        What is wrong and what was expected.
    """

    source: str
    where: str
    message: str

    def __str__(self) -> str:
        head = str(self.source)
        if self.where:
            head += f": {self.where}"
        return f"{head}: {self.message}"


class InputError(Exception):
    """One or more problems with user input; ``str()`` lists them all, one per line."""

    def __init__(self, problems: Problem | Sequence[Problem]) -> None:
        if isinstance(problems, Problem):
            problems = [problems]
        self.problems: list[Problem] = list(problems)
        if not self.problems:
            raise ValueError("InputError needs at least one Problem")
        super().__init__(str(self))

    def __str__(self) -> str:  # pragma: no cover - trivial
        return "\n".join(str(p) for p in self.problems)


def input_error(source: str | Path, where: str, message: str) -> InputError:
    """Shorthand for an :class:`InputError` with a single :class:`Problem`."""
    return InputError(Problem(str(source), where, message))


class ProblemList:
    """Collects problems so that several mistakes are reported together.

    >>> problems = ProblemList("street.toml")
    >>> problems.add("views.a.fov_deg", "expected a number of degrees in (0, 180)")
    >>> problems.raise_if_any()
    Traceback (most recent call last):
    ...
    render.errors.InputError: street.toml: views.a.fov_deg: expected a number of degrees in (0, 180)
    """

    def __init__(self, source: str | Path) -> None:
        self.source = str(source)
        self.items: list[Problem] = []

    def add(self, where: str, message: str, source: str | Path | None = None) -> None:
        """Record one problem at ``where`` (in ``source``, default the list's own file)."""
        self.items.append(Problem(str(source) if source is not None else self.source, where, message))

    def extend(self, error: InputError) -> None:
        """Record every problem of another :class:`InputError`."""
        self.items.extend(error.problems)

    def __bool__(self) -> bool:
        return bool(self.items)

    def raise_if_any(self) -> None:
        """Raise one :class:`InputError` holding every recorded problem, if there is any."""
        if self.items:
            raise InputError(self.items)


def did_you_mean(word: str, choices: Iterable[str]) -> str:
    """A ``" (did you mean 'x'?)"`` suffix for an unknown name, or ``""`` if nothing is close."""
    close = difflib.get_close_matches(word, list(choices), n=1, cutoff=0.6)
    return f" (did you mean '{close[0]}'?)" if close else ""
