"""Luminaire photometry: ANSI/IES LM-63 files, the C-γ intensity table, flux and orientation.

Reading
-------
:func:`read_lm63` reads the ANSI/IES LM-63 "standard file format for the electronic transfer of
photometric data" in its 1986, 1991, 1995, 2002 and 2019 forms and returns a :class:`Photometry`:
an absolute luminous intensity table in candela over the full C-γ sphere of directions.

File layout (ANSI/IESNA LM-63-2002, IES LM-63-2019; field order the same in every edition,
**from memory** where not noted):

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
   set to 1 (Ashdown 1998, "Parsing the IESNA LM-63 photometric data file"); LM-63-2019 reuses
   it as the *file generation type* code (e.g. 1.00001) **(from memory)**. Candela values are
   multiplied by it for every edition before 2019 (harmless when it is 1) and not for 2019;
6. the vertical angles, the horizontal angles, then the candela values, one block of
   ``n_vertical`` values per horizontal angle.

Values are separated by commas and/or white space and may wrap across lines anywhere. Every
value keeps its line number so that a mistake is reported as ``file: line N: ...``
(:class:`render.errors.InputError`).

Angles and symmetry (type C)
----------------------------
Vertical angles γ run 0–90 (downward only), 90–180 (upward only) or 0–180; the missing
hemisphere has zero intensity. Horizontal angles C encode the lateral symmetry: a single 0
(rotationally symmetric), 0–90 (symmetric in each quadrant), 0–180 (bilateral about the
C 0–180 plane), 90–270 (bilateral about the C 90–270 plane, allowed for type C since
LM-63-1995) and 0–x with 180 < x ≤ 360 (no symmetry). The table is expanded to a full C grid
0..360 by mirroring, so that bilinear interpolation is periodic in C.

Luminaire frame and orientation
-------------------------------
Luminaire frame: x = C 0°, y = C 90°, z up; γ = 0° points straight down (nadir), γ = 90° is
horizontal, γ = 180° straight up; C is counted anticlockwise seen from above (from x toward y).
For a road optic C 90° points across the carriageway, to the "street side".
:func:`luminaire_rotation` turns the luminaire frame into the world frame: first a tilt about
the luminaire's own x axis (positive tilt swings the nadir axis toward C 90°, i.e. raises the
street-side front of the optic), then a rotation about the world z axis (anticlockwise seen from
above). In the lampcast world frame (x along the street, y across it) a luminaire with
``rotation_deg = 0`` throws its street side toward +y.

Type B (floodlight) photometry
------------------------------
**(from memory: CIE 121 / IES LM-75 B-β system and LM-63 angle ranges)** Type B planes share a
horizontal axis (the floodlight's tilt axis). The LM-63 *vertical* angle V is the angle of the
plane about that axis (positive upward in the test position) and the *horizontal* angle H is
the angle within the plane, away from the plane through the beam axis (positive clockwise seen
from above). H = V = 0 is the beam axis. lampcast places a type B file in the luminaire frame
with the beam axis on γ = 0 (nadir), V increasing toward C 90° and H increasing toward C 0°:

    direction = (sin H, cos H · sin V, −cos H · cos V)
    γ = atan2(√(d_x² + d_y²), −d_z),  C = atan2(d_y, d_x)
    H = asin(sin γ cos C),             V = atan2(sin γ sin C, cos γ)

so a floodlight with ``tilt_deg = 90`` sits in its test position (beam horizontal toward C 90°,
V = +90° straight up). Horizontal angles 0–90 mean mirror symmetry in H, vertical angles 0–90
mirror symmetry in V (an assumption: the standard only gives the ranges). The table is
resampled on load to a regular C-γ grid (1° or the file's finest step, not finer than 0.25°)
covering the front hemisphere γ ≤ 90°; behind the floodlight the intensity is zero.
Type A photometry is refused with a clear message.

Relative and absolute photometry
--------------------------------
``candela_cd`` is absolute: file values × candela multiplier × ballast factor (× the pre-2019
second factor). For *relative* photometry (lumens per lamp > 0) the values belong to lamps of
``lumens_per_lamp`` rated lumens each; the luminaire's flux divided by the rated lamp flux is
the light output ratio. For *absolute* photometry (lumens per lamp = −1, usual for LED
luminaires) the values are the luminaire's own and there is no rated lamp flux.
"""

from __future__ import annotations

import math
import os
import re
from collections.abc import Sequence
from dataclasses import dataclass, field, replace
from pathlib import Path

import numba
import numpy as np

from render.errors import InputError, Problem, did_you_mean, input_error
from render.fileio import read_user_bytes, save_figure

#: One foot in metres (international foot).
FEET_TO_M = 0.3048

#: Folder of the built-in generic LM-63 files (``<id>.ies``).
BUILTIN_PHOTOMETRY_DIR = Path(__file__).resolve().parents[1] / "data" / "photometry"

_ANGLE_TOL_DEG = 1e-6
_EDITION_LINES = {
    "IESNA:LM-63-1995": "LM-63-1995",
    "IESNA:LM-63-2002": "LM-63-2002",
    "IES:LM-63-2019": "LM-63-2019",
    "IESNA91": "LM-63-1991",
    "IESNA:LM-63-1991": "LM-63-1991",
    "IESNA:LM-63-1986": "LM-63-1986",
}
_VERTICAL_TEXT = {"downward": "downward only (γ 0-90)", "upward": "upward only (γ 90-180)", "full": "γ 0-180"}
_SYMMETRY_TEXT = {
    "rotational": "rotationally symmetric (one C plane)",
    "quadrant": "symmetric in each quadrant (C 0-90)",
    "bilateral-0-180": "bilateral about the C 0-180 plane (C 0-180)",
    "bilateral-90-270": "bilateral about the C 90-270 plane (C 90-270)",
    "none": "no lateral symmetry (C 0-360)",
    "b-none": "type B, no symmetry (H -90..90, V -90..90)",
    "b-h": "type B, mirror symmetric in H (H 0..90, V -90..90)",
    "b-v": "type B, mirror symmetric in V (H -90..90, V 0..90)",
    "b-hv": "type B, mirror symmetric in H and V (H 0..90, V 0..90)",
}


# --------------------------------------------------------------------------------------------
# Data
# --------------------------------------------------------------------------------------------


@dataclass(frozen=True, eq=False)
class TiltData:
    """LM-63 tilt data: candela multiplying factors against luminaire tilt.

    Attributes
    ----------
    geometry
        Lamp-to-luminaire geometry **(from memory, LM-63-2002)**: 1 = lamp vertical (base up or
        down) when the luminaire is aimed straight down; 2 = lamp horizontal and staying
        horizontal when the luminaire tilts; 3 = lamp horizontal, tilting with the luminaire.
    angles_deg
        Tilt angles, degrees, increasing.
    factors
        Multiplying factors at those angles (dimensionless, ≥ 0).
    origin
        ``"INCLUDE"`` or the path of the tilt file.
    """

    geometry: int
    angles_deg: np.ndarray
    factors: np.ndarray
    origin: str


@dataclass(frozen=True, eq=False)
class Photometry:
    """A luminaire's luminous intensity distribution as read from an LM-63 file.

    Attributes
    ----------
    c_deg
        (n_c,) C angles, degrees, increasing from 0 to 360 inclusive (360 repeats 0), after
        symmetry expansion (type B: the resampling grid).
    gamma_deg
        (n_g,) γ angles, degrees, increasing, spanning the measured vertical range (0–90,
        90–180 or 0–180). Outside this range the intensity is 0 cd.
    candela_cd
        (n_c, n_g) absolute luminous intensity, cd: file value × candela multiplier × ballast
        factor × (pre-2019) ballast-lamp factor. Tilt factors are *not* included (they depend
        on the installed tilt: see :func:`apply_tilt`).
    photometric_type
        ``"C"`` or ``"B"``.
    symmetry
        Key of the lateral symmetry found in the file (``"rotational"``, ``"quadrant"``,
        ``"bilateral-0-180"``, ``"bilateral-90-270"``, ``"none"``, type B ``"b-..."``).
    lamp_count, lumens_per_lamp
        As in the file; ``lumens_per_lamp == -1`` marks absolute photometry.
    candela_multiplier, ballast_factor, ballast_lamp_factor
        The file's factors (already applied to ``candela_cd``); ``ballast_lamp_factor`` is 1 for
        LM-63-2019 files, whose field is ``file_generation_type`` instead.
    file_generation_type
        LM-63-2019 file generation type code, else ``None``.
    input_watts
        Luminaire input power, W (0 when the file gives none).
    opening_width_m, opening_length_m, opening_height_m, opening_shape
        Luminous opening: sizes in metres (absolute values) and the shape the LM-63 sign
        convention encodes (``"point"``, ``"rectangular"``, ``"circular"``, ...). Length is
        along C 0°, width along C 90° **(from memory)**.
    edition
        ``"LM-63-1986"`` … ``"LM-63-2019"``.
    keywords
        Keyword values by upper-case key (``[MORE]`` lines joined with newlines).
    label_lines
        Header lines that are not keywords (the free text of the 1986 form).
    tilt
        :class:`TiltData` or ``None`` (``TILT=NONE``).
    source
        The file the data came from.
    file_horizontal_deg, file_vertical_deg, file_candela_cd
        The angles as written and the (n_h, n_v) table after the factors, before expansion.
    """

    c_deg: np.ndarray
    gamma_deg: np.ndarray
    candela_cd: np.ndarray
    photometric_type: str
    symmetry: str
    lamp_count: int
    lumens_per_lamp: float
    candela_multiplier: float
    ballast_factor: float
    ballast_lamp_factor: float
    input_watts: float
    opening_width_m: float
    opening_length_m: float
    opening_height_m: float
    opening_shape: str
    edition: str
    source: str
    file_horizontal_deg: np.ndarray
    file_vertical_deg: np.ndarray
    file_candela_cd: np.ndarray
    keywords: dict = field(default_factory=dict)
    label_lines: tuple = ()
    tilt: TiltData | None = None
    file_generation_type: float | None = None

    @property
    def is_absolute(self) -> bool:
        """True for absolute photometry (lumens per lamp = −1)."""
        return self.lumens_per_lamp < 0

    @property
    def rated_lumens_lm(self) -> float | None:
        """Rated lamp flux, lm (lamps × lumens per lamp); ``None`` for absolute photometry."""
        if self.is_absolute:
            return None
        return float(self.lamp_count * self.lumens_per_lamp)

    @property
    def name(self) -> str:
        """A short name: the ``[LUMCAT]`` keyword, else the file's stem."""
        return self.keywords.get("LUMCAT") or Path(self.source).stem

    @property
    def vertical_range(self) -> str:
        """``"downward"`` (γ 0–90), ``"upward"`` (γ 90–180) or ``"full"`` (γ 0–180)."""
        lo, hi = float(self.gamma_deg[0]), float(self.gamma_deg[-1])
        if hi <= 90.0 + _ANGLE_TOL_DEG:
            return "downward"
        if lo >= 90.0 - _ANGLE_TOL_DEG:
            return "upward"
        return "full"


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
        c_deg=_frozen(c_full),
        gamma_deg=_frozen(g_grid),
        candela_cd=_frozen(table_full),
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
        file_horizontal_deg=_frozen(h_deg),
        file_vertical_deg=_frozen(v_deg),
        file_candela_cd=_frozen(table),
        keywords=keywords,
        label_lines=tuple(labels),
        tilt=tilt,
        file_generation_type=file_generation_type,
    )


def _frozen(a: np.ndarray) -> np.ndarray:
    a = np.ascontiguousarray(a, dtype=np.float64)
    a.setflags(write=False)
    return a


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
    return TiltData(geometry, _frozen(angles), _frozen(factors), origin)


def _check_increasing(a: np.ndarray, lines: np.ndarray, what: str, source: str) -> None:
    if a.size < 2:
        return
    bad = np.flatnonzero(np.diff(a) <= 0)
    if bad.size:
        k = int(bad[0]) + 1
        raise input_error(source, f"line {lines[k]}", f"{what} angles must increase: {a[k]:g} follows {a[k - 1]:g}")


def _near(x: float, target: float) -> bool:
    return abs(x - target) <= _ANGLE_TOL_DEG


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
            and (_near(last, 90.0) or _near(last, 180.0) or (180.0 < last <= 360.0 + _ANGLE_TOL_DEG))
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
            if a <= 180.0 + _ANGLE_TOL_DEG:
                pairs.append((180.0 - a, k))  # mirror of C in 90..180 -> 0..90
            if a >= 180.0 - _ANGLE_TOL_DEG:
                pairs.append((540.0 - a, k))  # mirror of C in 180..270 -> 270..360
    else:
        symmetry = "none"
        pairs = [(a, k) for k, a in enumerate(h)]
        if last < 360.0 - _ANGLE_TOL_DEG:
            pairs.append((360.0, 0))  # periodic: C 360 is C 0
    pairs.sort(key=lambda p: p[0])
    angles: list[float] = []
    rows: list[int] = []
    for a, k in pairs:
        if angles and abs(a - angles[-1]) <= _ANGLE_TOL_DEG:
            continue
        angles.append(min(max(a, 0.0), 360.0))
        rows.append(k)
    angles[0], angles[-1] = 0.0, 360.0
    return np.asarray(angles), table[np.asarray(rows)], symmetry


# --------------------------------------------------------------------------------------------
# Type B
# --------------------------------------------------------------------------------------------


def type_b_to_c_gamma(h_deg, v_deg) -> tuple[np.ndarray, np.ndarray]:
    """Type B angles (H, V) to the luminaire's (C, γ), degrees (see the module notes)."""
    h = np.radians(np.asarray(h_deg, dtype=np.float64))
    v = np.radians(np.asarray(v_deg, dtype=np.float64))
    d = np.stack([np.sin(h), np.cos(h) * np.sin(v), -np.cos(h) * np.cos(v)], axis=-1)
    return _local_to_c_gamma(d)


def c_gamma_to_type_b(c_deg, gamma_deg) -> tuple[np.ndarray, np.ndarray]:
    """The luminaire's (C, γ) to type B angles (H, V), degrees; V in (−180, 180]."""
    d = c_gamma_to_direction(c_deg, gamma_deg)
    h = np.degrees(np.arcsin(np.clip(d[..., 0], -1.0, 1.0)))
    v = np.degrees(np.arctan2(d[..., 1], -d[..., 2]))
    return h, v


def _resample_type_b(h: np.ndarray, v: np.ndarray, table: np.ndarray):
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


# --------------------------------------------------------------------------------------------
# Directions and orientation
# --------------------------------------------------------------------------------------------


def c_gamma_to_direction(c_deg, gamma_deg) -> np.ndarray:
    """Unit vectors (..., 3) in the luminaire frame for angles (C, γ) in degrees."""
    c = np.radians(np.asarray(c_deg, dtype=np.float64))
    g = np.radians(np.asarray(gamma_deg, dtype=np.float64))
    c, g = np.broadcast_arrays(c, g)
    s = np.sin(g)
    return np.stack([s * np.cos(c), s * np.sin(c), -np.cos(g)], axis=-1)


def _local_to_c_gamma(d: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    lx, ly, lz = d[..., 0], d[..., 1], d[..., 2]
    gamma = np.degrees(np.arctan2(np.hypot(lx, ly), -lz))
    c = np.degrees(np.arctan2(ly, lx)) % 360.0
    return c, gamma


def luminaire_rotation(rotation_deg: float, tilt_deg: float = 0.0) -> np.ndarray:
    """3x3 matrix taking luminaire-frame vectors to world vectors.

    ``R = Rz(rotation_deg) @ Rx(tilt_deg)``: first tilt about the luminaire's own x axis
    (C 0°); positive tilt turns the nadir axis (γ = 0) toward C 90°, raising the street-side
    front of the optic; then rotation about the world z axis, anticlockwise seen from above.
    With ``rotation_deg = 0`` the luminaire's C 90° points along world +y.
    """
    r = math.radians(float(rotation_deg))
    t = math.radians(float(tilt_deg))
    rz = np.array([[math.cos(r), -math.sin(r), 0.0], [math.sin(r), math.cos(r), 0.0], [0.0, 0.0, 1.0]])
    rx = np.array([[1.0, 0.0, 0.0], [0.0, math.cos(t), -math.sin(t)], [0.0, math.sin(t), math.cos(t)]])
    return np.ascontiguousarray(rz @ rx)


def world_to_c_gamma(directions_world, rotation: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Angles (C, γ) in degrees of world directions (N, 3) from the luminaire toward points.

    ``rotation`` is the luminaire-to-world matrix of :func:`luminaire_rotation`. Directions need
    not be unit length (zero vectors give C = γ = 0). C is in [0, 360), γ in [0, 180].
    """
    d = np.asarray(directions_world, dtype=np.float64)
    local = d @ np.asarray(rotation, dtype=np.float64)  # row vectors: R^T d
    return _local_to_c_gamma(local)


@numba.njit(cache=True, nogil=True)
def direction_to_c_gamma(rotation, dx, dy, dz):
    """Numba kernel: (C, γ) in degrees of the world direction (dx, dy, dz) for a luminaire whose
    luminaire-to-world matrix is ``rotation`` (3x3 float64). Same result as
    :func:`world_to_c_gamma`."""
    lx = rotation[0, 0] * dx + rotation[1, 0] * dy + rotation[2, 0] * dz
    ly = rotation[0, 1] * dx + rotation[1, 1] * dy + rotation[2, 1] * dz
    lz = rotation[0, 2] * dx + rotation[1, 2] * dy + rotation[2, 2] * dz
    gamma = math.degrees(math.atan2(math.sqrt(lx * lx + ly * ly), -lz))
    c = math.degrees(math.atan2(ly, lx))
    if c < 0.0:
        c += 360.0
    if c >= 360.0:
        c -= 360.0
    return c, gamma


# --------------------------------------------------------------------------------------------
# Intensity lookup
# --------------------------------------------------------------------------------------------


@numba.njit(cache=True, nogil=True)
def _bracket(grid, x):
    n = grid.shape[0]
    if x <= grid[0]:
        return 0, 0.0
    if x >= grid[n - 1]:
        return n - 2, 1.0
    lo = 0
    hi = n - 1
    while hi - lo > 1:
        mid = (lo + hi) // 2
        if grid[mid] <= x:
            lo = mid
        else:
            hi = mid
    return lo, (x - grid[lo]) / (grid[lo + 1] - grid[lo])


@numba.njit(cache=True, nogil=True)
def intensity_lookup(c_grid, g_grid, cd_table, c, g):
    """Numba kernel: luminous intensity, cd, at (C, γ) degrees by bilinear interpolation.

    ``c_grid`` (n_c,) runs 0..360 inclusive, ``g_grid`` (n_g,) over the measured γ range,
    ``cd_table`` is (n_c, n_g); the arrays of :func:`lookup_tables`. C is periodic; γ outside
    ``g_grid`` (the unmeasured hemisphere) gives 0.
    """
    ng = g_grid.shape[0]
    if not (g >= g_grid[0] - 1e-9 and g <= g_grid[ng - 1] + 1e-9):
        return 0.0
    cc = c % 360.0
    if cc < 0.0:
        cc += 360.0
    i, u = _bracket(c_grid, cc)
    j, v = _bracket(g_grid, g)
    a = (1.0 - v) * cd_table[i, j] + v * cd_table[i, j + 1]
    b = (1.0 - v) * cd_table[i + 1, j] + v * cd_table[i + 1, j + 1]
    return (1.0 - u) * a + u * b


@numba.njit(cache=True, nogil=True)
def _lookup_many(c_grid, g_grid, cd_table, c, g, out):
    for k in range(c.shape[0]):
        out[k] = intensity_lookup(c_grid, g_grid, cd_table, c[k], g[k])


@numba.njit(cache=True, nogil=True)
def intensity_toward(rotation, c_grid, g_grid, cd_table, dx, dy, dz):
    """Numba kernel: intensity, cd, of an oriented luminaire toward world direction (dx, dy, dz)."""
    c, g = direction_to_c_gamma(rotation, dx, dy, dz)
    return intensity_lookup(c_grid, g_grid, cd_table, c, g)


def lookup_tables(photometry: Photometry) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """``(c_grid, g_grid, cd_table)`` as contiguous float64 arrays for the numba kernels."""
    return (
        np.ascontiguousarray(photometry.c_deg),
        np.ascontiguousarray(photometry.gamma_deg),
        np.ascontiguousarray(photometry.candela_cd),
    )


def intensity_cd(photometry: Photometry, c_deg, gamma_deg):
    """Luminous intensity, cd, at angles (C, γ) in degrees (broadcast arrays or scalars),
    by bilinear interpolation in C (periodic) and γ; 0 outside the measured γ range."""
    c, g = np.broadcast_arrays(np.asarray(c_deg, dtype=np.float64), np.asarray(gamma_deg, dtype=np.float64))
    out = np.empty(c.size, dtype=np.float64)
    _lookup_many(*lookup_tables(photometry), np.ascontiguousarray(c).ravel(), np.ascontiguousarray(g).ravel(), out)
    out = out.reshape(c.shape)
    return float(out) if out.ndim == 0 else out


# --------------------------------------------------------------------------------------------
# Flux and summary quantities
# --------------------------------------------------------------------------------------------


def _gamma_weights(g_deg: np.ndarray, lo_deg: float, hi_deg: float) -> np.ndarray:
    """Weights w (n_g,) with Σ w_j f_j = ∫ f̂(γ) sin γ dγ over [lo, hi] (radians), f̂ the
    piecewise-linear interpolant of f_j: exact for the lookup's interpolation in γ.

    On a cell [a, b] with Δ = b − a, ∫ (γ − a) sin γ dγ = [sin γ − (γ − a) cos γ] and
    ∫ sin γ dγ = [−cos γ] (elementary integrals).
    """
    g = np.radians(np.asarray(g_deg, dtype=np.float64))
    lo, hi = math.radians(lo_deg), math.radians(hi_deg)
    a, b = g[:-1], g[1:]
    s = np.clip(a, lo, hi)
    e = np.clip(b, lo, hi)
    delta = b - a
    p = (np.sin(e) - (e - a) * np.cos(e)) - (np.sin(s) - (s - a) * np.cos(s))
    total = np.cos(s) - np.cos(e)
    w = np.zeros(g.size)
    np.add.at(w, np.arange(1, g.size), p / delta)
    np.add.at(w, np.arange(0, g.size - 1), total - p / delta)
    return w


def _c_weights(c_deg: np.ndarray) -> np.ndarray:
    """Trapezoid weights in C (radians): exact for the interpolant, which is linear in C."""
    dc = np.diff(np.radians(np.asarray(c_deg, dtype=np.float64)))
    w = np.zeros(len(c_deg))
    w[:-1] += dc / 2.0
    w[1:] += dc / 2.0
    return w


def zonal_flux_lm(photometry: Photometry, gamma_lo_deg: float = 0.0, gamma_hi_deg: float = 180.0) -> float:
    """Luminous flux, lm, emitted between γ = ``gamma_lo_deg`` and ``gamma_hi_deg``:
    Φ = ∫∫ I(C, γ) sin γ dγ dC of the bilinear interpolant (the one :func:`intensity_cd`
    evaluates), integrated exactly cell by cell."""
    lo = max(gamma_lo_deg, float(photometry.gamma_deg[0]))
    hi = min(gamma_hi_deg, float(photometry.gamma_deg[-1]))
    if hi <= lo:
        return 0.0
    wc = _c_weights(photometry.c_deg)
    wg = _gamma_weights(photometry.gamma_deg, lo, hi)
    return float(wc @ photometry.candela_cd @ wg)


def luminous_flux_lm(photometry: Photometry) -> float:
    """Total luminous flux, lm: Φ = ∮ I dΩ (the exact integral of the interpolated table).

    For relative photometry compare with ``photometry.rated_lumens_lm`` (the ratio is the
    light output ratio); for absolute photometry there is no rated flux to compare with."""
    return zonal_flux_lm(photometry, 0.0, 180.0)


def ulor(photometry: Photometry) -> float:
    """Upward fraction of the luminaire's flux: Φ(γ > 90°) / Φ(all), dimensionless.

    This is the upward light output ratio when the rated lamp flux equals the luminaire flux
    (LOR = 1, as in the built-in files); CIE's ULOR proper is upward flux over lamp flux,
    i.e. ``ulor × flux / rated lumens`` for relative photometry. 0 for an all-zero table.
    """
    total = luminous_flux_lm(photometry)
    if total <= 0:
        return 0.0
    return zonal_flux_lm(photometry, 90.0, 180.0) / total


def peak_intensity(photometry: Photometry) -> tuple[float, float, float]:
    """``(peak_cd, c_deg, gamma_deg)``: the largest tabulated intensity and where it is (the
    lowest C, then lowest γ, when several directions share it)."""
    t = photometry.candela_cd
    i, j = np.unravel_index(int(np.argmax(t)), t.shape)
    return float(t[i, j]), float(photometry.c_deg[i]), float(photometry.gamma_deg[j])


def scale_to_lumens(photometry: Photometry, lumens: float) -> Photometry:
    """A copy scaled for a lumens override (e.g. a scene's lamp lumens).

    * Relative photometry: ``lumens`` replaces the rated lamp flux; intensities scale by
      ``lumens / rated_lumens_lm`` (the light output ratio is kept, so the luminaire emits
      LOR × lumens) and ``lumens_per_lamp`` becomes ``lumens / lamp_count``.
    * Absolute photometry: ``lumens`` is the luminaire's emitted flux; intensities scale by
      ``lumens / luminous_flux_lm``; the copy stays absolute.

    Raises ``ValueError`` for ``lumens ≤ 0`` or an absolute file emitting no flux (callers
    validate user input and report it as :class:`InputError`).
    """
    lumens = float(lumens)
    if not (lumens > 0 and math.isfinite(lumens)):
        raise ValueError(f"lumens must be a positive number, got {lumens}")
    if photometry.is_absolute:
        flux = luminous_flux_lm(photometry)
        if flux <= 0:
            raise ValueError(f"{photometry.source}: the distribution emits no flux; cannot scale it")
        k = lumens / flux
        per_lamp = photometry.lumens_per_lamp
    else:
        k = lumens / photometry.rated_lumens_lm
        per_lamp = lumens / photometry.lamp_count
    return replace(
        photometry,
        candela_cd=_frozen(photometry.candela_cd * k),
        file_candela_cd=_frozen(photometry.file_candela_cd * k),
        lumens_per_lamp=per_lamp,
    )


def tilt_factor(photometry: Photometry, tilt_deg: float) -> float:
    """Candela multiplying factor for a luminaire tilted by ``tilt_deg`` (1 without tilt data).

    Linear in the file's tilt angles, held at the end values outside them; the sign of the tilt
    is ignored."""
    if photometry.tilt is None:
        return 1.0
    t = photometry.tilt
    return float(np.interp(abs(float(tilt_deg)), t.angles_deg, t.factors))


def apply_tilt(photometry: Photometry, tilt_deg: float) -> Photometry:
    """A copy with the tilt multiplying factor for ``tilt_deg`` folded into the candela."""
    k = tilt_factor(photometry, tilt_deg)
    if k == 1.0:
        return photometry
    return replace(
        photometry,
        candela_cd=_frozen(photometry.candela_cd * k),
        file_candela_cd=_frozen(photometry.file_candela_cd * k),
    )


# --------------------------------------------------------------------------------------------
# Built-in files and loading by reference
# --------------------------------------------------------------------------------------------


def builtin_photometry_ids() -> list[str]:
    """Ids of the generic distributions shipped in ``render/data/photometry``."""
    return sorted(p.stem for p in BUILTIN_PHOTOMETRY_DIR.glob("*.ies"))


def load_photometry(ref: str | os.PathLike, base_dir: str | os.PathLike | None = None) -> Photometry:
    """Load a built-in distribution by id (see :func:`builtin_photometry_ids`) or an LM-63 file
    by path (relative paths are taken from ``base_dir``, default the current folder)."""
    text = str(ref)
    ids = builtin_photometry_ids()
    if text in ids:
        return read_lm63(BUILTIN_PHOTOMETRY_DIR / f"{text}.ies")
    path = Path(text)
    if not path.is_absolute() and base_dir is not None:
        path = Path(base_dir) / path
    if path.is_file():
        return read_lm63(path)
    raise InputError(
        Problem(
            text,
            "",
            f"no built-in photometry of that name and no file at {path}; built-in ids are "
            f"{', '.join(ids)}{did_you_mean(text, ids)}",
        )
    )


# --------------------------------------------------------------------------------------------
# Summary and plot
# --------------------------------------------------------------------------------------------


def summarise(photometry: Photometry) -> dict:
    """Key figures of a distribution (flux by exact integration of the interpolated table)."""
    ph = photometry
    flux = luminous_flux_lm(ph)
    rated = ph.rated_lumens_lm
    peak_cd, peak_c, peak_g = peak_intensity(ph)
    return {
        "source": ph.source,
        "name": ph.name,
        "edition": ph.edition,
        "photometric_type": ph.photometric_type,
        "symmetry": ph.symmetry,
        "vertical_range": ph.vertical_range,
        "absolute": ph.is_absolute,
        "lamp_count": ph.lamp_count,
        "flux_lm": flux,
        "rated_lm": rated,
        "flux_ratio": (flux / rated) if rated else None,
        "upward_flux_lm": zonal_flux_lm(ph, 90.0, 180.0),
        "ulor": ulor(ph),
        "peak_cd": peak_cd,
        "peak_c_deg": peak_c,
        "peak_gamma_deg": peak_g,
        "input_watts": ph.input_watts,
        "efficacy_lm_per_w": (flux / ph.input_watts) if ph.input_watts > 0 else None,
        "opening_shape": ph.opening_shape,
        "opening_width_m": ph.opening_width_m,
        "opening_length_m": ph.opening_length_m,
        "opening_height_m": ph.opening_height_m,
        "tilt": None if ph.tilt is None else ph.tilt.origin,
        "manufacturer": ph.keywords.get("MANUFAC", ""),
        "luminaire": ph.keywords.get("LUMINAIRE", ""),
    }


def format_summary(summary: dict) -> str:
    """Plain-text rendering of :func:`summarise` for the command line."""
    s = summary
    lines = [
        f"photometry      {s['name']}  ({s['source']})",
        f"format          {s['edition']}, type {s['photometric_type']}, "
        f"{_SYMMETRY_TEXT.get(s['symmetry'], s['symmetry'])}, {_VERTICAL_TEXT[s['vertical_range']]}",
    ]
    if s.get("luminaire"):
        lines.append(f"luminaire       {s['luminaire'].splitlines()[0]}")
    if s.get("manufacturer"):
        lines.append(f"maker           {s['manufacturer'].splitlines()[0]}")
    lines.append(f"flux            {s['flux_lm']:.1f} lm (integrated over the sphere)")
    if s["absolute"]:
        lines.append("rated lumens    none: absolute photometry (the values are the luminaire's own)")
    else:
        lines.append(
            f"rated lumens    {s['rated_lm']:.1f} lm ({s['lamp_count']} lamp(s)); flux / rated = {s['flux_ratio']:.4f}"
        )
    lines.append(f"upward          {s['upward_flux_lm']:.1f} lm; ULOR (upward / total) = {s['ulor']:.4f}")
    lines.append(f"peak            {s['peak_cd']:.1f} cd at C {s['peak_c_deg']:.1f}°, γ {s['peak_gamma_deg']:.1f}°")
    if s["input_watts"] > 0:
        lines.append(f"input power     {s['input_watts']:.1f} W; {s['efficacy_lm_per_w']:.1f} lm/W")
    else:
        lines.append("input power     not given")
    lines.append(
        f"opening         {s['opening_shape']}, width {s['opening_width_m']:.3f} m, "
        f"length {s['opening_length_m']:.3f} m, height {s['opening_height_m']:.3f} m"
    )
    lines.append(f"tilt data       {s['tilt'] or 'none'}")
    return "\n".join(lines)


def plot_polar(photometry: Photometry, path: str | os.PathLike, title: str | None = None) -> Path:
    """Polar intensity diagram of the C 0–180 and C 90–270 planes, written as PNG atomically.

    γ = 0 (nadir) points down; C 0 / C 90 are drawn to the right, C 180 / C 270 to the left.
    Relative photometry is drawn in cd per 1000 lm of rated lamp flux, absolute photometry in cd.
    """
    from matplotlib.backends.backend_agg import FigureCanvasAgg
    from matplotlib.figure import Figure

    ph = photometry
    path = Path(path)
    g = np.linspace(0.0, 180.0, 361)
    if ph.is_absolute:
        k, unit = 1.0, "cd"
    else:
        k, unit = 1000.0 / ph.rated_lumens_lm, "cd per 1000 lm (rated lamp flux)"
    fig = Figure(figsize=(6.0, 6.4), dpi=120)
    FigureCanvasAgg(fig)
    ax = fig.add_subplot(projection="polar")
    ax.set_theta_zero_location("S")
    ax.set_theta_direction(1)
    for (c_right, c_left), style, label in (((0.0, 180.0), "-", "C 0 – C 180"), ((90.0, 270.0), "--", "C 90 – C 270")):
        right = intensity_cd(ph, c_right, g) * k
        left = intensity_cd(ph, c_left, g) * k
        theta = np.radians(np.concatenate([-g[::-1], g]))
        r = np.concatenate([left[::-1], right])
        ax.plot(theta, r, style, lw=1.6, label=label)
    ax.set_thetagrids(range(0, 360, 30), labels=[f"{a if a <= 180 else 360 - a}°" for a in range(0, 360, 30)])
    ax.set_ylim(bottom=0)
    ax.set_rlabel_position(100)
    ax.set_title(title or ph.name, pad=14)
    ax.legend(loc="upper right", bbox_to_anchor=(1.12, 1.08), fontsize=8)
    fig.text(0.5, 0.02, f"radius: {unit}; γ = 0° at the bottom (nadir)", ha="center", fontsize=8)
    save_figure(fig, path)
    return path


def describe_photometry_file(
    ref: str | os.PathLike, base_dir: str | os.PathLike | None = None, plot_path: str | os.PathLike | None = None
) -> str:
    """What ``lampcast photometry FILE`` prints: load ``ref`` (built-in id or path), optionally
    write a polar plot to ``plot_path``, and return the formatted summary."""
    ph = load_photometry(ref, base_dir=base_dir)
    text = format_summary(summarise(ph))
    if plot_path is not None:
        written = plot_polar(ph, plot_path)
        text += f"\npolar plot      {written}"
    return text
