"""``lampcast import-map``: an editable scene from an OpenStreetMap extract around a centre.

:func:`import_map` reads the extract (:func:`render.mapdata.osm.read_extract`), projects it to
local metres (:class:`~render.mapdata.projection.LocalProjection`: x east, y north of the centre)
and writes a scene file (atomically) with:

- buildings (closed ``building`` ways wholly inside the circle) as ``[[geometry]]`` extrusions
  of their footprints; height from ``height``, else ``building:levels`` ×
  :data:`~render.mapdata.defaults.STOREY_HEIGHT_M`, else
  :data:`~render.mapdata.defaults.BUILDING_HEIGHT_M`, the choice written in the object's notes;
  buildings mapped as multipolygon relations the same way, one extrusion per outer ring
  (``building rID`` or ``building rID part K``) with its inner rings as open courtyards
  (``holes_m``: walls facing into them, no roof over them; :mod:`render.geometry.footprints`);
  an outer ring with courtyards touching it or each other is left out and counted;
- trees (``natural=tree``) as ``tree`` objects, hedges (``barrier=hedge``) as ``hedge`` objects
  per segment, walls (``barrier=wall``) as extrusions per segment;
- roads (``highway`` ways of a road type) as ``[[roads]]``, joined at shared nodes per name and
  type, split where a road of a higher class passes through, clipped to the circle; width from
  ``width``, else ``lanes`` × :data:`~render.mapdata.defaults.LANE_WIDTH_M`, else the type's
  default, footways from ``sidewalk``; the choices in a comment above each road;
- paths (footways, cycleways …) as surfaced strips (``[[markings]]`` lines);
- existing street lamps (``highway=street_lamp``) as ``[[luminaires]]`` of group ``existing``
  with a placeholder ``[setups.existing]`` the user assigns, each turned so that its street side
  (C90) faces the nearest road;
- a ground slab, two views and ``[scene] attribution`` (the data's licence).

The written scene is loaded and compiled before the command ends; a road the road builder cannot
draw (an unsupported junction, an offset that folds in a tight bend) is left out with a comment
saying why, so the scene always loads.

References
----------
- OpenStreetMap wiki tag pages (see :mod:`render.mapdata.osm`).
- Douglas, D. H. and Peucker, T. K. (1973), "Algorithms for the reduction of the number of points
  required to represent a digitized line or its caricature", The Canadian Cartographer 10(2):
  the simplification of road centrelines.
- TOML v1.0.0 (the scene file written).
"""

from __future__ import annotations

import json
import math
import os
import re
from dataclasses import dataclass, field
from pathlib import Path

import numpy as np

from render.errors import InputError, input_error
from render.mapdata import defaults as D
from render.mapdata.osm import MapArea, MapExtract, MapWay, read_extract
from render.mapdata.projection import MAX_RADIUS_M, LocalProjection, max_position_error_m

__all__ = ["ROAD_CLASSES", "SIMPLIFY_TOLERANCE_M", "ImportResult", "import_map", "parse_centre", "parse_metres"]

#: Road ``highway`` types, highest class first (a lower road is split where a higher one passes).
ROAD_CLASSES = tuple(D.ROAD_WIDTHS_M)
#: Largest distance a simplified road centreline moves from the mapped one, m.
SIMPLIFY_TOLERANCE_M = 0.2
#: Tags that set a road's cross-section: ways are joined into one road only where they agree.
_ROAD_TAGS = ("width", "lanes", "sidewalk", "sidewalk:left", "sidewalk:right")
#: Coordinates are written to the millimetre.
_DIGITS = 3


@dataclass
class ImportResult:
    """What :func:`import_map` wrote and counted."""

    path: Path
    counts: dict[str, int] = field(default_factory=dict)
    left_out: dict[str, int] = field(default_factory=dict)


# --- tags ----------------------------------------------------------------------------------------

_METRES = re.compile(r"^\s*([0-9]+(?:\.[0-9]+)?)\s*(m|metres|meters)?\s*$")
_FEET = re.compile(r"^\s*([0-9]+)\s*'\s*(?:([0-9]+(?:\.[0-9]+)?)\s*\")?\s*$")


def parse_metres(value: str | None) -> float | None:
    """A length tag in metres ("12", "12.5 m", or feet and inches "40'6\"" per the OSM wiki's
    Key:height); None when absent or not understood."""
    if value is None:
        return None
    m = _METRES.match(value)
    if m:
        return float(m.group(1))
    m = _FEET.match(value)
    if m:
        return 0.3048 * float(m.group(1)) + 0.0254 * float(m.group(2) or 0.0)
    return None


def parse_centre(text: str) -> tuple[float, float]:
    """``LAT,LON`` in degrees; ValueError with a message otherwise."""
    parts = text.split(",")
    if len(parts) != 2:
        raise ValueError(f"expected LAT,LON in degrees, got {text!r}")
    lat, lon = (float(p) for p in parts)
    if not (math.isfinite(lat) and math.isfinite(lon) and -90 < lat < 90 and -180 <= lon <= 180):
        raise ValueError(f"expected a latitude in (-90, 90) and a longitude in [-180, 180], got {text!r}")
    return lat, lon


def _name(tags: dict[str, str]) -> str:
    return (tags.get("name") or "").strip()[:80]


# --- TOML text -------------------------------------------------------------------------------------


def _q(text: str) -> str:
    """A TOML basic string (JSON's escapes are TOML's; DEL escaped as TOML requires)."""
    return json.dumps(text, ensure_ascii=False).replace("\x7f", "\\u007f")


def _n(x: float) -> str:
    v = round(float(x), _DIGITS) + 0.0
    return repr(v)


def _pts(xy) -> str:
    return "[" + ", ".join(f"[{_n(x)}, {_n(y)}]" for x, y in xy) + "]"


def _comment(text: str) -> str:
    return "\n".join("# " + line for line in text.replace("\r", " ").splitlines())


# --- geometry helpers --------------------------------------------------------------------------


def _dedup(xy: np.ndarray, closed: bool = False) -> np.ndarray:
    """Points rounded to the millimetre without repeats (nor the closing point of a ring)."""
    p = np.round(np.asarray(xy, float), _DIGITS)
    keep = [0]
    for i in range(1, len(p)):
        if np.any(p[i] != p[keep[-1]]):
            keep.append(i)
    p = p[keep]
    if closed and len(p) > 1 and np.all(p[0] == p[-1]):
        p = p[:-1]
    return p


def _simplify(xy: np.ndarray, tol: float) -> np.ndarray:
    """Douglas-Peucker simplification (ends kept)."""
    if len(xy) <= 2:
        return xy
    a, b = xy[0], xy[-1]
    d = b - a
    length = float(np.hypot(*d))
    rel = xy - a
    dist = np.abs(d[0] * rel[:, 1] - d[1] * rel[:, 0]) / length if length > 0 else np.hypot(rel[:, 0], rel[:, 1])
    i = int(np.argmax(dist))
    if dist[i] <= tol:
        return np.array([a, b])
    left = _simplify(xy[: i + 1], tol)
    return np.vstack([left[:-1], _simplify(xy[i:], tol)])


def _clip(xy: np.ndarray, r: float) -> list[np.ndarray]:
    """The pieces of a polyline inside the circle of radius ``r`` about the origin."""
    pieces: list[list[np.ndarray]] = []
    current: list[np.ndarray] = []
    for p, q in zip(xy[:-1], xy[1:]):
        d = q - p
        a, b, c = float(d @ d), 2.0 * float(p @ d), float(p @ p) - r * r
        if a == 0:
            continue
        disc = b * b - 4 * a * c
        if disc <= 0:
            t0, t1 = 1.0, 0.0
        else:
            s = math.sqrt(disc)
            t0, t1 = max((-b - s) / (2 * a), 0.0), min((-b + s) / (2 * a), 1.0)
        if t0 >= t1:
            if current:
                pieces.append(current)
                current = []
            continue
        start, end = p + t0 * d, p + t1 * d
        if not current:
            current = [start]
        current.append(end)
        if t1 < 1.0:
            pieces.append(current)
            current = []
    if current:
        pieces.append(current)
    return [np.array(piece) for piece in pieces if len(piece) >= 2]


def _polygon_ok(outline: np.ndarray) -> str | None:
    from render.geometry.shapes import triangulate_polygon
    from render.limits import MAX_POLYGON_VERTICES

    if len(outline) < 3:
        return "fewer than 3 distinct corners"
    if len(outline) > MAX_POLYGON_VERTICES:
        return f"more than {MAX_POLYGON_VERTICES} corners"
    try:
        triangulate_polygon(outline, name="the footprint")
    except ValueError as err:
        return str(err)
    return None


# --- features ---------------------------------------------------------------------------------------


def _building(way: MapWay, radius_m: float) -> tuple[str | None, str]:
    """(the [[geometry]] text or None, why not)."""
    if not way.closed:
        return None, "buildings drawn as open ways"
    if np.any(np.hypot(way.xy_m[:, 0], way.xy_m[:, 1]) > radius_m):
        return None, "buildings reaching out of the circle"
    outline = _dedup(way.xy_m, closed=True)
    problem = _polygon_ok(outline)
    if problem is not None:
        return None, "buildings with footprints lampcast cannot triangulate"
    tags = way.tags
    height, why = _building_height(tags)
    material = D.BUILDING_MATERIALS.get(tags.get("building:material", ""), "brick")
    label = _name(tags)
    notes = f"OSM way {way.id} (building={tags.get('building')}{', ' + label if label else ''}); {why}"
    text = (
        f'[[geometry]]\nname = "building w{way.id}"\nkind = "extrusion"\nmaterial = {_q(material)}\n'
        f"height_m = {_n(height)}\noutline_m = {_pts(outline)}\nnotes = {_q(notes)}\n"
    )
    return text, ""


def _building_height(tags: dict[str, str]) -> tuple[float, str]:
    """A building's height from ``height``, else ``building:levels`` x the storey height, else
    the default, and the sentence saying which."""
    height = parse_metres(tags.get("height"))
    levels = parse_metres(tags.get("building:levels"))
    if height is not None and 0 < height <= 200:
        return height, f"height {height:g} m from the `height` tag"
    if levels is not None and 0 < levels <= 60:
        height = levels * D.STOREY_HEIGHT_M
        return height, (
            f"height {height:g} m = building:levels {levels:g} x {D.STOREY_HEIGHT_M:g} m storey height "
            "(no usable `height` tag)"
        )
    return (
        D.BUILDING_HEIGHT_M,
        f"height {D.BUILDING_HEIGHT_M:g} m: the default (no usable `height` or `building:levels` tag)",
    )


def _area_buildings(area: MapArea, radius_m: float) -> tuple[list[str], list[str]]:
    """([[geometry]] texts, reasons for the parts left out) of a multipolygon building: one
    extrusion per outer ring, its inner rings as courtyards (``holes_m``)."""
    from render.geometry.footprints import rings_problem

    tags = area.tags
    height, why = _building_height(tags)
    material = D.BUILDING_MATERIALS.get(tags.get("building:material", ""), "brick")
    label = _name(tags)
    texts, left = [], []
    for k, (outer, inners) in enumerate(area.polygons, start=1):
        if np.any(np.hypot(outer[:, 0], outer[:, 1]) > radius_m):
            left.append("buildings reaching out of the circle")
            continue
        outline = _dedup(outer, closed=True)
        holes = [_dedup(inner, closed=True) for inner in inners]
        if _polygon_ok(outline) is not None or any(_polygon_ok(h) is not None for h in holes):
            left.append("buildings with footprints lampcast cannot triangulate")
            continue
        if holes and rings_problem(outline, holes) is not None:
            left.append("multipolygon buildings whose courtyards touch their outline or each other")
            continue
        name = f"building r{area.id}" + (f" part {k}" if len(area.polygons) > 1 else "")
        courtyards = (
            f"; {len(holes)} courtyard{'s' if len(holes) > 1 else ''} (inner rings) left open as holes_m"
            if holes
            else ""
        )
        notes = (
            f"OSM relation {area.id} (multipolygon, building={tags.get('building')}{', ' + label if label else ''}"
            f"{f', outer ring {k} of {len(area.polygons)}' if len(area.polygons) > 1 else ''}); {why}{courtyards}"
        )
        hole_text = f"holes_m = [{', '.join(_pts(h) for h in holes)}]\n" if holes else ""
        texts.append(
            f'[[geometry]]\nname = "{name}"\nkind = "extrusion"\nmaterial = {_q(material)}\n'
            f"height_m = {_n(height)}\noutline_m = {_pts(outline)}\n{hole_text}notes = {_q(notes)}\n"
        )
    return texts, left


def _tree(node) -> str:
    tags = node.tags
    height = parse_metres(tags.get("height"))
    crown = parse_metres(tags.get("diameter_crown"))
    params = {}
    why = []
    if height is not None and 2 <= height <= 60:
        params["trunk_height_m"] = min(height / 3, 30.0)
        params["canopy_shape"] = "ellipsoid"
        params["canopy_height_m"] = min(2 * height / 3, 40.0)
        why.append(f"height {height:g} m: a third trunk, two thirds canopy")
        if crown is None:
            params["canopy_radius_m"] = min(height / 4, 20.0)
            why.append("canopy radius a quarter of the height (common practice, no source)")
    if crown is not None and 0 < crown <= 40:
        params["canopy_radius_m"] = crown / 2
        why.append(f"canopy radius from diameter_crown {crown:g} m")
    if not why:
        why.append("the tree kind's default sizes (no `height` or `diameter_crown` tag)")
    p = ", ".join(f"{k} = {_q(v) if isinstance(v, str) else _n(v)}" for k, v in params.items())
    notes = f"OSM node {node.id}; {'; '.join(why)}"
    return (
        f'[[objects]]\nname = "tree n{node.id}"\nkind = "tree"\nposition_m = [{_n(node.xy_m[0])}, {_n(node.xy_m[1])}]\n'
        + (f"params = {{ {p} }}\n" if p else "")
        + f"notes = {_q(notes)}\n"
    )


def _segments(xy: np.ndarray, max_len: float):
    """(start, end) of each segment of a polyline, split into pieces of at most ``max_len``."""
    for p, q in zip(xy[:-1], xy[1:]):
        length = float(np.hypot(*(q - p)))
        if length < 0.1:
            continue
        n = max(1, math.ceil(length / max_len))
        for k in range(n):
            yield p + (q - p) * (k / n), p + (q - p) * ((k + 1) / n)


def _barrier(way: MapWay, radius_m: float) -> list[str]:
    tags = way.tags
    height = parse_metres(tags.get("height"))
    out = []
    for piece in _clip(way.xy_m, radius_m):
        for p, q in _segments(_dedup(piece), 200.0 if tags["barrier"] == "hedge" else 500.0):
            d = q - p
            length = float(np.hypot(*d))
            heading = math.degrees(math.atan2(d[1], d[0]))
            mid = 0.5 * (p + q)
            name = f"{tags['barrier']} w{way.id} part {len(out) + 1}"
            if tags["barrier"] == "hedge":
                h = height if height is not None and 0 < height <= 10 else D.HEDGE_HEIGHT_M
                why = "from the `height` tag" if h == height else "the default (no usable `height` tag)"
                out.append(
                    f'[[objects]]\nname = {_q(name)}\nkind = "hedge"\nposition_m = [{_n(mid[0])}, {_n(mid[1])}]\n'
                    f"heading_deg = {_n(heading)}\nparams = {{ length_m = {_n(length)}, height_m = {_n(h)}, "
                    f"depth_m = {_n(D.HEDGE_DEPTH_M)} }}\nnotes = {_q(f'OSM way {way.id}; height {h:g} m {why}')}\n"
                )
            else:
                h = height if height is not None and 0 < height <= 30 else D.WALL_HEIGHT_M
                why = "from the `height` tag" if h == height else "the default (no usable `height` tag)"
                n = np.array([-d[1], d[0]]) / length * (D.WALL_THICKNESS_M / 2)
                outline = [p - n, q - n, q + n, p + n]
                out.append(
                    f'[[geometry]]\nname = {_q(name)}\nkind = "extrusion"\nmaterial = "brick"\n'
                    f"height_m = {_n(h)}\noutline_m = {_pts(outline)}\n"
                    f"notes = {_q(f'OSM way {way.id}; height {h:g} m {why}, {D.WALL_THICKNESS_M:g} m thick')}\n"
                )
    return out


@dataclass
class _Road:
    highway: str
    name: str
    ways: list[MapWay]
    ids: list[int]
    xy: np.ndarray


def _road_chains(ways: list[MapWay]) -> list[_Road]:
    """Road ways joined end to end at shared nodes (same name and type), then split where a
    road of a higher class (or an earlier one of the same class) passes through a node."""
    chains = [_Road(w.tags["highway"], _name(w.tags), [w], list(w.node_ids), w.xy_m.copy()) for w in ways]
    merged = True
    while merged:
        merged = False
        ends: dict[tuple, int] = {}
        for i, c in enumerate(chains):
            if c.ids[0] == c.ids[-1]:
                continue
            tags = c.ways[0].tags
            key = (c.highway, c.name or f"w{c.ways[0].id}", *(tags.get(k) for k in _ROAD_TAGS))
            for end in (c.ids[0], c.ids[-1]):
                j = ends.get((key, end))
                if j is None:
                    ends[(key, end)] = i
                    continue
                a, b = chains[j], c
                if a.ids[-1] != end:
                    a.ids.reverse()
                    a.xy = a.xy[::-1]
                if b.ids[0] != end:
                    b.ids.reverse()
                    b.xy = b.xy[::-1]
                chains[j] = _Road(a.highway, a.name, a.ways + b.ways, a.ids + b.ids[1:], np.vstack([a.xy, b.xy[1:]]))
                del chains[i]
                merged = True
                break
            if merged:
                break
    rank = {h: k for k, h in enumerate(ROAD_CLASSES)}
    order = sorted(range(len(chains)), key=lambda i: (rank.get(chains[i].highway, len(rank)), i))
    through: set[int] = set()  # nodes some higher road passes through
    out = []
    for i in order:
        c = chains[i]
        cuts = [k for k in range(1, len(c.ids) - 1) if c.ids[k] in through]
        bounds = [0, *cuts, len(c.ids) - 1]
        for a, b in zip(bounds[:-1], bounds[1:]):
            out.append(_Road(c.highway, c.name, c.ways, c.ids[a : b + 1], c.xy[a : b + 1]))
        through.update(c.ids[1:-1])
    return out


def _road_text(road: _Road, piece: np.ndarray, name: str) -> str:
    tags = road.ways[0].tags
    why = []
    width = parse_metres(tags.get("width"))
    lanes_tag = parse_metres(tags.get("lanes"))
    lanes = int(lanes_tag) if lanes_tag is not None and 1 <= lanes_tag <= 8 else D.ROAD_LANES.get(road.highway, 2)
    if width is not None and 1 <= width <= 60:
        why.append(f"carriageway {width:g} m from the `width` tag")
    elif lanes_tag is not None and 1 <= lanes_tag <= 8:
        width = lanes * D.LANE_WIDTH_M
        why.append(f"carriageway {width:g} m = lanes {lanes} x {D.LANE_WIDTH_M:g} m (no `width` tag)")
    else:
        width = D.ROAD_WIDTHS_M.get(road.highway, D.ROAD_WIDTHS_M["road"])
        why.append(f"carriageway {width:g} m: the default for highway={road.highway} (no `width` or `lanes` tag)")
    if lanes_tag is None:
        why.append(f"{lanes} lane{'s' if lanes > 1 else ''} (default)")
    sidewalk = tags.get("sidewalk")
    footway = 0.0 if road.highway in ("service", "motorway", "trunk") else D.FOOTWAY_WIDTH_M
    sides = {"left": footway, "right": footway}
    if sidewalk in ("no", "none", "separate"):
        sides = {"left": 0.0, "right": 0.0}
    elif sidewalk in ("left", "right"):
        sides = {s: (D.FOOTWAY_WIDTH_M if s == sidewalk else 0.0) for s in sides}
    elif sidewalk == "both":
        sides = {"left": D.FOOTWAY_WIDTH_M, "right": D.FOOTWAY_WIDTH_M}
    for s in ("left", "right"):
        v = tags.get(f"sidewalk:{s}")
        if v in ("no", "separate"):
            sides[s] = 0.0
        elif v == "yes":
            sides[s] = D.FOOTWAY_WIDTH_M
    why.append(
        f"footways {sides['left']:g} m left, {sides['right']:g} m right"
        + (f" (sidewalk={sidewalk})" if sidewalk else " (default: no `sidewalk` tag)")
    )
    ways = ", ".join(f"w{w.id}" for w in road.ways[:8]) + (" …" if len(road.ways) > 8 else "")
    head = _comment(f"highway={road.highway}{' ' + road.name if road.name else ''} (OSM {ways}): {'; '.join(why)}")
    side_text = {s: f"{{ footway_width_m = {_n(w)}, frontage_depth_m = 0.0 }}" for s, w in sides.items()}
    return (
        f"{head}\n[[roads]]\nname = {_q(name)}\npoints_m = {_pts(piece)}\ncarriageway_width_m = {_n(width)}\n"
        f"lanes = {lanes}\ncentre_line = {_q('dashed' if lanes >= 2 else 'none')}\n"
        f"left = {side_text['left']}\nright = {side_text['right']}\n"
    )


def _path_text(way: MapWay, piece: np.ndarray, k: int) -> str:
    width = parse_metres(way.tags.get("width"))
    why = "from the `width` tag" if width is not None and 0.3 <= width <= 20 else "the default (no usable `width` tag)"
    if why.startswith("the default"):
        width = D.PATH_WIDTH_M
    notes = f"OSM way {way.id} (highway={way.tags['highway']}); width {width:g} m {why}"
    return (
        f'[[markings]]\nname = "path w{way.id} part {k}"\nkind = "line"\nmaterial = {_q(D.PATH_MATERIAL)}\n'
        f"width_m = {_n(width)}\npoints_m = {_pts(piece)}\nnotes = {_q(notes)}\n"
    )


def _nearest_on(polylines: list[np.ndarray], p: np.ndarray) -> tuple[np.ndarray, np.ndarray] | None:
    """The nearest point of the polylines to ``p`` and the unit direction of that segment."""
    best = None
    for xy in polylines:
        for a, b in zip(xy[:-1], xy[1:]):
            d = b - a
            dd = float(d @ d)
            if dd == 0:
                continue
            t = min(max(float((p - a) @ d) / dd, 0.0), 1.0)
            q = a + t * d
            dist = float(np.hypot(*(p - q)))
            if best is None or dist < best[0]:
                best = (dist, q, d / math.sqrt(dd))
    return None if best is None else (best[1], best[2])


def _lamp_text(node, roads: list[np.ndarray]) -> str:
    tags = node.tags
    p = np.array(node.xy_m)
    h = parse_metres(tags.get("height"))
    height = h if h is not None and 2 <= h <= 30 else D.LAMP_HEIGHT_M
    kind = (tags.get("lamp_type") or tags.get("light:method") or "").strip().lower()
    rotation = 0.0
    near = _nearest_on(roads, p)
    if near is not None and float(np.hypot(*(near[0] - p))) > 1e-3:
        toward = near[0] - p
        rotation = math.degrees(math.atan2(toward[1], toward[0])) - 90.0
    name = f"lamp n{node.id}"
    notes = [
        f"OSM node {node.id}",
        f"mounting height {height:g} m" + (" (height tag)" if h == height else " (default)"),
    ]
    if kind:
        notes.append(f"lamp_type/light:method {kind!r}")
    return (
        _comment("; ".join(notes))
        + f'\n[[luminaires]]\nname = {_q(name)}\ngroup = "existing"\nposition_m = [{_n(p[0])}, {_n(p[1])}, {_n(height)}]\n'
        f"rotation_deg = {_n(rotation)}\nlamp = {_q(D.LAMPS_BY_TAG.get(kind, D.DEFAULT_LAMP))}\n"
        f"photometry = {_q(D.LAMP_PHOTOMETRY)}\nlumens = {_n(D.LAMP_LUMENS)}\n"
    )


# --- the scene ------------------------------------------------------------------------------------


def _views(roads: list[tuple[str, np.ndarray, float]], radius_m: float) -> str:
    """A pedestrian view on the road nearest the centre, looking along it, and an overview."""
    out = []
    best = None
    for _, xy, width in roads:
        near = _nearest_on([xy], np.zeros(2))
        if near is not None and (best is None or np.hypot(*near[0]) < np.hypot(*best[0][0])):
            best = (near, width)
    if best is not None:
        (q, d), width = best
        left = np.array([-d[1], d[0]])
        eye = q + left * (width / 2 + 1.0)
        target = eye + d * 30.0
        out.append(
            f'[[views]]\nname = "street"\nkind = "pedestrian"\nposition_m = [{_n(eye[0])}, {_n(eye[1])}]\n'
            f"target_m = [{_n(target[0])}, {_n(target[1])}, 1.5]\nhfov_deg = 70.0\nresolution = [960, 540]\n"
        )
    r = min(radius_m, 60.0)
    out.append(
        f'[[views]]\nname = "overview"\nkind = "aerial"\nposition_m = [{_n(-r)}, {_n(-r)}, {_n(max(30.0, r))}]\n'
        f"target_m = [0.0, 0.0, 0.0]\nhfov_deg = 70.0\nresolution = [960, 540]\n"
    )
    return "\n".join(out)


def _scene_text(
    extract: MapExtract, src: str, lat: float, lon: float, radius_m: float, name: str, attribution: str, drop: dict
) -> tuple[str, dict[str, int], dict[str, int]]:
    left_out = dict(extract.left_out)
    counts = {"buildings": 0, "trees": 0, "hedges": 0, "walls": 0, "roads": 0, "paths": 0, "lamps": 0}

    def leave(reason: str) -> None:
        left_out[reason] = left_out.get(reason, 0) + 1

    blocks: list[str] = []
    road_ways, path_ways = [], []
    for way in extract.ways:
        tags = way.tags
        if tags.get("building", "no") != "no":
            text, why = _building(way, radius_m)
            if text is None:
                leave(why)
            else:
                blocks.append(text)
                counts["buildings"] += 1
        elif tags.get("barrier") in ("hedge", "wall"):
            texts = _barrier(way, radius_m)
            blocks += texts
            counts["hedges" if tags["barrier"] == "hedge" else "walls"] += len(texts)
        elif tags.get("highway") in D.ROAD_WIDTHS_M or tags.get("highway", "").endswith("_link"):
            if tags.get("area") == "yes":
                leave("highway areas")
                continue
            hw = tags["highway"].removesuffix("_link")
            road_ways.append(MapWay(way.id, way.node_ids, way.xy_m, {**tags, "highway": hw}))
        elif tags.get("highway") in D.PATH_TYPES:
            path_ways.append(way)
        elif "highway" in tags:
            leave(f"highway={tags['highway'][:30]} ways")
    for area in extract.areas:
        texts, left = _area_buildings(area, radius_m)
        blocks += texts
        counts["buildings"] += len(texts)
        for reason in left:
            leave(reason)
    road_blocks, road_lines = [], []
    names: dict[str, int] = {}
    for road in _road_chains(road_ways):
        for piece in _clip(road.xy, radius_m):
            piece = _simplify(_dedup(piece), SIMPLIFY_TOLERANCE_M)
            if len(piece) < 2 or float(np.sum(np.hypot(*np.diff(piece, axis=0).T))) < 1.0:
                continue
            base = road.name or f"{road.highway} w{road.ways[0].id}"
            names[base] = names.get(base, 0) + 1
            rname = base if names[base] == 1 else f"{base} ({names[base]})"
            if rname in drop:
                leave("roads the road builder could not draw")
                road_blocks.append(_comment(f"left out: {rname!r}: {drop[rname]}"))
                continue
            text = _road_text(road, piece, rname)
            width = float(re.search(r"carriageway_width_m = ([0-9.]+)", text).group(1))
            road_blocks.append(text)
            road_lines.append((rname, piece, width))
            counts["roads"] += 1
    for way in path_ways:
        for k, piece in enumerate(_clip(way.xy_m, radius_m), start=1):
            piece = _dedup(piece)
            if len(piece) >= 2:
                blocks.append(_path_text(way, piece, k))
                counts["paths"] += 1
    lamp_blocks = []
    for node in extract.nodes:
        if node.tags.get("natural") == "tree":
            blocks.append(_tree(node))
            counts["trees"] += 1
        elif node.tags.get("highway") == "street_lamp":
            lamp_blocks.append(_lamp_text(node, [xy for _, xy, _ in road_lines]))
            counts["lamps"] += 1

    error_mm = 1000 * max_position_error_m(radius_m)
    description = (
        f"Imported by lampcast import-map from {Path(src).name} around {lat:.6f}, {lon:.6f} (radius {radius_m:g} m)."
    )
    notes = (
        "x east, y north of the centre, metres: the tangent plane of the WGS84 ellipsoid at the centre "
        f"(positions within {error_mm:.2g} mm over the radius). Defaults used for missing tags are in each "
        "object's notes and in the comments above roads and lamps."
    )
    if left_out:
        notes += " Left out: " + "; ".join(f"{n} {k}" for k, n in sorted(left_out.items())) + "."
    head = [
        _comment(
            f"{name}: imported from the map extract {Path(src).name} by lampcast import-map.\n"
            "Edit freely: heights, widths and lamps below are from the map's tags where it gives them, "
            "else the stated defaults."
        ),
        f"[scene]\nname = {_q(name)}\ndescription = {_q(description)}\nnotes = {_q(notes)}\nattribution = {_q(attribution)}\n",
    ]
    size = 2 * radius_m + 20.0
    ground = (
        _comment("The ground around the roads, its top 1 cm below the carriageway.")
        + f'\n[[geometry]]\nname = "ground"\nkind = "box"\nmaterial = {_q(D.GROUND_MATERIAL)}\n'
        f"size_m = [{_n(size)}, {_n(size)}, 0.05]\nposition_m = [0.0, 0.0, -0.06]\n"
    )
    parts = [*head, ground, *road_blocks, *blocks]
    if lamp_blocks:
        parts.append(
            _comment(
                "The existing street lamps: the map gives their places, not their lamps or optics. The lamp, "
                "photometry and lumens below are placeholders: assign the real ones in [setups.existing]."
            )
        )
        parts += lamp_blocks
        parts.append(
            _comment(
                "PLACEHOLDER: the existing lamps' lamp, photometry and lumens are not known from the map. "
                "Assign them here before comparing (e.g. lampcast compare SCENE --before existing --after LAMP)."
            )
            + '\n[setups.existing]\ndescription = "the existing street lamps (placeholder: assign the real lamp)"\n'
            f"[setups.existing.groups.existing]\nlamp = {_q(D.DEFAULT_LAMP)}\nphotometry = {_q(D.LAMP_PHOTOMETRY)}\n"
            f"lumens = {_n(D.LAMP_LUMENS)}\n"
        )
    parts.append(_views(road_lines, radius_m))
    return "\n".join(parts) + "\n", counts, left_out


def import_map(
    extract_path: str | os.PathLike,
    centre: tuple[float, float],
    radius_m: float,
    out: str | os.PathLike,
    *,
    name: str | None = None,
    attribution: str | None = None,
) -> ImportResult:
    """Write the scene of the map around ``centre`` (lat, lon in degrees) within ``radius_m`` to
    ``out`` (atomically); the written scene loads and compiles (roads the road builder cannot
    draw are left out with a comment). InputError for a bad extract or argument."""
    from render.fileio import atomic_write_text

    attribution = D.ATTRIBUTION if attribution is None else attribution
    src = os.fspath(extract_path)
    if not (math.isfinite(radius_m) and 1.0 <= radius_m <= MAX_RADIUS_M):
        raise input_error("--radius-m", "", f"expected 1 to {MAX_RADIUS_M:g} m, got {radius_m:g}")
    lat, lon = centre
    projection = LocalProjection(lat, lon)
    extract = read_extract(src, projection, radius_m)
    title = name or Path(src).name.split(".")[0] or "imported street"
    drop: dict[str, str] = {}
    out_path = Path(out)
    for _ in range(50):
        text, counts, left_out = _scene_text(extract, src, lat, lon, radius_m, title, attribution, drop)
        problem = _road_problem(text, out_path)
        if problem is None:
            break
        drop[problem[0]] = problem[1]
    else:
        raise input_error(src, "", "the imported roads could not be drawn; see the roads in the map")
    atomic_write_text(out_path, text)
    return ImportResult(out_path, counts, left_out)


def _road_problem(text: str, out_path: Path) -> tuple[str, str] | None:
    """The first road of the scene ``text`` that does not load or compile: (name, why); None
    when the scene is fine. Any other problem is a bug of the importer and raised."""
    import tomllib

    from render.geometry.build import compile_scene
    from render.scene.loader import load_scene_document

    doc = tomllib.loads(text)
    try:
        compile_scene(load_scene_document(doc, out_path))
    except InputError as err:
        for p in err.problems:
            m = re.match(r"roads\[(\d+)\]", p.where or "")
            if m:
                return doc["roads"][int(m.group(1))]["name"], p.message
        raise
    return None
