"""Tests of the lamp library (render.colour.lamps), lamp figures (render.colour.lamp_figures) and
the lamp sheet (render.output.lamp_sheet).

Each check names what it is checked against. "Common practice, no source" marks lighting rules
of thumb; "from memory" marks values written down without the document at hand.
"""

from __future__ import annotations

import hashlib
import json
import math
import re
import warnings
from pathlib import Path

import numpy as np
import pytest

from render.colour.lamp_figures import FIGURE_KEYS, LampFigures, lamp_figures
from render.colour.lamps import (
    LAMP_TYPES,
    Lamp,
    LineSpectrum,
    builtin_lamps,
    get_lamp,
    load_lamp_file,
)
from render.colour.lamps.catalogue import catalogue_entries
from render.colour.observers import photopic, scale_to_photopic, sp_ratio
from render.colour.spectra import N_BINS, WAVELENGTHS_NM, band_power, centroid_nm
from render.errors import InputError
from render.output.lamp_sheet import format_lamp_table, lamp_figures_json, plot_lamp_spectrum

colour = pytest.importorskip("colour")

DATA = Path(__file__).parent / "data" / "lamps"


@pytest.fixture(scope="module")
def lamps() -> dict[str, Lamp]:
    return builtin_lamps()


@pytest.fixture(scope="module")
def figures(lamps) -> dict[str, LampFigures]:
    return {k: lamp_figures(v) for k, v in lamps.items()}


# --- the library -----------------------------------------------------------------------------

REQUIRED_IDS = (
    "sodium-low-pressure",
    "sodium-high-pressure-cie-hp1",
    "sodium-high-pressure-measured",
    "sodium-high-pressure-white-cie-hp2",
    "mercury-vapour-lines",
    "mercury-vapour-clear-measured",
    "metal-halide-cie-hp3",
    "metal-halide-cie-hp4",
    "metal-halide-cie-hp5",
    "metal-halide-measured",
    "metal-halide-ceramic-4000k-measured",
    "fluorescent-cie-fl2",
    "fluorescent-cie-fl11",
    "fluorescent-cie-fl3-1",
    "led-2700k-cie-b1",
    "led-3000k-cie-b2",
    "led-4000k-cie-b3",
    "led-5000k-cie-b4",
    "led-6500k-cie-b5",
    "led-2850k-hybrid-cie-bh1",
    "led-2700k-violet-cie-v1",
    "led-4000k-violet-cie-v2",
    "led-amber-phosphor-converted",
    "led-amber-narrow-band",
)


def test_builtin_lamps_are_complete_and_well_formed(lamps):
    # Project requirement (issue 2): ids of our own, every type covered, provenance given.
    assert set(REQUIRED_IDS) <= set(lamps)
    assert len(lamps) >= 30
    assert {lamp.type for lamp in lamps.values()} >= set(LAMP_TYPES) - {"other"}
    for key, lamp in lamps.items():
        assert key == lamp.id
        assert re.fullmatch(r"[a-z0-9]+(-[a-z0-9]+)*", lamp.id), lamp.id
        assert lamp.type in LAMP_TYPES
        assert lamp.name and lamp.description and lamp.source
        assert lamp.spd.shape == (N_BINS,)
        assert not lamp.spd.flags.writeable
        assert np.all(np.isfinite(lamp.spd)) and lamp.spd.min() >= 0.0
        # Analytic: unit total power (the documented normalisation).
        assert lamp.spd.sum() == pytest.approx(1.0, rel=1e-12)


# Regression pin, not an external check: SHA-256 over every built-in lamp's texts (id, name, type,
# description, source, notes), spectrum bytes and line list, computed from the lamps as the
# catalogue generator in Python built them before the catalogue became a data file
# (render/data/lamps/catalogue.toml). It changes if a lamp's data or texts, the gridding
# arithmetic or colour-science's bundled tables change; then check the figures and update it on
# purpose.
CATALOGUE_PIN = "accf1fea622fb62e43742be4f212e8ec0b236c6bc0f0f4c855a585e057756378"


def test_catalogue_data_builds_the_pinned_lamps(lamps):
    digest = hashlib.sha256()
    for lamp_id, lamp in lamps.items():
        for text in (lamp_id, lamp.name, lamp.type, lamp.description, lamp.source, *lamp.notes):
            digest.update(text.encode() + b"\0")
        digest.update(lamp.spd.tobytes())
        digest.update(repr(lamp.lines).encode())
    assert len(lamps) == 35
    assert digest.hexdigest() == CATALOGUE_PIN


def test_catalogue_entries_match_the_lamps(lamps):
    # Project requirement: the data file lists every built-in lamp once, in listing order, and
    # every tabulated lamp cites the dataset key it is built from.
    entries = catalogue_entries()
    assert list(entries) == list(lamps)
    for entry in entries.values():
        lamp = lamps[entry.id]
        assert (lamp.name, lamp.type, lamp.source, lamp.notes) == (entry.name, entry.type, entry.source, entry.notes)
        if entry.dataset is not None:
            attribute, key = entry.dataset
            assert f"colour.{attribute}['{key}']" in lamp.source


def test_5nm_discharge_tables_say_their_lines_are_hidden(lamps):
    # Project requirement: lamps tabulated at 5 nm with emission lines say so.
    for lamp in lamps.values():
        if "(5 nm)" in lamp.source and lamp.type not in ("phosphor LED", "violet-pumped LED"):
            assert any("5 nm" in note and "line" in note for note in lamp.notes), lamp.id


def test_tabulated_lamp_matches_its_colour_science_table(lamps):
    # Reference library: band power conserved when the 5 nm table goes onto the 1 nm grid --
    # the 500-600 nm share equals the trapezoid integral of the table (analytic for the
    # piecewise-linear reading) over 499.5-600.5 nm, relative to 379.5-780.5 nm (ends held).
    sd = colour.SDS_ILLUMINANTS["HP1"]
    x = np.concatenate([[379.5], sd.wavelengths, [780.5]])
    y = np.concatenate([[sd.values[0]], sd.values, [sd.values[-1]]])
    xs = np.linspace(499.5, 600.5, 2021)
    part = np.trapezoid(np.interp(xs, x, y), xs)
    total = np.trapezoid(y, x)
    assert band_power(lamps["sodium-high-pressure-cie-hp1"].spd, 500, 600) == pytest.approx(part / total, rel=1e-4)


# --- line sources ----------------------------------------------------------------------------


def test_line_source_power_conserved_on_the_grid():
    # Analytic: deposit_lines conserves power, so the gridded LPS model holds the sum of its
    # line powers (to 0.1 %, the project's tolerance).
    lines = [(line["nm"], line["power"]) for line in catalogue_entries()["sodium-low-pressure"].spectrum["lines"]]
    spectrum = LineSpectrum(lines)
    total = sum(p for _, p in lines)
    assert spectrum.density().sum() == pytest.approx(total, rel=1e-3)


def test_line_source_with_continuum_power_conserved(lamps):
    # Analytic: line powers plus the trapezoid integral of the continuum (ends held over the
    # outer half bins, as documented) equal the gridded total.
    lamp = lamps["mercury-vapour-lines"]
    line_share = sum(p for _, p in lamp.lines)
    assert 0.3 < line_share < 0.95
    assert lamp.spd.sum() == pytest.approx(1.0, rel=1e-3)
    # every line's power sits in the two bins around it
    for w, p in lamp.lines:
        near = np.abs(WAVELENGTHS_NM - w) < 1.0
        assert lamp.spd[near].sum() >= p * (1 - 1e-9)


def test_sodium_d_line_centroid(lamps):
    # NIST ASD: D2 588.995 nm, D1 589.592 nm; the sodium D line is conventionally 589.3 nm.
    lamp = lamps["sodium-low-pressure"]
    assert centroid_nm(lamp.spd, 585.0, 594.0) == pytest.approx(589.3, abs=1.0)
    # Common practice, no source (docs/references.md): nearly all visible power is in the doublet.
    assert band_power(lamp.spd, 588.0, 591.0) > 0.95


def test_mercury_line_model_peaks_at_nist_lines(lamps):
    # NIST ASD Hg I lines 404.66, 435.83, 546.07 nm: the strongest bins of the model.
    spd = lamps["mercury-vapour-lines"].spd
    top = set(WAVELENGTHS_NM[np.argsort(spd)[-8:]].astype(int))
    assert {405, 436, 546} <= top


# --- figures: rules of thumb and reference values ---------------------------------------------


@pytest.mark.parametrize(
    "lamp_id, lo, hi",
    [
        # Common practice, no source (docs/references.md): S/P of LPS about 0.25.
        ("sodium-low-pressure", 0.2, 0.3),
        # Common practice, no source: standard HPS about 0.6-0.65.
        ("sodium-high-pressure-cie-hp1", 0.55, 0.7),
        ("sodium-high-pressure-measured", 0.55, 0.7),
        ("sodium-high-pressure-100w-measured", 0.55, 0.7),
        # Common practice, no source: 4000 K phosphor LED about 1.6-1.8.
        ("led-4000k-cie-b3", 1.4, 1.9),
    ],
)
def test_sp_ratio_rules_of_thumb(figures, lamp_id, lo, hi):
    assert lo <= figures[lamp_id].sp_ratio <= hi


def test_colour_rendering_of_sodium_lamps(figures):
    # Common practice, no source (docs/references.md): Ra of LPS strongly negative; standard HPS
    # about 20-25 (range 10-30 here); HP1's tabulated Ra is lower.
    assert figures["sodium-low-pressure"].ra < 0
    assert 10 <= figures["sodium-high-pressure-measured"].ra <= 30
    assert figures["sodium-high-pressure-cie-hp1"].ra < figures["sodium-high-pressure-measured"].ra
    # CIE 13.3 validity: LPS lies beyond DC = 5.4e-3 of its reference, and we say so.
    assert figures["sodium-low-pressure"].cri_dc > 5.4e-3
    assert any(w.startswith("CIE 13.3") for w in figures["sodium-low-pressure"].warnings)


def test_ra_of_fl2_matches_colour_science_example(figures):
    # colour-science docstring of colour_rendering_index: FL2 Ra = 64.2337... (5 nm table);
    # our 1 nm gridding must not move it by more than 0.1.
    assert figures["fluorescent-cie-fl2"].ra == pytest.approx(64.2337, abs=0.1)


@pytest.mark.parametrize(
    "key, lamp_id",
    [("HP1", "sodium-high-pressure-cie-hp1"), ("LED-B3", "led-4000k-cie-b3"), ("HP3", "metal-halide-cie-hp3")],
)
def test_indices_match_colour_science_on_original_tables(figures, key, lamp_id):
    # Reference library: colour-science's Ra, Rf (CIE 2017) and TM-30 Rf/Rg on the original 5 nm
    # tables; gridding to 1 nm changes them by little.
    sd = colour.SDS_ILLUMINANTS[key]
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        ra = colour.colour_rendering_index(sd)
        rf = colour.colour_fidelity_index(sd, method="CIE 2017")
        tm = colour.colour_fidelity_index(sd, additional_data=True, method="ANSI/IES TM-30-18")
    fig = figures[lamp_id]
    assert fig.ra == pytest.approx(ra, abs=1.0)
    assert fig.rf_cie2017 == pytest.approx(rf, abs=1.0)
    assert fig.rf_tm30 == pytest.approx(tm.R_f, abs=1.0)
    assert fig.rg_tm30 == pytest.approx(tm.R_g, abs=1.5)


def test_cct_of_cie_lamps_vs_cie15(figures):
    # CIE 15:2018 Tables 11/12 (from memory): HP1 1959 K, LED-B3 4103 K; HP4 4002 K.
    assert figures["sodium-high-pressure-cie-hp1"].cct_K == pytest.approx(1959, abs=5)
    assert figures["led-4000k-cie-b3"].cct_K == pytest.approx(4103, abs=3)
    assert figures["metal-halide-cie-hp4"].cct_K == pytest.approx(4002, abs=5)


def test_luminous_efficacy_and_fractions(lamps, figures):
    # Analytic: LER of monochromatic light is Km·V(λ); the narrow-band amber LED (590 nm,
    # FWHM 15 nm) must lie below Km·V(555) = 683 and near Km·V(590) = 683·0.757 = 517 lm/W
    # (V(590) from the CIE 1924 table).
    assert figures["led-amber-narrow-band"].ler_lm_per_w == pytest.approx(517, rel=0.03)
    # Definition (±2 nm of the peak bin): LPS puts > 95 % in its doublet, which lies inside
    # that band; a broadband LED puts only a few per cent there.
    assert figures["sodium-low-pressure"].notch_fraction > 0.95
    assert figures["led-4000k-cie-b3"].notch_fraction < 0.05
    # Definition: blue fraction is the share below 500 nm.
    spd = lamps["led-4000k-cie-b3"].spd
    expected = spd[WAVELENGTHS_NM < 500].sum() + 0.5 * spd[WAVELENGTHS_NM == 500].sum()
    assert figures["led-4000k-cie-b3"].blue_fraction == pytest.approx(expected)
    assert figures["sodium-low-pressure"].blue_fraction < 0.01


def test_every_builtin_lamp_has_finite_figures(lamps, figures):
    # Project requirement: every built-in lamp computes without exceptions and without NaN.
    for lamp_id, fig in figures.items():
        assert list(fig.to_json())[: len(FIGURE_KEYS)] == list(FIGURE_KEYS)
        for key in FIGURE_KEYS:
            value = getattr(fig, key)
            if value is None:
                assert key in fig.undefined, (lamp_id, key)
            elif isinstance(value, float):
                assert math.isfinite(value), (lamp_id, key)
        assert fig.sp_ratio is not None and fig.ler_lm_per_w is not None
        assert fig.cct_K is None or 1000 <= fig.cct_K <= 100000


def test_cct_undefined_far_from_planckian_locus(tmp_path):
    # CIE S 017:2020 (ILV 17-23-068, Note 1): no CCT beyond ΔC = 0.05 in CIE 1960 uv. Monochromatic 520 nm light lies on the
    # spectrum locus, far (Duv >> 0.05) above the Planckian locus.
    path = tmp_path / "green.csv"
    path.write_text("# name: green line\nline, 520.0, 1.0\n")
    fig = lamp_figures(load_lamp_file(path))
    assert fig.duv > 0.05
    for key in ("cct_K", "ra", "r9", "rf_cie2017", "rf_tm30", "rg_tm30"):
        assert getattr(fig, key) is None
        assert fig.undefined[key]
    assert "Duv" in fig.undefined["cct_K"]
    data = json.loads(lamp_figures_json([fig]))
    assert data[0]["cct_K"] is None
    assert "n/a" in format_lamp_table([fig])


def test_photopic_scaling_of_a_lamp(lamps):
    # Analytic: scaling the relative spectrum to 1000 lm gives 1000 lm (W/nm result).
    for lamp_id in ("sodium-low-pressure", "led-4000k-cie-b3", "sodium-high-pressure-cie-hp1"):
        flux = scale_to_photopic(lamps[lamp_id].spd, 1000.0)
        assert float(photopic(flux)) == pytest.approx(1000.0, rel=1e-12)
        # and the optical power is 1000 lm / LER
        assert flux.sum() == pytest.approx(1000.0 / float(photopic(lamps[lamp_id].spd)), rel=1e-12)


# --- table, JSON, plot -----------------------------------------------------------------------


def test_table_and_json(lamps, figures):
    figs = list(figures.values())
    table = format_lamp_table(figs)
    lines = table.splitlines()
    assert "CCT" in lines[0] and "lm/W" in lines[1] and "K" in lines[1]
    for lamp_id in lamps:
        assert any(line.startswith(lamp_id + " ") for line in lines)
    text = lamp_figures_json(figs)
    assert "NaN" not in text
    data = json.loads(text)
    assert [row["id"] for row in data] == list(lamps)
    assert list(data[0]) == list(FIGURE_KEYS) + ["undefined", "warnings"]
    assert isinstance(data[0]["cct_K"], int)
    assert lamp_figures_json(figs) == text  # stable


def test_figures_json_never_writes_nan():
    values = {key: None for key in FIGURE_KEYS}
    values.update(id="x", name="x", type="other", sp_ratio=float("nan"), ler_lm_per_w=float("inf"))
    fig = LampFigures(**values)
    data = json.loads(lamp_figures_json([fig]))
    assert data[0]["sp_ratio"] is None and data[0]["ler_lm_per_w"] is None


def test_plot_is_written_atomically(tmp_path, lamps):
    out = tmp_path / "plots" / "sodium-low-pressure.png"
    written = plot_lamp_spectrum(lamps["sodium-low-pressure"], out)
    assert written == out
    assert out.read_bytes()[:8] == b"\x89PNG\r\n\x1a\n"
    assert [p.name for p in out.parent.iterdir()] == [out.name]  # no temporary file left


# --- get_lamp --------------------------------------------------------------------------------


def test_get_lamp_by_id_and_unknown_ids(lamps):
    assert get_lamp("led-4000k-cie-b3") is lamps["led-4000k-cie-b3"]
    assert get_lamp("LED-4000K-CIE-B3") is lamps["led-4000k-cie-b3"]
    with pytest.raises(InputError) as err:
        get_lamp("sodium-low-presure", source="street.toml", where="luminaires.rows[0].lamp")
    problem = err.value.problems[0]
    assert problem.source == "street.toml" and problem.where == "luminaires.rows[0].lamp"
    assert "did you mean 'sodium-low-pressure'" in problem.message
    with pytest.raises(InputError) as err:
        get_lamp("HP1")
    assert "sodium-high-pressure-cie-hp1" in str(err.value)


def test_dataset_keys_with_a_dot_are_ids_and_extensions_are_files(tmp_path):
    # Project rule (one path-likeness rule, render.fileio.looks_like_path): a dot before digits
    # is part of a dataset key, a dot before letters starts a file extension.
    with pytest.raises(InputError) as err:
        get_lamp("FL3.1")
    assert "the built-in lamp made from the 'FL3.1' table is 'fluorescent-cie-fl3-1'" in str(err.value)
    with pytest.raises(InputError) as err:
        get_lamp("kerbside.spd", base_dir=tmp_path)
    assert "lamp file not found" in str(err.value)


def test_figures_record_round_trip(figures):
    # Common practice, no source: the published record reads back into the same record.
    for fig in figures.values():
        data = fig.to_json()
        assert LampFigures.from_json(data).to_json() == data
        assert json.loads(json.dumps(data)) == data


def test_get_lamp_from_file_relative_to_base_dir(tmp_path):
    sd = colour.SDS_ILLUMINANTS["LED-B3"]
    rows = "\n".join(f"{w:g}, {v:.6g}" for w, v in zip(sd.wavelengths, sd.values))
    (tmp_path / "kerbside_led.csv").write_text(
        "# name: Kerbside LED\n# type: phosphor led\n# source: CIE LED-B3 copy\n# notes: a test copy\n"
        "wavelength_nm, relative_power\n" + rows + "\n"
    )
    lamp = get_lamp("kerbside_led.csv", base_dir=tmp_path)
    assert lamp.id == "kerbside-led" and lamp.name == "Kerbside LED" and lamp.type == "phosphor LED"
    assert lamp.notes == ("a test copy",)
    assert lamp.origin == str(tmp_path / "kerbside_led.csv")
    # Round trip: same spectrum as the built-in made from the same table (6 significant digits).
    assert np.allclose(lamp.spd, builtin_lamps()["led-4000k-cie-b3"].spd, rtol=1e-5, atol=1e-9)
    with pytest.raises(InputError) as err:
        get_lamp("missing.csv", base_dir=tmp_path)
    assert "not found" in str(err.value) and "missing.csv" in str(err.value)


def test_lines_file_with_continuum(tmp_path):
    # Analytic: lines conserve power; the continuum 400-700 nm at 0.001/nm holds 0.3.
    path = tmp_path / "sodium.csv"
    path.write_text(
        "# name: sodium with background\n# type: low-pressure sodium\n"
        "kind, wavelength_nm, power\n"
        "line, 588.995, 0.5\nline, 589.592, 0.2\nline, 819.482, 0.3\n"
        "continuum, 400, 0.001\ncontinuum, 700, 0.001\n"
    )
    lamp = load_lamp_file(path)
    assert sum(p for _, p in lamp.lines) == pytest.approx(0.7 / 1.0, rel=1e-9)
    assert band_power(lamp.spd, 588.0, 591.0) == pytest.approx(0.7 + 4 * 0.001, rel=1e-6)  # 4 bins: 588-591 nm
    assert any("819.482" in note for note in lamp.notes)  # the infrared line is left out, noted
    assert float(sp_ratio(lamp.spd)) > 0


# --- bad lamp files ----------------------------------------------------------------------------

BAD_FILES = [
    # (file, where, words in the message)
    ("non_numeric.csv", "line 5", "not a number"),
    ("unsorted.csv", "line 5", "strictly increasing"),
    ("duplicate_wavelength.csv", "line 4", "repeats"),
    ("negative_power.csv", "line 12", "non-negative"),
    ("not_finite.csv", "line 1", "finite"),
    ("three_fields.csv", "line 1", "expected 2 fields"),
    ("too_narrow.csv", "line 2", "400-700 nm"),
    ("empty.csv", "lines 1-3", "no data rows"),
    ("no_visible_power.csv", "lines 2-22", "no power"),
    ("infrared_lines_only.csv", "lines 2-3", "no power"),
    ("unknown_type.csv", "line 1", "unknown lamp type"),
    ("misspelt_key.csv", "line 1", "did you mean 'name'"),
    ("not_utf8.csv", "line 3", "UTF-8"),
    ("lines_negative_power.csv", "line 2", "non-negative"),
    ("lines_duplicate.csv", "line 3", "already given on line 1"),
    ("lines_mixed_rows.csv", "line 2", "'line' or 'continuum'"),
    ("lines_continuum_unsorted.csv", "line 4", "strictly increasing"),
]


@pytest.mark.parametrize("name, where, words", BAD_FILES)
def test_bad_lamp_file_raises_input_error_naming_file_and_line(name, where, words):
    # Project rule: bad user input raises InputError naming the file and line.
    path = DATA / name
    with pytest.raises(InputError) as err:
        load_lamp_file(path)
    problem = err.value.problems[0]
    assert problem.source == str(path)
    assert problem.where == where
    assert words in problem.message


def test_too_narrow_reports_both_ends():
    with pytest.raises(InputError) as err:
        load_lamp_file(DATA / "too_narrow.csv")
    assert [p.where for p in err.value.problems] == ["line 2", "line 15"]


def test_all_bad_files_are_tested():
    assert {p.name for p in DATA.iterdir()} == {name for name, _, _ in BAD_FILES}


def test_many_bad_rows_are_capped(tmp_path):
    path = tmp_path / "junk.csv"
    path.write_text("".join(f"{380 + i}, x\n" for i in range(50)))
    with pytest.raises(InputError) as err:
        load_lamp_file(path)
    assert 10 <= len(err.value.problems) <= 12


# --- numbers at the edge of double precision, separators, size (render.limits) -------------------

# Every case: a lamp file that must be refused with an InputError naming the file and the line,
# and saying what was expected. Binary64 limits (largest finite about 1.8e308, 1e400 parses to
# infinity): IEEE 754-2008. The rule itself is the project's (bad input -> InputError).
_TABLE = [(380 + 20 * i, "1.0") for i in range(21)]  # 380-780 nm every 20 nm; data on lines 1-21


def _table(replace: dict[int, tuple[str, str]] | None = None, sep: str = ", ") -> str:
    rows = list(_TABLE)
    for index, row in (replace or {}).items():
        rows[index] = row
    return "".join(f"{w}{sep}{p}\n" for w, p in rows)


OVERFLOW_FILES = [
    # (file text, where, words in the message)
    # One power of 1e308 among powers of 1: its 20 nm trapezoids hold 1e309, beyond binary64.
    (_table({5: ("480", "1e308")}), "line 6", "integral of the spectrum overflows"),
    (_table({i: (str(380 + 20 * i), "1e308") for i in range(21)}), "line 2", "overflows"),
    (_table({5: ("480", "1.7976931348623157e308")}), "line 6", "overflows"),
    (_table({5: ("480", "1e400")}), "line 6", "beyond the range of double precision"),
    (_table({5: ("480", "-1e400")}), "line 6", "beyond the range of double precision"),
    (_table({5: ("480", "inf")}), "line 6", "must be finite"),
    (_table({5: ("480", "NaN")}), "line 6", "must be finite"),
    (_table({5: ("480", "-1e308")}), "line 6", "non-negative"),
    (_table({20: ("1e308", "1.0")}), "line 21", "beyond 100,000 nm"),
    (_table({20: ("1e400", "1.0")}), "line 21", "beyond the range of double precision"),
    (_table({0: ("-1e308", "1.0")}), "line 1", "must be positive"),
    # Lines file: the running total of line powers overflows on the second line.
    ("line, 588.995, 1e308\nline, 589.592, 1e308\n", "line 2", "overflows"),
    ("line, 589.0, 1.0\ncontinuum, 400, 1e308\ncontinuum, 700, 1e308\n", "line 3", "overflows"),
    ("line, 589.0, 1e400\n", "line 1", "beyond the range of double precision"),
    ("line, 1e308, 1.0\nline, 589.0, 1.0\n", "line 1", "beyond 100,000 nm"),
    ("line, 589.0, 1.0\ncontinuum, 400, 0.1\ncontinuum, 1e308, 0.1\n", "line 3", "beyond 100,000 nm"),
]


@pytest.mark.parametrize("text, where, words", OVERFLOW_FILES)
def test_numbers_beyond_double_precision_are_input_errors(tmp_path, text, where, words):
    path = tmp_path / "edge.csv"
    path.write_text(text)
    with pytest.raises(InputError) as err:
        load_lamp_file(path)
    problem = err.value.problems[0]
    assert (problem.source, problem.where) == (str(path), where), str(err.value)
    assert words in problem.message, problem.message
    assert "no power between" not in str(err.value)  # the misleading message the overflow gave
    assert "expected" in problem.message or "must be" in problem.message


SEPARATOR_FILES = [
    # European spreadsheets: ';' between fields and a decimal comma (common practice, no source).
    (_table(sep=";"), "line 1", "separated by ';' (semicolons)"),
    (_table(sep="; "), "line 1", "separated by ';' (semicolons)"),
    ("wavelength_nm;relative_power\n" + _table(sep=";"), "line 1", "';' (semicolons)"),
    ("".join(f"{w};{p.replace('.', ',')}\n" for w, p in _TABLE), "line 1", "decimal commas"),
    ("".join(f"{w}\t{p.replace('.', ',')}\n" for w, p in _TABLE), "line 1", "separated by tabs"),
    ("".join(f"{w} {p.replace('.', ',')}\n" for w, p in _TABLE), "line 1", "separated by spaces"),
    ("line; 589.0; 1.0\n", "line 1", "';' (semicolons)"),
]


@pytest.mark.parametrize("text, where, words", SEPARATOR_FILES)
def test_wrong_separator_is_named(tmp_path, text, where, words):
    path = tmp_path / "semicolons.csv"
    path.write_text(text)
    with pytest.raises(InputError) as err:
        load_lamp_file(path)
    assert len(err.value.problems) == 1  # one message for the file, not one per row
    problem = err.value.problems[0]
    assert (problem.source, problem.where) == (str(path), where)
    assert words in problem.message and "decimal point" in problem.message


def test_tabs_and_spaces_separate_fields_as_commas_do(tmp_path):
    # The documented format: commas, or white space in a line without a comma.
    spectra = []
    for name, sep in (("commas.csv", ", "), ("tabs.csv", "\t"), ("spaces.csv", "   ")):
        (tmp_path / name).write_text(_table({7: ("520", "0.25")}, sep=sep))
        spectra.append(load_lamp_file(tmp_path / name).spd)
    assert spectra[0].tobytes() == spectra[1].tobytes() == spectra[2].tobytes()


def test_too_many_rows_is_refused_before_reading_them(tmp_path):
    from render.limits import MAX_SPECTRUM_ROWS

    path = tmp_path / "huge.csv"
    path.write_text("# name: too long\n" + "500, 1\n" * (MAX_SPECTRUM_ROWS + 1))
    with pytest.raises(InputError) as err:
        load_lamp_file(path)
    problem = err.value.problems[0]
    assert problem.where == f"lines 2-{MAX_SPECTRUM_ROWS + 2}"
    assert any(f"{MAX_SPECTRUM_ROWS + 1:{group}}" in problem.message for group in ("", ","))
    assert f"{MAX_SPECTRUM_ROWS:,}" in problem.message


def test_subnormal_line_power_normalises_exactly(tmp_path):
    # Analytic: one line carries all the power, at its own wavelength (deposit_lines conserves
    # power and mean wavelength). At 1e-320 (a subnormal binary64, IEEE 754) the two bin shares
    # round to multiples of 4.9e-324 unless the powers are scaled first.
    path = tmp_path / "faint.csv"
    path.write_text("line, 589.3, 1e-320\n")
    lamp = load_lamp_file(path)
    assert lamp.lines == ((589.3, 1.0),)
    assert lamp.spd.sum() == pytest.approx(1.0, rel=1e-12)
    assert centroid_nm(lamp.spd) == pytest.approx(589.3, rel=1e-12)


def test_long_fields_are_cut_in_messages(tmp_path):
    # Project rule: a message names the place and what was expected; it does not reprint a
    # megabyte of the file.
    path = tmp_path / "long.csv"
    path.write_text(_table({3: ("440", "x" * 100_000)}))
    with pytest.raises(InputError) as err:
        load_lamp_file(path)
    assert err.value.problems[0].where == "line 4" and len(str(err.value)) < 300
