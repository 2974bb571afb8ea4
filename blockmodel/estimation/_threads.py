"""The compiled kernels' loops split over threads.

Each parallel kernel is compiled serially with ``nogil=True`` and takes the range
``first .. last`` of the items it handles (targets or groups of targets); this module cuts
the items into parts and runs them on a pool of threads kept for the life of the process.
Serial compiled code costs a fraction of a parallel loop's compile time, and each item's
arithmetic does not depend on the part it falls in, so results are bit-identical whatever
the number of threads.

The number of threads is ``NUMBA_NUM_THREADS`` (all cores unless set), lowered with
:func:`set_threads` (a worker process of the local pool uses one) or, for the calling
thread only, within :func:`one_thread` (a task on a cluster).
"""

from __future__ import annotations

import threading
from collections.abc import Callable, Iterator
from concurrent.futures import ThreadPoolExecutor
from contextlib import contextmanager

_PARTS_PER_THREAD = 8  # parts per thread: uneven items even out over the parts
_MIN_PART = 64  # items per part at the least: fewer are not worth a hand-over
_state: dict = {"threads": None, "pool": None}
_local = threading.local()  # a calling thread's own limit (one_thread)


def threads() -> int:
    """Threads the kernels use (in the calling thread)."""
    if getattr(_local, "single", False):
        return 1
    if _state["threads"] is None:
        import numba

        _state["threads"] = int(numba.config.NUMBA_NUM_THREADS)
    return _state["threads"]


def set_threads(n: int) -> None:
    """Use ``n`` (>= 1) threads from now on."""
    if n < 1:
        raise ValueError(f"threads must be 1 or more; got {n}")
    if _state["pool"] is not None and n != _state["threads"]:
        _state["pool"].shutdown(wait=True)
        _state["pool"] = None
    _state["threads"] = int(n)


@contextmanager
def one_thread() -> Iterator[None]:
    """Within the block, kernels called from this thread run in it alone (a task on a
    cluster worker, which may share its process with other tasks or with the caller);
    other threads and later calls keep their setting."""
    before = getattr(_local, "single", False)
    _local.single = True
    try:
        yield
    finally:
        _local.single = before


def run_split(kernel: Callable, n: int, *args) -> None:
    """Call ``kernel(first, last, *args)`` over parts covering ``0 .. n``, on the threads
    (in this thread when one is set or ``n`` is small); the kernel writes its results in
    place.  An error in any part is raised here."""
    t = threads()
    parts = min(t * _PARTS_PER_THREAD, n // _MIN_PART)
    if t == 1 or parts < 2:
        kernel(0, n, *args)
        return
    if _state["pool"] is None:
        _state["pool"] = ThreadPoolExecutor(t, thread_name_prefix="blockmodel-kernel")
    edges = [n * p // parts for p in range(parts + 1)]
    futures = [
        _state["pool"].submit(kernel, a, b, *args) for a, b in zip(edges, edges[1:], strict=False)
    ]
    for f in futures:
        f.result()
