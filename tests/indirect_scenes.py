"""Small triangle scenes for the interreflection tests, with the isotropic test source.

The scenes are made of boxes and spheres (:mod:`render.geometry.shapes`) with materials of the
library; the source is the isotropic generic luminaire of ``scenes/tests/point_over_plane.toml``
(10 000 lm, maintenance factor 1) moved where a test needs it. Grids of points with their cell
areas serve quadratures over flat faces.
"""

from __future__ import annotations

from dataclasses import replace
from pathlib import Path

import numpy as np

from render.colour.materials import material_library
from render.geometry import shapes
from render.geometry.mesh import TriangleMesh
from render.light.luminaires import LuminaireSet, luminaire_set
from render.scene import load_scene

__all__ = ["FLUX_LM", "box_faces_inside", "grid_on_rectangle", "isotropic_source", "mesh_of", "reflectance"]

SCENES = Path(__file__).resolve().parents[1] / "scenes" / "tests"
FLUX_LM = 10000.0


def isotropic_source(position_m) -> LuminaireSet:
    """The isotropic 10 000 lm test source at ``position_m``."""
    scene = load_scene(SCENES / "point_over_plane.toml")
    scene.luminaires = [replace(scene.luminaires[0], position_m=tuple(float(x) for x in position_m))]
    return luminaire_set(scene)


def mesh_of(parts_by_material: list[list[shapes.Part]], names: list[str]) -> TriangleMesh:
    """One mesh of the parts, material ``k`` for the parts of list ``k``."""
    tris, nrms, mats = [], [], []
    for k, parts in enumerate(parts_by_material):
        for p in parts:
            tris.append(p.triangles_m)
            nrms.append(p.normals)
            mats.append(np.full(len(p.triangles_m), k, np.int32))
    tri = np.concatenate(tris)
    return TriangleMesh(tri, np.concatenate(nrms), np.concatenate(mats), np.zeros(len(tri), np.int32), names, ["x"])


def reflectance(name: str) -> np.ndarray:
    """A library material's reflectance on the 1 nm grid."""
    return material_library()[name].reflectance


def grid_on_rectangle(origin, e1, e2, n1, n2, normal):
    """Midpoints of an n1 × n2 grid on the rectangle origin + [0, 1]·e1 + [0, 1]·e2, each with
    its cell area, and the given unit normal."""
    u = (np.arange(n1) + 0.5) / n1
    v = (np.arange(n2) + 0.5) / n2
    uu, vv = np.meshgrid(u, v, indexing="ij")
    pts = (
        np.asarray(origin, float)
        + uu.reshape(-1, 1) * np.asarray(e1, float)
        + vv.reshape(-1, 1) * np.asarray(e2, float)
    )
    area = np.linalg.norm(np.cross(e1, e2)) / (n1 * n2)
    return pts, np.full(len(pts), area), np.tile(np.asarray(normal, float), (len(pts), 1))


def box_faces_inside(lo, hi, n):
    """Grid points on the six inner faces of the box [lo, hi], normals pointing inward."""
    lo, hi = np.asarray(lo, float), np.asarray(hi, float)
    size = hi - lo
    out = []
    for axis in range(3):
        a, b = [i for i in range(3) if i != axis]
        e1 = np.zeros(3)
        e1[a] = size[a]
        e2 = np.zeros(3)
        e2[b] = size[b]
        for side, sign in ((lo, 1.0), (hi, -1.0)):
            origin = lo.copy()
            origin[axis] = side[axis]
            normal = np.zeros(3)
            normal[axis] = sign
            out.append(grid_on_rectangle(origin, e1, e2, n, n, normal))
    return tuple(np.concatenate(x) for x in zip(*out))
