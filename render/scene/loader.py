"""Read and check a scene file (TOML, lampcast's own schema; see ``scenes/README.md``).

:func:`load_scene` returns a :class:`~render.scene.model.Scene` or raises one
:class:`~render.errors.InputError` listing *every* mistake found, each naming the file and the
key path (or line, for TOML syntax errors and OBJ files).

References
----------
- TOML v1.0.0, read with Python's :mod:`tomllib` (syntax errors carry line and column).
"""

from __future__ import annotations

import math
import re
import tomllib
from pathlib import Path

from render.errors import InputError, ProblemList, did_you_mean
from render.fileio import looks_like_path
from render.scene.model import (
    Frontage,
    GroupSetting,
    Luminaire,
    Marking,
    RenderSettings,
    Scene,
    Setup,
    Street,
    StreetObject,
    StreetSide,
    Tag,
    View,
    luminaire_groups,
)
from render.scene.schema import Field, check_table, check_value, join

__all__ = ["check_scene", "load_scene"]

M = "m"
DEG = "degrees"

TOP_LEVEL = {
    "scene": Field("table", default={}),
    "street": Field("table", default=None),
    "frontages": Field("list", default=[]),
    "objects": Field("list", default=[]),
    "geometry": Field("list", default=[]),
    "markings": Field("list", default=[]),
    "luminaires": Field("list", default=[]),
    "luminaire_rows": Field("list", default=[]),
    "views": Field("list", default=[]),
    "render": Field("table", default={}),
    "observer": Field("table", default={}),
    "setups": Field("table", default={}),
    "gloss": Field("list", default=[]),
}

GLOSS_SPEC = {
    "material": Field("str"),
    "specular_reflectance": Field(
        "float", default=0.02, min=0.0, max=1.0, help="Fresnel reflectance at normal incidence"
    ),
    "roughness": Field("float", default=0.1, min=0.01, max=1.0, help="GGX roughness alpha"),
}

SCENE_INFO = {
    "name": Field("str", default="untitled street"),
    "description": Field("str", default=""),
    "notes": Field("str", default=""),
}

SIDE_SPEC = {
    "footway_width_m": Field("float", default=2.0, unit=M, min=0.0, max=20.0),
    "verge_width_m": Field("float", default=0.0, unit=M, min=0.0, max=20.0),
    "frontage_depth_m": Field(
        "float", default=3.0, unit=M, min=0.0, max=50.0, help="front gardens between footway and building line"
    ),
    "footway_material": Field("str", default=None),
    "verge_material": Field("str", default=None),
    "frontage_material": Field("str", default=None),
}

STREET_SPEC = {
    "length_m": Field("float", unit=M, above=0.0, max=2000.0),
    "carriageway_width_m": Field("float", unit=M, above=0.0, max=60.0),
    "lanes": Field("int", default=2, min=1, max=8),
    "kerb_height_m": Field("float", default=0.12, unit=M, min=0.0, max=0.5),
    "kerb_width_m": Field("float", default=0.15, unit=M, min=0.0, max=1.0),
    "carriageway_material": Field("str", default="asphalt-worn"),
    "kerb_material": Field("str", default="concrete-kerb"),
    "footway_material": Field("str", default="concrete-paving"),
    "verge_material": Field("str", default="grass"),
    "frontage_material": Field("str", default="grass"),
    "centre_line": Field("str", default="dashed", choices=("none", "dashed", "solid")),
    "wet": Field("bool", default=False, help="a film of water on carriageway and footways"),
    "line_material": Field("str", default="paint-road-white"),
    "left": Field("table", default={}),
    "right": Field("table", default={}),
}

TAG_FIELDS = {
    "name": Field("str", default=None),
    "inspect": Field("bool", default=False),
    "notes": Field("str", default=""),
}

FRONTAGE_SPEC = {
    "side": Field("str", choices=("left", "right")),
    "kind": Field("str", default="house", choices=("house", "shop")),
    "start_m": Field("float", unit=M),
    "length_m": Field("float", unit=M, above=0.0, max=2000.0),
    "units": Field("int", default=1, min=1, max=200),
    "height_m": Field("float", default=7.5, unit=M, above=0.0, max=200.0),
    "depth_m": Field("float", default=8.0, unit=M, above=0.0, max=100.0),
    "materials": Field("table", default={}),
    **TAG_FIELDS,
}

OBJECT_SPEC = {
    "kind": Field("str"),
    "position_m": Field("any"),
    "heading_deg": Field("float", default=0.0, unit=DEG),
    "params": Field("table", default={}),
    "materials": Field("table", default={}),
    **TAG_FIELDS,
}

GEOMETRY_KINDS = ("box", "cylinder", "sphere", "extrusion", "obj")
GEOMETRY_SPEC = {
    "kind": Field("str", choices=GEOMETRY_KINDS),
    "material": Field("str", default=None),
    "materials": Field("table", default={}),
    "position_m": Field("vec3", default=(0.0, 0.0, 0.0), unit=M),
    "heading_deg": Field("float", default=0.0, unit=DEG),
    "size_m": Field("vec3", default=None, unit=M, above=0.0),
    "radius_m": Field("float", default=None, unit=M, above=0.0),
    "height_m": Field("float", default=None, unit=M, above=0.0),
    "outline_m": Field("any", default=None),
    "file": Field("str", default=None),
    "scale": Field("float", default=1.0, above=0.0),
    "up_axis": Field("str", default="z", choices=("y", "z")),
    "smooth": Field("bool", default=True),
    **TAG_FIELDS,
}

MARKING_SPEC = {
    "kind": Field("str", choices=("line", "polygon")),
    "points_m": Field("any"),
    "width_m": Field("float", default=0.1, unit=M, above=0.0, max=20.0),
    "dash_m": Field("float", default=0.0, unit=M, min=0.0),
    "gap_m": Field("float", default=0.0, unit=M, min=0.0),
    "material": Field("str"),
    **TAG_FIELDS,
}

LIGHT_FIELDS = {
    "photometry": Field("str", default="generic-road-asymmetric"),
    "lamp": Field("str"),
    "lumens": Field("float", default=None, unit="lm", above=0.0, max=1e7),
    "maintenance_factor": Field("float", default=0.8, above=0.0, max=1.0),
    "dimming": Field("float", default=1.0, min=0.0, max=1.0),
    "group": Field("str", default="main"),
    "tilt_deg": Field("float", default=0.0, unit=DEG, min=-90.0, max=90.0),
}

LUMINAIRE_SPEC = {
    "name": Field("str", default=None),
    "position_m": Field("vec3", unit=M, help="centre of the luminous opening"),
    "rotation_deg": Field("float", default=0.0, unit=DEG),
    "column": Field("bool", default=True),
    **LIGHT_FIELDS,
}

ROW_SPEC = {
    "name": Field("str", default=None),
    "layout": Field("str", default="one-side", choices=("one-side", "opposite", "staggered")),
    "side": Field("str", default="left", choices=("left", "right")),
    "start_m": Field("float", default=0.0, unit=M),
    "spacing_m": Field("float", unit=M, above=0.0, max=500.0),
    "count": Field("int", default=None, min=1, max=1000),
    "end_m": Field("float", default=None, unit=M),
    "setback_m": Field("float", default=0.5, unit=M, min=-5.0, max=50.0, help="column distance behind the kerb face"),
    "mounting_height_m": Field("float", unit=M, above=0.0, max=60.0),
    "outreach_m": Field("float", default=0.5, unit=M, min=-10.0, max=10.0),
    "rotation_deg": Field("float", default=0.0, unit=DEG),
    "column": Field("bool", default=True),
    **LIGHT_FIELDS,
}

VIEW_KINDS = ("pedestrian", "driver", "window", "aerial", "custom")
#: Eye height above the local ground used when a view gives only [x, y].
#: Pedestrian 1.6 m, driver 1.2 m, upstairs window 4.5 m (common practice, no source), aerial 30 m.
EYE_HEIGHT_M = {"pedestrian": 1.6, "driver": 1.2, "window": 4.5, "aerial": 30.0, "custom": 1.6}
VIEW_SPEC = {
    "name": Field("str"),
    "kind": Field("str", default="custom", choices=VIEW_KINDS),
    "position_m": Field("any"),
    "target_m": Field("vec3", unit=M),
    "hfov_deg": Field("float", default=60.0, unit=DEG, above=0.0, below=170.0),
    "resolution": Field("int2", default=(960, 540), min=8, max=8192),
    "notes": Field("str", default=""),
}

RENDER_SPEC = {
    "samples_per_pixel": Field("int", default=4, min=1, max=4096),
    "seed": Field("int", default=0, min=0, max=2**32 - 1),
}


SETUP_SPEC = {
    "description": Field("str", default=""),
    "lamp": Field("str", default=None),
    "photometry": Field("str", default=None),
    "lumens": Field("float", default=None, unit="lm", above=0.0),
    "dimming": Field("float", default=None, min=0.0, max=1.0),
    "groups": Field("table", default={}),
}
GROUP_SETTING_SPEC = {k: SETUP_SPEC[k] for k in ("lamp", "photometry", "lumens", "dimming")}

_TOML_LINE = re.compile(r"\(at line (\d+), column (\d+)\)")


class _Context:
    """What the checks need besides the table: the file, the problems, the known ids."""

    def __init__(self, path: Path, problems: ProblemList):
        self.path = path
        self.problems = problems
        self._materials: set[str] | None = None
        self._lamps: set[str] | None = None
        self._photometry: set[str] | None = None

    def resolve(self, ref: str) -> Path:
        p = Path(ref)
        return p if p.is_absolute() else (self.path.parent / p)

    def material(self, ref: str | None, where: str) -> None:
        if ref is None:
            return
        if self._materials is None:
            from render.colour.materials import material_library

            self._materials = set(material_library())
        if ref not in self._materials:
            self.problems.add(
                where, f"unknown material {ref!r}{did_you_mean(ref, self._materials)}; `lampcast materials` lists them"
            )

    def lamp(self, ref: str | None, where: str) -> None:
        if ref is None:
            return
        if looks_like_path(ref):
            target = self.resolve(ref)
            if not target.is_file():
                self.problems.add(where, f"lamp file {str(target)!r} does not exist")
                return
            from render.colour.lamps import load_lamp_file

            try:
                load_lamp_file(target)
            except InputError as err:
                self.problems.extend(err)
            return
        if self._lamps is None:
            from render.colour.lamps import builtin_lamps

            self._lamps = set(builtin_lamps())
        if ref not in self._lamps:
            self.problems.add(
                where, f"unknown lamp {ref!r}{did_you_mean(ref, self._lamps)}; `lampcast lamps` lists them"
            )

    def photometry(self, ref: str | None, where: str) -> None:
        if ref is None:
            return
        if looks_like_path(ref):
            target = self.resolve(ref)
            if not target.is_file():
                self.problems.add(where, f"photometric file {str(target)!r} does not exist")
                return
            from render.light.photometry import load_photometry

            try:
                load_photometry(str(target))
            except InputError as err:
                self.problems.extend(err)
            return
        if self._photometry is None:
            from render.light.photometry import builtin_photometry_ids

            self._photometry = set(builtin_photometry_ids())
        if ref not in self._photometry:
            self.problems.add(where, f"unknown photometry {ref!r}{did_you_mean(ref, self._photometry)}")


def _parse_toml(path: Path) -> dict:
    from render.fileio import read_user_text

    text = read_user_text(path, "scene file", "a UTF-8 TOML scene file")
    try:
        return tomllib.loads(text)
    except tomllib.TOMLDecodeError as err:
        message = str(err)
        match = _TOML_LINE.search(message)
        where = f"line {match.group(1)}" if match else ""
        message = _TOML_LINE.sub("", message).strip()
        raise InputError([_problem(path, where, f"TOML syntax error: {message}")]) from None


def _problem(path, where, message):
    from render.errors import Problem

    return Problem(str(path), where, message)


def _tag(checked: dict, default_name: str) -> Tag:
    return Tag(
        name=checked.get("name") or default_name, inspect=bool(checked.get("inspect")), notes=checked.get("notes") or ""
    )


def _point_list(value, where: str, problems: ProblemList, min_points: int) -> list[tuple[float, float]] | None:
    ok = isinstance(value, list) and len(value) >= min_points
    points = []
    if ok:
        for i, p in enumerate(value):
            q = check_value(p, Field("vec2", unit=M), f"{where}[{i}]", problems)
            if q is None:
                return None
            points.append(q)
        return points
    problems.add(where, f"expected a list of at least {min_points} [x, y] points in m, got {value!r}")
    return None


def _materials_table(value: dict, where: str, ctx: _Context, slots: tuple[str, ...] | None) -> dict[str, str]:
    out = {}
    for slot, ref in value.items():
        path = join(where, slot)
        if slots is not None and slot not in slots:
            ctx.problems.add(path, f"unknown material slot{did_you_mean(slot, slots)}; slots: {', '.join(slots)}")
            continue
        if not isinstance(ref, str):
            ctx.problems.add(path, f"expected a material id (text), got {ref!r}")
            continue
        ctx.material(ref, path)
        out[slot] = ref
    return out


def _street(table: dict, ctx: _Context) -> Street | None:
    s = check_table(table, STREET_SPEC, "street", ctx.problems)
    sides = {}
    for side in ("left", "right"):
        t = check_table(s["left" if side == "left" else "right"] or {}, SIDE_SPEC, f"street.{side}", ctx.problems)
        for key in ("footway_material", "verge_material", "frontage_material"):
            if t[key] is None:
                t[key] = s[key]
            else:
                ctx.material(t[key], f"street.{side}.{key}")
        sides[side] = StreetSide(**t)
    for key in (
        "carriageway_material",
        "kerb_material",
        "footway_material",
        "verge_material",
        "frontage_material",
        "line_material",
    ):
        ctx.material(s[key], f"street.{key}")
    if any(s[k] is None for k in ("length_m", "carriageway_width_m")):
        return None
    return Street(
        length_m=s["length_m"],
        carriageway_width_m=s["carriageway_width_m"],
        lanes=s["lanes"] or 2,
        kerb_height_m=s["kerb_height_m"],
        kerb_width_m=s["kerb_width_m"],
        carriageway_material=s["carriageway_material"],
        kerb_material=s["kerb_material"],
        centre_line=s["centre_line"] or "dashed",
        line_material=s["line_material"],
        left=sides["left"],
        right=sides["right"],
        wet=bool(s["wet"]),
    )


def _position(
    value, where: str, ctx: _Context, street: Street | None, default_height: float = 0.0
) -> tuple[float, float, float] | None:
    """[x, y] (z from the street surface plus ``default_height``) or [x, y, z]."""
    if isinstance(value, list) and len(value) == 2:
        xy = check_value(value, Field("vec2", unit=M), where, ctx.problems)
        if xy is None:
            return None
        z = (street.ground_z(xy[1]) if street is not None else 0.0) + default_height
        return (xy[0], xy[1], z)
    if isinstance(value, list) and len(value) == 3:
        return check_value(value, Field("vec3", unit=M), where, ctx.problems)
    ctx.problems.add(where, f"expected [x, y] or [x, y, z] in m, got {value!r}")
    return None


def _objects(entries: list, ctx: _Context, street: Street | None) -> list[StreetObject]:
    from render.geometry.build import object_slots
    from render.geometry.objects import OBJECT_BUILDERS, validate_params

    out = []
    for i, entry in enumerate(entries):
        where = f"objects[{i}]"
        o = check_table(entry, OBJECT_SPEC, where, ctx.problems)
        kind = o["kind"]
        if kind is not None and kind not in OBJECT_BUILDERS:
            ctx.problems.add(
                f"{where}.kind",
                f"unknown object kind {kind!r}{did_you_mean(kind, OBJECT_BUILDERS)}; kinds: {', '.join(OBJECT_BUILDERS)}",
            )
            kind = None
        pos = _position(o["position_m"], f"{where}.position_m", ctx, street) if "position_m" in entry else None
        if "position_m" not in entry:
            ctx.problems.add(f"{where}.position_m", "missing; expected [x, y] or [x, y, z] in m")
        if kind is None or o["params"] is None:
            continue
        for key, message in validate_params(kind, o["params"]):
            ctx.problems.add(f"{where}.params.{key}" if key else f"{where}.params", message)
        materials = _materials_table(o["materials"] or {}, f"{where}.materials", ctx, tuple(object_slots(kind)))
        if pos is None or o["heading_deg"] is None:
            continue
        out.append(
            StreetObject(kind, _tag(o, f"{kind} {i + 1}"), pos, o["heading_deg"], dict(o["params"]), materials, where)
        )
    return out


def _geometry(entries: list, ctx: _Context) -> list[StreetObject]:
    out = []
    for i, entry in enumerate(entries):
        where = f"geometry[{i}]"
        g = check_table(entry, GEOMETRY_SPEC, where, ctx.problems)
        kind = g["kind"]
        needs = {
            "box": ("size_m",),
            "cylinder": ("radius_m", "height_m"),
            "sphere": ("radius_m",),
            "extrusion": ("outline_m", "height_m"),
            "obj": ("file",),
        }.get(kind, ())
        for key in needs:
            if key not in entry:
                ctx.problems.add(f"{where}.{key}", f"missing; a {kind} needs {', '.join(needs)}")
        if kind != "obj" and g["material"] is None and "material" not in entry:
            ctx.problems.add(f"{where}.material", "missing; expected a material id")
        ctx.material(g["material"], f"{where}.material")
        if kind == "extrusion" and "outline_m" in entry:
            g["outline_m"] = _point_list(entry["outline_m"], f"{where}.outline_m", ctx.problems, 3)
        slots = None
        if kind == "obj" and g["file"] is not None:
            target = ctx.resolve(g["file"])
            from render.geometry.objfile import load_obj

            try:
                parts = load_obj(target, scale=g["scale"] or 1.0, up_axis=g["up_axis"] or "z")
                slots = sorted({p.slot for p in parts})
                g["_parts"] = parts
            except InputError as err:
                ctx.problems.extend(err)
            g["file"] = str(target)
        materials = _materials_table(g["materials"] or {}, f"{where}.materials", ctx, tuple(slots) if slots else None)
        if kind == "obj" and slots and g["material"] is None:
            missing = [s for s in slots if s not in materials]
            if missing:
                ctx.problems.add(
                    f"{where}.materials",
                    f"no material for OBJ material name(s) {', '.join(missing)}; give `material` or a `materials` entry per name",
                )
        if kind is None or g["position_m"] is None:
            continue
        params = {
            k: g[k]
            for k in ("size_m", "radius_m", "height_m", "outline_m", "file", "scale", "up_axis", "smooth", "_parts")
            if k in g
        }
        if g["material"] is not None:
            materials.setdefault("*", g["material"])
        out.append(
            StreetObject(
                kind, _tag(g, f"{kind} {i + 1}"), g["position_m"], g["heading_deg"] or 0.0, params, materials, where
            )
        )
    return out


def _frontages(entries: list, ctx: _Context) -> list[Frontage]:
    from render.geometry.build import object_slots

    out = []
    for i, entry in enumerate(entries):
        where = f"frontages[{i}]"
        f = check_table(entry, FRONTAGE_SPEC, where, ctx.problems)
        kind = f["kind"] or "house"
        slots = tuple(object_slots("shop_front" if kind == "shop" else "house_front"))
        materials = _materials_table(f["materials"] or {}, f"{where}.materials", ctx, slots)
        if any(f[k] is None for k in ("side", "start_m", "length_m", "height_m", "depth_m", "units")):
            continue
        out.append(
            Frontage(
                f["side"],
                kind,
                f["start_m"],
                f["length_m"],
                f["units"],
                f["height_m"],
                f["depth_m"],
                materials,
                _tag(f, f"{kind} frontage {i + 1}"),
                where,
            )
        )
    return out


def _markings(entries: list, ctx: _Context) -> list[Marking]:
    out = []
    for i, entry in enumerate(entries):
        where = f"markings[{i}]"
        m = check_table(entry, MARKING_SPEC, where, ctx.problems)
        ctx.material(m["material"], f"{where}.material")
        min_points = 2 if m["kind"] == "line" else 3
        pts = (
            _point_list(entry.get("points_m"), f"{where}.points_m", ctx.problems, min_points)
            if "points_m" in entry
            else None
        )
        if None in (m["kind"], m["material"], pts, m["width_m"]):
            continue
        if m["kind"] == "line" and (m["dash_m"] > 0) != (m["gap_m"] > 0):
            ctx.problems.add(f"{where}.gap_m", "a dashed line needs both dash_m and gap_m above 0")
            continue
        out.append(
            Marking(
                m["kind"], pts, m["width_m"], m["dash_m"], m["gap_m"], m["material"], _tag(m, f"marking {i + 1}"), where
            )
        )
    return out


def _light_refs(checked: dict, where: str, ctx: _Context) -> None:
    ctx.lamp(checked["lamp"], f"{where}.lamp")
    ctx.photometry(checked["photometry"], f"{where}.photometry")


def _luminaires(singles: list, rows: list, ctx: _Context, street: Street | None) -> list[Luminaire]:
    out: list[Luminaire] = []
    for i, entry in enumerate(singles):
        where = f"luminaires[{i}]"
        s = check_table(entry, LUMINAIRE_SPEC, where, ctx.problems)
        _light_refs(s, where, ctx)
        if any(s[k] is None for k in ("position_m", "lamp", "photometry", "rotation_deg", "tilt_deg")):
            continue
        base = (
            (s["position_m"][0], s["position_m"][1], street.ground_z(s["position_m"][1]) if street else 0.0)
            if s["column"]
            else None
        )
        out.append(
            _make_luminaire(s, s["name"] or f"luminaire {i + 1}", s["position_m"], base, s["rotation_deg"], where)
        )
    for i, entry in enumerate(rows):
        where = f"luminaire_rows[{i}]"
        r = check_table(entry, ROW_SPEC, where, ctx.problems)
        _light_refs(r, where, ctx)
        if r["count"] is None and r["end_m"] is None:
            ctx.problems.add(where, "a row needs `count` or `end_m`")
            continue
        if r["count"] is not None and "end_m" in entry:
            ctx.problems.add(f"{where}.end_m", "give either `count` or `end_m`, not both")
            continue
        if street is None:
            ctx.problems.add(where, "luminaire rows are placed relative to the street: add a [street] table")
            continue
        if any(
            r[k] is None
            for k in (
                "spacing_m",
                "mounting_height_m",
                "lamp",
                "photometry",
                "start_m",
                "setback_m",
                "outreach_m",
                "rotation_deg",
                "tilt_deg",
                "side",
                "layout",
            )
        ):
            continue
        out.extend(_expand_row(r, where, street))
    names = [lum.name for lum in out]
    for lum in out:
        if names.count(lum.name) > 1:
            ctx.problems.add(lum.where, f"luminaire name {lum.name!r} is used more than once")
            break
    return out


def _make_luminaire(c: dict, name: str, position, base, rotation_deg: float, where: str) -> Luminaire:
    return Luminaire(
        name=name,
        group=c["group"] or "main",
        position_m=tuple(position),
        column_base_m=base,
        rotation_deg=rotation_deg,
        tilt_deg=c["tilt_deg"],
        photometry=c["photometry"],
        lamp=c["lamp"],
        lumens=c["lumens"],
        maintenance_factor=c["maintenance_factor"],
        dimming=c["dimming"],
        where=where,
    )


def _expand_row(r: dict, where: str, street: Street) -> list[Luminaire]:
    """Positions of a row: columns ``setback_m`` behind the kerb face, the luminous opening
    ``outreach_m`` from the column toward the carriageway at ``mounting_height_m``. The
    photometric C90 half-plane (street side) faces across the carriageway."""
    if r["count"] is not None:
        xs = [r["start_m"] + k * r["spacing_m"] for k in range(r["count"])]
    else:
        n = int(math.floor((r["end_m"] - r["start_m"]) / r["spacing_m"] + 1e-9)) + 1
        xs = [r["start_m"] + k * r["spacing_m"] for k in range(max(n, 0))]
    other = "right" if r["side"] == "left" else "left"
    out = []
    for k, x in enumerate(xs):
        if r["layout"] == "one-side":
            sides = [r["side"]]
        elif r["layout"] == "opposite":
            sides = [r["side"], other]
        else:  # staggered: alternate sides at each spacing step
            sides = [r["side"] if k % 2 == 0 else other]
        for side in sides:
            sign = 1.0 if side == "left" else -1.0
            kerb_y = street.kerb_edge_y(side)
            column_y = kerb_y + sign * r["setback_m"]
            lum_y = column_y - sign * r["outreach_m"]
            ground = street.kerb_height_m if abs(column_y) > 0.5 * street.carriageway_width_m else 0.0
            rotation = (180.0 if side == "left" else 0.0) + r["rotation_deg"]
            base_name = r["name"] or f"row {where.split('[')[1].rstrip(']')}"
            name = f"{base_name} {side[0].upper()}{k + 1}" if r["layout"] == "opposite" else f"{base_name} #{k + 1}"
            base = (x, column_y, ground) if r["column"] else None
            out.append(_make_luminaire(r, name, (x, lum_y, ground + r["mounting_height_m"]), base, rotation, where))
    return out


def _gloss(entries: list, ctx: _Context, street: Street | None) -> dict[str, tuple[float, float]]:
    """Specular layers per material: ``[[gloss]]`` entries, and ``street.wet`` for the street's
    walking and driving surfaces (water film, :mod:`render.light.gloss`)."""
    from render.light.gloss import WATER_F0, WET_ROUGHNESS

    out: dict[str, tuple[float, float]] = {}
    if street is not None and street.wet:
        for m in {
            street.carriageway_material,
            street.left.footway_material,
            street.right.footway_material,
            street.line_material,
        }:
            out[m] = (WATER_F0, WET_ROUGHNESS)
    for i, entry in enumerate(entries):
        where = f"gloss[{i}]"
        g = check_table(entry, GLOSS_SPEC, where, ctx.problems)
        ctx.material(g["material"], f"{where}.material")
        if None not in (g["material"], g["specular_reflectance"], g["roughness"]):
            out[g["material"]] = (g["specular_reflectance"], g["roughness"])
    return out


def _views(entries: list, ctx: _Context, street: Street | None) -> list[View]:
    out = []
    names = set()
    for i, entry in enumerate(entries):
        where = f"views[{i}]"
        v = check_table(entry, VIEW_SPEC, where, ctx.problems)
        kind = v["kind"] or "custom"
        if "position_m" not in entry:
            ctx.problems.add(
                f"{where}.position_m", "missing; expected [x, y] (eye height from the view kind) or [x, y, z] in m"
            )
            continue
        pos = _position(entry["position_m"], f"{where}.position_m", ctx, street, EYE_HEIGHT_M[kind])
        if v["name"] in names:
            ctx.problems.add(f"{where}.name", f"view name {v['name']!r} is used more than once")
        names.add(v["name"])
        if None in (pos, v["target_m"], v["name"], v["hfov_deg"], v["resolution"]):
            continue
        if math.dist(pos, v["target_m"]) < 1e-6:
            ctx.problems.add(f"{where}.target_m", "the target must differ from the position")
            continue
        d = [t - p for t, p in zip(v["target_m"], pos)]
        if math.hypot(d[0], d[1]) < 1e-6 * math.sqrt(sum(c * c for c in d)):
            ctx.problems.add(
                f"{where}.target_m",
                "a view looking straight up or down needs a small horizontal offset of the target (the image's up direction is +z)",
            )
            continue
        out.append(
            View(v["name"], kind, pos, v["target_m"], v["hfov_deg"], v["resolution"][0], v["resolution"][1], v["notes"])
        )
    return out


def _setups(table: dict, ctx: _Context, groups: list[str]) -> dict[str, Setup]:
    out = {}
    for name, entry in table.items():
        where = f"setups.{name}"
        s = check_table(entry, SETUP_SPEC, where, ctx.problems)
        _light_refs({"lamp": s["lamp"], "photometry": s["photometry"]}, where, ctx)
        settings = {}
        if any(s[k] is not None for k in ("lamp", "photometry", "lumens", "dimming")):
            settings["*"] = GroupSetting(s["lamp"], s["photometry"], s["lumens"], s["dimming"])
        for group, gentry in (s["groups"] or {}).items():
            gwhere = f"{where}.groups.{group}"
            if group not in groups:
                ctx.problems.add(
                    gwhere,
                    f"no luminaire group named {group!r}{did_you_mean(group, groups)}; groups: {', '.join(groups) or '(none)'}",
                )
                continue
            g = check_table(gentry, GROUP_SETTING_SPEC, gwhere, ctx.problems)
            _light_refs(g, gwhere, ctx)
            settings[group] = GroupSetting(g["lamp"], g["photometry"], g["lumens"], g["dimming"])
        if not settings:
            ctx.problems.add(
                where, "a setup needs a lamp (or photometry, lumens, dimming) for all luminaires or per group"
            )
        out[name] = Setup(name, s["description"] or "", settings)
    return out


def load_scene(path: str | Path) -> Scene:
    """Load and check a scene file; raises :class:`~render.errors.InputError` listing every
    problem found (file and key path for each)."""
    path = Path(path)
    doc = _parse_toml(path)
    problems = ProblemList(path)
    ctx = _Context(path, problems)
    top = check_table(doc, TOP_LEVEL, "", problems)
    info = check_table(top["scene"] or {}, SCENE_INFO, "scene", problems)
    street = _street(top["street"], ctx) if top["street"] is not None else None
    frontages = _frontages(top["frontages"] or [], ctx)
    objects = _objects(top["objects"] or [], ctx, street) + _geometry(top["geometry"] or [], ctx)
    markings = _markings(top["markings"] or [], ctx)
    luminaires = _luminaires(top["luminaires"] or [], top["luminaire_rows"] or [], ctx, street)
    views = _views(top["views"] or [], ctx, street)
    if not (top["views"] or []):
        problems.add("views", "the scene needs at least one [[views]] entry")
    render = check_table(top["render"] or {}, RENDER_SPEC, "render", problems)
    observer = None
    if top["observer"] is not None:
        from render.vision.observer import ObserverSettings

        try:
            observer = ObserverSettings.from_mapping(top["observer"], source=str(path), where="observer")
        except InputError as err:
            problems.extend(err)
    setups = _setups(top["setups"] or {}, ctx, luminaire_groups(luminaires))
    gloss = _gloss(top["gloss"] or [], ctx, street)
    if top["street"] is None and not objects and not frontages:
        problems.add("", "the scene has no [street], [[objects]], [[geometry]] or [[frontages]]: nothing to render")
    names: dict[str, str] = {}
    for item in [*frontages, *objects, *markings]:
        if item.tag.name in names:
            problems.add(f"{item.where}.name", f"the name {item.tag.name!r} is already used by {names[item.tag.name]}")
        names[item.tag.name] = item.where
    problems.raise_if_any()
    return Scene(
        path=path,
        name=info["name"],
        description=info["description"],
        street=street,
        frontages=frontages,
        objects=objects,
        markings=markings,
        luminaires=luminaires,
        views=views,
        render=RenderSettings(**render),
        observer=observer,
        setups=setups,
        gloss=gloss,
    )


def check_scene(path: str | Path) -> Scene:
    """Load a scene and compile its geometry (so that every mistake a render would meet is
    found), without casting a ray."""
    from render.geometry.build import compile_scene

    scene = load_scene(path)
    compile_scene(scene)
    return scene
