"""The declustering and variography sections of a report, with their plots (the files are
written by :mod:`blockmodel.report.files`)."""

from __future__ import annotations

import dataclasses
from pathlib import Path

from blockmodel.assess.declustering import SPARSE_QUANTILE
from blockmodel.config.project import Project
from blockmodel.report.files import safe_stem
from blockmodel.report.html import HtmlReport
from blockmodel.stages.declustering import Declustering

__all__ = ["render_variography"]


def render_declustering(
    project: Project, declustering: Declustering, folder: Path, report: HtmlReport
) -> None:
    """One plot per domain swept by cells, and the report section."""
    from blockmodel.report import plots

    primary = project.grades[0]
    for name, d in declustering.by_domain.items():
        if d.cell is not None:
            plots.declustering_figure(
                d.cell.sizes,
                d.cell.means,
                d.cell.chosen_size,
                d.naive_mean[primary],
                folder / f"declustering_{safe_stem(name)}.png",
                f"{name} {primary}",
                project.data.grades[primary],
            )
    table = declustering.table(project.grades)
    report.heading("Declustering")
    if not any(d.declustering is not None for d in project.domains):
        text = _settings_text(project.declustering)
        report.paragraph(f"{text[:1].upper()}{text[1:]}.")
    else:
        report.paragraph(
            "Each domain's own settings, where it has them, or the project's: "
            + "; ".join(
                f"{d.name}: {_settings_text(project.declustering_for(d.name))}"
                for d in project.domains
                if d.name in declustering.by_domain
            )
            + "."
        )
    report.table(table)
    for name, d in declustering.by_domain.items():
        if d.cell is not None:
            p = folder / f"declustering_{safe_stem(name)}.png"
            report.image(p, f"Declustered mean against cell size, {name}")


def _settings_text(s) -> str:
    """One declustering's settings in words."""
    if s.method == "nearest":
        return "weights by the share of the domain's blocks nearest each composite"
    if s.method == "none":
        return "none (equal weights)"
    sweep = s.cell_sizes
    kept = {
        "hole_spacing": "the cell of the holes' spacing where sparsest (per domain, the "
        f"{100 * SPARSE_QUANTILE:.0f}th percentile of the distance from each hole's intercept "
        "to the nearest other: the table's cell size)",
        "lowest_mean": "the size of the lowest declustered mean (drilling clustered in high "
        "grades)",
        "highest_mean": "the size of the highest declustered mean (drilling clustered in low "
        "grades)",
        "given_size": f"the given size, {s.given_size:g} m",
    }[s.keep]
    return (
        f"cell declustering, {sweep.count} cell sizes swept from {sweep.smallest:g} to "
        f"{sweep.largest:g} m, cell shape {s.cell_shape}, {s.grid_shifts} shifted grids per "
        f"size; kept: {kept}"
    )


def render_variography(
    project: Project,
    declustering: Declustering,
    variography: dict,
    folder: Path,
    report: HtmlReport,
) -> None:
    """Declustering, then per domain and grade the variogram plots, the model in words,
    how the orientation was found and how well the model fits."""
    from blockmodel.report import plots

    render_declustering(project, declustering, folder, report)
    units = project.data.grades
    report.heading("Variograms and models")
    for key, res in variography.items():
        stem = safe_stem(key.replace(".", "_"))
        p = folder / f"variogram_{stem}.png"
        plots.variogram_figure(res, p, units[res.grade])
        how = (
            "fitted to the experimental variograms"
            if res.source == "fitted"
            else "given in the project file"
        )
        report.paragraph(
            f"{key}: model {how}; nugget {res.model.nugget:.4g}; "
            + "; ".join(
                f"{s.kind} sill {s.sill:.4g} ranges {tuple(round(a, 1) for a in s.ranges)}"
                for s in res.model.structures
            )
            + "; orientation (azimuth, plunge, tilt) ("
            + ", ".join(f"{a:.1f}" for a in dataclasses.astuple(res.orientation))
            + ") degrees."
        )
        if res.orientation_fit is not None:
            report.paragraph(
                f"{key}: orientation found from the data: {res.orientation_fit.describe()}."
            )
        if res.fit is not None:
            quality = ", ".join(f"{k} {v:.2f}" for k, v in res.fit.quality.items())
            report.paragraph(
                f"{key}: fit quality (weighted R² per direction): {quality}; "
                f"{res.fit.lags_used} lags fitted, {res.fit.lags_dropped} left out for holding "
                "fewer than 30 pairs."
            )
        report.image(p, f"Experimental variograms and model, {key}")
        if res.scan is not None:
            p = folder / f"direction_map_{stem}.png"
            plots.direction_map_figure(res, p, units[res.grade])
            report.image(p, f"Variogram by direction and lag, {key}")
        if res.scores is not None:
            report.paragraph(
                f"{key}: variograms of normal scores; back-transform table in "
                f"normal_scores_{stem}.csv."
            )
