"""The uncertainty of a domain's mean, carried into the realisations.

Simple kriging takes the mean of the normal scores as known (zero: the declustered mean).
It is itself estimated, from clustered and correlated data, so realisations conditioned
with it agree on the domain's global grade more closely than the data allow.  Here each
realisation draws its own mean ``m_r ~ N(0, s_m^2)``, with ``s_m^2 = w'Cw`` the variance
of the declustered mean ``sum_a w_a Y(x_a)`` (weights summing to 1) about the mean of a
stationary field of covariance C: the estimation variance of a weighted mean, whose
domain term vanishes when the domain is the field's whole extent (Journel & Huijbregts
1978, estimation variance; recalled from memory).  Simple kriging with mean ``m_r`` gives

    y_c(u) = y_u(u) + sum_a w_a(u) (y_a - y_u(u_a)) + m_r (1 - sum_a w_a(u)),

so the draw moves a node in proportion to how little its data weigh: nothing at a
datum, all of ``m_r`` far from the data.  The ensemble mean is unchanged; the ensemble
variance at a node grows by ``(1 - sum_a w_a(u))^2 s_m^2``.  ``w'Cw`` is at least the
variance of the best (generalised least-squares) estimate of the mean, so the draw errs
on the wide side for the estimate actually used.
"""

from __future__ import annotations

import numpy as np

from blockmodel.simulation._pair_sums import pair_sums
from blockmodel.variography.models import VariogramModel

__all__ = ["declustered_mean_variance"]


def declustered_mean_variance(
    data: np.ndarray, weights: np.ndarray, model: VariogramModel
) -> float:
    """Variance ``w'Cw`` of the weighted mean of a stationary field at ``data``.

    Parameters
    ----------
    data : (n, 3) float64, metres
        Distinct positions (the covariance at zero separation includes the nugget).
    weights : (n,) float64
        Declustering weights (any positive scale; normalised to sum to 1).
    model : VariogramModel
        Covariance of the field (units of its sill).

    Returns
    -------
    float
        In the model's units squared.  Exact pair sum, ``O(n^2)`` covariances in compiled
        code; each row is summed alone, so the result does not depend on the threads.
    """
    w, u, _ = pair_sums(data, weights, model)
    return float(np.dot(w, u))
