"""The calculation benchmark (render.bench.calc) runs and prints its table.

A smoke test of the script only (project rule: speed is never a timed test, so no figure is
checked): ``--quick`` on a small test scene, the table's rows and the round-by-round ratio line.
Source: none needed (common practice, no source).
"""

from __future__ import annotations

import re
from pathlib import Path

from render.bench.__main__ import main

MINIMAL = Path(__file__).resolve().parent.parent / "scenes" / "tests" / "minimal_street.toml"
FIGURES = re.compile(r"^(calc|render|calc/render) +([0-9.]+) / ([0-9.]+) / ([0-9.]+)( s)?$")


def test_quick_bench_prints_calc_render_and_ratio_rows(capsys):
    assert main(["calc", "--quick", "--scene", str(MINIMAL), "--rounds", "1"]) == 0
    out = capsys.readouterr().out.splitlines()
    rows = {m.group(1): m for line in out if (m := FIGURES.match(line))}
    assert list(rows) == ["calc", "render", "calc/render"]
    assert rows["calc"].group(5) == " s" and rows["render"].group(5) == " s"
    assert rows["calc/render"].group(5) is None
    for m in rows.values():
        lo, mid, hi = (float(m.group(k)) for k in (2, 3, 4))
        assert 0.0 < lo <= mid <= hi
    assert any(line.startswith("scene minimal_street.toml: calc of 1 setup(s)") and "class P4" in line for line in out)
    assert sum(line.startswith("calc/render per round: ") for line in out) == 1
