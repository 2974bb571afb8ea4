"""The project file: keys, types, values, paths and the resolved configuration."""

import pytest

from blockmodel.config.project import load_project, resolved
from blockmodel.errors import InputError


def _with(path, old, new):
    path.write_text(path.read_text().replace(old, new))
    return path


def test_loads_and_resolves_paths(small_project):
    p = load_project(small_project)
    assert p.data.collars == (small_project.parent / "collars.csv").resolve()
    assert p.report.folder == (small_project.parent / "out").resolve()
    assert p.domains[0].code == "ore"  # code defaults to the name
    conf = resolved(p)
    assert conf["compositing"]["length"] == 2.0  # defaults are written out
    assert conf["estimation"]["discretisation"] == [4, 4, 2]


def test_unknown_key_suggests_nearest(small_project):
    _with(small_project, 'name = "small test project"', 'name = "x"\n[compositing]\nlenght = 3.0')
    with pytest.raises(
        InputError, match=r"unknown key 'lenght' in section \[compositing\]; did you mean 'length'"
    ):
        load_project(small_project)


def test_wrong_type_names_key(small_project):
    _with(small_project, "block_size = [10.0, 10.0, 5.0]", 'block_size = [10.0, "ten", 5.0]')
    with pytest.raises(InputError, match=r"grid\.block_size\[1\]"):
        load_project(small_project)


@pytest.mark.parametrize(
    ("old", "new", "key"),
    [
        ("block_size = [10.0, 10.0, 5.0]", "block_size = [10.0, -10.0, 5.0]", "grid.block_size"),
        ('folder = "out"', 'folder = "out"\ncutoffs = [1.0, 0.5]', "report.cutoffs"),
        ('grades = { au = "g/t" }', 'grades = { au = "oz/t" }', "data.grades.au"),
        ("density = 2.7", "density = 0.0", "domains[0].density"),
        (
            'folder = "out"',
            'folder = "out"\nmetal_units = { au = "ounces" }',
            "report.metal_units.au",
        ),
        ('folder = "out"', 'folder = "out"\nmetal_units = { zn = "t" }', "report.metal_units.zn"),
    ],
)
def test_out_of_range_values(small_project, old, new, key):
    _with(small_project, old, new)
    with pytest.raises(InputError) as info:
        load_project(small_project)
    assert key in str(info.value)


def test_missing_data_file(small_project):
    (small_project.parent / "surveys.csv").unlink()
    with pytest.raises(InputError, match=r"data.surveys.*file not found"):
        load_project(small_project)


def test_bad_toml(small_project):
    small_project.write_text("name = \n")
    with pytest.raises(InputError, match="not valid TOML"):
        load_project(small_project)
