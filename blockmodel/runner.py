"""Commands' work: each reads a project, calls the stages and writes outputs into a staged
report folder that replaces the old one only when complete."""

from __future__ import annotations

import dataclasses
import importlib.metadata
import platform
import sys
import time
from pathlib import Path

import numpy as np
import pandas as pd

from . import pipeline as stages
from .classification import classify_blocks
from .outputs import OutputFolder, file_hash, need_file, safe_stem
from .project import Project, resolved
from .report_html import CAUTIONS, HtmlReport
from .reporting import grade_tonnage, metal_units

__all__ = ["check", "report_again", "run", "run_variography"]


def _say(message: str) -> None:
    print(message, file=sys.stderr, flush=True)


def _warn(report: HtmlReport, message: str) -> None:
    """A warning: on the terminal now, and in the report's warning box."""
    _say(f"  warning: {message}")
    report.warn(message)


MIN_VALIDATION_CORRELATION = 0.3  # below it the model does not predict (common practice)


class _Timer:
    def __init__(self):
        self.timings: dict[str, float] = {}

    def __call__(self, name: str):
        timer = self

        class _Ctx:
            def __enter__(self):
                self.t = time.perf_counter()
                _say(f"- {name} ...")

            def __exit__(self, *exc):
                timer.timings[name] = round(time.perf_counter() - self.t, 3)

        return _Ctx()


def check(project: Project) -> str:
    """Load and check the data; return a printable summary (raises InputError on problems)."""
    comps = stages.load_and_composite(project)
    holes = comps.holes
    iv = holes.intervals
    lines = [
        f"Project: {project.name}",
        f"Holes: {len(holes.collars)}",
        f"Metres drilled: {holes.collars['depth'].sum():,.1f}",
        f"Metres sampled: {(iv['to'] - iv['from'])[iv[project.grades].notna().any(axis=1)].sum():,.1f}",
        f"Intervals: {len(iv)}; composites: {len(comps.table)} "
        f"({comps.compositing.dropped_low_coverage} dropped for low coverage)",
    ]
    for g in project.grades:
        lines.append(
            f"Below-detection values of {g} replaced: {holes.below_detection[g]}; missing: {holes.missing[g]}"
        )
    stats = comps.table.groupby("domain")[project.grades].describe(percentiles=[0.5]).round(3)
    lines += ["", "Composite grades per domain:", stats.to_string()]
    if holes.warnings:
        lines += ["", f"{len(holes.warnings)} warning(s):"]
        lines += ["  " + "  ".join(x for x in w.row() if x) for w in holes.warnings[:100]]
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


def _inputs(project: Project) -> dict[str, str]:
    return {str(p): file_hash(p) for p in input_files(project)}


def _write_table(frame: pd.DataFrame, path: Path) -> None:
    if path.suffix == ".parquet":
        frame.to_parquet(path, index=False)
    else:
        frame.to_csv(path, index=False, float_format="%.10g", lineterminator="\n")


def _variography_outputs(project, comps, vario, decl, folder: Path, report: HtmlReport) -> None:
    from . import plots

    units = project.data.grades
    rows = []
    for name, d in decl.items():
        for g in project.grades:
            rows.append(
                {
                    "domain": name,
                    "grade": g,
                    "composites": int((comps.table["domain"] == name).sum()),
                    "naive_mean": d.naive_mean[g],
                    "declustered_mean": d.declustered_mean[g],
                    "declustered_variance": d.declustered_variance.get(g, float("nan")),
                    **{
                        f"declustered_p{round(100 * q)}": v
                        for q, v in zip(
                            stages.QUANTILES,
                            d.declustered_quantiles.get(g, [float("nan")] * 6),
                            strict=True,
                        )
                    },
                    "cell_size": d.cell.chosen_size if d.cell else float("nan"),
                }
            )
        if d.cell is not None:
            p = folder / f"declustering_{safe_stem(name)}.png"
            plots.declustering_figure(
                d.cell.sizes,
                d.cell.means,
                d.cell.chosen_size,
                d.naive_mean[project.grades[0]],
                p,
                f"{name} {project.grades[0]}",
                units[project.grades[0]],
            )
    table = pd.DataFrame(rows)
    _write_table(table, folder / "declustering.csv")
    report.heading("Declustering")
    report.paragraph(
        f"Method: {project.declustering.method}; cell sizes swept {project.declustering.cell_sizes}, "
        f"anisotropy {project.declustering.anisotropy}, {project.declustering.origins} origins, "
        f"choice: {project.declustering.choose}."
    )
    report.table(table)
    for name in decl:
        p = folder / f"declustering_{safe_stem(name)}.png"
        if p.exists():
            report.image(p, f"Declustered mean against cell size, {name}")
    snippets = []
    report.heading("Variograms and models")
    for key, res in vario.items():
        p = folder / f"variogram_{safe_stem(key.replace('.', '_'))}.png"
        plots.variogram_figure(res, p, units[res.grade])
        snippets.append(f"# {key}: {res.source}\n" + res.model.to_toml(key))
        report.paragraph(
            f"{key}: model {'fitted to the experimental variograms' if res.source == 'fitted' else 'given in the project file'}; "
            f"nugget {res.model.nugget:.4g}; "
            + "; ".join(
                f"{s.kind} sill {s.sill:.4g} ranges {tuple(round(a, 1) for a in s.ranges)}"
                for s in res.model.structures
            )
            + f"; orientation (azimuth, plunge, tilt) {dataclasses.astuple(res.orientation)}."
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
        stem = safe_stem(key.replace(".", "_"))
        if res.scan is not None:
            p = folder / f"direction_map_{stem}.png"
            plots.direction_map_figure(res, p, units[res.grade])
            report.image(p, f"Variogram by direction and lag, {key}")
        if res.scores is not None:
            table = pd.DataFrame({"value": res.scores.values, "normal_score": res.scores.scores})
            _write_table(table, folder / f"normal_scores_{stem}.csv")
            report.paragraph(
                f"{key}: variograms of normal scores; back-transform table in "
                f"normal_scores_{stem}.csv."
            )
    (folder / "variogram_models.toml").write_text("\n".join(snippets), encoding="utf-8")


def run_variography(project: Project, out: Path | None = None, *, replace: bool = False) -> Path:
    """Declustering and variography alone: plots, declustering table, fitted models."""
    folder = project.report.folder
    out = Path(out) if out is not None else folder.with_name(f"{folder.name}_variography")
    with OutputFolder(out, input_files(project), replace=replace) as staged:
        comps = stages.load_and_composite(project)
        grid = props = None
        if project.declustering.method == "nearest":  # weights come from the blocks
            grid = stages.block_model_grid(project)
            props = stages.model_proportions(project, grid, comps.table)
        decl = stages.decluster(project, comps.table, grid, props)
        vario = stages.variography(project, comps.table)
        report = HtmlReport(f"{project.name}: declustering and variography")
        for res in vario.values():
            for message in res.warnings():
                _warn(report, message)
        _variography_outputs(project, comps, vario, decl, staged.path, report)
        report.write(staged.path / "variography.html")
        staged.commit(
            {
                "command": "variography",
                "project": str(project.source),
                "inputs_sha256": _inputs(project),
                "configuration": resolved(project),
                "versions": _versions(),
            }
        )
    return staged.target


ABOVE_TOPOGRAPHY = 2.0  # metres a composite may stand above the surface (survey error)


def _above_topography(project, composites) -> list[str]:
    """Holes whose composites rise above the topography (a wrong collar or dip sign)."""
    if project.grid.topography is None or len(composites) == 0:
        return []
    from scipy.interpolate import griddata

    from .solids import read_surface

    surface = read_surface(project.grid.topography)
    xy = composites[["x", "y"]].to_numpy(float)
    ground = griddata(surface.vertices[:, :2], surface.vertices[:, 2], xy, method="linear")
    height = composites["z"].to_numpy(float) - ground
    above = np.isfinite(height) & (height > ABOVE_TOPOGRAPHY)
    out = []
    for hole in pd.unique(composites["hole"][above]):
        mine = above & (composites["hole"] == hole).to_numpy()
        out.append(
            f"hole {hole}: {int(mine.sum())} composite(s) lie above the topography, up to "
            f"{height[mine].max():.1f} m; check its collar elevation and the sign of its dips"
        )
    return out


EXTRAPOLATED_SHARE = 0.05  # of a domain's tonnes beyond one hole spacing: warn


def hole_spacing(points: np.ndarray, holes: np.ndarray) -> float:
    """The wider spacing between holes: the 90th percentile, over samples, of the distance
    from a sample to the nearest sample of another hole (metres; NaN with fewer than two
    holes).  A regular pattern gives its spacing; infill holes among a wider pattern do
    not shrink it.

    Parameters
    ----------
    points : (n, 3) float64, metres
    holes : (n,) hole ids
    """
    from scipy.spatial import cKDTree

    codes = np.unique(holes, return_inverse=True)[1].ravel()
    if codes.max(initial=0) < 1:
        return float("nan")
    tree = cKDTree(points)
    nearest = np.full(len(points), np.inf)
    k = 8
    todo = np.arange(len(points))
    while len(todo):
        k = min(2 * k, len(points))
        dist, idx = tree.query(points[todo], k=k)
        other = codes[idx] != codes[todo, None]
        found = other.any(axis=1)
        nearest[todo[found]] = dist[found, other[found].argmax(axis=1)]
        todo = todo[~found] if k < len(points) else todo[:0]
    return float(np.percentile(nearest[np.isfinite(nearest)], 90))


def _extrapolation_warnings(composites: pd.DataFrame, estimated: pd.DataFrame) -> list[str]:
    """Domains with more than 5 % of their estimated tonnes farther from every composite
    than the wider spacing between holes (:func:`hole_spacing`); common practice is to
    extrapolate no further than about half the drill spacing beyond the last hole."""
    from scipy.spatial import cKDTree

    out = []
    for name, blocks in estimated.groupby("domain", sort=False):
        own = composites[composites["domain"] == name]
        if own["hole"].nunique() < 2:
            continue
        points = own[["x", "y", "z"]].to_numpy(float)
        spacing = hole_spacing(points, own["hole"].to_numpy())
        dist = cKDTree(points).query(blocks[["x", "y", "z"]].to_numpy(float), workers=-1)[0]
        far = dist > spacing
        share = blocks["tonnes"].to_numpy()[far].sum() / blocks["tonnes"].sum()
        if share > EXTRAPOLATED_SHARE:
            out.append(
                f"{100 * share:.1f} % of the estimated tonnes of domain '{name}' "
                f"({int(far.sum())} blocks) lie farther from every composite than the wider "
                f"spacing between holes ({spacing:.0f} m): extrapolated beyond the drilling; "
                "check the solid's extent and the classification"
            )
    return out


def _estimate_warnings(project, comps, grid, blocks, shares) -> list[str]:
    """What the estimate cannot be trusted for, in words for the report."""
    out = _above_topography(project, comps.table)
    primary = project.grades[0]
    for name, share in shares.items():
        if share < 1.0:
            out.append(
                f"{100 * (1 - share):.2f} % of the volume of domain '{name}' lies outside the "
                "block grid and is not in the tonnes"
            )
    estimated = blocks[np.isfinite(blocks[primary])]
    if project.grid.topography is None:
        top = float(comps.holes.collars["z"].max())
        above = estimated[estimated["z"] - grid.block_size[2] / 2 > top]
        if len(above):
            out.append(
                f"{len(above)} estimated block(s), {above['tonnes'].sum():,.0f} t, lie wholly above "
                f"the highest collar (z {top:.1f} m) and no topography is given: they may be air"
            )
    for g in project.grades:
        low = blocks[blocks[g] < 0]
        if len(low):
            out.append(
                f"{len(low)} block estimate(s) of {g} are below zero (lowest "
                f"{low[g].min():.4g} {project.data.grades[g]}, {low['tonnes'].sum():,.0f} t): "
                "negative kriging weights; they count at cut-off 0 and are kept as estimated"
            )
    out += _extrapolation_warnings(comps.table, estimated)
    unestimated = blocks[~np.isfinite(blocks[primary])]
    if len(unestimated):
        out.append(
            f"{len(unestimated)} block(s), {unestimated['tonnes'].sum():,.0f} t, inside the domains "
            f"were not estimated for {primary} (no search pass found enough samples); they "
            "are not in the grade–tonnage tables"
        )
    return out


def _grade_tonnage_outputs(
    project: Project, blocks: pd.DataFrame, folder: Path, report: HtmlReport, cutoffs
) -> dict[str, pd.DataFrame]:
    from . import plots

    tables = {}
    for n, g in enumerate(project.grades):
        unit = project.data.grades[g]
        gt = grade_tonnage(blocks, g, unit, cutoffs)
        name = "grade_tonnage.csv" if n == 0 else f"grade_tonnage_{g}.csv"
        _write_table(gt, folder / name)
        tables[g] = gt
        first_unit = gt["metal_unit"].iloc[0]
        main = gt[gt["metal_unit"] == first_unit]
        curves = {}
        for (dom, cls), part in main.groupby(["domain", "class"], sort=False):
            if cls == "all":
                curves[f"{dom}"] = (
                    part["cutoff"].to_numpy(),
                    part["tonnes"].to_numpy(),
                    part["grade"].to_numpy(),
                )
        p = folder / f"grade_tonnage_{safe_stem(g)}.png"
        plots.grade_tonnage_figure(curves, p, unit, f"Grade–tonnage, {g} (kriged blocks)")
        report.heading(f"Grade–tonnage: {g}")
        report.paragraph(
            "Tonnes and grade of estimated blocks at or above each cut-off, rounded for reading; "
            f"the CSV keeps full precision. Metal in {', '.join(gt['metal_unit'].unique())}."
        )
        units = list(gt["metal_unit"].unique())
        shown = gt[gt["metal_unit"] == units[0]].drop(columns=["metal_unit", "metal", "note"])
        for u in units:  # one metal column per unit; rows come in the same order per unit
            shown[u] = gt.loc[gt["metal_unit"] == u, "metal"].to_numpy()
        shown["tonnes"] = shown["tonnes"].round(-3)
        shown["grade"] = shown["grade"].round(2)
        for u in gt["metal_unit"].unique():
            shown[u] = shown[u].round(-2)
        report.table(shown, digits=2)
        report.image(p, f"Grade–tonnage curves, {g}")
    return tables


def run(
    project: Project,
    out: Path | None = None,
    *,
    backend: str | None = None,
    workers: int | None = None,
    chunk_size: int | None = None,
    cluster: str | None = None,
    write_csv: bool | None = None,
    replace: bool = False,
) -> Path:
    """The whole chain; returns the report folder."""
    from . import plots
    from .support import change_of_support
    from .validation import cross_validate, global_bias, swath

    timer = _Timer()
    staged = OutputFolder(out or project.report.folder, input_files(project), replace=replace)
    with staged:
        folder = staged.path
        report = HtmlReport(f"{project.name}: block model estimate")
        with timer("load, check and composite"):
            comps = stages.load_and_composite(project)
        for w in comps.holes.warnings[:20]:
            _say("  warning: " + "  ".join(x for x in w.row() if x))
        if len(comps.holes.warnings) > 20:
            _say(f"  ... {len(comps.holes.warnings) - 20} more data warnings in the report")
        _write_table(
            comps.table.sort_values(["hole", "from"], kind="stable"), folder / "composites.csv"
        )
        with timer("domain proportions"):
            grid = stages.block_model_grid(project)
            shares = stages.solid_shares(project, grid)
            props = stages.model_proportions(project, grid, comps.table)
            stages.check_proportions(project, props)
        with timer("declustering"):
            decl = stages.decluster(project, comps.table, grid, props)
        with timer("variography"):
            vario = stages.variography(project, comps.table)
        for res in vario.values():
            for message in res.warnings():
                _warn(report, message)
        models = {k: v.model for k, v in vario.items()}
        with timer("estimation"):
            blocks = stages.estimate_block_model(
                project,
                comps.table,
                models,
                grid,
                props,
                backend=backend,
                workers=workers,
                chunk_size=chunk_size,
                cluster=cluster,
                declustered_means={k: v.declustered_mean for k, v in decl.items()},
            )
        primary = project.grades[0]
        cls = project.classification
        blocks["class"] = classify_blocks(
            blocks, primary, cls.rules, cls.fallback, clean_up=cls.clean_up
        )
        for message in _estimate_warnings(project, comps, grid, blocks, shares):
            _warn(report, message)

        # --- data, compositing, capping
        holes = comps.holes
        report.heading("Data")
        report.paragraph(
            f"{len(holes.collars)} holes, {holes.collars['depth'].sum():,.0f} m drilled, "
            f"{len(holes.intervals)} sample intervals; {len(holes.warnings)} warning(s) listed below."
        )
        for g in project.grades:
            report.paragraph(
                f"{g}: {holes.below_detection[g]} below-detection values set to "
                f"{project.data.below_detection_factor} x the limit; {holes.missing[g]} missing."
            )
        if holes.warnings:
            report.table(
                pd.DataFrame(
                    [w.row() for w in holes.warnings],
                    columns=["file", "line", "hole", "field", "warning"],
                )
            )
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
        with timer("declustering and variogram plots"):
            _variography_outputs(project, comps, vario, decl, folder, report)

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
        passes = blocks.groupby(["domain", f"{primary}_pass"]).size().reset_index(name="blocks")
        report.table(passes)
        ill = int(blocks.filter(like="_ill_conditioned").to_numpy().sum())
        report.paragraph(f"{ill} block estimate(s) flagged as ill-conditioned systems.")

        # --- validation
        with timer("validation"):
            report.heading("Validation")
            cv_rows = []
            for d in project.domains:
                if not d.estimate:
                    continue
                sub = comps.table[(comps.table["domain"] == d.name) & comps.table[primary].notna()]
                model = models[f"{d.name}.{primary}"]
                from .engine import passes_from

                cv = cross_validate(
                    sub[["x", "y", "z"]].to_numpy(float),
                    sub[primary].to_numpy(float),
                    sub["hole"].to_numpy(),
                    model,
                    passes_from(project.passes_for(d.name), model.structures[0].orientation),
                    leave_out=project.validation.leave_out,
                    method=project.estimation.method,
                    mean=decl[d.name].declustered_mean[primary]
                    if project.estimation.method == "simple"
                    else None,
                )
                cv_rows.append(
                    {"domain": d.name, "method": project.estimation.method, **cv.summary()}
                )
                if cv.estimated < 3:
                    _warn(
                        report,
                        f"cross-validation of {primary} in '{d.name}' re-estimated only "
                        f"{cv.estimated} of {cv.total} composites: the search finds too few "
                        "samples once a hole is left out; the model is not validated",
                    )
                elif not cv.correlation >= MIN_VALIDATION_CORRELATION:
                    _warn(
                        report,
                        f"cross-validation of {primary} in '{d.name}': correlation of true and "
                        f"estimated grades {cv.correlation:.3f}, below "
                        f"{MIN_VALIDATION_CORRELATION}: the model does not predict the samples "
                        "it leaves out; review the variogram and the search",
                    )
                p = folder / f"cross_validation_{safe_stem(d.name)}.png"
                plots.cross_validation_figure(
                    cv,
                    p,
                    primary,
                    project.data.grades[primary],
                    f"Cross-validation (leave one {project.validation.leave_out} out), {d.name}",
                )
                report.image(p, f"Cross-validation, {d.name}")
                b = blocks[blocks["domain"] == d.name]
                sw = {
                    a: swath(b, sub, primary, a, w)
                    for a, w in (
                        ("x", 4 * grid.block_size[0]),
                        ("y", 4 * grid.block_size[1]),
                        ("z", 4 * grid.block_size[2]),
                    )
                }
                p = folder / f"swath_{safe_stem(d.name)}.png"
                plots.swath_figure(
                    sw, p, primary, project.data.grades[primary], f"Swaths, {d.name}"
                )
                report.image(p, f"Swath plots, {d.name}")
            report.paragraph(
                f"Cross-validation, leave one {project.validation.leave_out} out (error = estimate − true):"
            )
            report.table(pd.DataFrame(cv_rows))
            report.paragraph("Global bias, kriged against nearest-sample model (tonnage-weighted):")
            report.table(global_bias(blocks, primary))

            # change of support: discrete Gaussian model beside the kriged curve
            report.heading("Change of support")
            cut = np.asarray(project.report.cutoffs, dtype=float)
            support_rows = []
            for d in project.domains:
                if not d.estimate:
                    continue
                sub = comps.table[(comps.table["domain"] == d.name) & comps.table[primary].notna()]
                model = models[f"{d.name}.{primary}"]
                b = blocks[(blocks["domain"] == d.name) & np.isfinite(blocks[primary])]
                curve = change_of_support(
                    sub[primary].to_numpy(float),
                    sub["weight"].to_numpy(float),
                    model,
                    grid.block_size,
                    project.estimation.discretisation,
                    cut,
                    float(b["tonnes"].sum()),
                )
                unit = project.data.grades[primary]
                for metal_unit, factor in metal_units(unit):
                    support_rows.append(
                        pd.DataFrame(
                            {
                                "domain": d.name,
                                "cutoff": cut,
                                "tonnes": curve.tonnes,
                                "grade": curve.grade,
                                "metal": curve.tonnes * np.nan_to_num(curve.grade) * factor,
                                "metal_unit": metal_unit,
                            }
                        )
                    )
                kt = np.array([b["tonnes"][b[primary] >= c].sum() for c in cut])
                kg = np.array(
                    [
                        np.average(
                            b[primary][b[primary] >= c], weights=b["tonnes"][b[primary] >= c]
                        )
                        if (b[primary] >= c).any()
                        else np.nan
                        for c in cut
                    ]
                )
                p = folder / f"change_of_support_{safe_stem(d.name)}.png"
                plots.grade_tonnage_figure(
                    {
                        "kriged": (cut, kt, kg),
                        "discrete Gaussian": (cut, curve.tonnes, curve.grade),
                    },
                    p,
                    unit,
                    f"Change of support, {d.name} (r = {curve.support_coefficient:.3f})",
                )
                report.image(
                    p, f"Kriged grade–tonnage curve against the discrete Gaussian model, {d.name}"
                )
            if support_rows:
                _write_table(
                    pd.concat(support_rows, ignore_index=True), folder / "change_of_support.csv"
                )
                report.paragraph(
                    "Tonnes, grade and metal expected at block support by the discrete Gaussian "
                    "model (declustered composites, block variance from the variogram model): "
                    "change_of_support.csv."
                )

        # --- classification and grade-tonnage
        report.heading("Classification (proposals)")
        report.paragraph(
            "Labels come from numeric rules on search pass, holes, samples, distance and slope of "
            "regression; they are proposals for a Competent or Qualified Person to review."
        )
        report.table(pd.DataFrame([dataclasses.asdict(r) for r in cls.rules]).astype(str))
        with timer("grade-tonnage"):
            _grade_tonnage_outputs(project, blocks, folder, report, project.report.cutoffs)

        # --- views
        with timer("views"):
            _standard_views(project, grid, blocks, comps.table, models, folder, report)

        if project.truth is not None:
            from .truth import TruthMismatch, compare_with_truth

            truth = pd.read_parquet(project.truth)
            report.raw('<div class="truth">')
            report.heading("Check against the known truth (demo only)")
            report.paragraph(
                "The demo deposit is invented, so its true block grades are known. This section "
                "compares them with the estimate; the estimator never used them."
            )
            try:
                rows = [
                    {"domain": d.name, **compare_with_truth(blocks, truth, grid, primary, d.name)}
                    for d in project.domains
                    if d.estimate
                ]
                report.table(pd.DataFrame(rows))
            except TruthMismatch as exc:
                _warn(report, f"truth file {project.truth.name}: {exc}")
                report.paragraph(str(exc))
            report.raw("</div>")

        blocks_out = blocks.drop(columns=[c for c in blocks if c.endswith("_ill_conditioned")])
        with timer("block model files"):
            _write_table(blocks_out, folder / "block_model.parquet")
            if write_csv if write_csv is not None else project.report.write_csv:
                _write_table(blocks_out, folder / "block_model.csv")
            from .views import block_image

            numeric = [
                c
                for c in blocks_out.columns
                if c not in ("domain", "class", "x", "y", "z", "i", "j", "k")
            ]
            image = block_image(
                grid, blocks_out.assign(**{"class": blocks_out["class"]}), numeric + ["class"]
            )
            image.save(str(folder / "block_model.vti"))
        report.heading("Run")
        report.paragraph(f"Timings (s): {timer.timings}")
        report.write(folder / "report.html")
        manifest = {
            "command": "run",
            "project": str(project.source),
            "inputs_sha256": _inputs(project),
            "configuration": resolved(project),
            "versions": _versions(),
            "timings_s": timer.timings,
            "cautions": CAUTIONS,
            "blocks": len(blocks),
            "options": {"backend": backend, "workers": workers, "chunk_size": chunk_size},
        }
        staged.commit(manifest)
    return staged.target


def _standard_views(
    project, grid, blocks, composites, models, folder: Path, report: HtmlReport
) -> None:
    from . import plots

    primary = project.grades[0]
    unit = project.data.grades[primary]
    main = project.domains[0].name
    b = blocks[blocks["domain"] == main]
    centre = (b[["x", "y", "z"]].to_numpy(float) * b[["tonnes"]].to_numpy()).sum(axis=0) / b[
        "tonnes"
    ].sum()
    # snap to a block centre so slices cut through blocks, not along their faces
    centre = (
        np.asarray(grid.origin)
        + (np.floor((centre - grid.origin) / grid.block_size) + 0.5) * grid.block_size
    )
    report.heading("Views")
    p = folder / "plan.png"
    plots.plan_figure(blocks, grid, primary, float(centre[2]), p, unit, composites=composites)
    report.image(p, f"Plan through the centre of the {main} domain")
    # across strike: a right angle to the major axis of the main domain's model
    model = models.get(f"{main}.{primary}")
    strike_normal = (
        (model.structures[0].orientation.azimuth + 90.0) % 360.0
        if model and model.structures
        else 90.0
    )
    p = folder / "section.png"
    plots.section_figure(
        blocks,
        grid,
        primary,
        centre,
        strike_normal,
        2 * grid.block_size[0],
        p,
        unit,
        composites=composites,
    )
    report.image(p, f"Section across the {main} domain through its centre")
    try:
        from .views import render_view

        for axis in "xyz":
            pos = [None, None, None]
            pos["xyz".index(axis)] = float(centre["xyz".index(axis)])
            p = folder / f"slice_{axis}.png"
            render_view(
                grid,
                blocks,
                primary,
                p,
                unit=unit,
                slices=tuple(pos),
                composites=composites[composites["domain"] == main],
            )
            report.image(p, f"3D slice normal to {axis} through the {main} centre, {primary}")
        from .solids import read_surface

        solids = [read_surface(d.solid) for d in project.domains if d.solid is not None]
        p = folder / "slices_class.png"
        render_view(grid, blocks, "class", p, slices=tuple(centre), solids=solids)
        report.image(p, "3D slices coloured by proposed class, with the domain solids")
    except Exception as exc:  # no rendering back end on this machine: say so, keep the run
        report.paragraph(f"3D views could not be rendered here: {exc}")


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
    staged = OutputFolder(out, [*input_files(project), block_model], replace=replace)
    with staged:
        need_file(block_model)
        blocks = pd.read_parquet(block_model)
        primary = project.grades[0]
        if reclassify or "class" not in blocks:
            cls = project.classification
            blocks["class"] = classify_blocks(
                blocks, primary, cls.rules, cls.fallback, clean_up=cls.clean_up
            )
        report = HtmlReport(f"{project.name}: grade–tonnage re-report of {Path(block_model).name}")
        _grade_tonnage_outputs(
            project, blocks, staged.path, report, cutoffs or project.report.cutoffs
        )
        report.write(staged.path / "report.html")
        staged.commit(
            {
                "command": "report",
                "block_model": str(block_model),
                "block_model_sha256": file_hash(block_model),
                "cutoffs": list(cutoffs or project.report.cutoffs),
                "configuration": resolved(project),
                "versions": _versions(),
                "cautions": CAUTIONS,
            }
        )
    return staged.target
