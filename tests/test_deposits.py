"""Invented deposits the tool has never seen, run through the command line with automatic
variography (no orientation and no model given), checked against their known truth.

Acceptance (the bar a signed estimate needs, set before the runs): the tonnage-weighted mean
of the main domain within 5 % of the truth over the estimated blocks; the slope of true on
estimated block grades for Measured and Indicated blocks between 0.8 and 1.2; the
change-of-support tonnage above the median true block grade within 10 % of the true block
tonnage; every true block inside the solids estimated.
"""

from __future__ import annotations

import numpy as np
import pandas as pd
import pytest

from blockmodel.cli import main
from blockmodel.grid import BlockGrid
from blockmodel.project import load_project
from blockmodel.truth import compare_with_truth

from . import deposits


def _figures(project_file):
    project = load_project(project_file)
    grade = project.grades[0]
    out = project_file.parent / "report"
    grid = BlockGrid(project.grid.origin, project.grid.block_size, project.grid.shape)
    blocks = pd.read_parquet(out / "block_model.parquet")
    truth = pd.read_parquet(project_file.parent / "truth.parquet")
    fig = compare_with_truth(blocks, truth, grid, grade, "main")
    support = pd.read_csv(out / "change_of_support.csv")
    at = support[np.isclose(support["cutoff"], round(fig["median_cutoff"], 6))].iloc[0]
    fig["support_tonnage_difference_percent"] = 100 * (
        at["tonnes"] / fig["tonnes_above_cutoff_true"] - 1
    )
    main_blocks = blocks[(blocks["domain"] == "main") & np.isfinite(blocks[grade])]
    estimated = set(
        grid.flat_index(
            main_blocks["i"].to_numpy(), main_blocks["j"].to_numpy(), main_blocks["k"].to_numpy()
        )
    )
    flat = grid.block_of(truth[["x", "y", "z"]].to_numpy(float))
    fig["true_blocks_not_estimated"] = int(sum(f not in estimated for f in flat))
    return fig


@pytest.mark.slow
@pytest.mark.parametrize("name", ["pipe", "seam", "lode"])
def test_invented_deposit_against_its_truth(tmp_path, capsys, name):
    project_file, _, spec = deposits.build(name, tmp_path / name)
    assert main(["run", str(project_file)]) == 0, capsys.readouterr().err
    fig = _figures(project_file)
    print(name, {k: round(v, 3) for k, v in fig.items()})
    assert abs(fig["mean_difference_percent"]) <= 5.0
    assert 0.8 <= fig["slope_true_on_kriged_indicated_or_better"] <= 1.2
    assert abs(fig["support_tonnage_difference_percent"]) <= 10.0
    if spec.solid is not None:
        assert fig["true_blocks_not_estimated"] == 0
