"""Shared support of the fuzz suite (tests/test_fuzz_*.py): budget, time limit, the contract.

Each reader is fed generated inputs (hypothesis: mutated valid files and structured random
ones). The contract every reader keeps, whatever the input: it returns a result or raises
:class:`render.errors.InputError`; nothing else escapes, it never runs past a time limit and it
never echoes another file's content. The budget is small by default (CI); a deeper run sets
``LAMPCAST_FUZZ=long`` (or runs ``tools/fuzz.py``), and ``LAMPCAST_FUZZ_EXAMPLES=N`` sets the
number of inputs per test directly.

Source of the contract: the project's own rule (README "Inputs", DEVELOPERS.md conventions);
hypothesis documentation for the settings (``max_examples``, ``deadline``, ``derandomize``).
"""

from __future__ import annotations

import contextlib
import os
import re
import signal
import warnings
from collections import Counter
from collections.abc import Callable, Iterator, Sequence
from typing import Any, TypeVar

import pytest
from hypothesis import HealthCheck, settings
from hypothesis import strategies as st

from render.errors import InputError

__all__ = [
    "INPUT_TIME_LIMIT_S",
    "BYTE_MUTATIONS",
    "InputTally",
    "HOSTILE_FILE_REFERENCES",
    "ODD_NUMBER_TEXT",
    "checked_read",
    "delete_line",
    "duplicate_line",
    "flip_byte",
    "fuzz_settings",
    "insert_junk",
    "insert_nul",
    "n_examples",
    "reader_contract",
    "replace_token",
    "spoil_fields",
    "time_limit",
    "truncate",
]

#: A drawing function: ``data.draw`` of a hypothesis ``st.data()`` or the ``draw`` of a composite.
Draw = Callable[[st.SearchStrategy], Any]
Text = TypeVar("Text", str, bytes)

#: Number text a reader of decimal numbers must refuse or read as infinite: spellings of
#: infinity, forms Python's float() or int() accept but a file format does not (digit
#: separators, hexadecimal, a full-width digit), broken numbers and an empty field. Spliced into
#: each fuzz file's own list of hostile numbers.
#: File references a reader must refuse or read without quoting: ``{outside}`` (each fuzz file
#: puts a file out of the reading folder there), devices, the system's password file (plain and
#: by many ``..``) and ``secret.txt``, a file in the folder that is no file of the format.
#: Spliced into each fuzz file's own list of file references.
HOSTILE_FILE_REFERENCES = [
    "{outside}",
    "/dev/zero",
    "/dev/null",
    "/etc/passwd",
    "../" * 40 + "etc/passwd",
    "secret.txt",
]

ODD_NUMBER_TEXT = ["inf", "-inf", "Infinity", "1_000", "0x10", "1e", "+", "--1", "１", ""]

#: A single input may take at most this long (a reader that loops on a hostile count would hang).
INPUT_TIME_LIMIT_S = float(os.environ.get("LAMPCAST_FUZZ_TIME_LIMIT_S", "10"))

_CI_EXAMPLES = 150
_LONG_EXAMPLES = 20_000


def n_examples(default: int = _CI_EXAMPLES) -> int:
    """Inputs per fuzz test: ``LAMPCAST_FUZZ_EXAMPLES``, else the long or the CI budget."""
    explicit = os.environ.get("LAMPCAST_FUZZ_EXAMPLES", "").strip()
    if explicit:
        return max(1, int(explicit))
    return _LONG_EXAMPLES if os.environ.get("LAMPCAST_FUZZ", "").strip() == "long" else default


def fuzz_settings(default: int = _CI_EXAMPLES) -> settings:
    """hypothesis settings for a fuzz test: the budget above, no per-example deadline (the time
    limit is enforced by :func:`time_limit` instead), derandomised in CI so that a run is
    reproducible, randomised in the long mode to explore further."""
    long_mode = os.environ.get("LAMPCAST_FUZZ", "").strip() == "long"
    return settings(
        max_examples=n_examples(default),
        deadline=None,
        derandomize=not long_mode,
        database=None,
        suppress_health_check=[HealthCheck.too_slow, HealthCheck.data_too_large, HealthCheck.filter_too_much],
    )


class InputTookTooLong(AssertionError):
    """A reader ran past :data:`INPUT_TIME_LIMIT_S` on one input."""


@contextlib.contextmanager
def time_limit(seconds: float = INPUT_TIME_LIMIT_S) -> Iterator[None]:
    """Fail with :class:`InputTookTooLong` if the block runs longer than ``seconds`` (SIGALRM,
    main thread only; elsewhere the block runs unguarded)."""

    def _raise(signum, frame):  # noqa: ARG001
        raise InputTookTooLong(f"one input took longer than {seconds} s")

    try:
        previous = signal.signal(signal.SIGALRM, _raise)
    except ValueError:  # not the main thread
        yield
        return
    signal.setitimer(signal.ITIMER_REAL, seconds)
    try:
        yield
    finally:
        signal.setitimer(signal.ITIMER_REAL, 0)
        signal.signal(signal.SIGALRM, previous)


def reader_contract(read: Callable[[], Any], *, forbidden_in_message: tuple[str, ...] = ()) -> Any:
    """Run ``read()`` under the contract: return its result, or None when it raised
    :class:`InputError` whose message names a source and holds none of ``forbidden_in_message``
    (text of another file that must never be echoed). Any other exception propagates and fails
    the test."""
    with time_limit():
        try:
            return read()
        except InputError as err:
            message = str(err)
            assert message.strip(), "an InputError must say what is wrong"
            for text in forbidden_in_message:
                assert text not in message, f"the message echoes another file's content: {message!r}"
            return None


def checked_read(
    read: Callable[[], Any],
    check: Callable[[Any], None],
    *,
    forbidden_in_message: tuple[str, ...] = (),
    numpy_warnings_fail: bool = True,
) -> Any:
    """:func:`reader_contract` on ``read``, then ``check`` on a result (not on None). With
    ``numpy_warnings_fail`` a RuntimeWarning (numpy overflow, 0/0) on the way fails the test."""
    with warnings.catch_warnings():
        if numpy_warnings_fail:
            warnings.simplefilter("error", RuntimeWarning)
        result = reader_contract(read, forbidden_in_message=forbidden_in_message)
        if result is not None:
            check(result)
    return result


class InputTally:
    """How many inputs each generator of a fuzz file fed, and what became of them (the first of
    ``outcomes`` counted by :meth:`read` for a result, the others by :meth:`count`); printed at
    the end of a deeper run (``LAMPCAST_FUZZ`` or ``LAMPCAST_FUZZ_EXAMPLES`` set)."""

    def __init__(self, title: str, outcomes: tuple[str, ...] = ("parsed",)) -> None:
        self.title = title
        self.inputs_read: Counter[str] = Counter()
        self.outcomes: dict[str, Counter[str]] = {word: Counter() for word in outcomes}

    def read(self, generator: str, read: Callable[[], Any], check: Callable[[Any], None], **options: Any) -> Any:
        """:func:`checked_read` of one input fed by ``generator``, counted."""
        self.inputs_read[generator] += 1
        result = checked_read(read, check, **options)
        if result is not None:
            self.count(next(iter(self.outcomes)), generator)
        return result

    def count(self, outcome: str, generator: str) -> None:
        self.outcomes[outcome][generator] += 1

    def report(self) -> None:
        if not (os.environ.get("LAMPCAST_FUZZ") or os.environ.get("LAMPCAST_FUZZ_EXAMPLES")):
            return
        total = sum(self.inputs_read.values())
        parts = ", ".join(
            f"{k} {n} ({', '.join(f'{counts[k]} {word}' for word, counts in self.outcomes.items())})"
            for k, n in sorted(self.inputs_read.items())
        )
        print(f"\n{self.title}: {total} inputs read: {parts}")

    def report_fixture(self) -> Any:
        """A module-scoped autouse fixture that prints the tally after the module's tests (assign
        it to a module-level name of the fuzz file)."""

        def report_inputs_read() -> Iterator[None]:
            yield
            self.report()

        return pytest.fixture(scope="module", autouse=True, name="report_inputs_read")(report_inputs_read)


# --------------------------------------------------------------------------------------------
# Mutations shared by the fuzz files: each draws what it needs and returns the changed input
# --------------------------------------------------------------------------------------------


def flip_byte(data: bytes, draw: Draw) -> bytes:
    """One byte replaced by any byte."""
    if not data:
        return data
    k = draw(st.integers(0, len(data) - 1))
    return data[:k] + bytes([draw(st.integers(0, 255))]) + data[k + 1 :]


def truncate(data: Text, draw: Draw) -> Text:
    """The input cut anywhere (to nothing, or not at all)."""
    return data[: draw(st.integers(0, len(data)))]


def insert_nul(data: Text, draw: Draw) -> Text:
    """A NUL byte (character) inserted anywhere."""
    k = draw(st.integers(0, len(data)))
    return data[:k] + ("\x00" if isinstance(data, str) else b"\x00") + data[k:]


def insert_junk(data: bytes, draw: Draw) -> bytes:
    """Up to 12 random bytes, or the UTF-8 of up to 12 random characters, inserted anywhere."""
    k = draw(st.integers(0, len(data)))
    return data[:k] + draw(st.binary(max_size=12) | st.text(max_size=12).map(str.encode)) + data[k:]


def duplicate_line(lines: Sequence[bytes], draw: Draw, k: int | None = None, most: int = 3) -> bytes:
    """Line ``k`` (drawn when None) repeated 1 to ``most`` more times; the lines joined by LF."""
    if k is None:
        k = draw(st.integers(0, len(lines) - 1))
    return b"\n".join([*lines[: k + 1], *[lines[k]] * draw(st.integers(1, most)), *lines[k + 1 :]])


def delete_line(lines: Sequence[bytes], draw: Draw, k: int | None = None) -> bytes:
    """Line ``k`` (drawn when None) left out; the lines joined by LF."""
    if k is None:
        k = draw(st.integers(0, len(lines) - 1))
    return b"\n".join([*lines[:k], *lines[k + 1 :]])


def replace_token(data: bytes, draw: Draw, token: re.Pattern[bytes], hostile: Sequence[str]) -> bytes:
    """One match of ``token`` replaced by one of ``hostile``, any float's repr or any integer."""
    spans = [m.span() for m in token.finditer(data)]
    if not spans:
        return data
    a, b = spans[draw(st.integers(0, len(spans) - 1))]
    new = draw(st.sampled_from(hostile) | st.floats().map(repr) | st.integers().map(str))
    return data[:a] + new.encode("utf-8") + data[b:]


#: The mutations of a byte file that every fuzz file's ``mutate`` shares, by name.
BYTE_MUTATIONS: dict[str, Callable[[bytes, Draw], bytes]] = {
    "flip": flip_byte,
    "truncate": truncate,
    "duplicate_line": lambda data, draw: duplicate_line(data.split(b"\n"), draw),
    "delete_line": lambda data, draw: delete_line(data.split(b"\n"), draw),
    "nul": insert_nul,
    "insert": insert_junk,
}


def spoil_fields(draw: Draw, fields: list[str], hostile: st.SearchStrategy[str]) -> list[str]:
    """0 to 3 of ``fields`` (the fields or lines of a generated file) replaced by ``hostile``
    values, then now and then (two times in five) fields dropped from the end or a few numbers
    added."""
    for _ in range(draw(st.integers(0, 3))):
        fields[draw(st.integers(0, len(fields) - 1))] = draw(hostile)
    change = draw(st.sampled_from(["none", "none", "none", "drop", "extra"]))
    if change == "drop":
        fields = fields[: -draw(st.integers(1, len(fields)))]
    elif change == "extra":
        fields += draw(st.lists(st.floats(0, 100).map(str), min_size=1, max_size=5))
    return fields
