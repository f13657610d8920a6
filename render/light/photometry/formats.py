"""Photometric file formats recognised from their first lines, for readers' messages and dispatch.

:func:`guess_photometric_format` looks at the start of a text and says which photometric format
it resembles: ``"lm63"`` (an ``IESNA:LM-63``/``IES:LM-63`` edition line or a ``TILT=`` line
near the top), ``"eulumdat"`` (lines 2–7 hold the type indicator 0–3, the symmetry indicator
0–4 and the C-plane and γ counts and spacings of the EULUMDAT layout), ``"xml"`` (a text starting
with ``<``, e.g. an IES TM-33 or other XML luminaire file) or ``"cie-tm14"`` (a first line naming
CIE or CIBSE TM14). It returns ``None`` when nothing matches. The guess only chooses a reader
or a clearer message; the reader still checks every field.

:data:`FORMAT_NAMES` gives the name of each format for messages.

References
----------
- ANSI/IESNA LM-63-2002, IES LM-63-2019: the edition line and ``TILT=`` line **(from memory)**.
- EULUMDAT line layout: see :mod:`.eulumdat`.
- CIBSE TM14 and IES TM-33 are named only to recognise them; lampcast does not read them.
"""

from __future__ import annotations

import re

__all__ = ["FORMAT_NAMES", "guess_photometric_format"]

#: A name of each guessed format, for messages.
FORMAT_NAMES: dict[str, str] = {
    "lm63": "an ANSI/IES LM-63 file (.ies)",
    "eulumdat": "an EULUMDAT file (.ldt)",
    "xml": "an XML file (e.g. IES TM-33 luminaire data), which lampcast does not read",
    "cie-tm14": "a CIE / CIBSE TM14 photometric file, which lampcast does not read",
}

_LINE_END = re.compile(r"\r\n|\r|\n")
_HEAD_CHARS = 8192  # only the start of a text is looked at
_INTEGER = re.compile(r"^\s*[+-]?\d+\s*$")
_NUMBER = re.compile(r"^\s*[+-]?(\d+([.,]\d*)?|[.,]\d+)([eE][+-]?\d+)?\s*$")


def guess_photometric_format(text: str) -> str | None:
    """``"lm63"``, ``"eulumdat"``, ``"xml"``, ``"cie-tm14"`` or ``None`` (see the module notes)."""
    head = text[:_HEAD_CHARS].lstrip("\ufeff")
    lines = _LINE_END.split(head)
    first = next((line.strip() for line in lines if line.strip()), "")
    upper = first.upper().replace(" ", "")
    if upper.startswith(("IESNA:LM-63", "IES:LM-63", "IESNA91")):
        return "lm63"
    if first.startswith("<"):
        return "xml"
    if any(line.strip().upper().replace(" ", "").startswith("TILT=") for line in lines[:200]):
        return "lm63"
    if len(lines) >= 8 and _eulumdat_head(lines):
        return "eulumdat"
    if "TM14" in upper or "TM-14" in upper or upper.startswith("CIE"):
        return "cie-tm14"
    return None


def _eulumdat_head(lines: list[str]) -> bool:
    """Lines 2–7 as in EULUMDAT: Ityp 0–3, Isym 0–4, Mc, Dc, Ng, Dg."""
    ityp, isym, mc, dc, ng, dg = (line.strip() for line in lines[1:7])
    if not all(_INTEGER.match(v) for v in (ityp, isym, mc, ng)):
        return False
    if not all(_NUMBER.match(v) for v in (dc, dg)):
        return False
    return int(ityp) in (0, 1, 2, 3) and int(isym) in (0, 1, 2, 3, 4) and int(mc) >= 1 and int(ng) >= 1
