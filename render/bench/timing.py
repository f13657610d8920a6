"""Timing for the benchmarks: every figure as min / median / max over runs, never one best run.

The machine is shared, so a single timing says little: each measurement is repeated, the
contenders alternate within a round (a busy moment hurts all of them alike), and ratios are
taken round by round, so their spread shows how far the figure can be trusted.
"""

from __future__ import annotations

import statistics
import time
from collections.abc import Callable
from dataclasses import dataclass
from typing import Any

__all__ = ["Spread", "interleaved", "interleaved_cpu", "ratios"]


@dataclass(frozen=True)
class Spread:
    """Values of one figure over the runs of a benchmark."""

    values: tuple[float, ...]

    @property
    def min(self) -> float:
        return min(self.values)

    @property
    def median(self) -> float:
        return statistics.median(self.values)

    @property
    def max(self) -> float:
        return max(self.values)

    def text(self, scale: float = 1.0, fmt: str = ".3f") -> str:
        """``min / median / max`` of the values times ``scale``."""
        return " / ".join(format(v * scale, fmt) for v in (self.min, self.median, self.max))


def interleaved(fns: dict[str, Callable[[], Any]], repeat: int) -> tuple[dict[str, Spread], dict[str, Any]]:
    """Seconds per call of each function over ``repeat`` rounds, the functions alternating within
    a round; also each function's last result."""
    times: dict[str, list[float]] = {k: [] for k in fns}
    last: dict[str, Any] = {}
    for _ in range(max(1, repeat)):
        for k, fn in fns.items():
            t0 = time.perf_counter()
            last[k] = fn()
            times[k].append(time.perf_counter() - t0)
    return {k: Spread(tuple(v)) for k, v in times.items()}, last


def interleaved_cpu(
    fns: dict[str, Callable[[], Any]], repeat: int
) -> tuple[dict[str, Spread], dict[str, Spread], dict[str, Any]]:
    """As :func:`interleaved`, with the processor seconds of each call as well (every thread of
    this process: on a shared machine the fairer figure, as waiting for a core is not counted);
    returns wall seconds, processor seconds and each function's last result."""
    cpu: dict[str, list[float]] = {k: [] for k in fns}

    def with_cpu(k: str, fn: Callable[[], Any]) -> Callable[[], Any]:
        def run() -> Any:
            t0 = time.process_time()
            out = fn()
            cpu[k].append(time.process_time() - t0)
            return out

        return run

    wall, last = interleaved({k: with_cpu(k, fn) for k, fn in fns.items()}, repeat)
    return wall, {k: Spread(tuple(v)) for k, v in cpu.items()}, last


def ratios(numerator: Spread, denominator: Spread) -> Spread:
    """Round-by-round ratios of two interleaved measurements."""
    return Spread(tuple(n / d for n, d in zip(numerator.values, denominator.values, strict=True)))
