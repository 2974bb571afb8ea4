"""Stage 3: declustering weights of the composites and the statistics they give."""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
import pandas as pd

from blockmodel.assess.declustering import (
    CellDeclustering,
    cell_declustering,
    hole_spacing,
    nearest_neighbour_weights,
    weighted_quantiles,
)
from blockmodel.config.project import Project
from blockmodel.errors import setting_error
from blockmodel.stages.domain_model import DomainModel

__all__ = ["QUANTILES", "Declustering", "DomainDeclustering", "decluster"]

QUANTILES = np.array([0.1, 0.25, 0.5, 0.75, 0.9, 0.95])


@dataclass(frozen=True)
class DomainDeclustering:
    """One domain's declustering: its weights, the cell sweep (cell method) and the
    naive and declustered statistics per grade (quantiles at :data:`QUANTILES`)."""

    weights: np.ndarray
    cell: CellDeclustering | None
    composites: int
    naive_mean: dict[str, float]
    declustered_mean: dict[str, float]
    declustered_variance: dict[str, float]
    declustered_quantiles: dict[str, np.ndarray]
    unweighted: str = ""  # why the domain's composites keep equal weights, if they do


@dataclass(frozen=True)
class Declustering:
    """Declustering of every domain.

    Attributes
    ----------
    by_domain : dict of str to DomainDeclustering
    weights : (n,) float64
        Weight of each composite, in the order of the composites table (1 outside the
        domains).
    """

    by_domain: dict[str, DomainDeclustering]
    weights: np.ndarray

    def warnings(self) -> list[str]:
        """Domains whose composites could not be declustered by the rule asked for."""
        return [
            f"declustering of domain '{name}': {d.unweighted}; set its declustering.keep "
            "to given_size to decluster it"
            for name, d in self.by_domain.items()
            if d.unweighted
        ]

    def table(self, grades) -> pd.DataFrame:
        """One row per domain and grade: count, cell size kept, means, variance, quantiles."""
        rows = []
        for name, d in self.by_domain.items():
            for g in grades:
                quantiles = d.declustered_quantiles.get(g, np.full(len(QUANTILES), np.nan))
                rows.append(
                    {
                        "domain": name,
                        "grade": g,
                        "composites": d.composites,
                        "cell_size": d.cell.chosen_size if d.cell else float("nan"),
                        "naive_mean": d.naive_mean[g],
                        "declustered_mean": d.declustered_mean[g],
                        "declustered_variance": d.declustered_variance.get(g, float("nan")),
                        **{
                            f"declustered_p{round(100 * q)}": v
                            for q, v in zip(QUANTILES, quantiles, strict=True)
                        },
                    }
                )
        return pd.DataFrame(rows)


def decluster(
    project: Project, composites: pd.DataFrame, domains: DomainModel | None = None
) -> Declustering:
    """Declustering weights per domain by its method (its own or the project's).

    Parameters
    ----------
    project : Project
    composites : DataFrame
        The composites table (not changed).
    domains : DomainModel, optional
        Needed by nearest-neighbour declustering (weights from the blocks).
    """
    weights = np.ones(len(composites))
    out = {}
    primary = project.grades[0]
    for d_index, d in enumerate(project.domains):
        rows = np.flatnonzero((composites["domain"] == d.name).to_numpy())
        if len(rows) == 0:
            continue
        s = project.declustering_for(d.name)
        sweep = s.cell_sizes
        sizes = np.linspace(sweep.smallest, sweep.largest, sweep.count)
        part = composites.iloc[rows]
        pts = part[["x", "y", "z"]].to_numpy(float)
        vals = part[primary].to_numpy(float)
        ok = np.isfinite(vals)
        cell = None
        w = np.ones(len(rows))
        unweighted = ""
        keep, size = s.keep, s.given_size
        if s.method == "cell" and ok.sum() > 1 and keep == "hole_spacing":
            try:
                keep, size = "given_size", hole_spacing(pts[ok], part["hole"].to_numpy()[ok])
            except ValueError as exc:
                unweighted = f"{exc}: its composites keep equal weights"
        if s.method == "cell" and ok.sum() > 1 and not unweighted:
            cell = cell_declustering(
                pts[ok],
                vals[ok],
                sizes,
                cell_shape=s.cell_shape,
                grid_shifts=s.grid_shifts,
                keep=keep,
                given_size=size,
            )
            w[ok] = cell.weights
        elif s.method == "nearest":
            if domains is None:
                raise ValueError("nearest-neighbour declustering needs the domain model")
            flat = np.flatnonzero(domains.proportions[:, d_index] > 0)
            if len(flat) == 0:
                own = f"domains[{d_index}]." if d.declustering is not None else ""
                raise setting_error(
                    project.source,
                    f"{own}declustering.method",
                    f"nearest-neighbour declustering of domain '{d.name}' needs blocks of the "
                    "domain in the grid, and there are none",
                )
            w = nearest_neighbour_weights(pts, domains.grid.centres(flat))
        weights[rows] = w
        naive, decl, var, quant = {}, {}, {}, {}
        for g in project.grades:
            v = part[g].to_numpy(float)
            f = np.isfinite(v)
            naive[g] = float(v[f].mean()) if f.any() else float("nan")
            decl[g] = float(w[f] @ v[f] / w[f].sum()) if f.any() else float("nan")
            if f.any():
                var[g] = float(w[f] @ (v[f] - decl[g]) ** 2 / w[f].sum())
                quant[g] = weighted_quantiles(v[f], w[f], QUANTILES)
        out[d.name] = DomainDeclustering(w, cell, len(rows), naive, decl, var, quant, unweighted)
    return Declustering(out, weights)
