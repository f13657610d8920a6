"""Fuzz tests of the LM-63 reader (render.light.photometry.lm63): mutated and generated files.

Three generators feed :func:`render.light.photometry.read_lm63`:

* mutations of the valid and malformed LM-63 files in ``tests/data/photometry`` and the built-in
  ``render/data/photometry`` files: byte flips, tokens replaced by huge, negative, NaN or
  infinite numbers, truncation, duplicated or deleted lines, NUL bytes, and ``TILT=`` pointed
  at ``/dev/zero``, ``/etc/passwd``, a file that must not be quoted, missing files, folders,
  symbolic links (to a device, in a loop, out of the folder) and nested paths;
* structured random LM-63 files: an edition, keywords, tilt data, the two parameter lines
  with random counts, factors and types, angle sets from the LM-63 symmetry cases or random,
  and a candela table whose size may or may not match the counts;
* arbitrary text.

Each input only has to keep the reader contract of ``tests/fuzzing.py`` (a result or an
InputError, within the time limit, never quoting another file: no "root:" of /etc/passwd, no
marker of the secret file), and a result has to be usable: every number finite, intensities
≥ 0, a finite flux, finite after the tilt factor, with no numpy overflow or invalid-value
warning on the way. Inputs are read with and without strict paths (``allowed_root``). The CI
budget is small; ``LAMPCAST_FUZZ=long`` or ``LAMPCAST_FUZZ_EXAMPLES=N`` runs deeper (the
number of inputs read is printed with ``-s``).

Sources: the contract is the project's own input rule (see tests/fuzzing.py); the LM-63 field
order is ANSI/IESNA LM-63-2002 and IES LM-63-2019 **(from memory)**; binary64 limits: IEEE 754.
"""

from __future__ import annotations

import math
import re
import shutil
from pathlib import Path

import numpy as np
import pytest
from fuzzing import (
    BYTE_MUTATIONS,
    HOSTILE_FILE_REFERENCES,
    ODD_NUMBER_TEXT,
    InputTally,
    fuzz_settings,
    replace_token,
    spoil_fields,
)
from hypothesis import given
from hypothesis import strategies as st

from render.light import photometry as P
from render.limits import MAX_LM63_ANGLES

TESTS_DATA = Path(__file__).parent / "data" / "photometry"
BUILTIN_DATA = Path(__file__).parent.parent / "render" / "data" / "photometry"
SEEDS = sorted(TESTS_DATA.glob("*.ies")) + sorted(BUILTIN_DATA.glob("*.ies"))
SEED_BYTES = [p.read_bytes() for p in SEEDS]

SECRET_MARKER = "SECRET-MARKER-7f3a"
FORBIDDEN = ("root:", SECRET_MARKER)  # text of other files that no message may show

HOSTILE_NUMBERS = [
    "1e300",
    "1e308",
    "-1e308",
    "1.7976931348623157e308",
    "1e309",
    "1e-320",
    "5e-324",
    "1000000000000",
    "100001",
    "10001",
    "99999",
    "4294967297",
    "9223372036854775808",
    "9" * 400,
    "-1",
    "-0",
    "0",
    "0.5",
    "2.0000000001",
    "nan",
    "NaN",
    *ODD_NUMBER_TEXT,
    ",",
    "1,2",
    "\x00",
    "1\x00",
]

TILT_VARIANTS = [
    "NONE",
    "INCLUDE",
    "tilt_file.tlt",
    "./tilt_file.tlt",
    "sub/deeper/tilt.tlt",
    "sub/../tilt_file.tlt",
    "../outside.tlt",
    *HOSTILE_FILE_REFERENCES,
    "sub/secret-link.tlt",
    "missing.tlt",
    "sub/missing/deeper.tlt",
    "sub/zero.tlt",
    "sub/loop.tlt",
    "sub/dir.tlt",
    "big.tlt",
    "sub",
    ".",
    "/",
    "",
    "tilt\x00.tlt",
    "/etc/passwd\x00.tlt",
    "x" * 5000,
    "none",
    "include",
    " INCLUDE ",
]

TALLY = InputTally("LM-63 fuzz")  # inputs read per generator, and of those how many parsed
report_inputs_read = TALLY.report_fixture()


@pytest.fixture(scope="module")
def fuzz_dir(tmp_path_factory) -> Path:
    """A folder of tilt targets beside the file under test (module-scoped: hypothesis runs many
    inputs per test function)."""
    top = tmp_path_factory.mktemp("lm63-fuzz")
    root = top / "lamps"
    (root / "sub" / "deeper").mkdir(parents=True)
    (root / "sub" / "dir.tlt").mkdir()
    shutil.copy(TESTS_DATA / "tilt_file.tlt", root / "tilt_file.tlt")
    shutil.copy(TESTS_DATA / "tilt_file.tlt", root / "sub" / "deeper" / "tilt.tlt")
    shutil.copy(TESTS_DATA / "tilt_file.tlt", top / "outside.tlt")
    (root / "secret.txt").write_text(f"root:x:0:0:{SECRET_MARKER}:/root:/bin/bash\n2 1 0 90\n")
    (root / "big.tlt").write_bytes(b"1 2 0 90 1 1 " + b" " * (1024 * 1024))
    (root / "sub" / "secret-link.tlt").symlink_to(root / "secret.txt")
    (root / "sub" / "loop.tlt").symlink_to(root / "sub" / "loop.tlt")
    if Path("/dev/zero").exists():
        (root / "sub" / "zero.tlt").symlink_to("/dev/zero")
    return root


def tilt_variant(index: int, fuzz_dir: Path) -> bytes:
    text = TILT_VARIANTS[index % len(TILT_VARIANTS)]
    return text.replace("{outside}", str(fuzz_dir.parent / "outside.tlt")).encode("utf-8")


def check_result(ph: P.Photometry) -> None:
    """A parsed distribution is usable: finite numbers, intensities ≥ 0, finite flux and tilt."""
    arrays = {
        "c_deg": ph.c_deg,
        "gamma_deg": ph.gamma_deg,
        "candela_cd": ph.candela_cd,
        "file_horizontal_deg": ph.file_horizontal_deg,
        "file_vertical_deg": ph.file_vertical_deg,
        "file_candela_cd": ph.file_candela_cd,
    }
    if ph.tilt is not None:
        arrays |= {"tilt angles": ph.tilt.angles_deg, "tilt factors": ph.tilt.factors}
        assert np.all(ph.tilt.factors >= 0)
    for name, a in arrays.items():
        assert a.size and np.all(np.isfinite(a)), name
    for name in (
        "lumens_per_lamp",
        "candela_multiplier",
        "ballast_factor",
        "ballast_lamp_factor",
        "input_watts",
        "opening_width_m",
        "opening_length_m",
        "opening_height_m",
    ):
        assert math.isfinite(getattr(ph, name)), name
    assert ph.rated_lumens_lm is None or (math.isfinite(ph.rated_lumens_lm) and ph.rated_lumens_lm > 0)
    assert np.all(ph.candela_cd >= 0) and np.all(np.diff(ph.c_deg) > 0) and np.all(np.diff(ph.gamma_deg) > 0)
    assert ph.c_deg[0] == 0.0 and ph.c_deg[-1] == 360.0 and ph.candela_cd.shape == (ph.c_deg.size, ph.gamma_deg.size)
    flux = P.luminous_flux_lm(ph)
    assert math.isfinite(flux) and flux >= 0
    if ph.tilt is not None:
        tilted = P.apply_tilt(ph, 90.0)
        assert np.all(np.isfinite(tilted.candela_cd)) and math.isfinite(P.luminous_flux_lm(tilted))


def read_case(data: bytes, fuzz_dir: Path, strict: bool, counter: str) -> P.Photometry | None:
    path = fuzz_dir / "case.ies"
    path.write_bytes(data)
    root = fuzz_dir if strict else None
    return TALLY.read(
        counter, lambda: P.read_lm63(path, allowed_root=root), check_result, forbidden_in_message=FORBIDDEN
    )


# --------------------------------------------------------------------------------------------
# (a) mutations of real files
# --------------------------------------------------------------------------------------------

_TOKEN = re.compile(rb"[^\s,]+")
_TILT_LINE = re.compile(rb"(?im)^[ \t]*TILT[ \t]*=[^\r\n]*")
MUTATIONS = ["flip", "token", "truncate", "duplicate_line", "delete_line", "nul", "tilt", "insert"]


def mutate(data: bytes, draw, fuzz_dir: Path) -> bytes:
    kind = draw(st.sampled_from(MUTATIONS))
    if kind == "token":
        return replace_token(data, draw, _TOKEN, HOSTILE_NUMBERS)
    if kind == "tilt":
        tilt = b"TILT=" + tilt_variant(draw(st.integers(0, len(TILT_VARIANTS) - 1)), fuzz_dir)
        if _TILT_LINE.search(data):
            return _TILT_LINE.sub(lambda m: tilt, data, count=1)
        return tilt + b"\n" + data
    return BYTE_MUTATIONS[kind](data, draw)


@fuzz_settings()
@given(data=st.data())
def test_fuzz_mutated_lm63_files(fuzz_dir, data):
    seed = data.draw(st.sampled_from(range(len(SEED_BYTES))), label="seed")
    content = SEED_BYTES[seed]
    for _ in range(data.draw(st.integers(1, 4), label="mutations")):
        content = mutate(content, data.draw, fuzz_dir)
    read_case(content, fuzz_dir, data.draw(st.booleans(), label="strict"), "mutated")


# --------------------------------------------------------------------------------------------
# (b) structured random LM-63 files
# --------------------------------------------------------------------------------------------


ANY_FLOAT = st.floats(allow_nan=False, allow_infinity=False)
HOSTILE = st.one_of(
    st.sampled_from(HOSTILE_NUMBERS),
    ANY_FLOAT.map(repr),
    st.integers(-3, 3 * MAX_LM63_ANGLES).map(str),
    st.integers().map(str),
)

# LM-63 angle ranges (from memory): type C vertical 0-90, 0-180, 90-180; horizontal a single
# 0, 0-90, 0-180, 90-270, 0 to (180, 360]; type B -90..90 or 0..90 on both axes.
TYPE_C_VERTICAL = [(0.0, 90.0), (0.0, 180.0), (90.0, 180.0)]
TYPE_C_HORIZONTAL = [(0.0, 90.0), (0.0, 180.0), (90.0, 270.0), (0.0, 360.0), (0.0, 270.0)]
TYPE_B = [(-90.0, 90.0), (0.0, 90.0)]


@st.composite
def angles(draw, ranges: list[tuple[float, float]], n: int, single_zero: bool = False) -> list[float]:
    """n increasing angles spanning one of ``ranges`` (evenly or not), or a single 0."""
    if n == 1:
        return [0.0] if single_zero else [draw(st.floats(-10, 370))]
    lo, hi = draw(st.sampled_from(ranges))
    if draw(st.booleans()):
        return list(np.linspace(lo, hi, n))
    inner = draw(
        st.lists(st.floats(lo, hi, exclude_min=True, exclude_max=True), min_size=n - 2, max_size=n - 2, unique=True)
    )
    return [lo, *sorted(inner), hi]


@st.composite
def lm63_file(draw, fuzz_dir: Path) -> bytes:
    """A structured LM-63 file: valid fields, then a few replaced by hostile values, the tilt
    reference varied, and the number of data values changed now and then."""
    sep = draw(st.sampled_from([" ", ",", "\n", ", ", "\t", "\r\n", " ,\n "]))
    edition = draw(st.sampled_from(["IESNA:LM-63-2002", "IES:LM-63-2019", "IESNA:LM-63-1995", "IESNA91", ""]))
    lines = [edition] if edition else []
    for _ in range(draw(st.integers(0, 3))):
        key = draw(st.sampled_from(["TEST", "MANUFAC", "LUMCAT", "MORE", "_USER", "", "]"]))
        lines.append(f"[{key}] {draw(st.text(max_size=20))}")

    ptype = draw(st.sampled_from([1, 1, 2]))
    n_v, n_h = draw(st.integers(2, 15)), draw(st.integers(1, 15) if ptype == 1 else st.integers(2, 15))
    if ptype == 1:
        v = draw(angles(TYPE_C_VERTICAL, n_v))
        h = draw(angles(TYPE_C_HORIZONTAL, n_h, single_zero=True))
    else:
        v, h = draw(angles(TYPE_B, n_v)), draw(angles(TYPE_B, n_h))
    # Intensities of one magnitude for the whole table, up to the edge of binary64.
    magnitude = draw(st.sampled_from([1.0, 1e3, 1e300, 1e307, 1.7e308]))
    cd = draw(st.lists(st.floats(0, 1) | st.just(0.0), min_size=n_v * n_h, max_size=n_v * n_h))
    cd = [x * magnitude for x in cd]
    cd[draw(st.integers(0, len(cd) - 1))] = magnitude  # the peak
    tilt: list = []
    tilt_ref = draw(st.sampled_from(["NONE", "INCLUDE", "tilt_file.tlt", "sub/deeper/tilt.tlt", "variant"]))
    if tilt_ref == "variant":
        tilt_ref = tilt_variant(draw(st.integers(0, len(TILT_VARIANTS) - 1)), fuzz_dir).decode("utf-8")
    if tilt_ref == "INCLUDE":
        n_t = draw(st.integers(1, 8))
        t_angles = sorted(draw(st.lists(st.floats(0, 90), min_size=n_t, max_size=n_t, unique=True)))
        factors = draw(st.lists(st.floats(0, 2), min_size=n_t, max_size=n_t))
        factors[-1] *= draw(st.sampled_from([1.0, 1.0, 1e10, 1e300]))
        tilt = [draw(st.integers(1, 3)), n_t, *t_angles, *factors]
    fields = [
        *tilt,
        draw(st.integers(1, 4)),  # number of lamps
        draw(st.just(-1) | st.floats(1, 1e5)),  # lumens per lamp
        draw(st.sampled_from([1.0, 10.0]) | st.floats(1e-3, 1e3)),  # candela multiplier
        n_v,
        n_h,
        ptype,
        draw(st.sampled_from([1, 2])),  # units
        *draw(st.lists(st.floats(-2, 2), min_size=3, max_size=3)),  # luminous opening
        draw(st.floats(0.1, 2)),  # ballast factor
        draw(st.sampled_from([1, 1.00001]) | st.floats(0.5, 1.5)),  # second factor
        draw(st.floats(0, 1e3)),  # input watts
        *v,
        *h,
        *cd,
    ]
    fields = [f if isinstance(f, str) else f"{f:.17g}" for f in fields]
    fields = spoil_fields(draw, fields, HOSTILE)  # hostile values in random fields
    lines += [f"TILT={tilt_ref}", sep.join(fields)]
    encoding = draw(st.sampled_from(["utf-8", "utf-8-sig", "cp1252", "latin-1"]))
    return "\n".join(lines).encode(encoding, "replace")


@fuzz_settings()
@given(data=st.data())
def test_fuzz_structured_lm63_files(fuzz_dir, data):
    content = data.draw(lm63_file(fuzz_dir), label="file")
    read_case(content, fuzz_dir, data.draw(st.booleans(), label="strict"), "structured")


# --------------------------------------------------------------------------------------------
# (c) arbitrary text after an LM-63 head
# --------------------------------------------------------------------------------------------


@fuzz_settings()
@given(
    head=st.sampled_from(["", "IESNA:LM-63-2002\n", "IESNA:LM-63-2002\nTILT=NONE\n", "TILT=INCLUDE\n"]),
    body=st.text(
        alphabet=st.sampled_from(list("0123456789.-+eE ,\n\r\t[]=TILNOE\x00x")) | st.characters(), max_size=200
    ),
)
def test_fuzz_arbitrary_text(fuzz_dir, head, body):
    read_case((head + body).encode("utf-8", "surrogatepass"), fuzz_dir, False, "text")
