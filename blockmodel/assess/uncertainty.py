"""What an ensemble of simulated block grades says: per block (mean, variance, quantiles,
probability above cut-offs) and per group of blocks (the grade-tonnage curve of every
realisation, and its quantile bands)."""

from __future__ import annotations

import numpy as np

__all__ = ["block_summary", "quantile_bands", "realisation_curves"]


def block_summary(grades: np.ndarray, cutoffs: np.ndarray) -> dict[str, np.ndarray]:
    """Per block, over realisations.

    Parameters
    ----------
    grades : (b, r) float64
        Block grades of r realisations.
    cutoffs : (k,) float64, grade units

    Returns
    -------
    dict of (b,) float64
        ``mean`` (the e-type estimate), ``variance`` (conditional variance, divisor r - 1),
        ``p10``, ``p50``, ``p90`` and ``above_<cutoff>`` (share of realisations at or above).
    """
    out = {
        "mean": grades.mean(axis=1),
        "variance": grades.var(axis=1, ddof=1),
    }
    for q in (10, 50, 90):
        out[f"p{q}"] = np.percentile(grades, q, axis=1)
    for c in cutoffs:
        out[f"above_{c:g}"] = (grades >= c).mean(axis=1)
    return out


def realisation_curves(
    tonnes: np.ndarray, grades: np.ndarray, cutoffs: np.ndarray
) -> tuple[np.ndarray, np.ndarray]:
    """Tonnes and metal above each cut-off in each realisation.

    Parameters
    ----------
    tonnes : (b,) float64
    grades : (b, r) float64
    cutoffs : (k,) float64

    Returns
    -------
    tonnes : (r, k) float64
    metal : (r, k) float64, tonnes x grade units (grade = metal / tonnes)
    """
    t = np.empty((grades.shape[1], len(cutoffs)))
    m = np.empty_like(t)
    for n, c in enumerate(cutoffs):
        above = grades >= c if c > 0 else np.ones(grades.shape, dtype=bool)
        t[:, n] = tonnes @ above
        m[:, n] = tonnes @ np.where(above, grades, 0.0)
    return t, m


def quantile_bands(values: np.ndarray, quantiles=(10, 50, 90)) -> dict[str, np.ndarray]:
    """Quantiles over realisations (axis 0) and the coefficient of variation.

    Parameters
    ----------
    values : (r, k) float64
    quantiles : percentages

    Returns
    -------
    dict of (k,) float64: ``p10``, ``p50``, ``p90`` (as asked), ``mean`` and ``cv``
    (standard deviation over mean, divisor r - 1); NaN where every value is NaN (a grade
    above a cut-off no realisation reaches) or the mean is 0.
    """
    import warnings

    with warnings.catch_warnings():  # a cut-off above every realisation: NaN, said so
        warnings.simplefilter("ignore", RuntimeWarning)
        out = {f"p{q}": np.nanpercentile(values, q, axis=0) for q in quantiles}
        mean = np.nanmean(values, axis=0)
        sd = np.nanstd(values, axis=0, ddof=1)
        with np.errstate(invalid="ignore", divide="ignore"):
            out["mean"], out["cv"] = mean, np.where(mean != 0, sd / mean, np.nan)
    return out
