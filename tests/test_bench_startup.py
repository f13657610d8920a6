"""The start-up benchmark (render.bench.startup) runs and prints its rows.

A smoke test of the script only (project rule: speed is never a timed test, so no figure is
checked): ``--quick`` on a small test scene, the table's rows in order. The generated OBJ grid
is checked against its closed form: 2 n² triangles of a square grid of side 10 m, read by the
whole-file path of the OBJ reader. Source: none needed (common practice, no source).
"""

from __future__ import annotations

import re
from pathlib import Path

import pytest

from render.bench.__main__ import main
from render.bench.startup import obj_grid_text
from render.geometry import objfile
from render.geometry.shapes import surface_area_m2

MINIMAL = Path(__file__).resolve().parent.parent / "scenes" / "tests" / "minimal_street.toml"
FIGURES = re.compile(r"^(check|lamps|materials|obj) +([0-9.]+) / ([0-9.]+) / ([0-9.]+) s$")


def test_quick_bench_prints_the_command_and_obj_rows(capsys):
    assert main(["startup", "--quick", "--scene", str(MINIMAL)]) == 0
    out = capsys.readouterr().out.splitlines()
    rows = {m.group(1): m for line in out if (m := FIGURES.match(line))}
    assert list(rows) == ["check", "lamps", "materials", "obj"]
    for m in rows.values():
        lo, mid, hi = (float(m.group(k)) for k in (2, 3, 4))
        assert 0.0 < lo <= mid <= hi
    assert any(line.startswith("lampcast check/lamps/materials as new processes (minimal_street.toml)") for line in out)
    assert any("OBJ load + compile of 2,048 triangles" in line for line in out)


def test_generated_obj_grid(tmp_path):
    path = tmp_path / "grid.obj"
    path.write_text(obj_grid_text(200), encoding="ascii")
    assert objfile._read_fast(path.read_text(), 1.0, 10**6, 10**6, 100, 1e4, None, "body") is not None
    parts = objfile.load_obj(path)
    assert [p.slot for p in parts] == ["ground", "kerb"]
    assert sum(p.n_triangles for p in parts) == 2 * 10**2  # n = ceil(sqrt(200 / 2)) = 10
    # The waved surface z = 0.2 sin x cos y is a little larger than its 10 m × 10 m plan.
    assert surface_area_m2(parts) == pytest.approx(100.0, rel=0.02) and surface_area_m2(parts) > 100.0


def test_cold_rows_side_by_side(capsys):
    """The cold demo's rows and kernel table, printed from given figures (the runs themselves
    take minutes; common practice, no source)."""
    from render.bench.startup import ColdDemo, _print_cold
    from render.bench.timing import Spread

    before = ColdDemo(Spread((100.0, 110.0)), Spread((90.0, 95.0)), Spread((20.0, 22.0)), {"render.a.k": (5.0, 0.0)})
    after = ColdDemo(Spread((40.0, 44.0)), Spread((70.0, 75.0)), Spread((20.0, 21.0)), {"render.a.k": (0.0, 4.0)})
    _print_cold({"before": before, "after": after}, 2)
    out = capsys.readouterr().out
    assert "demo cold, wall s         100.0 / 105.0 / 110.0  40.0 / 42.0 / 44.0" in out
    assert "demo cold - warm, wall s  80.0 / 84.0 / 88.0" in out
    assert any(line.split() == ["a.k", "5.00", "0.00", "0.00", "4.00"] for line in out.splitlines())


def test_cold_compile_totals_and_repeated_functions(capsys):
    """The compile totals per process and the lampcast functions compiled more than once
    (a second specialisation, or one compiled by both processes), printed from given
    figures; numba's own overloads are left out (common practice, no source)."""
    from render.bench.startup import ColdDemo, _print_cold
    from render.bench.timing import Spread

    one = Spread((1.0,))
    kernels = {"render.a.k": (5.0, 0.0), "render.a.light": (0.0, 20.0)}
    compiled = {"render.a.k": (2, 0), "render.a.light": (0, 1), "render.a.callee": (1, 1), "numba.x.impl": (3, 3)}
    _print_cold({"after": ColdDemo(one, one, one, kernels, compiled)}, 1)
    out = capsys.readouterr().out
    assert "after: compilation 25.0 processor s, 5.0 in the command and 20.0 in the helper" in out
    repeated = {line.split()[0]: line.split()[1:] for line in out.split("compiled more than once")[1].splitlines()[1:]}
    assert repeated == {"function": ["after", "command", "after", "helper"], "a.callee": ["1", "1"], "a.k": ["2", "0"]}
