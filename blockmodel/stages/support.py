"""Stage 8: change of support: the grade–tonnage curve expected at block support by the
discrete Gaussian model, beside the kriged blocks' curve."""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
import pandas as pd

from blockmodel.assess.support import BlockSupportCurve, change_of_support
from blockmodel.config.project import Project
from blockmodel.report.tables import metal_units
from blockmodel.stages.declustering import Declustering

__all__ = ["DomainSupport", "Support", "support_curves"]


@dataclass(frozen=True)
class DomainSupport:
    """One domain at the report cut-offs: the discrete Gaussian curve and the kriged
    blocks' tonnes and grade."""

    domain: str
    curve: BlockSupportCurve
    kriged_tonnes: np.ndarray
    kriged_grade: np.ndarray


@dataclass(frozen=True)
class Support:
    """Change of support of the first grade for every estimated domain."""

    grade: str
    unit: str
    cutoffs: np.ndarray
    by_domain: dict[str, DomainSupport]
    metal_unit: str | None = None  # report.metal_units' unit for the grade, if given

    def table(self) -> pd.DataFrame:
        """``domain, cutoff, tonnes, grade, metal, metal_unit`` (the CSV's rows)."""
        rows = []
        for name, s in self.by_domain.items():
            for metal_unit, factor in metal_units(self.unit, self.metal_unit):
                rows.append(
                    pd.DataFrame(
                        {
                            "domain": name,
                            "cutoff": self.cutoffs,
                            "tonnes": s.curve.tonnes,
                            "grade": s.curve.grade,
                            "metal": s.curve.tonnes * np.nan_to_num(s.curve.grade) * factor,
                            "metal_unit": metal_unit,
                        }
                    )
                )
        return pd.concat(rows, ignore_index=True) if rows else pd.DataFrame()


def support_curves(
    project: Project,
    composites: pd.DataFrame,
    declustering: Declustering,
    models: dict,
    blocks: pd.DataFrame,
    block_size,
    discretisation,
) -> Support:
    """The discrete Gaussian model of each estimated domain (declustered composites, block
    variance from the variogram model, the domain's estimated tonnes) at the report
    cut-offs, and the kriged curve at the same cut-offs.

    Parameters
    ----------
    project, composites, declustering
    models : dict of ``domain.grade`` to VariogramModel
    blocks : DataFrame, the kriged block model
    block_size : (3,) float, metres
        The support of the curve (the grid's block, or a selective mining unit).
    discretisation : (3,) int
        Points per block along x, y, z for the block variance.
    """
    primary = project.grades[0]
    cut = np.asarray(project.report.cutoffs, dtype=float)
    out = {}
    for d in project.domains:
        if not d.estimate:
            continue
        rows = ((composites["domain"] == d.name) & composites[primary].notna()).to_numpy()
        sub = composites[rows]
        b = blocks[(blocks["domain"] == d.name) & np.isfinite(blocks[primary])]
        curve = change_of_support(
            sub[primary].to_numpy(float),
            declustering.weights[rows],
            models[f"{d.name}.{primary}"],
            block_size,
            discretisation,
            cut,
            float(b["tonnes"].sum()),
        )
        grade, tonnes = b[primary].to_numpy(), b["tonnes"].to_numpy()
        kt = np.array([tonnes[grade >= c].sum() for c in cut])
        kg = np.array(
            [
                np.average(grade[grade >= c], weights=tonnes[grade >= c])
                if (grade >= c).any()
                else np.nan
                for c in cut
            ]
        )
        out[d.name] = DomainSupport(d.name, curve, kt, kg)
    return Support(
        primary, project.data.grades[primary], cut, out, project.report.metal_units.get(primary)
    )
