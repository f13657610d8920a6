"""``lampcast calc``: the command's figures against the calculation library and analytic checks."""

from __future__ import annotations

import csv
import json
from pathlib import Path

import numpy as np
import pytest

from render.calc.fields import evaluate_field, row_fields
from render.cli import main
from render.study import Study

MINIMAL = Path(__file__).resolve().parent.parent / "scenes" / "tests" / "minimal_street.toml"


def _run_json(capsys, argv: list[str]) -> dict:
    assert main(argv) == 0
    return json.loads(capsys.readouterr().out)


@pytest.fixture(scope="module")
def minimal_json() -> dict:
    import contextlib
    import io

    out = io.StringIO()
    with contextlib.redirect_stdout(out):
        assert main(["calc", str(MINIMAL), "--json", "-q"]) == 0
    return json.loads(out.getvalue())


def test_calc_json_fields_equal_the_library(minimal_json):
    # Reference: the library's evaluate_field on the same fields (render.calc.fields).
    study = Study(MINIMAL)
    fields = row_fields(study.scene)
    got = {f["name"]: f for f in minimal_json["setups"][0]["fields"]}
    assert set(got) == {f.name for f in fields}
    for field in fields:
        ref = evaluate_field(study, field)
        assert got[field.name]["mean_lx"] == ref.mean_lx
        assert got[field.name]["u0"] == ref.u0
        np.testing.assert_array_equal(np.array(got[field.name]["illuminance_lx"]), ref.illuminance_lx)
    s = minimal_json["setups"][0]
    assert s["luminance_model"] == "lambertian"
    # One observer per lane and direction of traffic (two-way by default; EN 13201-3, memory).
    assert len(s["luminance"]) == 4
    assert sorted((r["observer_lane"], r["direction"]) for r in s["luminance"]) == [
        ("lane 1", -1),
        ("lane 1", 1),
        ("lane 2", -1),
        ("lane 2", 1),
    ]
    assert "not a certificate" in minimal_json["caution"]


def test_doubling_lumens_doubles_every_value(tmp_path, capsys):
    # Analytic: illuminance is linear in the luminaires' flux (common practice, no source).
    scene = tmp_path / "street.toml"
    scene.write_text(
        MINIMAL.read_text(encoding="utf-8") + "\n[setups.base]\nlumens = 3000.0\n\n[setups.double]\nlumens = 6000.0\n",
        encoding="utf-8",
    )
    data = _run_json(capsys, ["calc", str(scene), "--setup", "base", "--setup", "double", "--json", "-q"])
    base, double = data["setups"]
    assert (base["setup"], double["setup"]) == ("base", "double")
    for f0, f1 in zip(base["fields"], double["fields"], strict=True):
        assert f0["mean_lx"] > 0
        assert f1["mean_lx"] == pytest.approx(2.0 * f0["mean_lx"], rel=1e-12)
        np.testing.assert_allclose(np.array(f1["illuminance_lx"]), 2.0 * np.array(f0["illuminance_lx"]), rtol=1e-12)
        assert f1["u0"] == pytest.approx(f0["u0"], rel=1e-12)
    for l0, l1 in zip(base["luminance"], double["luminance"], strict=True):
        assert l1["mean_cd_m2"] == pytest.approx(2.0 * l0["mean_cd_m2"], rel=1e-12)


def test_class_check_gives_verdict_and_margins(capsys):
    # Margins as defined in render.calc.classes: achieved/required - 1 for a minimum.
    data = _run_json(capsys, ["calc", str(MINIMAL), "--class", "P4", "--json", "-q"])
    check = data["setups"][0]["class_check"]
    assert check["class"] == "P4"
    assert check["verdict"] in ("pass", "fail")
    by_key = {c["key"]: c for c in check["criteria"]}
    mean = by_key["mean_illuminance_lx"]
    assert mean["margin"] == pytest.approx(mean["achieved"] / mean["required"] - 1.0, rel=1e-12)
    lanes = [f for f in data["setups"][0]["fields"] if f["name"].startswith("lane ")]
    all_lanes = np.concatenate([np.ravel(f["illuminance_lx"]) for f in lanes])
    assert mean["achieved"] == pytest.approx(float(all_lanes.mean()), rel=1e-12)
    assert by_key["min_illuminance_lx"]["achieved"] == float(all_lanes.min())
    assert main(["calc", str(MINIMAL), "--class", "P4", "-q"]) == 0
    text = capsys.readouterr().out
    assert "class P4" in text and "margin" in text and "not a certificate" in text


def test_csv_values_equal_the_json_grid(tmp_path, capsys):
    out = tmp_path / "grids"
    data = _run_json(capsys, ["calc", str(MINIMAL), "--csv", str(out), "--json", "-q"])
    files = [Path(p) for p in data["csv_files"]]
    fields = data["setups"][0]["fields"]
    # Each field's file, then each footway's face grid files (vertical, semicylindrical).
    footways = {f["name"] for f in data["setups"][0]["faces"]}
    assert len(fields) == 4 and len(files) == len(fields) + 2 * len(footways)
    study = Study(MINIMAL)
    points = {f.name: f.points_m for f in row_fields(study.scene)}
    for field, path in zip(fields, files[: len(fields)], strict=True):
        assert path.parent == out and path.exists()
        with path.open(encoding="utf-8", newline="") as fh:
            rows = list(csv.reader(fh))
        assert rows[0] == ["x_m", "y_m", "illuminance_lx"]
        values = np.array(rows[1:], dtype=np.float64)
        np.testing.assert_array_equal(values[:, 2], np.ravel(field["illuminance_lx"]))
        np.testing.assert_array_equal(values[:, :2], points[field["name"]][:, :2])


def test_bad_class_name_exits_2_naming_the_option(capsys):
    assert main(["calc", str(MINIMAL), "--class", "P9", "-q"]) == 2
    err = capsys.readouterr().err
    assert "--class" in err and "P9" in err


def test_r_table_is_labelled_and_q0_scales_luminance(tmp_path, capsys):
    # The r-table is scaled by Q0(road)/Q0(table) (render.calc.road, CIE 140 convention, memory):
    # doubling --q0 doubles every luminance.
    table = tmp_path / "r.csv"
    table.write_text("scale,0.0001\nq0,0.07\ntan_gamma,0,180\n0,300,200\n12,100,50\n", encoding="utf-8")
    runs = [
        _run_json(capsys, ["calc", str(MINIMAL), "--r-table", str(table), "--q0", str(q0), "--json", "-q"])
        for q0 in (0.07, 0.14)
    ]
    one, two = (r["setups"][0] for r in runs)
    assert one["luminance_model"] == "r-table" and one["road_reflectance"] is None
    for a, b in zip(one["luminance"], two["luminance"], strict=True):
        assert a["mean_cd_m2"] > 0
        assert b["mean_cd_m2"] == pytest.approx(2.0 * a["mean_cd_m2"], rel=1e-12)
    assert main(["calc", str(MINIMAL), "--q0", "0.1", "-q"]) == 2
    assert "--q0" in capsys.readouterr().err


def test_pictures_option_writes_the_four_pngs(tmp_path, capsys):
    # PNG signature (ISO/IEC 15948): the four calculation pictures are written and listed.
    out = tmp_path / "pictures"
    data = _run_json(capsys, ["calc", str(MINIMAL), "--pictures", str(out), "--json", "-q"])
    files = sorted(Path(p).name for p in data["pictures"])
    assert files == ["figures.png", "grid-illuminance.png", "isolux.png", "upward-exitance.png"]
    for name in files:
        assert (out / name).read_bytes()[:8] == b"\x89PNG\r\n\x1a\n"


def test_q0_scales_a_road_s_own_r_table(tmp_path, capsys):
    # A scene with no [street], its r-table given on a road: --q0 is accepted and, as above,
    # scales luminance in proportion (CIE 140 convention, memory).
    table = tmp_path / "r.csv"
    table.write_text("scale,0.0001\nq0,0.07\ntan_gamma,0,180\n0,300,200\n12,100,50\n", encoding="utf-8")
    scene = tmp_path / "road.toml"
    scene.write_text(
        """
[[roads]]
name = "main"
points_m = [[0.0, 0.0], [120.0, 0.0]]
carriageway_width_m = 7.0
r_table = "r.csv"

[[luminaire_rows]]
road = "main"
start_m = 30.0
spacing_m = 30.0
count = 3
mounting_height_m = 8.0
photometry = "generic-road-asymmetric"
lamp = "led-4000k-cie-b3"
lumens = 10000.0
column = false

[[views]]
name = "v"
position_m = [1.0, -1.0]
target_m = [30.0, 0.0, 0.0]
resolution = [32, 18]
""",
        encoding="utf-8",
    )
    runs = [_run_json(capsys, ["calc", str(scene), "--q0", str(q0), "--json", "-q"]) for q0 in (0.07, 0.14)]
    one, two = (r["setups"][0] for r in runs)
    assert one["luminance_model"] == "r-table"
    for a, b in zip(one["luminance"], two["luminance"], strict=True):
        assert a["mean_cd_m2"] > 0
        assert b["mean_cd_m2"] == pytest.approx(2.0 * a["mean_cd_m2"], rel=1e-12)
