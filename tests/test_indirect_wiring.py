"""Interreflected light where other stages use it: calculations, colour analysis, provenance.

What each check rests on:
* the interreflected term itself is checked against analytic results in ``test_indirect.py``
  (integrating sphere, ρΦ/(A(1 − ρ)) per band within 1 %; closed box conserving energy); here
  the calculation must carry exactly that term (``Study.interreflected_illuminance_lx`` at the
  fields' own points, same seed: equal to the bit) and, traced with another seed, agree within
  Monte Carlo noise: 5 standard errors of the difference of two independent means (central
  limit theorem; 5 rather than 3 so that the check does not fail by chance, own choice);
* illuminance adds linearly over independent contributions (superposition, analytic): direct +
  interreflected is the figure with interreflected light;
* a surface that sees lit surfaces receives light reflected from them (Lambertian reflection,
  L = ρE/π > 0 for ρ, E > 0; analytic, sign only): pixels in the shadow of every luminaire get
  cone signals when bounces are on;
* bounces off leaves every figure, file and image text as it was (to the bit: common practice,
  no source).
"""

from __future__ import annotations

import copy
import dataclasses
import json
import math
from pathlib import Path

import numpy as np
import pytest
from scenes_for_tests import TWO_OBJECTS_SETUPS_NIGHT, write_two_objects_scene

from render.calc.fields import INTERREFLECTED_LABEL, row_fields
from render.calc.run import CalcOptions, calc_study, run_calculation
from render.cli import main
from render.light.indirect import DEFAULT_BOUNCES
from render.study import Study

MINIMAL = Path(__file__).resolve().parent.parent / "scenes" / "tests" / "minimal_street.toml"
BOUNCES = 2

# ------------------------------------------------------------------------------------------
# Calculations
# ------------------------------------------------------------------------------------------


@pytest.fixture(scope="module")
def study() -> Study:
    return Study(MINIMAL)


@pytest.fixture(scope="module")
def reports(study):
    direct = run_calculation(study, [None], CalcOptions())
    with_bounces = run_calculation(study, [None], CalcOptions(bounces=BOUNCES))
    return direct, with_bounces


def test_bounces_off_leaves_the_calculation_as_it_was(study, reports):
    # Bounces 0: the fields' grids are the direct illuminance at their points to the bit (the
    # same call the calculation made before interreflection existed), and nothing is added to
    # the JSON.
    direct, _ = reports
    used = calc_study(study, ())
    for field, result in zip(row_fields(study.scene), direct.setups[0].fields, strict=True):
        assert result.interreflected_lx is None
        ref = np.asarray(used.illuminance_lx(field.points_m, field.normals, None)).reshape(field.shape)
        np.testing.assert_array_equal(result.illuminance_lx, ref)
        assert "with_interreflected" not in result.to_json()
    assert "bounces" not in direct.to_json()["options"]


def test_bounces_add_the_interreflected_illuminance(study, reports):
    direct, bounced = reports
    used = calc_study(study, ())
    seed = study.scene.render.seed
    # Direct figures, headline and class figures stay direct light, except the upward total: it
    # takes the upward exitance map's figure, which with bounces carries the interreflected
    # light going up (stated in ``reflected_upward_map_bounces``).
    upward = {"upward_lm_per_m", "rayleigh_relative", "scotopic_relative"}
    heads = [(h.key, h.value) for h in bounced.setups[0].headline() if h.key not in upward]
    assert heads == [(h.key, h.value) for h in direct.setups[0].headline() if h.key not in upward]
    assert bounced.setups[0].sky.reflected_upward_map_bounces == BOUNCES
    assert direct.setups[0].sky.reflected_upward_map_bounces == 0
    assert bounced.setups[0].sky.upward_lm > direct.setups[0].sky.upward_lm  # light reflected up again
    total_extra = 0.0
    for field, d, b in zip(row_fields(study.scene), direct.setups[0].fields, bounced.setups[0].fields, strict=True):
        np.testing.assert_array_equal(b.illuminance_lx, d.illuminance_lx)
        ref = used.interreflected_illuminance_lx(field.points_m, field.normals, None, bounces=BOUNCES, seed=seed)
        np.testing.assert_array_equal(b.interreflected_lx, ref.reshape(field.shape))
        np.testing.assert_array_equal(b.with_interreflected_lx, d.illuminance_lx + ref.reshape(field.shape))
        assert np.all(b.interreflected_lx >= 0.0)
        total_extra += float(b.interreflected_lx.sum())
        # Another seed: the same expectation within Monte Carlo noise.
        other = used.interreflected_illuminance_lx(field.points_m, field.normals, None, bounces=BOUNCES, seed=seed + 1)
        a = b.interreflected_lx.ravel()
        se = math.sqrt(a.var(ddof=1) / a.size + other.var(ddof=1) / other.size)
        assert abs(a.mean() - other.mean()) <= 5.0 * se + 1e-12
        js = b.to_json()["with_interreflected"]
        assert js["label"] == INTERREFLECTED_LABEL
        assert js["mean_lx"] == pytest.approx(float((d.illuminance_lx + b.interreflected_lx).mean()), rel=1e-12)
    assert total_extra > 0.0  # kerbs, footways and columns reflect onto the fields
    assert bounced.to_json()["options"]["bounces"] == BOUNCES


def test_labels_in_text_csv_and_pictures(study, reports, tmp_path):
    from PIL import Image

    from render.calc.plan import compute_plan
    from render.output.calc_pictures import write_calc_pictures
    from render.output.calc_text import format_calculation, write_field_csvs

    direct, bounced = reports
    text = format_calculation(bounced)
    assert INTERREFLECTED_LABEL in text and "class check are direct light only" in text
    assert INTERREFLECTED_LABEL not in format_calculation(direct)
    f0 = bounced.setups[0].fields[0]
    written = write_field_csvs(study.scene, bounced, tmp_path / "csv")
    rows = written[0].read_text().splitlines()
    assert rows[0] == "x_m,y_m,illuminance_lx,interreflected_lx,illuminance_incl_interreflected_not_en13201_lx"
    first = [float(x) for x in rows[1].split(",")]
    assert first[2] == f0.illuminance_lx.ravel()[0] and first[3] == f0.interreflected_lx.ravel()[0]
    plain = write_field_csvs(study.scene, direct, tmp_path / "csv0")
    assert plain[0].read_text().splitlines()[0] == "x_m,y_m,illuminance_lx"
    plans = {None: compute_plan(calc_study(study, ()), None)}
    pictures = write_calc_pictures(bounced, plans, tmp_path / "pics")
    for p in pictures:
        assert INTERREFLECTED_LABEL in Image.open(p).text["lampcast.light"]
    plain_pictures = write_calc_pictures(direct, plans, tmp_path / "pics0")
    assert all("lampcast.light" not in Image.open(p).text for p in plain_pictures)


def test_cli_bounces(capsys):
    assert main(["calc", str(MINIMAL), "--json", "-q", "--bounces", "1", "--no-class"]) == 0
    out = json.loads(capsys.readouterr().out)
    assert out["options"]["bounces"] == 1
    assert out["setups"][0]["fields"][0]["with_interreflected"]["label"] == INTERREFLECTED_LABEL
    with pytest.raises(SystemExit) as exit_info:
        main(["calc", str(MINIMAL), "-q", "--bounces", "-1"])
    assert exit_info.value.code == 2
    assert "--bounces" in capsys.readouterr().err
    # --bounces alone: the path tracer's default limit (at least 3 interreflections).
    assert main(["calc", str(MINIMAL), "--json", "-q", "--no-class", "--bounces"]) == 0
    assert json.loads(capsys.readouterr().out)["options"]["bounces"] == DEFAULT_BOUNCES >= 3


# ------------------------------------------------------------------------------------------
# Colour analysis and provenance
# ------------------------------------------------------------------------------------------


@pytest.fixture(scope="module")
def van_view(tmp_path_factory):
    path = write_two_objects_scene(tmp_path_factory.mktemp("van"), setups=TWO_OBJECTS_SETUPS_NIGHT)
    s = Study(path)
    rendered = s.render_view("van", "night", bounces=BOUNCES)
    buffers = copy.copy(rendered.buffers)
    buffers.indirect = None
    return s, rendered, dataclasses.replace(rendered, buffers=buffers)


def test_cone_signals_include_interreflected_light(van_view):
    from render.analysis.view_colours import cone_rod_image, pixel_object_ids
    from render.colour.colorimetry import resolve_responses
    from render.light.indirect import indirect_responses
    from render.light.luminaires import channel_factors
    from render.vision.discrimination import cone_rod_weights

    s, rendered, direct_only = van_view
    factors, lamps = channel_factors(rendered.lights, s.setup("night"))
    spds = s.lamp_spds(lamps)
    w = cone_rod_weights()
    direct_ref = resolve_responses(rendered.buffers, factors, spds, s.reflectances, w)
    # Without the interreflected term: the direct light's cone signals, to the bit.
    direct = cone_rod_image(s, direct_only)
    np.testing.assert_array_equal(direct, direct_ref)
    full = cone_rod_image(s, rendered)
    extra = indirect_responses(rendered.buffers.indirect, rendered.buffers.response, factors, spds, s.reflectances, w)
    np.testing.assert_array_equal(full, direct_ref + extra)
    # The van's pixels in the shadow of every luminaire: black in direct light, lit by bounces.
    van = s.mesh.object_names.index("orange van")
    shadow = (pixel_object_ids(rendered.buffers) == van) & (direct[..., :3].sum(axis=-1) == 0.0)
    assert shadow.sum() >= 20
    assert np.all(full[shadow].mean(axis=0) > 0.0)


def test_provenance_states_the_interreflection(van_view):
    from render.output.provenance import image_metadata
    from render.vision.observer import ObserverSettings

    s, rendered, direct_only = van_view
    obs = ObserverSettings()
    with_bounces = image_metadata(s, rendered, "", obs, 1, 1)
    assert with_bounces["lampcast.interreflection"] == rendered.buffers.indirect.settings.describe()
    assert "lampcast.interreflection" not in image_metadata(s, direct_only, "", obs, 1, 1)


# ------------------------------------------------------------------------------------------
# The comparison's report states the light modelled
# ------------------------------------------------------------------------------------------


@pytest.mark.parametrize("bounces", [0, 1])
def test_report_states_the_light_modelled(tmp_path, bounces):
    # What a reader is told about shadows must match what was traced (common practice, no
    # source): direct light only says so; with bounces the caution and the render settings
    # give them, and metrics.json keeps them.
    from render.output.comparison import CAUTIONS, run_comparison

    path = write_two_objects_scene(tmp_path)
    s = Study(path)
    s.scene.render.bounces = bounces
    s.scene.render.indirect_samples_per_pixel = 2
    result = run_comparison(
        s, "old", "new", ["van"], tmp_path / "out", width_px=24, samples_per_pixel=1, progress=False, colour=False
    )
    stored = json.loads((tmp_path / "out" / "metrics.json").read_text(encoding="utf-8"))
    page = (tmp_path / "out" / "report.html").read_text(encoding="utf-8")
    assert stored["settings"]["bounces"] == bounces
    if bounces:
        assert stored["settings"]["indirect_samples_per_pixel"] == 2
        caution = next(c for c in result.metrics.cautions if c.startswith("Light reflected between surfaces"))
        assert "up to 1 bounce, 2 paths per pixel" in caution
        assert CAUTIONS[1] not in result.metrics.cautions
        assert "paths per pixel for interreflected light" in page
    else:
        assert stored["settings"]["indirect_samples_per_pixel"] is None
        assert CAUTIONS[1] in result.metrics.cautions
        assert "paths per pixel for interreflected light" not in page
    assert "interreflections traced" in page
