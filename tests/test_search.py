"""The neighbour search with per-hole and octant limits equals a brute-force selection.

Oracle (common practice for moving-neighbourhood rules): take every sample inside the
ellipsoid, sort by anisotropic distance, accept each in turn unless its hole or its octant
is already full, stop at ``max_samples``.
"""

from __future__ import annotations

import numpy as np
import pytest
from scipy.spatial import cKDTree

from blockmodel.estimation.orientation import Orientation
from blockmodel.estimation.search import SearchEllipsoid, find_neighbours


def _drilling(rng, holes=40, per_hole=25):
    """Random inclined holes with samples every 2 m (clustered along each hole)."""
    pts, hole_of = [], []
    for h in range(holes):
        collar = rng.uniform([0, 0, 0], [200, 200, 20])
        az, dip = np.radians(rng.uniform(0, 360)), np.radians(rng.uniform(-90, -45))
        t = np.array([np.cos(dip) * np.sin(az), np.cos(dip) * np.cos(az), np.sin(dip)])
        pts.append(collar + np.arange(per_hole)[:, None] * 2.0 * t)
        hole_of += [h] * per_hole
    return np.vstack(pts), np.asarray(hole_of, dtype=np.int64)


def _brute_force(samples, hole_of, target, search):
    axes = search.orientation.axes()  # rows: major, semi, minor
    local = ((samples - target) @ axes.T) / np.asarray(search.ranges)
    dist = np.linalg.norm(local, axis=1)
    order = np.argsort(dist, kind="stable")
    order = order[dist[order] <= 1.0]
    per_hole, per_octant, chosen = {}, {}, []
    for s in order:
        octant = tuple(local[s] < 0)
        if search.max_per_hole and per_hole.get(hole_of[s], 0) >= search.max_per_hole:
            continue
        if search.max_per_octant and per_octant.get(octant, 0) >= search.max_per_octant:
            continue
        per_hole[hole_of[s]] = per_hole.get(hole_of[s], 0) + 1
        per_octant[octant] = per_octant.get(octant, 0) + 1
        chosen.append(s)
        if len(chosen) == search.max_samples:
            break
    return chosen, len(per_octant)


@pytest.mark.parametrize(
    "max_per_hole, max_per_octant, min_octants",
    [(2, None, 0), (1, None, 0), (None, 2, 0), (2, 2, 4), (3, 1, 0)],
)
def test_limited_search_equals_brute_force(rng, max_per_hole, max_per_octant, min_octants):
    samples, hole_of = _drilling(rng)
    targets = rng.uniform([0, 0, -40], [200, 200, 20], size=(300, 3))
    search = SearchEllipsoid(
        (120.0, 80.0, 40.0),
        Orientation(30, 10, 20),
        min_samples=4,
        max_samples=16,
        max_per_hole=max_per_hole,
        max_per_octant=max_per_octant,
        min_octants=min_octants,
    )
    samples_t = search.to_unit_frame(samples)
    nb = find_neighbours(cKDTree(samples_t), samples_t, targets, search, hole_of)
    for t, target in enumerate(targets):
        chosen, octants = _brute_force(samples, hole_of, target, search)
        got = nb.index[t, : nb.count[t]].tolist()
        assert got == chosen, t
        assert nb.found[t] == (len(chosen) >= 4 and octants >= min_octants)


def test_leave_one_out_search_equals_brute_force(rng):
    samples, hole_of = _drilling(rng, holes=20)
    samples += rng.normal(0.0, 0.05, samples.shape)  # no two neighbours at equal distance
    search = SearchEllipsoid((60.0, 60.0, 30.0), min_samples=1, max_samples=8, max_per_hole=1)
    samples_t = search.to_unit_frame(samples)
    nb = find_neighbours(
        cKDTree(samples_t), samples_t, samples[:50], search, hole_of, skip_coincident=True
    )
    for t in range(50):
        keep = np.ones(len(samples), bool)
        keep[t] = False
        idx = np.flatnonzero(keep)
        chosen, _ = _brute_force(samples[keep], hole_of[keep], samples[t], search)
        assert nb.index[t, : nb.count[t]].tolist() == idx[chosen].tolist()
