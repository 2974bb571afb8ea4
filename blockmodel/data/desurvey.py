"""Desurveying by minimum curvature: positions at any downhole depth along the arcs.

Each survey interval is a circular arc joining the station directions; positions between
stations follow the arc (spherical interpolation of the direction), not a straight chord.

References
----------
Taylor, H. L. & Mason, C. M. (1972), A systematic approach to well surveying calculations,
SPE Journal 12(6).
"""

from __future__ import annotations

import numpy as np

__all__ = ["direction", "positions_along_hole"]


def direction(azimuth: np.ndarray, dip: np.ndarray) -> np.ndarray:
    """Unit direction (east, north, up) of a hole at azimuth and dip (degrees, dip < 0 down).

    Returns
    -------
    (n, 3) float64
    """
    az = np.radians(np.asarray(azimuth, dtype=np.float64))
    dp = np.radians(np.asarray(dip, dtype=np.float64))
    return np.column_stack([np.cos(dp) * np.sin(az), np.cos(dp) * np.cos(az), np.sin(dp)])


def positions_along_hole(
    collar: np.ndarray,
    station_depths: np.ndarray,
    azimuths: np.ndarray,
    dips: np.ndarray,
    depths: np.ndarray,
) -> np.ndarray:
    """Positions at downhole depths by minimum curvature.

    Parameters
    ----------
    collar : (3,) float64, metres
    station_depths : (s,) float64, metres, strictly increasing
    azimuths, dips : (s,) float64, degrees (dip negative downward)
    depths : (n,) float64, metres downhole

    Returns
    -------
    (n, 3) float64, metres (east, north, elevation)

    Notes
    -----
    Over an arc of length L with dogleg angle b between unit directions t1 and t2 the
    direction turns at a constant rate (spherical interpolation), so the position a
    fraction σ = s/L along it is the integral of that direction:

    ``p1 + L/(b sin b) · 2 sin(bσ/2) · [sin(b(1 − σ/2)) t1 + sin(bσ/2) t2]``,

    which at σ = 1 is the minimum-curvature step ``L/2 (t1 + t2) · 2/b tan(b/2)``.  It is
    evaluated with ``sinc(x) = sin(x)/x`` as
    ``L σ sinc(bσ/2)/sinc(b) · [(1 − σ/2) sinc(b(1 − σ/2)) t1 + σ/2 sinc(bσ/2) t2]``,
    which has no cancellation as b → 0, and b is found from the half-angle formula
    ``b = 2 atan2(|t1 − t2|, |t1 + t2|)``, exact for tiny angles where ``arccos(t1·t2)``
    is not.  Above the first station and below the last, the hole is straight.
    """
    sd = np.asarray(station_depths, dtype=np.float64)
    t = direction(azimuths, dips)
    if sd[0] > 0:  # extend the first station to the collar
        sd = np.concatenate([[0.0], sd])
        t = np.vstack([t[:1], t])
    lengths = np.diff(sd)
    # station positions
    pos = np.zeros((len(sd), 3))
    pos[0] = collar
    for k in range(1, len(sd)):
        pos[k] = pos[k - 1] + _arc(t[k - 1], t[k], lengths[k - 1], np.ones(1))[0]
    depths = np.asarray(depths, dtype=np.float64)
    seg = np.clip(np.searchsorted(sd, depths, side="right") - 1, 0, len(sd) - 1)
    out = np.empty((len(depths), 3))
    last = seg == len(sd) - 1
    out[last] = pos[-1] + (depths[last] - sd[-1])[:, None] * t[-1]
    for k in np.unique(seg[~last]):
        rows = np.flatnonzero(seg == k)
        frac = (depths[rows] - sd[k]) / lengths[k]
        out[rows] = pos[k] + _arc(t[k], t[k + 1], lengths[k], frac)
    return out


def _sinc(x: np.ndarray | float) -> np.ndarray:
    """sin(x) / x, 1 at x = 0."""
    return np.sinc(np.asarray(x) / np.pi)


def _arc(t1: np.ndarray, t2: np.ndarray, length: float, frac: np.ndarray) -> np.ndarray:
    """Offsets (len(frac), 3) from the start of a minimum-curvature arc at fractions of it."""
    b = 2.0 * np.arctan2(np.linalg.norm(t1 - t2), np.linalg.norm(t1 + t2))
    frac = np.asarray(frac, dtype=np.float64)
    scale = length * frac * _sinc(b * frac / 2) / _sinc(b)
    w1 = (1 - frac / 2) * _sinc(b * (1 - frac / 2))
    w2 = frac / 2 * _sinc(b * frac / 2)
    return scale[:, None] * (w1[:, None] * t1 + w2[:, None] * t2)
