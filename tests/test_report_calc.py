"""The compare report's "Calculations" section and the "calculation" record of metrics.json.

Checks are against the project's own calculation, which other tests tie to outside sources
(tests/test_calc_*.py: analytic point-source results, the EN 13201 grid rules): metrics.json
must hold exactly what :func:`render.calc.run.run_calculation` gives for the same setups, and the
report must show exactly what metrics.json holds (the report's one rounding function).
"""

from __future__ import annotations

import json
from pathlib import Path

import pytest
from scenes_for_tests import write_two_objects_scene
from test_report import parse, resolve

from render.calc.classes import CAUTION
from render.calc.run import run_calculation
from render.output.comparison import parse_setup, run_comparison
from render.output.report import format_value
from render.study import Study

SCENES = Path(__file__).resolve().parents[1] / "scenes" / "tests"

#: The two-objects scene with a P-class check in its [calc] table.
_CALC = """
[calc]
lighting_class = "P3"
"""


@pytest.fixture(scope="module")
def compared(tmp_path_factory):
    folder = tmp_path_factory.mktemp("calc-report")
    scene = write_two_objects_scene(folder, _CALC)
    out = folder / "out"
    run_comparison(scene, "old", "new", ["van"], out, samples_per_pixel=1, progress=False, colour=False)
    metrics = json.loads((out / "metrics.json").read_text(encoding="utf-8"))
    return scene, out, metrics, (out / "report.html").read_text(encoding="utf-8")


def _section(text: str):
    (section,) = [n for n in parse(text).root.iter() if n.tag == "section" and n.attrs.get("id") == "calculation"]
    return section


def test_metrics_hold_the_calculation_run_calculation_gives(compared):
    scene, _, metrics, _ = compared
    study = Study(scene)
    setups = [parse_setup("old", study.scene, "--before"), parse_setup("new", study.scene, "--after")]
    direct = json.loads(json.dumps(run_calculation(study, setups).to_json()))
    stored = metrics["calculation"]
    assert {k: stored[k] for k in direct} == direct
    assert stored["setup_keys"] == ["before", "new"]
    assert [f["key"] for f in stored["headline_figures"]] == list(direct["setups"][0]["headline"])
    assert stored["setups"][0]["class_check"]["class"] == "P3"


def test_report_section_shows_the_metrics(compared):
    _, out, metrics, text = compared
    section = _section(text)
    cells = [n for n in section.iter() if "data-metric" in n.attrs]
    paths = set()
    for cell in cells:
        path, rule = cell.attrs["data-metric"], cell.attrs["data-rule"]
        value = resolve(metrics, path)
        assert json.loads(cell.attrs["data-value"]) == value, path
        shown = cell.children[0] if cell.children and isinstance(cell.children[0], str) else ""
        assert shown == format_value(value, rule), path
        paths.add(path)
    calc = metrics["calculation"]
    for i, _ in enumerate(calc["setups"]):
        for figure in calc["headline_figures"]:
            assert f"calculation.setups.{i}.headline.{figure['key']}" in paths
        for j, _ in enumerate(calc["setups"][i]["class_check"]["criteria"]):
            assert f"calculation.setups.{i}.class_check.criteria.{j}.achieved" in paths
    words = section.text()
    assert "Headline figures per lighting" in words and "Class P3 check" in words
    assert CAUTION[:1].upper() + CAUTION[1:] in words  # the standing caution, as a sentence
    # The four pictures, each embedded with its alt text, and in the contents; the upward
    # exitance map in the "Light to the sky" part with that part's table of every setup.
    images = [n for n in section.iter() if n.tag == "img"]
    assert len(images) == len(calc["pictures"]) == 4
    (sky,) = [n for n in section.iter() if n.tag == "section" and n.attrs.get("id") == "calculation-sky"]
    assert (
        "Light to the sky" in sky.text()
        and "lumens per square metre" in [n.attrs["alt"] for n in sky.iter() if n.tag == "img"][0]
    )
    for i, _ in enumerate(calc["setups"]):
        for figure in ("sky.reflected_upward_map_lm", "sky.reflected_upward_lm", "sky.direct_upward_lm"):
            assert f"calculation.setups.{i}.{figure}" in paths
    for img in images:
        assert img.attrs["src"].startswith("data:image/png;base64,") and img.attrs["alt"].strip()
    for rel in calc["pictures"]:
        assert (out / rel).is_file()
    assert 'href="#calculation"' in text


def test_scene_without_street_says_why(tmp_path):
    out = tmp_path / "out"
    run_comparison(
        SCENES / "point_over_plane.toml",
        "sodium",
        "dimmed-hps",
        None,
        out,
        width_px=32,
        samples_per_pixel=1,
        progress=False,
        colour=False,
    )
    metrics = json.loads((out / "metrics.json").read_text(encoding="utf-8"))
    assert set(metrics["calculation"]) == {"absent"} and "[street]" in metrics["calculation"]["absent"]
    section = _section((out / "report.html").read_text(encoding="utf-8"))
    assert "no [street]" in section.text()
    assert not [n for n in section.iter() if n.tag in ("img", "table")]
    assert not (out / "calculation").exists()


#: A road turning left round a 60 m arc with a row of two isotropic luminaires along it, no [street].
_ROAD_SCENE = """
[scene]
name = "row along a bend"

[[roads]]
name = "bend"
points_m = [[0.0, 0.0], [100.0, 0.0], [100.0, 100.0]]
corner_radius_m = 60.0
carriageway_width_m = 7.0

[[luminaire_rows]]
road = "bend"
start_m = 50.0
spacing_m = 30.0
count = 2
mounting_height_m = 8.0
setback_m = 0.5
outreach_m = 0.5
photometry = "generic-isotropic"
lamp = "led-4000k-cie-b3"
lumens = 10000.0
column = false

[[views]]
name = "v"
position_m = [1.0, -1.0]
target_m = [30.0, 0.0, 0.0]
resolution = [32, 18]

[setups.full]
dimming = 1.0

[setups.dimmed]
dimming = 0.5
"""


def test_a_row_along_a_road_is_calculated_in_the_comparison(tmp_path):
    # The comparison's record must be the project's calculation of the same setups (fields laid
    # along the bend: tests/test_calc_on_roads.py ties them to analytic circle geometry and the
    # inverse-square law), not the "no [street]" notice.
    scene = tmp_path / "bend.toml"
    scene.write_text(_ROAD_SCENE, encoding="utf-8")
    out = tmp_path / "out"
    run_comparison(scene, "full", "dimmed", None, out, samples_per_pixel=1, progress=False, colour=False)
    metrics = json.loads((out / "metrics.json").read_text(encoding="utf-8"))
    assert "absent" not in metrics["calculation"]
    study = Study(scene)
    setups = [parse_setup("full", study.scene, "--before"), parse_setup("dimmed", study.scene, "--after")]
    direct = json.loads(json.dumps(run_calculation(study, setups).to_json()))
    assert {k: metrics["calculation"][k] for k in direct} == direct
    means = [s["fields"][0]["mean_lx"] for s in direct["setups"]]
    assert means[1] == pytest.approx(0.5 * means[0], rel=1e-9)


def _face_rows(section) -> list:
    """The body rows (those with cells) of the footway face tables in the calculation section."""
    tables = [n for n in section.iter() if n.tag == "table" and n.attrs.get("id", "").startswith("calculation-faces-")]
    return [row for t in tables for row in t.iter() if row.tag == "tr" and any(c.tag == "td" for c in row.iter())]


def test_report_shows_the_face_grids_and_their_interreflected_rows_only_with_bounces(compared):
    # The footway face tables give, per lighting, the figures the calculation's text gives per
    # face grid (E_sc and E_v mean and minimum), each cell the number at its metrics path;
    # the "+ interreflected" rows, labelled as not part of the EN 13201 calculation, appear only
    # when the calculation traced interreflections (common practice, no source).
    from render.calc.fields import INTERREFLECTED_LABEL
    from render.calc.run import calc_options
    from render.output.comparison import calculation_json
    from render.output.metrics import ComparisonMetrics
    from render.output.report import render_report
    from render.output.report.page import FACE_COLUMNS

    scene, out, metrics, text = compared
    calc = metrics["calculation"]
    faces = [len(s["faces"]) for s in calc["setups"]]
    assert faces == [4, 4]
    section = _section(text)
    rows = _face_rows(section)
    assert len(rows) == sum(faces)
    assert "+ interreflected" not in section.text() and INTERREFLECTED_LABEL not in section.text()
    for cell in (n for row in rows for n in row.iter() if "data-metric" in n.attrs):
        assert "with_interreflected" not in cell.attrs["data-metric"]
        assert json.loads(cell.attrs["data-value"]) == resolve(metrics, cell.attrs["data-metric"])
    paths = {n.attrs["data-metric"] for row in rows for n in row.iter() if "data-metric" in n.attrs}
    for i, n in enumerate(faces):
        for j in range(n):
            for _, key in FACE_COLUMNS:
                assert f"calculation.setups.{i}.faces.{j}.{key}" in paths

    # The same comparison's calculation with 2 bounces, as metrics.json would hold it.
    study = Study(scene)
    setups = [parse_setup("old", study.scene, "--before"), parse_setup("new", study.scene, "--after")]
    report = run_calculation(study, setups, calc_options(study.scene, bounces=2))
    bounced = json.loads(
        json.dumps(calculation_json(report, calc["setup_keys"], calc["pictures"], calc["picture_alts"]))
    )
    with_bounces = {**metrics, "calculation": bounced}
    section = _section(render_report(ComparisonMetrics.from_json(with_bounces), out))
    rows = _face_rows(section)
    assert len(rows) == 2 * sum(faces)
    labelled = [row for row in rows if "+ interreflected" in row.text()]
    assert len(labelled) == sum(faces)
    for row in labelled:
        assert INTERREFLECTED_LABEL in row.text()
        cells = [n for n in row.iter() if "data-metric" in n.attrs]
        assert [c.attrs["data-metric"].rsplit(".", 1)[-1] for c in cells] == [key for _, key in FACE_COLUMNS]
        for cell in cells:
            path = cell.attrs["data-metric"]
            assert ".with_interreflected." in path
            value = resolve(with_bounces, path)
            assert json.loads(cell.attrs["data-value"]) == value
            assert cell.children[0] == format_value(value, cell.attrs["data-rule"])
    assert "up to 2 bounces" in section.text()
    # The direct rows are the same figures as without bounces.
    for i, n in enumerate(faces):
        for j in range(n):
            for _, key in FACE_COLUMNS:
                assert bounced["setups"][i]["faces"][j][key] == calc["setups"][i]["faces"][j][key]


def test_the_comparison_calculation_follows_the_renders_bounces(tmp_path):
    # A report whose images show interreflected light must give the calculation's
    # interreflected rows too, labelled, and exactly the record run_calculation gives with the
    # same bounces (tests/test_calc_interreflection.py ties those to the Lambertian ground's
    # integral); the class check stays direct light (common practice, no source).
    from render.calc.fields import INTERREFLECTED_LABEL
    from render.calc.run import calc_options

    scene = write_two_objects_scene(tmp_path, _CALC)
    study = Study(scene)
    study.scene.render.bounces = 1
    study.scene.render.indirect_samples_per_pixel = 1
    out = tmp_path / "out"
    run_comparison(study, "old", "new", ["van"], out, width_px=24, samples_per_pixel=1, progress=False, colour=False)
    metrics = json.loads((out / "metrics.json").read_text(encoding="utf-8"))
    stored = metrics["calculation"]
    setups = [parse_setup("old", study.scene, "--before"), parse_setup("new", study.scene, "--after")]
    bounced = json.loads(json.dumps(run_calculation(study, setups, calc_options(study.scene, bounces=1)).to_json()))
    assert {k: stored[k] for k in bounced} == bounced
    assert all(face.get("with_interreflected") for s in stored["setups"] for face in s["faces"])
    direct = json.loads(json.dumps(run_calculation(study, setups).to_json()))
    for b, d in zip(stored["setups"], direct["setups"], strict=True):
        assert b["class_check"] == d["class_check"]
    section = _section((out / "report.html").read_text(encoding="utf-8"))
    assert "+ interreflected" in section.text() and INTERREFLECTED_LABEL in section.text()
