"""Validation of an estimate: cross-validation, swath plots data and global bias."""

from __future__ import annotations

from collections.abc import Sequence
from dataclasses import dataclass

import numpy as np
import pandas as pd

from blockmodel.estimation.kriging import estimate
from blockmodel.estimation.search import SearchEllipsoid
from blockmodel.variography.models import VariogramModel

__all__ = ["CrossValidation", "cross_validate", "global_bias", "swath"]


@dataclass(frozen=True)
class CrossValidation:
    """Per sample: true value, estimate, kriging variance; and the summary statistics."""

    table: pd.DataFrame
    mean_error: float
    mean_squared_error: float
    mean_standardised_error: float
    variance_standardised_error: float
    correlation: float
    slope_true_on_estimate: float
    estimated: int
    total: int

    def summary(self) -> dict[str, float]:
        """The statistics as a flat dict (for a table row)."""
        return {
            k: getattr(self, k)
            for k in (
                "mean_error",
                "mean_squared_error",
                "mean_standardised_error",
                "variance_standardised_error",
                "correlation",
                "slope_true_on_estimate",
                "estimated",
                "total",
            )
        }


def cross_validate(
    samples: np.ndarray,
    values: np.ndarray,
    holes: np.ndarray,
    model: VariogramModel,
    search: SearchEllipsoid | Sequence[SearchEllipsoid],
    *,
    leave_out: str = "hole",
    method: str = "ordinary",
    mean: float | None = None,
) -> CrossValidation:
    """Re-estimate each sample from the others, leaving out its whole hole or itself.

    Parameters
    ----------
    samples : (n, 3) float64, metres
    values : (n,) float64
    holes : (n,) hole ids
    model : VariogramModel
    search : SearchEllipsoid or passes
    leave_out : {"hole", "sample"}
        Leave-one-hole-out (default: neighbours in the same hole are the easiest and most
        flattering) or leave-one-out.

    Returns
    -------
    CrossValidation
        Errors are estimate - true; the standardised error divides by the kriging
        standard deviation; the slope is the regression of true on estimate.
    """
    samples = np.asarray(samples, dtype=np.float64)
    values = np.asarray(values, dtype=np.float64)
    holes = np.asarray(holes)
    if leave_out not in ("hole", "sample"):
        raise ValueError(f"leave_out must be 'hole' or 'sample'; got {leave_out!r}")
    groups = holes if leave_out == "hole" else np.arange(len(values))
    est = np.full(len(values), np.nan)
    var = np.full(len(values), np.nan)
    if leave_out == "hole":
        for h in pd.unique(groups):
            out = groups == h
            res = estimate(
                samples[~out],
                values[~out],
                samples[out],
                model,
                search,
                method=method,
                mean=mean,
                hole_ids=holes[~out],
            )
            est[out], var[out] = res["estimate"], res["variance"]
    else:
        # leave-one-out in one pass: no target may use a sample at its own location
        res = estimate(
            samples,
            values,
            samples,
            model,
            search,
            method=method,
            mean=mean,
            hole_ids=holes,
            skip_coincident=True,
        )
        est, var = res["estimate"], res["variance"]
    table = pd.DataFrame({"true": values, "estimate": est, "variance": var, "hole": holes})
    ok = np.isfinite(est) & np.isfinite(var) & (var > 0)
    err = est[ok] - values[ok]
    std_err = err / np.sqrt(var[ok])
    e, t = est[ok], values[ok]
    nan = float("nan")
    spread = ok.sum() > 2 and np.ptp(e) > 0 and np.ptp(t) > 0
    slope = float(np.cov(t, e)[0, 1] / np.var(e, ddof=1)) if spread else nan
    return CrossValidation(
        table,
        float(err.mean()) if ok.any() else nan,
        float((err**2).mean()) if ok.any() else nan,
        float(std_err.mean()) if ok.any() else nan,
        float(std_err.var()) if ok.any() else nan,
        float(np.corrcoef(t, e)[0, 1]) if spread else nan,
        slope,
        int(ok.sum()),
        len(values),
    )


def swath(
    blocks: pd.DataFrame,
    composites: pd.DataFrame,
    grade: str,
    axis: str,
    width: float,
    weights: np.ndarray,
) -> pd.DataFrame:
    """Mean grades in slices along x, y or z.

    Parameters
    ----------
    blocks : DataFrame
        Block model rows of one domain (``tonnes``, grade, ``{grade}_nearest``).
    composites : DataFrame
        That domain's composites.
    axis : {"x", "y", "z"}
    width : float, metres
    weights : (n,) float64
        Declustering weights of the composites (their mean per slice is weighted).

    Returns
    -------
    DataFrame
        ``centre, kriged, nearest, composites, blocks, composite_count`` per slice.
    """
    edges_lo = min(blocks[axis].min(), composites[axis].min())
    b_bin = np.floor((blocks[axis].to_numpy() - edges_lo) / width).astype(int)
    c_bin = np.floor((composites[axis].to_numpy() - edges_lo) / width).astype(int)
    nb = int(max(b_bin.max(initial=0), c_bin.max(initial=0)) + 1)
    t = blocks["tonnes"].to_numpy(float)
    g = blocks[grade].to_numpy(float)
    nn = blocks[f"{grade}_nearest"].to_numpy(float)
    ok = np.isfinite(g)
    w = np.asarray(weights, dtype=np.float64)
    cv = composites[grade].to_numpy(float)
    cok = np.isfinite(cv)

    def wmean(bins, weights, vals):
        s = np.bincount(bins, weights=weights * vals, minlength=nb)
        n = np.bincount(bins, weights=weights, minlength=nb)
        with np.errstate(invalid="ignore", divide="ignore"):
            return s / n

    return pd.DataFrame(
        {
            "centre": edges_lo + (np.arange(nb) + 0.5) * width,
            "kriged": wmean(b_bin[ok], t[ok], g[ok]),
            "nearest": wmean(b_bin[ok], t[ok], nn[ok]),
            "composites": wmean(c_bin[cok], w[cok], cv[cok]),
            "blocks": np.bincount(b_bin[ok], minlength=nb),
            "composite_count": np.bincount(c_bin[cok], minlength=nb),
        }
    )


def global_bias(blocks: pd.DataFrame, grade: str) -> pd.DataFrame:
    """Tonnage-weighted kriged mean against the nearest-neighbour mean per domain (%)."""
    rows = []
    for dom, b in blocks.groupby("domain", sort=False):
        ok = np.isfinite(b[grade]) & np.isfinite(b[f"{grade}_nearest"])
        t = b.loc[ok, "tonnes"]
        k = float((t * b.loc[ok, grade]).sum() / t.sum())
        n = float((t * b.loc[ok, f"{grade}_nearest"]).sum() / t.sum())
        rows.append((dom, k, n, 100.0 * (k - n) / n))
    return pd.DataFrame(
        rows, columns=["domain", "kriged_mean", "nearest_mean", "difference_percent"]
    )
