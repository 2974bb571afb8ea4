"""Block proportions inside domain solids and below topography, from sub-cell sampling."""

from __future__ import annotations

from collections.abc import Sequence

import numpy as np

from blockmodel.model.grid import BlockGrid
from blockmodel.model.solids import (
    Lattice,
    Surface,
    column_crossings,
    points_inside,
    surface_elevation,
)

__all__ = ["block_proportions", "inside_domain"]


def block_proportions(
    grid: BlockGrid,
    solids: Sequence[Surface],
    topography: Surface | None = None,
    *,
    subcells: tuple[int, int, int] = (4, 4, 4),
) -> np.ndarray:
    """Share of each block inside each solid (first listed wins where solids overlap),
    less the part above the topography.

    Parameters
    ----------
    grid : BlockGrid
    solids : sequence of Surface
        Closed solids in priority order.
    topography : Surface, optional
        Open surface; sub-cells above it are air.
    subcells : (3,) int
        Sub-cell points per block along x, y, z (their centres are tested).

    Returns
    -------
    (n_blocks, n_solids) float32
        Proportions in [0, 1], resolution ``1 / prod(subcells)``, rows in flat order.
    """
    sx, sy, sz = subcells
    nx, ny, nz = grid.shape
    dx, dy, dz = grid.block_size
    ox, oy, oz = grid.origin
    lat = Lattice(ox + dx / (2 * sx), dx / sx, nx * sx, oy + dy / (2 * sy), dy / sy, ny * sy)
    crossings = [column_crossings(s, lat) for s in solids]
    top = surface_elevation(topography, lat) if topography is not None else None
    ncol = lat.nx * lat.ny
    columns = np.arange(ncol)
    out = np.zeros((grid.n_blocks, len(solids)), dtype=np.float32)
    per_block = sx * sy * sz
    # column (ci, cj) -> block (i, j): ci // sx, cj // sy
    ci, cj = columns % lat.nx, columns // lat.nx
    block_xy = (ci // sx) + nx * (cj // sy)
    for k in range(nz):
        counts = np.zeros((nx * ny, len(solids)))
        for level in range(sz):
            z = oz + k * dz + (level + 0.5) * dz / sz
            zz = np.full(ncol, z)
            taken = np.zeros(ncol, dtype=bool)
            if top is not None:
                taken |= np.isfinite(top) & (z > top)  # above the surface: air
            for d, cr in enumerate(crossings):
                inside = points_inside(cr, columns, zz) & ~taken
                taken |= inside
                counts[:, d] += np.bincount(block_xy, weights=inside, minlength=nx * ny)
        out[k * nx * ny : (k + 1) * nx * ny] = counts / per_block
    return out


def inside_domain(
    lattice: Lattice,
    columns: np.ndarray,
    z: np.ndarray,
    solids: Sequence[Surface],
    which: int | None,
    topography: Surface | None = None,
) -> np.ndarray:
    """Whether points lie in solid ``which`` and in no solid listed before it (first
    listed wins, as in :func:`block_proportions`), below the topography; with ``which``
    None, in none of the solids (what the solids leave, below the topography).

    Parameters
    ----------
    lattice : Lattice
        The (x, y) columns the points stand on.
    columns : (n,) int64
        Flat lattice column of each point.
    z : (n,) float64, metres
    solids : sequence of Surface, priority order
    which : int or None
    topography : Surface, optional

    Returns
    -------
    (n,) bool
    """
    if which is None:
        inside = np.ones(len(z), dtype=bool)
    else:
        inside = points_inside(column_crossings(solids[which], lattice), columns, z)
    for earlier in solids if which is None else solids[:which]:
        inside &= ~points_inside(column_crossings(earlier, lattice), columns, z)
    if topography is not None:
        top = surface_elevation(topography, lattice)[columns]
        inside &= ~(np.isfinite(top) & (z > top))
    return inside
