"""Declustering weights: cell declustering over a sweep of cell sizes, and nearest-neighbour
(polygonal) weights.

References
----------
Journel, A. G. (1983), Nonparametric estimation of spatial distributions, Math. Geol. 15(3).
Deutsch, C. V. (2015), Cell declustering parameter selection, Geostatistics Lessons.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
from scipy.spatial import cKDTree

__all__ = [
    "CellDeclustering",
    "cell_declustering",
    "nearest_neighbour_weights",
    "weighted_quantiles",
]


@dataclass(frozen=True)
class CellDeclustering:
    """Result of a cell-size sweep.

    Attributes
    ----------
    sizes : (s,) float64, metres (cell size along x; y and z follow the cell shape)
    means : (s,) float64, declustered mean at each size
    chosen_size : float
    weights : (n,) float64, summing to n (mean weight 1)
    """

    sizes: np.ndarray
    means: np.ndarray
    chosen_size: float
    weights: np.ndarray

    @property
    def mean(self) -> float:
        """Declustered mean at the chosen cell size."""
        return float(self.means[np.argmin(np.abs(self.sizes - self.chosen_size))])


def _cell_weights(points: np.ndarray, size: np.ndarray, shifts: int) -> np.ndarray:
    """Weights averaged over ``shifts`` cell grids shifted along the cell diagonal."""
    w = np.zeros(len(points))
    base = points.min(axis=0)
    for k in range(shifts):
        shift = size * (k / shifts)
        cells = np.floor((points - base + shift) / size).astype(np.int64)
        _, inverse, counts = np.unique(cells, axis=0, return_inverse=True, return_counts=True)
        inverse = inverse.ravel()
        w += 1.0 / (counts[inverse] * len(counts))
    return w / w.sum() * len(points)


def cell_declustering(
    points: np.ndarray,
    values: np.ndarray,
    sizes: np.ndarray,
    *,
    cell_shape: tuple[float, float, float] = (1.0, 1.0, 1.0),
    grid_shifts: int = 8,
    keep: str = "lowest_mean",
    given_size: float | None = None,
) -> CellDeclustering:
    """Cell declustering weights, averaged over shifted cell grids.

    Parameters
    ----------
    points : (n, 3) float64, metres
    values : (n,) float64
    sizes : (s,) float64, metres
        Cell sizes along x to try; y and z sizes are ``size * cell_shape[1:] / cell_shape[0]``.
    cell_shape : (3,) float
        Relative lengths of the cell's x, y, z sides.
    grid_shifts : int
        Number of cell grids, shifted along the cell diagonal, whose weights are averaged.
    keep : {"lowest_mean", "highest_mean", "given_size"}
        Keep the size giving the lowest declustered mean (drilling clustered in high
        grade), the highest, or ``given_size``.

    Returns
    -------
    CellDeclustering

    Notes
    -----
    In each cell holding ``n_c`` samples, each sample gets ``1 / (n_c * occupied cells)``.
    """
    points = np.asarray(points, dtype=np.float64)
    values = np.asarray(values, dtype=np.float64)
    sizes = np.asarray(sizes, dtype=np.float64)
    shape = np.asarray(cell_shape, dtype=np.float64)
    shape = shape / shape[0]
    if keep not in ("lowest_mean", "highest_mean", "given_size"):
        raise ValueError(f"keep must be lowest_mean, highest_mean or given_size; got {keep!r}")
    if keep == "given_size":
        if given_size is None or given_size <= 0:
            raise ValueError("keep='given_size' needs a positive given_size")
        sizes = np.unique(np.append(sizes, given_size))
    means = np.empty(len(sizes))
    all_w = []
    for n, s in enumerate(sizes):
        w = _cell_weights(points, s * shape, grid_shifts)
        all_w.append(w)
        means[n] = w @ values / w.sum()
    if keep == "given_size":
        pick = int(np.flatnonzero(sizes == given_size)[0])
    else:
        pick = int(np.argmin(means) if keep == "lowest_mean" else np.argmax(means))
    return CellDeclustering(sizes, means, float(sizes[pick]), all_w[pick])


def nearest_neighbour_weights(points: np.ndarray, cell_centres: np.ndarray) -> np.ndarray:
    """Weights from the share of domain cells nearest to each sample (polygonal declustering).

    Parameters
    ----------
    points : (n, 3) float64, metres
    cell_centres : (c, 3) float64, metres; centres of the domain's blocks or sub-cells

    Returns
    -------
    (n,) float64, summing to n
    """
    _, nearest = cKDTree(points).query(cell_centres)
    counts = np.bincount(nearest, minlength=len(points)).astype(np.float64)
    return counts / counts.sum() * len(points)


def weighted_quantiles(values: np.ndarray, weights: np.ndarray, q: np.ndarray) -> np.ndarray:
    """Quantiles of a weighted distribution (mid-point plotting positions)."""
    order = np.argsort(values)
    v, w = np.asarray(values)[order], np.asarray(weights)[order]
    cdf = (np.cumsum(w) - 0.5 * w) / w.sum()
    return np.interp(q, cdf, v)
