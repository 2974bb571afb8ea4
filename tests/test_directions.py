"""The orientation of continuity found from data with known anisotropy.

Truth: Gaussian random fields simulated by the spectral method with a spherical model of
given orientation and ranges (the field's covariance is checked in test_simulation.py),
sampled at random points or along drillholes.  Pass: the found major axis within 15° of the
true one, and the plane of continuity (its normal, the minor axis) within 15°.
"""

from __future__ import annotations

import numpy as np
import pytest

from blockmodel.estimation.orientation import Orientation
from blockmodel.simulation.spectral import simulate_gaussian
from blockmodel.variography.directions import find_orientation, hemisphere_directions
from blockmodel.variography.models import Structure, VariogramModel

CELL = 2.5
SIDE = 64


def _field(orientation, ranges, seed):
    model = VariogramModel(0.05, [Structure("spherical", 1.0, ranges, orientation)])
    return simulate_gaussian((SIDE,) * 3, (CELL,) * 3, model, np.random.default_rng(seed))


def _sample(field, points):
    idx = np.floor(points / CELL).astype(np.int64)
    return field[idx[:, 0], idx[:, 1], idx[:, 2]]


def _drillholes(rng, spacing=12.0, dip=-60.0):
    top = SIDE * CELL
    out = []
    for x in np.arange(5.0, top, spacing):
        for y in np.arange(5.0, top, spacing):
            az, d = np.radians(rng.uniform(0, 360)), np.radians(dip)
            t = np.array([np.cos(d) * np.sin(az), np.cos(d) * np.cos(az), np.sin(d)])
            p = np.array([x, y, top - 5.0]) + np.arange(0.0, 150.0, 2.0)[:, None] * t
            out.append(p[((p >= 0) & (p < top)).all(axis=1)])
    return np.vstack(out)


def _angle(a, b):
    return float(np.degrees(np.arccos(min(1.0, abs(float(a @ b))))))


CASES = {
    # a steep pipe plunging 75° toward 030, sampled at random points
    "steep pipe": (Orientation(30, 75, 0), (80.0, 30.0, 15.0), "points"),
    # a flat-lying seam: long along 060, short vertically
    "flat seam": (Orientation(60, 0, 0), (60.0, 40.0, 8.0), "points"),
    # a lode striking 020 and dipping 55° east, with a shoot plunging 35° within it,
    # drilled at -60 on a 12 m grid
    "dipping lode with a shoot": (Orientation(20, 35, 55), (70.0, 40.0, 10.0), "holes"),
}


@pytest.mark.parametrize("case", CASES)
def test_orientation_found(case):
    orientation, ranges, sampling = CASES[case]
    rng = np.random.default_rng(11)
    field = _field(orientation, ranges, seed=3)
    points = rng.uniform(0, SIDE * CELL, (2500, 3)) if sampling == "points" else _drillholes(rng)
    fit = find_orientation(points, _sample(field, points), lag=8.0, n_lags=8)
    true, found = orientation.axes(), fit.orientation.axes()
    assert _angle(true[0], found[0]) < 15.0, fit.describe()
    assert _angle(true[2], found[2]) < 15.0, fit.describe()
    assert fit.ranges[0] >= fit.ranges[1] >= fit.ranges[2]
    assert {"major", "minor"}.isdisjoint(fit.loose_axes()) and fit.fit_quality > 0.5
    # the rival: the best fit found with its major axis over 30° away, no better
    assert fit.rival is not None and fit.rival_misfit >= 1.0
    assert _angle(fit.rival.axes()[0], found[0]) > 30.0
    assert "misfit" in fit.describe()


def test_rival_orientation_tells_a_clear_axis_from_a_loose_one():
    """The rival's misfit says how well the data tell orientations apart: for the steep
    pipe (ranges 80 / 30 / 15 m) any major axis 30° or more away fits far worse (measured
    2026-12-03: +101 %), for an isotropic field about as well (measured: +3 %; every
    orientation fits it alike, the ranges being free)."""
    orientation, ranges, _ = CASES["steep pipe"]
    rng = np.random.default_rng(11)
    field = _field(orientation, ranges, seed=3)
    points = rng.uniform(0, SIDE * CELL, (2500, 3))
    pipe = find_orientation(points, _sample(field, points), lag=8.0, n_lags=8)
    rng = np.random.default_rng(5)
    field = _field(Orientation(), (40.0, 40.0, 40.0), seed=8)
    points = rng.uniform(0, SIDE * CELL, (2500, 3))
    iso = find_orientation(points, _sample(field, points), lag=8.0, n_lags=8)
    assert pipe.rival_misfit > 1.5 and iso.rival_misfit < 1.1, (pipe.describe(), iso.describe())


def test_isotropic_field_says_directions_are_not_determined():
    rng = np.random.default_rng(5)
    field = _field(Orientation(), (40.0, 40.0, 40.0), seed=8)
    points = rng.uniform(0, SIDE * CELL, (2500, 3))
    fit = find_orientation(points, _sample(field, points), lag=8.0, n_lags=8)
    assert fit.ranges[2] / fit.ranges[0] > 0.7  # no real anisotropy found
    assert fit.loose_axes() == ["major", "semi", "minor"]  # and no axis is said to be placed


def test_hemisphere_directions_are_unit_downward_and_spread():
    d = hemisphere_directions(46)
    np.testing.assert_allclose(np.linalg.norm(d, axis=1), 1.0)
    assert (d[:, 2] <= 0).all()
    # evenly spread: 46 equal caps have a radius of about 12°, so every direction has a
    # neighbour within 25° and none closer than 8°
    cos = np.abs(d @ d.T) - 2 * np.eye(len(d))
    nearest = np.degrees(np.arccos(np.clip(cos.max(axis=1), -1, 1)))
    assert nearest.max() < 25 and nearest.min() > 8
