"""Conditional Gaussian simulation of block grades: an unconditional spectral field on the
nodes of the block discretisation, conditioned by simple kriging of its residuals at the
data (weights computed once), back-transformed to grades and averaged to the blocks.

The data are moved to the node they fall in (the nearest node of the regular node grid;
where two share a node the nearest to its centre is kept), so the unconditional field is
known at the data exactly and the realisations honour the data at those nodes.  The mean
is the declustered one (zero in normal scores) or, in a domain with a trend, a locally
varying one (:mod:`blockmodel.simulation.local_mean`).  Each
realisation draws its noise from ``numpy.random.default_rng([seed, stream, r])`` and,
when the mean is uncertain (:mod:`blockmodel.simulation.mean_uncertainty`), its mean
from ``default_rng([seed, stream, r, 1])``: it is the same whatever the order, batching,
threads or machines that compute it.
"""

from __future__ import annotations

import time
from collections.abc import Callable
from dataclasses import dataclass

import numpy as np

from blockmodel.simulation.conditioning import (
    KrigingWeights,
    neighbour_metric,
    simple_kriging_weights,
)
from blockmodel.simulation.local_mean import LocalMean, local_mean
from blockmodel.simulation.mean_uncertainty import declustered_mean_variance
from blockmodel.simulation.spectral import SpectralSimulator
from blockmodel.simulation.transform import GaussianTransform
from blockmodel.simulation.variance_uncertainty import declustered_variance_dof
from blockmodel.variography.models import VariogramModel

__all__ = ["FEWEST_DOF", "NodeGrid", "SimulationPlan", "plan_simulation", "simulate_blocks"]

# the sill's factor nu / chi2(nu) has a finite variance only above 4 degrees of freedom
FEWEST_DOF = 4.0


@dataclass(frozen=True)
class NodeGrid:
    """A regular grid of nodes: node (a, b, c) is centred at ``origin + (a, b, c) * spacing``.

    Attributes
    ----------
    origin : (3,) float64, metres (the centre of node 0, 0, 0)
    spacing : (3,) float64, metres
    shape : (3,) int
    """

    origin: np.ndarray
    spacing: np.ndarray
    shape: tuple[int, int, int]

    def centres(self, flat: np.ndarray) -> np.ndarray:
        """Centres (m, 3) of the nodes with flat (C-order) indices ``flat``."""
        abc = np.column_stack(np.unravel_index(flat, self.shape))
        return self.origin + abc * self.spacing


@dataclass(frozen=True)
class SimulationPlan:
    """Everything a realisation needs, computed once per domain and grade.

    Attributes
    ----------
    nodes : NodeGrid
    simulator : SpectralSimulator
    targets : (m,) int64
        Flat indices of the nodes simulated, block by block.
    target_block : (m,) int64
        The block (0 .. b - 1) of each target.
    block_nodes : (b,) int64
        Targets per block.
    data_nodes : (n,) int64
        The node of each conditioning datum kept.
    data_scores : (n,) float64
        Their normal scores.
    weights : KrigingWeights
        Simple-kriging weights of the data at the targets.
    transform : GaussianTransform
    seed : tuple of int
        The realisations' seed and stream: realisation r uses ``default_rng([*seed, r])``.
    relocated_dropped : int
        Data dropped because another datum was nearer the centre of their node.
    blocks_without_inside_nodes : int
        Blocks none of whose nodes passed ``inside`` (simulated on all their nodes).
    mean_sd : float
        Standard deviation of each realisation's mean normal score
        (:mod:`blockmodel.simulation.mean_uncertainty`); 0: the mean is known.
    data_mean, target_mean : (n,) and (m,) float64, or None
        The local mean of the normal scores at the data and the targets
        (:mod:`blockmodel.simulation.local_mean`); None: zero everywhere.
    residual_sd : float
        Standard deviation of the scores about their mean: the unconditional field's.
    variance_dof : float
        Degrees of freedom of the data's declustered variance; each realisation scales its
        model's sill by ``nu / chi2(nu)`` (:meth:`variance_factor`; not at
        :data:`FEWEST_DOF` or fewer); inf: the variance is known.
    metric : (3, 3) float64 or None
        The frame of the neighbour search and of the local mean's kernel
        (:func:`~blockmodel.simulation.conditioning.neighbour_metric` of the model).
    """

    nodes: NodeGrid
    simulator: SpectralSimulator
    targets: np.ndarray
    target_block: np.ndarray
    block_nodes: np.ndarray
    data_nodes: np.ndarray
    data_scores: np.ndarray
    weights: KrigingWeights
    transform: GaussianTransform
    seed: tuple[int, ...]
    relocated_dropped: int
    blocks_without_inside_nodes: int = 0
    mean_sd: float = 0.0
    data_mean: np.ndarray | None = None
    target_mean: np.ndarray | None = None
    residual_sd: float = 1.0
    variance_dof: float = np.inf
    metric: np.ndarray | None = None

    def variance_factor(self, r: int) -> float:
        """The factor on the model's sill in realisation ``r``: ``nu / chi2(nu)`` drawn
        from ``default_rng([*seed, r, 2])`` (:mod:`blockmodel.simulation.variance_uncertainty`);
        1 when the variance is known, or when ``nu`` is :data:`FEWEST_DOF` or fewer (the
        factor would have no finite variance: the sill is then taken as known)."""
        if not FEWEST_DOF < self.variance_dof < np.inf:
            return 1.0
        rng = np.random.default_rng([*self.seed, r, 2])
        return float(self.variance_dof / rng.chisquare(self.variance_dof))

    def realisation_scores(self, r: int, clock: dict | None = None) -> np.ndarray:
        """Conditioned normal scores at the targets in realisation ``r``: (m,).
        ``clock`` (optional) gathers the seconds of the unconditional field and of the
        conditioning."""
        start = time.perf_counter()
        field = self.simulator.draw(np.random.default_rng([*self.seed, r])).ravel()
        spread = self.variance_factor(r) ** 0.5
        if spread * self.residual_sd != 1.0:
            field *= spread * self.residual_sd
        drawn = time.perf_counter()
        residual = self.data_scores - field[self.data_nodes]
        if self.data_mean is not None:
            residual -= self.data_mean
        out = field[self.targets] + self.weights.apply(residual)
        if self.target_mean is not None:
            out += self.target_mean
        if self.mean_sd > 0.0:
            draw = np.random.default_rng([*self.seed, r, 1]).standard_normal()
            mean = spread * self.mean_sd * draw
            out += mean * self.weights.mean_share
        if clock is not None:
            clock["unconditional"] = clock.get("unconditional", 0.0) + drawn - start
            clock["conditioning"] = clock.get("conditioning", 0.0) + time.perf_counter() - drawn
        return out

    def realisations(self, which, clock: dict | None = None) -> np.ndarray:
        """Block grades (b, len(which)) of the realisations numbered ``which``: back-
        transformed node grades averaged over each block's targets.  ``clock`` (optional)
        gathers seconds per part (``unconditional``, ``conditioning``, ``to_blocks``)."""
        nb = len(self.block_nodes)
        out = np.empty((nb, len(which)))
        for n, r in enumerate(which):
            y = self.realisation_scores(int(r), clock)
            start = time.perf_counter()
            z = self.transform.back(y)
            out[:, n] = np.bincount(self.target_block, weights=z, minlength=nb) / self.block_nodes
            if clock is not None:
                clock["to_blocks"] = clock.get("to_blocks", 0.0) + time.perf_counter() - start
        return out


def plan_simulation(
    blocks: np.ndarray,
    grid_origin: np.ndarray,
    block_size: np.ndarray,
    discretisation: tuple[int, int, int],
    data: np.ndarray,
    scores: np.ndarray,
    model: VariogramModel,
    transform: GaussianTransform,
    seed: tuple[int, ...],
    *,
    neighbours: int = 24,
    workers: int = 1,
    inside: Callable[[NodeGrid, np.ndarray], np.ndarray] | None = None,
    weights: np.ndarray | None = None,
    mean_uncertainty: bool = False,
    variance_uncertainty: bool = False,
    local_mean_window: float = 0.0,
    like: SimulationPlan | None = None,
    shared: dict | None = None,
) -> SimulationPlan:
    """Prepare the conditional simulation of one domain and grade.

    Parameters
    ----------
    blocks : (b, 3) int64
        Grid indices (i, j, k) of the blocks to simulate.
    grid_origin : (3,) float64
        The block grid's lower corner, metres.
    block_size : (3,) float64, metres
    discretisation : (3,) int
        Nodes per block along x, y, z.
    data : (n, 3) float64, metres
        Conditioning positions.
    scores : (n,) float64
        Their normal scores.
    model : VariogramModel
        Of the normal scores (its sill: their variance at a point); with a local mean,
        of total sill 1: its correlation, scaled to the residuals' variance.
    transform : GaussianTransform
    seed : tuple of int
    neighbours : int
        Data per node in the simple kriging.
    workers : int
        Threads for the Fourier transforms.
    inside : callable(nodes, flat) -> (m,) bool, optional
        Which nodes of the blocks lie in the domain (its solid, or its part placed by
        codes); a block none of whose nodes lies in it keeps them all.  None: every node
        of every block.
    weights : (n,) float64, optional
        Declustering weights of the data; None: equal.
    mean_uncertainty : bool
        Each realisation draws its mean normal score with the variance of the declustered
        mean at the data kept
        (:func:`~blockmodel.simulation.mean_uncertainty.declustered_mean_variance`, under
        the residuals' model); false: the mean is known.
    variance_uncertainty : bool
        Each realisation draws the factor on the model's sill from the scaled inverse
        chi-square of the declustered variance's degrees of freedom at the data kept
        (:mod:`blockmodel.simulation.variance_uncertainty`); false: the sill is known.
    local_mean_window : float
        Positive: the mean varies locally, a kernel average of the declustered scores
        with a window of this fraction of the longest structure's ranges
        (:func:`~blockmodel.simulation.local_mean.local_mean`); 0: the mean is zero.
    like : SimulationPlan, optional
        A plan of the same blocks, data, scores, weights and settings under another model
        (a draw of the same fit): where both models have the same
        :func:`~blockmodel.simulation.conditioning.neighbour_metric`, its neighbours and
        local mean are taken over instead of found again (the result is the same).
    shared : dict, optional
        A store, empty at first, handed to every plan of these blocks, data and settings:
        each structure's unit-sill spectrum and correlations are kept in it, so that a
        later plan under a model that differs from an earlier one in its nugget and sills
        only (a draw of the same fit) evaluates and transforms no covariance (the result
        is the same).  It holds about ``8 * (nodes * neighbours + data**2 + FFT grid
        nodes / 2)`` bytes per structure; let it go with the plans.

    Returns
    -------
    SimulationPlan
    """
    blocks = np.asarray(blocks, dtype=np.int64)
    origin = np.asarray(grid_origin, dtype=np.float64)
    size = np.asarray(block_size, dtype=np.float64)
    disc = np.asarray(discretisation, dtype=np.int64)
    data = np.asarray(data, dtype=np.float64)
    spacing = size / disc
    # the node lattice (node 0 centred half a spacing inside the grid's corner) over the
    # blocks and the data, bounded node by node: the field at a node does not depend on
    # how nodes are grouped into blocks
    data_node = np.floor((data - origin) / spacing).astype(np.int64)
    low = np.minimum(blocks.min(axis=0) * disc, data_node.min(axis=0))
    high = np.maximum((blocks.max(axis=0) + 1) * disc - 1, data_node.max(axis=0))
    shape = tuple(int(v) for v in high - low + 1)
    nodes = NodeGrid(origin + low * spacing + spacing / 2, spacing, shape)
    # the data moved to the node they fall in; the nearest to each node's centre kept
    flat = np.ravel_multi_index((data_node - low).T, shape)
    offset = np.linalg.norm((data - nodes.centres(flat)) / spacing, axis=1)
    order = np.lexsort((offset, flat))
    first = np.r_[True, flat[order][1:] != flat[order][:-1]]
    keep = np.sort(order[first])
    # every node of every block, block by block
    local = np.stack(np.meshgrid(*[np.arange(d) for d in disc], indexing="ij"), -1).reshape(-1, 3)
    node_abc = (blocks * disc - low)[:, None, :] + local[None, :, :]
    targets = np.ravel_multi_index(node_abc.reshape(-1, 3).T, shape)
    target_block = np.repeat(np.arange(len(blocks)), len(local))
    empty = 0
    if inside is not None:
        keep_node = np.asarray(inside(nodes, targets), dtype=bool)
        per_block = np.bincount(target_block, weights=keep_node, minlength=len(blocks))
        keep_node |= (per_block == 0)[target_block]
        empty = int((per_block == 0).sum())
        targets, target_block = targets[keep_node], target_block[keep_node]
    at_data = nodes.centres(flat[keep])
    at_targets = nodes.centres(targets)
    kept_scores = np.asarray(scores, dtype=np.float64)[keep]
    if weights is None:
        weights = np.ones(len(data))
    kept_weights = np.asarray(weights, dtype=np.float64)[keep]
    metric = neighbour_metric(model)
    same = (
        like is not None
        and np.array_equal(like.metric, metric)
        and np.array_equal(like.targets, targets)
        and np.array_equal(like.data_nodes, flat[keep])
    )
    # the correlations at the targets hold for the targets, data and neighbours they were
    # found for: a first plan stores them, a later one with the same neighbours reads them
    kriging_parts = None
    if shared is not None and like is None:
        kriging_parts = {}
    elif shared is not None and same and "kriging" in shared:
        index, parts = shared["kriging"]
        kriging_parts = parts if index is like.weights.index else None
    kriging = simple_kriging_weights(
        at_data,
        at_targets,
        model,
        neighbours=neighbours,
        index=like.weights.index if same else None,
        parts=kriging_parts,
    )
    if shared is not None and like is None:
        shared["kriging"] = (kriging.index, kriging_parts)
    spectra = None if shared is None else shared.setdefault("spectra", {})
    simulator = SpectralSimulator(shape, tuple(spacing), model, workers=workers, parts=spectra)
    local = None
    if local_mean_window > 0.0:
        if not model.structures:
            raise ValueError("a local mean needs a model with a structure (its ranges)")
        if same and like.data_mean is not None:
            local = LocalMean(like.data_mean, like.target_mean, like.residual_sd)
        else:
            local = local_mean(
                at_data, kept_scores, kept_weights, at_targets, model, local_mean_window
            )
    residual_sd = 1.0 if local is None else local.residual_sd
    mean_sd = 0.0
    if mean_uncertainty:
        variance = declustered_mean_variance(at_data, kept_weights, model)
        mean_sd = residual_sd * float(np.sqrt(variance))
    dof = np.inf
    if variance_uncertainty:
        dof = declustered_variance_dof(at_data, kept_weights, model)
    return SimulationPlan(
        nodes,
        simulator,
        targets,
        target_block,
        np.bincount(target_block, minlength=len(blocks)),
        flat[keep],
        kept_scores,
        kriging,
        transform,
        tuple(int(s) for s in seed),
        len(data) - len(keep),
        empty,
        mean_sd,
        None if local is None else local.at_data,
        None if local is None else local.at_targets,
        residual_sd,
        dof,
        metric,
    )


def simulate_blocks(
    plan: SimulationPlan,
    realisations: int,
    *,
    threads: int = 1,
    first: int = 0,
    step: int = 1,
    clock: dict | None = None,
) -> np.ndarray:
    """Block grades of realisations ``first, first + step, ...`` (``realisations`` of
    them): (b, realisations) float64, the same for any number of ``threads``; ``clock`` as
    :meth:`SimulationPlan.realisations` (seconds summed over threads)."""
    which = first + step * np.arange(realisations)
    if threads <= 1 or realisations < 2:
        return plan.realisations(which, clock)
    from concurrent.futures import ThreadPoolExecutor

    batches = np.array_split(which, min(threads, realisations))
    clocks = [{} for _ in batches]
    with ThreadPoolExecutor(threads) as pool:
        parts = list(pool.map(plan.realisations, batches, clocks))
    if clock is not None:
        for c in clocks:
            for k, v in c.items():
                clock[k] = clock.get(k, 0.0) + v
    return np.concatenate(parts, axis=1)
