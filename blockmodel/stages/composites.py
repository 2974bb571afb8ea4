"""Stage 1: drillholes loaded and checked, composited within domains and capped."""

from __future__ import annotations

import difflib
from dataclasses import dataclass

import pandas as pd

from blockmodel.config.project import Project
from blockmodel.data.compositing import CappingSummary, CompositingSummary, cap_grades, composite
from blockmodel.data.drillholes import DrillholeSet, load_drillholes
from blockmodel.errors import InputError, Problem

__all__ = ["Composites", "load_and_composite"]


@dataclass(frozen=True)
class Composites:
    """The composites of a project and how they were made.

    Attributes
    ----------
    holes : DrillholeSet
        The checked tables, with their warnings.
    table : DataFrame
        One row per composite: ``hole, from, to, x, y, z, domain, length, coverage`` and
        the grades; ordered by position (``x, y, z, hole``).
    compositing : CompositingSummary
    capping : tuple of CappingSummary
    """

    holes: DrillholeSet
    table: pd.DataFrame
    compositing: CompositingSummary
    capping: tuple[CappingSummary, ...]

    def of_domain(self, name: str, grade: str | None = None) -> pd.DataFrame:
        """The composites of domain ``name`` (with a value of ``grade`` when given)."""
        t = self.table[self.table["domain"] == name]
        return t if grade is None else t[t[grade].notna()]


def load_and_composite(project: Project) -> Composites:
    """Load and check drillholes, composite, cap; domain names replace interval codes."""
    holes = load_drillholes(project.data)
    _check_codes(project, holes)
    code_to_name = {d.code: d.name for d in project.domains}
    comps, summary = composite(holes, project.compositing)
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
                        str(project.data.intervals),
                        None,
                        None,
                        project.data.columns.domain,
                        f"domain '{d.name}' (code '{d.code}') has no composites",
                    )
                ]
            )
    return Composites(holes, comps, summary, tuple(capping))


def _check_codes(project: Project, holes: DrillholeSet) -> None:
    """Interval codes that name no domain: an error where the code differs from a declared
    one only in case or spaces (a typing slip), otherwise a warning with the count."""
    declared = {d.code for d in project.domains}
    counts = holes.intervals["domain"].value_counts()
    slips = []
    for code, count in counts.items():
        if code in declared or code == "":
            continue
        same = [d for d in declared if d.strip().lower() == str(code).strip().lower()]
        close = same or difflib.get_close_matches(str(code), sorted(declared), n=1, cutoff=0.75)
        hint = f"; did you mean '{close[0]}'?" if close else " (not estimated)"
        problem = Problem(
            str(project.data.intervals),
            None,
            None,
            project.data.columns.domain,
            f"code '{code}' in {count} interval(s) matches no domain{hint}",
        )
        (slips if same else holes.warnings).append(problem)
    if slips:
        raise InputError(slips)
