"""The vision benchmark (render.bench.vision) runs and prints its table.

A smoke test of the script only (project rule: speed is never a timed test, so no figure is
checked): ``--quick`` on a small test scene, the table's rows and the round-by-round ratio line.
Source: none needed (common practice, no source).
"""

from __future__ import annotations

import re
from pathlib import Path

from render.bench.__main__ import main

MINIMAL = Path(__file__).resolve().parent.parent / "scenes" / "tests" / "minimal_street.toml"
FIGURES = re.compile(r"^(.+?) +([0-9.]+) / ([0-9.]+) / ([0-9.]+)( s)?$")


def test_quick_bench_prints_a_row_per_view_and_path_the_totals_and_the_ratio(capsys):
    assert main(["vision", "--quick", "--scene", str(MINIMAL), "--rounds", "1"]) == 0
    out = capsys.readouterr().out.splitlines()
    rows = {m.group(1): m for line in out if (m := FIGURES.match(line))}
    assert list(rows) == ["shared 'look'", "per image 'look'", "shared", "per image", "per image/shared"]
    for label, m in rows.items():
        assert (m.group(5) is None) == (label == "per image/shared")
        lo, mid, hi = (float(m.group(k)) for k in (2, 3, 4))
        assert 0.0 < lo <= mid <= hi
    assert any(line.startswith("scene minimal_street.toml: 1 view(s) at 96x") for line in out)
    assert sum(line.startswith("per image/shared per round: ") for line in out) == 1
