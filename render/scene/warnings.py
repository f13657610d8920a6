"""Warnings of a checked scene: likely mistakes that are not errors.

:func:`scene_warnings` looks at a scene that loaded without problems for values that are
allowed but probably not meant (a field of view in radians typed as degrees, ...). Each
warning is a :class:`~render.errors.Problem` naming the file and the key path, like an error;
``lampcast check`` prints them and still exits 0. The warnings are listed in
``scenes/README.md``.
"""

from __future__ import annotations

import math
from typing import TYPE_CHECKING

import numpy as np

from render.errors import Problem
from render.fileio import file_stem
from render.scene.model import Scene
from render.scene.schema import join

if TYPE_CHECKING:
    from render.geometry.mesh import TriangleMesh

__all__ = [
    "COINCIDENT_M",
    "NARROW_HFOV_DEG",
    "close_pairs",
    "cameras_inside_solids",
    "clashing_view_names",
    "dark_views",
    "coincident_luminaires",
    "luminaire_key",
    "mesh_features_ignored",
    "narrow_fields_of_view",
    "outside_street",
    "scene_warnings",
    "setup_lumens_for_every_group",
    "street_bounds",
    "PREVIEW_WIDTH_PX",
    "SOLID_PROBE_M",
    "STREET_MARGIN_M",
]

#: A horizontal field of view below this, degrees, is probably radians typed as degrees
#: (common practice, no source: the narrowest street views are telephoto shots near 10°).
NARROW_HFOV_DEG = 5.0
#: Two luminous openings closer than this, m, are one luminaire given twice (common practice,
#: no source: real lanterns are at least their own width, some 0.3 m, apart).
COINCIDENT_M = 0.1
#: How far beyond the street's ends and building depth something may stand before it is
#: "outside the street", m (common practice, no source: a column or a bin a little past the
#: modelled length is ordinary).
STREET_MARGIN_M = 1.0
#: A camera whose probe rays mostly meet a back face closer than this, m, is inside a solid
#: (common practice, no source: cars, bins and house units are smaller).
SOLID_PROBE_M = 20.0
#: Width of the one-sample-per-pixel preview render that looks for a lit surface in a view.
PREVIEW_WIDTH_PX = 32
#: At most this many warnings of one kind are listed, then how many more there are.
MAX_LISTED = 20


def narrow_fields_of_view(scene: Scene) -> list[Problem]:
    """Views whose ``hfov_deg`` is under :data:`NARROW_HFOV_DEG`."""
    out = []
    for i, view in enumerate(scene.views):
        if view.hfov_deg < NARROW_HFOV_DEG:
            out.append(
                Problem(
                    str(scene.path),
                    f"views[{i}].hfov_deg",
                    f"a field of view of {view.hfov_deg:g}° is very narrow (under {NARROW_HFOV_DEG:g}°): "
                    f"was it given in radians? {view.hfov_deg:g} rad is {math.degrees(view.hfov_deg):.0f}°",
                )
            )
    return out


def clashing_view_names(scene: Scene) -> list[Problem]:
    """Views whose names give the same output file name (:func:`render.fileio.file_stem`, e.g.
    "bins & cars" and "bins / cars"): the outputs are told apart by a number added to the
    later name (compared without regard to case, as case-insensitive file systems do), which the
    warning tells the user. One warning per later view, naming the first."""
    out = []
    first: dict[str, int] = {}
    for i, view in enumerate(scene.views):
        stem = file_stem(view.name)
        if stem.lower() not in first:
            first[stem.lower()] = i
            continue
        j = first[stem.lower()]
        out.append(
            Problem(
                str(scene.path),
                f"views[{i}].name",
                f"the views {scene.views[j].name!r} (views[{j}]) and {view.name!r} both give the output name "
                f"{file_stem(scene.views[j].name)!r}: the later view's files get a number added; give names that differ in letters or digits",
            )
        )
    return out


def luminaire_key(scene: Scene, index: int) -> str:
    """Where luminaire ``index`` of ``scene.luminaires`` is given: ``luminaires[i].position_m``
    for a single one, ``luminaire_rows[j] position k`` (k from 1, in the row's order of
    placement) for one placed by a row."""
    lum = scene.luminaires[index]
    if lum.where.startswith("luminaires["):
        return f"{lum.where}.position_m"
    k = sum(1 for other in scene.luminaires[:index] if other.where == lum.where) + 1
    return f"{lum.where} position {k}"


def _capped(problems: list[Problem], source: str, where: str, what: str) -> list[Problem]:
    if len(problems) <= MAX_LISTED:
        return problems
    more = len(problems) - MAX_LISTED
    return [*problems[:MAX_LISTED], Problem(source, where, f"and {more:,} more {what}")]


def close_pairs(points: np.ndarray, radius_m: float) -> list[tuple[int, int]]:
    """Sorted index pairs ``(i, j)``, ``i < j``, of points at most ``radius_m`` apart: a sweep
    along x over the points sorted by x (no spatial index needed for a scene's luminaires)."""
    order = np.argsort(points[:, 0], kind="stable")
    xs = points[order, 0]
    out = []
    for a in range(len(order)):
        b = a + 1
        while b < len(order) and xs[b] - xs[a] <= radius_m:
            i, j = int(order[a]), int(order[b])
            if float(np.linalg.norm(points[i] - points[j])) <= radius_m:
                out.append((min(i, j), max(i, j)))
            b += 1
    return sorted(out)


def coincident_luminaires(scene: Scene) -> list[Problem]:
    """Pairs of luminaires whose luminous openings are within :data:`COINCIDENT_M` of each
    other, each naming both (the later one's key first)."""
    if len(scene.luminaires) < 2:
        return []
    points = np.array([lum.position_m for lum in scene.luminaires], dtype=np.float64)
    pairs = close_pairs(points, COINCIDENT_M)
    out = []
    for i, j in pairs:
        a, b = scene.luminaires[i], scene.luminaires[j]
        distance = float(np.linalg.norm(points[i] - points[j]))
        out.append(
            Problem(
                str(scene.path),
                luminaire_key(scene, j),
                f"luminaire {b.name!r} is {distance:.3g} m from {a.name!r} ({luminaire_key(scene, i)}): "
                f"two luminaires in one place (closer than {COINCIDENT_M:g} m) light the street twice",
            )
        )
    return _capped(out, str(scene.path), "luminaires", "pairs of luminaires in one place")


def street_bounds(scene: Scene) -> tuple[tuple[float, float], tuple[float, float]] | None:
    """``((x_min, x_max), (y_min, y_max))`` of the street, m: its length, and across it the
    carriageway, kerbs, verges, footways, front gardens and the deepest frontage of each side;
    None for a scene without a street."""
    street = scene.street
    if street is None:
        return None
    depth = {
        side: max((f.depth_m for f in scene.frontages if f.side == side), default=0.0) for side in ("left", "right")
    }
    return (
        (0.0, street.length_m),
        (street.building_line_y("right") - depth["right"], street.building_line_y("left") + depth["left"]),
    )


def outside_street(scene: Scene) -> list[Problem]:
    """Objects, free geometry and luminaires placed more than :data:`STREET_MARGIN_M` beyond
    the street (:func:`street_bounds`), each naming its position key."""
    bounds = street_bounds(scene)
    if bounds is None:
        return []
    (x0, x1), (y0, y1) = bounds
    items = [(f"{o.where}.position_m", f"{o.tag.name!r}", o.position_m) for o in scene.objects]
    items += [
        (luminaire_key(scene, k), f"luminaire {lum.name!r}", lum.position_m) for k, lum in enumerate(scene.luminaires)
    ]
    out = []
    for where, what, (x, y, _z) in items:
        if x0 - STREET_MARGIN_M <= x <= x1 + STREET_MARGIN_M and y0 - STREET_MARGIN_M <= y <= y1 + STREET_MARGIN_M:
            continue
        out.append(
            Problem(
                str(scene.path),
                where,
                f"{what} at x = {x:g} m, y = {y:g} m is outside the street (x from {x0:g} to {x1:g} m along it, "
                f"y from {y0:g} to {y1:g} m across it, frontages included, give or take {STREET_MARGIN_M:g} m)",
            )
        )
    return _capped(out, str(scene.path), "objects", "objects or luminaires outside the street")


def setup_lumens_for_every_group(scene: Scene) -> list[Problem]:
    """Setups whose own ``lumens`` (for all luminaires) replaces the lumens of every one of the
    scene's two or more luminaire groups, no group setting its own: usually one group (a bus
    stop lantern, say) was meant to keep another flux."""
    groups = scene.groups
    if len(groups) < 2:
        return []
    out = []
    for name, setup in scene.setups.items():
        base = setup.groups.get("*")
        if base is None or base.lumens is None:
            continue
        if any(g in setup.groups and setup.groups[g].lumens is not None for g in groups):
            continue
        out.append(
            Problem(
                str(scene.path),
                f"{join('setups', name)}.lumens",
                f"lumens = {base.lumens:g} sets every luminaire group ({', '.join(repr(g) for g in groups)}) to "
                f"{base.lumens:g} lm; to keep another flux for a group, give its lumens under "
                f"[{join('setups', name)}.groups]",
            )
        )
    return out


def cameras_inside_solids(scene: Scene, triangles_m: np.ndarray, bvh) -> list[Problem]:
    """Views whose camera stands inside a solid: of seven probe rays from the camera (the six
    axis directions and the view direction) more than half meet a back face within
    :data:`SOLID_PROBE_M` (:func:`render.rays.sanity.back_face_fraction`). ``triangles_m`` and
    ``bvh``: the compiled scene and its BVH."""
    from render.rays.sanity import AXIS_DIRECTIONS, back_face_fraction

    out = []
    for i, view in enumerate(scene.views):
        look = np.subtract(view.target_m, view.position_m)
        directions = np.vstack([AXIS_DIRECTIONS, look])
        fraction = back_face_fraction(bvh, triangles_m, np.asarray(view.position_m), directions, SOLID_PROBE_M)
        if fraction > 0.5:
            out.append(
                Problem(
                    str(scene.path),
                    f"views[{i}].position_m",
                    f"the camera of view {view.name!r} seems to be inside a solid: {round(fraction * 7)} of 7 rays "
                    f"from it meet the inside of a surface within {SOLID_PROBE_M:g} m",
                )
            )
    return out


def dark_views(scene: Scene, study) -> list[Problem]:
    """Views that see no surface lit by the scene's luminaires (their own lamps): every pixel of
    a :data:`PREVIEW_WIDTH_PX`-wide render at one sample per pixel has luminance 0. Nothing is
    said for a scene without luminaires. ``study``: a :class:`render.study.Study` of ``scene``."""
    if not scene.luminaires:
        return []
    out = []
    for i, view in enumerate(scene.views):
        preview = study.render_view(view.name, None, width_px=PREVIEW_WIDTH_PX, samples_per_pixel=1)
        if not np.any(preview.colorimetry.luminance_cd_m2 > 0.0):
            out.append(
                Problem(
                    str(scene.path),
                    f"views[{i}]",
                    f"view {view.name!r} sees no surface the luminaires light (a {preview.camera.width_px}×"
                    f"{preview.camera.height_px}-pixel preview is black): check its position_m and target_m",
                )
            )
    return out


def mesh_features_ignored(scene: Scene) -> list[Problem]:
    """A ``mesh`` geometry whose file has textures, texture coordinates or vertex colours:
    lampcast draws its surfaces in the materials the scene gives and ignores those."""
    out = []
    for o in scene.objects:
        mesh = o.params.get("_mesh") if o.kind == "mesh" else None
        if mesh is not None and mesh.ignored:
            out.append(
                Problem(
                    str(scene.path),
                    join(o.where, "file"),
                    f"{mesh.path.rsplit('/', 1)[-1]} has {', '.join(mesh.ignored)}, which lampcast ignores: "
                    "surfaces take the materials of `material` and `materials`",
                )
            )
    return out


def scene_warnings(scene: Scene, mesh: TriangleMesh | None = None) -> list[Problem]:
    """Every warning about ``scene``, in the order of the list in ``scenes/README.md``. The
    checks that cast rays build the scene's BVH (:class:`render.study.Study`) over ``mesh``, the
    scene already compiled (default: compiled here)."""
    from render.study import Study

    study = Study(scene)
    if mesh is not None:
        study.mesh = mesh  # the Study's cached compile, given rather than made again
    return [
        *narrow_fields_of_view(scene),
        *clashing_view_names(scene),
        *coincident_luminaires(scene),
        *outside_street(scene),
        *cameras_inside_solids(scene, study.mesh.triangles_m, study.bvh),
        *setup_lumens_for_every_group(scene),
        *dark_views(scene, study),
        *mesh_features_ignored(scene),
    ]
