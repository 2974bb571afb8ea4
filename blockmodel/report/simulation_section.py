"""The conditional simulation rendered: its files (per-block summary, grade-tonnage bands,
realisations on request), its figures (every realisation's grade-tonnage curve with the
P10-P90 band over the kriged and change-of-support curves) and its report section."""

from __future__ import annotations

from pathlib import Path

import numpy as np
import pandas as pd

from blockmodel.assess.uncertainty import quantile_bands
from blockmodel.config.project import Project
from blockmodel.report.figures import CLASS_COLOURS, pyplot, save_png
from blockmodel.report.files import safe_stem, write_table
from blockmodel.report.html import HtmlReport
from blockmodel.report.tables import round_significant, significant_text
from blockmodel.simulation.conditional import FEWEST_DOF
from blockmodel.simulation.model_uncertainty import draws_spread
from blockmodel.stages.simulation import REPRODUCTION_TOLERANCE, Simulation

__all__ = [
    "render_simulation",
    "simulation_grade_tonnage",
    "simulation_volumes",
    "write_simulation_files",
]

CAUTION = (
    "The bands are the spread of the realisations under the stated model: one Gaussian "
    "field per domain about one mean (or about a local mean where "
    "simulation.local_mean_window asks for one), this variogram of the normal scores, "
    "these tails (by default a lognormal upper tail with no bound, so that simulated "
    "grades pass the largest composite as a larger sample's would; a maximum given in "
    "simulation.maximum bounds it) and these domain boundaries. Each realisation draws "
    "its domain's mean from the uncertainty of the declustered mean when simulation.mean_uncertainty is on "
    "(its standard deviation is listed below), and the factor on its sill from the "
    "uncertainty of the composites' variance when simulation.variance_uncertainty is on "
    "(its degrees of freedom are listed below), and follows one of the draws of the "
    "model's nugget, sills and ranges when simulation.model_draws asks for them (their "
    "span is listed below; with simulation.draw_ranges off, the ranges stay as fitted). "
    "Unless simulation.capped_grades is on, "
    "the realisations carry the composites' grades before capping, so where a cap bites "
    "their metal exceeds the capped estimate's by about the metal the cap removes. They "
    "leave out the uncertainty of the geological interpretation, the density, the "
    "variogram's orientation and kind, and the sampling and assaying, so the real "
    "uncertainty is wider: on three invented deposits whose truth is known, 20 trials "
    "each, the P10-P90 band of the metal held the truth in 80 to 85 % of trials (80 % "
    "expected), and that of the tonnes above the median grade in 65 % (a thin seam) to "
    "95 %; where the fitted orientation was far off (a steep pipe drilled by few holes), "
    "the band missed the truth. They are evidence for the qualified person's judgement of relative "
    "accuracy and confidence under the applicable reporting code, not a substitute for it."
)


def _dof(nu: float):
    """The sill's degrees of freedom as the page lists them."""
    if not np.isfinite(nu):
        return "known"
    if nu <= FEWEST_DOF:
        return f"{nu:.1f}: too few to draw, taken as known"
    return round(nu)


def _draws(d) -> str:
    """The draws of a domain's normal-score model as the page lists them: their number, the
    span of the nugget and of each structure's sill, as shares of the total sill, and of
    its major range."""
    if not d.model_draws:
        return "none (the model taken as known)"
    structures, shares, ranges = draws_spread(d.model_draws)
    low, high = shares.min(axis=0), shares.max(axis=0)
    parts = [f"nugget {low[0]:.2f}-{high[0]:.2f}"]
    for k, st in enumerate(structures):
        major = ranges[:, k, 0][np.isfinite(ranges[:, k, 0])]
        reach = (
            f"{major.min():.0f}" if np.ptp(major) < 0.5 else f"{major.min():.0f}-{major.max():.0f}"
        )
        parts.append(f"{st.kind} {low[k + 1]:.2f}-{high[k + 1]:.2f} to {reach} m")
    return f"{len(d.model_draws)}; shares of the sill and major ranges: " + ", ".join(parts)


def simulation_grade_tonnage(project: Project, sim: Simulation) -> pd.DataFrame:
    """The bands of every grade in one table: ``grade_name`` and ``metal_unit`` columns
    added, metal in the grade's first metal unit (troy oz for g/t, t for %, or the unit of
    ``report.metal_units``)."""
    frames = []
    for g in project.grades:
        unit, factor = project.metal_units(g)[0]
        table = sim.grade_tonnage(g)
        metal = [c for c in table if c.startswith("metal_") and c != "metal_cv"]
        table[metal] = table[metal] * factor
        frames.append(table.assign(grade_name=g, metal_unit=unit))
    return pd.concat(frames, ignore_index=True)


def simulation_volumes(project: Project, sim: Simulation) -> pd.DataFrame:
    """The production volumes' bands (:meth:`Simulation.volumes`) of every grade in one
    table, at each domain's statement cut-off; metal as in
    :func:`simulation_grade_tonnage`."""
    cut = _statement_cutoffs(project)
    frames = []
    for g in project.grades:
        unit, factor = project.metal_units(g)[0]
        table = sim.volumes(project.simulation.volumes, g, cut)
        metal = [c for c in table if "metal" in c and c != "metal_cv"]
        table[metal] = table[metal] * factor
        frames.append(table.assign(grade_name=g, metal_unit=unit))
    return pd.concat(frames, ignore_index=True)


def write_simulation_files(project: Project, sim: Simulation, folder: Path) -> None:
    """``simulation_summary.parquet`` (per simulated block or mining unit),
    ``simulation_grade_tonnage.csv`` and, when the project asks, ``simulation_volumes.csv``
    (production volumes) and ``simulation_realisations.parquet`` (long: one row per block,
    grade and realisation)."""
    summary = sim.block_table()
    summary.to_parquet(folder / "simulation_summary.parquet", index=False)
    write_table(simulation_grade_tonnage(project, sim), folder / "simulation_grade_tonnage.csv")
    if project.simulation.volumes:
        write_table(simulation_volumes(project, sim), folder / "simulation_volumes.csv")
    if project.simulation.keep_realisations:
        sim.realisation_table().to_parquet(folder / "simulation_realisations.parquet", index=False)


def render_simulation(
    project: Project,
    sim: Simulation,
    folder: Path,
    report: HtmlReport,
    *,
    kriged: dict[str, pd.DataFrame] | None = None,
) -> None:
    """The report section: method, models, a band figure per domain and grade, and the
    band tables (all classes at every cut-off; each class at the statement cut-off).

    Parameters
    ----------
    kriged : dict of grade to grade-tonnage table, optional
        The kriged curves drawn under the bands.
    """
    s = project.simulation
    report.heading("Uncertainty: conditional simulation")
    units = sim.units
    spacing = " x ".join(
        f"{u / d:g}" for u, d in zip(units.size, units.discretisation, strict=True)
    )
    size = " x ".join(f"{u:g}" for u in units.size)
    tail = {
        "lognormal": "lognormal (the log of the grade going on linearly in the normal score at "
        "the slope of its top tenth, below)",
        "hyperbolic": f"hyperbolic (omega {s.omega:g})",
        "linear": "linear",
    }[s.upper_tail]
    if units.are_blocks:
        support = (
            f"Each block ({size} m) is a selective mining unit here; its tonnes are the block "
            "model's."
        )
    else:
        support = (
            f"The selective mining unit is {size} m, {int(np.prod(units.parts))} to a block of "
            "the model: each takes its block's domain, class and density, and an equal "
            "share of its tonnes. The change-of-support curve is drawn for that unit too; "
            "the kriged curve is that of the model's blocks, a larger support."
        )
    mean = ""
    if s.local_mean_window:
        windows = "; ".join(f"{k} {v:g}" for k, v in s.local_mean_window.items())
        mean = (
            "about a locally varying mean where the project asks for one (a Gaussian-kernel "
            "average of the declustered scores, its window a fraction of the longest "
            f"structure's ranges: {windows}; the residuals keep the model's correlation, "
            "scaled to their variance), "
        )
    capped = (
        "as capped for the estimate"
        if s.capped_grades
        else "before capping (each grade at its own quantile)"
    )
    report.paragraph(
        f"{sim.realisations} realisations (seed {sim.seed}) per domain and grade. Normal "
        f"scores of the declustered composites {capped}, their variogram model scaled so that its "
        "variance among the composites is theirs, 1 (the sill in the table below; about a "
        "local mean, the residuals' variance instead; a model given in the project file as "
        "given); an unconditional Gaussian field on nodes "
        f"{spacing} m apart, made by the spectral (FFT) method, "
        f"{mean}conditioned by simple kriging of its residuals from the {s.neighbours} nearest "
        "composites of the domain (hard boundaries; each composite moved to the node it "
        "falls in); back-transformed to grades (lower tail linear to "
        f"{s.minimum:g}, upper tail {tail}, bounded as in the table below) and averaged "
        "over each simulated block's nodes inside the domain (its solid, or for a domain placed by "
        "codes the nodes nearest a composite of its code, as its blocks' proportions; all "
        f"of a block's nodes where none is inside, counted below). {support} Grades are "
        "simulated independently of each other."
        + (
            f" The fitted model is uncertain too: {s.model_draws} draws of it (below) come "
            "from a parametric bootstrap of its fit (values drawn at the composites under "
            "the model and fitted again the same way; the draws are the fitted model plus "
            "each refit's deviation from the refits' average, so they centre on the fitted "
            "model), and realisation r follows draw r modulo their number. "
            + (
                "The refits fit the ranges too; the draws move the nugget, the sills and "
                "the ranges (by the refits' ratios), the structures' kinds and orientation "
                "stay as fitted."
                if s.draw_ranges
                else "The draws move the nugget and the sills; the structures' ranges and "
                "orientation stay as fitted."
            )
            if s.model_draws > 1
            else ""
        )
    )
    report.box("caution")
    report.paragraph(CAUTION)
    report.end_box()
    rows = []
    for key, d in sim.by_key.items():
        m = d.model
        structures = "; ".join(
            f"{st.kind} {st.sill:.2f} to ({', '.join(f'{r:.0f}' for r in st.ranges)}) m"
            for st in m.structures
        )
        rows.append(
            {
                "domain.grade": key,
                "normal-score model": f"nugget {m.nugget:.2f}; {structures}",
                "source": d.model_source,
                "upper tail": _upper_tail(d.transform, given=key in s.maximum),
                "composites": d.data,
                "sharing a node (dropped)": d.data_dropped,
                "nodes": d.nodes,
                "blocks with no node inside the domain": d.blocks_without_inside_nodes,
                "mean (normal scores)": (
                    f"local; residual standard deviation {d.residual_sd:.2f}"
                    if key in s.local_mean_window
                    else "one number"
                ),
                "mean's standard deviation (normal scores)": (
                    round(d.mean_sd, 3) if d.mean_sd > 0 else "0 (known)"
                ),
                "sill's degrees of freedom": _dof(d.variance_dof),
                "model draws": _draws(d),
                "FFT grid nodes": d.fft_cells,
                "preparation (s)": d.timings["preparation"],
                "realisations (s)": d.timings["realisations"],
            }
        )
    # one column per domain and grade: the settings and sizes read down, not across
    settings = pd.DataFrame(rows).set_index("domain.grade").T
    settings.columns.name = None
    report.table(settings.rename_axis("domain.grade").reset_index())
    _reproduction(sim, report)
    table = simulation_grade_tonnage(project, sim)
    for g in project.grades:
        unit = project.data.grades[g]
        metal_unit, factor = project.metal_units(g)[0]
        curves = sim.curves(g)
        present = {k[0] for k in curves}
        for domain in [d.name for d in project.domains if d.name in present] + ["all"]:
            p = folder / f"simulation_grade_tonnage_{safe_stem(domain)}_{safe_stem(g)}.png"
            cos = None
            if sim.support.grade == g and domain in sim.support.by_domain:
                cos = sim.support.by_domain[domain].curve
            _bands_figure(
                sim.cutoffs,
                {c: v for (d, c), v in curves.items() if d == domain},
                None if kriged is None else kriged[g][kriged[g]["domain"] == domain],
                cos,
                (g, unit, metal_unit, factor, domain),
                p,
            )
            report.image(
                p,
                f"{domain}, {g}: grade-tonnage curves of the {sim.realisations} realisations "
                "(grey), their P10-P90 band and P50, over the kriged blocks and the "
                "change-of-support curve",
            )
        rows = table[(table["grade_name"] == g) & (table["class"] == "all")]
        report.paragraph(
            f"{g}: P10, P50 and P90 over the realisations at each cut-off, all classes "
            f"(tonnes and metal to 3 significant figures; metal in {metal_unit})."
        )
        report.table(_shown(rows, unit, metal_unit))
        cut = _statement_cutoffs(project)
        by_class = table[
            (table["grade_name"] == g)
            & (table["domain"] != "all")
            & (table["cutoff"] == table["domain"].map(cut))
        ]
        if len(by_class):
            report.paragraph(f"{g}: by class at each domain's statement cut-off.")
            report.table(_shown(by_class, unit, metal_unit))
    if project.simulation.volumes:
        _volumes(project, sim, report)


def _volumes(project: Project, sim: Simulation, report: HtmlReport) -> None:
    """The production volumes' table per grade."""
    table = simulation_volumes(project, sim)
    for g in project.grades:
        unit = project.data.grades[g]
        rows = table[table["grade_name"] == g]
        metal_unit = rows["metal_unit"].iloc[0]
        report.paragraph(
            f"{g}, production volumes: tonnes, grade and metal at or above each domain's "
            "statement cut-off in the blocks whose centre lies in each volume, P10, P50 and "
            "P90 over the realisations beside the kriged blocks (tonnes and metal to 3 "
            f"significant figures; metal in {metal_unit}). A volume's spread is what a "
            "plan for that period should allow for under this model."
        )
        out = rows[["volume", "blocks"]].copy()
        for q in ("p10", "p50", "p90"):
            out[f"Mt {q.upper()}"] = significant_text(rows[f"tonnes_{q}"] / 1e6)
        out["Mt kriged"] = significant_text(rows["kriged_tonnes"] / 1e6)
        for q in ("p10", "p50", "p90"):
            out[f"grade {q.upper()} ({unit})"] = rows[f"grade_{q}"].round(3)
        out[f"grade kriged ({unit})"] = rows["kriged_grade"].round(3)
        for q in ("p10", "p50", "p90"):
            out[f"metal {q.upper()}"] = significant_text(rows[f"metal_{q}"])
        out["metal kriged"] = significant_text(rows["kriged_metal"])
        out["metal CV"] = rows["metal_cv"].round(3)
        report.table(out.reset_index(drop=True))


def _reproduction(sim: Simulation, report: HtmlReport) -> None:
    """The realisations' mean grade beside the declustered mean, flagged beyond the
    tolerance."""
    table = sim.reproduction()
    report.paragraph(
        "Reproduction: the mean grade of the simulated blocks (weighted by tonnes) in each "
        "realisation, beside the declustered mean of the composites and the mean of the "
        "same blocks as kriged (from the capped composites where a cap applies). "
        "Realisations that reproduce the declustered distribution differ from it by a few "
        f"per cent at most (flagged beyond {REPRODUCTION_TOLERANCE:.0%}, common practice)."
    )
    shown = table.drop(columns="flagged").copy()
    shown["difference"] = [f"{v:+.1%}" for v in table["difference"]]
    for c in (
        "declustered mean",
        "kriged mean",
        "realisations P10",
        "realisations P50",
        "realisations P90",
    ):
        shown[c] = round_significant(shown[c], 4)
    report.table(shown)
    flagged = table[table["flagged"]]
    if len(flagged):
        report.box("caution")
        report.paragraph(
            "The realisations of "
            + ", ".join(
                f"{r['domain.grade']} ({r['difference']:+.1%})" for _, r in flagged.iterrows()
            )
            + " do not reproduce the declustered mean. The model takes each domain as "
            "one field with the declustered distribution. A trend inside the domain (a "
            "high-grade shoot, say), or clustered data that the declustering does not "
            "account for, breaks that, and then the realisations, the declustered mean or "
            "both are biased, by an amount the bands do not show. Where the realisations "
            "agree with the kriged mean but not with the declustered one, the kriging's "
            "weighting of the data by the volume they inform disagrees with the declustering "
            "weights, whose histogram the realisations reproduce. Check the declustering, "
            "and consider splitting the domain or, for a trend, a local mean "
            "(simulation.local_mean_window) before relying on these bands."
        )
        report.end_box()


def _statement_cutoffs(project: Project) -> dict[str, float]:
    """Each estimated domain's statement cut-off."""
    return {d.name: project.statement_cutoff(d.name) for d in project.domains if d.estimate}


def _shown(rows: pd.DataFrame, unit: str, metal_unit: str) -> pd.DataFrame:
    """Band rows as a reader sees them: tonnes and metal to 3 significant figures."""
    out = rows[["domain", "class", "cutoff"]].copy()
    for q in ("p10", "p50", "p90"):
        out[f"Mt {q.upper()}"] = significant_text(rows[f"tonnes_{q}"] / 1e6)
    for q in ("p10", "p50", "p90"):
        out[f"grade {q.upper()} ({unit})"] = rows[f"grade_{q}"].round(3)
    for q in ("p10", "p50", "p90"):
        out[f"metal {q.upper()} ({metal_unit})"] = significant_text(rows[f"metal_{q}"])
    out["metal CV"] = rows["metal_cv"].round(3)
    return out.reset_index(drop=True)


def _bands_figure(cutoffs, by_class: dict, kriged, cos, labels, path: Path) -> None:
    """Tonnes, grade and metal against cut-off: one row for all classes, one per class;
    grey lines for the realisations, the P10-P90 band and P50 in the class's colour, the
    kriged curve dashed and the change-of-support curve dotted (all classes)."""
    grade, unit, metal_unit, factor, domain = labels
    plt = pyplot()
    classes = list(by_class)
    fig, axes = plt.subplots(
        len(classes), 3, figsize=(11, 2.6 * len(classes) + 0.6), squeeze=False, sharex=True
    )
    for row, cls in enumerate(classes):
        t, m = by_class[cls]
        with np.errstate(invalid="ignore", divide="ignore"):
            g = np.where(t > 0, m / t, np.nan)
        colour = CLASS_COLOURS.get(cls, "#000000")
        k = None
        if kriged is not None:
            k = kriged[(kriged["class"] == cls)].drop_duplicates("cutoff").set_index("cutoff")
            k = k.reindex(cutoffs)
        panels = (
            ("tonnes (Mt)", t / 1e6, None if k is None else k["tonnes"] / 1e6),
            (f"grade ({unit})", g, None if k is None else k["grade"]),
            (
                f"metal ({metal_unit})",
                m * factor,
                None if k is None else k["tonnes"] * k["grade"] * factor,
            ),
        )
        for col, (label, values, krig) in enumerate(panels):
            ax = axes[row, col]
            ax.plot(cutoffs, values.T, color="#BBBBBB", lw=0.5)
            bands = quantile_bands(values)
            lo, mid, hi = bands["p10"], bands["p50"], bands["p90"]
            ax.fill_between(cutoffs, lo, hi, color=colour, alpha=0.3, label="P10-P90")
            ax.plot(cutoffs, mid, color=colour, lw=2, label="P50")
            if krig is not None:
                ax.plot(cutoffs, np.asarray(krig, dtype=float), "k--", lw=1.2, label="kriged")
            if cos is not None and cls == "all":
                cos_values = {
                    0: cos.tonnes / 1e6,
                    1: cos.grade,
                    2: cos.tonnes * np.nan_to_num(cos.grade) * factor,
                }[col]
                ax.plot(cutoffs, cos_values, "k:", lw=1.5, label="change of support")
            ax.set_ylabel(label)
            ax.grid(alpha=0.3)
            if col == 0:
                ax.set_title(f"{cls}", loc="left", fontsize=10)
        for ax in axes[-1]:
            ax.set_xlabel(f"cut-off ({unit})")
    handles, names = axes[0, 0].get_legend_handles_labels()
    top = 1.0 - 0.7 / fig.get_figheight()  # room for the title and the legend, in inches
    fig.suptitle(f"{domain}, {grade}: realisations and bands", y=1.0 - 0.15 / fig.get_figheight())
    fig.legend(
        handles,
        names,
        loc="upper center",
        bbox_to_anchor=(0.5, top + 0.4 / fig.get_figheight()),
        ncol=4,
        fontsize=9,
        frameon=False,
    )
    fig.tight_layout(rect=(0, 0, 1, top))
    save_png(fig, path)


def _upper_tail(transform, *, given: bool) -> str:
    """The upper tail of one domain's back-transform, in words."""
    last = f"above {transform.values[-1]:g}"
    if transform.upper_tail == "lognormal" and transform.slope > 0:
        tail = (
            f"{last}: times {np.exp(transform.slope):.2f} per unit of normal score (fitted "
            f"to the top {transform.slope_points} grades)"
        )
    elif transform.upper_tail == "lognormal":
        tail = f"{last}: none (fewer than two positive grades in the top tenth)"
    else:
        tail = f"{last}: {transform.upper_tail}"
    if given:
        return f"{tail}, up to {transform.maximum:g} (given)"
    if np.isinf(transform.maximum):
        return f"{tail}, unbounded"
    return f"{tail}, up to {transform.maximum:g}: nothing (the largest composite)"
