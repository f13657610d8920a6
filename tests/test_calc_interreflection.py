"""The luminaires' interreflected light on the calculation's face grids (render.calc.interreflection).

Sources of the expected values:
* a Lambertian surface of reflectance ρ under illuminance E has luminance L = ρE/π (definition
  of a Lambertian reflector; analytic). Seen from a point at height h above an infinite ground
  of uniform luminance L, a vertical plane receives E_v = π·L/2 and a small vertical
  half-cylinder E_sc = π·L/2, both ρE/2 (derived in render/calc/interreflection.py from the
  definition of semicylindrical illuminance: the luminous flux on the curved surface of a small
  half-cylinder over its area, CIE S 017 / EN 13201-3, *memory*). Here the ground is a finite
  strip lit by one isotropic source high above it, so the expected value is the same integral
  of L = ρE(q)/π over the strip (E(q) = I·cos θ/d², the inverse-square and cosine laws) by
  quadrature; the quadrature itself reproduces ρE/2 for an infinite uniform ground to 1e-6;
* ρ is the luminous reflectance of the ground's material under the lamp, Σ ρ(λ)s(λ)V(λ) /
  Σ s(λ)V(λ) (CIE 15 photometry, with the project's V(λ) and spectra);
* Monte Carlo error of independent samples: the mean of M independent point estimates has
  standard error s/√M (central limit theorem); tolerances are 4 standard errors;
* relighting: a new lamp spectrum or dimming changes nothing the paths depend on, so the relit
  grid equals a fresh trace up to rounding (linearity of transport in the source; analytic);
* the direct figures with bounces on equal those without, to the bit (common practice, no
  source).
"""

from __future__ import annotations

import csv
import io
import math
from dataclasses import replace
from pathlib import Path

import numpy as np
import pytest

from render.calc.fields import (
    INTERREFLECTED_LABEL,
    CalculationField,
    evaluate_face_field,
    half_circle_rule,
    row_fields,
)
from render.calc.interreflection import interreflected_on_fields
from render.calc.run import calc_options, calc_study, run_calculation
from render.fileio import file_stem
from render.output.calc_text import (
    FACE_COLUMNS,
    FACE_QUANTITIES,
    INTERREFLECTED_COLUMNS,
    face_grid_csvs,
    format_calculation,
    write_field_csvs,
)
from render.study import Study

SCENES = Path(__file__).resolve().parents[1] / "scenes" / "tests"

LUMENS = 1.0e7
SOURCE_M = np.array([1000.0, 0.0, 1000.0])
LAMP = "led-4000k-cie-b3"
FACE_M = 1.5

#: One isotropic source 1000 m above the middle of a 2000 m × 66.2 m strip of worn asphalt
#: (carriageway 60 m, no kerb, footway or line; the building-line strip in the same asphalt).
_GROUND = f"""
[scene]
name = "one source high over a wide carriageway"

[street]
length_m = 2000.0
carriageway_width_m = 60.0
kerb_height_m = 0.0
kerb_width_m = 0.0
centre_line = "none"
footway_material = "asphalt-worn"
frontage_material = "asphalt-worn"

[street.left]
footway_width_m = 0.0

[street.right]
footway_width_m = 0.0

[[luminaires]]
name = "high source"
position_m = [{SOURCE_M[0]}, {SOURCE_M[1]}, {SOURCE_M[2]}]
photometry = "generic-isotropic"
lamp = "{LAMP}"
lumens = {LUMENS}
maintenance_factor = 1.0
column = false

[render]
indirect_samples_per_pixel = 512

[[views]]
name = "look"
position_m = [1.0, 0.0]
target_m = [30.0, 0.0, 0.0]
resolution = [32, 18]
"""


def _strip_integrals(
    point_m: np.ndarray, rect: tuple[float, float, float, float], ground_lx, n_alpha: int = 1440, n_t: int = 160
) -> tuple[float, float, float]:
    """(E_v facing +x, E_v facing −x, E_sc facing +x) per unit ρ/π at ``point_m`` from a
    Lambertian ground of luminance ρ·E(q)/π on the rectangle ``rect`` = (x0, x1, y0, y1) at
    z = 0: with the point's foot as origin, direction azimuth α and r = h·tan t,
    h·r²/d⁴ dr = sin² t dt, so G(α) = ∫ E(q) sin² t dt up to the rectangle's edge, and
    E_v = ∫ max(±cos α, 0)·G dα, E_sc = (1/π)∫ (1 + cos α)·G dα (module text)."""
    px, py, h = (float(v) for v in point_m)
    x0, x1, y0, y1 = rect
    alpha = 2.0 * math.pi * (np.arange(n_alpha) + 0.5) / n_alpha
    c, s = np.cos(alpha), np.sin(alpha)
    with np.errstate(divide="ignore"):
        rx = np.where(c > 0, (x1 - px) / c, np.where(c < 0, (x0 - px) / c, np.inf))
        ry = np.where(s > 0, (y1 - py) / s, np.where(s < 0, (y0 - py) / s, np.inf))
    t_max = np.arctan(np.minimum(rx, ry) / h)
    nodes, weights = np.polynomial.legendre.leggauss(n_t)
    t = 0.5 * (nodes[None, :] + 1.0) * t_max[:, None]
    r = h * np.tan(t)
    e = ground_lx(px + r * c[:, None], py + r * s[:, None])
    g = (e * np.sin(t) ** 2 * weights[None, :]).sum(axis=1) * 0.5 * t_max
    d_alpha = 2.0 * math.pi / n_alpha
    return (
        float((np.maximum(c, 0.0) * g).sum() * d_alpha),
        float((np.maximum(-c, 0.0) * g).sum() * d_alpha),
        float(((1.0 + c) * g).sum() * d_alpha / math.pi),
    )


def test_quadrature_reproduces_the_infinite_ground():
    # Uniform E over a ground far larger than h: E_v = E_sc = ρE/2 (here per unit ρ/π: π·E/2),
    # the closed form of the module text; the ground beyond 10⁶·h misses about 4/(π·10⁶).
    e = 3.0
    ev_p, ev_m, esc = _strip_integrals(
        np.array([0.0, 0.0, 1.5]), (-1.5e6, 1.5e6, -1.5e6, 1.5e6), lambda x, y: e + 0 * x
    )
    for v in (ev_p, ev_m, esc):
        assert v == pytest.approx(math.pi * e / 2.0, rel=2e-6)


@pytest.fixture(scope="module")
def ground(tmp_path_factory):
    path = tmp_path_factory.mktemp("ground") / "ground.toml"
    path.write_text(_GROUND, encoding="utf-8")
    study = Study(path)
    # 64 points on an 8 × 8 grid 0.5 m apart round the source's foot, as one footway field.
    i, j = np.meshgrid(np.arange(8) - 3.5, np.arange(8) - 3.5, indexing="ij")
    pts = np.column_stack([SOURCE_M[0] + 0.5 * i.ravel(), 0.5 * j.ravel(), np.zeros(64)])
    field = CalculationField("footway test", pts, np.tile([0.0, 0.0, 1.0], (64, 1)), (64, 1), (0.5, 0.5))
    ir = interreflected_on_fields(study, [field], None, bounces=1, face_height_m=FACE_M)
    return study, field, ir


def _luminous_reflectance(study: Study) -> float:
    from render.colour.observers import photopic_lef

    k = study.mesh.material_names.index("asphalt-worn")
    rho = study.reflectances[k]
    s = study.lamp_spds([LAMP])[0] * photopic_lef()
    return float(np.sum(rho * s) / np.sum(s))


def test_face_grids_over_a_lit_ground_match_the_lambertian_integral(ground):
    study, field, ir = ground
    tri = study.mesh.triangles_m.reshape(-1, 3)
    rect = (float(tri[:, 0].min()), float(tri[:, 0].max()), float(tri[:, 1].min()), float(tri[:, 1].max()))
    intensity = LUMENS / (4.0 * math.pi)

    def ground_lx(x, y):
        d2 = (x - SOURCE_M[0]) ** 2 + (y - SOURCE_M[1]) ** 2 + SOURCE_M[2] ** 2
        return intensity * SOURCE_M[2] / d2**1.5

    rho = _luminous_reflectance(study)
    ref = np.array([_strip_integrals(p + [0.0, 0.0, FACE_M], rect, ground_lx) for p in field.points_m]) * rho / math.pi
    grids = ir.at(None)
    got = {
        "E_v +x": grids.vertical[("footway test", 1)].ravel(),
        "E_v -x": grids.vertical[("footway test", -1)].ravel(),
        "E_sc +x": grids.semicylindrical[("footway test", 1)].ravel(),
    }
    for (name, values), expected in zip(got.items(), ref.T, strict=True):
        se = values.std(ddof=1) / math.sqrt(values.size)
        assert abs(values.mean() - expected.mean()) <= 4.0 * se, (name, values.mean(), expected.mean(), se)
        assert se < 0.01 * expected.mean()  # the check has teeth: 4 se under 4 %
    # The finite strip is within a few per cent of the infinite ground's ρE/2.
    e0 = intensity / SOURCE_M[2] ** 2
    assert 0.9 < ref[:, 0].mean() / (rho * e0 / 2.0) < 1.0
    # Horizontal points on the ground see only the sky above them: no interreflected light.
    np.testing.assert_array_equal(grids.horizontal["footway test"], 0.0)


def test_semicylindrical_rule_is_the_half_circle_mean():
    # The trapezoidal rule over 19 planes from −90° to +90° (ends halved), each weight 2/36:
    # constant E_v gives E_v (the weights sum to 1), and E_v(φ) = max(cos φ, 0) from a beam
    # straight ahead gives (1/π)·∫cos φ dφ = 2/π within the rule's h·cot(h/2)/2 (derived).
    idx, w = half_circle_rule(36, 0)
    assert len(idx) == 19 and idx[0] == 27 and idx[9] == 0 and idx[-1] == 9
    assert w.sum() == pytest.approx(1.0, abs=1e-15)
    phi = 2.0 * math.pi * idx / 36
    h = math.radians(10.0)
    assert float(w @ np.maximum(np.cos(phi), 0.0)) == pytest.approx(2.0 / math.pi * h / math.tan(h / 2) / 2, rel=1e-12)


# ------------------------------------------------------------------------------------------
# Through the calculation: direct figures untouched, relighting a multiply, labels
# ------------------------------------------------------------------------------------------


def _street(tmp_path: Path) -> Path:
    """The minimal street with 2 m footways, 0.15 m kerbs and a 5 m facade each side (light
    comes back from the facades), and setups that change the lamp, the lumens, the dimming or
    the photometric distribution."""
    text = (SCENES / "minimal_street.toml").read_text(encoding="utf-8")
    text = text.replace(
        "carriageway_width_m = 6.0\n",
        "carriageway_width_m = 6.0\n\n[street.left]\nfootway_width_m = 2.0\n\n[street.right]\nfootway_width_m = 2.0\n",
    )
    text += """
[[frontages]]
side = "left"
start_m = 0.0
length_m = 40.0
height_m = 5.0

[[frontages]]
side = "right"
start_m = 0.0
length_m = 40.0
height_m = 5.0

[setups.sodium]
lamp = "sodium-high-pressure-cie-hp1"

[setups.dim]
dimming = 0.5

[setups.brighter]
lumens = 9000.0

[setups.other-optic]
photometry = "generic-post-top"
"""
    path = tmp_path / "street.toml"
    path.write_text(text, encoding="utf-8")
    return path


@pytest.fixture(scope="module")
def street(tmp_path_factory):
    study = Study(_street(tmp_path_factory.mktemp("street")))
    setups = [None, "sodium", "dim", "brighter", "other-optic"]
    direct = run_calculation(study, setups, calc_options(study.scene))
    bounced = run_calculation(study, setups, calc_options(study.scene, bounces=2))
    return study, setups, direct, bounced


def test_direct_figures_are_unchanged_to_the_bit(street):
    # Every direct grid and figure, the headline (but the upward total, which follows the upward
    # exitance map and carries interreflected light with bounces) and the class check.
    _, _, direct, bounced = street
    upward = {"upward_lm_per_m", "rayleigh_relative", "scotopic_relative"}
    for d, b in zip(direct.setups, bounced.setups, strict=True):
        for fd, fb in zip(d.fields, b.fields, strict=True):
            np.testing.assert_array_equal(fb.illuminance_lx, fd.illuminance_lx)
            assert (fb.mean_lx, fb.min_lx, fb.max_lx, fb.u0) == (fd.mean_lx, fd.min_lx, fd.max_lx, fd.u0)
        assert len(d.faces) == len(b.faces) == 4
        for fd, fb in zip(d.faces, b.faces, strict=True):
            np.testing.assert_array_equal(fb.semicylindrical_lx, fd.semicylindrical_lx)
            np.testing.assert_array_equal(fb.vertical_lx, fd.vertical_lx)
            assert fd.interreflected_vertical_lx is None and fd.interreflected_semicylindrical_lx is None
            assert "with_interreflected" not in fd.to_json()
        heads = [(h.key, h.value) for h in b.headline() if h.key not in upward]
        assert heads == [(h.key, h.value) for h in d.headline() if h.key not in upward]
        assert (b.class_check.to_json() if b.class_check else None) == (
            d.class_check.to_json() if d.class_check else None
        )


def test_faces_carry_the_interreflected_light_labelled(street):
    study, _, direct, bounced = street
    s = bounced.setups[0]
    for face in s.faces:
        for extra in (face.interreflected_vertical_lx, face.interreflected_semicylindrical_lx):
            assert extra is not None and extra.shape == face.vertical_lx.shape
            assert np.all(extra >= 0.0) and extra.mean() > 0.0  # facades, kerbs and ground reflect
        js = face.to_json()["with_interreflected"]
        assert js["label"] == INTERREFLECTED_LABEL
        assert js["vertical_mean_lx"] == pytest.approx(
            float((face.vertical_lx + face.interreflected_vertical_lx).mean())
        )
        assert js["semicylindrical_lx"] == (face.semicylindrical_lx + face.interreflected_semicylindrical_lx).tolist()
    text = format_calculation(bounced)
    assert text.count("    + interreflected: E_sc mean") == 4 * len(bounced.setups)
    assert "+ interreflected: E_sc" not in format_calculation(direct)
    # The calculation carries exactly the traced term (same trace, same seed: to the bit).
    used = calc_study(study, ())
    grids = interreflected_on_fields(used, row_fields(used.scene), None, bounces=2, face_height_m=FACE_M).at(None)
    for face in s.faces:
        key = (face.name, int(np.sign(face.facing[0])))
        np.testing.assert_array_equal(face.interreflected_vertical_lx, grids.vertical[key])
        np.testing.assert_array_equal(face.interreflected_semicylindrical_lx, grids.semicylindrical[key])
    for f in s.fields:
        np.testing.assert_array_equal(f.interreflected_lx, grids.horizontal[f.name])


def _all(grids) -> np.ndarray:
    return np.concatenate(
        [np.ravel(g) for d in (grids.horizontal, grids.vertical, grids.semicylindrical) for g in d.values()]
    )


def test_relighting_is_a_multiply_of_the_stored_transport(street):
    study, _, _, bounced = street
    used = calc_study(study, ())
    fields = row_fields(used.scene)
    ir = interreflected_on_fields(used, fields, None, bounces=2, face_height_m=FACE_M)
    base = _all(ir.at(None))
    # A new lamp, dimming or lumens: no new trace, and equal to a fresh trace under that setup
    # up to rounding (one group: the luminaire chosen at each vertex does not change either).
    for name in ("sodium", "dim", "brighter"):
        relit = _all(ir.at(name))
        fresh = _all(interreflected_on_fields(used, fields, name, bounces=2, face_height_m=FACE_M).at(name))
        np.testing.assert_allclose(relit, fresh, rtol=1e-9, atol=1e-12 * float(fresh.max()))
        assert len(ir.traced) == 1, name
    np.testing.assert_allclose(_all(ir.at("dim")), 0.5 * base, rtol=1e-12)
    # A new photometric distribution is traced again (once).
    ir.at("other-optic")
    ir.at("other-optic")
    assert len(ir.traced) == 2
    # The run relights its one trace per setup the same way.
    by = {s.setup: s for s in bounced.setups}
    for face_none, face_dim in zip(by[None].faces, by["dim"].faces, strict=True):
        np.testing.assert_allclose(face_dim.interreflected_vertical_lx, 0.5 * face_none.interreflected_vertical_lx)
        np.testing.assert_allclose(
            face_dim.interreflected_semicylindrical_lx, 0.5 * face_none.interreflected_semicylindrical_lx
        )


# ------------------------------------------------------------------------------------------
# The face grids' CSV files (render.output.calc_text): the analytic ground, the run's arrays
# ------------------------------------------------------------------------------------------


def _csv(text: str) -> tuple[list[str], np.ndarray]:
    """(header, values) of a CSV text of numbers."""
    rows = list(csv.reader(io.StringIO(text)))
    return rows[0], np.array(rows[1:], dtype=np.float64)


def test_face_grid_csv_reproduces_the_lambertian_ground(ground):
    # The CSV's interreflected column over the lit ground: the same Lambertian integral and
    # tolerance as above (4 standard errors, each under 1 %); −x by the ground's mirror symmetry
    # about the source's foot (the points and the strip are symmetric: the same mean as +x).
    study, field, ir = ground
    grids = ir.at(None)
    faces = []
    for sign in (1, -1):
        face = evaluate_face_field(study, field, None, facing=(float(sign), 0.0, 0.0), height_m=FACE_M)
        faces.append(
            replace(
                face,
                interreflected_vertical_lx=grids.vertical[(field.name, sign)],
                interreflected_semicylindrical_lx=grids.semicylindrical[(field.name, sign)],
            )
        )
    texts = dict(face_grid_csvs(field, faces))
    assert list(texts) == [part for part, _ in FACE_QUANTITIES]
    tri = study.mesh.triangles_m.reshape(-1, 3)
    rect = (float(tri[:, 0].min()), float(tri[:, 0].max()), float(tri[:, 1].min()), float(tri[:, 1].max()))
    intensity = LUMENS / (4.0 * math.pi)

    def ground_lx(x, y):
        d2 = (x - SOURCE_M[0]) ** 2 + (y - SOURCE_M[1]) ** 2 + SOURCE_M[2] ** 2
        return intensity * SOURCE_M[2] / d2**1.5

    rho = _luminous_reflectance(study)
    ref = np.array([_strip_integrals(p + [0.0, 0.0, FACE_M], rect, ground_lx) for p in field.points_m]) * rho / math.pi
    expected = {
        ("vertical", 0.0): ref[:, 0].mean(),
        ("vertical", 180.0): ref[:, 1].mean(),
        ("semicylindrical", 0.0): ref[:, 2].mean(),
        ("semicylindrical", 180.0): ref[:, 2].mean(),
    }
    for part, column in FACE_QUANTITIES:
        head, values = _csv(texts[part])
        assert head == [*FACE_COLUMNS, column, *INTERREFLECTED_COLUMNS]
        bounced = values[:, head.index(INTERREFLECTED_COLUMNS[0])]
        total = values[:, head.index(INTERREFLECTED_COLUMNS[1])]
        np.testing.assert_array_equal(total, values[:, 4] + bounced)
        for azimuth in (0.0, 180.0):
            rows = values[:, 3] == azimuth
            assert rows.sum() == 64
            np.testing.assert_array_equal(values[rows, :3], field.points_m + [0.0, 0.0, FACE_M])
            got = bounced[rows]
            se = got.std(ddof=1) / math.sqrt(got.size)
            want = expected[(part, azimuth)]
            assert abs(got.mean() - want) <= 4.0 * se, (part, azimuth, got.mean(), want, se)
            assert se < 0.01 * want
    # The infinite ground's E_v = E_sc = ρE/2, which the finite strip approaches (0.97 of it).
    e0 = intensity / SOURCE_M[2] ** 2
    assert 0.9 < expected[("semicylindrical", 0.0)] / (rho * e0 / 2.0) < 1.0


def test_face_grid_csvs_hold_the_calculation_s_arrays(street, tmp_path):
    # Every setup's face grid files: the points 1.5 m above the footway, the facing azimuth
    # (0° for +x, 180° for −x), and each column equal to the JSON record's grid to the bit;
    # the interreflected columns only with bounces (common practice, no source).
    study, _, direct, bounced = street
    points = {f.name: f.points_m for f in row_fields(study.scene)}
    for report, out in ((direct, tmp_path / "direct"), (bounced, tmp_path / "bounced")):
        written = write_field_csvs(study.scene, report, out)
        footways = {face.name for s in report.setups for face in s.faces}
        assert len(written) == len(report.setups) * (len(report.setups[0].fields) + 2 * len(footways))
        for s in report.setups:
            setup = s.setup or "scene"
            for name in footways:
                records = [face.to_json() for face in s.faces if face.name == name]
                assert [r["facing"][0] for r in records] == [1.0, -1.0]
                for part, column in FACE_QUANTITIES:
                    path = out / f"{file_stem(f'{setup}-{name}-{part}')}.csv"
                    assert path in written
                    head, values = _csv(path.read_text(encoding="utf-8"))
                    n = points[name].shape[0]
                    assert values.shape[0] == 2 * n
                    np.testing.assert_array_equal(values[:, :3], np.tile(points[name] + [0.0, 0.0, FACE_M], (2, 1)))
                    np.testing.assert_array_equal(values[:, 3], np.repeat([0.0, 180.0], n))
                    np.testing.assert_array_equal(values[:, 4], np.ravel([r[f"{part}_lx"] for r in records]))
                    if report is direct:
                        assert head == [*FACE_COLUMNS, column]
                        continue
                    assert head == [*FACE_COLUMNS, column, *INTERREFLECTED_COLUMNS]
                    extra = [r["with_interreflected"] for r in records]
                    np.testing.assert_array_equal(
                        values[:, 5], np.ravel([e[f"interreflected_{part}_lx"] for e in extra])
                    )
                    np.testing.assert_array_equal(values[:, 6], np.ravel([e[f"{part}_lx"] for e in extra]))
