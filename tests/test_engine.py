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
