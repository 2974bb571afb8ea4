"""Conditional simulation as a stage: per estimated domain and grade, a Gaussian
framework (declustered normal scores, their variogram), realisations of block grades
conditioned to the domain's composites (hard boundaries, as in estimation), and what the
realisations say per block and per domain and class."""

from __future__ import annotations

import os
import time
from collections.abc import Callable
from dataclasses import dataclass

import numpy as np
import pandas as pd

from blockmodel.assess.uncertainty import block_summary, quantile_bands, realisation_curves
from blockmodel.config.project import Project
from blockmodel.errors import setting_error
from blockmodel.simulation.conditional import plan_simulation, simulate_blocks
from blockmodel.simulation.transform import GaussianTransform, gaussian_transform
from blockmodel.stages.declustering import Declustering
from blockmodel.stages.mining_units import MiningUnits, mining_units
from blockmodel.stages.support import Support, support_curves
from blockmodel.stages.tables import class_order
from blockmodel.stages.variography import Variography, normal_score_model
from blockmodel.variography.models import VariogramModel

__all__ = ["REPRODUCTION_TOLERANCE", "DomainSimulation", "Simulation", "simulate"]

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
        Of the normal scores (total sill 1).
    model_source : str
        ``fitted to the normal scores`` or ``grade model standardised``.
    transform : GaussianTransform
    rows : (b,) int64
        Rows of the block model simulated (the domain's estimated blocks).
    grades : (b, r) float64
        Block grades of every realisation.
    nodes : int
        Simulated nodes: those of the domain's blocks inside its solid (every node of a
        block for a domain placed by codes, or when none of a block's nodes is inside).
    fft_cells : int
        Nodes of the padded grid of the unconditional simulation.
    declustered_mean : float
        Of the composites (grade units), with their declustering weights.
    data : int
        Conditioning composites; ``data_dropped`` of them shared a node with a nearer one.
    data_dropped : int
    blocks_without_inside_nodes : int
        Blocks of the domain none of whose nodes lies inside its solid.
    timings : dict
        Seconds: ``preparation`` (transform, variogram, kriging weights, spectrum),
        ``realisations`` (wall clock of all realisations) and, summed over threads (not on
        a cluster), its parts ``unconditional`` (spectral fields), ``conditioning``
        (kriged residuals) and ``to_blocks`` (back-transform, block averages).
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
    timings: dict[str, float]


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
        """Per domain and grade: the declustered mean of the composites beside the mean
        grade of the simulated blocks (weighted by their tonnes) in each realisation (P10,
        P50, P90), the relative difference of the realisations' average, and whether it
        exceeds :data:`REPRODUCTION_TOLERANCE` (the realisations then do not reproduce the
        declustered distribution: a trend within the domain, or data clustered where the
        declustering does not reach)."""
        rows = []
        for key, s in self.by_key.items():
            tonnes = self.units.table["tonnes"].to_numpy(float)[s.rows]
            means = tonnes @ s.grades / tonnes.sum()
            p10, p50, p90 = np.percentile(means, [10, 50, 90])
            difference = means.mean() / s.declustered_mean - 1.0
            rows.append(
                {
                    "domain.grade": key,
                    "declustered mean": s.declustered_mean,
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


def simulate(
    project: Project,
    composites: pd.DataFrame,
    declustering: Declustering,
    variography: dict[str, Variography],
    grid_origin,
    block_size,
    blocks: pd.DataFrame,
    *,
    realisations: int | None = None,
    seed: int | None = None,
    workers: int | None = None,
    cluster: str = "",
    progress: Callable[[str, int, int], None] | None = None,
) -> Simulation:
    """Simulate every estimated domain and grade.

    Parameters
    ----------
    project : Project
        ``[simulation]`` settings; ``realisations``, ``seed`` and ``workers`` override them.
    composites : DataFrame
        The composites (their domain, position and grades).
    declustering : Declustering
        Weights of the composites, for the normal-score transform.
    variography : dict
        The grade variography per ``domain.grade`` (its orientation and model).
    grid_origin, block_size : (3,) float, metres
    blocks : DataFrame
        The estimated (and classified) block model: ``i, j, k, domain, tonnes`` and the
        grades; blocks whose grade was estimated are simulated, as themselves or as the
        mining units of ``simulation.block_size`` (:func:`mining_units`).
    cluster : str
        Address of a running ``dask.distributed`` scheduler; empty: this machine.
    progress : callable(key, done, total), optional
        Called after each batch of realisations.

    Returns
    -------
    Simulation
    """
    s = project.simulation
    realisations = s.realisations if realisations is None else int(realisations)
    seed = s.seed if seed is None else int(seed)
    workers = s.workers if workers is None else int(workers)
    threads = workers or os.cpu_count() or 1
    units = mining_units(project, blocks, grid_origin, block_size)
    table = units.table
    out = {}
    solids = _solids(project)
    keys = [(d, g) for d in project.domains if d.estimate for g in project.grades]
    for stream, (d, g) in enumerate(keys):
        key = f"{d.name}.{g}"
        start = time.perf_counter()
        rows = np.flatnonzero(
            (table["domain"] == d.name).to_numpy() & np.isfinite(table[g].to_numpy(float))
        )
        if len(rows) == 0:
            continue
        own = ((composites["domain"] == d.name) & composites[g].notna()).to_numpy()
        values = composites.loc[own, g].to_numpy(float)
        maximum = s.maximum.get(key)
        if maximum is not None and maximum < values.max():
            raise setting_error(
                project.source,
                f"simulation.maximum.{key}",
                f"the maximum {maximum:g} is below the largest composite ({values.max():g})",
            )
        scores, transform = gaussian_transform(
            values,
            declustering.weights[own],
            minimum=min(s.minimum, float(values.min())),
            maximum=maximum,
            upper_tail=s.upper_tail,
            omega=s.omega,
        )
        model, source = normal_score_model(
            project, composites[own], declustering.weights[own], variography[key]
        )
        plan = plan_simulation(
            table.iloc[rows][["i", "j", "k"]].to_numpy(np.int64),
            np.asarray(grid_origin, dtype=float),
            units.size,
            units.discretisation,
            composites.loc[own, ["x", "y", "z"]].to_numpy(float),
            scores,
            model,
            transform,
            (seed, stream),
            neighbours=s.neighbours,
            workers=1,
            inside=_inside(project, d.name, solids),
        )
        prepared = time.perf_counter()
        clock: dict[str, float] = {}
        grades = _run(plan, realisations, threads, key, progress, cluster, clock)
        out[key] = DomainSimulation(
            d.name,
            g,
            model,
            source,
            transform,
            rows,
            grades,
            len(plan.targets),
            plan.simulator.cells,
            float(np.average(values, weights=declustering.weights[own])),
            len(values),
            plan.relocated_dropped,
            plan.blocks_without_inside_nodes,
            {
                "preparation": round(prepared - start, 3),
                "realisations": round(time.perf_counter() - prepared, 3),
                **{k: round(v, 3) for k, v in clock.items()},
            },
        )
    cutoffs = np.asarray(project.report.cutoffs, dtype=float)
    support = support_curves(
        project,
        composites,
        declustering,
        {k: v.model for k, v in variography.items()},
        blocks,
        units.size,
        units.discretisation,
    )
    return Simulation(realisations, seed, cutoffs, out, class_order(project), units, support)


def _solids(project: Project) -> dict:
    """The solids (read once) and the topography, for the nodes' domain test."""
    from blockmodel.model.solids import read_solid, read_surface

    out = {d.name: read_solid(d.solid) for d in project.domains if d.solid is not None}
    topo = project.grid.topography
    return {"solids": out, "topography": read_surface(topo) if topo else None}


def _inside(project: Project, name: str, solids: dict):
    """The test of nodes in domain ``name`` (inside its solid, in no solid listed before,
    below the topography), or None for a domain placed by codes."""
    from blockmodel.model.domains import inside_domain
    from blockmodel.model.solids import Lattice

    if project.domain(name).solid is None:
        return None
    order = [d.name for d in project.domains if d.name in solids["solids"]]
    surfaces = [solids["solids"][n] for n in order]

    def test(nodes, flat: np.ndarray) -> np.ndarray:
        (ox, oy, oz), (dx, dy, dz), (nx, ny, _) = nodes.origin, nodes.spacing, nodes.shape
        a, b, c = np.unravel_index(flat, nodes.shape)
        lattice = Lattice(ox, dx, nx, oy, dy, ny)
        return inside_domain(
            lattice, a + nx * b, oz + c * dz, surfaces, order.index(name), solids["topography"]
        )

    return test


def _run(
    plan, realisations: int, threads: int, key: str, progress, cluster: str, clock: dict
) -> np.ndarray:
    """The realisations in batches, progress after each: threads within a batch on this
    machine, or one task per batch on a ``dask.distributed`` cluster (the plan sent to
    every worker once)."""
    size = max(threads, min(10, realisations))
    batches = [(f, min(size, realisations - f)) for f in range(0, realisations, size)]
    parts: dict[int, np.ndarray] = {}
    if cluster:
        try:
            from distributed import Client, as_completed
        except ImportError:
            raise RuntimeError(
                "a cluster needs the 'cluster' extra: pip install 'blockmodel[cluster]'"
            ) from None
        with Client(cluster) as client:
            remote = client.scatter(plan, broadcast=True)
            tasks = {client.submit(simulate_blocks, remote, n, first=f): f for f, n in batches}
            for task in as_completed(tasks):
                parts[tasks[task]] = task.result()
                if progress is not None:
                    progress(key, sum(p.shape[1] for p in parts.values()), realisations)
    else:
        for f, n in batches:
            parts[f] = simulate_blocks(plan, n, threads=threads, first=f, clock=clock)
            if progress is not None:
                progress(key, f + n, realisations)
    return np.concatenate([parts[f] for f, _ in batches], axis=1)
