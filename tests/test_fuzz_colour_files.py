"""Fuzz tests of the lamp-file and material-file readers: mutated and generated files.

Three readers are fed generated inputs:

* the lamp spectrum CSV and the lamp lines file (:func:`render.colour.lamps.load_lamp_file`);
* the material CSV (:func:`render.colour.materials.load_material_csv`).

Generators, for each reader:

* mutations of real files -- the lamp files of ``tests/data/lamps`` (valid and malformed) plus
  valid spectrum and lines files written here, and every committed material in ``materials/``:
  byte flips, numbers replaced by huge, tiny, negative, NaN, infinite or unparsable values
  (``1e400``, 400 nines), truncation, duplicated, deleted or shuffled lines, NUL bytes, byte-order
  marks, CRLF or CR line ends, very long lines (long runs of spaces, digits or one field), one
  line repeated up to past the row limit, and swapped separators (``;``, tabs, spaces, decimal
  commas);
* structured random files: a header, rows of wavelengths (sorted or not, in or far outside
  380-780 nm) and powers or reflectances of one magnitude up to the edge of binary64, with a few
  fields replaced by hostile values and a random separator, line end and encoding;
* arbitrary text after a plausible head.

Each input only has to keep the reader contract of ``tests/fuzzing.py`` (a result or an
InputError, within the time limit), and a result has to be usable: a spectrum or reflectance on
the grid (shape ``(N_BINS,)``), finite and non-negative (a reflectance also at most 1). The CI
budget is small; ``LAMPCAST_FUZZ=long`` or ``LAMPCAST_FUZZ_EXAMPLES=N`` runs deeper (the number
of inputs read per reader is printed with ``-s``).

Sources: the contract is the project's own input rule (see tests/fuzzing.py); the file formats
are the readers' documented ones; binary64 limits (largest finite about 1.8e308, smallest
subnormal 4.9e-324, ``1e400`` parses to infinity): IEEE 754-2008.
"""

from __future__ import annotations

import math
import re
from pathlib import Path

import numpy as np
import pytest
from fuzzing import BYTE_MUTATIONS, ODD_NUMBER_TEXT, InputTally, fuzz_settings, reader_contract
from hypothesis import given
from hypothesis import strategies as st

from render.colour.lamps import LAMP_TYPES, Lamp, load_lamp_file
from render.colour.materials import REQUIRED_KEYS, Material, load_material_csv, luminous_reflectance
from render.colour.spectra import N_BINS
from render.limits import MAX_SPECTRUM_ROWS

REPO = Path(__file__).resolve().parents[1]
LAMP_DATA = Path(__file__).parent / "data" / "lamps"


def _valid_spectrum_csv() -> bytes:
    """A valid spectrum CSV: a phosphor-LED-like shape (blue peak and broad phosphor hump) at
    5 nm, 380-780 nm. Made up for the test; only its validity matters."""
    rows = []
    for w in range(380, 781, 5):
        p = math.exp(-(((w - 450) / 12) ** 2)) + 0.6 * math.exp(-(((w - 580) / 60) ** 2))
        rows.append(f"{w}, {p:.6g}")
    head = "# name: Fuzz LED\n# type: phosphor LED\n# source: made up\n# notes: seed\nwavelength_nm, relative_power\n"
    return (head + "\n".join(rows) + "\n").encode()


VALID_LAMP_SEEDS = {
    "spectrum.csv": _valid_spectrum_csv(),
    "spectrum-tabs.csv": _valid_spectrum_csv().replace(b", ", b"\t"),
    # Sodium D lines (NIST ASD 588.995, 589.592 nm), an infrared line and a continuum.
    "lines.csv": (
        b"# name: sodium with background\n# type: low-pressure sodium\nkind, wavelength_nm, power\n"
        b"line, 588.995, 0.5\nline, 589.592, 0.2\nline, 819.482, 0.3\n"
        b"continuum, 400, 0.001\ncontinuum, 550, 0.002\ncontinuum, 700, 0.001\n"
    ),
    "lines-only.csv": b"line, 404.656, 1.8\nline, 435.833, 4.0\nline, 546.074, 3.0\nline, 576.960, 0.6\n",
}
LAMP_SEEDS = {p.name: p.read_bytes() for p in sorted(LAMP_DATA.glob("*.csv"))} | VALID_LAMP_SEEDS
LAMP_SEED_NAMES = sorted(LAMP_SEEDS)
MATERIAL_SEEDS = {p.stem: p.read_bytes() for p in sorted((REPO / "materials").glob("*.csv"))}
MATERIAL_SEED_NAMES = sorted(MATERIAL_SEEDS)

HOSTILE_NUMBERS = [
    "1e308",
    "-1e308",
    "1.7976931348623157e308",
    "1e309",
    "1e400",
    "-1e400",
    "9" * 400,
    "0." + "0" * 400 + "1",
    "1e300",
    "1e-300",
    "1e-320",
    "5e-324",
    "-5e-324",
    "1e5",
    "100000.0001",
    "-1",
    "-0",
    "0",
    "0.5",
    "1.005",
    "-0.005",
    "nan",
    "NaN",
    "-nan",
    *ODD_NUMBER_TEXT,
    "1,5",
    "1;5",
    "\x00",
    "1\x00",
    "\ufeff1",
]

#: Inputs read per reader and generator, and of those how many parsed.
TALLY = InputTally("lamp and material file fuzz")
report_inputs_read = TALLY.report_fixture()


@pytest.fixture(scope="module")
def fuzz_dir(tmp_path_factory) -> Path:
    """One folder for the inputs (module-scoped: hypothesis runs many inputs per test)."""
    return tmp_path_factory.mktemp("colour-files-fuzz")


def check_lamp(lamp: Lamp) -> None:
    """A lamp read from a file is usable: its spectrum on the grid, finite, non-negative and of
    unit total power (the documented normalisation), its lines finite."""
    spd = lamp.spd
    assert spd.shape == (N_BINS,) and spd.dtype == np.float64
    assert np.all(np.isfinite(spd)) and np.all(spd >= 0.0)
    assert spd.sum() == pytest.approx(1.0, rel=1e-9)
    assert all(math.isfinite(w) and math.isfinite(p) and p >= 0.0 for w, p in lamp.lines)


def check_material(material: Material) -> None:
    """A material read from a file is usable: its reflectance on the grid, finite, within [0, 1],
    with a finite luminous reflectance and measured range."""
    rho = material.reflectance
    assert rho.shape == (N_BINS,) and rho.dtype == np.float64
    assert np.all(np.isfinite(rho)) and np.all((rho >= 0.0) & (rho <= 1.0))
    assert np.all(np.isfinite(material.sample_values)) and np.all(np.isfinite(material.sample_wavelengths_nm))
    assert 0.0 <= luminous_reflectance(rho) <= 1.0
    assert all(math.isfinite(x) for x in material.measured_range_nm)


def read_lamp(data: bytes, fuzz_dir: Path, counter: str) -> Lamp | None:
    path = fuzz_dir / "case.csv"
    path.write_bytes(data)
    return TALLY.read(counter, lambda: load_lamp_file(path), check_lamp, numpy_warnings_fail=False)


def read_material(data: bytes, stem: str, fuzz_dir: Path, counter: str) -> Material | None:
    path = fuzz_dir / f"{stem}.csv"  # the id must equal the file name
    path.write_bytes(data)
    try:
        return TALLY.read(counter, lambda: load_material_csv(path), check_material, numpy_warnings_fail=False)
    finally:
        path.unlink()


# --------------------------------------------------------------------------------------------
# (a) mutations of real files
# --------------------------------------------------------------------------------------------

_NUMBER = re.compile(rb"[-+]?(?:\d+\.?\d*|\.\d+)(?:[eE][-+]?\d+)?")
_BOM = b"\xef\xbb\xbf"
MUTATIONS = [
    "flip",
    "number",
    "truncate",
    "duplicate_line",
    "delete_line",
    "shuffle",
    "nul",
    "bom",
    "line_ends",
    "long_line",
    "separators",
    "insert",
]
LONG_LINES = [
    b"# name: a" + b" " * 200_000 + b"b",  # a long run of spaces inside a header value
    b"# notes:" + b" " * 200_000,
    b"#" + b" " * 200_000 + b":",
    b"# " + b"n" * 100_000 + b": x",  # a long header key
    b"# type: " + b"sodium " * 20_000,
    b"5" * 200_000 + b", 1",  # a long number
    b"500, " + b"1" * 200_000,
    b"500, 0." + b"0" * 200_000 + b"1",
    b"500" + b" " * 200_000 + b"1",
    b"500, " + b"x" * 200_000,
    b"line, " + b"5" * 100_000 + b", 1",
    b", " * 100_000,
    b"\t" * 200_000,
]
SEPARATORS = [
    (b",", b";"),
    (b",", b"\t"),
    (b",", b" "),
    (b",", b""),
    (b", ", b";"),
    (b".", b","),
    (b",", b",,"),
    (b"\n", b";"),
]


def mutate(data: bytes, draw) -> bytes:
    kind = draw(st.sampled_from(MUTATIONS))
    if kind in BYTE_MUTATIONS:
        return BYTE_MUTATIONS[kind](data, draw)
    if kind == "number":
        spans = [m.span() for m in _NUMBER.finditer(data)]
        if not spans:
            return data
        new = draw(st.sampled_from(HOSTILE_NUMBERS) | st.floats().map(repr) | st.integers().map(str))
        a, b = spans[draw(st.integers(0, len(spans) - 1))]
        if draw(st.integers(0, 4)) == 0:  # the same value in every number of the file
            return _NUMBER.sub(lambda m: new.encode("utf-8"), data)
        return data[:a] + new.encode("utf-8") + data[b:]
    if kind == "bom":
        k = draw(st.sampled_from([0, 0, len(data)]) | st.integers(0, len(data)))
        return data[:k] + _BOM + data[k:]
    if kind == "line_ends":
        return data.replace(b"\n", draw(st.sampled_from([b"\r\n", b"\r", b"\n\n", b"\x85", b"\x0c"])))
    if kind == "separators":
        old, new = draw(st.sampled_from(SEPARATORS))
        return data.replace(old, new)
    lines = data.split(b"\n")
    if kind == "shuffle":
        return b"\n".join(draw(st.permutations(lines)))
    k = draw(st.integers(0, len(lines)))  # "long_line"
    return b"\n".join(lines[:k] + [draw(st.sampled_from(LONG_LINES))] + lines[k:])


def _mutated(data, seed: bytes) -> bytes:
    content = seed
    for _ in range(data.draw(st.integers(1, 4), label="mutations")):
        content = mutate(content, data.draw)
    # Now and then, last (a large file makes every later mutation slow): one line repeated up
    # to and past render.limits.MAX_SPECTRUM_ROWS.
    if data.draw(st.sampled_from([False] * 19 + [True]), label="many lines"):
        lines = content.split(b"\n")
        k = data.draw(st.integers(0, len(lines) - 1))
        n = data.draw(st.sampled_from([1000, 20_000, MAX_SPECTRUM_ROWS - 50, MAX_SPECTRUM_ROWS + 1]))
        content = b"\n".join(lines[:k] + [lines[k]] * n + lines[k:])
    return content


def _lamp_reader(content: bytes) -> str:
    return "lamp lines" if re.search(rb"(?im)^\s*(line|continuum)\b", content) else "lamp CSV"


@fuzz_settings()
@given(data=st.data())
def test_fuzz_mutated_lamp_files(fuzz_dir, data):
    # Half the inputs start from a valid file, so that mutations reach the arithmetic.
    seed = data.draw(st.sampled_from(sorted(VALID_LAMP_SEEDS)) | st.sampled_from(LAMP_SEED_NAMES), label="seed")
    content = _mutated(data, LAMP_SEEDS[seed])
    read_lamp(content, fuzz_dir, f"{_lamp_reader(content)}, mutated")


@fuzz_settings()
@given(data=st.data())
def test_fuzz_mutated_material_files(fuzz_dir, data):
    seed = data.draw(st.sampled_from(MATERIAL_SEED_NAMES), label="seed")
    read_material(_mutated(data, MATERIAL_SEEDS[seed]), seed, fuzz_dir, "material CSV, mutated")


# --------------------------------------------------------------------------------------------
# (b) structured random files
# --------------------------------------------------------------------------------------------

HOSTILE = st.one_of(st.sampled_from(HOSTILE_NUMBERS), st.floats().map(repr), st.integers().map(str))
MAGNITUDES = [1.0, 1.0, 1e-3, 1e3, 1e-300, 1e-320, 1e300, 1e306, 1e307, 1.7976931348623157e308]
FORMATS = [repr, "{:.6g}".format, "{:.17g}".format, "{:e}".format]


def pick(draw, clean: bool, good: list, bad: list):
    """One of ``good`` in a clean file; else mostly ``good``, now and then one of ``bad``.

    Half the structured files are clean -- every fault of form left out, only the numbers are
    extreme -- so that the readers' arithmetic is reached as often as their checks of form."""
    return draw(st.sampled_from(good if clean else good * 3 + bad))


@st.composite
def wavelengths(draw, n: int, clean: bool = False) -> list[float]:
    """n wavelengths: even steps over a range that covers 380-780 nm or not, random sorted ones,
    or unsorted; now and then far outside any spectrum."""
    lo = pick(draw, clean, [380.0, 360.0, 300.0, 400.0], [401.0, 1e-3, 780.0, draw(st.floats(0, 1000))])
    hi = pick(draw, clean, [780.0, 830.0, 700.0, 2500.0], [699.0, 1e5, 1e6, draw(st.floats(0, 2000))])
    how = pick(draw, clean, ["even", "random"], ["unsorted"])
    if how == "even" or n < 3:
        return [float(x) for x in np.linspace(lo, hi, n)]
    inner = draw(st.lists(st.floats(lo, hi) if lo < hi else st.floats(hi, lo), min_size=n, max_size=n))
    return sorted({lo, hi, *inner}) if how == "random" else inner


def _join(draw, clean: bool, rows: list[list[str]], sep: str) -> str:
    """Rows joined by ``sep``; in a file that is not clean a few fields are hostile values."""
    for _ in range(0 if clean else draw(st.integers(0, 3))):
        if rows:
            row = rows[draw(st.integers(0, len(rows) - 1))]
            row[draw(st.integers(0, len(row) - 1))] = draw(HOSTILE)
    return "\n".join(sep.join(row) for row in rows)


def _encode(draw, clean: bool, text: str) -> bytes:
    text = text.replace("\n", draw(st.sampled_from(["\n", "\r\n", "\r"])))
    encoding = pick(draw, clean, ["utf-8", "utf-8-sig"], ["cp1252", "utf-16"])
    return text.encode(encoding, "replace")


@st.composite
def lamp_header(draw, clean: bool) -> str:
    lines = []
    for _ in range(draw(st.integers(0, 5))):
        key = pick(draw, clean, ["name", "type", "description", "source", "notes"], ["nmae", "tpye", "colour"])
        if key in ("type", "tpye"):
            value = pick(draw, clean, [*LAMP_TYPES, *(t.upper() for t in LAMP_TYPES)], [draw(st.text(max_size=30))])
        else:
            value = draw(st.text(max_size=30))
        lines.append(f"# {key}: {value}".replace("\n", " ").replace("\r", " "))
    if draw(st.booleans()):
        lines.append(draw(st.sampled_from(["wavelength_nm, relative_power", "kind, wavelength_nm, power", "nm power"])))
    return "\n".join(lines) + ("\n" if lines else "")


@st.composite
def lamp_csv(draw) -> bytes:
    """A structured spectrum CSV: header, wavelengths and powers of one magnitude."""
    clean = draw(st.booleans())
    n = draw(st.integers(2, 80))
    w = draw(wavelengths(n, clean))
    magnitude = draw(st.sampled_from(MAGNITUDES))
    powers = [x * magnitude for x in draw(st.lists(st.floats(0, 1), min_size=len(w), max_size=len(w)))]
    powers[draw(st.integers(0, len(w) - 1))] = magnitude
    fmt = draw(st.sampled_from(FORMATS))
    rows = [[fmt(a), fmt(b)] for a, b in zip(w, powers)]
    sep = pick(draw, clean, [", ", ",", "\t", " ", "  ", " , "], [";", "; "])
    return _encode(draw, clean, draw(lamp_header(clean)) + _join(draw, clean, rows, sep) + "\n")


@st.composite
def lamp_lines(draw) -> bytes:
    """A structured lines file: lines in or outside 380-780 nm and an optional continuum."""
    clean = draw(st.booleans())
    magnitude = draw(st.sampled_from(MAGNITUDES))
    fmt = draw(st.sampled_from(FORMATS))
    n = draw(st.integers(1 if clean else 0, 30))
    w = draw(
        st.lists(
            st.floats(380, 780) | st.sampled_from([380.0, 780.0, 379.999, 780.001, 589.0, 819.482]) | st.floats(0, 1e5),
            min_size=n,
            max_size=n,
            unique=clean or draw(st.booleans()),
        )
    )
    p = draw(st.lists(st.floats(0, 1), min_size=n, max_size=n))
    rows = [["line", fmt(a), fmt(b * magnitude)] for a, b in zip(w, p)]
    m = draw(st.sampled_from([0, 0, 2, 3, 10] if clean else [0, 1, 2, 3, 10]))
    if m:
        cw = draw(wavelengths(m, clean))
        cp = draw(st.lists(st.floats(0, 1), min_size=len(cw), max_size=len(cw)))
        rows += [["continuum", fmt(a), fmt(b * magnitude)] for a, b in zip(cw, cp)]
    if draw(st.booleans()):
        rows = draw(st.permutations(rows))
    sep = pick(draw, clean, [", ", ",", "\t", " ", " , "], [";"])
    return _encode(draw, clean, draw(lamp_header(clean)) + _join(draw, clean, [list(r) for r in rows], sep) + "\n")


MATERIAL_ID = "fuzz-material"


@st.composite
def material_csv(draw) -> bytes:
    """A structured material file: the header (keys now and then missing, repeated or empty),
    the column row and reflectances at even or random wavelengths."""
    clean = draw(st.booleans())
    values = {
        "id": pick(draw, clean, [MATERIAL_ID], ["Fuzz_Material", "other-id", ""]),
        "name": draw(st.text(min_size=1, max_size=30).map(str.strip).filter(bool)),
        "description": "generated",
        "category": "test",
        "source": "made up",
        "sample_id": "none",
        "licence": "none",
        "measured_range_nm": pick(
            draw, clean, ["380-780", "400-2450", "400 to 700"], ["780-380", "1-" + "9" * 400, "", "x", "0-1e5"]
        ),
        "completion": "none",
    }
    values["name"] = values["name"].replace("\n", " ").replace("\r", " ")
    keys = list(REQUIRED_KEYS)
    change = pick(draw, clean, ["none"] * 3, ["drop", "repeat"])
    if change == "drop":
        keys.remove(draw(st.sampled_from(keys)))
    elif change == "repeat":
        keys.append(draw(st.sampled_from(keys)))
    header = [f"# {k}: {values[k]}" for k in keys]
    if pick(draw, clean, ["grid"], ["random"]) == "grid":  # the rows of a real table
        start, stop = pick(draw, clean, [380, 360, 300], [400, 390]), pick(draw, clean, [780, 830, 2450], [770])
        step = pick(draw, clean, [10, 5, 20, 1, 2.5, 50], [60])
        w = [float(x) for x in np.arange(start, stop + step / 2, step)]
    else:
        w = draw(wavelengths(draw(st.integers(1, 120))))
    low, high = pick(draw, clean, [(0.0, 1.0), (-0.005, 1.005)], [(-0.01, 1.01), (-1e308, 1e308)])
    rho = draw(
        st.lists(st.floats(low, high) | st.sampled_from([0.0, 1.0, low, high]), min_size=len(w), max_size=len(w))
    )
    fmt = draw(st.sampled_from(FORMATS))
    rows = [[fmt(a), fmt(b)] for a, b in zip(w, rho)]
    sep = pick(draw, clean, [",", ", ", " ,"], [";", "\t", " "])
    columns = pick(
        draw, clean, ["wavelength_nm,reflectance", "wavelength_nm, reflectance"], [f"wavelength_nm{sep}reflectance"]
    )
    text = "\n".join(header) + "\n" + columns + "\n" + _join(draw, clean, rows, sep) + "\n"
    return _encode(draw, clean, text)


@fuzz_settings()
@given(content=lamp_csv())
def test_fuzz_structured_lamp_csv(fuzz_dir, content):
    read_lamp(content, fuzz_dir, "lamp CSV, structured")


@fuzz_settings()
@given(content=lamp_lines())
def test_fuzz_structured_lamp_lines(fuzz_dir, content):
    read_lamp(content, fuzz_dir, "lamp lines, structured")


@fuzz_settings()
@given(content=material_csv())
def test_fuzz_structured_material_files(fuzz_dir, content):
    read_material(content, MATERIAL_ID, fuzz_dir, "material CSV, structured")


# --------------------------------------------------------------------------------------------
# (c) arbitrary text after a plausible head
# --------------------------------------------------------------------------------------------

TEXT = st.text(
    alphabet=st.sampled_from(list("0123456789.-+eE ,;\n\r\t#:xnaifl\x00\ufeff")) | st.characters(), max_size=300
)


@fuzz_settings()
@given(
    head=st.sampled_from(["", "# name: x\n", "wavelength_nm, relative_power\n", "line, 589, 1\n", "380, 1\n"]),
    body=TEXT,
)
def test_fuzz_arbitrary_lamp_text(fuzz_dir, head, body):
    content = (head + body).encode("utf-8", "surrogatepass")
    read_lamp(content, fuzz_dir, f"{_lamp_reader(content)}, text")


_BRICK_HEAD = MATERIAL_SEEDS["brick"].split(b"wavelength_nm,reflectance")[0]


@fuzz_settings()
@given(head=st.sampled_from([b"", _BRICK_HEAD, _BRICK_HEAD + b"wavelength_nm,reflectance\n"]), body=TEXT)
def test_fuzz_arbitrary_material_text(fuzz_dir, head, body):
    read_material(head + body.encode("utf-8", "surrogatepass"), "brick", fuzz_dir, "material CSV, text")


# --------------------------------------------------------------------------------------------
# regressions found by the fuzz suite
# --------------------------------------------------------------------------------------------


def test_long_run_of_spaces_in_a_header_value_does_not_hang(tmp_path):
    # A lazy regular-expression group before '\s*$' took time quadratic in a run of spaces:
    # 40 000 spaces took about 6 s, a 16 MiB line would have taken days. The contract's time
    # limit (tests/fuzzing.py) is what fails here.
    path = tmp_path / "spaces.csv"
    rows = VALID_LAMP_SEEDS["spectrum.csv"].replace(b"# name: Fuzz LED\n", b"")
    path.write_bytes(b"# name: a" + b" " * 400_000 + b"b\n" + rows)
    lamp = reader_contract(lambda: load_lamp_file(path))
    assert lamp is not None and lamp.name == "a" + " " * 400_000 + "b"


def test_every_seed_is_read_within_the_contract(fuzz_dir):
    # The seeds themselves: the valid ones load, the malformed ones are input errors.
    for name, data in LAMP_SEEDS.items():
        lamp = read_lamp(data, fuzz_dir, "seeds")
        assert (lamp is not None) == (name in VALID_LAMP_SEEDS), name
    for stem, data in MATERIAL_SEEDS.items():
        assert read_material(data, stem, fuzz_dir, "seeds") is not None, stem


def test_many_unknown_header_keys_do_not_hang(tmp_path):
    # Found reading files near the size limit: every unknown '# key:' comment was
    # compared with the header keys for a did-you-mean hint (difflib, about 15 µs each), so a
    # 10 MB file of unknown keys took over 10 s. The contract's time limit is what fails here.
    path = tmp_path / "keys.csv"
    letters = [f"{a}{b}{c}{d}" for a in "kmvw" for b in "abcdefghijklmnopqrstuvwxyz" for c in "aeiou" for d in "xyz"]
    keys = "".join(f"# {k}{j}: x\n" for j in ("", "q", "qq", "qqq") for k in letters).encode() * 160
    path.write_bytes(keys + VALID_LAMP_SEEDS["spectrum.csv"])
    assert reader_contract(lambda: load_lamp_file(path)) is not None
