"""Finding the orientation of continuity — azimuth, plunge and tilt — from the data.

Method: experimental semivariograms of the normal scores of the values (robust to the skew
of grades, common practice) along directions spread evenly over the lower hemisphere (a Fibonacci lattice; each direction gathers the pairs within an angular
tolerance cone) are fitted jointly by one geometric anisotropy: a nugget and one structure
whose three ranges (major >= semi >= minor) and orientation are all free.  The fit starts
from a grid of orientations (ranges and sills fitted at each), and the best few are refined
with every parameter free.  How well the orientation is determined is read from the fit:
standard errors of the axis directions from its Jacobian, and the anisotropy ratios (an axis
cannot be placed where the ranges around it are equal).  The standard errors are local: a
second orientation far away may fit almost as well, so the best fit whose major axis lies
over 30° from the found one's (the rival) is refined too and its misfit stated beside.

The numerical core: arrays in, a frozen result out; no pandas, no plotting.

References
----------
Isaaks, E. H. & Srivastava, R. M. (1989), *An Introduction to Applied Geostatistics*,
ch. 7 (directional variograms, anisotropy).  González, Á. (2010), Measurement of areas on a
sphere using Fibonacci and latitude-longitude lattices, *Mathematical Geosciences* 42.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
from scipy.optimize import least_squares

from blockmodel.estimation.orientation import Orientation
from blockmodel.variography.models import KINDS, correlation, correlation_slope

__all__ = ["OrientationFit", "find_orientation", "hemisphere_directions"]

MIN_PAIRS = 30  # fewest pairs for a lag to count (Journel & Huijbregts 1978, common practice)
# a rival orientation's major axis lies this far (degrees) from the found one's at least
RIVAL_ANGLE = 30.0
# refined starts, besides the best few, in search of a rival
_RIVAL_STARTS = 3


def hemisphere_directions(count: int) -> np.ndarray:
    """``count`` unit vectors spread evenly over the lower hemisphere (z <= 0), (count, 3).

    A Fibonacci lattice on the hemisphere: equal areas, no crowding at the pole.
    """
    k = np.arange(count) + 0.5
    z = -k / count  # cos of the angle from straight down, uniform: equal areas
    golden = (1 + 5**0.5) / 2
    az = 2 * np.pi * k / golden
    r = np.sqrt(1 - z * z)
    return np.column_stack([r * np.sin(az), r * np.cos(az), z])


@dataclass(frozen=True)
class OrientationFit:
    """The orientation of continuity found from the data, and how well it is determined.

    Attributes
    ----------
    orientation : Orientation
    ranges : (3,) float, metres — major, semi, minor of the fitted single structure
    nugget, sill : float — of the fitted structure, in normal-score units (total about 1)
    axis_uncertainty : (3,) float, degrees
        One standard error of the direction of the major, semi and minor axes.
    fit_quality : float
        Weighted coefficient of determination of the joint fit over all directions (1 is
        perfect; below about 0.5 the directions are not well told apart).
    directions : int
        Directional variograms used.
    rival : Orientation, optional
        The best fit whose major axis lies more than :data:`RIVAL_ANGLE` degrees from
        ``orientation``'s (refined from the best starting orientations so placed); None
        when every such start ends at the found axis.
    rival_misfit : float
        The rival's weighted sum of squared residuals over the found one's (at least 1;
        near 1: the data tell the two apart poorly, whatever the standard errors say);
        NaN without a rival.
    """

    orientation: Orientation
    ranges: tuple[float, float, float]
    nugget: float
    sill: float
    axis_uncertainty: tuple[float, float, float]
    fit_quality: float
    directions: int
    rival: Orientation | None = None
    rival_misfit: float = float("nan")

    def loose_axes(
        self, *, max_error: float = 15.0, max_ratio: float = 0.85, min_quality: float = 0.5
    ) -> list[str]:
        """Axes the data do not place: all three when the joint fit explains less than
        ``min_quality`` of the variation between directions and lags (the orientation is
        then noise); otherwise those with one standard error above ``max_error`` degrees, or
        a range within ``max_ratio`` of a neighbouring axis's (no axis stands out among
        nearly equal ranges)."""
        if not self.fit_quality >= min_quality:
            return ["major", "semi", "minor"]
        a, b, c = self.ranges
        equal_major = b / a > max_ratio
        equal_minor = c / b > max_ratio
        out = []
        for name, error, equal in (
            ("major", self.axis_uncertainty[0], equal_major),
            ("semi", self.axis_uncertainty[1], equal_major or equal_minor),
            ("minor", self.axis_uncertainty[2], equal_minor),
        ):
            if error > max_error or equal:
                out.append(name)
        return out

    def describe(self) -> str:
        """One line for a report."""
        o, (a, b, c) = self.orientation, self.ranges
        u = self.axis_uncertainty
        text = (
            f"azimuth {o.azimuth:.0f}, plunge {o.plunge:.0f}, tilt {o.tilt:.0f} degrees; "
            f"ranges {a:.0f} / {b:.0f} / {c:.0f} m (ratios {b / a:.2f}, {c / b:.2f}); "
            f"axes determined within ±{u[0]:.0f}°, ±{u[1]:.0f}°, ±{u[2]:.0f}° (one standard "
            f"error); joint fit R² {self.fit_quality:.2f} over {self.directions} directions"
        )
        if self.rival is not None:
            r = self.rival
            text += (
                f"; the best fit with the major axis over {RIVAL_ANGLE:.0f}° away: azimuth "
                f"{r.azimuth:.0f}, plunge {r.plunge:.0f}, tilt {r.tilt:.0f} degrees, misfit "
                f"{100 * (self.rival_misfit - 1):+.0f} %"
            )
        return text


def _fan(points, values, directions, lag, n_lags, tolerance_deg, max_points):
    """Per direction and lag: pairs, mean distance and semivariogram, (m, n_lags) each."""
    from blockmodel.variography.experimental import experimental_variograms

    n = len(points)
    if n > max_points:  # a deterministic thinning; every part of the data kept
        keep = np.linspace(0, n - 1, max_points).round().astype(np.int64)
        points, values = points[keep], values[keep]
    d = np.asarray(directions, dtype=np.float64)
    angles = np.column_stack(
        [np.degrees(np.arctan2(d[:, 0], d[:, 1])), np.degrees(np.arcsin(-d[:, 2]))]
    )
    found = experimental_variograms(
        points,
        values,
        [tuple(a) for a in angles],
        lag=lag,
        n_lags=n_lags,
        angular_tolerance=tolerance_deg,
    )
    return (
        np.array([ev.pairs for ev in found], dtype=float),
        np.array([ev.distance for ev in found]),
        np.array([ev.value for ev in found]),
    )


def find_orientation(
    points: np.ndarray,
    values: np.ndarray,
    *,
    lag: float,
    n_lags: int,
    kind: str = "spherical",
    directions: int = 46,
    angular_tolerance: float = 20.0,
    max_points: int = 4000,
) -> OrientationFit:
    """Orientation of continuity from scattered data.

    Parameters
    ----------
    points : (n, 3) float64, metres
    values : (n,) float64
    lag : float, metres
        Lag width of the directional variograms.
    n_lags : int
    kind : str
        Structure kind fitted (one of the variogram model kinds).
    directions : int
        Directions over the hemisphere.
    angular_tolerance : float, degrees
        Half-angle of each direction's cone.
    max_points : int
        Larger data sets are thinned evenly to this many points (pair counts grow with the
        square of the data).

    Returns
    -------
    OrientationFit

    Raises
    ------
    ValueError
        Too few pairs to tell directions apart.
    """
    points = np.asarray(points, dtype=np.float64)
    points = points - points.mean(axis=0)
    values = np.asarray(values, dtype=np.float64)
    dirs = hemisphere_directions(directions)
    scores = _normal_scores(values)
    count, dist, gamma = _fan(points, scores, dirs, lag, n_lags, angular_tolerance, max_points)
    ok = count >= MIN_PAIRS
    if ok.sum() < 12 or (ok.any(axis=1)).sum() < 6:
        raise ValueError(f"only {int(ok.sum())} direction-lag bins hold {MIN_PAIRS} or more pairs")
    k_dir, _k_lag = np.nonzero(ok)
    h = dist[ok][:, None] * dirs[k_dir]  # (q, 3) separation vectors
    g = gamma[ok]
    w = np.sqrt(count[ok] / dist[ok] ** 2)
    w = w / w.mean()
    code = KINDS[kind]
    total = float(np.average(g, weights=count[ok]))
    longest = float(np.max(dist[ok]))
    a_lo, a_hi = 0.5 * lag, 2.0 * longest

    def model(p, angles=None, along=None):
        """The model at the lags, for ``angles`` or the lags already along the axes."""
        c0, c1, log_a, q2, q3 = p
        a1 = np.exp(log_a)
        ranges = np.array([a1, a1 * q2, a1 * q2 * q3])
        local = (h @ Orientation(*angles).axes().T if along is None else along) / ranges
        r = np.sqrt(np.einsum("ij,ij->i", local, local))
        return c0 + c1 * (1.0 - correlation(code, r))

    lower = [0.0, 0.0, np.log(a_lo), 0.05, 0.05]
    upper = [np.inf, np.inf, np.log(a_hi), 1.0, 1.0]
    start = [0.2 * total, 0.8 * total, np.log(0.5 * longest), 0.7, 0.7]

    def shape_jacobian(p, along):
        """Analytic Jacobian (q, 5) of the weighted residuals at fixed angles."""
        _, c1, log_a, q2, q3 = p
        a1 = np.exp(log_a)
        t = along / np.array([a1, a1 * q2, a1 * q2 * q3])
        t2 = t * t
        r = np.sqrt(t2.sum(axis=1))
        safe = np.where(r > 0.0, r, 1.0)
        slope = -c1 * correlation_slope(code, r)  # d model / d r
        jac = np.empty((len(r), 5))
        jac[:, 0] = 1.0
        jac[:, 1] = 1.0 - correlation(code, r)
        jac[:, 2] = -slope * r  # r scales as 1 / a
        jac[:, 3] = -slope * (t2[:, 1] + t2[:, 2]) / (q2 * safe)
        jac[:, 4] = -slope * t2[:, 2] / (q3 * safe)
        return w[:, None] * jac

    def fit_shape(angles):
        # a short fit is enough to rank the starting orientations; the best are refined
        along = h @ Orientation(*angles).axes().T  # fixed angles: the lags turned once
        res = least_squares(
            lambda p: w * (model(p, along=along) - g),
            start,
            jac=lambda p: shape_jacobian(p, along),
            bounds=(lower, upper),
            method="trf",
            max_nfev=20,
        )
        return res.cost, res.x

    trials = []
    for az in np.arange(0.0, 180.0, 20.0):
        for plunge in (0.0, 25.0, 50.0, 75.0):
            for tilt in (-60.0, -30.0, 0.0, 30.0, 60.0, 90.0):
                cost, p = fit_shape((az, plunge, tilt))
                trials.append((cost, (az, plunge, tilt), p))
    trials.sort(key=lambda t: t[0])

    def residual_all(x):
        return w * (model(x[:5], x[5:]) - g)

    lo = lower + [-360.0, -90.0, -180.0]
    hi = upper + [360.0, 90.0, 180.0]

    def refine(p, angles):
        x0 = np.clip(np.concatenate([p, angles]), np.array(lo) + 1e-9, np.array(hi) - 1e-9)
        return least_squares(residual_all, x0, bounds=(lo, hi), method="trf", x_scale="jac")

    def major(res):
        return Orientation(*res.x[5:]).axes()[0]

    refined = [refine(p, angles) for _, angles, p in trials[:6]]
    best = min(refined, key=lambda res: res.cost)
    # without a refined fit whose major axis lies away from the found one's, the best
    # starts so placed are refined in turn (one may end at a better fit, then found)
    starts = [t for t in trials[6:] if _apart(Orientation(*t[1]).axes()[0], major(best))]
    for _, angles, p in starts[:_RIVAL_STARTS]:
        if any(_apart(major(res), major(best)) for res in refined):
            break
        refined.append(refine(p, angles))
        best = min(refined, key=lambda res: res.cost)
    away = [res for res in refined if _apart(major(res), major(best))]
    rival = min(away, key=lambda res: res.cost) if away else None
    x = best.x
    c0, c1, log_a, q2, q3 = x[:5]
    a1 = float(np.exp(log_a))
    ranges = (a1, a1 * q2, a1 * q2 * q3)
    orientation = _normalised(Orientation(*x[5:]))
    uncertainty = _axis_uncertainty(best, x, lambda angles: Orientation(*angles).axes())
    resid = best.fun
    spread = w * (g - np.average(g, weights=w**2))
    quality = float(1.0 - np.sum(resid**2) / max(np.sum(spread**2), 1e-300))
    return OrientationFit(
        orientation,
        ranges,
        float(c0),
        float(c1),
        uncertainty,
        quality,
        int(ok.any(axis=1).sum()),
        None if rival is None else _normalised(Orientation(*rival.x[5:])),
        float("nan") if rival is None else float(rival.cost / max(best.cost, 1e-300)),
    )


def _apart(a: np.ndarray, b: np.ndarray) -> bool:
    """Whether axes (unit vectors, either sense) ``a`` and ``b`` lie more than
    :data:`RIVAL_ANGLE` degrees apart."""
    return abs(float(a @ b)) < np.cos(np.radians(RIVAL_ANGLE))


def _normal_scores(values: np.ndarray) -> np.ndarray:
    """Gaussian scores of the values' ranks (ties share their mean rank)."""
    from scipy.stats import norm, rankdata

    return norm.ppf((rankdata(values) - 0.5) / len(values))


def _normalised(o: Orientation) -> Orientation:
    """The same axes with azimuth in [0, 360), plunge in [0, 90], tilt in (-90, 90]."""
    axes = o.axes()
    major = axes[0]
    level = abs(major[2]) < 1e-9
    if major[2] > 0 or (level and np.arctan2(major[0], major[1]) < 0):
        major = -major  # point the major axis down; if level, toward azimuth 0 to 180
    az = float(np.degrees(np.arctan2(major[0], major[1])) % 360.0)
    plunge = float(np.degrees(np.arcsin(np.clip(-major[2], -1.0, 1.0))))
    base = Orientation(az, plunge, 0.0).axes()
    semi = axes[1]
    # tilt turns the tilt-0 semi axis toward -minor (see Orientation)
    tilt = float(np.degrees(np.arctan2(-(semi @ base[2]), semi @ base[1])))
    if tilt > 90.0:
        tilt -= 180.0
    elif tilt <= -90.0:
        tilt += 180.0
    return Orientation(az, plunge, tilt)


def _axis_uncertainty(result, x, axes_of) -> tuple[float, float, float]:
    """One standard error (degrees) of each axis direction, from the fit's Jacobian."""
    jac = result.jac
    dof = max(len(result.fun) - len(x), 1)
    s2 = 2.0 * result.cost / dof
    try:
        cov = np.linalg.pinv(jac.T @ jac) * s2
    except np.linalg.LinAlgError:
        return (180.0, 180.0, 180.0)
    angles = x[5:]
    axes_of(angles)
    out = []
    for axis in range(3):
        # derivative of the axis direction with respect to the three angles (per degree)
        d = np.empty((3, 3))
        for n in range(3):
            step = np.zeros(3)
            step[n] = 1e-3
            d[:, n] = (axes_of(angles + step)[axis] - axes_of(angles - step)[axis]) / 2e-3
        var = np.trace(d @ cov[5:, 5:] @ d.T)  # squared radians (small-angle)
        out.append(float(min(np.degrees(np.sqrt(max(var, 0.0))), 180.0)))
    return tuple(out)
