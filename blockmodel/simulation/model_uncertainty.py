"""The uncertainty of a domain's normal-score variogram model, carried into the realisations.

The model is fitted to experimental variograms of a finite number of clustered, correlated
data: another drilling of the same deposit would give another nugget and other sills.
Realisations that all share one model agree on the share of short-scale variance, and so
on the tonnes above a cut-off, more closely than the data allow.

The spread of the fit is found by a parametric bootstrap (Efron & Tibshirani 1993, *An
Introduction to the Bootstrap*, ch. 6; recalled from memory), applied here to the
variogram fit: Gaussian values are drawn at the composites' own positions under the
fitted model (:func:`gaussian_at_points`), and the same fitting procedure is applied to
each draw.  The refits do not centre on the model
they were drawn from: the fit of a finite sample is biased (for long structures, the
sample's variance is below the sill, and the fit gives the short scales more of it).  The
model draws therefore take the refits' deviations from their own average and add them to
the fitted model (the bootstrap's bias correction, Efron & Tibshirani 1993, ch. 10;
:func:`centred_models`): they centre on the model fitted to the data and spread as the fit
does.  Each draw keeps the fitted model's structures, ranges and orientation; its nugget
and sills, as shares of the total, move.
"""

from __future__ import annotations

from collections.abc import Sequence

import numpy as np
import scipy.linalg

from blockmodel.variography.models import Structure, VariogramModel

__all__ = ["MOST_BOOTSTRAP_DATA", "centred_models", "gaussian_at_points", "sill_shares"]

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


def _match(st: Structure, structures: Sequence[Structure]) -> int | None:
    """Index of the first of ``structures`` with ``st``'s kind and ranges (relative
    difference below 1e-6), or None."""
    for k, r in enumerate(structures):
        if r.kind == st.kind and np.allclose(r.ranges, st.ranges, rtol=1e-6, atol=0.0):
            return k
    return None


def _shares(model: VariogramModel, structures: Sequence[Structure]) -> np.ndarray:
    """Nugget and the sill of each of ``structures`` in ``model``, as shares of ``model``'s
    total sill: (s + 1,); a structure ``model`` left out (its sill fitted to zero) has
    share 0."""
    out = np.zeros(len(structures) + 1)
    out[0] = model.nugget
    for st in model.structures:
        k = _match(st, structures)
        if k is None:
            raise ValueError("a refitted model's structure matches none of the fitted model's")
        out[k + 1] += st.sill
    return out / model.total_sill


def sill_shares(models: Sequence[VariogramModel]) -> tuple[list[Structure], np.ndarray]:
    """The structures of ``models`` (each kind and ranges once, in the order first met)
    and each model's nugget and sills over them as shares of its total sill:
    (len(models), s + 1), a structure a model lacks at 0."""
    structures: list[Structure] = []
    for st in (st for m in models for st in m.structures):
        if _match(st, structures) is None:
            structures.append(st)
    return structures, np.array([_shares(m, structures) for m in models])


def centred_models(
    reference: VariogramModel,
    refits: Sequence[VariogramModel],
    structures: Sequence[Structure] | None = None,
) -> list[VariogramModel]:
    """Draws of the model centred on ``reference``: per refit, the reference's nugget and
    sill shares plus the refit's deviation from the refits' average shares, negative shares
    set to zero and the shares rescaled to the reference's total sill.

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

    Returns
    -------
    list of VariogramModel
        One per refit, with structures of ``structures`` (their kinds, ranges and
        orientations); a structure whose share is zero is left out.
    """
    structures = reference.structures if structures is None else tuple(structures)
    shares = np.array([_shares(m, structures) for m in refits])
    drawn = _shares(reference, structures) + shares - shares.mean(axis=0)
    drawn = np.clip(drawn, 0.0, None)
    drawn *= reference.total_sill / drawn.sum(axis=1, keepdims=True)
    out = []
    for row in drawn:
        kept = [
            Structure(st.kind, s, st.ranges, st.orientation)
            for st, s in zip(structures, row[1:], strict=True)
            if s > 0.0
        ]
        out.append(VariogramModel(row[0], kept))
    return out
