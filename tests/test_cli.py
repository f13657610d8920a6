"""The command line end to end on the small test scenes.

Checks compare the command's outputs with the library's own figures (which the other test files
check against their outside sources) and with analytic values: the EXR round trip must give back
the absolute values, the metadata must describe the run, and user mistakes must exit with
status 2 without a traceback.
"""

from __future__ import annotations

import errno
import json
import os
import subprocess
import sys
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


# ---- command-line conventions: usage, --quiet, --json, one-line errors, the bug handler -------
# These check the program's own documented conventions (README "Commands"), not physics; where a
# JSON figure is checked, it is against the library's value or an analytic one named beside it.

ROOT = Path(__file__).resolve().parents[1]
FIGURE_COMMANDS = (
    "photometry",
    "check",
    "calc",
    "render",
    "relight",
    "colours",
    "compare",
    "demo",
    "lamps",
    "materials",
)


@pytest.fixture(autouse=True)
def _crash_files_in_tmp(tmp_path, monkeypatch):
    """Tracebacks of unexpected failures go to a per-test cache folder, not the user's."""
    monkeypatch.setenv("XDG_CACHE_HOME", str(tmp_path / "cache"))


def _lampcast(args: list[str], cwd: Path, **kwargs) -> subprocess.CompletedProcess:
    """``python -m render ARGS`` in a separate process (exit codes and stderr as a user sees them)."""
    return subprocess.run(
        [sys.executable, "-m", "render", *args], cwd=cwd, capture_output=True, text=True, timeout=300, **kwargs
    )


def test_no_command_prints_usage_and_exits_2(capsys, tmp_path):
    assert main([]) == 2
    captured = capsys.readouterr()
    assert captured.out == "" and "usage: lampcast" in captured.err and "render" in captured.err
    proc = _lampcast([], tmp_path)
    assert proc.returncode == 2 and "usage: lampcast" in proc.stderr and "Traceback" not in proc.stderr
    # argparse's own usage errors keep their status 2.
    with pytest.raises(SystemExit) as info:
        main(["render"])
    assert info.value.code == 2


def test_every_command_takes_quiet_and_the_figure_commands_take_json(capsys):
    for command in FIGURE_COMMANDS:
        with pytest.raises(SystemExit):
            main([command, "--help"])
        text = capsys.readouterr().out
        assert "--quiet" in text and "--json" in text, command


@pytest.mark.parametrize("command", ["render", "compare"])
def test_unwritable_out_is_one_line_and_exit_2(command, capsys):
    args = [command, str(SCENES / "point_over_plane.toml"), "--out", "/dev/null/x"]
    if command == "compare":
        args += ["--before", "sodium", "--after", "road-optic"]
    assert main(args) == 2
    err = capsys.readouterr().err
    assert "Traceback" not in err and len(err.strip().splitlines()) == 1, err
    assert "/dev/null/x" in err


def test_unwritable_out_in_a_real_process(tmp_path):
    proc = _lampcast(["render", str(SCENES / "point_over_plane.toml"), "--out", "/dev/null/x"], tmp_path)
    assert proc.returncode == 2, proc.stderr
    assert "Traceback" not in proc.stderr and len(proc.stderr.strip().splitlines()) == 1, proc.stderr


@pytest.mark.parametrize(
    "error",
    [
        OSError(errno.ENOSPC, "No space left on device", "outputs/above-scene.exr"),
        PermissionError(errno.EACCES, "Permission denied", "outputs/above-scene.png"),
    ],
)
def test_os_errors_from_outputs_are_one_line_and_exit_2(error, monkeypatch, capsys):
    import render.cli as cli

    def fail(args):
        raise error

    monkeypatch.setattr(cli, "cmd_render", fail)
    assert main(["render", str(SCENES / "point_over_plane.toml")]) == 2
    err = capsys.readouterr().err
    assert "Traceback" not in err and len(err.strip().splitlines()) == 1, err
    assert error.filename in err and error.strerror in err


def test_unexpected_exception_saves_traceback_and_exits_1(monkeypatch, capsys, tmp_path):
    import render.cli as cli

    def broken(args):
        raise RuntimeError("deliberately injected failure")

    monkeypatch.setattr(cli, "cmd_check", broken)
    monkeypatch.setenv("XDG_CACHE_HOME", str(tmp_path / "cache"))
    assert main(["check", str(SCENES / "point_over_plane.toml")]) == 1
    err = capsys.readouterr().err
    assert "Traceback" not in err and "bug in lampcast" in err
    saved = [p for p in (tmp_path / "cache").rglob("*") if p.is_file()]
    assert len(saved) == 1 and str(saved[0]) in err
    text = saved[0].read_text()
    assert "Traceback" in text and "RuntimeError: deliberately injected failure" in text


def test_keyboard_interrupt_exits_130_quietly(monkeypatch, capsys):
    import render.cli as cli

    def interrupted(args):
        raise KeyboardInterrupt

    monkeypatch.setattr(cli, "cmd_check", interrupted)
    assert main(["check", str(SCENES / "point_over_plane.toml")]) == 130
    assert capsys.readouterr().err == ""


def test_photometry_writes_a_plot_only_when_asked(tmp_path, monkeypatch, capsys):
    monkeypatch.chdir(tmp_path)
    assert main(["photometry", "generic-isotropic"]) == 0
    assert "ULOR" in capsys.readouterr().out
    assert list(tmp_path.iterdir()) == []


def test_photometry_json(capsys):
    assert main(["photometry", "generic-isotropic", "--json"]) == 0
    s = json.loads(capsys.readouterr().out)
    # generic-isotropic: 1000 lm spread evenly over the sphere (analytic: I = Φ / 4π, ULOR = 1/2).
    assert s["flux_lm"] == pytest.approx(1000.0, rel=1e-6)
    assert s["peak_cd"] == pytest.approx(1000.0 / (4 * np.pi), rel=1e-6)
    assert s["ulor"] == pytest.approx(0.5, abs=1e-9)


def test_check_json(capsys):
    from render.geometry.build import compile_scene
    from render.scene import check_scene

    scene_path = SCENES / "markup_names.toml"
    assert main(["check", str(scene_path), "--json"]) == 0
    s = json.loads(capsys.readouterr().out)
    scene = check_scene(scene_path)
    mesh = compile_scene(scene)
    assert s["triangles"] == mesh.n_triangles and s["objects"] == len(mesh.objects)
    assert s["luminaires"] == len(scene.luminaires) and s["views"] == [v.name for v in scene.views]
    assert s["setups"] == list(scene.setups) and s["inspected_objects"] == ["<b>bold</b> car"]
    assert s["warnings"] == []


def test_check_prints_warnings_and_exits_0(tmp_path, capsys):
    # A field of view of 1.2° (radians typed as degrees): a warning naming the key, exit 0,
    # the summary unchanged; in --json the same warning in the "warnings" list.
    text = (SCENES / "point_over_plane.toml").read_text().replace("hfov_deg = 70.0", "hfov_deg = 1.2")
    scene = tmp_path / "narrow.toml"
    scene.write_text(text)
    assert main(["check", str(scene)]) == 0
    out = capsys.readouterr().out.splitlines()
    assert out[0] == f"{scene}: OK"
    (line,) = [x for x in out if x.startswith("warning:")]
    assert line.startswith(f"warning: {scene}: views[0].hfov_deg: ")
    assert main(["check", str(scene), "--json"]) == 0
    (w,) = json.loads(capsys.readouterr().out)["warnings"]
    assert w["where"] == "views[0].hfov_deg" and "1.2°" in w["message"]


def test_relight_json_matches_library(tmp_path, capsys):
    from render.output.comparison import luminance_stats
    from render.study import Study

    scene = SCENES / "point_over_plane.toml"
    assert main(["relight", str(scene), "--out", str(tmp_path), "--json", "--setup", "sodium"]) == 0
    s = json.loads(capsys.readouterr().out)
    (row,) = s["images"]
    direct = luminance_stats(Study(scene).render_view("above", "sodium")).to_json()
    assert row["setup"] == "sodium" and row["view"] == "above"
    assert row["surface_luminance_cd_m2"]["mean"] == pytest.approx(direct["mean"], rel=1e-6)
    assert all(Path(p).is_file() for p in row["files"])


def test_render_json_and_nothing_else_on_stdout(tmp_path, capsys):
    assert main(["render", str(SCENES / "point_over_plane.toml"), "--out", str(tmp_path), "--json"]) == 0
    s = json.loads(capsys.readouterr().out)  # fails if anything else was printed
    assert s["images"][0]["width_px"] == 64 and s["images"][0]["height_px"] == 48


def test_colours_json_is_the_written_analysis(tmp_path, capsys):
    assert main(["colours", str(SCENES / "markup_names.toml"), "--out", str(tmp_path), "--json"]) == 0
    s = json.loads(capsys.readouterr().out)
    written = json.loads(next(tmp_path.glob("*-colours.json")).read_text())
    assert s["analysis"] == written
    assert [o["name"] for o in s["analysis"]["objects"]] == ["<b>bold</b> car"]


def test_compare_json_summary(tmp_path, capsys):
    out = tmp_path / "cmp"
    args = ["compare", str(SCENES / "markup_names.toml"), "--before", "old", "--after", "new <u>LED</u>"]
    assert main([*args, "--out", str(out), "--no-report", "--json"]) == 0
    s = json.loads(capsys.readouterr().out)
    metrics = json.loads((out / "metrics.json").read_text())
    assert s["summary"] == metrics["summary"] and len(s["summary"]) >= 1
    assert s["views"][0]["luminance_cd_m2"] == metrics["views"][0]["luminance_cd_m2"]


def test_no_progress_bars_when_stderr_is_not_a_terminal(tmp_path, capsys):
    assert main(["render", str(SCENES / "point_over_plane.toml"), "--out", str(tmp_path)]) == 0
    err = capsys.readouterr().err
    assert "camera rays" not in err and "direct light" not in err and "\r" not in err


def _stderr_on_a_terminal(args: list[str], cwd: Path) -> tuple[int, str]:
    """Run lampcast with stderr on a pseudo-terminal; returns the exit code and what it showed."""
    import fcntl
    import pty
    import struct
    import termios

    master, slave = pty.openpty()
    # A new pseudo-terminal is 0 columns wide, and tqdm trims its bar to the width: make it 80.
    fcntl.ioctl(slave, termios.TIOCSWINSZ, struct.pack("HHHH", 24, 80, 0, 0))
    proc = subprocess.Popen([sys.executable, "-m", "render", *args], cwd=cwd, stdout=subprocess.DEVNULL, stderr=slave)
    os.close(slave)
    shown = bytearray()
    while True:
        try:
            data = os.read(master, 4096)
        except OSError:  # EIO: the child closed the terminal
            break
        if not data:
            break
        shown += data
    os.close(master)
    return proc.wait(timeout=300), shown.decode("utf-8", "replace")


@pytest.mark.skipif(os.name != "posix", reason="needs a pseudo-terminal")
def test_quiet_hides_progress_bars_on_a_terminal(tmp_path):
    args = ["render", str(SCENES / "point_over_plane.toml"), "--out", str(tmp_path)]
    code, shown = _stderr_on_a_terminal(args, tmp_path)
    assert code == 0 and "camera rays" in shown  # the bars are there on a terminal...
    code, shown = _stderr_on_a_terminal([*args, "--quiet"], tmp_path)
    assert code == 0 and "camera rays" not in shown and "direct light" not in shown  # ...and not with --quiet


def test_demo_shows_before_and_two_options(tmp_path):
    # Issue 12: the demo report shows the before lighting and two options, the 3000 K LED and
    # the same dimmed to 50 %. The dimmed option differs from the full one only by its dimming,
    # so its surface luminance is half (direct light is linear in flux: common practice, no source).
    out = tmp_path / "demo"
    assert main(["demo", "--view", "footway", "--width", "96", "--spp", "1", "--out", str(out), "--quiet"]) == 0
    stored = json.loads((out / "metrics.json").read_text(encoding="utf-8"))
    setups = list(stored["setups"].values())
    assert [s["name"] for s in setups] == ["sodium", "led-3000k", "led-3000k-half"]
    full, half = setups[1]["groups"], setups[2]["groups"]
    assert {g["lamp"] for g in full.values()} == {g["lamp"] for g in half.values()} == {"led-3000k-cie-b2"}
    assert {g["dimming"] for g in half.values()} == {0.5}
    lum = stored["views"][0]["luminance_cd_m2"]
    keys = list(stored["setups"])
    assert lum[keys[2]]["mean"] == pytest.approx(0.5 * lum[keys[1]]["mean"], rel=2e-3)  # 4 significant figures
    assert "option: led-3000k-half" in (out / "report.html").read_text(encoding="utf-8")


def test_setup_and_lamp_together_is_an_error_naming_both(tmp_path, capsys):
    # Issue 12: `render --setup X --lamp Y` used to let --lamp win silently.
    scene = Path(__file__).resolve().parents[1] / "scenes" / "demo" / "linden_row.toml"
    out = tmp_path / "out"
    code = main(["render", str(scene), "--setup", "sodium", "--lamp", "led-3000k-cie-b2", "--out", str(out)])
    err = capsys.readouterr().err
    assert code == 2
    assert "--setup" in err and "--lamp" in err and "sodium" in err and "led-3000k-cie-b2" in err
    assert not [p for p in tmp_path.rglob("*") if p.is_file()]  # nothing rendered


def test_strict_paths_flag_confines_referenced_files(tmp_path, capsys):
    # A scene naming a lamp file outside its folder: allowed by default, refused with
    # --strict-paths (hostile-input rule: scenes from elsewhere may not read the machine's files).
    lamp = tmp_path / "outside.csv"
    lamp.write_text("wavelength_nm,power\n380,1\n780,1\n")
    folder = tmp_path / "scene"
    folder.mkdir()
    text = (SCENES / "minimal_street.toml").read_text()
    scene = folder / "s.toml"
    scene.write_text(text.replace('lamp = "', 'lamp = "../outside.csv" # ', 1))
    assert main(["check", str(scene), "--quiet"]) == 0
    capsys.readouterr()
    assert main(["check", str(scene), "--strict-paths", "--quiet"]) == 2
    err = capsys.readouterr().err
    assert "Traceback" not in err and "lamp" in err
    assert main(["render", str(scene), "--strict-paths", "--quiet", "--out", str(tmp_path / "o")]) == 2


def test_compare_takes_before_and_options_from_the_scene(tmp_path, capsys):
    # Issue 12: the options may be listed in the scene ([compare] before / options); setups not
    # in [setups] are named with the key, and without either source compare names both flags.
    from render.errors import InputError
    from render.scene import load_scene

    demo = Path(__file__).resolve().parents[1] / "scenes" / "demo" / "linden_row.toml"
    scene = load_scene(demo)
    assert scene.compare_before == "sodium" and scene.compare_options == ("led-3000k", "led-3000k-half")
    text = demo.read_text(encoding="utf-8")
    bad = tmp_path / "bad.toml"
    bad.write_text(text.replace('options = ["led-3000k", "led-3000k-half"]', 'options = ["led-3000", "led-warm"]'))
    with pytest.raises(InputError, match=r"compare.options\[0\].*led-3000.*did you mean 'led-3000k'"):
        load_scene(bad)
    half = tmp_path / "half.toml"
    half.write_text(text.replace('options = ["led-3000k", "led-3000k-half"]\n', ""))
    with pytest.raises(InputError, match="give both `before`"):
        load_scene(half)
    bare = tmp_path / "bare.toml"
    start = text.index("[compare]")
    bare.write_text(text[:start], encoding="utf-8")
    code = main(["compare", str(bare), "--after", "led-3000k", "--out", str(tmp_path / "o"), "--quiet"])
    assert code == 2 and "--before" in capsys.readouterr().err


def test_out_of_memory_is_one_line_exit_2(monkeypatch, capsys):
    # A run that outgrows the machine despite the limits: one line, exit 2, no traceback
    # (hostile-input rule: never a traceback for an input the user can reduce).
    import render.cli as cli

    def exhausted(args):
        raise MemoryError

    monkeypatch.setattr(cli, "cmd_lamps", exhausted)
    assert main(["lamps", "--quiet"]) == 2
    err = capsys.readouterr().err
    assert err.count("\n") == 1 and "memory" in err and "Traceback" not in err
