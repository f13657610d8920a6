"""Bounding volume hierarchy over a triangle soup, and batched ray queries.

Build a :class:`BVH` once with :func:`build_bvh`, then cast arrays of rays with
:func:`intersect_closest` (closest hit: :class:`Hits`) or :func:`intersect_any` (occlusion);
:func:`interpolate_normal`, :func:`geometric_normal` and :func:`face_forward` turn hits into
normals; :func:`shade_hits` does all of it per camera sample in one kernel. Rays are ``origin + t * direction`` with hits counted for ``t_min < t < t_max``.

The modules, each readable alone, in the order data flows through them:

* :mod:`~render.rays.bvh.layout` -- the :class:`BVH` and :class:`Hits` arrays and the shared
  constants.
* :mod:`~render.rays.bvh.build` -- binned-SAH build of the binary tree (Wald 2007).
* :mod:`~render.rays.bvh.wide` -- its collapse into an 8-wide tree (Dammertz et al. 2008).
* :mod:`~render.rays.bvh.slab` -- per-ray set-up and the robust ray/box test (Ize 2013).
* :mod:`~render.rays.bvh.triangle` -- the watertight ray/triangle test (Woop et al. 2013),
  the one every traversal path calls.
* :mod:`~render.rays.bvh.single` -- single-ray traversal of the wide tree.
* :mod:`~render.rays.bvh.packet` -- packet traversal of the binary tree.
* :mod:`~render.rays.bvh.query` -- batches over threads and the public queries.
* :mod:`~render.rays.bvh.shading` -- normals at hits.

The kernels are numba functions cached on disk; numba checks only a kernel's own file when it
decides whether its cache is stale, and the small functions of ``slab`` and ``triangle`` are
compiled into the traversal kernels. After editing any module here, delete the package's numba
cache (``__pycache__/*.nbi``, ``*.nbc``, or the folder ``NUMBA_CACHE_DIR`` names). The batch
kernels are serial and run side by side on threads (:mod:`render.threads`): a ``prange``
kernel takes several times longer to compile.
"""

from render.rays.bvh.build import build_bvh
from render.rays.bvh.layout import BVH, Hits
from render.rays.bvh.query import intersect_any, intersect_closest
from render.rays.bvh.shading import face_forward, geometric_normal, interpolate_normal, shade_hits

__all__ = [
    "BVH",
    "Hits",
    "build_bvh",
    "face_forward",
    "geometric_normal",
    "interpolate_normal",
    "intersect_any",
    "intersect_closest",
    "shade_hits",
]
