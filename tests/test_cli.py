"""The command line end to end on the small test scenes.

Checks compare the command's outputs with the library's own figures (which the other test files
check against their outside sources) and with analytic values: the EXR round trip must give back
the absolute values, the metadata must describe the run, and user mistakes must exit with
status 2 without a traceback.
"""

from __future__ import annotations

import json
from pathlib import Path

import numpy as np
import pytest

from render.cli import main

SCENES = Path(__file__).resolve().parents[1] / "scenes" / "tests"


def test_help_on_every_command(capsys):
    for command in ("lamps", "materials", "photometry", "check", "render", "relight", "demo"):
        with pytest.raises(SystemExit) as info:
            main([command, "--help"])
        assert info.value.code == 0
        assert command in capsys.readouterr().out


def test_lamps_json_matches_library(capsys):
    from render.colour.lamp_figures import lamp_figures
    from render.colour.lamps import get_lamp

    assert main(["lamps", "sodium-low-pressure", "led-3000k-cie-b2", "--json"]) == 0
    rows = json.loads(capsys.readouterr().out)
    assert [r["id"] for r in rows] == ["sodium-low-pressure", "led-3000k-cie-b2"]
    direct = lamp_figures(get_lamp("led-3000k-cie-b2"))
    assert rows[1]["sp_ratio"] == pytest.approx(direct.sp_ratio, rel=1e-3)


def test_unknown_lamp_exits_2(capsys):
    assert main(["lamps", "sodium-low-presure"]) == 2
    err = capsys.readouterr().err
    assert "Traceback" not in err and "did you mean" in err


def test_materials_json(capsys):
    assert main(["materials", "--json"]) == 0
    rows = json.loads(capsys.readouterr().out)
    assert len(rows) >= 30


def test_photometry_summary_and_plot(tmp_path, capsys):
    plot = tmp_path / "polar.png"
    assert main(["photometry", "generic-isotropic", "--plot", str(plot)]) == 0
    out = capsys.readouterr().out
    assert "ULOR" in out and plot.stat().st_size > 0


def test_render_writes_absolute_exr_and_pngs_with_metadata(tmp_path, capsys):
    from PIL import Image

    from render.output.hdr import read_exr
    from render.study import Study

    scene = SCENES / "point_over_plane.toml"
    assert main(["render", str(scene), "--out", str(tmp_path), "--mode", "adapted", "--mode", "photometric"]) == 0
    exr = tmp_path / "above-scene.exr"
    colorimetry, meta = read_exr(exr)
    # The EXR holds the same absolute values the library computes (float32 storage).
    direct = Study(scene).render_view("above").colorimetry
    np.testing.assert_allclose(colorimetry.xyz_cd_m2, direct.xyz_cd_m2, rtol=1e-6, atol=1e-6)
    np.testing.assert_allclose(colorimetry.scotopic_cd_m2, direct.scotopic_cd_m2, rtol=1e-6, atol=1e-6)
    assert meta["units"] == "cd/m^2" and meta["view"] == "above"
    png = Image.open(tmp_path / "above-scene-adapted.png")
    assert png.text["lampcast.view"] == "above" and png.text["lampcast.mode"] == "adapted"
    assert png.text["lampcast.seed"] == "3" and len(png.text["lampcast.scene_sha256"]) == 64
    assert (tmp_path / "above-scene-photometric.png").exists()
    assert not list(tmp_path.glob(".*tmp*")), "no temporary files left behind"


def test_relight_all_setups(tmp_path, capsys):
    assert main(["relight", str(SCENES / "point_over_plane.toml"), "--out", str(tmp_path)]) == 0
    for setup in ("sodium", "dimmed-hps", "road-optic"):
        assert (tmp_path / f"above-{setup}-shared.png").exists()


def test_render_bad_observer_option_exits_2(capsys):
    assert main(["render", str(SCENES / "point_over_plane.toml"), "--age", "-3"]) == 2
    err = capsys.readouterr().err
    assert "Traceback" not in err and "--age" in err


def test_render_unknown_view_exits_2(capsys):
    assert main(["render", str(SCENES / "point_over_plane.toml"), "--view", "abov"]) == 2
    assert "did you mean 'above'" in capsys.readouterr().err


def test_colours_command(tmp_path, capsys):
    scene = Path(__file__).resolve().parents[1] / "scenes" / "tests" / "markup_names.toml"
    assert main(["colours", str(scene), "--out", str(tmp_path)]) == 0
    out = capsys.readouterr().out
    assert "daylight" in out and "<b>bold</b> car" in out
    written = sorted(p.name for p in tmp_path.iterdir())
    assert any(n.endswith("-colours.json") for n in written) and any(n.endswith("-swatches.png") for n in written)


def test_render_aov_outputs(tmp_path, capsys):
    scene = SCENES / "minimal_street.toml"
    assert main(["render", str(scene), "--aov", "--out", str(tmp_path), "--mode", "adapted"]) == 0
    names = {p.name for p in tmp_path.iterdir()}
    for kind in ("depth", "normal", "material", "object"):
        assert any(kind in n and n.endswith(".png") for n in names), kind
    data = np.load(next(tmp_path.glob("*.npz")))
    # The carriageway is at z = 0 and the camera at 1.6 m: depth is finite where it is seen.
    assert np.isfinite(data["depth_m"]).any() and (data["object_id"] >= 0).any()


def test_scene_without_luminaires_renders_dark_with_a_note(tmp_path, capsys):
    scene = tmp_path / "dark.toml"
    scene.write_text(
        '[street]\nlength_m = 20.0\ncarriageway_width_m = 6.0\n\n[[views]]\nname = "v"\n'
        "position_m = [1.0, 0.0]\ntarget_m = [10.0, 0.0, 0.0]\nresolution = [32, 18]\n"
    )
    assert main(["render", str(scene), "--out", str(tmp_path), "--mode", "adapted"]) == 0
    assert "no luminaires" in capsys.readouterr().err
    from render.output.hdr import read_exr

    colorimetry, _ = read_exr(tmp_path / "v-scene.exr")
    assert np.all(colorimetry.xyz_cd_m2 == 0.0)  # direct light only: no source, no light
