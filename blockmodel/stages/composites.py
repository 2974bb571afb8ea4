"""Stage 1: drillholes loaded and checked, composited within domains and capped."""

from __future__ import annotations

import difflib
from dataclasses import dataclass

import numpy as np
import pandas as pd

from blockmodel.config.project import Project
from blockmodel.data.compositing import CappingSummary, CompositingSummary, cap_grades, composite
from blockmodel.data.drillholes import DrillholeSet, load_drillholes
from blockmodel.data.points import PointSamples, load_points
from blockmodel.errors import InputError, Problem

__all__ = ["Composites", "load_and_composite"]


@dataclass(frozen=True)
class Composites:
    """The composites of a project and how they were made.

    Attributes
    ----------
    holes : DrillholeSet
        The checked drillhole tables (empty when the project has none), with warnings.
    table : DataFrame
        One row per composite: ``hole, from, to, x, y, z, domain, length, coverage,
        source`` and the grades; ordered by position (``x, y, z, hole``).  Point samples
        are rows of their own, with ``source`` "points", their line as ``hole`` and no
        ``from`` or ``to``; composites have ``source`` "drillhole".
    compositing : CompositingSummary
    capping : tuple of CappingSummary
    points : PointSamples or None
        The checked point samples, when the project has them.
    """

    holes: DrillholeSet
    table: pd.DataFrame
    compositing: CompositingSummary
    capping: tuple[CappingSummary, ...]
    points: PointSamples | None = None

    @property
    def warnings(self) -> list[Problem]:
        """Warnings from reading the drillholes and the point samples."""
        return self.holes.warnings + (self.points.warnings if self.points else [])

    def value_counts(self, grade: str) -> tuple[int, int]:
        """Values of ``grade`` below detection (replaced) and missing, over the intervals
        and the point samples."""
        sources = [self.holes] + ([self.points] if self.points else [])
        return (
            sum(s.below_detection[grade] for s in sources),
            sum(s.missing[grade] for s in sources),
        )

    def drillholes(self) -> pd.DataFrame:
        """The composites from drillholes (no point samples)."""
        return self.table[self.table["source"] == "drillhole"]

    def of_domain(self, name: str, grade: str | None = None) -> pd.DataFrame:
        """The composites of domain ``name`` (with a value of ``grade`` when given)."""
        t = self.table[self.table["domain"] == name]
        return t if grade is None else t[t[grade].notna()]


def load_and_composite(project: Project) -> Composites:
    """Load and check drillholes and point samples, composite the drillholes, cap; domain
    names replace codes."""
    data = project.data
    holes = load_drillholes(data) if data.has_drillholes else DrillholeSet.empty(project.grades)
    points = None
    if data.points is not None:
        names = frozenset(holes.collars["hole"])
        points = load_points(data, project.compositing.length, names)
    _check_codes(project, holes, points)
    if points is not None and data.has_drillholes:
        _support_warning(project, points)
    code_to_name = {d.code: d.name for d in project.domains}
    comps, summary = composite(holes, project.compositing)
    comps["source"] = "drillhole"
    if points is not None:
        nan = float("nan")
        rows = points.table.drop(columns="sample")
        rows = rows.assign(**{"from": nan, "to": nan}, coverage=1.0, source="points")
        parts = [comps, rows] if len(comps) else [rows]
        comps = pd.concat(parts, ignore_index=True)[[*comps.columns]]
    comps["domain"] = comps["domain"].map(lambda c: code_to_name.get(c, c))
    comps, capping = cap_grades(comps, project.capping)
    # Order by position, not by hole name: results must not depend on what holes are called
    # (ties in the search and the order of sums follow the table's order).
    comps = comps.sort_values(["x", "y", "z", "hole"], kind="stable").reset_index(drop=True)
    for d in project.domains:
        if d.estimate and not (comps["domain"] == d.name).any():
            raise InputError(
                [
                    Problem(
                        str(data.samples),
                        None,
                        None,
                        _code_column(project),
                        f"domain '{d.name}' (code '{d.code}') has no composites",
                    )
                ]
            )
    return Composites(holes, comps, summary, tuple(capping), points)


def _support_warning(project: Project, points: PointSamples) -> None:
    """Point samples beside composites of another length: the estimate mixes supports
    (their variances differ), which the qualified person must judge."""
    length = project.compositing.length
    column = project.data.point_columns.length
    lengths = points.table["length"].to_numpy(float)
    if column and abs(float(np.median(lengths)) - length) <= 0.25 * length:
        return
    said = f"median length {np.median(lengths):g} m" if column else "no length given"
    points.warnings.append(
        Problem(
            str(project.data.points),
            None,
            None,
            column or None,
            f"{len(lengths)} point samples ({said}) are used beside {length:g} m drillhole "
            "composites: samples of another support have another variance; judge whether "
            "they may be mixed, or estimate without them to compare",
        )
    )


def _code_column(project: Project) -> str:
    data = project.data
    return data.columns.domain if data.has_drillholes else data.point_columns.domain


def _check_codes(project: Project, holes: DrillholeSet, points: PointSamples | None) -> None:
    """Codes of intervals and point samples that name no domain: an error where the code
    differs from a declared one only in case or spaces (a typing slip), otherwise a
    warning with the count."""
    declared = {d.code for d in project.domains}
    data = project.data
    tables = [(holes.intervals, data.intervals, data.columns.domain, "interval", holes.warnings)]
    if points is not None:
        tables.append(
            (points.table, data.points, data.point_columns.domain, "sample", points.warnings)
        )
    slips = []
    for table, file, column, what, warnings in tables:
        for code, count in table["domain"].value_counts().items():
            if code in declared or code == "":
                continue
            same = [d for d in declared if d.strip().lower() == str(code).strip().lower()]
            close = same or difflib.get_close_matches(str(code), sorted(declared), n=1, cutoff=0.75)
            hint = f"; did you mean '{close[0]}'?" if close else " (not estimated)"
            problem = Problem(
                str(file),
                None,
                None,
                column,
                f"code '{code}' in {count} {what}(s) matches no domain{hint}",
            )
            (slips if same else warnings).append(problem)
    if slips:
        raise InputError(slips)
