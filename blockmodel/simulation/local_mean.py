"""A locally varying mean of the normal scores, for domains with a trend.

Simple kriging about one global mean pulls every node far from its data back to that
mean.  Where grades follow a trend inside a domain (a high-grade shoot drilled closely,
lower grades drilled sparsely around it), the global mean lies above the low parts and
below the high ones, so the realisations overstate the low parts and understate the
high ones.  Simple kriging with varying local means (Goovaerts 1997, *Geostatistics for
Natural Resources Evaluation*, chapter 6; recalled from memory) replaces the global mean
by a local one ``m(u)`` and kriges the residuals ``y - m`` about zero:

    y_c(u) = m(u) + s r_u(u) + sum_a w_a(u) (y_a - m(u_a) - s r_u(u_a)),

with ``r_u`` an unconditional field of the normal scores' correlation and ``s^2`` the
residuals' variance.  Here ``m`` is a Gaussian-kernel average of the declustered normal
scores (kernel weight times declustering weight), its window a set fraction of the
ranges of the model's longest structure along that structure's axes, and ``s^2`` the
declustered mean square of the residuals at the data.  The residuals keep the model's
correlation (its shape, scaled to ``s^2``), so the kriging weights are those of the
stationary case.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
from numba import njit

from blockmodel.estimation._threads import run_split
from blockmodel.simulation.conditioning import neighbour_metric
from blockmodel.variography.models import VariogramModel

__all__ = ["LocalMean", "kernel_mean", "local_mean"]

# the kernel is cut at this many window lengths (its weight there: exp(-8) = 3e-4)
CUT = 4.0


@dataclass(frozen=True)
class LocalMean:
    """The local mean of a domain's normal scores at its data and its targets.

    Attributes
    ----------
    at_data : (n,) float64
        At the conditioning data.
    at_targets : (m,) float64
        At the simulated nodes.
    residual_sd : float
        Standard deviation of the residuals about it (declustered), normal-score units.
    """

    at_data: np.ndarray
    at_targets: np.ndarray
    residual_sd: float


def kernel_mean(
    data: np.ndarray,
    values: np.ndarray,
    weights: np.ndarray,
    points: np.ndarray,
    metric: np.ndarray,
    window: float,
) -> np.ndarray:
    """Gaussian-kernel weighted average of ``values`` at ``points``.

    The weight of datum a at point u is ``weights[a] * exp(-|M (u - x_a)|^2 / (2 h^2))``
    with M = ``metric`` and h = ``window``, cut beyond ``4 h``.  A point with no datum
    within the cut takes the weighted mean of all the data.  The data are sorted into
    cubic cells of side ``4 h`` (in the scaled frame) and each point visits the 27 cells
    around its own, so the work grows with the pairs within the cut, not with all pairs;
    the result is the same for any number of threads.

    Parameters
    ----------
    data : (n, 3) float64, metres
    values : (n,) float64
    weights : (n,) float64, positive
    points : (m, 3) float64, metres
    metric : (3, 3) float64
        Maps an offset in metres to one in units of the ranges (1 = a range).
    window : float
        Standard deviation of the kernel in those units, positive.

    Returns
    -------
    (m,) float64
    """
    scale = np.asarray(metric, dtype=np.float64).T / float(window)
    p = np.asarray(data, dtype=np.float64) @ scale
    q = np.ascontiguousarray(np.asarray(points, dtype=np.float64) @ scale)
    values = np.asarray(values, dtype=np.float64)
    weights = np.asarray(weights, dtype=np.float64)
    low = np.minimum(p.min(axis=0), q.min(axis=0) if len(q) else p.min(axis=0)) - CUT
    cell_p = np.floor((p - low) / CUT).astype(np.int64)
    span = cell_p.max(axis=0) + 3
    key = (cell_p[:, 0] * span[1] + cell_p[:, 1]) * span[2] + cell_p[:, 2]
    order = np.argsort(key, kind="stable")
    keys, starts = np.unique(key[order], return_index=True)
    ends = np.r_[starts[1:], len(order)]
    out = np.empty(len(q))
    overall = float(np.average(values, weights=weights))
    run_split(
        _kernel_rows,
        len(q),
        q,
        np.ascontiguousarray(p[order]),
        values[order],
        weights[order],
        keys,
        starts,
        ends,
        low,
        span,
        overall,
        out,
    )
    return out


@njit(cache=True, nogil=True)
def _kernel_rows(first, last, q, p, values, weights, keys, starts, ends, low, span, overall, out):
    """out[i] for points first .. last - 1 of :func:`kernel_mean` (data sorted by cell)."""
    cut2 = CUT * CUT
    for i in range(first, last):
        num = 0.0
        den = 0.0
        c0 = np.int64(np.floor((q[i, 0] - low[0]) / CUT))
        c1 = np.int64(np.floor((q[i, 1] - low[1]) / CUT))
        c2 = np.int64(np.floor((q[i, 2] - low[2]) / CUT))
        for a in range(c0 - 1, c0 + 2):
            for b in range(c1 - 1, c1 + 2):
                for c in range(c2 - 1, c2 + 2):
                    if a < 0 or b < 0 or c < 0 or a >= span[0] or b >= span[1] or c >= span[2]:
                        continue
                    k = (a * span[1] + b) * span[2] + c
                    at = np.searchsorted(keys, k)
                    if at == len(keys) or keys[at] != k:
                        continue
                    for j in range(starts[at], ends[at]):
                        d2 = 0.0
                        for x in range(3):
                            d = q[i, x] - p[j, x]
                            d2 += d * d
                        if d2 <= cut2:
                            w = weights[j] * np.exp(-0.5 * d2)
                            num += w * values[j]
                            den += w
        out[i] = num / den if den > 0.0 else overall


def local_mean(
    data: np.ndarray,
    scores: np.ndarray,
    weights: np.ndarray,
    targets: np.ndarray,
    model: VariogramModel,
    window: float,
) -> LocalMean:
    """The local mean (:func:`kernel_mean`) of normal ``scores`` at ``data`` and
    ``targets`` ((m, 3) float64, metres), in the frame of the ``model``'s longest structure
    with a kernel of ``window`` times its ranges, and the declustered standard deviation
    of the residuals.  ``weights``: (n,) declustering weights."""
    metric = neighbour_metric(model)
    at_data = kernel_mean(data, scores, weights, data, metric, window)
    at_targets = kernel_mean(data, scores, weights, targets, metric, window)
    residual = np.asarray(scores, dtype=np.float64) - at_data
    sd = float(np.sqrt(np.average(residual**2, weights=weights)))
    return LocalMean(at_data, at_targets, sd)
