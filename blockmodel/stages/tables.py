"""Stage 9: grade–tonnage and statement tables of the classified block model, and the
comparison with the known truth of an invented deposit."""

from __future__ import annotations

from collections.abc import Sequence
from dataclasses import dataclass

import pandas as pd

from blockmodel.config.project import Project
from blockmodel.model.grid import BlockGrid
from blockmodel.report.tables import grade_tonnage, statement

__all__ = [
    "TruthCheck",
    "class_order",
    "grade_tonnage_tables",
    "statement_cutoffs",
    "statement_tables",
    "truth_check",
]


def class_order(project: Project) -> list[str]:
    """The project's classes in confidence order: its rules in order, then the fallback."""
    names = [r.name for r in project.classification.rules] + [project.classification.fallback]
    return list(dict.fromkeys(names))


def statement_cutoffs(project: Project, cutoffs: Sequence[float]) -> dict[str, float]:
    """Reporting cut-off of every estimated domain (:meth:`Project.statement_cutoff`) when
    reporting at ``cutoffs``."""
    return {
        d.name: project.statement_cutoff(d.name, cutoffs) for d in project.domains if d.estimate
    }


def grade_tonnage_tables(
    project: Project, blocks: pd.DataFrame, cutoffs: Sequence[float]
) -> dict[str, pd.DataFrame]:
    """Per grade (project order), tonnes, grade and metal at or above each cut-off and at
    each domain's reporting cut-off, per domain and class with totals
    (:func:`blockmodel.report.tables.grade_tonnage`)."""
    every = sorted({*cutoffs, *statement_cutoffs(project, cutoffs).values()})
    order = class_order(project)
    return {
        g: grade_tonnage(
            blocks,
            g,
            project.data.grades[g],
            every,
            class_order=order,
            metal_unit=project.report.metal_units.get(g),
        )
        for g in project.grades
    }


def statement_tables(
    project: Project, tables: dict[str, pd.DataFrame], cutoffs: Sequence[float]
) -> dict[str, pd.DataFrame]:
    """Per grade, the statement table at each domain's reporting cut-off (unrounded) when
    reporting at ``cutoffs``."""
    cut = statement_cutoffs(project, cutoffs)
    order = class_order(project)
    return {
        g: statement(
            gt,
            project.data.grades[g],
            {d: c for d, c in cut.items() if (gt["domain"] == d).any()},
            order,
            metal_unit=project.report.metal_units.get(g),
        )
        for g, gt in tables.items()
    }


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
