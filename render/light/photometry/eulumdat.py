"""EULUMDAT reader: the one place that parses EULUMDAT (``.ldt``) photometric text.

:func:`read_eulumdat` reads an EULUMDAT file, the open trade format for luminaire photometry
proposed by A. W. Stockmar (1990), and returns the same
:class:`~render.light.photometry.model.Photometry` as the LM-63 reader: an absolute luminous
intensity table in candela over the full C-γ sphere (conventions in :mod:`.model`).

Line layout
-----------
One field per line, in this order (line numbers as in the file, n = number of lamp sets):

====  =====================================================================================
1     company identification / data bank / version (free text)
2     type indicator Ityp: 0 point source without symmetry, 1 symmetric about the vertical
      axis, 2 linear luminaire, 3 point source with other symmetry
3     symmetry indicator Isym 0–4 (below)
4     number of C-planes between 0° and 360°, Mc
5     distance between C-planes Dc, degrees (0: not equidistant)
6     number of luminous intensities per C-plane (γ angles), Ng
7     distance between γ angles Dg, degrees (0: not equidistant)
8–12  measurement report number, luminaire name, luminaire number, file name, date/user
13–15 length (or diameter), width (0: circular), height of the luminaire, mm
16–17 length (or diameter), width (0: circular) of the luminous area, mm
18–21 height of the luminous area in the C0, C90, C180, C270 planes, mm
22    downward flux fraction DFF, %
23    light output ratio of the luminaire LORL, %
24    conversion factor for the luminous intensities (CFLI)
25    tilt of the luminaire during measurement, degrees (road lighting)
26    number n of standard sets of lamps, then n lines each of: number of lamps, type of
      lamps, total luminous flux of the lamps (lm), colour appearance / colour temperature,
      colour rendering group / index, wattage including ballast (W)
      (26a–26f, i.e. 6 n lines)
+10   direct ratios for room indices k = 0.6 … 5
+Mc   the C angles, degrees (all Mc, whatever the symmetry)
+Ng   the γ angles, degrees
rest  luminous intensities, cd/klm: Ng values per stored C-plane, planes in order
====  =====================================================================================

Stored C-planes, numbered 1..Mc as listed (Mc1..Mc2, wrapping past Mc for Isym 3):

* Isym 0, no symmetry: planes 1..Mc;
* Isym 1, symmetric about the vertical axis: plane 1 only;
* Isym 2, symmetric to the C0–C180 plane: planes 1..Mc/2+1 (C0 to C180);
* Isym 3, symmetric to the C90–C270 plane: planes 3Mc/4+1 .. 3Mc/4+1+Mc/2 (C270 through C0
  to C90);
* Isym 4, symmetric to the C0–C180 and C90–C270 planes: planes 1..Mc/4+1 (C0 to C90).

The stored planes are mirrored to the full C range as in the LM-63 reader (Isym 1 is
"rotational", 2 "bilateral-0-180", 3 "bilateral-90-270", 4 "quadrant", 0 "none"). lampcast
requires the C angles to start at 0°, increase and stay below 360°, and the symmetry planes
(C90, C180, C270) to sit at the plane numbers the symmetry implies; γ angles must increase,
start at 0° or 90° and end at 90° or 180° (outside them the intensity is 0 cd).

Decimal commas (``12,5``) are read as decimal points, as many files written in Europe use them.
Every numeric line holds exactly one number.

Absolute intensities
--------------------
The table is relative, in cd per 1000 lm of lamp flux. lampcast makes it absolute with the
**first** lamp set (the standard set; further sets are alternatives):

    I (cd) = I (cd/klm) × CFLI × Φ / 1000,

where Φ is that set's "total luminous flux of lamps" (already the flux of all its lamps, so
the number of lamps is *not* multiplied in again) and CFLI the conversion factor of line 24
(a CFLI of 0, written by some programs for "none", counts as 1). A *negative* number of lamps
marks absolute photometry in some LED files (**from memory**): Φ is then the luminaire's own
flux, the conversion is the same, and the result is absolute photometry
(``lumens_per_lamp = -1``, no rated lamp flux). Otherwise ``lamp_count`` is the number of lamps
and ``lumens_per_lamp`` Φ / number of lamps, so that the rated flux is Φ.

Hostile and broken input
------------------------
As the LM-63 reader: the file is read with :func:`render.fileio.read_user_bytes` as a
"photometric file" (regular, size-capped; with ``allowed_root`` it must lie inside that folder);
the counts are checked against :data:`render.limits.MAX_EULUMDAT_ANGLES` and
:data:`~render.limits.MAX_EULUMDAT_LAMP_SETS` and against the number of lines actually present
before any array of their size is made; intensities after the factors must be finite, ≥ 0 and
at most :data:`render.light.photometry.lm63.LARGEST_INTENSITY_CD`. Every problem is an
:class:`~render.errors.InputError` naming the file and the line. A file that looks like LM-63
or XML is refused with a message saying so.

References
----------
- A. W. Stockmar, "EULUMDAT – ein Leuchtendatenformat für den europäischen Beleuchtungsplaner",
  Tagungsband Licht '90 (1990), and "EULUMDAT/2 – Extended version of a well established
  luminaire data format", CIBSE National Lighting Conference (1998): the format (not consulted
  directly).
- P. Bourke, "ldt EULUMDAT file format" (2021), and the field list of the open-source Rust
  ``eulumdat`` crate documentation and the R ``lighting`` package's ``ld_data`` description:
  the line order 1–25, the lamp-set block, direct ratios, angles and intensities. The stored
  planes Mc1..Mc2 per symmetry indicator as commonly published with the format description.
- The meaning of a negative number of lamps and of a CFLI of 0: **from memory**.
"""

from __future__ import annotations

import math
import os
from pathlib import Path

import numpy as np

from render.errors import input_error
from render.fileio import read_user_bytes
from render.light.photometry.formats import FORMAT_NAMES, guess_photometric_format
from render.light.photometry.lm63 import (
    _check_increasing,
    _check_intensities,
    _decode,
    _expand_type_c,
    _near,
    _shown,
    require_inside,
)
from render.light.photometry.model import Photometry, frozen_array
from render.limits import MAX_EULUMDAT_ANGLES, MAX_EULUMDAT_LAMP_SETS, check_count

__all__ = ["parse_eulumdat", "read_eulumdat"]

_SYMMETRY = {0: "none", 1: "rotational", 2: "bilateral-0-180", 3: "bilateral-90-270", 4: "quadrant"}
_N_HEADER = 26  # lines 1..26 (26 = number of lamp sets)
_N_DIRECT_RATIOS = 10
_CHUNK = 65_536  # numeric lines converted per step (bounds the temporary list of strings)


def read_eulumdat(path: str | os.PathLike, *, allowed_root: str | os.PathLike | None = None) -> Photometry:
    """Read an EULUMDAT photometric file (see the module notes for the format).

    With ``allowed_root`` (strict paths) the file must lie inside that folder once symbolic links
    are followed.

    Raises
    ------
    InputError
        If the file cannot be read or is malformed (names the file and line).
    """
    path = Path(path)
    require_inside(path, allowed_root)
    return parse_eulumdat(_decode(read_user_bytes(path, "photometric file")), source=str(path))


class _Lines:
    """The file's lines (numbered from 1), read one field at a time.

    The text is kept as UTF-8 bytes with line breaks (CR LF, CR, LF) made LF, indexed by the
    positions of its line breaks (one integer per line, no Python object per line); a line is
    decoded only when read, numeric lines in chunks."""

    def __init__(self, text: str, source: str):
        data = text.replace("\r\n", "\n").replace("\r", "\n").encode("utf-8", "surrogatepass")
        end = len(data.rstrip())  # trailing blank lines (and a final line break) start no line
        self.data = data
        self.breaks = np.flatnonzero(np.frombuffer(data, dtype=np.uint8) == 10)
        self.n_lines = int(np.searchsorted(self.breaks, end)) + (1 if end > 0 else 0)
        self.source = source
        self.pos = 0

    def _span(self, first: int, stop: int) -> str:
        """Lines ``first`` .. ``stop - 1`` (0-based) as one text joined by LF."""
        a = 0 if first == 0 else int(self.breaks[first - 1]) + 1
        b = int(self.breaks[stop - 1]) if stop - 1 < self.breaks.size else len(self.data)
        return self.data[a:b].decode("utf-8", "surrogatepass")

    def error(self, line: int, message: str):
        return input_error(self.source, f"line {line}", message)

    def text(self, what: str) -> tuple[str, int]:
        if self.pos >= self.n_lines:
            raise self.error(max(self.n_lines, 1), f"the file ends before the {what} (line {self.pos + 1})")
        self.pos += 1
        return self._span(self.pos - 1, self.pos).strip(), self.pos

    def number(self, what: str) -> tuple[float, int]:
        raw, line = self.text(what)
        value = _to_float(raw)
        if value is None:
            raise self.error(line, f"expected the {what} (one number on the line), found {_shown(raw)}")
        return value, line

    def integer(self, what: str) -> tuple[int, int]:
        value, line = self.number(what)
        if abs(value - round(value)) > 1e-9:
            raise self.error(line, f"expected the {what} (a whole number), found {value:g}")
        return int(round(value)), line

    def count(self, what: str, minimum: int, limit: int) -> tuple[int, int]:
        value, line = self.integer(what)
        check_count(value, limit, self.source, f"line {line}", f"the {what}", minimum)
        return value, line

    def numbers(self, n: int, what: str) -> tuple[np.ndarray, int]:
        """The next ``n`` lines as finite floats, and the line number of the first."""
        first = self.pos
        if first + n > self.n_lines:  # pragma: no cover - counts are checked before
            raise self.error(self.n_lines, f"the file ends before the {what}")
        values = np.empty(n, dtype=np.float64)
        for a in range(0, n, _CHUNK):
            b = min(a + _CHUNK, n)
            lines = self._span(first + a, first + b).split("\n")
            try:
                values[a:b] = np.fromiter((float(x.strip().replace(",", ".")) for x in lines), np.float64, b - a)
                ok = bool(np.all(np.isfinite(values[a:b])))
            except ValueError:
                ok = False
            if not ok:
                for k, raw in enumerate(lines):
                    if _to_float(raw.strip()) is None:
                        raise self.error(
                            first + a + k + 1,
                            f"expected the {what} (value {a + k + 1} of {n}, one finite number on the line), "
                            f"found {_shown(raw.strip())}",
                        )
                raise self.error(first + a + 1, f"expected the {what}, one finite number per line")  # pragma: no cover
        self.pos += n
        return values, first + 1


def _to_float(text: str) -> float | None:
    """One finite number (a decimal comma allowed), else ``None``."""
    if not text or len(text.split()) != 1:
        return None
    if "," in text and "." not in text and text.count(",") == 1:
        text = text.replace(",", ".")
    try:
        value = float(text)
    except ValueError:
        return None
    return value if math.isfinite(value) else None


def parse_eulumdat(text: str, source: str = "<eulumdat text>") -> Photometry:
    """Parse EULUMDAT text; ``source`` names the input in error messages."""
    if not text.strip():
        raise input_error(source, "", "the file is empty; expected EULUMDAT photometric data")
    guess = guess_photometric_format(text)
    if guess in ("lm63", "xml"):
        raise input_error(
            source,
            "line 1",
            f"this looks like {FORMAT_NAMES[guess]}, not EULUMDAT (.ldt); "
            + ("give it the extension .ies" if guess == "lm63" else "lampcast reads LM-63 and EULUMDAT files"),
        )
    f = _Lines(text, source)
    err = f.error

    company, _ = f.text("company identification")
    ityp, ln = f.integer("type indicator Ityp")
    if ityp not in (0, 1, 2, 3):
        raise err(ln, f"expected a type indicator Ityp of 0, 1, 2 or 3, found {ityp}")
    isym, ln_sym = f.integer("symmetry indicator Isym")
    if isym not in _SYMMETRY:
        raise err(ln_sym, f"expected a symmetry indicator Isym of 0 to 4, found {isym}")
    mc, ln_mc = f.count("number of C-planes Mc", 1, MAX_EULUMDAT_ANGLES)
    dc, ln = f.number("distance between C-planes Dc")
    if dc < 0:
        raise err(ln, f"expected a distance between C-planes ≥ 0, found {dc:g}")
    ng, ln_ng = f.count("number of γ angles Ng", 2, MAX_EULUMDAT_ANGLES)
    dg, ln = f.number("distance between γ angles Dg")
    if dg < 0:
        raise err(ln, f"expected a distance between γ angles ≥ 0, found {dg:g}")
    divisor = {2: 2, 3: 4, 4: 4}.get(isym, 1)
    if mc % divisor:
        raise err(
            ln_mc,
            f"symmetry indicator {isym} (line {ln_sym}) needs a number of C-planes divisible by {divisor}, found {mc}",
        )
    report, _ = f.text("measurement report number")
    luminaire, _ = f.text("luminaire name")
    number, _ = f.text("luminaire number")
    file_name, _ = f.text("file name")
    date_user, _ = f.text("date/user")
    sizes = {}
    for what in (
        "luminaire length or diameter (mm)",
        "luminaire width (mm)",
        "luminaire height (mm)",
        "luminous area length or diameter (mm)",
        "luminous area width (mm)",
        "luminous area height in the C0 plane (mm)",
        "luminous area height in the C90 plane (mm)",
        "luminous area height in the C180 plane (mm)",
        "luminous area height in the C270 plane (mm)",
    ):
        value, ln = f.number(what)
        if value < 0:
            raise err(ln, f"expected the {what} ≥ 0, found {value:g}")
        sizes[what] = value
    dff, ln = f.number("downward flux fraction DFF (%)")
    lorl, ln = f.number("light output ratio LORL (%)")
    cfli, ln_cfli = f.number("conversion factor for luminous intensities CFLI")
    if cfli < 0:
        raise err(ln_cfli, f"expected a conversion factor ≥ 0 (0: none), found {cfli:g}")
    cfli_used = cfli if cfli > 0 else 1.0
    tilt_deg, _ = f.number("tilt of the luminaire during measurement (degrees)")
    n_sets, ln_sets = f.count("number of standard sets of lamps", 1, MAX_EULUMDAT_LAMP_SETS)

    # Every line the counts call for must be present before any array of their size is made.
    if isym == 1:
        stored = 1
    elif isym == 0:
        stored = mc
    elif isym == 4:
        stored = mc // 4 + 1
    else:
        stored = mc // 2 + 1
    needed = _N_HEADER + 6 * n_sets + _N_DIRECT_RATIOS + mc + ng + stored * ng
    have = f.n_lines
    if needed > have:
        raise err(
            max(have, 1),
            f"the file ends at line {have:,} but the counts call for {needed:,} lines "
            f"({n_sets} lamp set(s) on line {ln_sets}, {_N_DIRECT_RATIOS} direct ratios, {mc} C angles "
            f"on line {ln_mc}, {ng} γ angles on line {ln_ng}, {stored} stored C-plane(s) × {ng} "
            f"intensities for symmetry {isym}); the data are truncated or a count is wrong",
        )

    lamp_numbers, ln_lamps = f.numbers(n_sets, "number of lamps")
    lamp_types = [f.text("type of lamps")[0] for _ in range(n_sets)]
    fluxes, ln_flux = f.numbers(n_sets, "total luminous flux of lamps (lm)")
    colours = [f.text("colour appearance")[0] for _ in range(n_sets)]
    cris = [f.text("colour rendering")[0] for _ in range(n_sets)]
    watts, ln_watts = f.numbers(n_sets, "wattage including ballast (W)")
    f.numbers(_N_DIRECT_RATIOS, "direct ratios")
    c_angles, ln_c = f.numbers(mc, "C angles")
    g_angles, ln_g = f.numbers(ng, "γ angles")
    values, ln_cd = f.numbers(stored * ng, "luminous intensities (cd/klm)")
    if f.pos < have:
        raise err(
            f.pos + 1,
            f"{have - f.pos:,} line(s) left after the {stored} × {ng} luminous intensities; the counts "
            f"(Mc on line {ln_mc}, Ng on line {ln_ng}, Isym on line {ln_sym}, lamp sets on line "
            f"{ln_sets}) do not match the data",
        )

    # --- lamp set 1 ------------------------------------------------------------------------
    n_lamps = float(lamp_numbers[0])
    if n_lamps == 0 or abs(n_lamps - round(n_lamps)) > 1e-9:
        raise err(ln_lamps, f"expected a whole, non-zero number of lamps, found {n_lamps:g}")
    flux = float(fluxes[0])
    if not flux > 0:
        raise err(ln_flux, f"expected a total luminous flux of lamps > 0 lm, found {flux:g}")
    if np.any(watts < 0):
        k = int(np.flatnonzero(watts < 0)[0])
        raise err(ln_watts + k, f"expected a wattage ≥ 0, found {watts[k]:g}")

    # --- angles ------------------------------------------------------------------------------
    c_lines = np.arange(ln_c, ln_c + mc)
    g_lines = np.arange(ln_g, ln_g + ng)
    _check_increasing(c_angles, c_lines, "C", source)
    _check_increasing(g_angles, g_lines, "γ", source)
    if not _near(c_angles[0], 0.0):
        raise err(ln_c, f"the C angles must start at 0 degrees, found {c_angles[0]:g}")
    if c_angles[-1] >= 360.0 - 1e-6:
        raise err(ln_c + mc - 1, f"the C angles must stay below 360 degrees, found {c_angles[-1]:g}")
    for index, angle in {2: {mc // 2: 180.0}, 3: {mc // 4: 90.0, 3 * mc // 4: 270.0}, 4: {mc // 4: 90.0}}.get(
        isym, {}
    ).items():
        if not _near(c_angles[index], angle):
            raise err(
                ln_c + index,
                f"C angle {index + 1} must be {angle:g} degrees for symmetry indicator {isym} "
                f"(line {ln_sym}), found {c_angles[index]:g}",
            )
    if isym == 0 and mc > 1 and not c_angles[-1] > 180.0 + 1e-6:
        raise err(
            ln_c + mc - 1,
            f"without symmetry (Isym 0, line {ln_sym}) the C angles must go beyond 180 degrees "
            f"(they cover 0 to below 360), found a last C angle of {c_angles[-1]:g}",
        )
    if not (_near(g_angles[0], 0.0) or _near(g_angles[0], 90.0)):
        raise err(ln_g, f"the γ angles must start at 0 or 90 degrees, found {g_angles[0]:g}")
    if not (_near(g_angles[-1], 90.0) or _near(g_angles[-1], 180.0)):
        raise err(ln_g + ng - 1, f"the γ angles must end at 90 or 180 degrees, found {g_angles[-1]:g}")

    # --- intensities ---------------------------------------------------------------------------
    cd_lines = np.arange(ln_cd, ln_cd + stored * ng)
    bad = np.flatnonzero(values < 0)
    if bad.size:
        k = int(bad[0])
        raise err(int(cd_lines[k]), f"negative luminous intensity {values[k]:g} cd/klm; expected ≥ 0")
    scale = cfli_used * flux / 1000.0
    factors_text = f"conversion factor {cfli_used:g} × lamp flux {flux:g} lm / 1000"
    if not (math.isfinite(scale) and scale > 0):
        raise err(ln_flux, f"the {factors_text} is {scale:g}; expected a finite number > 0")
    with np.errstate(over="ignore", under="ignore"):
        table = values.reshape(stored, ng) * scale
    _check_intensities(table, values, cd_lines, scale, factors_text, None, source)

    # Stored planes in the LM-63 layout (horizontal angles and rows) for the common expansion.
    if isym == 1:
        h = np.array([0.0])
    elif isym == 3:
        # planes C270 .. C360/C0 .. C90; mirrored about the C90-C270 plane (C -> 180 - C) they
        # are C270 .. C180 .. C90: reversed, the LM-63 range 90..270.
        order = (3 * mc // 4 + np.arange(stored)) % mc
        h = np.mod(180.0 - c_angles[order], 360.0)[::-1]
        h[-1] = 270.0
        table = table[::-1]
    else:
        h = c_angles[:stored].copy()
    c_full, table_full, symmetry = _expand_type_c(h, table)
    if isym == 0 and mc == 1:
        symmetry = "rotational"

    absolute = n_lamps < 0
    count = int(abs(round(n_lamps)))
    length, width = sizes["luminous area length or diameter (mm)"], sizes["luminous area width (mm)"]
    heights = [sizes[k] for k in sizes if k.startswith("luminous area height")]
    if length == 0 and width == 0:
        shape = "point"
    elif width == 0:
        shape, width = "circular", length
    else:
        shape = "rectangular"
    keywords = {
        "MANUFAC": company,
        "TEST": report,
        "LUMINAIRE": luminaire,
        "LUMCAT": number,
        "FILENAME": file_name,
        "ISSUEDATE": date_user,
        "LAMP": lamp_types[0],
        "COLOUR": colours[0],
        "CRI": cris[0],
        "ITYP": str(ityp),
        "ISYM": str(isym),
        "DFF_PERCENT": f"{dff:g}",
        "LORL_PERCENT": f"{lorl:g}",
        "TILT_DEG": f"{tilt_deg:g}",
    }
    return Photometry(
        c_deg=frozen_array(c_full),
        gamma_deg=frozen_array(g_angles),
        candela_cd=frozen_array(table_full),
        photometric_type="C",
        symmetry=symmetry,
        lamp_count=count,
        lumens_per_lamp=-1.0 if absolute else flux / count,
        candela_multiplier=float(cfli_used),
        ballast_factor=1.0,
        ballast_lamp_factor=1.0,
        input_watts=float(watts[0]),
        opening_width_m=width / 1000.0,
        opening_length_m=length / 1000.0,
        opening_height_m=max(heights) / 1000.0,
        opening_shape=shape,
        edition="EULUMDAT",
        source=source,
        file_horizontal_deg=frozen_array(h),
        file_vertical_deg=frozen_array(g_angles),
        file_candela_cd=frozen_array(table),
        keywords={k: v for k, v in keywords.items() if v},
    )
