"""Desurveying by minimum curvature."""

import numpy as np
import pytest

from blockmodel.data.desurvey import direction, positions_along_hole


def test_taylor_mason_worked_example():
    # Published minimum-curvature example (method of Taylor & Mason 1972): stations at
    # measured depth 3500 and 3600, inclination 15 -> 25 degrees, azimuth 20 -> 45:
    # dogleg 12.95 deg, dN 27.22, dE 19.45, dTVD 94.01. Inclination from vertical = 90 + dip.
    t = direction([20.0, 45.0], [-75.0, -65.0])
    dogleg = np.degrees(np.arccos(t[0] @ t[1]))
    assert dogleg == pytest.approx(12.95, abs=0.005)
    p = positions_along_hole(
        np.zeros(3),
        np.array([3500.0, 3600.0]),
        np.array([20.0, 45.0]),
        np.array([-75.0, -65.0]),
        np.array([3500.0, 3600.0]),
    )
    d = p[1] - p[0]
    assert d[1] == pytest.approx(27.22, abs=0.005)  # north
    assert d[0] == pytest.approx(19.45, abs=0.005)  # east
    assert -d[2] == pytest.approx(94.01, abs=0.005)  # true vertical depth


def test_straight_hole_is_linear():
    depths = np.linspace(0, 300, 31)
    p = positions_along_hole(
        np.array([5e5, 7e6, 1200.0]),
        np.array([0.0, 100.0, 200.0]),
        np.full(3, 290.0),
        np.full(3, -60.0),
        depths,
    )
    t = direction([290.0], [-60.0])[0]
    np.testing.assert_allclose(p, np.array([5e5, 7e6, 1200.0]) + depths[:, None] * t, atol=1e-9)


def test_constant_curvature_stays_on_its_circle():
    # Dip changes steadily in a vertical plane: the hole is an arc of radius R = L / angle.
    stations = np.arange(0, 301, 30.0)
    dips = -80.0 + 2.0 * stations / 30.0
    p = positions_along_hole(
        np.zeros(3), stations, np.zeros(len(stations)), dips, np.linspace(0, 300, 97)
    )
    radius = 30.0 / np.radians(2.0)
    # centre of curvature: from the collar, perpendicular to the start direction, in the plane
    t0 = direction([0.0], [-80.0])[0]
    normal = np.array([0.0, np.sin(np.radians(80)), np.cos(np.radians(80))])  # toward the turn
    assert abs(normal @ t0) < 1e-12
    centre = radius * normal
    np.testing.assert_allclose(np.linalg.norm(p - centre, axis=1), radius, rtol=1e-9)
    assert np.allclose(p[:, 0], 0.0, atol=1e-9)


def test_single_survey_below_collar_extends_up():
    p = positions_along_hole(
        np.zeros(3), np.array([50.0]), np.array([90.0]), np.array([-45.0]), np.array([0.0, 10.0])
    )
    np.testing.assert_allclose(p[0], 0.0, atol=1e-12)
    np.testing.assert_allclose(p[1], 10 * direction([90.0], [-45.0])[0], atol=1e-12)


def test_random_straight_holes_are_exact(rng):
    """Stations sharing one azimuth and dip (and the stretch above a first station below
    the collar) must give the exact straight line: the arccos form once put 1,036 of
    6,000 composites of such holes more than 1 mm off, the worst by 35 m."""
    worst = 0.0
    for _ in range(60):
        az, dip = rng.uniform(0, 360), rng.uniform(-89.5, -30)
        collar = np.array([5e5, 7e6, 1200.0]) + rng.uniform(-100, 100, 3)
        depths = np.arange(1.0, 200.0, 2.0)  # 2 m composite centres
        p = positions_along_hole(
            collar, np.array([30.0, 150.0]), np.full(2, az), np.full(2, dip), depths
        )
        exact = collar + depths[:, None] * direction([az], [dip])[0]
        worst = max(worst, float(np.abs(p - exact).max()))
    assert worst < 1e-6


def _integrated_arc(t1, t2, length, fractions, steps=200_000):
    """Position along an arc by integrating the spherically interpolated direction with the
    trapezoid rule on a fine grid (an independent numerical check of the closed form)."""
    b = np.arccos(np.clip(t1 @ t2, -1, 1)) if not np.allclose(t1, t2) else 0.0
    u = np.linspace(0.0, 1.0, steps + 1)
    if b == 0.0:
        dirs = np.outer(1 - u, t1) + np.outer(u, t2)
    else:
        # axis-angle rotation of t1 toward t2, computed without the closed form's weights
        axis = np.cross(t1, t2)
        axis /= np.linalg.norm(axis)
        ang = b * u[:, None]
        dirs = t1 * np.cos(ang) + np.cross(axis, t1) * np.sin(ang)
    dirs /= np.linalg.norm(dirs, axis=1, keepdims=True)
    seg = 0.5 * (dirs[1:] + dirs[:-1]) * (length / steps)
    cum = np.vstack([np.zeros(3), np.cumsum(seg, axis=0)])
    return cum[np.round(np.asarray(fractions) * steps).astype(int)]


@pytest.mark.parametrize("bend_rad", [1e-8, 3e-8, 1e-7, 3e-7, 1e-5, 1e-3, 0.35])
@pytest.mark.parametrize("az, dip", [(37.0, -62.0), (200.0, -85.0), (10.0, -30.0)])
def test_tiny_and_ordinary_bends_match_numerical_integration(bend_rad, az, dip):
    # the arccos form gave 0.5 m errors for a dip change of 1e-7 rad over 100 m, and 22 m
    # for 1e-8 rad
    stations = np.array([0.0, 100.0])
    dips = np.array([dip, dip + np.degrees(bend_rad)])
    p = positions_along_hole(
        np.zeros(3), stations, np.full(2, az), dips, np.array([25.0, 50.0, 100.0])
    )
    t = direction(np.full(2, az), dips)
    ref = _integrated_arc(t[0], t[1], 100.0, [0.25, 0.5, 1.0])
    np.testing.assert_allclose(p, ref, atol=1e-6)
