"""Gaussian (normal-score) transform of grades with stated tails, for simulation.

Forward: the declustered cumulative distribution of the composites, each value at the
mid-point of its weight (ties share their mean), mapped through the standard normal
quantile function.  Back: linear between the table's points; below the lowest score
linear in probability down to a minimum grade; above the highest score one of

- ``lognormal``: the log of the grade goes on linearly in the normal score,
  ``z = z_last exp(slope (y - y_last))``, at the slope of the least-squares line of
  ``log z`` on the score through the table's top tenth (declustered probability 0.9 and
  above, and at least its three highest points; positive grades).  That is the tail of
  a lognormal distribution, whose log is linear in the normal score everywhere; under a
  tail heavier than lognormal the line stays below it.  A slope of 0 (fewer than two
  positive grades in the top tenth) adds nothing above the largest value;
- ``linear``: linear in probability up to a maximum grade;
- ``hyperbolic``: ``z = z_last ((1 - p_last) / (1 - p)) ** (1 / omega)``;

never beyond the maximum.  A Gaussian field on many more nodes than there are
composites reaches scores above the table's highest: where their grades stop at the
largest composite, the simulated blocks of a rich patch stop short of it too.

References
----------
Deutsch, C. V. & Journel, A. G. (1998), *GSLIB: Geostatistical Software Library and
User's Guide*, 2nd ed., §V.1.6 (tail extrapolation: linear, power and hyperbolic models).
Rivoirard, J. (1994), *Introduction to Disjunctive Kriging and Non-Linear Geostatistics*,
Clarendon Press, ch. 2 (Gaussian anamorphosis; the lognormal one is the exponential of a
linear function of the normal score).
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
from scipy.special import ndtr, ndtri

__all__ = ["GaussianTransform", "gaussian_transform"]

TAILS = ("lognormal", "linear", "hyperbolic")
TOP_TENTH = 0.9  # declustered probability from which the lognormal tail's slope is fitted


@dataclass(frozen=True)
class GaussianTransform:
    """A normal-score table and its tails.

    Attributes
    ----------
    values : (m,) float64
        Distinct grades, increasing.
    scores : (m,) float64
        Their normal scores, increasing.
    minimum, maximum : float
        The back-transform's bounds (grade units): lower tail ends at ``minimum``, upper
        tail never passes ``maximum`` (may be infinite for the lognormal tail).
    upper_tail : {"lognormal", "linear", "hyperbolic"}
    omega : float
        Exponent of the hyperbolic tail (> 1; larger is thinner).
    slope : float
        Of the lognormal tail: natural log of grade per unit normal score (>= 0).
    slope_points : int
        How many of the table's points the slope was fitted to (0: no slope).
    """

    values: np.ndarray
    scores: np.ndarray
    minimum: float
    maximum: float
    upper_tail: str = "lognormal"
    omega: float = 1.5
    slope: float = 0.0
    slope_points: int = 0

    def forward(self, z: np.ndarray) -> np.ndarray:
        """Normal scores of grades ``z`` (within the table; clamped at its ends)."""
        return np.interp(z, self.values, self.scores)

    def back(self, y: np.ndarray) -> np.ndarray:
        """Grades of normal scores ``y`` (any shape), tails as stated."""
        y = np.asarray(y, dtype=np.float64)
        z = np.interp(y, self.scores, self.values)
        lo, hi = self.scores[0], self.scores[-1]
        below = y < lo
        if below.any():
            p, p0 = ndtr(y[below]), ndtr(lo)
            z[below] = self.minimum + (self.values[0] - self.minimum) * p / p0
        above = y > hi
        if above.any():
            p, p1 = ndtr(y[above]), ndtr(hi)
            last = self.values[-1]
            if self.upper_tail == "lognormal":
                z[above] = last * np.exp(self.slope * (y[above] - hi))
            elif self.upper_tail == "linear":
                z[above] = last + (self.maximum - last) * (p - p1) / (1.0 - p1)
            else:
                with np.errstate(divide="ignore"):
                    z[above] = last * ((1.0 - p1) / (1.0 - p)) ** (1.0 / self.omega)
            z[above] = np.minimum(z[above], self.maximum)
        return z


def gaussian_transform(
    values: np.ndarray,
    weights: np.ndarray,
    *,
    minimum: float = 0.0,
    maximum: float | None = None,
    upper_tail: str = "lognormal",
    omega: float = 1.5,
) -> tuple[np.ndarray, GaussianTransform]:
    """Normal scores of ``values`` under declustering ``weights`` and the transform.

    Parameters
    ----------
    values : (n,) float64, grades
    weights : (n,) float64, declustering weights (positive)
    minimum : float
        Lowest grade the back-transform returns (at most the smallest value).
    maximum : float, optional
        Highest grade the back-transform returns; default: none for the lognormal tail,
        the largest value for the others (which then add nothing above the data).
    upper_tail : {"lognormal", "linear", "hyperbolic"}
    omega : float
        Hyperbolic tail exponent, > 1.

    Returns
    -------
    scores : (n,) float64
    transform : GaussianTransform
    """
    values = np.asarray(values, dtype=np.float64)
    weights = np.asarray(weights, dtype=np.float64)
    if upper_tail not in TAILS:
        raise ValueError(f"upper_tail must be one of {', '.join(TAILS)}; got {upper_tail!r}")
    if len(values) < 2:
        raise ValueError("a Gaussian transform needs at least two values")
    order = np.argsort(values, kind="stable")
    v, w = values[order], weights[order]
    cdf = (np.cumsum(w) - 0.5 * w) / w.sum()
    uniq, inverse = np.unique(v, return_inverse=True)
    mean_cdf = np.bincount(inverse.ravel(), weights=cdf) / np.bincount(inverse.ravel())
    if maximum is not None:
        top = float(maximum)
    else:
        top = np.inf if upper_tail == "lognormal" else float(uniq[-1])
    if minimum > uniq[0] or top < uniq[-1]:
        raise ValueError(
            f"the tails' bounds [{minimum:g}, {top:g}] must hold the data "
            f"[{uniq[0]:g}, {uniq[-1]:g}]"
        )
    scores = ndtri(mean_cdf)
    slope, points = _log_slope(uniq, scores)
    table = GaussianTransform(
        uniq,
        scores,
        float(minimum),
        top,
        upper_tail=upper_tail,
        omega=float(omega),
        slope=slope,
        slope_points=points,
    )
    return table.forward(values), table


def _log_slope(values: np.ndarray, scores: np.ndarray) -> tuple[float, int]:
    """Least-squares slope of log grade on normal score over the table's top tenth, or its
    three highest points if more (positive grades), and how many points it was fitted to;
    (0, 0) with fewer than two such points."""
    top = (scores >= min(ndtri(TOP_TENTH), scores[-min(3, len(scores))])) & (values > 0.0)
    if top.sum() < 2:
        return 0.0, 0
    y, z = scores[top], np.log(values[top])
    y0 = y - y.mean()
    return float(max((y0 @ (z - z.mean())) / (y0 @ y0), 0.0)), int(top.sum())
