"""Declustering weights: cell declustering over a sweep of cell sizes, and nearest-neighbour
(polygonal) weights.

References
----------
Journel, A. G. (1983), Nonparametric estimation of spatial distributions, Math. Geol. 15(3).
Deutsch, C. V. (2015), Cell declustering parameter selection, Geostatistics Lessons.

Keeping the size with the lowest declustered mean suits drilling clustered in high grades
and only that: on a regular pattern the lowest of the swept means is the most negative of
their random departures (and, at cells much larger than the spacing, of the weight given
to the pattern's sparsely filled edges), so it lies below the mean.  On three invented
deposits drilled on regular patterns (the tests' ``tests/deposits.py``, seeds 1-20) it
fell 1.9 to 8.3 % below the true mean on average; a cell of the holes' spacing
(:func:`hole_spacing`) came within -1.6 to +1.8 % (measured 2026-12-03).  Where infill
drilling is clustered in high grades, the lowest mean is the rule to choose (common
practice).
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
from scipy.spatial import cKDTree

__all__ = [
    "SPARSE_QUANTILE",
    "CellDeclustering",
    "cell_declustering",
    "hole_spacing",
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


# the quantile of the distances between neighbouring holes taken as the sparse spacing
SPARSE_QUANTILE = 0.9


def hole_spacing(points: np.ndarray, holes: np.ndarray) -> float:
    """The spacing of the drilling where it is sparsest, for the cell size.

    Each hole's intercept is the mean position of its samples; the spacing is the
    :data:`SPARSE_QUANTILE` quantile of the distance from each intercept to the nearest
    other.  On a regular pattern it is the pattern's spacing; where infill is added to a
    wider pattern, the wider spacing (while the wider pattern holds more than a tenth of
    the holes).  A cell of about the spacing of the sparse drilling gives the clustered
    data the weight of the area they share (Deutsch 2015, recalled from memory).

    Parameters
    ----------
    points : (n, 3) float64, metres
    holes : (n,) hole names (a point sample on its own is its own hole)

    Returns
    -------
    float, metres

    Raises
    ------
    ValueError
        With samples from fewer than two holes, or all intercepts at one place.
    """
    points = np.asarray(points, dtype=np.float64)
    _, hole = np.unique(np.asarray(holes), return_inverse=True)
    count = np.bincount(hole)
    if len(count) < 2:
        raise ValueError("the samples come from one hole: there is no spacing to measure")
    centres = np.column_stack([np.bincount(hole, weights=points[:, a]) / count for a in range(3)])
    nearest, _ = cKDTree(centres).query(centres, k=2)
    spacing = float(np.quantile(nearest[:, 1], SPARSE_QUANTILE))
    if spacing <= 0.0:
        raise ValueError("the holes' intercepts lie at one place: there is no spacing")
    return spacing


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
