"""Search neighbourhoods: oriented ellipsoids with sample, per-hole and per-octant limits.

Neighbours are found in the ellipsoid's isotropic frame, where the ellipsoid is the unit
sphere, from a grid of cells over the samples (compiled) and a KD-tree.
"""

from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np
from scipy.spatial import cKDTree

from blockmodel.estimation import _neighbours
from blockmodel.estimation._cells import SampleCells
from blockmodel.estimation._threads import run_split
from blockmodel.estimation.orientation import Orientation

__all__ = [
    "MAX_SAMPLES",
    "MIN_SAMPLES",
    "Neighbourhoods",
    "SampleIndex",
    "SearchEllipsoid",
    "find_neighbours",
]


MIN_SAMPLES = 4  # fewest samples to estimate, unless a search says otherwise
MAX_SAMPLES = 24  # most samples used, unless a search says otherwise


@dataclass(frozen=True)
class SearchEllipsoid:
    """An oriented search ellipsoid and the rules for choosing samples inside it.

    Parameters
    ----------
    ranges : (3,) float, metres
        Search radii along (major, semi, minor).
    orientation : Orientation
    min_samples : int
        Fewest samples needed to estimate; otherwise the target is left unestimated
        (or tried by the next pass).
    max_samples : int
        Most samples used, the nearest in anisotropic distance first.
    max_per_hole : int or None
        Most samples from any one hole (needs hole ids).
    max_per_octant : int or None
        Most samples from any octant of the ellipsoid.
    min_octants : int
        Fewest octants that must hold a sample (0 = no rule).
    """

    ranges: tuple[float, float, float]
    orientation: Orientation = field(default_factory=Orientation)
    min_samples: int = MIN_SAMPLES
    max_samples: int = MAX_SAMPLES
    max_per_hole: int | None = None
    max_per_octant: int | None = None
    min_octants: int = 0

    def __post_init__(self) -> None:
        ranges = np.broadcast_to(np.asarray(self.ranges, dtype=np.float64), (3,))
        if not np.all(np.isfinite(ranges)) or np.any(ranges <= 0):
            raise ValueError(
                f"SearchEllipsoid ranges must be three positive lengths, got {self.ranges!r}"
            )
        object.__setattr__(self, "ranges", tuple(float(a) for a in ranges))
        if not isinstance(self.orientation, Orientation):
            raise TypeError("SearchEllipsoid orientation must be a blockmodel.Orientation")
        if not 1 <= int(self.min_samples) <= int(self.max_samples):
            raise ValueError(
                f"SearchEllipsoid needs 1 <= min_samples <= max_samples, got "
                f"min_samples={self.min_samples}, max_samples={self.max_samples}"
            )
        for name in ("max_per_hole", "max_per_octant"):
            value = getattr(self, name)
            if value is not None and int(value) < 1:
                raise ValueError(f"SearchEllipsoid {name} must be None or >= 1, got {value}")
        if not 0 <= int(self.min_octants) <= 8:
            raise ValueError(
                f"SearchEllipsoid min_octants must lie in 0..8, got {self.min_octants}"
            )

    def transform(self) -> np.ndarray:
        """(3, 3) matrix taking metres to the frame where the ellipsoid is the unit sphere."""
        return np.diag(1.0 / np.asarray(self.ranges)) @ self.orientation.axes()

    def to_unit_frame(self, points: np.ndarray) -> np.ndarray:
        """Points (n, 3) in metres expressed in the frame where the ellipsoid is the unit sphere.

        Written element-wise rather than as a matrix product so that every row gets the same
        arithmetic whatever the batch size (BLAS kernels differ between sizes).
        """
        m = self.transform()
        p = np.asarray(points, dtype=np.float64)
        return np.column_stack(
            [p[:, 0] * m[r, 0] + p[:, 1] * m[r, 1] + p[:, 2] * m[r, 2] for r in range(3)]
        )

    @property
    def has_limits(self) -> bool:
        """True when per-hole or octant rules apply."""
        return bool(self.max_per_hole or self.max_per_octant or self.min_octants)


# cells of the search frame (where the ellipsoid is the unit sphere) whose targets share
# one list of candidates: without limits, an edge of this fraction of the distance that
# holds the samples wanted at the data's mean density (SampleIndex.reach: a search far
# wider than the data must not share one list among all targets; with candidates sorted
# from the centre, measured best between 0.5 and 0.6 on three benchmarks: 500 samples
# and 20,000 points, 15,000 and 100,000 composites with 196,000 and 200,000 blocks); with
# per-hole or octant limits, a fixed edge; and the edge of the cells the samples are
# binned into (at most that distance)
NEAREST_CELL = 0.5
GROUP_CELL = 0.25
SAMPLE_CELL = 0.25


@dataclass(frozen=True)
class SampleIndex:
    """The samples of one search in its unit frame, with a KD-tree and a grid of cells.

    Attributes
    ----------
    points : (n, 3) float64, ``search.to_unit_frame(samples)``
    tree : cKDTree on ``points``
    cells : SampleCells on ``points``
    reach : float
        Radius of a ball holding the most samples wanted at the samples' mean density over
        their bounding box (each side at least 1 % of the longest).
    """

    points: np.ndarray
    tree: cKDTree
    cells: SampleCells
    reach: float

    @classmethod
    def build(cls, points_t: np.ndarray, max_samples: int = MAX_SAMPLES) -> SampleIndex:
        """Index ``points_t`` (n, 3), samples already in the search's unit frame, for
        searches of up to ``max_samples``."""
        points_t = np.ascontiguousarray(points_t, dtype=np.float64)
        span = np.ptp(points_t, axis=0)
        volume = float(np.prod(np.maximum(span, 0.01 * span.max()))) if span.max() > 0 else 0.0
        reach = (3.0 * max_samples * volume / (4.0 * np.pi * len(points_t))) ** (1.0 / 3.0)
        reach = max(reach, 1e-9)
        cells = SampleCells.build(points_t, min(SAMPLE_CELL, reach))
        return cls(points_t, cKDTree(points_t), cells, reach)


@dataclass
class Neighbourhoods:
    """Chosen samples per target.

    Attributes
    ----------
    index : (m, k) int64
        Sample indices by increasing anisotropic distance, padded with ``n``.
    count : (m,) int64
    distance : (m, k) float64
        Anisotropic distance (1 = on the ellipsoid), inf where padded.
    found : (m,) bool
        Whether the search's minimum rules are met.
    """

    index: np.ndarray
    count: np.ndarray
    distance: np.ndarray
    found: np.ndarray


def find_neighbours(
    index: SampleIndex,
    targets: np.ndarray,
    search: SearchEllipsoid,
    hole_codes: np.ndarray | None,
    *,
    skip_coincident: bool = False,
) -> Neighbourhoods:
    """Find each target's neighbourhood: the samples inside its ellipsoid by increasing
    anisotropic distance (ties by sample index), under the search's limits.

    Targets in one small cell of the search frame share one list of candidates, gathered
    in compiled code; each target then picks from it.  Without per-hole or octant limits,
    the list of a cell with centre c and half-diagonal r holds every sample within
    ``d_k(c) + 2 r`` of c, ``d_k(c)`` being the distance of c's k-th nearest sample: a
    target t of the cell has its k nearest within ``d_k(c) + r`` of itself (triangle
    inequality), so within ``d_k(c) + 2 r`` of c.  With limits the list holds every sample
    within reach of the cell (``1 + r``); without limits the list is sorted by distance
    from c, so each target stops once no later candidate can be nearer.  Either way the
    result equals a brute-force search over all samples.

    Parameters
    ----------
    index : SampleIndex
        Samples in the search's unit frame (``search.to_unit_frame(local)``).
    targets : (m, 3) float64, local metres
    search : SearchEllipsoid
    hole_codes : (n,) int64 or None
        Integer code of each sample's hole; needed for ``max_per_hole``.
    skip_coincident : bool
        Never use a sample at the target's own location (leave-one-out; samples at one
        location are expected merged beforehand).

    Returns
    -------
    Neighbourhoods
    """
    samples_t = index.points
    n = len(samples_t)
    targets_t = np.ascontiguousarray(search.to_unit_frame(targets))
    m = len(targets_t)
    kmax = min(int(search.max_samples), n)
    limited = search.has_limits
    if search.max_per_hole and hole_codes is None:
        raise ValueError("SearchEllipsoid.max_per_hole needs hole_ids")
    edge = GROUP_CELL if limited else NEAREST_CELL * index.reach
    if m:  # at most 100,000 cells along an axis, so the cells' keys stay small
        edge = max(edge, float(np.ptp(targets_t, axis=0).max()) / 1e5)
    centres, group_of = _cells_of(targets_t, edge)
    half = edge * np.sqrt(3.0) / 2.0
    radius = np.full(len(centres), 1.0 + half)
    if not limited:
        k = min(kmax + (1 if skip_coincident else 0), n)
        d_k = index.tree.query(centres, k=[k], distance_upper_bound=1.0 + half, workers=-1)[0]
        radius = np.minimum(radius, d_k[:, 0] + 2.0 * half)
    offsets, candidates = index.cells.within(centres, radius + 1e-9)
    out = np.empty((m, kmax), dtype=np.int64)
    dist = np.empty((m, kmax))
    count = np.empty(m, dtype=np.int64)
    if not limited:
        centre_distance = np.empty(len(candidates))
        run_split(
            _neighbours.order_by_centre,
            len(centres),
            offsets,
            candidates,
            samples_t,
            np.ascontiguousarray(centres),
            centre_distance,
        )
        run_split(
            _neighbours.nearest_in_groups,
            m,
            group_of,
            offsets,
            candidates,
            samples_t,
            targets_t,
            bool(skip_coincident),
            centre_distance,
            float(half),
            out,
            dist,
            count,
        )
        return Neighbourhoods(out, count, dist, count >= search.min_samples)
    holes = np.zeros(n, dtype=np.int64) if hole_codes is None else hole_codes
    octants = np.empty(m, dtype=np.int64)
    run_split(
        _neighbours.select_in_groups,
        m,
        group_of,
        offsets,
        candidates,
        samples_t,
        targets_t,
        holes,
        int(holes.max()) + 1 if n else 0,
        int(search.max_per_hole or 0),
        int(search.max_per_octant or 0),
        bool(skip_coincident),
        out,
        dist,
        count,
        octants,
    )
    found = (count >= search.min_samples) & (octants >= search.min_octants)
    return Neighbourhoods(out, count, dist, found)


def _cells_of(points: np.ndarray, edge: float) -> tuple[np.ndarray, np.ndarray]:
    """The distinct cells of edge ``edge`` holding ``points`` (m, 3): their centres (g, 3)
    and each point's cell (m,) int64."""
    if len(points) == 0:
        return np.empty((0, 3)), np.empty(0, dtype=np.int64)
    key = np.floor(points / edge).astype(np.int64)
    low = key.min(axis=0)
    key -= low
    dims = key.max(axis=0) + 1
    flat = (key[:, 2] * dims[1] + key[:, 1]) * dims[0] + key[:, 0]
    cells, group_of = np.unique(flat, return_inverse=True)
    ijk = np.column_stack(
        [cells % dims[0], (cells // dims[0]) % dims[1], cells // (dims[0] * dims[1])]
    )
    return (ijk + low + 0.5) * edge, group_of.astype(np.int64)
