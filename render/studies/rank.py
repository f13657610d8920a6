"""Ranking a study's options and finding its Pareto front.

:func:`ranked` orders the rows by the study's objective column (``goal`` ``"min"`` or
``"max"``), rows without a value last, ties by variant and setup order (the table's order).

:func:`pareto_front` marks the rows no other row *dominates*: another row dominates when it is
at least as good on every criterion and better on one. The study's criteria are annual energy
(lower is better), the class margin (higher is better) and, where the colour figures were
computed, the smallest CIEDE2000 between objects distinct in daylight (higher is better). Rows
missing any criterion are not on the front.

References
----------
- The Pareto dominance relation (multi-objective optimisation; textbook definition).
"""

from __future__ import annotations

import math
from collections.abc import Sequence
from typing import Any

__all__ = ["PARETO_CRITERIA", "criteria_present", "pareto_front", "ranked"]

#: (column, goal) of the Pareto front; colour only where the study computed it.
PARETO_CRITERIA: tuple[tuple[str, str], ...] = (
    ("annual_kwh", "min"),
    ("class_margin_min", "max"),
    ("colour_min_delta_e00", "max"),
)


def _number(value: Any) -> float | None:
    if isinstance(value, bool) or not isinstance(value, int | float) or not math.isfinite(value):
        return None
    return float(value)


def ranked(table: dict[str, list[Any]], objective: str, goal: str) -> list[int]:
    """Row indices of ``table`` best first by ``objective`` (module text)."""
    n = len(table.get("key", []))
    values = table.get(objective, [None] * n)
    sign = 1.0 if goal == "min" else -1.0

    def order(i: int) -> tuple[int, float, int]:
        v = _number(values[i])
        return (1, 0.0, i) if v is None else (0, sign * v, i)

    return sorted(range(n), key=order)


def criteria_present(table: dict[str, list[Any]]) -> list[tuple[str, str]]:
    """The Pareto criteria the table has at least one value of."""
    return [(c, g) for c, g in PARETO_CRITERIA if any(_number(v) is not None for v in table.get(c, []))]


def pareto_front(table: dict[str, list[Any]], criteria: Sequence[tuple[str, str]] | None = None) -> list[bool]:
    """Per row, whether it is on the Pareto front of ``criteria`` (default: those present)."""
    crit = list(criteria) if criteria is not None else criteria_present(table)
    n = len(table.get("key", []))
    if not crit:
        return [False] * n
    points: list[tuple[float, ...] | None] = []
    for i in range(n):
        vals = [_number(table[c][i]) for c, _ in crit]
        if any(v is None for v in vals):
            points.append(None)
        else:  # every criterion as "lower is better"
            points.append(tuple(v if g == "min" else -v for v, (_, g) in zip(vals, crit, strict=True)))  # type: ignore[operator]
    front = []
    for i, p in enumerate(points):
        if p is None:
            front.append(False)
            continue
        dominated = any(
            q is not None
            and all(a <= b for a, b in zip(q, p, strict=True))
            and any(a < b for a, b in zip(q, p, strict=True))
            for j, q in enumerate(points)
            if j != i
        )
        front.append(not dominated)
    return front
