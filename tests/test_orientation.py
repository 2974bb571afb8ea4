"""Orientation convention: the golden axis vectors written in the orientation module."""

import numpy as np
import pytest

import blockmodel as bm

S, C = 0.5, np.sqrt(3) / 2

# Golden values: the table in blockmodel/estimation/orientation.py (the project's own
# convention, derived by hand).
GOLDEN = [
    ((0, 0, 0), [(0, 1, 0), (1, 0, 0), (0, 0, 1)]),
    ((90, 0, 0), [(1, 0, 0), (0, -1, 0), (0, 0, 1)]),
    ((0, 30, 0), [(0, C, -S), (1, 0, 0), (0, S, C)]),
    ((0, 0, 30), [(0, 1, 0), (C, 0, -S), (S, 0, C)]),
]


@pytest.mark.parametrize(("angles", "expected"), GOLDEN)
def test_golden_axes(angles, expected):
    axes = bm.Orientation(*angles).axes()
    np.testing.assert_allclose(axes, np.array(expected, float), atol=1e-12)


def test_axes_orthonormal_right_handed(rng):
    for az, pl, tl in rng.uniform([-360, -90, -180], [360, 90, 180], size=(50, 3)):
        a = bm.Orientation(az, pl, tl).axes()
        np.testing.assert_allclose(a @ a.T, np.eye(3), atol=1e-12)
        np.testing.assert_allclose(np.cross(a[1], a[0]), a[2], atol=1e-12)


def test_lode_north_dipping_east():
    # A plane striking north and dipping 30 degrees east: both in-plane axes are
    # horizontal-north and down-dip-east, the minor axis is the plane's normal (README, conventions).
    a = bm.Orientation(0, 0, 30).axes()
    down_dip = np.array([np.cos(np.radians(30)), 0, -np.sin(np.radians(30))])
    np.testing.assert_allclose(a[1], down_dip, atol=1e-12)
    assert abs(a[2] @ down_dip) < 1e-12 and abs(a[2] @ [0, 1, 0]) < 1e-12


def test_bad_angles():
    with pytest.raises(ValueError, match="plunge"):
        bm.Orientation(0, 95, 0)
    with pytest.raises(ValueError, match="azimuth"):
        bm.Orientation(float("nan"), 0, 0)
