"""Pair sums over a domain's data under a covariance model, in compiled code."""

from __future__ import annotations

import numpy as np
from numba import njit

from blockmodel.estimation._kernels import _structured_cov
from blockmodel.estimation._threads import run_split
from blockmodel.variography.models import VariogramModel


def pair_sums(data: np.ndarray, weights: np.ndarray, model: VariogramModel):
    """Normalised weights ``w`` (n,), ``u = Cw`` (n,) and ``q = (C*C)w`` (n,), with ``C``
    the covariances among ``data`` (n, 3) (the nugget on the diagonal: the positions are
    distinct data) and ``C*C`` its element-wise square.  ``O(n^2)`` covariances; each row
    is summed alone, so the result does not depend on the threads."""
    data = np.ascontiguousarray(data, dtype=np.float64)
    w = np.asarray(weights, dtype=np.float64)
    if data.ndim != 2 or data.shape[1] != 3 or w.shape != (len(data),):
        raise ValueError("data must be (n, 3) and weights (n,)")
    if len(w) == 0 or not np.all(w >= 0) or w.sum() <= 0:
        raise ValueError("weights must be non-negative with a positive sum")
    w = w / w.sum()
    kinds, sills, mats = model.packed()
    u, q = np.empty(len(data)), np.empty(len(data))
    run_split(_row_sums, len(data), data, w, kinds, sills, mats, u, q)
    point = model.total_sill - model.nugget  # the structures' covariance at zero
    u += model.nugget * w
    q += (2.0 * model.nugget * point + model.nugget**2) * w
    return w, u, q


@njit(cache=True, nogil=True)
def _row_sums(first, last, data, w, kinds, sills, mats, u, q):
    """u[i] = sum_j w_j C(x_i - x_j) and q[i] = sum_j w_j C(x_i - x_j)^2 for i in
    first .. last - 1, C the structures (nugget left out)."""
    n = data.shape[0]
    for i in range(first, last):
        total = 0.0
        squares = 0.0
        for j in range(n):
            c = _structured_cov(
                data[i, 0] - data[j, 0],
                data[i, 1] - data[j, 1],
                data[i, 2] - data[j, 2],
                kinds,
                sills,
                mats,
            )
            total += w[j] * c
            squares += w[j] * c * c
        u[i] = total
        q[i] = squares
