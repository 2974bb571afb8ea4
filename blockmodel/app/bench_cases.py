"""The measurements of `blockmodel bench`, one function each; child processes where the
figure is a peak of memory or a cold start."""

from __future__ import annotations

import json
import os
import subprocess
import sys
import time

import numpy as np

from blockmodel.estimation.orientation import Orientation
from blockmodel.estimation.search import SearchEllipsoid
from blockmodel.estimation.systems import DISCRETISATION
from blockmodel.variography.models import Structure, VariogramModel

__all__ = [
    "backends_ratio",
    "block_kriging_rate",
    "child_peak",
    "gstools_variogram_ratio",
    "matmul_peak",
    "memory_million_blocks",
    "point_kriging_versus_pykrige",
    "scale_model",
    "search_limits_ratio",
    "synthetic_composites",
    "variogram_memory",
]

ORIENT = Orientation(20.0, 0.0, 55.0)
MODEL = VariogramModel(
    0.2,
    [
        Structure("spherical", 0.5, (80.0, 50.0, 15.0), ORIENT),
        Structure("spherical", 0.3, (200.0, 120.0, 40.0), ORIENT),
    ],
)
SEARCH = SearchEllipsoid((150.0, 100.0, 40.0), ORIENT, min_samples=4, max_samples=24)
BLOCK, DISC = (10.0, 10.0, 5.0), DISCRETISATION


def synthetic_composites(
    n: int,
    seed: int = 1,
    *,
    extent: tuple[float, float, float] = (1000.0, 1000.0, 400.0),
    per_hole: int = 100,
) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """``n`` 2 m composites along inclined holes of ``per_hole`` composites collared over the
    top of a volume of ``extent`` metres, at projected coordinates; returns points (n, 3),
    lognormal values (n,), hole ids (n,)."""
    rng = np.random.default_rng(seed)
    holes = -(-n // per_hole)
    top = extent[2]
    collars = rng.uniform([0, 0, top], [extent[0], extent[1], top], size=(holes, 3))
    d = np.array([np.sin(np.radians(290)) * 0.5, np.cos(np.radians(290)) * 0.5, -np.sqrt(0.75)])
    steps = (np.arange(per_hole) + 0.5) * 2.0
    pts = (collars[:, None, :] + steps[None, :, None] * d).reshape(-1, 3)[:n]
    pts += np.array([5e5, 7e6, 0.0])
    return pts, rng.lognormal(0, 0.8, size=n), np.repeat(np.arange(holes), per_hole)[:n]


def _targets(n: int, pts: np.ndarray) -> np.ndarray:
    lo = pts.min(axis=0) + [100, 100, 40]
    nx = ny = int(np.ceil((n / 40) ** 0.5))
    ii, jj, kk = np.meshgrid(np.arange(nx), np.arange(ny), np.arange(40), indexing="ij")
    t = lo + (np.column_stack([ii.ravel(), jj.ravel(), kk.ravel()]) + 0.5) * BLOCK
    return t[:n]


def matmul_peak(size: int = 2000, repeats: int = 5) -> float:
    """Best float64 matrix-multiply rate (GFLOP/s) over a few repeats."""
    rng = np.random.default_rng(0)
    a, b = rng.random((size, size)), rng.random((size, size))
    a @ b
    best = np.inf
    for _ in range(repeats):
        t = time.perf_counter()
        a @ b
        best = min(best, time.perf_counter() - t)
    return 2 * size**3 / best / 1e9


def block_kriging_rate(n_blocks: int, composites: int = 15_000) -> dict[str, float]:
    """Blocks per second of block kriging (``n_blocks`` blocks, synthetic composites), with the seconds spent searching and solving."""
    from blockmodel.estimation.kriging import estimate

    pts, vals, holes = synthetic_composites(composites)
    targets = _targets(n_blocks, pts)
    estimate(
        pts, vals, targets[:2000], MODEL, SEARCH, block_size=BLOCK, discretisation=DISC
    )  # compile
    timings: dict[str, float] = {}
    t = time.perf_counter()
    out = estimate(
        pts,
        vals,
        targets,
        MODEL,
        SEARCH,
        block_size=BLOCK,
        discretisation=DISC,
        hole_ids=holes,
        timings=timings,
    )
    seconds = time.perf_counter() - t
    done = int((out["search_pass"] > 0).sum())
    k = 24 + 1
    d = DISC[0] * DISC[1] * DISC[2]
    # useful work per block: right-hand side (k-1) x d covariances of 2 structures at about
    # 25 flops each, one LU solve (2 k^2); the shared LU (2/3 k^3) counted in full
    flops = done * ((k - 1) * d * 2 * 25 + 2 * k * k + 2 / 3 * k**3)
    return {
        "blocks": done,
        "seconds": seconds,
        "rate": done / seconds,
        "gflops": flops / seconds / 1e9,
        "search_s": timings.get("search", 0.0),
        "kriging_s": timings.get("kriging", 0.0),
    }


def point_kriging_versus_pykrige(
    n_samples: int = 500, n_targets: int = 400
) -> dict[str, float] | None:
    """Points per second of point kriging here and in pykrige's moving-neighbourhood loop on the same data, side by side; None without pykrige."""
    try:
        from pykrige.ok3d import OrdinaryKriging3D
    except ImportError:
        return None
    from blockmodel.estimation.kriging import estimate

    rng = np.random.default_rng(3)
    pts = rng.uniform(0, 300, size=(n_samples, 3))
    vals = rng.lognormal(size=n_samples)
    # distinct targets throughout: repeated ones would share their systems here
    big = rng.uniform(20, 280, size=(50 * n_targets, 3))  # ours is fast: more targets
    targets = big[:n_targets]
    model = VariogramModel(0.2, [Structure("spherical", 0.8, (120.0, 120.0, 120.0))])
    search = SearchEllipsoid((1e6, 1e6, 1e6), min_samples=1, max_samples=24)
    ok = OrdinaryKriging3D(
        *pts.T,
        vals,
        variogram_model="spherical",
        variogram_parameters={"sill": 1.0, "range": 120.0, "nugget": 0.2},
    )
    t = time.perf_counter()
    ref, _ = ok.execute("points", *targets.T, backend="loop", n_closest_points=24)
    t_ref = time.perf_counter() - t
    estimate(pts, vals, targets[:10], model, search)
    t = time.perf_counter()
    ours = estimate(pts, vals, big, model, search)
    t_ours = time.perf_counter() - t
    agree = float(
        np.max(np.abs(ours["estimate"][:n_targets] - np.asarray(ref)) / np.abs(np.asarray(ref)))
    )
    return {
        "pykrige_rate": n_targets / t_ref,
        "ours_rate": len(big) / t_ours,
        "ratio": (len(big) / t_ours) / (n_targets / t_ref),
        "max_relative_difference": agree,
    }


def child_peak(code: str) -> dict:
    """Run code in a fresh interpreter; return its JSON line plus its peak resident memory."""
    script = (
        "import json, sys\n"
        + code
        # the high-water mark of this process's own memory (VmHWM starts afresh at exec;
        # ru_maxrss would carry the parent's peak over)
        + "\nhwm = [l for l in open('/proc/self/status') if l.startswith('VmHWM')][0]"
        + "\nres['peak_mb'] = int(hwm.split()[1]) / 1024\nprint(json.dumps(res))\n"
    )
    out = subprocess.run([sys.executable, "-c", script], capture_output=True, text=True, check=True)
    return json.loads(out.stdout.strip().splitlines()[-1])


def memory_million_blocks(n_blocks: int) -> dict:
    """Peak memory (measured in a child process) and seconds to estimate ``n_blocks`` blocks."""
    return child_peak(
        "import time\nfrom blockmodel.app.bench_cases import MODEL, SEARCH, BLOCK, DISC, synthetic_composites, _targets\nfrom blockmodel.estimation.engine import EstimationJob, run_job\n"
        "pts, vals, holes = synthetic_composites(15000)\n"
        f"targets = _targets({n_blocks}, pts)\n"
        "job = EstimationJob(pts, vals, holes, MODEL, (SEARCH,), block_size=BLOCK, discretisation=DISC)\n"
        "t = time.perf_counter(); out = run_job(job, targets, chunk_size=50000, backend='serial')\n"
        "res = {'blocks': len(targets), 'seconds': time.perf_counter() - t}\n"
    )


def variogram_memory(n: int) -> dict:
    """Peak memory (child process) and seconds of one directional variogram of ``n`` composites."""
    return child_peak(
        "import time\nfrom blockmodel.app.bench_cases import synthetic_composites\n"
        "from blockmodel.variography.experimental import experimental_variogram\n"
        f"pts, vals, holes = synthetic_composites({n})\n"
        "t = time.perf_counter()\n"
        "ev = experimental_variogram(pts, vals, lag=10.0, n_lags=15, direction=(20.0, 0.0))\n"
        "res = {'composites': len(pts), 'pairs': int(ev.pairs.sum()), 'seconds': time.perf_counter() - t}\n"
    )


def scale_model(n_blocks: int, folder: str) -> dict:
    """Estimate an ``n_blocks`` model (400 x 250 columns) from 100,000 composites chunk by
    chunk, streaming rows to Parquet; time split into search, kriging and writing."""
    return child_peak(
        "import time, os\nimport numpy as np, pyarrow as pa, pyarrow.parquet as pq\n"
        "from blockmodel.app.bench_cases import MODEL, SEARCH, BLOCK, DISC, synthetic_composites\n"
        "from blockmodel.estimation.engine import EstimationJob, _chunk\nfrom blockmodel.estimation.search import SearchEllipsoid\n"
        "pts, vals, holes = synthetic_composites(100000, extent=(4000.0, 2500.0, 1000.0), per_hole=500)\n"
        "wide = SearchEllipsoid((400.0, 300.0, 150.0), SEARCH.orientation, min_samples=4, max_samples=24)\n"
        "job = EstimationJob(pts, vals, holes, MODEL, (wide,), block_size=BLOCK, discretisation=DISC)\n"
        f"n = {n_blocks}; path = os.path.join({folder!r}, 'scale.parquet')\n"
        "nx, ny = 400, 250\nlo = np.array([5e5, 7e6, 0.0])\n"
        "tim = {}; io = 0.0; writer = None; done = 0; t0 = time.perf_counter()\n"
        "for start in range(0, n, 100000):\n"
        "    flat = np.arange(start, min(n, start + 100000))\n"
        "    ijk = np.column_stack([flat % nx, (flat // nx) % ny, flat // (nx * ny)])\n"
        "    out = _chunk(job, lo + (ijk + 0.5) * BLOCK, tim)\n"
        "    done += int((out['search_pass'] > 0).sum())\n"
        "    c = time.perf_counter()\n"
        "    table = pa.table(out)\n"
        "    writer = writer or pq.ParquetWriter(path, table.schema)\n"
        "    writer.write_table(table); io += time.perf_counter() - c\n"
        "writer.close()\n"
        "res = {'blocks': n, 'estimated': done, 'seconds': time.perf_counter() - t0,\n"
        "       'search_s': tim.get('search', 0), 'kriging_s': tim.get('kriging', 0), 'io_s': io,\n"
        "       'file_mb': os.path.getsize(path) / 1e6}\n"
    )


def backends_ratio(n_blocks: int = 400_000) -> dict:
    """Seconds to estimate ``n_blocks`` blocks with one and with two single-thread workers,
    on the local process pool and on a ``dask.distributed`` LocalCluster (child process
    with one kernel thread per worker).  Each pool or cluster first runs 64 one-block
    tasks, so that every worker has started and loaded the compiled kernels, as after a
    run's first domain; the times are those of the following domains
    and passes, in chunks of the default 20,000 blocks, over one connection to the cluster
    as in a run; ``processes_start_<n>`` is that first job (start-up included)."""
    env = dict(os.environ, NUMBA_NUM_THREADS="1")
    code = (
        "import time\nfrom blockmodel.app.bench_cases import MODEL, SEARCH, BLOCK, DISC, "
        "synthetic_composites, _targets\n"
        "from blockmodel.estimation.engine import EstimationJob, cluster_session, run_job\n"
        "pts, vals, holes = synthetic_composites(15000)\n"
        f"targets = _targets({n_blocks}, pts)\n"
        "job = EstimationJob(pts, vals, holes, MODEL, (SEARCH,), block_size=BLOCK, "
        "discretisation=DISC)\n"
        "run_job(job, targets[:2000], backend='serial')\nres = {}\n"
        "for n in (1, 2):\n"
        "    t = time.perf_counter()\n"
        "    run_job(job, targets[:64], backend='processes', workers=n, chunk_size=1)\n"
        "    res[f'processes_start_{n}'] = time.perf_counter() - t\n"
        "    t = time.perf_counter()\n"
        "    run_job(job, targets, chunk_size=20000, backend='processes', workers=n)\n"
        "    res[f'processes_{n}'] = time.perf_counter() - t\n"
        "try:\n"
        "    from distributed import LocalCluster\n"
        "    for n in (1, 2):\n"
        "        with LocalCluster(n_workers=n, threads_per_worker=1, processes=True, "
        "dashboard_address=None) as cluster:\n"
        "            with cluster_session(cluster.scheduler_address):\n"
        "                run_job(job, targets[:64], chunk_size=1, backend='dask', "
        "cluster=cluster.scheduler_address)\n"
        "                t = time.perf_counter()\n"
        "                run_job(job, targets, chunk_size=20000, backend='dask', "
        "cluster=cluster.scheduler_address)\n"
        "                res[f'dask_{n}'] = time.perf_counter() - t\n"
        "except ImportError:\n"
        "    pass\n"
        "import json\nprint(json.dumps(res))\n"
    )
    out = subprocess.run(
        [sys.executable, "-c", code], capture_output=True, text=True, check=True, env=env
    )
    return json.loads(out.stdout.strip().splitlines()[-1])


def search_limits_ratio(n_blocks: int = 100_000) -> dict:
    """Seconds to estimate the same blocks with and without per-hole (3) and octant (4)
    limits, interleaved, best of two each."""
    from blockmodel.estimation.kriging import estimate

    pts, vals, holes = synthetic_composites(15_000)
    targets = _targets(n_blocks, pts)
    limited = SearchEllipsoid(
        SEARCH.ranges, ORIENT, min_samples=4, max_samples=24, max_per_hole=3, max_per_octant=4
    )
    best = {"plain": np.inf, "limited": np.inf}
    for _ in range(2):
        for name, search in (("plain", SEARCH), ("limited", limited)):
            t = time.perf_counter()
            estimate(
                pts,
                vals,
                targets,
                MODEL,
                search,
                block_size=BLOCK,
                discretisation=DISC,
                hole_ids=holes,
            )
            best[name] = min(best[name], time.perf_counter() - t)
    return best


def gstools_variogram_ratio(n: int = 20_000) -> dict | None:
    """Seconds of one directional variogram of ``n`` composites here and in gstools'
    ``vario_estimate`` (same bins and cone), side by side; None without gstools."""
    try:
        import gstools as gs
    except ImportError:
        return None
    from blockmodel.variography.experimental import direction_vector, experimental_variogram

    pts, vals, _ = synthetic_composites(n)
    experimental_variogram(pts[:100], vals[:100], lag=10.0, n_lags=15, direction=(20.0, 0.0))
    t = time.perf_counter()
    ours = experimental_variogram(pts, vals, lag=10.0, n_lags=15, direction=(20.0, 0.0))
    t_ours = time.perf_counter() - t
    t = time.perf_counter()
    *_, counts = gs.vario_estimate(
        pts.T,
        vals,
        np.arange(16) * 10.0,
        direction=[direction_vector(20.0, 0.0)],
        angles_tol=np.radians(22.5),
        return_counts=True,
    )
    t_ref = time.perf_counter() - t
    same = bool(np.array_equal(np.ravel(counts), ours.pairs))
    return {"ours_s": t_ours, "gstools_s": t_ref, "ratio": t_ref / t_ours, "same_pairs": same}
