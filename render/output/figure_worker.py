"""Figures drawn in a second process while the comparison goes on.

Drawing a chart with matplotlib is single-threaded Python that holds the GIL (text layout,
constrained layout, the Agg renderer), so a thread cannot draw while the main thread works. A
:class:`FigureWorker` is one worker process, a fresh interpreter (the caller's numba threads
are running, and a forked copy would inherit their locks in whatever state they are; a fresh
interpreter also runs none of the caller's ``__main__``), that imports matplotlib and the
picture modules while the caller renders, and then runs picture-writing functions handed to it
(:meth:`FigureWorker.submit`) with their small inputs (the calculation's records and plans),
writing the files itself. It has the caller's ``sys.path``, working folder and environment.
The files are the same bytes whichever process writes them: the same functions, the same
matplotlib and the same default settings (lampcast never changes matplotlib's rcParams).

The two processes talk through the worker's standard input and output, one pickle per
message: a function with its arguments, in order, and the result or the error back. The
worker's own printing goes to standard error. Where no process can be started, or the worker
dies, or a function or its arguments cannot be sent, the function runs in the calling process
instead, when its result is asked for; an error of the function itself is raised as it is.

References
----------
- Python documentation, :mod:`subprocess` (``Popen``), :mod:`pickle` (a pickle is
  self-delimiting, so several can follow each other on one stream).
"""

from __future__ import annotations

import os
import pickle
import queue
import signal
import subprocess
import sys
import threading
from collections.abc import Callable
from concurrent.futures import Future
from typing import Any, BinaryIO

__all__ = ["FigureWorker", "PendingFigures", "serve"]

#: Modules the worker imports as soon as it starts, before any picture is asked for.
PRELOAD = (
    "matplotlib.figure",
    "matplotlib.backends.backend_agg",
    "render.output.calc_pictures",
    "render.output.colour_pictures",
)

#: How the worker starts: it reads the caller's ``sys.path`` (the first message), then serves.
_BOOT = "import pickle, sys; sys.path[:] = pickle.load(sys.stdin.buffer); import render.output.figure_worker as w; w.serve()"


class _WorkerGone(Exception):
    """The worker could not run a function (not started, died, or the call could not be sent)."""


def _prepare() -> None:
    """The picture modules imported and a figure with text drawn once (matplotlib's font list
    and the font's glyphs loaded)."""
    import importlib

    for name in PRELOAD:
        importlib.import_module(name)
    from matplotlib.figure import Figure

    from render.output.images import figure_pixels

    fig = Figure(figsize=(1.0, 1.0), dpi=50, layout="constrained")
    ax = fig.add_subplot()
    ax.set_title("0.5 lx")
    ax.plot([0.0, 1.0], [0.0, 1.0])
    figure_pixels(fig)


def serve() -> None:
    """The worker's side: interrupts left to the caller, standard output kept for the replies
    (anything printed goes to standard error), the modules prepared, then each message
    ``(number, function, args, kwargs)`` run in order and answered ``(number, ok, value)``
    until ``None`` or the end of the input; then the process ends at once."""
    signal.signal(signal.SIGINT, signal.SIG_IGN)
    replies = os.fdopen(os.dup(sys.stdout.fileno()), "wb")
    os.dup2(sys.stderr.fileno(), sys.stdout.fileno())
    requests = sys.stdin.buffer
    try:
        _prepare()
    except Exception:  # noqa: BLE001 - a failed warm-up shows again in the call that needs it
        pass
    while True:
        try:
            message = pickle.load(requests)
        except EOFError:
            message = None
        if message is None:
            break
        number, fn, args, kwargs = message
        try:
            reply = (number, True, fn(*args, **kwargs))
        except BaseException as error:  # noqa: BLE001 - every error goes back to the caller
            reply = (number, False, error)
        try:
            data = pickle.dumps(reply, protocol=pickle.HIGHEST_PROTOCOL)
        except Exception as error:  # noqa: BLE001 - an unpicklable result or error
            data = pickle.dumps((number, False, _WorkerGone(f"reply could not be sent back: {error!r}")))
        try:
            replies.write(data)
            replies.flush()
        except OSError:  # the caller is gone
            break
    # Every file is written and every reply sent: the interpreter's teardown (matplotlib,
    # numba) is skipped, since the caller waits for this process to end.
    try:
        replies.close()
    except OSError:
        pass
    sys.stdout.flush()
    sys.stderr.flush()
    os._exit(0)


class PendingFigures:
    """The result of a function handed to a :class:`FigureWorker`: :meth:`result` waits for
    it, or runs the function in this process when the worker could not."""

    def __init__(self, future: Future | None, fn: Callable[..., Any], args: tuple, kwargs: dict[str, Any]) -> None:
        self._future = future
        self._call = (fn, args, kwargs)

    def result(self) -> Any:
        if self._future is not None:
            try:
                return self._future.result()
            except _WorkerGone:
                pass
        fn, args, kwargs = self._call
        return fn(*args, **kwargs)


class FigureWorker:
    """One worker process for drawing pictures (module text); a context manager. With
    ``start=False`` (or where no process can be started) every function runs in the calling
    process when its result is asked for."""

    def __init__(self, start: bool = True) -> None:
        self._process: subprocess.Popen | None = None
        self._futures: dict[int, Future] = {}
        self._lock = threading.Lock()
        self._outbox: queue.Queue = queue.Queue()
        self._count = 0
        if not start:
            return
        try:
            self._process = subprocess.Popen(
                [sys.executable, "-c", _BOOT], stdin=subprocess.PIPE, stdout=subprocess.PIPE, cwd=os.getcwd()
            )
        except OSError:
            self._process = None
            return
        self._outbox.put(list(sys.path))
        threading.Thread(target=self._send, args=(self._process.stdin,), daemon=True, name="figure-send").start()
        threading.Thread(target=self._receive, args=(self._process.stdout,), daemon=True, name="figure-receive").start()

    def _send(self, pipe: BinaryIO) -> None:
        """Sender thread: each queued message pickled onto the worker's input (writing may wait
        for the worker to read; the caller does not)."""
        while True:
            item = self._outbox.get()
            try:
                if item is None:
                    pipe.close()
                    return
                data = pickle.dumps(item, protocol=pickle.HIGHEST_PROTOCOL)
                pipe.write(data)
                pipe.flush()
            except Exception as error:  # noqa: BLE001 - unpicklable, or the worker is gone
                if isinstance(item, tuple):
                    self._settle(item[0], False, _WorkerGone(repr(error)))
                if isinstance(error, OSError):
                    self._fail_all()
                    return

    def _receive(self, pipe: BinaryIO) -> None:
        """Receiver thread: each reply settles its future; at the end of the output every
        future still open is settled as not run."""
        try:
            while True:
                number, ok, value = pickle.load(pipe)
                self._settle(number, ok, value)
        except Exception:  # noqa: BLE001 - end of output or a broken reply: the worker is gone
            self._fail_all()
        finally:
            pipe.close()

    def _settle(self, number: int, ok: bool, value: Any) -> None:
        with self._lock:
            future = self._futures.pop(number, None)
        if future is None:
            return
        if ok:
            future.set_result(value)
        else:
            future.set_exception(value)

    def _fail_all(self) -> None:
        with self._lock:
            open_, self._futures = self._futures, {}
        for future in open_.values():
            future.set_exception(_WorkerGone("the figure worker stopped"))

    def submit(self, fn: Callable[..., Any], *args: Any, **kwargs: Any) -> PendingFigures:
        """``fn(*args, **kwargs)`` in the worker (``fn`` a module-level function, the
        arguments picklable); returns its :class:`PendingFigures`."""
        if self._process is None:
            return PendingFigures(None, fn, args, kwargs)
        future: Future = Future()
        with self._lock:
            self._count += 1
            number = self._count
            self._futures[number] = future
        if self._process.poll() is not None:
            self._fail_all()
        else:
            self._outbox.put((number, fn, args, kwargs))
        return PendingFigures(future, fn, args, kwargs)

    def close(self) -> None:
        """Stop the worker once the functions sent are done (their results stay readable)."""
        process, self._process = self._process, None
        if process is None:
            return
        self._outbox.put(None)
        try:
            process.wait(timeout=60)
        except subprocess.TimeoutExpired:
            process.kill()
            process.wait()

    def __enter__(self) -> FigureWorker:
        return self

    def __exit__(self, kind: Any, error: Any, trace: Any) -> None:
        self.close()
