"""Obtrusive light (render.calc.obtrusive): facade points, E_v and intensity toward windows, limits.

Sources: inverse-square and cosine laws of a point source, E_v = I·cos θ/d² (analytic); the
C-γ photometric frame (C = azimuth from C0 = +x of an unrotated luminaire, γ from the nadir;
LM-63 / EULUMDAT convention) worked by hand for two directions, read against the photometric
file's own table; the building line of the street model (render.scene.model), where the
fronts are built; limits compared as stated (common practice, no source).
"""

from __future__ import annotations

import json
import math
from pathlib import Path

import numpy as np
import pytest

from render.calc.fields import CalculationField
from render.calc.obtrusive import (
    FACADE_OFFSET_M,
    ObtrusiveLimits,
    ObtrusiveResult,
    evaluate_obtrusive,
    facade_fields,
)
from render.errors import InputError
from render.light.photometry import load_photometry
from render.scene.model import GroupSetting, Setup
from render.study import Study

SCENES = Path(__file__).resolve().parents[1] / "scenes" / "tests"
ISOTROPIC_CD = 10000.0 / (4.0 * math.pi)  # point_over_plane: isotropic 10 000 lm, MF 1 (scene file)


@pytest.fixture(scope="module")
def plane() -> Study:
    return Study(SCENES / "point_over_plane.toml")


@pytest.fixture(scope="module")
def street() -> Study:
    return Study(SCENES / "all_kinds.toml")


def _wall(points: list[tuple[float, float, float]], normal: tuple[float, float, float]) -> CalculationField:
    pts = np.array(points, np.float64)
    return CalculationField("wall", pts, np.tile(normal, (len(pts), 1)), (len(pts), 1), (1.0, 0.0))


def test_point_source_before_vertical_wall_inverse_square_cosine(plane):
    # Source at (0, 0, 5); wall face at y = 6 facing −y (toward the source). E_v = I·cos θ/d²
    # with cos θ = 6/d (analytic); the intensity toward every point is I (isotropic).
    pts = [(x, 6.0, z) for x in (-4.0, 0.0, 4.0) for z in (1.5, 4.5, 7.0)]
    r = evaluate_obtrusive(plane, _wall(pts, (0.0, -1.0, 0.0)))
    p = np.array(pts)
    d = np.linalg.norm(p - [0.0, 0.0, 5.0], axis=1)
    # The built-in file's intensity has 7 figures (as in test_calc_fields).
    np.testing.assert_allclose(r.vertical_lx, ISOTROPIC_CD * (6.0 / d) / d**2, rtol=1e-6)
    np.testing.assert_allclose(r.intensity_cd, np.full((1, len(pts)), ISOTROPIC_CD), rtol=1e-6)
    # The same points facing away (+y): the source is behind their plane -> 0 lx and 0 cd.
    back = evaluate_obtrusive(plane, _wall(pts, (0.0, 1.0, 0.0)))
    np.testing.assert_array_equal(back.vertical_lx, 0.0)
    np.testing.assert_array_equal(back.intensity_cd, 0.0)


def test_intensity_toward_window_asymmetric_file_by_hand(plane):
    # Setup "road-optic": generic-road-asymmetric at 10 000 lm for a file rated 6000 lm (scene
    # file and photometric file), unrotated at (0, 0, 5). By hand: toward (0, 4, 1) the direction
    # (0, 4, −4) is C = 90°, γ = 45°; toward (4, 0, 1), (4, 0, −4) is C = 0°, γ = 45°; both on
    # the file's grid, so the intensity is the table entry times 10000/6000.
    photometry = load_photometry("generic-road-asymmetric")
    c = list(np.asarray(photometry.c_deg))
    g = list(np.asarray(photometry.gamma_deg))
    table = np.asarray(photometry.candela_cd)
    scale = 10000.0 / photometry.rated_lumens_lm
    r90 = evaluate_obtrusive(plane, _wall([(0.0, 4.0, 1.0)], (0.0, -1.0, 0.0)), "road-optic")
    r0 = evaluate_obtrusive(plane, _wall([(4.0, 0.0, 1.0)], (-1.0, 0.0, 0.0)), "road-optic")
    assert r90.intensity_cd[0, 0] == pytest.approx(table[c.index(90.0), g.index(45.0)] * scale, rel=1e-9)
    assert r0.intensity_cd[0, 0] == pytest.approx(table[c.index(0.0), g.index(45.0)] * scale, rel=1e-9)
    assert r90.intensity_cd[0, 0] != pytest.approx(r0.intensity_cd[0, 0], rel=0.01)  # asymmetric
    # And E_v = I·cos θ/d² with that intensity: d = 4√2, cos θ = 4/d (analytic).
    d = 4.0 * math.sqrt(2.0)
    assert r90.vertical_lx[0] == pytest.approx(r90.intensity_cd[0, 0] * (4.0 / d) / d**2, rel=1e-6)


def test_facade_points_on_building_line(street):
    # all_kinds: left house frontage 24 m from x = 0 (scene file): every 3 m -> 8 points at
    # x = 1.5 + 3i; heights 1.5 and 4.5 m above the kerb; just in front of the building line,
    # normals toward the street (−y on the left, +y on the right).
    s = street.scene.street
    house, shop = facade_fields(street.scene)
    assert house.shape == (8, 2)
    g = house.points_m.reshape(8, 2, 3)
    np.testing.assert_allclose(g[:, 0, 0], 1.5 + 3.0 * np.arange(8), atol=1e-12)
    np.testing.assert_allclose(g[0, :, 2], s.kerb_height_m + np.array([1.5, 4.5]), atol=1e-12)
    np.testing.assert_allclose(g[..., 1], s.building_line_y("left") - FACADE_OFFSET_M, atol=1e-12)
    np.testing.assert_allclose(house.normals, np.tile([0.0, -1.0, 0.0], (16, 1)))
    np.testing.assert_allclose(shop.points_m[:, 1], s.building_line_y("right") + FACADE_OFFSET_M, atol=1e-12)
    np.testing.assert_allclose(shop.normals, np.tile([0.0, 1.0, 0.0], (shop.points_m.shape[0], 1)))
    # The built facade stands on that line: the points are lit, the same points 10 cm behind the
    # line (inside the building) are shadowed by the front wall (render.geometry.build).
    lit = street.illuminance_lx(house.points_m, house.normals)
    behind = street.illuminance_lx(house.points_m + [0.0, FACADE_OFFSET_M + 0.1, 0.0], house.normals)
    assert (lit > 0).all()
    np.testing.assert_array_equal(behind, 0.0)


def test_facade_fields_need_street_and_frontages(plane):
    with pytest.raises(InputError, match="street"):
        facade_fields(plane.scene)


def test_limits_flag_exceedances(street):
    # Limits between the smallest and largest values flag exactly the values above them
    # (common practice, no source).
    field = facade_fields(street.scene)[0]
    free = evaluate_obtrusive(street, field)
    assert free.passes and not free.vertical_exceeds.any()
    lim_e = 0.5 * (free.vertical_lx.min() + free.vertical_lx.max())
    lim_i = 0.5 * (free.intensity_cd.min() + free.intensity_cd.max())
    r = evaluate_obtrusive(street, field, limits=ObtrusiveLimits(max_vertical_lx=lim_e, max_intensity_cd=lim_i))
    np.testing.assert_array_equal(r.vertical_exceeds, free.vertical_lx > lim_e)
    np.testing.assert_array_equal(r.intensity_exceeds, free.intensity_cd > lim_i)
    assert r.vertical_exceeds.any() and not r.vertical_exceeds.all()
    assert not r.passes
    high = ObtrusiveLimits(max_vertical_lx=free.max_vertical_lx * 1.01, max_intensity_cd=free.max_intensity_cd * 1.01)
    assert evaluate_obtrusive(street, field, limits=high).passes
    only_i = ObtrusiveLimits(max_intensity_cd=free.max_intensity_cd * 0.99)
    assert not evaluate_obtrusive(street, field, limits=only_i).passes
    with pytest.raises(ValueError):
        ObtrusiveLimits(max_vertical_lx=-1.0)


def test_dimming_scales_both_figures(street):
    # Direct illuminance and intensity are linear in the luminous flux (analytic).
    field = facade_fields(street.scene)[0]
    base = evaluate_obtrusive(street, field)
    dim = Setup("dim", "", {"*": GroupSetting(dimming=0.35)})
    r = evaluate_obtrusive(street, field, dim)
    assert r.setup == "dim"
    np.testing.assert_allclose(r.vertical_lx, 0.35 * base.vertical_lx, rtol=1e-12)
    np.testing.assert_allclose(r.intensity_cd, 0.35 * base.intensity_cd, rtol=1e-12)


def test_to_json_round_trip(street):
    field = facade_fields(street.scene)[0]
    r = evaluate_obtrusive(street, field, limits=ObtrusiveLimits(max_vertical_lx=5.0))
    assert isinstance(r, ObtrusiveResult)
    data = json.loads(json.dumps(r.to_json()))
    assert data["name"] == field.name and data["setup"] is None
    assert data["limit_vertical_lx"] == 5.0 and data["limit_intensity_cd"] is None
    assert data["max_vertical_lx"] == r.max_vertical_lx
    assert data["vertical_exceeds"] == r.vertical_exceeds.tolist()
    np.testing.assert_array_equal(np.array(data["intensity_cd"]), r.intensity_cd)
    assert data["luminaires"] == r.luminaires
