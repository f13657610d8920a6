"""Road luminance (render.calc.road): r-table files, L = Σ r·I/h², the standard observer.

Sources: the reduced luminance coefficient r = q·cos³γ and the luminance L = r·I/h² of
CIE 140-2000 (from memory, see docs/references.md); for a Lambertian surface q = ρ/π, so
r = (ρ/π)·cos³γ and L = ρ·E/π with E = I·h/d³ (analytic, derived in render.calc.road);
bilinear interpolation worked by hand; the observer 1.5 m high and 60 m before the field,
or 60 m beyond it for traffic along −x (CIE 140 / EN 13201-3, from memory); mirror symmetry
of the two directions of traffic (analytic).
"""

from __future__ import annotations

import math

import numpy as np
import pytest

from render.calc.fields import CalculationField
from render.calc.road import (
    evaluate_luminance_field,
    lane_observer_m,
    luminaire_intensities_cd,
    road_luminance_cd_m2,
)
from render.errors import InputError
from render.light.luminaires import Channel, LuminaireSet
from render.light.photometry import intensity_cd, load_photometry
from render.light.rtable import parse_r_table, r_value, read_r_table
from render.limits import FILE_SIZE_LIMITS_BYTES

# generic-isotropic: 1000 lm spread evenly, 1000/(4π) cd, as stored in its table (to 7 digits)
ISOTROPIC_CD = float(intensity_cd(load_photometry("generic-isotropic"), 0.0, 0.0))


def test_isotropic_intensity():
    assert ISOTROPIC_CD == pytest.approx(1000.0 / (4.0 * math.pi), rel=1e-6)


def make_lights(positions: list[tuple[float, float, float]], scale: float = 1.0) -> LuminaireSet:
    """Isotropic luminaires (1000 lm) at the given positions, built without a scene."""
    n = len(positions)
    return LuminaireSet(
        names=[f"l{i}" for i in range(n)],
        channels=[Channel("g", "generic-isotropic", 1000.0, 1.0, "lamp")],
        position_m=np.array(positions, dtype=np.float64),
        rotation=np.repeat(np.eye(3)[None], n, axis=0),
        scale=np.full(n, scale),
        table=np.zeros(n, dtype=np.int64),
        c_grid=np.zeros((1, 1)),
        g_grid=np.zeros((1, 1)),
        n_c=np.zeros(1, dtype=np.int64),
        n_g=np.zeros(1, dtype=np.int64),
        cd_table=np.zeros((1, 1, 1)),
        i_max_beyond=np.zeros((1, 1)),
        channel=np.zeros(n, dtype=np.int64),
        opening_m=np.zeros((n, 2)),
        photometries=[load_photometry("generic-isotropic")],
    )


TAN_ROWS = [0.0, 0.25, 0.5, 1.0, 2.0, 4.0, 12.0]
BETAS = [0.0, 30.0, 90.0, 180.0]


def lambertian_csv(rho: float) -> str:
    """An r-table of a matt surface, r = (ρ/π)·cos³γ, written out × 10⁴."""
    lines = ["# matt surface", "scale,0.0001", "tan_gamma," + ",".join(f"{b:g}" for b in BETAS)]
    for t in TAN_ROWS:
        r = rho / math.pi * (1.0 / math.sqrt(1.0 + t * t)) ** 3 * 1e4
        lines.append(f"{t:g}," + ",".join(f"{r:.10f}" for _ in BETAS))
    return "\n".join(lines) + "\n"


def test_matt_r_table_equals_lambertian_luminance():
    # Analytic: for a matt surface r = (ρ/π)·cos³γ, so r·I/h² = ρ·E/π with E = I·h/d³.
    rho, h = 0.2, 8.0
    table = parse_r_table(lambertian_csv(rho))
    lights = make_lights([(0.0, 0.0, h)])
    pts = np.array([[t * h * math.cos(a), t * h * math.sin(a), 0.0] for t, a in zip(TAN_ROWS, [0, 1, 2, 3, 4, 5, 6])])
    eye = np.array([-60.0, 0.0, 1.5])
    with_table = road_luminance_cd_m2(lights, pts, eye, r_table=table)
    matt = road_luminance_cd_m2(lights, pts, eye, reflectance=rho)
    d = np.sqrt(h * h + (np.asarray(TAN_ROWS) * h) ** 2)
    expected = rho * ISOTROPIC_CD * h / d**3 / math.pi
    np.testing.assert_allclose(matt, expected, rtol=1e-6)
    np.testing.assert_allclose(with_table, expected, rtol=1e-6)


HAND_CSV = """# hand-made table
scale,0.0001
q0,0.08
tan_gamma,0,90,180
0,1000,1000,1000
1,800,400,200
"""


def test_hand_made_table_one_point_by_hand():
    # Worked by hand: luminaire at (0, 0, 10), point (0, -5, 0): tan γ = 0.5; observer at
    # (-60, -5, 1.5) looks along +x at the point, the luminaire lies at +y from it: β = 90°.
    # r = 0.5·1000 + 0.5·400 = 700 × 10⁻⁴; L = r·I/h² = 0.07·79.577/100.
    table = parse_r_table(HAND_CSV)
    lights = make_lights([(0.0, 0.0, 10.0)])
    L = road_luminance_cd_m2(lights, np.array([[0.0, -5.0, 0.0]]), np.array([-60.0, -5.0, 1.5]), r_table=table)
    assert L[0] == pytest.approx(0.07 * ISOTROPIC_CD / 100.0, rel=1e-9)
    # Same point seen from behind the luminaire's side: β = 45° between 0 and 90 columns.
    # Observer at (-5, -10, 1.5): view direction (5, 5); point→luminaire (0, 5): β = 45°.
    L45 = road_luminance_cd_m2(lights, np.array([[0.0, -5.0, 0.0]]), np.array([-5.0, -10.0, 1.5]), r_table=table)
    r45 = 0.5 * (0.5 * 1000 + 0.5 * 800) + 0.5 * (0.5 * 1000 + 0.5 * 400)
    assert L45[0] == pytest.approx(r45 * 1e-4 * ISOTROPIC_CD / 100.0, rel=1e-9)
    # Road Q0 twice the table's doubles the luminance (scaling by Q0/Q0 of the table).
    L2 = road_luminance_cd_m2(
        lights, np.array([[0.0, -5.0, 0.0]]), np.array([-60.0, -5.0, 1.5]), r_table=table, road_q0_sr=0.16
    )
    assert L2[0] == pytest.approx(2.0 * L[0], rel=1e-12)


def test_beta_zero_for_luminaire_beyond_the_point_and_180_behind_observer():
    # CIE 140 convention (memory): β = 0 for a luminaire beyond the point, 180° behind the eye.
    table = parse_r_table(HAND_CSV)
    lights_far = make_lights([(10.0, 0.0, 10.0)])
    lights_back = make_lights([(-10.0, 0.0, 10.0)])
    p, eye = np.array([[0.0, 0.0, 0.0]]), np.array([-60.0, 0.0, 1.5])
    far = road_luminance_cd_m2(lights_far, p, eye, r_table=table)[0]
    back = road_luminance_cd_m2(lights_back, p, eye, r_table=table)[0]
    assert far == pytest.approx(800e-4 * ISOTROPIC_CD / 100.0, rel=1e-9)
    assert back == pytest.approx(200e-4 * ISOTROPIC_CD / 100.0, rel=1e-9)


def test_r_beyond_last_row_is_zero_and_beta_folds():
    # Module rule (own): r = 0 beyond the last tan γ row; β is folded into 0–180°.
    table = parse_r_table(HAND_CSV)
    assert float(r_value(table, 0.0, 1.5)) == 0.0
    assert float(r_value(table, -90.0, 1.0)) == pytest.approx(400e-4)
    assert float(r_value(table, 270.0, 1.0)) == pytest.approx(400e-4)


@pytest.mark.parametrize(
    ("text", "line"),
    [
        ("scale,0.0001\ntan_gamma,0,180\n0,1,1\n1,-1,1\n", "line 4"),
        ("scale,0.0001\ntan_gamma,0,180\n0,1,nan\n1,1,1\n", "line 3"),
        ("scale,0.0001\ntan_gamma,0,180\n0,1,1\n0,1,1\n", "line 4"),
        ("scale,0.0001\ntan_gamma,0,200\n0,1,1\n1,1,1\n", "line 2"),
        ("scale,0.0001\n\ntan_gamma,0,180\n0,1,1\n1,1\n", "line 5"),
        ("tan_gamma,0,180\n0,1,1\n1,1,1\n", "line 3"),
        ("# x\nscale,abc\n", "line 2"),
        ("scale,1\nbeta,0,180\n", "line 2"),
    ],
)
def test_bad_r_tables_name_the_line(text, line):
    # Project rule: bad input is an InputError naming file and line (own).
    with pytest.raises(InputError) as err:
        parse_r_table(text, "road.csv")
    assert "road.csv" in str(err.value)
    assert line in str(err.value)


def test_q0_scaling_needs_table_q0():
    table = parse_r_table("scale,0.0001\ntan_gamma,0,180\n0,1,1\n1,1,1\n", "t.csv")
    lights = make_lights([(0.0, 0.0, 10.0)])
    with pytest.raises(InputError, match="Q0"):
        road_luminance_cd_m2(lights, np.zeros((1, 3)), np.array([-60.0, 0, 1.5]), r_table=table, road_q0_sr=0.07)


def test_read_r_table_file(tmp_path):
    path = tmp_path / "road.csv"
    path.write_text(HAND_CSV, encoding="utf-8")
    table = read_r_table(path)
    assert table.q0_sr == 0.08
    assert table.r_sr[1, 1] == pytest.approx(0.04)
    assert "r-table file" in FILE_SIZE_LIMITS_BYTES
    with pytest.raises(InputError, match="missing|not found|No such|does not exist|cannot"):
        read_r_table(tmp_path / "absent.csv")


def lane_field(name: str, y0: float, width: float, spacing: float = 30.0) -> CalculationField:
    n, d, w = 10, spacing / 10, width / 3
    pts = np.array([[d / 2 + i * d, y0 + w / 2 + j * w, 0.0] for i in range(n) for j in range(3)])
    normals = np.tile([0.0, 0.0, 1.0], (len(pts), 1))
    return CalculationField(name=name, points_m=pts, normals=normals, shape=(n, 3), spacing_m=(d, w))


def test_observer_and_field_figures():
    # Observer 1.5 m high, 60 m before the field's start, at the lane's centre (CIE 140, memory);
    # U0 = Lmin/L̄ over the lanes and Ul = Lmin/Lmax on the observer's lane centre line.
    lanes = [lane_field("lane 1", -3.5, 3.5), lane_field("lane 2", 0.0, 3.5)]
    assert lane_observer_m(lanes[0]) == pytest.approx([-60.0, -1.75, 1.5])
    lights = make_lights([(0.0, -4.0, 8.0), (30.0, -4.0, 8.0)])
    table = parse_r_table(HAND_CSV.replace("1,800,400,200", "4,800,400,200"))
    results = evaluate_luminance_field(lights, lanes, r_table=table)
    assert [r.observer_lane for r in results] == ["lane 1", "lane 2"]
    for res in results:
        assert res.model == "r-table"
        values = np.concatenate([g.ravel() for g in res.luminance_cd_m2.values()])
        assert res.mean_cd_m2 == pytest.approx(values.mean())
        assert res.u0 == pytest.approx(values.min() / values.mean())
        centre = res.luminance_cd_m2[res.observer_lane][:, 1]
        assert res.ul == pytest.approx(centre.min() / centre.max())
        assert 0.0 < res.u0 < 1.0 and 0.0 < res.ul < 1.0
        eye = np.array(res.observer_m)
        direct = road_luminance_cd_m2(lights, lanes[1].points_m, eye, r_table=table).reshape(10, 3)
        np.testing.assert_allclose(res.luminance_cd_m2["lane 2"], direct, rtol=1e-12)
    matt = evaluate_luminance_field(lights, lanes, reflectance=0.1)
    assert matt[0].model == "lambertian"


def test_matt_luminance_agrees_with_the_scene_illuminance():
    # L = ρ·E/π (analytic, Lambertian) with E from the scene's own direct-light evaluation
    # (render.study, shadows off): the intensities, rotations and scaling of a real street's
    # asymmetric luminaires are taken the same way as in the images.
    from pathlib import Path

    from render.light.luminaires import luminaire_set
    from render.study import Study

    study = Study(Path(__file__).resolve().parent.parent / "scenes" / "tests" / "minimal_street.toml")
    lights = luminaire_set(study.scene)
    xs, ys = np.meshgrid(np.linspace(2.0, 38.0, 7), np.linspace(-2.5, 2.5, 3))
    pts = np.stack([xs.ravel(), ys.ravel(), np.zeros(xs.size)], axis=1)
    e = study.illuminance_lx(pts, np.tile([0.0, 0.0, 1.0], (len(pts), 1)), shadows=False)
    L = road_luminance_cd_m2(lights, pts, np.array([-60.0, 0.0, 1.5]), reflectance=0.1)
    assert e.min() > 0.0
    np.testing.assert_allclose(L, 0.1 * e / math.pi, rtol=1e-6)


# --- both directions of traffic -------------------------------------------------------------

ASYMMETRIC = load_photometry("generic-road-asymmetric")
MIRROR_X = np.diag([-1.0, 1.0, 1.0])


def make_asymmetric_lights(positions: list[tuple[float, float, float]], rotations: list[np.ndarray]) -> LuminaireSet:
    """generic-road-asymmetric luminaires (at their rated lumens) with the given luminaire-to-world
    matrices, built without a scene."""
    n = len(positions)
    return LuminaireSet(
        names=[f"l{i}" for i in range(n)],
        channels=[Channel("g", "generic-road-asymmetric", 6000.0, 1.0, "lamp")],
        position_m=np.array(positions, dtype=np.float64),
        rotation=np.ascontiguousarray(np.array(rotations, dtype=np.float64)),
        scale=np.ones(n),
        table=np.zeros(n, dtype=np.int64),
        c_grid=np.zeros((1, 1)),
        g_grid=np.zeros((1, 1)),
        n_c=np.zeros(1, dtype=np.int64),
        n_g=np.zeros(1, dtype=np.int64),
        cd_table=np.zeros((1, 1, 1)),
        i_max_beyond=np.zeros((1, 1)),
        channel=np.zeros(n, dtype=np.int64),
        opening_m=np.zeros((n, 2)),
        photometries=[ASYMMETRIC],
    )


#: The field of the mirror checks: 0 to 30 m along x, two 3.5 m lanes.
FIELD_X0, FIELD_X1 = 0.0, 30.0
#: Asymmetric luminaires, turned and tilted so that the layout is not symmetric along x:
#: (x, y, z, rotation_deg, tilt_deg); a row on the right side throwing toward +y and one on
#: the left throwing toward −y.
ASYMMETRIC_LAYOUT = [
    (-30.0, -4.5, 8.0, 12.0, 5.0),
    (0.0, -4.5, 8.0, 12.0, 5.0),
    (30.0, -4.5, 8.0, 12.0, 5.0),
    (60.0, -4.5, 8.0, 12.0, 5.0),
    (15.0, 4.5, 9.0, 200.0, 0.0),
    (45.0, 4.5, 9.0, 200.0, 0.0),
]


def asymmetric_layout(mirrored: bool = False) -> LuminaireSet:
    """The layout above, or its mirror image about the field's middle: x → x0 + x1 − x, and
    each luminaire-to-world matrix R → M·R·M with M = diag(−1, 1, 1). M·R·M is a proper rotation,
    and it mirrors the distribution exactly because generic-road-asymmetric is symmetric about
    its C 90°–270° plane (C → 180° − C; checked in the test that uses it)."""
    from render.light.photometry import luminaire_rotation

    positions, rotations = [], []
    for x, y, z, rot, tilt in ASYMMETRIC_LAYOUT:
        r = luminaire_rotation(rot, tilt)
        if mirrored:
            x, r = FIELD_X0 + FIELD_X1 - x, MIRROR_X @ r @ MIRROR_X
        positions.append((x, y, z))
        rotations.append(r)
    return make_asymmetric_lights(positions, rotations)


def glossy_csv() -> str:
    """A hand-made non-Lambertian r-table (× 10⁴): r falls with β (light toward the observer is
    reflected more) and with tan γ, over the standard range of tan γ up to 12."""
    betas = [0, 15, 30, 60, 90, 120, 150, 180]
    tans = [0, 0.25, 0.5, 0.75, 1, 1.5, 2, 3, 4, 6, 8, 10, 12]
    lines = ["# hand-made glossy table", "scale,0.0001", "q0,0.07", "tan_gamma," + ",".join(map(str, betas))]
    for t in tans:
        cos3 = (1.0 / math.sqrt(1.0 + t * t)) ** 3
        row = [(300.0 + 500.0 * math.cos(math.radians(b / 2.0)) ** 4 * min(t, 2.0)) * cos3 for b in betas]
        lines.append(f"{t:g}," + ",".join(f"{r:.6f}" for r in row))
    return "\n".join(lines) + "\n"


def two_lanes() -> list[CalculationField]:
    return [lane_field("lane 1", -3.5, 3.5, FIELD_X1 - FIELD_X0), lane_field("lane 2", 0.0, 3.5, FIELD_X1 - FIELD_X0)]


def test_observer_beyond_the_field_for_traffic_along_minus_x():
    # CIE 140-2000 / EN 13201-3 observer geometry (from memory): 1.5 m high at the lane's
    # centre, 60 m upstream of the field: before its start for +x traffic, beyond its end for −x.
    lane = lane_field("lane 1", -3.5, 3.5)  # field from 0 to 30 m
    assert lane_observer_m(lane, 1) == pytest.approx([-60.0, -1.75, 1.5])
    assert lane_observer_m(lane, -1) == pytest.approx([90.0, -1.75, 1.5])
    assert lane_observer_m(lane) == pytest.approx(lane_observer_m(lane, 1))
    with pytest.raises(ValueError, match="direction"):
        lane_observer_m(lane, 0)


def test_mirrored_layout_seen_from_minus_x_gives_the_same_luminance():
    # Analytic (mirror symmetry): the layout mirrored about the field's middle, seen by the −x
    # observer, is the original seen by the +x observer point for point (rows in reverse order).
    table = parse_r_table(glossy_csv())
    lanes = two_lanes()
    original, mirror = asymmetric_layout(), asymmetric_layout(mirrored=True)
    # The mirrored luminaires send toward mirrored points what the originals send (the
    # distribution's C → 180° − C symmetry, to the table's printed digits).
    pts = np.concatenate([lane.points_m for lane in lanes])
    mirrored_pts = pts * [-1.0, 1.0, 1.0] + [FIELD_X0 + FIELD_X1, 0.0, 0.0]
    np.testing.assert_allclose(
        luminaire_intensities_cd(mirror, mirrored_pts), luminaire_intensities_cd(original, pts), rtol=1e-6
    )
    forward = evaluate_luminance_field(original, lanes, r_table=table, direction=1)
    backward = evaluate_luminance_field(mirror, lanes, r_table=table, direction=-1)
    # The layout is not symmetric along x: the two directions differ on the original.
    other_way = evaluate_luminance_field(original, lanes, r_table=table, direction=-1)
    assert abs(other_way[0].mean_cd_m2 / forward[0].mean_cd_m2 - 1.0) > 0.01
    assert abs(other_way[0].ul / forward[0].ul - 1.0) > 0.01
    for f, b in zip(forward, backward, strict=True):
        assert (f.direction, b.direction) == (1, -1)
        assert f.observer_lane == b.observer_lane
        assert b.observer_m == pytest.approx((FIELD_X0 + FIELD_X1 - f.observer_m[0], *f.observer_m[1:]))
        for name in f.luminance_cd_m2:
            np.testing.assert_allclose(b.luminance_cd_m2[name][::-1], f.luminance_cd_m2[name], rtol=1e-6)
        assert b.mean_cd_m2 == pytest.approx(f.mean_cd_m2, rel=1e-6)
        assert b.min_cd_m2 == pytest.approx(f.min_cd_m2, rel=1e-6)
        assert b.u0 == pytest.approx(f.u0, rel=1e-6)
        assert b.ul == pytest.approx(f.ul, rel=1e-6)
        assert 0.0 < f.u0 < 1.0 and 0.0 < f.ul < 1.0


def test_luminance_result_records_its_direction():
    lanes = two_lanes()
    results = evaluate_luminance_field(make_lights([(0.0, -4.0, 8.0)]), lanes, reflectance=0.1, direction=-1)
    assert [r.direction for r in results] == [-1, -1]
    assert results[0].to_json()["direction"] == -1
    assert isinstance(results[0].to_json()["direction"], int)
    default = evaluate_luminance_field(make_lights([(0.0, -4.0, 8.0)]), lanes, reflectance=0.1)
    assert [r.direction for r in default] == [1, 1]
    with pytest.raises(ValueError, match="direction"):
        evaluate_luminance_field(make_lights([(0.0, -4.0, 8.0)]), lanes, reflectance=0.1, direction=2)
