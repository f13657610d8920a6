"""The figure worker process: functions run in a second process, errors come back as they are,
what cannot be sent runs in the caller, and a picture is the same bytes from either process.

The checks are of the mechanism itself (common practice, no source): process ids from
:func:`os.getpid`, Python's own ``int("x")`` error, and the bytes of a matplotlib chart drawn
by the same function here and in the worker.
"""

from __future__ import annotations

import os

import numpy as np
import pytest

from render.output.figure_worker import FigureWorker


def _chart(path: str) -> bytes:
    """A small chart with text, written by the project's figure writer; its bytes."""
    from matplotlib.figure import Figure

    from render.output.images import write_figure_png

    fig = Figure(figsize=(2.0, 1.5), dpi=80, layout="constrained")
    ax = fig.add_subplot()
    ax.plot(np.linspace(0.0, 1.0, 11), np.linspace(0.0, 1.0, 11) ** 2)
    ax.set_title("E in lx")
    write_figure_png(fig, path)
    with open(path, "rb") as f:
        return f.read()


@pytest.fixture(scope="module")
def worker():
    with FigureWorker() as w:
        yield w


def test_runs_in_another_process(worker: FigureWorker) -> None:
    assert worker.submit(os.getpid).result() != os.getpid()


def test_error_of_the_function_comes_back_as_itself(worker: FigureWorker) -> None:
    with pytest.raises(ValueError, match="invalid literal"):
        worker.submit(int, "x").result()


def test_what_cannot_be_sent_runs_here(worker: FigureWorker) -> None:
    # A lambda cannot be pickled: it runs in this process when its result is asked for.
    assert worker.submit(lambda: os.getpid()).result() == os.getpid()
    assert worker.submit(os.getpid).result() != os.getpid()  # the worker is still there


def test_not_started_runs_here() -> None:
    with FigureWorker(start=False) as w:
        assert w.submit(os.getpid).result() == os.getpid()


def test_after_close_runs_here() -> None:
    w = FigureWorker()
    w.close()
    assert w.submit(os.getpid).result() == os.getpid()


def test_picture_same_bytes_from_either_process(worker: FigureWorker, tmp_path) -> None:
    here = _chart(str(tmp_path / "here.png"))
    there = worker.submit(_chart, str(tmp_path / "there.png")).result()
    assert here == there
