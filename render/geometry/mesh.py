"""Triangle mesh: the triangle soup that is the one geometric representation the ray caster sees.

A scene (see :mod:`render.scene`) is compiled to a :class:`TriangleMesh`: every surface becomes
triangles in world coordinates (metres; x along the street, y across it, z up; right-handed),
each carrying a material index and an object index, with per-vertex shading normals (equal to
the face normal for flat-shaded parts).

References
----------
- Face normals: the normalised cross product of two edges of a counter-clockwise triangle
  (right-hand rule), a standard result.
"""

from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np
from numpy.typing import ArrayLike

__all__ = ["TriangleMesh", "face_normals", "flat_normals", "concatenate"]


@dataclass
class TriangleMesh:
    """Triangles with per-triangle ids.

    Attributes
    ----------
    triangles_m
        (F, 3, 3) float64: vertex ``j`` of triangle ``i`` is ``triangles_m[i, j]``, metres.
        Counter-clockwise seen from the front (the side the face normal points to).
    normals
        (F, 3, 3) float64 unit shading normals per vertex.
    material_id
        (F,) int32 index into ``material_names``.
    object_id
        (F,) int32 index into ``object_names``.
    material_names, object_names
        Names behind the indices.
    """

    triangles_m: np.ndarray
    normals: np.ndarray
    material_id: np.ndarray
    object_id: np.ndarray
    material_names: list[str] = field(default_factory=list)
    object_names: list[str] = field(default_factory=list)

    def __post_init__(self):
        self.triangles_m = np.ascontiguousarray(self.triangles_m, dtype=np.float64).reshape(-1, 3, 3)
        self.normals = np.ascontiguousarray(self.normals, dtype=np.float64).reshape(-1, 3, 3)
        self.material_id = np.ascontiguousarray(self.material_id, dtype=np.int32).reshape(-1)
        self.object_id = np.ascontiguousarray(self.object_id, dtype=np.int32).reshape(-1)
        n = self.triangles_m.shape[0]
        if not (self.normals.shape[0] == self.material_id.shape[0] == self.object_id.shape[0] == n):
            raise ValueError("triangles, normals and ids must have one entry per triangle")

    @property
    def n_triangles(self) -> int:
        return int(self.triangles_m.shape[0])


def face_normals(triangles_m: ArrayLike) -> np.ndarray:
    """Unit geometric normals (F, 3) of counter-clockwise triangles (F, 3, 3).

    Degenerate triangles get a zero normal.
    """
    t = np.asarray(triangles_m, dtype=np.float64)
    a = t[:, 1] - t[:, 0]
    b = t[:, 2] - t[:, 0]
    # The cross product a × b written out (np.cross's own arithmetic, without its overhead on
    # the many small arrays a scene's objects make).
    n = np.empty_like(a)
    n[:, 0] = a[:, 1] * b[:, 2] - a[:, 2] * b[:, 1]
    n[:, 1] = a[:, 2] * b[:, 0] - a[:, 0] * b[:, 2]
    n[:, 2] = a[:, 0] * b[:, 1] - a[:, 1] * b[:, 0]
    length = np.linalg.norm(n, axis=1, keepdims=True)
    return np.divide(n, length, out=np.zeros_like(n), where=length > 0)


def flat_normals(triangles_m: ArrayLike) -> np.ndarray:
    """Per-vertex shading normals (F, 3, 3) equal to each face normal."""
    n = face_normals(triangles_m)
    return np.repeat(n[:, None, :], 3, axis=1)


def concatenate(meshes: list[TriangleMesh]) -> TriangleMesh:
    """Join meshes that already share ``material_names`` and ``object_names`` index spaces."""
    if not meshes:
        empty = np.zeros((0, 3, 3))
        return TriangleMesh(empty, empty, np.zeros(0, np.int32), np.zeros(0, np.int32))
    return TriangleMesh(
        np.concatenate([m.triangles_m for m in meshes]),
        np.concatenate([m.normals for m in meshes]),
        np.concatenate([m.material_id for m in meshes]),
        np.concatenate([m.object_id for m in meshes]),
        list(meshes[0].material_names),
        list(meshes[0].object_names),
    )
