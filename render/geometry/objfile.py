"""Wavefront OBJ reader: a user's polygon model as :class:`~render.geometry.shapes.Part` lists.

Only the reader lives here; the primitives it produces and the polygon triangulation it uses
are in :mod:`render.geometry.shapes`. Mistakes in the file raise
:class:`~render.errors.InputError` naming the file and line (up to 20 at once); bad arguments
(``scale``, ``up_axis``) raise :class:`ValueError`.

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
from collections.abc import Mapping, Sequence

import numpy as np

from render.errors import ProblemList, input_error
from render.fileio import read_user_text
from render.geometry.mesh import face_normals
from render.geometry.shapes import Part, triangulate_polygon_3d

__all__ = ["load_obj"]

#: Turn of a y-up file into our z-up frame: its +y becomes +z and its +z becomes -y (a proper
#: rotation, so the winding is kept).
_Y_UP_TO_Z_UP = np.array([[1.0, 0.0, 0.0], [0.0, 0.0, -1.0], [0.0, 1.0, 0.0]])
_MAX_PROBLEMS = 20
_IGNORED = {
    "vp",
    "o",
    "g",
    "s",
    "mtllib",
    "l",
    "p",
    "cstype",
    "deg",
    "bmat",
    "step",
    "curv",
    "curv2",
    "surf",
    "parm",
    "trim",
    "hole",
    "scrv",
    "sp",
    "end",
    "con",
    "mg",
    "lod",
    "usemap",
    "maplib",
    "shadow_obj",
    "trace_obj",
    "ctech",
    "stech",
    "bevel",
    "c_interp",
    "d_interp",
}


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
    return f" ({tok!r} is not a finite number)" if tok else ""


def _scale_factor(scale: float) -> float:
    """``scale`` as a float; ValueError unless it is a finite number above 0."""
    if isinstance(scale, bool) or not isinstance(scale, (int, float, np.integer, np.floating)):
        raise ValueError(f"scale must be a number, got {scale!r}")
    if not math.isfinite(scale) or scale <= 0:
        raise ValueError(f"scale must be a finite number > 0, got {scale!r}")
    return float(scale)


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
        non-finite number, missing coordinates), an index of 0 or out of range, a face with
        fewer than 3 vertices, a zero-length normal, a self-intersecting polygon face, or a
        file with no faces. Up to 20 problems are reported together.
    ValueError
        For a bad ``scale`` or ``up_axis`` (arguments, not file content).
    """
    s = _scale_factor(scale)
    if up_axis not in ("z", "y"):
        raise ValueError(f"up_axis must be 'z' or 'y', got {up_axis!r}")
    src = str(path)
    text = read_user_text(path, "OBJ file", "a Wavefront OBJ text file")

    problems = ProblemList(src)
    verts: list[list[float]] = []
    norms: list[list[float]] = []
    n_tex = 0
    slot = default_slot
    # Faces: (vertex indices, normal indices or None, slot, line number)
    faces: list[tuple[list[int], list[int] | None, str, int]] = []

    def problem(line_no: int, message: str) -> None:
        if len(problems.items) < _MAX_PROBLEMS:
            problems.add(f"line {line_no}", message)

    lines = text.splitlines()
    i = 0
    while i < len(lines):
        line_no = i + 1
        raw = lines[i]
        while raw.rstrip().endswith("\\") and i + 1 < len(lines):
            i += 1
            raw = raw.rstrip()[:-1] + " " + lines[i]
        i += 1
        content = raw.split("#", 1)[0].strip()
        if not content:
            continue
        tokens = content.split()
        key, args = tokens[0], tokens[1:]
        if key == "v":
            nums, bad = _obj_numbers(args)
            if nums is None or len(nums) not in (3, 4, 6, 7):
                problem(line_no, "expected 'v x y z' with finite numbers (optionally w, or r g b)" + _bad(bad))
                verts.append([0.0, 0.0, 0.0])  # keep later indices aligned
                continue
            verts.append(nums[:3])
        elif key == "vn":
            nums, bad = _obj_numbers(args)
            if nums is None or len(nums) != 3:
                problem(line_no, "expected 'vn x y z' with three finite numbers" + _bad(bad))
                norms.append([0.0, 0.0, 1.0])
                continue
            if math.hypot(*nums) == 0:
                problem(line_no, "normal of zero length")
            norms.append(nums)
        elif key == "vt":
            nums, bad = _obj_numbers(args)
            if nums is None or not 1 <= len(nums) <= 3:
                problem(line_no, "expected 'vt u [v [w]]' with finite numbers" + _bad(bad))
            n_tex += 1
        elif key == "f":
            if len(args) < 3:
                problem(line_no, f"a face needs at least 3 vertices, got {len(args)}")
                continue
            vi: list[int] = []
            ni: list[int] = []
            has_normals = True
            ok = True
            for ref in args:
                parts = ref.split("/")
                if len(parts) > 3 or parts[0] == "":
                    problem(line_no, f"bad face reference {ref!r}; expected v, v/vt, v//vn or v/vt/vn")
                    ok = False
                    break
                resolved = []
                where_ref = f" in {ref!r}" if "/" in ref else ""
                for tok, count, what in zip(
                    parts, (len(verts), n_tex, len(norms)), ("vertex", "texture coordinate", "normal")
                ):
                    if tok == "":
                        resolved.append(None)
                        continue
                    try:
                        k = int(tok)
                    except ValueError:
                        problem(line_no, f"bad {what} index {tok!r}{where_ref}; expected an integer")
                        ok = False
                        break
                    if k == 0:
                        problem(line_no, f"{what} index 0{where_ref}; OBJ indices start at 1 (or count back from -1)")
                        ok = False
                        break
                    k = k - 1 if k > 0 else count + k
                    if not 0 <= k < count:
                        problem(line_no, f"{what} index {tok}{where_ref} is out of range (there are {count} so far)")
                        ok = False
                        break
                    resolved.append(k)
                if not ok:
                    break
                vi.append(resolved[0])
                if len(resolved) == 3 and resolved[2] is not None:
                    ni.append(resolved[2])
                else:
                    has_normals = False
            if ok:
                faces.append((vi, ni if has_normals else None, slot, line_no))
        elif key == "usemtl":
            name = content[len("usemtl") :].strip()
            if not name:
                problem(line_no, "expected 'usemtl name'")
                continue
            slot = slot_map.get(name, name) if slot_map else name
        elif key in _IGNORED:
            continue
        else:
            continue  # unknown statement: ignored
    problems.raise_if_any()
    if not faces:
        raise input_error(src, "", "the OBJ file has no faces ('f' statements)")

    V = np.asarray(verts, dtype=np.float64) * s
    N = np.asarray(norms, dtype=np.float64).reshape(-1, 3)
    if N.shape[0]:
        N = N / np.maximum(np.linalg.norm(N, axis=1, keepdims=True), 1e-300)
    if up_axis == "y":
        V = V @ _Y_UP_TO_Z_UP.T
        N = N @ _Y_UP_TO_Z_UP.T

    by_slot: dict[str, tuple[list[np.ndarray], list[np.ndarray]]] = {}
    for vi, ni, face_slot, line_no in faces:
        pts = V[vi]
        try:
            local = triangulate_polygon_3d(pts, "face")
        except ValueError:
            problem(line_no, "the polygon face crosses itself")
            continue
        if local.shape[0] == 0:
            continue
        tri = pts[local]
        fn = face_normals(tri)
        keep = np.linalg.norm(fn, axis=1) > 0
        if not np.any(keep):
            continue
        if ni is not None:
            nrm = N[np.asarray(ni)][local]
        else:
            nrm = np.repeat(fn[:, None, :], 3, axis=1)
        group = by_slot.setdefault(face_slot, ([], []))
        group[0].append(tri[keep])
        group[1].append(nrm[keep])
    problems.raise_if_any()
    parts = [Part(np.concatenate(t), np.concatenate(n), name) for name, (t, n) in by_slot.items()]
    if not parts:
        raise input_error(src, "", "the OBJ file has no faces with non-zero area")
    return parts
