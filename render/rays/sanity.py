"""Probe rays: is a point inside a closed solid?

A point inside a closed solid whose faces point outwards (counter-clockwise seen from outside,
:class:`~render.geometry.mesh.TriangleMesh`) sees only back faces: the closest hit of a ray
from it lies on a triangle whose geometric normal points away from the ray's origin
(``dot(normal, direction) > 0``). :func:`back_face_fraction` casts a few rays from each point
and counts those; ``lampcast check`` uses it to find a camera placed inside a car or a house.
"""

from __future__ import annotations

import numpy as np

from render.rays.bvh import BVH, geometric_normal, intersect_closest

__all__ = ["AXIS_DIRECTIONS", "back_face_fraction"]

#: The six axis directions (+x, -x, +y, -y, +z, -z).
AXIS_DIRECTIONS = np.array(
    [[1.0, 0.0, 0.0], [-1.0, 0.0, 0.0], [0.0, 1.0, 0.0], [0.0, -1.0, 0.0], [0.0, 0.0, 1.0], [0.0, 0.0, -1.0]]
)


def back_face_fraction(
    bvh: BVH, triangles_m: np.ndarray, origin_m: np.ndarray, directions: np.ndarray, max_distance_m: float
) -> float:
    """The fraction of rays from ``origin_m`` along ``directions`` ((N, 3), any length) whose
    closest hit within ``max_distance_m`` is a back face (geometric normal pointing away from
    the origin). Rays that miss, or hit farther, count as not hitting a back face."""
    d = np.asarray(directions, dtype=np.float64).reshape(-1, 3)
    d = d / np.linalg.norm(d, axis=1, keepdims=True)
    o = np.broadcast_to(np.asarray(origin_m, dtype=np.float64), d.shape).copy()
    hits = intersect_closest(bvh, o, d, 0.0, max_distance_m, packets=False)
    normals = geometric_normal(triangles_m, hits)
    back = hits.hit & (np.einsum("ij,ij->i", normals, d) > 0.0)
    return float(np.count_nonzero(back)) / d.shape[0]
