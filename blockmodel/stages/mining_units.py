"""The blocks a simulation averages its nodes to: the grid's blocks, or selective mining
units that divide each block a whole number of times along each axis
(``simulation.block_size``)."""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
import pandas as pd

from blockmodel.config.project import Project

__all__ = ["MiningUnits", "mining_units"]


@dataclass(frozen=True)
class MiningUnits:
    """The simulated blocks.

    Attributes
    ----------
    table : DataFrame
        One row per unit: ``x, y, z`` (centre, metres), ``i, j, k`` (index on the grid of
        units, same origin as the block grid), ``domain``, ``tonnes``, ``class`` when
        classified, and the grades of the parent block (its estimate).
    size : (3,) float64, metres
    parts : (3,) int64
        Units per block along x, y, z (1, 1, 1: the grid's blocks themselves).
    discretisation : (3,) int
        Nodes per unit along x, y, z.
    """

    table: pd.DataFrame
    size: np.ndarray
    parts: np.ndarray
    discretisation: tuple[int, int, int]

    @property
    def are_blocks(self) -> bool:
        """True when the units are the grid's blocks."""
        return bool(np.all(self.parts == 1))


def mining_units(project: Project, blocks: pd.DataFrame, grid_origin, block_size) -> MiningUnits:
    """The units of ``simulation.block_size`` (or the blocks) with their nodes per unit.

    Each unit takes its parent block's domain, class, grades and proportion of the domain;
    its tonnes are the block's divided by the number of units in a block.  Without
    ``simulation.discretisation`` a unit has the node spacing of
    ``estimation.discretisation`` in a block (at least one node per side).

    Parameters
    ----------
    project : Project
    blocks : DataFrame
        The block model: ``i, j, k, domain, tonnes`` and the grades.
    grid_origin, block_size : (3,) float, metres
        The block grid's lower corner and block size.
    """
    s = project.simulation
    size = np.asarray(block_size, dtype=np.float64)
    unit = size if s.block_size is None else np.asarray(s.block_size, dtype=np.float64)
    parts = np.maximum(np.round(size / unit).astype(np.int64), 1)
    if s.discretisation is not None:
        disc = tuple(int(d) for d in s.discretisation)
    else:
        est = np.asarray(project.estimation.discretisation, dtype=np.float64)
        disc = tuple(int(d) for d in np.maximum(np.round(est / parts), 1))
    if np.all(parts == 1):
        return MiningUnits(blocks, size, parts, disc)
    estimated = [d.name for d in project.domains if d.estimate]
    grades = blocks[list(project.grades)].to_numpy(float)
    keep = blocks["domain"].isin(estimated).to_numpy() & np.isfinite(grades).any(axis=1)
    parent = blocks[keep].reset_index(drop=True)
    n = int(np.prod(parts))
    sub = np.stack(np.meshgrid(*[np.arange(p) for p in parts], indexing="ij"), -1).reshape(-1, 3)
    table = parent.loc[np.repeat(np.arange(len(parent)), n)].reset_index(drop=True)
    ijk = (parent[["i", "j", "k"]].to_numpy(np.int64) * parts)[:, None, :] + sub[None]
    ijk = ijk.reshape(-1, 3)
    centres = np.asarray(grid_origin, dtype=np.float64) + (ijk + 0.5) * (size / parts)
    for a, name in enumerate("ijk"):
        table[name] = ijk[:, a]
    for a, name in enumerate("xyz"):
        if name in table:
            table[name] = centres[:, a]
    table["tonnes"] = table["tonnes"].to_numpy(float) / n
    return MiningUnits(table, size / parts, parts, disc)
