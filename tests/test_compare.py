"""The comparison run end to end on small scenes (issue: before and after).

Checks are against the project's own published outputs, each of which other tests tie to outside
sources: the report must show exactly what metrics.json holds, and metrics.json the lamp figures
`lampcast lamps --json` gives; reruns must be byte-identical; escaping must hold for hostile
names; an interrupted run must leave no half-written file under a final name.
"""

from __future__ import annotations

import html
import json
import re
import signal
import subprocess
import sys
import time
from pathlib import Path

import markupsafe
import pytest
from scenes_for_tests import write_two_objects_scene

from render.cli import main
from render.output.comparison import run_comparison

ROOT = Path(__file__).resolve().parents[1]
SCENES = ROOT / "scenes" / "tests"


@pytest.fixture(scope="module")
def run(tmp_path_factory):
    out = tmp_path_factory.mktemp("cmp")
    result = run_comparison(SCENES / "markup_names.toml", "old", "new <u>LED</u>", None, out, progress=False)
    return result


def test_every_output_written(run):
    view_dir = next(p for p in run.out_dir.iterdir() if p.is_dir())
    option = run.metrics.options[0]
    for name in (
        "shared-before.png",
        f"shared-{option}.png",
        "adapted-before.png",
        f"adapted-{option}.png",
        f"side-by-side-{option}.png",
        f"wipe-{option}.gif",
        "luminance-before.png",
        f"luminance-{option}.png",
    ):
        assert (view_dir / name).stat().st_size > 0, name
    assert (run.out_dir / "luminance-legend.png").stat().st_size > 0
    assert (run.out_dir / "metrics.json").exists() and (run.out_dir / "report.html").exists()


def test_png_metadata_traces_the_run(run):
    from PIL import Image

    view_dir = next(p for p in run.out_dir.iterdir() if p.is_dir())
    text = Image.open(view_dir / "shared-before.png").text
    assert text["lampcast.mode"] == "shared" and text["lampcast.setup"] == "old"
    assert text["lampcast.view"] == "<svg onload=alert(2)>"
    assert text["lampcast.scene_sha256"] == run.metrics.scene.sha256
    assert "age 40" in text["lampcast.observer"] and text["lampcast.seed"] == "0"


def test_report_escapes_scene_text(run):
    page = (run.out_dir / "report.html").read_text()
    for raw in (
        "<script>alert('street')</script>",
        "<img src=x onerror=alert(1)>",
        "<svg onload=alert(2)>",
        "<b>bold</b>",
        "<i>lamps</i>",
        "<em>before</em>",
        "<script>document.title='x'</script>",
    ):
        assert raw not in page, raw
    assert markupsafe.escape("<script>alert('street')</script> & Co") in page
    assert markupsafe.escape("<svg onload=alert(2)>") in page


def test_report_numbers_equal_metrics_and_lamp_figures(run, capsys):
    page = (run.out_dir / "report.html").read_text()
    metrics = json.loads((run.out_dir / "metrics.json").read_text())
    cells = re.findall(r'data-metric="([^"]+)"[^>]*data-value="([^"]*)"', page)
    assert len(cells) > 20
    for path, value in cells:
        node = metrics
        for part in html.unescape(path).split("."):
            node = node[int(part)] if isinstance(node, list) else node[part]
        if node is None:
            assert value in ("", "null", "None")
        elif isinstance(node, (int, float)) and not isinstance(node, bool):
            assert float(value) == pytest.approx(float(node), rel=1e-12, abs=1e-15), path
    # metrics.json lamp figures are those `lampcast lamps --json` prints.
    assert main(["lamps", *metrics["lamps"], "--json"]) == 0
    printed = {row["id"]: row for row in json.loads(capsys.readouterr().out)}
    for lamp_id, figures in metrics["lamps"].items():
        for key in (
            "cct_K",
            "ra",
            "r9",
            "rf_cie2017",
            "rf_tm30",
            "rg_tm30",
            "sp_ratio",
            "ler_lm_per_w",
            "blue_fraction",
            "notch_fraction",
        ):
            a, b = figures.get(key), printed[lamp_id].get(key)
            if a is None or b is None:
                assert a is None and b is None, (lamp_id, key)
            else:
                assert a == b, (lamp_id, key)


def test_metrics_json_reads_back_into_the_same_records_and_report(run):
    # metrics.json is the records' to_json(); read back, they give the same JSON and the same
    # report bytes (the report shows the records, so it can be made again from the file).
    from render.output.metrics import ComparisonMetrics
    from render.output.report import render_report

    stored = json.loads((run.out_dir / "metrics.json").read_text(encoding="utf-8"))
    again = ComparisonMetrics.from_json(stored)
    assert again == run.metrics
    assert again.to_json() == stored
    assert render_report(again, run.out_dir) == (run.out_dir / "report.html").read_text(encoding="utf-8")


def test_rerun_is_byte_identical(run, tmp_path):
    again = run_comparison(SCENES / "markup_names.toml", "old", "new <u>LED</u>", None, tmp_path, progress=False)
    files = sorted(p.relative_to(run.out_dir) for p in run.out_dir.rglob("*") if p.is_file())
    assert files == sorted(p.relative_to(again.out_dir) for p in again.out_dir.rglob("*") if p.is_file())
    for rel in files:
        assert (run.out_dir / rel).read_bytes() == (again.out_dir / rel).read_bytes(), rel


def test_command_line_setup_syntax(tmp_path):
    from render.errors import InputError
    from render.output.comparison import parse_setup
    from render.scene import load_scene

    scene = load_scene(ROOT / "scenes" / "demo" / "linden_row.toml")
    s = parse_setup("street:lamp=led-4000k-cie-b3,dimming=0.5;bus stop:lamp=led-2700k-cie-b1", scene, "--after")
    assert s.groups["street"].lamp == "led-4000k-cie-b3" and s.groups["street"].dimming == 0.5
    assert s.groups["bus stop"].lamp == "led-2700k-cie-b1"
    assert parse_setup("led-3000k-cie-b2", scene, "--after").groups["*"].lamp == "led-3000k-cie-b2"
    with pytest.raises(InputError, match="did you mean 'street'"):
        parse_setup("stret:lamp=led-4000k-cie-b3", scene, "--after")
    with pytest.raises(InputError, match="dimming"):
        parse_setup("dimming=2", scene, "--after")


def _valid(path: Path) -> bool:
    """A file is whole: images decode to the end, JSON parses, HTML closes."""
    if path.suffix in (".png", ".gif"):
        from PIL import Image

        with Image.open(path) as im:
            im.load()
            n = getattr(im, "n_frames", 1)
            for k in range(n):
                im.seek(k)
                im.load()
        return True
    if path.suffix == ".json":
        json.loads(path.read_text())
        return True
    if path.suffix == ".html":
        return path.read_text().rstrip().endswith("</html>")
    return True


def test_interrupted_run_leaves_no_half_written_final_file(tmp_path):
    # Kill the comparison at several moments while it writes; every file that has its final
    # name must be complete (temporary files start with "." and are ignored by readers). The
    # child must really have been writing when killed: otherwise there is nothing to check.
    for delay in (0.0, 0.15, 0.4):
        out = tmp_path / f"kill{delay}"
        proc = subprocess.Popen(
            [
                sys.executable,
                "-m",
                "render",
                "compare",
                str(SCENES / "markup_names.toml"),
                "--before",
                "old",
                "--after",
                "new <u>LED</u>",
                "--out",
                str(out),
            ],
            stdout=subprocess.DEVNULL,
            stderr=subprocess.DEVNULL,
            cwd=ROOT,
        )
        deadline = time.time() + 120
        while time.time() < deadline and proc.poll() is None and not (out.exists() and any(out.rglob("*.png"))):
            time.sleep(0.01)
        time.sleep(delay)
        proc.send_signal(signal.SIGKILL)
        proc.wait()
        # Killed mid-run (not finished, not failed on its own before the kill) ...
        assert proc.returncode == -signal.SIGKILL, f"the comparison ended with {proc.returncode} before the kill"
        files = [path for path in out.rglob("*") if path.is_file()] if out.exists() else []
        final = [path for path in files if not path.name.startswith(".")]
        in_progress = [path for path in files if path.name.startswith(".")]
        # ... after writing: at least one output under its final name, or a temporary file
        # that was being written when the signal came.
        assert final or in_progress, "the comparison wrote nothing before it was killed"
        for path in final:
            assert _valid(path), path


def test_every_png_carries_provenance(run):
    from PIL import Image

    for path in run.out_dir.rglob("*.png"):
        text = Image.open(path).text
        assert text.get("Software", "").startswith("lampcast"), path
        assert text.get("lampcast.scene_sha256") == run.metrics.scene.sha256, path


def test_luminance_maps_are_named_as_such(run):
    # Issue 12, item 8: the pictures of luminance are "luminance maps" in file names, metrics keys
    # and headings (plain wording for residents; common practice, no source).
    files = [p.name for p in run.out_dir.rglob("*") if p.is_file()]
    assert not [f for f in files if "falsecolour" in f or "false-colour" in f]
    text = (run.out_dir / "metrics.json").read_text(encoding="utf-8") + (run.out_dir / "report.html").read_text(
        encoding="utf-8"
    )
    assert "falsecolour" not in text and "false-colour" not in text.lower() and "false colour" not in text.lower()
    assert "Luminance map" in (run.out_dir / "report.html").read_text(encoding="utf-8")
    assert "luminance-before.png" in files


def test_one_luminance_scale_and_legend_per_report(tmp_path):
    # Issue 12, item 7: one luminance-map scale for every view and option of a report, with its
    # legend once. The demo's footway and aerial views (0.0001-1 and 0.001-10 cd/m² on their own)
    # and both options must share the scale (whole decades over all images, at most four below
    # the top: common practice, no source).
    import numpy as np
    from PIL import Image

    from render.output.comparison import luminance_scale
    from render.study import Study

    study = Study(ROOT / "scenes" / "demo" / "linden_row.toml")
    result = run_comparison(
        study,
        "sodium",
        ["led-3000k", "led-3000k-half"],
        ["footway", "aerial"],
        tmp_path,
        width_px=64,
        samples_per_pixel=1,
        progress=False,
        colour=False,
        report=True,
    )
    assert len(result.metrics.views) == 2
    lo, hi = result.metrics.luminance_scale_cd_m2
    legends = [p for p in tmp_path.rglob("*legend*")]
    assert legends == [tmp_path / "luminance-legend.png"]
    scales = {
        Image.open(tmp_path / path).text["lampcast.luminance_scale_cd_m2"]
        for v in result.metrics.views
        for path in v.images.luminance.values()
    }
    assert scales == {f"{lo:g} to {hi:g}"}
    page = (tmp_path / "report.html").read_text(encoding="utf-8")
    assert page.count("Legend of every luminance map") == 1
    # The scale is taken over every image together, not per view.
    a, b = np.full((4, 4), 2e-3), np.full((4, 4), 5.0)
    joint = luminance_scale([a, b])
    assert joint[0] <= 2e-3 and joint[1] >= 5.0
    assert joint != luminance_scale([a]) and joint != luminance_scale([b])


def test_several_options_in_one_report(tmp_path, monkeypatch):
    # Issue 12, "choices, not just a pair": one before and several options in one run. The
    # camera rays are cast once per view (every option relights the same buffers), metrics.json
    # holds every option, the report lets the reader pick which two to show and has one column
    # per lighting in the luminance table. Common practice, no source.
    from render.output.metrics import ComparisonMetrics
    from render.study import Study

    study = Study(SCENES / "markup_names.toml")
    casts = []
    render_view = study.render_view
    monkeypatch.setattr(study, "render_view", lambda *a, **k: casts.append(a[0]) or render_view(*a, **k))
    options = ["new <u>LED</u>", "led-3000k-cie-b2", "led-3000k-cie-b2"]
    result = run_comparison(study, "old", options, None, tmp_path, progress=False, colour=False)
    views = [v.name for v in study.scene.views]
    assert casts == views
    m = result.metrics
    assert list(m.setups)[0] == "before" and len(m.options) == 3
    assert len(set(m.options)) == 3  # the same option twice gets its own key and files
    assert [m.setups[k].name for k in m.options] == options
    stored = json.loads((tmp_path / "metrics.json").read_text(encoding="utf-8"))
    assert list(stored["setups"]) == ["before", *m.options]
    assert ComparisonMetrics.from_json(stored) == m
    for v in m.views:
        assert set(v.luminance_cd_m2) == {"before", *m.options}
        for path in v.images.files():
            assert (tmp_path / path).is_file(), path
        assert len(set(v.images.files())) == len(v.images.files())
    page = (tmp_path / "report.html").read_text(encoding="utf-8")
    assert page.count('class="pick-right"') == len(views)
    right = re.search(r'<select id="right-0" class="pick-right">(.*?)</select>', page).group(1)
    assert right.count("<option") == 4
    head = re.search(r'<table class="figures" id="luminance-0".*?</thead>', page, re.S).group(0)
    assert head.count("<th ") == 5  # the statistic, then one column per lighting
    assert len(set(re.findall(r'<th scope="col" class="num">(.*?)</th>', head))) == 4  # each told apart
    for key in m.options:
        assert f'data-metric="views.0.luminance_cd_m2.{key}.mean"' in page
    # Reruns stay byte-identical with several options.
    again = run_comparison(study, "old", options, None, tmp_path / "again", progress=False, colour=False)
    files = sorted(p.relative_to(tmp_path) for p in tmp_path.rglob("*") if p.is_file() and "again" not in p.parts)
    assert files == sorted(p.relative_to(again.out_dir) for p in again.out_dir.rglob("*") if p.is_file())
    for rel in files:
        assert (tmp_path / rel).read_bytes() == (again.out_dir / rel).read_bytes(), rel


def test_second_after_flag_adds_an_option(tmp_path):
    # Issue 12: a second --after used to replace the first silently.
    out = tmp_path / "cli"
    code = main(
        [
            "compare",
            str(SCENES / "markup_names.toml"),
            "--before",
            "old",
            "--after",
            "new <u>LED</u>",
            "--after",
            "led-3000k-cie-b2",
            "--out",
            str(out),
            "--no-report",
            "--quiet",
        ]
    )
    assert code == 0
    stored = json.loads((out / "metrics.json").read_text(encoding="utf-8"))
    assert [s["name"] for s in stored["setups"].values()] == ["old", "new <u>LED</u>", "led-3000k-cie-b2"]


def test_views_with_one_file_stem_do_not_overwrite_each_other(tmp_path):
    # Issue 12, item 1: "bins & cars" and "bins / cars" (or "a b" and "a-b") gave one folder, so
    # the second view's pictures stood beside the first view's numbers. Each view now gets its
    # own folder (a suffix, in view order) and metrics.json and the report point at its files.
    from PIL import Image

    text = (SCENES / "markup_names.toml").read_text(encoding="utf-8")
    view = text[text.index("[[views]]") : text.index("[render]")]
    names = ["bins & cars", "bins / cars", "a b", "a-b", "colours"]
    views = "".join(
        view.replace('"<svg onload=alert(2)>"', f'"{n}"').replace("[25.0, 0.0, 1.0]", f"[25.0, {k}.0, 1.0]")
        for k, n in enumerate(names)
    )
    scene = tmp_path / "same_stems.toml"
    scene.write_text(text.replace(view, views), encoding="utf-8")
    out = tmp_path / "out"
    result = run_comparison(scene, "old", "new <u>LED</u>", None, out, progress=False, colour=False)
    folders = [v.images.shared["before"].split("/")[0] for v in result.metrics.views]
    assert folders == ["bins---cars", "bins---cars-2", "a-b", "a-b-2", "colours-2"]
    for v in result.metrics.views:
        assert Image.open(out / v.images.shared["before"]).text["lampcast.view"] == v.name
    again = run_comparison(scene, "old", "new <u>LED</u>", None, tmp_path / "again", progress=False, colour=False)
    assert [v.images for v in again.metrics.views] == [v.images for v in result.metrics.views]


def test_flux_columns_and_setup_wide_lumens_note(tmp_path):
    # Issue 12, item 2: the luminaire table showed the file's rated lamp lumens where the light
    # used another flux. Now rated lamp lumens, the lumens used, the luminaire output and the LOR
    # are separate, labelled columns. Light output ratio = luminaire flux / lamp flux (its
    # definition in the CIE International Lighting Vocabulary, CIE S 017, from memory), and with
    # a relative file the scene's lumens are lamp lumens. A setup-level `lumens` that changes
    # every group (the demo's led-3000k sets 4000 lm for all, the bus stop sets its own) is a note.
    from render.light.photometry import load_photometry, luminous_flux_lm
    from render.output.metrics import published

    result = run_comparison(
        ROOT / "scenes" / "demo" / "linden_row.toml",
        "sodium",
        "led-3000k",
        ["footway"],
        tmp_path,
        width_px=48,
        samples_per_pixel=1,
        progress=False,
        colour=False,
    )
    source = load_photometry("generic-road-asymmetric")
    rated = source.rated_lumens_lm
    lor = luminous_flux_lm(source) / rated
    before = result.metrics.setups["before"].groups["street"]
    assert before.rated_lamp_lumens == published(rated)
    assert before.lumens == 5000.0  # the scene's lamp lumens
    assert before.luminaire_lumens == published(5000.0 * lor)
    assert before.light_output_ratio == published(lor)
    option = result.metrics.setups[result.metrics.options[0]]
    assert option.groups["street"].lumens == 4000.0
    assert option.groups["street"].luminaire_lumens == published(4000.0 * lor)
    (note,) = option.notes
    assert "4000" in note and "changes the lumens of every luminaire group" in note
    assert "own: street (groups with their own lumens: bus stop)" in note
    assert result.metrics.setups["before"].notes == ()
    page = (tmp_path / "report.html").read_text(encoding="utf-8")
    for heading in ("rated lamp lumens (lm)", "lumens used (lm)", "luminaire output (lm)", ">LOR<"):
        assert heading in page, heading
    assert markupsafe.escape(note) in page


# ------------------------------------------------------------ colour view choice (issue 12.4)


def _colours_json(out):
    return json.loads((out / "colours" / "colours.json").read_text(encoding="utf-8"))


def test_compare_analyses_each_object_in_the_view_showing_it(tmp_path):
    # No single view shows both tagged objects: each is analysed in its own view and neither is
    # "not visible" (common practice, no source: an object seen somewhere is never unseen).
    scene = write_two_objects_scene(tmp_path)
    result = run_comparison(scene, "old", "new", None, tmp_path / "best", progress=False)
    data = _colours_json(tmp_path / "best")
    assert [o["view"] for o in data["objects"]] == ["van", "bin"]
    table = next(s for s in result.metrics.extra_sections if s.html_id == "colours").tables[0]
    assert table.columns[:3] == ("object", "view", "daylight name")
    assert [r[1] for r in table.rows] == ["van", "bin"]
    assert not any("not visible" in str(c) for r in table.rows for c in r)
    # --colour-view (and the scene's [colour] view) analyse every object in one view
    assert main(["compare", str(scene), "--before", "old", "--after", "new", "--colour-view", "bin", "--no-report",
                 "--quiet", "--out", str(tmp_path / "bin")]) == 0  # fmt: skip
    assert [o["view"] for o in _colours_json(tmp_path / "bin")["objects"]] == ["bin", "bin"]
    from_scene = write_two_objects_scene(tmp_path, '\n[colour]\nview = "van"\n')
    run_comparison(from_scene, "old", "new", None, tmp_path / "van", progress=False, report=False)
    assert [o["view"] for o in _colours_json(tmp_path / "van")["objects"]] == ["van", "van"]
    with pytest.raises(Exception, match="colour-view"):
        run_comparison(scene, "old", "new", ["van"], tmp_path / "x", progress=False, colour_view="bin")


def test_report_colour_tables_per_lighting_and_picture_alt_texts(tmp_path):
    # Issue 12.5 and the pictures' alt text: "Names that change at night" has one column per
    # lighting, "Pairs that become hard to tell apart" says "none" in words for a lighting
    # without such pairs, and every colour picture's <img> carries the text its PNG is described
    # with (WCAG 2.1 success criterion 1.1.1, text alternatives; PNG 1.2 Description keyword).
    from PIL import Image

    scene = write_two_objects_scene(tmp_path)
    out = tmp_path / "cmp"
    result = run_comparison(scene, "old", ["new", "old"], None, out, progress=False)
    section = next(s for s in result.metrics.extra_sections if s.html_id == "colours")
    data = _colours_json(out)
    labels = list(data["setups"])
    assert len(labels) == 3
    changes = next(t for t in section.tables if t.caption.startswith("Names that change at night"))
    assert changes.columns == ("object", "view", "daylight name", *(f"seen under {s}" for s in labels))
    changed = [o for o in data["objects"] if any(
        data["setups"][s]["objects"][o["name"]]["name_changed"] for s in labels)]  # fmt: skip
    assert len(changes.rows) == max(1, len(changed))
    pairs = next(t for t in section.tables if t.caption == "Pairs that become hard to tell apart")
    for s in labels:
        mine = [r for r in pairs.rows if r[0] == s]
        expected = data["setups"][s]["confusions"]
        assert [r[1] for r in mine] == ([f"{c['a']} / {c['b']}" for c in expected] or ["none"])
    page = (out / "report.html").read_text(encoding="utf-8")
    colours = page[page.index('<section id="colours"') :]
    colours = colours[: colours.index("</section>")]
    assert "<td>none</td>" in colours or not any(r[1] == "none" for r in pairs.rows)
    alts = [html.unescape(a) for a in re.findall(r'<img[^>]* alt="([^"]*)"', colours)]
    described = []
    for rel in section.images:
        with Image.open(out / rel) as im:
            described.append(im.info["Description"])
    assert alts == described and all(len(a) > 40 for a in alts)
    assert section.image_alts == tuple(described)


# ------------------------------------------------------------ luminance per region (issue 12.6)

_REGIONS = """
[scene]
name = "a street with fronts"

[street]
length_m = 40.0
carriageway_width_m = 6.0

[street.left]
footway_width_m = 2.0

[street.right]
footway_width_m = 2.0

[[frontages]]
side = "left"
start_m = 0.0
length_m = 40.0
units = 4

[[objects]]
kind = "wheelie_bin"
name = "green bin"
inspect = true
position_m = [22.0, 4.5]
materials = { body = "object-green" }

[[luminaire_rows]]
layout = "one-side"
side = "left"
start_m = 5.0
spacing_m = 15.0
count = 3
mounting_height_m = 6.0
lamp = "led-3000k-cie-b2"

[[views]]
name = "along"
position_m = [2.0, -1.5]
target_m = [30.0, 1.0, 1.0]
resolution = [96, 54]

[render]
samples_per_pixel = 1
"""


def test_luminance_per_region_a_resident_recognises(tmp_path):
    # Luminance is linear in the luminaire flux (analytic: the photometric definition of
    # luminance, CIE S 017:2020 ILV): the same lamp dimmed to 50 % gives half the luminance in
    # every region, to the published 4 significant digits. Each
    # region's figures come from its own pixels (sky left out), are in metrics.json and in the
    # report under the same path.
    scene = tmp_path / "regions.toml"
    scene.write_text(_REGIONS, encoding="utf-8")
    out = tmp_path / "out"
    result = run_comparison(
        scene, "lamp=led-3000k-cie-b2", "lamp=led-3000k-cie-b2,dimming=0.5", None, out, progress=False, colour=False
    )
    view = result.metrics.views[0]
    names = [r.name for r in view.regions]
    assert names == ["carriageway", "footway left", "footway right", "house fronts", "green bin"]
    before, option = result.metrics.setups
    for region in view.regions:
        full, half = region.luminance_cd_m2[before], region.luminance_cd_m2[option]
        assert full.mean > 0 and region.pixels > 0
        assert half.mean == pytest.approx(0.5 * full.mean, rel=2e-3), region.name
        assert half.min == pytest.approx(0.5 * full.min, rel=2e-3, abs=1e-12), region.name
    assert sum(r.pixels for r in view.regions[:4]) < 96 * 54  # the sky is no region
    road = view.regions[0].luminance_cd_m2
    assert f"the carriageway is darker after the change (mean luminance {road[before].mean:.3g} → " in " ".join(
        result.metrics.summary
    )
    data = json.loads((out / "metrics.json").read_text(encoding="utf-8"))
    assert [r["name"] for r in data["views"][0]["regions"]] == names
    page = (out / "report.html").read_text(encoding="utf-8")
    for r, region in enumerate(view.regions):
        path = f"views.0.regions.{r}.luminance_cd_m2.{option}.mean"
        assert f'data-metric="{path}"' in page
        assert f'data-metric="{path}" data-value="{region.luminance_cd_m2[option].mean!r}"' in page
        assert f'<th scope="row">{html.escape(region.name)}</th>' in page
