"""Backends and chunking give bit-identical block models."""

import filecmp

import pytest

from blockmodel import stages
from blockmodel.config.project import load_project

from .conftest import DEMO


@pytest.fixture(scope="module")
def demo_inputs():
    project = load_project(DEMO / "project.toml")
    comps = stages.load_and_composite(project)
    domains = stages.build_domain_model(project, comps.table)
    decl = stages.decluster(project, comps.table, domains)
    models = {k: v.model for k, v in stages.variography(project, comps.table, decl.weights).items()}
    return project, comps.table, models, domains.grid, domains.proportions


def _write(inputs, path, **kw):
    project, table, models, grid, props = inputs
    blocks = stages.estimate_block_model(project, table, models, grid, props, **kw)
    blocks.to_parquet(path, index=False)
    return blocks


def test_backends_and_chunks_identical(demo_inputs, tmp_path):
    from distributed import LocalCluster

    ref = _write(demo_inputs, tmp_path / "serial.parquet", backend="serial", chunk_size=100_000)
    assert len(ref) > 10_000
    _write(demo_inputs, tmp_path / "chunks.parquet", backend="serial", chunk_size=1_000)
    _write(
        demo_inputs,
        tmp_path / "processes.parquet",
        backend="processes",
        workers=2,
        chunk_size=3_000,
    )
    with LocalCluster(
        n_workers=2, threads_per_worker=1, host="127.0.0.1", dashboard_address=None, processes=True
    ) as cluster:
        _write(
            demo_inputs,
            tmp_path / "dask.parquet",
            backend="dask",
            cluster=cluster.scheduler_address,
            chunk_size=2_500,
        )
    for name in ("chunks", "processes", "dask"):
        assert filecmp.cmp(
            tmp_path / "serial.parquet", tmp_path / f"{name}.parquet", shallow=False
        ), name


def test_kernel_threads_give_identical_results(rng):
    """Oracle: the compiled kernels split over 1 or 3 threads (forced small parts) give
    bit-identical estimates, neighbourhoods and summaries, with per-hole and octant
    limits."""
    import numpy as np

    from blockmodel.estimation import _threads
    from blockmodel.estimation.kriging import estimate
    from blockmodel.estimation.orientation import Orientation
    from blockmodel.estimation.search import SearchEllipsoid
    from blockmodel.variography.models import Structure, VariogramModel

    pts = rng.uniform(0, 200, (600, 3))
    vals = rng.lognormal(0.0, 0.8, 600)
    holes = np.repeat(np.arange(60), 10)
    targets = rng.uniform(20, 180, (900, 3))
    o = Orientation(30.0, 0.0, 0.0)
    model = VariogramModel(0.2, [Structure("spherical", 0.8, (80.0, 50.0, 30.0), o)])
    search = SearchEllipsoid(
        (90.0, 60.0, 40.0), o, min_samples=3, max_samples=16, max_per_hole=3, max_per_octant=3
    )
    before = _threads.threads()
    results = []
    try:
        for n in (1, 3):
            _threads.set_threads(n)
            results.append(
                estimate(
                    pts,
                    vals,
                    targets,
                    model,
                    search,
                    block_size=(10.0, 10.0, 5.0),
                    discretisation=(3, 3, 2),
                    hole_ids=holes,
                )
            )
    finally:
        _threads.set_threads(before)
    assert set(results[0]) == set(results[1])
    assert np.isfinite(results[0]["estimate"]).sum() > 800
    for key in results[0]:
        np.testing.assert_array_equal(results[0][key], results[1][key], err_msg=key)


def test_a_cluster_task_limits_only_its_own_thread():
    """A cluster task runs its kernels on one thread without changing the setting of the
    process it shares (an in-process cluster shares the caller's)."""
    from concurrent.futures import ThreadPoolExecutor

    from blockmodel.estimation import _threads

    before = _threads.threads()
    try:
        _threads.set_threads(3)
        with _threads.one_thread():
            assert _threads.threads() == 1
            with ThreadPoolExecutor(1) as other:
                assert other.submit(_threads.threads).result() == 3
        assert _threads.threads() == 3
    finally:
        _threads.set_threads(before)


def test_one_cluster_session_runs_the_same_job_twice(rng):
    """Within one connection to a cluster (as a run keeps for all its domains and grades)
    the same job can be sent twice; both runs equal the serial one bit for bit (each
    scatter of the job gets a fresh key, so releasing the first cannot drop the second)."""
    import numpy as np
    from distributed import LocalCluster

    from blockmodel.estimation.engine import EstimationJob, cluster_session, run_job
    from blockmodel.estimation.search import SearchEllipsoid
    from blockmodel.variography.models import Structure, VariogramModel

    pts = rng.uniform(0, 100, (300, 3))
    model = VariogramModel(0.2, [Structure("spherical", 0.8, (50.0, 50.0, 50.0))])
    job = EstimationJob(
        pts, rng.lognormal(0.0, 0.5, 300), None, model, (SearchEllipsoid((60.0, 60.0, 60.0)),)
    )
    targets = rng.uniform(10, 90, (2000, 3))
    serial = run_job(job, targets, backend="serial")
    with LocalCluster(
        n_workers=2, threads_per_worker=1, host="127.0.0.1", dashboard_address=None, processes=True
    ) as cluster:
        with cluster_session(cluster.scheduler_address):
            for _ in range(2):
                out = run_job(
                    job, targets, backend="dask", cluster=cluster.scheduler_address, chunk_size=250
                )
                for key, values in serial.items():
                    np.testing.assert_array_equal(out[key], values)
