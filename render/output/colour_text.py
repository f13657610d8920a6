"""Colour analysis as text: what ``lampcast colours`` prints.

The "name it" table's rows come from :func:`render.analysis.naming.name_table` or
:meth:`render.analysis.colours.ColourAnalysis.name_rows`: per object its daylight name, the name
seen under each setup (``None``: not visible) and the setups under which the name changes.
:func:`format_pairs` prints every pair under each setup with CIEDE2000 beside the discrimination
model's multiple of threshold and verdict; :func:`format_confusions` the pairs that become hard
to tell apart. This module only lays the analysis' figures out as plain text in aligned columns.

References
----------
The names are those of :mod:`render.analysis.naming` (Berlin & Kay 1969 basic terms, Centore 2020
prototypes, CAM16-UCS), the verdicts those of :mod:`render.vision.discrimination` (castleCSF,
Ashraf et al. 2024); the layout is our own, no source.
"""

from __future__ import annotations

from collections.abc import Sequence
from typing import TYPE_CHECKING

if TYPE_CHECKING:
    from render.analysis.colours import ColourAnalysis, PairDifference, SetupColours

__all__ = [
    "NONE",
    "format_confusions",
    "format_multiple",
    "format_name_changes",
    "format_name_table",
    "format_pairs",
    "setup_light_level",
]

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
    return _columns(header, body)


def _columns(header: Sequence[str], body: Sequence[Sequence[object]]) -> str:
    """Plain-text columns: the header, a rule, the rows, each column as wide as its widest cell."""
    widths = [max(len(str(c)) for c in col) for col in zip(header, *body)] if body else [len(h) for h in header]
    lines = ["  ".join(str(c).ljust(w) for c, w in zip(header, widths)).rstrip()]
    lines.append("  ".join("-" * w for w in widths))
    lines += ["  ".join(str(c).ljust(w) for c, w in zip(cells, widths)).rstrip() for cells in body]
    return "\n".join(lines)


def format_multiple(pair: PairDifference) -> str:
    """A pair's multiple of threshold in words: ``"2.4"``, ``"< 0.61 (bound)"`` below the
    model's range, ``"-"`` when not judged."""
    if pair.threshold_multiple is not None:
        return f"{pair.threshold_multiple:.3g}"
    if pair.upper_bound is not None:
        return f"< {pair.upper_bound:.2g} (bound)"
    return "-"


def setup_light_level(seen: SetupColours, with_level: bool = True) -> str:
    """Where a setup's pairs were judged: the adaptation luminance (unless ``with_level`` is
    false), whether hue is available there, and any note on the model's range."""
    d = seen.discrimination
    level = "-" if d.adaptation_cd_m2 is None else f"{d.adaptation_cd_m2:.3g} cd/m²"
    hue = {"available": "hue available", "unreliable": "hue not reliable", "none": "no hue (rod vision)"}.get(
        d.hue, d.hue
    )
    return (f"adaptation {level}, {hue}" if with_level else hue) + (f"; {d.note}" if d.note else "")


def format_pairs(result: ColourAnalysis) -> str:
    """ "Every pair": per lighting, each pair of visible objects with ΔE00 in daylight and as
    seen beside the discrimination model's multiple of threshold and verdict (and the note of a
    pair judged below the model's range)."""
    lines = ["Every pair: CIEDE2000 beside the light-level verdict (× threshold; easy ≥ 3, hard 1-3, cannot < 1):"]
    for label, seen in result.setups.items():
        lines.append(f"  {label} ({setup_light_level(seen)}):")
        if not seen.pairs:
            lines.append(f"    {NONE}")
            continue
        # A pair's note is printed unless the lighting's own note already says it.
        notes = [p.note if p.note and not seen.discrimination.note else "" for p in seen.pairs]
        header = ["pair", "ΔE00 daylight", "ΔE00 seen", "× threshold", "verdict", *(["note"] if any(notes) else [])]
        body = [
            (
                f"{p.a} / {p.b}",
                _de(p.daylight_delta_e00),
                _de(p.delta_e00),
                format_multiple(p),
                p.verdict,
                *([note] if any(notes) else []),
            )
            for p, note in zip(seen.pairs, notes)
        ]
        table = _columns(header, body)
        lines += ["    " + line for line in table.splitlines()]
    return "\n".join(lines)


def _de(value: float | None) -> str:
    return "-" if value is None else f"{value:.1f}"


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
    whose verdict is hard, cannot or likely cannot, or ``none`` in words; a lighting judged
    below the model's range says so."""
    from render.analysis.colours import CONFUSED_VERDICTS

    t = result.thresholds
    lines = [
        f"Pairs that become hard to tell apart (at least {t.distinct_in_daylight_delta_e00:g} ΔE00 apart in "
        f"daylight; at night {', '.join(CONFUSED_VERDICTS)} by the light-level model):"
    ]
    for label, seen in result.setups.items():
        note = seen.discrimination.note
        if not seen.confusions:
            lines.append(f"  {label}: {NONE}" + (f" ({note})" if note else ""))
            continue
        lines.append(f"  {label}:" + (f" ({note})" if note else ""))
        for c in seen.confusions:
            lines.append(
                f"    {c.a} / {c.b}: ΔE00 {_de(c.daylight_delta_e00)} in daylight → {_de(c.delta_e00)} at night; "
                f"{format_multiple(c)} × threshold ({c.verdict})"
            )
    return "\n".join(lines)
