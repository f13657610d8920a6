"""Study benchmark (``python -m render.bench study``): throughput on 1 and 2 Dask workers.

Runs the same design study (by default ``scenes/demo/linden_row_study.toml`` with its sweep
widened to ``--variants`` column spacings) on a local Dask cluster of 1 and of 2 worker
processes, alternating within each round, each run into a fresh output folder so nothing is
resumed. A warm-up run compiles the kernels first. Printed: combinations (scene variant ×
setup) per minute for each worker count as min / median / max over the rounds, the ratio
2 workers / 1 worker round by round, the largest peak resident memory of a worker, and the
seconds one variant takes on a worker (median). ``--quick`` is a smoke run (one round, two
variants); its figures say nothing about speed.

The rows of the table are ``1 worker``, ``2 workers``, ``2/1`` and ``worker peak``.
"""

from __future__ import annotations

import argparse
import shutil
import statistics
import tempfile
import time
from dataclasses import dataclass, replace
from pathlib import Path

from render.bench.timing import Spread, ratios
from render.resources import bundled_path

__all__ = ["StudyBench", "add_parser", "cmd_study", "run_bench"]


@dataclass(frozen=True)
class StudyBench:
    """Throughput (combinations per minute) per worker count and the workers' memory."""

    combinations: int
    per_minute: dict[int, Spread]
    worker_peak_mib: float
    variant_seconds_median: float


def _spec(variants: int):
    from render.studies import read_study

    spec = read_study(bundled_path("scenes") / "demo" / "linden_row_study.toml")
    spacings = tuple(20.0 + 1.5 * i for i in range(variants))  # 4 columns fit the 96 m street up to 29 m
    return replace(spec, sweep=(("luminaire_rows[0].spacing_m", spacings),))


def run_bench(variants: int = 6, rounds: int = 3) -> StudyBench:
    """The figures of the module text."""
    from render.studies import run_study

    spec = _spec(variants)
    per_minute: dict[int, list[float]] = {1: [], 2: []}
    peak = 0.0
    variant_s: list[float] = []
    combos = 0
    with tempfile.TemporaryDirectory(prefix="lampcast-bench-study-") as tmp:
        run_study(
            replace(spec, sweep=(("luminaire_rows[0].spacing_m", (20.0,)),)),
            Path(tmp) / "warm",
            workers=0,
            report=False,
        )
        for r in range(max(1, rounds)):
            for workers in (1, 2):
                out = Path(tmp) / f"r{r}-w{workers}"
                t0 = time.perf_counter()
                run = run_study(spec, out, workers=workers, report=False)
                seconds = time.perf_counter() - t0
                combos = len(run.table["key"])
                per_minute[workers].append(combos / seconds * 60.0)
                peak = max([peak, *(v.peak_rss_mib for v in run.computed)])
                variant_s.extend(v.seconds for v in run.computed)
                shutil.rmtree(out, ignore_errors=True)
    return StudyBench(
        combinations=combos,
        per_minute={k: Spread(tuple(v)) for k, v in per_minute.items()},
        worker_peak_mib=peak,
        variant_seconds_median=statistics.median(variant_s) if variant_s else float("nan"),
    )


def cmd_study(args: argparse.Namespace) -> int:
    variants, rounds = (2, 1) if args.quick else (args.variants, args.rounds)
    b = run_bench(variants, rounds)
    print(
        f"study: the demo street, {variants} column spacings x 3 setups = {b.combinations} combinations; "
        f"local Dask cluster, processes of one thread; {rounds} round(s), min / median / max"
    )
    print(f"{'1 worker':<12}{b.per_minute[1].text(fmt='.1f')} combinations/min")
    print(f"{'2 workers':<12}{b.per_minute[2].text(fmt='.1f')} combinations/min")
    print(f"{'2/1':<12}{ratios(b.per_minute[2], b.per_minute[1]).text(fmt='.2f')}")
    print(
        f"{'worker peak':<12}{b.worker_peak_mib:.0f} MiB resident; one variant takes {b.variant_seconds_median:.2f} s (median)"
    )
    return 0


def add_parser(sub) -> None:
    p = sub.add_parser("study", help="design-study throughput on 1 and 2 Dask workers")
    p.add_argument("--variants", type=int, default=6, help="scene variants (column spacings), default 6")
    p.add_argument("--rounds", type=int, default=3)
    p.add_argument("--quick", action="store_true", help="smoke run: one round, two variants")
    p.set_defaults(func=cmd_study)
