"""What each command does: read the project, call the stages, render the results into a
staged folder that replaces the old one only when complete (see
:mod:`blockmodel.app.outputs`)."""

from __future__ import annotations

import importlib.metadata
import platform
import sys
from collections.abc import Sequence
from pathlib import Path

import pandas as pd

from blockmodel.app.outputs import OutputFolder, file_hash, need_file
from blockmodel.config.project import Project, relative, resolved
from blockmodel.report.html import CAUTIONS, HtmlReport
from blockmodel.stages.run import EngineOptions, Steps

__all__ = [
    "check",
    "input_files",
    "make_demo",
    "neighbourhood",
    "report_again",
    "run",
    "run_variography",
]


def _say(message: str) -> None:
    print(message, file=sys.stderr, flush=True)


def _progress(message: str) -> None:
    """One line rewritten in place on a terminal; nothing when stderr is a file or pipe."""
    if sys.stderr.isatty():
        end = "\n" if message.endswith("\n") else ""
        print(f"\r{message.rstrip()}\033[K", end=end, file=sys.stderr, flush=True)


def _timings(timings: dict[str, float]) -> str:
    """The seconds of each step as a sentence for a page."""
    steps = "; ".join(f"{name} {seconds:,.1f} s" for name, seconds in timings.items())
    return f"Time per step: {steps}."


def step_reporter() -> Steps:
    """Steps announced, warnings and progress printed on the terminal (stderr)."""
    return Steps(_say, lambda message: _say(f"  warning: {message}"), _progress)


def check(project: Project) -> str:
    """Load and check the data; return a printable summary (raises InputError on problems)."""
    from blockmodel.stages.composites import load_and_composite

    comps = load_and_composite(project)
    holes = comps.holes
    iv = holes.intervals
    sampled = (iv["to"] - iv["from"])[iv[project.grades].notna().any(axis=1)].sum()
    lines = [
        f"Project: {project.name}",
        f"Holes: {len(holes.collars)}",
        f"Metres drilled: {holes.collars['depth'].sum():,.1f}",
        f"Metres sampled: {sampled:,.1f}",
        f"Intervals: {len(iv)}; composites: {comps.compositing.composites} "
        f"({comps.compositing.dropped_low_coverage} dropped for low coverage)",
    ]
    if comps.points is not None:
        pts = comps.points.table
        lines.append(f"Point samples: {len(pts)} on {pts['hole'].nunique()} line(s)")
    for g in project.grades:
        below, missing = comps.value_counts(g)
        lines.append(f"Below-detection values of {g} replaced: {below}; missing: {missing}")
    stats = comps.table.groupby("domain")[project.grades].describe(percentiles=[0.5]).round(3)
    lines += ["", "Composite and point-sample grades per domain:", stats.to_string()]
    warnings = comps.warnings
    if warnings:
        lines += ["", f"{len(warnings)} warning(s):"]
        lines += ["  " + "  ".join(x for x in w.row() if x) for w in warnings[:100]]
    return "\n".join(lines)


def _versions() -> dict[str, str]:
    out = {"python": platform.python_version()}
    for name in (
        "blockmodel",
        "numpy",
        "scipy",
        "pandas",
        "numba",
        "pyarrow",
        "matplotlib",
        "pyvista",
    ):
        try:
            out[name] = importlib.metadata.version(name)
        except importlib.metadata.PackageNotFoundError:
            out[name] = "not installed"
    return out


def input_files(project: Project) -> list[Path]:
    """Every file a project reads: the project file, data tables, solids, topography, truth."""
    files = [project.source, project.data.collars, project.data.surveys, project.data.intervals]
    files += [d.solid for d in project.domains if d.solid is not None]
    files += [p for p in (project.grid.topography, project.truth) if p is not None]
    return files


def _manifest(command: str, project: Project, **extra) -> dict:
    """What a report folder's ``manifest.json`` records of the command that wrote it."""
    return {
        "command": command,
        "project": project.source.name,
        "paths": "relative to the project file's folder",
        "inputs_sha256": {relative(p, project): file_hash(p) for p in input_files(project)},
        "configuration": resolved(project),
        "versions": _versions(),
        "cautions": CAUTIONS,
        **extra,
    }


def run_variography(project: Project, out: Path | None = None, *, replace: bool = False) -> Path:
    """Declustering and variography alone: plots, declustering table, fitted models."""
    from blockmodel.report.files import write_variography_files
    from blockmodel.report.variography_section import render_variography
    from blockmodel.stages.composites import load_and_composite
    from blockmodel.stages.declustering import decluster
    from blockmodel.stages.domain_model import build_domain_model
    from blockmodel.stages.variography import variography

    folder = project.report.folder
    out = Path(out) if out is not None else folder.with_name(f"{folder.name}_variography")
    steps = step_reporter()
    with OutputFolder(out, input_files(project), replace=replace) as staged:
        comps = load_and_composite(project)
        domains = None
        # nearest-neighbour weights come from the blocks
        if any(project.declustering_for(d.name).method == "nearest" for d in project.domains):
            domains = build_domain_model(project, comps.table)
        decl = decluster(project, comps.table, domains)
        vario = variography(project, comps.table, decl.weights)
        report = HtmlReport(f"{project.name}: declustering and variography")
        for message in decl.warnings() + [m for r in vario.values() for m in r.warnings()]:
            steps.warn(message)
            report.warn(message)
        render_variography(project, decl, vario, staged.path, report)
        write_variography_files(project, decl, vario, staged.path)
        report.write(staged.path / "variography.html")
        staged.commit(_manifest("variography", project))
    return staged.target


def neighbourhood(
    project: Project,
    out: Path | None = None,
    *,
    blocks: Sequence[Sequence[float]] = (),
    replace: bool = False,
) -> Path:
    """Kriging neighbourhood analysis alone: its page, figures and ``neighbourhood.csv``.

    Parameters
    ----------
    blocks : sequence of (x, y, z), metres
        Test blocks of the user's, besides the three chosen per domain.
    """
    from blockmodel.report.files import write_table
    from blockmodel.report.neighbourhood_section import render_neighbourhood
    from blockmodel.stages.composites import load_and_composite
    from blockmodel.stages.declustering import decluster
    from blockmodel.stages.domain_model import build_domain_model
    from blockmodel.stages.neighbourhood import neighbourhood_analysis
    from blockmodel.stages.variography import variography

    folder = project.report.folder
    out = Path(out) if out is not None else folder.with_name(f"{folder.name}_neighbourhood")
    steps = step_reporter()
    with OutputFolder(out, input_files(project), replace=replace) as staged:
        report = HtmlReport(f"{project.name}: kriging neighbourhood analysis")
        with steps("load, check and composite"):
            comps = load_and_composite(project)
        with steps("domain proportions and declustering"):
            domains = build_domain_model(project, comps.table)
            decl = decluster(project, comps.table, domains)
        with steps("variography"):
            vario = variography(project, comps.table, decl.weights)
        for message in decl.warnings() + [m for r in vario.values() for m in r.warnings()]:
            steps.warn(message)
            report.warn(message)
        models = {k: v.model for k, v in vario.items()}
        with steps("neighbourhood analysis"):
            result = neighbourhood_analysis(
                project, comps.table, models, domains, decl, given=blocks
            )
        for message in result.warnings:
            steps.warn(message)
            report.warn(message)
        with steps("figures"):
            render_neighbourhood(result, staged.path, report, figures=True)
        write_table(result.table(), staged.path / "neighbourhood.csv")
        report.write(staged.path / "neighbourhood.html")
        staged.commit(_manifest("neighbourhood", project, blocks=[list(b) for b in blocks]))
    return staged.target


def run(
    project: Project,
    out: Path | None = None,
    *,
    engine: EngineOptions | None = None,
    write_csv: bool | None = None,
    replace: bool = False,
) -> Path:
    """The whole chain: the stages, then the report rendered from their results; returns
    the report folder."""
    from blockmodel.report.files import write_run_files
    from blockmodel.report.run_report import render_run
    from blockmodel.stages.run import run_stages

    engine = engine or EngineOptions()
    steps = step_reporter()
    staged = OutputFolder(out or project.report.folder, input_files(project), replace=replace)
    with staged:
        results = run_stages(project, steps, engine)
        report = render_run(results, staged.path, steps)
        with steps("result files"):
            csv = write_csv if write_csv is not None else project.report.write_csv
            write_run_files(results, staged.path, csv=csv)
            if results.simulation is not None:
                from blockmodel.report.simulation_section import write_simulation_files

                write_simulation_files(project, results.simulation, staged.path)
        report.paragraph(_timings(steps.timings))
        report.write(staged.path / "report.html")
        staged.commit(
            _manifest(
                "run",
                project,
                timings_s=steps.timings,
                blocks=len(results.blocks),
                options={
                    "backend": engine.backend,
                    "workers": engine.workers,
                    "chunk_size": engine.chunk_size,
                },
            )
        )
    return staged.target


def simulate(
    project: Project,
    out: Path | None = None,
    *,
    realisations: int | None = None,
    seed: int | None = None,
    workers: int | None = None,
    cluster: str = "",
    replace: bool = False,
) -> Path:
    """The run's stages (estimate and classification, for the classes and the kriged
    curves), then the conditional simulation; writes its page, figures and files to
    ``out`` (default: the report folder's name + ``_simulation``)."""
    from blockmodel.report.simulation_section import render_simulation, write_simulation_files
    from blockmodel.stages.run import run_stages, simulate_results

    folder = project.report.folder
    out = Path(out) if out is not None else folder.with_name(f"{folder.name}_simulation")
    steps = step_reporter()
    with OutputFolder(out, input_files(project), replace=replace) as staged:
        results = run_stages(project, steps)
        with steps("conditional simulation"):
            sim = simulate_results(
                results,
                realisations=realisations,
                seed=seed,
                workers=workers,
                cluster=cluster,
                progress=steps.counter("realisations"),
                warn=steps.warn,
            )
        report = HtmlReport(f"{project.name}: conditional simulation")
        for message in results.warnings:
            report.warn(message)
        with steps("figures and files"):
            render_simulation(project, sim, staged.path, report, kriged=results.tables)
            write_simulation_files(project, sim, staged.path)
        report.paragraph(_timings(steps.timings))
        report.write(staged.path / "simulation.html")
        staged.commit(
            _manifest(
                "simulate",
                project,
                realisations=sim.realisations,
                seed=sim.seed,
                timings_s=steps.timings,
            )
        )
    return staged.target


def report_again(
    project: Project,
    block_model: Path,
    out: Path,
    *,
    cutoffs=None,
    reclassify: bool = False,
    replace: bool = False,
) -> Path:
    """Re-report an existing block model at new cut-offs or classification rules."""
    from blockmodel.report.files import write_grade_tonnage
    from blockmodel.report.run_report import render_grade_tonnage, render_statement
    from blockmodel.stages.estimate import classify
    from blockmodel.stages.tables import grade_tonnage_tables, statement_tables

    staged = OutputFolder(out, [*input_files(project), block_model], replace=replace)
    with staged:
        need_file(block_model)
        blocks = pd.read_parquet(block_model)
        if reclassify or "class" not in blocks:
            blocks = classify(project, blocks)
        cutoffs = cutoffs or project.report.cutoffs
        report = HtmlReport(f"{project.name}: grade–tonnage re-report of {Path(block_model).name}")
        tables = grade_tonnage_tables(project, blocks, cutoffs)
        statements = statement_tables(project, tables, cutoffs)
        render_statement(project, statements, report)
        render_grade_tonnage(project, tables, staged.path, report)
        write_grade_tonnage(project, tables, statements, staged.path)
        report.write(staged.path / "report.html")
        staged.commit(
            _manifest(
                "report",
                project,
                block_model=relative(block_model, project),
                block_model_sha256=file_hash(block_model),
                cutoffs=list(cutoffs),
            )
        )
    return staged.target


def make_demo(folder: Path) -> None:
    """Write the invented demo deposit's data files into ``folder`` (never overwriting)."""
    from blockmodel.demo.deposit import write_demo

    write_demo(folder)
