"""Normals at ray hits: interpolated shading normals, geometric normals, facing.

References
----------
- Phong, "Illumination for computer generated pictures", Communications of the ACM 18(6), 1975
  (normal interpolation across a triangle with its barycentrics).
"""

from __future__ import annotations

import math

import numba
import numpy as np

from render.rays.bvh.layout import Hits
from render.threads import run_split

__all__ = ["face_forward", "geometric_normal", "interpolate_normal", "shade_hits"]

# Rays per work item of the hit-shading kernel.
_ITEM = 1024


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


@numba.njit(cache=True, nogil=True)
def _shade_kernel(
    origins,
    directions,
    t,
    triangle,
    u,
    v,
    triangles_m,
    vertex_normals,
    material_id,
    object_id,
    emitter_triangle,
    n_materials,
    out_point,
    out_normal,
    out_geo,
    out_direction,
    out_response,
    out_object,
    out_emitter,
    first,
    stride,
):
    """:func:`shade_hits` for the rays of items ``first, first + stride, ...`` of :data:`_ITEM`
    rays (:func:`render.threads.run_split`)."""
    n = t.shape[0]
    for item in range(first, (n + _ITEM - 1) // _ITEM, stride):
        for i in range(item * _ITEM, min(n, (item + 1) * _ITEM)):
            dx = directions[i, 0]
            dy = directions[i, 1]
            dz = directions[i, 2]
            out_direction[i, 0] = dx
            out_direction[i, 1] = dy
            out_direction[i, 2] = dz
            j = triangle[i]
            em = emitter_triangle[i]
            surface = j >= 0 and em < 0
            out_emitter[i] = em // 2 if em >= 0 else -1
            out_response[i] = material_id[j] if surface else (n_materials if em >= 0 else -1)
            out_object[i] = object_id[j] if surface else -1
            if surface:
                for c in range(3):
                    out_point[i, c] = origins[i, c] + t[i] * directions[i, c]
            else:
                for c in range(3):
                    out_point[i, c] = np.nan
            if j < 0:
                for c in range(3):
                    out_normal[i, c] = 0.0
                    out_geo[i, c] = 0.0
                continue
            # Geometric normal: (v1 - v0) × (v2 - v0), unit length (0 if degenerate).
            ax = triangles_m[j, 1, 0] - triangles_m[j, 0, 0]
            ay = triangles_m[j, 1, 1] - triangles_m[j, 0, 1]
            az = triangles_m[j, 1, 2] - triangles_m[j, 0, 2]
            bx = triangles_m[j, 2, 0] - triangles_m[j, 0, 0]
            by = triangles_m[j, 2, 1] - triangles_m[j, 0, 1]
            bz = triangles_m[j, 2, 2] - triangles_m[j, 0, 2]
            gx = ay * bz - az * by
            gy = az * bx - ax * bz
            gz = ax * by - ay * bx
            length = math.sqrt(gx * gx + gy * gy + gz * gz)
            if length > 0.0:
                gx, gy, gz = gx / length, gy / length, gz / length
            else:
                gx, gy, gz = 0.0, 0.0, 0.0
            if gx * dx + gy * dy + gz * dz > 0.0:
                gx, gy, gz = -gx, -gy, -gz
            # Shading normal: Phong interpolation of the vertex normals.
            w = 1.0 - u[i] - v[i]
            sx = w * vertex_normals[j, 0, 0] + u[i] * vertex_normals[j, 1, 0] + v[i] * vertex_normals[j, 2, 0]
            sy = w * vertex_normals[j, 0, 1] + u[i] * vertex_normals[j, 1, 1] + v[i] * vertex_normals[j, 2, 1]
            sz = w * vertex_normals[j, 0, 2] + u[i] * vertex_normals[j, 1, 2] + v[i] * vertex_normals[j, 2, 2]
            length = math.sqrt(sx * sx + sy * sy + sz * sz)
            if length > 0.0:
                sx, sy, sz = sx / length, sy / length, sz / length
            else:
                sx, sy, sz = 0.0, 0.0, 0.0
            if sx * dx + sy * dy + sz * dz > 0.0:
                sx, sy, sz = -sx, -sy, -sz
            if sx * dx + sy * dy + sz * dz > 0.0:
                sx, sy, sz = gx, gy, gz
            out_normal[i, 0] = sx
            out_normal[i, 1] = sy
            out_normal[i, 2] = sz
            out_geo[i, 0] = gx
            out_geo[i, 1] = gy
            out_geo[i, 2] = gz


def shade_hits(
    origins: np.ndarray,
    directions: np.ndarray,
    t: np.ndarray,
    triangle: np.ndarray,
    u: np.ndarray,
    v: np.ndarray,
    triangles_m: np.ndarray,
    vertex_normals: np.ndarray,
    material_id: np.ndarray,
    object_id: np.ndarray,
    emitter_triangle: np.ndarray,
    n_materials: int,
    out_point: np.ndarray,
    out_normal: np.ndarray,
    out_geo: np.ndarray,
    out_direction: np.ndarray,
    out_response: np.ndarray,
    out_object: np.ndarray,
    out_emitter: np.ndarray,
) -> None:
    """What a camera sample sees, in one pass per hit (camera rays, :mod:`render.light.integrator`).

    Per ray ``i``: the hit point (NaN unless a surface is seen), the shading normal
    (:func:`interpolate_normal`) and the geometric normal (:func:`geometric_normal`), both turned
    toward the eye (:func:`face_forward`; a shading normal still facing away takes the
    geometric one), the ray direction, the material index (``n_materials`` for a luminous
    opening, -1 for nothing), the object index and the luminaire of a visible opening
    (``emitter_triangle // 2``, -1 for none). The arithmetic is that of the array functions
    above, operation for operation; outputs are float32 and int32. Runs on
    :func:`render.threads.kernel_threads` threads."""
    run_split(
        _shade_kernel,
        (t.shape[0] + _ITEM - 1) // _ITEM,
        origins,
        directions,
        t,
        triangle,
        u,
        v,
        triangles_m,
        vertex_normals,
        material_id,
        object_id,
        emitter_triangle,
        n_materials,
        out_point,
        out_normal,
        out_geo,
        out_direction,
        out_response,
        out_object,
        out_emitter,
    )
