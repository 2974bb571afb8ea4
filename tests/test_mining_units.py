"""Simulation on selective mining units smaller than the model's blocks
(``simulation.block_size``)."""

from __future__ import annotations

import dataclasses

import numpy as np
import pytest

from blockmodel.app.cli import main
from blockmodel.config.project import load_project
from blockmodel.stages.run import run_stages, simulate_results
from tests.conftest import make_box_project


def test_mining_units_average_back_to_their_blocks(tmp_path):
    """Oracle: units of a quarter block (5 x 5 x 10 m in 10 m blocks) with the same node
    spacing (2.5 x 2.5 x 5 m) simulate the very nodes of the block run, with the same
    field and conditioning; so in every realisation each block's grade is the mean of its
    four units' (to rounding), the units' tonnes add up to the block's, and the units
    keep their block's domain and class.  Their grades spread within a block: the support
    effect the unit is there to show."""
    project = load_project(make_box_project(tmp_path))
    results = run_stages(project)
    by_block = simulate_results(results, realisations=6, workers=1)
    smu = dataclasses.replace(project.simulation, block_size=(5.0, 5.0, 10.0))
    units_project = dataclasses.replace(project, simulation=smu)
    by_unit = simulate_results(
        dataclasses.replace(results, project=units_project), realisations=6, workers=1
    )
    assert by_block.units.are_blocks and by_block.units.discretisation == (4, 4, 2)
    assert by_unit.units.discretisation == (2, 2, 2)
    np.testing.assert_array_equal(by_unit.units.size, [5.0, 5.0, 10.0])

    block, unit = by_block.by_key["ore.cu"], by_unit.by_key["ore.cu"]
    assert len(unit.rows) == 4 * len(block.rows) and unit.nodes == block.nodes
    blocks = by_block.units.table.iloc[block.rows]
    units = by_unit.units.table.iloc[unit.rows]
    position = {tuple(ijk): n for n, ijk in enumerate(blocks[["i", "j", "k"]].to_numpy())}
    parent = np.array(
        [position[(i // 2, j // 2, k)] for i, j, k in units[["i", "j", "k"]].to_numpy()]
    )
    assert np.bincount(parent).tolist() == [4] * len(blocks)
    means = np.zeros_like(block.grades)
    np.add.at(means, parent, unit.grades / 4.0)
    np.testing.assert_allclose(means, block.grades, rtol=1e-12)
    tonnes = np.bincount(parent, weights=units["tonnes"].to_numpy())
    np.testing.assert_allclose(tonnes, blocks["tonnes"].to_numpy(), rtol=1e-12)
    assert (units["class"].to_numpy() == blocks["class"].to_numpy()[parent]).all()
    centres = units[["x", "y", "z"]].to_numpy()
    np.testing.assert_allclose(centres, (units[["i", "j", "k"]].to_numpy() + 0.5) * [5, 5, 10])
    spread = np.zeros_like(block.grades)
    np.add.at(spread, parent, (unit.grades - means[parent]) ** 2)
    assert spread.mean() > 0.0
    summary = by_unit.block_table()
    assert len(summary) == len(units) and summary["tonnes"].sum() == pytest.approx(
        blocks["tonnes"].sum(), rel=1e-12
    )


@pytest.mark.parametrize("size", ["[3.0, 5.0, 10.0]", "[20.0, 10.0, 10.0]"])
def test_a_mining_unit_that_does_not_divide_the_block_is_refused(tmp_path, capsys, size):
    project_file = make_box_project(tmp_path)
    project_file.write_text(project_file.read_text() + f"\n[simulation]\nblock_size = {size}\n")
    assert main(["check", str(project_file)]) == 2
    err = capsys.readouterr().err
    assert "simulation.block_size" in err and "Traceback" not in err
