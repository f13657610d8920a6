"""Report benchmark (``python -m render.bench report``): the report's size, its images, and the figures' cost.

The consultation report embeds every image (:mod:`render.output.report.images` chooses a compact
encoding per kind of picture; the files beside it stay as written). This benchmark runs the
comparison of a scene's ``[compare]`` setups (by default the bundled demo, every view; ``--width``
and ``--spp`` make a quicker, smaller run) or takes an existing comparison's folder
(``--folder``: nothing is rendered), then prints:

* **bytes** -- ``report.html`` as made (compact) and with every file embedded byte for byte;
* **by kind** -- per way of embedding (``rendered: lossy WebP q90``, ``chart: palette PNG``,
  ``as written`` ...): how many images, their files' bytes and the embedded bytes;
* **differences** -- per kind, between each file and what the page embeds, decoded: the largest
  and the mean absolute difference of 8-bit sRGB values, and CIEDE2000 (colour-science's
  ``delta_E(method="CIE 2000")`` on CIELAB of the sRGB values, D65; independent of the
  quantiser's own check) as the mean over the images of their mean and the worst image's mean
  and 95th percentile; animations frame by frame;
* **times** -- making the report (compact, and as written), drawing the calculation pictures
  (:func:`render.output.calc_pictures.write_calc_pictures`, three figures) and the colour
  analysis pictures (:func:`render.output.colour_files.write_colour_pictures`, four figures,
  from the scene's colour view rendered at the run's size), each as min / median / max over
  ``--rounds`` rounds in which they alternate (:func:`render.bench.timing.interleaved`). The
  figures' inputs are computed once beforehand; only drawing and writing is timed.

With ``--folder`` the figure rows are left out (their inputs need a render).

References
----------
CIE 142-2001 / ISO/CIE 11664-6 (CIEDE2000), through colour-science; IEC 61966-2-1 (sRGB).
"""

from __future__ import annotations

import argparse
import io
import json
import tempfile
from collections.abc import Sequence
from dataclasses import dataclass
from pathlib import Path

import numpy as np

from render.bench.timing import Spread, interleaved
from render.resources import demo_scene_path

__all__ = ["KindRow", "ReportBench", "add_parser", "cmd_report", "decoded_frames", "run_bench"]

DEMO = demo_scene_path()


@dataclass(frozen=True)
class KindRow:
    """One way of embedding: images, files' and embedded bytes, and their differences
    (``None`` where nothing was re-encoded)."""

    how: str
    count: int
    file_bytes: int
    embedded_bytes: int
    max_abs: int | None = None
    mean_abs: float | None = None
    de00_mean: float | None = None
    de00_worst_mean: float | None = None
    de00_worst_p95: float | None = None


@dataclass(frozen=True)
class ReportBench:
    """What one benchmark run measured."""

    folder: str
    description: str
    report_bytes: int
    as_written_bytes: int
    kinds: tuple[KindRow, ...]
    times: dict[str, Spread]


def decoded_frames(data: bytes) -> list[np.ndarray]:
    """Every frame of an image file as (H, W, 3) uint8 sRGB (one for a still image)."""
    from PIL import Image, ImageSequence

    with Image.open(io.BytesIO(data)) as im:
        return [np.asarray(f.convert("RGB"), dtype=np.uint8) for f in ImageSequence.Iterator(im)]


def _lab(rgb8: np.ndarray) -> np.ndarray:
    import colour

    return colour.XYZ_to_Lab(colour.sRGB_to_XYZ(rgb8.astype(np.float64) / 255.0))


def _differences(file_data: bytes, embedded: bytes) -> tuple[int, float, float, float]:
    """(max |d|, mean |d|, CIEDE2000 mean, CIEDE2000 95th percentile) over every frame."""
    import colour

    a, b = np.stack(decoded_frames(file_data)), np.stack(decoded_frames(embedded))
    if a.shape != b.shape:
        raise ValueError(f"the embedded image is {b.shape}, the file {a.shape}")
    d = np.abs(a.astype(np.int16) - b.astype(np.int16))
    if not d.any():
        return 0, 0.0, 0.0, 0.0
    de = np.asarray(colour.delta_E(_lab(a), _lab(b), method="CIE 2000"))
    return int(d.max()), float(d.mean()), float(de.mean()), float(np.percentile(de, 95))


def _kind_rows(folder: Path, differences: bool) -> tuple[int, list[KindRow]]:
    """(bytes of the compact report, rows by kind) of the comparison in ``folder``."""
    from render.output.metrics import ComparisonMetrics
    from render.output.report.document import render_report
    from render.output.report.images import ImageFolder, compact_image

    metrics = ComparisonMetrics.from_json(json.loads((folder / "metrics.json").read_text(encoding="utf-8")))
    images = ImageFolder(folder)
    size = len(render_report(metrics, folder, images).encode("utf-8"))
    by: dict[str, list] = {}
    for e in images.embedded:
        by.setdefault(e.how, []).append(e)
    rows = []
    for how, items in sorted(by.items()):
        base = dict(
            how=how,
            count=len(items),
            file_bytes=sum(e.file_bytes for e in items),
            embedded_bytes=sum(e.embedded_bytes for e in items),
        )
        if differences and "as written" not in how:
            stats = []
            for e in items:
                data = (folder / e.relpath).read_bytes()
                stats.append(_differences(data, compact_image(data).data))
            s = np.array(stats)
            worst = int(np.argmax(s[:, 2]))
            base.update(
                max_abs=int(s[:, 0].max()),
                mean_abs=float(s[:, 1].mean()),
                de00_mean=float(s[:, 2].mean()),
                de00_worst_mean=float(s[worst, 2]),
                de00_worst_p95=float(s[:, 3].max()),
            )
        rows.append(KindRow(**base))
    return size, rows


def _figure_jobs(study, setups: Sequence[str], width_px: int | None, spp: int | None, out: Path):
    """Drawing jobs of the calculation and colour pictures, their inputs computed here."""
    from render.analysis.view_colours import analyse_colours
    from render.calc.plan import compute_plan
    from render.calc.run import calc_study, run_calculation
    from render.output.calc_pictures import write_calc_pictures
    from render.output.colour_files import write_colour_pictures
    from render.output.comparison import calculation_absent_reason, parse_setup

    parsed = [parse_setup(s, study.scene, "setup") for s in setups]
    word = "after" if len(parsed) == 2 else "option"
    labels = {s.name: f"{'before' if i == 0 else word}: {s.name}" for i, s in enumerate(parsed)}
    jobs = {}
    if calculation_absent_reason(study.scene) is None:
        report = run_calculation(study, parsed)
        used = calc_study(study, report.options.include_objects)
        plans = {s.name: compute_plan(used, s) for s in parsed}
        jobs["calc pictures"] = lambda: write_calc_pictures(report, plans, out / "calc", labels=labels)
    if any(o.inspect for o in study.mesh.objects):
        view = study.scene.colour_view or study.scene.views[0].name
        first = study.render_view(view, parsed[0], samples_per_pixel=spp, width_px=width_px)
        rendered = [first, *(study.relight(first, s) for s in parsed[1:])]
        shared, _ = study.display_both(rendered)
        result = analyse_colours(study, {view: (rendered, shared)}, study.observer, list(labels.values()), view)
        lamps = study.setup_lamps(rendered, list(parsed))
        jobs["colour pictures"] = lambda: write_colour_pictures(result, rendered, shared, lamps, out / "colours")
    return jobs


def run_bench(
    scene: str | Path = DEMO,
    *,
    folder: str | Path | None = None,
    out: str | Path | None = None,
    views: Sequence[str] | None = None,
    width_px: int | None = None,
    samples_per_pixel: int | None = None,
    rounds: int = 3,
    differences: bool = True,
) -> ReportBench:
    """Measure the report of a comparison (see the module text)."""
    from render.output.metrics import ComparisonMetrics
    from render.output.report.document import render_report
    from render.output.report.images import ImageFolder

    scratch = tempfile.TemporaryDirectory(prefix="lampcast-bench-report-")
    try:
        jobs = {}
        if folder is None:
            from render.output.comparison import run_comparison
            from render.study import Study

            study = Study(scene)
            sc = study.scene
            if not sc.compare_before or not sc.compare_options:
                raise SystemExit(f"{Path(scene).name} has no [compare] before and options")
            setups = [sc.compare_before, *sc.compare_options]
            where = Path(out) if out is not None else Path(scratch.name) / "comparison"
            run_comparison(
                study,
                setups[0],
                setups[1:],
                views,
                where,
                width_px=width_px,
                samples_per_pixel=samples_per_pixel,
                progress=False,
            )
            jobs = _figure_jobs(study, setups, width_px, samples_per_pixel, Path(scratch.name) / "figures")
        else:
            where = Path(folder)
        metrics = ComparisonMetrics.from_json(json.loads((where / "metrics.json").read_text(encoding="utf-8")))
        s = metrics.settings
        description = (
            f"{metrics.scene.file}: {len(metrics.views)} view(s), {len(metrics.setups)} setup(s) "
            f"({', '.join(metrics.setups)}), {s.width_px}x{s.height_px} px, {s.samples_per_pixel} samples/px"
        )
        report_bytes, kinds = _kind_rows(where, differences)
        as_written = len(render_report(metrics, where, ImageFolder(where, compact=False)).encode("utf-8"))
        timed = {
            "report (compact)": lambda: render_report(metrics, where, ImageFolder(where)),
            "report (as written)": lambda: render_report(metrics, where, ImageFolder(where, compact=False)),
            **jobs,
        }
        for job in jobs.values():
            job()  # warm-up: imports, fonts, caches
        times, _ = interleaved(timed, rounds)
        return ReportBench(str(where), description, report_bytes, as_written, tuple(kinds), times)
    finally:
        scratch.cleanup()


def _fmt(value: float | None, spec: str) -> str:
    return "-" if value is None else format(value, spec)


def cmd_report(args: argparse.Namespace) -> int:
    bench = run_bench(
        args.scene,
        folder=args.folder,
        out=args.out,
        views=args.views,
        width_px=args.width,
        samples_per_pixel=args.spp,
        rounds=args.rounds,
        differences=not args.no_differences,
    )
    print(f"comparison {bench.description}")
    print(f"report.html, compact     {bench.report_bytes:>12,d} bytes")
    print(f"report.html, as written  {bench.as_written_bytes:>12,d} bytes")
    print(f"compact / as written     {bench.report_bytes / bench.as_written_bytes:>12.3f}")
    print()
    head = (
        f"{'embedded as':<34} {'images':>6} {'file bytes':>12} {'embedded':>12} {'ratio':>6}"
        f" {'max|d|':>6} {'mean|d|':>7} {'dE00 mean':>9} {'worst mean':>10} {'worst p95':>9}"
    )
    print(head)
    for k in bench.kinds:
        print(
            f"{k.how:<34} {k.count:>6d} {k.file_bytes:>12,d} {k.embedded_bytes:>12,d} "
            f"{k.embedded_bytes / k.file_bytes:>6.3f} {_fmt(k.max_abs, 'd'):>6} {_fmt(k.mean_abs, '.3f'):>7} "
            f"{_fmt(k.de00_mean, '.3f'):>9} {_fmt(k.de00_worst_mean, '.3f'):>10} {_fmt(k.de00_worst_p95, '.3f'):>9}"
        )
    print("(|d|: 8-bit sRGB difference, embedded vs file; dE00: CIEDE2000 by colour-science, per image:")
    print(" mean over the images of their mean, the worst image's mean, the largest 95th percentile)")
    print()
    n = len(next(iter(bench.times.values())).values)
    print(f"seconds, min / median / max over {n} round(s), alternating within a round")
    width = max(len(k) for k in bench.times)
    for label, spread in bench.times.items():
        print(f"{label:<{width}}  {spread.text(1, '.3f')} s")
    return 0


def add_parser(sub) -> None:
    p = sub.add_parser("report", help="report.html size, bytes per embedded image kind, figure drawing time")
    p.add_argument("--scene", default=str(DEMO), help="scene with a [compare] table (default: the demo)")
    p.add_argument("--folder", default=None, help="an existing comparison's output folder (nothing is rendered)")
    p.add_argument("--out", default=None, help="where the comparison is written (default: a temporary folder)")
    p.add_argument("--view", dest="views", action="append", default=None, help="view to compare (default all)")
    p.add_argument("--width", type=int, default=None, help="image width in pixels (default: the scene's)")
    p.add_argument("--spp", type=int, default=None, help="samples per pixel (default: the scene's)")
    p.add_argument("--rounds", type=int, default=3, help="timed rounds (default 3)")
    p.add_argument("--no-differences", action="store_true", help="skip decoding and comparing the images")
    p.set_defaults(func=cmd_report)
