"""Point samples (channels, trenches, blast holes) beside or instead of drillholes.

The oracle: a sample is a position and a grade, so a project whose point samples are the
composites of a drilled project, each on a line named after its hole, must estimate every
block exactly as the drilled project does (same search, same per-hole limits, same
declustering).  The variogram is given in both projects, since the downhole variogram
(which the automatic fit reads the nugget from) needs holes.
"""

from __future__ import annotations

import numpy as np
import pandas as pd
import pytest

from blockmodel.app.cli import main
from blockmodel.config.project import load_project
from blockmodel.stages.composites import load_and_composite
from blockmodel.stages.run import run_stages

MODEL = """
[variogram.ore.cu]
nugget = 0.05
[[variogram.ore.cu.structures]]
kind = "spherical"
sill = 0.2
ranges = [60.0, 60.0, 30.0]
"""


def _drilled(tmp_path, make):
    project = make(tmp_path)
    project.write_text(project.read_text() + MODEL)
    return project


def _points_project(drilled, folder, *, keep_holes: bool, east: float = 0.0):
    """A copy of ``drilled`` whose composites are written as point samples, ``east`` metres
    east of them, one line per hole, into ``folder``; returns the project file and the
    points table."""
    comps = load_and_composite(load_project(drilled)).table
    comps = comps.assign(x=comps["x"] + east)
    points = pd.DataFrame(
        {
            "sample_id": [f"S{n:04d}" for n in range(len(comps))],
            "line": "L-" + comps["hole"],
            "x": comps["x"].map(repr),
            "y": comps["y"].map(repr),
            "z": comps["z"].map(repr),
            "cu": comps["cu"].map(repr),
            "domain": comps["domain"],
        }
    )
    folder.mkdir()
    points.to_csv(folder / "points.csv", index=False)
    text = drilled.read_text()
    data = '[data]\npoints = "points.csv"\ngrades = { cu = "%" }\n'
    data += '[data.point_columns]\nline = "line"\n'
    if keep_holes:
        for name in ("collars", "surveys", "assays"):
            (folder / f"{name}.csv").write_text((drilled.parent / f"{name}.csv").read_text())
        tables = 'collars = "collars.csv"\nsurveys = "surveys.csv"\nintervals = "assays.csv"\n'
        data = data.replace("[data]\n", "[data]\n" + tables)
    head, rest = text.split("[data]", 1)
    rest = rest[rest.index("\n[[domains]]") :]
    (folder / "ore.ply").write_bytes((drilled.parent / "ore.ply").read_bytes())
    path = folder / "project.toml"
    path.write_text(head + data + rest)
    return path, points


def test_points_instead_of_drillholes_estimate_as_the_drillholes_do(tmp_path):
    """Oracle: the same samples as points on lines named after their holes give the same
    block estimates, kriging variances and declustering weights (to rounding of the
    positions written as text, which ``repr`` keeps exact)."""
    from tests.conftest import make_box_project

    (tmp_path / "drilled").mkdir()
    drilled = _drilled(tmp_path / "drilled", make_box_project)
    points_file, _ = _points_project(drilled, tmp_path / "points", keep_holes=False)
    a = run_stages(load_project(drilled))
    b = run_stages(load_project(points_file))
    assert len(b.composites.holes.collars) == 0
    assert (b.composites.table["source"] == "points").all()
    np.testing.assert_array_equal(np.sort(a.declustering.weights), np.sort(b.declustering.weights))
    for column in ("cu", "cu_variance", "cu_samples", "cu_holes", "cu_pass", "cu_slope"):
        np.testing.assert_allclose(
            b.blocks[column].to_numpy(float), a.blocks[column].to_numpy(float), rtol=0, atol=1e-12
        )
    # the downhole variogram needs holes: none here, and the report says so by its absence
    assert b.variography["ore.cu"].downhole.pairs.sum() == 0


def test_points_beside_drillholes_run_and_report(tmp_path, capsys):
    """Points beside the holes: they join the composites as their own rows, take part in
    the estimate, are counted by ``check`` and in the report, and leave the downhole
    variogram to the holes."""
    from tests.conftest import make_box_project

    (tmp_path / "drilled").mkdir()
    drilled = make_box_project(tmp_path / "drilled")
    project, points = _points_project(drilled, tmp_path / "both", keep_holes=True, east=3.0)
    comps = load_and_composite(load_project(project))
    assert (comps.table["source"] == "points").sum() == len(points)
    assert (comps.table["source"] == "drillhole").sum() == len(points)
    assert main(["check", str(project)]) == 0
    out = capsys.readouterr().out
    assert f"Point samples: {len(points)} on 16 line(s)" in out
    # no length column: the mixed support is said (common practice: a QP judges it)
    assert "beside 2 m drillhole composites" in out
    assert main(["run", str(project), "--out", str(tmp_path / "out")]) == 0
    html = (tmp_path / "out" / "report.html").read_text()
    assert f"{len(points)} point samples on 16 line(s)" in html


@pytest.mark.parametrize(
    ("sample", "field", "value", "words"),
    [
        ("S0003", 1, "B00", "'B00' is also a drillhole's name"),
        ("S0007", 0, "S0006", "duplicate sample id"),
        ("S0009", 1, "", "missing line name"),
    ],
)
def test_bad_point_samples_stop_with_the_file_and_sample(
    tmp_path, capsys, sample, field, value, words
):
    """Common practice: every problem names the file, line, sample and field; exit 2."""
    from tests.conftest import make_box_project

    (tmp_path / "drilled").mkdir()
    drilled = make_box_project(tmp_path / "drilled")
    project, _ = _points_project(drilled, tmp_path / "both", keep_holes=True)
    table = project.parent / "points.csv"
    lines = table.read_text().splitlines()
    row = next(n for n, line in enumerate(lines) if line.startswith(sample + ","))
    fields = lines[row].split(",")
    fields[field] = value
    lines[row] = ",".join(fields)
    table.write_text("\n".join(lines) + "\n")
    assert main(["check", str(project)]) == 2
    err = capsys.readouterr().err
    assert "Traceback" not in err
    assert "points.csv" in err and words in err and f" {row + 1} " in err


def test_a_bad_number_in_the_points_names_its_line_and_sample(tmp_path, capsys):
    from tests.conftest import make_box_project

    (tmp_path / "drilled").mkdir()
    drilled = make_box_project(tmp_path / "drilled")
    project, _ = _points_project(drilled, tmp_path / "both", keep_holes=False)
    table = project.parent / "points.csv"
    lines = table.read_text().splitlines()
    fields = lines[5].split(",")  # file line 6: sample S0004
    fields[2], fields[5] = "12_5", "1.2.3"
    lines[5] = ",".join(fields)
    table.write_text("\n".join(lines) + "\n")
    assert main(["check", str(project)]) == 2
    err = capsys.readouterr().err
    assert "Traceback" not in err
    assert "points.csv" in err and "S0004" in err and " 6 " in err
    assert "not a number: '12_5'" in err and "not a number: '1.2.3'" in err


@pytest.mark.parametrize(
    ("data", "key", "words"),
    [
        ('collars = "c.csv"\nsurveys = "s.csv"\n', "data.intervals", "need all three"),
        ("", "data", "point samples (data.points)"),
    ],
)
def test_the_project_must_name_drillholes_or_points(tmp_path, capsys, data, key, words):
    from tests.conftest import make_box_project

    project = make_box_project(tmp_path)
    for name in ("c.csv", "s.csv"):
        (tmp_path / name).write_text("x\n1\n")
    text = project.read_text()
    head, rest = text.split("[data]", 1)
    rest = rest[rest.index('grades = { cu = "%" }') :]
    project.write_text(head + "[data]\n" + data + rest)
    assert main(["check", str(project)]) == 2
    err = capsys.readouterr().err
    assert key in err and words in err
