"""Scenes: the TOML scene file, its checks, and its compilation to triangles.

* :func:`load_scene` reads and checks a scene file (:mod:`render.scene.loader`).
* :func:`compile_scene` turns it into a :class:`~render.geometry.TriangleMesh`
  (:mod:`render.scene.compile`).
* :func:`check_scene` does both, for ``lampcast check``.
"""

from render.scene.compile import compile_scene, object_slots
from render.scene.loader import check_scene, load_scene
from render.scene.model import Luminaire, Scene, View

__all__ = ["Luminaire", "Scene", "View", "check_scene", "compile_scene", "load_scene", "object_slots"]
