"""The peer benchmark's output rows and its scene export (render.bench.peer), never its timings.

Checks: the PLY header and body follow the PLY format's published layout (Turk 1994, "The PLY
polygon file format", from memory); the exported intensities equal the isotropic distribution's
I = Φ/(4π) times the maintenance factor (the definition of an isotropic source); and the
benchmark prints lampcast's rows and says plainly when Mitsuba 3 is missing.
"""

from __future__ import annotations

import argparse
import builtins
import math

import numpy as np

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


def test_peer_scene_has_no_columns_and_isotropic_intensities():
    study = Study(peer.peer_scene_file(peer.DEMO))
    scene = peer.peer_scene(study, None, 64, 1)
    assert all(lum.column_base_m is None for lum in study.scene.luminaires)
    expected = [lum.lumens / (4.0 * math.pi) * lum.maintenance_factor for lum in study.scene.luminaires]
    np.testing.assert_allclose(scene.light_intensity_cd, expected, rtol=1e-6)
    assert scene.width_px == 64 and scene.spp == 1 and scene.triangles_m.shape[1:] == (3, 3)


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
