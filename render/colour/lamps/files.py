"""Lamp files: a user's lamp spectrum as a CSV of samples or a list of emission lines.

:func:`load_lamp_file` reads two plain-text (UTF-8) formats. In both, blank lines are ignored,
``#`` starts a comment line, and comment lines *before the first data row* of the form
``# key: value`` set the lamp's ``name``, ``description``, ``type`` (one of
:data:`render.colour.lamps.model.LAMP_TYPES`), ``source`` and ``notes`` (may be repeated, one
note each). Other comments are ignored, except that a key that looks like a misspelt known key
is an error (looked for among the header's first 1000 unknown keys). Fields are separated by commas (or by white space -- spaces or tabs -- in a line
without a comma), with a decimal point; a semicolon, or white space between numbers next to a
comma (a decimal comma), is an error naming the separator found. Every number is finite;
wavelengths are positive and at most :data:`render.limits.MAX_TABLE_WAVELENGTH_NM`; a file holds
at most :data:`render.limits.MAX_SPECTRUM_ROWS` data rows.

1. **Spectrum CSV** (a continuum): rows ``wavelength_nm, relative_power_per_nm``, after an
   optional row of column names. Wavelengths strictly increasing and covering at least
   400-700 nm; powers finite and non-negative. The samples are joined by straight lines, taken
   as zero outside the file's range, and integrated over each 1 nm bin; anything outside
   380-780 nm is not modelled. The integral of the samples (trapezoids, in the file's own unit)
   must stay finite in double precision (below about 1.8e308): a row where it overflows is an
   error -- only the shape matters, so such a file is divided by a constant. Example::

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
   same relative power unit per nm, zero outside their range. The running total of the line
   powers and the continuum's integral, in file order, must stay finite.

Either way the result is normalised to unit total power over 380-780 nm (computed on the powers
scaled by a power of two, which is exact, so that no intermediate sum overflows or loses
precision to subnormal numbers). The lamp's id is the
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

import numpy as np

from render.colour.lamps.model import LAMP_TYPES, Lamp, LineSpectrum, make_lamp
from render.colour.spectra import WAVELENGTH_MAX_NM, WAVELENGTH_MIN_NM, density_on_grid
from render.errors import ProblemList, did_you_mean, input_error
from render.fileio import read_user_text
from render.limits import MAX_PROBLEMS_PER_FILE, MAX_SPECTRUM_ROWS, MAX_TABLE_WAVELENGTH_NM, check_count

__all__ = ["FILE_MIN_COVERAGE_NM", "HEADER_KEYS", "load_lamp_file"]

#: A continuum lamp file must cover at least this band, nm.
FILE_MIN_COVERAGE_NM = (400.0, 700.0)
#: The ``# key: value`` header keys of a lamp file.
HEADER_KEYS = ("name", "description", "type", "source", "notes")
# The value is stripped afterwards: a lazy group before ``\s*$`` is quadratic in a run of spaces.
_KEY_LINE = re.compile(r"^#\s*([A-Za-z][A-Za-z_-]*)\s*:(.*)$")
# Keys longer than this are not compared with the header keys for a did-you-mean hint.
_MAX_HINT_KEY_CHARS = 40
# Unknown keys compared with the header keys per file: a written header has a few, and each
# comparison (difflib) costs about 15 µs, too much for a million of them.
_MAX_HINTED_KEYS = 1000
# White space between two numbers inside a comma-separated field: tabs or spaces as separators
# next to decimal commas.
_SPACE_BETWEEN_NUMBERS = re.compile(r"[0-9.]\s+[-+]?[0-9.]")
_EXAMPLE_ROW = "'555, 0.82' or '555<tab>0.82'"


def _split(line: str) -> list[str]:
    return [f.strip() for f in line.split(",")] if "," in line else line.split()


def _number(text: str) -> float | None:
    try:
        value = float(text)
    except ValueError:
        return None
    return value


def _shown(text: str, limit: int = 40) -> str:
    """A field of the file as quoted in a message: control characters escaped, long text cut."""
    cut, text = len(text) > limit, text[:limit]
    if not text.isprintable():
        text = text.encode("unicode_escape").decode("ascii")[:limit]
    return text + "…" if cut else text


def _separator_problem(line: str) -> str | None:
    """What is wrong with the separators of a data row, or None."""
    if ";" in line:
        decimal = " (the commas look like decimal commas)" if "," in line else ""
        return (
            f"fields are separated by ';' (semicolons){decimal}; a lamp file separates fields by "
            f"commas, or by spaces or tabs, and writes numbers with a decimal point, e.g. {_EXAMPLE_ROW}"
        )
    if "," in line and any(_SPACE_BETWEEN_NUMBERS.search(f.strip()) for f in line.split(",")):
        what = "tabs" if "\t" in line else "spaces"
        return (
            f"fields are separated by {what} and the commas look like decimal commas; write numbers "
            f"with a decimal point, e.g. {_EXAMPLE_ROW}"
        )
    return None


def _slug(text: str) -> str:
    slug = re.sub(r"[^a-z0-9]+", "-", text.lower()).strip("-")
    return slug or "lamp"


def load_lamp_file(path: str | Path) -> Lamp:
    """Read a lamp file (spectrum CSV or lines file; see the module docstring).

    Raises
    ------
    InputError
        Naming the file and line: unreadable or empty file, non-numeric or missing fields, a
        semicolon or decimal-comma separator, too many rows, unsorted or repeated wavelengths,
        a wavelength out of range, negative or non-finite power, an integral that overflows, a
        spectrum not covering 400-700 nm, no power in 380-780 nm, an unknown lamp type.
    """
    path = Path(path)
    src = str(path)
    text = read_user_text(path, "lamp file", "a UTF-8 lamp file (plain ASCII is fine)")
    lines = text.splitlines()
    n_lines = len(lines)

    problems = ProblemList(src)
    header: dict[str, str] = {}
    header_line: dict[str, int] = {}
    notes: list[str] = []
    data: list[tuple[int, str]] = []
    hinted = 0  # unknown keys compared with the header keys so far
    for number, raw in enumerate(lines, start=1):
        line = raw.strip()
        if not line:
            continue
        if line.startswith("#"):
            match = None if data else _KEY_LINE.match(line)
            if match:
                key, value = match.group(1).lower(), match.group(2).strip()
                if key in HEADER_KEYS:
                    if key == "notes":
                        notes.append(value)
                    else:
                        header[key] = value
                        header_line[key] = number
                elif len(key) <= _MAX_HINT_KEY_CHARS and hinted < _MAX_HINTED_KEYS:
                    hinted += 1
                    hint = did_you_mean(key, HEADER_KEYS)
                    if hint and _too_many(problems, number):
                        problems.raise_if_any()
                    if hint:
                        problems.add(
                            f"line {number}",
                            f"unknown header key '{match.group(1)}'{hint}; header keys are {', '.join(HEADER_KEYS)}",
                        )
            continue
        data.append((number, line))

    canonical_types = {t.lower(): t for t in LAMP_TYPES}
    if "type" in header and header["type"].lower() in canonical_types:
        header["type"] = canonical_types[header["type"].lower()]
    elif "type" in header:
        hint = did_you_mean(header["type"], LAMP_TYPES) if len(header["type"]) <= _MAX_HINT_KEY_CHARS else ""
        problems.add(
            f"line {header_line['type']}",
            f"unknown lamp type '{_shown(header['type'])}'{hint}; expected one of: {', '.join(LAMP_TYPES)}",
        )
    if data:
        # Counted before the rows are split, so a huge file is refused before it is held twice.
        check_count(len(data), MAX_SPECTRUM_ROWS, src, f"lines {data[0][0]}-{data[-1][0]}", "the number of data rows")
    for number, line in data:
        wrong = _separator_problem(line)
        if wrong:  # one message for the file: every row is written the same way
            problems.add(f"line {number}", wrong)
            problems.raise_if_any()
    rows = [(number, _split(line)) for number, line in data]
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
    lamp = make_lamp(
        id=_slug(path.stem),
        name=header.get("name") or path.stem,
        type=header.get("type", "other"),
        description=header.get("description", ""),
        source=header.get("source") or f"user file {path.name}",
        notes=tuple(notes) + tuple(file_notes),
        spectrum=spectrum,
        origin=src,
    )
    # The normalised spectrum, checked after every scaling: finite and non-negative.
    if not (np.all(np.isfinite(lamp.spd)) and float(lamp.spd.min()) >= 0.0):
        raise input_error(
            src,
            f"lines {first}-{last}",
            "the spectrum does not normalise to finite, non-negative values; expected relative powers of ordinary size",
        )
    return lamp


_FINITE = "a finite number"


def _parse_numbers(number: int, fields: list[str], names: Sequence[str], problems: ProblemList) -> list[float] | None:
    if len(fields) != len(names):
        problems.add(f"line {number}", f"expected {len(names)} fields ({', '.join(names)}), found {len(fields)}")
        return None
    values = []
    for name, text in zip(names, fields):
        value = _number(text)
        if value is None:
            problems.add(f"line {number}", f"{name} '{_shown(text)}' is not a number")
            return None
        if math.isnan(value) or (math.isinf(value) and "inf" in text.lower()):
            problems.add(f"line {number}", f"{name} must be finite, found '{_shown(text)}'; expected {_FINITE}")
            return None
        if math.isinf(value):
            problems.add(
                f"line {number}",
                f"{name} '{_shown(text)}' is beyond the range of double precision (about ±1.8e308); expected {_FINITE}",
            )
            return None
        values.append(value)
    return values


def _check_wavelength(number: int, w: float, problems: ProblemList) -> bool:
    if w <= 0:
        problems.add(f"line {number}", f"wavelength must be positive, found {w:g} nm")
        return False
    if w > MAX_TABLE_WAVELENGTH_NM:
        problems.add(
            f"line {number}",
            f"wavelength {w:g} nm is beyond {MAX_TABLE_WAVELENGTH_NM:,.0f} nm; expected a wavelength in nm "
            f"between 0 and {MAX_TABLE_WAVELENGTH_NM:,.0f}",
        )
        return False
    return True


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
    if len(problems.items) < MAX_PROBLEMS_PER_FILE:
        return False
    problems.add(f"line {number}", f"more than {MAX_PROBLEMS_PER_FILE} problems; the rest of the file was not checked")
    return True


_OVERFLOW_HINT = (
    "expected relative powers whose integral stays below about 1.8e308 (only the shape of a lamp "
    "spectrum matters: divide the powers by a constant)"
)


def _trapezoid_overflow(samples: list[tuple[int, float, float]], total: float = 0.0) -> tuple[int, float] | None:
    """The first sample at which the running trapezoid integral (the arithmetic of the gridding,
    ``0.5 * (p0 + p1) * (w1 - w0)``) stops being finite, as ``(line, power)``; or None."""
    for (_, w0, p0), (n1, w1, p1) in zip(samples, samples[1:]):
        total += 0.5 * (p0 + p1) * (w1 - w0)  # Python floats overflow to inf, without an exception
        if not math.isfinite(total):
            return n1, p1
    return None


def _scaled(powers: Sequence[float], peak: float) -> list[float]:
    """``powers`` times ``2**-e``, with ``peak * 2**-e`` in [0.5, 1): exact (a power of two),
    it keeps every intermediate sum of the gridding finite and lifts subnormal powers to normal
    numbers."""
    exponent = math.frexp(peak)[1] if peak > 0 else 0
    return [math.ldexp(p, -exponent) for p in powers]


def _parse_spectrum_rows(rows, problems: ProblemList):
    samples: list[tuple[int, float, float]] = []
    for number, fields in rows:
        if _too_many(problems, number):
            break
        values = _parse_numbers(number, fields, ("wavelength_nm", "relative_power"), problems)
        if values is None:
            continue
        w, p = values
        if _check_wavelength(number, w, problems) and _check_power(number, "relative power", p, problems):
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
    overflow = _trapezoid_overflow(samples)
    if overflow:
        number, p = overflow
        problems.add(
            f"line {number}",
            f"the integral of the spectrum overflows at this row (relative power {p:g}); {_OVERFLOW_HINT}",
        )
        return None, []
    w = [s[1] for s in samples]
    p = _scaled([s[2] for s in samples], max(s[2] for s in samples))
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
                f"row starts with '{_shown(fields[0])}'; in a lines file every row starts with 'line' or 'continuum'",
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
        if _check_wavelength(number, w, problems) and _check_power(number, names[1].replace("_", " "), p, problems):
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
    overflow = _lines_overflow(lines, continuum)
    if overflow:
        number, p = overflow
        problems.add(
            f"line {number}",
            f"the total of the line powers and the continuum's integral overflows at this row (power {p:g}); "
            f"{_OVERFLOW_HINT}",
        )
        return None, []
    notes = []
    outside = [w for _, w, _ in lines if not WAVELENGTH_MIN_NM <= w <= WAVELENGTH_MAX_NM]
    if outside:
        shown = ", ".join(f"{w:g} nm" for w in outside[:20]) + (
            f" and {len(outside) - 20} more" if len(outside) > 20 else ""
        )
        notes.append("Lines outside 380-780 nm left out: " + shown + ".")
    peak = max(p for _, _, p in lines + continuum)
    line_powers, continuum_powers = _scaled([p for _, _, p in lines], peak), _scaled([p for _, _, p in continuum], peak)
    spectrum = LineSpectrum(
        [(w, p) for (_, w, _), p in zip(lines, line_powers)],
        ([w for _, w, _ in continuum], continuum_powers) if continuum else None,
    )
    return spectrum, notes


def _lines_overflow(
    lines: list[tuple[int, float, float]], continuum: list[tuple[int, float, float]]
) -> tuple[int, float] | None:
    """The first row, in file order, at which the running total of line powers and continuum
    trapezoids stops being finite, as ``(line, power)``; or None."""
    # Each row's contribution: a line its power, a continuum row the trapezoid up to it.
    parts = [(number, p, p) for number, _, p in lines]
    parts += [(n1, p1, 0.5 * (p0 + p1) * (w1 - w0)) for (_, w0, p0), (n1, w1, p1) in zip(continuum, continuum[1:])]
    total = 0.0
    for number, p, part in sorted(parts):
        total += part  # Python floats overflow to inf, without an exception
        if not math.isfinite(total):
            return number, p
    return None
