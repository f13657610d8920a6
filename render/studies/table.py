"""The study's results: one JSON file per row as it is done, and the tidy table.

Each finished row is written at once to ``rows/KEY.json`` in the output folder (atomically),
so that a study stopped at any point resumes with the rows it has (:func:`load_done_rows`).
The table (:func:`result_table`) has one row per scene variant × setup, sorted by variant and
then by the study's setup order, and one column per figure, so the same study gives the same
table whatever the number of workers. Columns: ``key``, ``variant``, ``scene``, ``label``,
``setup``, one ``param:KEY.PATH`` column per swept key, the figures (units in their names) in
the order they first appear, and ``note``. It is written as CSV (empty cell for a missing
value) and as Parquet (Apache Arrow's writer).
"""

from __future__ import annotations

import csv
import io
import json
from collections.abc import Sequence
from pathlib import Path
from typing import Any

from render.fileio import atomic_path, atomic_write_text
from render.studies.evaluate import ResultRow

__all__ = [
    "ResultTable",
    "load_done_rows",
    "result_table",
    "row_file",
    "write_csv",
    "write_parquet",
    "write_row",
]

ResultTable = dict[str, list[Any]]


def row_file(out_dir: str | Path, key: str) -> Path:
    """Where the row with ``key`` is kept."""
    return Path(out_dir) / "rows" / f"{key}.json"


def write_row(out_dir: str | Path, row: ResultRow) -> Path:
    """Keep one finished row (atomically)."""
    path = row_file(out_dir, row.key)
    path.parent.mkdir(parents=True, exist_ok=True)
    return atomic_write_text(path, json.dumps(row.to_json(), sort_keys=True, allow_nan=False, default=str) + "\n")


def load_done_rows(out_dir: str | Path, keys: Sequence[str]) -> dict[str, ResultRow]:
    """The rows among ``keys`` already kept in ``out_dir`` (a damaged file counts as not done)."""
    done = {}
    for key in keys:
        path = row_file(out_dir, key)
        try:
            row = ResultRow.from_json(json.loads(path.read_text(encoding="utf-8")))
        except (OSError, ValueError, KeyError, TypeError):
            continue
        if row.key == key:
            done[key] = row
    return done


def result_table(rows: Sequence[ResultRow], setup_order: Sequence[str]) -> ResultTable:
    """The tidy table of ``rows`` (module text), as column name → values."""
    rank = {s: i for i, s in enumerate(setup_order)}
    ordered = sorted(rows, key=lambda r: (r.variant, rank.get(r.setup, len(rank)), r.setup))
    params: list[str] = []
    figures: list[str] = []
    for r in ordered:
        for k, _ in r.parameters:
            if k not in params:
                params.append(k)
        for k in r.figures:
            if k not in figures:
                figures.append(k)
    table: ResultTable = {c: [] for c in ("key", "variant", "scene", "label", "setup")}
    table.update({f"param:{k}": [] for k in params})
    table.update({k: [] for k in figures})
    table["note"] = []
    for r in ordered:
        table["key"].append(r.key)
        table["variant"].append(r.variant)
        table["scene"].append(r.scene)
        table["label"].append(r.label)
        table["setup"].append(r.setup)
        p = dict(r.parameters)
        for k in params:
            table[f"param:{k}"].append(p.get(k))
        for k in figures:
            table[k].append(r.figures.get(k))
        table["note"].append(r.note)
    return table


def _cell(value: Any) -> str:
    if value is None:
        return ""
    if isinstance(value, float):
        return repr(value)
    return str(value)


def write_csv(table: ResultTable, path: str | Path) -> Path:
    """The table as UTF-8 CSV (atomically)."""
    buf = io.StringIO()
    writer = csv.writer(buf, lineterminator="\n")
    columns = list(table)
    writer.writerow(columns)
    n = len(next(iter(table.values()))) if table else 0
    for i in range(n):
        writer.writerow([_cell(table[c][i]) for c in columns])
    return atomic_write_text(path, buf.getvalue())


def write_parquet(table: ResultTable, path: str | Path) -> Path:
    """The table as Parquet (atomically); a column of mixed kinds is stored as text."""
    import pyarrow as pa
    import pyarrow.parquet as pq

    arrays = {}
    for name, values in table.items():
        try:
            arrays[name] = pa.array(values)
        except (pa.ArrowInvalid, pa.ArrowTypeError):
            arrays[name] = pa.array([None if v is None else str(v) for v in values], type=pa.string())
    with atomic_path(path) as tmp:
        pq.write_table(pa.table(arrays), tmp)
    return Path(path)
