"""Declustering weights: cell declustering over a sweep of cell sizes, and nearest-neighbour
(polygonal) weights.

References
----------
Journel, A. G. (1983), Nonparametric estimation of spatial distributions, Math. Geol. 15(3).
Deutsch, C. V. (1989), DECLUS: a Fortran 77 program for determining optimum spatial
declustering weights, Computers & Geosciences 15(3).
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
    sizes : (s,) float64, metres (cell size along x; y and z scale by the anisotropy)
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
        return float(self.means[np.argmin(np.abs(self.sizes - self.chosen_size))])


def _cell_weights(points: np.ndarray, size: np.ndarray, origins: int) -> np.ndarray:
    w = np.zeros(len(points))
    base = points.min(axis=0)
    for k in range(origins):
        shift = size * (k / origins)
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
    anisotropy: tuple[float, float, float] = (1.0, 1.0, 1.0),
    origins: int = 8,
    choose: str = "minimum",
    fixed_size: float | None = None,
) -> CellDeclustering:
    """Cell declustering weights, averaged over shifted grid origins.

    Parameters
    ----------
    points : (n, 3) float64, metres
    values : (n,) float64
    sizes : (s,) float64, metres
        Cell sizes along x to try; y and z sizes are ``size * anisotropy[1:]``.
    anisotropy : (3,) float
        Ratio of the cell's x, y, z sides.
    origins : int
        Number of origin offsets, shifted along the cell diagonal, averaged.
    choose : {"minimum", "maximum", "fixed"}
        Keep the size giving the smallest mean (drilling clustered in high grade), the
        largest, or ``fixed_size``.

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
    aniso = np.asarray(anisotropy, dtype=np.float64)
    if choose not in ("minimum", "maximum", "fixed"):
        raise ValueError(f"choose must be minimum, maximum or fixed; got {choose!r}")
    if choose == "fixed":
        if fixed_size is None or fixed_size <= 0:
            raise ValueError("choose='fixed' needs a positive fixed_size")
        sizes = np.unique(np.append(sizes, fixed_size))
    means = np.empty(len(sizes))
    all_w = []
    for n, s in enumerate(sizes):
        w = _cell_weights(points, s * aniso, origins)
        all_w.append(w)
        means[n] = w @ values / w.sum()
    if choose == "fixed":
        pick = int(np.flatnonzero(sizes == fixed_size)[0])
    else:
        pick = int(np.argmin(means) if choose == "minimum" else np.argmax(means))
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
