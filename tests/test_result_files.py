"""Every stage result written by a run can be read back as it was computed, so later
commands work from the files without recomputing."""

import dataclasses

import numpy as np
import pandas as pd
import pytest

from blockmodel import stages
from blockmodel.config.project import load_project
from blockmodel.report import files


def _same(read: pd.DataFrame, computed: pd.DataFrame, what: str) -> None:
    computed = computed.reset_index(drop=True)
    assert list(read.columns) == list(computed.columns), what
    assert len(read) == len(computed), what
    for c in computed.columns:
        a, b = read[c].to_numpy(), computed[c].to_numpy()
        if b.dtype.kind in "fiub":
            # CSV keeps ten significant digits
            np.testing.assert_allclose(
                a.astype(float), b.astype(float), rtol=1e-9, err_msg=f"{what}.{c}"
            )
        else:
            assert list(a.astype(str)) == list(b.astype(str)), f"{what}.{c}"


@pytest.fixture(scope="module")
def written(tmp_path_factory):
    from .conftest import make_box_project

    top = tmp_path_factory.mktemp("files")
    project = load_project(make_box_project(top))
    steps = stages.Steps(lambda m: None, lambda m: None)
    results = stages.run_stages(project, steps, stages.EngineOptions(backend="serial"))
    folder = top / "out"
    folder.mkdir()
    files.write_run_files(results, folder)
    return results, files.read_run(folder)


def test_tables_read_back(written):
    results, saved = written
    _same(saved.composites, files.composites_table(results), "composites")
    _same(saved.declustering, results.declustering.table(results.project.grades), "declustering")
    _same(saved.experimental, files.experimental_table(results.variography), "experimental")
    _same(saved.neighbourhood, results.neighbourhood.table(), "neighbourhood")
    _same(saved.cross_validation, files.cross_validation_table(results.validation), "cv")
    _same(saved.swaths, files.swaths_table(results.validation), "swaths")
    _same(saved.support, results.support.table(), "support")
    _same(saved.grade_tonnage, results.tables["cu"], "grade_tonnage")


def test_block_model_reads_back_exactly(written):
    results, saved = written
    expected = results.blocks.drop(columns=["cu_ill_conditioned"])
    pd.testing.assert_frame_equal(saved.blocks, expected.reset_index(drop=True))


def test_models_read_back(written):
    results, saved = written
    assert saved.models.keys() == results.models.keys()
    for key, model in results.models.items():
        got = saved.models[key]
        assert got.nugget == pytest.approx(model.nugget, rel=1e-12)
        for a, b in zip(got.structures, model.structures, strict=True):
            assert a.kind == b.kind and a.sill == pytest.approx(b.sill, rel=1e-12)
            np.testing.assert_allclose(a.ranges, b.ranges, rtol=1e-12)
            np.testing.assert_allclose(
                dataclasses.astuple(a.orientation), dataclasses.astuple(b.orientation), atol=1e-9
            )


def test_stages_change_nothing_they_are_given(tmp_path):
    """No stage changes another's output: the composites table and the proportions are
    the same, value for value, after every later stage has run."""
    from .conftest import make_box_project

    project = load_project(make_box_project(tmp_path))
    comps = stages.load_and_composite(project)
    before = comps.table.copy(deep=True)
    domains = stages.build_domain_model(project, comps.table)
    proportions = domains.proportions.copy()
    decl = stages.decluster(project, comps.table, domains)
    vario = stages.variography(project, comps.table, decl.weights)
    models = {k: v.model for k, v in vario.items()}
    blocks = stages.estimate_block_model(
        project, comps.table, models, domains.grid, domains.proportions, backend="serial"
    )
    classified = stages.classify(project, blocks)
    assert "class" not in blocks and "class" in classified
    stages.validate(project, comps.table, models, decl, domains.grid, classified)
    stages.support_curves(
        project,
        comps.table,
        decl,
        models,
        classified,
        domains.grid.block_size,
        project.estimation.discretisation,
    )
    pd.testing.assert_frame_equal(comps.table, before)
    np.testing.assert_array_equal(domains.proportions, proportions)
    with pytest.raises(dataclasses.FrozenInstanceError):
        comps.table = before
