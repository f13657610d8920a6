"""Numbers in the report: one rounding function and its named display rules.

Every number the report shows goes through :func:`format_value` under a rule of :data:`RULES`;
the rule's name is written beside the number (``data-rule``), so anyone can reproduce the shown
text from ``metrics.json``.

References
----------
Significant figures and decimal rounding as in common practice (no source); rounding is
Python's correctly rounded decimal conversion of the binary value. The minus sign is
U+2212 MINUS SIGN of the Unicode Standard.
"""

from __future__ import annotations

import math
from typing import Any

__all__ = ["DASH", "MINUS", "RULES", "format_value"]

#: Shown in place of a number that is not defined or not given.
DASH = "\u2014"
#: Minus sign used for negative numbers (U+2212, not the hyphen).
MINUS = "\u2212"

#: Display rules: name -> (kind, digits). ``sig``: that many significant figures (never
#: exponent notation); ``fixed``: that many decimals; ``signed``: decimals with an explicit
#: sign; ``percent``: the value times 100 with that many decimals (the % sign is in the column
#: heading); ``int``: an integer as it is.
RULES: dict[str, tuple[str, int]] = {
    "sig3": ("sig", 3),
    "fixed0": ("fixed", 0),
    "fixed1": ("fixed", 1),
    "fixed2": ("fixed", 2),
    "signed4": ("signed", 4),
    "percent0": ("percent", 0),
    "percent1": ("percent", 1),
    "int": ("int", 0),
}


def format_value(value: Any, rule: str) -> str:
    """The text shown for ``value`` under display rule ``rule`` (see :data:`RULES`).

    The one rounding function of the report. ``None`` (and NaN/inf) gives :data:`DASH`.
    Negative numbers use U+2212 MINUS SIGN; a value that rounds to zero shows no sign, even
    under ``signed``. Rounding is Python's correctly rounded decimal conversion of the binary
    value (``format(value, ".Nf")`` / ``".Ne"``; ties of the exact binary value go to even).

    >>> format_value(0.012345, "sig3"), format_value(1234.5, "sig3"), format_value(-0.00321, "signed4")
    ('0.0123', '1230', '−0.0032')
    >>> format_value(0.4567, "percent1"), format_value(None, "fixed0")
    ('45.7', '—')
    """
    if rule not in RULES:
        raise ValueError(f"unknown display rule {rule!r}; expected one of {sorted(RULES)}")
    if value is None or isinstance(value, bool):
        return DASH if value is None else str(value)
    kind, digits = RULES[rule]
    if kind == "int":
        if isinstance(value, float) and not value.is_integer():
            raise ValueError(f"display rule 'int' needs an integer, got {value!r}")
        return str(int(value)).replace("-", MINUS)
    value = float(value)
    if not math.isfinite(value):
        return DASH
    if kind == "percent":
        value *= 100.0
    if kind == "sig":
        text = _significant(value, digits)
    else:
        text = f"{value:.{digits}f}"
    negative = text.startswith("-")
    text = text.lstrip("-")
    if float(text) == 0.0:
        negative = False
    sign = MINUS if negative else ("+" if kind == "signed" and float(text) != 0.0 else "")
    return sign + text


def _significant(value: float, digits: int) -> str:
    """``value`` to ``digits`` significant figures in plain decimal notation."""
    if value == 0.0:
        return "0"
    rounded = float(f"{value:.{digits - 1}e}")  # correctly rounded to `digits` figures
    exponent = math.floor(math.log10(abs(rounded)))
    decimals = max(0, digits - 1 - exponent)
    return f"{rounded:.{decimals}f}"
