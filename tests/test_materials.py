"""Tests for the material library (render/materials.py, materials/, tools/build_materials.py).

Outside references used here: colour-science's copies of the CIE 13.3-1995 test colour samples
and the BabelColor ColorChecker averages, colour-science's own colorimetry (``sd_to_XYZ``), the
earthlib package's spectra, the Fresnel equations and the SCHOTT N-BK7 catalogue index, plus
common-practice ranges marked as such.
"""

from __future__ import annotations

import importlib.util
import json
import shutil
import sys
from pathlib import Path

import numpy as np
import pytest

from render.colour.materials import (
    CLIP_TOLERANCE,
    MATERIALS_ENV,
    REQUIRED_KEYS,
    Material,
    default_materials_dir,
    get_material,
    load_material_csv,
    luminous_reflectance,
    material_library,
)
from render.colour.spectra import N_BINS, WAVELENGTHS_NM
from render.errors import InputError
from render.output.material_sheet import format_material_table, material_table, plot_material

# colour-science warns when it aligns a 360-830 nm sample to D65's 300-780 nm; expected here.
pytestmark = pytest.mark.filterwarnings("ignore::colour.utilities.ColourRuntimeWarning")

REPO = Path(__file__).resolve().parents[1]
MATERIALS = REPO / "materials"
BAD = Path(__file__).resolve().parent / "data" / "materials"


@pytest.fixture(scope="module")
def lib() -> dict[str, Material]:
    return material_library(MATERIALS)


@pytest.fixture(scope="module")
def colour_refs():
    import colour

    return colour.MSDS_CMFS["CIE 1931 2 Degree Standard Observer"], colour.SDS_ILLUMINANTS["D65"]


# --- the committed library -------------------------------------------------------------------


def test_every_committed_material_loads_within_unit_interval(lib):
    files = sorted(MATERIALS.glob("*.csv"))
    assert len(lib) == len(files)
    for path in files:
        m = lib[path.stem]
        assert m.path == path
        assert m.reflectance.shape == (N_BINS,)
        assert np.all(np.isfinite(m.reflectance))
        assert np.all((m.reflectance >= 0.0) & (m.reflectance <= 1.0)), m.id
        for key in REQUIRED_KEYS:
            if key != "measured_range_nm":
                assert getattr(m, key).strip(), (m.id, key)
        assert m.measured_range_nm[0] < m.measured_range_nm[1]
        assert not m.reflectance.flags.writeable


def test_library_size_and_required_categories(lib):
    assert len(lib) >= 30
    categories = {m.category for m in lib.values()}
    # Categories the issue asks for (asphalt/concrete as road and paving, kerb and road paints,
    # brick as masonry, roof tile, metal, glass, wood, bark/grass/foliage as vegetation, soil,
    # gravel as stone, coloured objects as object paint).
    required = {
        "road",
        "paving",
        "kerb",
        "paint",
        "masonry",
        "roof",
        "metal",
        "glass",
        "wood",
        "vegetation",
        "soil",
        "stone",
        "object paint",
    }
    assert required <= categories, required - categories
    for mid in (
        "asphalt-new",
        "asphalt-worn",
        "concrete-paving",
        "concrete-kerb",
        "paint-road-white",
        "paint-road-yellow",
        "paint-kerb-red",
        "brick",
        "roof-tile",
        "metal-galvanised",
        "glass-clear",
        "wood",
        "bark",
        "soil",
        "gravel",
        "grass",
        "foliage",
        "object-red",
        "object-blue",
        "object-green",
        "object-yellow",
        "skin-light",
        "skin-dark",
        "object-grey",
    ):
        assert mid in lib, mid


def test_simulated_canopies_are_labelled(lib):
    # earthlib's green canopies come from PROSAIL (earthlib metadata SOURCE=prosail).
    for m in lib.values():
        if "prosail" in m.extra.get("source_metadata", "").lower():
            assert "SIMULATED" in m.description and "PROSAIL" in m.description, m.id


# --- checks against outside sources ------------------------------------------------------------


def test_tcs_materials_equal_colour_science_samples(lib):
    # Source: CIE 13.3-1995 test colour samples as tabulated in colour-science (SDS_TCS['CIE 1995']).
    from colour.quality import SDS_TCS

    tcs = [m for m in lib.values() if m.id.startswith("tcs")]
    assert len(tcs) == 14
    for m in tcs:
        sd = SDS_TCS["CIE 1995"][m.sample_id]
        ref = dict(zip(sd.wavelengths.tolist(), sd.values.tolist()))
        assert m.sample_wavelengths_nm[0] == 380 and m.sample_wavelengths_nm[-1] == 780
        for w, v in zip(m.sample_wavelengths_nm, m.sample_values):
            assert v == pytest.approx(ref[w], abs=1e-9), (m.id, w)
        # On the grid: bin means of the straight-line interpolant stay within the rounding of the
        # tabulated values of plain linear interpolation of the source.
        linear = np.interp(WAVELENGTHS_NM, sd.wavelengths, sd.values)
        assert np.max(np.abs(m.reflectance - linear)) < 3e-3, m.id


def test_colorchecker_materials_equal_babelcolor_averages(lib):
    # Source: BabelColor ColorChecker averages in colour-science; rows above 730 nm hold 730 nm.
    from colour.characterisation import SDS_COLOURCHECKERS

    checker = SDS_COLOURCHECKERS["BabelColor Average"]
    picked = [m for m in lib.values() if "BabelColor" in m.source]
    assert len(picked) >= 12
    for m in picked:
        sd = checker[m.sample_id]
        ref = dict(zip(sd.wavelengths.tolist(), sd.values.tolist()))
        for w, v in zip(m.sample_wavelengths_nm, m.sample_values):
            expected = ref[w] if w <= 730 else ref[730.0]
            assert v == pytest.approx(expected, abs=1e-9), (m.id, w)


@pytest.mark.parametrize("mid", ["object-grey", "object-mid-grey", "object-light-grey", "object-white", "object-black"])
def test_neutral_patch_luminous_reflectance_matches_colour_science(lib, colour_refs, mid):
    # Reference: colour.sd_to_XYZ (ASTM E308 method) of the same BabelColor patch under D65,
    # CIE 1931 2° observer; Y/100 is the luminous reflectance. Tolerance 0.5 % (issue).
    import colour
    from colour.characterisation import SDS_COLOURCHECKERS

    cmfs, d65 = colour_refs
    sd = SDS_COLOURCHECKERS["BabelColor Average"][lib[mid].sample_id]
    expected = colour.sd_to_XYZ(sd, cmfs, d65)[1] / 100.0
    assert luminous_reflectance(lib[mid].reflectance) == pytest.approx(expected, rel=5e-3)


def test_tcs_luminous_reflectance_matches_colour_science(lib, colour_refs):
    # Reference: colour.sd_to_XYZ of the CIE 13.3 samples under D65 (5 nm data), within 0.5 %.
    import colour
    from colour.quality import SDS_TCS

    cmfs, d65 = colour_refs
    for m in lib.values():
        if m.id.startswith("tcs"):
            expected = colour.sd_to_XYZ(SDS_TCS["CIE 1995"][m.sample_id], cmfs, d65)[1] / 100.0
            assert luminous_reflectance(m.reflectance) == pytest.approx(expected, rel=5e-3), m.id


def test_asphalt_luminous_reflectance_plausible(lib):
    # Asphalt carriageways reflect roughly 0.05-0.2 of daylight (common practice, no source).
    new = luminous_reflectance(lib["asphalt-new"].reflectance)
    worn = luminous_reflectance(lib["asphalt-worn"].reflectance)
    for y in (new, worn):
        assert 0.05 <= y <= 0.20
    # Herold & Roberts, "Mapping asphalt road conditions with hyperspectral remote sensing":
    # asphalt brightens as it ages (hydrocarbon-dominated new roads, mineral-dominated old ones).
    assert worn > new


def test_white_road_paint_brighter_than_asphalt(lib):
    # Road markings are chosen to contrast with the carriageway (common practice, no source).
    white = luminous_reflectance(lib["paint-road-white"].reflectance)
    assert white > 3 * luminous_reflectance(lib["asphalt-worn"].reflectance)


def test_glass_clear_matches_fresnel(lib):
    # Fresnel equations at normal incidence: R = ((n-1)/(n+1))^2 per face; a non-absorbing slab
    # with incoherent multiple reflections reflects 2R/(1+R). n_d = 1.5168 at 587.6 nm is the
    # SCHOTT catalogue index of N-BK7 (from memory).
    n = 1.5168
    r = ((n - 1) / (n + 1)) ** 2
    m = lib["glass-clear"]
    at_590 = float(np.interp(587.6, m.sample_wavelengths_nm, m.sample_values))
    assert at_590 == pytest.approx(2 * r / (1 + r), abs=2e-4)
    # A clear pane reflects about 8 % (common practice, no source).
    assert 0.07 < luminous_reflectance(m.reflectance) < 0.09


def test_earthlib_materials_equal_earthlib_spectra(lib):
    # Source: the earthlib package's own spectra (values rounded to 6 decimals in the files);
    # 380 and 390 nm hold the 400 nm value (the stated completion).
    earthlib = pytest.importorskip("earthlib")
    full = earthlib.full_library
    wl = np.round(np.asarray(full.sensor.band_centers, dtype=np.float64) * 1000.0, 3)
    picked = [m for m in lib.values() if m.source.startswith("earthlib")]
    assert len(picked) >= 25
    for m in picked:
        name, index = m.sample_id.split(" (earthlib full_library index ")
        i = int(index.rstrip(")"))
        assert str(full.metadata["NAME"].iloc[i]).strip() == name
        ref = dict(zip(wl.tolist(), np.asarray(full.data[i], dtype=np.float64).tolist()))
        for w, v in zip(m.sample_wavelengths_nm, m.sample_values):
            expected = ref[max(w, 400.0)]
            assert v == pytest.approx(expected, abs=6e-7), (m.id, w)


def test_build_script_reproduces_committed_files():
    pytest.importorskip("earthlib")
    spec = importlib.util.spec_from_file_location("build_materials", REPO / "tools" / "build_materials.py")
    build = importlib.util.module_from_spec(spec)
    sys.modules[spec.name] = build  # dataclasses look their module up there
    try:
        spec.loader.exec_module(build)
    finally:
        sys.modules.pop(spec.name, None)
    first = build.build_all()
    assert first == build.build_all()  # deterministic
    committed = {p.name: p.read_text(encoding="utf-8") for p in MATERIALS.glob("*.csv")}
    assert set(first) == set(committed)
    for name, text in first.items():
        assert text == committed[name], name
    assert build.render_readme(MATERIALS) == (MATERIALS / "README.md").read_text(encoding="utf-8")


# --- rejected files ----------------------------------------------------------------------------

BAD_CASES = [
    ("bad-non-numeric.csv", "line 23", "not a number"),
    ("bad-unsorted.csv", "line 24", "strictly increasing"),
    ("bad-duplicate.csv", "line 24", "duplicate wavelength 500 nm"),
    ("bad-negative.csv", "line 33", "outside [0, 1]"),
    ("bad-over-one.csv", "line 33", "outside [0, 1]"),
    ("bad-narrow-range.csv", "line 11", "at or below 380 nm"),
    ("bad-empty.csv", "line 1", "empty"),
    ("bad-missing-key.csv", "line 9", "'# licence: ...'"),
    ("bad-wrong-id.csv", "line 1", "must equal the file name"),
    ("bad-too-few-rows.csv", "line 15", "at least 9"),
]


@pytest.mark.parametrize("name, line, expected", BAD_CASES)
def test_bad_file_rejected_naming_file_and_line(name, line, expected):
    path = BAD / name
    with pytest.raises(InputError) as err:
        load_material_csv(path)
    text = str(err.value)
    matching = [p for p in err.value.problems if p.where == line and expected in p.message]
    assert matching, text
    assert all(p.source == str(path) for p in err.value.problems)
    assert name in text


def test_values_within_tolerance_are_clipped():
    m = load_material_csv(BAD / "ok-clip-tolerance.csv")
    assert m.sample_values[0] == 0.0 and m.sample_values[-1] == 1.0
    assert CLIP_TOLERANCE == 0.005
    assert m.reflectance.min() >= 0.0 and m.reflectance.max() <= 1.0


def test_missing_file_is_an_input_error(tmp_path):
    with pytest.raises(InputError, match="file not found"):
        load_material_csv(tmp_path / "nothing.csv")


def test_library_reports_every_bad_file_at_once():
    with pytest.raises(InputError) as err:
        material_library(BAD)
    sources = {Path(p.source).name for p in err.value.problems}
    assert {name for name, _, _ in BAD_CASES} <= sources


# --- the library API ---------------------------------------------------------------------------


def test_env_var_overrides_default_folder(tmp_path, monkeypatch):
    shutil.copy(MATERIALS / "brick.csv", tmp_path / "brick.csv")
    monkeypatch.setenv(MATERIALS_ENV, str(tmp_path))
    assert default_materials_dir() == tmp_path
    assert list(material_library()) == ["brick"]
    monkeypatch.delenv(MATERIALS_ENV)
    assert default_materials_dir().resolve() == MATERIALS.resolve()  # the bundled link to materials/


def test_env_var_pointing_nowhere_is_an_input_error(tmp_path, monkeypatch):
    monkeypatch.setenv(MATERIALS_ENV, str(tmp_path / "missing"))
    with pytest.raises(InputError) as err:
        material_library()
    assert MATERIALS_ENV in str(err.value)


def test_get_material_suggests_a_close_id(lib):
    assert get_material("brick", lib).id == "brick"
    with pytest.raises(InputError) as err:
        get_material("asphalt-nwe", lib, source="street.toml", where="street.carriageway_material")
    problem = err.value.problems[0]
    assert problem.source == "street.toml" and problem.where == "street.carriageway_material"
    assert "did you mean 'asphalt-new'" in problem.message


def test_material_table_rows_and_text(lib):
    rows = material_table(lib)
    assert [r["id"] for r in rows] == sorted(lib)
    json.dumps(rows)  # JSON-ready
    row = next(r for r in rows if r["id"] == "object-grey")
    assert row["luminous_reflectance_d65"] == pytest.approx(
        luminous_reflectance(lib["object-grey"].reflectance), abs=1e-4
    )
    assert row["measured_range_nm"] == [380.0, 730.0]
    text = format_material_table(rows)
    for mid in lib:
        assert f"\n{mid} " in text
    assert text.isascii()


def test_luminous_reflectance_of_a_constant_is_the_constant():
    # Analytic: Σ c·S·ȳ / Σ S·ȳ = c.
    assert luminous_reflectance(np.full(N_BINS, 0.37)) == pytest.approx(0.37, rel=1e-12)


def test_plot_is_written_atomically(lib, tmp_path):
    out = plot_material(lib["asphalt-new"], tmp_path / "plots" / "asphalt-new.png")
    assert out.read_bytes()[:8] == b"\x89PNG\r\n\x1a\n"
    assert [p.name for p in out.parent.iterdir()] == ["asphalt-new.png"]


# --- numbers at the edge of double precision, separators, size (render.limits) -------------------

# A committed file, changed line by line; each change must be refused naming the file and the line
# and saying what was expected. Binary64 limits (largest finite about 1.8e308; 1e400 parses to
# infinity): IEEE 754-2008. The rule itself is the project's (bad input -> InputError).
_BRICK = (MATERIALS / "brick.csv").read_text(encoding="utf-8").splitlines()
_COLUMNS = _BRICK.index("wavelength_nm,reflectance")  # 0-based; file line _COLUMNS + 1


def _line_of(wavelength: str) -> int:
    return next(i for i, s in enumerate(_BRICK) if s.startswith(wavelength + ",")) + 1


def _brick(tmp_path: Path, lines: list[str]) -> Path:
    path = tmp_path / "brick.csv"
    path.write_text("\n".join(lines) + "\n", encoding="utf-8")
    return path


def _replaced(wavelength: str, row: str) -> list[str]:
    lines = list(_BRICK)
    lines[_line_of(wavelength) - 1] = row
    return lines


EDGE_CASES = [
    # (file lines, line, words in the message)
    (_replaced("500", "500,nan"), _line_of("500"), "not finite"),
    (_replaced("500", "500,inf"), _line_of("500"), "not finite"),
    (_replaced("500", "500,1e400"), _line_of("500"), "beyond the range of double precision"),
    (_replaced("500", "500,-1e400"), _line_of("500"), "beyond the range of double precision"),
    (_replaced("500", "500,1e308"), _line_of("500"), "outside [0, 1]"),
    (_replaced("500", "1e400,0.2"), _line_of("500"), "beyond the range of double precision"),
    # A first row at -1e308 nm was accepted and gave a reflectance of 0 at every wavelength.
    (_BRICK[: _COLUMNS + 1] + ["-1e308,0.5"] + _BRICK[_COLUMNS + 1 :], _COLUMNS + 2, "outside 0-100,000 nm"),
    (_BRICK[: _COLUMNS + 1] + ["0,0.5"] + _BRICK[_COLUMNS + 1 :], _COLUMNS + 2, "outside 0-100,000 nm"),
    (_BRICK + ["1e308,0.5"], len(_BRICK) + 1, "outside 0-100,000 nm"),
    # measured_range_nm of 400 nines parsed to infinity and was written to the JSON listing.
    (
        [f"# measured_range_nm: 400-{'9' * 400}" if s.startswith("# measured_range_nm") else s for s in _BRICK],
        next(i for i, s in enumerate(_BRICK) if s.startswith("# measured_range_nm")) + 1,
        "expected 'first-last' in nm",
    ),
]


@pytest.mark.parametrize("lines, line, expected", EDGE_CASES)
def test_numbers_beyond_double_precision_are_input_errors(tmp_path, lines, line, expected):
    path = _brick(tmp_path, lines)
    with pytest.raises(InputError) as err:
        load_material_csv(path)
    problem = err.value.problems[0]
    assert (problem.source, problem.where) == (str(path), f"line {line}"), str(err.value)
    assert expected in problem.message and "expected" in problem.message, problem.message


def _with_separator(sep: str, decimal: str = ".") -> list[str]:
    return [s if s.startswith("#") else s.replace(",", sep).replace(".", decimal) for s in _BRICK]


@pytest.mark.parametrize(
    "lines, words",
    [
        # European spreadsheets: ';' between fields, decimal commas (common practice, no source).
        (_with_separator(";"), "separated by ';' (semicolons)"),
        (_with_separator(";", ","), "separated by ';' (semicolons)"),
        (_with_separator("\t"), "separated by tabs"),
        (_with_separator("\t", ","), "separated by tabs"),
        (_with_separator(" "), "separated by spaces"),
    ],
)
def test_wrong_separator_is_named_once(tmp_path, lines, words):
    path = _brick(tmp_path, lines)
    with pytest.raises(InputError) as err:
        load_material_csv(path)
    assert len(err.value.problems) == 1, str(err.value)  # one message, not one per row
    problem = err.value.problems[0]
    assert problem.where == f"line {_COLUMNS + 1}"
    assert words in problem.message and "one comma" in problem.message and "decimal point" in problem.message


def test_separator_in_data_rows_is_named_at_the_first(tmp_path):
    lines = [s if s.startswith("#") or s.startswith("wave") else s.replace(",", ";") for s in _BRICK]
    with pytest.raises(InputError) as err:
        load_material_csv(_brick(tmp_path, lines))
    assert [p.where for p in err.value.problems] == [f"line {_COLUMNS + 2}"]
    assert "';' (semicolons)" in err.value.problems[0].message


def test_too_many_rows_is_refused(tmp_path):
    from render.limits import MAX_SPECTRUM_ROWS

    head = _BRICK[: _COLUMNS + 1]
    rows = [f"{380 + 400 * i / MAX_SPECTRUM_ROWS:.5f},0.5" for i in range(MAX_SPECTRUM_ROWS + 1)]
    path = _brick(tmp_path, head + rows)
    with pytest.raises(InputError) as err:
        load_material_csv(path)
    problem = err.value.problems[0]
    assert problem.where == f"lines {_COLUMNS + 1}-{_COLUMNS + 2 + MAX_SPECTRUM_ROWS}"
    assert f"{MAX_SPECTRUM_ROWS:,}" in problem.message


def test_problems_are_capped_and_fields_cut(tmp_path):
    from render.limits import MAX_PROBLEMS_PER_FILE

    # Project rule: a message names the line and what was expected, without reprinting the file.
    path = _brick(tmp_path, _BRICK[: _COLUMNS + 1] + [f"{380 + i},{'x' * 1000}" for i in range(1000)])
    with pytest.raises(InputError) as err:
        load_material_csv(path)
    assert MAX_PROBLEMS_PER_FILE <= len(err.value.problems) <= MAX_PROBLEMS_PER_FILE + 3
    assert any("the rest of the file was not checked" in p.message for p in err.value.problems)
    assert len(str(err.value)) < 3000
