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
from blockmodel.variography.directions import (
    cone_directions,
    find_orientation,
    hemisphere_directions,
)
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


@pytest.mark.parametrize("seed", [3, 5])
def test_thin_flat_body_drilled_vertically_keeps_its_anisotropy(seed):
    """A flat body 20 times longer than thick (ranges 100 x 60 x 5 m, level), drilled by
    vertical holes 12 m apart: a lag along the body gathers pairs up to its cone's width
    apart vertically (at 50 m and 20°, 18 m: across the body, at the sill), so the model
    is compared with each lag averaged over its cone.  Read on the cone's axis instead,
    the lags along the body look short and the anisotropy ratio comes out at 0.13 to 0.16
    (seeds 1 to 6, measured 2026-12-03); averaged over the cone, 0.06 to 0.09.  Pass: the
    minor axis within 10° of vertical and minor / major below 0.1 (twice the truth)."""
    truth = Orientation(60, 0, 0)
    field = _field(truth, (100.0, 60.0, 5.0), seed=seed)
    rng = np.random.default_rng(seed)
    top = SIDE * CELL
    xy = np.array([(x, y) for x in np.arange(6.0, top, 12.0) for y in np.arange(6.0, top, 12.0)])
    xy = xy + rng.normal(0, 1.0, xy.shape)
    z = np.arange(1.0, top, 2.0)
    points = np.column_stack([np.repeat(xy, len(z), axis=0), np.tile(z, len(xy))])
    fit = find_orientation(points, _sample(field, points), lag=12.0, n_lags=8)
    assert _angle(truth.axes()[2], fit.orientation.axes()[2]) < 10.0, fit.describe()
    assert fit.ranges[2] / fit.ranges[0] < 0.1, fit.describe()


def test_cone_directions_cover_the_cone_evenly():
    axes = np.vstack([hemisphere_directions(5), [[0.0, 0.0, -1.0], [1.0, 0.0, 0.0]]])
    cone = cone_directions(axes, 20.0, 64)
    assert cone.shape == (7, 64, 3)
    np.testing.assert_allclose(np.linalg.norm(cone, axis=2), 1.0)
    cos = np.einsum("mkj,mj->mk", cone, axes)
    # within the cone, and even by solid angle: the cosine to the axis is uniform on
    # [cos 20°, 1], so its mean is the middle of that interval ...
    assert cos.min() >= np.cos(np.radians(20.0)) - 1e-12
    np.testing.assert_allclose(cos.mean(axis=1), (1 + np.cos(np.radians(20.0))) / 2, rtol=1e-12)
    # ... and the directions turn all the way round the axis: their mean lies on it
    mean = cone.mean(axis=1)
    off_axis = mean - np.einsum("mj,mj->m", mean, axes)[:, None] * axes
    assert np.abs(off_axis).max() < 0.01
