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
"""

from __future__ import annotations

import math
import os
import re
from collections.abc import Sequence
from pathlib import Path

import numpy as np

from render.errors import InputError, input_error
from render.fileio import read_user_bytes
from render.light.photometry.model import (
    ANGLE_TOL_DEG,
    Photometry,
    TiltData,
    c_gamma_to_type_b,
    frozen_array,
)

__all__ = ["FEET_TO_M", "parse_lm63", "read_lm63"]

#: One foot in metres (international foot).
FEET_TO_M = 0.3048

_EDITION_LINES = {
    "IESNA:LM-63-1995": "LM-63-1995",
    "IESNA:LM-63-2002": "LM-63-2002",
    "IES:LM-63-2019": "LM-63-2019",
    "IESNA91": "LM-63-1991",
    "IESNA:LM-63-1991": "LM-63-1991",
    "IESNA:LM-63-1986": "LM-63-1986",
}


# --------------------------------------------------------------------------------------------
# Tokens with line numbers
# --------------------------------------------------------------------------------------------

_SPLIT = re.compile(r"[,\s]+")


class _Tokens:
    """The numeric part of a file: (text, line number) pairs consumed in order."""

    def __init__(self, items: list[tuple[str, int]], source: str, last_line: int):
        self.items = items
        self.pos = 0
        self.source = source
        self.last_line = last_line

    def _error(self, line: int, message: str) -> InputError:
        return input_error(self.source, f"line {line}", message)

    def line_of(self, index: int) -> int:
        return self.items[index][1]

    def number(self, what: str) -> tuple[float, int]:
        if self.pos >= len(self.items):
            raise self._error(self.last_line, f"the file ends before the {what}; the data are truncated")
        text, line = self.items[self.pos]
        self.pos += 1
        try:
            value = float(text)
        except ValueError:
            raise self._error(line, f"expected the {what} (a number), found '{text}'") from None
        if not math.isfinite(value):
            raise self._error(line, f"expected the {what} (a finite number), found '{text}'")
        return value, line

    def integer(self, what: str) -> tuple[int, int]:
        value, line = self.number(what)
        if abs(value - round(value)) > 1e-9:
            raise self._error(line, f"expected the {what} (a whole number), found {value:g}")
        return int(round(value)), line

    def numbers(self, n: int, what: str) -> tuple[np.ndarray, np.ndarray]:
        values = np.empty(n, dtype=np.float64)
        lines = np.empty(n, dtype=np.int64)
        for k in range(n):
            if self.pos >= len(self.items):
                raise self._error(
                    self.last_line,
                    f"the file ends after {k} of the {n} {what}; the data are truncated",
                )
            values[k], lines[k] = self.number(f"{what} (value {k + 1} of {n})")
        return values, lines

    def remaining(self) -> int:
        return len(self.items) - self.pos


def _tokenise(lines: Sequence[str], first_line_no: int) -> list[tuple[str, int]]:
    out: list[tuple[str, int]] = []
    for k, text in enumerate(lines):
        for word in _SPLIT.split(text.strip()):
            if word:
                out.append((word, first_line_no + k))
    return out


def _decode(data: bytes) -> str:
    try:
        return data.decode("utf-8-sig")
    except UnicodeDecodeError:
        # Many LM-63 files carry a stray '°' or '©' in a legacy 8-bit code page.
        return data.decode("cp1252", errors="replace")


# --------------------------------------------------------------------------------------------
# Parsing
# --------------------------------------------------------------------------------------------


def read_lm63(path: str | os.PathLike) -> Photometry:
    """Read an LM-63 photometric file (see the module notes for the format).

    A ``TILT=<file>`` tilt file is looked up relative to the photometric file's folder.

    Raises
    ------
    InputError
        If the file cannot be read or is malformed (names the file and line).
    """
    path = Path(path)
    return parse_lm63(_decode(read_user_bytes(path, "photometric file")), source=str(path), base_dir=path.parent)


def parse_lm63(text: str, source: str = "<lm63 text>", base_dir: str | os.PathLike | None = None) -> Photometry:
    """Parse LM-63 text; ``source`` names the input in error messages and ``base_dir`` is where
    a ``TILT=<file>`` is looked for (default: the current folder)."""
    lines = text.splitlines()
    n_lines = len(lines)
    i = 0
    while i < n_lines and not lines[i].strip():
        i += 1
    if i >= n_lines:
        raise input_error(source, "", "the file is empty; expected LM-63 photometric data")

    # --- edition line -------------------------------------------------------------------------
    head = lines[i].strip().upper().replace(" ", "")
    edition = _EDITION_LINES.get(head)
    if edition is not None:
        i += 1
    elif head.startswith(("IESNA:LM-63", "IES:LM-63")):
        raise input_error(
            source,
            f"line {i + 1}",
            f"unknown LM-63 edition '{lines[i].strip()}'; expected one of "
            "IESNA:LM-63-1995, IESNA:LM-63-2002, IES:LM-63-2019",
        )
    else:
        edition = "LM-63-1986"  # no edition line: the 1986 form, header lines are free text

    # --- keywords up to TILT= -----------------------------------------------------------------
    keywords: dict[str, str] = {}
    labels: list[str] = []
    last_key: str | None = None
    tilt_line_no = None
    tilt_value = ""
    keyword_re = re.compile(r"^\s*\[([^\]]*)\]\s?(.*)$")
    while i < n_lines:
        raw = lines[i]
        stripped = raw.strip()
        if stripped.upper().replace(" ", "").startswith("TILT="):
            tilt_line_no = i + 1
            tilt_value = stripped.split("=", 1)[1].strip()
            i += 1
            break
        m = keyword_re.match(raw)
        if m:
            key = m.group(1).strip().upper()
            value = m.group(2).rstrip()
            if key == "MORE" and last_key is not None:
                keywords[last_key] = keywords[last_key] + "\n" + value
            elif key in keywords:
                keywords[key] = keywords[key] + "\n" + value
                last_key = key
            else:
                keywords[key] = value
                last_key = key
        elif stripped:
            labels.append(stripped)
        i += 1
    if tilt_line_no is None:
        raise input_error(
            source,
            f"line {n_lines}",
            "no TILT= line found; expected 'TILT=NONE', 'TILT=INCLUDE' or 'TILT=<file>' after the keyword lines",
        )

    tokens = _Tokens(_tokenise(lines[i:], i + 1), source, n_lines)

    # --- tilt ---------------------------------------------------------------------------------
    tilt: TiltData | None = None
    upper = tilt_value.upper()
    if upper == "NONE":
        tilt = None
    elif upper == "INCLUDE":
        tilt = _parse_tilt(tokens, "INCLUDE")
    elif not tilt_value:
        raise input_error(source, f"line {tilt_line_no}", "expected NONE, INCLUDE or a file name after 'TILT='")
    else:
        base = Path(base_dir) if base_dir is not None else Path.cwd()
        tilt_path = base / tilt_value
        try:
            tilt_text = _decode(tilt_path.read_bytes())
        except OSError as exc:
            raise input_error(
                source,
                f"line {tilt_line_no}",
                f"cannot read the tilt file '{tilt_value}' (looked for {tilt_path}): {exc.strerror or exc}",
            ) from None
        tilt_lines = tilt_text.splitlines()
        tilt_tokens = _Tokens(_tokenise(tilt_lines, 1), str(tilt_path), max(len(tilt_lines), 1))
        tilt = _parse_tilt(tilt_tokens, str(tilt_path))

    # --- the two parameter lines ------------------------------------------------------------
    def err(line: int, message: str) -> InputError:
        return input_error(source, f"line {line}", message)

    lamp_count, ln = tokens.integer("number of lamps")
    if lamp_count < 1:
        raise err(ln, f"expected a number of lamps of at least 1, found {lamp_count}")
    lumens_per_lamp, ln = tokens.number("lumens per lamp")
    if abs(lumens_per_lamp + 1.0) < 1e-9:
        lumens_per_lamp = -1.0
    elif lumens_per_lamp <= 0:
        raise err(ln, f"expected lumens per lamp > 0, or -1 for absolute photometry, found {lumens_per_lamp:g}")
    multiplier, ln = tokens.number("candela multiplier")
    if multiplier <= 0:
        raise err(ln, f"expected a candela multiplier > 0, found {multiplier:g}")
    n_v, ln_nv = tokens.integer("number of vertical angles")
    if n_v < 2:
        raise err(ln_nv, f"expected at least 2 vertical angles, found {n_v}")
    n_h, ln_nh = tokens.integer("number of horizontal angles")
    if n_h < 1:
        raise err(ln_nh, f"expected at least 1 horizontal angle, found {n_h}")
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
    table = cd.reshape(n_h, n_v) * scale

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
        keywords=keywords,
        label_lines=tuple(labels),
        tilt=tilt,
        file_generation_type=file_generation_type,
    )


def _parse_tilt(tokens: _Tokens, origin: str) -> TiltData:
    geometry, ln = tokens.integer("lamp-to-luminaire geometry of the tilt data")
    if geometry not in (1, 2, 3):
        raise input_error(
            tokens.source, f"line {ln}", f"expected a lamp-to-luminaire geometry of 1, 2 or 3, found {geometry}"
        )
    n, ln = tokens.integer("number of tilt angles")
    if n < 1:
        raise input_error(tokens.source, f"line {ln}", f"expected at least 1 tilt angle, found {n}")
    angles, a_lines = tokens.numbers(n, "tilt angles")
    factors, f_lines = tokens.numbers(n, "tilt multiplying factors")
    _check_increasing(angles, a_lines, "tilt", tokens.source)
    bad = np.flatnonzero(factors < 0)
    if bad.size:
        k = int(bad[0])
        raise input_error(
            tokens.source, f"line {f_lines[k]}", f"negative tilt multiplying factor {factors[k]:g}; expected ≥ 0"
        )
    return TiltData(geometry, frozen_array(angles), frozen_array(factors), origin)


def _check_increasing(a: np.ndarray, lines: np.ndarray, what: str, source: str) -> None:
    if a.size < 2:
        return
    bad = np.flatnonzero(np.diff(a) <= 0)
    if bad.size:
        k = int(bad[0]) + 1
        raise input_error(source, f"line {lines[k]}", f"{what} angles must increase: {a[k]:g} follows {a[k - 1]:g}")


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
