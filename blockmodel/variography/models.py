"""Variogram models: an isotropic nugget plus nested anisotropic structures.

Ranges are practical ranges along the structure's (major, semi, minor) axes (see
:mod:`blockmodel.estimation.orientation` for the axes):
the spherical and cubic models reach their sill at the range, the exponential and Gaussian
models reach 95 % of it.  Each structure is written as ``sill * correlation(r)`` with the
reduced distance ``r = |diag(1/a) R h|``; covariance and variogram both derive from it.
"""

from __future__ import annotations

import warnings
from collections.abc import Iterable, Sequence
from dataclasses import dataclass, field

import numpy as np

from blockmodel.estimation.orientation import Orientation

__all__ = ["KINDS", "Structure", "VariogramModel", "correlation_slope"]

#: Structure kinds and the integer code the compiled kernels use.
KINDS = {"spherical": 0, "exponential": 1, "gaussian": 2, "cubic": 3}


def correlation(kind_code: int, r: np.ndarray) -> np.ndarray:
    """Normalised correlation of one structure at reduced distance ``r`` (practical range 1).

    Parameters
    ----------
    kind_code : int
        Value of :data:`KINDS`.
    r : (n,) float64
        Reduced distance (dimensionless).

    Notes
    -----
    spherical ``1 - 1.5 r + 0.5 r^3`` (r < 1); exponential ``exp(-3 r)``;
    Gaussian ``exp(-3 r^2)``; cubic ``1 - (7 r^2 - 35/4 r^3 + 7/2 r^5 - 3/4 r^7)`` (r < 1).
    Chilès & Delfiner (2012), *Geostatistics: Modeling Spatial Uncertainty*, §2.5.
    """
    r = np.asarray(r, dtype=np.float64)
    if kind_code == 0:
        return np.where(r < 1.0, 1.0 - r * (1.5 - 0.5 * r * r), 0.0)
    if kind_code == 1:
        return np.exp(-3.0 * r)
    if kind_code == 2:
        return np.exp(-3.0 * r * r)
    if kind_code == 3:
        r2 = r * r
        poly = r2 * (7.0 - r * (8.75 - r2 * (3.5 - 0.75 * r2)))
        return np.where(r < 1.0, 1.0 - poly, 0.0)
    raise ValueError(f"unknown structure kind code {kind_code}")


def correlation_slope(kind_code: int, r: np.ndarray) -> np.ndarray:
    """Derivative of :func:`correlation` with respect to the reduced distance ``r`` (n,),
    for analytic Jacobians in fitting."""
    r = np.asarray(r, dtype=np.float64)
    if kind_code == 0:
        return np.where(r < 1.0, -1.5 + 1.5 * r * r, 0.0)
    if kind_code == 1:
        return -3.0 * np.exp(-3.0 * r)
    if kind_code == 2:
        return -6.0 * r * np.exp(-3.0 * r * r)
    if kind_code == 3:
        r2 = r * r
        slope = r * (14.0 - r * (26.25 - r2 * (17.5 - 5.25 * r2)))
        return np.where(r < 1.0, -slope, 0.0)
    raise ValueError(f"unknown structure kind code {kind_code}")


@dataclass(frozen=True)
class Structure:
    """One nested structure of a variogram model.

    Parameters
    ----------
    kind : {"spherical", "exponential", "gaussian", "cubic"}
    sill : float
        Partial sill (grade units squared), > 0.
    ranges : (3,) float, metres
        Practical ranges along (major, semi, minor); a single number means isotropic.
    orientation : Orientation
        Orientation of the range ellipsoid.
    """

    kind: str
    sill: float
    ranges: tuple[float, float, float]
    orientation: Orientation = field(default_factory=Orientation)

    def __post_init__(self) -> None:
        if self.kind not in KINDS:
            raise ValueError(
                f"Structure kind {self.kind!r} is not one of {', '.join(sorted(KINDS))}"
            )
        if not (np.isfinite(self.sill) and self.sill > 0):
            raise ValueError(f"Structure sill must be a positive number, got {self.sill!r}")
        ranges = np.broadcast_to(np.asarray(self.ranges, dtype=np.float64), (3,))
        if not np.all(np.isfinite(ranges)) or np.any(ranges <= 0):
            raise ValueError(
                f"Structure ranges must be three positive lengths in metres, got {self.ranges!r}"
            )
        if not isinstance(self.orientation, Orientation):
            raise TypeError("Structure orientation must be a blockmodel.Orientation")
        object.__setattr__(self, "sill", float(self.sill))
        object.__setattr__(self, "ranges", tuple(float(a) for a in ranges))

    def transform(self) -> np.ndarray:
        """(3, 3) matrix taking a separation vector (metres) to reduced distance units."""
        return np.diag(1.0 / np.asarray(self.ranges)) @ self.orientation.axes()

    def correlation(self, h: np.ndarray) -> np.ndarray:
        """Correlation of this structure alone (its covariance over its sill).

        Parameters
        ----------
        h : (n, 3) float64, separation vectors in metres

        Returns
        -------
        (n,) float64, 1 at zero separation
        """
        h = np.atleast_2d(np.asarray(h, dtype=np.float64))
        return correlation(KINDS[self.kind], np.linalg.norm(h @ self.transform().T, axis=1))


@dataclass(frozen=True)
class VariogramModel:
    """Isotropic nugget plus nested structures.

    Parameters
    ----------
    nugget : float
        Nugget effect (grade units squared), >= 0.
    structures : sequence of Structure
        Nested structures; at least one unless the nugget alone is wanted.
    """

    nugget: float = 0.0
    structures: Sequence[Structure] = ()

    def __post_init__(self) -> None:
        if not (np.isfinite(self.nugget) and self.nugget >= 0):
            raise ValueError(f"VariogramModel nugget must be >= 0, got {self.nugget!r}")
        structures = tuple(self.structures)
        for s in structures:
            if not isinstance(s, Structure):
                raise TypeError("VariogramModel structures must be blockmodel.Structure objects")
        if not structures and self.nugget <= 0:
            raise ValueError("VariogramModel needs a positive nugget or at least one structure")
        object.__setattr__(self, "nugget", float(self.nugget))
        object.__setattr__(self, "structures", structures)
        if self.nugget == 0 and any(s.kind == "gaussian" for s in structures):
            warnings.warn(
                "a Gaussian structure with no nugget makes kriging systems ill-conditioned; "
                "add a small nugget",
                RuntimeWarning,
                stacklevel=3,
            )

    @property
    def total_sill(self) -> float:
        """Nugget plus all partial sills: ``C(0)``."""
        return self.nugget + sum(s.sill for s in self.structures)

    @property
    def orientation(self) -> Orientation:
        """The first structure's orientation, which the search ellipsoid follows; the
        default (north, level) for a pure-nugget model."""
        return self.structures[0].orientation if self.structures else Orientation()

    def packed(self) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
        """Arrays for the compiled kernels: kind codes (s,), sills (s,), transforms (s, 3, 3)."""
        kinds = np.array([KINDS[s.kind] for s in self.structures], dtype=np.int64)
        sills = np.array([s.sill for s in self.structures], dtype=np.float64)
        mats = np.array([s.transform() for s in self.structures], dtype=np.float64)
        return kinds, sills, mats.reshape(len(self.structures), 3, 3)

    def structured_covariance(self, h: np.ndarray) -> np.ndarray:
        """Covariance of the nested structures alone (nugget left out).

        Parameters
        ----------
        h : (n, 3) float64, metres

        Returns
        -------
        (n,) float64
        """
        h = np.atleast_2d(np.asarray(h, dtype=np.float64))
        return self.covariance_of(
            (s.correlation(h) for s in self.structures), np.zeros(len(h), dtype=bool)
        )

    def covariance(self, h: np.ndarray) -> np.ndarray:
        """Covariance ``C(h) = total sill - gamma(h)``; ``C(0)`` includes the nugget.

        Parameters
        ----------
        h : (n, 3) float64, separation vectors in metres

        Returns
        -------
        (n,) float64
        """
        h = np.atleast_2d(np.asarray(h, dtype=np.float64))
        return self.covariance_of(
            (s.correlation(h) for s in self.structures), np.all(h == 0.0, axis=1)
        )

    def covariance_of(self, correlations: Iterable[np.ndarray], at_zero: np.ndarray) -> np.ndarray:
        """The covariance at some separations from each structure's correlation there:
        each sill times its correlation, summed in the structures' order, plus the nugget
        where the separation is zero.  Every covariance of the model is summed here, so a
        caller that holds the correlations (of models differing only in nugget and sills)
        gets :meth:`covariance`'s numbers bit for bit.

        Parameters
        ----------
        correlations : iterable of (n,) float64
            One per structure, in order: :meth:`Structure.correlation` at the separations
            (read one at a time).
        at_zero : (n,) bool
            Where the separation is zero.

        Returns
        -------
        (n,) float64
        """
        out = np.zeros(len(at_zero))
        for s, c in zip(self.structures, correlations, strict=True):
            out += s.sill * c
        return out + np.where(at_zero, self.nugget, 0.0)

    def variogram(self, h: np.ndarray) -> np.ndarray:
        """Semivariogram ``gamma(h)``, 0 at h = 0.

        Parameters
        ----------
        h : (n, 3) float64, separation vectors in metres

        Returns
        -------
        (n,) float64
        """
        return self.total_sill - self.covariance(h)

    def to_toml(self, name: str = "model") -> str:
        """The model as a TOML snippet a project file can include."""
        lines = [f"[variogram.{name}]", f"nugget = {self.nugget!r}", ""]
        for s in self.structures:
            o = s.orientation
            lines += [
                f"[[variogram.{name}.structures]]",
                f'kind = "{s.kind}"',
                f"sill = {s.sill!r}",
                f"ranges = [{s.ranges[0]!r}, {s.ranges[1]!r}, {s.ranges[2]!r}]",
                f"orientation = [{o.azimuth!r}, {o.plunge!r}, {o.tilt!r}]",
                "",
            ]
        return "\n".join(lines)
