"""Lamp files: a user's lamp spectrum as a CSV of samples or a list of emission lines.

:func:`load_lamp_file` reads two plain-text (UTF-8) formats. In both, blank lines are ignored,
``#`` starts a comment line, and comment lines *before the first data row* of the form
``# key: value`` set the lamp's ``name``, ``description``, ``type`` (one of
:data:`render.colour.lamps.model.LAMP_TYPES`), ``source`` and ``notes`` (may be repeated, one
note each). Other comments are ignored, except that a key that looks like a misspelt known key
is an error. Fields are separated by commas (or by white space in a line without a comma).

1. **Spectrum CSV** (a continuum): rows ``wavelength_nm, relative_power_per_nm``, after an
   optional row of column names. Wavelengths strictly increasing and covering at least
   400-700 nm; powers finite and non-negative. The samples are joined by straight lines, taken
   as zero outside the file's range, and integrated over each 1 nm bin; anything outside
   380-780 nm is not modelled. Example::

       # name: Kerbside LED sample
       # type: phosphor LED
       # source: our own spectroradiometer reading, 2024-05-02
       wavelength_nm, relative_power
       380, 0.001
       385, 0.002
       ...

2. **Lines file**: every data row starts with a keyword::

       line, wavelength_nm, relative_power
       continuum, wavelength_nm, relative_power_per_nm

   ``line`` rows are emission lines of negligible width, in any order, no wavelength twice;
   lines outside 380-780 nm are left out (with a note on the lamp). ``continuum`` rows are
   optional (at least two if any, increasing wavelength) and give a background density in the
   same relative power unit per nm, zero outside their range.

Either way the result is normalised to unit total power over 380-780 nm. The lamp's id is the
file name without its extension, lowercased with hyphens (``Kerbside_LED.csv`` ->
``kerbside-led``); its type defaults to ``other``. A mistake raises
:class:`render.errors.InputError` naming the file and line.

References
----------
- CIE 015:2018 *Colorimetry*, 4th ed.: relative spectral power distributions (the unit of a
  lamp file's powers is relative; only the shape of the spectrum matters).
"""

from __future__ import annotations

import math
import re
from collections.abc import Sequence
from pathlib import Path

from render.colour.lamps.model import LAMP_TYPES, Lamp, LineSpectrum, make_lamp
from render.colour.spectra import WAVELENGTH_MAX_NM, WAVELENGTH_MIN_NM, density_on_grid
from render.errors import ProblemList, did_you_mean, input_error
from render.fileio import read_user_text

__all__ = ["FILE_MIN_COVERAGE_NM", "HEADER_KEYS", "MAX_ROW_PROBLEMS", "load_lamp_file"]

#: A continuum lamp file must cover at least this band, nm.
FILE_MIN_COVERAGE_NM = (400.0, 700.0)
#: The ``# key: value`` header keys of a lamp file.
HEADER_KEYS = ("name", "description", "type", "source", "notes")
#: Row problems reported per file before the rest of the rows are skipped.
MAX_ROW_PROBLEMS = 10
_KEY_LINE = re.compile(r"^#\s*([A-Za-z][A-Za-z_-]*)\s*:\s*(.*?)\s*$")


def _split(line: str) -> list[str]:
    return [f.strip() for f in line.split(",")] if "," in line else line.split()


def _number(text: str) -> float | None:
    try:
        value = float(text)
    except ValueError:
        return None
    return value


def _slug(text: str) -> str:
    slug = re.sub(r"[^a-z0-9]+", "-", text.lower()).strip("-")
    return slug or "lamp"


def load_lamp_file(path: str | Path) -> Lamp:
    """Read a lamp file (spectrum CSV or lines file; see the module docstring).

    Raises
    ------
    InputError
        Naming the file and line: unreadable or empty file, non-numeric or missing fields,
        unsorted or repeated wavelengths, negative or non-finite power, a spectrum not covering
        400-700 nm, no power in 380-780 nm, an unknown lamp type.
    """
    path = Path(path)
    src = str(path)
    text = read_user_text(path, "lamp file", "a UTF-8 lamp file (plain ASCII is fine)")
    n_lines = len(text.splitlines())

    problems = ProblemList(src)
    header: dict[str, str] = {}
    header_line: dict[str, int] = {}
    notes: list[str] = []
    rows: list[tuple[int, list[str]]] = []
    for number, raw in enumerate(text.splitlines(), start=1):
        line = raw.strip()
        if not line:
            continue
        if line.startswith("#"):
            match = _KEY_LINE.match(line)
            if match and not rows:
                key = match.group(1).lower()
                if key in HEADER_KEYS:
                    if key == "notes":
                        notes.append(match.group(2))
                    else:
                        header[key] = match.group(2)
                        header_line[key] = number
                elif did_you_mean(key, HEADER_KEYS):
                    problems.add(
                        f"line {number}",
                        f"unknown header key '{match.group(1)}'{did_you_mean(key, HEADER_KEYS)}; "
                        f"header keys are {', '.join(HEADER_KEYS)}",
                    )
            continue
        rows.append((number, _split(line)))

    canonical_types = {t.lower(): t for t in LAMP_TYPES}
    if "type" in header and header["type"].lower() in canonical_types:
        header["type"] = canonical_types[header["type"].lower()]
    elif "type" in header:
        problems.add(
            f"line {header_line['type']}",
            f"unknown lamp type '{header['type']}'{did_you_mean(header['type'], LAMP_TYPES)}; "
            f"expected one of: {', '.join(LAMP_TYPES)}",
        )
    # An optional row of column names (no numeric field) before the data.
    if rows and all(_number(f) is None for f in rows[0][1]) and rows[0][1][0].lower() not in ("line", "continuum"):
        rows = rows[1:]
    if not rows:
        problems.add(
            f"lines 1-{n_lines}" if n_lines else "",
            "no data rows; expected rows of 'wavelength_nm, relative_power' (or 'line, wavelength_nm, power')",
        )
        problems.raise_if_any()

    is_lines = any(fields[0].lower() in ("line", "continuum") for _, fields in rows)
    if is_lines:
        spectrum, file_notes = _parse_lines_rows(rows, problems)
    else:
        spectrum, file_notes = _parse_spectrum_rows(rows, problems)
    problems.raise_if_any()

    first, last = rows[0][0], rows[-1][0]
    density = spectrum.density() if isinstance(spectrum, LineSpectrum) else spectrum
    if not float(density.sum()) > 0:
        raise input_error(
            src, f"lines {first}-{last}", "no power between 380 and 780 nm; a lamp must emit visible light"
        )
    return make_lamp(
        id=_slug(path.stem),
        name=header.get("name") or path.stem,
        type=header.get("type", "other"),
        description=header.get("description", ""),
        source=header.get("source") or f"user file {path.name}",
        notes=tuple(notes) + tuple(file_notes),
        spectrum=spectrum,
        origin=src,
    )


def _parse_numbers(number: int, fields: list[str], names: Sequence[str], problems: ProblemList) -> list[float] | None:
    if len(fields) != len(names):
        problems.add(f"line {number}", f"expected {len(names)} fields ({', '.join(names)}), found {len(fields)}")
        return None
    values = []
    for name, text in zip(names, fields):
        value = _number(text)
        if value is None:
            problems.add(f"line {number}", f"{name} '{text}' is not a number")
            return None
        if not math.isfinite(value):
            problems.add(f"line {number}", f"{name} must be finite, found '{text}'")
            return None
        values.append(value)
    return values


def _check_power(number: int, what: str, value: float, problems: ProblemList) -> bool:
    if value < 0:
        problems.add(f"line {number}", f"{what} must be non-negative, found {value:g}")
        return False
    return True


def _check_increasing(samples: list[tuple[int, float, float]], what: str, problems: ProblemList) -> None:
    """Report the first row whose wavelength does not increase (later ones usually follow from it)."""
    for (_, w0, _), (n1, w1, _) in zip(samples, samples[1:]):
        if w1 == w0:
            problems.add(
                f"line {n1}",
                f"wavelength {w1:g} nm repeats the previous row; {what} wavelengths must be strictly increasing",
            )
            return
        if w1 < w0:
            problems.add(
                f"line {n1}", f"wavelength {w1:g} nm follows {w0:g} nm; {what} wavelengths must be strictly increasing"
            )
            return


def _too_many(problems: ProblemList, number: int) -> bool:
    if len(problems.items) < MAX_ROW_PROBLEMS:
        return False
    problems.add(f"line {number}", f"more than {MAX_ROW_PROBLEMS} problems; the rest of the file was not checked")
    return True


def _parse_spectrum_rows(rows, problems: ProblemList):
    samples: list[tuple[int, float, float]] = []
    for number, fields in rows:
        if _too_many(problems, number):
            break
        values = _parse_numbers(number, fields, ("wavelength_nm", "relative_power"), problems)
        if values is None:
            continue
        w, p = values
        if w <= 0:
            problems.add(f"line {number}", f"wavelength must be positive, found {w:g} nm")
            continue
        if _check_power(number, "relative power", p, problems):
            samples.append((number, w, p))
    if problems or not samples:
        return None, []
    _check_increasing(samples, "spectrum", problems)
    if problems:
        return None, []
    lo, hi = FILE_MIN_COVERAGE_NM
    if samples[0][1] > lo:
        problems.add(
            f"line {samples[0][0]}",
            f"spectrum starts at {samples[0][1]:g} nm; a lamp spectrum must cover at least {lo:g}-{hi:g} nm",
        )
    if samples[-1][1] < hi:
        problems.add(
            f"line {samples[-1][0]}",
            f"spectrum ends at {samples[-1][1]:g} nm; a lamp spectrum must cover at least {lo:g}-{hi:g} nm",
        )
    if problems:
        return None, []
    w = [s[1] for s in samples]
    p = [s[2] for s in samples]
    notes = []
    if w[0] > WAVELENGTH_MIN_NM or w[-1] < WAVELENGTH_MAX_NM:
        notes.append(f"The file covers {w[0]:g}-{w[-1]:g} nm; the spectrum is taken as zero outside it.")
    return density_on_grid(w, p), notes


def _parse_lines_rows(rows, problems: ProblemList):
    lines: list[tuple[int, float, float]] = []
    continuum: list[tuple[int, float, float]] = []
    for number, fields in rows:
        if _too_many(problems, number):
            break
        kind = fields[0].lower()
        if kind not in ("line", "continuum"):
            problems.add(
                f"line {number}",
                f"row starts with '{fields[0]}'; in a lines file every row starts with 'line' or 'continuum'",
            )
            continue
        names = ("wavelength_nm", "relative_power") if kind == "line" else ("wavelength_nm", "relative_power_per_nm")
        if len(fields) != 3:
            problems.add(f"line {number}", f"expected '{kind}, {names[0]}, {names[1]}', found {len(fields)} fields")
            continue
        values = _parse_numbers(number, fields[1:], names, problems)
        if values is None:
            continue
        w, p = values
        if w <= 0:
            problems.add(f"line {number}", f"wavelength must be positive, found {w:g} nm")
            continue
        if _check_power(number, names[1].replace("_", " "), p, problems):
            (lines if kind == "line" else continuum).append((number, w, p))
    seen: dict[float, int] = {}
    for number, w, _ in lines:
        if w in seen:
            problems.add(f"line {number}", f"a line at {w:g} nm is already given on line {seen[w]}")
        seen.setdefault(w, number)
    if continuum:
        if len(continuum) < 2:
            problems.add(f"line {continuum[0][0]}", "a continuum needs at least two 'continuum' rows")
        _check_increasing(continuum, "continuum", problems)
    if problems:
        return None, []
    notes = []
    outside = [w for _, w, _ in lines if not WAVELENGTH_MIN_NM <= w <= WAVELENGTH_MAX_NM]
    if outside:
        notes.append("Lines outside 380-780 nm left out: " + ", ".join(f"{w:g} nm" for w in outside) + ".")
    spectrum = LineSpectrum(
        [(w, p) for _, w, p in lines],
        ([w for _, w, _ in continuum], [p for _, _, p in continuum]) if continuum else None,
    )
    return spectrum, notes
