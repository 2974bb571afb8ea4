"""Property-based fuzzing through the command line: random small drillhole sets run end to
end with exit status 0 or 2 and never a traceback; when a run succeeds, tonnage never
rises with the cut-off and the cut-off-0 totals equal the block model's estimated tonnes."""

from __future__ import annotations

import numpy as np
import pandas as pd
import pytest
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

from blockmodel.app.cli import main

PROJECT = """
name = "fuzzed project <b>&</b>"

[data]
collars = "collars.csv"
surveys = "surveys.csv"
intervals = "assays.csv"
grades = {{ au = "g/t" }}

[[domains]]
name = "ore"
density = 2.7

[variography]
lag = 10.0
lags = 6
orientation = [{azimuth}, 0.0, 0.0]

[[search]]
ranges = [{reach}, {reach}, {reach}]
min_samples = {min_samples}
max_samples = 12
max_per_hole = {per_hole}

[grid]
origin = [0.0, 0.0, 0.0]
block_size = [10.0, 10.0, 5.0]
shape = [12, 12, 14]
code_reach = 15.0

[estimation]
backend = "serial"

[report]
folder = "out"
cutoffs = [0.0, 0.2, 0.5, 1.0, 2.0]
"""


@st.composite
def drilling(draw):
    rng = np.random.default_rng(draw(st.integers(0, 2**32 - 1)))
    n = draw(st.integers(2, 9))
    collars, surveys, assays = [], [], []
    for h in range(n):
        hole = f"H{h}"
        depth = float(rng.uniform(10, 60))
        collars.append((hole, *rng.uniform(5, 115, 2).round(2), 70.0, round(depth, 2)))
        dip = float(rng.choice([-90.0, -75.0, -60.0, -45.0]))
        surveys.append((hole, 0.0, float(rng.uniform(0, 360)).__round__(1), dip))
        top = 0.0
        while top < depth - 1:
            step = float(rng.choice([1.0, 2.0, 3.0]))
            bottom = min(top + step, round(depth, 2))
            grade = draw(st.sampled_from(["lognormal", "constant", "blank", "below"]))
            value = {
                "lognormal": f"{rng.lognormal(-0.5, 1.0):.3f}",
                "constant": "0.800",
                "blank": "",
                "below": "<0.01",
            }[grade]
            code = "ore" if rng.random() < 0.8 else "waste"
            assays.append((hole, top, bottom, value, code))
            top = bottom
    settings_ = {
        "azimuth": draw(st.sampled_from([0.0, 45.0, 120.0])),
        "reach": draw(st.sampled_from([30.0, 80.0, 200.0])),
        "min_samples": draw(st.integers(1, 6)),
        "per_hole": draw(st.integers(1, 4)),
    }
    return collars, surveys, assays, settings_


def _check_success(out):
    gt = pd.read_csv(out / "grade_tonnage.csv")
    for _, part in gt.groupby(["domain", "class", "metal_unit"]):
        assert np.all(np.diff(part.sort_values("cutoff")["tonnes"].to_numpy()) <= 1e-6)
    blocks = pd.read_parquet(out / "block_model.parquet")
    estimated = blocks.loc[np.isfinite(blocks["au"]), "tonnes"].sum()
    zero = gt[(gt["cutoff"] == 0) & (gt["domain"] == "all") & (gt["class"] == "all")]
    assert zero["tonnes"].iloc[0] == pytest.approx(estimated, rel=1e-9)
    html = (out / "report.html").read_text()
    assert "<b>&</b>" not in html and "&lt;b&gt;&amp;&lt;/b&gt;" in html  # names escaped


def _run(folder, data, capsys):
    collars, surveys, assays, settings_ = data
    folder.mkdir()
    pd.DataFrame(collars, columns=["hole_id", "x", "y", "z", "depth"]).to_csv(
        folder / "collars.csv", index=False
    )
    pd.DataFrame(surveys, columns=["hole_id", "depth", "azimuth", "dip"]).to_csv(
        folder / "surveys.csv", index=False
    )
    pd.DataFrame(assays, columns=["hole_id", "from", "to", "au", "domain"]).to_csv(
        folder / "assays.csv", index=False
    )
    (folder / "project.toml").write_text(PROJECT.format(**settings_))
    code = main(["run", str(folder / "project.toml")])
    err = capsys.readouterr().err
    assert code in (0, 2), err
    assert "Traceback" not in err
    if code == 0:
        _check_success(folder / "out")
    else:
        assert not (folder / "out").exists()
        assert "problem" in err or "blockmodel:" in err
    return code


def _fuzz(tmp_path_factory, capsys, examples):
    @settings(
        max_examples=examples,
        deadline=None,
        derandomize=True,
        suppress_health_check=[HealthCheck.function_scoped_fixture, HealthCheck.too_slow],
    )
    @given(drilling())
    def one(data):
        _run(tmp_path_factory.mktemp("fuzz") / "project", data, capsys)

    one()


def test_fuzzed_projects_run_or_stop_cleanly(tmp_path_factory, capsys):
    _fuzz(tmp_path_factory, capsys, examples=4)


@pytest.mark.slow
def test_fuzzed_projects_many(tmp_path_factory, capsys):
    _fuzz(tmp_path_factory, capsys, examples=40)
