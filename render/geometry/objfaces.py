"""OBJ statements read in compiled passes: the whole-file OBJ reader's numba kernels.

:func:`read_face_references` reads the references of every ``f`` statement of an ordinary OBJ
file in one pass over the file's bytes (line breaks made LF, comments inside statements and
indentation removed): the number of references on each line, and each reference's vertex, texture and normal
numbers as written (1-based or negative; not yet resolved). It accepts only the plainest
writing -- references separated by spaces or tabs, every reference of the file in the same one
of the four forms ``v``, ``v/vt``, ``v//vn``, ``v/vt/vn``, every number an optional minus sign
and at most 18 digits -- and returns None for anything else, which the reader then reads token
by token (:mod:`render.geometry.objfile`). For the text it accepts, each number is exactly what
Python's ``int()`` gives. :func:`resolve_references` turns them into 0-based indices.

:func:`read_line_numbers` reads the numbers of ``v``, ``vn`` and ``vt`` statements. It accepts
only decimal numbers (an optional sign, digits with an optional point, an optional exponent)
whose value a single correctly rounded operation gives exactly: the digits, read as a whole
number, at most 2^53, times or divided by a power of ten up to 10^22 (both exact in binary64;
the fast path of Clinger 1990). Such a number is then exactly what Python's ``float()`` (a
correctly rounded conversion) gives; for anything else it returns None and the reader reads
the numbers token by token with ``float()``.

References
----------
- Wavefront Technologies, "Object Files (.obj)", Advanced Visualizer manual, Appendix B1 (the
  forms of a face reference, the ``v``, ``vn`` and ``vt`` statements).
- Clinger, W. D. (1990), "How to read floating point numbers accurately", Proc. ACM SIGPLAN
  PLDI '90, 92-101: a decimal of at most 2^53 times an exact power of ten is one correctly
  rounded IEEE 754 operation.
- IEEE 754-2008, binary64 arithmetic (correctly rounded multiply and divide).
"""

from __future__ import annotations

import numba
import numpy as np

__all__ = ["FORMS", "read_face_references", "read_line_numbers", "resolve_references"]

#: The forms of a reference, by the code the kernel returns: the fields present.
FORMS = {0: ("v",), 1: ("v", "vt"), 2: ("v", "vn"), 3: ("v", "vt", "vn")}

_SPACE, _TAB, _LF, _SLASH, _MINUS, _ZERO, _NINE, _F = 32, 9, 10, 47, 45, 48, 57, 102
_PLUS, _POINT, _E, _CAPITAL_E = 43, 46, 101, 69
_MAX_DIGITS = 18
#: The largest whole number every smaller one of which binary64 holds exactly.
_EXACT_INTEGER = 2**53
#: 10^0 ... 10^22: every one exact in binary64.
_POWERS_OF_TEN = np.array([10.0**k for k in range(23)])


@numba.njit(cache=True, nogil=True)
def _scan(b, n_faces, sizes, out, store):
    """One pass over the file's bytes ``b``: the references of each face line (a line starting
    with ``f`` and a space or tab; other lines are skipped) into ``sizes`` and, when ``store``,
    their numbers into ``out`` (n_refs, 3). Returns (number of references, form code), form -1
    for text the kernel leaves to the token reader, -3 when ``out`` has no room for them all."""
    n = b.shape[0]
    i = 0
    face = -1
    ref = 0
    form = -2  # not yet seen
    while i < n:
        # At the start of a line.
        if not (b[i] == _F and i + 1 < n and (b[i + 1] == _SPACE or b[i + 1] == _TAB)):
            while i < n and b[i] != _LF:
                i += 1
            i += 1
            continue
        face += 1
        if face >= n_faces:
            return ref, -1
        i += 2
        while i < n and b[i] != _LF:
            c = b[i]
            if c == _SPACE or c == _TAB:
                i += 1
                continue
            # One reference: up to three fields separated by '/', the second may be empty.
            if store and ref >= out.shape[0]:
                return ref, -3
            field = 0
            present0 = False
            present1 = False
            present2 = False
            while True:
                negative = False
                if i < n and b[i] == _MINUS:
                    negative = True
                    i += 1
                digits = 0
                value = 0
                while i < n and b[i] >= _ZERO and b[i] <= _NINE:
                    value = value * 10 + (b[i] - _ZERO)
                    digits += 1
                    i += 1
                if digits > _MAX_DIGITS or (negative and digits == 0):
                    return ref, -1
                if digits > 0:
                    if store:
                        out[ref, field] = -value if negative else value
                    if field == 0:
                        present0 = True
                    elif field == 1:
                        present1 = True
                    else:
                        present2 = True
                if i < n and b[i] == _SLASH:
                    field += 1
                    i += 1
                    if field > 2:
                        return ref, -1
                    continue
                break
            if i < n and not (b[i] == _SPACE or b[i] == _TAB or b[i] == _LF):
                return ref, -1
            if not present0:
                return ref, -1
            if field == 0:
                this = 0
            elif field == 1 and present1:
                this = 1
            elif field == 2 and present2 and not present1:
                this = 2
            elif field == 2 and present2 and present1:
                this = 3
            else:
                return ref, -1
            if form == -2:
                form = this
            elif form != this:
                return ref, -1
            sizes[face] += 1
            ref += 1
        i += 1
    if face + 1 != n_faces:
        return ref, -1
    return ref, form


def read_face_references(text: bytes, n_faces: int) -> tuple[np.ndarray, np.ndarray, int] | None:
    """``(sizes, numbers, form)`` of the ``n_faces`` face lines of an OBJ file's text (line
    breaks LF, no comment inside a statement, no indentation): references per face, (n_refs, 3)
    int64 numbers as written (unused fields 0) and the form code of :data:`FORMS`; or None when
    the references are not of the plainest writing (see the module text). One pass when the
    faces average at most four references (room for them is made first), else two."""
    b = np.frombuffer(text, dtype=np.uint8)
    sizes = np.zeros(n_faces, dtype=np.int64)
    numbers = np.zeros((4 * n_faces + 1, 3), dtype=np.int64)
    n_refs, form = _scan(b, n_faces, sizes, numbers, True)
    if form == -3:  # more references than room: count them, then read them
        sizes[:] = 0
        n_refs, form = _scan(b, n_faces, sizes, numbers[:1], False)
        if form == -1:
            return None
        numbers = np.zeros((n_refs, 3), dtype=np.int64)
        sizes[:] = 0
        _scan(b, n_faces, sizes, numbers, True)
    if form == -1:
        return None
    return sizes, numbers[:n_refs], max(form, 0)


@numba.njit(cache=True, nogil=True)
def _resolve_kernel(raw, sizes, count_before, out):
    """Each reference of ``raw`` (face by face, ``sizes`` of each) as a 0-based index into the
    ``count_before[face]`` items before its face; False at the first 0 or one out of range."""
    k = 0
    for face in range(sizes.shape[0]):
        count = count_before[face]
        for _ in range(sizes[face]):
            r = raw[k]
            if r == 0:
                return False
            index = r - 1 if r > 0 else count + r
            if index < 0 or index >= count:
                return False
            out[k] = index
            k += 1
    return True


def resolve_references(raw: np.ndarray, sizes: np.ndarray, count_before: np.ndarray) -> np.ndarray | None:
    """OBJ references (1-based, or negative counting back from the latest item) of faces of
    ``sizes`` references each as 0-based indices, ``count_before[face]`` items (vertices,
    texture coordinates or normals) being written before each face; None when a reference is 0
    or out of range."""
    out = np.empty(raw.shape[0], dtype=np.int64)
    if not _resolve_kernel(np.ascontiguousarray(raw), sizes, count_before, out):
        return None
    return out


@numba.njit(cache=True, nogil=True)
def _number(b, i, n, powers):
    """The decimal number starting at ``b[i]``: (value, index after it, ok); ``ok`` is False
    when the text there is not a whole decimal token (ending at a space, tab, LF or the end)
    or its value is outside the exact fast path (module text)."""
    negative = False
    if b[i] == _MINUS or b[i] == _PLUS:
        negative = b[i] == _MINUS
        i += 1
    mantissa = 0
    significant = 0
    digits = 0
    after_point = 0
    point = False
    while i < n:
        c = b[i]
        if _ZERO <= c <= _NINE:
            digits += 1
            if mantissa > 0 or c != _ZERO:
                significant += 1
                if significant > _MAX_DIGITS:
                    return 0.0, i, False
                mantissa = mantissa * 10 + (c - _ZERO)
            if point:
                after_point += 1
            i += 1
        elif c == _POINT and not point:
            point = True
            i += 1
        else:
            break
    if digits == 0:
        return 0.0, i, False
    exponent = 0
    if i < n and (b[i] == _E or b[i] == _CAPITAL_E):
        i += 1
        exponent_negative = False
        if i < n and (b[i] == _MINUS or b[i] == _PLUS):
            exponent_negative = b[i] == _MINUS
            i += 1
        exponent_digits = 0
        while i < n and _ZERO <= b[i] <= _NINE:
            exponent = exponent * 10 + (b[i] - _ZERO)
            exponent_digits += 1
            if exponent_digits > 4:
                return 0.0, i, False
            i += 1
        if exponent_digits == 0:
            return 0.0, i, False
        if exponent_negative:
            exponent = -exponent
    if i < n and not (b[i] == _SPACE or b[i] == _TAB or b[i] == _LF):
        return 0.0, i, False
    if mantissa > _EXACT_INTEGER:
        return 0.0, i, False
    scale = exponent - after_point
    if mantissa == 0:
        value = 0.0
    elif 0 <= scale <= 22:
        value = float(mantissa) * powers[scale]
    elif -22 <= scale < 0:
        value = float(mantissa) / powers[-scale]
    else:
        return 0.0, i, False
    return (-value if negative else value), i, True


@numba.njit(cache=True, nogil=True)
def _line_numbers_kernel(b, starts, skip, out, counts, powers):
    """For each line starting at ``starts[k] + skip``: its numbers (the first ``out.shape[1]``
    kept in ``out[k]``) and their count in ``counts[k]``. Returns -1, or the first line whose
    text the kernel leaves to ``float()``."""
    n = b.shape[0]
    keep = out.shape[1]
    for k in range(starts.shape[0]):
        i = starts[k] + skip
        count = 0
        while i < n and b[i] != _LF:
            c = b[i]
            if c == _SPACE or c == _TAB:
                i += 1
                continue
            value, i, ok = _number(b, i, n, powers)
            if not ok:
                return k
            if count < keep:
                out[k, count] = value
            count += 1
        counts[k] = count
    return -1


def read_line_numbers(text: bytes, starts: np.ndarray, skip: int, keep: int) -> tuple[np.ndarray, np.ndarray] | None:
    """``(first numbers, count per line)`` of the lines of ``text`` (line breaks LF) starting at
    byte offsets ``starts``, each read from ``skip`` bytes in (after its keyword): (n, ``keep``)
    float64, the first ``keep`` numbers of each line (a shorter line leaves zeros), and (n,)
    int64 counts; None when a number is not one the kernel reads exactly (module text)."""
    b = np.frombuffer(text, dtype=np.uint8)
    out = np.zeros((starts.shape[0], keep), dtype=np.float64)
    counts = np.zeros(starts.shape[0], dtype=np.int64)
    if _line_numbers_kernel(b, np.ascontiguousarray(starts, dtype=np.int64), skip, out, counts, _POWERS_OF_TEN) >= 0:
        return None
    return out, counts
