"""Tests for render.geometry.shapes (primitives, transforms), render.geometry.objfile (the OBJ
reader) and render.geometry.objects (street objects and their parameter declarations).

Check values come from analytic geometry; each check names its source beside it. Closedness
and orientation are checked independently of the implementation: vertices are matched by
coordinate, and every directed edge a->b must be matched by exactly one b->a (a closed,
consistently oriented 2-manifold); outwardness by the divergence theorem (signed volume > 0).
"""

from __future__ import annotations

import math
from collections import Counter
from pathlib import Path

import numpy as np
import pytest
from fuzzing import time_limit

from render.errors import InputError
from render.geometry import objects as O
from render.geometry import shapes as S
from render.geometry.mesh import face_normals, flat_normals
from render.geometry.objfile import load_obj

DATA = Path(__file__).parent / "data" / "obj"


# ---------------------------------------------------------------------------------------------
# Independent helpers
# ---------------------------------------------------------------------------------------------


def _directed_edges(parts) -> Counter:
    t = np.concatenate([p.triangles_m for p in (parts if isinstance(parts, list) else [parts])])
    keys = [tuple(v) for v in np.round(t.reshape(-1, 3), 9)]
    ids: dict = {}
    idx = np.array([ids.setdefault(k, len(ids)) for k in keys]).reshape(-1, 3)
    edges = Counter()
    for a, b, c in idx:
        for u, v in ((a, b), (b, c), (c, a)):
            edges[(u, v)] += 1
    return edges


def assert_closed(parts):
    """Every edge used by exactly two triangles, in opposite directions (closed 2-manifold with
    consistent orientation; e.g. de Berg et al., Computational Geometry, ch. 2, half-edges)."""
    edges = _directed_edges(parts)
    for (u, v), n in edges.items():
        assert n == 1, f"edge {u}-{v} used {n} times in the same direction"
        assert edges.get((v, u), 0) == 1, f"edge {u}-{v} has no opposite partner"


def assert_balanced(parts):
    """Weaker form for unions of closed solids that may share edges: every directed edge a->b
    occurs as often as b->a (each closed oriented surface contributes a balanced edge set)."""
    edges = _directed_edges(parts)
    for (u, v), n in edges.items():
        assert edges.get((v, u), 0) == n, f"edge {u}-{v}: {n} one way, {edges.get((v, u), 0)} the other"


def tri_areas(t):
    return 0.5 * np.linalg.norm(np.cross(t[:, 1] - t[:, 0], t[:, 2] - t[:, 0]), axis=1)


def all_tris(parts):
    return np.concatenate([p.triangles_m for p in parts])


def all_normals(parts):
    return np.concatenate([p.normals for p in parts])


def assert_sane(parts):
    t, n = all_tris(parts), all_normals(parts)
    assert np.all(np.isfinite(t)) and np.all(np.isfinite(n))
    assert np.allclose(np.linalg.norm(n, axis=-1), 1.0, atol=1e-9)
    assert np.all(tri_areas(t) > 0)
    # Shading normals on the front side of their triangle (within 90 degrees of the face normal).
    fn = np.cross(t[:, 1] - t[:, 0], t[:, 2] - t[:, 0])
    assert np.all(np.einsum("fvk,fk->fv", n, fn) > 0)


def polygon_area(n: int, r: float) -> float:
    """Area of the regular n-gon inscribed in a circle of radius r: (n/2) r² sin(2π/n)
    (elementary geometry: n isosceles triangles with apex angle 2π/n)."""
    return 0.5 * n * r * r * math.sin(2 * math.pi / n)


# ---------------------------------------------------------------------------------------------
# Boxes
# ---------------------------------------------------------------------------------------------


@pytest.mark.parametrize("yaw", [0.0, 33.0])
def test_box_closed_volume_area(yaw):
    w, d, h = 2.0, 3.0, 0.5
    parts = S.box(centre_m=(1.0, -2.0, 0.25), size_m=(w, d, h), yaw_deg=yaw)
    assert_closed(parts)
    assert_sane(parts)
    assert S.count_triangles(parts) == 12
    # Analytic: V = w d h, A = 2(wd + wh + dh).
    assert S.signed_volume_m3(parts) == pytest.approx(w * d * h, rel=1e-12)
    assert S.surface_area_m2(parts) == pytest.approx(2 * (w * d + w * h + d * h), rel=1e-12)
    # Outward: each face normal points away from the centre.
    t = all_tris(parts)
    fn = np.cross(t[:, 1] - t[:, 0], t[:, 2] - t[:, 0])
    assert np.all(np.einsum("ij,ij->i", fn, t.mean(axis=1) - [1.0, -2.0, 0.25]) > 0)


def test_box_min_max_and_face_slots():
    parts = S.box(min_m=(0, 0, 0), max_m=(1, 2, 3), face_slots={"+z": "lid"})
    lo, hi = S.bounds_m(parts)
    assert np.array_equal(lo, [0, 0, 0]) and np.array_equal(hi, [1, 2, 3])
    lid = [p for p in parts if p.slot == "lid"][0]
    assert lid.n_triangles == 2 and np.allclose(lid.normals, [0, 0, 1])
    assert S.signed_volume_m3(parts) == pytest.approx(6.0, rel=1e-12)  # analytic 1·2·3


@pytest.mark.parametrize(
    "kwargs, word",
    [
        (dict(centre_m=(0, 0, 0), size_m=(1, -1, 1)), "size_m"),
        (dict(centre_m=(0, 0, 0), size_m=(1, 1, float("nan"))), "size_m"),
        (dict(min_m=(0, 0, 0), max_m=(1, 0, 1)), "max_m"),
        (dict(centre_m=(0, 0, 0)), "either"),
    ],
)
def test_box_bad_arguments(kwargs, word):
    with pytest.raises(ValueError, match=word):
        S.box(**kwargs)


# ---------------------------------------------------------------------------------------------
# Cylinders, frustums, cones, lathe
# ---------------------------------------------------------------------------------------------


@pytest.mark.parametrize("n", [3, 8, 24])
def test_cylinder_closed_exact_polygon_volume(n):
    r, h = 0.4, 1.5
    parts = S.cylinder((0, 0, 0), (0, 0, h), r, segments=n)
    assert_closed(parts)
    assert_sane(parts)
    # Analytic prism over the inscribed n-gon: V = (n/2) r² sin(2π/n) h
    # = π r² h · sin(2π/n)·n/(2π); A = 2·(n-gon area) + n·(2 r sin(π/n))·h.
    assert S.signed_volume_m3(parts) == pytest.approx(polygon_area(n, r) * h, rel=1e-12)
    side = n * 2 * r * math.sin(math.pi / n) * h
    assert S.surface_area_m2(parts) == pytest.approx(2 * polygon_area(n, r) + side, rel=1e-12)
    # Tessellation error bound: the inscribed prism is smaller than π r² h, by at most the
    # factor sin(2π/n)·n/(2π).
    assert S.signed_volume_m3(parts) <= math.pi * r * r * h


def test_cylinder_oblique_axis_and_smooth_side_normals():
    p0, p1, r, n = np.array([1.0, 2.0, 0.5]), np.array([3.0, -1.0, 2.0]), 0.3, 16
    parts = S.cylinder(p0, p1, r, segments=n, slot="pole", cap_slot="cap")
    assert {p.slot for p in parts} == {"pole", "cap"}
    assert_closed(parts)
    h = np.linalg.norm(p1 - p0)
    assert S.signed_volume_m3(parts) == pytest.approx(polygon_area(n, r) * h, rel=1e-12)  # analytic
    side = [p for p in parts if p.slot == "pole"][0]
    a = (p1 - p0) / h
    v = side.triangles_m.reshape(-1, 3) - p0
    radial = v - np.outer(v @ a, a)
    # Smooth side normals are the exact radial unit vectors at each vertex (cylinder geometry).
    assert np.allclose(side.normals.reshape(-1, 3), radial / np.linalg.norm(radial, axis=1, keepdims=True), atol=1e-12)


def test_cylinder_start_dir_touches_ground():
    parts = S.cylinder((0, -0.1, 0.3), (0, 0.1, 0.3), 0.3, segments=13, start_dir=(0, 0, -1))
    assert S.bounds_m(parts)[0][2] == pytest.approx(0.0, abs=1e-15)


@pytest.mark.parametrize("r0, r1", [(0.5, 0.2), (0.2, 0.5), (0.5, 0.0)])
def test_frustum_and_cone_volume(r0, r1):
    n, h = 12, 2.0
    parts = S.frustum((0, 0, 0), (0, 0, h), r0, r1, segments=n)
    assert_closed(parts)
    assert_sane(parts)
    # Frustum of a pyramid with similar n-gon ends (Heron): V = h/3 (A0 + A1 + sqrt(A0 A1)).
    a0, a1 = polygon_area(n, r0), polygon_area(n, r1)
    assert S.signed_volume_m3(parts) == pytest.approx(h / 3 * (a0 + a1 + math.sqrt(a0 * a1)), rel=1e-12)


def test_cone_helper_and_lathe_orientation_fixed():
    parts = S.cone((0, 0, 1), (0, 0, 4), 1.0, segments=10)
    assert S.signed_volume_m3(parts) == pytest.approx(polygon_area(10, 1.0) * 3 / 3, rel=1e-12)  # V = A h / 3
    # A profile listed top-to-bottom is turned round so that the surface still faces outward.
    down = S.lathe([[0.5, 2.0], [0.5, 0.0]], segments=9)
    assert_closed(down)
    assert S.signed_volume_m3(down) == pytest.approx(polygon_area(9, 0.5) * 2.0, rel=1e-12)


def test_lathe_bad_profile():
    with pytest.raises(ValueError, match="radii"):
        S.lathe([[-0.1, 0.0], [0.2, 1.0]])
    with pytest.raises(ValueError, match="segments"):
        S.cylinder((0, 0, 0), (0, 0, 1), 0.1, segments=2)
    with pytest.raises(ValueError, match="radius_m"):
        S.cylinder((0, 0, 0), (0, 0, 1), float("inf"))
    with pytest.raises(ValueError, match="differ"):
        S.cylinder((0, 0, 0), (0, 0, 0), 0.1)


# ---------------------------------------------------------------------------------------------
# Spheres, ellipsoids
# ---------------------------------------------------------------------------------------------


def test_icosahedron_volume_exact():
    r = 1.7
    parts = S.sphere((0.5, 0, 0), r, subdivisions=0)
    assert_closed(parts)
    assert S.count_triangles(parts) == 20
    # Regular icosahedron of circumradius R has edge a = R / sin(2π/5) and volume
    # V = (5/12)(3 + √5) a³ (standard polyhedron formulas).
    a = r / math.sin(2 * math.pi / 5)
    assert S.signed_volume_m3(parts) == pytest.approx(5 / 12 * (3 + math.sqrt(5)) * a**3, rel=1e-12)


@pytest.mark.parametrize(
    "method, kw",
    [("ico", dict(subdivisions=1)), ("ico", dict(subdivisions=3)), ("uv", dict(segments=8)), ("uv", dict(segments=24))],
)
def test_sphere_within_tessellation_bounds(method, kw):
    c, r = np.array([1.0, -2.0, 3.0]), 0.8
    parts = S.sphere(c, r, method=method, **kw)
    assert_closed(parts)
    assert_sane(parts)
    t = all_tris(parts)
    # All vertices on the sphere, smooth normals radial (definition of the sphere).
    v = t.reshape(-1, 3) - c
    assert np.allclose(np.linalg.norm(v, axis=1), r, rtol=1e-12)
    assert np.allclose(all_normals(parts).reshape(-1, 3), v / r, atol=1e-12)
    # Bounds: an inscribed convex polyhedron lies inside the sphere and contains the ball of
    # its inradius (the least distance from the centre to a face plane), so
    # 4/3 π r_in³ < V < 4/3 π r³.
    fn = face_normals(t)
    r_in = np.min(np.einsum("ij,ij->i", fn, t[:, 0] - c))
    vol = S.signed_volume_m3(parts)
    assert 4 / 3 * math.pi * r_in**3 < vol < 4 / 3 * math.pi * r**3
    if method == "ico" and kw["subdivisions"] == 3:
        assert vol == pytest.approx(4 / 3 * math.pi * r**3, rel=0.01)


def test_ellipsoid_is_scaled_sphere():
    radii = np.array([1.0, 2.0, 0.5])
    unit = S.sphere((0, 0, 0), 1.0, subdivisions=2)
    ell = S.ellipsoid((0, 0, 0), radii, subdivisions=2)
    assert_closed(ell)
    # A linear map scales volume by its determinant (a·b·c).
    assert S.signed_volume_m3(ell) == pytest.approx(np.prod(radii) * S.signed_volume_m3(unit), rel=1e-12)
    # Normal of x²/a² + y²/b² + z²/c² = 1 is the gradient (x/a², y/b², z/c²).
    p = ell[0].triangles_m.reshape(-1, 3)
    g = p / radii**2
    assert np.allclose(ell[0].normals.reshape(-1, 3), g / np.linalg.norm(g, axis=1, keepdims=True), atol=1e-12)


# ---------------------------------------------------------------------------------------------
# Polygons, extrusions, sweeps, flat regions
# ---------------------------------------------------------------------------------------------

L_SHAPE = [(0, 0), (3, 0), (3, 1), (1, 1), (1, 2), (0, 2)]  # area 3·1 + 1·1 = 4, perimeter 10


@pytest.mark.parametrize("outline", [L_SHAPE, L_SHAPE[::-1]])
def test_extrude_concave_l_shape(outline):
    h = 2.5
    parts = S.extrude(outline, h, z0_m=0.3, slot="wall", top_slot="top")
    assert_closed(parts)
    assert_sane(parts)
    # Analytic: the L is a 3×1 plus a 1×1 rectangle (area 4, perimeter 10).
    assert abs(S.polygon_area_m2(outline)) == pytest.approx(4.0, rel=1e-15)
    assert S.signed_volume_m3(parts) == pytest.approx(4.0 * h, rel=1e-12)
    assert S.surface_area_m2(parts) == pytest.approx(2 * 4.0 + 10 * h, rel=1e-12)
    top = [p for p in parts if p.slot == "top"][0]
    assert np.allclose(top.normals, [0, 0, 1]) and np.allclose(top.triangles_m[..., 2], 0.3 + h)


def test_triangulate_star_polygon():
    # A 7-pointed star (concave): the triangle areas must add up to the shoelace area, and no
    # triangle may be clockwise.
    k = np.arange(14)
    rad = np.where(k % 2 == 0, 1.0, 0.4)
    pts = np.column_stack([rad * np.cos(np.pi * k / 7), rad * np.sin(np.pi * k / 7)])
    idx = S.triangulate_polygon(pts)
    assert idx.shape == (12, 3)
    t = pts[idx]
    signed = 0.5 * (
        (t[:, 1, 0] - t[:, 0, 0]) * (t[:, 2, 1] - t[:, 0, 1]) - (t[:, 1, 1] - t[:, 0, 1]) * (t[:, 2, 0] - t[:, 0, 0])
    )
    assert np.all(signed > 0)
    # Analytic area of the star: 14 triangles (centre, outer, inner) with sides 1 and 0.4 at
    # angle π/7: 14 · ½ · 1 · 0.4 · sin(π/7).
    assert signed.sum() == pytest.approx(14 * 0.5 * 0.4 * math.sin(math.pi / 7), rel=1e-12)


def test_triangulate_keeps_collinear_points():
    # A rectangle with extra points on its edges: n - 2 non-degenerate triangles.
    pts = [(0, 0), (1, 0), (2, 0), (2, 1), (1, 1), (0, 1)]
    idx = S.triangulate_polygon(pts)
    assert idx.shape == (4, 3)
    t = np.asarray(pts, float)[idx]
    e1, e2 = t[:, 1] - t[:, 0], t[:, 2] - t[:, 0]
    assert np.all(e1[:, 0] * e2[:, 1] - e1[:, 1] * e2[:, 0] > 0)


@pytest.mark.parametrize(
    "outline, word",
    [
        ([(0, 0), (2, 0), (0, 2), (2, 2)], "crosses"),  # bow tie
        ([(0, 0), (1, 0), (1, 0), (0, 1)], "repeats"),
        ([(0, 0), (1, 0), (2, 0)], "doubles back"),  # collinear: no area
        ([(0, 0), (2, 0), (2, 2), (1, 2), (1, 3), (1, 2), (0, 2)], "doubles back"),
    ],
)
def test_bad_polygons(outline, word):
    with pytest.raises(ValueError, match=word):
        S.extrude(outline, 1.0)


def test_sweep_rect_mitred_volume():
    # A mitred strip has area width × centreline length (the trapezoids at each joint gain and
    # lose the same triangles), so V = w · h · Σ segment lengths.
    path = [(0, 0), (4, 0), (4, 3), (6, 5)]
    w, h = 0.3, 0.15
    parts = S.sweep_rect(path, w, h, slot="kerb")
    assert_closed(parts)
    length = 4 + 3 + math.hypot(2, 2)
    assert S.signed_volume_m3(parts) == pytest.approx(w * h * length, rel=1e-12)
    with pytest.raises(ValueError, match="too sharp"):
        S.sweep_rect([(0, 0), (4, 0), (0, 0.1)], w, h)


def test_flat_region_and_strip():
    parts = S.flat_region(L_SHAPE[::-1], 0.01, slot="marking")
    t = all_tris(parts)
    assert np.allclose(all_normals(parts), [0, 0, 1]) and np.allclose(t[..., 2], 0.01)
    assert np.allclose(face_normals(t), [0, 0, 1])  # up-facing winding
    assert S.surface_area_m2(parts) == pytest.approx(4.0, rel=1e-12)  # L-shape area (analytic)
    st = S.strip((0, 0), (3, 4), 0.1)
    assert S.surface_area_m2(st) == pytest.approx(5 * 0.1, rel=1e-12)  # 3-4-5 triangle length × width


def test_quad_and_panel_facing():
    q = S.quad((0, 0, 0), (1, 0, 0), (1, 1, 0), (0, 1, 0))
    assert np.allclose(q[0].normals, [0, 0, 1])
    p = S.panel([(0, 0, 0), (0, 1, 0), (0, 1, 1), (0, 0, 1)], facing=(-1, 0, 0))
    assert np.allclose(p[0].normals, [-1, 0, 0])
    with pytest.raises(ValueError, match="degenerate"):
        S.quad((0, 0, 0), (1, 0, 0), (2, 0, 0), (3, 0, 0))


# ---------------------------------------------------------------------------------------------
# Transforms
# ---------------------------------------------------------------------------------------------


def test_transform_heading_analytic():
    parts = S.box(min_m=(1.0, -0.5, 0.0), max_m=(3.0, 0.5, 1.0))
    moved = S.transform_parts(parts, position_m=(10.0, 20.0, 0.5), heading_deg=90.0)
    lo, hi = S.bounds_m(moved)
    # Rotation by 90° about z maps (x, y) -> (-y, x): x in [1, 3] -> y in [1, 3].
    assert np.allclose(lo, [10 - 0.5, 20 + 1.0, 0.5]) and np.allclose(hi, [10 + 0.5, 20 + 3.0, 1.5])
    # A point at heading 30°: (cos 30°, sin 30°) (definition of the rotation matrix).
    p = S.transform_points([2.0, 0.0, 0.0], heading_deg=30.0)
    assert np.allclose(p, [2 * math.cos(math.pi / 6), 2 * math.sin(math.pi / 6), 0.0], atol=1e-15)
    # Normals turn with the geometry; volume is kept by rotation and scales by s³.
    top = [n for n in all_normals(moved).reshape(-1, 3)]
    assert any(np.allclose(n, [-1, 0, 0]) for n in top)  # the old -y face now faces -x
    assert S.signed_volume_m3(moved) == pytest.approx(2.0, rel=1e-12)
    assert S.signed_volume_m3(S.transform_parts(parts, heading_deg=17, scale=2.0)) == pytest.approx(16.0, rel=1e-12)


def test_affine_mirror_keeps_outward():
    parts = S.sphere((0, 0, 0), 1.0, subdivisions=1)
    mirrored = S.affine_parts(parts, np.diag([-1.0, 1.0, 1.0]))
    assert_closed(mirrored)
    assert S.signed_volume_m3(mirrored) == pytest.approx(S.signed_volume_m3(parts), rel=1e-12)
    assert_sane(mirrored)


def test_transform_bad_scale():
    with pytest.raises(ValueError, match="scale"):
        S.transform_parts([], scale=0.0)


# ---------------------------------------------------------------------------------------------
# OBJ reader
# ---------------------------------------------------------------------------------------------


def test_obj_cube_with_normals():
    parts = load_obj(DATA / "cube_vn.obj")
    assert [p.slot for p in parts] == ["paint"] and parts[0].n_triangles == 12
    assert_closed(parts)
    # Cube of side 2: V = 8, A = 24 (analytic); normals taken from the vn records (face-aligned).
    assert S.signed_volume_m3(parts) == pytest.approx(8.0, rel=1e-12)
    assert S.surface_area_m2(parts) == pytest.approx(24.0, rel=1e-12)
    assert np.allclose(parts[0].normals, flat_normals(parts[0].triangles_m))


def test_obj_quad_ignored_statements_and_up_axis():
    parts = load_obj(DATA / "quad.obj", slot_map={"marking_white": "marking"})
    assert [p.slot for p in parts] == ["marking"] and parts[0].n_triangles == 2
    assert S.surface_area_m2(parts) == pytest.approx(1.0, rel=1e-12)  # unit square
    assert np.allclose(parts[0].normals, [0, 0, 1])
    # y-up file: its +z becomes -y, scale 0.5 halves lengths (area × 0.25).
    yup = load_obj(DATA / "quad.obj", up_axis="y", scale=0.5)
    assert np.allclose(yup[0].normals, [0, -1, 0])
    assert np.allclose(face_normals(yup[0].triangles_m), [0, -1, 0])
    assert S.surface_area_m2(yup) == pytest.approx(0.25, rel=1e-12)
    assert np.allclose(S.bounds_m(yup)[1], [0.5, 0.0, 0.5])


def test_obj_negative_indices_and_materials():
    parts = load_obj(DATA / "cube_negative.obj")
    assert {p.slot: p.n_triangles for p in parts} == {"side": 8, "cap": 4}
    assert_closed(parts)
    assert S.signed_volume_m3(parts) == pytest.approx(1.0, rel=1e-12)  # unit cube


def test_obj_concave_face_ear_clipped():
    parts = load_obj(DATA / "concave_face.obj", default_slot="plate")
    assert parts[0].slot == "plate" and parts[0].n_triangles == 4
    assert S.surface_area_m2(parts) == pytest.approx(3.0, rel=1e-12)  # L-hexagon: 2·1 + 1·1
    assert np.allclose(face_normals(parts[0].triangles_m), [0, 0, 1])


@pytest.mark.parametrize(
    "name, line, words",
    [
        ("bad_number.obj", 3, "'x'"),
        ("nan_vertex.obj", 3, "finite"),
        ("short_vertex.obj", 2, "v x y z"),
        ("bad_index.obj", 5, "out of range"),
        ("bad_negative.obj", 4, "out of range"),
        ("zero_index.obj", 4, "start at 1"),
        ("bad_normal_index.obj", 5, "normal index"),
        ("short_face.obj", 4, "at least 3"),
        ("bad_reference.obj", 4, "face reference"),
        ("usemtl_no_name.obj", 4, "usemtl"),
        ("zero_normal.obj", 4, "zero length"),
        ("bowtie_face.obj", 5, "crosses itself"),
        ("not_utf8.obj", 4, "UTF-8"),
        ("no_faces.obj", None, "no faces"),
    ],
)
def test_obj_malformed(name, line, words):
    with pytest.raises(InputError) as info:
        load_obj(DATA / name)
    problem = info.value.problems[0]
    assert problem.source.endswith(name)
    assert problem.where == (f"line {line}" if line else "")
    assert words in problem.message


def test_obj_unreadable_and_several_problems(tmp_path):
    with pytest.raises(InputError, match="cannot read"):
        load_obj(tmp_path / "missing.obj")
    f = tmp_path / "two.obj"
    f.write_text("v 0 0 0\nv 1 0 q\nv 1 1 0\nf 1 2 3\nf 1 2 7\n")
    with pytest.raises(InputError) as info:
        load_obj(f)
    assert [p.where for p in info.value.problems] == ["line 2", "line 5"]


def test_obj_line_continuations(tmp_path):
    # A trailing backslash joins the next line (Wavefront OBJ spec, Appendix B1), also for a
    # comment. 60 000 continued lines (600 kB) used to take seconds (quadratic joining); the
    # result is checked here, not the time.
    n = 60_000
    lines = ["v 0 0 0", "v 1 0 0", "v 1 1 0", "v 0 1 0"]
    lines += ["# a comment continued over many lines \\"] + ["f 1 2 3 \\"] * n + ["end of the comment"]
    lines += ["f 1 \\", "  2 \\", "  3 4"]  # one quad whose references span three lines
    lines += ["v 0 0 q"]  # a mistake after the continuations: its line number counts every line
    f = tmp_path / "continued.obj"
    f.write_text("\n".join(lines) + "\n")
    with pytest.raises(InputError) as info:
        load_obj(f)
    assert [p.where for p in info.value.problems] == [f"line {len(lines)}"]
    f.write_text("\n".join(lines[:-1]) + "\n")
    (part,) = load_obj(f)
    assert part.n_triangles == 2 and S.surface_area_m2([part]) == pytest.approx(1.0, rel=1e-12)  # unit square
    # The whole face on continued lines, one reference per line, and a continuation at the end
    # of the file (joins nothing).
    refs = "".join(f"{k} \\\n" for k in (1, 2, 3))
    f.write_text("v 0 0 0\nv 1 0 0\nv 0 1 0\nf \\\n" + refs)
    assert load_obj(f)[0].n_triangles == 1


def test_obj_line_numbers_count_only_line_breaks(tmp_path):
    # A form feed or a Unicode line separator inside a line is not a line break for the line
    # numbers in messages (editors count LF, CRLF and CR).
    f = tmp_path / "ff.obj"
    f.write_bytes("v 0 0 0\x0c\r\nv 1 0 0\u2028\rv 0 1 q\nf 1 2 3\n".encode())
    with pytest.raises(InputError) as info:
        load_obj(f)
    assert [p.where for p in info.value.problems] == ["line 3"]


def test_obj_coordinates_and_normals_stay_finite(tmp_path):
    f = tmp_path / "big.obj"
    # Coordinates beyond the scene's extent after scaling: refused at their line.
    from render.limits import MAX_COORDINATE_M

    f.write_text(f"v 0 0 0\nv {MAX_COORDINATE_M * 2} 0 0\nv 0 1 0\nf 1 2 3\n")
    with pytest.raises(InputError) as info:
        load_obj(f)
    assert [p.where for p in info.value.problems] == ["line 2"]
    assert load_obj(f, scale=0.25)[0].n_triangles == 1
    f.write_text("v 0 0 0\nv 1e300 0 0\nv 0 1 0\nf 1 2 3\n")
    with pytest.raises(InputError):
        load_obj(f, scale=1e10)  # 1e310 is not finite
    # Normals of any finite length are normalised (1e300 squared overflows, 1e-300 underflows).
    for c in ("1e300", "1e-300", "5e-324"):
        f.write_text(f"v 0 0 0\nv 1 0 0\nv 0 1 0\nvn 0 0 {c}\nf 1//1 2//1 3//1\n")
        (part,) = load_obj(f)
        assert np.allclose(part.normals, [0.0, 0.0, 1.0], rtol=0, atol=1e-15), c


def test_obj_counts_are_bounded(tmp_path, monkeypatch):
    from render import limits

    f = tmp_path / "many.obj"
    f.write_text("v 0 0 0\nv 1 0 0\nv 0 1 0\nv 1 1 0\n" + "f 1 2 4 3\n" * 4)
    assert sum(p.n_triangles for p in load_obj(f)) == 8
    monkeypatch.setattr(limits, "MAX_TRIANGLES", 7)
    with pytest.raises(InputError) as info:
        load_obj(f)
    assert [p.where for p in info.value.problems] == ["line 8"] and "7" in info.value.problems[0].message
    monkeypatch.undo()
    # A face with more vertices than lampcast triangulates.
    n = limits.MAX_POLYGON_VERTICES + 1
    ring = "".join(f"v {math.cos(2 * math.pi * k / n)} {math.sin(2 * math.pi * k / n)} 0\n" for k in range(n))
    f.write_text(ring + "f " + " ".join(str(k + 1) for k in range(n)) + "\n")
    with pytest.raises(InputError) as info:
        load_obj(f)
    assert [p.where for p in info.value.problems] == [f"line {n + 1}"]
    f.write_text(ring + "f " + " ".join(str(k + 1) for k in range(n - 1)) + "\n")
    assert load_obj(f)[0].n_triangles == n - 3


def test_obj_hostile_file_names(tmp_path):
    with pytest.raises(InputError, match="NUL"):
        load_obj(tmp_path / "a\x00b.obj")
    for target in ("/dev/zero", tmp_path):
        with time_limit(10.0), pytest.raises(InputError, match="not a regular file"):
            load_obj(target)


# ---------------------------------------------------------------------------------------------
# Street objects
# ---------------------------------------------------------------------------------------------

CLOSED_KINDS = [
    "wheelie_bin",
    "tree",
    "hedge",
    "bollard",
    "bus_shelter",
    "sign",
    "pedestrian",
    "lamp_column",
    "house_front",
    "shop_front",
]


@pytest.mark.parametrize("kind", list(O.OBJECT_BUILDERS))
def test_objects_default_sane_and_grounded(kind):
    built = O.build_object(kind, {})
    assert_sane(built.parts)
    lo, hi = S.bounds_m(built.parts)
    assert lo[2] == pytest.approx(0.0, abs=1e-12)  # ground contact: min z == 0
    assert np.all(all_tris(built.parts)[..., 2] >= -1e-12)
    if kind in CLOSED_KINDS:
        # Unions of closed solids: balanced edges and positive enclosed volume (divergence theorem).
        assert_balanced(built.parts)
        assert S.signed_volume_m3(built.parts) > 0


@pytest.mark.parametrize("style", list(O.CAR_STYLES))
def test_car_dimensions_and_counts(style):
    # The style sizes are common practice, no source; the check is that the model's bounds
    # equal the requested overall size exactly.
    parts = O.car(style)
    assert {"body", "glass", "tyre", "lights", "tail_lights"} <= {p.slot for p in parts}
    lo, hi = S.bounds_m(parts)
    d = O.CAR_STYLES[style]
    assert np.allclose(hi - lo, [d["length_m"], d["width_m"], d["height_m"]], atol=1e-9)
    assert np.allclose((hi + lo)[:2], 0.0, atol=1e-9)  # centred on the ground-contact origin
    assert lo[2] == pytest.approx(0.0, abs=1e-12)  # tyres touch the ground
    assert 200 <= S.count_triangles(parts) <= 800
    # Glass faces outward: away from the car's vertical centre line at mid height.
    glass = [p for p in parts if p.slot == "glass"][0]
    c = glass.triangles_m.mean(axis=1) - [0.0, 0.0, d["height_m"] * 0.5]
    c[:, 0] *= 0.3  # the cabin is long: weigh the along-car offset less
    assert np.all(np.einsum("ij,ij->i", face_normals(glass.triangles_m), c) > 0)


def test_car_custom_size_and_bad_proportions():
    lo, hi = S.bounds_m(O.car("saloon", length_m=4.2, width_m=1.7, height_m=1.4))
    assert np.allclose(hi - lo, [4.2, 1.7, 1.4], atol=1e-9)
    with pytest.raises(O.ParameterError):
        O.car("hatchback", length_m=2.5, height_m=1.6)


@pytest.mark.parametrize("capacity", list(O.BIN_SIZES))
def test_bin_dimensions(capacity):
    # Sizes are common practice, no source; the model's bounds must equal them.
    parts = O.wheelie_bin(capacity)
    d = O.BIN_SIZES[capacity]
    lo, hi = S.bounds_m(parts)
    assert np.allclose(hi - lo, [d["depth_m"], d["width_m"], d["height_m"]], atol=1e-9)
    assert {p.slot for p in parts} == {"body", "lid", "wheels"}


@pytest.mark.parametrize("shape", ["sphere", "ellipsoid", "cone"])
def test_tree_dimensions(shape):
    parts = O.tree(2.0, 0.12, 1.5, shape, canopy_height_m=None if shape == "sphere" else 4.0, lumpiness=0.0)
    lo, hi = S.bounds_m(parts)
    height = 2.0 + (3.0 if shape == "sphere" else 4.0)
    assert hi[2] == pytest.approx(height, abs=1e-12)
    assert np.all(hi[:2] <= 1.5 + 1e-12)
    if shape == "cone":  # a lathe vertex lies at angle 0 on the base circle
        assert hi[0] == pytest.approx(1.5, abs=1e-12)
    canopy = [p for p in parts if p.slot == "canopy"][0]
    assert canopy.triangles_m[..., 2].min() == pytest.approx(2.0, abs=1e-12)  # clear stem height
    assert_closed(canopy)
    n = S.count_triangles(parts)
    assert (300 <= n <= 800) if shape != "cone" else (100 <= n <= 800)


def test_tree_lumpy_still_closed_and_checks():
    parts = O.tree(lumpiness=0.2, seed=3)
    canopy = [p for p in parts if p.slot == "canopy"][0]
    assert_closed(canopy)
    assert_sane(parts)
    with pytest.raises(O.ParameterError, match="trunk_radius_m"):
        O.tree(trunk_radius_m=2.0, canopy_radius_m=1.0)


def test_hedge_shelter_sign_pedestrian_dimensions():
    # Requested sizes must be the bounds (definition of each parameter in its docstring).
    lo, hi = S.bounds_m(O.hedge(5.0, 1.1, 0.7))
    assert np.allclose(hi - lo, [5.0, 0.7, 1.1], atol=1e-12)
    assert_closed(O.hedge(5.0, 1.1, 0.7))
    lo, hi = S.bounds_m(O.bus_shelter(5.0, 1.4, 2.6))
    assert np.allclose([lo, hi], [[-0.7, -2.5, 0.0], [0.7, 2.5, 2.6]], atol=1e-12)
    for shape in ("rect", "circle", "triangle"):
        parts = O.sign(2.5, 0.75, 0.75, shape)
        lo, hi = S.bounds_m(parts)
        assert hi[2] == pytest.approx(2.5, abs=1e-12) and hi[1] - lo[1] == pytest.approx(0.75, abs=1e-12)
        face = [p for p in parts if p.slot == "panel"][0]
        assert np.allclose(face.normals, [1, 0, 0])  # the sign face looks along +x
    ped = O.pedestrian(1.62)
    assert S.bounds_m(ped)[1][2] == pytest.approx(1.62, abs=1e-12)
    assert {p.slot for p in ped} == {"legs", "torso", "arms", "head"}
    assert S.bounds_m(O.bollard(1.0, 0.1))[1][2] == pytest.approx(1.0, abs=1e-12)


def test_house_and_shop_fronts():
    parts = O.house_front(7.0, 5.0, 9.0, roof_height_m=2.0, overhang_m=0.3)
    lo, hi = S.bounds_m(parts)
    # Facade at x = depth/2 with panels 3 cm proud, eaves 0.3 m beyond; ridge = eaves + roof.
    assert np.allclose(lo, [-4.5 - 0.3, -3.5, 0.0]) and np.allclose(hi, [4.5 - 0.03 + 0.3, 3.5, 7.0])
    assert {"facade", "window", "door", "roof"} <= {p.slot for p in parts}
    windows = [p for p in parts if p.slot == "window"][0]
    assert windows.n_triangles == 12 * 3  # 2 storeys × 2 windows, one replaced by the door
    shop = O.shop_front()
    assert {"facade", "window", "door", "fascia", "roof"} <= {p.slot for p in shop}
    with pytest.raises(O.ParameterError, match="window_height_m"):
        O.house_front(height_m=4.0, storeys=2, window_height_m=1.5)


def test_lamp_column_opening():
    col = O.lamp_column(height_m=5.0, outreach_m=0.8, arm_tilt_deg=10.0)
    o = col.opening
    assert np.allclose(o.centre_m, [0.8, 0.0, 5.0])
    t = math.radians(10.0)
    assert np.allclose(o.nadir, [math.sin(t), 0.0, -math.cos(t)])  # -z turned towards +x by the tilt
    assert np.dot(o.nadir, o.forward) == pytest.approx(0.0, abs=1e-15)
    lens = [p for p in col.parts if p.slot == "lens"][0]
    assert np.allclose(lens.normals.reshape(-1, 3), o.nadir)
    assert np.allclose(lens.triangles_m.reshape(-1, 3).mean(axis=0), o.centre_m)  # lens centred on it
    assert S.surface_area_m2(lens) == pytest.approx(o.size_m[0] * o.size_m[1], rel=1e-12)
    assert {p.slot for p in col.parts} == {"pole", "arm", "housing", "lens"}
    # Placement moves the anchor with the parts.
    placed = O.build_object("lamp_column", {"outreach_m": 1.0, "height_m": 6.0}).placed((5, 5, 0), heading_deg=90)
    assert np.allclose(placed.points_m["light_centre_m"], [5.0, 6.0, 6.0])
    post_top = O.lamp_column(outreach_m=0.0, arm_tilt_deg=0.0)
    assert "arm" not in {p.slot for p in post_top.parts}
    assert np.allclose(post_top.opening.nadir, [0, 0, -1])


# ---------------------------------------------------------------------------------------------
# Registry validation
# ---------------------------------------------------------------------------------------------


def test_validate_params_messages():
    assert O.validate_params("car", {"body_style": "van", "length_m": 5}) == []
    ((key, msg),) = O.validate_params("tre", {})
    assert key == "kind" and "did you mean 'tree'" in msg
    ((key, msg),) = O.validate_params("tree", {"canopy_raduis_m": 2.0})
    assert key == "canopy_raduis_m" and "did you mean 'canopy_radius_m'" in msg
    ((key, msg),) = O.validate_params("car", {"length_m": "long"})
    assert key == "length_m" and "number" in msg
    ((key, msg),) = O.validate_params("wheelie_bin", {"capacity_l": True})
    assert key == "capacity_l" and "whole number" in msg
    ((key, msg),) = O.validate_params("wheelie_bin", {"capacity_l": 200})
    assert "expected one of" in msg
    ((key, msg),) = O.validate_params("car", {"body_style": "hatchbak"})
    assert "did you mean 'hatchback'" in msg
    ((key, msg),) = O.validate_params("lamp_column", {"height_m": 0.5})
    assert key == "height_m" and ">= 1.5" in msg
    ((key, msg),) = O.validate_params("tree", {"trunk_height_m": 0})
    assert key == "trunk_height_m" and "> 0" in msg
    ((key, msg),) = O.validate_params("tree", {"trunk_radius_m": 1.5, "canopy_radius_m": 1.0})
    assert key == "trunk_radius_m"  # cross-check from the builder
    assert len(O.validate_params("hedge", {"length_m": -1, "heigt_m": 1})) == 2
    with pytest.raises(ValueError, match="unknown parameter"):
        O.build_object("bollard", {"colour": "red"})


def test_registry_specs_match_builders():
    import inspect

    for kind, entry in O.OBJECT_BUILDERS.items():
        sig = inspect.signature(entry.function)
        for spec in entry.params:
            assert spec.name in sig.parameters, (kind, spec.name)
            assert sig.parameters[spec.name].default == spec.default, (kind, spec.name)


def test_one_declaration_drives_signature_checks_and_registry():
    # The builders' signatures, their checks and the scene registry all come from the
    # ParamSpec declarations (common practice, no source: a single source of truth).
    import inspect

    sig = inspect.signature(O.tree)
    assert sig.parameters["canopy_shape"].kind is inspect.Parameter.POSITIONAL_OR_KEYWORD
    assert sig.parameters["lumpiness"].kind is inspect.Parameter.KEYWORD_ONLY
    assert sig.parameters["lumpiness"].default == O.tree.spec("lumpiness").default == 0.08
    # A direct call and a scene file's params are checked by the same rule, with the same words.
    ((key, msg),) = O.validate_params("lamp_column", {"height_m": 0.5})
    with pytest.raises(O.ParameterError) as err:
        O.lamp_column(height_m=0.5)
    assert (err.value.key, err.value.message) == (key, msg) == ("height_m", "must be >= 1.5 m, got 0.5")
    with pytest.raises(O.ParameterError, match="whole number"):
        O.house_front(storeys=2.5)
    with pytest.raises(O.ParameterError, match="expected one of"):
        O.sign(shape="hexagon")
    # Builder details are checked too but cannot be set from a scene file.
    with pytest.raises(O.ParameterError, match="pole_radius_m"):
        O.sign(pole_radius_m=0.0)
    assert "pole_radius_m" not in {p.name for p in O.OBJECT_BUILDERS["sign"].params}
    ((key, msg),) = O.validate_params("sign", {"pole_radius_m": 0.05})
    assert key == "pole_radius_m" and "unknown parameter" in msg
    # Values reach the body as plain Python numbers (a TOML integer for a float parameter).
    lo, hi = S.bounds_m(O.bus_shelter(np.int64(5), 1.4, 2.6))
    assert np.allclose(hi - lo, [1.4, 5.0, 2.6], atol=1e-12)
    # The generated docstring lists every parameter with its range and default.
    assert "height_m : float; m; 1.5 <= value <= 30; default 6.0" in O.lamp_column.__doc__


def test_parametric_refuses_a_second_declaration():
    spec = O.ParamSpec("size_m", "float", 1.0, "m", 0.0, 2.0)

    def with_default(size_m: float = 1.0):
        return size_m

    def misnamed(length_m: float):
        return length_m

    with pytest.raises(TypeError, match="default in the body"):
        O.parametric(spec)(with_default)
    with pytest.raises(TypeError, match="differ"):
        O.parametric(spec)(misnamed)
    with pytest.raises(ValueError, match="breaks its own declaration"):
        O.ParamSpec("size_m", "float", 3.0, "m", 0.0, 2.0)


def test_obj_bad_arguments():
    # Arguments, not file content: plain ValueError naming the argument.
    with pytest.raises(ValueError, match="scale"):
        load_obj(DATA / "quad.obj", scale=0.0)
    with pytest.raises(ValueError, match="up_axis"):
        load_obj(DATA / "quad.obj", up_axis="x")
