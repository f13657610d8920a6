"""Extrusions with courtyards (render.geometry.footprints, ``[[geometry]] holes_m``).

Sources: the shoelace area of a polygon and the divergence theorem (the volume of a closed
triangle mesh is Σ p0·n/6 over its triangles with n = (p1 − p0) × (p2 − p0)), analytic; a
closed, consistently oriented surface has every edge used once in each direction (analytic
topology), except along the caps' slab lines, where a vertex may lie inside a neighbour's edge
(T-junctions exactly on that line, stated in the module).
"""

from __future__ import annotations

import numpy as np
import pytest

from render.errors import InputError
from render.geometry.build import compile_scene
from render.geometry.footprints import extrude_with_holes, holed_area_m2, rings_problem
from render.scene.loader import load_scene_document

# A concave L-shaped block with a rectangular and a triangular courtyard (invented shapes).
OUTLINE = [[0, 0], [30, 0], [30, 12], [18, 12], [18, 25], [0, 25]]
HOLES = [[[4, 4], [14, 4], [14, 9], [4, 9]], [[3, 14], [12, 15], [6, 21]]]


def _area(points):
    p = np.asarray(points, float)
    return 0.5 * abs(float(np.sum(p[:, 0] * np.roll(p[:, 1], -1) - np.roll(p[:, 0], -1) * p[:, 1])))


def test_volume_area_and_closed_surface():
    area = _area(OUTLINE) - sum(_area(h) for h in HOLES)
    assert holed_area_m2(OUTLINE, HOLES) == pytest.approx(area, rel=1e-12)
    (part,) = extrude_with_holes(OUTLINE, HOLES, 7.5, z0_m=0.12)
    t = part.triangles_m
    n = np.cross(t[:, 1] - t[:, 0], t[:, 2] - t[:, 0])
    assert np.einsum("ij,ij->i", t[:, 0], n).sum() / 6 == pytest.approx(area * 7.5, rel=1e-12)
    top = n[:, 2] > 0
    assert 0.5 * np.linalg.norm(n[top], axis=1).sum() == pytest.approx(area, rel=1e-12)
    np.testing.assert_allclose(t[top][:, :, 2], 7.62)
    edges: dict[tuple, int] = {}
    for tri in t:
        for i in range(3):
            e = (tuple(tri[i]), tuple(tri[(i + 1) % 3]))
            edges[e] = edges.get(e, 0) + 1
    unmatched = [e for e, k in edges.items() if edges.get((e[1], e[0]), 0) != k]
    assert all(a[0] == b[0] and a[2] == b[2] and a[2] in (0.12, 7.62) for a, b in unmatched)
    # courtyard walls face into the courtyard: the rectangle's south wall (y = 4, the courtyard
    # north of it) faces +y, its north wall (y = 9) −y
    for y, sign in ((4.0, 1.0), (9.0, -1.0)):
        wall = (np.abs(t[:, :, 1] - y).max(axis=1) < 1e-12) & (np.abs(n[:, 2]) < 1e-12)
        assert wall.any() and np.all(sign * n[wall, 1] > 0)


@pytest.mark.parametrize(
    ("holes", "index", "words"),
    [
        ([[[25, 5], [35, 5], [35, 8]]], 0, "crosses the outline"),
        ([[[40, 40], [45, 40], [45, 45]]], 0, "outside the outline"),
        ([HOLES[0], [[5, 5], [13, 5], [13, 8.5]]], 1, "courtyard 1"),
        ([[[2, 2], [8, 2], [2, 8], [8, 8]]], 0, "crosses itself"),
    ],
)
def test_rings_problems(holes, index, words):
    problem = rings_problem(OUTLINE, holes)
    assert problem is not None and problem[0] == index and words in problem[1]


def test_scene_holes_are_checked_and_built(tmp_path):
    view = {"name": "v", "position_m": [-10.0, -10.0], "target_m": [10.0, 10.0, 0.0], "resolution": [16, 16]}
    g = {"kind": "extrusion", "name": "block", "material": "brick", "height_m": 6.0, "outline_m": OUTLINE}
    scene = load_scene_document({"views": [view], "geometry": [{**g, "holes_m": HOLES}]}, tmp_path / "s.toml")
    mesh = compile_scene(scene)
    assert mesh.n_triangles > 20
    bad = {**g, "holes_m": [HOLES[0], [[25, 5], [35, 5], [35, 8]]]}
    with pytest.raises(InputError) as err:
        load_scene_document({"views": [view], "geometry": [bad]}, tmp_path / "s.toml")
    assert [p.where for p in err.value.problems] == ["geometry[0].holes_m[1]"]
    with pytest.raises(InputError) as err:
        load_scene_document(
            {
                "views": [view],
                "geometry": [{"kind": "box", "material": "brick", "size_m": [1, 1, 1], "holes_m": HOLES}],
            },
            tmp_path / "s.toml",
        )
    assert [p.where for p in err.value.problems] == ["geometry[0].holes_m"]
