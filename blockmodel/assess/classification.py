"""Resource classification proposals from numeric rules, with an optional clean-up of
isolated blocks (majority filter).  The labels are proposals: a Competent or Qualified
Person decides the classification."""

from __future__ import annotations

from collections.abc import Sequence

import numpy as np
import pandas as pd

from blockmodel.config.sections import ClassRule

__all__ = ["UNESTIMATED", "classify_blocks"]

UNESTIMATED = "Unestimated"


def classify_blocks(
    table: pd.DataFrame,
    grade: str,
    rules: Sequence[ClassRule],
    fallback: str = "Inferred",
    *,
    clean_up: bool = True,
) -> np.ndarray:
    """Class label of each block-model row.

    Parameters
    ----------
    table : DataFrame
        Block model with ``domain, i, j, k`` and the ``{grade}_pass, _holes, _samples,
        _distance, _slope`` columns.
    grade : str
        The grade whose estimation statistics drive the rules.
    rules : sequence of ClassRule
        Tried in order; the first a block satisfies gives its class.
    fallback : str
        Class of any other estimated block.
    clean_up : bool
        Give a block with no neighbour of its own class (among the 26 around it, same
        domain) the most common class of its neighbours.

    Returns
    -------
    (n,) object array of str; ``"Unestimated"`` where the grade was not estimated.
    """
    p = table[f"{grade}_pass"].to_numpy()
    holes = table[f"{grade}_holes"].to_numpy()
    samples = table[f"{grade}_samples"].to_numpy()
    dist = table[f"{grade}_distance"].to_numpy()
    slope = table[f"{grade}_slope"].to_numpy()
    estimated = (p > 0) & np.isfinite(table[grade].to_numpy(float))
    label = np.where(estimated, fallback, UNESTIMATED).astype(object)
    open_ = estimated.copy()
    for rule in rules:
        ok = (
            open_ & (p <= rule.max_pass) & (holes >= rule.min_holes) & (samples >= rule.min_samples)
        )
        if rule.max_distance is not None:
            ok &= dist <= rule.max_distance
        if rule.min_slope is not None:
            ok &= np.nan_to_num(slope, nan=-np.inf) >= rule.min_slope
        label[ok] = rule.name
        open_ &= ~ok
    if clean_up:
        label = _clean_up(table, label, [r.name for r in rules] + [fallback])
    return label


def _clean_up(table: pd.DataFrame, label: np.ndarray, classes: list[str]) -> np.ndarray:
    from scipy.ndimage import convolve

    out = label.copy()
    kernel = np.ones((3, 3, 3))
    kernel[1, 1, 1] = 0
    for _, rows in table.groupby("domain", sort=False).indices.items():
        ijk = table[["i", "j", "k"]].to_numpy()[rows]
        lo = ijk.min(axis=0)
        shape = tuple(ijk.max(axis=0) - lo + 1)
        pos = tuple((ijk - lo).T)
        counts = []
        for c in classes:
            grid = np.zeros(shape)
            grid[pos] = label[rows] == c
            counts.append(convolve(grid, kernel, mode="constant")[pos])
        counts = np.array(counts)  # (classes, rows)
        own = np.array([classes.index(x) if x in classes else -1 for x in label[rows]])
        valid = own >= 0
        own_count = np.where(valid, counts[np.maximum(own, 0), np.arange(len(rows))], 0)
        isolated = valid & (own_count == 0) & (counts.sum(axis=0) > 0)
        best = np.array(classes, dtype=object)[np.argmax(counts, axis=0)]
        sub = out[rows]
        sub[isolated] = best[isolated]
        out[rows] = sub
    return out
