"""Compiled pair sums of experimental variograms: every pair of samples closer than the
largest lag found through a grid of cells (each cell compared with itself and with the
cells within reach on one side, so each pair is met once; cells outside every direction's
cone skipped), tested against every direction and summed per direction and lag, without
ever holding a list of pairs: memory grows with the cells, not the pairs.

Pure arrays in, arrays out; compiled with numba and cached on disk; no ``fastmath``.
"""

from __future__ import annotations

import numpy as np
from numba import njit

__all__ = ["cell_offsets", "pair_sums"]

# the sums kept per direction and lag (see experimental_variograms)
SUMS = ("w", "d", "g", "h", "t", "hh", "tt", "ht", "n")
# runs of cells summed apart, each into its own accumulator
RUNS = 64


def cell_offsets(
    size: float, reach: float, directions: np.ndarray | None = None, tolerance: float = 90.0
) -> np.ndarray:
    """Cell offsets (q, 3) int64 that can hold a pair closer than ``reach``: the cell itself
    and, of each opposite pair of offsets, the one whose first non-zero entry is positive.

    With ``directions`` ((m, 3) unit vectors) only offsets that can hold a pair within
    ``tolerance`` degrees of one of them (either way) are kept: the angle from the
    direction to the offset's centre, less the angle the two cells' span can add."""
    r = int(np.ceil(reach / size))
    grid = np.stack(np.meshgrid(*[np.arange(-r, r + 1)] * 3, indexing="ij"), -1).reshape(-1, 3)
    gap = np.maximum(np.abs(grid) - 1, 0) * size  # closest approach of two cells
    near = np.sqrt((gap**2).sum(axis=1)) <= reach
    first = np.array([next((v for v in row if v != 0), 0) for row in grid])
    keep = near & (first >= 0)
    if directions is not None and tolerance < 90.0:
        length = np.linalg.norm(grid, axis=1)
        spread = np.sqrt(3.0)  # two cells' points differ from the centres' offset by less
        with np.errstate(invalid="ignore", divide="ignore"):
            cos = np.abs(grid @ np.asarray(directions).T) / length[:, None]
            angle = np.degrees(np.arccos(np.clip(cos, 0.0, 1.0))).min(axis=1)
            slack = np.degrees(np.arcsin(np.clip(spread / length, 0.0, 1.0)))
        keep &= (length <= spread) | (angle - slack <= tolerance)
    return grid[keep].astype(np.int64)


@njit(cache=True)
def pair_sums(
    points,
    values,
    weights,
    groups,
    order,
    start,
    shape,
    offsets,
    u,
    e_h,
    e_v,
    free,
    cos_tol,
    side_band,
    updown_band,
    edges,
    lag,
    lag_tolerance,
    pairwise_relative,
):
    """Sums (9, m, b) per direction and lag over every pair (i < j) of distinct points.

    Parameters
    ----------
    points : (n, 3) float64; values, weights : (n,) float64
    groups : (n,) int64, pairs only within a group (all 0: every pair)
    order, start, shape : from :func:`cell_table`
    offsets : (q, 3) int64, from :func:`cell_offsets`
    u, e_h, e_v : (m, 3) float64, each direction and the horizontal and vertical axes
        across it; ``free`` (m,) bool marks omnidirectional entries
    cos_tol, side_band, updown_band : float
    edges : (b + 1,) float64, lag edges (bin k holds ``edges[k] < d <= edges[k + 1]``)
    lag, lag_tolerance : float; with ``lag_tolerance > 0`` bin k holds
        ``|d - (k + 1) lag| <= lag_tolerance`` instead
    pairwise_relative : bool, the pairwise relative variogram's g

    Returns
    -------
    (9, m, b) float64 in the order of :data:`SUMS`; head ``i``, tail ``j``, i < j.
    """
    m = u.shape[0]
    nb = edges.shape[0] - 1
    nx, ny, nz = shape[0], shape[1], shape[2]
    ncell = nx * ny * nz
    # one partial sum per run of cells, interleaved so that each run holds dense and sparse
    # parts alike (serial: a parallel loop costs more to compile than it saves on data of
    # the usual size; the runs keep the sums' order the same either way)
    runs = min(ncell, RUNS)
    partial = np.zeros((runs, 9, m, nb))
    top = edges[nb]
    for run in range(runs):
        acc = partial[run]
        for c in range(run, ncell, runs):
            _cell_pairs(
                c,
                points,
                values,
                weights,
                groups,
                order,
                start,
                nx,
                ny,
                nz,
                offsets,
                u,
                e_h,
                e_v,
                free,
                cos_tol,
                side_band,
                updown_band,
                edges,
                lag,
                lag_tolerance,
                pairwise_relative,
                top,
                acc,
            )
    # plain loops: a sum over an axis, or an array expression, costs seconds to compile
    total = np.zeros((9, m, nb))
    for run in range(runs):
        for a in range(9):
            for r in range(m):
                for k in range(nb):
                    total[a, r, k] += partial[run, a, r, k]
    return total


@njit(cache=True)
def _cell_pairs(
    c,
    points,
    values,
    weights,
    groups,
    order,
    start,
    nx,
    ny,
    nz,
    offsets,
    u,
    e_h,
    e_v,
    free,
    cos_tol,
    side_band,
    updown_band,
    edges,
    lag,
    lag_tolerance,
    pairwise_relative,
    top,
    acc,
):
    """Add the pairs whose first point lies in cell ``c`` to ``acc`` (9, m, b)."""
    m = u.shape[0]
    nb = edges.shape[0] - 1
    ci = c % nx
    cj = (c // nx) % ny
    ck = c // (nx * ny)
    for o in range(offsets.shape[0]):
        di, dj, dk = ci + offsets[o, 0], cj + offsets[o, 1], ck + offsets[o, 2]
        if di < 0 or dj < 0 or dk < 0 or di >= nx or dj >= ny or dk >= nz:
            continue
        other = di + nx * (dj + ny * dk)
        same = other == c
        for a in range(start[c], start[c + 1]):
            p = order[a]
            b0 = a + 1 if same else start[other]
            for bb in range(b0, start[other + 1]):
                q = order[bb]
                if groups[p] != groups[q]:
                    continue
                i, j = (p, q) if p < q else (q, p)
                hx = points[j, 0] - points[i, 0]
                hy = points[j, 1] - points[i, 1]
                hz = points[j, 2] - points[i, 2]
                d = np.sqrt(hx * hx + hy * hy + hz * hz)
                if d <= 0.0 or d > top:
                    continue
                if lag_tolerance > 0.0:
                    k = int(np.rint(d / lag)) - 1
                    if abs(d - (k + 1) * lag) > lag_tolerance:
                        continue
                else:
                    lo, hi = 0, nb + 1  # edges[k] < d <= edges[k + 1], by bisection
                    while lo < hi:
                        mid = (lo + hi) // 2
                        if edges[mid] < d:
                            lo = mid + 1
                        else:
                            hi = mid
                    k = lo - 1
                if k < 0 or k >= nb:
                    continue
                zi, zj = values[i], values[j]
                pw = weights[i] * weights[j]
                if pairwise_relative:
                    s = (zi + zj) / 2.0
                    g = (zi - zj) ** 2 / (s * s) / 2.0 if s != 0.0 else 0.0
                else:
                    g = (zi - zj) ** 2 / 2.0
                for r in range(m):
                    if not free[r]:
                        along = hx * u[r, 0] + hy * u[r, 1] + hz * u[r, 2]
                        if abs(along) < cos_tol * d:
                            continue
                        across = hx * e_h[r, 0] + hy * e_h[r, 1] + hz * e_h[r, 2]
                        if abs(across) > side_band:
                            continue
                        updown = hx * e_v[r, 0] + hy * e_v[r, 1] + hz * e_v[r, 2]
                        if abs(updown) > updown_band:
                            continue
                    acc[0, r, k] += pw
                    acc[1, r, k] += pw * d
                    acc[2, r, k] += pw * g
                    acc[3, r, k] += pw * zi
                    acc[4, r, k] += pw * zj
                    acc[5, r, k] += pw * zi * zi
                    acc[6, r, k] += pw * zj * zj
                    acc[7, r, k] += pw * zi * zj
                    acc[8, r, k] += 1.0
