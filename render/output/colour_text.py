"""Colour analysis as text: the "name it" table that ``lampcast colours`` prints.

The rows come from :func:`render.analysis.naming.name_table` or
:meth:`render.analysis.colours.ColourAnalysis.name_rows`: per object its daylight name, the name
seen under each setup (``None``: not visible) and the setups under which the name changes. This
module only lays them out as plain text in aligned columns.

References
----------
The names are those of :mod:`render.analysis.naming` (Berlin & Kay 1969 basic terms, Centore 2020
prototypes, CAM16-UCS); the layout is our own, no source.
"""

from __future__ import annotations

from collections.abc import Sequence
from typing import TYPE_CHECKING

if TYPE_CHECKING:
    from render.analysis.colours import ColourAnalysis

__all__ = ["NONE", "format_confusions", "format_name_changes", "format_name_table"]

#: What an empty list says, in words.
NONE = "none"


def format_name_table(rows: Sequence[dict]) -> str:
    """Plain-text "name it" table (object, the view it was analysed in when the rows name one,
    daylight, one column per setup; changed names
    marked with *; '-' for not visible)."""
    setups = list(rows[0]["setups"]) if rows else []
    with_view = any(r.get("view") is not None for r in rows)
    header = ["object", *(["view"] if with_view else []), "daylight"] + setups
    body = []
    for r in rows:
        cells = [r["object"], *([r.get("view") or "-"] if with_view else []), r["daylight"] or "-"]
        for s in setups:
            t = r["setups"][s]
            cells.append("-" if t is None else (t + " *" if s in r["changed"] else t))
        body.append(cells)
    widths = [max(len(str(c)) for c in col) for col in zip(header, *body)] if body else [len(h) for h in header]
    lines = ["  ".join(str(c).ljust(w) for c, w in zip(header, widths)).rstrip()]
    lines.append("  ".join("-" * w for w in widths))
    lines += ["  ".join(str(c).ljust(w) for c, w in zip(cells, widths)).rstrip() for cells in body]
    return "\n".join(lines)


def format_name_changes(result: ColourAnalysis) -> str:
    """ "Names that change at night": one column per lighting (the name seen there, * where it
    differs from the daylight name, '-' not visible), only the objects whose name changes under
    some lighting; ``"Names that change at night: none"`` when no name changes."""
    rows = result.name_change_rows()
    if not rows:
        return f"Names that change at night: {NONE}"
    return "Names that change at night:\n" + format_name_table(rows)


def format_confusions(result: ColourAnalysis) -> str:
    """ "Pairs that become hard to tell apart": per lighting the pairs distinct in daylight
    that fall below the threshold, or ``none`` in words."""
    t = result.thresholds
    lines = [
        f"Pairs that become hard to tell apart (at least {t.distinct_in_daylight_delta_e00:g} ΔE00 apart in "
        f"daylight, below {t.hard_delta_e00:g} at night):"
    ]
    for label, seen in result.setups.items():
        if not seen.confusions:
            lines.append(f"  {label}: {NONE}")
            continue
        lines.append(f"  {label}:")
        for c in seen.confusions:
            lines.append(
                f"    {c.a} / {c.b}: ΔE00 {c.daylight_delta_e00:.1f} in daylight → {c.delta_e00:.2f} ({c.level})"
            )
    return "\n".join(lines)
