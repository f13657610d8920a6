"""The report benchmark (render.bench.report) runs and prints its rows.

A smoke test of the script only (project rule: speed is never a timed test, so no time is
checked): ``--folder`` on the synthetic report of tests/test_report.py with lampcast-written
images, one round. The byte counts are checked against the files and the page themselves.
Source: none needed (common practice, no source).
"""

from __future__ import annotations

import json
import re

from test_report import write_report_of
from test_report_compact import lampcast_inputs

from render.bench.__main__ import main

TIMES = re.compile(r"^(report \(compact\)|report \(as written\)) +([0-9.]+) / ([0-9.]+) / ([0-9.]+) s$")
KIND = re.compile(
    r"^(rendered: lossy WebP q\d+|rendered: lossless WebP|animation: lossy WebP q\d+|chart: [a-z ]+) +(\d+) "
)


def test_bench_prints_bytes_kinds_differences_and_times(tmp_path, capsys):
    out = tmp_path / "cmp"
    metrics = lampcast_inputs(out, view_names=("kerbside",), width=160, height=100)
    (out / "metrics.json").write_text(json.dumps(metrics), encoding="utf-8")
    write_report_of(out, metrics)
    assert main(["report", "--folder", str(out), "--rounds", "1"]) == 0
    lines = capsys.readouterr().out.splitlines()
    assert lines[0].startswith("comparison scenes/demo/linden_row.toml: 1 view(s), 2 setup(s)")
    compact = next(int(line.split()[-2].replace(",", "")) for line in lines if line.startswith("report.html, compact"))
    assert compact == (out / "report.html").stat().st_size  # the bench measures the page lampcast writes
    as_written = next(int(line.split()[-2].replace(",", "")) for line in lines if line.startswith("report.html, as"))
    assert compact < as_written
    kinds = {m.group(1): int(m.group(2)) for line in lines if (m := KIND.match(line))}
    # Per view: 2 shared, 2 adapted, 1 side by side (lossy), 2 luminance maps (lossless), 1 wipe;
    # the legend and the extra section's image (the side-by-side file, embedded once).
    assert kinds["rendered: lossy WebP q90"] == 5 and kinds["rendered: lossless WebP"] == 2
    assert kinds["animation: lossy WebP q80"] == 1 and sum(kinds.values()) == 9
    lossless = next(line for line in lines if line.startswith("rendered: lossless WebP"))
    assert lossless.split()[-5:] == ["0", "0.000", "0.000", "0.000", "0.000"]  # same pixels
    times = [m.group(1) for line in lines if (m := TIMES.match(line))]
    assert times == ["report (compact)", "report (as written)"]
