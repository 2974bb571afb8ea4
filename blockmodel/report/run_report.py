"""The report of a run, rendered from its results: the HTML sections, plots and files.
Nothing here computes an estimate; every figure comes from :class:`RunResults`."""

from __future__ import annotations

import dataclasses
from pathlib import Path

import pandas as pd

from blockmodel.config.project import Project
from blockmodel.report.files import safe_stem
from blockmodel.report.html import HtmlReport
from blockmodel.report.neighbourhood_section import render_neighbourhood
from blockmodel.report.variography_section import render_variography
from blockmodel.report.views_section import render_views
from blockmodel.stages.run import RunResults

__all__ = ["render_grade_tonnage", "render_run", "render_statement"]


def render_run(results: RunResults, folder: Path, steps) -> HtmlReport:
    """Draw every figure of a run into ``folder`` and return the HTML report, ready to be
    written (the result files are written by :func:`blockmodel.report.files.write_run_files`)."""
    project, comps = results.project, results.composites
    report = HtmlReport(f"{project.name}: block model estimate")
    for message in results.warnings:
        report.warn(message)
    render_statement(project, results.statements, report)
    _data_sections(project, comps, report)
    _evidence(results, folder, report)
    with steps("declustering and variogram plots"):
        render_variography(project, results.declustering, results.variography, folder, report)
    render_neighbourhood(results.neighbourhood, folder, report, figures=False)
    report.paragraph(
        "Figures of slope and efficiency against each setting: blockmodel neighbourhood "
        "PROJECT.toml."
    )
    _estimation_section(results, report)
    with steps("validation plots"):
        _validation_section(results, folder, report)
        _support_section(results, folder, report)
    report.heading("Classification (proposals)")
    report.paragraph(
        "Labels come from numeric rules on search pass, holes, samples, distance and slope of "
        "regression; they are proposals for a Competent or Qualified Person to review."
    )
    rules = [dataclasses.asdict(r) for r in project.classification.rules]
    report.table(pd.DataFrame(rules).astype(str))
    render_grade_tonnage(project, results.tables, folder, report)
    with steps("views"):
        render_views(
            project,
            results.domains.grid,
            results.blocks,
            comps.table,
            results.models,
            folder,
            report,
        )
    if results.simulation is not None:
        from blockmodel.report.simulation_section import render_simulation

        with steps("simulation figures"):
            render_simulation(project, results.simulation, folder, report, kriged=results.tables)
    if results.truth is not None:
        _truth_section(results, report)
    report.heading("Run")
    return report


def _data_sections(project: Project, comps, report: HtmlReport) -> None:
    holes, warnings = comps.holes, comps.warnings
    report.heading("Data")
    points = ""
    if comps.points is not None:
        pts = comps.points.table
        points = (
            f" and {len(pts)} point samples on {pts['hole'].nunique()} line(s), each used at "
            "its own position and support (not composited)"
        )
    report.paragraph(
        f"{len(holes.collars)} holes, {holes.collars['depth'].sum():,.0f} m drilled, "
        f"{len(holes.intervals)} sample intervals{points}; {len(warnings)} warning(s) "
        "listed below."
    )
    for g in project.grades:
        below, missing = comps.value_counts(g)
        report.paragraph(
            f"{g}: {below} below-detection values set to "
            f"{project.data.below_detection_factor} x the limit; {missing} missing."
        )
    if warnings:
        from blockmodel.config.project import relative

        table = pd.DataFrame(
            [w.row() for w in warnings],
            columns=["file", "line", "hole", "field", "warning"],
        )
        table["file"] = [relative(f, project) if f else "" for f in table["file"]]
        report.table(table)
    report.heading("Compositing and capping")
    c = comps.compositing
    report.paragraph(
        f"{project.compositing.length} m composites within domains; {c.composites} kept, "
        f"{c.dropped_low_coverage} dropped below {project.compositing.min_coverage:.0%} coverage, "
        f"{c.residuals_merged} short residuals merged, {c.residuals_dropped} dropped."
    )
    if comps.capping:
        report.table(pd.DataFrame([dataclasses.asdict(s) for s in comps.capping]))
    stats = comps.table.groupby("domain")[project.grades].describe().reset_index()
    stats.columns = [" ".join(x).strip() if isinstance(x, tuple) else x for x in stats.columns]
    for g in project.grades:  # counts are whole numbers
        stats[f"{g} count"] = stats[f"{g} count"].astype(int)
    report.table(stats)


def _evidence(results: RunResults, folder: Path, report: HtmlReport) -> None:
    """The drilling in plan with the drill spacing, and each domain's composite grades
    (histogram and log-probability) with the cap and the metal it removes."""
    from blockmodel.report import maps, plots

    project, comps = results.project, results.composites
    spacing = {name: d.spacing for name, d in results.neighbourhood.by_domain.items()}
    p = folder / "collar_plan.png"
    maps.collar_plan_figure(comps.holes.collars, comps.table, spacing, p)
    report.image(p, "Collars and hole traces in plan, with each domain's drill spacing")
    g = project.grades[0]
    caps = {(c.domain, c.grade): c for c in comps.capping}
    column = f"{g}_uncapped" if f"{g}_uncapped" in comps.table else g
    for d in project.domains:
        rows = ((comps.table["domain"] == d.name) & comps.table[g].notna()).to_numpy()
        if not rows.any():
            continue
        p = folder / f"composites_{safe_stem(d.name)}_{safe_stem(g)}.png"
        plots.composites_figure(
            comps.table.loc[rows, column].to_numpy(float),
            results.declustering.weights[rows],
            caps.get((d.name, g)),
            p,
            f"Composite grades, {d.name} {g} (before capping)",
            project.data.grades[g],
        )
        report.image(p, f"Histogram and log-probability plot of composites, {d.name}")


def _estimation_section(results: RunResults, report: HtmlReport) -> None:
    project, grid, blocks = results.project, results.domains.grid, results.blocks
    primary = project.grades[0]
    report.heading("Search and estimation")
    report.paragraph(
        f"Method: {project.estimation.method} kriging, {project.estimation.boundaries} boundaries, "
        f"block {grid.block_size} m, discretisation {project.estimation.discretisation}; "
        f"grid origin {grid.origin}, shape {grid.shape}."
    )
    for d in project.domains:
        if d.estimate:
            passes = pd.DataFrame(
                [
                    {
                        k: ("model's" if k == "orientation" else "none") if v is None else v
                        for k, v in dataclasses.asdict(s).items()
                    }
                    for s in project.passes_for(d.name)
                ]
            )
            passes.insert(0, "domain", d.name)
            passes.insert(1, "pass", range(1, len(passes) + 1))
            report.table(passes.astype(str))
    report.table(blocks.groupby(["domain", f"{primary}_pass"]).size().reset_index(name="blocks"))
    ill = int(blocks.filter(like="_ill_conditioned").to_numpy().sum())
    report.paragraph(f"{ill} block estimate(s) flagged as ill-conditioned systems.")


def _validation_section(results: RunResults, folder: Path, report: HtmlReport) -> None:
    from blockmodel.report import plots

    v, project = results.validation, results.project
    unit = project.data.grades[v.grade]
    report.heading("Validation")
    for name, dv in v.by_domain.items():
        p = folder / f"cross_validation_{safe_stem(name)}.png"
        title = f"Cross-validation (leave one {v.leave_out} out), {name}"
        plots.cross_validation_figure(dv.cross_validation, p, v.grade, unit, title)
        report.image(p, f"Cross-validation, {name}")
        p = folder / f"swath_{safe_stem(name)}.png"
        plots.swath_figure(dv.swaths, p, v.grade, unit, f"Swaths, {name}")
        report.image(p, f"Swath plots, {name}")
        if dv.class_swaths:
            p = folder / f"swath_by_class_{safe_stem(name)}.png"
            plots.swath_by_class_figure(
                dv.class_swaths, p, v.grade, unit, f"Swaths by proposed class, {name}"
            )
            report.image(p, f"Swath plots by proposed class, {name}")
    report.paragraph(f"Cross-validation, leave one {v.leave_out} out (error = estimate − true):")
    report.table(v.summary())
    report.paragraph("Global bias, kriged against nearest-sample model (tonnage-weighted):")
    report.table(v.global_bias)


def _support_section(results: RunResults, folder: Path, report: HtmlReport) -> None:
    from blockmodel.report import plots

    s = results.support
    report.heading("Change of support")
    for name, ds in s.by_domain.items():
        p = folder / f"change_of_support_{safe_stem(name)}.png"
        plots.grade_tonnage_figure(
            {
                "kriged": (s.cutoffs, ds.kriged_tonnes, ds.kriged_grade),
                "discrete Gaussian": (s.cutoffs, ds.curve.tonnes, ds.curve.grade),
            },
            p,
            s.unit,
            f"Change of support, {name} (r = {ds.curve.support_coefficient:.3f})",
        )
        report.image(p, f"Kriged grade–tonnage curve against the discrete Gaussian model, {name}")
    if s.by_domain:
        report.paragraph(
            "Tonnes, grade and metal expected at block support by the discrete Gaussian "
            "model (declustered composites, block variance from the variogram model): "
            "change_of_support.csv."
        )


def render_statement(
    project: Project, statements: dict[str, pd.DataFrame], report: HtmlReport
) -> None:
    """The statement table of each grade, rounded as public statements are, with its
    footnotes; shown first in the report."""
    from blockmodel.report.tables import STATEMENT_ROUNDING, rounded_statement

    for g, s in statements.items():
        unit = project.data.grades[g]
        report.heading(f"Statement of estimated tonnes and grade: {g} ({unit})")
        shown = rounded_statement(s).rename(
            columns={
                "cut-off": f"cut-off ({unit})",
                "tonnes": "tonnes (t)",
                "grade": f"grade ({unit})",
            }
        )
        report.table(shown)
        cut = ", ".join(
            f"{d} {c:g} {unit}"
            for d, c in s.dropna(subset=["cutoff"])
            .groupby("domain", sort=False)["cutoff"]
            .first()
            .items()
        )
        report.paragraph(
            f"Reporting cut-offs: {cut}. {STATEMENT_ROUNDING} Classes are proposals from "
            "numeric rules: a Competent or Qualified Person classifies, under the reporting "
            "code in force, and states the resource with reasonable prospects for eventual "
            "economic extraction. Spreadsheet: statement.xlsx."
        )


def render_grade_tonnage(
    project: Project, tables: dict[str, pd.DataFrame], folder: Path, report: HtmlReport
) -> None:
    """Per grade and domain, a table with cut-off rows and class columns (tonnes, grade,
    metal; rounded, no false decimals) and the curves per class; the curves per domain."""
    from blockmodel.report import plots
    from blockmodel.report.tables import grade_tonnage_pivot

    for g, gt in tables.items():
        unit = project.data.grades[g]
        first_unit = gt["metal_unit"].iloc[0]
        main = gt[gt["metal_unit"] == first_unit]
        report.heading(f"Grade–tonnage: {g}")
        report.paragraph(
            "Tonnes, grade and metal of estimated blocks at or above each cut-off, rounded to "
            "three significant figures (tonnes to no finer than 1,000 t); the CSV keeps full "
            f"precision. Metal in {first_unit} (also {', '.join(gt['metal_unit'].unique()[1:]) or 'no other unit'} in the CSV)."
        )
        curves = _curves(main[main["class"] == "all"], "domain", "all domains")
        p = folder / f"grade_tonnage_{safe_stem(g)}.png"
        plots.grade_tonnage_figure(curves, p, unit, f"Grade–tonnage by domain, {g} (kriged blocks)")
        report.image(p, f"Grade–tonnage curves by domain, {g}")
        for dom in dict.fromkeys(main["domain"]):
            label = "all domains" if dom == "all" else dom
            report.paragraph(f"{label}:")
            report.table(grade_tonnage_pivot(main[main["domain"] == dom], unit, first_unit))
            curves = _curves(main[main["domain"] == dom], "class", "all classes")
            p = folder / f"grade_tonnage_{safe_stem(g)}_{safe_stem(label.replace(' ', '_'))}.png"
            plots.grade_tonnage_figure(curves, p, unit, f"Grade–tonnage by class, {label}, {g}")
            report.image(p, f"Grade–tonnage curves by class, {label}, {g}")


def _curves(rows: pd.DataFrame, by: str, all_label: str) -> dict:
    """Grade–tonnage curves (cut-offs, tonnes, grades) of ``rows`` for each value of
    column ``by``, its ``all`` rows labelled ``all_label``."""
    return {
        (all_label if key == "all" else key): (
            part["cutoff"].to_numpy(),
            part["tonnes"].to_numpy(),
            part["grade"].to_numpy(),
        )
        for key, part in rows.groupby(by, sort=False)
    }


def _truth_section(results: RunResults, report: HtmlReport) -> None:
    report.box("truth")
    report.heading("Check against the known truth (demo only)")
    report.paragraph(
        "The demo deposit is invented, so its true block grades are known. This section "
        "compares them with the estimate; the estimator never used them."
    )
    if results.truth.figures is not None:
        report.table(results.truth.figures)
    else:
        report.paragraph(results.truth.problem)
    report.end_box()
