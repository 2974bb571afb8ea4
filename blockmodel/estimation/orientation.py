"""Orientation of an ellipsoid: the only place where angles become axis vectors.

The convention of the whole package (also in the README), defined by the resulting unit
vectors in the frame x east, y north, z up:

* ``azimuth``: bearing of the major axis, degrees clockwise from north (+y).
* ``plunge``: angle of the major axis below the horizontal, degrees, positive downward.
* ``tilt``: rotation of the semi and minor axes about the major axis, degrees, clockwise
  when looking along the major axis (semi turns toward -minor).

Golden vectors (rows major, semi, minor; s = sin 30°, c = cos 30°), checked by
``tests/test_orientation.py``:

==================  ===========  ===========  ==========
angles              major        semi         minor
==================  ===========  ===========  ==========
(0, 0, 0)           (0, 1, 0)    (1, 0, 0)    (0, 0, 1)
(90, 0, 0)          (1, 0, 0)    (0, -1, 0)   (0, 0, 1)
(0, 30, 0)          (0, c, -s)   (1, 0, 0)    (0, s, c)
(0, 0, 30)          (0, 1, 0)    (c, 0, -s)   (s, 0, c)
==================  ===========  ===========  ==========

A plane striking north and dipping 30° east is ``(0, 0, 30)``: the semi axis points down
the dip, the minor axis is the plane's normal.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

__all__ = ["Orientation"]


@dataclass(frozen=True)
class Orientation:
    """Three angles (degrees) fixing the major, semi and minor axes of an ellipsoid.

    Parameters
    ----------
    azimuth : float, degrees
        Bearing of the major axis, clockwise from north.
    plunge : float, degrees
        Angle of the major axis below the horizontal, positive downward.
    tilt : float, degrees
        Rotation of the other two axes about the major axis, clockwise looking along it.

    Examples
    --------
    A lode striking north and dipping 30 degrees east has its plane of continuity at
    ``Orientation(azimuth=0, plunge=0, tilt=30)``.
    """

    azimuth: float = 0.0
    plunge: float = 0.0
    tilt: float = 0.0

    def __post_init__(self) -> None:
        for name in ("azimuth", "plunge", "tilt"):
            value = getattr(self, name)
            if not np.isfinite(value):
                raise ValueError(
                    f"Orientation.{name} must be a finite number of degrees, got {value!r}"
                )
            object.__setattr__(self, name, float(value))
        if not -90.0 <= self.plunge <= 90.0:
            raise ValueError(f"Orientation.plunge must lie in [-90, 90] degrees, got {self.plunge}")

    def axes(self) -> np.ndarray:
        """Unit axis vectors.

        Returns
        -------
        (3, 3) float64
            Rows: major, semi, minor, each in (east, north, up) components; a right-handed
            orthonormal set with ``minor = semi x major``.
        """
        az, pl, tl = np.radians([self.azimuth, self.plunge, self.tilt])
        major = np.array([np.sin(az) * np.cos(pl), np.cos(az) * np.cos(pl), -np.sin(pl)])
        semi0 = np.array([np.cos(az), -np.sin(az), 0.0])
        minor0 = _cross(semi0, major)
        semi = np.cos(tl) * semi0 - np.sin(tl) * minor0
        minor = _cross(semi, major)
        axes = np.vstack([major, semi, minor])
        axes[np.abs(axes) < 1e-15] = 0.0
        return axes

    def to_local(self, vectors: np.ndarray) -> np.ndarray:
        """Components of vectors along (major, semi, minor).

        Parameters
        ----------
        vectors : (n, 3) float64, metres (east, north, up)

        Returns
        -------
        (n, 3) float64, metres along (major, semi, minor)
        """
        return np.asarray(vectors, dtype=np.float64) @ self.axes().T


def _cross(a: np.ndarray, b: np.ndarray) -> np.ndarray:
    """Cross product of two 3-vectors (``numpy.cross`` costs more than the arithmetic)."""
    return np.array(
        [a[1] * b[2] - a[2] * b[1], a[2] * b[0] - a[0] * b[2], a[0] * b[1] - a[1] * b[0]]
    )
