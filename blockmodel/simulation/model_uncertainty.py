"""The uncertainty of a domain's normal-score variogram model, carried into the realisations.

The model is fitted to experimental variograms of a finite number of clustered, correlated
data: another drilling of the same deposit would give another nugget and other sills.
Realisations that all share one model agree on the share of short-scale variance, and so
on the tonnes above a cut-off, more closely than the data allow.

The spread of the fit is found by a parametric bootstrap (Efron & Tibshirani 1993, *An
Introduction to the Bootstrap*, ch. 6; recalled from memory), applied here to the
variogram fit: Gaussian values are drawn at the composites' own positions under the
fitted model (:func:`gaussian_at_points`), and the fit is applied to each draw, its
ranges free (the structures' kinds and orientation kept).  The refits do not centre on the
model they were drawn from: the fit of a finite sample is biased (for long structures, the
sample's variance is below the sill, and the fit gives the short scales more of it).  The
model draws therefore take the refits' deviations from their own average and add them to
the fitted model (the bootstrap's bias correction, Efron & Tibshirani 1993, ch. 10;
:func:`centred_models`): the nugget and sills as shares of the total, the ranges on a log
scale (their ratios).  The draws centre on the model fitted to the data and spread as the
fit does; each keeps the fitted structures' kinds and orientation.  A refit's structure
stands for the fitted structure of its kind whose ranges are nearest
(:func:`_counterparts`): the fit numbers its structures but may leave one out or swap two.
"""

from __future__ import annotations

import itertools
from collections.abc import Sequence

import numpy as np
import scipy.linalg

from blockmodel.variography.models import Structure, VariogramModel

__all__ = ["MOST_BOOTSTRAP_DATA", "centred_models", "draws_spread", "gaussian_at_points"]

# the covariance matrix of more data than this (12000: 1.2 GB) is not factorised
MOST_BOOTSTRAP_DATA = 12000
# added to the covariance matrix's diagonal, as a share of the total sill, so that data a
# few millimetres apart keep it positive definite
_JITTER = 1e-9
_ROWS = 512


def gaussian_at_points(
    points: np.ndarray, model: VariogramModel, draws: int, rng: np.random.Generator
) -> np.ndarray:
    """Zero-mean Gaussian values with ``model``'s covariance at ``points``, exactly (a
    Cholesky factor of their covariance matrix).

    Parameters
    ----------
    points : (n, 3) float64, metres
        Distinct positions (the covariance at zero separation includes the nugget).
    model : VariogramModel
    draws : int
        Independent draws.
    rng : numpy.random.Generator

    Returns
    -------
    (draws, n) float64

    Raises
    ------
    ValueError
        More than :data:`MOST_BOOTSTRAP_DATA` points.
    """
    points = np.asarray(points, dtype=np.float64)
    n = len(points)
    if n > MOST_BOOTSTRAP_DATA:
        raise ValueError(
            f"{n} data: the bootstrap of the variogram factorises their covariance matrix, "
            f"at most {MOST_BOOTSTRAP_DATA} data"
        )
    cov = np.empty((n, n))
    for first in range(0, n, _ROWS):
        rows = points[first : first + _ROWS]
        h = (rows[:, None, :] - points[None, :, :]).reshape(-1, 3)
        cov[first : first + len(rows)] = model.covariance(h).reshape(len(rows), n)
    cov[np.diag_indices(n)] += _JITTER * model.total_sill
    factor = scipy.linalg.cholesky(cov, lower=True, overwrite_a=True, check_finite=False)
    return (factor @ rng.standard_normal((n, draws))).T


def _counterparts(model: VariogramModel, structures: Sequence[Structure]) -> list[int]:
    """Index among ``structures`` of the counterpart of each of ``model``'s structures: of
    the same kind, each taken once, the pairing whose ranges differ least (the sum of
    their absolute log ratios over the three axes).  A fit leaves out a structure whose
    sill it fits to zero, so some of ``structures`` may be left unpaired; structures with
    ``model``'s own ranges pair with themselves."""
    out = [-1] * len(model.structures)
    for kind in dict.fromkeys(st.kind for st in model.structures):
        mine = [k for k, st in enumerate(model.structures) if st.kind == kind]
        theirs = [k for k, st in enumerate(structures) if st.kind == kind]
        if len(mine) > len(theirs):
            raise ValueError("a refitted model's structure matches none of the fitted model's")
        log_mine = np.log([model.structures[k].ranges for k in mine])
        best = min(
            itertools.permutations(theirs, len(mine)),
            key=lambda pick: float(
                np.abs(log_mine - np.log([structures[k].ranges for k in pick])).sum()
            ),
        )
        for k, j in zip(mine, best, strict=True):
            out[k] = j
    return out


def _shares(model: VariogramModel, structures: Sequence[Structure]) -> np.ndarray:
    """Nugget and the sill of each of ``structures`` in ``model`` (its counterparts,
    :func:`_counterparts`), as shares of ``model``'s total sill: (s + 1,); a structure
    ``model`` left out (its sill fitted to zero) has share 0."""
    out = np.zeros(len(structures) + 1)
    out[0] = model.nugget
    for st, k in zip(model.structures, _counterparts(model, structures), strict=True):
        out[k + 1] += st.sill
    return out / model.total_sill


def _log_ranges(model: VariogramModel, structures: Sequence[Structure]) -> np.ndarray:
    """Logarithms of the ranges of ``model``'s counterpart of each of ``structures``:
    (s, 3), NaN for a structure ``model`` left out."""
    out = np.full((len(structures), 3), np.nan)
    for st, k in zip(model.structures, _counterparts(model, structures), strict=True):
        out[k] = np.log(st.ranges)
    return out


def draws_spread(
    models: Sequence[VariogramModel],
) -> tuple[list[Structure], np.ndarray, np.ndarray]:
    """The structures the draws ``models`` hold between them (per kind, as many as the
    draw with most of that kind; each stands for its counterparts, :func:`_counterparts`)
    and each draw's nugget and sills over them as shares of its total sill, and its
    ranges.

    Returns
    -------
    structures : list of Structure
    shares : (len(models), s + 1) float64
        Nugget first; a structure a draw lacks at 0.
    ranges : (len(models), s, 3) float64, metres
        Major, semi, minor; NaN for a structure a draw lacks.
    """
    structures: list[Structure] = []
    for m in models:
        for kind in dict.fromkeys(st.kind for st in m.structures):
            own = [st for st in m.structures if st.kind == kind]
            extra = len(own) - sum(st.kind == kind for st in structures)
            structures += own[len(own) - extra :] if extra > 0 else []
    shares = np.array([_shares(m, structures) for m in models])
    ranges = np.exp(np.array([_log_ranges(m, structures) for m in models]))
    return structures, shares, ranges


def centred_models(
    reference: VariogramModel,
    refits: Sequence[VariogramModel],
    structures: Sequence[Structure] | None = None,
    *,
    longest: float | None = None,
) -> list[VariogramModel]:
    """Draws of the model centred on ``reference``: per refit, the reference's nugget and
    sill shares plus the refit's deviation from the refits' average shares, negative shares
    set to zero and the shares rescaled to the reference's total sill; each structure's
    ranges times the ratio of its counterpart's in the refit to their geometric mean over
    the refits that kept it, made non-increasing from major to minor and at most
    ``longest`` (a structure whose ranges all refits share stays as it is).

    Parameters
    ----------
    reference : VariogramModel
        The model fitted to the data.
    refits : sequence of VariogramModel
        The same fit applied to draws from ``reference``.
    structures : sequence of Structure, optional
        Every structure the fit may keep (kind, ranges, orientation; a fit leaves out a
        structure whose sill it fits to zero, so the reference and each refit hold some of
        them); default: the reference's.
    longest : float, optional, metres
        No range is drawn beyond it (the fit's own bound, the data's extent) unless the
        structure's fitted range is longer, where that is the bound.

    Returns
    -------
    list of VariogramModel
        One per refit, with structures of ``structures`` (their kinds and orientations,
        their ranges drawn); a structure whose share is zero is left out.
    """
    structures = reference.structures if structures is None else tuple(structures)
    shares = np.array([_shares(m, structures) for m in refits])
    drawn = _shares(reference, structures) + shares - shares.mean(axis=0)
    drawn = np.clip(drawn, 0.0, None)
    drawn *= reference.total_sill / drawn.sum(axis=1, keepdims=True)
    logs = np.array([_log_ranges(m, structures) for m in refits])
    ratios = np.ones_like(logs)  # drawn over fitted ranges
    for k in range(len(structures)):
        have = np.isfinite(logs[:, k, 0])
        own = logs[have, k]
        if have.any():
            moved = np.where(np.ptp(own, axis=0) > 0, own - own.mean(axis=0), 0.0)
            ratios[have, k] = np.exp(moved)
    out = []
    for row, ratio in zip(drawn, ratios, strict=True):
        kept = []
        for st, s, r in zip(structures, row[1:], ratio, strict=True):
            if s <= 0.0:
                continue
            ranges = st.ranges
            if np.any(r != 1.0):  # moved: kept in order and within the bound
                ranges = np.minimum.accumulate(np.multiply(st.ranges, r))
                if longest is not None:
                    ranges = np.minimum(ranges, max(longest, st.ranges[0]))
                ranges = tuple(ranges.tolist())
            kept.append(Structure(st.kind, s, ranges, st.orientation))
        out.append(VariogramModel(row[0], kept))
    return out
