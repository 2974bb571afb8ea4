"""What a conditional simulation computed: the realisations of each domain and grade, and
what they say per block (or mining unit), per domain and class and per production volume.
Computed by :func:`blockmodel.stages.simulation.simulate`."""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
import pandas as pd

from blockmodel.assess.uncertainty import block_summary, quantile_bands, realisation_curves
from blockmodel.simulation.transform import GaussianTransform
from blockmodel.stages.mining_units import MiningUnits
from blockmodel.stages.support import Support
from blockmodel.variography.models import VariogramModel

__all__ = ["REPRODUCTION_TOLERANCE", "DomainSimulation", "Simulation"]

# Realisations whose mean grade over the domain differs from the declustered mean of its
# composites by more than this fraction are flagged (common practice: a few per cent).
REPRODUCTION_TOLERANCE = 0.05


@dataclass(frozen=True)
class DomainSimulation:
    """The realisations of one domain and grade.

    Attributes
    ----------
    domain, grade : str
    model : VariogramModel
        Of the normal scores, as simulated (its sill: their variance at a point).
    model_source : str
        ``nugget and sills fitted to the normal scores`` or ``the grade model's shape``,
        each followed by the sill found from the composites' variance, or ``given in the
        project file``.
    transform : GaussianTransform
    rows : (b,) int64
        Rows of the block model simulated (the domain's estimated blocks).
    grades : (b, r) float64
        Block grades of every realisation.
    nodes : int
        Simulated nodes: those of the domain's blocks inside the domain (its solid; for a
        domain placed by codes, nearest, within ``grid.code_reach``, to a composite of its
        code), every node of a block none of whose nodes is inside.
    fft_cells : int
        Nodes of the padded grid of the unconditional simulation.
    declustered_mean : float
        Of the composites (grade units), with their declustering weights.
    data : int
        Conditioning composites; ``data_dropped`` of them shared a node with a nearer one.
    data_dropped : int
    blocks_without_inside_nodes : int
        Blocks of the domain none of whose nodes lies inside the domain.
    mean_sd : float
        Standard deviation of each realisation's mean normal score (0: the mean known;
        with model draws: under the first draw).
    timings : dict
        Seconds: ``preparation`` (transform, variogram, kriging weights, spectrum),
        ``realisations`` (wall clock of all realisations) and, summed over threads (not on
        a cluster), its parts ``unconditional`` (spectral fields), ``conditioning``
        (kriged residuals) and ``to_blocks`` (back-transform, block averages); with
        model draws, the bootstrap's refits are in ``preparation`` and the plans of the
        draws after the first in ``model draws`` (inside ``realisations``).
    residual_sd : float
        Standard deviation of the normal scores about a locally varying mean; 1: the mean
        is one number.
    variance_dof : float
        Degrees of freedom of the composites' declustered variance, from which each
        realisation draws the factor on its sill; inf: the sill is known (with model
        draws: under the first draw).
    model_draws : tuple of VariogramModel
        Draws of the normal scores' model (:mod:`blockmodel.simulation.model_uncertainty`);
        realisation r follows draw ``r % len(model_draws)``.  Empty: every realisation
        follows ``model``, taken as known.
    """

    domain: str
    grade: str
    model: VariogramModel
    model_source: str
    transform: GaussianTransform
    rows: np.ndarray
    grades: np.ndarray
    nodes: int
    fft_cells: int
    declustered_mean: float
    data: int
    data_dropped: int
    blocks_without_inside_nodes: int
    mean_sd: float
    timings: dict[str, float]
    residual_sd: float = 1.0
    variance_dof: float = np.inf
    model_draws: tuple[VariogramModel, ...] = ()


@dataclass(frozen=True)
class Simulation:
    """Every domain and grade simulated, with the cut-offs to report at.

    Attributes
    ----------
    realisations, seed : int
    cutoffs : (k,) float64
    by_key : dict of ``domain.grade`` to DomainSimulation
    classes : list of str, confidence order
    units : MiningUnits
        The simulated blocks (the grid's blocks or smaller mining units);
        ``DomainSimulation.rows`` index ``units.table``.
    support : Support
        The change-of-support curves at the units' size, drawn under the bands.
    """

    realisations: int
    seed: int
    cutoffs: np.ndarray
    by_key: dict[str, DomainSimulation]
    classes: list[str]
    units: MiningUnits
    support: Support

    def block_table(self) -> pd.DataFrame:
        """Per simulated block (or unit): position, domain, tonnes, class and, per grade,
        ``<g>_etype, <g>_sim_variance, <g>_p10, <g>_p50, <g>_p90`` and
        ``<g>_above_<cutoff>`` (probability at or above)."""
        keep = ["x", "y", "z", "i", "j", "k", "domain", "tonnes", "class"]
        blocks = self.units.table
        rows = np.unique(np.concatenate([s.rows for s in self.by_key.values()]))
        frame = blocks.iloc[rows][[c for c in keep if c in blocks]].reset_index(drop=True)
        for s in self.by_key.values():  # a grade not simulated in a block stays empty
            at = np.searchsorted(rows, s.rows)
            for name, values in block_summary(s.grades, self.cutoffs).items():
                label = {"mean": "etype", "variance": "sim_variance"}.get(name, name)
                column = f"{s.grade}_{label}"
                if column not in frame:
                    frame[column] = np.nan
                frame.loc[at, column] = values
        return frame

    def realisation_table(self) -> pd.DataFrame:
        """Every realisation's block (or unit) grades, long: ``domain, grade_name, i, j, k,
        realisation, value``."""
        frames = []
        for s in self.by_key.values():
            b = self.units.table.iloc[s.rows]
            n, r = s.grades.shape
            frames.append(
                pd.DataFrame(
                    {
                        "domain": s.domain,
                        "grade_name": s.grade,
                        "i": np.repeat(b["i"].to_numpy(), r),
                        "j": np.repeat(b["j"].to_numpy(), r),
                        "k": np.repeat(b["k"].to_numpy(), r),
                        "realisation": np.tile(np.arange(r), n),
                        "value": s.grades.ravel(),
                    }
                )
            )
        return pd.concat(frames, ignore_index=True)

    def reproduction(self) -> pd.DataFrame:
        """Per domain and grade: the declustered mean of the composites and the kriged mean
        of the simulated blocks beside the mean grade of those blocks (each weighted by its
        tonnes) in each realisation (P10, P50, P90), the relative difference of the
        realisations' average from the declustered mean, and whether it
        exceeds :data:`REPRODUCTION_TOLERANCE` (the realisations then do not reproduce the
        declustered distribution: a trend within the domain, or data clustered where the
        declustering does not reach)."""
        rows = []
        for key, s in self.by_key.items():
            tonnes = self.units.table["tonnes"].to_numpy(float)[s.rows]
            kriged = self.units.table[s.grade].to_numpy(float)[s.rows]
            means = tonnes @ s.grades / tonnes.sum()
            p10, p50, p90 = np.percentile(means, [10, 50, 90])
            difference = means.mean() / s.declustered_mean - 1.0
            rows.append(
                {
                    "domain.grade": key,
                    "declustered mean": s.declustered_mean,
                    "kriged mean": float(tonnes @ kriged / tonnes.sum()),
                    "realisations P10": p10,
                    "realisations P50": p50,
                    "realisations P90": p90,
                    "difference": difference,
                    "flagged": bool(abs(difference) > REPRODUCTION_TOLERANCE),
                }
            )
        return pd.DataFrame(rows)

    def curves(self, grade: str) -> dict[tuple[str, str], tuple]:
        """Tonnes and metal (tonnes x grade units) above each cut-off in every realisation,
        (r, k) each, per (domain, class) with ``all`` totals; realisation r of every
        domain adds up to realisation r of the total."""
        out: dict[tuple[str, str], list] = {}
        for s in self.by_key.values():
            if s.grade != grade:
                continue
            b = self.units.table.iloc[s.rows]
            tonnes = b["tonnes"].to_numpy(float)
            classes = b["class"].to_numpy() if "class" in b else np.full(len(b), "all")
            groups = [("all", np.ones(len(b), dtype=bool))]
            groups += [(c, classes == c) for c in self.classes if (classes == c).any()]
            for cls, mask in groups:
                t, m = realisation_curves(tonnes[mask], s.grades[mask], self.cutoffs)
                for key in ((s.domain, cls), ("all", cls)):
                    if key in out:
                        out[key][0] = out[key][0] + t
                        out[key][1] = out[key][1] + m
                    else:
                        out[key] = [t, m]
        return {k: tuple(v) for k, v in out.items()}

    def grade_tonnage(self, grade: str) -> pd.DataFrame:
        """Per domain, class and cut-off: P10, P50, P90, mean and coefficient of variation
        of the tonnes, grade and metal (tonnes x grade units) over the realisations."""
        rows = []
        order = {c: n for n, c in enumerate(["all", *self.classes])}
        keys = sorted(
            self.curves(grade).items(),
            key=lambda kv: (kv[0][0] != "all", kv[0][0], order.get(kv[0][1], 99)),
        )
        for (domain, cls), (t, m) in keys:
            with np.errstate(invalid="ignore", divide="ignore"):
                g = np.where(t > 0, m / t, np.nan)
            bands = {
                "tonnes": quantile_bands(t),
                "grade": quantile_bands(g),
                "metal": quantile_bands(m),
            }
            for n, c in enumerate(self.cutoffs):
                row = {"domain": domain, "class": cls, "cutoff": float(c)}
                for quantity, b in bands.items():
                    for stat, values in b.items():
                        row[f"{quantity}_{stat}"] = float(values[n])
                rows.append(row)
        return pd.DataFrame(rows)

    def volumes(self, volumes, grade: str, cutoffs: dict[str, float]) -> pd.DataFrame:
        """Per production volume: tonnes, grade and metal at or above each domain's
        statement cut-off, summed over the domains realisation by realisation, as P10,
        P50, P90, mean and coefficient of variation over the realisations, beside the
        kriged figures (each block's or unit's kriged grade at its tonnes).

        Parameters
        ----------
        volumes : sequence of ProductionVolume
            Boxes; a block or unit belongs to one when ``low <= centre < high``.
        grade : str
        cutoffs : dict of domain to its statement cut-off (grade units)
        """
        table = self.units.table
        centres = table[["x", "y", "z"]].to_numpy(float)
        tonnes_all = table["tonnes"].to_numpy(float)
        kriged_all = table[grade].to_numpy(float)
        rows = []
        for v in volumes:
            inside = np.all((centres >= v.low) & (centres < v.high), axis=1)
            t = np.zeros(self.realisations)
            m = np.zeros(self.realisations)
            kt = km = 0.0
            count = 0
            for s in self.by_key.values():
                sel = s.rows[inside[s.rows]] if s.grade == grade else s.rows[:0]
                if len(sel) == 0:
                    continue
                z = s.grades[inside[s.rows]]
                tonnes, cut = tonnes_all[sel], cutoffs[s.domain]
                t += tonnes @ (z >= cut)
                m += tonnes @ np.where(z >= cut, z, 0.0)
                above = kriged_all[sel] >= cut
                kt += tonnes[above].sum()
                km += (tonnes * kriged_all[sel])[above].sum()
                count += len(sel)
            with np.errstate(invalid="ignore", divide="ignore"):
                g = np.where(t > 0, m / t, np.nan)
            row = {"volume": v.name, "blocks": count}
            for quantity, values in (("tonnes", t), ("grade", g), ("metal", m)):
                for stat, value in quantile_bands(values[:, None]).items():
                    row[f"{quantity}_{stat}"] = float(value[0])
            row["kriged_tonnes"] = kt
            row["kriged_grade"] = km / kt if kt > 0 else np.nan
            row["kriged_metal"] = km
            rows.append(row)
        return pd.DataFrame(rows)
