"""Frontages along roads (``[[frontages]]`` with ``road``): fronts that follow a road's bends.

The checks and their sources:

* round a circular arc the street face of the fronts stays at its distance from the curved
  kerb (analytic circle geometry: a face at offset d from the centreline lies at radius R − d
  from the arc's centre on the inside of the bend, R + d outside), within the roads' chord
  error of 1 cm;
* the houses' floors cover the annulus sector under them once, no gap and no overlap between
  neighbours at the bend: their area is that of the sector, θ/2·(r_out² − r_in²), and every
  sampled point of the sector lies in exactly one floor triangle (analytic plane geometry);
* a frontage along a straight road along x is the street's frontage (the ``[street]`` builder
  is the reference);
* the obtrusive-light points in front of a curved facade: at their offset from the curved
  kerb, facing the road, and lit by an isotropic source at the arc's centre with
  E_v = I·r/d³ (inverse-square and cosine laws, analytic);
* mistakes (a frontage across a junction, beyond the road's end, folding round a bend, on an
  unknown road) are InputErrors naming the key.
"""

from __future__ import annotations

import math

import numpy as np
import pytest

from render.calc.obtrusive import FACADE_OFFSET_M, evaluate_obtrusive, facade_fields
from render.errors import InputError
from render.geometry.build import compile_scene
from render.scene.loader import load_scene_document
from render.study import Study

R = 60.0
CENTRE = np.array([40.0, 60.0])  # the arc runs from (40, 0), s = 40 m, to (100, 60)
BEND = {"name": "bend", "points_m": [[0, 0], [100, 0], [100, 100]], "corner_radius_m": R, "carriageway_width_m": 7.0}
# kerb face 3.5 m, kerb top 0.15 m, footway 2 m, front gardens 3 m: building line 8.65 m
BUILDING_LINE_M = 8.65
WALL_BEHIND_M = 0.03  # the fronts' walls stand 3 cm behind the building line (render.geometry.objects)
VIEW = {"name": "v", "position_m": [1.0, -1.0], "target_m": [30.0, 0.0, 0.0], "resolution": [32, 18]}
TOL_M = 0.01  # the roads' default max_chord_error_m


def _frontage(side: str, **extra) -> dict:
    f = {
        "road": "bend",
        "side": side,
        "start_m": 45.0,
        "length_m": 80.0,
        "units": 8,
        "height_m": 6.0,
        "depth_m": 8.0,
        "name": f"houses {side}",
        "materials": {"facade": "concrete", "roof": "roof-tile"},
    }
    f.update(extra)
    return f


def _scene(tmp_path, frontages, roads=(BEND,), **tables):
    doc = {"views": [VIEW], "roads": list(roads), "frontages": frontages, **tables}
    return load_scene_document(doc, tmp_path / "fronts.toml")


def _object(mesh, name):
    ids = [i for i, o in enumerate(mesh.objects) if o.name == name]
    keep = np.isin(mesh.object_id, ids)
    return mesh.triangles_m[keep], mesh.material_id[keep], mesh.normals[keep]


def _flat_normal(t):
    n = np.cross(t[:, 1] - t[:, 0], t[:, 2] - t[:, 0])
    return n / np.linalg.norm(n, axis=1, keepdims=True)


@pytest.mark.parametrize("side", ["left", "right"])
def test_curved_facades_keep_their_setback_from_the_kerb(tmp_path, side):
    mesh = compile_scene(_scene(tmp_path, [_frontage(side)]))
    tris, mat, _ = _object(mesh, f"houses {side}")
    concrete = mesh.material_names.index("concrete")
    n = _flat_normal(tris)
    centroid = tris.mean(axis=1)
    radial = centroid[:, :2] - CENTRE
    radial /= np.linalg.norm(radial, axis=1, keepdims=True)
    inside = side == "left"  # the road turns left: the left side is the inside of the bend
    toward_road = np.einsum("ij,ij->i", n[:, :2], radial) * (1.0 if inside else -1.0)
    wall_r = R - (BUILDING_LINE_M + WALL_BEHIND_M) if inside else R + BUILDING_LINE_M + WALL_BEHIND_M
    r = np.linalg.norm(tris[..., :2] - CENTRE, axis=2)
    front = (mat == concrete) & (toward_road > 0.999) & (np.abs(r.mean(axis=1) - wall_r) < 0.5)
    assert front.sum() > 50
    # every vertex of the street-facing wall at its distance from the curved kerb (3.5 m off the centreline)
    kerb_r = R - 3.5 if inside else R + 3.5
    setback = np.abs(r[front] - kerb_r)
    np.testing.assert_allclose(setback, BUILDING_LINE_M + WALL_BEHIND_M - 3.5, atol=TOL_M)
    # and so are the points between the vertices (the midpoints of the wall's horizontal edges)
    mid = 0.5 * (tris[front][:, [0, 1, 2]] + tris[front][:, [1, 2, 0]])
    level = np.abs(tris[front][:, [0, 1, 2], 2] - tris[front][:, [1, 2, 0], 2]) < 1e-9
    r_mid = np.linalg.norm(mid[..., :2] - CENTRE, axis=2)[level]
    np.testing.assert_allclose(np.abs(r_mid - kerb_r), BUILDING_LINE_M + WALL_BEHIND_M - 3.5, atol=TOL_M)


def test_floors_cover_the_sector_once(tmp_path):
    mesh = compile_scene(_scene(tmp_path, [_frontage("left")]))
    tris, mat, _ = _object(mesh, "houses left")
    n = _flat_normal(tris)
    floor = (n[:, 2] < -0.999) & (np.abs(tris[:, :, 2] - 0.12).max(axis=1) < 1e-9)  # the blocks' bottoms
    f = tris[floor][:, :, :2]
    r_out, r_in = R - (BUILDING_LINE_M + WALL_BEHIND_M), R - (BUILDING_LINE_M + 8.0)
    theta = 80.0 / R  # 80 m along the centreline's arc
    e1, e2 = f[:, 1] - f[:, 0], f[:, 2] - f[:, 0]
    area = 0.5 * np.abs(e1[:, 0] * e2[:, 1] - e1[:, 1] * e2[:, 0]).sum()
    assert area == pytest.approx(theta / 2 * (r_out**2 - r_in**2), rel=2e-3)
    # sampled points of the sector (away from its outline by 5 cm): each in exactly one triangle
    rng = np.random.default_rng(7)
    a0 = 5.0 / R  # s = 45 m is 5 m into the arc
    ang = rng.uniform(a0 + 0.05 / r_in, a0 + theta - 0.05 / r_in, 4000)
    rad = rng.uniform(r_in + 0.05, r_out - 0.05, 4000)
    p = CENTRE + np.stack([rad * np.sin(ang), -rad * np.cos(ang)], axis=1)

    def cross(o, a, b):
        return (a[..., 0] - o[..., 0]) * (b[..., 1] - o[..., 1]) - (a[..., 1] - o[..., 1]) * (b[..., 0] - o[..., 0])

    a, b, c = f[None, :, 0], f[None, :, 1], f[None, :, 2]
    q = p[:, None, :]
    s1, s2, s3 = cross(a, b, q), cross(b, c, q), cross(c, a, q)
    hits = ((s1 >= 0) & (s2 >= 0) & (s3 >= 0)) | ((s1 <= 0) & (s2 <= 0) & (s3 <= 0))
    np.testing.assert_array_equal(hits.sum(axis=1), 1)


def test_a_straight_road_frontage_is_the_street_frontage(tmp_path):
    section = {"carriageway_width_m": 7.0}
    fronts = {k: v for k, v in _frontage("right", start_m=10.0, length_m=30.0, units=4).items() if k != "road"}
    street = compile_scene(_scene(tmp_path, [fronts], roads=(), street={"length_m": 60.0, **section}))
    road = compile_scene(
        _scene(tmp_path, [{**fronts, "road": "r"}], roads=[{"name": "r", "points_m": [[0, 0], [60, 0]], **section}])
    )
    a, ma, na = _object(street, "houses right")
    b, mb, nb = _object(road, "houses right")
    assert a.shape == b.shape
    np.testing.assert_allclose(b, a, atol=1e-9)
    np.testing.assert_allclose(nb, na, atol=1e-9)
    assert [road.material_names[i] for i in mb] == [street.material_names[i] for i in ma]


def test_facade_points_follow_the_curved_facade(tmp_path):
    # An isotropic 10 000 lm source 10 m above the arc's centre lights the outside frontage's
    # points, all at the same distance: E_v = I·r/d³ with r the horizontal distance (analytic).
    lamp = {
        "name": "centre",
        "position_m": [CENTRE[0], CENTRE[1], 10.0],
        "photometry": "generic-isotropic",
        "lamp": "led-4000k-cie-b3",
        "lumens": 10000.0,
        "maintenance_factor": 1.0,
        "column": False,
    }
    scene = _scene(tmp_path, [_frontage("right")], luminaires=[lamp])
    (field,) = facade_fields(scene, spacing_m=3.0, heights_m=(1.5, 4.5))
    assert field.shape == (27, 2)  # round(80 / 3) points along, two heights
    r_h = R + BUILDING_LINE_M - FACADE_OFFSET_M
    np.testing.assert_allclose(np.linalg.norm(field.points_m[:, :2] - CENTRE, axis=1), r_h, atol=TOL_M)
    inward = (CENTRE - field.points_m[:, :2]) / np.linalg.norm(CENTRE - field.points_m[:, :2], axis=1, keepdims=True)
    np.testing.assert_allclose(field.normals[:, :2], inward, atol=2e-3)
    assert np.all(field.normals[:, 2] == 0.0)
    result = evaluate_obtrusive(Study(scene), field)
    z = field.points_m[:, 2]
    d = np.hypot(r_h, 10.0 - z)
    expected = 10000.0 / (4 * math.pi) * r_h / d**3
    np.testing.assert_allclose(result.vertical_lx, expected, rtol=2e-3)


@pytest.mark.parametrize(
    ("frontage", "roads", "where", "words"),
    [
        (
            _frontage("left", road="through", start_m=10.0, length_m=40.0),
            [
                {"name": "through", "points_m": [[0, 0], [80, 0]], "carriageway_width_m": 7.0},
                {
                    "name": "side",
                    "points_m": [[30, 0], [30, 50]],
                    "carriageway_width_m": 6.0,
                    "junction_kerb_radius_m": 10.0,
                },
            ],
            "frontages[0].start_m",
            "crosses a junction",
        ),
        (_frontage("left", length_m=140.0), [BEND], "frontages[0].length_m", "beyond the end"),
        (_frontage("left", depth_m=15.0), [{**BEND, "corner_radius_m": 20.0}], "frontages[0].depth_m", "fold"),
        (_frontage("left", road="no such"), [BEND], "frontages[0].road", "no road named"),
    ],
)
def test_frontage_mistakes_name_the_key(tmp_path, frontage, roads, where, words):
    with pytest.raises(InputError) as err:
        compile_scene(_scene(tmp_path, [frontage], roads=roads))
    found = [p for p in err.value.problems if p.where == where]
    assert found, [str(p) for p in err.value.problems]
    assert words in found[0].message
