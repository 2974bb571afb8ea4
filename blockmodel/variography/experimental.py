"""Experimental variograms in 3D: directional, omnidirectional and downhole.

Pairs are summed in compiled code over a grid of cells, cell by neighbouring cell, so no
list of pairs is ever held.  Each unordered pair counts once; a
direction accepts separations in both senses (h and -h).
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
from scipy.stats import norm

from blockmodel.estimation._cells import cell_table
from blockmodel.variography._pairs import SUMS, cell_offsets, pair_sums

__all__ = [
    "ExperimentalVariogram",
    "NormalScores",
    "direction_vector",
    "experimental_variogram",
    "experimental_variograms",
    "normal_scores",
    "scan_directions",
]

ESTIMATORS = ("semivariogram", "correlogram", "pairwise_relative")


@dataclass(frozen=True)
class ExperimentalVariogram:
    """Per lag: pairs, mean distance (metres) and value (NaN where no pairs).

    ``value`` is the semivariogram, ``1 - rho`` for the correlogram, or the pairwise
    relative variogram.
    """

    pairs: np.ndarray
    distance: np.ndarray
    value: np.ndarray
    estimator: str
    label: str = ""


def direction_vector(azimuth: float, plunge: float) -> np.ndarray:
    """Unit vector at bearing ``azimuth`` and ``plunge`` below horizontal (degrees)."""
    az, pl = np.radians(azimuth), np.radians(plunge)
    return np.array([np.sin(az) * np.cos(pl), np.cos(az) * np.cos(pl), -np.sin(pl)])


def experimental_variogram(
    points: np.ndarray,
    values: np.ndarray,
    *,
    lag: float,
    n_lags: int,
    edges: np.ndarray | None = None,
    lag_tolerance: float | None = None,
    direction: tuple[float, float] | None = None,
    angular_tolerance: float = 22.5,
    side_band: float = np.inf,
    updown_band: float = np.inf,
    estimator: str = "semivariogram",
    weights: np.ndarray | None = None,
    holes: np.ndarray | None = None,
    label: str = "",
) -> ExperimentalVariogram:
    """Experimental variogram of values at points.

    Parameters
    ----------
    points : (n, 3) float64, metres
    values : (n,) float64
    lag : float, metres
        Lag width; lag k holds pairs with ``(k - 1) lag < d <= k lag`` unless ``edges``.
    n_lags : int
    edges : (n_lags + 1,) float64, optional
        Explicit lag bin edges (metres).
    lag_tolerance : float, optional, metres
        When given, lag k holds pairs with ``|d - k lag| <= lag_tolerance`` (k = 1 ..
        n_lags); at most ``lag / 2``.
    direction : (azimuth, plunge) degrees, optional
        None for omnidirectional.
    angular_tolerance : float, degrees
    side_band : float, metres
        Largest offset of a pair from the direction line measured horizontally, at right
        angles to the direction.
    updown_band : float, metres
        Largest offset of a pair from the direction line measured in the vertical plane
        that holds the direction, at right angles to it.
    estimator : {"semivariogram", "correlogram", "pairwise_relative"}
    weights : (n,) float64, optional
        Declustering weights; a pair weighs ``w_i w_j``.
    holes : (n,) array, optional
        When given, only pairs within one hole are used (downhole variogram).

    Returns
    -------
    ExperimentalVariogram
    """
    return experimental_variograms(
        points,
        values,
        [direction],
        lag=lag,
        n_lags=n_lags,
        edges=edges,
        lag_tolerance=lag_tolerance,
        angular_tolerance=angular_tolerance,
        side_band=side_band,
        updown_band=updown_band,
        estimator=estimator,
        weights=weights,
        holes=holes,
        labels=[label],
    )[0]


def experimental_variograms(
    points: np.ndarray,
    values: np.ndarray,
    directions,
    *,
    lag: float,
    n_lags: int,
    edges: np.ndarray | None = None,
    lag_tolerance: float | None = None,
    angular_tolerance: float = 22.5,
    side_band: float = np.inf,
    updown_band: float = np.inf,
    estimator: str = "semivariogram",
    weights: np.ndarray | None = None,
    holes: np.ndarray | None = None,
    labels=None,
) -> list[ExperimentalVariogram]:
    """Experimental variograms in several directions from one search for pairs.

    Parameters
    ----------
    points, values, lag, n_lags, edges, lag_tolerance, angular_tolerance, side_band,
    updown_band, estimator, weights, holes
        As :func:`experimental_variogram`.
    directions : sequence of (azimuth, plunge) degrees, or None (omnidirectional)
    labels : sequence of str, optional
        One per direction.

    Returns
    -------
    list of ExperimentalVariogram, one per direction, each equal to
    :func:`experimental_variogram` in that direction.
    """
    if estimator not in ESTIMATORS:
        raise ValueError(f"estimator must be one of {', '.join(ESTIMATORS)}; got {estimator!r}")
    if lag <= 0 or n_lags < 1:
        raise ValueError("lag must be positive and n_lags at least 1")
    points = np.asarray(points, dtype=np.float64)
    points = points - points.min(axis=0) if len(points) else points.reshape(0, 3)
    values = np.asarray(values, dtype=np.float64)
    w = np.ones(len(values)) if weights is None else np.asarray(weights, dtype=np.float64)
    if lag_tolerance is not None and not 0 < lag_tolerance <= lag / 2:
        raise ValueError("lag_tolerance must lie in (0, lag / 2]")
    if lag_tolerance is not None:  # centred lags: edges only bound the pair search
        edges = lag * np.arange(n_lags + 1) + lag_tolerance
    elif edges is None:
        edges = lag * np.arange(n_lags + 1)
    else:
        edges = np.asarray(edges, dtype=np.float64)
    m = len(directions)
    labels = list(labels) if labels is not None else [""] * m
    group = None if holes is None else np.unique(np.asarray(holes), return_inverse=True)[1].ravel()
    # per direction: its unit vector and the horizontal and vertical axes across it (both
    # at right angles to it, so a pair's offsets along them are its offsets from the line);
    # an omnidirectional entry takes every pair
    free = np.array([d is None for d in directions])
    u, e_h, e_v = np.zeros((3, m)), np.zeros((3, m)), np.zeros((3, m))
    for k, dk in enumerate(directions):
        if dk is not None:
            u[:, k] = direction_vector(*dk)
            e_h[:, k] = [np.cos(np.radians(dk[0])), -np.sin(np.radians(dk[0])), 0.0]
            e_v[:, k] = np.cross(e_h[:, k], u[:, k])
    sums = _sums(
        points,
        values,
        w,
        group,
        (u, e_h, e_v, free),
        angular_tolerance,
        (side_band, updown_band),
        edges,
        lag,
        lag_tolerance,
        estimator == "pairwise_relative",
    )
    out = []
    for k in range(m):
        part = {key: sums[n, k] for n, key in enumerate(SUMS)}
        with np.errstate(invalid="ignore", divide="ignore"):
            wsum = part["w"]
            distance = part["d"] / wsum
            if estimator == "correlogram":
                mh, mt = part["h"] / wsum, part["t"] / wsum
                cov = part["ht"] / wsum - mh * mt
                # pairs counted once: make head and tail symmetric so rho is well defined
                vh = part["hh"] / wsum - mh**2
                vt = part["tt"] / wsum - mt**2
                value = 1.0 - cov / np.sqrt(vh * vt)
            else:
                value = part["g"] / wsum
        out.append(
            ExperimentalVariogram(part["n"].astype(np.int64), distance, value, estimator, labels[k])
        )
    return out


def _sums(points, values, w, group, axes, tolerance, bands, edges, lag, lag_tolerance, relative):
    """The pair sums (9, m, b) of :data:`~blockmodel.variography._pairs.SUMS` from the
    compiled kernel, the samples sorted into cells of half the largest lag."""
    n = len(points)
    m, nb = axes[0].shape[1], len(edges) - 1
    if n < 2:
        return np.zeros((len(SUMS), m, nb))
    reach = float(edges[-1])
    span = np.ptp(points, axis=0) + 1e-9
    # cells a sixth of the reach (the finer, the fewer pairs tested outside the reach and
    # the cones), but holding a quarter of a sample on average or more, and never more
    # than two million of them
    size = max(reach / 6, (np.prod(span) / (4 * n)) ** (1 / 3), float(span.max()) / 125, 1e-9)
    order, start, shape = cell_table(points, size)
    u, e_h, e_v, free = axes
    cone = None if free.any() else u.T  # offsets outside every cone hold no pair
    return pair_sums(  # one compiled specialisation: C-ordered, writable float64
        np.array(points, dtype=np.float64, order="C"),
        np.array(values, dtype=np.float64),
        np.array(w, dtype=np.float64),
        np.zeros(n, dtype=np.int64) if group is None else group.astype(np.int64),
        order,
        start,
        shape,
        cell_offsets(size, reach, cone, tolerance),
        np.ascontiguousarray(u.T),
        np.ascontiguousarray(e_h.T),
        np.ascontiguousarray(e_v.T),
        free,
        float(np.cos(np.radians(tolerance))),
        float(bands[0]),
        float(bands[1]),
        np.asarray(edges, dtype=np.float64),
        float(lag),
        float(lag_tolerance or 0.0),
        bool(relative),
    )


@dataclass(frozen=True)
class NormalScores:
    """Normal-score transform table: sorted original values and their normal scores."""

    values: np.ndarray
    scores: np.ndarray

    def forward(self, z: np.ndarray) -> np.ndarray:
        """Normal scores of ``z`` by linear interpolation in the table (clamped at its ends)."""
        return np.interp(z, self.values, self.scores)

    def back(self, y: np.ndarray) -> np.ndarray:
        """Back-transform by linear interpolation in the table (clamped at its ends)."""
        return np.interp(y, self.scores, self.values)


def normal_scores(
    values: np.ndarray, weights: np.ndarray | None = None
) -> tuple[np.ndarray, NormalScores]:
    """Normal scores of values (declustering weights optional) and the transform table.

    Ties get the score of their mean plotting position.
    """
    values = np.asarray(values, dtype=np.float64)
    w = np.ones(len(values)) if weights is None else np.asarray(weights, dtype=np.float64)
    order = np.argsort(values, kind="stable")
    v, ww = values[order], w[order]
    cdf = (np.cumsum(ww) - 0.5 * ww) / ww.sum()
    uniq, _first, inverse = np.unique(v, return_index=True, return_inverse=True)
    mean_cdf = np.bincount(inverse.ravel(), weights=cdf) / np.bincount(inverse.ravel())
    table = NormalScores(uniq, norm.ppf(mean_cdf))
    return table.forward(values), table


def scan_directions(
    points: np.ndarray,
    values: np.ndarray,
    azimuths: np.ndarray,
    plunges: np.ndarray,
    *,
    lag: float,
    n_lags: int,
    angular_tolerance: float = 15.0,
    estimator: str = "semivariogram",
    weights: np.ndarray | None = None,
) -> dict[str, np.ndarray]:
    """Variogram values over a fan of directions, to choose the axes of continuity.

    Parameters
    ----------
    points : (n, 3) float64, metres
    values : (n,) float64
    azimuths : (a,) float64, degrees
    plunges : (p,) float64, degrees
    lag, n_lags, angular_tolerance, estimator, weights : as :func:`experimental_variogram`

    Returns
    -------
    dict with ``value`` (p, a, n_lags), ``pairs`` (p, a, n_lags), ``azimuths``,
    ``plunges`` and ``major`` = (azimuth, plunge) of the direction whose variogram rises
    slowest (smallest pair-weighted mean over the lags).
    """
    azimuths = np.asarray(azimuths, dtype=np.float64)
    plunges = np.asarray(plunges, dtype=np.float64)
    fan = [(float(az), float(pl)) for pl in plunges for az in azimuths]
    found = experimental_variograms(
        points,
        values,
        fan,
        lag=lag,
        n_lags=n_lags,
        angular_tolerance=angular_tolerance,
        estimator=estimator,
        weights=weights,
    )
    value = np.array([ev.value for ev in found]).reshape(len(plunges), len(azimuths), n_lags)
    pairs = np.array([ev.pairs for ev in found]).reshape(len(plunges), len(azimuths), n_lags)
    with np.errstate(invalid="ignore"):
        score = np.nansum(value * pairs, axis=2) / pairs.sum(axis=2)
    score = np.where(pairs.sum(axis=2) > 0, score, np.inf)
    p, a = np.unravel_index(np.argmin(score), score.shape)
    return {
        "lag": lag,
        "value": value,
        "pairs": pairs,
        "azimuths": azimuths,
        "plunges": plunges,
        "major": (float(azimuths[a]), float(plunges[p])),
    }
