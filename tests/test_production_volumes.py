"""Uncertainty over production volumes (``[[simulation.volumes]]``): the tonnes, grade and
metal above the statement cut-off in a box, per realisation, as a plain loop would count
them."""

from __future__ import annotations

import numpy as np
import pandas as pd
import pytest

from blockmodel.app.cli import main
from blockmodel.config.project import load_project
from blockmodel.stages.run import run_stages, simulate_results
from tests.conftest import make_box_project

VOLUMES = """
[[simulation.volumes]]
name = "upper benches"
low = [0.0, 0.0, 60.0]
high = [100.0, 100.0, 100.0]

[[simulation.volumes]]
name = "lower benches"
low = [0.0, 0.0, 0.0]
high = [100.0, 100.0, 60.0]

[[simulation.volumes]]
name = "north-east corner"
low = [50.0, 50.0, 0.0]
high = [100.0, 100.0, 100.0]
"""


def test_volume_bands_equal_a_plain_count(tmp_path):
    """Oracle: per volume and realisation, a loop over the simulated blocks adds the
    tonnes and metal of those whose centre lies in the box and whose grade reaches the
    statement cut-off; the table's P10/P50/P90 and mean are those of the loop's values,
    and the kriged figures those of the kriged grades.  The two bench volumes split the
    model: in every realisation their tonnes add up to the grade-tonnage curve's at the
    statement cut-off."""
    project_file = make_box_project(tmp_path)
    project_file.write_text(project_file.read_text() + VOLUMES)
    project = load_project(project_file)
    sim = simulate_results(run_stages(project), realisations=8, workers=1)
    cut = project.statement_cutoff("ore")
    table = sim.volumes(project.simulation.volumes, "cu", {"ore": cut}).set_index("volume")
    d = sim.by_key["ore.cu"]
    units = sim.units.table.iloc[d.rows]
    per_volume = {}
    for v in project.simulation.volumes:
        tonnes, metal = np.zeros(8), np.zeros(8)
        kriged_t = kriged_m = 0.0
        for b, (_, unit) in enumerate(units.iterrows()):
            centre = unit[["x", "y", "z"]].to_numpy(float)
            if not all(lo <= c < hi for lo, c, hi in zip(v.low, centre, v.high, strict=True)):
                continue
            for r in range(8):
                if d.grades[b, r] >= cut:
                    tonnes[r] += unit["tonnes"]
                    metal[r] += unit["tonnes"] * d.grades[b, r]
            if unit["cu"] >= cut:
                kriged_t += unit["tonnes"]
                kriged_m += unit["tonnes"] * unit["cu"]
        row = table.loc[v.name]
        for name, values in (("tonnes", tonnes), ("metal", metal), ("grade", metal / tonnes)):
            assert row[f"{name}_p50"] == pytest.approx(np.median(values), rel=1e-12)
            assert row[f"{name}_p10"] == pytest.approx(np.percentile(values, 10), rel=1e-12)
            assert row[f"{name}_mean"] == pytest.approx(values.mean(), rel=1e-12)
        assert row["kriged_tonnes"] == pytest.approx(kriged_t, rel=1e-12)
        assert row["kriged_metal"] == pytest.approx(kriged_m, rel=1e-12)
        per_volume[v.name] = tonnes
    t, _ = sim.curves("cu")[("all", "all")]
    column = list(sim.cutoffs).index(cut)
    np.testing.assert_allclose(
        per_volume["upper benches"] + per_volume["lower benches"], t[:, column], rtol=1e-12
    )
    assert 0 < table.loc["north-east corner", "blocks"] < len(units)


def test_simulate_writes_the_volumes_table(tmp_path):
    project_file = make_box_project(tmp_path)
    project_file.write_text(project_file.read_text() + VOLUMES)
    out = tmp_path / "sim"
    assert main(["simulate", str(project_file), "--realisations", "4", "--out", str(out)]) == 0
    table = pd.read_csv(out / "simulation_volumes.csv")
    assert table["volume"].tolist() == ["upper benches", "lower benches", "north-east corner"]
    assert "upper benches" in (out / "simulation.html").read_text()


@pytest.mark.parametrize(
    "volume, key",
    [
        ('name = "all"\nlow = [0.0, 0.0, 0.0]\nhigh = [1.0, 1.0, 1.0]', "name"),
        ('name = "v"\nlow = [0.0, 0.0, 50.0]\nhigh = [100.0, 100.0, 50.0]', "high"),
    ],
)
def test_a_bad_volume_is_refused(tmp_path, capsys, volume, key):
    project_file = make_box_project(tmp_path)
    project_file.write_text(project_file.read_text() + f"\n[[simulation.volumes]]\n{volume}\n")
    assert main(["check", str(project_file)]) == 2
    err = capsys.readouterr().err
    assert f"simulation.volumes[0].{key}" in err and "Traceback" not in err
