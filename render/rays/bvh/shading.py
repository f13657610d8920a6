"""Normals at ray hits: interpolated shading normals, geometric normals, facing.

References
----------
- Phong, "Illumination for computer generated pictures", Communications of the ACM 18(6), 1975
  (normal interpolation across a triangle with its barycentrics).
"""

from __future__ import annotations

import numpy as np

from render.rays.bvh.layout import Hits

__all__ = ["face_forward", "geometric_normal", "interpolate_normal"]


def interpolate_normal(mesh_normals: np.ndarray, hits: Hits) -> np.ndarray:
    """Shading normals (N, 3) at hits, interpolated from per-vertex normals (F, 3, 3).

    Phong interpolation with the barycentrics of :class:`Hits`, renormalised to unit length.
    Misses get (0, 0, 0).
    """
    nrm = np.asarray(mesh_normals, dtype=np.float64).reshape(-1, 3, 3)
    out = np.zeros((hits.t.shape[0], 3))
    m = hits.hit
    if not np.any(m):
        return out
    tri = hits.triangle[m]
    u = hits.u[m][:, None]
    v = hits.v[m][:, None]
    n = (1.0 - u - v) * nrm[tri, 0] + u * nrm[tri, 1] + v * nrm[tri, 2]
    length = np.linalg.norm(n, axis=1, keepdims=True)
    out[m] = np.divide(n, length, out=np.zeros_like(n), where=length > 0)
    return out


def geometric_normal(triangles_m: np.ndarray, hits: Hits) -> np.ndarray:
    """Unit geometric (face) normals (N, 3) of the hit triangles, counter-clockwise winding.

    Misses and degenerate triangles get (0, 0, 0).
    """
    tris = np.asarray(triangles_m, dtype=np.float64).reshape(-1, 3, 3)
    out = np.zeros((hits.t.shape[0], 3))
    m = hits.hit
    if not np.any(m):
        return out
    t = tris[hits.triangle[m]]
    n = np.cross(t[:, 1] - t[:, 0], t[:, 2] - t[:, 0])
    length = np.linalg.norm(n, axis=1, keepdims=True)
    out[m] = np.divide(n, length, out=np.zeros_like(n), where=length > 0)
    return out


def face_forward(normals: np.ndarray, directions: np.ndarray) -> np.ndarray:
    """Flip normals (N, 3) to face against the incoming ray directions (N, 3)."""
    n = np.asarray(normals, dtype=np.float64)
    s = np.einsum("ij,ij->i", n, np.asarray(directions, dtype=np.float64))
    return np.where((s > 0.0)[:, None], -n, n)
