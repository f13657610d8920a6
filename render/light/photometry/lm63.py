"""ANSI/IES LM-63 reader: the one place that parses LM-63 photometric text.

:func:`read_lm63` reads the ANSI/IES LM-63 "standard file format for the electronic transfer of
photometric data" in its 1986, 1991, 1995, 2002 and 2019 forms and returns a
:class:`~render.light.photometry.model.Photometry`: an absolute luminous intensity table in
candela over the full C-γ sphere of directions (conventions in :mod:`.model`).

File layout
-----------
Field order the same in every edition, **from memory** where not noted:

1. the edition line ``IESNA:LM-63-1995`` / ``IESNA:LM-63-2002`` / ``IES:LM-63-2019``
   (``IESNA91`` for 1991; none in the 1986 form, whose header is free text);
2. keyword lines ``[KEY] value`` (``[TEST]``, ``[MANUFAC]``, ``[LUMCAT]``, ``[LUMINAIRE]``,
   ``[LAMP]``, ``[ISSUEDATE]``..., user keys ``[_NAME]``; ``[MORE]`` continues the previous key);
3. ``TILT=NONE``, ``TILT=INCLUDE`` (tilt data follow inline) or ``TILT=<file>`` (a tilt file
   beside the photometric file); tilt data are: lamp-to-luminaire geometry (1, 2 or 3), number
   of tilt angles, the angles, the multiplying factors;
4. number of lamps, lumens per lamp (-1 = absolute photometry), candela multiplier, number of
   vertical angles, number of horizontal angles, photometric type (1 = C, 2 = B, 3 = A), units
   type (1 = feet, 2 = metres), luminous opening width, length, height;
5. ballast factor, a second factor, input watts. The second factor is the *ballast-lamp
   photometric factor* in LM-63-1986/-1991; LM-63-1995 and -2002 keep the field as "future use"
   set to 1 (Ashdown 1998); LM-63-2019 reuses it as the *file generation type* code (e.g.
   1.00001) **(from memory)**. Candela values are multiplied by it for every edition before 2019
   (harmless when it is 1) and not for 2019;
6. the vertical angles, the horizontal angles, then the candela values, one block of
   ``n_vertical`` values per horizontal angle.

Values are separated by commas and/or white space and may wrap across lines anywhere. Every
value keeps its line number so that a mistake is reported as ``file: line N: ...``
(:class:`render.errors.InputError`).

Hostile and broken input
------------------------
Whatever a file holds, the reader returns a :class:`Photometry` whose numbers are all finite or
raises :class:`~render.errors.InputError` naming the file and the line:

* the photometric file is read with :func:`render.fileio.read_user_bytes` (a regular file, at
  most the "photometric file" size in :data:`render.limits.FILE_SIZE_LIMITS_BYTES`);
* counts are checked against :data:`render.limits.MAX_LM63_ANGLES` and
  :data:`~render.limits.MAX_LM63_TILT_ANGLES` and against the number of values actually in the
  file before any array of their size is made;
* candela values are checked after the candela multiplier and the ballast factors: each must be
  finite and at most :data:`LARGEST_INTENSITY_CD` (also times the largest tilt factor), so that
  the flux and every scaling stay finite (IEEE 754 binary64). Candela values and tilt factors
  must be ≥ 0 (zero is allowed), the multiplier and the ballast factors > 0: LM-63 defines
  them as intensities and multiplying factors and gives negative values no meaning
  **(from memory)**.

Tilt files and paths
--------------------
``TILT=<file>`` names a tilt file relative to the photometric file's folder (for
:func:`parse_lm63`, ``base_dir``). **By default absolute paths and paths outside that folder
(``../``, symbolic links) are allowed.** With ``allowed_root`` (the scene loader passes it for
``--strict-paths``) the photometric file and its tilt file must resolve, symbolic links
followed, inside that folder. A tilt file is read like any user file, as a "tilt file" (regular,
size-capped); a file name with a NUL byte is refused. Since ``TILT=`` may point at any file,
messages about a tilt file never quote its content: they say what was expected and at which
line of the tilt file, and which line of which photometric file named it.

Symmetry (type C)
-----------------
Vertical angles γ run 0–90 (downward only), 90–180 (upward only) or 0–180; the missing
hemisphere has zero intensity. Horizontal angles C encode the lateral symmetry: a single 0
(rotationally symmetric), 0–90 (symmetric in each quadrant), 0–180 (bilateral about the
C 0–180 plane), 90–270 (bilateral about the C 90–270 plane, allowed for type C since
LM-63-1995) and 0–x with 180 < x ≤ 360 (no symmetry). The table is expanded to a full C grid
0..360 by mirroring, so that bilinear interpolation is periodic in C.

Type B
------
Type B angles are placed in the luminaire frame as :mod:`.model` describes. Horizontal angles
0–90 mean mirror symmetry in H, vertical angles 0–90 mirror symmetry in V (an assumption: the
standard only gives the ranges). The table is resampled on load to a regular C-γ grid (1° or the
file's finest step, not finer than 0.25°) covering the front hemisphere γ ≤ 90°; behind the
floodlight the intensity is zero. Type A photometry is refused with a clear message.

References
----------
- ANSI/IESNA LM-63-1995 and LM-63-2002, IES LM-63-2019, "Standard file format for the electronic
  transfer of photometric data" **(from memory)**.
- I. Ashdown, "Parsing the IESNA LM-63 photometric data file" (1998): the 1986/1991 ballast-lamp
  photometric factor and its "future use" successor.
- IEEE 754-2019, "Standard for floating-point arithmetic": the largest finite binary64 number.
"""

from __future__ import annotations

import itertools
import math
import os
import re
from collections.abc import Iterator
from pathlib import Path

import numpy as np

from render.errors import InputError, input_error
from render.fileio import is_inside, read_user_bytes
from render.light.photometry.formats import FORMAT_NAMES, guess_photometric_format
from render.light.photometry.model import (
    ANGLE_TOL_DEG,
    Photometry,
    TiltData,
    c_gamma_to_type_b,
    frozen_array,
)
from render.limits import MAX_LM63_ANGLES, MAX_LM63_TILT_ANGLES, check_count

__all__ = ["FEET_TO_M", "LARGEST_INTENSITY_CD", "parse_lm63", "read_lm63"]

#: One foot in metres (international foot).
FEET_TO_M = 0.3048

#: The largest intensity a table may hold, cd: its flux bound 4π·I (lm) must stay a finite
#: double (IEEE 754 binary64, largest about 1.8e308), so that flux, scaling and tilt stay finite.
LARGEST_INTENSITY_CD = float(np.finfo(np.float64).max) / (4.0 * math.pi)

_EDITION_LINES = {
    "IESNA:LM-63-1995": "LM-63-1995",
    "IESNA:LM-63-2002": "LM-63-2002",
    "IES:LM-63-2019": "LM-63-2019",
    "IESNA91": "LM-63-1991",
    "IESNA:LM-63-1991": "LM-63-1991",
    "IESNA:LM-63-1986": "LM-63-1986",
}


# --------------------------------------------------------------------------------------------
# Lines and tokens with line numbers
# --------------------------------------------------------------------------------------------

_LINE_END = re.compile(r"\r\n|\r|\n")
_KEYWORD = re.compile(r"^\s*\[([^\]]*)\]\s?(.*)$")

# Value separators: a comma or any character str.isspace() accepts (all below U+3001), the
# same set str.split() splits on, so that the vectorised tokeniser and the bulk conversion agree.
_SEPARATOR_TABLE = np.array([chr(c).isspace() or c == ord(",") for c in range(0x3001)], dtype=bool)
_CHUNK = 65_536  # values converted per bulk step (bounds the temporary list of strings)


def _lines(text: str) -> Iterator[tuple[int, str, int]]:
    """(line number from 1, line, offset just past its end) for each line, one at a time; lines
    end at CR LF, CR or LF, and a final line break does not start another line."""
    pos, n, number = 0, len(text), 0
    while pos < n:
        number += 1
        m = _LINE_END.search(text, pos)
        if m is None:
            yield number, text[pos:], n
            return
        yield number, text[pos : m.start()], m.end()
        pos = m.end()


def _shown(text: str, limit: int = 40) -> str:
    """``text`` quoted for a message: at most ``limit`` characters, control characters escaped."""
    short = text if len(text) <= limit else text[:limit] + "…"
    safe = "".join(c if c.isprintable() else c.encode("unicode_escape").decode("ascii") for c in short)
    return f"'{safe}'"


class _Tokens:
    """The numeric part of a file: values separated by commas and/or white space, each with its
    line number, consumed in order.

    The text is split once, vectorised (token start, end and line as integer arrays: a few
    bytes per character, no Python object per value); values are converted to floats only when
    read. With ``echo`` False (a tilt file, which ``TILT=`` may point anywhere) messages say
    what was expected and where, never what the file holds; ``context`` is added to every
    message (e.g. which file named this one).
    """

    def __init__(self, text: str, first_line: int, source: str, *, echo: bool = True, context: str = ""):
        self.text = text
        self.source = source
        self.echo = echo
        self.context = context
        codes = np.frombuffer(text.encode("utf-32-le", "surrogatepass"), dtype="<u4")
        if codes.size == 0:
            codes = np.array([32], dtype="<u4")  # one separator: no values
        sep = np.zeros(codes.size, dtype=bool)
        low = codes < _SEPARATOR_TABLE.size
        sep[low] = _SEPARATOR_TABLE[codes[low]]
        word = ~sep
        index = np.int32 if codes.size < 2**31 - 1 else np.int64
        self.starts = np.flatnonzero(word & np.concatenate(([True], sep[:-1]))).astype(index)
        self.ends = (np.flatnonzero(word & np.concatenate((sep[1:], [True]))) + 1).astype(index)
        newline = (codes == 10) | ((codes == 13) & np.concatenate((codes[1:] != 10, [True])))
        self.lines = (first_line + np.searchsorted(np.flatnonzero(newline), self.starts)).astype(index)
        self.pos = 0
        # Where "the file ends": the line of the last value (or, with none, the line before).
        self.last_line = int(self.lines[-1]) if self.lines.size else max(first_line - 1, 1)

    def error(self, line: int, message: str) -> InputError:
        return input_error(self.source, f"line {line}", message + self.context)

    def found(self, text: str) -> str:
        """``", found '...'"`` when the file's content may be quoted, else nothing."""
        return f", found {_shown(text)}" if self.echo else ""

    def remaining(self) -> int:
        return int(self.starts.size) - self.pos

    def line_of(self, index: int) -> int:
        return int(self.lines[index])

    def _word(self, index: int) -> str:
        return self.text[int(self.starts[index]) : int(self.ends[index])]

    def number(self, what: str) -> tuple[float, int]:
        if self.pos >= self.starts.size:
            raise self.error(self.last_line, f"the file ends before the {what}; the data are truncated")
        text, line = self._word(self.pos), self.line_of(self.pos)
        self.pos += 1
        try:
            value = float(text)
        except ValueError:
            raise self.error(line, f"expected the {what} (a number){self.found(text)}") from None
        if not math.isfinite(value):
            raise self.error(line, f"expected the {what} (a finite number){self.found(text)}")
        return value, line

    def integer(self, what: str) -> tuple[int, int]:
        value, line = self.number(what)
        if abs(value - round(value)) > 1e-9:
            raise self.error(line, f"expected the {what} (a whole number){self.found(f'{value:g}')}")
        return int(round(value)), line

    def count(self, noun: str, minimum: int, limit: int) -> tuple[int, int]:
        """A count of ``noun`` between ``minimum`` and ``limit`` (render.limits), checked before
        anything of that size exists."""
        value, line = self.number(f"number of {noun}")
        if abs(value - round(value)) > 1e-9:
            raise self.error(line, f"expected the number of {noun} (a whole number){self.found(f'{value:g}')}")
        if value < minimum:
            raise self.error(line, f"expected at least {minimum} {noun}{self.found(f'{value:g}')}")
        if value > limit:
            if not self.echo:
                raise self.error(line, f"the number of {noun} is more than lampcast allows ({limit:,})")
            try:
                check_count(value, limit, self.source, f"line {line}", f"the number of {noun}")
            except InputError as err:
                raise self.error(line, err.problems[0].message) from None
        return int(round(value)), line

    def require(self, needed: int, count_lines: str, what: str) -> None:
        """An error unless ``needed`` values remain (checked before they are allocated)."""
        have = self.remaining()
        if needed > have:
            raise self.error(
                self.last_line,
                f"the file ends after {have:,} of the {needed:,} values that the count(s) on line "
                f"{count_lines} call for ({what}); the data are truncated or a count is wrong",
            )

    def numbers(self, n: int, what: str) -> tuple[np.ndarray, np.ndarray]:
        """The next ``n`` values (finite floats) and their line numbers."""
        if n > self.remaining():
            raise self.error(
                self.last_line, f"the file ends after {self.remaining()} of the {n} {what}; the data are truncated"
            )
        values = np.empty(n, dtype=np.float64)
        first = self.pos
        for a in range(0, n, _CHUNK):
            b = min(a + _CHUNK, n)
            lo, hi = first + a, first + b
            words = self.text[int(self.starts[lo]) : int(self.ends[hi - 1])].replace(",", " ").split()
            try:
                values[a:b] = np.fromiter(map(float, words), dtype=np.float64, count=b - a)
            except ValueError:
                for k in range(lo, hi):
                    try:
                        float(self._word(k))
                    except ValueError:
                        raise self.error(
                            self.line_of(k),
                            f"expected the {what} (value {k - first + 1} of {n}, a number){self.found(self._word(k))}",
                        ) from None
                raise  # pragma: no cover - the tokeniser and str.split() agree on separators
        bad = np.flatnonzero(~np.isfinite(values))
        if bad.size:
            k = first + int(bad[0])
            raise self.error(
                self.line_of(k),
                f"expected the {what} (value {k - first + 1} of {n}, a finite number){self.found(self._word(k))}",
            )
        self.pos += n
        return values, self.lines[first : first + n].astype(np.int64)


def _decode(data: bytes) -> str:
    try:
        return data.decode("utf-8-sig")
    except UnicodeDecodeError:
        # Many LM-63 files carry a stray '°' or '©' in a legacy 8-bit code page.
        return data.decode("cp1252", errors="replace")


def require_inside(path: Path, allowed_root: str | os.PathLike | None) -> None:
    """With strict paths (``allowed_root`` set), an :class:`InputError` unless the photometric
    file ``path`` lies inside that folder once symbolic links are followed."""
    if allowed_root is not None and not is_inside(path, allowed_root):
        raise input_error(
            path,
            "",
            f"the photometric file is outside {Path(allowed_root).resolve()}; with strict paths "
            "only files inside that folder are read",
        )


# --------------------------------------------------------------------------------------------
# Parsing
# --------------------------------------------------------------------------------------------


def read_lm63(path: str | os.PathLike, *, allowed_root: str | os.PathLike | None = None) -> Photometry:
    """Read an LM-63 photometric file (see the module notes for the format).

    A ``TILT=<file>`` tilt file is looked up relative to the photometric file's folder. With
    ``allowed_root`` (strict paths) the photometric file and its tilt file must both lie inside
    that folder once symbolic links are followed.

    Raises
    ------
    InputError
        If the file cannot be read or is malformed (names the file and line).
    """
    path = Path(path)
    require_inside(path, allowed_root)
    return parse_lm63(
        _decode(read_user_bytes(path, "photometric file")),
        source=str(path),
        base_dir=path.parent,
        allowed_root=allowed_root,
    )


def parse_lm63(
    text: str,
    source: str = "<lm63 text>",
    base_dir: str | os.PathLike | None = None,
    *,
    allowed_root: str | os.PathLike | None = None,
) -> Photometry:
    """Parse LM-63 text; ``source`` names the input in error messages, ``base_dir`` is where a
    relative ``TILT=<file>`` is looked for (default: the current folder) and ``allowed_root``,
    when given, the folder a tilt file must lie in (strict paths)."""
    lines = _lines(text)
    first = next((item for item in lines if item[1].strip()), None)
    if first is None:
        raise input_error(source, "", "the file is empty; expected LM-63 photometric data")

    # --- edition line -------------------------------------------------------------------------
    line_no, head, _ = first
    key = head.strip().upper().replace(" ", "")
    edition = _EDITION_LINES.get(key)
    header: Iterator[tuple[int, str, int]] = lines
    if edition is None:
        if key.startswith(("IESNA:LM-63", "IES:LM-63")):
            raise input_error(
                source,
                f"line {line_no}",
                f"unknown LM-63 edition {_shown(head.strip())}; expected one of "
                "IESNA:LM-63-1995, IESNA:LM-63-2002, IES:LM-63-2019",
            )
        edition = "LM-63-1986"  # no edition line: the 1986 form, header lines are free text
        header = itertools.chain([first], lines)

    # --- keywords up to TILT= (read line by line: the data after it may be large) ------------
    keywords: dict[str, list[str]] = {}  # [MORE] lines collected, joined once at the end
    labels: list[str] = []
    last_key: str | None = None
    tilt_line_no: int | None = None
    tilt_value = ""
    data_start = len(text)
    for line_no, raw, end in header:
        stripped = raw.strip()
        if stripped.upper().replace(" ", "").startswith("TILT="):
            tilt_line_no = line_no
            tilt_value = stripped.split("=", 1)[1].strip()
            data_start = end
            break
        m = _KEYWORD.match(raw)
        if m:
            word = m.group(1).strip().upper()
            value = m.group(2).rstrip()
            if word == "MORE" and last_key is not None:
                keywords[last_key].append(value)
            else:
                keywords.setdefault(word, []).append(value)
                last_key = word
        elif stripped:
            labels.append(stripped)
    if tilt_line_no is None:
        guess = guess_photometric_format(text)
        if guess is not None and guess != "lm63":
            raise input_error(
                source,
                "line 1",
                f"this looks like {FORMAT_NAMES[guess]}, not an LM-63 file: it has no TILT= line"
                + ("; give it the extension .ldt" if guess == "eulumdat" else ""),
            )
        raise input_error(
            source,
            f"line {line_no}",
            "no TILT= line found; expected 'TILT=NONE', 'TILT=INCLUDE' or 'TILT=<file>' after the keyword lines",
        )
    joined = {word: "\n".join(parts) for word, parts in keywords.items()}

    tokens = _Tokens(text[data_start:], tilt_line_no + 1, source)

    # --- tilt ---------------------------------------------------------------------------------
    tilt: TiltData | None = None
    upper = tilt_value.upper()
    if upper == "NONE":
        tilt = None
    elif upper == "INCLUDE":
        tilt = _parse_tilt(tokens, "INCLUDE")
    else:
        tilt = _read_tilt_file(tilt_value, source, tilt_line_no, base_dir, allowed_root)

    # --- the two parameter lines ------------------------------------------------------------
    err = tokens.error
    lamp_count, ln = tokens.integer("number of lamps")
    if lamp_count < 1:
        raise err(ln, f"expected a number of lamps of at least 1, found {lamp_count}")
    lumens_per_lamp, ln = tokens.number("lumens per lamp")
    if abs(lumens_per_lamp + 1.0) < 1e-9:
        lumens_per_lamp = -1.0
    elif lumens_per_lamp <= 0:
        raise err(ln, f"expected lumens per lamp > 0, or -1 for absolute photometry, found {lumens_per_lamp:g}")
    elif not math.isfinite(lamp_count * lumens_per_lamp):
        raise err(ln, f"the rated flux, {lamp_count:.4g} lamps × {lumens_per_lamp:g} lm, is not a finite number")
    multiplier, ln_mult = tokens.number("candela multiplier")
    if multiplier <= 0:
        raise err(ln_mult, f"expected a candela multiplier > 0, found {multiplier:g}")
    n_v, ln_nv = tokens.count("vertical angles", 2, MAX_LM63_ANGLES)
    n_h, ln_nh = tokens.count("horizontal angles", 1, MAX_LM63_ANGLES)
    ptype, ln = tokens.integer("photometric type")
    if ptype == 3:
        raise err(ln, "photometric type 3 (type A) is not supported; lampcast reads type C (1) and type B (2)")
    if ptype not in (1, 2):
        raise err(ln, f"unknown photometric type {ptype}; expected 1 (type C), 2 (type B) or 3 (type A)")
    units, ln = tokens.integer("units type")
    if units not in (1, 2):
        raise err(ln, f"unknown units type {units}; expected 1 (feet) or 2 (metres)")
    width, _ = tokens.number("luminous opening width")
    length, _ = tokens.number("luminous opening length")
    height, _ = tokens.number("luminous opening height")
    ballast_factor, ln = tokens.number("ballast factor")
    if ballast_factor <= 0:
        raise err(ln, f"expected a ballast factor > 0, found {ballast_factor:g}")
    second_what = (
        "file generation type"
        if edition == "LM-63-2019"
        else ("future-use field" if edition in ("LM-63-1995", "LM-63-2002") else "ballast-lamp photometric factor")
    )
    second, ln = tokens.number(second_what)
    if second <= 0:
        raise err(ln, f"expected the {second_what} > 0, found {second:g}")
    input_watts, ln = tokens.number("input watts")
    if input_watts < 0:
        raise err(ln, f"expected input watts ≥ 0, found {input_watts:g}")

    # Every value the counts call for must be present before any array of their size is made.
    count_lines = f"{ln_nv}" if ln_nv == ln_nh else f"{ln_nv} and {ln_nh}"
    if tokens.remaining() < n_v + n_h + n_v * n_h:
        _raise_angle_count_hint(tokens, n_v, n_h, ln_nv, ln_nh)
    tokens.require(
        n_v + n_h + n_v * n_h,
        count_lines,
        f"{n_v:,} vertical angles, {n_h:,} horizontal angles and {n_v:,} × {n_h:,} candela values",
    )
    v_deg, v_lines = tokens.numbers(n_v, "vertical angles")
    h_deg, h_lines = tokens.numbers(n_h, "horizontal angles")
    cd, cd_lines = tokens.numbers(n_v * n_h, "candela values")
    if tokens.remaining():
        extra = tokens.remaining()
        first_line = tokens.line_of(tokens.pos)
        raise err(
            first_line,
            f"{extra} value(s) left after the {n_h} x {n_v} candela table; the counts of "
            f"vertical angles (line {ln_nv}) and horizontal angles (line {ln_nh}) do not match the data",
        )

    # --- validation -------------------------------------------------------------------------
    _check_increasing(v_deg, v_lines, "vertical", source)
    _check_increasing(h_deg, h_lines, "horizontal", source)
    bad = np.flatnonzero(cd < 0)
    if bad.size:
        k = int(bad[0])
        raise err(
            int(cd_lines[k]),
            f"negative candela value {cd[k]:g} (horizontal angle "
            f"{h_deg[k // n_v]:g}°, vertical angle {v_deg[k % n_v]:g}°); expected ≥ 0",
        )

    if edition == "LM-63-2019":
        ballast_lamp_factor, file_generation_type = 1.0, second
    else:
        ballast_lamp_factor, file_generation_type = second, None
    scale = multiplier * ballast_factor * ballast_lamp_factor
    factors_text = f"candela multiplier {multiplier:g} × ballast factor {ballast_factor:g}" + (
        f" × ballast-lamp factor {ballast_lamp_factor:g}" if ballast_lamp_factor != 1.0 else ""
    )
    if not (math.isfinite(scale) and scale > 0):
        raise err(ln_mult, f"the {factors_text} is {scale:g}; expected a finite number > 0")
    with np.errstate(over="ignore"):
        table = cd.reshape(n_h, n_v) * scale
    _check_intensities(table, cd, cd_lines, scale, factors_text, tilt, source)

    if ptype == 1:
        _check_type_c_ranges(v_deg, v_lines, h_deg, h_lines, source)
        c_full, table_full, symmetry = _expand_type_c(h_deg, table)
        g_grid = v_deg.copy()
        ptype_name = "C"
    else:
        symmetry = _check_type_b_ranges(v_deg, v_lines, h_deg, h_lines, source)
        c_full, g_grid, table_full = _resample_type_b(h_deg, v_deg, table)
        ptype_name = "B"

    to_m = FEET_TO_M if units == 1 else 1.0
    shape = _opening_shape(width, length, height)

    return Photometry(
        c_deg=frozen_array(c_full),
        gamma_deg=frozen_array(g_grid),
        candela_cd=frozen_array(table_full),
        photometric_type=ptype_name,
        symmetry=symmetry,
        lamp_count=lamp_count,
        lumens_per_lamp=float(lumens_per_lamp),
        candela_multiplier=float(multiplier),
        ballast_factor=float(ballast_factor),
        ballast_lamp_factor=float(ballast_lamp_factor),
        input_watts=float(input_watts),
        opening_width_m=abs(width) * to_m,
        opening_length_m=abs(length) * to_m,
        opening_height_m=abs(height) * to_m,
        opening_shape=shape,
        edition=edition,
        source=source,
        file_horizontal_deg=frozen_array(h_deg),
        file_vertical_deg=frozen_array(v_deg),
        file_candela_cd=frozen_array(table),
        keywords=joined,
        label_lines=tuple(labels),
        tilt=tilt,
        file_generation_type=file_generation_type,
    )


def _raise_angle_count_hint(tokens: _Tokens, n_v: int, n_h: int, ln_nv: int, ln_nh: int) -> None:
    """With fewer values in the file than the counts call for, raise an error naming the angle
    line when the angles seem fewer than declared: a value at the start of a new line that does
    not increase, or exceeds the largest angle (vertical 180°, horizontal 360°), where the
    vertical (or horizontal) angles should go on marks where the written angles really end. Returns without raising when no such place is found (the
    caller's count check then reports)."""
    start = tokens.pos
    n = min(n_v + n_h, tokens.remaining())
    values: list[float] = []
    for k in range(start, start + n):
        try:
            values.append(float(tokens._word(k)))
        except ValueError:
            break
    blocks = ((0, n_v, "vertical", ln_nv, 180.0), (n_v, n_h, "horizontal", ln_nh, 360.0))
    for first, count, what, ln_count, largest in blocks:
        for j in range(first + 1, min(first + count, len(values))):
            new_line = tokens.line_of(start + j) != tokens.line_of(start + j - 1)
            if new_line and not (values[j - 1] < values[j] <= largest + ANGLE_TOL_DEG):
                written = j - first
                first_line, last_line = tokens.line_of(start + first), tokens.line_of(start + j - 1)
                lines = f"line {first_line}" if first_line == last_line else f"lines {first_line}-{last_line}"
                raise tokens.error(
                    first_line,
                    f"{lines} hold(s) {written} {what} angles, but line {ln_count} declares {count}: "
                    f"the next value, {values[j]:g} on line {tokens.line_of(start + j)}, does not "
                    f"continue them (not larger, or above {largest:g}°), so the {what} angles seem to "
                    "end there; correct the count or the angles",
                )
        if len(values) < first + count:
            return


def _check_intensities(
    table: np.ndarray,
    cd: np.ndarray,
    cd_lines: np.ndarray,
    scale: float,
    factors_text: str,
    tilt: TiltData | None,
    source: str,
) -> None:
    """Intensities after the factors must be finite, and small enough that the flux bound
    4π·I, also with the largest tilt factor, stays finite (:data:`LARGEST_INTENSITY_CD`)."""
    flat = table.reshape(-1)
    bad = np.flatnonzero(~np.isfinite(flat))
    if bad.size:
        k = int(bad[0])
        raise input_error(
            source,
            f"line {cd_lines[k]}",
            f"candela value {cd[k]:g} × the {factors_text} is not a finite number (it overflows); "
            "expected intensities that stay finite after the factors",
        )
    k = int(np.argmax(flat)) if flat.size else 0
    peak = float(flat[k]) if flat.size else 0.0
    if peak > LARGEST_INTENSITY_CD:
        raise input_error(
            source,
            f"line {cd_lines[k]}",
            f"candela value {cd[k]:g} gives {peak:.4g} cd after the factors, too large for the "
            f"luminous flux to be a finite number; lampcast reads intensities up to {LARGEST_INTENSITY_CD:.3g} cd",
        )
    if tilt is not None and tilt.factors.size and peak > 0:
        f = float(np.max(tilt.factors))
        if peak * f > LARGEST_INTENSITY_CD:
            raise input_error(
                source,
                f"line {cd_lines[k]}",
                f"candela value {cd[k]:g} × the largest tilt factor ({f:.4g}) exceeds "
                f"{LARGEST_INTENSITY_CD:.3g} cd, too large for the luminous flux to be a finite number",
            )


def _read_tilt_file(
    name: str,
    source: str,
    line: int,
    base_dir: str | os.PathLike | None,
    allowed_root: str | os.PathLike | None,
) -> TiltData:
    """The tilt data of ``TILT=<name>`` (on ``line`` of ``source``), read as module notes say."""
    where = f"line {line}"
    if not name:
        raise input_error(source, where, "expected NONE, INCLUDE or a file name after 'TILT='")
    if "\x00" in name:
        raise input_error(source, where, "the tilt file name after 'TILT=' contains a NUL byte")
    base = Path(base_dir) if base_dir is not None else Path.cwd()
    path = base / name
    if allowed_root is not None and not is_inside(path, allowed_root):
        raise input_error(
            source,
            where,
            f"the tilt file {_shown(name, 200)} ({path}) is outside {Path(allowed_root).resolve()}; "
            "with strict paths only files inside that folder are read",
        )
    try:
        data = read_user_bytes(path, "tilt file")
    except InputError as exc:
        raise input_error(
            source, where, f"{exc.problems[0].message} (TILT={_shown(name, 200)}, looked for {path})"
        ) from None
    tokens = _Tokens(
        _decode(data), 1, str(path), echo=False, context=f" (the tilt file named on line {line} of {source})"
    )
    return _parse_tilt(tokens, str(path))


def _parse_tilt(tokens: _Tokens, origin: str) -> TiltData:
    geometry, ln = tokens.integer("lamp-to-luminaire geometry of the tilt data")
    if geometry not in (1, 2, 3):
        raise tokens.error(ln, f"expected a lamp-to-luminaire geometry of 1, 2 or 3{tokens.found(str(geometry))}")
    n, ln = tokens.count("tilt angles", 1, MAX_LM63_TILT_ANGLES)
    tokens.require(2 * n, str(ln), f"{n:,} tilt angles and {n:,} multiplying factors")
    angles, a_lines = tokens.numbers(n, "tilt angles")
    factors, f_lines = tokens.numbers(n, "tilt multiplying factors")
    _check_increasing(angles, a_lines, "tilt", tokens.source, echo=tokens.echo, context=tokens.context)
    bad = np.flatnonzero(factors < 0)
    if bad.size:
        k = int(bad[0])
        shown = f" {factors[k]:g}" if tokens.echo else ""
        raise tokens.error(int(f_lines[k]), f"negative tilt multiplying factor{shown}; expected ≥ 0")
    return TiltData(geometry, frozen_array(angles), frozen_array(factors), origin)


def _check_increasing(
    a: np.ndarray, lines: np.ndarray, what: str, source: str, *, echo: bool = True, context: str = ""
) -> None:
    """Angles must increase by more than :data:`ANGLE_TOL_DEG` (closer angles are the same
    angle, and a narrower cell would make the flux weights divide by zero)."""
    if a.size < 2:
        return
    with np.errstate(over="ignore"):
        bad = np.flatnonzero(~(np.diff(a) > ANGLE_TOL_DEG))
    if bad.size:
        k = int(bad[0]) + 1
        shown = f": {a[k]:g} follows {a[k - 1]:g}" if echo else f" (value {k + 1} does not exceed value {k})"
        raise input_error(
            source,
            f"line {lines[k]}",
            f"{what} angles must increase, each by more than {ANGLE_TOL_DEG:g}°{shown}{context}",
        )


def _near(x: float, target: float) -> bool:
    return abs(x - target) <= ANGLE_TOL_DEG


def _check_type_c_ranges(v, v_lines, h, h_lines, source) -> None:
    if not (_near(v[0], 0.0) or _near(v[0], 90.0)):
        raise input_error(
            source, f"line {v_lines[0]}", f"type C vertical angles must start at 0 or 90 degrees, found {v[0]:g}"
        )
    if not (_near(v[-1], 90.0) or _near(v[-1], 180.0)):
        raise input_error(
            source, f"line {v_lines[-1]}", f"type C vertical angles must end at 90 or 180 degrees, found {v[-1]:g}"
        )
    first, last = h[0], h[-1]
    ok = (
        (h.size == 1 and _near(first, 0.0))
        or (
            h.size > 1
            and _near(first, 0.0)
            and (_near(last, 90.0) or _near(last, 180.0) or (180.0 < last <= 360.0 + ANGLE_TOL_DEG))
        )
        or (h.size > 1 and _near(first, 90.0) and _near(last, 270.0))
    )
    if not ok:
        where = h_lines[0] if not (_near(first, 0.0) or _near(first, 90.0)) else h_lines[-1]
        raise input_error(
            source,
            f"line {where}",
            f"type C horizontal angles {first:g}..{last:g} are not one of the LM-63 symmetry cases: "
            "a single 0, 0-90, 0-180, 0 to more than 180 (up to 360), or 90-270",
        )


def _check_type_b_ranges(v, v_lines, h, h_lines, source) -> str:
    for a, lines, what in ((h, h_lines, "horizontal"), (v, v_lines, "vertical")):
        if not (_near(a[0], -90.0) or _near(a[0], 0.0)):
            raise input_error(
                source, f"line {lines[0]}", f"type B {what} angles must start at -90 or 0 degrees, found {a[0]:g}"
            )
        if not _near(a[-1], 90.0):
            raise input_error(
                source, f"line {lines[-1]}", f"type B {what} angles must end at 90 degrees, found {a[-1]:g}"
            )
    mirror_h, mirror_v = _near(h[0], 0.0), _near(v[0], 0.0)
    return {(False, False): "b-none", (True, False): "b-h", (False, True): "b-v", (True, True): "b-hv"}[
        (mirror_h, mirror_v)
    ]


def _expand_type_c(h: np.ndarray, table: np.ndarray) -> tuple[np.ndarray, np.ndarray, str]:
    """Mirror a type C table (n_h, n_v) to the full C range 0..360 (inclusive)."""
    pairs: list[tuple[float, int]] = []
    first, last = float(h[0]), float(h[-1])
    if h.size == 1:
        symmetry = "rotational"
        pairs = [(0.0, 0), (360.0, 0)]
    elif _near(first, 0.0) and _near(last, 90.0):
        symmetry = "quadrant"
        for k, a in enumerate(h):
            pairs += [(a, k), (180.0 - a, k), (180.0 + a, k), (360.0 - a, k)]
    elif _near(first, 0.0) and _near(last, 180.0):
        symmetry = "bilateral-0-180"
        for k, a in enumerate(h):
            pairs += [(a, k), (360.0 - a, k)]
    elif _near(first, 90.0):
        symmetry = "bilateral-90-270"
        if not np.any(np.abs(h - 180.0) <= ANGLE_TOL_DEG):
            # C 0 and C 360 mirror C 180: without a measured C 180 plane, add the plane the
            # interpolation in C gives there (linear between its neighbours).
            j = int(np.searchsorted(h, 180.0))
            w = (180.0 - h[j - 1]) / (h[j] - h[j - 1])
            h = np.insert(h, j, 180.0)
            table = np.insert(table, j, (1.0 - w) * table[j - 1] + w * table[j], axis=0)
        for k, a in enumerate(h):
            pairs.append((a, k))
            if a <= 180.0 + ANGLE_TOL_DEG:
                pairs.append((180.0 - a, k))  # mirror of C in 90..180 -> 0..90
            if a >= 180.0 - ANGLE_TOL_DEG:
                pairs.append((540.0 - a, k))  # mirror of C in 180..270 -> 270..360
    else:
        symmetry = "none"
        pairs = [(a, k) for k, a in enumerate(h)]
        if last < 360.0 - ANGLE_TOL_DEG:
            pairs.append((360.0, 0))  # periodic: C 360 is C 0
    pairs.sort(key=lambda p: p[0])
    angles: list[float] = []
    rows: list[int] = []
    for a, k in pairs:
        if angles and abs(a - angles[-1]) <= ANGLE_TOL_DEG:
            continue
        angles.append(min(max(a, 0.0), 360.0))
        rows.append(k)
    angles[0], angles[-1] = 0.0, 360.0
    return np.asarray(angles), table[np.asarray(rows)], symmetry


# --------------------------------------------------------------------------------------------
# Type B resampling, luminous opening
# --------------------------------------------------------------------------------------------


def _resample_type_b(h: np.ndarray, v: np.ndarray, table: np.ndarray) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """Resample a type B table (n_h, n_v) onto a regular C-γ grid over γ 0..90 (module notes)."""
    from scipy.interpolate import RegularGridInterpolator

    finest = min(np.min(np.diff(h)) if h.size > 1 else 90.0, np.min(np.diff(v)))
    step = float(np.clip(finest, 0.25, 1.0))
    n_c = int(round(360.0 / step))
    n_g = int(round(90.0 / step))
    c = np.linspace(0.0, 360.0, n_c + 1)
    g = np.linspace(0.0, 90.0, n_g + 1)
    hh, vv = c_gamma_to_type_b(c[:, None], g[None, :])
    if _near(h[0], 0.0):
        hh = np.abs(hh)
    if _near(v[0], 0.0):
        vv = np.abs(vv)
    interp = RegularGridInterpolator((h, v), table, method="linear", bounds_error=False, fill_value=0.0)
    # Clip rounding noise at the range ends (e.g. H = 90.0000000001).
    hh = np.where(np.abs(hh - h[-1]) < 1e-9, h[-1], hh)
    vv = np.where(np.abs(np.abs(vv) - 90.0) < 1e-9, np.sign(vv) * 90.0, vv)
    values = interp(np.stack([hh, vv], axis=-1))
    return c, g, np.maximum(values, 0.0)


def _opening_shape(w: float, l: float, h: float) -> str:
    """Shape of the luminous opening from the LM-63 sign convention **(from memory,
    LM-63-2002 table of luminous shapes)**: negative sizes mark round shapes."""
    if w == 0 and l == 0 and h == 0:
        return "point"
    if w >= 0 and l >= 0 and h >= 0:
        return "rectangular" if h == 0 else "rectangular with luminous sides"
    if w < 0 and l < 0 and h == 0:
        return "circular" if w == l else "elliptical"
    if w < 0 and l < 0 and h > 0:
        return "vertical cylinder" if w == l else "vertical elliptical cylinder"
    if w < 0 and l < 0 and h < 0:
        return "spherical" if w == l == h else "ellipsoidal"
    if w < 0 and l >= 0 and h < 0:
        return "horizontal cylinder along the length"
    if w >= 0 and l < 0 and h < 0:
        return "horizontal cylinder along the width"
    return "unclassified (signs of width/length/height do not match an LM-63 shape)"
