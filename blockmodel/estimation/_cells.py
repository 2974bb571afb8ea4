"""A grid of cells over the samples in the search frame, for gathering every sample within
a distance of many centres at once in compiled code.

Samples are binned into cubic cells; a centre's candidates are the samples of the cells
its ball overlaps that lie inside the ball.  Compiled with numba, cached on disk, no
``fastmath``; the kernels release the GIL and take the range of centres they handle, for
:func:`blockmodel.estimation._threads.run_split`.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
from numba import njit

from blockmodel.estimation._threads import run_split

_CACHE = True
# most cells per sample (plus a floor): a tiny search ellipsoid over a wide deposit gets
# larger cells rather than a huge empty grid
_CELLS_PER_SAMPLE = 4
_MIN_CELLS = 100_000


@dataclass(frozen=True)
class SampleCells:
    """Samples binned into cubic cells.

    Attributes
    ----------
    points : (n, 3) float64, the samples (search frame)
    origin : (3,) float64, lower corner of cell (0, 0, 0)
    edge : float, cell edge
    dims : (3,) int64, cells along each axis
    starts : (cells + 1,) int64, cell c holds ``members[starts[c]:starts[c + 1]]``
    members : (n,) int64, sample indices by cell, increasing within a cell
    """

    points: np.ndarray
    origin: np.ndarray
    edge: float
    dims: np.ndarray
    starts: np.ndarray
    members: np.ndarray

    @classmethod
    def build(cls, points: np.ndarray, edge: float) -> SampleCells:
        """Bin ``points`` (n, 3) into cells of about ``edge`` (larger if the grid would
        otherwise exceed a few cells per sample)."""
        points = np.ascontiguousarray(points, dtype=np.float64)
        lo = points.min(axis=0)
        span = np.maximum(points.max(axis=0) - lo, 1e-9)
        cap = max(_CELLS_PER_SAMPLE * len(points), _MIN_CELLS)
        edge = max(float(edge), float(np.prod(span) / cap) ** (1.0 / 3.0))
        while np.prod(np.floor(span / edge) + 1) > cap:  # thin flat or linear data sets
            edge *= 1.25
        members, starts, dims = cell_table(points, edge)
        return cls(points, lo, edge, dims, starts, members)

    def within(self, centres: np.ndarray, radius: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
        """Every sample within ``radius[g]`` of ``centres[g]`` (g, 3).

        Returns
        -------
        offsets : (g + 1,) int64
            Centre g's samples are ``samples[offsets[g]:offsets[g + 1]]``.
        samples : (offsets[-1],) int64
            Sample indices, by cell.
        """
        centres = np.ascontiguousarray(centres, dtype=np.float64)
        radius = np.ascontiguousarray(radius, dtype=np.float64)
        grid = (self.origin, self.edge, self.dims, self.starts, self.members, self.points)
        counts = np.empty(len(centres), dtype=np.int64)
        run_split(_count_within, len(centres), centres, radius, *grid, counts)
        offsets = np.zeros(len(centres) + 1, dtype=np.int64)
        np.cumsum(counts, out=offsets[1:])
        samples = np.empty(offsets[-1], dtype=np.int64)
        run_split(_fill_within, len(centres), centres, radius, *grid, offsets, samples)
        return offsets, samples


def cell_table(points: np.ndarray, size: float) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """Points (n, 3) sorted into cubic cells of edge ``size`` from their lowest corner.

    Returns
    -------
    order : (n,) int64, point indices cell by cell, increasing within a cell
    start : (c + 1,) int64, cell c's points are ``order[start[c]:start[c + 1]]``
    shape : (3,) int64, cells along x, y, z (cell c = i + nx (j + ny k))
    """
    cell = np.floor((points - points.min(axis=0)) / size).astype(np.int64)
    shape = cell.max(axis=0) + 1
    flat = cell[:, 0] + shape[0] * (cell[:, 1] + shape[1] * cell[:, 2])
    order = np.argsort(flat, kind="stable").astype(np.int64)
    start = np.searchsorted(flat[order], np.arange(int(np.prod(shape)) + 1)).astype(np.int64)
    return order, start, shape.astype(np.int64)


@njit(cache=_CACHE, inline="always")
def _cell_range(c, r, origin, edge, n):
    lo = int(np.floor((c - r - origin) / edge))
    hi = int(np.floor((c + r - origin) / edge))
    return max(lo, 0), min(hi, n - 1)


@njit(cache=_CACHE, nogil=True)
def _count_within(first, last, centres, radius, origin, edge, dims, starts, members, points, out):
    for g in range(first, last):
        out[g] = _scan(g, centres, radius, origin, edge, dims, starts, members, points, out, -1)


@njit(cache=_CACHE, nogil=True)
def _fill_within(
    first, last, centres, radius, origin, edge, dims, starts, members, points, offsets, out
):
    for g in range(first, last):
        _scan(g, centres, radius, origin, edge, dims, starts, members, points, out, offsets[g])


@njit(cache=_CACHE, inline="always")
def _scan(g, centres, radius, origin, edge, dims, starts, members, points, out, at):
    """Count (``at < 0``) or write from ``out[at]`` the samples within ``radius[g]`` of
    centre g."""
    r = radius[g]
    cx, cy, cz = centres[g, 0], centres[g, 1], centres[g, 2]
    x0, x1 = _cell_range(cx, r, origin[0], edge, dims[0])
    y0, y1 = _cell_range(cy, r, origin[1], edge, dims[1])
    z0, z1 = _cell_range(cz, r, origin[2], edge, dims[2])
    r2 = r * r
    k = 0
    for iz in range(z0, z1 + 1):
        for iy in range(y0, y1 + 1):
            row = (iz * dims[1] + iy) * dims[0]
            for c in range(starts[row + x0], starts[row + x1 + 1]):
                s = members[c]
                dx = points[s, 0] - cx
                dy = points[s, 1] - cy
                dz = points[s, 2] - cz
                if dx * dx + dy * dy + dz * dz <= r2:
                    if at >= 0:
                        out[at + k] = s
                    k += 1
    return k
