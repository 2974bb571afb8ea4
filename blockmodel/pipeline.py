"""The stages of a run, each a function from inputs to outputs (no file writing here).

load -> composite -> cap -> decluster -> variography -> proportions -> estimate ->
classify -> validate.  The command line calls these and writes their outputs.
"""

from __future__ import annotations

import difflib
from dataclasses import dataclass, field

import numpy as np
import pandas as pd

from .compositing import CappingSummary, CompositingSummary, cap_grades, composite
from .declustering import (
    CellDeclustering,
    cell_declustering,
    nearest_neighbour_weights,
    weighted_quantiles,
)
from .directions import OrientationFit, find_orientation
from .drillholes import DrillholeSet, load_drillholes
from .engine import EstimationJob, passes_from, run_job
from .errors import InputError, Problem
from .experimental import (
    ExperimentalVariogram,
    NormalScores,
    experimental_variogram,
    normal_scores,
    scan_directions,
)
from .fitting import MIN_PAIRS, FittedModel, fit_variogram_checked, principal_directions
from .grid import BlockGrid
from .orientation import Orientation
from .project import Project
from .variogram import Structure, VariogramModel

__all__ = [
    "Composites",
    "Variography",
    "block_model_grid",
    "decluster",
    "estimate_block_model",
    "load_and_composite",
    "model_proportions",
    "variography",
]


@dataclass
class Composites:
    holes: DrillholeSet
    table: pd.DataFrame
    compositing: CompositingSummary
    capping: list[CappingSummary]


def load_and_composite(project: Project) -> Composites:
    """Load and check drillholes, composite, cap; domain names replace interval codes."""
    holes = load_drillholes(project.data)
    _check_codes(project, holes)
    code_to_name = {d.code: d.name for d in project.domains}
    comps, summary = composite(holes, project.compositing)
    comps["domain"] = comps["domain"].map(lambda c: code_to_name.get(c, c))
    comps, capping = cap_grades(comps, project.capping)
    # Order by position, not by hole name: results must not depend on what holes are called
    # (ties in the search and the order of sums follow the table's order).
    comps = comps.sort_values(["x", "y", "z", "hole"], kind="stable").reset_index(drop=True)
    for d in project.domains:
        if d.estimate and not (comps["domain"] == d.name).any():
            raise InputError(
                [
                    Problem(
                        str(project.data.intervals),
                        None,
                        None,
                        project.data.columns.domain,
                        f"domain '{d.name}' (code '{d.code}') has no composites",
                    )
                ]
            )
    return Composites(holes, comps, summary, capping)


def _check_codes(project: Project, holes: DrillholeSet) -> None:
    """Interval codes that name no domain: an error where the code differs from a declared
    one only in case or spaces (a typing slip), otherwise a warning with the count."""
    declared = {d.code for d in project.domains}
    counts = holes.intervals["domain"].value_counts()
    slips = []
    for code, count in counts.items():
        if code in declared or code == "":
            continue
        same = [d for d in declared if d.strip().lower() == str(code).strip().lower()]
        close = same or difflib.get_close_matches(str(code), sorted(declared), n=1, cutoff=0.75)
        hint = f"; did you mean '{close[0]}'?" if close else " (not estimated)"
        problem = Problem(
            str(project.data.intervals),
            None,
            None,
            project.data.columns.domain,
            f"code '{code}' in {count} interval(s) matches no domain{hint}",
        )
        (slips if same else holes.warnings).append(problem)
    if slips:
        raise InputError(slips)


def block_model_grid(project: Project) -> BlockGrid:
    return BlockGrid(project.grid.origin, project.grid.block_size, project.grid.shape)


def model_proportions(
    project: Project, grid: BlockGrid, composites: pd.DataFrame | None = None
) -> np.ndarray:
    """(n_blocks, n_domains) proportions below the topography.

    Domains with a solid take the share of each block inside it (first listed wins). A
    domain without a solid takes, of what the solids leave of a block, the share of its
    sub-cells (``grid.subcells`` per axis) whose nearest composite, within
    ``grid.code_reach`` metres, carries the domain's code: the codes are read as a
    nearest-composite partition of space, resolved to sub-cells so that a flat seam
    thinner than a block gets its partial blocks.
    """
    from scipy.spatial import cKDTree

    from .domains import block_proportions
    from .solids import read_solid, read_surface

    topo = read_surface(project.grid.topography) if project.grid.topography else None
    with_solid = [n for n, d in enumerate(project.domains) if d.solid is not None]
    solids = [read_solid(project.domains[n].solid) for n in with_solid]
    out = np.zeros((grid.n_blocks, len(project.domains)), dtype=np.float32)
    if solids:
        out[:, with_solid] = block_proportions(grid, solids, topo, subcells=project.grid.subcells)
    coded = [n for n, d in enumerate(project.domains) if d.solid is None]
    if not coded:
        return out
    if composites is None or len(composites) == 0:
        raise _fail(
            project.source, "domains.solid", "domains without a solid need composites to place them"
        )
    lo = np.asarray(grid.origin) - 1.0
    hi = lo + np.asarray(grid.shape) * np.asarray(grid.block_size) + 2.0
    from .solids import box_surface

    box = box_surface(lo, hi)
    below = block_proportions(grid, [box], topo, subcells=project.grid.subcells)[:, 0]
    free = np.clip(below - out.sum(axis=1), 0.0, 1.0)
    tree = cKDTree(composites[["x", "y", "z"]].to_numpy(float))
    codes = composites["domain"].to_numpy()
    axes = [
        ((np.arange(n) + 0.5) / n - 0.5) * size
        for n, size in zip(project.grid.subcells, grid.block_size, strict=True)
    ]
    offsets = np.stack(np.meshgrid(*axes, indexing="ij"), axis=-1).reshape(-1, 3)
    reach = project.grid.code_reach
    # only blocks whose centre lies within reach of a composite (plus half a diagonal)
    near = tree.query(
        grid.centres(),
        distance_upper_bound=reach + 0.5 * np.linalg.norm(grid.block_size),
        workers=-1,
    )[0]
    candidates = np.flatnonzero(np.isfinite(near) & (free > 0))
    step = max(1, 2_000_000 // len(offsets))
    for start in range(0, len(candidates), step):
        flat = candidates[start : start + step]
        pts = (grid.centres(flat)[:, None, :] + offsets[None]).reshape(-1, 3)
        dist, nearest = tree.query(pts, workers=-1)
        names = codes[nearest].reshape(len(flat), len(offsets))
        within = (dist <= reach).reshape(len(flat), len(offsets))
        for n in coded:
            share = ((names == project.domains[n].name) & within).mean(axis=1)
            out[flat, n] = (free[flat] * share).astype(np.float32)
    return out


MIN_SOLID_SHARE = 0.99  # share of a solid's volume the grid must hold


def solid_shares(project: Project, grid: BlockGrid) -> dict[str, float]:
    """Share of each domain solid's volume inside the block grid; stops when one is below
    99 % (the grid would silently leave part of the domain out of the tonnes)."""
    from .solids import read_solid, share_inside_box

    lo = np.asarray(grid.origin, dtype=np.float64)
    hi = lo + np.asarray(grid.shape) * np.asarray(grid.block_size)
    shares, problems = {}, []
    for d in project.domains:
        if d.solid is None:
            continue
        shares[d.name] = share_inside_box(read_solid(d.solid), lo, hi)
        if shares[d.name] < MIN_SOLID_SHARE:
            problems.append(
                Problem(
                    str(project.source),
                    None,
                    None,
                    "grid",
                    f"only {100 * shares[d.name]:.1f} % of the volume of domain '{d.name}' "
                    f"({d.solid.name}) lies inside the block grid (from {lo.round(1).tolist()} "
                    f"to {hi.round(1).tolist()}); enlarge grid.shape or move grid.origin",
                )
            )
    if problems:
        raise InputError(problems)
    return shares


def check_proportions(project: Project, props: np.ndarray) -> None:
    """Stop when no block holds any domain (grid away from the solids or the data, or a
    topography above which every block lies)."""
    if props.sum() > 0:
        return
    why = (
        "every block lies above the topography or outside the domains"
        if project.grid.topography is not None
        else "no block lies inside a domain solid or near composites of a coded domain"
    )
    sub = [
        round(b / n, 2) for b, n in zip(project.grid.block_size, project.grid.subcells, strict=True)
    ]
    raise InputError(
        [
            Problem(
                str(project.source),
                None,
                None,
                "grid",
                f"the block grid holds no rock: {why}; check grid.origin, grid.block_size and "
                f"grid.subcells against the solids (sub-cells are {sub} m)",
            )
        ]
    )


QUANTILES = np.array([0.1, 0.25, 0.5, 0.75, 0.9, 0.95])


@dataclass
class DomainDeclustering:
    """Weights of one domain's composites and the statistics they give, per grade."""

    weights: np.ndarray
    cell: CellDeclustering | None
    naive_mean: dict[str, float]
    declustered_mean: dict[str, float]
    declustered_variance: dict[str, float] = field(default_factory=dict)
    declustered_quantiles: dict[str, np.ndarray] = field(default_factory=dict)


def decluster(
    project: Project,
    table: pd.DataFrame,
    grid: BlockGrid | None = None,
    proportions: np.ndarray | None = None,
) -> dict[str, DomainDeclustering]:
    """Declustering weights per domain (column ``weight`` added to ``table`` in place)."""
    s = project.declustering
    table["weight"] = 1.0
    out = {}
    lo, hi, n = s.cell_sizes
    sizes = np.linspace(lo, hi, int(n))
    for d_index, d in enumerate(project.domains):
        rows = np.flatnonzero((table["domain"] == d.name).to_numpy())
        if len(rows) == 0:
            continue
        pts = table.loc[table.index[rows], ["x", "y", "z"]].to_numpy(float)
        primary = project.grades[0]
        vals = table.loc[table.index[rows], primary].to_numpy(float)
        ok = np.isfinite(vals)
        cell = None
        w = np.ones(len(rows))
        if s.method == "cell" and ok.sum() > 1:
            cell = cell_declustering(
                pts[ok],
                vals[ok],
                sizes,
                anisotropy=s.anisotropy,
                origins=s.origins,
                choose=s.choose,
                fixed_size=s.fixed_size,
            )
            w[ok] = cell.weights
        elif s.method == "nearest":
            if grid is None or proportions is None:
                raise ValueError("nearest-neighbour declustering needs the grid and proportions")
            flat = np.flatnonzero(proportions[:, d_index] > 0)
            if len(flat) == 0:
                raise _fail(
                    project.source,
                    "declustering.method",
                    f"nearest-neighbour declustering of domain '{d.name}' needs blocks of the "
                    "domain in the grid, and there are none",
                )
            w = nearest_neighbour_weights(pts, grid.centres(flat))
        table.loc[table.index[rows], "weight"] = w
        naive, decl, var, quant = {}, {}, {}, {}
        for g in project.grades:
            v = table.loc[table.index[rows], g].to_numpy(float)
            f = np.isfinite(v)
            naive[g] = float(v[f].mean()) if f.any() else float("nan")
            decl[g] = float(w[f] @ v[f] / w[f].sum()) if f.any() else float("nan")
            if f.any():
                var[g] = float(w[f] @ (v[f] - decl[g]) ** 2 / w[f].sum())
                quant[g] = weighted_quantiles(v[f], w[f], QUANTILES)
        out[d.name] = DomainDeclustering(w, cell, naive, decl, var, quant)
    return out


@dataclass
class Variography:
    """One domain and grade: experimental variograms, the model and where it came from.

    ``scale`` converts the experimental values to the model's units: 1 for the
    semivariogram of grades; the (declustered) variance for a correlogram or normal-score
    variogram; the squared mean for the pairwise relative variogram.
    """

    domain: str
    grade: str
    orientation: Orientation
    directional: list[ExperimentalVariogram] = field(default_factory=list)
    downhole: ExperimentalVariogram | None = None
    model: VariogramModel | None = None
    source: str = "fitted"
    scale: float = 1.0
    scores: NormalScores | None = None
    scan: dict | None = None
    orientation_fit: OrientationFit | None = None  # when the orientation was found from data
    fit: FittedModel | None = None  # when the model was fitted

    def warnings(self) -> list[str]:
        """What a reader must know about how far to trust this model."""
        out = []
        key = f"{self.domain}.{self.grade}"
        if self.fit is not None:
            for label, r2 in self.fit.poor().items():
                out.append(
                    f"{key}: the fitted model follows the {label} variogram poorly "
                    f"(weighted R² {r2:.2f}); review it, or give the model in "
                    f"[variogram.{key}]"
                )
            if self.fit.lags_dropped:
                out.append(
                    f"{key}: {self.fit.lags_dropped} lag(s) with fewer than {MIN_PAIRS} pairs "
                    "were left out of the fit"
                )
        o = self.orientation_fit
        if o is not None and o.loose_axes():
            out.append(
                f"{key}: the data do not place the {' and '.join(o.loose_axes())} axis "
                f"({o.describe()}); give variography.orientation if the geology says more"
            )
        return out


def _mean_hole_direction(composites: pd.DataFrame) -> np.ndarray | None:
    """Mean unit direction (3,) of the holes, from successive composites of each hole
    (sign-aligned, so up and down count alike); None when no hole has two composites."""
    table = composites.sort_values(["hole", "from"], kind="stable")
    xyz = table[["x", "y", "z"]].to_numpy(float)
    same = table["hole"].to_numpy()[1:] == table["hole"].to_numpy()[:-1]
    steps = (xyz[1:] - xyz[:-1])[same]
    length = np.linalg.norm(steps, axis=1)
    steps = steps[length > 0] / length[length > 0, None]
    if len(steps) == 0:
        return None
    steps[steps[:, 2] > 0] *= -1.0
    mean = steps.mean(axis=0)
    return mean / np.linalg.norm(mean)


def _model_from_spec(spec) -> VariogramModel:
    return VariogramModel(
        spec.nugget,
        [Structure(s.kind, s.sill, s.ranges, Orientation(*s.orientation)) for s in spec.structures],
    )


def _scaled(model: VariogramModel, factor: float) -> VariogramModel:
    return VariogramModel(
        model.nugget * factor,
        [Structure(s.kind, s.sill * factor, s.ranges, s.orientation) for s in model.structures],
    )


def _fail(path, field_name: str, message: str) -> InputError:
    return InputError([Problem(str(path), None, None, field_name, message)])


def variography(project: Project, table: pd.DataFrame) -> dict[str, Variography]:
    """Experimental variograms along the principal axes, downhole and over a fan of
    directions, and the fitted (or given) model, per estimated domain and grade."""
    v = project.variography
    out = {}
    for d in project.domains:
        if not d.estimate:
            continue
        sub = table[table["domain"] == d.name]
        for g in project.grades:
            key = f"{d.name}.{g}"
            ok = sub[g].notna().to_numpy()
            pts = sub.loc[ok, ["x", "y", "z"]].to_numpy(float)
            grades = sub.loc[ok, g].to_numpy(float)
            decl = (
                sub.loc[ok, "weight"].to_numpy(float) if "weight" in sub else np.ones(len(grades))
            )
            weights = decl if v.use_declustering_weights else None
            given = key in project.variogram
            if not given and (len(grades) < 2 or np.ptp(grades) == 0):
                shown = f" ({grades[0]:g})" if len(grades) else ""
                raise _fail(
                    project.data.intervals,
                    g,
                    f"{key}: {len(grades)} composite(s), all grades "
                    f"equal{shown}: no variogram can be fitted; give a model in [variogram.{key}]",
                )
            mean = float(decl @ grades / decl.sum()) if len(grades) else 0.0
            variance = float(decl @ (grades - mean) ** 2 / decl.sum()) if len(grades) else 0.0
            values, scores, scale = grades, None, 1.0
            if v.transform == "normal_scores":
                values, scores = normal_scores(grades, decl)
                scale = variance
            elif v.estimator == "correlogram":
                scale = variance
            elif v.estimator == "pairwise_relative":
                scale = mean * mean
            if given:
                model = _model_from_spec(project.variogram[key])
                orient = model.structures[0].orientation if model.structures else Orientation()
            elif v.orientation is not None:
                model, orient = None, Orientation(*v.orientation)
            else:  # find the orientation of continuity in 3D
                try:
                    found = find_orientation(pts, values, lag=v.lag, n_lags=v.lags, kind=v.kinds[0])
                except ValueError as exc:
                    raise _fail(
                        project.source,
                        "variography.orientation",
                        f"cannot find the orientation of continuity for {key} ({exc}); give "
                        f"variography.orientation or a model in [variogram.{key}]",
                    ) from None
                model, orient = None, found.orientation
            res = Variography(d.name, g, orient, scale=scale, scores=scores)
            if not given and v.orientation is None:
                res.orientation_fit = found
            common = {"estimator": v.estimator, "weights": weights}
            for axis, (az, pl) in enumerate(principal_directions(orient)):
                res.directional.append(
                    experimental_variogram(
                        pts,
                        values,
                        lag=v.lag if axis < 2 else v.minor_lag,
                        n_lags=v.lags,
                        lag_tolerance=None
                        if v.lag_tolerance is None
                        else v.lag_tolerance * (1.0 if axis < 2 else v.minor_lag / v.lag),
                        direction=(az, pl),
                        angular_tolerance=v.angular_tolerance,
                        horizontal_bandwidth=v.horizontal_bandwidth,
                        vertical_bandwidth=v.vertical_bandwidth,
                        label=("major", "semi", "minor")[axis],
                        **common,
                    )
                )
            res.downhole = experimental_variogram(
                pts,
                values,
                lag=project.compositing.length,
                n_lags=v.lags,
                holes=sub.loc[ok, "hole"].to_numpy(),
                label="downhole",
                **common,
            )
            if len(values) > 1:
                res.scan = scan_directions(
                    pts,
                    values,
                    np.arange(0.0, 180.0, 15.0),
                    np.array([0.0, 30.0, 60.0]),
                    lag=v.lag,
                    n_lags=min(v.lags, 8),
                    angular_tolerance=15.0,
                    **common,
                )
            if model is None:
                fitted_to = [(e, a) for a, e in enumerate(res.directional)]
                along = _mean_hole_direction(sub.loc[ok])
                if along is not None:  # the short lags down the holes fix the nugget
                    fitted_to.append((res.downhole, along))
                try:
                    res.fit = fit_variogram_checked(
                        fitted_to,
                        v.kinds[: v.structures],
                        orient,
                        fixed=dict(v.fixed),
                        extent=float(np.linalg.norm(np.ptp(pts, axis=0))),
                    )
                    fitted = res.fit.model
                except ValueError as exc:
                    raise _fail(
                        project.source, "variography", f"cannot fit a variogram for {key}: {exc}"
                    ) from None
                # standardised variograms: sills scaled to the declustered variance (common practice)
                model, res.source = _scaled(fitted, scale), "fitted"
            else:
                res.source = "project file"
            res.model = model
            out[key] = res
    return out


def _estimated_density(project, table, domain, centres, grid, e, orientation) -> np.ndarray:
    """Inverse-distance estimate of measured density from the domain's composites, with the
    domain's search passes oriented as its first grade's model (or as each pass says);
    blocks the search cannot reach keep the domain's constant density."""
    source = table[(table["domain"] == domain.name) & table["density"].notna()]
    if len(source) == 0:
        raise _fail(
            project.source,
            f"domains.{domain.name}.density_from_composites",
            f"domain '{domain.name}' has no composite with a measured density "
            f"({project.data.density}); give a constant density instead",
        )
    passes = passes_from(project.passes_for(domain.name), orientation)
    job = EstimationJob(
        source[["x", "y", "z"]].to_numpy(float),
        source["density"].to_numpy(float),
        source["hole"].to_numpy(),
        None,
        passes,
        "inverse_distance",
        None,
        grid.block_size,
        e.discretisation,
        e.idw_power,
    )
    res = run_job(
        job, centres, chunk_size=e.chunk_size, backend="serial", label=f"{domain.name} density"
    )
    return np.where(np.isfinite(res["estimate"]), res["estimate"], domain.density)


def estimate_block_model(
    project: Project,
    table: pd.DataFrame,
    models: dict[str, VariogramModel],
    grid: BlockGrid,
    proportions: np.ndarray,
    *,
    backend: str | None = None,
    workers: int | None = None,
    chunk_size: int | None = None,
    cluster: str | None = None,
    declustered_means: dict[str, dict[str, float]] | None = None,
) -> pd.DataFrame:
    """Estimate every domain and grade; one row per block and domain with proportion > 0.

    Returns
    -------
    DataFrame with columns ``x, y, z, i, j, k, domain, proportion, density, tonnes`` and,
    per grade g, ``g, g_variance, g_slope, g_efficiency, g_samples, g_holes, g_distance,
    g_pass, g_nn, g_idw``.
    """
    e = project.estimation
    backend = backend or e.backend
    workers = e.workers if workers is None else workers
    chunk_size = chunk_size or e.chunk_size
    cluster = cluster if cluster is not None else e.cluster
    for d in project.domains:
        if d.estimate and not project.passes_for(d.name):
            raise _fail(
                project.source, "search", f"domain '{d.name}' has no search: add [[search]] passes"
            )
    frames = []
    for d_index, d in enumerate(project.domains):
        if not d.estimate:
            continue
        flat = np.flatnonzero(proportions[:, d_index] > 0)
        if len(flat) == 0:
            continue
        ijk = grid.ijk(flat)
        centres = grid.centres(flat)
        prop = proportions[flat, d_index].astype(np.float64)
        frame = pd.DataFrame(
            {
                "x": centres[:, 0],
                "y": centres[:, 1],
                "z": centres[:, 2],
                "i": ijk[:, 0],
                "j": ijk[:, 1],
                "k": ijk[:, 2],
                "domain": d.name,
                "proportion": prop,
                "density": d.density,
                "tonnes": grid.block_volume * prop * d.density,
            }
        )
        frame["_flat"] = flat
        if d.density_from_composites:
            model = models[f"{d.name}.{project.grades[0]}"]
            orientation = model.structures[0].orientation if model.structures else Orientation()
            frame["density"] = _estimated_density(project, table, d, centres, grid, e, orientation)
            frame["tonnes"] = grid.block_volume * prop * frame["density"].to_numpy()
        for g in project.grades:
            key = f"{d.name}.{g}"
            source = table if e.boundaries == "soft" else table[table["domain"] == d.name]
            source = source[source[g].notna()]
            model = models[key]
            fewest = min(p.min_samples for p in project.passes_for(d.name))
            if fewest > len(source):
                raise _fail(
                    project.source,
                    "search.min_samples",
                    f"every search pass of domain '{d.name}' needs at least {fewest} samples, "
                    f"but the domain has {len(source)} composites with {g}",
                )
            passes = passes_from(
                project.passes_for(d.name),
                model.structures[0].orientation if model.structures else Orientation(),
            )
            mean = None
            if e.method == "simple":
                mean = (declustered_means or {}).get(d.name, {}).get(g, float("nan"))
                if not np.isfinite(mean):
                    raise _fail(
                        project.source,
                        "estimation.method",
                        f"simple kriging needs the declustered mean of {g} in domain "
                        f"'{d.name}', and it could not be computed (no composites with {g})",
                    )
            job = EstimationJob(
                source[["x", "y", "z"]].to_numpy(float),
                source[g].to_numpy(float),
                source["hole"].to_numpy(),
                model,
                passes,
                e.method,
                mean,
                grid.block_size,
                e.discretisation,
                e.idw_power,
            )
            res = run_job(
                job,
                centres,
                chunk_size=chunk_size,
                backend=backend,
                workers=workers,
                cluster=cluster,
                label=f"{d.name} {g}",
            )
            frame[g] = res["estimate"]
            frame[f"{g}_variance"] = res["variance"]
            frame[f"{g}_slope"] = res["slope"]
            frame[f"{g}_efficiency"] = res["efficiency"]
            frame[f"{g}_samples"] = res["n_samples"]
            frame[f"{g}_holes"] = res["n_holes"]
            frame[f"{g}_distance"] = res["mean_distance"]
            frame[f"{g}_pass"] = res["search_pass"]
            frame[f"{g}_nn"] = res["nearest"]
            frame[f"{g}_idw"] = res["inverse_distance"]
            frame[f"{g}_ill_conditioned"] = res["ill_conditioned"]
        frames.append(frame)
    model_table = pd.concat(frames, ignore_index=True)
    order = {d.name: n for n, d in enumerate(project.domains)}
    model_table["_order"] = model_table["domain"].map(order)
    model_table = model_table.sort_values(["_flat", "_order"], kind="stable").drop(
        columns=["_flat", "_order"]
    )
    return model_table.reset_index(drop=True)
