"""Stage 5: the block model: every domain and grade estimated by the project's method,
then a proposed class for each block."""

from __future__ import annotations

import numpy as np
import pandas as pd

from blockmodel.assess.classification import classify_blocks
from blockmodel.config.project import Project
from blockmodel.errors import setting_error
from blockmodel.estimation.engine import EstimationJob, cluster_session, passes_from, run_job
from blockmodel.model.grid import BlockGrid
from blockmodel.variography.models import VariogramModel

__all__ = ["classify", "estimate_block_model", "require_search"]


def _estimated_density(project, table, domain, centres, grid, e, orientation) -> np.ndarray:
    """Inverse-distance estimate of measured density from the domain's composites, with the
    domain's search passes oriented as its first grade's model (or as each pass says);
    blocks the search cannot reach keep the domain's constant density."""
    source = table[(table["domain"] == domain.name) & table["density"].notna()]
    if len(source) == 0:
        raise setting_error(
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


# block-model column (per grade g) <- key of the estimator's results
OUTPUTS = {
    "{g}": "estimate",
    "{g}_variance": "variance",
    "{g}_slope": "slope",
    "{g}_efficiency": "efficiency",
    "{g}_samples": "n_samples",
    "{g}_holes": "n_holes",
    "{g}_distance": "mean_distance",
    "{g}_pass": "search_pass",
    "{g}_nearest": "nearest",
    "{g}_inverse_distance": "inverse_distance",
    "{g}_ill_conditioned": "ill_conditioned",
}


def _estimate_grade(
    project: Project,
    domain: str,
    grade: str,
    table: pd.DataFrame,
    model: VariogramModel,
    grid: BlockGrid,
    centres: np.ndarray,
    mean: float | None,
    *,
    chunk_size: int,
    backend: str,
    workers: int,
    cluster: str,
) -> dict[str, np.ndarray]:
    """One grade of one domain at the block ``centres`` (n, 3) by the project's method,
    from the domain's composites (all composites with soft boundaries)."""
    e = project.estimation
    source = table if e.boundaries == "soft" else table[table["domain"] == domain]
    source = source[source[grade].notna()]
    fewest = min(p.min_samples for p in project.passes_for(domain))
    if fewest > len(source):
        raise setting_error(
            project.source,
            "search.min_samples",
            f"every search pass of domain '{domain}' needs at least {fewest} samples, "
            f"but the domain has {len(source)} composites with {grade}",
        )
    if e.method == "simple" and not np.isfinite(mean):
        raise setting_error(
            project.source,
            "estimation.method",
            f"simple kriging needs the declustered mean of {grade} in domain "
            f"'{domain}', and it could not be computed (no composites with {grade})",
        )
    passes = passes_from(
        project.passes_for(domain),
        model.orientation,
    )
    job = EstimationJob(
        source[["x", "y", "z"]].to_numpy(float),
        source[grade].to_numpy(float),
        source["hole"].to_numpy(),
        model,
        passes,
        e.method,
        mean,
        grid.block_size,
        e.discretisation,
        e.idw_power,
    )
    return run_job(
        job,
        centres,
        chunk_size=chunk_size,
        backend=backend,
        workers=workers,
        cluster=cluster,
        label=f"{domain} {grade}",
    )


def require_search(project: Project) -> None:
    """Stop, naming the domain, when an estimated domain has no search pass (the project
    file may leave them out for ``check`` and ``variography``, not for kriging)."""
    for d in project.domains:
        if d.estimate and not project.passes_for(d.name):
            raise setting_error(
                project.source, "search", f"domain '{d.name}' has no search: add [[search]] passes"
            )


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
    g_pass, g_nearest, g_inverse_distance``.
    """
    e = project.estimation
    backend = backend or e.backend
    workers = e.workers if workers is None else workers
    chunk_size = chunk_size or e.chunk_size
    cluster = cluster if cluster is not None else e.cluster
    require_search(project)
    # one connection to the cluster, if any, for every domain and grade
    with cluster_session(cluster if backend == "dask" else ""):
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
                orientation = model.orientation
                frame["density"] = _estimated_density(
                    project, table, d, centres, grid, e, orientation
                )
                frame["tonnes"] = grid.block_volume * prop * frame["density"].to_numpy()
            engine = {"chunk_size": chunk_size, "backend": backend, "workers": workers}
            for g in project.grades:
                mean = None
                if e.method == "simple":
                    mean = (declustered_means or {}).get(d.name, {}).get(g, float("nan"))
                res = _estimate_grade(
                    project,
                    d.name,
                    g,
                    table,
                    models[f"{d.name}.{g}"],
                    grid,
                    centres,
                    mean,
                    cluster=cluster,
                    **engine,
                )
                for column, key in OUTPUTS.items():
                    frame[column.format(g=g)] = res[key]
            frames.append(frame)
    model_table = pd.concat(frames, ignore_index=True)
    order = {d.name: n for n, d in enumerate(project.domains)}
    model_table["_order"] = model_table["domain"].map(order)
    model_table = model_table.sort_values(["_flat", "_order"], kind="stable").drop(
        columns=["_flat", "_order"]
    )
    return model_table.reset_index(drop=True)


def classify(project: Project, blocks: pd.DataFrame) -> pd.DataFrame:
    """A copy of ``blocks`` with the proposed ``class`` of each row from the project's
    classification rules on its first grade."""
    c = project.classification
    labels = classify_blocks(blocks, project.grades[0], c.rules, c.fallback, clean_up=c.clean_up)
    return blocks.assign(**{"class": labels})
