"""Comparison of an estimate with the known truth of the demo deposit (tests and the marked
section of the demo report only; the estimator never sees the truth)."""

from __future__ import annotations

import numpy as np
import pandas as pd

from blockmodel.model.grid import BlockGrid

__all__ = ["TruthMismatch", "compare_with_truth"]


class TruthMismatch(ValueError):
    """The truth's blocks are not the block model's blocks: no comparison is made."""


def compare_with_truth(
    blocks: pd.DataFrame, truth: pd.DataFrame, grid: BlockGrid, grade: str, domain: str
) -> dict[str, float]:
    """Figures of the estimate against the truth for one domain.

    Parameters
    ----------
    blocks : block model rows (``domain, i, j, k, tonnes, class``, the grade)
    truth : DataFrame ``x, y, z, domain, proportion, {grade}_true``
    grid : BlockGrid
    grade, domain : str

    Returns
    -------
    dict with the kriged and true tonnage-weighted means over the estimated blocks, their
    relative difference, the slope of the regression of true on kriged block grades for
    Indicated-or-better blocks, and tonnes above the median true block grade (kriged and
    true, both at block support).
    """
    b = blocks[(blocks["domain"] == domain) & np.isfinite(blocks[grade])].copy()
    t = truth[truth["domain"] == domain].copy()
    xyz = t[["x", "y", "z"]].to_numpy(float)
    flat = grid.block_of(xyz)
    inside = flat >= 0
    centres = grid.centres()[np.where(inside, flat, 0)]
    off = np.abs(xyz - centres).max(axis=1) > 1e-6 * max(grid.block_size)
    if not inside.all() or off[inside].any() or len(t) == 0:
        raise TruthMismatch(
            f"the truth's blocks of domain '{domain}' are not the block model's blocks "
            f"({int((~inside).sum())} outside the grid, {int(off[inside].sum())} off the block "
            "centres): no comparison made"
        )
    t["_flat"] = flat
    b["_flat"] = grid.flat_index(b["i"].to_numpy(), b["j"].to_numpy(), b["k"].to_numpy())
    m = b.merge(t[["_flat", "proportion", f"{grade}_true"]], on="_flat", suffixes=("", "_truth"))
    w = m["tonnes"].to_numpy(float)
    k = m[grade].to_numpy(float)
    z = m[f"{grade}_true"].to_numpy(float)
    kriged_mean = float(w @ k / w.sum())
    true_mean = float(w @ z / w.sum())
    good = (
        m["class"].isin(["Measured", "Indicated"]).to_numpy()
        if "class" in m
        else np.ones(len(m), bool)
    )
    slope = (
        float(np.cov(z[good], k[good])[0, 1] / np.var(k[good], ddof=1))
        if good.sum() > 2
        else float("nan")
    )
    density = float(b["density"].iloc[0]) if len(b) else 0.0
    t_tonnes = t["proportion"].to_numpy(float) * grid.block_volume * density
    cut = float(np.median(t[f"{grade}_true"]))
    true_above = float(t_tonnes[t[f"{grade}_true"].to_numpy() >= cut].sum())
    kriged_above = float(b["tonnes"].to_numpy()[b[grade].to_numpy() >= cut].sum())
    return {
        "kriged_mean": kriged_mean,
        "true_mean": true_mean,
        "mean_difference_percent": 100.0 * (kriged_mean - true_mean) / true_mean,
        "slope_true_on_kriged_indicated_or_better": slope,
        "blocks_indicated_or_better": int(good.sum()),
        "median_cutoff": cut,
        "tonnes_above_cutoff_kriged": kriged_above,
        "tonnes_above_cutoff_true": true_above,
        "tonnage_difference_percent": 100.0 * (kriged_above - true_above) / true_above
        if true_above
        else float("nan"),
    }
