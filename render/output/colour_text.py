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

__all__ = ["format_name_table"]


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
