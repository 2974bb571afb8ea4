"""Estimation over chunks of blocks, serially, on local processes or on a Dask cluster.

Every backend calls the same chunk function on the same chunks, and each block's result
depends only on its own neighbourhood, so results are bit-identical whatever the backend,
worker count or chunk size.  Memory is bounded by the chunk size.
"""

from __future__ import annotations

import os
import sys
import threading
import time
import uuid
from collections.abc import Sequence
from contextlib import contextmanager, nullcontext
from dataclasses import dataclass, field

import numpy as np

from blockmodel.estimation.kriging import PreparedSamples, estimate_prepared, prepare
from blockmodel.estimation.search import SearchEllipsoid
from blockmodel.estimation.systems import DISCRETISATION
from blockmodel.variography.models import VariogramModel

__all__ = ["EstimationJob", "Progress", "cluster_session", "run_job"]


@dataclass(frozen=True)
class EstimationJob:
    """Everything a worker needs to estimate any chunk of targets (picklable).

    ``token`` names the job: a process prepares the job's samples (:func:`prepare`) once and
    reuses them for every chunk of the same token, whichever backend sends the chunks.
    """

    samples: np.ndarray
    values: np.ndarray
    hole_ids: np.ndarray | None
    model: VariogramModel | None
    passes: tuple[SearchEllipsoid, ...]
    method: str = "ordinary"
    mean: float | None = None
    block_size: tuple[float, float, float] | None = None
    discretisation: tuple[int, int, int] = DISCRETISATION
    power: float = 2.0
    token: str = field(
        default_factory=lambda: uuid.uuid4().hex, init=False, compare=False, repr=False
    )


# the samples of the last job this process saw, prepared (one job at a time: memory stays
# that of one sample set)
_PREPARED: dict = {"token": None, "samples": None}
_PREPARED_LOCK = threading.Lock()


def _prepared(job: EstimationJob) -> PreparedSamples:
    with _PREPARED_LOCK:
        if _PREPARED["token"] != job.token:
            _PREPARED["samples"] = prepare(
                job.samples,
                job.values,
                job.model,
                job.passes,
                method=job.method,
                mean=job.mean,
                block_size=job.block_size,
                discretisation=job.discretisation,
                hole_ids=job.hole_ids,
                power=job.power,
            )
            _PREPARED["token"] = job.token
        return _PREPARED["samples"]


def _chunk(
    job: EstimationJob, targets: np.ndarray, timings: dict | None = None
) -> dict[str, np.ndarray]:
    out = estimate_prepared(
        _prepared(job), targets, chunk_size=max(len(targets), 1), timings=timings
    )
    out.pop("merged_duplicates")
    return out


def _init_worker() -> None:
    # One kernel thread per process: the pool supplies the parallelism.
    from blockmodel.estimation._threads import set_threads

    set_threads(1)


_POOL: dict = {"workers": 0, "pool": None}
# the client of the cluster session open in this process, if any
_SESSION: dict = {"client": None, "address": ""}


def _process_pool(workers: int):
    """The local process pool of ``workers`` processes, started on first use and kept for
    the following jobs (domains and passes), so each worker starts and loads the compiled
    kernels once."""
    if _POOL["pool"] is None or _POOL["workers"] != workers:
        import atexit
        import multiprocessing as mp
        from concurrent.futures import ProcessPoolExecutor

        close_pool()
        atexit.register(close_pool)  # stopped while the interpreter is whole
        _POOL["pool"] = ProcessPoolExecutor(
            max_workers=workers, mp_context=mp.get_context("spawn"), initializer=_init_worker
        )
        _POOL["workers"] = workers
    return _POOL["pool"]


def close_pool() -> None:
    """Stop the local process pool, if one is running (queued chunks are dropped)."""
    import atexit

    atexit.unregister(close_pool)
    if _POOL["pool"] is not None:
        _POOL["pool"].shutdown(wait=True, cancel_futures=True)
        _POOL["pool"] = None


@contextmanager
def cluster_session(address: str):
    """Keep one connection to the ``dask.distributed`` scheduler at ``address`` for every
    job run inside (each job would otherwise connect anew, a few tenths of a second); does
    nothing for an empty address."""
    if not address:
        yield
        return
    from distributed import Client

    with Client(address) as client:
        _SESSION["client"], _SESSION["address"] = client, address
        try:
            yield
        finally:
            _SESSION["client"], _SESSION["address"] = None, ""


def _cluster_chunk(job: EstimationJob, targets: np.ndarray) -> dict[str, np.ndarray]:
    # One kernel thread per task: each of a cluster worker's threads runs a task.  Only
    # this task's thread is limited: an in-process cluster shares the caller's process.
    from blockmodel.estimation._threads import one_thread

    with one_thread():
        return _chunk(job, targets)


class Progress:
    """Blocks done and blocks per second on a terminal; silent when output is not one."""

    def __init__(self, total: int, label: str, stream=None):
        self.total = total
        self.label = label
        self.stream = stream or sys.stderr
        self.enabled = hasattr(self.stream, "isatty") and self.stream.isatty()
        self.done = 0
        self.start = time.perf_counter()

    def advance(self, n: int) -> None:
        """Count ``n`` more blocks done and redraw the bar."""
        self.done += n
        if self.enabled:
            rate = self.done / max(time.perf_counter() - self.start, 1e-9)
            width = 30
            filled = int(width * self.done / max(self.total, 1))
            self.stream.write(
                f"\r{self.label} [{'#' * filled}{'.' * (width - filled)}] "
                f"{self.done:,}/{self.total:,} blocks, {rate:,.0f}/s"
            )
            self.stream.flush()

    def close(self) -> None:
        """End the bar's line."""
        if self.enabled:
            self.stream.write("\n")
            self.stream.flush()


def run_job(
    job: EstimationJob,
    targets: np.ndarray,
    *,
    chunk_size: int = 20_000,
    backend: str = "serial",
    workers: int = 0,
    cluster: str = "",
    label: str = "estimating",
) -> dict[str, np.ndarray]:
    """Estimate all targets in chunks on the chosen backend.

    Parameters
    ----------
    job : EstimationJob
    targets : (m, 3) float64, metres
    chunk_size : int
        Targets per chunk.
    backend : {"serial", "processes", "dask"}
    workers : int
        Processes for the local pool; 0 = all cores.
    cluster : str
        Address of a running ``dask.distributed`` scheduler (backend "dask").
    label : str
        Progress bar label.

    Returns
    -------
    dict of str to (m,) arrays, the columns of :func:`blockmodel.estimation.kriging.estimate`.
    """
    targets = np.asarray(targets, dtype=np.float64)
    bounds = [(s, min(s + chunk_size, len(targets))) for s in range(0, len(targets), chunk_size)]
    progress = Progress(len(targets), label)
    parts: list[dict[str, np.ndarray]] = []
    if backend == "serial" or len(bounds) <= 1:
        for a, b in bounds:
            parts.append(_chunk(job, targets[a:b]))
            progress.advance(b - a)
    elif backend == "processes":
        pool = _process_pool(workers or os.cpu_count() or 1)
        futures = [pool.submit(_chunk, job, targets[a:b]) for a, b in bounds]
        try:
            for (a, b), future in zip(bounds, futures, strict=True):
                parts.append(future.result())
                progress.advance(b - a)
        except BaseException:
            close_pool()  # an interrupted or failed run leaves no worker busy
            raise
    elif backend == "dask":
        try:
            from distributed import Client
        except ImportError:  # pragma: no cover - depends on the optional extra
            raise RuntimeError(
                "the dask backend needs the 'cluster' extra: pip install 'blockmodel[cluster]'"
            ) from None
        session = _SESSION["client"] if _SESSION["address"] == cluster else None
        with nullcontext(session) if session is not None else Client(cluster) as client:
            job_future = client.scatter(job, broadcast=True, hash=False)
            futures = [
                client.submit(_cluster_chunk, job_future, targets[a:b], pure=False)
                for a, b in bounds
            ]
            try:
                for (a, b), fut in zip(bounds, futures, strict=True):
                    parts.append(fut.result())
                    progress.advance(b - a)
            except BaseException:
                client.cancel(futures)
                raise
    else:
        raise ValueError(f"backend must be serial, processes or dask; got {backend!r}")
    progress.close()
    if not parts:
        return _chunk(job, targets)
    return {key: np.concatenate([p[key] for p in parts]) for key in parts[0]}


def passes_from(specs: Sequence, default_orientation) -> tuple[SearchEllipsoid, ...]:
    """Search passes from project specs; a pass without orientation takes the model's."""
    from blockmodel.estimation.orientation import Orientation

    out = []
    for s in specs:
        o = Orientation(*s.orientation) if s.orientation is not None else default_orientation
        out.append(
            SearchEllipsoid(
                s.ranges,
                o,
                min_samples=s.min_samples,
                max_samples=s.max_samples,
                max_per_hole=s.max_per_hole,
                max_per_octant=s.max_per_octant,
                min_octants=s.min_octants,
            )
        )
    return tuple(out)
