"""Estimators on arrays: ordinary and simple kriging (point or block support), inverse
distance and nearest sample, with oriented search passes.

The numerical work is done by :func:`estimate`, which takes and returns plain arrays;
:func:`krige` wraps it into a DataFrame (the public, documented form).

Definitions (covariance form, ``C(h) = total sill - gamma(h)``): ordinary kriging solves
``sum_j w_j C_ij + mu = C_i0`` with ``sum_j w_j = 1``; simple kriging solves
``sum_j w_j C_ij = C_i0`` and the known mean takes the weight ``1 - sum w``.  For a block,
``C_i0`` is the mean covariance between sample i and the block's discretisation points and
``C_00`` the mean covariance between those points, nugget excluded; a point target adds
the nugget at zero separation (exact interpolation).  With ``S = sum_i w_i C_i0``: kriging
variance ``C_00 - S - mu``; slope of the regression of the true block grade on its
estimate ``S / (S - mu)`` (``w' C w = S - mu``; 1 for simple kriging); kriging efficiency
``(C_00 - variance) / C_00``.
"""

from __future__ import annotations

import time
from collections.abc import Sequence
from dataclasses import dataclass
from typing import TYPE_CHECKING

import numpy as np

from blockmodel.estimation import _neighbours
from blockmodel.estimation._threads import run_split
from blockmodel.estimation.search import SampleIndex, SearchEllipsoid, find_neighbours
from blockmodel.estimation.systems import (
    DISCRETISATION,
    KrigingSystems,
)
from blockmodel.variography.models import VariogramModel

if TYPE_CHECKING:  # pragma: no cover
    import pandas as pd

__all__ = ["METHODS", "PreparedSamples", "estimate", "estimate_prepared", "krige", "prepare"]

METHODS = ("ordinary", "simple", "inverse_distance", "nearest")

#: Columns written by :func:`estimate`, in order.
COLUMNS = (
    "estimate",
    "variance",
    "slope",
    "efficiency",
    "n_samples",
    "n_holes",
    "mean_distance",
    "lagrange",
    "negative_weights",
    "negative_count",
    "weight_sum",
    "ill_conditioned",
    "search_pass",
    "nearest",
    "inverse_distance",
)


def _lap(timings: dict[str, float] | None, key: str, since: float) -> float:
    now = time.perf_counter()
    if timings is not None:
        timings[key] = timings.get(key, 0.0) + now - since
    return now


def _as_points(name: str, a: np.ndarray) -> np.ndarray:
    a = np.asarray(a, dtype=np.float64)
    if a.ndim != 2 or a.shape[1] != 3:
        raise ValueError(f"{name} must be an (n, 3) array of x, y, z; got shape {a.shape}")
    if not np.all(np.isfinite(a)):
        raise ValueError(f"{name} contains non-finite coordinates")
    return a


def _merge_duplicates(
    points: np.ndarray, values: np.ndarray, holes: np.ndarray, tolerance: float = 1e-6
) -> tuple[np.ndarray, np.ndarray, np.ndarray, int]:
    """Average samples closer than ``tolerance`` metres (same rounded location)."""
    keys = np.round(points / tolerance).astype(np.int64)
    _, first, inverse, _counts = np.unique(
        keys, axis=0, return_index=True, return_inverse=True, return_counts=True
    )
    inverse = inverse.ravel()
    if len(first) == len(points):
        return points, values, holes, 0
    order = np.argsort(first, kind="stable")  # keep samples in their input order
    rank = np.empty_like(order)
    rank[order] = np.arange(len(order))
    group = rank[inverse]
    merged_values = np.bincount(group, weights=values) / np.bincount(group)
    keep = np.sort(first)
    return points[keep], merged_values, holes[keep], int(len(points) - len(keep))


@dataclass(frozen=True)
class PreparedSamples:
    """Samples made ready for estimating any targets with one model and set of passes:
    local coordinates, merged duplicates, hole codes, the kriging systems' reduced frames
    and one search index per pass.  Built by :func:`prepare`; reused chunk after chunk."""

    origin: np.ndarray
    local: np.ndarray
    values: np.ndarray
    hole_codes: np.ndarray
    merged: int
    passes: tuple[SearchEllipsoid, ...]
    indexes: tuple[SampleIndex, ...]
    system: KrigingSystems | None
    method: str
    power: float


def prepare(
    samples: np.ndarray,
    values: np.ndarray,
    model: VariogramModel | None,
    search: SearchEllipsoid | Sequence[SearchEllipsoid],
    *,
    method: str = "ordinary",
    mean: float | None = None,
    block_size: Sequence[float] | None = None,
    discretisation: Sequence[int] = DISCRETISATION,
    hole_ids: np.ndarray | None = None,
    power: float = 2.0,
) -> PreparedSamples:
    """Check the inputs and prepare the samples; parameters as in :func:`krige`."""
    if method not in METHODS:
        raise ValueError(f"method must be one of {', '.join(METHODS)}; got {method!r}")
    samples = _as_points("samples", samples)
    values = np.asarray(values, dtype=np.float64).ravel()
    if len(values) != len(samples):
        raise ValueError(f"values has {len(values)} entries for {len(samples)} samples")
    if method in ("ordinary", "simple") and not isinstance(model, VariogramModel):
        raise ValueError(f"method {method!r} needs a VariogramModel")
    if method == "simple" and (mean is None or not np.isfinite(mean)):
        raise ValueError("simple kriging needs the known mean: pass mean=...")
    passes = (search,) if isinstance(search, SearchEllipsoid) else tuple(search)
    if not passes or not all(isinstance(s, SearchEllipsoid) for s in passes):
        raise ValueError("search must be a SearchEllipsoid or a non-empty list of them")
    if hole_ids is None:
        hole_codes = np.arange(len(samples), dtype=np.int64)
    else:
        hole_ids = np.asarray(hole_ids).ravel()
        if len(hole_ids) != len(samples):
            raise ValueError(f"hole_ids has {len(hole_ids)} entries for {len(samples)} samples")
        hole_codes = np.unique(hole_ids, return_inverse=True)[1].ravel().astype(np.int64)

    keep = np.isfinite(values)
    samples, values, hole_codes = samples[keep], values[keep], hole_codes[keep]
    # Subtract a local origin so projected coordinates (x ~ 5e5, y ~ 7e6) lose no precision.
    origin = np.floor(samples.min(axis=0)) if len(samples) else np.zeros(3)
    local, values, hole_codes, merged = _merge_duplicates(samples - origin, values, hole_codes)
    kriging = method in ("ordinary", "simple") and len(local) > 0
    system = (
        KrigingSystems(model, local, block_size, discretisation, method == "simple", mean)
        if kriging
        else None
    )
    indexes = (
        tuple(SampleIndex.build(s.to_unit_frame(local), s.max_samples) for s in passes)
        if len(local)
        else ()
    )
    return PreparedSamples(
        origin, local, values, hole_codes, merged, passes, indexes, system, method, power
    )


def estimate(
    samples: np.ndarray,
    values: np.ndarray,
    targets: np.ndarray,
    model: VariogramModel | None,
    search: SearchEllipsoid | Sequence[SearchEllipsoid],
    *,
    method: str = "ordinary",
    mean: float | None = None,
    block_size: Sequence[float] | None = None,
    discretisation: Sequence[int] = DISCRETISATION,
    hole_ids: np.ndarray | None = None,
    power: float = 2.0,
    chunk_size: int = 20_000,
    skip_coincident: bool = False,
    timings: dict[str, float] | None = None,
) -> dict[str, np.ndarray]:
    """Estimate at targets; arrays in, arrays out. See :func:`krige` for the parameters.

    skip_coincident : bool
        Never use a sample at the target's location (leave-one-out cross-validation).
    timings : dict, optional
        Seconds spent are added to its ``search`` and ``kriging`` entries.

    Returns
    -------
    dict of str to (m,) arrays
        Keys :data:`COLUMNS`; also ``merged_duplicates`` (0-d int array).
    """
    prepared = prepare(
        samples,
        values,
        model,
        search,
        method=method,
        mean=mean,
        block_size=block_size,
        discretisation=discretisation,
        hole_ids=hole_ids,
        power=power,
    )
    return estimate_prepared(
        prepared,
        targets,
        chunk_size=chunk_size,
        skip_coincident=skip_coincident,
        timings=timings,
    )


def estimate_prepared(
    prepared: PreparedSamples,
    targets: np.ndarray,
    *,
    chunk_size: int = 20_000,
    skip_coincident: bool = False,
    timings: dict[str, float] | None = None,
) -> dict[str, np.ndarray]:
    """:func:`estimate` with samples already prepared by :func:`prepare`.

    Parameters
    ----------
    prepared : PreparedSamples
    targets : (m, 3) float64, metres
    chunk_size, skip_coincident, timings : as in :func:`estimate`
    """
    targets = _as_points("targets", targets)
    if chunk_size < 1:
        raise ValueError(f"chunk_size must be >= 1, got {chunk_size}")
    local, values, hole_codes = prepared.local, prepared.values, prepared.hole_codes
    method, system = prepared.method, prepared.system
    m = len(targets)
    out = {c: np.full(m, np.nan) for c in COLUMNS}
    for c in ("n_samples", "n_holes", "search_pass"):
        out[c] = np.zeros(m, dtype=np.int64)
    out["ill_conditioned"] = np.zeros(m, dtype=bool)
    out["merged_duplicates"] = np.array(prepared.merged)
    if len(local) == 0 or m == 0:
        return out
    local_targets = targets - prepared.origin

    remaining = np.arange(m)
    for number, (s, index) in enumerate(
        zip(prepared.passes, prepared.indexes, strict=True), start=1
    ):
        if len(remaining) == 0:
            break
        not_found = []
        for start in range(0, len(remaining), chunk_size):
            rows = remaining[start : start + chunk_size]
            clock = time.perf_counter()
            nb = find_neighbours(
                index, local_targets[rows], s, hole_codes, skip_coincident=skip_coincident
            )
            clock = _lap(timings, "search", clock)
            not_found.append(rows[~nb.found])
            sel = np.flatnonzero(nb.found)
            if len(sel) == 0:
                continue
            tgt = rows[sel]
            idx, cnt, dist = nb.index[sel], nb.count[sel], nb.distance[sel]
            out["search_pass"][tgt] = number
            out["n_samples"][tgt] = cnt
            summary = {
                c: np.empty(len(tgt)) for c in ("mean_distance", "nearest", "inverse_distance")
            }
            holes_found = np.empty(len(tgt), dtype=np.int64)
            run_split(
                _neighbours.summarise_neighbours,
                len(tgt),
                idx,
                cnt.astype(np.int64),
                dist,
                local,
                np.ascontiguousarray(local_targets[tgt]),
                values,
                hole_codes,
                float(prepared.power),
                holes_found,
                summary["mean_distance"],
                summary["nearest"],
                summary["inverse_distance"],
            )
            out["n_holes"][tgt] = holes_found
            for c, v in summary.items():
                out[c][tgt] = v
            if system is None:
                out["estimate"][tgt] = out[method][tgt]
                continue
            res = system.solve(values, np.ascontiguousarray(local_targets[tgt]), idx, cnt)
            for c, v in res.items():
                out[c][tgt] = v
            if method != "ordinary":
                out["lagrange"][tgt] = np.nan
            _lap(timings, "kriging", clock)
        remaining = np.concatenate(not_found) if not_found else remaining[:0]
    return out


def krige(
    samples: np.ndarray,
    values: np.ndarray,
    targets: np.ndarray,
    model: VariogramModel | None,
    search: SearchEllipsoid | Sequence[SearchEllipsoid],
    *,
    method: str = "ordinary",
    mean: float | None = None,
    block_size: Sequence[float] | None = None,
    discretisation: Sequence[int] = DISCRETISATION,
    hole_ids: np.ndarray | None = None,
    power: float = 2.0,
    chunk_size: int = 20_000,
) -> pd.DataFrame:
    """Estimate grades at points or blocks from samples.

    Parameters
    ----------
    samples : (n, 3) float64, metres
        Sample (composite) locations; any projected coordinates.
    values : (n,) float64, grade units
        NaN values are ignored.
    targets : (m, 3) float64, metres
        Points, or block centres when ``block_size`` is given.
    model : VariogramModel or None
        Needed by ordinary and simple kriging.
    search : SearchEllipsoid or sequence of SearchEllipsoid
        One search, or passes tried in order; each target takes the first that succeeds.
    method : {"ordinary", "simple", "inverse_distance", "nearest"}
    mean : float, optional
        Known mean for simple kriging.
    block_size : (3,) float, metres, optional
        Block dimensions; None for point kriging.
    discretisation : (3,) int
        Regular points per block along x, y, z for block averages.
    hole_ids : (n,) array, optional
        Hole of each sample; counts holes and applies ``max_per_hole``.
    power : float
        Inverse-distance power (anisotropic distance in the search frame).
    chunk_size : int
        Targets per batch; bounds memory, never changes results.

    Returns
    -------
    pandas.DataFrame
        One row per target: ``estimate, variance, slope, efficiency, n_samples, n_holes,
        mean_distance (metres), lagrange, negative_weights (sum), negative_count, weight_sum,
        ill_conditioned, search_pass (0 = not estimated), nearest, inverse_distance``.
        Estimates are NaN where no pass finds enough samples.  ``attrs["merged_duplicates"]``
        counts samples merged because they shared a location.

    Notes
    -----
    Ordinary kriging solves ``sum_j l_j C_ij + mu = Cbar(x_i, V)``, ``sum l = 1``, with
    ``Cbar`` the mean covariance over the block's discretisation (nugget excluded);
    ``variance = Cbar(V, V) - sum l_i Cbar(x_i, V) - mu``;
    ``slope = l'cbar / l'C l``; ``efficiency = (Cbar(V,V) - variance) / Cbar(V,V)``.

    References
    ----------
    Journel, A. G. & Huijbregts, C. J. (1978), *Mining Geostatistics*, ch. V.
    Isaaks, E. H. & Srivastava, R. M. (1989), *An Introduction to Applied Geostatistics*,
    ch. 12-13.
    """
    import pandas as pd

    arrays = estimate(
        samples,
        values,
        targets,
        model,
        search,
        method=method,
        mean=mean,
        block_size=block_size,
        discretisation=discretisation,
        hole_ids=hole_ids,
        power=power,
        chunk_size=chunk_size,
    )
    merged = int(arrays.pop("merged_duplicates"))
    table = pd.DataFrame({c: arrays[c] for c in COLUMNS})
    table.attrs["merged_duplicates"] = merged
    return table
