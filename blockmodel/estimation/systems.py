"""Kriging systems: the discretisation of a block, its mean covariance ``C̄(V, V)``, and
the batched solve of the systems of many targets with one model (definitions in
:mod:`blockmodel.estimation.kriging`).  Arrays in, arrays out."""

from __future__ import annotations

from collections.abc import Sequence

import numpy as np

from blockmodel.estimation import _kernels, _neighbours
from blockmodel.estimation._threads import run_split
from blockmodel.variography.models import VariogramModel

__all__ = [
    "CONDITION_LIMIT",
    "DISCRETISATION",
    "KrigingSystems",
    "block_covariance",
    "discretisation_offsets",
]

DISCRETISATION = (4, 4, 2)  # points per block along x, y, z, unless set otherwise
CONDITION_LIMIT = 1e-12  # smallest Cholesky pivot ratio before a system is flagged


def discretisation_offsets(
    block_size: Sequence[float], discretisation: Sequence[int]
) -> np.ndarray:
    """Offsets from a block centre to the centres of a regular subdivision of the block.

    Parameters
    ----------
    block_size : (3,) float, metres
    discretisation : (3,) int, points along x, y, z

    Returns
    -------
    (nx*ny*nz, 3) float64, metres, x fastest
    """
    size = np.asarray(block_size, dtype=np.float64)
    counts = np.asarray(discretisation, dtype=np.int64)
    if size.shape != (3,) or np.any(size <= 0):
        raise ValueError(f"block_size must be three positive lengths, got {block_size!r}")
    if counts.shape != (3,) or np.any(counts < 1):
        raise ValueError(f"discretisation must be three counts >= 1, got {discretisation!r}")
    axes = [((np.arange(c) + 0.5) / c - 0.5) * s for c, s in zip(counts, size, strict=True)]
    gz, gy, gx = np.meshgrid(axes[2], axes[1], axes[0], indexing="ij")
    return np.column_stack([gx.ravel(), gy.ravel(), gz.ravel()])


def block_covariance(
    model: VariogramModel, block_size: Sequence[float], discretisation: Sequence[int]
) -> float:
    """Mean covariance between the discretisation points of one block, ``C̄(V, V)``
    (nugget excluded), in the model's units squared.

    Parameters
    ----------
    model : VariogramModel
    block_size : (3,) float, metres
    discretisation : (3,) int
        Points per block axis (centres of equal sub-cells).
    """
    kinds, sills, mats = model.packed()
    offsets = discretisation_offsets(block_size, discretisation)
    return float(_kernels.mean_block_covariance(offsets, kinds, sills, mats))


class KrigingSystems:
    """Kriging systems of one model and sample set, solved chunk by chunk: the samples
    and discretisation points in the model's reduced frames, and ``C_00``, prepared once."""

    def __init__(self, model, local, block_size, discretisation, simple: bool, mean):
        self.model, self.simple = model, simple
        self.mean = 0.0 if mean is None else float(mean)
        self.kinds, self.sills, self.mats = model.packed()
        self.point_support = block_size is None
        offsets = (
            np.zeros((1, 3))
            if self.point_support
            else discretisation_offsets(block_size, discretisation)
        )
        self.cvv = (
            model.total_sill
            if self.point_support
            else float(_kernels.mean_block_covariance(offsets, self.kinds, self.sills, self.mats))
        )
        self.samples_r = _kernels.reduced(local, self.mats)
        self.offsets_r = np.ascontiguousarray(
            _kernels.reduced(offsets, self.mats).transpose(0, 2, 1)
        )

    def solve(self, values, targets, idx, cnt) -> dict[str, np.ndarray]:
        """Estimate, variance, slope, efficiency, Lagrange multiplier, sum and count of
        negative weights, weight sum and ill-conditioning of each target (n, 3) from its
        neighbours ``idx`` (first ``cnt`` of each row); targets sharing a neighbour set share
        one solve."""
        canonical = np.sort(idx, axis=1)
        order, starts = _neighbours.group_rows(canonical)
        n = len(targets)
        res = {c: np.full(n, np.nan) for c in ("est", "var", "slope", "mu", "neg", "nneg", "ws")}
        flag = np.zeros(n, dtype=bool)
        run_split(
            _kernels.krige_groups,
            len(starts) - 1,
            self.samples_r,
            values,
            targets,
            self.offsets_r,
            canonical,
            cnt.astype(np.int64),
            order,
            starts,
            self.kinds,
            self.sills,
            self.mats,
            self.model.nugget,
            self.cvv,
            self.point_support,
            self.simple,
            self.mean,
            CONDITION_LIMIT,
            res["est"],
            res["var"],
            res["slope"],
            res["mu"],
            res["neg"],
            res["nneg"],
            res["ws"],
            flag,
        )
        # kriging efficiency is undefined when the blocks do not vary (a pure-nugget model
        # averaged over a block has no block variance)
        efficiency = (self.cvv - res["var"]) / self.cvv if self.cvv > 0 else np.full(n, np.nan)
        return {
            "estimate": res["est"],
            "variance": res["var"],
            "slope": res["slope"],
            "efficiency": efficiency,
            "lagrange": res["mu"],
            "negative_weights": res["neg"],
            "negative_count": res["nneg"],
            "weight_sum": res["ws"],
            "ill_conditioned": flag,
        }
