"""Settings declared once: bounds and choices checked at load time from the declaration,
with messages naming the key; the table of keys lists every field."""

import dataclasses

import pytest

from blockmodel.config import sections
from blockmodel.config.project import Project, load_project
from blockmodel.config.schema import Rule, describe, settings_rows
from blockmodel.errors import InputError


def _all_dataclasses():
    return [Project] + [
        getattr(sections, n)
        for n in sections.__all__
        if dataclasses.is_dataclass(getattr(sections, n))
    ]


@pytest.mark.parametrize("cls", _all_dataclasses(), ids=lambda c: c.__name__)
def test_every_setting_is_declared_with_a_description(cls):
    for f in dataclasses.fields(cls):
        if f.name == "source":  # where the file was read from, not a setting
            continue
        rule = describe(f)
        assert rule is not None and rule.doc, f"{cls.__name__}.{f.name}"


def test_table_of_keys_covers_every_setting():
    keys = {row[0] for row in settings_rows(Project)}
    for expected in (
        "search[].orientation",
        "declustering.cell_sizes.smallest",
        "variogram.DOMAIN.GRADE.structures[].ranges",
        "variography.side_band",
        "estimation.discretisation",
    ):
        assert expected in keys


@pytest.mark.parametrize(
    ("rule", "value", "words"),
    [
        (Rule("x", low=0.0, strict_low=True), 0.0, "must be positive"),
        (Rule("x", low=0.0), -1.0, "must be zero or more"),
        (Rule("x", low=1), 0, "must be at least 1"),
        (Rule("x", low=0.0, high=1.0), 1.5, "must lie in [0, 1]"),
        (Rule("x", choices=("a", "b")), "c", "must be one of a, b"),
        (Rule("x", choices=("a", "b")), ("a", "c"), "must be one of a, b"),
        (Rule("x", choices=("g/t", "%")), {"au": "oz"}, "must be one of g/t, %"),
        (
            Rule("x", low=(-360.0, -90.0), high=(360.0, 90.0), parts=("azimuth", "plunge")),
            (0.0, 95.0),
            "plunge in [-90, 90]",
        ),
    ],
)
def test_rule_messages(rule, value, words):
    assert words in rule.problem(value)


@pytest.mark.parametrize(
    ("rule", "value"),
    [
        (Rule("x", low=0.0, strict_low=True), 1e-9),
        (Rule("x", low=0.0, high=1.0), 1.0),
        (Rule("x", low=(-360.0, -90.0), high=(360.0, 90.0)), (-360.0, 90.0)),
        (Rule("x", low=1), None),
    ],
)
def test_rule_accepts_values_inside(rule, value):
    assert rule.problem(value) is None


@pytest.mark.parametrize(
    ("old", "new", "key"),
    [
        (
            "ranges = [80.0, 80.0, 40.0]",
            "ranges = [80.0, 80.0, 40.0]\nmin_octants = 9",
            "search[0].min_octants",
        ),
        ("lags = 8", "lags = 8\nangular_tolerance = 95.0", "variography.angular_tolerance"),
        ("lags = 8", 'lags = 8\nkinds = ["spherical", "sperical"]', "variography.kinds[1]"),
        ("lag = 10.0", "lag = 0.0", "variography.lag"),
        ("shape = [10, 10, 10]", "shape = [10, 0, 10]", "grid.shape"),
        ("[estimation]", "[estimation]\ndiscretisation = [40, 4, 2]", "estimation.discretisation"),
        (
            "[declustering]" if False else "[variography]",
            '[declustering]\nkeep = "smallest"\n\n[variography]',
            "declustering.keep",
        ),
    ],
)
def test_out_of_bounds_settings_stop_at_load(box_project, old, new, key):
    text = box_project.read_text()
    assert old in text
    box_project.write_text(text.replace(old, new, 1))
    with pytest.raises(InputError) as exc:
        load_project(box_project)
    assert exc.value.problems[0].field == key, exc.value.table()
