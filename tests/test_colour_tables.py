"""The stored colour tables (``render/data/colour/``) against colour-science.

lampcast reads the CIE observer functions, the illuminant and lamp tables and the built-in
lamps' figures from files written by ``tools/make_colour_tables.py``, so that quick commands
need not import colour-science. Every stored number must equal what colour-science gives
(reference library: colour-science, the published CIE 015:2018 tables and NIST CQS 7.4 spectra
it bundles), exactly: the files hold each double's round-trip repr.
"""

from __future__ import annotations

import importlib.util
import subprocess
import sys
from pathlib import Path

import numpy as np
import pytest

from render.colour import observers
from render.colour.lamp_figures import computed_lamp_figures, lamp_figures
from render.colour.lamps import builtin_lamps
from render.colour.lamps.catalogue import catalogue_entries
from render.colour.materials import d65_on_grid
from render.colour.spectra import WAVELENGTHS_NM
from render.colour.tables import observer_table, reference_spectrum, spectrum_key, stored_lamp_figures

REPO = Path(__file__).resolve().parents[1]


def _tool():
    spec = importlib.util.spec_from_file_location("make_colour_tables", REPO / "tools" / "make_colour_tables.py")
    module = importlib.util.module_from_spec(spec)
    spec.loader.exec_module(module)
    return module


def test_observer_functions_equal_colour_science():
    expected = _tool().observer_functions()  # colour-science's tables aligned to the grid
    table = observer_table()
    assert table["wavelength_nm"].tobytes() == WAVELENGTHS_NM.astype(np.float64).tobytes()
    for name, values in expected.items():
        assert table[name].tobytes() == np.ascontiguousarray(values).tobytes(), name
    xyz = np.column_stack([expected["x_bar"], expected["y_bar"], expected["z_bar"]])
    assert observers.cmfs_xyz().tobytes() == np.ascontiguousarray(xyz).tobytes()
    assert observers.photopic_lef().tobytes() == expected["v_photopic"].tobytes()
    assert observers.scotopic_lef().tobytes() == expected["v_scotopic"].tobytes()


def test_spectra_equal_colour_science():
    tool = _tool()
    datasets = tool.stored_datasets()
    # Every table the catalogue names is stored, and D65.
    assert {e.dataset for e in catalogue_entries().values() if e.dataset} | {("SDS_ILLUMINANTS", "D65")} == set(
        datasets
    )
    for dataset, key in datasets:
        w, v = reference_spectrum(dataset, key)
        w_cs, v_cs = tool.colour_science_spectrum(dataset, key)
        assert w.tobytes() == w_cs.tobytes() and v.tobytes() == v_cs.tobytes(), (dataset, key)
    import colour

    sd = colour.SDS_ILLUMINANTS["D65"]
    assert d65_on_grid().tobytes() == np.interp(WAVELENGTHS_NM, sd.wavelengths, sd.values).tobytes()


def test_every_built_in_lamp_has_its_colour_science_figures_stored():
    for lamp in builtin_lamps().values():
        stored = stored_lamp_figures(lamp.spd)
        assert stored is not None, f"{lamp.id}: run tools/make_colour_tables.py"
        computed = computed_lamp_figures(lamp.spd)
        assert stored[1:] == computed[1:], lamp.id
        # colour-science's figures differ in their last digits between numpy/scipy builds and
        # processors (up to ~1e-9 relative seen, in the nearly degenerate fits of line
        # spectra); the stored values must agree far below any printed precision.
        assert stored[0].keys() == computed[0].keys(), lamp.id
        for key, value in stored[0].items():
            assert value == pytest.approx(computed[0][key], rel=1e-7, abs=1e-12), (lamp.id, key)


def test_a_changed_spectrum_is_computed_afresh():
    lamp = builtin_lamps()["led-3000k"] if "led-3000k" in builtin_lamps() else next(iter(builtin_lamps().values()))
    from dataclasses import replace

    changed = replace(lamp, spd=np.roll(lamp.spd, 3))
    assert spectrum_key(changed.spd) != spectrum_key(lamp.spd)
    assert stored_lamp_figures(changed.spd) is None
    assert lamp_figures(changed).peak_nm == pytest.approx(lamp_figures(lamp).peak_nm + 3.0)


def test_quick_commands_do_not_import_colour_science():
    # The lamp catalogue, the observers and the material figures come from the stored tables.
    code = (
        "import sys\n"
        "from render.colour.lamps import builtin_lamps\n"
        "from render.colour.lamp_figures import lamp_figures\n"
        "from render.colour.materials import material_library, luminous_reflectance\n"
        "[lamp_figures(x) for x in builtin_lamps().values()]\n"
        "[luminous_reflectance(m.reflectance) for m in material_library().values()]\n"
        "print('colour' in sys.modules)\n"
    )
    out = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, check=True, cwd=REPO)
    assert out.stdout.strip() == "False"


def test_check_compares_numbers_within_a_relative_tolerance():
    # The tool's --check (common practice, no source): numbers that differ in their last digits
    # are the same table; a change in the ninth significant digit, a key or a text is not.
    tool = _tool()
    assert tool._same_json('{"a": [80.28684502160826, "x"]}', '{"a": [80.28684502160829, "x"]}')
    assert not tool._same_json('{"a": [80.28684502160826, "x"]}', '{"a": [80.28684512160826, "x"]}')
    assert not tool._same_json('{"a": [1.0, "x"]}', '{"a": [1.0, "y"]}')
    assert not tool._same_json('{"a": 1.0}', '{"b": 1.0}')
