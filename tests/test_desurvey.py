"""Desurveying by minimum curvature."""

import numpy as np
import pytest

from blockmodel.desurvey import direction, positions_along_hole


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
