"""The whole calculation run (render.calc.run): what the scene's objects, markings, traffic
and energy inputs do to the figures, checked by hand and against analytic results."""

from __future__ import annotations

import math
from pathlib import Path

import numpy as np
import pytest

from render.calc import run as calc_run
from render.calc.fields import evaluate_field, row_fields
from render.calc.run import calc_options, calc_study, run_calculation
from render.cli import main
from render.colour.lamps import get_lamp
from render.colour.materials import get_material, luminous_reflectance, material_library
from render.study import Study

MINIMAL = Path(__file__).resolve().parent.parent / "scenes" / "tests" / "minimal_street.toml"
BASE = MINIMAL.read_text(encoding="utf-8")

CAR = """
[[objects]]
kind = "car"
name = "parked car"
position_m = [20.0, -1.5]
"""

MARKING = """
[[markings]]
kind = "polygon"
name = "painted box"
points_m = [[8.0, -3.0], [32.0, -3.0], [32.0, 0.0], [8.0, 0.0]]
material = "paint-kerb-red"
"""


def _scene(tmp_path: Path, extra: str, base: str = BASE, name: str = "street.toml") -> Path:
    path = tmp_path / name
    path.write_text(base + "\n" + extra, encoding="utf-8")
    return path


def _lane_grids(study: Study) -> dict[str, np.ndarray]:
    used = calc_study(study, calc_options(study.scene).include_objects)
    return {f.name: evaluate_field(used, f).illuminance_lx for f in row_fields(study.scene)}


def test_objects_are_left_out_unless_named(tmp_path):
    # EN 13201-3 computes on an empty road (memory): a parked car must not shadow grid points
    # unless [calc] include_objects names it.
    empty = _lane_grids(Study(MINIMAL))
    parked = Study(_scene(tmp_path, CAR))
    grids = _lane_grids(parked)
    for name, grid in empty.items():
        np.testing.assert_array_equal(grids[name], grid)
    included = calc_study(parked, ("parked car",))
    lane = next(f for f in row_fields(parked.scene) if f.name == "lane 1")
    shadowed = evaluate_field(included, lane).illuminance_lx
    assert (shadowed < empty["lane 1"] - 1e-9).any()  # the car does shadow when asked
    opts = calc_options(parked.scene, include_objects="all")
    assert opts.include_objects == ("parked car",)


def test_markings_do_not_shadow_calculation_points(tmp_path, monkeypatch):
    # Analytic: a layer of paint 2 mm proud of the road does not block light reaching it; the
    # grid under a painted box equals the grid of the same street without it.
    plain = _lane_grids(Study(MINIMAL))
    painted = _lane_grids(Study(_scene(tmp_path, MARKING)))
    for name, grid in plain.items():
        np.testing.assert_array_equal(painted[name], grid)
    assert plain["lane 1"].min() > 0


def test_traffic_directions(tmp_path, capsys):
    # Two-way: an observer per lane and direction; one-way: along +x only (EN 13201-3, memory).
    one_way = _scene(tmp_path, '[calc]\ntraffic = "one-way"\n')
    report = run_calculation(Study(one_way), [None])
    assert [(r.observer_lane, r.direction) for r in report.setups[0].luminance] == [("lane 1", 1), ("lane 2", 1)]
    both = run_calculation(Study(MINIMAL), [None]).setups[0]
    assert {r.direction for r in both.luminance} == {1, -1}
    w = both.worst
    assert w is not None
    assert w.mean_cd_m2 == min(r.mean_cd_m2 for r in both.luminance)
    assert w.ti_percent == max(t.ti_percent for t in both.ti)


ENERGY = """
[energy]
annual_burning_hours_h = 4000.0
night_hours = 12.0
tariff_per_kwh = 0.25
currency = "EUR"
grid_factor_kg_per_kwh = 0.2

[setups.scheduled]
lamp = "led-4000k-cie-b3"
input_watts = 30.0
schedule = [[5.0, 12.0, 0.5]]

[setups.half]
lamp = "led-4000k-cie-b3"
input_watts = 30.0
dimming = 0.5

[setups.from-file]
lamp = "led-4000k-cie-b3"
lumens = 3000.0
"""


def test_annual_energy_by_hand(tmp_path):
    # By hand (energy = power x hours, EN 13201-5 from memory): two 30 W luminaires, 4000 h a
    # year, full output for 5 h and half for 7 h of a 12 h night with power proportional to
    # light: 2 x 30 W x 4000 h x (5 + 7 x 0.5)/12 = 170 kWh; 0.25 a kWh, 0.2 kg CO2 a kWh.
    study = Study(_scene(tmp_path, ENERGY))
    report = run_calculation(study, ["scheduled", "half", "from-file"])
    scheduled, half, from_file = report.setups
    assert scheduled.energy is not None and half.energy is not None and from_file.energy is not None
    assert scheduled.energy.annual_kwh == pytest.approx(170.0, rel=1e-12)
    assert scheduled.energy.annual_cost == pytest.approx(42.5, rel=1e-12)
    assert scheduled.energy.annual_co2_kg == pytest.approx(34.0, rel=1e-12)
    assert scheduled.energy.installed_watts_w == pytest.approx(60.0)
    # No schedule: the setup's dimming all night, 2 x 30 W x 4000 h x 0.5 = 120 kWh.
    assert half.energy.annual_kwh == pytest.approx(120.0, rel=1e-12)
    assert half.energy_vs_before is not None
    assert half.energy_vs_before.annual_kwh == pytest.approx(-50.0, rel=1e-12)
    assert half.energy_vs_before.relative == pytest.approx(-50.0 / 170.0, rel=1e-12)
    # The generic file states 45 W for 6000 lm; at 3000 lm, 22.5 W at constant efficacy:
    # 2 x 22.5 W x 4000 h = 180 kWh, labelled as scaled.
    assert from_file.energy.annual_kwh == pytest.approx(180.0, rel=1e-12)
    assert {p.watts_source for p in from_file.energy.parts} == {"photometric file scaled to lumens"}


def test_bad_schedule_names_the_setup(tmp_path, capsys):
    path = _scene(tmp_path, ENERGY.replace("[[5.0, 12.0, 0.5]]", "[[5.0, 14.0, 0.5]]"))
    assert main(["calc", str(path), "-q"]) == 2
    err = capsys.readouterr().err
    assert "setups.scheduled.schedule" in err and "14" not in err.split("setups.scheduled.schedule")[0]


ISOTROPIC = """# Open flat street, one material, two isotropic sources of 1000 cd, no columns.
[scene]
name = "open plane"

[street]
length_m = 40.0
carriageway_width_m = 6.0
kerb_height_m = 0.0
carriageway_material = "concrete-paving"
kerb_material = "concrete-paving"
footway_material = "concrete-paving"
verge_material = "concrete-paving"
frontage_material = "concrete-paving"
centre_line = "none"

[[luminaire_rows]]
layout = "one-side"
side = "left"
start_m = 5.0
spacing_m = 30.0
count = 2
mounting_height_m = 6.0
column = false
photometry = "generic-isotropic"
lamp = "led-4000k-cie-b3"
lumens = 12566.370614359172
maintenance_factor = 1.0

[[views]]
name = "look"
position_m = [1.0, 0.0]
target_m = [30.0, 0.0, 0.0]
resolution = [32, 18]
"""


def _rectangle_solid_angle(x0: float, x1: float, y0: float, y1: float, px: float, py: float, h: float) -> float:
    """Solid angle (sr) of the rectangle [x0, x1] x [y0, y1] in the plane z = 0 from (px, py, h):
    the corner formula atan(ab / (h sqrt(a² + b² + h²))) summed with signs (analytic)."""

    def corner(a: float, b: float) -> float:
        return math.atan(a * b / (h * math.sqrt(a * a + b * b + h * h)))

    return corner(x1 - px, y1 - py) - corner(x0 - px, y1 - py) - corner(x1 - px, y0 - py) + corner(x0 - px, y0 - py)


def test_reflected_and_direct_upward_flux_analytic(tmp_path):
    # Analytic: a source of I cd above a matt plane puts I x (solid angle of the plane) lumens on
    # it, and a matt surface of reflectance rho reflects rho times that into the upper
    # hemisphere. An isotropic source sends half its flux up (ULOR 0.5).
    study = Study(_scene(tmp_path, "", base=ISOTROPIC))
    sky = run_calculation(study, [None]).setups[0].sky
    street = study.scene.street
    assert street is not None
    y_edge = street.building_line_y("left")
    flux = sum(
        1000.0
        * _rectangle_solid_angle(0.0, street.length_m, -y_edge, y_edge, lum.position_m[0], lum.position_m[1], 6.0)
        for lum in study.scene.luminaires
    )
    rho = luminous_reflectance(
        get_material("concrete-paving", material_library()).reflectance, get_lamp("led-4000k-cie-b3").spd
    )
    # Midpoint rule on 1 m patches under sources 6 m high: error well under 0.2 % here.
    assert sky.reflected_upward_lm == pytest.approx(rho * flux, rel=2e-3)
    assert sky.direct_upward_lm == pytest.approx(2 * 0.5 * 4 * math.pi * 1000.0, rel=1e-6)
    assert sky.upward_lm_per_m == pytest.approx(sky.upward_lm / 40.0, rel=1e-12)


def test_sky_glow_relative_scales_with_lumens(tmp_path):
    # Linear: the same lamp at twice the lumens sends twice the light up, by every weighting.
    path = _scene(tmp_path, "[setups.a]\nlumens = 3000.0\n\n[setups.b]\nlumens = 6000.0\n")
    report = run_calculation(Study(path), ["a", "b"])
    rel = report.setups[1].sky_relative
    own = report.setups[0].sky_relative
    assert own is not None and own.upward == own.rayleigh_weighted == own.scotopic_weighted == 1.0
    assert rel is not None
    # Exact but for the contributions below Study.negligible_lx the light evaluation skips,
    # which do not double with the lumens: agreement to 1e-5.
    for value in (rel.upward, rel.rayleigh_weighted, rel.scotopic_weighted):
        assert value == pytest.approx(2.0, rel=1e-5)


FRONTAGE = """
[[frontages]]
name = "terrace"
side = "left"
start_m = 0.0
length_m = 40.0
height_m = 7.5
"""


def test_facade_illuminance_by_hand_and_limits(tmp_path):
    # Analytic: E_v = I cos(theta)/d² on the facade plane from an isotropic 1000 cd source
    # (no shadow reaches the points: the facade faces the street, nothing stands between).
    path = _scene(tmp_path, FRONTAGE + "\n[calc]\nmax_facade_illuminance_lx = 1.0\n", base=ISOTROPIC)
    study = Study(path)
    result = run_calculation(study, [None]).setups[0].obtrusive
    assert len(result) == 1
    facade = result[0]
    p = facade.points_m[0]
    expected = 0.0
    for lum in study.scene.luminaires:
        d = np.asarray(lum.position_m) - p
        dist = float(np.linalg.norm(d))
        cos_t = float(-d[1]) / dist  # the left facade faces -y
        expected += 1000.0 * max(cos_t, 0.0) / dist**2
    # The file tabulates I = 1000/(4 pi) x 4 pi to 8 digits: agreement to 1e-6.
    assert facade.vertical_lx[0] == pytest.approx(expected, rel=1e-6)
    assert facade.limits.max_vertical_lx == 1.0
    assert facade.passes == (facade.max_vertical_lx <= 1.0)
    assert not facade.passes  # 1000 cd from ~5 m gives tens of lux


def test_scene_class_default_and_overrides(tmp_path, capsys):
    path = _scene(tmp_path, '[calc]\nlighting_class = "P4"\n')
    report = run_calculation(Study(path), [None])
    check = report.setups[0].class_check
    assert check is not None and check.lighting_class.name == "P4"
    assert main(["calc", str(path), "--no-class", "-q"]) == 0
    assert "class P4" not in capsys.readouterr().out
    bad = _scene(tmp_path, '[calc]\nlighting_class = "P9"\n', name="bad.toml")
    assert main(["calc", str(bad), "-q"]) == 2
    assert "calc.lighting_class" in capsys.readouterr().err


def test_mesopic_check_is_labelled_and_only_for_p_classes(capsys):
    # CIE 191:2010 mesopic adjustment applies to P classes (render.calc.classes).
    assert main(["calc", str(MINIMAL), "--class", "P4", "--mesopic", "-q"]) == 0
    assert "mesopic (CIE 191)" in capsys.readouterr().out
    assert main(["calc", str(MINIMAL), "--class", "M3", "--mesopic", "-q"]) == 2
    assert "P classes" in capsys.readouterr().err


def test_unknown_object_name_is_an_input_error(capsys):
    assert main(["calc", str(MINIMAL), "--include-objects", "nothing here", "-q"]) == 2
    assert "--include-objects" in capsys.readouterr().err


def test_calc_shadow_offset_clears_markings():
    # The offset must clear the markings' lift (render.geometry.build) with room to spare.
    from render.geometry.build import MARKING_LIFT_M

    assert calc_run.CALC_SHADOW_OFFSET_M > 2 * MARKING_LIFT_M


def test_scene_r_table_keys_are_checked_on_load(tmp_path, capsys):
    # lampcast's r-table layout (render.light.rtable): Q0 scaling needs the table's own Q0.
    (tmp_path / "r.csv").write_text("scale,0.0001\ntan_gamma,0,180\n0,300,200\n12,100,50\n", encoding="utf-8")
    base = BASE.replace("carriageway_width_m = 6.0", 'carriageway_width_m = 6.0\nr_table = "r.csv"\nq0_sr = 0.07')
    path = _scene(tmp_path, "", base=base)
    assert main(["check", str(path), "-q"]) == 2
    assert "street.q0_sr" in capsys.readouterr().err
    no_table = _scene(
        tmp_path, "", base=BASE.replace("carriageway_width_m = 6.0", "carriageway_width_m = 6.0\nq0_sr = 0.07")
    )
    assert main(["check", str(no_table), "-q"]) == 2
    assert "give `r_table`" in capsys.readouterr().err
    (tmp_path / "bad.csv").write_text("scale,0.0001\ntan_gamma,0,180\n0,300,x\n", encoding="utf-8")
    bad = _scene(
        tmp_path, "", base=BASE.replace("carriageway_width_m = 6.0", 'carriageway_width_m = 6.0\nr_table = "bad.csv"')
    )
    assert main(["check", str(bad), "-q"]) == 2
    err = capsys.readouterr().err
    assert "bad.csv" in err and "line 3" in err


def test_scene_r_table_is_the_calculation_default(tmp_path):
    (tmp_path / "r.csv").write_text("scale,0.0001\nq0,0.07\ntan_gamma,0,180\n0,300,200\n12,100,50\n", encoding="utf-8")
    base = BASE.replace("carriageway_width_m = 6.0", 'carriageway_width_m = 6.0\nr_table = "r.csv"\nq0_sr = 0.14')
    study = Study(_scene(tmp_path, "", base=base))
    opts = calc_options(study.scene)
    assert opts.r_table is not None and opts.q0_sr == 0.14
    setup = run_calculation(study, [None], opts).setups[0]
    assert setup.luminance_model == "r-table" and setup.road_reflectance is None
