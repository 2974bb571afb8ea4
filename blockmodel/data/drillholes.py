"""Loading and checking drillhole tables: collars, surveys and sample intervals.

Every problem is collected first, then reported once as a table naming file, line, hole
and field.  Line numbers count the header as line 1.  Dip is negative downward, as drill
logs record it (-90 is straight down).
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

__all__ = ["DrillholeSet", "load_drillholes"]


@dataclass
class DrillholeSet:
    """Checked drillhole tables with standard column names.

    Attributes
    ----------
    collars : DataFrame, columns hole, x, y, z, depth (metres)
    surveys : DataFrame, columns hole, depth, azimuth, dip (degrees; dip negative down)
    intervals : DataFrame, columns hole, from, to, domain, one column per grade
    grades : list of str
    warnings : list of Problem
    below_detection : dict grade -> count of below-detection strings replaced
    missing : dict grade -> count of blank or sentinel values
    """

    collars: pd.DataFrame
    surveys: pd.DataFrame
    intervals: pd.DataFrame
    grades: list[str]
    warnings: list[Problem] = field(default_factory=list)
    below_detection: dict[str, int] = field(default_factory=dict)
    missing: dict[str, int] = field(default_factory=dict)

    @classmethod
    def empty(cls, grades: list[str]) -> DrillholeSet:
        """No drillholes (a project of point samples only)."""
        return cls(
            collars=pd.DataFrame({k: pd.Series(dtype=t) for k, t in _COLLARS.items()}),
            surveys=pd.DataFrame({k: pd.Series(dtype=t) for k, t in _SURVEYS.items()}),
            intervals=pd.DataFrame(
                {k: pd.Series(dtype=t) for k, t in _INTERVALS.items()}
                | {g: pd.Series(dtype=float) for g in grades}
            ),
            grades=list(grades),
        )


_COLLARS = {"hole": object, "x": float, "y": float, "z": float, "depth": float}
_SURVEYS = {"hole": object, "depth": float, "azimuth": float, "dip": float}
_INTERVALS = {"hole": object, "from": float, "to": float, "domain": object}


def load_drillholes(data: DataFiles) -> DrillholeSet:
    """Load, check and standardise the three drillhole tables.

    Parameters
    ----------
    data : DataFiles
        From the project file.

    Returns
    -------
    DrillholeSet

    Raises
    ------
    InputError
        Listing every problem found (file, line, hole, field, problem).
    """
    c = data.columns
    collars_raw = read_table(
        data.collars, {"hole id": c.hole, "x": c.x, "y": c.y, "z": c.z, "depth": c.depth}
    )
    surveys_raw = read_table(
        data.surveys,
        {"hole id": c.hole, "depth": c.survey_depth, "azimuth": c.azimuth, "dip": c.dip},
    )
    required = {"hole id": c.hole, "from": c.depth_from, "to": c.depth_to}
    required.update({f"grade {g}": g for g in data.grades})
    if data.density:
        required["density"] = data.density
    intervals_raw = read_table(data.intervals, required)
    problems: list[Problem] = []
    warnings: list[Problem] = []
    collars = _collars(collars_raw, data, problems)
    surveys = _surveys(surveys_raw, collars, data, problems, warnings)
    intervals, below, missing = _intervals(intervals_raw, collars, data, problems, warnings)
    if problems:
        raise InputError(problems)
    intervals = intervals.drop(columns="_line").reset_index(drop=True)
    return DrillholeSet(
        collars=collars.drop(columns="_line").reset_index(drop=True),
        surveys=surveys.drop(columns="_line")
        .sort_values(["hole", "depth"], kind="stable")
        .reset_index(drop=True),
        intervals=intervals,
        grades=list(data.grades),
        warnings=warnings,
        below_detection=below,
        missing=missing,
    )


def _collars(collars_raw: pd.DataFrame, data: DataFiles, problems: list[Problem]) -> pd.DataFrame:
    """The collars table checked: numbers in range, ids present and unique, depths positive."""
    c, cf = data.columns, str(data.collars)
    collars = pd.DataFrame({"hole": collars_raw[c.hole].astype(str), "_line": collars_raw["_line"]})
    for key, col in (("x", c.x), ("y", c.y), ("z", c.z)):
        collars[key] = parse_numbers(
            collars_raw, col, cf, problems, c.hole, low=-COORDINATE_LIMIT, high=COORDINATE_LIMIT
        )
    collars["depth"] = parse_numbers(collars_raw, c.depth, cf, problems, c.hole, high=DEPTH_LIMIT)
    for line, hole in zip(collars["_line"], collars["hole"], strict=True):
        if hole == "":
            problems.append(Problem(cf, int(line), None, c.hole, "missing hole id"))
    dup = collars["hole"].duplicated(keep="first")
    for line, hole in zip(collars["_line"][dup], collars["hole"][dup], strict=True):
        problems.append(Problem(cf, int(line), hole, c.hole, "duplicate collar id"))
    bad_depth = collars["depth"] <= 0
    for line, hole in zip(collars["_line"][bad_depth], collars["hole"][bad_depth], strict=True):
        problems.append(Problem(cf, int(line), hole, c.depth, "hole depth must be positive"))
    return collars


def _surveys(
    surveys_raw: pd.DataFrame,
    collars: pd.DataFrame,
    data: DataFiles,
    problems: list[Problem],
    warnings: list[Problem],
) -> pd.DataFrame:
    """The surveys checked against the collars: angles in range, depths increasing and
    within the hole; upward dips and single surveys are warnings."""
    c, cf, sf = data.columns, str(data.collars), str(data.surveys)
    known = set(collars["hole"])
    total_depth = dict(zip(collars["hole"], collars["depth"], strict=True))
    surveys = pd.DataFrame({"hole": surveys_raw[c.hole].astype(str), "_line": surveys_raw["_line"]})
    surveys["depth"] = parse_numbers(
        surveys_raw, c.survey_depth, sf, problems, c.hole, low=0.0, high=DEPTH_LIMIT
    )
    surveys["azimuth"] = parse_numbers(surveys_raw, c.azimuth, sf, problems, c.hole)
    surveys["dip"] = parse_numbers(surveys_raw, c.dip, sf, problems, c.hole)
    for row in surveys.itertuples():
        if row.hole not in known:
            problems.append(
                Problem(sf, row._2, row.hole, c.hole, "survey for a hole with no collar")
            )
        if not (0 <= row.azimuth <= 360) and np.isfinite(row.azimuth):
            problems.append(
                Problem(sf, row._2, row.hole, c.azimuth, f"azimuth {row.azimuth} outside [0, 360]")
            )
        if not (-90 <= row.dip <= 90) and np.isfinite(row.dip):
            problems.append(
                Problem(
                    sf,
                    row._2,
                    row.hole,
                    c.dip,
                    f"dip {row.dip} outside [-90, 90] (negative is downward)",
                )
            )
    for hole, grp in surveys.groupby("hole", sort=False):
        d = grp["depth"].to_numpy()
        steps = np.diff(d)
        for line, step in zip(grp["_line"].to_numpy()[1:], steps, strict=True):
            if step == 0:
                problems.append(
                    Problem(sf, int(line), hole, c.survey_depth, "duplicated survey depth")
                )
            elif step < 0:
                problems.append(
                    Problem(
                        sf, int(line), hole, c.survey_depth, "survey depths not in increasing order"
                    )
                )
        if (grp["dip"] > 0).any():
            k = int(np.argmax(grp["dip"].to_numpy() > 0))
            warnings.append(
                Problem(
                    sf,
                    int(grp["_line"].iloc[k]),
                    hole,
                    c.dip,
                    f"dip {grp['dip'].iloc[k]:g} points upward: the trace rises above its "
                    "collar (dip is negative downward; a hole drilled up from underground is "
                    "the only reason for a positive dip)",
                )
            )
        if len(grp) == 1:
            warnings.append(
                Problem(
                    sf,
                    int(grp["_line"].iloc[0]),
                    hole,
                    None,
                    "single survey: hole taken as straight",
                )
            )
        if hole in total_depth and d.max() > total_depth[hole] + 1e-6:
            problems.append(
                Problem(
                    sf,
                    int(grp["_line"].iloc[-1]),
                    hole,
                    c.survey_depth,
                    f"survey depth {d.max()} beyond hole depth {total_depth[hole]}",
                )
            )
    for hole in sorted(known - set(surveys["hole"])):
        line = int(collars.loc[collars["hole"] == hole, "_line"].iloc[0])
        problems.append(Problem(cf, line, hole, None, "hole has no survey"))
    return surveys


def _intervals(
    intervals_raw: pd.DataFrame,
    collars: pd.DataFrame,
    data: DataFiles,
    problems: list[Problem],
    warnings: list[Problem],
) -> tuple[pd.DataFrame, dict[str, int], dict[str, int]]:
    """The sample intervals checked against the collars: from < to, within the hole, no
    overlaps (gaps are warnings); grades and density parsed.  Returns the table and the
    counts of below-detection and missing values per grade."""
    c, af = data.columns, str(data.intervals)
    known = set(collars["hole"])
    total_depth = dict(zip(collars["hole"], collars["depth"], strict=True))
    intervals = pd.DataFrame(
        {"hole": intervals_raw[c.hole].astype(str), "_line": intervals_raw["_line"]}
    )
    intervals["from"] = parse_numbers(
        intervals_raw, c.depth_from, af, problems, c.hole, low=0.0, high=DEPTH_LIMIT
    )
    intervals["to"] = parse_numbers(
        intervals_raw, c.depth_to, af, problems, c.hole, low=0.0, high=DEPTH_LIMIT
    )
    intervals["domain"] = (
        intervals_raw[c.domain].astype(str) if c.domain in intervals_raw.columns else ""
    )
    if data.density:
        # t/m3: the densest ores (massive sulphides, native metals in rock) stay below 20
        intervals["density"] = parse_numbers(
            intervals_raw, data.density, af, problems, c.hole, allow_blank=True, high=25.0
        )
        bad = intervals["density"] <= 0
        for line, hole in zip(intervals["_line"][bad], intervals["hole"][bad], strict=True):
            problems.append(
                Problem(af, int(line), hole, data.density, "density must be positive (t/m3)")
            )
    below, missing = {}, {}
    for g in data.grades:
        intervals[g], below[g], missing[g] = parse_grades(
            intervals_raw, g, af, data, problems, c.hole
        )
    for row in intervals.itertuples():
        if row.hole not in known:
            problems.append(
                Problem(af, row._2, row.hole, c.hole, "interval for a hole with no collar")
            )
        if row._3 >= row.to:
            problems.append(
                Problem(
                    af, row._2, row.hole, c.depth_to, f"from {row._3} is not less than to {row.to}"
                )
            )
        if row.hole in total_depth and row.to > total_depth[row.hole] + 1e-6:
            problems.append(
                Problem(
                    af,
                    row._2,
                    row.hole,
                    c.depth_to,
                    f"interval ends at {row.to}, past the hole depth {total_depth[row.hole]}",
                )
            )
    intervals = intervals.sort_values(["hole", "from"], kind="stable")
    for hole, grp in intervals.groupby("hole", sort=False):
        f, t, lines = grp["from"].to_numpy(), grp["to"].to_numpy(), grp["_line"].to_numpy()
        for k in range(1, len(grp)):
            if f[k] < t[k - 1] - 1e-9:
                problems.append(
                    Problem(
                        af,
                        int(lines[k]),
                        hole,
                        c.depth_from,
                        f"interval {f[k]}-{t[k]} overlaps the previous one ending at {t[k - 1]}",
                    )
                )
            elif f[k] > t[k - 1] + 1e-9:
                warnings.append(
                    Problem(
                        af, int(lines[k]), hole, c.depth_from, f"gap in sampling {t[k - 1]}-{f[k]}"
                    )
                )
        if np.all(np.isnan(grp[list(data.grades)].to_numpy(float))):
            warnings.append(
                Problem(af, int(lines[0]), hole, None, "every grade of this hole is missing")
            )
    return intervals, below, missing
