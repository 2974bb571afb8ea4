"""Search neighbourhoods: oriented ellipsoids with sample, per-hole and per-octant limits.

Neighbours are found on a KD-tree built in the ellipsoid's isotropic frame, where the
ellipsoid is the unit sphere.
"""

from __future__ import annotations

import itertools
from dataclasses import dataclass, field

import numpy as np
from scipy.spatial import cKDTree

from blockmodel.estimation import _neighbours
from blockmodel.estimation._threads import run_split
from blockmodel.estimation.orientation import Orientation

__all__ = ["MAX_SAMPLES", "MIN_SAMPLES", "Neighbourhoods", "SearchEllipsoid", "find_neighbours"]


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


# edge of the cells (search frame, where the ellipsoid is the unit sphere) whose targets
# share one candidate list under per-hole or octant limits
GROUP_CELL = 0.25


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
    tree: cKDTree,
    samples_t: np.ndarray,
    targets: np.ndarray,
    search: SearchEllipsoid,
    hole_codes: np.ndarray | None,
    *,
    skip_coincident: bool = False,
) -> Neighbourhoods:
    """Find each target's neighbourhood.

    Parameters
    ----------
    tree : cKDTree
        Built on ``samples_t``.
    samples_t : (n, 3) float64
        Samples in the search's unit frame (``search.to_unit_frame(local)``).
    targets : (m, 3) float64, local metres
    search : SearchEllipsoid
    hole_codes : (n,) int64 or None
        Integer code of each sample's hole; needed for ``max_per_hole``.
    skip_coincident : bool
        Never use a sample at the target's own location (leave-one-out).

    Returns
    -------
    Neighbourhoods
    """
    n = len(samples_t)
    targets_t = search.to_unit_frame(targets)
    kmax = min(int(search.max_samples), n)
    if not search.has_limits:
        dist, idx, _ = _query(tree, targets_t, kmax, n, skip_coincident)
        count = np.sum(idx < n, axis=1)
        return Neighbourhoods(idx, count, dist, count >= search.min_samples)
    if search.max_per_hole and hole_codes is None:
        raise ValueError("SearchEllipsoid.max_per_hole needs hole_ids")
    holes = np.zeros(n, dtype=np.int64) if hole_codes is None else hole_codes
    out = np.empty((len(targets), kmax), dtype=np.int64)
    count = np.empty(len(targets), dtype=np.int64)
    octants = np.empty(len(targets), dtype=np.int64)
    # Targets in one cell of the search frame share one list of candidates: every sample
    # within reach of any point of the cell; each target then takes, in compiled code, the
    # candidates inside its own ellipsoid in distance order and applies the limits.  The
    # result equals applying the limits to all samples inside, in distance order.
    key = np.floor(targets_t / GROUP_CELL).astype(np.int64)
    cells, group_of = np.unique(key, axis=0, return_inverse=True)
    reach = 1.0 + 1e-9 + GROUP_CELL * np.sqrt(3.0) / 2.0
    lists = tree.query_ball_point((cells + 0.5) * GROUP_CELL, reach, return_sorted=True)
    offsets = np.zeros(len(lists) + 1, dtype=np.int64)
    offsets[1:] = np.cumsum([len(x) for x in lists])
    candidates = np.fromiter(
        itertools.chain.from_iterable(lists), dtype=np.int64, count=int(offsets[-1])
    )
    run_split(
        _neighbours.select_in_groups,
        len(targets_t),
        group_of.ravel().astype(np.int64),
        offsets,
        candidates,
        samples_t,
        np.ascontiguousarray(targets_t),
        holes,
        kmax,
        int(search.max_per_hole or 0),
        int(search.max_per_octant or 0),
        bool(skip_coincident),
        out,
        count,
        octants,
    )
    chosen = np.minimum(out, n - 1)
    d = np.linalg.norm(samples_t[chosen] - targets_t[:, None, :], axis=2)
    d[out >= n] = np.inf
    found = (count >= search.min_samples) & (octants >= search.min_octants)
    return Neighbourhoods(out, count, d, found)


def _query(
    tree: cKDTree, targets_t: np.ndarray, q: int, n: int, skip_coincident: bool
) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """The ``q`` nearest samples inside the unit sphere: (m, q) distances and indices by
    increasing distance, padded with inf and ``n``, coincident samples dropped on request;
    and (m,) whether the query came back full (more samples may lie inside)."""
    extra = 1 if skip_coincident and q < n else 0
    dist, idx = tree.query(targets_t, k=q + extra, distance_upper_bound=1.0 + 1e-12, workers=-1)
    dist = np.asarray(dist).reshape(len(targets_t), q + extra)
    idx = np.asarray(idx, dtype=np.int64).reshape(len(targets_t), q + extra)
    full = idx[:, -1] < n
    if skip_coincident:
        drop = dist <= 1e-12
        idx[drop], dist[drop] = n, np.inf
        order = np.argsort(drop, axis=1, kind="stable")[:, :q]
        idx = np.take_along_axis(idx, order, axis=1)
        dist = np.take_along_axis(dist, order, axis=1)
    return dist, idx, full
