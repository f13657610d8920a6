"""r-tables shading the carriageway in images (render.light.rtable, render.light.integrator).

Sources of the checks:

- the definitions r = q·cos³γ and L = q·E (CIE 140-2000, from memory), so that a surface of
  luminance coefficient q = ρ̄/π, the table r = (ρ̄/π)·cos³γ, is the Lambertian surface
  (analytic);
- bilinear interpolation reproduces a function that is bilinear in its two arguments exactly
  (analytic), and its error for a smooth function is at most Δ²/8·max|f''| along one axis
  (the linear-interpolation remainder, analytic);
- β and γ of one luminaire above one point worked by hand (trigonometry);
- the road-luminance calculation :func:`render.calc.road.road_luminance_cd_m2`, L = Σ r·I/h²
  (CIE 140, from memory), for "images and figures agree".

The kernel's lookup is also compared with the numpy :func:`render.light.rtable.r_value` that
the road-luminance calculation uses (the two must be one model).
"""

from __future__ import annotations

import math
import shutil
from pathlib import Path

import numpy as np
import pytest

from render.calc.road import road_luminance_cd_m2
from render.colour.materials import MATERIALS_ENV, default_materials_dir
from render.light.rtable import RTable, r_lookup, r_table_applies, r_value, road_q_sr
from render.rays.cameras import project
from render.study import Study

FLAT_REFLECTANCE = 0.2

# A hand-made, non-Lambertian table (invented for the tests, not a published road surface):
# r falls with tan γ like cos³γ and is strongest for light from beyond the point (β = 0),
# weakest for light from behind the observer (β = 180°), as road tables are.
_BETAS = (0, 10, 20, 30, 45, 60, 90, 120, 150, 180)
_TANS = tuple(round(0.25 * i, 2) for i in range(49))  # 0 … 12


def _hand_table_text(q0: float | None = 0.08) -> str:
    lines = ["# invented for the tests", "scale,0.0001"]
    if q0 is not None:
        lines.append(f"q0,{q0}")
    lines.append("tan_gamma," + ",".join(str(b) for b in _BETAS))
    for t in _TANS:
        cos3 = (1.0 + t * t) ** -1.5
        row = [1000.0 * cos3 * (1.0 + 1.5 * t * math.cos(math.radians(b)) ** 2 * (b < 90)) for b in _BETAS]
        lines.append(f"{t}," + ",".join(f"{v:.6f}" for v in row))
    return "\n".join(lines) + "\n"


def _lambertian_table_text(mean_reflectance: float, step: float = 0.02, last: float = 12.0) -> str:
    """r = (ρ̄/π)·cos³γ on a fine tan γ grid (CIE 140's r = q·cos³γ with q = ρ̄/π)."""
    lines = ["scale,1", "tan_gamma,0,180"]
    for i in range(int(round(last / step)) + 1):
        t = i * step
        r = mean_reflectance / math.pi * (1.0 + t * t) ** -1.5
        lines.append(f"{t:.4f},{r!r},{r!r}")
    return "\n".join(lines) + "\n"


def _scene_text(
    street_extra: str = "",
    *,
    carriageway: str = "asphalt-worn",
    luminaires: str = "",
    views: str = "",
    extra: str = "",
) -> str:
    luminaires = (
        luminaires
        or """
[[luminaires]]
name = "lantern"
position_m = [20.0, 2.0, 8.0]
photometry = "generic-road-asymmetric"
rotation_deg = 0.0
lamp = "led-4000k-cie-b3"
lumens = 8000.0
maintenance_factor = 1.0
column = false
"""
    )
    views = (
        views
        or """
[[views]]
name = "driver"
kind = "driver"
position_m = [0.0, -1.5]
target_m = [30.0, -1.0, 0.0]
hfov_deg = 50.0
resolution = [64, 36]

[[views]]
name = "walker"
kind = "pedestrian"
position_m = [5.0, 4.0]
target_m = [25.0, 0.0, 0.0]
hfov_deg = 60.0
resolution = [64, 36]
"""
    )
    return f"""
[scene]
name = "flat open road"

[street]
length_m = 60.0
carriageway_width_m = 7.0
kerb_height_m = 0.0
centre_line = "none"
carriageway_material = "{carriageway}"
{street_extra}
{luminaires}
{views}
{extra}
[render]
samples_per_pixel = 4
seed = 3
"""


def _write(folder: Path, name: str, text: str) -> Path:
    path = folder / name
    path.write_text(text, encoding="utf-8")
    return path


@pytest.fixture
def flat_materials(tmp_path, monkeypatch):
    """The bundled materials plus ``flat-grey`` (ρ = 0.2 at every wavelength), so that the
    image's factor ρ_v(lamp)/ρ̄ is exactly 1."""
    folder = tmp_path / "materials"
    shutil.copytree(default_materials_dir(), folder)
    header = "\n".join(
        f"# {k}: {v}"
        for k, v in {
            "id": "flat-grey",
            "name": "Flat grey",
            "description": "a spectrally flat grey for tests",
            "category": "road",
            "source": "invented for the tests",
            "sample_id": "none",
            "licence": "none",
            "measured_range_nm": "380-780",
            "completion": "none",
        }.items()
    )
    rows = "\n".join(f"{w},{FLAT_REFLECTANCE}" for w in range(380, 781, 10))
    (folder / "flat-grey.csv").write_text(f"{header}\nwavelength_nm,reflectance\n{rows}\n", encoding="utf-8")
    monkeypatch.setenv(MATERIALS_ENV, str(folder))
    return folder


# ------------------------------------------------------------------------------------------
# The lookup inside the kernel
# ------------------------------------------------------------------------------------------


def _random_table(rng) -> RTable:
    betas = np.concatenate([[0.0], np.sort(rng.uniform(1, 179, 6)), [180.0]])
    tans = np.concatenate([[0.0], np.sort(rng.uniform(0.1, 11.9, 9)), [12.0]])
    return RTable(betas, tans, rng.uniform(0.0, 0.1, (tans.size, betas.size)))


def test_kernel_lookup_equals_r_value_at_random_points():
    # The kernel mirrors the numpy lookup of the calculations: folding of β, clipping of β,
    # zero beyond the last row, bilinear inside. Equal to rounding.
    rng = np.random.default_rng(13)
    for _ in range(5):
        table = _random_table(rng)
        # Random points (β beyond ±360°, tan γ past the last row) and every grid node.
        nodes_b, nodes_t = np.meshgrid(table.beta_deg, table.tan_gamma)
        beta = np.concatenate([rng.uniform(-720.0, 720.0, 400), nodes_b.ravel(), -nodes_b.ravel()])
        tan = np.concatenate([rng.uniform(0.0, 14.0, 400), nodes_t.ravel(), nodes_t.ravel()])
        expected = r_value(table, beta, tan)
        got = np.array(
            [r_lookup(table.beta_deg, table.tan_gamma, table.r_sr, float(b), float(t)) for b, t in zip(beta, tan)]
        )
        np.testing.assert_allclose(got, expected, rtol=1e-13, atol=1e-16)
        assert np.any(got == 0.0) and np.any(got > 0.0)


def test_kernel_lookup_is_exact_for_a_bilinear_function():
    # Bilinear interpolation reproduces f(β, t) = a + bβ + ct + dβt exactly (analytic).
    betas = np.array([0.0, 20.0, 75.0, 140.0, 180.0])
    tans = np.array([0.0, 0.5, 2.0, 6.0, 12.0])
    f = lambda b, t: 0.05 + 1e-4 * b + 3e-3 * t + 2e-5 * b * t  # noqa: E731
    table = RTable(betas, tans, f(betas[None, :], tans[:, None]))
    rng = np.random.default_rng(2)
    for b, t in zip(rng.uniform(0, 180, 200), rng.uniform(0, 12, 200)):
        assert r_lookup(betas, tans, table.r_sr, b, t) == pytest.approx(f(b, t), rel=1e-12)
        # β folds into 0-180°: -β and 360° - β are β (the table's symmetry).
        assert r_lookup(betas, tans, table.r_sr, -b, t) == pytest.approx(f(b, t), rel=1e-12)
        assert r_lookup(betas, tans, table.r_sr, 360.0 - b, t) == pytest.approx(f(b, t), rel=1e-12)


def test_q_for_one_luminaire_by_hand():
    # Point at the origin, observer looking along +x, luminaire at (-3, 4, 10) from the point:
    # β = atan2(4, -3) = 126.87°, tan γ = 5/10, cos γ = 10/√125 (trigonometry by hand).
    # r is linear in β and constant in tan γ, so the interpolation is exact; q = r/cos³γ.
    betas = np.array([0.0, 180.0])
    tans = np.array([0.0, 12.0])
    table = RTable(betas, tans, np.array([[0.01, 0.028], [0.01, 0.028]]))
    to_light = np.array([[-3.0, 4.0, 10.0]]) / math.sqrt(125.0)
    beta = math.degrees(math.atan2(4.0, -3.0))
    r = 0.01 + 1e-4 * beta
    cos_g = 10.0 / math.sqrt(125.0)
    q = road_q_sr(table, np.array([[1.0, 0.0, -0.05]]), to_light)
    assert q[0] == pytest.approx(r / cos_g**3, rel=1e-12)
    # Seen from the other way (observer looking along -x) the luminaire is beyond: β = 53.13°.
    q_back = road_q_sr(table, np.array([[-1.0, 0.0, -0.05]]), to_light, scale=2.0)
    assert q_back[0] == pytest.approx(2.0 * (0.01 + 1e-4 * (180.0 - beta)) / cos_g**3, rel=1e-12)
    # A luminaire below the surface's height adds nothing.
    assert road_q_sr(table, np.array([[1.0, 0.0, 0.0]]), np.array([[0.6, 0.0, -0.8]]))[0] == 0.0


# ------------------------------------------------------------------------------------------
# Images
# ------------------------------------------------------------------------------------------


def _pixel_check(view, target, mesh, q0_sr=None) -> tuple[float, float, float]:
    """The image's luminance at the pixel seeing road point ``target``, the calculation's
    (render.calc.road) there for an observer at the camera, and the calculation's spread over
    the pixel's footprint (its samples and the target). Asserts that the pixel is the mean of
    the calculation at its own sample points, equal but for the float32 storage of the buffers
    (relative 6e-8) and float64 rounding."""
    b = view.buffers
    camera = view.camera
    eye = np.asarray(camera.position_m, np.float64)
    x, y = project(camera, np.array([target], np.float64))[0]
    px, py = int(x), int(y)
    pixel = py * camera.width_px + px
    samples = slice(pixel * b.spp, pixel * b.spp + b.spp)
    assert np.all(b.object_id[samples] == mesh.carriageway_object)
    pts = b.point_m[samples].astype(np.float64)
    table = b.road.table
    at_samples = road_luminance_cd_m2(view.lights, pts, eye, None, table, road_q0_sr=q0_sr)
    image = float(view.colorimetry.luminance_cd_m2[py, px])
    assert image == pytest.approx(at_samples.mean(), rel=1e-6)
    at_target = road_luminance_cd_m2(view.lights, np.array([target], np.float64), eye, None, table, road_q0_sr=q0_sr)[0]
    return image, float(at_target), float(np.ptp(np.append(at_samples, at_target)))


def _render(path: Path, view: str = "driver", setup: str | None = None):
    study = Study(path)
    return study, study.render_view(view, setup)


@pytest.mark.parametrize("wet", [False, True])
def test_lambertian_equivalent_table_gives_the_lambertian_image(tmp_path, wet):
    # r = (ρ̄/π)·cos³γ is the table of a matt surface of luminous reflectance ρ̄ (CIE 140's
    # r = q·cos³γ with q = ρ̄/π); the image's carriageway is then ρ(λ)·E/π, the Lambertian
    # image, for any spectrum. The shading is deterministic (same rays, same hit points), so
    # the only difference is the interpolation of cos³γ in tan γ: bilinear interpolation of
    # f(t) = (1 + t²)^-1.5 on steps Δ errs by at most Δ²/8·max|f''| with |f''|/f ≤ 3 (at t = 0),
    # a relative 1.5e-4 for Δ = 0.02, and each pixel is a sum of positive such terms. With a
    # water film the specular layer must be the same value in both images.
    wet_key = "wet = true" if wet else ""
    plain = _write(tmp_path, "plain.toml", _scene_text(wet_key))
    study, base = _render(plain)
    mat = study.mesh.material_names.index("asphalt-worn")
    from render.colour.materials import luminous_reflectance

    rho = study.reflectances[mat]
    mean = luminous_reflectance(rho, np.ones_like(rho))
    _write(tmp_path, "lambert.csv", _lambertian_table_text(mean))
    tabled = _write(tmp_path, "tabled.toml", _scene_text(f'{wet_key}\nr_table = "lambert.csv"'))
    _, road = _render(tabled)
    assert road.buffers.road is not None and base.buffers.road is None
    on_road = road.buffers.object_id == study.mesh.carriageway_object
    assert on_road.mean() > 0.3  # the driver view sees mostly road
    lit = base.buffers.value_cd_m2[on_road] > 0
    assert lit.any()
    np.testing.assert_allclose(
        road.buffers.value_cd_m2[on_road], base.buffers.value_cd_m2[on_road], rtol=1.6e-4, atol=1e-9
    )
    np.testing.assert_array_equal(road.buffers.value_cd_m2[~on_road], base.buffers.value_cd_m2[~on_road])
    np.testing.assert_array_equal(road.buffers.spec_cd_m2, base.buffers.spec_cd_m2)
    if wet:
        assert np.any(road.buffers.spec_cd_m2[on_road] > 0)
    y0 = base.colorimetry.luminance_cd_m2
    np.testing.assert_allclose(road.colorimetry.luminance_cd_m2, y0, rtol=1.6e-4, atol=1e-6 * y0.max())


def test_driver_view_agrees_with_the_road_luminance_calculation(tmp_path, flat_materials):
    # One luminaire without a column over a flat open road, nothing casting shadows: a driver
    # view's absolute luminance (cd/m²) at road points equals L = Σ r·I/h² of the calculation
    # (render.calc.road, CIE 140 from memory) for an observer at the camera, with the same
    # table scaled to the road's Q0. The carriageway is spectrally flat, so ρ_v(lamp)/ρ̄ = 1.
    _write(tmp_path, "hand.csv", _hand_table_text(q0=0.08))
    # A narrow, sharp view: at 30 m a grazing pixel covers about d²·Δθ/h of road (0.5 m here).
    view = """
[[views]]
name = "driver"
kind = "driver"
position_m = [0.0, -1.5]
target_m = [30.0, -0.5, 0.0]
hfov_deg = 30.0
resolution = [480, 160]
"""
    path = _write(
        tmp_path,
        "scene.toml",
        _scene_text('r_table = "hand.csv"\nq0_sr = 0.06', carriageway="flat-grey", views=view),
    )
    study, view = _render(path)
    b = view.buffers
    assert b.road is not None and b.road.mean_reflectance == pytest.approx(FLAT_REFLECTANCE, rel=1e-12)
    assert b.road.q_scale == pytest.approx(0.06 / 0.08, rel=1e-15)
    checked = 0
    for target in ([12.0, -1.0, 0.0], [16.0, 0.5, 0.0], [19.0, -0.5, 0.0], [24.0, -2.5, 0.0], [30.0, 1.0, 0.0]):
        # 1. (in _pixel_check) the pixel is the mean of the calculation at its sample points;
        # 2. at the target the pixel differs from the calculation by no more than L varies
        #    over the pixel's footprint (its samples and the target all lie in the pixel).
        image, at_target, spread = _pixel_check(view, target, study.mesh, q0_sr=0.06)
        assert abs(image - at_target) <= spread + 1e-9 * at_target
        # Measured: the spread is 0.6-5.6 % of L at these points, the difference 0.04-3.3 %.
        assert spread < 0.06 * at_target
        checked += 1
    assert checked == 5
    # The table matters: the Lambertian result of the same road differs (β and γ enter).
    image, _, _ = _pixel_check(view, [19.0, -0.5, 0.0], study.mesh, q0_sr=0.06)
    eye = np.asarray(view.camera.position_m)
    lam = road_luminance_cd_m2(view.lights, np.array([[19.0, -0.5, 0.0]]), eye, None, None, FLAT_REFLECTANCE)[0]
    assert abs(image - lam) > 0.1 * lam


def test_beta_matters_in_the_image(tmp_path, flat_materials):
    # Two road points 5 m either side of an isotropic source seen by one driver: light from
    # beyond the first point (β = 0) and from behind the second (β = 180°) at the same tan γ,
    # so L = r·I/h² (render.calc.road, CIE 140 from memory) differs only through β.
    _write(tmp_path, "hand.csv", _hand_table_text())
    view = """
[[views]]
name = "ahead"
kind = "driver"
position_m = [0.0, 0.0]
target_m = [20.0, 0.0, 0.0]
hfov_deg = 20.0
resolution = [240, 80]
"""
    luminaire = """
[[luminaires]]
name = "lantern"
position_m = [20.0, 0.0, 8.0]
photometry = "generic-isotropic"
lamp = "led-4000k-cie-b3"
lumens = 8000.0
maintenance_factor = 1.0
column = false
"""
    path = _write(
        tmp_path,
        "scene.toml",
        _scene_text('r_table = "hand.csv"', carriageway="flat-grey", views=view, luminaires=luminaire),
    )
    study = Study(path)
    view = study.render_view("ahead")
    image, calc = {}, {}
    for name, target in (("beyond", [15.0, 0.0, 0.0]), ("behind", [25.0, 0.0, 0.0])):
        image[name], calc[name], spread = _pixel_check(view, target, study.mesh)
        assert abs(image[name] - calc[name]) <= spread + 1e-9 * calc[name]
    # By hand from the table's definition: tan γ = 5/8 lies midway between the rows 0.5 and
    # 0.75, so r(0°)/r(180°) = (c(0.5)·1.75 + c(0.75)·2.125)/(c(0.5) + c(0.75)), c = cos³γ.
    c05, c075 = (1 + 0.5**2) ** -1.5, (1 + 0.75**2) ** -1.5
    ratio = (c05 * 1.75 + c075 * 2.125) / (c05 + c075)
    assert calc["beyond"] / calc["behind"] == pytest.approx(ratio, rel=1e-5)  # table printed to 1e-6
    # The image shows it to its pixels' footprints (measured: within 3 %).
    assert image["beyond"] / image["behind"] == pytest.approx(ratio, rel=0.05)


@pytest.mark.parametrize(
    ("setting", "kinds"),
    [("none", set()), ("driver", {"driver"}), ("all", {"driver", "pedestrian"}), (None, {"driver"})],
)
def test_r_table_views_select_the_views(tmp_path, setting, kinds):
    # "none": no view; "driver" (the default): views of kind driver; "all": every view
    # (scenes/README.md). A view the table applies to shades its carriageway differently
    # from the plain material; the others are byte-identical to a render without a table.
    _write(tmp_path, "hand.csv", _hand_table_text())
    key = 'r_table = "hand.csv"' + (f'\nr_table_views = "{setting}"' if setting else "")
    plain = Study(_write(tmp_path, "plain.toml", _scene_text()))
    tabled = Study(_write(tmp_path, "tabled.toml", _scene_text(key)))
    for name, kind in (("driver", "driver"), ("walker", "pedestrian")):
        assert r_table_applies(setting or "driver", kind) == (kind in kinds)
        a = plain.render_view(name).buffers
        b = tabled.render_view(name).buffers
        if kind in kinds:
            assert b.road is not None
            on_road = b.object_id == tabled.mesh.carriageway_object
            assert not np.allclose(a.value_cd_m2[on_road], b.value_cd_m2[on_road], rtol=0.05)
            np.testing.assert_array_equal(a.value_cd_m2[~on_road], b.value_cd_m2[~on_road])
        else:
            assert b.road is None
            np.testing.assert_array_equal(a.value_cd_m2, b.value_cd_m2)


def test_only_the_carriageway_uses_the_table(tmp_path):
    # A box of the carriageway's own material standing on the footway keeps its Lambertian
    # shading; only the street builder's carriageway triangles use the table.
    _write(tmp_path, "hand.csv", _hand_table_text())
    box = """
[[geometry]]
kind = "box"
name = "asphalt block"
size_m = [2.0, 1.0, 0.5]
position_m = [15.0, 4.5, 0.0]
material = "asphalt-worn"
"""
    views = """
[[views]]
name = "driver"
kind = "driver"
position_m = [0.0, -1.5]
target_m = [15.0, 3.0, 0.0]
hfov_deg = 50.0
resolution = [64, 36]
"""
    plain = Study(_write(tmp_path, "plain.toml", _scene_text(views=views, extra=box)))
    tabled = Study(_write(tmp_path, "tabled.toml", _scene_text('r_table = "hand.csv"', views=views, extra=box)))
    a = plain.render_view("driver").buffers
    b = tabled.render_view("driver").buffers
    block = tabled.mesh.object_names.index("asphalt block")
    on_block = b.object_id == block
    assert on_block.sum() > 10 and np.any(b.value_cd_m2[on_block] > 0)
    np.testing.assert_array_equal(a.value_cd_m2[on_block], b.value_cd_m2[on_block])
    on_road = b.object_id == tabled.mesh.carriageway_object
    assert not np.allclose(a.value_cd_m2[on_road], b.value_cd_m2[on_road], rtol=0.05)


def test_relighting_and_determinism_with_an_r_table(tmp_path):
    # Relighting for another lamp needs no new light evaluation: the per-light buffers do not
    # depend on the lamp (values E·q/ρ̄). Same scene and seed, same bytes (lampcast's rule).
    _write(tmp_path, "hand.csv", _hand_table_text())
    setups = """
[setups.sodium]
lamp = "sodium-high-pressure-cie-hp1"

[setups.dimmed]
lamp = "led-3000k-cie-b2"
dimming = 0.5

[setups.round]
photometry = "generic-isotropic"
"""
    path = _write(tmp_path, "scene.toml", _scene_text('r_table = "hand.csv"', extra=setups))
    study = Study(path)
    first = study.render_view("driver")
    again = Study(path).render_view("driver")
    assert first.buffers.value_cd_m2.tobytes() == again.buffers.value_cd_m2.tobytes()
    assert first.colorimetry.xyz_cd_m2.tobytes() == again.colorimetry.xyz_cd_m2.tobytes()
    sodium = study.relight(first, "sodium")
    assert sodium.buffers is first.buffers  # no new evaluation: a gather-multiply
    direct = study.render_view("driver", "sodium")
    np.testing.assert_allclose(sodium.colorimetry.xyz_cd_m2, direct.colorimetry.xyz_cd_m2, rtol=1e-12, atol=0)
    dimmed = study.relight(first, "dimmed")
    assert dimmed.buffers is first.buffers
    # Another distribution re-evaluates the light at the kept hit points, still with the table.
    round_ = study.relight(first, "round")
    assert round_.buffers is not first.buffers and round_.buffers.road is first.buffers.road
    assert round_.buffers.value_cd_m2.tobytes() == study.render_view("driver", "round").buffers.value_cd_m2.tobytes()


def test_q0_without_the_tables_q0_is_an_input_error(tmp_path):
    from render.errors import InputError

    _write(tmp_path, "hand.csv", _hand_table_text(q0=None))
    path = _write(tmp_path, "scene.toml", _scene_text('r_table = "hand.csv"\nq0_sr = 0.07'))
    with pytest.raises(InputError, match="q0_sr"):
        Study(path).render_view("driver")


def test_image_to_figure_ratio_is_the_documented_spectral_factor(tmp_path):
    # A coloured road: the image's luminance is q·E·ρ_v(lamp)/ρ̄ (render.light.rtable, the
    # spectral rule q_λ = q·ρ(λ)/ρ̄), so image / calculation at the pixel's own sample points is
    # ρ_v(lamp)/ρ̄ with ρ_v = Σ ρ s V/Σ s V (CIE 15 luminous reflectance) and ρ̄ its
    # equal-energy value. The module text lists 1.063 for asphalt-worn under low-pressure
    # sodium (rounded to 3 decimals).
    from render.colour.lamps import get_lamp
    from render.colour.materials import luminous_reflectance

    _write(tmp_path, "hand.csv", _hand_table_text())
    setups = """
[setups.sox]
lamp = "sodium-low-pressure"
"""
    path = _write(tmp_path, "scene.toml", _scene_text('r_table = "hand.csv"', extra=setups))
    study = Study(path)
    view = study.render_view("driver", "sox")
    rho = study.reflectances[study.mesh.material_names.index("asphalt-worn")]
    factor = luminous_reflectance(rho, get_lamp("sodium-low-pressure").spd) / luminous_reflectance(
        rho, np.ones_like(rho)
    )
    assert round(factor, 3) == 1.063
    b = view.buffers
    eye = np.asarray(view.camera.position_m, np.float64)
    y = view.colorimetry.luminance_cd_m2.reshape(-1)
    pixels = [p for p in range(y.size) if np.all(b.object_id[p * b.spp : (p + 1) * b.spp] == b.road.object_id)]
    assert len(pixels) > 100
    for p in pixels[:: len(pixels) // 7][:7]:
        pts = b.point_m[p * b.spp : (p + 1) * b.spp].astype(np.float64)
        calc = road_luminance_cd_m2(view.lights, pts, eye, study.setup("sox"), b.road.table).mean()
        assert y[p] == pytest.approx(factor * calc, rel=1e-6)
