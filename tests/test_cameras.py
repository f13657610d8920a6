"""Pinhole camera: ray generation, sampling, projection and per-pixel angles."""

from __future__ import annotations

import math

import numpy as np
import pytest

from render.errors import InputError
from render.rays.cameras import (
    Camera,
    angle_to_deg,
    camera_rays,
    directions_at,
    iter_tiles,
    pixel_angular_size_deg,
    pixel_directions,
    pixel_solid_angle_sr,
    project,
    tile_pixels,
)


def make_camera(**kw):
    args = dict(position_m=(1.0, -2.0, 1.6), target_m=(30.0, 4.0, 0.5), hfov_deg=60.0, width_px=33, height_px=21)
    args.update(kw)
    return Camera(**args)


def unit(v):
    v = np.asarray(v, float)
    return v / np.linalg.norm(v, axis=-1, keepdims=True)


def angle_deg(a, b):
    return np.degrees(np.arccos(np.clip(np.sum(unit(a) * unit(b), axis=-1), -1, 1)))


# --------------------------------------------------------------------------------------------
# Pinhole geometry (analytic: perspective projection through a point onto a plane at unit
# distance, square pixels)
# --------------------------------------------------------------------------------------------


def test_centre_pixel_ray_points_at_target():
    cam = make_camera()  # odd width and height: a pixel centre lies on the optical axis
    o, d, p = camera_rays(cam, 1, 0, jitter=False)
    centre = (cam.height_px // 2) * cam.width_px + cam.width_px // 2
    np.testing.assert_allclose(d[p == centre][0], unit(np.subtract(cam.target_m, cam.position_m)), atol=1e-12)
    np.testing.assert_allclose(o, np.tile(cam.position_m, (len(o), 1)))
    np.testing.assert_allclose(np.linalg.norm(d, axis=1), 1.0, rtol=1e-14)


def test_horizontal_and_vertical_field_of_view():
    cam = make_camera(hfov_deg=75.0, width_px=40, height_px=30)
    fwd = unit(np.subtract(cam.target_m, cam.position_m))
    mid_y = cam.height_px / 2
    left = directions_at(cam, 0.0, mid_y)
    right = directions_at(cam, float(cam.width_px), mid_y)
    # Left and right image edges are hfov/2 from the axis, hfov apart.
    assert angle_deg(left, fwd) == pytest.approx(37.5, abs=1e-10)
    assert angle_deg(right, fwd) == pytest.approx(37.5, abs=1e-10)
    assert angle_deg(left, right) == pytest.approx(75.0, abs=1e-10)
    # Square pixels: tan(vfov/2) = tan(hfov/2) * H / W.
    top = directions_at(cam, cam.width_px / 2, 0.0)
    vfov = 2 * math.degrees(math.atan(math.tan(math.radians(37.5)) * 30 / 40))
    assert 2 * angle_deg(top, fwd) == pytest.approx(vfov, abs=1e-10)
    assert cam.vfov_deg == pytest.approx(vfov, abs=1e-12)


def test_pixel_zero_is_top_left_and_up_is_up():
    # With up = +z, image rows grow downwards and columns to the right of the viewing direction.
    cam = Camera(position_m=(0, 0, 0), target_m=(10, 0, 0), hfov_deg=90.0, width_px=8, height_px=6)
    d = pixel_directions(cam)
    assert d[0, 0, 2] > 0 and d[-1, 0, 2] < 0  # top row looks up, bottom row down
    assert d[0, 0, 1] > 0 and d[0, -1, 1] < 0  # looking along +x, +y is to the left
    # A rolled camera: up = +y makes image-up point along +y.
    rolled = Camera(position_m=(0, 0, 0), target_m=(10, 0, 0), up=(0, 1, 0), hfov_deg=90.0, width_px=8, height_px=6)
    assert pixel_directions(rolled)[0, 3, 1] > 0


def test_project_inverts_ray_generation():
    # The pixel coordinates of a point on a sample ray are that sample's image position.
    cam = make_camera()
    rng = np.random.default_rng(0)
    xy = np.column_stack([rng.uniform(0, cam.width_px, 200), rng.uniform(0, cam.height_px, 200)])
    d = directions_at(cam, xy[:, 0], xy[:, 1])
    pts = np.asarray(cam.position_m) + d * rng.uniform(0.5, 80.0, (200, 1))
    np.testing.assert_allclose(project(cam, pts), xy, atol=1e-9)
    # Behind the camera: NaN.
    behind = np.asarray(cam.position_m) - d[:3]
    assert np.all(np.isnan(project(cam, behind)))


def test_pixel_solid_angles_sum_to_the_image_pyramid():
    # Solid angle of a rectangular pyramid with full apex angles a, b:
    # 4 asin(sin(a/2) sin(b/2)) (standard result, e.g. the "solid angle" article of any
    # geometry handbook; derived from Girard's theorem).
    cam = make_camera(hfov_deg=100.0, width_px=64, height_px=36)
    omega = pixel_solid_angle_sr(cam)
    a = math.radians(cam.hfov_deg)
    b = math.radians(cam.vfov_deg)
    assert omega.sum() == pytest.approx(4 * math.asin(math.sin(a / 2) * math.sin(b / 2)), rel=1e-12)
    # A small pixel subtends about (area) cos^3(theta) / 1^2 (projected-area law dOmega =
    # dA cos(theta) / r^2 with r = 1 / cos(theta)).
    pitch = 2 * math.tan(a / 2) / cam.width_px
    d = pixel_directions(cam)
    fwd = unit(np.subtract(cam.target_m, cam.position_m))
    cos_t = d @ fwd
    np.testing.assert_allclose(omega, pitch**2 * cos_t**3, rtol=2e-3)
    size = pixel_angular_size_deg(cam)
    np.testing.assert_allclose(size, np.degrees(np.sqrt(omega)))
    # The centre pixel of a square grid subtends its pitch 2 tan(hfov/2) / W at unit distance
    # (to second order in the pitch).
    narrow = make_camera(hfov_deg=10.0, width_px=101, height_px=51)
    centre = math.degrees(2 * math.tan(math.radians(5.0)) / 101)
    assert pixel_angular_size_deg(narrow)[25, 50] == pytest.approx(centre, rel=1e-5)


def test_angle_to_direction():
    cam = make_camera(width_px=41, height_px=21)
    fwd = np.subtract(cam.target_m, cam.position_m)
    ang = angle_to_deg(cam, fwd)
    assert ang[10, 20] == pytest.approx(0.0, abs=1e-6)
    np.testing.assert_allclose(ang, angle_deg(pixel_directions(cam), fwd), atol=1e-9)


# --------------------------------------------------------------------------------------------
# Sampling
# --------------------------------------------------------------------------------------------


def test_same_seed_same_rays_different_seed_different_rays():
    cam = make_camera()
    a = camera_rays(cam, 4, seed=7)
    b = camera_rays(cam, 4, seed=7)
    c = camera_rays(cam, 4, seed=8)
    for x, y in zip(a, b):
        np.testing.assert_array_equal(x, y)
    assert not np.array_equal(a[1], c[1])
    np.testing.assert_array_equal(a[2], c[2])
    np.testing.assert_array_equal(a[2], np.repeat(np.arange(cam.n_pixels), 4))


def test_tiles_give_the_same_rays_as_the_whole_image():
    # The random stream of a pixel depends only on (seed, pixel, sample).
    cam = make_camera()
    whole_o, whole_d, whole_p = camera_rays(cam, 3, seed=11)
    parts = []
    for x0, y0, x1, y1 in iter_tiles(cam, 8):
        for block in (1, 4):
            _, d, p = camera_rays(cam, 3, seed=11, pixels=tile_pixels(cam, x0, y0, x1, y1, block_px=block))
            parts.append((p, d))
    seen = np.zeros(cam.n_pixels, int)
    by_pixel = whole_d.reshape(cam.n_pixels, 3, 3)
    for p, d in parts:
        np.testing.assert_array_equal(d.reshape(-1, 3, 3), by_pixel[p[::3]])
        seen[p[::3]] += 1
    np.testing.assert_array_equal(seen, 2)  # every pixel exactly once per tiling


@pytest.mark.parametrize("spp", [1, 3, 4, 9])
def test_stratified_jitter(spp):
    # Stratified sampling (Cook 1986): the samples of one pixel fall in distinct cells of the
    # n x n grid, n = ceil(sqrt(spp)), inside the pixel; over many pixels the sub-pixel
    # positions are uniform (mean 1/2, variance 1/12 of a uniform distribution; tolerances
    # of about 5 standard errors).
    cam = make_camera(width_px=60, height_px=40)
    _, d, p = camera_rays(cam, spp, seed=3)
    xy = project(cam, np.asarray(cam.position_m) + d)
    px = np.column_stack([p % cam.width_px, p // cam.width_px])
    frac = xy - px
    assert np.all(frac > -1e-9) and np.all(frac < 1 + 1e-9)
    n = math.ceil(math.sqrt(spp))
    cell = np.floor(np.clip(frac, 0, 1 - 1e-12) * n).astype(int)
    cell_id = (cell[:, 1] * n + cell[:, 0]).reshape(-1, spp)
    assert all(len(set(row)) == spp for row in cell_id)
    m = frac.size
    assert np.mean(frac) == pytest.approx(0.5, abs=5 * math.sqrt(1 / 12 / m))
    if spp == 1:
        assert np.var(frac) == pytest.approx(1 / 12, rel=0.05)


# --------------------------------------------------------------------------------------------
# Validation
# --------------------------------------------------------------------------------------------


def test_bad_camera_lists_every_problem():
    with pytest.raises(InputError) as err:
        Camera(
            position_m=(0, 0, 0),
            target_m=(0, 0, 0),
            hfov_deg=180.0,
            width_px=0,
            height_px=2.5,
            source="street.toml",
            where="views[1]",
        )
    text = str(err.value)
    for key in ("views[1].target_m", "views[1].hfov_deg", "views[1].width_px", "views[1].height_px"):
        assert key in text
    assert text.startswith("street.toml")
    with pytest.raises(InputError, match="up"):
        Camera(position_m=(0, 0, 0), target_m=(0, 0, 5), hfov_deg=60.0, width_px=4, height_px=4)
    with pytest.raises(InputError, match="position_m"):
        Camera(position_m=(0, "a", 0), target_m=(0, 1, 5), hfov_deg=60.0, width_px=4, height_px=4)
    with pytest.raises(InputError, match="samples_per_pixel"):
        camera_rays(make_camera(), 0)


def test_from_view_accepts_scene_views():
    view = dict(position_m=(0, 0, 1.7), target_m=(20, 0, 1.0), hfov_deg=65.0, width_px=16, height_px=9)
    cam = Camera.from_view(view, source="demo.toml", where="views[0]")
    assert cam.shape == (9, 16) and cam.up == (0.0, 0.0, 1.0)
    with pytest.raises(InputError, match=r"demo.toml: views\[0\].hfov_deg"):
        Camera.from_view({**view, "hfov_deg": -5}, source="demo.toml", where="views[0]")


# --------------------------------------------------------------------------------------------
# AOVs and atomic writes (the camera's outputs)
# --------------------------------------------------------------------------------------------


def _aov_scene():
    from render.geometry.mesh import TriangleMesh, flat_normals
    from render.rays.bvh import build_bvh

    ground = np.array([[[-50, -50, 0], [50, -50, 0], [50, 50, 0]], [[-50, -50, 0], [50, 50, 0], [-50, 50, 0]]], float)
    # A wall facing -x at x = 10 (two triangles, CCW seen from -x).
    wall = np.array([[[10, -2, 0], [10, -2, 3], [10, 2, 3]], [[10, -2, 0], [10, 2, 3], [10, 2, 0]]], float)
    tris = np.concatenate([ground, wall])
    mesh = TriangleMesh(tris, flat_normals(tris), [1, 1, 0, 0], [0, 0, 1, 1], ["paint", "asphalt"], ["ground", "wall"])
    return mesh, build_bvh(mesh.triangles_m)


def test_render_aovs_against_analytic_depth():
    # Analytic geometry: the ray through a pixel meets the plane x = 10 at distance
    # (10 - x0) / d_x for a unit direction d.
    from render.rays.aov import render_aovs

    mesh, bvh = _aov_scene()
    cam = Camera(position_m=(0.0, 0.0, 1.5), target_m=(10.0, 0.0, 1.5), hfov_deg=60.0, width_px=31, height_px=21)
    aov = render_aovs(mesh, bvh, cam, samples_per_pixel=1, seed=0)
    assert aov["depth_m"].shape == (21, 31) and aov["normal"].shape == (21, 31, 3)
    d = pixel_directions(cam)
    on_wall = aov["object_id"] == 1
    assert on_wall[10, 15] and on_wall.sum() > 50
    # spp = 1 jitters inside the pixel, so compare with the ray actually cast.
    _, dirs, _ = camera_rays(cam, 1, 0)
    dirs = dirs.reshape(21, 31, 3)
    np.testing.assert_allclose(aov["depth_m"][on_wall], 10.0 / dirs[on_wall][:, 0], rtol=1e-12)
    np.testing.assert_allclose(aov["normal"][on_wall], np.tile([-1.0, 0, 0], (on_wall.sum(), 1)), atol=1e-12)
    assert np.all(aov["material_id"][on_wall] == 0)
    sky = d[..., 2] > 0.35  # well above the 3 m wall top seen from 10 m: nothing there
    assert np.all(aov["object_id"][sky] == -1) and np.all(np.isinf(aov["depth_m"][sky]))
    assert np.all(aov["coverage"][sky] == 0) and np.all(aov["coverage"][on_wall] == 1)
    ground = aov["object_id"] == 0
    assert ground.sum() > 50 and np.all(aov["material_id"][ground] == 1)
    # Several samples: the majority object decides; coverage is a fraction.
    aov4 = render_aovs(mesh, bvh, cam, samples_per_pixel=4, seed=1)
    assert set(np.unique(aov4["coverage"])) <= {0.0, 0.25, 0.5, 0.75, 1.0}
    assert np.all(aov4["object_id"][on_wall & (aov4["coverage"] == 1)] >= 0)


def test_write_aov_previews_and_atomic_writes(tmp_path):
    import imageio.v3 as iio

    from render.fileio import atomic_path, atomic_write_bytes
    from render.output.aov_previews import write_aov_previews
    from render.rays.aov import render_aovs

    mesh, bvh = _aov_scene()
    cam = Camera(position_m=(0.0, 0.0, 1.5), target_m=(10.0, 0.0, 1.5), hfov_deg=60.0, width_px=16, height_px=10)
    aov = render_aovs(mesh, bvh, cam)
    written = write_aov_previews(aov, tmp_path / "out", "street")
    paths = dict(zip(["depth", "normal", "material", "object", "coverage", "npz"], written))
    assert [p.name for p in written] == [
        f"street-{k}.png" for k in ("depth", "normal", "material", "object", "coverage")
    ] + ["street-aov.npz"]
    assert sorted(p.name for p in (tmp_path / "out").iterdir()) == sorted(p.name for p in written)
    grey = iio.imread(paths["depth"])
    assert grey.shape == (10, 16) and np.all(grey[np.isinf(aov["depth_m"])] == 0)
    near, far = (float(x) for x in iio.immeta(paths["depth"])["depth_range_m"].split())
    finite = aov["depth_m"][np.isfinite(aov["depth_m"])]
    assert near == pytest.approx(finite.min(), rel=1e-5) and far == pytest.approx(finite.max(), rel=1e-5)
    obj = iio.imread(paths["object"])
    assert np.all(obj[aov["object_id"] < 0] == 0) and np.all(obj[aov["object_id"] >= 0].max(axis=-1) > 0)
    with np.load(paths["npz"]) as raw:
        for k, v in aov.items():
            np.testing.assert_array_equal(raw[k], v)
    # An interrupted write leaves the old file and no temporary behind.
    target = tmp_path / "keep.txt"
    atomic_write_bytes(target, b"old")
    with pytest.raises(RuntimeError):
        with atomic_path(target) as tmp:
            tmp.write_bytes(b"half")
            raise RuntimeError("interrupted")
    assert target.read_bytes() == b"old" and sorted(p.name for p in tmp_path.iterdir()) == ["keep.txt", "out"]
