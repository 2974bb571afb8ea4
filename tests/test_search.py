"""The neighbour search, with and without per-hole and octant limits, equals a brute-force
selection.

Oracle (common practice for moving-neighbourhood rules): take every sample inside the
ellipsoid, sort by anisotropic distance (ties by sample index), accept each in turn unless
its hole or its octant is already full, stop at ``max_samples``.
"""

from __future__ import annotations

import dataclasses

import numpy as np
import pytest

import blockmodel.estimation.search as search_module
from blockmodel.estimation._cells import SampleCells
from blockmodel.estimation.orientation import Orientation
from blockmodel.estimation.search import SampleIndex, SearchEllipsoid, find_neighbours


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
    order = np.lexsort((np.arange(len(dist)), dist))
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
    nb = find_neighbours(SampleIndex.build(search.to_unit_frame(samples)), targets, search, hole_of)
    for t, target in enumerate(targets):
        chosen, octants = _brute_force(samples, hole_of, target, search)
        got = nb.index[t, : nb.count[t]].tolist()
        assert got == chosen, t
        assert nb.found[t] == (len(chosen) >= 4 and octants >= min_octants)


def test_leave_one_out_search_equals_brute_force(rng):
    samples, hole_of = _drilling(rng, holes=20)
    samples += rng.normal(0.0, 0.05, samples.shape)  # no two neighbours at equal distance
    search = SearchEllipsoid((60.0, 60.0, 30.0), min_samples=1, max_samples=8, max_per_hole=1)
    index = SampleIndex.build(search.to_unit_frame(samples))
    nb = find_neighbours(index, samples[:50], search, hole_of, skip_coincident=True)
    for t in range(50):
        keep = np.ones(len(samples), bool)
        keep[t] = False
        idx = np.flatnonzero(keep)
        chosen, _ = _brute_force(samples[keep], hole_of[keep], samples[t], search)
        assert nb.index[t, : nb.count[t]].tolist() == idx[chosen].tolist()


def _check_nearest(samples, targets, search, *, skip_coincident=False, reach=None):
    index = SampleIndex.build(search.to_unit_frame(samples), search.max_samples)
    if reach is not None:  # force the cells' size, whatever the data's density
        index = dataclasses.replace(index, reach=reach)
    nb = find_neighbours(index, targets, search, None, skip_coincident=skip_coincident)
    hole_of = np.arange(len(samples))
    for t, target in enumerate(targets):
        keep = np.ones(len(samples), bool)
        if skip_coincident:
            keep &= np.linalg.norm(samples - target, axis=1) > 1e-9
        idx = np.flatnonzero(keep)
        chosen, _ = _brute_force(samples[keep], hole_of[keep], target, search)
        assert nb.index[t, : nb.count[t]].tolist() == idx[chosen].tolist(), t
        assert np.all(nb.index[t, nb.count[t] :] == len(samples))
        d = np.linalg.norm(
            ((samples[idx[chosen]] - target) @ search.orientation.axes().T) / search.ranges, axis=1
        )
        np.testing.assert_allclose(nb.distance[t, : nb.count[t]], d, rtol=1e-12, atol=1e-12)
        assert np.all(np.isinf(nb.distance[t, nb.count[t] :]))
    return nb


@pytest.mark.parametrize("cell", [0.002, 0.035, 0.2])
def test_nearest_search_equals_brute_force(rng, cell, monkeypatch):
    """Without limits, the k nearest inside the ellipsoid, whatever the size of the cells
    whose targets share a candidate list (forced small and large), targets inside and
    outside the data."""
    monkeypatch.setattr(search_module, "NEAREST_CELL", cell)
    samples, _ = _drilling(rng)
    targets = rng.uniform([-60, -60, -80], [260, 260, 40], size=(400, 3))
    search = SearchEllipsoid((70.0, 40.0, 20.0), Orientation(30, 10, 20), max_samples=12)
    nb = _check_nearest(samples, targets, search, reach=10.0)
    assert np.any((nb.count > 0) & (nb.count < 12)) and nb.count.max() == 12  # edges, full


def test_nearest_search_breaks_ties_by_sample_index(rng):
    """Samples on a lattice and targets at lattice nodes: many equal distances, resolved by
    sample index as in the oracle; leave-one-out drops the sample at the target.  The
    ellipsoid is an unrotated sphere of 16 m so that the search frame is an exact scaling
    and equal distances stay equal."""
    g = np.arange(12) * 5.0
    samples = np.stack(np.meshgrid(g, g, g[:6], indexing="ij"), axis=-1).reshape(-1, 3)
    samples = samples[rng.permutation(len(samples))]
    search = SearchEllipsoid((16.0, 16.0, 16.0), max_samples=10, min_samples=1)
    _check_nearest(samples, samples[:200], search)
    _check_nearest(samples, samples[:200], search, skip_coincident=True)


def test_nearest_search_with_fewer_samples_than_wanted(rng):
    samples = rng.uniform(0, 50, size=(5, 3))
    search = SearchEllipsoid((80.0, 80.0, 80.0), max_samples=24, min_samples=1)
    nb = _check_nearest(samples, rng.uniform(-20, 70, size=(50, 3)), search)
    assert nb.index.shape == (50, 5)


def test_search_far_wider_than_the_data(rng):
    """A search a thousand times wider than the data: cells shrink to the data's spacing
    (not one shared list for all targets) and the result is still the brute-force one."""
    samples = rng.uniform(0, 300, size=(500, 3))
    search = SearchEllipsoid((3e5, 3e5, 3e5), max_samples=24, min_samples=1)
    index = SampleIndex.build(search.to_unit_frame(samples), 24)
    assert index.reach < 1e-3
    _check_nearest(samples, rng.uniform(20, 280, size=(200, 3)), search)


@pytest.mark.parametrize("edge", [0.05, 0.4, 3.0])
def test_cells_gather_every_sample_within_reach(rng, edge):
    """Cell gathering equals a brute-force ball query, for fine, medium and coarse cells and
    for flat data (one coordinate constant), where the grid is capped and cells grow."""
    points = rng.uniform(-1, 4, size=(3000, 3))
    flat = points.copy()
    flat[:, 2] = 0.5
    for pts in (points, flat):
        cells = SampleCells.build(pts, edge)
        centres = rng.uniform(-2, 5, size=(200, 3))
        radius = rng.uniform(0.0, 1.5, size=200)
        offsets, found = cells.within(centres, radius)
        for g in range(len(centres)):
            inside = np.flatnonzero(np.linalg.norm(pts - centres[g], axis=1) <= radius[g])
            assert sorted(found[offsets[g] : offsets[g + 1]].tolist()) == inside.tolist()
