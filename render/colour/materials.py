"""Surface materials: diffuse reflectance spectra with their provenance.

A material is one CSV file in ``materials/`` (or in the folder named by the environment variable
``LAMPCAST_MATERIALS``). The file starts with a header block of ``# key: value`` lines that says
what the surface is and where the numbers come from, then a ``wavelength_nm,reflectance`` row
and the samples::

    # id: asphalt-new
    # name: Asphalt road surface, new
    # description: ...
    # category: road
    # source: earthlib 1.1.0 (PyPI), full_library
    # sample_id: rpaeye.010- (earthlib full_library index 5132)
    # licence: ...
    # measured_range_nm: 400-2450
    # completion: 380 and 390 nm rows repeat the 400 nm value
    wavelength_nm,reflectance
    380,0.047079
    ...

Files keep the sampling of their source (e.g. 10 nm); :func:`load_material_csv` moves the
samples onto the lampcast grid with :func:`render.colour.spectra.bin_mean` (joins the samples with
straight lines and takes the mean over each 1 nm bin).

Validation (every rejection is an :class:`~render.errors.InputError` naming the file and line):

* all :data:`REQUIRED_KEYS` present, no key twice, ``id`` equal to the file name without
  ``.csv`` and made of lowercase letters, digits and hyphens;
* ``measured_range_nm`` is ``first-last`` in nm, finite and increasing;
* the column row ``wavelength_nm,reflectance``, then rows of two finite numbers separated by a
  comma, with a decimal point (a semicolon, tab or space separator is an error that names it);
  at most :data:`render.limits.MAX_SPECTRUM_ROWS` rows;
* wavelengths positive and at most :data:`render.limits.MAX_TABLE_WAVELENGTH_NM`, strictly
  increasing (no duplicates), covering 380-780 nm, at least :data:`MIN_ROWS` rows and no gap
  wider than :data:`MAX_STEP_NM` inside 380-780 nm;
* reflectances in [0, 1]. Values within :data:`CLIP_TOLERANCE` outside that interval
  (measurement noise, e.g. -0.003 or 1.004) are clipped to 0 or 1; anything further out is
  an error.

At most :data:`render.limits.MAX_PROBLEMS_PER_FILE` line problems are reported per file.

The photopic luminous reflectance listed by ``lampcast materials`` is the reflectance weighted by
CIE standard illuminant D65 and the CIE 1931 ȳ(λ) = V(λ) function:
``Y/100 = Σ ρ(λ) S_D65(λ) ȳ(λ) / Σ S_D65(λ) ȳ(λ)`` (CIE 15:2004, reflecting object colours).
The listing itself (table, JSON, plots) is in :mod:`render.output.material_sheet`.

References
----------
- CIE 15:2004 *Colorimetry*, 3rd ed.: tristimulus values of reflecting objects, CIE standard
  illuminant D65, the CIE 1931 2° observer.
- The reflectance data's own sources are named in each file's header (``source``,
  ``sample_id``, ``licence``); ``materials/README.md`` lists them.
"""

from __future__ import annotations

import math
import os
import re
from dataclasses import dataclass, field
from functools import lru_cache
from pathlib import Path
from typing import Any

import numpy as np
from numpy.typing import ArrayLike

from render.colour.spectra import WAVELENGTH_MAX_NM, WAVELENGTH_MIN_NM, WAVELENGTHS_NM, bin_mean
from render.errors import InputError, Problem, ProblemList, did_you_mean, input_error
from render.fileio import read_user_text
from render.limits import MAX_PROBLEMS_PER_FILE, MAX_SPECTRUM_ROWS, MAX_TABLE_WAVELENGTH_NM, check_count

#: Header keys every material file must have.
REQUIRED_KEYS = (
    "id",
    "name",
    "description",
    "category",
    "source",
    "sample_id",
    "licence",
    "measured_range_nm",
    "completion",
)
#: The column row that separates the header from the samples.
COLUMNS_ROW = "wavelength_nm,reflectance"
#: Reflectances this far outside [0, 1] are clipped (measurement noise); further out is an error.
CLIP_TOLERANCE = 0.005
#: Fewest sample rows accepted.
MIN_ROWS = 9
#: Widest gap accepted between consecutive samples inside 380-780 nm, nm.
MAX_STEP_NM = 50.0
#: Environment variable naming a materials folder to use instead of the repository's.
MATERIALS_ENV = "LAMPCAST_MATERIALS"

_ID_RE = re.compile(r"^[a-z0-9]+(?:-[a-z0-9]+)*$")
_KEY_RE = re.compile(r"^#\s*([A-Za-z][A-Za-z0-9_]*)\s*:(.*)$")
_RANGE_RE = re.compile(r"^\s*(\d+(?:\.\d+)?)\s*(?:-|–|to)\s*(\d+(?:\.\d+)?)\s*$")
_EXAMPLE_ROWS = f"'{COLUMNS_ROW}' and then rows such as '380,0.0829'"


@dataclass(frozen=True, eq=False)
class Material:
    """A diffuse surface: its reflectance on the lampcast grid and where it comes from.

    Attributes
    ----------
    id, name, description, category
        From the file header; ``id`` equals the file name without ``.csv``.
    source, sample_id, licence
        Dataset (with version), the sample's identifier in it, the data's licence.
    measured_range_nm
        ``(first, last)`` wavelength of the original measurement, nm.
    completion
        How the file's rows were extended to cover 380-780 nm (or why no completion was needed).
    reflectance
        Bin means on :data:`render.colour.spectra.WAVELENGTHS_NM`, shape ``(N_BINS,)``, within [0, 1],
        read-only.
    path
        The file it was read from.
    sample_wavelengths_nm, sample_values
        The file's own rows (after clipping within tolerance), read-only.
    extra
        Header keys beyond :data:`REQUIRED_KEYS` (e.g. ``source_metadata``), verbatim.
    """

    id: str
    name: str
    description: str
    category: str
    source: str
    sample_id: str
    licence: str
    measured_range_nm: tuple[float, float]
    completion: str
    reflectance: np.ndarray
    path: Path
    sample_wavelengths_nm: np.ndarray = field(repr=False, default_factory=lambda: np.zeros(0))
    sample_values: np.ndarray = field(repr=False, default_factory=lambda: np.zeros(0))
    extra: dict[str, str] = field(repr=False, default_factory=dict)

    def to_json(self) -> dict[str, Any]:
        """The material's record in ``lampcast materials --json``.

        Keys: ``id``, ``category``, ``name``, ``luminous_reflectance_d65`` (photopic, Y/100 under
        CIE D65, :func:`luminous_reflectance`, 4 decimals), ``measured_range_nm``
        (``[first, last]``), ``source``, ``sample_id``, ``licence``, ``completion``, ``path``.
        """
        return {
            "id": self.id,
            "category": self.category,
            "name": self.name,
            "luminous_reflectance_d65": round(luminous_reflectance(self.reflectance), 4),
            "measured_range_nm": [self.measured_range_nm[0], self.measured_range_nm[1]],
            "source": self.source,
            "sample_id": self.sample_id,
            "licence": self.licence,
            "completion": self.completion,
            "path": str(self.path),
        }


# --- reading ---------------------------------------------------------------------------------


def _parse_float(text: str) -> float | None:
    try:
        return float(text)
    except ValueError:
        return None


def _shown(text: str, limit: int = 40) -> str:
    """Text of the file as quoted in a message (``repr``, long text cut)."""
    return repr(text) if len(text) <= limit else repr(text[: limit - 1]) + "…"


def _separator(line: str) -> str | None:
    """The separator a data or column row uses instead of one comma, or None."""
    if ";" in line:
        return "';' (semicolons)"
    if any(len(f.split()) > 1 for f in line.split(",")):  # white space between two fields
        return "tabs" if "\t" in line else "spaces"
    return None


def _separator_message(line: str, what: str) -> str:
    decimal = " and the commas look like decimal commas" if "," in line else ""
    return (
        f"fields are separated by {what}{decimal}; a material file separates the wavelength and the "
        f"reflectance by one comma and writes numbers with a decimal point: {_EXAMPLE_ROWS}"
    )


def _number_problem(text: str, name: str, expected: str) -> str | None:
    """What is wrong with a number field, or None if it is a finite number."""
    value = _parse_float(text)
    if value is None:
        return f"{name} {_shown(text)} is not a number; expected {expected}"
    if math.isnan(value) or (math.isinf(value) and "inf" in text.lower()):
        return f"{name} {_shown(text)} is not finite; expected {expected}"
    if math.isinf(value):
        return f"{name} {_shown(text)} is beyond the range of double precision (about ±1.8e308); expected {expected}"
    return None


def load_material_csv(path: str | Path) -> Material:
    """Read and validate one material file (format in the module docstring).

    Parameters
    ----------
    path
        The CSV file.

    Returns
    -------
    Material
        With the reflectance moved onto the grid by :func:`render.colour.spectra.bin_mean`.

    Raises
    ------
    InputError
        Listing every problem found, each naming the file and line and what was expected.
    """
    path = Path(path)
    src = str(path)
    text = read_user_text(path, "material file", "a UTF-8 CSV file")
    lines = text.splitlines()
    if not any(s.strip() for s in lines):
        raise input_error(
            src,
            "line 1",
            f"the file is empty; expected '# key: value' header lines ({', '.join(REQUIRED_KEYS)}), "
            f"then '{COLUMNS_ROW}' and the samples",
        )

    problems = ProblemList(src)
    header: dict[str, str] = {}
    header_line: dict[str, int] = {}
    columns_line = 0
    rows: list[tuple[int, float, float]] = []  # (line, wavelength, value)
    # Counted before the rows are parsed: at most MAX_SPECTRUM_ROWS sample rows after the column row.
    data_lines = [n for n, line in enumerate(lines, start=1) if line.strip() and not line.strip().startswith("#")]
    if data_lines:
        check_count(
            len(data_lines) - 1,
            MAX_SPECTRUM_ROWS,
            src,
            f"lines {data_lines[0]}-{data_lines[-1]}",
            "the number of sample rows",
        )
    separator_reported = False
    cut_short = False

    for number, line in enumerate(lines, start=1):
        if len(problems.items) >= MAX_PROBLEMS_PER_FILE:
            problems.add(
                f"line {number}", f"more than {MAX_PROBLEMS_PER_FILE} problems; the rest of the file was not checked"
            )
            cut_short = True
            break
        stripped = line.strip()
        if not stripped:
            continue
        if not columns_line:
            if stripped.startswith("#"):
                match = _KEY_RE.match(stripped)
                if not match:
                    problems.add(f"line {number}", "expected a header line '# key: value'")
                    continue
                key, value = match.group(1).lower(), match.group(2).strip()
                if key in header:
                    problems.add(f"line {number}", f"key {_shown(key)} given twice (first on line {header_line[key]})")
                    continue
                header[key], header_line[key] = value, number
                continue
            if stripped.replace(" ", "").lower() == COLUMNS_ROW:
                columns_line = number
                continue
            wrong = _separator(stripped)
            if wrong and re.split(r"[\s,;]+", stripped.lower()) == COLUMNS_ROW.split(","):
                # The column row with another separator: say which, once for the file.
                columns_line = number
                problems.add(f"line {number}", _separator_message(stripped, wrong))
                separator_reported = True
                continue
            problems.add(
                f"line {number}",
                f"expected '# key: value' header lines and then the column row '{COLUMNS_ROW}'",
            )
            # Treat the rest as data so that its mistakes are reported too.
            columns_line = -number
        if stripped.startswith("#"):
            problems.add(f"line {number}", "header lines must come before the data rows")
            continue
        wrong = _separator(stripped)
        if wrong:
            if not separator_reported:  # every row is written the same way: one message
                problems.add(f"line {number}", _separator_message(stripped, wrong))
                separator_reported = True
            continue
        fields = [f.strip() for f in stripped.split(",")]
        if len(fields) != 2:
            problems.add(
                f"line {number}", f"expected two numbers 'wavelength_nm,reflectance', got {len(fields)} field(s)"
            )
            continue
        wl_problem = _number_problem(
            fields[0], "wavelength", f"a wavelength in nm between 0 and {MAX_TABLE_WAVELENGTH_NM:,.0f}"
        )
        value_problem = _number_problem(fields[1], "reflectance", "a value in [0, 1]")
        if wl_problem is None:
            wl = float(fields[0])
            if not 0 < wl <= MAX_TABLE_WAVELENGTH_NM:
                wl_problem = (
                    f"wavelength {wl:g} nm is outside 0-{MAX_TABLE_WAVELENGTH_NM:,.0f} nm; expected a "
                    f"positive wavelength in nm of at most {MAX_TABLE_WAVELENGTH_NM:,.0f}"
                )
        for message in (wl_problem, value_problem):
            if message:
                problems.add(f"line {number}", message)
        if wl_problem is None and value_problem is None:
            rows.append((number, float(fields[0]), float(fields[1])))

    if cut_short:  # what follows would judge a file only partly read
        problems.raise_if_any()
    end_of_header = abs(columns_line) if columns_line else len(lines)
    if not columns_line:
        problems.add(f"line {end_of_header}", f"no column row '{COLUMNS_ROW}' and no samples")
    elif not rows and not problems:
        problems.add(f"line {end_of_header}", f"no sample rows after '{COLUMNS_ROW}'; expected at least {MIN_ROWS}")
    missing = [k for k in REQUIRED_KEYS if k not in header]
    if missing:
        problems.add(
            f"line {end_of_header}",
            f"header lacks {', '.join(repr(f'# {k}: ...') for k in missing)} "
            f"(required keys: {', '.join(REQUIRED_KEYS)})",
        )
    for key in REQUIRED_KEYS:
        if key in header and not header[key]:
            problems.add(f"line {header_line[key]}", f"'{key}' is empty; expected text")

    material_id = header.get("id", "")
    if material_id:
        where = f"line {header_line['id']}"
        if not _ID_RE.match(material_id):
            problems.add(where, f"id {_shown(material_id)} must be lowercase letters, digits and single hyphens")
        elif material_id != path.stem:
            problems.add(where, f"id {_shown(material_id)} must equal the file name without .csv ({path.stem!r})")

    measured = (math.nan, math.nan)
    if header.get("measured_range_nm"):
        match = _RANGE_RE.match(header["measured_range_nm"])
        first, last = (float(match.group(1)), float(match.group(2))) if match else (math.nan, math.nan)
        if first < last <= MAX_TABLE_WAVELENGTH_NM:  # False for NaN; bounds a number too long to be finite
            measured = (first, last)
        else:
            problems.add(
                f"line {header_line['measured_range_nm']}",
                f"measured_range_nm {_shown(header['measured_range_nm'])}: expected 'first-last' in nm, increasing "
                f"and at most {MAX_TABLE_WAVELENGTH_NM:,.0f}, e.g. '400-2450'",
            )

    values = _check_rows(rows, problems)
    problems.raise_if_any()

    wavelengths = np.array([r[1] for r in rows], dtype=np.float64)
    values.setflags(write=False)
    wavelengths.setflags(write=False)
    reflectance = np.clip(bin_mean(wavelengths, values), 0.0, 1.0)
    reflectance.setflags(write=False)
    extra = {k: v for k, v in header.items() if k not in REQUIRED_KEYS}
    return Material(
        id=material_id,
        name=header["name"],
        description=header["description"],
        category=header["category"],
        source=header["source"],
        sample_id=header["sample_id"],
        licence=header["licence"],
        measured_range_nm=measured,
        completion=header["completion"],
        reflectance=reflectance,
        path=path,
        sample_wavelengths_nm=wavelengths,
        sample_values=values,
        extra=extra,
    )


def _check_rows(rows: list[tuple[int, float, float]], problems: ProblemList) -> np.ndarray:
    """Check ordering, coverage, spacing and value range of the data rows; clip within tolerance."""
    out = np.array([r[2] for r in rows], dtype=np.float64)
    if not rows:
        return out
    for (line_a, wl_a, _), (line_b, wl_b, _) in zip(rows, rows[1:]):
        if wl_b == wl_a:
            problems.add(f"line {line_b}", f"duplicate wavelength {wl_b:g} nm (also on line {line_a})")
        elif wl_b < wl_a:
            problems.add(
                f"line {line_b}",
                f"wavelength {wl_b:g} nm follows {wl_a:g} nm (line {line_a}); rows must be in strictly increasing wavelength",
            )
        elif wl_a < WAVELENGTH_MAX_NM and wl_b > WAVELENGTH_MIN_NM and wl_b - wl_a > MAX_STEP_NM + 1e-9:
            problems.add(
                f"line {line_b}",
                f"gap of {wl_b - wl_a:g} nm after {wl_a:g} nm (line {line_a}); expected samples at most {MAX_STEP_NM:g} nm apart within 380-780 nm",
            )
    first_line, first_wl, _ = rows[0]
    last_line, last_wl, _ = rows[-1]
    if first_wl > WAVELENGTH_MIN_NM:
        problems.add(
            f"line {first_line}",
            f"samples start at {first_wl:g} nm; expected the first row at or below {WAVELENGTH_MIN_NM:g} nm "
            "(complete the range and say how under '# completion:')",
        )
    if last_wl < WAVELENGTH_MAX_NM:
        problems.add(
            f"line {last_line}",
            f"samples end at {last_wl:g} nm; expected the last row at or above {WAVELENGTH_MAX_NM:g} nm "
            "(complete the range and say how under '# completion:')",
        )
    if len(rows) < MIN_ROWS:
        problems.add(f"line {last_line}", f"only {len(rows)} sample row(s); expected at least {MIN_ROWS}")
    for i, (line, _, value) in enumerate(rows):
        if value < -CLIP_TOLERANCE or value > 1.0 + CLIP_TOLERANCE:
            problems.add(
                f"line {line}",
                f"reflectance {value:g} is outside [0, 1]; expected a value in [0, 1] (values within "
                f"{CLIP_TOLERANCE:g} of it are clipped)",
            )
        else:
            out[i] = min(max(value, 0.0), 1.0)
    return out


# --- the library -----------------------------------------------------------------------------


def default_materials_dir() -> Path:
    """The folder :func:`material_library` reads when given none.

    ``$LAMPCAST_MATERIALS`` if set (and not empty), else the library shipped with lampcast
    (the repository's ``materials/``, package data of an installed lampcast).
    """
    env = os.environ.get(MATERIALS_ENV, "").strip()
    if env:
        return Path(env).expanduser()
    from render.resources import bundled_path

    return bundled_path("materials")


def material_library(directory: str | Path | None = None) -> dict[str, Material]:
    """Load every ``*.csv`` material in a folder, keyed by id, in id order.

    Parameters
    ----------
    directory
        The folder; default :func:`default_materials_dir`.

    Raises
    ------
    InputError
        If the folder is missing or holds no material, or with the problems of every bad file.
    """
    folder = Path(directory) if directory is not None else default_materials_dir()
    src = (
        str(folder)
        if directory is not None or not os.environ.get(MATERIALS_ENV, "").strip()
        else f"{MATERIALS_ENV}={folder}"
    )
    if not folder.is_dir():
        raise input_error(src, "", "not a folder; expected a folder of material CSV files")
    files = sorted(p for p in folder.glob("*.csv") if p.is_file())
    if not files:
        raise input_error(src, "", "no material files (*.csv) in this folder")
    stamp = tuple((p.name, *_stamp(p)) for p in files)
    return dict(_read_library(str(folder), src, stamp))


def _stamp(path: Path) -> tuple[int, int]:
    info = path.stat()
    return (info.st_mtime_ns, info.st_size)


@lru_cache(maxsize=8)
def _read_library(folder: str, src: str, stamp: tuple) -> tuple[tuple[str, Material], ...]:
    """The materials of ``folder`` in id order, read once per state of its files (``stamp``:
    each file's name, modification time and size, so an edited file is read again)."""
    problems = ProblemList(src)
    out: dict[str, Material] = {}
    for name, *_ in stamp:
        try:
            m = load_material_csv(Path(folder) / name)
        except InputError as err:
            problems.extend(err)
            continue
        out[m.id] = m
    problems.raise_if_any()
    return tuple(sorted(out.items()))


def get_material(
    material_id: str,
    library: dict[str, Material] | None = None,
    *,
    source: str = "material",
    where: str = "",
) -> Material:
    """One material by id, from ``library`` (default: :func:`material_library`).

    ``source`` and ``where`` name the place the id came from (e.g. a scene file and its key
    path) for the error message if the id is unknown.
    """
    lib = material_library() if library is None else library
    if material_id in lib:
        return lib[material_id]
    raise InputError(
        Problem(
            source,
            where,
            f"unknown material {material_id!r}{did_you_mean(material_id, lib)}; `lampcast materials` lists them",
        )
    )


# --- photometry ------------------------------------------------------------------------------


@lru_cache(maxsize=1)
def d65_on_grid() -> np.ndarray:
    """CIE standard illuminant D65 (relative SPD, colour-science ``SDS_ILLUMINANTS['D65']``,
    5 nm, stored in ``render/data/colour/spectra.csv``) at the grid's bin centres by linear
    interpolation, the interpolation CIE 15:2004 recommends for D65 (from memory). Read-only,
    shape ``(N_BINS,)``."""
    from render.colour.tables import reference_spectrum

    wavelengths, values = reference_spectrum("SDS_ILLUMINANTS", "D65")
    out = np.interp(WAVELENGTHS_NM, wavelengths, values)
    out.setflags(write=False)
    return out


def luminous_reflectance(reflectance: ArrayLike, illuminant: ArrayLike | None = None) -> float | np.ndarray:
    """Photopic luminous reflectance ``Y/100`` of gridded reflectance(s) under an illuminant.

    ``Σ ρ S ȳ / Σ S ȳ`` with ȳ = V(λ) of the CIE 1931 2° observer
    (:func:`render.colour.observers.tristimulus`), the illuminant ``S`` on the grid (default D65,
    :func:`d65_on_grid`). Dimensionless, 0-1; the last axis of ``reflectance`` is wavelength.
    """
    from render.colour.observers import tristimulus

    s = d65_on_grid() if illuminant is None else np.asarray(illuminant, dtype=np.float64)
    rho = np.asarray(reflectance, dtype=np.float64)
    y = tristimulus(rho * s)[..., 1] / tristimulus(s)[1]
    return float(y) if np.ndim(y) == 0 else y


__all__ = [
    "CLIP_TOLERANCE",
    "COLUMNS_ROW",
    "MATERIALS_ENV",
    "MAX_STEP_NM",
    "MIN_ROWS",
    "Material",
    "REQUIRED_KEYS",
    "d65_on_grid",
    "default_materials_dir",
    "get_material",
    "load_material_csv",
    "luminous_reflectance",
    "material_library",
]
