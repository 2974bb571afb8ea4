"""Simple-kriging weights of the conditioning data at many nodes, computed once.

With a moving neighbourhood of the ``k`` nearest data (in the metric of the model's
longest structure), the weights depend on the positions only, never on the values, so a
conditional simulation computes them once and applies them to every realisation:
``y_c(u) = y_u(u) + sum_a w_a(u) (y(u_a) - y_u(u_a))``, the simple-kriging estimate from
the data plus the unconditional field's kriging error (Journel & Huijbregts 1978, §VII.C;
Chilès & Delfiner 2012, §7.3.1).
"""

from __future__ import annotations

import dataclasses
import functools
from dataclasses import dataclass

import numpy as np
from scipy.spatial import cKDTree

from blockmodel.variography.models import VariogramModel

__all__ = ["KrigingWeights", "neighbour_metric", "simple_kriging_weights"]

# most data whose covariance table is computed once (larger sets: per chunk of nodes)
TABLE_LIMIT = 5000


@dataclass(frozen=True)
class KrigingWeights:
    """Simple-kriging weights at m nodes.

    Attributes
    ----------
    index : (m, k) int64
        The data each node uses.
    weights : (m, k) float64
    variance : (m,) float64
        Simple-kriging variance (units of the model's sill).
    mean_share : (m,) float64
        ``1 - sum of the weights``: the share of each node left to the mean.
    """

    index: np.ndarray
    weights: np.ndarray
    variance: np.ndarray
    mean_share: np.ndarray

    def apply(self, data: np.ndarray) -> np.ndarray:
        """Simple-kriging estimates (zero mean) from ``data`` ((n,) or (n, r) float64):
        (m,) or (m, r)."""
        gathered = data[self.index]
        if gathered.ndim == 2:
            return np.einsum("mk,mk->m", self.weights, gathered)
        return np.einsum("mk,mkr->mr", self.weights, gathered)


def neighbour_metric(model: VariogramModel) -> np.ndarray:
    """(3, 3) matrix taking separations (metres) to the frame in which neighbours are
    nearest: that of the structure with the longest range (the first of equals), the
    identity for a pure nugget."""
    if not model.structures:
        return np.eye(3)
    return max(model.structures, key=lambda s: max(s.ranges)).transform()


def simple_kriging_weights(
    data: np.ndarray,
    nodes: np.ndarray,
    model: VariogramModel,
    *,
    neighbours: int = 24,
    chunk: int = 4096,
    index: np.ndarray | None = None,
    parts: dict | None = None,
) -> KrigingWeights:
    """Simple-kriging weights (known zero mean) of ``data`` at ``nodes``.

    Parameters
    ----------
    data : (n, 3) float64, metres
        Conditioning positions (distinct).
    nodes : (m, 3) float64, metres
    model : VariogramModel
    neighbours : int
        Nearest data used per node (all when fewer), nearest in the metric of the structure
        with the longest range (the nugget's metric when there is none).
    chunk : int
        Nodes solved at once (memory about ``chunk * neighbours**2 * 24`` bytes).
    index : (m, k) int64, optional
        The data each node uses, found before for these data and nodes in the same
        :func:`neighbour_metric` (the neighbour search is then skipped); None: searched.
    parts : dict, optional
        A store of each structure's correlations at unit sill among the data and between
        the nodes and their data, for these data, nodes, neighbours, ``chunk`` and
        ``index``: filled here and read by a later call under a model that differs in
        its nugget and sills only (it then evaluates no correlation).  The weights are the
        same with or without it.

    Returns
    -------
    KrigingWeights
    """
    data = np.asarray(data, dtype=np.float64)
    nodes = np.asarray(nodes, dtype=np.float64)
    k = min(int(neighbours), len(data))
    if k < 1:
        raise ValueError("simple kriging needs at least one datum")
    metric = neighbour_metric(model)
    found = index
    if found is not None and found.shape != (len(nodes), k):
        raise ValueError(f"index must be ({len(nodes)}, {k}); got {found.shape}")
    tree = cKDTree(data @ metric.T) if found is None else None
    index = np.empty((len(nodes), k), dtype=np.int64)
    weights = np.empty((len(nodes), k))
    variance = np.empty(len(nodes))
    sill = model.total_sill
    # the data-to-data covariances once, when they fit in memory (n = 5,000: 200 MB)
    table = None
    if len(data) <= TABLE_LIMIT:
        pairs = functools.cache(lambda: (data[:, None, :] - data[None, :, :]).reshape(-1, 3))
        table = _covariance(model, parts, "table", pairs).reshape(len(data), len(data))
        del pairs  # the separations (n = 5,000: 600 MB), not needed beyond the table
    for start in range(0, len(nodes), chunk):
        part = nodes[start : start + chunk]
        if tree is None:
            near = found[start : start + len(part)]
        else:
            near = tree.query(part @ metric.T, k=k)[1].reshape(len(part), k)
        xyz = data[near]  # (p, k, 3)
        if table is not None:
            lhs = table[near[:, :, None], near[:, None, :]]
        else:
            lhs = model.covariance((xyz[:, :, None, :] - xyz[:, None, :, :]).reshape(-1, 3))
            lhs = lhs.reshape(len(part), k, k)
        offsets = functools.cache(
            lambda xyz=xyz, part=part: (xyz - part[:, None, :]).reshape(-1, 3)
        )
        rhs = _covariance(model, parts, ("nodes", start), offsets).reshape(len(part), k)
        w = np.linalg.solve(lhs, rhs[:, :, None])[:, :, 0]
        index[start : start + len(part)] = near
        weights[start : start + len(part)] = w
        variance[start : start + len(part)] = sill - np.einsum("pk,pk->p", w, rhs)
    return KrigingWeights(index, weights, variance, 1.0 - weights.sum(axis=1))


def _covariance(model, parts, name, separations) -> np.ndarray:
    """``model.covariance(separations())`` by :meth:`VariogramModel.covariance_of`, its
    own sum.  ``separations`` is a cached call giving (q, 3) metres; the correlations (unit
    sill) and the zero separations are read from ``parts`` under ``name`` where stored,
    else computed (and stored when ``parts`` is a store)."""

    def stored(key, make):
        if parts is None:
            return make()
        if key not in parts:
            parts[key] = make()
        return parts[key]

    correlations = (
        stored(
            (name, dataclasses.replace(st, sill=1.0)), lambda st=st: st.correlation(separations())
        )
        for st in model.structures
    )
    zero = stored((name, "at zero"), lambda: np.all(separations() == 0.0, axis=1))
    return model.covariance_of(correlations, zero)
