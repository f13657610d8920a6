"""Rays: cameras, the bounding volume hierarchy and ray queries.

* :mod:`render.rays.cameras` -- pinhole cameras and counter-based stratified jitter.
* :mod:`render.rays.bvh` -- binned-SAH BVH and batched closest-hit / any-hit queries.
* :mod:`render.rays.aov` -- depth, normal, material-id and object-id images.
"""

__all__: list[str] = []
