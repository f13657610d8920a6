"""Wavefront OBJ reader: a user's polygon model as :class:`~render.geometry.shapes.Part` lists.

Only the reader lives here; the primitives it produces and the polygon triangulation it uses
are in :mod:`render.geometry.shapes`. Mistakes in the file raise
:class:`~render.errors.InputError` naming the file and line (up to
:data:`render.limits.MAX_PROBLEMS_PER_FILE` at once); bad arguments
(``scale``, ``up_axis``) raise :class:`ValueError`.

An ordinary file (printable ASCII, no continued lines, every face reference written the same
way, no mistake) is read all at once with numpy and the compiled passes of
:mod:`render.geometry.objfaces` (``_read_fast``: the numbers of ``v``, ``vn`` and ``vt``
statements and the face references each in one pass over the bytes; a million triangles in
about a second); anything else, and every file with a mistake, is read statement by statement
(``_read_statements``), which names the line of each mistake. Both give the same arrays, bit
for bit (``tests/test_objfile_whole.py``).

Against hostile files: the file is read as a size-capped regular file
(:func:`render.fileio.read_user_bytes`, kind "OBJ file"; plain ASCII is its own text, anything
else is read as UTF-8 by :func:`render.fileio.read_user_text`); reading is linear in its size
(continued lines are joined once, vertices and face references are kept in flat arrays); the
vertices, triangles and vertices per face are counted against :mod:`render.limits` as they are
read; every coordinate after scaling is finite and within
:data:`render.limits.MAX_COORDINATE_M`, and normals are normalised without overflow, so the
parts returned are finite. Line numbers count line breaks (LF, CR LF or CR) as editors do.

References
----------
- Wavefront Technologies, "Object Files (.obj)", Advanced Visualizer manual, Appendix B1
  (the statement syntax: ``v``, ``vt``, ``vn``, ``f`` with 1-based and negative references,
  ``usemtl``, line continuation).
- Meisters, G. H. (1975), "Polygons have ears", Amer. Math. Monthly 82: ear clipping of
  non-convex faces (through :func:`render.geometry.shapes.triangulate_polygon_3d`).
"""

from __future__ import annotations

import math
import os
import re
from array import array
from collections.abc import Callable, Iterator, Mapping, Sequence
from dataclasses import dataclass

import numpy as np

from render import limits
from render.errors import ProblemList, input_error
from render.fileio import read_user_bytes, read_user_text
from render.geometry.mesh import face_normals
from render.geometry.shapes import Part, triangulate_polygon_3d

__all__ = ["load_obj"]

#: Turn of a y-up file into our z-up frame: its +y becomes +z and its +z becomes -y (a proper
#: rotation, so the winding is kept).
_Y_UP_TO_Z_UP = np.array([[1.0, 0.0, 0.0], [0.0, 0.0, -1.0], [0.0, 1.0, 0.0]])


def _obj_numbers(tokens: Sequence[str]) -> tuple[list[float] | None, str]:
    """The tokens as finite floats, or (None, first bad token)."""
    out = []
    for tok in tokens:
        try:
            v = float(tok)
        except ValueError:
            return None, tok
        if not math.isfinite(v):
            return None, tok
        out.append(v)
    return out, ""


def _bad(tok: str) -> str:
    return f" ({_shown(tok)!r} is not a finite number)" if tok else ""


def _shown(tok: str, limit: int = 40) -> str:
    return tok if len(tok) <= limit else tok[: limit - 1] + "…"


def _scale_factor(scale: float) -> float:
    """``scale`` as a float; ValueError unless it is a finite number above 0."""
    if isinstance(scale, bool) or not isinstance(scale, (int, float, np.integer, np.floating)):
        raise ValueError(f"scale must be a number, got {scale!r}")
    if not math.isfinite(scale) or scale <= 0:
        raise ValueError(f"scale must be a finite number > 0, got {scale!r}")
    return float(scale)


_LINE_BREAK = re.compile(r"\r\n|\r|\n")


def _statements(text: str) -> Iterator[tuple[int, str]]:
    """(line number, statement without its comment) of every non-empty statement. A line
    ending in a backslash continues on the next line (joined with a space); the pieces are
    collected and joined once, so the work is linear in the text."""
    pieces: list[str] = []
    first = 0
    for number, line in enumerate(_LINE_BREAK.split(text), start=1):
        stripped = line.rstrip()
        if not pieces:
            first = number
        if stripped.endswith("\\"):
            pieces.append(stripped[:-1])
            continue
        if pieces:
            pieces.append(line)
            line = " ".join(pieces)
            pieces = []
        content = line.split("#", 1)[0].strip()
        if content:
            yield first, content
    if pieces:  # a continuation on the last line joins nothing
        content = " ".join(pieces).split("#", 1)[0].strip()
        if content:
            yield first, content


def _unit_vectors(v: np.ndarray) -> np.ndarray:
    """Rows of ``v`` scaled to unit length without overflow or underflow (scaled by their
    largest component first); zero rows stay zero."""
    big = np.max(np.abs(v), axis=1, keepdims=True) if v.shape[0] else np.zeros((0, 1))
    w = np.divide(v, big, out=np.zeros_like(v), where=big > 0)
    length = np.linalg.norm(w, axis=1, keepdims=True)
    return np.divide(w, length, out=np.zeros_like(w), where=length > 0)


@dataclass(frozen=True)
class _Statements:
    """What an OBJ file's statements hold, in file order: vertices (scaled, file frame), raw
    normals, the material slots by name, and the faces as flat arrays: vertex and normal
    references (0-based; normals -1 for a face without them), each face's first reference, size,
    slot and line."""

    vertices: np.ndarray
    normals: np.ndarray
    slots: dict[str, int]
    face_v: np.ndarray
    face_n: np.ndarray
    face_start: np.ndarray
    face_size: np.ndarray
    face_slot: np.ndarray
    face_line: np.ndarray


def _read_statements(
    text: str,
    s: float,
    src: str,
    max_vertices: int,
    max_triangles: int,
    max_face: int,
    max_coordinate: float,
    slot_map: Mapping[str, str] | None,
    default_slot: str,
) -> _Statements:
    """Read the statements one by one, reporting every mistake with its line (the reference
    reader: :func:`_read_fast` gives the same result for the files it accepts)."""
    problems = ProblemList(src)
    verts = array("d")  # x, y, z of every vertex (scaled)
    norms = array("d")
    n_verts = n_norms = n_tex = 0
    slots: dict[str, int] = {}
    slot = slots.setdefault(default_slot, 0)
    # Faces as flat arrays: vertex refs, normal refs (-1: none), and per face its first ref,
    # its size, its slot and its line.
    face_v = array("q")
    face_n = array("q")
    face_start = array("q")
    face_size = array("q")
    face_slot = array("q")
    face_line = array("q")
    n_triangles = 0

    def problem(line_no: int, message: str) -> None:
        problems.add(f"line {line_no}", message)
        if len(problems.items) >= limits.MAX_PROBLEMS_PER_FILE:  # the rest of the file is not read
            problems.raise_if_any()

    for line_no, content in _statements(text):
        tokens = content.split()
        key, args = tokens[0], tokens[1:]
        if key == "v":
            nums, bad = _obj_numbers(args)
            if nums is None or len(nums) not in (3, 4, 6, 7):
                problem(line_no, "expected 'v x y z' with finite numbers (optionally w, or r g b)" + _bad(bad))
                nums = [0.0, 0.0, 0.0]  # keep later indices aligned
            xyz = [c * s for c in nums[:3]]
            if not all(abs(c) <= max_coordinate for c in xyz):  # also catches inf and NaN
                problem(
                    line_no,
                    f"a coordinate of {max(abs(c) for c in xyz):g} m (after scaling by {s:g}); lampcast takes "
                    f"coordinates up to {max_coordinate:g} m from the origin",
                )
                xyz = [0.0, 0.0, 0.0]
            verts.extend(xyz)
            n_verts += 1
            if n_verts > max_vertices:
                limits.check_count(n_verts, max_vertices, src, f"line {line_no}", "the number of vertices")
        elif key == "vn":
            nums, bad = _obj_numbers(args)
            if nums is None or len(nums) != 3:
                problem(line_no, "expected 'vn x y z' with three finite numbers" + _bad(bad))
                nums = [0.0, 0.0, 1.0]
            elif not any(nums):
                problem(line_no, "normal of zero length")
            norms.extend(nums)
            n_norms += 1
            if n_norms > max_vertices:
                limits.check_count(n_norms, max_vertices, src, f"line {line_no}", "the number of normals")
        elif key == "vt":
            nums, bad = _obj_numbers(args)
            if nums is None or not 1 <= len(nums) <= 3:
                problem(line_no, "expected 'vt u [v [w]]' with finite numbers" + _bad(bad))
            n_tex += 1
        elif key == "f":
            if len(args) < 3:
                problem(line_no, f"a face needs at least 3 vertices, got {len(args)}")
                continue
            if len(args) > max_face:
                problem(line_no, f"a face of {len(args):,} vertices; lampcast triangulates at most {max_face:,}")
                continue
            refs = _face_refs(args, n_verts, n_tex, n_norms, line_no, problem)
            if refs is None:
                continue
            vi, ni = refs
            face_start.append(len(face_v))
            face_size.append(len(vi))
            face_slot.append(slot)
            face_line.append(line_no)
            face_v.extend(vi)
            face_n.extend(ni)
            n_triangles += len(vi) - 2
            if n_triangles > max_triangles:
                limits.check_count(n_triangles, max_triangles, src, f"line {line_no}", "the number of triangles")
        elif key == "usemtl":
            name = content[len("usemtl") :].strip()
            if not name:
                problem(line_no, "expected 'usemtl name'")
                continue
            slot = slots.setdefault(slot_map.get(name, name) if slot_map else name, len(slots))
        # Other statements (o, g, s, mtllib, vp, l, p, curves and surfaces, unknown keywords) are ignored.
    problems.raise_if_any()

    def ints(a: array) -> np.ndarray:
        return np.frombuffer(a, dtype=np.int64) if len(a) else np.zeros(0, np.int64)

    return _Statements(
        np.frombuffer(verts, dtype=np.float64).reshape(-1, 3) if n_verts else np.zeros((0, 3)),
        np.frombuffer(norms, dtype=np.float64).reshape(-1, 3) if n_norms else np.zeros((0, 3)),
        slots,
        ints(face_v),
        ints(face_n),
        ints(face_start),
        ints(face_size),
        ints(face_slot),
        ints(face_line),
    )


# --- the whole-file reader ----------------------------------------------------------------------

# Text the whole-file reader leaves to the statement reader: anything but printable ASCII, tabs
# and line breaks (Python's split() knows more white space than spaces and tabs; line numbers
# count only LF, CR LF and CR), and backslashes (continued lines).
_PLAIN_BYTES = bytes([9, 10, 13, *range(0x20, 0x5C), *range(0x5D, 0x7F)])
_COMMENT = re.compile(rb"#[^\n]*")
_LEADING_SPACE = re.compile(rb"^[ \t]+", re.MULTILINE)
_SPACE, _TAB, _LF, _SLASH, _HASH = 32, 9, 10, 47, 35


class _Unusual(Exception):
    """The whole-file reader met something it leaves to the statement reader."""


def _tokens_per_line(body: bytes, n_lines: int) -> tuple[np.ndarray, np.ndarray]:
    """For ``body`` (``n_lines`` lines joined by LF, fields separated by spaces or tabs): the
    number of tokens on each line and the byte offset where each token starts."""
    if not n_lines:
        return np.zeros(0, np.int64), np.zeros(0, np.int64)
    b = np.frombuffer(body, dtype=np.uint8)
    sep = (b == _SPACE) | (b == _TAB) | (b == _LF)
    start = ~sep
    start[1:] &= sep[:-1]
    token_at = np.flatnonzero(start)
    line_ends = np.flatnonzero(b == _LF)
    cut = np.searchsorted(token_at, line_ends)
    counts = np.diff(np.concatenate([[0], cut, [token_at.size]]))
    if counts.size != n_lines:  # pragma: no cover - lines hold no LF
        raise _Unusual
    return counts, token_at


def _floats(tokens: list[str]) -> np.ndarray:
    """Tokens as finite floats, exactly as ``float(token)`` reads them."""
    try:
        out = np.fromiter(map(float, tokens), dtype=np.float64, count=len(tokens))
    except ValueError:
        raise _Unusual from None
    if not np.all(np.isfinite(out)):
        raise _Unusual
    return out


def _ints(tokens: list[str]) -> np.ndarray:
    """Tokens as integers, exactly as ``int(token)`` reads them (int64)."""
    try:
        return np.fromiter(map(int, tokens), dtype=np.int64, count=len(tokens))
    except (ValueError, OverflowError):
        raise _Unusual from None


_INT_BYTES = b"0123456789- \t\n"
_MINUS, _ZERO, _NINE = 45, 48, 57


def _int_tokens(raw: bytes, expected: int) -> np.ndarray:
    """The ``expected`` white-space separated integers of ``raw``, as ``int(token)`` reads
    them. Text of digits, spaces and minus signs (each starting a token, before a digit) is
    read by numpy in one pass (a number beyond int64 saturates there and then fails the range
    check); anything else token by token."""
    if raw.translate(None, _INT_BYTES):
        tokens = raw.split()
        if len(tokens) != expected:
            raise _Unusual
        return _ints([t.decode("ascii") for t in tokens])
    b = np.frombuffer(raw, dtype=np.uint8)
    minus = np.flatnonzero(b == _MINUS)
    if minus.size:
        after = b[np.minimum(minus + 1, b.size - 1)]
        before = b[np.maximum(minus - 1, 0)]
        starts_token = (minus == 0) | (before == _SPACE) | (before == _TAB) | (before == _LF)
        if not np.all((minus + 1 < b.size) & (after >= _ZERO) & (after <= _NINE) & starts_token):
            raise _Unusual
    values = np.fromstring(raw, dtype=np.int64, sep=" ")
    if values.size != expected:
        raise _Unusual
    return values


def _numbers(lines: list[str], key_chars: int, allowed: tuple[int, ...]) -> tuple[np.ndarray, np.ndarray]:
    """The numbers of statements whose keyword is ``key_chars`` long: (all numbers in order,
    count per statement), every count one of ``allowed``."""
    n = len(lines)
    if n:  # every statement with the first allowed count: the keywords fall every count + 1 tokens
        tokens = "\n".join(lines).split()
        stride = allowed[0] + 1
        if len(tokens) == stride * n and tokens[::stride].count(lines[0][:key_chars]) == n:
            # A keyword is no number, so the n keywords are exactly these tokens.
            del tokens[::stride]
            return _floats(tokens), np.full(n, allowed[0], dtype=np.int64)
    body = "\n".join([line[key_chars:] for line in lines])
    counts, _ = _tokens_per_line(body.encode("ascii"), len(lines))
    if not np.all(np.isin(counts, allowed)):
        raise _Unusual
    return _floats(body.split()), counts


def _first_three(values: np.ndarray, counts: np.ndarray) -> np.ndarray:
    """(n, 3): the first three numbers of each statement."""
    first = np.concatenate([[0], np.cumsum(counts)[:-1]]) if counts.size else np.zeros(0, np.int64)
    return values[first[:, None] + np.arange(3)]


def _line_numbers(
    raw: bytes,
    starts: np.ndarray,
    at: np.ndarray,
    key_chars: int,
    allowed: tuple[int, ...],
    keep: int,
    lines: Callable[[], list[str]],
) -> np.ndarray:
    """(n, ``keep``): the first ``keep`` numbers of the statements on lines ``at`` (each
    ``key_chars`` of keyword, then one of ``allowed`` numbers), read by the compiled pass
    (:func:`render.geometry.objfaces.read_line_numbers`) when it reads them exactly, else token by
    token (:func:`_numbers`)."""
    from render.geometry.objfaces import read_line_numbers

    read = read_line_numbers(raw, starts[at], key_chars, keep)
    if read is not None:
        first, counts = read
        if counts.size and not np.all(np.isin(counts, allowed)):
            raise _Unusual
        return first
    values, counts = _numbers(_lines_at(lines(), at), key_chars, allowed)
    return _first_three(values, counts)[:, :keep] if keep else np.zeros((counts.size, 0))


def _resolve(raw: np.ndarray, sizes: np.ndarray, count_before: np.ndarray) -> np.ndarray:
    """OBJ references (1-based, negative counting back) of faces of ``sizes`` references as
    0-based indices, checked in range (``count_before``: items before each face)."""
    from render.geometry.objfaces import resolve_references

    out = resolve_references(raw, sizes, count_before)
    if out is None:
        raise _Unusual
    return out


def _face_numbers(
    raw: bytes, all_lines: Callable[[], list[str]], f_lines: np.ndarray, max_face: int
) -> tuple[np.ndarray, list[np.ndarray], tuple[str, ...]]:
    """Sizes of the faces, their references as columns (vertex; vertex, texture; vertex,
    normal; or vertex, texture, normal) and the columns' names, all references of the file
    written alike: by :func:`render.geometry.objfaces.read_face_references` when they are
    written plainly, else token by token."""
    from render.geometry.objfaces import FORMS, read_face_references

    read = read_face_references(raw, f_lines.size)  # the plainest writing, in one compiled pass
    if read is not None:
        sizes, numbers, form = read
        if sizes.size and (sizes.min() < 3 or sizes.max() > max_face):
            raise _Unusual
        columns = {0: (0,), 1: (0, 1), 2: (0, 2), 3: (0, 1, 2)}[form]
        return sizes, [numbers[:, k] for k in columns], FORMS[form]
    lines = _lines_at(all_lines(), f_lines)
    body = "\n".join([line[1:] for line in lines])
    raw = body.encode("ascii")
    sizes, token_at = _tokens_per_line(raw, len(lines))
    if sizes.size and (sizes.min() < 3 or sizes.max() > max_face):
        raise _Unusual
    n_refs = int(sizes.sum())
    slash_at = np.flatnonzero(np.frombuffer(raw, dtype=np.uint8) == _SLASH)
    per_ref = np.bincount(np.searchsorted(token_at, slash_at, side="right") - 1, minlength=n_refs)
    kind = int(per_ref[0]) if n_refs else 0
    if n_refs and (per_ref.min() != kind or per_ref.max() != kind):
        raise _Unusual
    if kind == 0:
        columns = 1
    elif kind == 1:  # v/vt
        body, columns = body.replace("/", " "), 2
    elif kind == 2 and body.count("//") == n_refs:  # v//vn
        body, columns = body.replace("//", " "), -2
    elif kind == 2 and "//" not in body:  # v/vt/vn
        body, columns = body.replace("/", " "), 3
    else:
        raise _Unusual
    # An empty field (5/ or /5) joins its neighbour: the count tells.
    values = _int_tokens(body.encode("ascii"), n_refs * abs(columns)).reshape(n_refs, abs(columns))
    names = {1: ("v",), 2: ("v", "vt"), -2: ("v", "vn"), 3: ("v", "vt", "vn")}[columns]
    return sizes, [values[:, k] for k in range(len(names))], names


def _read_fast(
    text: str,
    s: float,
    max_vertices: int,
    max_triangles: int,
    max_face: int,
    max_coordinate: float,
    slot_map: Mapping[str, str] | None,
    default_slot: str,
) -> _Statements | None:
    """Read an ordinary OBJ file all at once with numpy, giving what :func:`_read_statements`
    gives; None for anything else (a mistake, continued lines, other characters, references
    written in different ways, counts beyond the limits), which that reader then reports."""
    if not text.isascii():
        return None
    return _read_fast_bytes(
        text.encode("ascii"), s, max_vertices, max_triangles, max_face, max_coordinate, slot_map, default_slot
    )


def _read_fast_bytes(
    data: bytes,
    s: float,
    max_vertices: int,
    max_triangles: int,
    max_face: int,
    max_coordinate: float,
    slot_map: Mapping[str, str] | None,
    default_slot: str,
) -> _Statements | None:
    """:func:`_read_fast` of the file's bytes (plain ASCII text is its own bytes, so the file
    need not be decoded and encoded again)."""
    if data.translate(None, _PLAIN_BYTES):
        return None
    try:
        return _read_plain(data, s, max_vertices, max_triangles, max_face, max_coordinate, slot_map, default_slot)
    except _Unusual:
        return None


def _lines_at(lines: list[str], at: np.ndarray) -> list[str]:
    """``lines[i] for i in at`` (a slice when they follow one another)."""
    if at.size and at[-1] - at[0] + 1 == at.size:
        return lines[int(at[0]) : int(at[-1]) + 1]
    return [lines[i] for i in at]


def _read_plain(data, s, max_vertices, max_triangles, max_face, max_coordinate, slot_map, default_slot):
    """The whole-file reader on plain ASCII bytes (raises :class:`_Unusual`)."""
    if b"\r" in data:
        data = data.replace(b"\r\n", b"\n").replace(b"\r", b"\n")  # line numbers as _statements counts them
    raw = data + b"\n\n\n"
    b = np.frombuffer(raw, dtype=np.uint8)
    starts = np.concatenate([[0], np.flatnonzero(b[:-3] == _LF) + 1])
    hashes = np.flatnonzero(b == _HASH)
    # Comments inside statements are cut; whole comment lines are no statement anyway.
    if hashes.size and not np.all((hashes == 0) | (b[hashes - 1] == _LF)):
        data = _COMMENT.sub(b"", data)
        raw = data + b"\n\n\n"
        b = np.frombuffer(raw, dtype=np.uint8)
        starts = np.concatenate([[0], np.flatnonzero(b[:-3] == _LF) + 1])
    if np.any((b[starts] == _SPACE) | (b[starts] == _TAB)):  # indented statements
        data = _LEADING_SPACE.sub(b"", data)
        raw = data + b"\n\n\n"
        b = np.frombuffer(raw, dtype=np.uint8)
        starts = np.concatenate([[0], np.flatnonzero(b[:-3] == _LF) + 1])
    split: list[list[str]] = []

    def lines() -> list[str]:
        """The text's lines (split once, when a path below needs them)."""
        if not split:
            split.append(data.decode("ascii").split("\n"))
        return split[0]

    c0, c1, c2 = b[starts], b[starts + 1], b[starts + 2]
    space1 = (c1 == _SPACE) | (c1 == _TAB)
    space2 = (c2 == _SPACE) | (c2 == _TAB)
    is_v = (c0 == ord("v")) & space1
    is_vn = (c0 == ord("v")) & (c1 == ord("n")) & space2
    is_vt = (c0 == ord("v")) & (c1 == ord("t")) & space2
    is_f = (c0 == ord("f")) & space1
    # A keyword alone on its line is a mistake.
    if np.any(((c0 == ord("v")) | (c0 == ord("f"))) & (c1 == _LF)) or np.any(
        (c0 == ord("v")) & ((c1 == ord("n")) | (c1 == ord("t"))) & (c2 == _LF)
    ):
        raise _Unusual
    if int(is_v.sum()) > max_vertices or int(is_vn.sum()) > max_vertices:
        raise _Unusual

    v_lines = np.flatnonzero(is_v)
    first = _line_numbers(raw, starts, v_lines, 1, (3, 4, 6, 7), 3, lines)
    with np.errstate(over="ignore"):  # an overflow is beyond the coordinate limit below
        vertices = first * s
    if not np.all(np.abs(vertices) <= max_coordinate):
        raise _Unusual
    normals = _line_numbers(raw, starts, np.flatnonzero(is_vn), 2, (3,), 3, lines)
    if np.any(np.all(normals == 0, axis=1)):
        raise _Unusual
    _line_numbers(raw, starts, np.flatnonzero(is_vt), 2, (1, 2, 3), 0, lines)

    slots: dict[str, int] = {}
    slots.setdefault(default_slot, 0)
    mtl_lines: list[int] = []
    mtl_slots: list[int] = []
    for i in np.flatnonzero(c0 == ord("u")):
        content = raw[starts[i] : raw.index(b"\n", starts[i])].decode("ascii").strip()
        if content.split()[0] != "usemtl":
            continue
        name = content[len("usemtl") :].strip()
        if not name:
            raise _Unusual
        mtl_lines.append(int(i))
        mtl_slots.append(slots.setdefault(slot_map.get(name, name) if slot_map else name, len(slots)))

    f_lines = np.flatnonzero(is_f)
    sizes, columns, names = _face_numbers(raw, lines, f_lines, max_face)
    if int((sizes - 2).sum()) > max_triangles:
        raise _Unusual
    so_far = {"v": is_v, "vt": is_vt, "vn": is_vn}
    resolved = {name: _resolve(column, sizes, np.cumsum(so_far[name])[f_lines]) for name, column in zip(names, columns)}
    face_v = resolved["v"]
    face_n = resolved.get("vn", np.full(face_v.size, -1, np.int64))
    before = np.searchsorted(np.asarray(mtl_lines, dtype=np.int64), f_lines, side="right") - 1
    face_slot = np.where(before >= 0, np.asarray([0, *mtl_slots], dtype=np.int64)[before + 1], 0)
    face_start = np.concatenate([[0], np.cumsum(sizes)[:-1]]).astype(np.int64) if sizes.size else sizes
    return _Statements(
        vertices,
        normals,
        slots,
        face_v,
        face_n,
        face_start,
        sizes.astype(np.int64),
        face_slot.astype(np.int64),
        (f_lines + 1).astype(np.int64),
    )


def load_obj(
    path: str | os.PathLike,
    *,
    scale: float = 1.0,
    up_axis: str = "z",
    slot_map: Mapping[str, str] | None = None,
    default_slot: str = "body",
) -> list[Part]:
    """Read a Wavefront OBJ file into parts, one per material slot.

    Supported: ``v`` (3 coordinates, optionally a 4th weight or 3 colour values, which are
    ignored), ``vn``, ``vt`` (counted for index checks only), ``f`` with ``v``, ``v/vt``,
    ``v//vn`` and ``v/vt/vn`` references (1-based; negative indices count back from the latest
    vertex), polygon faces (fan for convex, ear clipping otherwise), ``usemtl`` (the material
    name becomes the slot, through ``slot_map`` if given; faces before any ``usemtl`` get
    ``default_slot``), line continuation with a trailing backslash and ``#`` comments. Other
    statements (``o``, ``g``, ``s``, ``mtllib``, lines, curves, unknown keywords) are ignored.
    Faces whose references all carry normals use them (normalised) as shading normals, others
    are flat. Zero-area triangles are dropped.

    Parameters
    ----------
    scale
        Factor from file units to metres (e.g. 0.01 for centimetres).
    up_axis
        ``"z"`` (file is z-up, used as is) or ``"y"`` (file is y-up: turned so that its +y
        becomes +z and its +z becomes −y; a proper rotation, winding kept).

    Raises
    ------
    render.errors.InputError
        Naming the file and line for an unreadable file, a malformed statement (bad or
        non-finite number, missing coordinates), a coordinate beyond
        :data:`render.limits.MAX_COORDINATE_M` after scaling, an index of 0 or out of range, a
        face with fewer than 3 or more than :data:`render.limits.MAX_POLYGON_VERTICES`
        vertices, a zero-length normal, a self-intersecting polygon face, more vertices than
        3 × :data:`render.limits.MAX_TRIANGLES` or more triangles than
        :data:`~render.limits.MAX_TRIANGLES`, or a file with no faces. Up to
        :data:`~render.limits.MAX_PROBLEMS_PER_FILE` problems are reported together (the file
        is not read past the last of them).
    ValueError
        For a bad ``scale`` or ``up_axis`` (arguments, not file content).
    """
    s = _scale_factor(scale)
    if up_axis not in ("z", "y"):
        raise ValueError(f"up_axis must be 'z' or 'y', got {up_axis!r}")
    src = str(path)
    data = read_user_bytes(path, "OBJ file")
    max_triangles = limits.MAX_TRIANGLES
    max_vertices = 3 * max_triangles
    max_face = limits.MAX_POLYGON_VERTICES
    max_coordinate = limits.MAX_COORDINATE_M

    read = _read_fast_bytes(data, s, max_vertices, max_triangles, max_face, max_coordinate, slot_map, default_slot)
    if read is None:  # anything unusual, and every mistake, takes the statement-by-statement reader
        plain = not data.translate(None, _PLAIN_BYTES)  # then the bytes are the text
        text = data.decode("ascii") if plain else read_user_text(path, "OBJ file", "a Wavefront OBJ text file")
        del data
        read = _read_statements(
            text, s, src, max_vertices, max_triangles, max_face, max_coordinate, slot_map, default_slot
        )
    if not read.face_start.size:
        raise input_error(src, "", "the OBJ file has no faces ('f' statements)")

    problems = ProblemList(src)

    def problem(line_no: int, message: str) -> None:
        problems.add(f"line {line_no}", message)
        if len(problems.items) >= limits.MAX_PROBLEMS_PER_FILE:
            problems.raise_if_any()

    V = read.vertices
    N = _unit_vectors(read.normals)
    if up_axis == "y":
        V = V @ _Y_UP_TO_Z_UP.T
        N = N @ _Y_UP_TO_Z_UP.T
    face_v, face_n, face_start, face_size = read.face_v, read.face_n, read.face_start, read.face_size
    face_slot, face_line, slots = read.face_slot, read.face_line, read.slots
    tri_v, tri_n, tri_face = _triangulate(V, face_v, face_n, face_start, face_size, face_line, problem)
    problems.raise_if_any()

    tri = V[tri_v]  # (T, 3, 3)
    fn = face_normals(tri)
    keep = np.any(fn != 0, axis=1)
    if not keep.all():  # (copies of a million triangles are left out when nothing is dropped)
        tri, fn, tri_n, tri_face = tri[keep], fn[keep], tri_n[keep], tri_face[keep]
    smooth = np.all(tri_n >= 0, axis=1)
    if smooth.all():
        nrm = N[tri_n]
    else:
        nrm = np.repeat(fn[:, None, :], 3, axis=1)
        nrm[smooth] = N[tri_n[smooth]]
    tri_slot = face_slot[tri_face]
    names = {k: name for name, k in slots.items()}
    parts = []
    # Parts in the order their slot first appears among the triangles kept, triangles in file order.
    order = np.unique(tri_slot, return_index=True)
    for k in order[0][np.argsort(order[1])]:
        if order[0].size == 1:
            parts.append(Part(tri, nrm, names[int(k)]))
            break
        mask = tri_slot == k
        parts.append(Part(tri[mask], nrm[mask], names[int(k)]))
    if not parts:
        raise input_error(src, "", "the OBJ file has no faces with non-zero area")
    return parts


def _face_refs(args: list[str], n_verts: int, n_tex: int, n_norms: int, line_no: int, problem):
    """The vertex and normal indices (0-based; normals all -1 unless every reference has one)
    of one face's references, or None after a problem."""
    vi: list[int] = []
    ni: list[int] = []
    for ref in args:
        parts = ref.split("/")
        if len(parts) > 3 or parts[0] == "":
            problem(line_no, f"bad face reference {_shown(ref)!r}; expected v, v/vt, v//vn or v/vt/vn")
            return None
        where_ref = f" in {_shown(ref)!r}" if "/" in ref else ""
        resolved: list[int | None] = []
        for tok, count, what in zip(parts, (n_verts, n_tex, n_norms), ("vertex", "texture coordinate", "normal")):
            if tok == "":
                resolved.append(None)
                continue
            try:
                k = int(tok)
            except ValueError:  # not an integer, or more than 4300 digits
                problem(line_no, f"bad {what} index {_shown(tok)!r}{where_ref}; expected an integer")
                return None
            if k == 0:
                problem(line_no, f"{what} index 0{where_ref}; OBJ indices start at 1 (or count back from -1)")
                return None
            k = k - 1 if k > 0 else count + k
            if not 0 <= k < count:
                problem(line_no, f"{what} index {_shown(tok)}{where_ref} is out of range (there are {count} so far)")
                return None
            resolved.append(k)
        vi.append(resolved[0])
        ni.append(resolved[2] if len(resolved) == 3 and resolved[2] is not None else -1)
    if min(ni) < 0:
        ni = [-1] * len(ni)
    return vi, ni


def _strictly_convex(P: np.ndarray) -> np.ndarray:
    """Which of the polygons ``P`` (F, n, 3) are strictly convex with a margin: the test of
    :func:`render.geometry.shapes.triangulate_polygon_3d` (every turn left in the Newell plane,
    turning once around), batched, with a margin of 1e-9 on the sine of each turn and 1e-7 rad
    on the total so that a polygon passing here is fanned there too (rounding cannot differ by
    that much). Polygons that fail go through that function one by one."""
    a = P
    b = np.roll(P, -1, axis=1)
    newell = np.stack(
        [
            ((a[..., 1] - b[..., 1]) * (a[..., 2] + b[..., 2])).sum(axis=-1),
            ((a[..., 2] - b[..., 2]) * (a[..., 0] + b[..., 0])).sum(axis=-1),
            ((a[..., 0] - b[..., 0]) * (a[..., 1] + b[..., 1])).sum(axis=-1),
        ],
        axis=-1,
    )
    size = np.linalg.norm(newell, axis=-1, keepdims=True)
    nrm = np.divide(newell, size, out=np.zeros_like(newell), where=size > 0)
    helper = np.eye(3)[np.argmin(np.abs(nrm), axis=-1)]
    u = np.cross(helper, nrm)
    u_len = np.linalg.norm(u, axis=-1, keepdims=True)
    u = np.divide(u, u_len, out=np.zeros_like(u), where=u_len > 0)
    v = np.cross(nrm, u)
    q = np.stack([np.einsum("fnk,fk->fn", P, u), np.einsum("fnk,fk->fn", P, v)], axis=-1)
    d = np.roll(q, -1, axis=1) - q
    d1 = np.roll(d, -1, axis=1)
    turn = d[..., 0] * d1[..., 1] - d[..., 1] * d1[..., 0]
    margin = 1e-9 * np.linalg.norm(d, axis=-1) * np.linalg.norm(d1, axis=-1)
    ok = (size[:, 0] > 0) & np.all(turn > margin, axis=-1)
    total = np.arctan2(turn, (d * d1).sum(axis=-1)).sum(axis=-1)
    return ok & (np.abs(total - 2 * np.pi) < 1e-7)


def _triangulate(V, face_v, face_n, face_start, face_size, face_line, problem):
    """Triangles of every face as (T, 3) vertex indices, (T, 3) normal indices (-1: flat) and
    (T,) face numbers, in file order. Triangles are taken as they are and strictly convex
    polygons fanned, all at once (:func:`_strictly_convex`); other polygons go through
    :func:`render.geometry.shapes.triangulate_polygon_3d` one by one (fan or ear clipping)."""
    fv, fnr, start, size = face_v, face_n, face_start, face_size
    chunks_v = []
    chunks_n = []
    chunks_f = []
    three = np.flatnonzero(size == 3)
    cols = start[three, None] + np.arange(3)
    chunks_v.append(fv[cols])
    chunks_n.append(fnr[cols])
    chunks_f.append(three)
    one_by_one = []
    for n in np.unique(size[size > 3]):
        faces = np.flatnonzero(size == n)
        cols = start[faces, None] + np.arange(n)
        convex = _strictly_convex(V[fv[cols]])
        fan = np.stack([np.zeros(n - 2, np.int64), np.arange(1, n - 1), np.arange(2, n)], axis=1)  # (n-2, 3)
        chunks_v.append(fv[cols[convex]][:, fan].reshape(-1, 3))
        chunks_n.append(fnr[cols[convex]][:, fan].reshape(-1, 3))
        chunks_f.append(np.repeat(faces[convex], n - 2))
        one_by_one.extend(faces[~convex])
    for f in sorted(one_by_one):
        idx = np.arange(start[f], start[f] + size[f])
        try:
            local = triangulate_polygon_3d(V[fv[idx]], "face")
        except ValueError as err:
            problem(int(face_line[f]), f"the polygon face crosses itself or is degenerate ({err})")
            continue
        if local.shape[0] == 0:
            continue
        chunks_v.append(fv[idx][local])
        chunks_n.append(fnr[idx][local])
        chunks_f.append(np.full(local.shape[0], f, dtype=np.int64))
    tri_v = np.concatenate(chunks_v).reshape(-1, 3)
    tri_n = np.concatenate(chunks_n).reshape(-1, 3)
    tri_face = np.concatenate(chunks_f)
    if tri_face.size < 2 or np.all(tri_face[1:] >= tri_face[:-1]):  # already in file order
        return tri_v, tri_n, tri_face
    order = np.argsort(tri_face, kind="stable")
    return tri_v[order], tri_n[order], tri_face[order]
