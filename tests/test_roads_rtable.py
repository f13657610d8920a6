"""r-tables and wet surfaces on roads (``[[roads]]`` ``r_table``, ``q0_sr``, ``r_table_views``, ``wet``).

Sources of the checks:

- the definitions r = q·cos³γ and L = q·E (CIE 140-2000, from memory): the table
  r = (k·ρ̄/π)·cos³γ is a matt surface k times as reflective as the material's luminous
  reflectance ρ̄, so that a carriageway shaded with it is exactly k times its Lambertian image
  (analytic), up to the bilinear interpolation of cos³γ in tan γ on steps Δ = 0.02, which errs
  by at most Δ²/8·max|f''|/f = 1.5e-4 relative (the linear-interpolation remainder, analytic);
- every other surface keeps its Lambertian value to the bit (the table applies only to the
  carriageway objects of the roads that name it).
"""

from __future__ import annotations

import math
from pathlib import Path

import numpy as np
import pytest

from render.colour.materials import luminous_reflectance
from render.errors import InputError
from render.scene.loader import load_scene_document
from render.study import Study

VIEW = {
    "name": "above",
    "kind": "aerial",
    "position_m": [30.0, -14.0, 22.0],
    "target_m": [30.0, 12.0, 0.0],
    "hfov_deg": 70.0,
    "resolution": [64, 48],
}
LUMINAIRES = [
    {
        "name": "lantern",
        "position_m": [26.0, 6.0, 8.0],
        "photometry": "generic-isotropic",
        "lamp": "led-4000k-cie-b3",
        "lumens": 8000.0,
        "maintenance_factor": 1.0,
        "column": False,
    }
]


def _roads(a: dict, b: dict) -> list[dict]:
    """A through road along x and a side road ending on it (a T junction), both flat."""
    common = {"carriageway_width_m": 7.0, "kerb_height_m": 0.0, "centre_line": "none"}
    return [
        {"name": "through", "points_m": [[-10.0, 0.0], [70.0, 0.0]], **common, **a},
        {"name": "side", "points_m": [[30.0, 0.0], [30.0, 40.0]], **common, **b},
    ]


def _lambertian_table(path: Path, mean_reflectance: float, k: float, step: float = 0.02) -> Path:
    """r = (k·ρ̄/π)·cos³γ on a fine tan γ grid (CIE 140's r = q·cos³γ with q = k·ρ̄/π)."""
    lines = ["scale,1", "q0,0.07", "tan_gamma,0,180"]
    for i in range(int(round(12.0 / step)) + 1):
        t = i * step
        r = k * mean_reflectance / math.pi * (1.0 + t * t) ** -1.5
        lines.append(f"{t:.4f},{r!r},{r!r}")
    path.write_text("\n".join(lines) + "\n", encoding="utf-8")
    return path


def _render(tmp_path: Path, name: str, roads: list[dict]):
    doc = {"views": [VIEW], "roads": roads, "luminaires": LUMINAIRES, "render": {"samples_per_pixel": 2}}
    study = Study(load_scene_document(doc, tmp_path / f"{name}.toml"))
    return study, study.render_view("above")


@pytest.fixture
def base(tmp_path):
    study, view = _render(tmp_path, "plain", _roads({}, {}))
    mat = study.mesh.material_names.index("asphalt-worn")
    rho = study.reflectances[mat]
    return study, view, float(luminous_reflectance(rho, np.ones_like(rho)))


def _on(study, where: str) -> int:
    return study.mesh.carriageway_of[where]


@pytest.mark.parametrize("same_table", [False, True])
def test_each_road_shades_its_own_carriageway_with_its_own_table(tmp_path, base, same_table):
    plain, image, mean = base
    _lambertian_table(tmp_path / "twice.csv", mean, 2.0)
    _lambertian_table(tmp_path / "thrice.csv", mean, 3.0)
    side_table = "twice.csv" if same_table else "thrice.csv"
    roads = _roads({"r_table": "twice.csv", "r_table_views": "all"}, {"r_table": side_table, "r_table_views": "all"})
    study, tabled = _render(tmp_path, "tabled", roads)
    shading = tabled.buffers.road
    assert shading is not None and len(shading.groups) == (1 if same_table else 2)
    obj = image.buffers.object_id
    np.testing.assert_array_equal(tabled.buffers.object_id, obj)
    through = obj == _on(study, "roads[0]")
    side = obj == _on(study, "roads[1]")  # the side road's carriageway includes its junction mouth
    assert through.mean() > 0.2 and side.mean() > 0.05
    v0, v1 = image.buffers.value_cd_m2, tabled.buffers.value_cd_m2
    assert np.all(v0[through | side] > 0)
    np.testing.assert_allclose(v1[through], 2.0 * v0[through], rtol=1.6e-4)
    np.testing.assert_allclose(v1[side], (2.0 if same_table else 3.0) * v0[side], rtol=1.6e-4)
    np.testing.assert_array_equal(v1[~(through | side)], v0[~(through | side)])


def test_r_table_views_per_road(tmp_path, base):
    plain, image, mean = base
    _lambertian_table(tmp_path / "twice.csv", mean, 2.0)
    roads = _roads({"r_table": "twice.csv", "r_table_views": "all"}, {"r_table": "twice.csv"})  # side: driver only
    study, tabled = _render(tmp_path, "views", roads)
    obj = image.buffers.object_id
    through, side = obj == _on(study, "roads[0]"), obj == _on(study, "roads[1]")
    v0, v1 = image.buffers.value_cd_m2, tabled.buffers.value_cd_m2
    np.testing.assert_allclose(v1[through], 2.0 * v0[through], rtol=1.6e-4)
    np.testing.assert_array_equal(v1[side], v0[side])


def test_road_q0_scales_its_table(tmp_path, base):
    # q0_sr scales the table by Q0(road)/Q0(table): 0.14/0.07 turns k = 1 into k = 2.
    plain, image, mean = base
    _lambertian_table(tmp_path / "once.csv", mean, 1.0)
    roads = _roads({"r_table": "once.csv", "r_table_views": "all", "q0_sr": 0.14}, {})
    study, tabled = _render(tmp_path, "q0", roads)
    through = image.buffers.object_id == _on(study, "roads[0]")
    np.testing.assert_allclose(
        tabled.buffers.value_cd_m2[through], 2.0 * image.buffers.value_cd_m2[through], rtol=1.6e-4
    )


def _load(tmp_path, roads):
    return load_scene_document({"views": [VIEW], "roads": roads}, tmp_path / "s.toml")


def test_wet_roads_put_a_water_film_on_their_surfaces(tmp_path):
    from render.light.gloss import WATER_F0, WET_ROUGHNESS

    scene = _load(tmp_path, _roads({"wet": True}, {"wet": True}))
    for material in ("asphalt-worn", "concrete-paving", "paint-road-white"):
        assert scene.gloss[material] == (WATER_F0, WET_ROUGHNESS)
    assert "grass" not in scene.gloss


@pytest.mark.parametrize(
    ("a", "b", "where", "words"),
    [
        ({"wet": True}, {}, "roads[1].wet", "shares 'asphalt-worn'"),
        ({"q0_sr": 0.07}, {}, "roads[0].q0_sr", "give `r_table` too"),
        ({}, {"r_table": "missing.csv"}, "roads[1].r_table", "does not exist"),
        ({}, {"r_table_views": "some"}, "roads[1].r_table_views", "expected one of"),
    ],
)
def test_road_r_table_and_wet_mistakes_name_the_key(tmp_path, a, b, where, words):
    with pytest.raises(InputError) as err:
        _load(tmp_path, _roads(a, b))
    found = [p for p in err.value.problems if p.where == where]
    assert found, [str(p) for p in err.value.problems]
    assert words in found[0].message


def test_dry_roads_of_other_materials_beside_a_wet_one_are_fine(tmp_path):
    scene = _load(
        tmp_path,
        _roads(
            {"wet": True},
            {
                "carriageway_material": "asphalt-new",
                "footway_material": "asphalt-weathered",
                "line_material": "paint-road-yellow",
            },
        ),
    )
    assert "asphalt-new" not in scene.gloss and "asphalt-worn" in scene.gloss
