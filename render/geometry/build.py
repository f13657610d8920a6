"""Compile a checked :class:`~render.scene.model.Scene` into one triangle soup.

Everything becomes triangles with a material index and an object index
(:class:`~render.geometry.mesh.TriangleMesh`): the street builder's surfaces (carriageway, kerbs,
verges, footways, front gardens, centre line), the roads (:mod:`render.geometry.roads`),
building fronts (along the street, or along a road: built in the road's own frame and bent
along its centreline), parametric street objects, free geometry, markings and luminaire
columns. Object indices follow the scene's own names, so later
analyses can speak of "the blue car".
"""

from __future__ import annotations

from dataclasses import dataclass
from functools import cache
from typing import TYPE_CHECKING

import numpy as np

from render import limits
from render.errors import input_error
from render.geometry.mesh import TriangleMesh, flat_normals
from render.scene.model import Frontage, Marking, Road, Scene, Street, StreetObject

if TYPE_CHECKING:
    from render.geometry.roads import Centreline

__all__ = ["MARKING_LIFT_M", "DEFAULT_SLOT_MATERIALS", "ObjectInfo", "compile_scene", "object_slots"]

#: Height of markings above the surface under them, m (keeps them the closest hit).
MARKING_LIFT_M = 0.002

#: Material used for a slot that the scene does not assign (slot name -> material id).
DEFAULT_SLOT_MATERIALS: dict[str, str] = {
    "body": "object-grey",
    "glass": "glass-clear",
    "tyre": "rubber-black",
    "lights": "object-white",
    "lid": "object-green",
    "wheels": "rubber-black",
    "trunk": "bark",
    "canopy": "foliage",
    "foliage": "foliage",
    "post": "metal-painted-dark",
    "band": "object-white",
    "frame": "metal-painted-dark",
    "roof": "roof-tile",
    "bench": "wood",
    "pole": "metal-galvanised",
    "panel": "object-white",
    "back": "metal-galvanised",
    "legs": "fabric-dark",
    "torso": "object-blue",
    "arms": "object-blue",
    "head": "skin-light",
    "arm": "metal-galvanised",
    "housing": "metal-painted-dark",
    "facade": "brick",
    "window": "glass-clear",
    "door": "wood",
    "fascia": "object-green",
    "rim": "metal-galvanised",
    "trim": "object-black",
    "tail_lights": "object-red",
    "lens": "glass-clear",
    "*": "concrete",
}


@dataclass
class ObjectInfo:
    """What the compiled scene knows of each object index."""

    name: str
    kind: str
    inspect: bool
    where: str
    #: Material of the object's main surface (its colour in the colour analysis): the
    #: material of the kind's ``main_slot`` or the scene's ``colour_slot``; for free geometry
    #: the material covering most of its area.
    main_material: str | None = None


def _quad(p0, p1, p2, p3) -> np.ndarray:
    """Two counter-clockwise triangles of the quad p0 p1 p2 p3 (given anticlockwise)."""
    return np.array([[p0, p1, p2], [p0, p2, p3]], dtype=np.float64)


def _ground_rect(x0, x1, y0, y1, z) -> np.ndarray:
    """Up-facing rectangle [x0, x1] × [y0, y1] at height z."""
    return _quad((x0, y0, z), (x1, y0, z), (x1, y1, z), (x0, y1, z))


def _wall_y(x0, x1, y, z0, z1, facing: float) -> np.ndarray:
    """Vertical rectangle in the plane y = const, facing +y (facing > 0) or -y."""
    if facing > 0:
        return _quad((x1, y, z0), (x0, y, z0), (x0, y, z1), (x1, y, z1))
    return _quad((x0, y, z0), (x1, y, z0), (x1, y, z1), (x0, y, z1))


def _slot_material(materials: dict[str, str], slot: str) -> str:
    """The material of ``slot``: the scene's entry, its ``*`` entry, or the default."""
    return materials.get(slot) or materials.get("*") or DEFAULT_SLOT_MATERIALS.get(slot, DEFAULT_SLOT_MATERIALS["*"])


class _Builder:
    """Accumulates triangles with material and object indices."""

    def __init__(self):
        self.tris: list[np.ndarray] = []
        self.normals: list[np.ndarray] = []
        self.mat: list[np.ndarray] = []
        self.obj: list[np.ndarray] = []
        self.material_names: list[str] = []
        #: Object index of the street builder's carriageway (-1: no street).
        self.carriageway_object = -1
        #: Object indices of every carriageway: the street's and each road's.
        self.carriageway_objects: list[int] = []
        #: The carriageway object of the street ("street") and of each road (its key path).
        self.carriageway_of: dict[str, int] = {}
        self.objects: list[ObjectInfo] = []
        #: Window panels (slot ``window``) as (first triangle, triangle count, object index),
        #: for lit windows (render.light.indirect.windows).
        self.window_parts: list[tuple[int, int, int]] = []
        self._n_tris = 0

    def material_index(self, material: str) -> int:
        if material not in self.material_names:
            self.material_names.append(material)
        return self.material_names.index(material)

    def new_object(self, name: str, kind: str, inspect: bool = False, where: str = "") -> int:
        self.objects.append(ObjectInfo(name, kind, inspect, where))
        return len(self.objects) - 1

    def add(self, triangles, material: str, obj: int, normals=None) -> None:
        triangles = np.asarray(triangles, dtype=np.float64).reshape(-1, 3, 3)
        if triangles.shape[0] == 0:
            return
        self.tris.append(triangles)
        self._n_tris += triangles.shape[0]
        self.normals.append(
            flat_normals(triangles) if normals is None else np.asarray(normals, dtype=np.float64).reshape(-1, 3, 3)
        )
        self.mat.append(np.full(triangles.shape[0], self.material_index(material), np.int32))
        self.obj.append(np.full(triangles.shape[0], obj, np.int32))

    def add_parts(self, parts, materials: dict[str, str], obj: int, main_slot: str | None = None) -> None:
        """Add ``parts`` with their slots' materials; record the object's main material (that
        of ``main_slot``, or without one the material covering most area)."""
        area: dict[str, float] = {}
        for part in parts:
            material = _slot_material(materials, part.slot)
            first = self._n_tris
            self.add(part.triangles_m, material, obj, part.normals)
            if part.slot == "window" and self._n_tris > first:
                self.window_parts.append((first, self._n_tris - first, obj))
            t = np.asarray(part.triangles_m, dtype=np.float64).reshape(-1, 3, 3)
            a = 0.5 * np.linalg.norm(np.cross(t[:, 1] - t[:, 0], t[:, 2] - t[:, 0]), axis=1).sum()
            area[material] = area.get(material, 0.0) + float(a)
        info = self.objects[obj]
        if main_slot is not None:
            info.main_material = _slot_material(materials, main_slot)
        elif area and info.main_material is None:
            info.main_material = max(sorted(area), key=lambda m: area[m])

    def mesh(self) -> TriangleMesh:
        if not self.tris:
            empty = np.zeros((0, 3, 3))
            mesh = TriangleMesh(empty, empty, np.zeros(0, np.int32), np.zeros(0, np.int32), self.material_names, [])
        else:
            mesh = TriangleMesh(
                np.concatenate(self.tris),
                np.concatenate(self.normals),
                np.concatenate(self.mat),
                np.concatenate(self.obj),
                list(self.material_names),
                [o.name for o in self.objects],
            )
        mesh.objects = list(self.objects)  # type: ignore[attr-defined]
        mesh.window_parts = list(self.window_parts)  # type: ignore[attr-defined]
        # The carriageway's own triangles (not other surfaces of its material), for the r-table
        # shading of images (render.light.rtable).
        mesh.carriageway_object = self.carriageway_object  # type: ignore[attr-defined]
        mesh.carriageway_objects = tuple(self.carriageway_objects)  # type: ignore[attr-defined]
        mesh.carriageway_of = dict(self.carriageway_of)  # type: ignore[attr-defined]
        return mesh


def _street(b: _Builder, street: Street) -> None:
    L = street.length_m
    half = 0.5 * street.carriageway_width_m
    kh = street.kerb_height_m
    carriageway = b.new_object("carriageway", "street")
    b.carriageway_object = carriageway
    b.carriageway_objects.append(carriageway)
    b.carriageway_of["street"] = carriageway
    b.add(_ground_rect(0.0, L, -half, half, 0.0), street.carriageway_material, carriageway)
    for side in ("left", "right"):
        sign = 1.0 if side == "left" else -1.0
        s = street.side(side)
        kerb = b.new_object(f"kerb {side}", "street")
        if kh > 0:  # no kerb face for a flush kerb (it would have zero area)
            b.add(_wall_y(0.0, L, sign * half, 0.0, kh, -sign), street.kerb_material, kerb)
        y = half
        bands = [
            (street.kerb_width_m, street.kerb_material, kerb, None),
            (s.verge_width_m, s.verge_material, None, f"verge {side}"),
            (s.footway_width_m, s.footway_material, None, f"footway {side}"),
            (s.frontage_depth_m, s.frontage_material, None, f"front gardens {side}"),
        ]
        for n_band, (width, material, obj, name) in enumerate(bands):
            if width <= 0:
                continue
            if n_band == len(bands) - 1:
                # Run the last band 0.1 m under the building line so that fronts standing on it
                # (their walls sit a few cm behind it) leave no gap to the sky.
                width += 0.1
            if obj is None:
                obj = b.new_object(name, "street")
            y0, y1 = sorted((sign * y, sign * (y + width)))
            b.add(_ground_rect(0.0, L, y0, y1, kh), material, obj)
            y += width
    if street.centre_line != "none":
        line = b.new_object("centre line", "marking")
        w = 0.1  # common practice, no source
        if street.centre_line == "solid":
            b.add(_ground_rect(0.0, L, -w / 2, w / 2, MARKING_LIFT_M), street.line_material, line)
        else:
            dash, gap = 3.0, 6.0  # common practice for a residential centre line, no source
            x = 1.0
            while x < L:
                b.add(_ground_rect(x, min(x + dash, L), -w / 2, w / 2, MARKING_LIFT_M), street.line_material, line)
                x += dash + gap


def _placed(parts, position, heading_deg):
    from render.geometry.shapes import transform_parts

    return transform_parts(parts, position, heading_deg)


def _frontage(
    b: _Builder, f: Frontage, street: Street | None, source: str, along: tuple[Road, Centreline] | None = None
) -> None:
    """A frontage's fronts behind the building line of ``street``, or with ``along`` (a road
    and its centreline, ``street`` its cross-section) built in the road's own frame and bent
    along it (:func:`render.geometry.roads.bend_along`)."""
    from render.geometry.objects import house_front, shop_front

    sign = 1.0 if f.side == "left" else -1.0
    building_y = street.building_line_y(f.side) if street is not None else 0.0
    z = street.kerb_height_m if street is not None else 0.0
    # Fronts are built centred on their origin with the facade toward local +x; turn them to
    # face the carriageway and stand them behind the building line.
    heading = -90.0 if f.side == "left" else 90.0
    width = f.length_m / f.units
    from render.geometry.objects import OBJECT_BUILDERS

    obj = b.new_object(f.tag.name, f.kind + " frontage", f.tag.inspect, f.where)
    builder = shop_front if f.kind == "shop" else house_front
    main_slot = OBJECT_BUILDERS["shop_front" if f.kind == "shop" else "house_front"].main_slot
    for k in range(f.units):
        x_mid = f.start_m + (k + 0.5) * width
        try:
            parts = builder(width_m=width, height_m=f.height_m, depth_m=f.depth_m)
        except ValueError as err:
            raise input_error(source, f.where, f"cannot build the {f.kind} fronts: {err}") from None
        centre_y = building_y + sign * 0.5 * f.depth_m
        placed = _placed(parts, (x_mid, centre_y, z), heading)
        if along is not None:
            from render.geometry.roads import bend_along
            from render.geometry.shapes import Part

            placed = [Part(*bend_along(along[1], p.triangles_m, _vertex_normals(p)), p.slot) for p in placed]
        b.add_parts(placed, f.materials, obj, main_slot)


def _vertex_normals(part) -> np.ndarray:
    """(n, 3, 3) normals of a part's vertices (its own, or each triangle's flat normal)."""
    if part.normals is not None:
        return np.asarray(part.normals, np.float64).reshape(-1, 3, 3)
    return flat_normals(np.asarray(part.triangles_m, np.float64).reshape(-1, 3, 3))


def _road_frontage(b: _Builder, f: Frontage, roads: dict[str, Road], cuts: dict[str, dict], source: str) -> None:
    """A frontage along a road (``frontages.road``): no part of it where the road's side bands
    are cut back for a junction; the back of its buildings must not fold round a bend."""
    from render.geometry.roads import road_centreline

    road = roads[f.road]
    cl = road_centreline(road)
    a, c = f.start_m, f.start_m + f.length_m
    for lo, hi in cuts.get(road.where, {}).get(f.side, []):
        if a < hi - 1e-9 and lo + 1e-9 < c:
            raise input_error(
                source,
                f"{f.where}.start_m",
                f"the {f.side} frontage from {a:g} to {c:g} m along {road.name!r} crosses a junction there "
                f"({lo:.2f} to {hi:.2f} m along it, where the footway turns into the other road): split it "
                "into frontages on either side of the junction",
            )
    sign = 1.0 if f.side == "left" else -1.0
    back = sign * (abs(road.section.building_line_y(f.side)) + f.depth_m)
    inside = (cl.s >= a - 1e-9) & (cl.s <= c + 1e-9)
    o = cl.offset(back)
    forward = np.einsum("ij,ij->i", np.diff(o, axis=0), cl.tangents)
    seg = inside[:-1] & inside[1:]
    if np.any(forward[seg] <= 1e-9):
        i = int(np.nonzero(seg & (forward <= 1e-9))[0][0])
        raise input_error(
            source,
            f"{f.where}.depth_m",
            f"the back of the {f.side} frontage, {abs(back):.2f} m from the centreline of {road.name!r}, would fold over "
            f"in the bend {cl.s[i]:.2f} m along it (the bend's radius is smaller): give a smaller depth_m",
        )
    _frontage(b, f, road.section, source, (road, cl))


def _object(b: _Builder, o: StreetObject, source: str) -> None:
    from render.geometry.objects import OBJECT_BUILDERS

    function = OBJECT_BUILDERS[o.kind].function
    try:
        parts = function(**o.params)
    except ValueError as err:
        raise input_error(source, o.where + ".params", str(err)) from None
    parts = getattr(parts, "parts", parts)
    obj = b.new_object(o.tag.name, o.kind, o.tag.inspect, o.where)
    main_slot = o.tag.colour_slot or OBJECT_BUILDERS[o.kind].main_slot
    b.add_parts(_placed(parts, o.position_m, o.heading_deg), o.materials, obj, main_slot)


def _geometry(b: _Builder, o: StreetObject) -> None:
    from render.geometry import shapes

    p = o.params
    kind = o.kind
    if kind == "box":
        sx, sy, sz = p["size_m"]
        parts = shapes.box(size_m=(sx, sy, sz), centre_m=(0.0, 0.0, 0.5 * sz))
    elif kind == "cylinder":
        parts = shapes.cylinder((0.0, 0.0, 0.0), (0.0, 0.0, p["height_m"]), p["radius_m"])
    elif kind == "sphere":
        parts = shapes.sphere((0.0, 0.0, p["radius_m"]), p["radius_m"])
    elif kind == "extrusion" and p.get("holes_m"):
        from render.geometry.footprints import extrude_with_holes

        parts = extrude_with_holes(p["outline_m"], p["holes_m"], p["height_m"])
    elif kind == "extrusion":
        parts = shapes.extrude(p["outline_m"], p["height_m"])
    elif kind == "obj":
        from render.geometry.objfile import load_obj

        parts = p.get("_parts") or load_obj(p["file"], scale=p["scale"], up_axis=p["up_axis"])
    elif kind == "mesh":
        parts = p["_mesh"].parts(o.materials)
    else:  # pragma: no cover - the loader checks kinds
        raise ValueError(kind)
    obj = b.new_object(o.tag.name, kind, o.tag.inspect, o.where)
    b.add_parts(_placed(parts, o.position_m, o.heading_deg), o.materials, obj)


def _marking_polygon(points, z) -> np.ndarray:
    from render.geometry.shapes import flat_region

    parts = flat_region(points, z)
    return np.concatenate([p.triangles_m for p in parts])


def _line_segments(points, dash: float, gap: float):
    """Pieces ``(start, end)`` of a polyline, dashed when ``dash > 0``."""
    pts = np.asarray(points, dtype=np.float64)
    pieces = []
    phase = 0.0  # distance into the current dash+gap period
    period = dash + gap
    for a, c in zip(pts[:-1], pts[1:]):
        seg = c - a
        length = float(np.hypot(*seg))
        if length == 0:
            continue
        u = seg / length
        if dash <= 0:
            pieces.append((a, c))
            continue
        s = 0.0
        while s < length:
            in_dash = phase < dash
            step = (dash - phase) if in_dash else (period - phase)
            step = min(step, length - s)
            if in_dash:
                pieces.append((a + u * s, a + u * (s + step)))
            s += step
            phase = (phase + step) % period
    return pieces


def _marking(b: _Builder, m: Marking, street: Street | None) -> None:
    obj = b.new_object(m.tag.name, "marking", m.tag.inspect, m.where)
    b.objects[obj].main_material = m.material

    def lift(y):
        if m.ground_m is not None:  # a marking along a road
            return m.ground_m + MARKING_LIFT_M
        return (street.ground_z(y) if street is not None else 0.0) + MARKING_LIFT_M

    if m.kind == "polygon":
        ys = [p[1] for p in m.points_m]
        b.add(_marking_polygon(m.points_m, lift(float(np.mean(ys)))), m.material, obj)
        return
    for a, c in _line_segments(m.points_m, m.dash_m, m.gap_m):
        d = c - a
        n = np.array([-d[1], d[0]]) / np.hypot(*d) * (0.5 * m.width_m)
        z = lift(0.5 * (a[1] + c[1]))
        quad = _quad((*(a - n), z), (*(c - n), z), (*(c + n), z), (*(a + n), z))
        b.add(quad, m.material, obj)


def _columns(b: _Builder, scene: Scene) -> None:
    from render.geometry.objects import lamp_column

    for lum in scene.luminaires:
        if lum.column_base_m is None:
            continue
        base = np.asarray(lum.column_base_m)
        top = np.asarray(lum.position_m)
        dx, dy = top[0] - base[0], top[1] - base[1]
        outreach = float(np.hypot(dx, dy))
        heading = float(np.degrees(np.arctan2(dy, dx))) if outreach > 1e-6 else lum.rotation_deg
        height = float(top[2] - base[2])
        if height <= 0.5:
            continue
        # The column is drawn within its declared ranges even when the luminaire is placed beyond them.
        tilt_spec, outreach_spec = lamp_column.spec("arm_tilt_deg"), lamp_column.spec("outreach_m")
        tilt = float(np.clip(lum.tilt_deg, tilt_spec.minimum, tilt_spec.maximum))
        try:
            column = lamp_column(height_m=height, outreach_m=min(outreach, outreach_spec.maximum), arm_tilt_deg=tilt)
        except ValueError as err:
            raise input_error(
                scene.path, lum.where, f"cannot draw the lamp column ({err}); give `column = false` to leave it out"
            ) from None
        obj = b.new_object(f"column {lum.name}", "lamp column", False, lum.where)
        b.add_parts(_placed(column.parts, tuple(base), heading), {}, obj)


def compile_scene(scene: Scene) -> TriangleMesh:
    """All the scene's surfaces as one :class:`~render.geometry.mesh.TriangleMesh`.

    The mesh also carries ``mesh.objects``: one :class:`ObjectInfo` per object index, and
    ``mesh.carriageway_object``: the object index of the street's carriageway (-1 without a
    street), whose triangles alone an r-table shades; ``mesh.carriageway_objects``: those of
    the street's and every road's carriageway (``[[roads]]``, :mod:`render.geometry.roads`);
    ``mesh.carriageway_of``: the same by key path (``"street"``, ``"roads[i]"``).
    """
    b = _Builder()
    if scene.street is not None:
        _street(b, scene.street)
    cuts: dict[str, dict] = {}
    if scene.roads:
        from render.geometry.roads import add_roads

        cuts = add_roads(b, scene.roads, scene.path)
    roads = {r.name: r for r in scene.roads}
    for f in scene.frontages:
        if f.road is not None:
            _road_frontage(b, f, roads, cuts, str(scene.path))
        else:
            _frontage(b, f, scene.street, str(scene.path))
    for o in scene.objects:
        if o.kind in ("box", "cylinder", "sphere", "extrusion", "obj", "mesh"):
            _geometry(b, o)
        else:
            _object(b, o, str(scene.path))
    for m in scene.markings:
        _marking(b, m, scene.street)
    _columns(b, scene)
    limits.check_count(
        sum(t.shape[0] for t in b.tris), limits.MAX_TRIANGLES, scene.path, "", "the number of triangles in the scene"
    )
    mesh = b.mesh()
    # Specular layer per material index: (F0, GGX alpha); F0 = 0 means none.
    mesh.material_gloss = np.array([scene.gloss.get(m, (0.0, 1.0)) for m in mesh.material_names], np.float64).reshape(
        -1, 2
    )  # type: ignore[attr-defined]
    if not np.all(np.isfinite(mesh.triangles_m)):
        raise input_error(scene.path, "", "the scene's geometry has non-finite coordinates")
    return mesh


@cache
def object_slots(kind: str) -> tuple[str, ...]:
    """Material slot names of a parametric object kind (built once with default parameters)."""
    from render.geometry.objects import OBJECT_BUILDERS

    result = OBJECT_BUILDERS[kind].function()
    parts = getattr(result, "parts", result)
    return tuple(sorted({p.slot for p in parts}))
