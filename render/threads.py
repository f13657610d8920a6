"""Serial numba kernels run side by side on a few threads.

A numba kernel compiled with ``parallel=True`` takes several times longer to compile than the
same loop compiled serially (the parfor passes and the gufunc wrapper), and the first run of
every command pays for that. The heavy kernels of lampcast are therefore serial
``nogil=True`` functions over *work items* (a few dozen rays or samples each) that take two
extra arguments, ``first`` and ``stride``: a call does items ``first, first + stride, ...``.
:func:`run_split` calls such a kernel once per thread with ``first = 0 … threads - 1`` and
``stride = threads``, on a small pool of Python threads; numba releases the GIL inside the
kernel, so the calls run at the same time.

Interleaving the items (item ``i`` on thread ``i % threads``) balances busy and idle parts of
an image as well as dynamic scheduling does at this grain, and every output element is still
computed by the same arithmetic whatever the number of threads, so results do not depend on
it.

The number of threads is numba's (:func:`numba.get_num_threads`: ``NUMBA_NUM_THREADS`` or
:func:`numba.set_num_threads` in the calling thread), so a caller that limits numba to one
thread runs every kernel in its own thread.

References
----------
- numba documentation, "Supported Python features: ... nogil" and "Setting the number of
  threads" (:func:`numba.get_num_threads`).
- Python documentation, :class:`concurrent.futures.ThreadPoolExecutor`.
"""

from __future__ import annotations

import threading
from collections.abc import Callable
from typing import TYPE_CHECKING, Any

if TYPE_CHECKING:
    from concurrent.futures import ThreadPoolExecutor

__all__ = ["kernel_threads", "run_split"]

_pool: ThreadPoolExecutor | None = None
_pool_lock = threading.Lock()


def kernel_threads() -> int:
    """Threads a split kernel runs on: numba's thread count in the calling thread."""
    import numba

    return max(1, int(numba.get_num_threads()))


def _executor() -> ThreadPoolExecutor:
    """The shared pool: numba's largest thread count less the calling thread (its threads are
    started when first needed)."""
    global _pool
    with _pool_lock:
        if _pool is None:
            from concurrent.futures import ThreadPoolExecutor

            import numba

            _pool = ThreadPoolExecutor(max(1, numba.config.NUMBA_NUM_THREADS - 1), thread_name_prefix="lampcast-kernel")
        return _pool


def run_split(kernel: Callable[..., Any], n_items: int, *args: Any) -> None:
    """Run ``kernel(*args, first, stride)`` over ``n_items`` work items on up to
    :func:`kernel_threads` threads (one call per thread, this thread doing the first share).
    Returns when every call has finished; an exception in any of them is raised here."""
    threads = min(kernel_threads(), max(1, int(n_items)))
    if threads == 1:
        kernel(*args, 0, 1)
        return
    pool = _executor()
    futures = [pool.submit(kernel, *args, first, threads) for first in range(1, threads)]
    try:
        kernel(*args, 0, threads)
    finally:
        for f in futures:
            f.result()
