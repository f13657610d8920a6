"""Fuzz tests of the EULUMDAT reader (render.light.photometry.eulumdat) and format dispatch.

Three generators feed :func:`render.light.photometry.read_eulumdat` (and
:func:`~render.light.photometry.load_photometry`, which picks the reader by extension or content):

* mutations of valid EULUMDAT files (the hand-written files in ``tests/data/photometry`` and
  files of every symmetry indicator written by ``tests/test_eulumdat.py``): byte flips, lines
  replaced by huge, negative, NaN or infinite numbers or text, truncation, duplicated or deleted
  lines, NUL bytes;
* structured random EULUMDAT files: random type and symmetry indicators, counts of C-planes,
  γ angles and lamp sets, angle lists, intensities up to the edge of binary64, a few fields
  replaced by hostile values, lines dropped or added;
* arbitrary text after the first lines of an EULUMDAT file.

Each input keeps the reader contract of ``tests/fuzzing.py`` (a result or an InputError, within
the time limit), and a result has to be usable (the checks of ``tests/test_fuzz_photometry.py``:
finite numbers, intensities ≥ 0, a finite flux, no numpy overflow warning). The CI budget is
small; ``LAMPCAST_FUZZ=long`` or ``LAMPCAST_FUZZ_EXAMPLES=N`` runs deeper (the number of inputs
read is printed with ``-s``).

Sources: the contract is the project's own input rule (see tests/fuzzing.py); the EULUMDAT line
layout as cited in render/light/photometry/eulumdat.py; binary64 limits: IEEE 754.
"""

from __future__ import annotations

from pathlib import Path

import numpy as np
import pytest
from fuzzing import BYTE_MUTATIONS, InputTally, fuzz_settings, spoil_fields
from hypothesis import given
from hypothesis import strategies as st
from test_eulumdat import ldt_text
from test_fuzz_photometry import HOSTILE_NUMBERS, check_result

from render.light import photometry as P
from render.limits import MAX_EULUMDAT_ANGLES

TESTS_DATA = Path(__file__).parent / "data" / "photometry"
SEED_BYTES = [p.read_bytes() for p in sorted(TESTS_DATA.glob("*.ldt"))] + [
    ldt_text(lambda c, g: 100.0 + c / 10.0 + g, isym, mc=mc, gamma_deg=np.arange(0, 181, 15.0)).encode()
    for isym, mc in ((0, 12), (1, 1), (2, 12), (3, 12), (4, 12))
]

TALLY = InputTally("EULUMDAT fuzz")  # inputs read per generator, and of those how many parsed
report_inputs_read = TALLY.report_fixture()


@pytest.fixture(scope="module")
def fuzz_dir(tmp_path_factory) -> Path:
    return tmp_path_factory.mktemp("ldt-fuzz")


def read_case(data: bytes, fuzz_dir: Path, how: int, counter: str) -> P.Photometry | None:
    """Read ``data`` as case.ldt (how 0), through load_photometry (1) or as case.txt by content
    (2); strict paths for how 1 and 2."""
    path = fuzz_dir / ("case.txt" if how == 2 else "case.ldt")
    path.write_bytes(data)
    if how == 0:
        read = lambda: P.read_eulumdat(path)  # noqa: E731
    else:
        read = lambda: P.load_photometry(path, allowed_root=fuzz_dir)  # noqa: E731
    return TALLY.read(counter, read, check_result)


HOSTILE = st.one_of(
    st.sampled_from(HOSTILE_NUMBERS + ["1,5", "1.234,5", "12 13", "-0,0", "x", "   "]),
    st.floats(allow_nan=False, allow_infinity=False).map(repr),
    st.integers(-3, 3 * MAX_EULUMDAT_ANGLES).map(str),
    st.integers().map(str),
    st.text(max_size=12),
)

MUTATIONS = ["flip", "line", "truncate", "duplicate_line", "delete_line", "nul", "insert"]


def mutate(data: bytes, draw) -> bytes:
    kind = draw(st.sampled_from(MUTATIONS))
    if kind == "line":
        lines = data.split(b"\n")
        k = draw(st.integers(0, len(lines) - 1))
        lines[k] = draw(HOSTILE).encode("utf-8", "surrogatepass")
        return b"\n".join(lines)
    return BYTE_MUTATIONS[kind](data, draw)


@fuzz_settings()
@given(data=st.data())
def test_fuzz_mutated_eulumdat_files(fuzz_dir, data):
    content = SEED_BYTES[data.draw(st.integers(0, len(SEED_BYTES) - 1), label="seed")]
    for _ in range(data.draw(st.integers(1, 4), label="mutations")):
        content = mutate(content, data.draw)
    read_case(content, fuzz_dir, data.draw(st.integers(0, 2), label="how"), "mutated")


@st.composite
def eulumdat_file(draw) -> bytes:
    """A structured EULUMDAT file: valid fields, then a few replaced by hostile values and the
    number of lines changed now and then."""
    isym = draw(st.integers(0, 4))
    mc = draw(st.sampled_from([1, 4, 8, 12, 24]) if isym == 1 else st.sampled_from([4, 8, 12, 24, 36]))
    ng = draw(st.integers(2, 20))
    lo, hi = draw(st.sampled_from([(0.0, 90.0), (0.0, 180.0), (90.0, 180.0)]))
    gamma = np.linspace(lo, hi, ng)
    magnitude = draw(st.sampled_from([1.0, 1e3, 1e300, 1e307, 1.7e308]))
    values = draw(st.lists(st.floats(0, 1), min_size=1, max_size=64))
    flux = draw(st.sampled_from([1000.0, 1e300, 1e-300]) | st.floats(1, 1e6))

    def func(c, g):
        return magnitude * values[int(c * 7 + g * 3) % len(values)]

    text = ldt_text(
        func,
        isym,
        mc=mc,
        gamma_deg=gamma,
        flux_lm=flux,
        n_lamps=draw(st.sampled_from([1, 2, -1])),
        cfli=draw(st.sampled_from([1.0, 0.0, 1e300]) | st.floats(1e-3, 10)),
        decimal_comma=draw(st.booleans()),
    )
    lines = spoil_fields(draw, text.split("\n"), HOSTILE)
    ending = draw(st.sampled_from(["\n", "\r\n", "\r"]))
    encoding = draw(st.sampled_from(["utf-8", "utf-8-sig", "cp1252", "latin-1"]))
    return ending.join(lines).encode(encoding, "replace")


@fuzz_settings()
@given(data=st.data())
def test_fuzz_structured_eulumdat_files(fuzz_dir, data):
    content = data.draw(eulumdat_file(), label="file")
    read_case(content, fuzz_dir, data.draw(st.integers(0, 2), label="how"), "structured")


@fuzz_settings()
@given(
    head=st.sampled_from(["", "maker\n1\n2\n24\n15\n19\n5\n", "maker\n1\n1\n1\n0\n3\n45\n" + "x\n" * 18]),
    body=st.text(alphabet=st.sampled_from(list("0123456789.,-+eE \n\r\t<x\x00")) | st.characters(), max_size=300),
)
def test_fuzz_arbitrary_text(fuzz_dir, head, body):
    read_case((head + body).encode("utf-8", "surrogatepass"), fuzz_dir, 0, "text")
