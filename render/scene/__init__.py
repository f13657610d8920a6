"""Scenes: the TOML scene file and its checks.

* :func:`load_scene` reads and checks a scene file (:mod:`render.scene.loader`).
* :func:`check_scene` also compiles it, for ``lampcast check``.
* :mod:`render.scene.model` holds the checked scene as dataclasses; :mod:`render.scene.schema`
  the declarative key checks. Compiling a scene to triangles is
  :func:`render.geometry.build.compile_scene`.
"""

from render.scene.loader import check_scene, load_scene
from render.scene.model import Luminaire, Scene, View

__all__ = ["Luminaire", "Scene", "View", "check_scene", "load_scene"]
