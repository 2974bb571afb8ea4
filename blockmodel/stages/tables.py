"""Stage 9: grade–tonnage tables of the classified block model, and the comparison with
the known truth of an invented deposit."""

from __future__ import annotations

from collections.abc import Sequence
from dataclasses import dataclass

import pandas as pd

from blockmodel.config.project import Project
from blockmodel.model.grid import BlockGrid
from blockmodel.report.tables import grade_tonnage

__all__ = ["TruthCheck", "grade_tonnage_tables", "truth_check"]


def grade_tonnage_tables(
    project: Project, blocks: pd.DataFrame, cutoffs: Sequence[float]
) -> dict[str, pd.DataFrame]:
    """Per grade (project order), tonnes, grade and metal at or above each cut-off, per
    domain and class with totals (:func:`blockmodel.report.tables.grade_tonnage`)."""
    return {g: grade_tonnage(blocks, g, project.data.grades[g], cutoffs) for g in project.grades}


@dataclass(frozen=True)
class TruthCheck:
    """Figures of the estimate against a known truth per domain, or why none were made."""

    figures: pd.DataFrame | None
    problem: str | None


def truth_check(project: Project, grid: BlockGrid, blocks: pd.DataFrame) -> TruthCheck | None:
    """The estimate against ``project.truth`` (invented deposits only); None without one."""
    if project.truth is None:
        return None
    from blockmodel.assess.truth import TruthMismatch, compare_with_truth

    truth = pd.read_parquet(project.truth)
    primary = project.grades[0]
    try:
        rows = [
            {"domain": d.name, **compare_with_truth(blocks, truth, grid, primary, d.name)}
            for d in project.domains
            if d.estimate
        ]
    except TruthMismatch as exc:
        return TruthCheck(None, f"truth file {project.truth.name}: {exc}")
    return TruthCheck(pd.DataFrame(rows), None)
