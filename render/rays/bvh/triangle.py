"""The watertight ray/triangle test, the one every traversal path calls.

The ray is turned into the +z axis by a permutation of the axes (``kz`` the axis of the
largest direction component) and a shear; the triangle's 2D edge functions at the origin then
decide the hit, and their normalised values are the barycentrics. The edge function of an edge
is computed from the same numbers in both triangles that share it, with opposite sign, and exact
zeros are accepted, so a ray through a shared edge or vertex of a closed mesh never passes
between the triangles. The test is two-sided (no back-face culling) and runs in float64.

:func:`intersect_triangle` is written without branches so that a packet's per-lane loop
vectorises; single rays call it too, so a ray gets bit-identical results whichever path traces
it. The functions here are small numba functions compiled once each and linked into every
traversal kernel, where LLVM inlines them (numba-level ``inline="always"`` would copy them
into each caller's IR and lengthen every first compilation).

References
----------
- Woop, Benthin & Wald, "Watertight Ray/Triangle Intersection", Journal of Computer Graphics
  Techniques 2(1), 2013 (section 3 and figures 1-2: axis permutation, shear, edge functions).
"""

from __future__ import annotations

import numba
import numpy as np

__all__ = ["intersect_triangle", "ray_shear", "triangle_vertices"]

Vec3 = tuple[float, float, float]


@numba.njit(cache=True, nogil=True)
def ray_shear(dx: float, dy: float, dz: float) -> tuple[int, int, int, float, float, float]:
    """Per-ray constants of the watertight test (Woop et al. 2013, section 3).

    kz is the axis of the largest |direction| component; kx, ky follow cyclically and are
    swapped when d[kz] < 0 to keep the triangle winding. Returns (kx, ky, kz, Sx, Sy, Sz).
    """
    ax = abs(dx)
    ay = abs(dy)
    az = abs(dz)
    if ax >= ay and ax >= az:
        kz = 0
        dkz = dx
    elif ay >= az:
        kz = 1
        dkz = dy
    else:
        kz = 2
        dkz = dz
    kx = kz + 1
    if kx == 3:
        kx = 0
    ky = kx + 1
    if ky == 3:
        ky = 0
    if dkz < 0.0:
        tmp = kx
        kx = ky
        ky = tmp
    sz = 1.0 / dkz
    # Components picked by comparisons rather than by indexing a tuple, whose bounds check
    # would give every caller an exception path (and keep numba's reference counts of the
    # caller's arrays).
    sx = (dx if kx == 0 else (dy if kx == 1 else dz)) * sz
    sy = (dx if ky == 0 else (dy if ky == 1 else dz)) * sz
    return kx, ky, kz, sx, sy, sz


@numba.njit(cache=True, nogil=True)
def triangle_vertices(tv: np.ndarray, j: int, k: tuple[int, int, int]) -> tuple[Vec3, Vec3, Vec3]:
    """Vertices v0, v1, v2 of row ``j`` of ``tv`` (M, 9), each permuted to the axes ``k``
    = (kx, ky, kz) of :func:`ray_shear`."""
    # Unsigned indices: numba then emits no negative-index wraparound for the nine loads.
    r = np.uint64(j)
    kx = np.uint64(k[0])
    ky = np.uint64(k[1])
    kz = np.uint64(k[2])
    three = np.uint64(3)
    six = np.uint64(6)
    return (
        (tv[r, kx], tv[r, ky], tv[r, kz]),
        (tv[r, three + kx], tv[r, three + ky], tv[r, three + kz]),
        (tv[r, six + kx], tv[r, six + ky], tv[r, six + kz]),
    )


@numba.njit(cache=True, nogil=True, error_model="numpy")
def intersect_triangle(tri: tuple[Vec3, Vec3, Vec3], p: Vec3, s: Vec3) -> tuple[bool, float, float, float]:
    """Watertight ray/triangle test (Woop, Benthin & Wald 2013).

    ``tri`` is :func:`triangle_vertices`, ``p`` the ray origin permuted to (kx, ky, kz) and
    ``s`` = (Sx, Sy, Sz) from :func:`ray_shear`. Returns ``(hit, t, u, v)`` with the hit point
    at (1-u-v) v0 + u v1 + v v2; ``t``, ``u``, ``v`` are meaningless when ``hit`` is False.
    """
    (v0x, v0y, v0z), (v1x, v1y, v1z), (v2x, v2y, v2z) = tri
    px, py, pz = p
    sx, sy, sz = s
    az = v0z - pz
    bz = v1z - pz
    cz = v2z - pz
    # Translate and shear so that the ray becomes the +z axis.
    ax = (v0x - px) - sx * az
    ay = (v0y - py) - sy * az
    bx = (v1x - px) - sx * bz
    by = (v1y - py) - sy * bz
    cx = (v2x - px) - sx * cz
    cy = (v2y - py) - sy * cz
    # Scaled barycentric coordinates (2D edge functions); a hit has all three of one sign
    # (zeros included) and a non-zero sum.
    uu = cx * by - cy * bx
    vv = ax * cy - ay * cx
    ww = bx * ay - by * ax
    det = uu + vv + ww
    hit = (((uu >= 0.0) & (vv >= 0.0) & (ww >= 0.0)) | ((uu <= 0.0) & (vv <= 0.0) & (ww <= 0.0))) & (det != 0.0)
    inv = 1.0 / (det if hit else 1.0)
    t = (uu * (sz * az) + vv * (sz * bz) + ww * (sz * cz)) * inv
    return hit, t, vv * inv, ww * inv
