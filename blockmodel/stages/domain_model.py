"""Stage 2: the block grid and each block's share of every domain."""

from __future__ import annotations

from collections.abc import Callable
from dataclasses import dataclass

import numpy as np
import pandas as pd

from blockmodel.config.project import Project
from blockmodel.errors import InputError, Problem, setting_error
from blockmodel.model.grid import BlockGrid

__all__ = ["DomainModel", "build_domain_model", "code_partition", "model_proportions"]


@dataclass(frozen=True)
class DomainModel:
    """The grid and the domains in it.

    Attributes
    ----------
    grid : BlockGrid
    proportions : (n_blocks, n_domains) float32
        Share of each block in each domain (project order), below the topography.
    solid_shares : dict of str to float
        Share of each domain solid's volume inside the grid.
    """

    grid: BlockGrid
    proportions: np.ndarray
    solid_shares: dict[str, float]


def build_domain_model(project: Project, composites: pd.DataFrame) -> DomainModel:
    """The grid, the solids' shares inside it (stop below 99 %) and the proportions (stop
    when no block holds rock)."""
    grid = block_model_grid(project)
    shares = solid_shares(project, grid)
    proportions = model_proportions(project, grid, composites)
    check_proportions(project, proportions)
    return DomainModel(grid, proportions, shares)


def block_model_grid(project: Project) -> BlockGrid:
    """The project's block grid."""
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

    from blockmodel.model.domains import block_proportions
    from blockmodel.model.solids import read_solid, read_surface

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
        raise setting_error(
            project.source, "domains.solid", "domains without a solid need composites to place them"
        )
    lo = np.asarray(grid.origin) - 1.0
    hi = lo + np.asarray(grid.shape) * np.asarray(grid.block_size) + 2.0
    from blockmodel.model.solids import box_surface

    box = box_surface(lo, hi)
    below = block_proportions(grid, [box], topo, subcells=project.grid.subcells)[:, 0]
    free = np.clip(below - out.sum(axis=1), 0.0, 1.0)
    code_of = code_partition(composites, project.grid.code_reach)
    tree = cKDTree(composites[["x", "y", "z"]].to_numpy(float))
    axes = [
        ((np.arange(n) + 0.5) / n - 0.5) * size
        for n, size in zip(project.grid.subcells, grid.block_size, strict=True)
    ]
    offsets = np.stack(np.meshgrid(*axes, indexing="ij"), axis=-1).reshape(-1, 3)
    # only blocks whose centre lies within reach of a composite (plus half a diagonal)
    near = tree.query(
        grid.centres(),
        distance_upper_bound=project.grid.code_reach + 0.5 * np.linalg.norm(grid.block_size),
        workers=-1,
    )[0]
    candidates = np.flatnonzero(np.isfinite(near) & (free > 0))
    step = max(1, 2_000_000 // len(offsets))
    for start in range(0, len(candidates), step):
        flat = candidates[start : start + step]
        pts = (grid.centres(flat)[:, None, :] + offsets[None]).reshape(-1, 3)
        names = code_of(pts).reshape(len(flat), len(offsets))
        for n in coded:
            share = (names == project.domains[n].name).mean(axis=1)
            out[flat, n] = (free[flat] * share).astype(np.float32)
    return out


def code_partition(composites: pd.DataFrame, reach: float) -> Callable[[np.ndarray], np.ndarray]:
    """The composites' domain codes read as a nearest-composite partition of space.

    Parameters
    ----------
    composites : DataFrame
        ``x, y, z`` (metres) and ``domain`` of every composite.
    reach : float, metres
        Points farther than this from every composite take no code.

    Returns
    -------
    callable
        From (n, 3) float64 points (metres) to the (n,) code of each point's nearest
        composite, ``""`` beyond ``reach``.
    """
    from scipy.spatial import cKDTree

    tree = cKDTree(composites[["x", "y", "z"]].to_numpy(float))
    codes = composites["domain"].to_numpy(dtype=object)

    def code_of(points: np.ndarray) -> np.ndarray:
        dist, nearest = tree.query(np.asarray(points, dtype=np.float64), workers=-1)
        return np.where(dist <= reach, codes[nearest], "")

    return code_of


MIN_SOLID_SHARE = 0.99  # share of a solid's volume the grid must hold


def solid_shares(project: Project, grid: BlockGrid) -> dict[str, float]:
    """Share of each domain solid's volume inside the block grid; stops when one is below
    99 % (the grid would silently leave part of the domain out of the tonnes)."""
    from blockmodel.model.solids import read_solid, share_inside_box

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
