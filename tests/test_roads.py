"""Roads along polylines (render.geometry.roads, ``[[roads]]``).

The checks and their sources:

* a straight road builds the ``[street]`` builder's triangles bit for bit (the issue's demand;
  the street builder is the reference), and its areas are length × width (analytic);
* a road along a circular arc: band widths constant along it and edges on concentric circles
  (analytic circle geometry, within the stated chord error), the carriageway's area that of the
  annulus sector within the chord-length error of the tessellation (analytic: a chord
  subtending φ is 2r·sin(φ/2)), each band a topological disc (every edge shared by at most
  two triangles, Euler characteristic 1: no gap, no hole);
* luminaire columns ``setback_m`` behind the curved kerb (analytic circle geometry);
* junctions: the joined carriageway's area equals the rectangles plus the fillets between two
  lines and a tangent circle, R²·(cot(γ/2) − (π − γ)/2) for a corner of angle γ (analytic plane
  geometry), within the circular segments the chords leave out; no two ground triangles at one
  height cover the same point (a point-in-triangle count);
* calculation fields on a straight stretch of a road are the street's grid turned with the
  road (analytic rotation; curved stretches: tests/test_calc_on_roads.py); every mistake an
  InputError naming the key.
"""

from __future__ import annotations

import math

import numpy as np
import pytest

from render.errors import InputError
from render.geometry.build import compile_scene
from render.geometry.roads import side_depth_m
from render.scene.loader import load_scene_document

VIEW = {"name": "v", "position_m": [1.0, -1.0], "target_m": [30.0, 0.0, 0.0], "resolution": [64, 36]}
LAMP = "led-4000k-cie-b3"


def scene(tmp_path, **tables):
    return load_scene_document({"views": [VIEW], **tables}, tmp_path / "roads.toml")


def areas(triangles: np.ndarray) -> np.ndarray:
    e1 = triangles[:, 1] - triangles[:, 0]
    e2 = triangles[:, 2] - triangles[:, 0]
    return 0.5 * np.linalg.norm(np.cross(e1, e2), axis=1)


def object_triangles(mesh, name: str, where: str | None = None) -> np.ndarray:
    ids = [i for i, o in enumerate(mesh.objects) if o.name == name and (where is None or o.where == where)]
    return mesh.triangles_m[np.isin(mesh.object_id, ids)]


SECTIONS = [
    {"carriageway_width_m": 6.0},
    {"carriageway_width_m": 7.3, "centre_line": "solid", "left": {"verge_width_m": 0.5, "frontage_depth_m": 0.0}},
    {
        "carriageway_width_m": 5.5,
        "kerb_height_m": 0.0,
        "kerb_width_m": 0.0,
        "centre_line": "none",
        "right": {"footway_width_m": 3.1, "footway_material": "asphalt-new"},
    },
]


@pytest.mark.parametrize("section", SECTIONS)
def test_a_straight_road_builds_the_street_builders_triangles(tmp_path, section):
    # Reference: the [street] builder (render.geometry.build._street), which the issue asks a
    # straight road to reproduce; areas: length × width (analytic).
    length = 47.5
    street = compile_scene(scene(tmp_path, street={"length_m": length, **section}))
    road = compile_scene(scene(tmp_path, roads=[{"name": "r", "points_m": [[0, 0], [length, 0]], **section}]))
    assert road.n_triangles == street.n_triangles
    np.testing.assert_array_equal(road.triangles_m, street.triangles_m)
    np.testing.assert_array_equal(road.normals, street.normals)
    assert [road.material_names[i] for i in road.material_id] == [street.material_names[i] for i in street.material_id]
    assert [road.object_names[i] for i in road.object_id] == [street.object_names[i] for i in street.object_id]
    carriageway = object_triangles(road, "carriageway")
    assert areas(carriageway).sum() == pytest.approx(length * section["carriageway_width_m"], rel=1e-12)
    assert road.carriageway_objects == (road.object_names.index("carriageway"),)


def test_road_tables_are_checked_like_the_street(tmp_path):
    # The same key checks as [street] (one declaration): a bad lane count and a bad side width.
    with pytest.raises(InputError) as err:
        scene(
            tmp_path,
            roads=[
                {
                    "name": "r",
                    "points_m": [[0, 0], [9, 0]],
                    "carriageway_width_m": 6,
                    "lanes": 0,
                    "left": {"footway_width_m": -1},
                }
            ],
        )
    text = str(err.value)
    assert "roads[0].lanes" in text and "roads[0].left.footway_width_m" in text


# A left-hand bend: (0, 0) → (100, 0) → (100, 100) with a 40 m corner radius is a quarter circle
# of radius 40 m about (60, 40) from (60, 0) to (100, 40), between two straights of 60 m.
BEND = {"name": "bend", "points_m": [[0, 0], [100, 0], [100, 100]], "corner_radius_m": 40.0}
CENTRE = np.array([60.0, 40.0])
RADIUS = 40.0
CHORD = 0.01  # max_chord_error_m, the default


def on_arc(points: np.ndarray) -> np.ndarray:
    """The points in the quarter circle's sector (x > 60, y < 40)."""
    return (points[:, 0] > 60.0 + 1e-9) & (points[:, 1] < 40.0 - 1e-9)


def distance_to_polyline(points: np.ndarray, line: np.ndarray) -> np.ndarray:
    a, b = line[:-1], line[1:]
    ab = b - a
    t = np.clip(np.einsum("pij,ij->pi", points[:, None] - a[None], ab) / np.einsum("ij,ij->i", ab, ab), 0, 1)
    nearest = a[None] + t[..., None] * ab[None]
    return np.min(np.linalg.norm(points[:, None] - nearest, axis=2), axis=1)


def test_footway_widths_are_constant_round_a_circular_arc(tmp_path):
    # Analytic: round the arc each footway lies between the circles of radii r ∓ d0 and r ∓ d1
    # about its centre (d0, d1 the distances from the centreline to its edges): every vertex of
    # the built footway on the arc lies on one of the two circles, and the distance from each
    # vertex of one edge to the other edge (the width) is d1 − d0, within the chord error.
    s = scene(
        tmp_path, roads=[{**BEND, "carriageway_width_m": 6.0, "left": {"footway_width_m": 2.0, "verge_width_m": 0.4}}]
    )
    road = s.roads[0]
    mesh = compile_scene(s)
    half = 3.0
    for side, sign in (("left", 1.0), ("right", -1.0)):
        d0 = half + road.section.kerb_width_m + road.section.side(side).verge_width_m
        width = road.section.side(side).footway_width_m
        vertices = object_triangles(mesh, f"footway {side}").reshape(-1, 3)[:, :2]
        vertices = np.unique(vertices[on_arc(vertices)], axis=0)
        radius = np.linalg.norm(vertices - CENTRE, axis=1)
        inner = np.abs(radius - (RADIUS - sign * d0)) <= CHORD
        outer = np.abs(radius - (RADIUS - sign * (d0 + width))) <= CHORD
        assert np.all(inner | outer) and inner.sum() > 20 and outer.sum() > 20
        order = lambda v: v[np.argsort(np.arctan2(v[:, 1] - CENTRE[1], v[:, 0] - CENTRE[0]))]  # noqa: E731
        inner_edge, outer_edge = order(vertices[inner]), order(vertices[outer])
        np.testing.assert_allclose(distance_to_polyline(inner_edge[1:-1], outer_edge), width, atol=CHORD)
        np.testing.assert_allclose(distance_to_polyline(outer_edge[1:-1], inner_edge), width, atol=CHORD)


def test_carriageway_round_an_arc_has_the_annulus_sectors_area_and_no_holes(tmp_path):
    # Analytic: an annulus sector of angle θ between radii r ∓ W/2 has area θ·r·W; a mitred strip
    # of width W along a polyline has area W × its length, and the chords fall short of the arc
    # by at most r·θ·φ²/24 (2r·sin(φ/2) ≥ rφ(1 − φ²/24)) with φ the largest chord angle, whose
    # sagitta r(1 − cos(φ/2)) is the stated chord error.
    width = 6.0
    s = scene(tmp_path, roads=[{**BEND, "carriageway_width_m": width, "centre_line": "none"}])
    mesh = compile_scene(s)
    tris = object_triangles(mesh, "carriageway")
    theta = math.pi / 2
    exact = 2 * 60.0 * width + theta * RADIUS * width
    phi = 2 * math.acos(1 - CHORD / RADIUS)
    bound = width * RADIUS * theta * phi**2 / 24
    total = areas(tris).sum()
    assert exact - bound - 1e-9 <= total <= exact + 1e-9
    assert abs(total - exact) > 0  # the tessellation is really there
    for name in ("carriageway", "footway left", "front gardens right", "kerb left"):
        t = object_triangles(mesh, name)
        t = t[np.abs(t[:, :, 2] - t[:, :1, 2]).max(axis=1) < 1e-12]  # the ground pieces (kerb tops)
        assert_disc(t)


def assert_disc(tris: np.ndarray) -> None:
    """Common practice (mesh topology, no source): a strip of triangles without gaps or holes
    is a disc: every edge in one or two triangles, V − E + F = 1, one boundary loop."""
    keys = {}
    vid = np.array([[keys.setdefault(tuple(np.round(v, 9)), len(keys)) for v in tri] for tri in tris])
    edges = np.sort(np.concatenate([vid[:, [0, 1]], vid[:, [1, 2]], vid[:, [2, 0]]]), axis=1)
    unique, counts = np.unique(edges, axis=0, return_counts=True)
    assert counts.max() <= 2
    assert len(keys) - len(unique) + len(tris) == 1
    boundary = unique[counts == 1]
    assert np.all(np.bincount(boundary.ravel())[np.unique(boundary)] == 2)  # a single closed boundary (manifold)


def test_luminaire_columns_stand_setback_behind_the_curved_kerb(tmp_path):
    # Analytic: on the arc the left kerb is the circle of radius r − W/2 about the centre and the
    # right kerb r + W/2; a column setback_m behind it lies setback_m further from the road:
    # |column − centre| = r − W/2 − setback (left, inside) or r + W/2 + setback (right), within
    # the chord error; the opening outreach_m back toward the carriageway.
    width, setback, outreach = 6.0, 0.7, 0.5
    rows = [
        {
            "road": "bend",
            "side": side,
            "start_m": 65.0,
            "spacing_m": 7.0,
            "count": 6,
            "setback_m": setback,
            "outreach_m": outreach,
            "mounting_height_m": 6.0,
            "lamp": LAMP,
        }
        for side in ("left", "right")
    ]
    s = scene(tmp_path, roads=[{**BEND, "carriageway_width_m": width}], luminaire_rows=rows)
    for lum in s.luminaires:
        side = 1.0 if lum.where == "luminaire_rows[0]" else -1.0
        column = np.array(lum.column_base_m[:2])
        opening = np.array(lum.position_m[:2])
        assert on_arc(column[None])[0]
        kerb = RADIUS - side * width / 2
        assert np.linalg.norm(column - CENTRE) == pytest.approx(kerb - side * setback, abs=CHORD)
        assert np.linalg.norm(opening - CENTRE) == pytest.approx(kerb - side * (setback - outreach), abs=CHORD)
        assert lum.column_base_m[2] == pytest.approx(s.roads[0].section.kerb_height_m)
        # C0 along the road's direction (right side) or against it (left), as on a [street].
        tangent = np.array([-(column - CENTRE)[1], (column - CENTRE)[0]])  # anticlockwise round the centre
        expected = math.degrees(math.atan2(tangent[1], tangent[0])) + (180.0 if side > 0 else 0.0)
        # A chord's direction is within half its angle φ of the arc's tangent at any point it spans.
        half_chord_angle = math.acos(1 - CHORD / RADIUS)
        assert abs(math.remainder(lum.rotation_deg - expected, 360.0)) <= math.degrees(half_chord_angle)


def fillet_area(radius: float, corner_rad: float) -> float:
    """Area between two lines meeting at angle γ and the circle of radius R tangent to both
    (analytic plane geometry): R²·(cot(γ/2) − (π − γ)/2)."""
    return radius**2 * (1 / math.tan(corner_rad / 2) - (math.pi - corner_rad) / 2)


def segment_bound(radius: float, corner_rad: float) -> float:
    """The most area the chords of a fillet arc (angle π − γ) leave out of the circle: circular
    segments (R²/2)(φ − sin φ) ≤ R²φ³/12 each, φ the largest chord angle."""
    phi = 2 * math.acos(1 - CHORD / radius)
    return radius**2 * (math.pi - corner_rad) * phi**2 / 12


def coverage_counts(tris: np.ndarray, points: np.ndarray) -> np.ndarray:
    a, b, c = (tris[:, k, None, :2] for k in range(3))
    p = points[None]

    def side(u, v):
        return (v[..., 0] - u[..., 0]) * (p[..., 1] - u[..., 1]) - (v[..., 1] - u[..., 1]) * (p[..., 0] - u[..., 0])

    d1, d2, d3 = side(a, b), side(b, c), side(c, a)
    inside = ((d1 > 0) & (d2 > 0) & (d3 > 0)) | ((d1 < 0) & (d2 < 0) & (d3 < 0))
    return inside.sum(axis=0)


@pytest.mark.parametrize("angle_deg", [90.0, 126.86989764584402])
def test_t_junction_carriageways_join_without_overlap(tmp_path, angle_deg):
    # Analytic: main road 100 m × 7 m; the branch leaves at angle α from its kerb line, its
    # carriageway (6 m) from that line to its end has area 6 × its centreline's length beyond
    # the line; the two corners (angles α and π − α) add fillets of radius R.
    w_main, w_branch, radius, length = 7.0, 6.0, 6.0, 40.0
    a = math.radians(angle_deg)
    end = [50.0 + length * math.cos(a), length * math.sin(a)]
    s = scene(
        tmp_path,
        roads=[
            {"name": "main", "points_m": [[0, 0], [100, 0]], "carriageway_width_m": w_main, "centre_line": "none"},
            {
                "name": "side",
                "points_m": [[50, 0], end],
                "carriageway_width_m": w_branch,
                "centre_line": "none",
                "junction_kerb_radius_m": radius,
            },
        ],
    )
    mesh = compile_scene(s)
    carriageway = mesh.triangles_m[np.isin(mesh.object_id, mesh.carriageway_objects)]
    beyond = length - (w_main / 2) / math.sin(a)
    corners = (a, math.pi - a)
    exact = 100 * w_main + w_branch * beyond + sum(fillet_area(radius, g) for g in corners)
    bound = sum(segment_bound(radius, g) for g in corners)
    total = areas(carriageway).sum()
    assert exact - 1e-9 <= total <= exact + bound + 1e-9
    # No two triangles of one level cover a point (a grid around the junction).
    # (the grid is shifted by irrational amounts so that no point falls on a shared edge)
    xs, ys = np.meshgrid(np.linspace(20, 80, 241) + math.sqrt(2) / 100, np.linspace(-12, 30, 169) + math.sqrt(3) / 100)
    points = np.column_stack([xs.ravel(), ys.ravel()])
    ground = mesh.triangles_m[np.abs(mesh.normals[:, 0, 2] - 1) < 1e-9]
    for z in (0.0, s.roads[0].section.kerb_height_m):
        level = ground[np.abs(ground[:, 0, 2] - z) < 1e-9]
        assert coverage_counts(level, points).max() == 1
    # Every point between the carriageway and the building lines near the mouth is covered once.
    both = ground[(np.abs(ground[:, 0, 2]) < 1e-9) | (np.abs(ground[:, 0, 2] - 0.12) < 1e-9)]
    depth = w_main / 2 + side_depth_m(s.roads[0].section, "left") - 0.2
    near = points[(np.abs(points[:, 1]) < depth) & (np.abs(points[:, 0] - 50) < 20)]
    assert np.all(coverage_counts(both, near) == 1)


def test_cross_junction_of_two_roads_ending_on_a_third(tmp_path):
    # Analytic: two perpendicular arms from opposite sides: 2 × (rectangle + 2 fillets of 90°).
    s = scene(
        tmp_path,
        roads=[
            {"name": "main", "points_m": [[0, 0], [80, 0]], "carriageway_width_m": 6.0, "centre_line": "none"},
            {"name": "north", "points_m": [[40, 0], [40, 30]], "carriageway_width_m": 5.0, "centre_line": "none"},
            {"name": "south", "points_m": [[40, -30], [40, 0]], "carriageway_width_m": 5.0, "centre_line": "none"},
        ],
    )
    mesh = compile_scene(s)
    total = areas(mesh.triangles_m[np.isin(mesh.object_id, mesh.carriageway_objects)]).sum()
    exact = 80 * 6.0 + 2 * (5.0 * 27.0 + 2 * fillet_area(6.0, math.pi / 2))
    assert exact <= total + 1e-9 <= exact + 4 * segment_bound(6.0, math.pi / 2) + 2e-9


def test_positions_along_a_road_follow_its_shape(tmp_path):
    # Analytic: on the straight road from (10, 5) at 30° the point (s, offset) is
    # (10, 5) + s·(cos 30°, sin 30°) + offset·(−sin 30°, cos 30°).
    a = math.radians(30.0)
    t, n = np.array([math.cos(a), math.sin(a)]), np.array([-math.sin(a), math.cos(a)])
    start = np.array([10.0, 5.0])
    road = {"name": "slope", "points_m": [start.tolist(), (start + 60 * t).tolist()], "carriageway_width_m": 6.0}
    s = scene(
        tmp_path,
        roads=[road],
        objects=[
            {
                "kind": "bollard",
                "name": "b",
                "heading_deg": 10.0,
                "position_along": {"road": "slope", "s_m": 12.0, "offset_m": -4.0},
            }
        ],
        markings=[
            {
                "kind": "line",
                "name": "stop",
                "road": "slope",
                "points_m": [[20, -3], [20, 0]],
                "material": "paint-road-white",
            }
        ],
        luminaire_rows=[
            {
                "road": "slope",
                "side": "right",
                "start_m": 10.0,
                "spacing_m": 20.0,
                "count": 2,
                "mounting_height_m": 6.0,
                "setback_m": 0.5,
                "outreach_m": 0.0,
                "lamp": LAMP,
            }
        ],
    )
    obj = s.objects[0]
    np.testing.assert_allclose(obj.position_m[:2], start + 12 * t - 4 * n, atol=1e-12)
    assert obj.position_m[2] == pytest.approx(0.12)  # on the footway (kerb height)
    assert obj.heading_deg == pytest.approx(40.0)
    np.testing.assert_allclose(s.markings[0].points_m, [start + 20 * t - 3 * n, start + 20 * t], atol=1e-12)
    for lum, along in zip(s.luminaires, (10.0, 30.0)):
        np.testing.assert_allclose(lum.column_base_m[:2], start + along * t - 3.5 * n, atol=1e-12)
    # Calculation fields between the two luminaires: the street's grid turned by 30°.
    from render.calc.fields import row_fields, street_fields

    fields = row_fields(s, 0, 0)
    reference = street_fields(s.roads[0].section, 10.0, 20.0)
    assert [f.name for f in fields] == [f.name for f in reference]
    for f, ref in zip(fields, reference):
        expected = start + ref.points_m[:, :1] * t + ref.points_m[:, 1:2] * n
        np.testing.assert_allclose(f.points_m[:, :2], expected, atol=1e-9)
        np.testing.assert_array_equal(f.points_m[:, 2], ref.points_m[:, 2])


@pytest.mark.parametrize(
    ("road", "extra", "where", "words"),
    [
        ({"points_m": [[0, 0]]}, {}, "roads[0].points_m", "at least 2"),
        ({"points_m": [[0, 0], [50, 0], [50, 50]], "corner_radius_m": 2.0}, {}, "roads[0].corner_radius_m", "fold"),
        ({"points_m": [[0, 0], [10, 0], [10, 10]], "corner_radius_m": 20.0}, {}, "roads[0].corner_radius_m", "need"),
        ({"points_m": [[0, 0], [10, 0], [0, 1]]}, {}, "roads[0].points_m", "corner_radius_m"),
        (
            {"points_m": [[0, 0], [40, 0]]},
            {
                "luminaire_rows": [
                    {"road": "Bend", "spacing_m": 10.0, "count": 2, "mounting_height_m": 6.0, "lamp": LAMP}
                ]
            },
            "luminaire_rows[0].road",
            "no road named 'Bend'",
        ),
        (
            {"points_m": [[0, 0], [40, 0]]},
            {"objects": [{"kind": "bollard", "position_along": {"road": "x", "s_m": 1.0}}]},
            "objects[0].position_along.road",
            "no road named 'x'",
        ),
        (
            {"points_m": [[0, 0], [40, 0]]},
            {"objects": [{"kind": "bollard", "position_along": {"road": "r", "s_m": 41.0}}]},
            "objects[0].position_along.s_m",
            "0 to 40",
        ),
        (
            {"points_m": [[0, 0], [40, 0]]},
            {"markings": [{"kind": "line", "road": "q", "points_m": [[1, 0], [2, 0]], "material": "paint-road-white"}]},
            "markings[0].road",
            "no road named 'q'",
        ),
        ({"points_m": [[0, 0], [40, 0]], "lane_width_m": 3.0}, {}, "roads[0].lane_width_m", "not both"),
    ],
)
def test_road_mistakes_name_the_file_and_key(tmp_path, road, extra, where, words):
    table = {"name": "r", "carriageway_width_m": 6.0, **road}
    with pytest.raises(InputError) as err:
        scene(tmp_path, roads=[table], **extra)
    found = [p for p in err.value.problems if p.where == where]
    assert found, [str(p) for p in err.value.problems]
    assert words in found[0].message
    assert found[0].source.endswith("roads.toml")


@pytest.mark.parametrize(
    ("roads", "where", "words"),
    [
        (
            [
                {"name": "a", "points_m": [[0, 0], [40, 0]]},
                {"name": "b", "points_m": [[20, 0], [20, 30]], "junction_kerb_radius_m": 2.0},
            ],
            "roads[1].junction_kerb_radius_m",
            "must exceed",
        ),
        (
            [{"name": "a", "points_m": [[0, 0], [40, 0]]}, {"name": "b", "points_m": [[40, 0], [80, 10]]}],
            "roads[0].points_m",
            "end to end",
        ),
        (
            [{"name": "a", "points_m": [[0, 0], [40, 0]]}, {"name": "b", "points_m": [[20, -20], [20, 30]]}],
            "roads[1].points_m",
            "crosses",
        ),
        (
            [{"name": "a", "points_m": [[0, 0], [80, 0]]}, {"name": "b", "points_m": [[40, 0], [80, 5]]}],
            "roads[1].points_m",
            "angles from 20",
        ),
    ],
)
def test_junction_mistakes_are_input_errors(tmp_path, roads, where, words):
    s = scene(tmp_path, roads=[{**r, "carriageway_width_m": 6.0} for r in roads])
    with pytest.raises(InputError) as err:
        compile_scene(s)
    problem = err.value.problems[0]
    assert problem.where == where and words in problem.message


def test_the_example_scene_loads_and_compiles():
    from pathlib import Path

    from render.scene.loader import check_scene_mesh

    path = Path(__file__).resolve().parents[1] / "scenes" / "tests" / "bend_and_junction.toml"
    s, mesh = check_scene_mesh(path)
    assert [r.name for r in s.roads] == ["Quarry Bend", "Tanner's Walk"]
    assert len(mesh.carriageway_objects) == 2
    assert len(s.luminaires) == 7
