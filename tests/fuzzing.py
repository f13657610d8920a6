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
import signal
from collections.abc import Callable, Iterator
from typing import Any

from hypothesis import HealthCheck, settings

from render.errors import InputError

__all__ = ["INPUT_TIME_LIMIT_S", "fuzz_settings", "n_examples", "reader_contract", "time_limit"]

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
