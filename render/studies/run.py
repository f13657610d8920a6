"""Running a study on Dask: one task per scene variant, rows kept as they finish.

:func:`run_study` expands the study's variants (:mod:`render.studies.variants`), works out each
row's content key, skips the variants whose rows are all kept already in the output folder
(:mod:`render.studies.table`), and evaluates the rest (:func:`render.studies.evaluate.evaluate_variant`):

* ``workers=0``: one after the other in this process (the serial reference);
* otherwise on Dask: a ``LocalCluster`` of ``workers`` processes of one thread each (default:
  one per core), or the existing cluster whose scheduler address is given. One task per
  variant, so a scene's geometry is built and cast once and every setup of it is relit from the
  same buffers on the same worker.

Every finished row is written at once; the table, CSV and Parquet files and the summary report
are written at the end from the kept rows, sorted, so they do not depend on the worker count or
on the order tasks finish in.

References
----------
- Dask documentation, ``distributed.LocalCluster``, ``Client.submit`` and ``as_completed``.
"""

from __future__ import annotations

import os
from collections.abc import Sequence
from dataclasses import dataclass
from pathlib import Path

from render.studies.evaluate import ResultRow, VariantResult, VariantTask, evaluate_variant, scene_setups
from render.studies.spec import StudySpec
from render.studies.table import ResultTable, load_done_rows, result_table, write_csv, write_parquet, write_row
from render.studies.variants import expand_variants, row_key

__all__ = ["StudyRun", "plan_tasks", "run_study"]


@dataclass(frozen=True)
class StudyRun:
    """What a run of a study did and wrote."""

    spec: StudySpec
    out_dir: Path
    table: ResultTable
    setup_order: tuple[str, ...]
    computed: tuple[VariantResult, ...]  # the variants evaluated in this run
    skipped_variants: tuple[int, ...]  # kept from an earlier run
    csv: Path
    parquet: Path
    report: Path | None
    workers: int  # 0: serial in this process


def plan_tasks(spec: StudySpec, out_dir: Path, version: str) -> tuple[list[VariantTask], tuple[str, ...]]:
    """One task per variant (with its setups and row keys), and the study's setup order."""
    tasks = []
    order: list[str] = []
    compute = spec.compute.to_json()
    for v in expand_variants(spec):
        setups = scene_setups(v, spec.compute.setups)
        for s in setups:
            if s not in order:
                order.append(s)
        keys = tuple(row_key(v, s, compute, version) for s in setups)
        tasks.append(VariantTask(v, setups, spec.compute, keys, str(out_dir)))
    return tasks, tuple(order)


def _serial(tasks: Sequence[VariantTask], out_dir: Path, quiet: bool) -> list[VariantResult]:
    from render.progress import progress_bar

    results = []
    for task in progress_bar(tasks, "scene variants", quiet=quiet, unit="variant"):
        result = evaluate_variant(task)
        for row in result.rows:
            write_row(out_dir, row)
        results.append(result)
    return results


def _on_dask(
    tasks: Sequence[VariantTask], out_dir: Path, workers: int, scheduler: str | None, quiet: bool, dashboard: bool
) -> list[VariantResult]:
    from dask.distributed import Client, LocalCluster, as_completed
    from tqdm import tqdm

    from render.progress import shows_progress

    cluster = None
    if scheduler is None:
        cluster = LocalCluster(
            n_workers=workers,
            threads_per_worker=1,
            processes=True,
            dashboard_address=":8787" if dashboard else None,
        )
        client = Client(cluster)
    else:
        client = Client(scheduler)
    try:
        if dashboard and not quiet:
            print(f"Dask dashboard: {client.dashboard_link}")
        futures = [client.submit(evaluate_variant, t, pure=False, key=f"variant-{t.variant.index}") for t in tasks]
        results = []
        with tqdm(total=len(futures), desc="scene variants", unit="variant", disable=not shows_progress(quiet)) as bar:
            for future in as_completed(futures):
                result = future.result()
                for row in result.rows:
                    write_row(out_dir, row)
                results.append(result)
                bar.update(1)
        return results
    finally:
        client.close()
        if cluster is not None:
            cluster.close()


def run_study(
    spec: StudySpec,
    out_dir: str | os.PathLike,
    *,
    workers: int | None = None,
    scheduler: str | None = None,
    quiet: bool = True,
    dashboard: bool = False,
    report: bool = True,
) -> StudyRun:
    """Evaluate what is not done yet and write the table (module text). ``workers`` None: one
    Dask worker process per core; 0: serially in this process."""
    from render import __version__

    out = Path(out_dir)
    out.mkdir(parents=True, exist_ok=True)
    tasks, order = plan_tasks(spec, out, __version__)
    all_keys = [k for t in tasks for k in t.keys]
    done = load_done_rows(out, all_keys)
    todo = [t for t in tasks if not all(k in done for k in t.keys)]
    skipped = tuple(t.variant.index for t in tasks if all(k in done for k in t.keys))
    n_workers = (os.cpu_count() or 1) if workers is None else int(workers)
    if not todo:
        computed: list[VariantResult] = []
    elif n_workers == 0 and scheduler is None:
        computed = _serial(todo, out, quiet)
    else:
        computed = _on_dask(todo, out, max(1, n_workers), scheduler, quiet, dashboard)
    rows: list[ResultRow] = list(load_done_rows(out, all_keys).values())
    table = result_table(rows, order)
    csv_path = write_csv(table, out / "results.csv")
    parquet_path = write_parquet(table, out / "results.parquet")
    page = None
    if report:
        from render.output.study_report import write_study_report

        page = write_study_report(spec, table, out)
    return StudyRun(
        spec=spec,
        out_dir=out,
        table=table,
        setup_order=order,
        computed=tuple(sorted(computed, key=lambda r: r.variant)),
        skipped_variants=skipped,
        csv=csv_path,
        parquet=parquet_path,
        report=page,
        workers=0 if (n_workers == 0 and scheduler is None) else max(1, n_workers),
    )
