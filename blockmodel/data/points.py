"""Loading and checking point samples: channel, trench, surface or blast-hole samples
given by position rather than down a hole.

Each sample keeps its own position; it is not composited.  Samples of one line (a channel
or a trench) share the line's name as their hole, so the search's per-hole limit and
leave-one-hole-out cross-validation treat a line as drillholes treat a hole.
"""

from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np
import pandas as pd

from blockmodel.config.sections import DataFiles
from blockmodel.data.tables import (
    COORDINATE_LIMIT,
    DEPTH_LIMIT,
    parse_grades,
    parse_numbers,
    read_table,
)
from blockmodel.errors import InputError, Problem

__all__ = ["PointSamples", "load_points"]


@dataclass
class PointSamples:
    """Checked point samples with standard column names.

    Attributes
    ----------
    table : DataFrame
        Columns ``sample, hole, x, y, z, length, domain`` and one per grade (metres; the
        grades in their units); ``hole`` is the sample's line, or the sample itself.
    warnings : list of Problem
    below_detection : dict grade -> count of below-detection strings replaced
    missing : dict grade -> count of blank or sentinel values
    """

    table: pd.DataFrame
    warnings: list[Problem] = field(default_factory=list)
    below_detection: dict[str, int] = field(default_factory=dict)
    missing: dict[str, int] = field(default_factory=dict)


def load_points(
    data: DataFiles, default_length: float, hole_names: frozenset[str] = frozenset()
) -> PointSamples:
    """Load and check the point-sample table of ``data``.

    Parameters
    ----------
    data : DataFiles
        From the project file; ``data.points`` must be set.
    default_length : float
        Length of each sample (metres) when the table has no length column: capping
        weighs a sample's metal by it.
    hole_names : frozenset of str
        The drillholes' names: a line or sample may not take one (the search would count
        its samples with the hole's).

    Returns
    -------
    PointSamples

    Raises
    ------
    InputError
        Listing every problem found (file, line, sample, field, problem).
    """
    c, pf = data.point_columns, str(data.points)
    required = {"hole id": c.sample, "x": c.x, "y": c.y, "z": c.z, "domain": c.domain}
    for meaning, col in (("line", c.line), ("length", c.length)):
        if col:
            required[meaning] = col
    required.update({f"grade {g}": g for g in data.grades})
    raw = read_table(data.points, required)
    problems: list[Problem] = []
    warnings: list[Problem] = []
    table = pd.DataFrame({"sample": raw[c.sample].astype(str)})
    table["hole"] = raw[c.line].astype(str) if c.line else table["sample"]
    for key, col in (("x", c.x), ("y", c.y), ("z", c.z)):
        table[key] = parse_numbers(
            raw, col, pf, problems, c.sample, low=-COORDINATE_LIMIT, high=COORDINATE_LIMIT
        )
    table["length"] = (
        parse_numbers(raw, c.length, pf, problems, c.sample, low=0.0, high=DEPTH_LIMIT)
        if c.length
        else default_length
    )
    table["domain"] = raw[c.domain].astype(str)
    below, missing = {}, {}
    for g in data.grades:
        table[g], below[g], missing[g] = parse_grades(raw, g, pf, data, problems, c.sample)
    lines = raw["_line"].to_numpy()
    for line, sample, hole in zip(lines, table["sample"], table["hole"], strict=True):
        if sample == "":
            problems.append(Problem(pf, int(line), None, c.sample, "missing sample id"))
        if c.line and hole == "":
            problems.append(Problem(pf, int(line), sample, c.line, "missing line name"))
        if hole in hole_names:
            problems.append(
                Problem(
                    pf,
                    int(line),
                    sample,
                    c.line or c.sample,
                    f"'{hole}' is also a drillhole's name; the search would count its "
                    "samples with the hole's (rename one)",
                )
            )
    dup = table["sample"].duplicated(keep="first") & (table["sample"] != "")
    for line, sample in zip(lines[dup], table["sample"][dup], strict=True):
        problems.append(Problem(pf, int(line), sample, c.sample, "duplicate sample id"))
    if problems:
        raise InputError(problems)
    none = np.all(np.isnan(table[list(data.grades)].to_numpy(float)), axis=1)
    for line, sample in zip(lines[none], table["sample"][none], strict=True):
        warnings.append(
            Problem(pf, int(line), sample, None, "every grade of this sample is missing")
        )
    return PointSamples(table.reset_index(drop=True), warnings, below, missing)
