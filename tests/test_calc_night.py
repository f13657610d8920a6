"""The night's other light at the calculation points, through ``lampcast calc``'s path.

Sources of the expected values (the same as in tests/test_night.py, here at calculation
points through :func:`render.calc.run.run_calculation`):
* a uniform sky of luminance L over an unobstructed horizontal plane gives E = π·L (analytic:
  ∫ L cos θ dω over the hemisphere); a vertical plane facing the open horizon with a black
  ground below sees half of it, E = π·L/2 (analytic, the same integral over the upper half);
* a parallel beam of normal illuminance E_n from elevation h gives E_n·sin h on horizontal
  ground (cosine law, analytic); on a small vertical half-cylinder facing azimuth α away from
  the beam, E_sc = E_n·cos h·(1 + cos α)/π (the closed form derived in render/calc/fields.py;
  analytic);
* sky view factor at a distance d from the foot of one long wall of height H,
  SVF = (1 + d/√(d² + H²))/2 (2-D configuration factor of a strip, Siegel & Howell
  **(from memory)**, derived again in tests/test_night.py);
* Monte Carlo error of independent Bernoulli samples, √(p(1 − p)/N) (binomial variance);
* a lit window's illuminance is linear in its luminance (Lambertian emitter, analytic), and the
  night light's per-term CSV columns and JSON grids sum to its total (arithmetic, to float
  rounding).
"""

from __future__ import annotations

import json
import math
from collections.abc import Sequence
from dataclasses import replace
from pathlib import Path

import numpy as np
import pytest

from render.calc.night import NIGHT_LABEL, NIGHT_PATHS_PER_POINT, NIGHT_TERMS
from render.calc.run import calc_options, run_calculation
from render.output.calc_text import format_calculation, write_field_csvs
from render.study import Study

MINIMAL = Path(__file__).resolve().parent.parent / "scenes" / "tests" / "minimal_street.toml"
SKY, MOON = 0, 1
# The lanes' fields: carriageway 6 m, two lanes, three points across each at d = W/3.
LANE_Y = np.array([-2.5, -1.5, -0.5, 0.5, 1.5, 2.5])


def _scene(tmp_path: Path, night: str, extra: str = "", footways: bool = True) -> Path:
    """The minimal street without columns and kerbs (nothing above the points but the sky),
    with footways 2 m wide when asked, ``extra`` tables and a [night] table."""
    text = MINIMAL.read_text(encoding="utf-8").replace("lamp = ", "column = false\nlamp = ")
    text = text.replace("length_m = 40.0\n", "length_m = 40.0\nkerb_height_m = 0.0\n")
    if footways:
        text = text.replace(
            "carriageway_width_m = 6.0\n",
            "carriageway_width_m = 6.0\n\n[street.left]\nfootway_width_m = 2.0\n\n[street.right]\nfootway_width_m = 2.0\n",
        )
    p = tmp_path / "night_calc.toml"
    p.write_text(text + extra + "\n[night]\n" + night, encoding="utf-8")
    return p


def _calc(path: Path, bounces: int = 0, **kw):
    study = Study(path)
    return study, run_calculation(study, [None], calc_options(study.scene, bounces=bounces, **kw))


def test_open_plane_under_the_sky_gets_pi_times_its_luminance(tmp_path):
    # E = π·L on every horizontal point with nothing above it (every upward direction leaves
    # the scene: no noise at all), on lanes and footways alike.
    L = 0.004
    study, report = _calc(_scene(tmp_path, f"sky_luminance_cd_m2 = {L}\n"))
    (setup,) = report.setups
    assert len(setup.fields) == 4
    for f in setup.fields:
        assert f.night is not None and f.night.paths == NIGHT_PATHS_PER_POINT
        np.testing.assert_allclose(f.night.illuminance_lx, math.pi * L, rtol=1e-9)
        np.testing.assert_allclose(f.night.per_unit_lx[..., SKY], math.pi, rtol=1e-9)
        np.testing.assert_array_equal(f.night.per_unit_lx[..., MOON], 0.0)
    # Vertical planes 1.5 m above the footways see the upper half: π·L/2, Bernoulli noise.
    for face in setup.faces:
        for grid in (face.night_vertical, face.night_semicylindrical):
            frac = grid.per_unit_lx[..., SKY] / math.pi
            n = frac.size * NIGHT_PATHS_PER_POINT
            assert abs(frac.mean() - 0.5) < 4 * math.sqrt(0.25 / n), (face.name, frac.mean())


def test_night_light_is_never_in_the_luminaires_figures(tmp_path):
    # The luminaires' grids, Ē, Emin, U0, the headline and the class check are those without
    # [night], to the bit; the night light is beside them (common practice, no source: a
    # lighting class judges the installation).
    with_night = _scene(tmp_path, "sky_luminance_cd_m2 = 0.01\nmoon_illuminance_lx = 0.2\n")
    _, on = _calc(with_night, lighting_class="P4")
    _, off = _calc(with_night, lighting_class="P4", night=False)
    assert off.options.night is None and on.options.night is not None
    a, b = on.setups[0], off.setups[0]
    for fa, fb in zip(a.fields, b.fields, strict=True):
        np.testing.assert_array_equal(fa.illuminance_lx, fb.illuminance_lx)
        assert (fa.mean_lx, fa.min_lx, fa.u0) == (fb.mean_lx, fb.min_lx, fb.u0)
        assert fb.night is None and fa.night is not None and fa.night.mean_lx > 0
    for fa, fb in zip(a.faces, b.faces, strict=True):
        np.testing.assert_array_equal(fa.semicylindrical_lx, fb.semicylindrical_lx)
        np.testing.assert_array_equal(fa.vertical_lx, fb.vertical_lx)
    assert a.headline() == b.headline()
    assert a.class_check == b.class_check
    # The JSON states it, labelled, with the luminaires' light plus it apart.
    js = json.loads(json.dumps(a.to_json()))
    night = js["fields"][0]["night"]
    assert night["label"] == NIGHT_LABEL
    assert js["fields"][0]["mean_lx"] == a.fields[0].mean_lx
    assert night["with_luminaires"]["mean_lx"] == pytest.approx(a.fields[0].mean_lx + night["mean_lx"], rel=1e-12)
    assert set(js["faces"][0]["night"]) == {"semicylindrical", "vertical"}
    assert "night_light" in on.to_json()["options"]
    text = format_calculation(on)
    assert "night light" in text and NIGHT_LABEL in text
    assert "night light" not in format_calculation(off)


def test_moonlight_on_open_ground_and_on_a_half_cylinder(tmp_path):
    # E = E_n·sin h on horizontal points (the moon's direct part is exact: one shadow ray);
    # moon toward −y (azimuth 180°). A half-cylinder facing +x sees it at α = 90°:
    # E_sc = E_n·cos h/π; facing −x the same; the vertical planes facing ±x get none.
    En, h = 0.25, 35.0
    study, report = _calc(
        _scene(tmp_path, f"moon_illuminance_lx = {En}\nmoon_elevation_deg = {h}\nmoon_azimuth_deg = 180.0\n")
    )
    s = report.setups[0]
    for f in s.fields:
        np.testing.assert_allclose(f.night.illuminance_lx, En * math.sin(math.radians(h)), rtol=1e-12)
    expected = En * math.cos(math.radians(h)) / math.pi
    for face in s.faces:
        # The trapezoidal rule over 10° steps: within 0.3 % of the closed form (module text).
        np.testing.assert_allclose(face.night_semicylindrical.illuminance_lx, expected, rtol=3e-3)
        np.testing.assert_allclose(face.night_vertical.illuminance_lx, 0.0, atol=1e-15)
    # Relighting: a new moon illuminance is a multiply of the stored per-unit values.
    night = study.scene.night
    brighter = s.fields[0].night.relit(replace(night, moon_illuminance_lx=4 * En))
    np.testing.assert_allclose(brighter.illuminance_lx, 4 * s.fields[0].night.illuminance_lx, rtol=1e-12)
    assert brighter.per_unit_lx is s.fields[0].night.per_unit_lx


@pytest.mark.parametrize("azimuth", [90.0, 150.0])
def test_moonlight_semicylindrical_at_other_azimuths(tmp_path, azimuth):
    # E_sc = E_n·cos h·(1 + cos α)/π for the half-cylinder facing +x, α the beam's azimuth
    # from +x (the moon toward azimuth a from +y toward +x: toward +x at a = 90°).
    En, h = 0.2, 25.0
    _, report = _calc(
        _scene(tmp_path, f"moon_illuminance_lx = {En}\nmoon_elevation_deg = {h}\nmoon_azimuth_deg = {azimuth}\n")
    )
    toward = np.array([math.sin(math.radians(azimuth)), math.cos(math.radians(azimuth))])
    for face in report.setups[0].faces:
        cos_a = float(toward @ [np.sign(face.facing[0]), 0.0])
        want = En * math.cos(math.radians(h)) * (1 + cos_a) / math.pi
        got = face.night_semicylindrical.illuminance_lx
        np.testing.assert_allclose(got, want, rtol=3e-3, atol=1e-12, err_msg=f"{face.name} {face.facing}")
        np.testing.assert_allclose(
            face.night_vertical.illuminance_lx, En * math.cos(math.radians(h)) * max(cos_a, 0.0), rtol=1e-12, atol=1e-15
        )


def test_sky_view_factor_beside_a_wall(tmp_path):
    # A long wall of height H along the carriageway's right edge (its face at y = −3): the
    # lanes' points d = y + 3 from its foot see SVF = (1 + d/√(d² + H²))/2 of the sky, within
    # 4 σ per line of points along the street (direct part, bounces 0).
    H = 5.0
    # A box 4 km long (centred on its base's middle), its face toward the street at y = −3.
    wall = (
        f'\n[[geometry]]\nkind = "box"\nname = "wall"\nsize_m = [4000.0, 0.2, {H!r}]\n'
        'position_m = [20.0, -3.1, 0.0]\nmaterial = "concrete"\n'
    )
    L = 0.01
    _, report = _calc(_scene(tmp_path, f"sky_luminance_cd_m2 = {L}\n", wall, footways=False), include_objects=("wall",))
    lanes = [f for f in report.setups[0].fields if f.name.startswith("lane ")]
    frac = np.concatenate([f.night.illuminance_lx for f in lanes], axis=1) / (math.pi * L)  # (along, 6)
    for j, y in enumerate(LANE_Y):
        d = y + 3.0
        svf = (1 + d / math.hypot(d, H)) / 2
        sigma = math.sqrt(svf * (1 - svf) / (frac.shape[0] * NIGHT_PATHS_PER_POINT))
        assert abs(frac[:, j].mean() - svf) < 4 * sigma, (d, frac[:, j].mean(), svf, sigma)


def test_windows_and_bounces_and_csv(tmp_path):
    # With bounces the night light gains its interreflected part (a grey road reflects the
    # sky onto the face points: more than with bounces 0); the CSV carries the columns.
    night = "sky_luminance_cd_m2 = 0.01\n"
    path = _scene(tmp_path, night)
    _, r0 = _calc(path, bounces=0)
    _, r2 = _calc(path, bounces=2)
    v0 = np.mean([f.night_vertical.mean_lx for f in r0.setups[0].faces])
    v2 = np.mean([f.night_vertical.mean_lx for f in r2.setups[0].faces])
    assert v2 > v0
    assert r2.setups[0].fields[0].night.bounces == 2
    files = write_field_csvs(Study(path).scene, r0, tmp_path / "csv")
    head = files[0].read_text(encoding="utf-8").splitlines()[0]
    assert head == (
        "x_m,y_m,illuminance_lx,night_lx,illuminance_incl_night_not_en13201_lx,"
        "night_sky_glow_lx,night_moonlight_lx,night_lit_windows_lx,night_lit_shop_windows_lx"
    )


def test_calc_command_with_night_light(tmp_path, capsys):
    # `lampcast calc` on a scene with [night]: each field's JSON carries the night light
    # beside its figures (E_n·sin h of the moon on open ground, cosine law), the text shows
    # its rows; `--no-night` leaves it out and the luminaires' figures stay the same.
    from render.cli import main

    scene = _scene(tmp_path, "moon_illuminance_lx = 0.3\nmoon_elevation_deg = 40.0\n")
    assert main(["calc", str(scene), "--json", "-q"]) == 0
    on = json.loads(capsys.readouterr().out)
    assert main(["calc", str(scene), "--json", "-q", "--no-night"]) == 0
    off = json.loads(capsys.readouterr().out)
    for fa, fb in zip(on["setups"][0]["fields"], off["setups"][0]["fields"], strict=True):
        assert fa["night"]["mean_lx"] == pytest.approx(0.3 * math.sin(math.radians(40.0)), rel=1e-12)
        assert fa["night"]["bounces"] == 0 and "night" not in fb
        # Each term's grid beside it: all of it the moon's (the same cosine law), none the sky's.
        terms = fa["night"]["term_illuminance_lx"]
        assert list(terms) == [name for name, _ in NIGHT_TERMS]
        np.testing.assert_allclose(terms["moonlight"], 0.3 * math.sin(math.radians(40.0)), rtol=1e-12)
        np.testing.assert_array_equal(terms["sky_glow"], 0.0)
        assert fa["illuminance_lx"] == fb["illuminance_lx"]
    assert on["setups"][0]["headline"] == off["setups"][0]["headline"]
    assert main(["calc", str(scene), "-q"]) == 0
    assert "night light" in capsys.readouterr().out


def test_report_table_of_the_night_light(tmp_path):
    # The report's calculation part shows the night light's figures from metrics.json's
    # records, each cell the number at its path (common practice, no source).
    from render.output.report.page import _night_table

    _, report = _calc(_scene(tmp_path, "sky_luminance_cd_m2 = 0.003\n"))
    data = json.loads(json.dumps(report.to_json()))
    table = _night_table(data["setups"], data)
    assert table is not None and len(table.rows) == 4 + 2 * 2 * 2  # fields, then 2 footways × 2 facings × 2 kinds
    cell = table.rows[0].cells[0]
    assert cell.path == "calculation.setups.0.fields.0.night.mean_lx"
    assert cell.value == pytest.approx(math.pi * 0.003, rel=1e-9)
    assert data["setups"][0]["fields"][0]["night"]["mean_lx"] == cell.value
    _, plain = _calc(_scene(tmp_path, "sky_luminance_cd_m2 = 0.003\n"), night=False)
    assert _night_table(json.loads(json.dumps(plain.to_json()))["setups"], {}) is None
    # The calculation pictures stay the luminaires' light and their metadata says so.
    from render.output.calc_pictures import _png_text

    assert NIGHT_LABEL in _png_text(report, "plan", None)["lampcast.night_light"]
    assert "lampcast.night_light" not in _png_text(plain, "plan", None)


def test_face_grid_csvs_carry_the_night_light(tmp_path):
    # The face grid files' night columns: moonlight toward azimuth 150° (from +y toward +x)
    # reaches a vertical plane facing +x at cos α = 0.5 and one facing −x not at all, so
    # night_lx = E_n·cos h·max(cos α, 0) on the vertical grid (cosine law, analytic, the
    # moon's direct part exact with bounces 0) and E_n·cos h·(1 + cos α)/π within 0.3 % on the
    # half-cylinders (closed form of render/calc/fields.py; trapezoidal rule); the total column
    # is the luminaires' direct value plus it.
    import csv

    from render.output.calc_text import FACE_COLUMNS, FACE_QUANTITIES, NIGHT_COLUMNS, night_term_columns

    En, h, azimuth = 0.2, 25.0, 150.0
    path = _scene(tmp_path, f"moon_illuminance_lx = {En}\nmoon_elevation_deg = {h}\nmoon_azimuth_deg = {azimuth}\n")
    study, report = _calc(path)
    files = write_field_csvs(study.scene, report, tmp_path / "csv")
    cos_a = math.sin(math.radians(azimuth))  # toward the moon (sin a, cos a), against facing +x
    direct_moon = En * math.cos(math.radians(h))
    want = {
        "vertical": {0.0: direct_moon * max(cos_a, 0.0), 180.0: direct_moon * max(-cos_a, 0.0)},
        "semicylindrical": {0.0: direct_moon * (1 + cos_a) / math.pi, 180.0: direct_moon * (1 - cos_a) / math.pi},
    }
    for name in ("footway right", "footway left"):
        faces = [f for f in report.setups[0].faces if f.name == name]
        for part, column in FACE_QUANTITIES:
            (file,) = [p for p in files if p.name == f"scene-{name.replace(' ', '-')}-{part}.csv"]
            with file.open(encoding="utf-8", newline="") as fh:
                rows = list(csv.reader(fh))
            assert rows[0] == [*FACE_COLUMNS, column, *NIGHT_COLUMNS, *night_term_columns(NIGHT_TERMS)]
            values = np.array(rows[1:], dtype=np.float64)
            night = values[:, rows[0].index(NIGHT_COLUMNS[0])]
            direct = values[:, rows[0].index(column)]
            np.testing.assert_array_equal(values[:, rows[0].index(NIGHT_COLUMNS[1])], direct + night)
            grids = [f.vertical_lx if part == "vertical" else f.semicylindrical_lx for f in faces]
            np.testing.assert_array_equal(direct, np.concatenate([g.ravel() for g in grids]))
            for facing in (0.0, 180.0):
                rows_of = values[:, 3] == facing
                assert rows_of.sum() == faces[0].vertical_lx.size
                rtol = 1e-12 if part == "vertical" else 3e-3
                np.testing.assert_allclose(night[rows_of], want[part][facing], rtol=rtol, atol=1e-15)
            # The moon is the only term lit: its column is night_lx, the others are zero.
            moon = values[:, rows[0].index("night_moonlight_lx")]
            np.testing.assert_array_equal(moon, night)
            for other in ("night_sky_glow_lx", "night_lit_windows_lx", "night_lit_shop_windows_lx"):
                np.testing.assert_array_equal(values[:, rows[0].index(other)], 0.0)


# --- one CSV column and one JSON grid per term of the night light ------------------------------


def _read_csv(path: Path) -> dict[str, np.ndarray]:
    """A CSV's columns by name, in the file's order."""
    import csv

    with path.open(encoding="utf-8", newline="") as fh:
        rows = list(csv.reader(fh))
    values = np.array(rows[1:], dtype=np.float64)
    return {name: values[:, k] for k, name in enumerate(rows[0])}


def _assert_terms_sum(columns: dict[str, np.ndarray], terms: Sequence[tuple[str, str]]) -> None:
    """The term columns close the file, in the terms' order, and sum to ``night_lx`` to float
    rounding (every term is non-negative: a relative 1e-13 is some hundreds of ulps)."""
    from render.output.calc_text import night_term_columns

    names = night_term_columns(terms)
    assert list(columns)[-len(names) :] == list(names)
    total = np.sum([columns[c] for c in names], axis=0)
    np.testing.assert_allclose(total, columns["night_lx"], rtol=1e-13, atol=0.0)


def test_term_columns_of_sky_glow_and_moonlight(tmp_path):
    # Sky glow and moonlight together, each in a column of its own:
    # * horizontal points with nothing above them: night_sky_glow_lx = π·L (a uniform sky of
    #   luminance L over an unobstructed horizontal plane, ∫ L cos θ dω, analytic; exact here,
    #   every upward path leaves the scene) and night_moonlight_lx = E_n·cos z = E_n·sin h
    #   (cosine law, z the moon's zenith angle, analytic);
    # * vertical planes 1.5 m up facing ±x, moon toward azimuth 150° (from +y toward +x): the
    #   sky's column is π·L/2 within 4 σ of Bernoulli noise (the upper half of the sky, black
    #   ground with bounces 0; binomial variance), the moon's E_n·cos h·max(cos α, 0) (cosine
    #   law) and on the half-cylinders E_n·cos h·(1 + cos α)/π within 0.3 % (the closed form
    #   of render/calc/fields.py, trapezoidal rule over 10° steps) with the sky's again π·L/2
    #   (each plane's E_v is π·L/2, so (1/π)·∫E_v dφ over π is too);
    # * no windows: their columns are zero; every file's term columns sum to night_lx.
    L, En, h, az = 0.004, 0.2, 25.0, 150.0
    night = (
        f"sky_luminance_cd_m2 = {L}\nmoon_illuminance_lx = {En}\nmoon_elevation_deg = {h}\nmoon_azimuth_deg = {az}\n"
    )
    study, report = _calc(_scene(tmp_path, night))
    files = write_field_csvs(study.scene, report, tmp_path / "csv")
    assert len(files) == 4 + 2 * 2  # the four fields, then two footways × two quantities
    cos_a = math.sin(math.radians(az))  # the moon's direction against facing +x
    moon_h = En * math.cos(math.radians(h))
    for file in files:
        col = _read_csv(file)
        _assert_terms_sum(col, NIGHT_TERMS)
        for name in ("night_lit_windows_lx", "night_lit_shop_windows_lx"):
            np.testing.assert_array_equal(col[name], 0.0)
        sky, moon = col["night_sky_glow_lx"], col["night_moonlight_lx"]
        if "illuminance_lx" in col:
            np.testing.assert_allclose(sky, math.pi * L, rtol=1e-9)
            np.testing.assert_allclose(moon, En * math.sin(math.radians(h)), rtol=1e-12)
            continue
        frac = sky / (math.pi * L)
        assert abs(frac.mean() - 0.5) < 4 * math.sqrt(0.25 / (frac.size * NIGHT_PATHS_PER_POINT)), (file, frac.mean())
        sign = np.where(col["facing_azimuth_deg_from_x_toward_y"] == 0.0, 1.0, -1.0)
        if "vertical_illuminance_lx" in col:
            np.testing.assert_allclose(moon, moon_h * np.maximum(sign * cos_a, 0.0), rtol=1e-12, atol=1e-15)
        else:
            np.testing.assert_allclose(moon, moon_h * (1 + sign * cos_a) / math.pi, rtol=3e-3)


FRONTAGES = (
    '\n[[frontages]]\nname = "terrace"\nside = "left"\nstart_m = 0.0\nlength_m = 40.0\nunits = 6\nheight_m = 5.6\n'
    '\n[[frontages]]\nname = "shops"\nside = "right"\nkind = "shop"\nstart_m = 0.0\nlength_m = 20.0\nunits = 2\n'
    'height_m = 7.0\n\n[[frontages]]\nname = "launderette"\nside = "right"\nkind = "shop"\nstart_m = 20.0\n'
    "length_m = 20.0\nunits = 2\nheight_m = 7.0\n"
)


def _window_lamps(launderette_cd_m2: float) -> str:
    """Sky glow, every window lit, the launderette's and the terrace's windows each with a
    further lamp of their own (window lamps 3 and 4)."""
    return (
        "sky_luminance_cd_m2 = 0.002\nwindow_lit_fraction = 1.0\nshop_window_lit_fraction = 1.0\n"
        '\n[[night.frontages]]\nname = "launderette"\nlamp = "fluorescent-cie-fl2"\n'
        f"luminance_cd_m2 = {launderette_cd_m2}\nlit_fraction = 1.0\n"
        '\n[[night.frontages]]\nname = "terrace"\nlamp = "led-4000k-cie-b3"\nluminance_cd_m2 = 15.0\n'
        "lit_fraction = 1.0\n"
    )


def test_term_columns_of_every_window_lamp(tmp_path):
    # Four window lamps (the houses' and shops' scene-wide lamps, then the launderette's and
    # the terrace's): the CSVs get night_lit_windows_3_lx and night_lit_windows_4_lx; each
    # column is the term's NightGrid grid and its JSON grid, and they sum to night_lx in every
    # file (fields and face grids). A lit window is a Lambertian emitter, so its illuminance
    # is linear in its luminance (analytic): the launderette at twice its luminance doubles
    # its column and leaves every other column as it was (the same seed: the same paths).
    from render.calc.night import night_terms
    from render.output.calc_text import night_term_columns

    path = _scene(tmp_path, _window_lamps(40.0), FRONTAGES)
    study, report = _calc(path)
    terms = night_terms(6)
    assert [t for t, _ in terms][-2:] == ["lit_windows_3", "lit_windows_4"]
    assert night_term_columns(terms)[-2:] == ("night_lit_windows_3_lx", "night_lit_windows_4_lx")
    setup = report.setups[0]
    files = write_field_csvs(study.scene, report, tmp_path / "csv")
    columns = {f.name: _read_csv(f) for f in files}
    for col in columns.values():
        _assert_terms_sum(col, terms)
    lane = setup.fields[0]
    assert lane.night.terms == terms
    lane_col = columns["scene-lane-1.csv"]
    js = json.loads(json.dumps(lane.to_json()))["night"]
    for k, (name, _) in enumerate(terms):
        np.testing.assert_array_equal(lane_col[f"night_{name}_lx"], lane.night.terms_lx[..., k].ravel())
        np.testing.assert_array_equal(np.ravel(js["term_illuminance_lx"][name]), lane.night.terms_lx[..., k].ravel())
    np.testing.assert_allclose(
        np.sum([js["term_illuminance_lx"][n] for n, _ in terms], axis=0), js["illuminance_lx"], rtol=1e-13, atol=0.0
    )
    # The terrace, the only houses, has a lamp of its own: the houses' scene-wide lamp lights
    # nothing; the shops', the launderette's and the terrace's lamps each reach some point.
    assert all(not c["night_lit_windows_lx"].any() for c in columns.values())
    for name in ("night_lit_shop_windows_lx", "night_lit_windows_3_lx", "night_lit_windows_4_lx"):
        assert max(c[name].max() for c in columns.values()) > 0, name
    # The faces' JSON: a grid per term too, summing to the face grid's.
    face = json.loads(json.dumps(setup.faces[0].to_json()))["night"]
    for kind in ("vertical", "semicylindrical"):
        grids = face[kind]["term_illuminance_lx"]
        assert list(grids) == [n for n, _ in terms]
        np.testing.assert_allclose(np.sum(list(grids.values()), axis=0), face[kind]["illuminance_lx"], rtol=1e-13)

    # Twice the launderette's luminance: its column doubles, the others stay to the bit.
    brighter = _scene(tmp_path, _window_lamps(80.0), FRONTAGES)
    study2, report2 = _calc(brighter)
    files2 = write_field_csvs(study2.scene, report2, tmp_path / "csv2")
    for f in files2:
        a, b = columns[f.name], _read_csv(f)
        np.testing.assert_allclose(b["night_lit_windows_3_lx"], 2 * a["night_lit_windows_3_lx"], rtol=1e-12)
        for name in night_term_columns(terms)[:-2] + night_term_columns(terms)[-1:]:
            np.testing.assert_array_equal(b[name], a[name])


def test_csvs_without_night_light_have_no_night_columns(tmp_path):
    # Without [night] (and with it left out) the files have only the luminaires' columns:
    # the same text as before the night light had columns of its own.
    from render.output.calc_text import FACE_COLUMNS, FIELD_COLUMNS

    study, report = _calc(_scene(tmp_path, "sky_luminance_cd_m2 = 0.002\n"), night=False)
    for f in write_field_csvs(study.scene, report, tmp_path / "csv"):
        head = f.read_text(encoding="utf-8").splitlines()[0].split(",")
        assert head == list(FIELD_COLUMNS) or head[: len(FACE_COLUMNS)] == list(FACE_COLUMNS) and len(head) == 5, head
