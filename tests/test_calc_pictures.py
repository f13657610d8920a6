"""Illuminance plan (render.calc.plan) and calculation pictures (render.output.calc_pictures).

Sources: the inverse-square and cosine laws for a point source, E = I(θ)·cos θ / d² (analytic);
linearity of direct illuminance in the lumens (analytic); the PNG signature and IHDR layout of
ISO/IEC 15948:2004; the 1-2-5 series of isolux levels (common practice, no source).
"""

from __future__ import annotations

import math
from dataclasses import replace
from pathlib import Path

import numpy as np
import pytest
from scenes_for_tests import street_model

from render.calc.classes import ClassFigures, LightingClass, check_class
from render.calc.plan import DEFAULT_PLAN_SPACING_M, compute_plan, plan_axes
from render.calc.run import run_calculation
from render.errors import InputError
from render.output.calc_pictures import (
    CALC_PICTURES,
    DPI,
    NIGHT_PICTURE,
    UPWARD_PICTURE,
    WIDTH_IN,
    calc_picture_alt_texts,
    class_limits,
    lux_levels,
    night_light_figure,
    night_light_map,
    write_calc_pictures,
)
from render.scene.model import GroupSetting, Setup
from render.study import Study

SCENES = Path(__file__).resolve().parents[1] / "scenes" / "tests"

#: One isotropic 10 000 lm source 6 m above the centre of an empty 40 m street (no row, no
#: column, no objects); maintenance factor 1.
_ONE_SOURCE = """
[scene]
name = "one source over an empty street"

[street]
length_m = 40.0
carriageway_width_m = 6.0

[[luminaires]]
name = "bare source"
position_m = [20.0, 0.0, 6.0]
photometry = "generic-isotropic"
lamp = "led-4000k-cie-b3"
lumens = 10000.0
maintenance_factor = 1.0
column = false

[[views]]
name = "look"
position_m = [1.0, 0.0]
target_m = [30.0, 0.0, 0.0]
resolution = [32, 18]
"""


@pytest.fixture(scope="module")
def one_source(tmp_path_factory) -> Study:
    path = tmp_path_factory.mktemp("plan") / "one.toml"
    path.write_text(_ONE_SOURCE, encoding="utf-8")
    return Study(path)


@pytest.fixture(scope="module")
def minimal() -> Study:
    return Study(SCENES / "minimal_street.toml")


# --- the plan -----------------------------------------------------------------------------------


def test_plan_of_one_source_is_inverse_square_cosine(one_source):
    # Isotropic I = 10000/(4π) cd at (20, 0, 6). Horizontal illuminance at a point of height z:
    # E = I cos θ / d² = I h / d³ with h = 6 - z (analytic). Points on the footways lie on the
    # kerb-height surface (z = kerb height), on the carriageway at z = 0.
    plan = compute_plan(one_source)
    street = one_source.scene.street
    intensity = 10000.0 / (4.0 * math.pi)
    gy, gx = np.meshgrid(plan.y_m, plan.x_m, indexing="ij")
    z = np.where(np.abs(gy) <= 0.5 * street.carriageway_width_m, 0.0, street.kerb_height_m)
    h = 6.0 - z
    d = np.sqrt((gx - 20.0) ** 2 + gy**2 + h**2)
    expected = intensity * h / d**3
    assert plan.illuminance_lx.shape == (plan.y_m.size, plan.x_m.size)
    # The built-in file's intensity has 7 figures (1.9e-8 relative from 10000/(4π)).
    np.testing.assert_allclose(plan.illuminance_lx, expected, rtol=1e-6)
    assert plan.fields == ()  # no luminaire row: no calculation fields
    np.testing.assert_array_equal(plan.luminaires_xy_m, [[20.0, 0.0]])


def test_plan_doubles_with_the_lumens(one_source):
    # Direct illuminance is linear in the flux (analytic).
    base = compute_plan(one_source)
    rated = one_source.lights().channels[0].lumens
    double = compute_plan(one_source, Setup("double", "", {"*": GroupSetting(lumens=2.0 * rated)}))
    assert double.setup == "double" and base.setup is None
    np.testing.assert_allclose(double.illuminance_lx, 2.0 * base.illuminance_lx, rtol=1e-12)


def test_plan_grid_covers_the_street_by_hand():
    # street_model: 100 m long, carriageway 7 m, kerb 0.15 m, verge 0.5 m, footway 2 m each side,
    # so y runs from -(3.5 + 0.15 + 0.5 + 2) = -6.15 to 6.15 m (worked by hand). At 0.5 m:
    # 201 points along (0, 0.5, ... 100) and ceil(12.3 / 0.5) + 1 = 26 across, 0.492 m apart.
    xs, ys = plan_axes(street_model(), DEFAULT_PLAN_SPACING_M)
    assert xs.size == 201 and xs[0] == 0.0 and xs[-1] == 100.0
    np.testing.assert_allclose(np.diff(xs), 0.5, rtol=1e-12)
    assert ys.size == 26
    assert ys[0] == pytest.approx(-6.15, abs=1e-12) and ys[-1] == pytest.approx(6.15, abs=1e-12)
    np.testing.assert_allclose(np.diff(ys), 12.3 / 25, rtol=1e-12)


def test_plan_edges_fields_and_limit(minimal):
    # minimal_street: carriageway 6 m; the row's luminaires at x = 5 and 35 m (the scene file).
    plan = compute_plan(minimal)
    assert plan.kerb_y_m == (-3.0, 3.0)
    names = [f.name for f in plan.fields]
    assert names == ["lane 1", "lane 2", "footway right", "footway left"]
    x0, x1, y0, y1 = plan.fields[0].extent_m
    assert (x0, x1) == pytest.approx((5.0, 35.0), abs=1e-12)
    assert (y0, y1) == pytest.approx((-3.0, 0.0), abs=1e-12)  # lane 1: the right half
    # A plan of more points than the limit fails before anything is evaluated.
    with pytest.raises(InputError, match="plan points"):
        compute_plan(minimal, spacing_m=0.001)
    with pytest.raises(InputError, match="plan spacing"):
        compute_plan(minimal, spacing_m=float("nan"))


# --- the pictures -------------------------------------------------------------------------------


def test_lux_levels_follow_a_1_2_5_series():
    # The 1-2-5 series (common practice, no source): the largest levels not above the maximum.
    # 37 lx: 20, 10, 5, 2, 1, 0.5, 0.2 (worked by hand).
    assert lux_levels(37.0) == [0.2, 0.5, 1.0, 2.0, 5.0, 10.0, 20.0]
    assert lux_levels(37.0, count=4) == [2.0, 5.0, 10.0, 20.0]
    assert lux_levels(10.0, count=3) == [2.0, 5.0, 10.0]
    assert lux_levels(0.05) == []


def _png_size(data: bytes) -> tuple[int, int]:
    # ISO/IEC 15948:2004: 8-byte signature, then the IHDR chunk with width and height.
    assert data[:8] == b"\x89PNG\r\n\x1a\n" and data[12:16] == b"IHDR"
    return int.from_bytes(data[16:20], "big"), int.from_bytes(data[20:24], "big")


@pytest.fixture(scope="module")
def pictures(minimal, tmp_path_factory):
    setups = [None, Setup("dim", "", {"*": GroupSetting(dimming=0.5)})]
    report = run_calculation(minimal, setups)
    plans = {s.setup: compute_plan(minimal, u) for s, u in zip(report.setups, setups, strict=True)}
    first = write_calc_pictures(report, plans, tmp_path_factory.mktemp("pics-a"))
    again = write_calc_pictures(report, plans, tmp_path_factory.mktemp("pics-b"))
    return report, plans, first, again


def test_pictures_are_written_as_pngs_of_the_expected_width(pictures):
    _, _, first, _ = pictures
    assert [p.name for p in first] == [*CALC_PICTURES, UPWARD_PICTURE]
    for p in first:
        width, height = _png_size(p.read_bytes())
        assert width == round(WIDTH_IN * DPI), p.name  # every picture has the report's width
        assert 200 < height < 2000, p.name


def test_pictures_are_byte_identical_across_runs(pictures):
    _, _, first, again = pictures
    for a, b in zip(first, again, strict=True):
        assert a.read_bytes() == b.read_bytes(), a.name


def test_pictures_carry_what_they_show(pictures):
    from PIL import Image

    _, _, first, _ = pictures
    text = Image.open(first[0]).text
    assert text["lampcast.mode"] == "calculation isolux plan"
    assert text["lampcast.scene"] == "minimal_street.toml" and text["lampcast.setups"] == "the scene as given; dim"


def test_upward_map_picture_says_what_it_holds(pictures):
    # One panel per setup on one scale; reflected light only, said in the metadata and alt text
    # (common practice, no source).
    from PIL import Image

    report, _, first, _ = pictures
    text = Image.open(first[-1]).text
    assert text["lampcast.mode"] == "calculation upward exitance map"
    assert "Reflected light only" in text["lampcast.map"] and "direct upward flux" in text["lampcast.map"]
    alts = calc_picture_alt_texts(report)
    assert len(alts) == len(first) and "lumens per square metre" in alts[-1]
    # Without the map (a calculation record from elsewhere) the picture is not drawn.
    bare = replace(report, setups=tuple(replace(s, upward_map=None) for s in report.setups))
    assert len(calc_picture_alt_texts(bare)) == len(CALC_PICTURES)


def test_missing_plan_is_an_error(pictures, tmp_path):
    report, plans, _, _ = pictures
    with pytest.raises(ValueError, match="no plan"):
        write_calc_pictures(report, {None: plans[None]}, tmp_path)


def test_class_limits_come_from_the_class_check(pictures):
    # A made-up class (not a preset) with Ē ≥ 7.5 lx and U0 ≥ 0.4: the bar chart's lines are
    # the class values of the photopic criteria, on the matching headline figures.
    report, _, _, _ = pictures
    s = report.setups[0]
    cls = LightingClass(
        "test", "P", "made up for the test", "invented", mean_illuminance_lx=7.5, overall_uniformity=0.4
    )
    checked = replace(s, class_check=check_class(cls, s.carriageway_figures("P")))
    limits = class_limits(checked)
    assert limits["carriageway_mean_lx"][0] == 7.5 and limits["carriageway_u0"][0] == 0.4
    assert class_limits(s) == {}
    # Mesopic criteria compare adjusted values with the class: no line on the photopic bars.
    mesopic = replace(s, class_check=check_class(cls, ClassFigures(mean_illuminance_lx=10.0), s_p_ratio=1.5))
    assert "carriageway_mean_lx" not in class_limits(mesopic)


# --- the night light's picture ------------------------------------------------------------------
# Sources: a uniform sky of luminance L over an unobstructed horizontal plane gives E = π·L
# (analytic: ∫ L cos θ dω over the hemisphere); the numbers drawn must be those the calculation
# holds (render.calc.night.NightGrid), and the luminaires' pictures must not change with it
# (common practice, no source).

_SKY_CD_M2 = 0.004


def _night_scene(tmp_path: Path, sky_cd_m2: float | None) -> Path:
    """The minimal street without columns or kerbs, with 2 m footways, and a uniform sky of
    ``sky_cd_m2`` (None: no [night] table)."""
    text = (SCENES / "minimal_street.toml").read_text(encoding="utf-8").replace("lamp = ", "column = false\nlamp = ")
    text = text.replace("length_m = 40.0\n", "length_m = 40.0\nkerb_height_m = 0.0\n")
    text = text.replace(
        "carriageway_width_m = 6.0\n",
        "carriageway_width_m = 6.0\n\n[street.left]\nfootway_width_m = 2.0\n\n[street.right]\nfootway_width_m = 2.0\n",
    )
    if sky_cd_m2 is not None:
        text += f"\n[night]\nsky_luminance_cd_m2 = {sky_cd_m2}\n"
    path = tmp_path / f"night_{sky_cd_m2}.toml"
    path.write_text(text, encoding="utf-8")
    return path


@pytest.fixture(scope="module")
def night_pictures(tmp_path_factory):
    tmp = tmp_path_factory.mktemp("night")
    out = {}
    for sky in (None, _SKY_CD_M2):
        study = Study(_night_scene(tmp, sky))
        setups = [None, Setup("dim", "", {"*": GroupSetting(dimming=0.5)})]
        report = run_calculation(study, setups)
        plans = {s.setup: compute_plan(study, u) for s, u in zip(report.setups, setups, strict=True)}
        out[sky] = report, plans, write_calc_pictures(report, plans, tmp / f"pics-{sky}")
    return out


def test_night_picture_is_drawn_only_with_night_light(night_pictures):
    from PIL import Image

    from render.calc.night import NIGHT_LABEL

    _, _, plain = night_pictures[None]
    report, _, lit = night_pictures[_SKY_CD_M2]
    assert [p.name for p in plain] == [*CALC_PICTURES, UPWARD_PICTURE]
    assert [p.name for p in lit] == [*CALC_PICTURES, UPWARD_PICTURE, NIGHT_PICTURE]
    width, _ = _png_size(lit[-1].read_bytes())
    assert width == round(WIDTH_IN * DPI)
    text = Image.open(lit[-1]).text
    assert text["lampcast.mode"] == "calculation night light"
    assert NIGHT_LABEL in text["lampcast.night_light"] and "0.004 cd/m²" in text["lampcast.night_light"]
    alts = calc_picture_alt_texts(report)
    assert len(alts) == len(lit) and "not part of the class check" in alts[-1]
    # The luminaires' pictures are the same pixels with and without night light (their
    # metadata only points to the night light's picture).
    for a, b in zip(plain, lit, strict=False):
        assert np.array_equal(np.asarray(Image.open(a)), np.asarray(Image.open(b))), a.name
        assert NIGHT_PICTURE in Image.open(b).text["lampcast.night_light"]


def test_night_picture_draws_the_calculation_s_night_grids(night_pictures):
    from matplotlib.collections import QuadMesh

    report, plans, _ = night_pictures[_SKY_CD_M2]
    fig, _ = night_light_figure(report, plans)
    fields_ax, faces_ax = fig.axes[:2]
    s = report.setups[0]
    drawn = [np.asarray(m.get_array()) for m in fields_ax.collections if isinstance(m, QuadMesh)]
    expected = [f.night.illuminance_lx for f in s.fields]
    assert len(drawn) == len(expected) == 4
    for d, e in zip(drawn, expected, strict=True):
        np.testing.assert_array_equal(d.ravel(), e.T.ravel())
        # Open ground under a uniform sky: E = π·L at every point (analytic).
        np.testing.assert_allclose(d, math.pi * _SKY_CD_M2, rtol=1e-9)
    faces = [np.asarray(m.get_array()) for m in faces_ax.collections if isinstance(m, QuadMesh)]
    grids = [g for face in s.faces for g in (face.night_semicylindrical, face.night_vertical)]
    assert len(faces) == len(grids) == 8
    for d, g in zip(faces, grids, strict=True):
        np.testing.assert_array_equal(d.ravel(), g.illuminance_lx.T.ravel())
    labels = [t.get_text() for t in faces_ax.get_yticklabels()]
    assert labels[0] == "footway right, E_sc facing +x" and labels[1] == "footway right, E_v facing +x"
    # The cells' written values and the colour bar's unit.
    written = {t.get_text() for t in fields_ax.texts}
    assert written == {f"{math.pi * _SKY_CD_M2:.3g}"}
    assert "(lx)" in fig.axes[-1].get_ylabel()
    # One panel pair for both setups: the night light does not depend on the luminaires.
    assert len(fig.axes) == 3 and "the scene as given, dim" in fields_ax.get_title(loc="left")


def test_night_picture_is_a_pure_function_of_its_inputs(night_pictures, tmp_path):
    # Drawn on two threads at once, the same bytes as drawn alone (no shared pyplot state).
    from concurrent.futures import ThreadPoolExecutor

    report, plans, lit = night_pictures[_SKY_CD_M2]
    with ThreadPoolExecutor(2) as pool:
        paths = list(pool.map(lambda k: night_light_map(report, plans, tmp_path / f"n{k}.png"), range(2)))
    assert paths[0].read_bytes() == paths[1].read_bytes() == lit[-1].read_bytes()
