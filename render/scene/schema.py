"""A small declarative checker for TOML tables.

A *spec* is a mapping from key to :class:`Field`. :func:`check_table` walks one table, fills
defaults, converts values and records every problem (unknown key with a did-you-mean, missing
key, wrong type, out of range, non-finite number) in a :class:`~render.errors.ProblemList` under
its key path, so that all the mistakes in a scene file are reported together.

References
----------
- TOML v1.0.0 (the value types a table can hold), read with Python's :mod:`tomllib`.
- Python documentation, :func:`difflib.get_close_matches` (the did-you-mean suggestions).
"""

from __future__ import annotations

import json
import math
import re
from collections.abc import Callable
from dataclasses import dataclass
from typing import Any

from render.errors import ProblemList, did_you_mean

__all__ = ["Field", "check_table", "check_value", "join", "shown"]

_MISSING = object()


@dataclass(frozen=True)
class Field:
    """One key of a table.

    kind: ``"float"``, ``"int"``, ``"str"``, ``"bool"``, ``"vec2"``, ``"vec3"``, ``"int2"``,
    ``"table"`` (any table, checked by the caller), ``"list"`` (a list of tables, checked by the
    caller), ``"strlist"`` or ``"any"``.
    Numeric bounds: ``min``/``max`` inclusive, ``above`` exclusive lower bound, ``below``
    exclusive upper bound, ``nonzero_min`` the least magnitude of a value that is not 0 (a width
    that may be 0 for none). ``unit`` is used in messages.
    """

    kind: str
    default: Any = _MISSING
    unit: str = ""
    min: float | None = None
    max: float | None = None
    above: float | None = None
    below: float | None = None
    nonzero_min: float | None = None
    choices: tuple | None = None
    help: str = ""

    @property
    def required(self) -> bool:
        """True when the key has no default and must be given."""
        return self.default is _MISSING


def _describe(field: Field) -> str:
    kinds = {
        "float": "a number",
        "int": "a whole number",
        "str": "a text string",
        "bool": "true or false",
        "vec2": "a list of 2 numbers",
        "vec3": "a list of 3 numbers",
        "int2": "a list of 2 whole numbers",
        "table": "a table",
        "list": "a list of tables",
        "strlist": "a list of text strings",
        "any": "a value",
    }
    text = kinds[field.kind]
    if field.unit:
        text += f" in {field.unit}"
    return text


def _number(value) -> bool:
    return isinstance(value, (int, float)) and not isinstance(value, bool)


def shown(value: Any, limit: int = 60) -> str:
    """A value as quoted in a message: an integer of many digits by its length, anything else
    by its ``repr`` cut to ``limit`` characters (a scene value can be megabytes long)."""
    if isinstance(value, int) and not isinstance(value, bool) and abs(value) >= 10**20:
        return f"an integer of {len(str(abs(value)))} digits"
    text = repr(value)
    return text if len(text) <= limit else text[: limit - 1] + "…"


def _as_float(value: int | float, field: Field, where: str, problems: ProblemList) -> float | None:
    """A TOML number as a float; an integer beyond the binary64 range (about 1.8e308) is a
    problem, not an OverflowError."""
    try:
        return float(value)
    except OverflowError:
        unit = f" {field.unit}" if field.unit else ""
        problems.add(where, f"expected a finite number{unit}, got {shown(value)} (too large)")
        return None


def _check_bounds(value: float, field: Field, where: str, problems: ProblemList) -> bool:
    unit = f" {field.unit}" if field.unit else ""
    if not math.isfinite(value):
        problems.add(where, f"expected a finite number{unit}, got {value!r}")
        return False
    # The exclusive bounds first: "more than 0" says more about -30 m than "at least 1 mm".
    if field.above is not None and not value > field.above:
        problems.add(where, f"expected more than {field.above:g}{unit}, got {value:g}")
        return False
    if field.below is not None and not value < field.below:
        problems.add(where, f"expected less than {field.below:g}{unit}, got {value:g}")
        return False
    if field.min is not None and value < field.min:
        problems.add(where, f"expected at least {field.min:g}{unit}, got {value:g}")
        return False
    if field.max is not None and value > field.max:
        problems.add(where, f"expected at most {field.max:g}{unit}, got {value:g}")
        return False
    if field.nonzero_min is not None and 0 < abs(value) < field.nonzero_min:
        problems.add(where, f"expected 0 or at least {field.nonzero_min:g}{unit}, got {value:g}")
        return False
    return True


def _checked_number(value: Any, field: Field, where: str, problems: ProblemList, whole: bool) -> float | int | None:
    """One number of a ``float``/``int``-like field, converted and within the field's bounds."""
    number = _as_float(value, field, where, problems)
    if number is None:
        return None
    if whole and not (math.isfinite(number) and number.is_integer()):
        problems.add(where, f"expected {_describe(Field('int', unit=field.unit))}, got {shown(value)}")
        return None
    if not _check_bounds(number, field, where, problems):
        return None
    return int(value) if whole else number


def check_value(value: Any, field: Field, where: str, problems: ProblemList) -> Any:
    """Convert and check one value; returns the converted value or ``None`` after a problem."""
    kind = field.kind
    if kind == "any":
        return value
    if kind in ("float", "int"):
        if not _number(value):
            problems.add(where, f"expected {_describe(field)}, got {type(value).__name__} {shown(value)}")
            return None
        return _checked_number(value, field, where, problems, whole=kind == "int")
    if kind == "bool":
        if not isinstance(value, bool):
            problems.add(where, f"expected true or false, got {shown(value)}")
            return None
        return value
    if kind == "str":
        if not isinstance(value, str):
            problems.add(where, f"expected a text string, got {shown(value)}")
            return None
        if field.choices is not None and value not in field.choices:
            options = ", ".join(repr(c) for c in field.choices)
            problems.add(where, f"expected one of {options}, got {shown(value)}{did_you_mean(value, field.choices)}")
            return None
        return value
    if kind == "strlist":
        if not isinstance(value, list) or not all(isinstance(v, str) for v in value):
            problems.add(where, f"expected a list of text strings, got {shown(value)}")
            return None
        return list(value)
    if kind in ("vec2", "vec3", "int2"):
        n = 3 if kind == "vec3" else 2
        if not isinstance(value, list) or len(value) != n or not all(_number(v) for v in value):
            problems.add(where, f"expected {_describe(field)}, got {shown(value)}")
            return None
        out = [_checked_number(v, field, f"{where}[{i}]", problems, whole=kind == "int2") for i, v in enumerate(value)]
        return None if any(v is None for v in out) else tuple(out)
    if kind == "table":
        if not isinstance(value, dict):
            problems.add(where, f"expected a table, got {shown(value)}")
            return None
        return value
    if kind == "list":
        if not isinstance(value, list) or not all(isinstance(v, dict) for v in value):
            problems.add(where, f"expected a list of tables ([[...]] entries), got {shown(value)}")
            return None
        return value
    raise ValueError(f"unknown field kind {kind!r}")  # pragma: no cover - programming error


_BARE_KEY = re.compile(r"[A-Za-z0-9_-]{1,60}")


def join(prefix: str, key: str | int) -> str:
    """Key path ``prefix.key`` (or ``prefix[i]`` for list indices). A key that is not a TOML
    bare key (letters, digits, ``_``, ``-``) is shown quoted with its control characters
    escaped, and cut after 60 characters."""
    if isinstance(key, int):
        return f"{prefix}[{key}]"
    if not _BARE_KEY.fullmatch(key):
        key = json.dumps(key if len(key) <= 60 else key[:59] + "…", ensure_ascii=False)
        key = "".join(c if c.isprintable() else c.encode("unicode_escape").decode("ascii") for c in key)
    return f"{prefix}.{key}" if prefix else key


def check_table(
    table: dict[str, Any],
    spec: dict[str, Field],
    where: str,
    problems: ProblemList,
    extra: Callable[[str], bool] | None = None,
) -> dict[str, Any]:
    """Check ``table`` against ``spec``; returns a dict with every spec key (defaults filled,
    ``None`` where a problem was recorded). Keys for which ``extra(key)`` is true are passed
    through unchecked."""
    out: dict[str, Any] = {}
    if not isinstance(table, dict):
        problems.add(where, f"expected a table, got {shown(table)}")
        return {k: (None if f.required else f.default) for k, f in spec.items()}
    for key, value in table.items():
        if key in spec:
            continue
        if extra is not None and extra(key):
            out[key] = value
            continue
        problems.add(join(where, key), f"unknown key{did_you_mean(key, spec)}; expected one of: {', '.join(spec)}")
    for key, field in spec.items():
        path = join(where, key)
        if key in table:
            out[key] = check_value(table[key], field, path, problems)
        elif field.required:
            problems.add(path, f"missing; expected {_describe(field)}" + (f" ({field.help})" if field.help else ""))
            out[key] = None
        else:
            out[key] = field.default
    return out
