"""Kriging neighbourhood analysis on arrays: the drill spacing, the representative test
blocks, and where the slope of regression and the kriging efficiency stop improving.

The practice (Vann, J., Jackson, S. & Bertoli, O. (2003), Quantitative kriging
neighbourhood analysis for the mining geologist, 5th International Mining Geology
Conference, AusIMM) is to krige a few representative blocks under a range of search
and block settings, one setting at a time, and read the slope of regression of true on
estimated block grades, the kriging efficiency, the kriging variance, the negative weights
and, for simple kriging, the weight left to the mean.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
from scipy.spatial import cKDTree

from blockmodel.estimation.orientation import Orientation

__all__ = [
    "ADEQUATE_FRACTION",
    "TestBlock",
    "adequate_index",
    "choose_test_blocks",
    "drill_spacing",
]

ADEQUATE_FRACTION = 0.05  # a setting is adequate within this fraction of the best figure


def drill_spacing(points: np.ndarray, holes: np.ndarray, orientation: Orientation) -> float:
    """Median distance from each hole to its nearest neighbour hole, in the plane of the
    major and semi axes of ``orientation`` (plan view when the minor axis is vertical):
    each hole is placed at the mean of its samples (where it crosses the domain).

    Parameters
    ----------
    points : (n, 3) float64, metres
        The domain's samples.
    holes : (n,) hole ids
    orientation : Orientation
        The plane of continuity (its major and semi axes).

    Returns
    -------
    float, metres; NaN with fewer than two holes at different places.
    """
    codes, inverse = np.unique(holes, return_inverse=True)
    if len(codes) < 2:
        return float("nan")
    inverse = inverse.ravel()
    counts = np.bincount(inverse)
    centre = np.column_stack(
        [np.bincount(inverse, weights=points[:, a]) / counts for a in range(3)]
    )
    in_plane = centre @ orientation.axes()[:2].T
    dist, _ = cKDTree(in_plane).query(in_plane, k=min(len(codes), 8))
    dist[dist <= 1e-6] = np.inf  # holes at one place (exact twins) are one station
    nearest = dist.min(axis=1)
    nearest = nearest[np.isfinite(nearest)]
    return float(np.median(nearest)) if len(nearest) else float("nan")


@dataclass(frozen=True)
class TestBlock:
    """A block the analysis kriges under each setting.

    Attributes
    ----------
    label : str
        ``well informed``, ``typical``, ``poorly informed`` or ``given N``.
    centre : (3,) float64, metres
    holes_near : int
        Holes with a sample within one drill spacing of the centre.
    nearest : float, metres
        Distance to the nearest sample.
    """

    label: str
    centre: np.ndarray
    holes_near: int
    nearest: float


def choose_test_blocks(
    centres: np.ndarray, points: np.ndarray, holes: np.ndarray, spacing: float
) -> list[TestBlock]:
    """Three representative blocks of a domain: the well-informed block (most holes with a
    sample within one drill spacing; ties to the nearest sample), a typical block (its
    nearest sample at the median distance over the domain's blocks) and a poorly informed
    block (its nearest sample at the 95th percentile of that distance: an edge or wide
    spacing, but not the farthest extrapolation).

    Parameters
    ----------
    centres : (m, 3) float64, metres
        Centres of the domain's blocks.
    points : (n, 3) float64, metres
        The domain's samples.
    holes : (n,) hole ids
    spacing : float, metres
    """
    tree = cKDTree(points)
    nearest = tree.query(centres)[0]
    codes = np.unique(holes, return_inverse=True)[1].ravel()
    near_lists = tree.query_ball_point(centres, r=spacing)
    holes_near = np.array([len(np.unique(codes[n])) for n in near_lists], dtype=np.int64)
    best = np.lexsort((nearest, -holes_near))[0]
    typical = int(np.argmin(np.abs(nearest - np.median(nearest))))
    poor = int(np.argmin(np.abs(nearest - np.percentile(nearest, 95))))
    return [
        TestBlock(label, centres[i], int(holes_near[i]), float(nearest[i]))
        for label, i in (("well informed", best), ("typical", typical), ("poorly informed", poor))
    ]


def adequate_index(
    slope: np.ndarray, efficiency: np.ndarray, *, fraction: float = ADEQUATE_FRACTION
) -> int | None:
    """Index of the first setting (settings in increasing order) whose slope and
    efficiency both lie within ``fraction`` of their best over the sweep (a slope above 1
    counts as 1, the ideal); when no setting does both, the first with the best sum of the
    two; None when no setting was estimated.

    Parameters
    ----------
    slope, efficiency : (k,) float64, NaN where the block was not estimated
    """
    slope = np.minimum(slope, 1.0)
    ok = np.isfinite(slope) & np.isfinite(efficiency)
    if not ok.any():
        return None
    s_best, e_best = np.nanmax(slope[ok]), np.nanmax(efficiency[ok])
    good = (
        ok
        & (slope >= s_best - fraction * abs(s_best))
        & (efficiency >= e_best - fraction * abs(e_best))
    )
    if good.any():
        return int(np.flatnonzero(good)[0])
    return int(np.nanargmax(np.where(ok, slope + efficiency, -np.inf)))
