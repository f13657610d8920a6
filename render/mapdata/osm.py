"""Reading an OpenStreetMap extract (``.osm`` XML or ``.osm.pbf``) around a centre, with osmium.

:func:`read_extract` keeps what ``lampcast import-map`` draws, projected to local metres
(:class:`~render.mapdata.projection.LocalProjection`): the nodes tagged ``natural=tree`` or
``highway=street_lamp`` and the ways tagged ``building``, ``highway``, ``barrier=hedge`` or
``barrier=wall``, with their node ids (roads are joined at shared nodes), and the buildings
mapped as multipolygon relations (``type=multipolygon`` with ``building``), assembled by
osmium's area handler into outer rings and their inner rings (courtyards; :class:`MapArea`).
Other building relations (``type=building``, which group parts mapped elsewhere) are counted,
not drawn.

The file is checked as a regular file within the size limit of its kind ("map extract",
:mod:`render.limits`) before osmium opens it, and at most :data:`render.limits.MAX_MAP_FEATURES`
features are kept; osmium's own errors (a malformed file, an unknown format) become an
:class:`~render.errors.InputError` naming the file.

References
----------
- OpenStreetMap wiki, "OSM XML" and "PBF Format" (the two file formats), and the tag pages
  ``Key:building``, ``Key:height``, ``Key:building:levels``, ``Key:highway``, ``Key:width``,
  ``Key:lanes``, ``Key:sidewalk``, ``Tag:natural=tree``, ``Tag:barrier=hedge``,
  ``Tag:barrier=wall``, ``Tag:highway=street_lamp``.
- pyosmium (the Python bindings of libosmium), ``osmium.FileProcessor`` with node locations
  and areas (libosmium's multipolygon assembler: rings from the member ways, inner rings
  assigned to the outer ring holding them).
- OpenStreetMap wiki, ``Relation:multipolygon`` (outer and inner roles).
"""

from __future__ import annotations

import os
import stat
from dataclasses import dataclass, field

import numpy as np

from render import limits
from render.errors import input_error
from render.mapdata.projection import LocalProjection

__all__ = ["KIND", "MapArea", "MapExtract", "MapNode", "MapWay", "read_extract"]

#: The kind of file in messages and in :data:`render.limits.FILE_SIZE_LIMITS_BYTES`.
KIND = "map extract"
_SUFFIXES = (".osm", ".osm.pbf", ".pbf", ".osm.bz2", ".osm.gz")


@dataclass(frozen=True)
class MapNode:
    """A tagged node: its OSM id, position (m, east and north of the centre) and tags."""

    id: int
    xy_m: tuple[float, float]
    tags: dict[str, str]


@dataclass(frozen=True)
class MapWay:
    """A tagged way: its OSM id, node ids, positions (m) and tags."""

    id: int
    node_ids: tuple[int, ...]
    xy_m: np.ndarray  # (n, 2)
    tags: dict[str, str]

    @property
    def closed(self) -> bool:
        return len(self.node_ids) >= 4 and self.node_ids[0] == self.node_ids[-1]


@dataclass(frozen=True)
class MapArea:
    """A building mapped as a multipolygon relation, assembled by osmium: its relation id,
    tags and each outer ring (m) with the inner rings (courtyards) that lie in it."""

    id: int
    polygons: tuple[tuple[np.ndarray, tuple[np.ndarray, ...]], ...]  # (outer (n, 2), inners)
    tags: dict[str, str]


@dataclass
class MapExtract:
    """What :func:`read_extract` keeps, and what it left out (counts by reason)."""

    nodes: list[MapNode] = field(default_factory=list)
    ways: list[MapWay] = field(default_factory=list)
    areas: list[MapArea] = field(default_factory=list)
    left_out: dict[str, int] = field(default_factory=dict)

    def leave_out(self, reason: str) -> None:
        self.left_out[reason] = self.left_out.get(reason, 0) + 1


def _wanted_node(tags: dict[str, str]) -> bool:
    return tags.get("natural") == "tree" or tags.get("highway") == "street_lamp"


def _wanted_way(tags: dict[str, str]) -> bool:
    return tags.get("building", "no") != "no" or "highway" in tags or tags.get("barrier") in ("hedge", "wall")


def _check_file(path: str) -> None:
    if "\x00" in path:
        raise input_error(repr(path), "", f"cannot read the {KIND}: the file name contains a NUL byte")
    if not path.lower().endswith(_SUFFIXES):
        raise input_error(path, "", f"not a map extract lampcast reads; expected one of {', '.join(_SUFFIXES)}")
    limit = limits.file_size_limit_bytes(KIND)
    try:
        info = os.stat(path)
    except FileNotFoundError:
        raise input_error(path, "", f"cannot read the {KIND}: file not found") from None
    except (OSError, ValueError) as err:
        raise input_error(path, "", f"cannot read the {KIND}: {getattr(err, 'strerror', None) or err}") from None
    if not stat.S_ISREG(info.st_mode):
        raise input_error(path, "", f"cannot read the {KIND}: not a regular file")
    if info.st_size > limit:
        raise input_error(path, "", f"the {KIND} is {info.st_size:,} bytes; lampcast reads at most {limit:,}")


def read_extract(path: str | os.PathLike, projection: LocalProjection, radius_m: float) -> MapExtract:
    """The tagged nodes inside the circle of ``radius_m`` about the projection's centre, the
    tagged ways with at least one node inside it (whole, for clipping later) and the
    multipolygon buildings with an outer ring reaching into it, projected. osmium assembles
    multipolygons only from an extract sorted by id (as extracts are written); an unsorted one
    is read without them, each such building counted as left out with the reason."""
    try:
        import osmium
    except ImportError:
        raise input_error(
            path, "", 'reading map extracts needs osmium: pip install "lampcast[map]" (or pip install osmium)'
        ) from None
    src = os.fspath(path)
    _check_file(src)
    try:
        return _scan(osmium, src, projection, radius_m, with_areas=True)
    except _Unsorted:
        return _scan(osmium, src, projection, radius_m, with_areas=False)


class _Unsorted(Exception):
    """osmium's area assembler met objects out of id order."""


def _scan(osmium, src: str, projection: LocalProjection, radius_m: float, *, with_areas: bool) -> MapExtract:
    """One read of the extract (:func:`read_extract`), with multipolygon areas or without."""
    south, west, north, east = projection.bounding_box_deg(radius_m)
    out = MapExtract()
    kept = 0

    def inside_box(lat: float, lon: float) -> bool:
        return south <= lat <= north and west <= lon <= east

    def ring_xy(ring) -> np.ndarray | None:
        pts = [(n.location.lat, n.location.lon) for n in ring if n.location.valid()]
        if len(pts) != len(ring) or len(pts) < 4:
            return None
        lat, lon = zip(*pts)
        return projection.xy_m(list(lat), list(lon))

    def building_relation(tags: dict[str, str]) -> bool:
        return tags.get("building", "no") != "no" and tags.get("type") == "multipolygon"

    try:
        processor = osmium.FileProcessor(src).with_locations()
        if with_areas:
            processor = processor.with_areas(osmium.filter.TagFilter(("type", "multipolygon")))
        for obj in processor:
            if obj.is_area():
                tags = dict(obj.tags)
                if obj.from_way() or tags.get("building", "no") == "no":
                    continue  # buildings drawn as closed ways are read as ways
                polygons = []
                for outer in obj.outer_rings():
                    xy = ring_xy(outer)
                    inners = [ring_xy(inner) for inner in obj.inner_rings(outer)]
                    if xy is None or any(i is None for i in inners):
                        polygons = []
                        break
                    polygons.append((xy, tuple(inners)))
                if not polygons:
                    out.leave_out("multipolygon buildings with rings missing from the extract")
                    continue
                near = any(np.any(np.hypot(xy[:, 0], xy[:, 1]) <= radius_m) for xy, _ in polygons)
                if near:
                    out.areas.append(MapArea(int(obj.orig_id()), tuple(polygons), tags))
                    kept += 1
                    limits.check_count(kept + len(out.nodes), limits.MAX_MAP_FEATURES, src, "", "the map features")
                continue
            if obj.is_node():
                tags = dict(obj.tags)
                if not tags or not _wanted_node(tags) or not obj.location.valid():
                    continue
                lat, lon = obj.location.lat, obj.location.lon
                if not inside_box(lat, lon):
                    continue
                xy = projection.xy_m(lat, lon)
                if float(np.hypot(*xy)) > radius_m:
                    continue
                out.nodes.append(MapNode(int(obj.id), (float(xy[0]), float(xy[1])), tags))
            elif obj.is_way():
                tags = dict(obj.tags)
                if not _wanted_way(tags):
                    continue
                refs, lats, lons = [], [], []
                for n in obj.nodes:
                    if not n.location.valid():
                        break
                    refs.append(int(n.ref))
                    lats.append(n.location.lat)
                    lons.append(n.location.lon)
                else:
                    if len(refs) < 2 or not any(inside_box(a, b) for a, b in zip(lats, lons)):
                        continue
                    xy = projection.xy_m(lats, lons)
                    if not np.any(np.hypot(xy[:, 0], xy[:, 1]) <= radius_m):
                        continue
                    out.ways.append(MapWay(int(obj.id), tuple(refs), xy, tags))
                    kept += 1
                    limits.check_count(kept + len(out.nodes), limits.MAX_MAP_FEATURES, src, "", "the map features")
                    continue
                out.leave_out("ways with nodes missing from the extract")
                continue
            elif obj.is_relation():
                tags = dict(obj.tags)
                if tags.get("type") == "building" or (
                    tags.get("building", "no") != "no" and not building_relation(tags)
                ):
                    out.leave_out("buildings mapped as relations other than multipolygons")
                elif building_relation(tags) and not with_areas:
                    out.leave_out(
                        "multipolygon buildings in an extract not sorted by id (sort it, e.g. osmium sort, to import them)"
                    )
                continue
            else:
                continue
            limits.check_count(kept + len(out.nodes), limits.MAX_MAP_FEATURES, src, "", "the map features")
    except (RuntimeError, ValueError, osmium.InvalidLocationError) as err:
        if with_areas and "out of order" in str(err):
            raise _Unsorted from None
        # libosmium reports a broken file (bad XML, a malformed coordinate or attribute) this way
        raise input_error(src, "", f"cannot read the {KIND}: {str(err)[:200]}") from None
    return out
