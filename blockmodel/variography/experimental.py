"""Experimental variograms in 3D: directional, omnidirectional and downhole.

Pairs are found with KD-tree ball queries in chunks of samples, so memory is bounded by the
pairs of one chunk, not of the whole data set.  Each unordered pair counts once; a
direction accepts separations in both senses (h and -h).
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
from scipy.spatial import cKDTree
from scipy.stats import norm

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


def _pairs(points, max_distance, pair_budget, same_group=None):
    """Yield index arrays (i, j), i < j, of pairs closer than ``max_distance``, in chunks of
    samples sized so each chunk holds about ``pair_budget`` pairs (memory stays bounded)."""
    n = len(points)
    if n < 2:
        return
    tree = cKDTree(points)
    # pairs per sample, from a sample of up to 2,000 points, sets the chunk size
    probe = np.linspace(0, n - 1, min(n, 2000)).astype(np.int64)
    per_point = float(
        np.mean(tree.query_ball_point(points[probe], max_distance, return_length=True))
    )
    chunk = int(np.clip(pair_budget / max(per_point, 1.0), 16, n))
    for start in range(0, n, chunk):
        rows = np.arange(start, min(n, start + chunk))
        sub = cKDTree(points[rows])
        found = sub.sparse_distance_matrix(tree, max_distance, output_type="ndarray")
        i = rows[found["i"]]
        j = found["j"].astype(np.int64)
        keep = j > i
        if same_group is not None:
            keep &= same_group[i] == same_group[j]
        yield i[keep], j[keep]


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
    pair_budget: int = 2_000_000,
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
    pair_budget : int
        Pairs handled at once (before the direction test); bounds memory.

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
        pair_budget=pair_budget,
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
    pair_budget: int = 2_000_000,
    labels=None,
) -> list[ExperimentalVariogram]:
    """Experimental variograms in several directions from one search for pairs.

    Parameters
    ----------
    points, values, lag, n_lags, edges, lag_tolerance, angular_tolerance, side_band,
    updown_band, estimator, weights, holes, pair_budget
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
    nb = len(edges) - 1
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
    cos_tol = np.cos(np.radians(angular_tolerance))
    keys = ("w", "d", "g", "h", "t", "hh", "tt", "ht", "n")
    sums = {k: np.zeros(m * nb) for k in keys}
    for i, j in _pairs(points, edges[-1], max(pair_budget // max(m, 1), 10_000), group):
        h = points[j] - points[i]
        d = np.linalg.norm(h, axis=1)
        if lag_tolerance is None:
            b = np.searchsorted(edges, d, side="left") - 1
            ok = d > 0
        else:
            b = np.rint(d / lag).astype(np.int64) - 1
            ok = (d > 0) & (np.abs(d - (b + 1) * lag) <= lag_tolerance)
        ok &= (b >= 0) & (b < nb)
        i, j, h, d, b = i[ok], j[ok], h[ok], d[ok], b[ok]
        inside = (np.abs(h @ u) >= cos_tol * d[:, None]) | free
        if np.isfinite(side_band):
            inside &= (np.abs(h @ e_h) <= side_band) | free
        if np.isfinite(updown_band):
            inside &= (np.abs(h @ e_v) <= updown_band) | free
        pair, k = np.nonzero(inside)
        cell = k * nb + b[pair]
        i, j, d = i[pair], j[pair], d[pair]
        pw = w[i] * w[j]
        zi, zj = values[i], values[j]
        if estimator == "pairwise_relative":
            s = (zi + zj) / 2
            g = np.where(s != 0, (zi - zj) ** 2 / np.where(s != 0, s, 1) ** 2 / 2, 0.0)
        else:
            g = (zi - zj) ** 2 / 2
        for key, x in (
            ("w", pw),
            ("d", pw * d),
            ("g", pw * g),
            ("h", pw * zi),
            ("t", pw * zj),
            ("hh", pw * zi * zi),
            ("tt", pw * zj * zj),
            ("ht", pw * zi * zj),
            ("n", None),
        ):
            sums[key] += np.bincount(cell, weights=x, minlength=m * nb)
    out = []
    for k in range(m):
        part = {key: v[k * nb : (k + 1) * nb] for key, v in sums.items()}
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
