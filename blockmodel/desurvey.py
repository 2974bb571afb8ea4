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
    Over an arc of length L with dogleg angle b between unit directions t1 and t2, the
    position a distance s along it is
    ``p1 + L / (b sin b) * [(cos(b - b s/L) - cos b) t1 + (1 - cos(b s/L)) t2]``,
    which at s = L is the minimum-curvature step ``L/2 (t1 + t2) * 2/b tan(b/2)``.
    Above the first station and below the last, the hole is straight.
    """
    sd = np.asarray(station_depths, dtype=np.float64)
    t = direction(azimuths, dips)
    if sd[0] > 0:  # extend the first station to the collar
        sd = np.concatenate([[0.0], sd])
        t = np.vstack([t[:1], t])
    # station positions
    pos = np.zeros((len(sd), 3))
    pos[0] = collar
    for k in range(1, len(sd)):
        pos[k] = pos[k - 1] + _arc(t[k - 1], t[k], sd[k] - sd[k - 1], sd[k] - sd[k - 1])
    depths = np.asarray(depths, dtype=np.float64)
    seg = np.clip(np.searchsorted(sd, depths, side="right") - 1, 0, len(sd) - 1)
    out = np.empty((len(depths), 3))
    for n, (d, k) in enumerate(zip(depths, seg, strict=True)):
        if k == len(sd) - 1:
            out[n] = pos[k] + t[k] * (d - sd[k])
        else:
            out[n] = pos[k] + _arc(t[k], t[k + 1], sd[k + 1] - sd[k], d - sd[k])
    return out


def _arc(t1: np.ndarray, t2: np.ndarray, length: float, s: float) -> np.ndarray:
    cos_b = float(np.clip(t1 @ t2, -1.0, 1.0))
    b = np.arccos(cos_b)
    if b < 1e-9 or length <= 0:
        return s * (t1 + (t2 - t1) * (s / length if length > 0 else 0.0) * 0.5)
    f = b * s / length
    return length / (b * np.sin(b)) * ((np.cos(b - f) - cos_b) * t1 + (1.0 - np.cos(f)) * t2)
