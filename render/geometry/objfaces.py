"""OBJ face references read in one compiled pass: the whole-file OBJ reader's numba kernel.

:func:`read_face_references` reads the references of every ``f`` statement of an ordinary OBJ
file in one pass over the file's bytes (line breaks made LF, comments inside statements and
indentation removed): the number of references on each line, and each reference's vertex, texture and normal
numbers as written (1-based or negative; not yet resolved). It accepts only the plainest
writing -- references separated by spaces or tabs, every reference of the file in the same one
of the four forms ``v``, ``v/vt``, ``v//vn``, ``v/vt/vn``, every number an optional minus sign
and at most 18 digits -- and returns None for anything else, which the reader then reads token
by token (:mod:`render.geometry.objfile`). For the text it accepts, each number is exactly what
Python's ``int()`` gives.

References
----------
- Wavefront Technologies, "Object Files (.obj)", Advanced Visualizer manual, Appendix B1 (the
  forms of a face reference).
"""

from __future__ import annotations

import numba
import numpy as np

__all__ = ["FORMS", "read_face_references"]

#: The forms of a reference, by the code the kernel returns: the fields present.
FORMS = {0: ("v",), 1: ("v", "vt"), 2: ("v", "vn"), 3: ("v", "vt", "vn")}

_SPACE, _TAB, _LF, _SLASH, _MINUS, _ZERO, _NINE, _F = 32, 9, 10, 47, 45, 48, 57, 102
_MAX_DIGITS = 18


@numba.njit(cache=True, nogil=True)
def _scan(b, n_faces, sizes, out, store):
    """One pass over the file's bytes ``b``: the references of each face line (a line starting
    with ``f`` and a space or tab; other lines are skipped) into ``sizes`` and, when ``store``,
    their numbers into ``out`` (n_refs, 3). Returns (number of references, form code), form -1
    for text the kernel leaves to the token reader."""
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
    the references are not of the plainest writing (see the module text)."""
    b = np.frombuffer(text, dtype=np.uint8)
    sizes = np.zeros(n_faces, dtype=np.int64)
    n_refs, form = _scan(b, n_faces, sizes, np.zeros((1, 3), dtype=np.int64), False)
    if form == -1:
        return None
    numbers = np.zeros((n_refs, 3), dtype=np.int64)
    if n_refs:
        sizes[:] = 0
        _scan(b, n_faces, sizes, numbers, True)
    return sizes, numbers, max(form, 0)
