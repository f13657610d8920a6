"""Warnings of a checked scene: likely mistakes that are not errors.

:func:`scene_warnings` looks at a scene that loaded without problems for values that are
allowed but probably not meant (a field of view in radians typed as degrees, ...). Each
warning is a :class:`~render.errors.Problem` naming the file and the key path, like an error;
``lampcast check`` prints them and still exits 0. The warnings are listed in
``scenes/README.md``.
"""

from __future__ import annotations

import math
from dataclasses import dataclass
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
    "SURELY_LIT_LX",
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


def cameras_inside_solids(scene: Scene, triangles_m: np.ndarray, bvh=None, soup=None) -> list[Problem]:
    """Views whose camera stands inside a solid: of seven probe rays from the camera (the six
    axis directions and the view direction) more than half meet a back face within
    :data:`SOLID_PROBE_M` (:func:`render.rays.sanity.back_face_fraction`). ``triangles_m``: the
    compiled scene. The rays are first tested against every triangle with numpy
    (:func:`render.rays.sanity.robust_back_face_count`); only a view whose count those cannot
    settle asks the BVH, ``bvh`` (built when first needed if a callable or None)."""
    from render.rays.sanity import AXIS_DIRECTIONS, Soup, back_face_fraction, robust_back_face_count

    soup = soup if soup is not None else Soup.of(triangles_m)
    out = []
    for i, view in enumerate(scene.views):
        look = np.subtract(view.target_m, view.position_m)
        directions = np.vstack([AXIS_DIRECTIONS, look])
        sure, unsure = robust_back_face_count(soup, np.asarray(view.position_m), directions, SOLID_PROBE_M)
        n = directions.shape[0]
        if 2 * sure > n or 2 * (sure + unsure) <= n:
            fraction = sure / n  # the verdict is settled; the count is exact when it warns
            if 2 * sure > n and unsure:
                fraction = _bvh_fraction(bvh, triangles_m, view, directions, back_face_fraction)
        else:
            fraction = _bvh_fraction(bvh, triangles_m, view, directions, back_face_fraction)
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


def _bvh_fraction(bvh, triangles_m, view, directions, back_face_fraction) -> float:
    if bvh is None or callable(bvh):
        bvh = bvh() if callable(bvh) else _build_bvh(triangles_m)
    return back_face_fraction(bvh, triangles_m, np.asarray(view.position_m), directions, SOLID_PROBE_M)


def _build_bvh(triangles_m: np.ndarray):
    from render.rays.bvh import build_bvh

    return build_bvh(triangles_m)


def dark_views(scene: Scene, study, mesh: TriangleMesh | None = None, soup=None) -> list[Problem]:
    """Views that see no surface lit by the scene's luminaires (their own lamps): every pixel of
    a :data:`PREVIEW_WIDTH_PX`-wide render at one sample per pixel has luminance 0. Nothing is
    said for a scene without luminaires. ``study``: a :class:`render.study.Study` of ``scene``,
    or a callable making one. With ``mesh`` (the compiled scene) a view is first looked at
    without the renderer (:class:`_LitProof`): when one of its preview's samples is
    surely lit the preview is not black; only the other views are rendered."""
    if not scene.luminaires:
        return []
    proof = _LitProof.of(scene, mesh, soup) if mesh is not None else None
    out = []
    for i, view in enumerate(scene.views):
        if proof is not None and proof.view_lit(view):
            continue
        if callable(study):
            study = study()
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


#: A sample counts as surely lit when a luminaire gives it at least this illuminance, lx, by a
#: lower bound: ten times the renderer's culling bound (render.light.integrator.NEGLIGIBLE_LX,
#: 1e-3 lx), so no luminaire it counts is culled.
SURELY_LIT_LX = 1e-2
#: Margins of the lower bound: cosines, angles (degrees) and the luminous response of a
#: material under a lamp relative to a white one's (common practice, no source: far above the
#: renderer's float32 rounding).
_COS_MARGIN = 1e-3
_ANGLE_MARGIN_DEG = 1e-2
_RESPONSE_MIN = 1e-4
#: Points nearer a luminaire than this, m, prove nothing (the direction's rounding grows
#: as the distance shrinks).
_NEAR_M = 0.1
#: Distance kept from a luminous opening's centre beyond its half diagonal, m (the opening's
#: rectangle is drawn 2 mm below the centre: render.light.integrator.emitter_triangles).
_OPENING_MARGIN_M = 0.01
#: Preview samples looked at per batch, and shadow segments tested per batch at most.
_BATCH = 48
_SHADOW_RAYS = 32


@dataclass
class _LitProof:
    """What :meth:`view_lit` needs: the scene, its triangles, its luminaires under no setup and
    which (material, luminaire) pairs give a luminance above 0."""

    scene: Scene
    mesh: TriangleMesh
    soup: object
    lights: object
    responds: np.ndarray  # (materials, luminaires) bool

    @classmethod
    def of(cls, scene: Scene, mesh: TriangleMesh, soup=None) -> _LitProof | None:
        """None where a view must be rendered anyway: a carriageway shaded by an r-table (its
        reading and its coefficients are the renderer's)."""
        sections = ([scene.street] if scene.street is not None else []) + [r.section for r in scene.roads]
        if any(getattr(s, "r_table_file", None) is not None for s in sections):
            return None
        from render.colour.lamps import get_lamp
        from render.colour.materials import get_material, material_library
        from render.colour.observers import cmfs_xyz
        from render.light.luminaires import luminaire_set
        from render.rays.sanity import Soup

        lights = luminaire_set(scene, None)
        lib = material_library()
        rho = np.array([get_material(m, lib, source=str(scene.path)).reflectance for m in mesh.material_names])
        ybar = cmfs_xyz()[:, 1]
        spd: dict[str, np.ndarray] = {}
        responds = np.zeros((len(mesh.material_names), lights.n_luminaires), bool)
        for k in range(lights.n_luminaires):
            ch = lights.channels[int(lights.channel[k])]
            if not (ch.dimming > 0.0 and lights.scale[k] > 0.0):
                continue
            if ch.lamp not in spd:
                spd[ch.lamp] = get_lamp(ch.lamp, base_dir=scene.base_dir, source=str(scene.path)).spd
            white = float(np.sum(spd[ch.lamp] * ybar))
            responds[:, k] = white > 0.0 and (rho * spd[ch.lamp] * ybar).sum(axis=1) >= _RESPONSE_MIN * white
        # A specular layer reflecting everything leaves its base no light (render.light.gloss).
        gloss = getattr(mesh, "material_gloss", None)
        if gloss is not None:
            responds[np.asarray(gloss)[:, 0] >= 1.0 - 1e-6, :] = False
        return cls(scene, mesh, soup if soup is not None else Soup.of(mesh.triangles_m), lights, responds)

    def view_lit(self, view) -> bool:
        """Whether one sample of the view's preview is surely lit (False: not known)."""
        w, h = self.preview_size(view)
        n = w * h
        order = np.argsort((np.arange(n) * 0.6180339887498949) % 1.0, kind="stable")
        for b0 in range(0, n, _BATCH):
            if np.any(self.lit_samples(view, order[b0 : b0 + _BATCH], most=_SHADOW_RAYS)):
                return True
        return False

    @staticmethod
    def preview_size(view) -> tuple[int, int]:
        """(width, height) of the view's preview, pixels, as :meth:`render.study.Study.camera`
        makes it."""
        w = PREVIEW_WIDTH_PX
        return w, max(1, round(view.height_px * w / view.width_px))

    def lit_samples(self, view, pixels: np.ndarray, most: int | None = None) -> np.ndarray:
        """(len(pixels),) whether the preview's sample of each flat pixel index is surely lit;
        ``most``: shadow segments tested at most (the brightest candidates first)."""
        from render.rays.sanity import probe_rays, sample_rays

        w, h = self.preview_size(view)
        far = 10.0 * (1.0 + float(np.ptp(self.soup.centre, axis=0).max()) + float(np.abs(view.position_m).max()))
        o, d = sample_rays(view.position_m, view.target_m, view.hfov_deg, w, h, self.scene.render.seed, pixels)
        probes = probe_rays(self.soup, o, d, far)
        ok = np.nonzero(probes.robust & (probes.triangle >= 0))[0]
        out = np.zeros(len(pixels), bool)
        if ok.size:
            lit = self._lit(o[ok], d[ok], probes.triangle[ok], probes.t[ok], probes.u[ok], probes.v[ok], most)
            out[ok[lit]] = True
        return out

    def _lit(self, o, d, tri, t, u, v, most: int | None) -> np.ndarray:
        """(S,) which of these camera samples (robust closest hits) are surely lit."""
        from render.rays.sanity import segment_clear

        L = self.lights
        mesh = self.mesh
        p = o + t[:, None] * d
        # No luminous opening between the eye and the hit.
        reach = 0.5 * np.hypot(L.opening_m[:, 0], L.opening_m[:, 1]) + _OPENING_MARGIN_M
        rel = L.position_m[None, :, :] - o[:, None, :]
        along = np.clip(np.einsum("skc,sc->sk", rel, d), 0.0, t[:, None])
        gap = np.linalg.norm(rel - along[..., None] * d[:, None, :], axis=2)
        clear_view = np.all(gap > reach[None, :], axis=1)
        # Normals as the renderer's hit shading makes them, turned toward the eye; a shading
        # normal it might replace by the geometric one, or find zero, proves nothing.
        tris = mesh.triangles_m[tri]
        g = np.cross(tris[:, 1] - tris[:, 0], tris[:, 2] - tris[:, 0])
        g /= np.linalg.norm(g, axis=1, keepdims=True)
        g = np.where((np.einsum("sc,sc->s", g, d) > 0.0)[:, None], -g, g)
        vn = mesh.normals[tri]
        n = (1.0 - u - v)[:, None] * vn[:, 0] + u[:, None] * vn[:, 1] + v[:, None] * vn[:, 2]
        length = np.linalg.norm(n, axis=1, keepdims=True)
        n = np.divide(n, length, out=np.zeros_like(n), where=length > 0)
        n = np.where((np.einsum("sc,sc->s", n, d) > 0.0)[:, None], -n, n)
        usable = clear_view & (np.einsum("sc,sc->s", n, d) < -_COS_MARGIN)
        material = mesh.material_id[tri]
        cand_s, cand_e, cand_l, cand_len = [], [], [], []
        for k in range(L.n_luminaires):
            dv = p - L.position_m[k]
            dist = np.linalg.norm(dv, axis=1)
            lvec = -dv / dist[:, None]
            cos_s = np.einsum("sc,sc->s", n, lvec)
            cos_g = np.einsum("sc,sc->s", g, lvec)
            e = L.scale[k] * self._intensity_lower_bound(k, dv) * (cos_s - _COS_MARGIN) / (dist * dist * (1 + 1e-6))
            good = usable & self.responds[material, k] & (np.abs(cos_g) > _COS_MARGIN) & (e >= SURELY_LIT_LX)
            good &= dist >= _NEAR_M
            good = np.nonzero(good)[0]
            cand_s.append(good)
            cand_e.append(e[good])
            cand_l.append(lvec[good])
            cand_len.append(dist[good] - 0.5 * float(np.hypot(*L.opening_m[k])))
        s_idx = np.concatenate(cand_s)
        out = np.zeros(len(t), bool)
        if s_idx.size == 0:
            return out
        best = np.argsort(-np.concatenate(cand_e), kind="stable")[:most]
        s_idx = s_idx[best]
        lvec = np.concatenate(cand_l)[best]
        # The shadow ray's origin: off the surface on the luminaire's side (the renderer's
        # 1e-4 m offset, render.light.integrator.SURFACE_OFFSET_M); the segment stops short of
        # the opening by its half diagonal only, less than the renderer's clearance.
        side = np.sign(np.einsum("sc,sc->s", g[s_idx], lvec))
        origin = p[s_idx] + (1e-4 * side)[:, None] * g[s_idx]
        clear = segment_clear(self.soup, origin, lvec, np.concatenate(cand_len)[best], tri[s_idx])
        out[s_idx[clear]] = True
        return out

    def _intensity_lower_bound(self, k: int, dv: np.ndarray) -> np.ndarray:
        """(S,) a lower bound of luminaire k's interpolated intensity (cd, before its scale)
        toward offsets ``dv`` (luminaire to points): the least table value of the cells within
        :data:`_ANGLE_MARGIN_DEG` of the direction, 0 near or beyond the measured γ range."""
        from render.light.photometry.model import local_to_c_gamma

        L = self.lights
        t = int(L.table[k])
        cg = L.c_grid[t, : L.n_c[t]]
        gg = L.g_grid[t, : L.n_g[t]]
        cd = L.cd_table[t, : L.n_c[t], : L.n_g[t]]
        c, gamma = local_to_c_gamma(dv @ L.rotation[k])
        m = _ANGLE_MARGIN_DEG
        out = np.zeros(dv.shape[0])
        inside = np.nonzero((gamma >= gg[0] + m) & (gamma <= gg[-1] - m))[0]
        if inside.size == 0:
            return out
        g = gamma[inside]
        ci = c[inside] % 360.0
        # The nodes of every cell within the margin: with the margin far below the grid's
        # steps, the nodes at or below x - m, at or above x + m and the one after the first.
        j0 = np.clip(np.searchsorted(gg, g - m, "right") - 1, 0, gg.size - 1)
        j1 = np.clip(np.searchsorted(gg, g + m, "left"), 0, gg.size - 1)
        i0 = np.clip(np.searchsorted(cg, ci - m, "right") - 1, 0, cg.size - 1)
        i1 = np.clip(np.searchsorted(cg, ci + m, "left"), 0, cg.size - 1)
        least = np.full(g.size, np.inf)
        for i in (i0, np.minimum(i0 + 1, i1), i1):
            for j in (j0, np.minimum(j0 + 1, j1), j1):
                least = np.minimum(least, cd[i, j])
        # Near the seam of C, or over a partial C range, every C of those γ nodes.
        seam = (ci < m) | (ci > 360.0 - m) | (cg.size < 2) | (cg[-1] < 360.0 - m)
        if np.any(seam):
            column = cd.min(axis=0)
            least = np.where(
                seam,
                np.minimum(least, np.minimum(column[j0], np.minimum(column[j1], column[np.minimum(j0 + 1, j1)]))),
                least,
            )
        # A grid finer than the margin: no bound claimed.
        least = np.where((i1 - i0 > 2) | (j1 - j0 > 2), 0.0, least)
        out[inside] = least
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
    checks that cast rays test a few rays against ``mesh``, the scene already compiled
    (default: compiled here), with numpy; where those cannot settle a verdict they render
    through a :class:`render.study.Study` (its BVH and preview), made only then."""
    from render.rays.sanity import Soup

    if mesh is None:
        from render.geometry.build import compile_scene

        mesh = compile_scene(scene)
    made = {}

    def study():
        if "study" not in made:
            from render.study import Study

            made["study"] = Study(scene)
            made["study"].mesh = mesh  # the Study's cached compile, given rather than made again
        return made["study"]

    soup = Soup.of(mesh.triangles_m)
    return [
        *narrow_fields_of_view(scene),
        *clashing_view_names(scene),
        *coincident_luminaires(scene),
        *outside_street(scene),
        *cameras_inside_solids(scene, mesh.triangles_m, lambda: study().bvh, soup),
        *setup_lumens_for_every_group(scene),
        *dark_views(scene, study, mesh, soup),
        *mesh_features_ignored(scene),
    ]
