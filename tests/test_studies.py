"""Design studies (render.studies): sweeps, the tidy table, Dask against serial, resuming."""

from __future__ import annotations

import json
import math
import sys
from pathlib import Path

import pytest

from render.cli import main
from render.errors import InputError
from render.studies import read_study, run_study
from render.studies.rank import pareto_front, ranked
from render.studies.spec import parse_key_path
from render.studies.variants import apply_value, expand_variants

MINIMAL = Path(__file__).resolve().parent.parent / "scenes" / "tests" / "minimal_street.toml"

SETUPS = """
[setups.a]
lamp = "led-4000k-cie-b3"
lumens = 3000.0
input_watts = 25.0

[setups.b]
lamp = "led-4000k-cie-b3"
lumens = 4500.0
input_watts = 35.0
"""

STUDY = """
[study]
name = "tiny"
template = "street.toml"
objective = "annual_kwh"

[sweep]
"luminaire_rows[0].spacing_m" = [26.0, 28.0, 30.0]

[compute]
setups = ["a", "b"]
lighting_class = "P4"
"""


def _study(tmp_path: Path, study: str = STUDY, setups: str = SETUPS) -> Path:
    (tmp_path / "street.toml").write_text(MINIMAL.read_text(encoding="utf-8") + setups, encoding="utf-8")
    path = tmp_path / "study.toml"
    path.write_text(study, encoding="utf-8")
    return path


def test_key_paths():
    assert parse_key_path("luminaire_rows[0].spacing_m") == ("luminaire_rows", 0, "spacing_m")
    assert parse_key_path("setups.a.lumens") == ("setups", "a", "lumens")
    for bad in ("", "a[x]", "[0].b", "a..b", "a[0]b"):
        with pytest.raises(ValueError):
            parse_key_path(bad)


def test_sweep_expands_in_file_order(tmp_path):
    spec = read_study(
        _study(
            tmp_path,
            STUDY.replace(
                '"luminaire_rows[0].spacing_m" = [26.0, 28.0, 30.0]',
                '"luminaire_rows[0].spacing_m" = [26.0, 30.0]\n'
                '"luminaire_rows[0].mounting_height_m" = { from = 5.0, to = 6.0, step = 0.5 }',
            ),
        )
    )
    variants = expand_variants(spec)
    assert [v.parameters for v in variants] == [
        (("luminaire_rows[0].spacing_m", s), ("luminaire_rows[0].mounting_height_m", h))
        for s in (26.0, 30.0)
        for h in (5.0, 5.5, 6.0)
    ]
    assert variants[4].document["luminaire_rows"][0]["mounting_height_m"] == 5.5
    assert len({v.content_key for v in variants}) == 6


def test_bad_study_files_name_the_key(tmp_path):
    path = _study(tmp_path, STUDY + "\n[extra]\nx = 1\n")
    with pytest.raises(InputError, match="extra"):
        read_study(path)
    path = _study(tmp_path, STUDY.replace("[26.0, 28.0, 30.0]", "{ from = 3.0, to = 1.0, step = 1.0 }"))
    with pytest.raises(InputError, match=r"sweep\..*to ≥ from"):
        read_study(path)
    doc = {"luminaire_rows": [{"spacing_m": 1.0}]}
    with pytest.raises(InputError, match=r"no luminaire_rows\[3\]"):
        apply_value(doc, "luminaire_rows[3].spacing_m", 2.0, tmp_path / "s.toml")
    path = _study(tmp_path, STUDY.replace('setups = ["a", "b"]', 'setups = ["a", "zzz"]'))
    with pytest.raises(InputError, match="zzz"):
        run_study(read_study(path), tmp_path / "out", workers=0, report=False)


def test_doubling_lumens_in_a_sweep_doubles_every_illuminance(tmp_path):
    # Analytic: illuminance is linear in the luminaires' flux (common practice, no source).
    study = STUDY.replace(
        '"luminaire_rows[0].spacing_m" = [26.0, 28.0, 30.0]', '"setups.a.lumens" = [3000.0, 6000.0]'
    ).replace('setups = ["a", "b"]', 'setups = ["a"]')
    run = run_study(read_study(_study(tmp_path, study)), tmp_path / "out", workers=0, report=False)
    t = run.table
    assert t["param:setups.a.lumens"] == [3000.0, 6000.0]
    for column in ("carriageway_mean_lx", "carriageway_min_lx", "road_mean_cd_m2", "facade_max_lx"):
        one, two = t[column]
        if one is None:
            continue
        assert one > 0 and two == pytest.approx(2.0 * one, rel=1e-9), column
    assert t["carriageway_u0"][0] == pytest.approx(t["carriageway_u0"][1], rel=1e-9)


def test_dask_cluster_gives_the_serial_table_and_resumes(tmp_path):
    # The same study serially and on a LocalCluster of 2 worker processes: the same table,
    # byte for byte; then half the rows removed and the study rerun computes only those.
    path = _study(tmp_path)
    spec = read_study(path)
    serial = run_study(spec, tmp_path / "serial", workers=0, report=False)
    on_dask = run_study(spec, tmp_path / "dask", workers=2, report=False)
    assert len(serial.table["key"]) == 6
    assert serial.table == on_dask.table
    assert (tmp_path / "serial" / "results.csv").read_bytes() == (tmp_path / "dask" / "results.csv").read_bytes()
    assert on_dask.workers == 2 and {r.variant for r in on_dask.computed} == {0, 1, 2}
    # "Kill" the study after the first variant: its later rows are gone.
    for key, variant in zip(serial.table["key"], serial.table["variant"], strict=True):
        if variant > 0:
            (tmp_path / "serial" / "rows" / f"{key}.json").unlink()
    again = run_study(spec, tmp_path / "serial", workers=0, report=False)
    assert [r.variant for r in again.computed] == [1, 2]
    assert again.skipped_variants == (0,)
    assert again.table == serial.table


def test_row_keys_follow_the_content(tmp_path):
    path = _study(tmp_path)
    run = run_study(read_study(path), tmp_path / "out", workers=0, report=False)
    keys = set(run.table["key"])
    same = run_study(read_study(path), tmp_path / "out", workers=0, report=False)
    assert same.computed == () and set(same.table["key"]) == keys
    # Any change to the template scene changes every row's key (the whole document is hashed).
    (tmp_path / "street.toml").write_text(
        MINIMAL.read_text(encoding="utf-8") + SETUPS.replace("4500.0", "4600.0"), encoding="utf-8"
    )
    rerun = run_study(read_study(path), tmp_path / "out", workers=0, report=False)
    assert not keys & set(rerun.table["key"])
    assert {r.variant for r in rerun.computed} == {0, 1, 2}


def test_ranking_and_pareto_front_by_hand():
    # Pareto dominance (textbook definition), worked by hand on four options.
    table = {
        "key": ["p", "q", "r", "s"],
        "annual_kwh": [100.0, 120.0, 90.0, 130.0],
        "class_margin_min": [0.2, 0.3, 0.1, 0.25],
    }
    assert ranked(table, "annual_kwh", "min") == [2, 0, 1, 3]
    assert ranked(table, "class_margin_min", "max") == [1, 3, 0, 2]
    # s (130 kWh, 0.25) is dominated by q (120 kWh, 0.3); the others trade energy for margin.
    assert pareto_front(table) == [True, True, True, False]
    table["annual_kwh"][3] = None
    assert pareto_front(table) == [True, True, True, False]


def test_cli_study_writes_table_and_report(tmp_path, capsys):
    path = _study(tmp_path)
    assert main(["study", str(path), "--workers", "0", "--out", str(tmp_path / "out"), "--json", "-q"]) == 0
    data = json.loads(capsys.readouterr().out)
    assert data["rows"] == 6 and data["workers"] == 0
    html = (tmp_path / "out" / "study.html").read_text(encoding="utf-8")
    assert "Pareto front" in html and "not a certificate" in html
    import pyarrow.parquet as pq

    table = pq.read_table(tmp_path / "out" / "results.parquet").to_pydict()
    csv_rows = (tmp_path / "out" / "results.csv").read_text(encoding="utf-8").splitlines()
    assert len(csv_rows) == 7 and list(table) == csv_rows[0].split(",")
    assert all(isinstance(v, float) and math.isfinite(v) for v in table["annual_kwh"])
    assert main(["study", str(path), "--workers", "-1", "-q"]) == 2


def test_study_bench_smoke(capsys):
    # The benchmark's table rows (never its timings).
    from render.bench.__main__ import main as bench_main

    assert bench_main(["study", "--quick"]) == 0
    lines = capsys.readouterr().out.splitlines()
    assert [line.split()[0] for line in lines[1:]] == ["1", "2", "2/1", "worker"]


RED_BIN = """
[[objects]]
kind = "wheelie_bin"
name = "red bin"
inspect = true
position_m = [51.2, -4.0]
materials = { body = "object-red" }
"""


def test_colour_figures_and_thumbnails_do_not_depend_on_the_cast_setup(tmp_path):
    # Direct light relights exactly (the buffers are lamp-independent, DEVELOPERS.md): a row's
    # colour figures are the same whether its setup was cast or relit from another's rays.
    from scenes_for_tests import write_two_objects_scene

    scene = write_two_objects_scene(tmp_path, extra=RED_BIN)
    figures = {}
    for order in (("old", "new"), ("new", "old")):
        study = tmp_path / f"study-{order[0]}.toml"
        study.write_text(
            f'[study]\nname = "colours"\nscenes = ["{scene.name}"]\n\n[compute]\n'
            f'setups = ["{order[0]}", "{order[1]}"]\ncolours = true\ncolour_view = "bin"\n'
            'thumbnails = ["bin"]\nthumbnail_width = 48\n',
            encoding="utf-8",
        )
        out = tmp_path / f"out-{order[0]}"
        run = run_study(read_study(study), out, workers=0, report=False)
        t = run.table
        for i, setup in enumerate(t["setup"]):
            figures[(order[0], setup)] = (t["colour_hard_pairs"][i], t["colour_min_delta_e00"][i])
            png = out / t["thumbnail_bin"][i]
            assert png.read_bytes()[:8] == b"\x89PNG\r\n\x1a\n"
    for setup in ("old", "new"):
        hard, de = figures[("old", setup)]
        assert isinstance(hard, int) and de is not None
        assert figures[("new", setup)] == figures[("old", setup)]
    # Under low-pressure sodium (nearly monochromatic 589 nm light, one cone ratio: analytic)
    # the red and green bins look far more alike than under the white LED.
    assert figures[("old", "old")][1] < 0.5 * figures[("old", "new")][1]


def test_existing_scheduler_address(tmp_path):
    # A cluster started elsewhere, reached by its scheduler address (Dask's Client(address)).
    from dask.distributed import LocalCluster

    spec = read_study(_study(tmp_path))
    serial = run_study(spec, tmp_path / "serial", workers=0, report=False)
    with LocalCluster(n_workers=1, threads_per_worker=1, processes=True, dashboard_address=None) as cluster:
        remote = run_study(spec, tmp_path / "remote", scheduler=cluster.scheduler_address, report=False)
    assert remote.table == serial.table


def test_a_killed_study_resumes_where_it_stopped(tmp_path):
    # A real stop: the study process is killed once its first rows are kept; the rerun computes
    # only the variants that were not finished and gives the full table.
    import os
    import signal
    import subprocess
    import time

    # 40 variants, so that the study is still running when its first rows appear.
    many = STUDY.replace("[26.0, 28.0, 30.0]", "{ from = 20.0, to = 29.75, step = 0.25 }")
    path = _study(tmp_path, many)
    out = tmp_path / "out"
    proc = subprocess.Popen(
        [sys.executable, "-m", "render", "study", str(path), "--workers", "0", "--out", str(out), "-q"],
        stdout=subprocess.DEVNULL,
        stderr=subprocess.PIPE,
    )
    rows = out / "rows"

    def kept_rows() -> int:  # finished rows; not the hidden temporary file of one being written
        return len([p for p in rows.glob("*.json") if not p.name.startswith(".")]) if rows.is_dir() else 0

    deadline = time.monotonic() + 300
    while time.monotonic() < deadline and proc.poll() is None:
        if kept_rows() >= 2:
            os.kill(proc.pid, signal.SIGKILL)
            break
        time.sleep(0.005)
    _, err = proc.communicate()
    kept = kept_rows()
    assert 2 <= kept < 80, f"the study should have been stopped part way; it said: {err.decode()[-2000:]}"
    again = run_study(read_study(path), out, workers=0, report=False)
    assert len(again.skipped_variants) == kept // 2
    assert len(again.computed) == 40 - kept // 2
    full = run_study(read_study(path), tmp_path / "fresh", workers=0, report=False)
    assert again.table == full.table
