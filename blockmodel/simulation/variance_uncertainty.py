"""The uncertainty of a domain's variance, carried into the realisations.

The normal scores of a domain's composites have declustered variance 1 by construction,
and the model's sill is set so that its expected declustered variance at the data is 1
(:mod:`blockmodel.simulation.dispersion`).  That variance is itself estimated from a
finite number of clustered, correlated data: the realisations would otherwise all share
the composites' histogram spread, and agree on the tonnes above a cut-off more closely
than the data allow.

The declustered variance ``V = sum_a w_a (Y_a - w'Y)^2`` (weights summing to 1) of a
Gaussian field of covariance C is the quadratic form ``Y'AY`` with ``A = diag(w) - w w'``:
its mean is ``tr(AC) = sum_a w_a C_aa - w'Cw`` and its variance
``2 tr(ACAC) = 2 [w'(C*C)w - 2 sum_a w_a u_a^2 + (w'u)^2]``, with ``u = Cw`` and ``C*C``
the element-wise square (moments of a Gaussian quadratic form; derived here, checked
against the matrix form in the tests).  Matched to a scaled chi-square (Satterthwaite
1946, recalled from memory), ``V / E[V]`` is ``chi2(nu) / nu`` with
``nu = 2 E[V]^2 / var(V)`` degrees of freedom: ``n - 1`` for ``n`` independent data of
equal weight, fewer where they are clustered or correlated.  Given the observed ``V``, the
sill's factor ``a`` then follows the scaled inverse chi-square ``nu / chi2(nu)`` (the
posterior of a normal variance under the prior ``1 / a``; recalled from memory), which
each realisation draws.  Its weights do not depend on the sill, so the draw scales the
unconditional field and the mean's draw and costs nothing else.
"""

from __future__ import annotations

import numpy as np

from blockmodel.simulation._pair_sums import pair_sums
from blockmodel.variography.models import VariogramModel

__all__ = ["declustered_variance_dof"]


def declustered_variance_dof(data: np.ndarray, weights: np.ndarray, model: VariogramModel) -> float:
    """Degrees of freedom ``nu`` of the data's declustered variance under ``model``.

    Parameters
    ----------
    data : (n, 3) float64, metres
        Distinct positions (the covariance at zero separation includes the nugget).
    weights : (n,) float64
        Declustering weights (any positive scale; normalised to sum to 1).
    model : VariogramModel
        Covariance of the Gaussian field (any sill: ``nu`` does not depend on it).

    Returns
    -------
    float
        ``2 E[V]^2 / var(V)``; infinite when ``V`` cannot vary (a single datum).
    """
    w, u, q = pair_sums(data, weights, model)
    mean = model.total_sill - np.dot(w, u)
    spread = 2.0 * (np.dot(w, q) - 2.0 * np.dot(w, u * u) + np.dot(w, u) ** 2)
    return float(2.0 * mean**2 / spread) if spread > 0.0 else float("inf")
