"""Kriging neighbourhood analysis as a stage: per estimated domain, the drill spacing,
three representative test blocks (and any the user gives), and the figures of each test
block kriged under sweeps of the search and block settings, one at a time, the others at
the project's values (:mod:`blockmodel.assess.neighbourhood` for the method)."""

from __future__ import annotations

import dataclasses
from collections.abc import Sequence
from dataclasses import dataclass

import numpy as np
import pandas as pd

from blockmodel.assess.neighbourhood import (
    ADEQUATE_FRACTION,
    TestBlock,
    adequate_index,
    choose_test_blocks,
    drill_spacing,
)
from blockmodel.config.project import Project
from blockmodel.estimation.engine import passes_from
from blockmodel.estimation.kriging import estimate
from blockmodel.stages.declustering import Declustering
from blockmodel.stages.domain_model import DomainModel
from blockmodel.stages.estimate import require_search

__all__ = ["FIGURES", "SWEEPS", "DomainNeighbourhood", "Neighbourhood", "neighbourhood_analysis"]

# sweep name -> (axis label, settings tried); each sweep also holds the project's value
SWEEPS = {
    "max_samples": ("most samples", (4, 6, 8, 12, 16, 20, 24, 32, 40, 48)),
    "min_samples": ("fewest samples", (1, 2, 3, 4, 6, 8, 10, 12)),
    "ranges": ("search radii (× variogram ranges)", (0.5, 0.75, 1.0, 1.5, 2.0, 3.0)),
    "max_per_hole": ("most samples per hole (0: no limit)", (0, 1, 2, 3, 4, 6, 8)),
    "max_per_octant": ("most samples per octant (0: no limit)", (0, 1, 2, 3, 4, 6)),
    "discretisation": (
        "discretisation (points per block)",
        ((1, 1, 1), (2, 2, 1), (2, 2, 2), (3, 3, 2), (4, 4, 2), (5, 5, 3), (6, 6, 4)),
    ),
    "block_size": ("block size along x and y (× drill spacing)", (0.5, 1.0, 1.5, 2.0, 3.0, 4.0)),
}
# sweeps read for where the figures stop improving (the others are read as they are)
ORDERED = ("max_samples", "ranges", "discretisation", "block_size")
FIGURES = (
    "pass",
    "samples",
    "holes",
    "slope",
    "efficiency",
    "variance",
    "negative_sum",
    "negative_count",
    "weight_of_mean",
)


@dataclass(frozen=True)
class DomainNeighbourhood:
    """One domain's analysis.

    Attributes
    ----------
    domain, grade : str
    spacing : float, metres
        Median hole spacing in the plane of continuity.
    blocks : tuple of TestBlock
    table : DataFrame
        One row per test block and sweep point: ``block, x, y, z, sweep, setting, value,
        current`` and the figures ``pass, samples, holes, slope, efficiency, variance,
        negative_sum, negative_count, weight_of_mean`` (NaN where not estimated).
    summary : DataFrame
        Per test block and ordered sweep: the smallest adequate setting, the project's
        setting and their figures, and a verdict in words.
    """

    domain: str
    grade: str
    spacing: float
    blocks: tuple[TestBlock, ...]
    table: pd.DataFrame
    summary: pd.DataFrame


@dataclass(frozen=True)
class Neighbourhood:
    """The analysis of every estimated domain."""

    by_domain: dict[str, DomainNeighbourhood]
    warnings: tuple[str, ...] = ()
    fraction: float = ADEQUATE_FRACTION

    def table(self) -> pd.DataFrame:
        """All figures (the rows of ``neighbourhood.csv``), with a ``domain`` column first."""
        frames = [d.table.assign(domain=name) for name, d in self.by_domain.items()]
        if not frames:
            return pd.DataFrame()
        out = pd.concat(frames, ignore_index=True)
        return out[["domain", *[c for c in out.columns if c != "domain"]]]


def _setting_text(sweep: str, value) -> str:
    if sweep == "discretisation":
        return "x".join(str(v) for v in value)
    if sweep in ("max_per_hole", "max_per_octant") and not value:
        return "no limit"
    return f"{value:.3g}" if isinstance(value, float) else str(value)


def _x_value(sweep: str, value) -> float:
    if sweep == "discretisation":
        return float(np.prod(value))
    return float(value or 0)


def _points(project: Project, domain: str, model, spacing: float):
    """Every sweep point of a domain: (sweep, setting, x, current, first pass, block size,
    discretisation); the project's own setting is in every sweep, marked current."""
    first = project.passes_for(domain)[0]
    block = tuple(project.grid.block_size)
    disc = tuple(project.estimation.discretisation)
    widest = np.max([s.ranges for s in model.structures], axis=0) if model.structures else None
    current = {
        "max_samples": first.max_samples,
        "min_samples": first.min_samples,
        "ranges": float(first.ranges[0] / widest[0]) if widest is not None else 1.0,
        "max_per_hole": first.max_per_hole or 0,
        "max_per_octant": first.max_per_octant or 0,
        "discretisation": disc,
        "block_size": block[0] / spacing if np.isfinite(spacing) else 1.0,
    }
    for sweep, (_, values) in SWEEPS.items():
        if sweep == "block_size" and not np.isfinite(spacing):
            continue
        if sweep == "ranges" and widest is None:
            continue
        tried = [(v, False) for v in values if v != current[sweep]] + [(current[sweep], True)]
        tried.sort(key=lambda t: _x_value(sweep, t[0]))
        for value, is_current in tried:
            p, b, d = first, block, disc
            if not is_current:
                if sweep == "max_samples":
                    p = dataclasses.replace(
                        first, max_samples=value, min_samples=min(first.min_samples, value)
                    )
                elif sweep == "min_samples":
                    if value > first.max_samples:
                        continue
                    p = dataclasses.replace(first, min_samples=value)
                elif sweep == "ranges":
                    p = dataclasses.replace(first, ranges=tuple(float(r) for r in value * widest))
                elif sweep == "max_per_hole":
                    p = dataclasses.replace(first, max_per_hole=value or None)
                elif sweep == "max_per_octant":
                    p = dataclasses.replace(first, max_per_octant=value or None)
                elif sweep == "discretisation":
                    d = value
                else:
                    b = (value * spacing, value * spacing, block[2])
            yield sweep, _setting_text(sweep, value), _x_value(sweep, value), is_current, p, b, d


def neighbourhood_analysis(
    project: Project,
    composites: pd.DataFrame,
    models: dict,
    domains: DomainModel,
    declustering: Declustering,
    *,
    given: Sequence[Sequence[float]] = (),
) -> Neighbourhood:
    """Kriging neighbourhood analysis of the first grade in every estimated domain.

    Parameters
    ----------
    project : Project
    composites : DataFrame
        The composites table (not changed).
    models : dict of ``domain.grade`` to VariogramModel
    domains : DomainModel
    declustering : Declustering
        Its declustered means are the simple-kriging means.
    given : sequence of (x, y, z), metres
        Test blocks given by the user: the block holding each point, analysed in the
        domain with the largest share of it.
    """
    require_search(project)
    grade = project.grades[0]
    e = project.estimation
    grid = domains.grid
    warnings = []
    for n, point in enumerate(given, start=1):
        flat = int(grid.block_of(np.asarray([point], dtype=np.float64))[0])
        share = domains.proportions[flat] if flat >= 0 else np.zeros(1)
        where = "outside the block grid" if flat < 0 else "in no domain"
        if flat >= 0 and share.max() > 0:
            d = project.domains[int(np.argmax(share))]
            if d.estimate:
                continue
            where = f"in domain '{d.name}', which is not estimated"
        warnings.append(
            f"test block given {n} at {tuple(float(v) for v in point)} lies {where}: not analysed"
        )
    out = {}
    for d_index, d in enumerate(project.domains):
        if not d.estimate:
            continue
        model = models[f"{d.name}.{grade}"]
        own = composites[(composites["domain"] == d.name) & composites[grade].notna()]
        source = (
            composites if e.boundaries == "soft" else composites[composites["domain"] == d.name]
        )
        source = source[source[grade].notna()]
        orientation = model.orientation
        spacing = drill_spacing(
            own[["x", "y", "z"]].to_numpy(float), own["hole"].to_numpy(), orientation
        )
        flat = np.flatnonzero(domains.proportions[:, d_index] > 0)
        if len(flat) == 0 or len(own) == 0:
            continue
        blocks = choose_test_blocks(
            grid.centres(flat),
            own[["x", "y", "z"]].to_numpy(float),
            own["hole"].to_numpy(),
            spacing if np.isfinite(spacing) else float(np.max(grid.block_size)),
        )
        blocks += _given_blocks(given, grid, domains, d_index, own)
        mean = None
        if e.method == "simple":
            mean = declustering.by_domain[d.name].declustered_mean[grade]
        centres = np.array([b.centre for b in blocks])
        rows = []
        for sweep, setting, x, current, first, block, disc in _points(
            project, d.name, model, spacing
        ):
            passes = passes_from((first, *project.passes_for(d.name)[1:]), orientation)
            res = estimate(
                source[["x", "y", "z"]].to_numpy(float),
                source[grade].to_numpy(float),
                centres,
                model,
                passes,
                method=e.method,
                mean=mean,
                block_size=block,
                discretisation=disc,
                hole_ids=source["hole"].to_numpy(),
            )
            for n, b in enumerate(blocks):
                done = res["search_pass"][n] > 0
                rows.append(
                    {
                        "block": b.label,
                        "x": b.centre[0],
                        "y": b.centre[1],
                        "z": b.centre[2],
                        "sweep": sweep,
                        "setting": setting,
                        "value": x,
                        "current": current,
                        "pass": int(res["search_pass"][n]),
                        "samples": int(res["n_samples"][n]),
                        "holes": int(res["n_holes"][n]),
                        "slope": res["slope"][n],
                        "efficiency": res["efficiency"][n],
                        "variance": res["variance"][n],
                        "negative_sum": res["negative_weights"][n],
                        "negative_count": res["negative_count"][n],
                        "weight_of_mean": 1.0 - res["weight_sum"][n]
                        if e.method == "simple" and done
                        else float("nan"),
                    }
                )
        table = pd.DataFrame(rows)
        out[d.name] = DomainNeighbourhood(
            d.name, grade, spacing, tuple(blocks), table, _summary(table)
        )
    return Neighbourhood(out, tuple(warnings))


def _given_blocks(given, grid, domains: DomainModel, d_index: int, own) -> list[TestBlock]:
    """The user's test blocks that fall in this domain (by their largest share)."""
    from scipy.spatial import cKDTree

    out = []
    for n, point in enumerate(given, start=1):
        flat = int(grid.block_of(np.asarray([point], dtype=np.float64))[0])
        if flat < 0 or domains.proportions[flat].max() <= 0:
            continue
        if int(np.argmax(domains.proportions[flat])) != d_index:
            continue
        centre = grid.centres(np.array([flat]))[0]
        nearest = float(cKDTree(own[["x", "y", "z"]].to_numpy(float)).query(centre)[0])
        out.append(TestBlock(f"given {n}", centre, 0, nearest))
    return out


def _summary(table: pd.DataFrame) -> pd.DataFrame:
    """For each ordered sweep and test block: the smallest setting within the adequate
    fraction of the best slope and efficiency, beside the project's setting, with a
    verdict in words."""
    rows = []
    for (block, sweep), part in table.groupby(["block", "sweep"], sort=False):
        if sweep not in ORDERED:
            continue
        i = adequate_index(part["slope"].to_numpy(float), part["efficiency"].to_numpy(float))
        now = part[part["current"]].iloc[0]
        row = {
            "block": block,
            "setting": SWEEPS[sweep][0],
            "project": now["setting"],
            "project slope": now["slope"],
            "project efficiency": now["efficiency"],
        }
        if i is None:
            rows.append({**row, "verdict": "not estimated at any setting"})
            continue
        at = part.iloc[i]
        enough = at["value"] <= now["value"]
        rows.append(
            {
                **row,
                "adequate from": at["setting"],
                "slope there": at["slope"],
                "efficiency there": at["efficiency"],
                "verdict": "the project's setting is enough"
                if enough
                else ("the project's setting is below it: slope or efficiency still improve"),
            }
        )
    return pd.DataFrame(rows)
