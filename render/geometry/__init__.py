"""Geometry: shapes, parametric street objects, and the scene's triangle mesh.

* :mod:`render.geometry.shapes` -- primitives, transforms, polygon triangulation.
* :mod:`render.geometry.objfile` -- the Wavefront OBJ reader.
* :mod:`render.geometry.objects` -- parametric street objects and their parameters.
* :mod:`render.geometry.mesh` -- :class:`~render.geometry.mesh.TriangleMesh`, the triangle soup.
* :mod:`render.geometry.build` -- a scene's street, objects and luminaires as triangles.
"""

__all__: list[str] = []
