"""The scene check's numpy probes (render.rays.sanity, render.scene.warnings) against the renderer.

The check decides its two ray-based warnings with numpy where the answer is robust and asks the
BVH or the preview render otherwise, so every verdict must be the renderer's. The reference here
is the renderer itself (its ray kernel, its BVH and its preview): a consistency check of two
computations of one thing, no outside source. Scenes and random rays are drawn with fixed
seeds; the numbers of decided rays and samples are checked too, so that the fast path is used.
"""

from __future__ import annotations

from pathlib import Path

import numpy as np
import pytest

from render.scene.loader import check_scene_mesh

SCENES = Path(__file__).resolve().parents[1] / "scenes"
DEMO = SCENES / "demo" / "linden_row.toml"


def test_sample_rays_equal_the_cameras_rays():
    # Reference: render.rays.cameras.camera_rays at one sample per pixel (bit for bit).
    from render.rays.cameras import Camera, camera_rays
    from render.rays.sanity import sample_rays

    rng = np.random.default_rng(5)
    for seed, w, h in ((0, 32, 18), (7, 32, 24), (123456789, 5, 3)):
        pos = rng.uniform(-20.0, 20.0, 3)
        target = pos + rng.normal(size=3)
        fov = float(rng.uniform(10.0, 120.0))
        cam = Camera(position_m=pos, target_m=target, hfov_deg=fov, width_px=w, height_px=h)
        o, d, p = camera_rays(cam, 1, seed)
        o2, d2 = sample_rays(pos, target, fov, w, h, seed, p)
        assert np.array_equal(o, o2) and np.array_equal(d, d2)


@pytest.fixture(scope="module")
def demo():
    from render.rays.bvh import build_bvh
    from render.rays.sanity import Soup

    scene, mesh = check_scene_mesh(DEMO)
    return scene, mesh, Soup.of(mesh.triangles_m), build_bvh(mesh.triangles_m)


def test_robust_probes_agree_with_the_bvh(demo):
    # Reference: the BVH's closest hit (render.rays.bvh.intersect_closest) and its face's facing.
    from render.rays.bvh import geometric_normal, intersect_closest
    from render.rays.sanity import probe_rays

    _, mesh, soup, bvh = demo
    rng = np.random.default_rng(11)
    o = rng.uniform([0.0, -15.0, 0.2], [80.0, 15.0, 12.0], (400, 3))
    # Axis directions too: they run along the street's faces and meet its edges head on.
    d = np.vstack([rng.normal(size=(300, 3)), np.repeat(np.eye(3), 34, axis=0)[:100] * rng.choice([-1, 1], (100, 1))])
    d /= np.linalg.norm(d, axis=1, keepdims=True)
    probes = probe_rays(soup, o, d, 20.0)
    hits = intersect_closest(bvh, o, d, 0.0, 20.0, packets=False)
    bvh_tri = np.where(hits.hit, hits.triangle, -1)
    assert np.array_equal(probes.triangle[probes.robust], bvh_tri[probes.robust])
    back = hits.hit & (np.einsum("ij,ij->i", geometric_normal(mesh.triangles_m, hits), d) > 0.0)
    sure = probes.facing != 0
    assert np.array_equal(probes.facing[sure] > 0, back[sure])
    assert np.count_nonzero(probes.robust) >= 0.8 * len(d) and np.count_nonzero(sure) >= 0.8 * len(d)


def test_camera_inside_solid_verdicts_agree_with_the_bvh(demo):
    # Reference: render.rays.sanity.back_face_fraction through the BVH, at random eye points
    # in the demo (some inside cars, bins and houses) and its views' cameras.
    from render.rays.sanity import AXIS_DIRECTIONS, back_face_fraction, robust_back_face_count

    scene, mesh, soup, bvh = demo
    rng = np.random.default_rng(2)
    eyes = np.vstack(
        [rng.uniform([0.0, -15.0, 0.1], [80.0, 15.0, 10.0], (150, 3))] + [v.position_m for v in scene.views]
    )
    settled = []
    inside = 0
    for eye in eyes:
        directions = np.vstack([AXIS_DIRECTIONS, rng.normal(size=3)])
        sure, unsure = robust_back_face_count(soup, eye, directions, 20.0)
        fraction = back_face_fraction(bvh, mesh.triangles_m, eye, directions, 20.0)
        assert sure <= round(fraction * 7) <= sure + unsure
        if 2 * sure > 7 or 2 * (sure + unsure) <= 7:
            settled.append(tuple(eye))
            assert (2 * sure > 7) == (fraction > 0.5)
        inside += fraction > 0.5
    # Eyes inside a house see the party walls, two faces in one plane facing both ways: which
    # one the BVH meets first is its own affair, so those rays stay undecided here.
    assert len(settled) >= 0.75 * len(eyes) and inside >= 5
    assert all(tuple(v.position_m) in settled for v in scene.views)


def _preview_luminance(study, view) -> np.ndarray:
    from render.scene.warnings import PREVIEW_WIDTH_PX

    preview = study.render_view(view.name, None, width_px=PREVIEW_WIDTH_PX, samples_per_pixel=1)
    return preview.colorimetry.luminance_cd_m2.reshape(-1)


@pytest.mark.parametrize(
    "path",
    [
        DEMO,
        SCENES / "demo2" / "gull_harbour.toml",
        SCENES / "tests" / "occluder.toml",
        SCENES / "tests" / "wet_plane.toml",
    ],
    ids=lambda p: p.stem,
)
def test_surely_lit_samples_are_lit_in_the_preview(path):
    # Reference: the preview render of render.study.Study (its luminance per pixel, one sample
    # each): every sample the numpy proof calls lit has luminance above 0 there.
    from render.scene.warnings import _LitProof
    from render.study import Study

    scene, mesh = check_scene_mesh(path)
    if not scene.luminaires:
        pytest.skip("no luminaires")
    proof = _LitProof.of(scene, mesh)
    assert proof is not None
    study = Study(scene)
    study.mesh = mesh
    proven = 0
    for view in scene.views:
        w, h = proof.preview_size(view)
        lit = proof.lit_samples(view, np.arange(w * h))
        luminance = _preview_luminance(study, view)
        assert np.all(luminance[lit] > 0.0), view.name
        proven += int(np.count_nonzero(lit))
        assert proof.view_lit(view) == bool(np.any(lit)) or proof.view_lit(view)
    assert proven > 0


def test_surely_lit_samples_of_random_views_of_the_demo(demo):
    # Reference as above, for views from random eyes toward random targets in the demo street
    # (some behind cars or under the trees, some looking at the sky).
    import dataclasses

    from render.scene.warnings import _LitProof
    from render.study import Study

    scene, mesh, soup, _ = demo
    rng = np.random.default_rng(4)
    proof = _LitProof.of(scene, mesh, soup)
    study = Study(scene)
    study.mesh = mesh
    base = scene.views[0]
    proven = shadowed = 0
    for _ in range(12):
        eye = rng.uniform([0.0, -12.0, 0.5], [80.0, 12.0, 12.0])
        view = dataclasses.replace(base, position_m=tuple(eye), target_m=tuple(eye + rng.normal(size=3) * [5, 5, 2]))
        scene.views[0] = view
        w, h = proof.preview_size(view)
        lit = proof.lit_samples(view, np.arange(w * h))
        luminance = _preview_luminance(study, view)
        assert np.all(luminance[lit] > 0.0)
        proven += int(np.count_nonzero(lit))
        shadowed += int(np.count_nonzero(luminance == 0.0))
    scene.views[0] = base
    assert proven > 0 and shadowed > 0
