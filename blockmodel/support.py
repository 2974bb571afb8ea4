"""Change of support by the discrete Gaussian model: the grade-tonnage curve expected at
block support, to set beside the kriged (smoothed) model.

Hermite polynomials follow the normalised convention ``H_n(y) = (1/sqrt(n!)) g^(n)(y) / g(y)``
(so ``H_1(y) = -y``), under which a lognormal variable ``Z = m exp(s Y - s^2/2)`` has
``phi_n = m (-s)^n / sqrt(n!)``.

References
----------
Matheron, G. (1976), A simple substitute for conditional expectation: the disjunctive
kriging. Rivoirard, J. (1994), *Introduction to Disjunctive Kriging and Non-linear
Geostatistics*, ch. 2 and 7.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
from scipy.optimize import brentq
from scipy.stats import norm

__all__ = [
    "GaussianAnamorphosis",
    "block_grade_tonnage",
    "fit_anamorphosis",
    "hermite",
    "support_coefficient",
]

_NODES, _WEIGHTS = np.polynomial.hermite_e.hermegauss(200)
_WEIGHTS = _WEIGHTS / np.sqrt(2 * np.pi)  # expectation under the standard normal


def hermite(y: np.ndarray, degree: int) -> np.ndarray:
    """Normalised Hermite polynomials ``H_0 .. H_degree`` at y; shape (degree + 1, len(y))."""
    y = np.asarray(y, dtype=np.float64)
    h = np.zeros((degree + 1, len(y)))
    h[0] = 1.0
    if degree >= 1:
        h[1] = -y
    for n in range(1, degree):
        h[n + 1] = -(y * h[n]) / np.sqrt(n + 1) - np.sqrt(n / (n + 1)) * h[n - 1]
    return h


@dataclass(frozen=True)
class GaussianAnamorphosis:
    """``Z = sum_n phi_n H_n(Y)``; ``coefficients`` holds phi_0 .. phi_N."""

    coefficients: np.ndarray

    @property
    def mean(self) -> float:
        return float(self.coefficients[0])

    @property
    def variance(self) -> float:
        return float(np.sum(self.coefficients[1:] ** 2))

    def block_variance(self, r: float) -> float:
        n = np.arange(len(self.coefficients))
        return float(np.sum(self.coefficients[1:] ** 2 * r ** (2 * n[1:])))

    def block_values(self, y: np.ndarray, r: float) -> np.ndarray:
        n = np.arange(len(self.coefficients))
        return (self.coefficients * r**n) @ hermite(y, len(self.coefficients) - 1)


def fit_anamorphosis(function, degree: int = 40) -> GaussianAnamorphosis:
    """Hermite coefficients ``phi_n = E[Z H_n(Y)]`` of ``Z = function(Y)``, by Gauss-Hermite
    quadrature (200 nodes)."""
    z = function(_NODES)
    return GaussianAnamorphosis(hermite(_NODES, degree) @ (_WEIGHTS * z))


def empirical_anamorphosis(
    values: np.ndarray, weights: np.ndarray | None = None, degree: int = 40
) -> GaussianAnamorphosis:
    """Anamorphosis of (declustered) data: their quantile function in Gaussian space,
    linear between data, extended flat past the extremes."""
    v = np.asarray(values, dtype=np.float64)
    w = np.ones(len(v)) if weights is None else np.asarray(weights, dtype=np.float64)
    order = np.argsort(v)
    v, w = v[order], w[order]
    cdf = (np.cumsum(w) - 0.5 * w) / w.sum()
    y = norm.ppf(cdf)
    return fit_anamorphosis(lambda t: np.interp(t, y, v), degree)


def support_coefficient(anamorphosis: GaussianAnamorphosis, block_variance: float) -> float:
    """r in (0, 1] with ``sum phi_n^2 r^(2n) = block_variance``."""
    if block_variance >= anamorphosis.variance:
        return 1.0
    return float(brentq(lambda r: anamorphosis.block_variance(r) - block_variance, 1e-6, 1.0))


def block_grade_tonnage(
    anamorphosis: GaussianAnamorphosis, r: float, cutoffs: np.ndarray
) -> np.ndarray:
    """Share of tonnes and mean grade above each cut-off at block support.

    Returns
    -------
    (len(cutoffs), 2) float64: tonnage fraction, mean grade (NaN where none).
    """
    y = np.linspace(-8, 8, 8001)
    z = anamorphosis.block_values(y, r)
    z = np.maximum.accumulate(z)  # a truncated expansion can wiggle; keep it monotone
    g = norm.pdf(y)
    dy = y[1] - y[0]
    out = np.empty((len(cutoffs), 2))
    for n, c in enumerate(cutoffs):
        above = z >= c
        t = float(np.sum(g[above]) * dy)
        q = float(np.sum((z * g)[above]) * dy)
        out[n] = t, (q / t if t > 0 else np.nan)
    return out
