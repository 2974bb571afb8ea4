"""Invented deposits the tool has never seen, run through the command line with automatic
variography (no orientation and no model given), checked against their known truth.

Acceptance (the bar a signed estimate needs, set before the runs): the tonnage-weighted mean
of the main domain within 5 % of the truth over the estimated blocks; the slope of true on
estimated block grades for Measured and Indicated blocks between 0.8 and 1.2; the
change-of-support tonnage above the median true block grade within 10 % of the true block
tonnage; every true block inside the solids estimated.
"""

from __future__ import annotations

import pytest

from blockmodel.app.cli import main

from . import deposits


@pytest.mark.slow
@pytest.mark.parametrize("name", ["pipe", "seam", "lode"])
def test_invented_deposit_against_its_truth(tmp_path, capsys, name):
    project_file, truth, spec = deposits.build(name, tmp_path / name)
    # the test measures the tool, not the luck of the drilling: the deposit's own assays
    # (length-weighted, before the tool touches them) represent its truth within 3 %
    drilled = deposits.assay_mean(project_file.parent, spec)
    true_mean = float(truth.grades[truth.main].mean())
    assert abs(drilled / true_mean - 1) <= 0.03, (drilled, true_mean)
    assert main(["run", str(project_file)]) == 0, capsys.readouterr().err
    fig = deposits.figures(project_file, project_file.parent / "report", "main")
    print(name, {k: round(v, 3) for k, v in fig.items()})
    assert abs(fig["mean_difference_percent"]) <= 5.0
    assert 0.8 <= fig["slope_true_on_kriged_indicated_or_better"] <= 1.2
    assert abs(fig["support_tonnage_difference_percent"]) <= 10.0
    if spec.solid is not None:
        assert fig["true_blocks_not_estimated"] == 0
