"""The demo benchmark (render.bench.demo) runs and prints its table.

A smoke test of the script only (project rule: speed is never a timed test, so no figure is
checked): ``--quick`` runs the demo twice (a warm-up and one round) at 96 pixels, prints the
row of this tree and says whether the two runs wrote the same bytes, which they must (the same
scene and seed give the same bytes). Source: none needed (common practice, no source).
"""

from __future__ import annotations

import re

from render.bench.__main__ import main

FIGURES = re.compile(r"^(\S.*?) +([0-9.]+) / ([0-9.]+) / ([0-9.]+) +([0-9.]+) / ([0-9.]+) / ([0-9.]+)$")


def test_quick_demo_bench_prints_wall_and_processor_time_and_repeatability(capsys):
    assert main(["demo", "--quick"]) == 0
    out = capsys.readouterr().out.splitlines()
    rows = {m.group(1): m for line in out if (m := FIGURES.match(line))}
    assert list(rows) == ["this tree"]
    assert all(float(rows["this tree"].group(k)) > 0 for k in range(2, 8))
    assert "this tree: two runs wrote the same bytes in every file" in out


def test_outputs_compared_file_by_file_and_pixel_by_pixel(tmp_path):
    import numpy as np

    from render.bench.demo import compare_outputs
    from render.output.images import CHART, PICTURE_KEY, write_png

    img = np.arange(2 * 3 * 3, dtype=np.uint8).reshape(2, 3, 3)
    for folder, kind in (("a", CHART), ("b", "rendered")):
        (tmp_path / folder).mkdir()
        write_png(tmp_path / folder / "x.png", img, {PICTURE_KEY: kind})  # other bytes, same pixels
        write_png(tmp_path / folder / "y.png", img + (folder == "b"), {PICTURE_KEY: CHART})
        (tmp_path / folder / "m.json").write_text(f'{{"scene": "/trees/{folder}/demo.toml"}}')
    c = compare_outputs(tmp_path / "a", tmp_path / "b")
    assert set(c.differing) == {"x.png", "y.png", "m.json"} and c.same_pixels == ("x.png",)
    c = compare_outputs(tmp_path / "a", tmp_path / "b", ("/trees/a", "/trees/b"))
    assert "m.json" not in c.differing and not c.identical
