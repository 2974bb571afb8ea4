"""The sill of the normal scores, from their variance within the domain.

The normal scores of a domain's composites have declustered variance 1 by construction.
That variance is a dispersion variance: the spread of point values about the domain's own
mean, not about the mean of an unbounded field.  Under a stationary model of sill
``sigma^2`` and correlation ``R``, the expected declustered variance of the data about
their declustered mean is

    E[sum_a w_a (Y_a - sum_b w_b Y_b)^2] = sigma^2 (1 - w' R w),

(weights summing to 1, ``R`` the correlations among the data, 1 on the diagonal): the variance
about the field's mean less the variance of the weighted mean.  It is the dispersion
variance of points within the domain, the mean of the variogram over its pairs (Journel &
Huijbregts 1978, dispersion variance; recalled from memory), taken over the data.  Where
the ranges are short against the domain, ``w'Rw`` is small and a sill of 1 fits the data.
Where a structure's ranges approach the domain's size, a sill of 1 leaves the realisations
less varied inside the domain than the composites, and for skewed grades the back-
transform then lowers their mean.  The sill that makes the model agree with the data's
variance is ``sigma^2 = 1 / (1 - w'Rw)``.
"""

from __future__ import annotations

import numpy as np

from blockmodel.simulation.mean_uncertainty import declustered_mean_variance
from blockmodel.variography.models import VariogramModel

__all__ = ["LONGEST_SHARE", "dispersion_sill"]

# ``w'Rw`` above this: the data cannot fix the sill (it would exceed 4)
LONGEST_SHARE = 0.75


def dispersion_sill(data: np.ndarray, weights: np.ndarray, model: VariogramModel) -> float:
    """The total sill at which ``model``'s expected declustered variance of the data is 1.

    Parameters
    ----------
    data : (n, 3) float64, metres
        Positions of the normal scores (two at one place correlate through the structures
        only: the nugget is a datum's own).
    weights : (n,) float64
        Their declustering weights (any positive scale).
    model : VariogramModel
        The normal scores' model, total sill 1 (its shape is kept).

    Returns
    -------
    float
        ``1 / (1 - w'Rw)``, at least 1.

    Raises
    ------
    ValueError
        When ``w'Rw`` exceeds :data:`LONGEST_SHARE`: the model's ranges are so long against
        the data's extent that their variance cannot fix its sill.
    """
    if not np.isclose(model.total_sill, 1.0):
        raise ValueError(f"the model's total sill must be 1; got {model.total_sill:g}")
    share = declustered_mean_variance(data, weights, model)
    if share > LONGEST_SHARE:
        raise ValueError(
            f"the model's correlation among the data averages {share:.2f}: its ranges are "
            "too long against the domain for the data's variance to fix its sill"
        )
    return 1.0 / (1.0 - share)
