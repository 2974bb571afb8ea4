"""Stage 7: validation of the block model: cross-validation of the composites with the
run's method, swaths of blocks against composites, and the global bias against the
nearest-sample model."""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
import pandas as pd

from blockmodel.assess.validation import CrossValidation, cross_validate, global_bias, swath
from blockmodel.config.project import Project
from blockmodel.estimation.engine import passes_from
from blockmodel.model.grid import BlockGrid
from blockmodel.stages.declustering import Declustering
from blockmodel.stages.tables import class_order

__all__ = ["MIN_VALIDATION_CORRELATION", "DomainValidation", "Validation", "validate"]

MIN_VALIDATION_CORRELATION = 0.3  # below it the model does not predict (common practice)


@dataclass(frozen=True)
class DomainValidation:
    """One domain: cross-validation of its first grade and swaths along x, y and z (bins
    four blocks wide), for all its blocks and for the blocks of each class."""

    domain: str
    cross_validation: CrossValidation
    swaths: dict[str, pd.DataFrame]
    class_swaths: dict[str, dict[str, pd.DataFrame]]


@dataclass(frozen=True)
class Validation:
    """Validation of the run's first grade.

    Attributes
    ----------
    grade : str
    method, leave_out : str
        The run's estimation method; what cross-validation leaves out (hole or sample).
    by_domain : dict of str to DomainValidation
    global_bias : DataFrame
        Tonnage-weighted means of the kriged and nearest-sample models per domain.
    """

    grade: str
    method: str
    leave_out: str
    by_domain: dict[str, DomainValidation]
    global_bias: pd.DataFrame

    def summary(self) -> pd.DataFrame:
        """One row per domain: the cross-validation statistics."""
        return pd.DataFrame(
            [
                {"domain": name, "method": self.method, **v.cross_validation.summary()}
                for name, v in self.by_domain.items()
            ]
        )

    def warnings(self) -> tuple[str, ...]:
        """Domains whose cross-validation re-estimated almost nothing or does not predict."""
        out = []
        for name, v in self.by_domain.items():
            cv = v.cross_validation
            if cv.estimated < 3:
                out.append(
                    f"cross-validation of {self.grade} in '{name}' re-estimated only "
                    f"{cv.estimated} of {cv.total} composites: the search finds too few "
                    "samples once a hole is left out; the model is not validated"
                )
            elif not cv.correlation >= MIN_VALIDATION_CORRELATION:
                out.append(
                    f"cross-validation of {self.grade} in '{name}': correlation of true and "
                    f"estimated grades {cv.correlation:.3f}, below "
                    f"{MIN_VALIDATION_CORRELATION}: the model does not predict the samples "
                    "it leaves out; review the variogram and the search"
                )
        return tuple(out)


def validate(
    project: Project,
    composites: pd.DataFrame,
    models: dict,
    declustering: Declustering,
    grid: BlockGrid,
    blocks: pd.DataFrame,
) -> Validation:
    """Cross-validate every estimated domain with the run's method, mean and search, and
    compute its swaths and the global bias (first grade)."""
    primary = project.grades[0]
    method = project.estimation.method
    out = {}
    for d in project.domains:
        if not d.estimate:
            continue
        rows = ((composites["domain"] == d.name) & composites[primary].notna()).to_numpy()
        sub = composites[rows]
        model = models[f"{d.name}.{primary}"]
        cv = cross_validate(
            sub[["x", "y", "z"]].to_numpy(float),
            sub[primary].to_numpy(float),
            sub["hole"].to_numpy(),
            model,
            passes_from(project.passes_for(d.name), model.orientation),
            leave_out=project.validation.leave_out,
            method=method,
            mean=declustering.by_domain[d.name].declustered_mean[primary]
            if method == "simple"
            else None,
        )
        b = blocks[blocks["domain"] == d.name]
        weights = declustering.weights[rows]
        swaths = {
            a: swath(b, sub, primary, a, 4 * grid.block_size[n], weights)
            for n, a in enumerate("xyz")
        }
        by_class = {}
        present = set(b["class"]) if "class" in b else set()
        for cls in [c for c in class_order(project) if c in present]:
            part = b[b["class"] == cls]
            if np.isfinite(part[primary]).any():
                by_class[cls] = {
                    a: swath(part, sub, primary, a, 4 * grid.block_size[n], weights)
                    for n, a in enumerate("xyz")
                }
        out[d.name] = DomainValidation(d.name, cv, swaths, by_class)
    return Validation(
        primary, method, project.validation.leave_out, out, global_bias(blocks, primary)
    )
