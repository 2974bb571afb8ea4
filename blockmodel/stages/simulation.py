"""Conditional simulation as a stage: per estimated domain and grade, a Gaussian
framework (declustered normal scores, their variogram and, unless it is taken as known,
draws of that variogram by a bootstrap of its fit), realisations of block grades
conditioned to the domain's composites (hard boundaries, as in estimation), and what the
realisations say per block and per domain and class."""

from __future__ import annotations

import functools
import os
import time
from collections.abc import Callable

import numpy as np
import pandas as pd

from blockmodel.config.project import Project
from blockmodel.errors import InputError, setting_error
from blockmodel.simulation.conditional import plan_simulation, simulate_blocks
from blockmodel.simulation.dispersion import dispersion_sill
from blockmodel.simulation.model_uncertainty import centred_models, gaussian_at_points
from blockmodel.simulation.transform import gaussian_transform
from blockmodel.stages.declustering import Declustering
from blockmodel.stages.domain_model import code_partition
from blockmodel.stages.mining_units import mining_units
from blockmodel.stages.simulation_results import (
    REPRODUCTION_TOLERANCE,
    DomainSimulation,
    Simulation,
)
from blockmodel.stages.support import support_curves
from blockmodel.stages.tables import class_order
from blockmodel.stages.variography import Variography, normal_score_model, scaled_model
from blockmodel.variography.models import VariogramModel

__all__ = ["REPRODUCTION_TOLERANCE", "DomainSimulation", "Simulation", "simulate"]

# the stream of the model's bootstrap draws, apart from the realisations' (``r``, then
# ``r, 1`` for the mean and ``r, 2`` for the sill)
MODEL_STREAM = 2**31


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
        The composites (their domain, position and grades; a capped grade ``g`` with its
        values before capping in ``g_uncapped``, which the realisations reproduce unless
        ``simulation.capped_grades``).
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
        column = g if s.capped_grades or f"{g}_uncapped" not in composites else f"{g}_uncapped"
        values = composites.loc[own, column].to_numpy(float)
        maximum = s.maximum.get(key)
        if maximum is not None and maximum < values.max():
            raise setting_error(
                project.source,
                f"simulation.maximum.{key}",
                f"the maximum {maximum:g} is below the largest composite ({values.max():g}"
                f"{', before capping' if column != g else ''})",
            )
        weights = declustering.weights[own]
        scores, transform = gaussian_transform(
            values,
            weights,
            minimum=min(s.minimum, float(values.min())),
            maximum=maximum,
            upper_tail=s.upper_tail,
            omega=s.omega,
        )
        model, source = normal_score_model(project, composites[own], weights, variography[key])
        window = s.local_mean_window.get(key, 0.0)
        if window > 0.0 and not model.structures:
            raise setting_error(
                project.source,
                f"simulation.local_mean_window.{key}",
                f"the normal scores' model of {key} is a pure nugget: no ranges to scale "
                "the window by",
            )
        points = composites.loc[own, ["x", "y", "z"]].to_numpy(float)
        shape = model
        if window == 0.0 and key not in s.models:
            model, source = _sill_from_data(project, key, model, source, points, weights)
        plan_of = functools.partial(  # the plan under a given model
            plan_simulation,
            blocks=table.iloc[rows][["i", "j", "k"]].to_numpy(np.int64),
            grid_origin=np.asarray(grid_origin, dtype=float),
            block_size=units.size,
            discretisation=units.discretisation,
            data=points,
            scores=scores,
            transform=transform,
            seed=(seed, stream),
            neighbours=s.neighbours,
            workers=1,
            inside=_inside(project, d.name, solids, composites),
            weights=weights,
            mean_uncertainty=s.mean_uncertainty,
            variance_uncertainty=s.variance_uncertainty,
            local_mean_window=window,
        )
        drawn: list[VariogramModel] = []
        if s.model_draws > 1 and key not in s.models and s.model == "fit" and model.structures:
            drawn = _model_draws(
                project,
                key,
                (shape, model),
                composites[own],
                weights,
                variography[key],
                (seed, stream),
                scaled=window == 0.0,
            )
        # draws that differ in their nugget and sills only share the rest of their plans
        shared: dict | None = {} if len(drawn) > 1 and not s.draw_ranges else None
        plan = plan_of(model=drawn[0] if drawn else model, shared=shared)
        prepared = time.perf_counter()
        clock: dict[str, float] = {}
        later = [functools.partial(plan_of, model=m, like=plan, shared=shared) for m in drawn[1:]]
        grades = _run([plan, *later], realisations, threads, key, progress, cluster, clock)
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
            float(np.average(values, weights=weights)),
            len(values),
            plan.relocated_dropped,
            plan.blocks_without_inside_nodes,
            plan.mean_sd,
            {
                "preparation": round(prepared - start, 3),
                "realisations": round(time.perf_counter() - prepared, 3),
                **{k: round(v, 3) for k, v in clock.items()},
            },
            plan.residual_sd,
            plan.variance_dof,
            tuple(drawn),
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


def _sill_from_data(project: Project, key: str, model, source: str, points, weights):
    """The normal scores' model (total sill 1) scaled to the sill at which its variance
    among the domain's composites is theirs, 1 (:mod:`blockmodel.simulation.dispersion`),
    and its source saying so."""
    try:
        sill = dispersion_sill(points, weights, model)
    except ValueError as exc:
        raise setting_error(
            project.source,
            f"simulation.models.{key}",
            f"{exc}; give {key} a local mean (simulation.local_mean_window) or its "
            "normal-score model",
        ) from None
    return scaled_model(model, sill), f"{source}; sill {sill:.2f}, the composites' variance"


def _model_draws(
    project: Project,
    key: str,
    fitted: tuple[VariogramModel, VariogramModel],
    composites: pd.DataFrame,
    weights: np.ndarray,
    grade: Variography,
    seed: tuple[int, int],
    *,
    scaled: bool,
) -> list[VariogramModel]:
    """``simulation.model_draws`` draws of the normal scores' model of ``key``
    (:mod:`blockmodel.simulation.model_uncertainty`): Gaussian values drawn at the
    composites under the model as simulated (``fitted[1]``), from
    ``default_rng([*seed, MODEL_STREAM])``, each fitted as the data were
    (:func:`normal_score_model`; with ``simulation.draw_ranges`` the ranges fitted too),
    the refits' deviations added to the fitted shape
    (``fitted[0]``, total sill 1) and, when ``scaled``, each draw's sill set from the
    composites' variance as the fitted model's was."""
    draws = project.simulation.model_draws
    points = composites[["x", "y", "z"]].to_numpy(float)
    rng = np.random.default_rng([*seed, MODEL_STREAM])
    try:
        values = gaussian_at_points(points, fitted[1], draws, rng)
    except (ValueError, np.linalg.LinAlgError) as exc:
        raise setting_error(
            project.source,
            "simulation.model_draws",
            f"{key}: cannot draw values at the composites for the model's bootstrap ({exc}); "
            "set simulation.model_draws = 0 to take the model as known",
        ) from None
    frame = composites.copy()
    refits = []
    for n, y in enumerate(values):
        frame[grade.grade] = y
        try:
            refit = normal_score_model(
                project, frame, weights, grade, fit_ranges=project.simulation.draw_ranges
            )
            refits.append(refit[0])
        except InputError as exc:  # a refit that fails is the bootstrap's, not the data's
            problem = exc.problems[0].problem
            raise setting_error(
                project.source,
                "simulation.model_draws",
                f"{key}: the fit of bootstrap draw {n + 1} failed ({problem}); set "
                "simulation.model_draws = 0 to take the model as known",
            ) from None
    longest = float(np.linalg.norm(np.ptp(points, axis=0)))  # the fit's bound
    out = centred_models(fitted[0], refits, grade.model.structures, longest=longest)
    if not scaled:
        return out
    try:
        return [scaled_model(m, dispersion_sill(points, weights, m)) for m in out]
    except ValueError as exc:
        raise setting_error(
            project.source,
            "simulation.model_draws",
            f"{key}: a draw of the model ({exc}); set simulation.draw_ranges = false to "
            "keep the fitted ranges, simulation.model_draws = 0 to take the model as known, "
            "or give the model in simulation.models",
        ) from None


def _solids(project: Project) -> dict:
    """The solids (read once) and the topography, for the nodes' domain test."""
    from blockmodel.model.solids import read_solid, read_surface

    out = {d.name: read_solid(d.solid) for d in project.domains if d.solid is not None}
    topo = project.grid.topography
    return {"solids": out, "topography": read_surface(topo) if topo else None}


def _inside(project: Project, name: str, solids: dict, composites: pd.DataFrame):
    """The test of nodes in domain ``name``, as its blocks' proportions were found: inside
    its solid and in no solid listed before it, or, for a domain placed by codes, in no
    solid and nearest (within ``grid.code_reach``) to a composite of its code; below the
    topography."""
    from blockmodel.model.domains import inside_domain
    from blockmodel.model.solids import Lattice

    order = [d.name for d in project.domains if d.name in solids["solids"]]
    surfaces = [solids["solids"][n] for n in order]
    coded = project.domain(name).solid is None
    code_of = code_partition(composites, project.grid.code_reach) if coded else None
    which = None if coded else order.index(name)

    def test(nodes, flat: np.ndarray) -> np.ndarray:
        (ox, oy, oz), (dx, dy, dz), (nx, ny, _) = nodes.origin, nodes.spacing, nodes.shape
        a, b, c = np.unravel_index(flat, nodes.shape)
        lattice = Lattice(ox, dx, nx, oy, dy, ny)
        keep = inside_domain(
            lattice, a + nx * b, oz + c * dz, surfaces, which, solids["topography"]
        )
        if coded:
            keep &= code_of(nodes.centres(flat)) == name
        return keep

    return test


def _run(
    plans: list, realisations: int, threads: int, key: str, progress, cluster: str, clock: dict
) -> np.ndarray:
    """The realisations in batches, progress after each: threads within a batch on this
    machine, or one task per batch on a ``dask.distributed`` cluster (each plan sent to
    every worker once).  ``plans[k]`` (the first a plan, the others callables making one,
    each made when its turn comes and let go after it) computes realisations ``k, k + K,
    ...`` of ``K = len(plans)``; the seconds of making them go to ``clock["model draws"]``."""
    step = len(plans)
    size = max(threads, min(10, realisations))
    out = np.empty((0, realisations))
    done = 0
    for k, plan in enumerate(plans[:realisations]):
        if callable(plan):
            start = time.perf_counter()
            plan = plan()
            clock["model draws"] = clock.get("model draws", 0.0) + time.perf_counter() - start
        which = np.arange(k, realisations, step)
        batches = [(which[f], min(size, len(which) - f)) for f in range(0, len(which), size)]
        parts = _batches(
            plan, batches, step, threads, cluster, clock, key, progress, done, realisations
        )
        if k == 0:
            out = np.empty((parts.shape[0], realisations))
        out[:, which] = parts
        done += len(which)
    return out


def _batches(plan, batches, step, threads, cluster, clock, key, progress, done, total):
    """The realisations of one plan, batch by batch: (b, n) in the batches' order."""
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
            tasks = {
                client.submit(simulate_blocks, remote, n, first=f, step=step): f for f, n in batches
            }
            for task in as_completed(tasks):
                parts[tasks[task]] = task.result()
                if progress is not None:
                    progress(key, done + sum(p.shape[1] for p in parts.values()), total)
    else:
        for f, n in batches:
            parts[f] = simulate_blocks(plan, n, threads=threads, first=f, step=step, clock=clock)
            done += n
            if progress is not None:
                progress(key, done, total)
    return np.concatenate([parts[f] for f, _ in batches], axis=1)
