"""Loading and checking drillhole tables; every problem named by file, line, hole, field."""

import numpy as np
import pytest

from blockmodel.config.project import load_project
from blockmodel.data.drillholes import load_drillholes
from blockmodel.errors import InputError


def _load(path):
    return load_drillholes(load_project(path).data)


def test_clean_load_and_special_values(small_project):
    holes = _load(small_project)
    iv = holes.intervals.set_index(["hole", "from"])
    assert iv.loc[("A1", 6.0), "au"] == pytest.approx(0.005)  # "<0.01" -> half the limit
    assert np.isnan(iv.loc[("A1", 8.0), "au"])  # blank is missing, never zero
    assert np.isnan(iv.loc[("A3", 5.0), "au"])  # sentinel -99 is missing
    assert holes.below_detection["au"] == 1 and holes.missing["au"] == 2
    gaps = [w for w in holes.warnings if "gap" in w.problem]
    assert len(gaps) == 1 and gaps[0].hole == "A3" and gaps[0].line == 11


# One fault at a time: (file, text to find, replacement, expected hole, expected line, words)
FAULTS = [
    ("collars.csv", "A3,10,40,100,30", "A2,10,40,100,30", "A2", 4, "duplicate collar"),
    ("assays.csv", "A3,1,3,2.0,ore", "B9,1,3,2.0,ore", "B9", 10, "no collar"),
    ("surveys.csv", "A3,25,180,-70", "Z1,25,180,-70", "Z1", 7, "no collar"),
    ("assays.csv", "A2,10,12,0.2", "A2,12,12,0.2", "A2", 8, "not less than"),
    ("assays.csv", "A1,4,6,2.5", "A1,3,6,2.5", "A1", 4, "overlaps"),
    ("assays.csv", "A2,10,12,0.2", "A2,10,32,0.2", "A2", 8, "past the hole depth"),
    ("surveys.csv", "A2,25,90,-61", "A2,0,90,-61", "A2", 5, "duplicated survey depth"),
    ("surveys.csv", "A1,20,0,-88", "A1,20,0,-88\nA1,10,0,-87", "A1", 4, "not in increasing order"),
    ("surveys.csv", "A2,25,90,-61", "A2,25,361,-61", "A2", 5, "azimuth"),
    ("surveys.csv", "A2,25,90,-61", "A2,25,90,-95", "A2", 5, "dip"),
    ("assays.csv", "A1,4,6,2.5", "A1,4,6,two", "A1", 4, "not a number"),
    ("collars.csv", "A2,40,10,100,30", "A2,,10,100,30", "A2", 3, "missing value"),
    ("assays.csv", "A1,4,6,2.5", "A1,4,6,-3", "A1", 4, "negative"),
]


@pytest.mark.parametrize(("file", "old", "new", "hole", "line", "words"), FAULTS)
def test_each_fault_is_named(small_project, file, old, new, hole, line, words):
    f = small_project.parent / file
    assert old in f.read_text()
    f.write_text(f.read_text().replace(old, new))
    with pytest.raises(InputError) as info:
        _load(small_project)
    found = [p for p in info.value.problems if words in p.problem]
    assert found, info.value.table()
    assert found[0].hole == hole and found[0].line == line and found[0].file.endswith(file)


def test_all_problems_reported_together(small_project):
    a = small_project.parent / "assays.csv"
    a.write_text(
        a.read_text().replace("A1,4,6,2.5", "A1,4,6,x").replace("A2,10,12,0.2", "A2,12,12,0.2")
    )
    with pytest.raises(InputError) as info:
        _load(small_project)
    assert len(info.value.problems) >= 2
    assert "file" in info.value.table() and "line" in info.value.table()


@pytest.mark.parametrize(
    ("content", "words"),
    [
        (b"", "empty"),
        (b"hole_id,x,y,z,depth\n", "no rows"),
        (b"hole_id;x;y;z;depth\nA1;1;2;3;4\n", "not separated by commas"),
        (b"hole_id,x,x,z,depth\nA1,1,2,3,4\n", "more than once"),
        (b"hole_id,x,y,z,depth\nA1,1,2,\xff3,30\n", "not UTF-8"),
        (b"hole_id,east,y,z,depth\nA1,1,2,3,30\n", "missing column 'x'"),
    ],
)
def test_unreadable_tables(small_project, content, words):
    (small_project.parent / "collars.csv").write_bytes(content)
    with pytest.raises(InputError, match=words):
        _load(small_project)


def test_single_survey_warns(small_project):
    s = small_project.parent / "surveys.csv"
    s.write_text(s.read_text().replace("A3,25,180,-70\n", ""))
    holes = _load(small_project)
    assert any(w.hole == "A3" and "single survey" in w.problem for w in holes.warnings)
