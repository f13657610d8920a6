"""The peer benchmark's output rows and its scene export (render.bench.peer), never its timings.

Checks: the PLY header and body follow the PLY format's published layout (Turk 1994, "The PLY
polygon file format", from memory); the exported intensities equal the isotropic distribution's
I = Φ/(4π) times the maintenance factor (the definition of an isotropic source); the benchmark
prints lampcast's rows and says plainly when Mitsuba 3 is missing; and the pure functions of the
equal-noise comparison against analytic cases: the relative RMS and mean absolute errors of
known arrays (their definitions), the noise of the mean of two independent halves (the variance
of a mean of independent samples, elementary statistics), errors adding in quadrature, and the
spp search on an error that falls as 1/sqrt(spp) (whose least count is ceil((c/target)²)).
"""

from __future__ import annotations

import argparse
import builtins
import math

import numpy as np
import pytest

from render.bench import peer
from render.study import Study


def test_ply_layout(tmp_path):
    tris = np.arange(18, dtype=np.float64).reshape(2, 3, 3)
    path = tmp_path / "t.ply"
    peer.write_ply(path, tris)
    data = path.read_bytes()
    head, body = data.split(b"end_header\n")
    assert b"element vertex 6" in head and b"element face 2" in head
    vertices = np.frombuffer(body[: 6 * 12], "<f4").reshape(6, 3)
    np.testing.assert_array_equal(vertices, tris.reshape(6, 3))
    faces = body[6 * 12 :]
    assert len(faces) == 2 * 13 and faces[0] == 3
    assert np.frombuffer(faces[1:13], "<i4").tolist() == [0, 1, 2]


def test_ply_with_normals_layout(tmp_path):
    tris = np.arange(18, dtype=np.float64).reshape(2, 3, 3)
    normals = np.tile(np.array([0.0, 0.6, 0.8]), (2, 3, 1))
    path = tmp_path / "n.ply"
    peer.write_ply(path, tris, normals)
    head, body = path.read_bytes().split(b"end_header\n")
    assert b"property float nx\nproperty float ny\nproperty float nz\n" in head
    vertices = np.frombuffer(body[: 6 * 24], "<f4").reshape(6, 6)
    np.testing.assert_array_equal(vertices[:, :3], tris.reshape(6, 3))
    np.testing.assert_allclose(vertices[:, 3:], normals.reshape(6, 3), rtol=1e-7)
    assert len(body) == 6 * 24 + 2 * 13


def test_image_error_of_known_arrays():
    # Analytic: differences (3, -4, 0, 0) on a reference of mean 5 give RMS sqrt(25/4) = 2.5
    # and mean |d| = 7/4; the fifth pixel, left out, would dominate both.
    reference = np.array([[5.0, 5.0, 5.0, 5.0, 5.0]])
    image = reference + np.array([[3.0, -4.0, 0.0, 0.0, 1000.0]])
    keep = np.array([[True, True, True, True, False]])
    e = peer.image_error(image, reference, keep)
    assert e.rel_rms == 2.5 / 5.0 and e.rel_mae == 1.75 / 5.0
    assert peer.image_error(reference, reference, keep) == peer.ImageError(0.0, 0.0)


def test_halves_noise_analytic_and_sampled():
    r = np.full((4, 4), 2.0)
    e = np.array([0.1, -0.3, 0.2, 0.0] * 4).reshape(4, 4)
    keep = np.ones((4, 4), bool)
    # a - b = 2e, so the noise of their mean is rms(e) / mean(r).
    assert peer.halves_noise(r + e, r - e, keep) == pytest.approx(np.sqrt(np.mean(e**2)) / 2.0)
    # Two halves with independent noise of std σ: their mean has std σ/sqrt(2).
    rng = np.random.default_rng(1)
    sigma = 0.05
    a = 1.0 + sigma * rng.standard_normal(1_000_000)
    b = 1.0 + sigma * rng.standard_normal(1_000_000)
    assert peer.halves_noise(a, b, np.ones(a.shape, bool)) == pytest.approx(sigma / np.sqrt(2.0), rel=0.01)


def test_systematic_difference_in_quadrature():
    assert peer.systematic_difference(0.05, 0.03, 0.0) == pytest.approx(0.04)
    assert peer.systematic_difference(0.13, 0.05, 0.0) == pytest.approx(0.12)
    assert peer.systematic_difference(0.01, 0.03, 0.02) == 0.0


def test_least_spp_on_inverse_square_root_error():
    calls = []

    def error_at(spp):
        calls.append(spp)
        return 1.0 / np.sqrt(spp)

    # 1/sqrt(n) <= 0.1 first at n = 100: doubling 4 ... 128, then bisection between 64 and 128.
    found, errors = peer.least_spp(error_at, 0.1, start=4, max_spp=1024)
    assert found == 100
    assert list(errors)[:6] == [4, 8, 16, 32, 64, 128] and len(calls) == len(set(calls))
    # A sampler taking only powers of 4: 64 misses (0.125), 256 is the least that reaches it.
    pow4 = lambda n: 4 ** int(np.ceil(np.log(n) / np.log(4) - 1e-12))  # noqa: E731
    assert peer.least_spp(error_at, 0.1, start=4, max_spp=1024, admissible=pow4)[0] == 256
    # Not reached below the cap, or given up.
    assert peer.least_spp(error_at, 0.1, start=4, max_spp=64)[0] is None
    found, errors = peer.least_spp(error_at, 0.1, start=4, max_spp=1024, give_up=lambda spp: spp >= 16)
    assert found is None and list(errors) == [4, 8, 16]
    # Reached at the start: no bisection below it.
    assert peer.least_spp(error_at, 0.5, start=4, max_spp=1024) == (4, {4: 0.5})


def test_least_spp_scan_finds_a_lower_count_bisection_misses():
    # Analytic: 1/sqrt(n), except that multiples of 5 reach 0.05. Doubling misses up to 64 and
    # reaches at 128; bisection lands on 100 (the multiple of 5 it happens upon); the scan of
    # 65 ... 99 finds 65, the least count above the last miss that reaches 0.1.
    def error_at(spp):
        return 0.05 if spp % 5 == 0 else 1.0 / np.sqrt(spp)

    assert peer.least_spp(error_at, 0.1, start=4, max_spp=1024)[0] == 100
    found, errors = peer.least_spp(error_at, 0.1, start=4, max_spp=1024, scan=True)
    assert found == 65 and errors[65] == 0.05
    # Where the error falls steadily the scan changes nothing.
    steady = peer.least_spp(lambda n: 1.0 / np.sqrt(n), 0.1, start=4, max_spp=1024, scan=True)[0]
    assert steady == 100


def test_peer_scene_has_no_columns_and_isotropic_intensities():
    study = Study(peer.peer_scene_file(peer.DEMO))
    scene = peer.peer_scene(study, None, 64, 1)
    assert all(lum.column_base_m is None for lum in study.scene.luminaires)
    expected = [lum.lumens / (4.0 * math.pi) * lum.maintenance_factor for lum in study.scene.luminaires]
    np.testing.assert_allclose(scene.light_intensity_cd, expected, rtol=1e-6)
    assert scene.width_px == 64 and scene.spp == 1 and scene.triangles_m.shape[1:] == (3, 3)
    assert scene.normals.shape == scene.triangles_m.shape


def test_bench_says_when_mitsuba_is_missing(monkeypatch, capsys):
    real_import = builtins.__import__

    def no_mitsuba(name, *args, **kwargs):
        if name in ("mitsuba", "drjit"):
            raise ImportError(name)
        return real_import(name, *args, **kwargs)

    monkeypatch.setattr(builtins, "__import__", no_mitsuba)
    args = argparse.Namespace(scene=str(peer.DEMO), view=None, width=48, spp=1, threads=2, rounds=1, variant=None)
    assert peer.cmd_peer(args) == 0
    out = capsys.readouterr().out
    assert "Mitsuba 3 is not installed" in out
    assert "48×27 px" in out and "1 samples per pixel" in out
    # Seconds and processor seconds per render, each min / median / max.
    assert "seconds per render" in out and "processor seconds per render" in out
    rows = [line for line in out.splitlines() if line.startswith("  lampcast ")]
    assert len(rows) == 2 and all(len(r.split()[1:]) == 5 and r.count(" / ") == 2 for r in rows)
    assert "/ mitsuba" not in out
