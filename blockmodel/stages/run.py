"""The run: the stages called in order, their results collected for rendering."""

from __future__ import annotations

import dataclasses
import time
from collections.abc import Callable
from contextlib import contextmanager
from dataclasses import dataclass, field

import pandas as pd

from blockmodel.config.project import Project
from blockmodel.stages.checks import estimate_warnings
from blockmodel.stages.composites import Composites, load_and_composite
from blockmodel.stages.declustering import Declustering, decluster
from blockmodel.stages.domain_model import DomainModel, build_domain_model
from blockmodel.stages.estimate import classify, estimate_block_model
from blockmodel.stages.neighbourhood import Neighbourhood, neighbourhood_analysis
from blockmodel.stages.simulation import Simulation, simulate
from blockmodel.stages.support import Support, support_curves
from blockmodel.stages.tables import (
    TruthCheck,
    grade_tonnage_tables,
    statement_tables,
    truth_check,
)
from blockmodel.stages.validation import Validation, validate
from blockmodel.stages.variography import Variography, variography

__all__ = ["EngineOptions", "RunResults", "Steps", "run_stages", "simulate_results"]


@dataclass(frozen=True)
class EngineOptions:
    """Where the estimation runs; None keeps the project's ``[estimation]`` setting."""

    backend: str | None = None
    workers: int | None = None
    chunk_size: int | None = None
    cluster: str | None = None


class Steps:
    """Announces each step on ``say`` as it starts, keeps its duration in ``timings``
    (seconds), passes every warning to ``warn`` as it arises, and progress within a long
    step to ``progress``."""

    def __init__(
        self,
        say: Callable[[str], None],
        warn: Callable[[str], None],
        progress: Callable[[str], None] | None = None,
    ):
        self.say, self.warn = say, warn
        self.progress = progress or (lambda message: None)
        self.timings: dict[str, float] = {}

    def counter(self, name: str) -> Callable[[str, int, int], None]:
        """A progress callback ``(key, done, total)`` for step ``name``: shows the count
        and the rate on :attr:`progress` (a terminal line; nothing in logs)."""
        start = time.perf_counter()

        def report(key: str, done: int, total: int) -> None:
            rate = done / max(time.perf_counter() - start, 1e-9)
            end = "\n" if done == total else ""  # a finished count keeps its line
            self.progress(f"  {name} {key}: {done}/{total} ({rate:.2f}/s){end}")

        return report

    def data_warnings(self, problems) -> None:
        """The first 20 warnings about the data tables (all are in the report)."""
        for w in problems[:20]:
            self.say("  warning: " + "  ".join(x for x in w.row() if x))
        if len(problems) > 20:
            self.say(f"  ... {len(problems) - 20} more data warnings in the report")

    @contextmanager
    def __call__(self, name: str):
        start = time.perf_counter()
        self.say(f"- {name} ...")
        try:
            yield
        finally:
            self.timings[name] = round(time.perf_counter() - start, 3)


@dataclass(frozen=True)
class RunResults:
    """Everything a run computed, for the report and the files to be rendered from."""

    project: Project
    composites: Composites
    domains: DomainModel
    declustering: Declustering
    variography: dict[str, Variography]
    neighbourhood: Neighbourhood
    blocks: pd.DataFrame  # estimated and classified
    validation: Validation
    support: Support
    tables: dict[str, pd.DataFrame]
    statements: dict[str, pd.DataFrame]
    truth: TruthCheck | None
    warnings: tuple[str, ...]
    timings: dict[str, float] = field(default_factory=dict)
    simulation: Simulation | None = None

    @property
    def models(self) -> dict:
        """The variogram model of each ``domain.grade``."""
        return {k: v.model for k, v in self.variography.items()}


def run_stages(
    project: Project, steps: Steps | None = None, engine: EngineOptions | None = None
) -> RunResults:
    """Every stage of a run in order; warnings go to ``steps.warn`` as they arise (quiet
    without ``steps``) and are kept, in order, in the result."""
    steps = steps or Steps(lambda message: None, lambda message: None)
    engine = engine or EngineOptions()
    warnings: list[str] = []

    def warn(message: str) -> None:
        warnings.append(message)
        steps.warn(message)

    with steps("load, check and composite"):
        composites = load_and_composite(project)
    steps.data_warnings(composites.warnings)
    with steps("domain proportions"):
        domains = build_domain_model(project, composites.table)
    with steps("declustering"):
        decl = decluster(project, composites.table, domains)
    for message in decl.warnings():
        warn(message)
    with steps("variography"):
        vario = variography(project, composites.table, decl.weights)
    for res in vario.values():
        for message in res.warnings():
            warn(message)
    models = {k: v.model for k, v in vario.items()}
    with steps("neighbourhood analysis"):
        neighbourhood = neighbourhood_analysis(project, composites.table, models, domains, decl)
    with steps("estimation"):
        blocks = estimate_block_model(
            project,
            composites.table,
            models,
            domains.grid,
            domains.proportions,
            backend=engine.backend,
            workers=engine.workers,
            chunk_size=engine.chunk_size,
            cluster=engine.cluster,
            declustered_means={k: v.declustered_mean for k, v in decl.by_domain.items()},
        )
        blocks = classify(project, blocks)
    for message in estimate_warnings(project, composites, domains, blocks):
        warn(message)
    with steps("validation"):
        validation = validate(project, composites.table, models, decl, domains.grid, blocks)
        support = support_curves(
            project,
            composites.table,
            decl,
            models,
            blocks,
            domains.grid.block_size,
            project.estimation.discretisation,
        )
    for message in validation.warnings():
        warn(message)
    with steps("grade-tonnage"):
        tables = grade_tonnage_tables(project, blocks, project.report.cutoffs)
        statements = statement_tables(project, tables, project.report.cutoffs)
        truth = truth_check(project, domains.grid, blocks)
    if truth is not None and truth.problem:
        warn(truth.problem)
    results = RunResults(
        project,
        composites,
        domains,
        decl,
        vario,
        neighbourhood,
        blocks,
        validation,
        support,
        tables,
        statements,
        truth,
        tuple(warnings),
        dict(steps.timings),
    )
    if project.simulation.in_run:
        with steps("conditional simulation"):
            sim = simulate_results(
                results,
                cluster=engine.cluster or "",
                progress=steps.counter("realisations"),
                warn=steps.warn,
            )
        results = dataclasses.replace(results, simulation=sim, timings=dict(steps.timings))
    return results


def simulate_results(
    results: RunResults,
    *,
    realisations: int | None = None,
    seed: int | None = None,
    workers: int | None = None,
    cluster: str = "",
    progress: Callable[[str, int, int], None] | None = None,
    warn: Callable[[str], None] | None = None,
) -> Simulation:
    """The conditional simulation (:func:`blockmodel.stages.simulation.simulate`) of a
    run's estimated and classified blocks; the arguments override ``[simulation]``.
    ``warn`` (optional) is told of each domain and grade whose realisations do not
    reproduce the declustered mean (:meth:`Simulation.reproduction`)."""
    grid = results.domains.grid
    sim = simulate(
        results.project,
        results.composites.table,
        results.declustering,
        results.variography,
        grid.origin,
        grid.block_size,
        results.blocks,
        realisations=realisations,
        seed=seed,
        workers=workers,
        cluster=cluster,
        progress=progress,
    )
    if warn is not None:
        for _, r in sim.reproduction().iterrows():
            if r["flagged"]:
                warn(
                    f"{r['domain.grade']}: the realisations' mean grade is "
                    f"{r['difference']:+.1%} from the declustered mean (reproduction table "
                    "of the simulation page)"
                )
    return sim
