"""lampcast import-map (render.mapdata): projection, hand-written extracts, defaults, attribution.

Positions are checked against geodesics on the WGS84 ellipsoid computed by pyproj (PROJ's
geodesic routines after Karney, "Algorithms for geodesics", J. Geodesy 87, 2013): each node of a
hand-written extract is placed with ``Geod.fwd`` at a known distance and azimuth from the
centre, so its projected position is known in metres independently of our projection.
"""

from __future__ import annotations

import math
from pathlib import Path

import numpy as np
import pytest

from render.errors import InputError

pyproj = pytest.importorskip("pyproj")
pytest.importorskip("osmium")

from render.mapdata import defaults as D  # noqa: E402
from render.mapdata.importer import import_map, parse_metres  # noqa: E402
from render.mapdata.projection import LocalProjection, max_position_error_m  # noqa: E402

GEOD = pyproj.Geod(ellps="WGS84")
CENTRE = (52.2, 0.12)  # any centre serves; the extract's features are invented


def _lat_lon(east_m: float, north_m: float, centre=CENTRE) -> tuple[float, float]:
    """The point at ``east_m``, ``north_m`` of the centre along the geodesic (Karney 2013)."""
    dist = math.hypot(east_m, north_m)
    if dist == 0:
        return centre
    lon, lat, _ = GEOD.fwd(centre[1], centre[0], math.degrees(math.atan2(east_m, north_m)), dist)
    return lat, lon


def test_projection_against_pyproj():
    proj = LocalProjection(*CENTRE)
    rng = np.random.default_rng(1)
    for radius in (100.0, 1000.0, 5000.0):
        az = rng.uniform(0, 360, 200)
        dist = rng.uniform(0, radius, 200)
        lon, lat, _ = GEOD.fwd(np.full(200, CENTRE[1]), np.full(200, CENTRE[0]), az, dist)
        xy = proj.xy_m(lat, lon)
        # The distance from the centre is the geodesic one within the stated bound s³/(6R²).
        assert np.all(np.abs(np.hypot(xy[:, 0], xy[:, 1]) - dist) <= max_position_error_m(radius) + 1e-9)
        # The direction is the geodesic's azimuth (the tangent plane keeps azimuths at the centre
        # to second order; 1e-6 rad over 5 km is 5 mm, checked here to 1e-6 rad).
        got = np.degrees(np.arctan2(xy[:, 0], xy[:, 1])) % 360
        assert np.all(np.abs((got - az + 180) % 360 - 180) < 1e-4)
        # PROJ's ellipsoidal orthographic projection (EPSG method 9840) is the same plane.
        t = pyproj.Transformer.from_crs(
            "EPSG:4326", f"+proj=ortho +lat_0={CENTRE[0]} +lon_0={CENTRE[1]} +ellps=WGS84", always_xy=True
        )
        e, n = t.transform(lon, lat)
        assert np.max(np.hypot(xy[:, 0] - e, xy[:, 1] - n)) < 1e-6
    # The stated bound itself (module text): 4 µm at 1 km, 0.5 mm at 5 km.
    assert max_position_error_m(1000.0) == pytest.approx(4.15e-6, rel=0.01)
    assert max_position_error_m(5000.0) == pytest.approx(5.19e-4, rel=0.01)


def _osm(nodes: list[tuple[int, float, float, dict]], ways: list[tuple[int, list[int], dict]]) -> str:
    out = ['<?xml version="1.0" encoding="UTF-8"?>', '<osm version="0.6" generator="test">']
    for i, e, n, tags in nodes:
        lat, lon = _lat_lon(e, n)
        out.append(f' <node id="{i}" version="1" lat="{lat:.9f}" lon="{lon:.9f}">')
        out += [f'  <tag k="{k}" v="{v}"/>' for k, v in tags.items()]
        out.append(" </node>")
    for i, refs, tags in ways:
        out.append(f' <way id="{i}" version="1">')
        out += [f'  <nd ref="{r}"/>' for r in refs]
        out += [f'  <tag k="{k}" v="{v}"/>' for k, v in tags.items()]
        out.append(" </way>")
    return "\n".join([*out, "</osm>", ""])


def _rect(first_id: int, x0, y0, x1, y1):
    corners = [(x0, y0), (x1, y0), (x1, y1), (x0, y1)]
    nodes = [(first_id + k, x, y, {}) for k, (x, y) in enumerate(corners)]
    return nodes, [first_id, first_id + 1, first_id + 2, first_id + 3, first_id]


def _extract(tmp_path: Path) -> Path:
    n1, r1 = _rect(1, -30.0, 10.0, -10.0, 20.0)  # 20 m x 10 m = 200 m², height tag 9 m
    n2, r2 = _rect(11, 5.0, 8.0, 17.0, 16.0)  # 12 m x 8 m = 96 m², building:levels 3 only
    n3, r3 = _rect(21, 30.0, 6.0, 36.0, 18.0)  # 6 m x 12 m = 72 m², no height tags
    road = [(31, -60.0, 0.0, {}), (32, 0.0, 0.0, {}), (39, 45.0, 0.0, {}), (33, 60.0, 0.0, {})]
    side = [(34, 0.0, -50.0, {}), (35, 45.0, 30.0, {}), (36, 45.0, -30.0, {})]
    n4, r4 = _rect(51, 90.0, 0.0, 110.0, 10.0)  # partly beyond the 100 m radius
    extras = [
        (41, -20.0, 6.0, {"natural": "tree"}),
        (42, 20.0, -6.0, {"highway": "street_lamp"}),
        (43, 40.0, -6.0, {"highway": "street_lamp", "height": "8"}),
    ]
    ways = [
        (101, r1, {"building": "yes", "height": "9"}),
        (102, r2, {"building": "house", "building:levels": "3"}),
        (103, r3, {"building": "yes"}),
        (104, [31, 32, 39, 33], {"highway": "residential", "name": "Main Street"}),
        (106, [35, 39, 36], {"highway": "service"}),  # crosses Main Street at node 39
        (107, r4, {"building": "yes"}),
        (105, [32, 34], {"highway": "residential", "name": "Side Street", "width": "4.5"}),
    ]
    path = tmp_path / "town.osm"
    path.write_text(_osm(n1 + n2 + n3 + n4 + road + side + extras, ways))
    return path


def _import(tmp_path: Path, **kwargs):
    import tomllib

    out = tmp_path / "town.toml"
    result = import_map(_extract(tmp_path), CENTRE, 100.0, out, **kwargs)
    return result, tomllib.loads(out.read_text())


def _polygon_area(points) -> float:
    p = np.asarray(points, float)
    return 0.5 * abs(float(np.sum(p[:, 0] * np.roll(p[:, 1], -1) - np.roll(p[:, 0], -1) * p[:, 1])))


def test_footprints_heights_and_positions(tmp_path):
    result, doc = _import(tmp_path)
    assert result.counts["buildings"] == 3 and result.counts["roads"] == 4
    assert result.left_out == {"buildings reaching out of the circle": 1}
    by_name = {g["name"]: g for g in doc["geometry"]}
    expected = {  # footprints from the geodesic placement above; areas analytic (width x depth)
        "building w101": (200.0, 9.0, [(-30, 10), (-10, 10), (-10, 20), (-30, 20)]),
        "building w102": (96.0, 3 * D.STOREY_HEIGHT_M, [(5, 8), (17, 8), (17, 16), (5, 16)]),
        "building w103": (72.0, D.BUILDING_HEIGHT_M, [(30, 6), (36, 6), (36, 18), (30, 18)]),
    }
    for name, (area, height, corners) in expected.items():
        g = by_name[name]
        assert g["kind"] == "extrusion"
        assert _polygon_area(g["outline_m"]) == pytest.approx(area, abs=0.01 * 30)  # 1 cm along a 30 m perimeter
        assert g["height_m"] == pytest.approx(height, abs=0.01)
        assert np.max(np.abs(np.array(g["outline_m"]) - corners)) < 0.01  # positions within 1 cm
    # Each height's source is in the notes.
    assert "from the `height` tag" in by_name["building w101"]["notes"]
    assert "building:levels 3 x 3 m storey height" in by_name["building w102"]["notes"]
    assert "the default" in by_name["building w103"]["notes"]
    # The tree and the lamps where the map puts them, within 1 cm.
    (tree,) = doc["objects"]
    assert np.allclose(tree["position_m"], [-20.0, 6.0], atol=0.01)
    lamps = {lum["name"]: lum for lum in doc["luminaires"]}
    assert np.allclose(lamps["lamp n42"]["position_m"], [20.0, -6.0, D.LAMP_HEIGHT_M], atol=0.01)
    assert np.allclose(lamps["lamp n43"]["position_m"], [40.0, -6.0, 8.0], atol=0.01)
    # Facing the road to the north: C90 (rotation + 90°) points along +y.
    assert lamps["lamp n42"]["rotation_deg"] + 90.0 == pytest.approx(90.0, abs=0.05)
    assert doc["scene"]["attribution"] == "© OpenStreetMap contributors, ODbL"


def test_roads_with_tags_and_defaults(tmp_path):
    _, doc = _import(tmp_path)
    roads = {r["name"]: r for r in doc["roads"]}
    main, side = roads["Main Street"], roads["Side Street"]
    # Missing width and lanes: the stated defaults for a residential road.
    assert main["carriageway_width_m"] == D.ROAD_WIDTHS_M["residential"] and main["lanes"] == 2
    assert main["left"]["footway_width_m"] == D.FOOTWAY_WIDTH_M
    assert side["carriageway_width_m"] == 4.5  # the width tag
    # The side road ends on the main road's centreline (a T junction), within 1 cm.
    assert np.allclose(side["points_m"][0], [0.0, 0.0], atol=0.01)
    assert np.allclose(main["points_m"][0], [-60.0, 0.0], atol=0.01)
    # The service road crossing Main Street is split there into two roads ending on it (a cross
    # junction), each with the stated defaults for a service road.
    service = [r for name, r in roads.items() if name.startswith("service w106")]
    assert len(service) == 2
    for r in service:
        ends = [r["points_m"][0], r["points_m"][-1]]
        assert any(np.allclose(end, [45.0, 0.0], atol=0.01) for end in ends)
        assert r["carriageway_width_m"] == D.ROAD_WIDTHS_M["service"] and r["lanes"] == 1
        assert r["left"]["footway_width_m"] == 0.0


def test_imported_scene_loads_and_compiles(tmp_path):
    from render.geometry.build import compile_scene
    from render.scene import load_scene

    result, _ = _import(tmp_path)
    scene = load_scene(result.path)
    mesh = compile_scene(scene)
    assert len(mesh.carriageway_objects) == 4
    assert "existing" in scene.setups and {lum.group for lum in scene.luminaires} == {"existing"}


def test_attribution_reaches_image_metadata(tmp_path):
    """The scene's attribution is written into a PNG's text (ISO/IEC 15948 tEXt/iTXt) and the
    report footer's scene record."""
    from PIL import Image

    from render.output.images import write_png
    from render.output.provenance import view_metadata
    from render.scene import load_scene
    from render.study import Study

    result, _ = _import(tmp_path, attribution="Test data attribution")
    study = Study(load_scene(result.path))
    png = write_png(tmp_path / "x.png", np.zeros((4, 4, 3), np.uint8), view_metadata(study, "overview", "", 0, 1))
    assert Image.open(png).text["lampcast.attribution"] == "Test data attribution"


def test_metres_tags():
    # OSM wiki, Key:height: metres by default, "m" allowed, feet and inches as 12'6".
    assert parse_metres("12") == 12.0 and parse_metres("12.5 m") == 12.5
    assert parse_metres("10'6\"") == pytest.approx(3.2004)  # 10 ft 6 in = 3.2004 m exactly
    assert parse_metres("tall") is None and parse_metres(None) is None


def test_bad_extracts_name_the_file(tmp_path):
    broken = tmp_path / "broken.osm"
    broken.write_text("<osm><node id='1'")
    with pytest.raises(InputError) as err:
        import_map(broken, CENTRE, 100.0, tmp_path / "out.toml")
    assert err.value.problems[0].source == str(broken)
    with pytest.raises(InputError, match="expected one of"):
        import_map(tmp_path / "x.txt", CENTRE, 100.0, tmp_path / "out.toml")
    with pytest.raises(InputError, match="file not found"):
        import_map(tmp_path / "missing.osm", CENTRE, 100.0, tmp_path / "out.toml")
    with pytest.raises(InputError, match="radius"):
        import_map(_extract(tmp_path), CENTRE, 1e6, tmp_path / "out.toml")
    assert not (tmp_path / "out.toml").exists()


def test_command_line(tmp_path, capsys):
    from render.cli import main

    out = tmp_path / "cli.toml"
    assert (
        main(["import-map", str(_extract(tmp_path)), "--centre", "52.2,0.12", "--radius-m", "100", "--out", str(out)])
        == 0
    )
    assert out.exists()
    assert (
        main(["import-map", str(_extract(tmp_path)), "--centre", "north", "--radius-m", "100", "--out", str(out)]) == 2
    )
    assert "--centre" in capsys.readouterr().err


def test_demo_scene_is_the_import_of_its_extract(tmp_path):
    """scenes/demo2's scene is what the importer writes from the demo's extract (so it stays in
    step with the importer), and it loads."""
    root = Path(__file__).resolve().parents[1] / "scenes" / "demo2"
    out = tmp_path / "gull_harbour.toml"
    import_map(
        root / "gull_harbour.osm",
        (-47.5, -128.0),
        120.0,
        out,
        name="Gull Harbour",
        attribution="Invented map data for the lampcast demo (no real place)",
    )
    assert out.read_text() == (root / "gull_harbour.toml").read_text()


def _osm_relations(nodes, ways, relations) -> str:
    """An extract with multipolygon relations: (id, [(way id, role)], tags)."""
    text = _osm(nodes, ways).removesuffix("</osm>\n")
    out = [text]
    for i, members, tags in relations:
        out.append(f' <relation id="{i}" version="1">')
        out += [f'  <member type="way" ref="{w}" role="{role}"/>' for w, role in members]
        out += [f'  <tag k="{k}" v="{v}"/>' for k, v in tags.items()]
        out.append(" </relation>")
    return "\n".join([*out, "</osm>", ""])


def test_multipolygon_buildings_keep_their_courtyards(tmp_path):
    # A 30 m x 20 m block around a 10 m x 6 m courtyard (building:levels 4), and a relation of two
    # outer rings, one with a 4 m x 4 m courtyard (no height tags); corners placed on geodesics
    # (module text), areas analytic: outer less inner.
    n1, r1 = _rect(1, -40.0, 10.0, -10.0, 30.0)
    n2, r2 = _rect(11, -30.0, 17.0, -20.0, 23.0)
    n3, r3 = _rect(21, 10.0, 10.0, 22.0, 22.0)
    n4, r4 = _rect(31, 14.0, 14.0, 18.0, 18.0)
    n5, r5 = _rect(41, 30.0, 10.0, 36.0, 16.0)
    ways = [(201, r1, {}), (202, r2, {}), (203, r3, {}), (204, r4, {}), (205, r5, {})]
    relations = [
        (301, [(201, "outer"), (202, "inner")], {"type": "multipolygon", "building": "yes", "building:levels": "4"}),
        (302, [(203, "outer"), (204, "inner"), (205, "outer")], {"type": "multipolygon", "building": "school"}),
        (303, [(205, "outer")], {"type": "building"}),  # a building relation grouping parts: counted, not drawn
    ]
    path = tmp_path / "courtyards.osm"
    path.write_text(_osm_relations(n1 + n2 + n3 + n4 + n5, ways, relations))
    out = tmp_path / "courtyards.toml"
    result = import_map(path, CENTRE, 100.0, out)
    import tomllib

    doc = tomllib.loads(out.read_text())
    by_name = {g["name"]: g for g in doc["geometry"]}
    assert result.counts["buildings"] == 3
    assert result.left_out == {"buildings mapped as relations other than multipolygons": 1}
    expected = {
        "building r301": (600.0 - 60.0, 4 * D.STOREY_HEIGHT_M, 1),
        "building r302 part 1": (144.0 - 16.0, D.BUILDING_HEIGHT_M, 1),
        "building r302 part 2": (36.0, D.BUILDING_HEIGHT_M, 0),
    }
    from render.geometry.footprints import holed_area_m2

    for name, (area, height, courtyards) in expected.items():
        g = by_name[name]
        holes = g.get("holes_m", [])
        assert len(holes) == courtyards
        # OSM stores coordinates to 1e-7° (about 1.1 cm of latitude): each corner within 1 cm, so
        # the area within 1 cm along the perimeters (as the footprints above)
        perimeter = sum(np.sum(np.hypot(*np.diff(np.vstack([r, r[:1]]), axis=0).T)) for r in [g["outline_m"], *holes])
        assert holed_area_m2(g["outline_m"], holes) == pytest.approx(area, abs=0.01 * perimeter)
        assert g["height_m"] == pytest.approx(height, abs=0.01)
    assert "courtyard (inner rings) left open" in by_name["building r301"]["notes"]
    assert "OSM relation 301" in by_name["building r301"]["notes"]
    np.testing.assert_allclose(
        np.sort(np.array(by_name["building r301"]["holes_m"][0]), axis=0),
        np.sort(np.array([(-30, 17), (-20, 17), (-20, 23), (-30, 23)], float), axis=0),
        atol=0.01,
    )
    # The scene compiles: the block is a closed solid of volume area x height (divergence
    # theorem, analytic) and nothing roofs the courtyard.
    from render.geometry.build import compile_scene
    from render.scene.loader import load_scene

    mesh = compile_scene(load_scene(out))
    ids = [i for i, o in enumerate(mesh.objects) if o.name == "building r301"]
    t = mesh.triangles_m[np.isin(mesh.object_id, ids)]
    n = np.cross(t[:, 1] - t[:, 0], t[:, 2] - t[:, 0])
    written = holed_area_m2(by_name["building r301"]["outline_m"], by_name["building r301"]["holes_m"])
    assert np.einsum("ij,ij->i", t[:, 0], n).sum() / 6 == pytest.approx(written * 12.0, rel=1e-9)
    up = t[n[:, 2] > 0]
    # the roof (the projected rings' outer less inner) within 1 cm² of the shoelace areas
    assert 0.5 * np.linalg.norm(n[n[:, 2] > 0], axis=1).sum() == pytest.approx(written, abs=1e-4)
    e1, e2, q = up[:, 1] - up[:, 0], up[:, 2] - up[:, 0], np.array([-25.0, 20.0]) - up[:, 0, :2]
    det = e1[:, 0] * e2[:, 1] - e1[:, 1] * e2[:, 0]
    u = (q[:, 0] * e2[:, 1] - q[:, 1] * e2[:, 0]) / det
    v = (e1[:, 0] * q[:, 1] - e1[:, 1] * q[:, 0]) / det
    assert not np.any((u >= 0) & (v >= 0) & (u + v <= 1))  # the courtyard's centre is open to the sky


def test_unsorted_extract_leaves_multipolygons_out_with_the_reason(tmp_path):
    # osmium assembles multipolygons from extracts sorted by id (as extracts are written); a
    # hand-edited file out of order still imports, the multipolygon counted as left out.
    n1, r1 = _rect(1, -40.0, 10.0, -10.0, 30.0)
    n2, r2 = _rect(11, -30.0, 17.0, -20.0, 23.0)
    ways = [(202, r2, {}), (201, r1, {})]  # out of order
    rel = [(301, [(201, "outer"), (202, "inner")], {"type": "multipolygon", "building": "yes"})]
    path = tmp_path / "unsorted.osm"
    path.write_text(_osm_relations(n1 + n2, ways, rel))
    result = import_map(path, CENTRE, 100.0, tmp_path / "unsorted.toml")
    assert result.counts["buildings"] == 0
    (reason,) = result.left_out
    assert "not sorted by id" in reason and result.left_out[reason] == 1
