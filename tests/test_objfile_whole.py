"""The OBJ reader's whole-file path against its statement-by-statement path.

:func:`render.geometry.objfile.load_obj` reads an ordinary file all at once with numpy
(``_read_fast``) and leaves anything else -- every mistake, continued lines, other characters,
references written in different ways -- to the statement reader (``_read_statements``), which
names the file and line of each mistake. The two must agree exactly (same arrays, bit for bit)
on every file the whole-file path accepts, and the whole-file path must decline every file the
statement reader refuses. Reference: the statement reader, itself checked against the Wavefront
OBJ specification (Appendix B1) in ``tests/test_shapes.py``; the inputs are the fuzz suite's
(``tests/test_fuzz_scene.py``) and hand-written variants of each statement form.
"""

from __future__ import annotations

import math
from pathlib import Path

import numpy as np
import pytest
from fuzzing import fuzz_settings
from hypothesis import given
from hypothesis import strategies as st
from test_fuzz_scene import OBJ_ARGUMENTS, OBJ_SEED_BYTES, OBJ_SEEDS, mutate_obj, obj_text

from render import limits
from render.errors import InputError
from render.geometry import objfile

DATA = Path(__file__).parent / "data" / "obj"
FIELDS = ("vertices", "normals", "face_v", "face_n", "face_start", "face_size", "face_slot", "face_line")


def _both(text: str, scale: float = 1.0, slot_map=None):
    """(whole-file result or None, statement result or the InputError it raised)."""
    args = (
        limits.MAX_TRIANGLES * 3,
        limits.MAX_TRIANGLES,
        limits.MAX_POLYGON_VERTICES,
        limits.MAX_COORDINATE_M,
        slot_map,
        "body",
    )
    fast = objfile._read_fast(text, scale, *args)
    try:
        slow = objfile._read_statements(text, scale, "case.obj", *args)
    except InputError as err:
        slow = err
    return fast, slow


def _assert_same(fast, slow) -> None:
    if isinstance(slow, InputError):
        assert fast is None, f"the whole-file reader accepted a file the statement reader refuses: {slow}"
        return
    if fast is None:
        return
    for name in FIELDS:
        a, b = getattr(fast, name), getattr(slow, name)
        assert a.dtype == b.dtype and a.shape == b.shape, name
        assert a.tobytes() == b.tobytes(), name
    assert fast.slots == slow.slots


def _grid(n: int, form: str) -> str:
    """A grid of n × n quads, half as two triangles and half as quads, with normals and texture
    coordinates, references written as ``form``."""
    lines = [f"v {i * 0.5:.3f} {j * 0.25:g} {math.sin(i + j):.17g}" for i in range(n + 1) for j in range(n + 1)]
    lines += ["vn 0 0 1", "vn 0.1 0 1", "vt 0 0", "vt 1 0 0", "vt 0.5"]
    lines.append("usemtl first")
    for i in range(n):
        for j in range(n):
            a, b, c, d = (
                i * (n + 1) + j + 1,
                (i + 1) * (n + 1) + j + 1,
                (i + 1) * (n + 1) + j + 2,
                i * (n + 1) + j + 2,
            )
            refs = [form.format(v=k, t=1 + k % 3, n=1 + k % 2) for k in (a, b, c, d)]
            if (i + j) % 2:
                lines += ["f " + " ".join(refs[:3]), "f " + " ".join([refs[0], refs[2], refs[3]])]
            else:
                lines.append("f " + " ".join(refs))
        if i == n // 2:
            lines.append("usemtl second")
    return "\n".join(lines) + "\n"


@pytest.mark.parametrize("kernel", [True, False], ids=["compiled", "tokens"])
@pytest.mark.parametrize("form", ["{v}", "{v}/{t}", "{v}//{n}", "{v}/{t}/{n}"])
def test_every_reference_form_read_whole(form, kernel, monkeypatch):
    # Face references are read by the compiled pass (render.geometry.objfaces) when written
    # plainly, else token by token; both must agree with the statement reader.
    from render.geometry import objfaces

    text = _grid(6, form)
    read, used = objfaces.read_face_references, []

    def spy(raw, n_faces):
        used.append(read(raw, n_faces) if kernel else None)
        return used[-1]

    monkeypatch.setattr(objfaces, "read_face_references", spy)
    fast, slow = _both(text)
    assert fast is not None, "an ordinary file takes the whole-file path"
    assert len(used) == 1 and (used[0] is not None) == kernel
    _assert_same(fast, slow)


def test_compiled_face_pass_declines_all_but_the_plainest_writing():
    from render.geometry.objfaces import read_face_references

    text = b"v 1 2 3\nf 1//4 -2//5 3//6\nusemtl a/b\n# f 1 2 3\nf\t7//1\t8//2 9//3 10//4  \n"
    sizes, numbers, form = read_face_references(text, 2)
    assert form == 2 and sizes.tolist() == [3, 4]
    assert numbers[:, 0].tolist() == [1, -2, 3, 7, 8, 9, 10] and numbers[:, 2].tolist() == [4, 5, 6, 1, 2, 3, 4]
    for refs in [b"+1 2 3", b"1 2/3 4", b"1/ 2/ 3/", b"1//2//3 4 5", b"1 2 -", b"1 2 3_0", b"1 2 " + b"1" * 19]:
        assert read_face_references(b"f " + refs + b"\n", 1) is None, refs
    assert read_face_references(b"f 1 2 3\nf 1 2 3\n", 1) is None  # more face lines than counted


@pytest.mark.parametrize(
    "change",
    [
        lambda t: t.replace("\n", "\r\n"),  # CR LF line breaks
        lambda t: t.replace("\n", "\r"),  # CR line breaks
        lambda t: t.replace(" ", "\t"),  # tabs
        lambda t: t.replace(" ", "   "),  # runs of spaces
        lambda t: t.replace("\nf ", "\n  f "),  # indented statements
        lambda t: "# a comment\n" + t.replace("\nvn", " # trailing\nvn") + "# end",  # comments, no final LF
        lambda t: t.replace("v 0.000 0 0\n", "v 0.000 0 0 1\n").replace("v 0.000 0.25", "v 0.000 0.25 0 0.1 0.2 0.3"),
        lambda t: "o thing\ng group\ns 1\nmtllib x.mtl\nvp 1 2\n" + t,  # ignored statements
        lambda t: t.replace("usemtl second", "usemtl  two words "),
        lambda t: t.replace(" 1/", " -1/").replace("f 2 ", "f -3 "),  # negative references
    ],
)
def test_variants_read_whole_and_alike(change):
    for form in ("{v}", "{v}/{t}/{n}", "{v}//{n}"):
        text = change(_grid(4, form))
        fast, slow = _both(text, slot_map={"first": "paint"})
        assert not isinstance(slow, InputError), slow
        assert fast is not None
        _assert_same(fast, slow)


@pytest.mark.parametrize("path", OBJ_SEEDS, ids=lambda p: p.name)
def test_test_files(path):
    text = path.read_bytes().decode("utf-8", "replace")
    for scale in (1.0, 1e10):
        _assert_same(*_both(text, scale))


def test_signs_and_leading_zeros_read_whole():
    fast, slow = _both("v 0 0 0\nv 1 0 0\nv 0 1 0\nf 1 2 0003\nf -3 +2 -1\n")
    assert fast is not None and fast.face_v.tolist() == [0, 1, 2, 0, 1, 2]
    _assert_same(fast, slow)


def test_mistakes_are_left_to_the_statement_reader():
    base = "v 0 0 0\nv 1 0 0\nv 0 1 0\nvn 0 0 1\n"
    for tail in [
        "f 1 2 4\n",  # out of range
        "f 0 1 2\n",  # index 0
        "f 1 2\n",  # too few
        "f 1 2 3\nv\n",  # keyword alone
        "f 1//1 2/1 3\n",  # forms mixed
        "f 1/ 2/ 3/\n",  # empty texture field
        "f 1//1 2//1 //1\n",  # empty vertex field
        "f 1 2 3 \\\n 1\n",  # continued line
        "vn 0 0 0\nf 1 2 3\n",  # zero normal
        "v nan 0 0\nf 1 2 3\n",
        "v 1_0 0 0\nf 1 2 3\n",  # accepted by both (Python's float reads it), agreeing
        "f 1 2 3\nusemtl\n",
        "f 1 2 9223372036854775808\n",
        "f 1 2 3 2\n",  # a polygon that folds back: the statement reader's triangulation decides
        "f 1 2- 3\n",  # a minus sign inside a reference
        "f 1 2 --3\n",
        "f 1 2 -\n",
        "f 1 2 99999999999999999999999\n",  # beyond int64 (numpy saturates; out of range either way)
        "f 1 2 -99999999999999999999999\n",
        "f 1 2 0003\nf -1 -2 +1\n",  # leading zeros and signs: read as int() reads them
        "v v 1 2\nf 1 2 3\n",  # a keyword where a number belongs
        "vn vn 0 1\nf 1//1 2//1 3//1\n",
        "v 1 1 1 1\nv 2 2\nf 1 2 3\n",  # counts that add up to whole statements
        "f 1 2 3\nv 0 0 1\nf 1 2 5\nvn 1 0 0\nf 1//2 2//1 3//2\n",  # statements interleaved
    ]:
        _assert_same(*_both(base + tail))


@fuzz_settings()
@given(text=obj_text(), arguments=OBJ_ARGUMENTS)
def test_random_files_alike(text, arguments):
    _assert_same(*_both(text, arguments[0]))


@fuzz_settings()
@given(data=st.data())
def test_mutated_files_alike(data):
    content = OBJ_SEED_BYTES[data.draw(st.integers(0, len(OBJ_SEED_BYTES) - 1))]
    for _ in range(data.draw(st.integers(1, 3))):
        content = mutate_obj(content, data.draw)
    text = content.decode("utf-8", "replace")
    _assert_same(*_both(text, data.draw(OBJ_ARGUMENTS)[0]))


def test_large_grid_alike():
    # 20 000 triangles in all four forms: the whole-file path's offsets stay aligned at size.
    for form in ("{v}", "{v}/{t}/{n}"):
        fast, slow = _both(_grid(100, form))
        assert fast is not None
        _assert_same(fast, slow)
        assert np.unique(fast.face_slot).tolist() == [1, 2]


_DECIMALS = st.builds(
    lambda sign, whole, frac, exp: f"{sign}{whole}{frac}{exp}",
    st.sampled_from(["", "-", "+"]),
    st.from_regex(r"[0-9]{0,20}", fullmatch=True),
    st.sampled_from(["", "."]).flatmap(
        lambda p: st.from_regex(r"[0-9]{0,20}", fullmatch=True).map(lambda d: p + d if p else "")
    ),
    st.sampled_from(["", "e", "E"]).flatmap(
        lambda e: st.from_regex(r"[-+]?[0-9]{1,4}", fullmatch=True).map(lambda d: e + d) if e else st.just("")
    ),
).filter(bool)


@fuzz_settings()
@given(
    st.lists(
        st.one_of(_DECIMALS, st.floats(allow_nan=False).map(repr), st.floats(-1e4, 1e4).map(lambda x: f"{x:.6f}")),
        min_size=1,
        max_size=8,
    )
)
def test_compiled_numbers_are_what_float_reads(tokens):
    # Reference: Python's float(), a correctly rounded decimal-to-binary conversion; the
    # compiled pass must give the same bits for every number it takes, and take the numbers a
    # modelling program writes (fixed notation, at most 15 significant digits).
    from render.geometry.objfaces import read_line_numbers

    text = ("v " + " ".join(tokens) + "\n").encode("ascii")
    read = read_line_numbers(text, np.array([0]), 1, len(tokens))
    try:
        expected = [float(t) for t in tokens]
    except ValueError:
        assert read is None
        return
    if read is None:
        return
    values, counts = read
    assert counts.tolist() == [len(tokens)]
    assert values[0].tobytes() == np.array(expected).tobytes(), tokens


@pytest.mark.parametrize(
    "token", ["0.000000", "-0.000000", "12.345678", "-9999.999999", "1e-5", "+.5", "5.", "123456789012345"]
)
def test_compiled_numbers_take_what_modelling_programs_write(token):
    from render.geometry.objfaces import read_line_numbers

    read = read_line_numbers(f"vn {token}\n".encode("ascii"), np.array([0]), 2, 1)
    assert read is not None and read[0][0, 0].tobytes() == np.float64(float(token)).tobytes()


@pytest.mark.parametrize(
    "token", ["1e23", "0.1e-30", "12345678901234567890", "1_0", "nan", "inf", "1.2.3", "-", ".", "1e", "1-2"]
)
def test_compiled_numbers_leave_the_rest_to_float(token):
    from render.geometry.objfaces import read_line_numbers

    assert read_line_numbers(f"v {token}\n".encode("ascii"), np.array([0]), 1, 1) is None
