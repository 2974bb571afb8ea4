"""Fitting a nested variogram model to experimental variograms.

All structures share one orientation; the experimental variograms are computed along its
principal axes (major, semi, minor) and fitted jointly by weighted least squares.
"""

from __future__ import annotations

from collections.abc import Sequence

import numpy as np
from scipy.optimize import least_squares

from .experimental import ExperimentalVariogram
from .orientation import Orientation
from .variogram import KINDS, Structure, VariogramModel, correlation

__all__ = ["find_azimuth", "fit_variogram", "principal_directions"]


def principal_directions(orientation: Orientation) -> list[tuple[float, float]]:
    """(azimuth, plunge) in degrees of the major, semi and minor axes."""
    out = []
    for v in orientation.axes():
        if v[2] > 0:  # express each axis pointing downward or horizontal
            v = -v
        az = float(np.degrees(np.arctan2(v[0], v[1])) % 360.0)
        out.append((az, float(np.degrees(np.arcsin(np.clip(-v[2], -1, 1))))))
    return out


def fit_variogram(
    experimental: Sequence[tuple[ExperimentalVariogram, int | np.ndarray | None]],
    kinds: Sequence[str],
    orientation: Orientation,
    *,
    fixed: dict[str, float] | None = None,
    weighting: str = "pairs_over_distance_squared",
) -> VariogramModel:
    """Fit nugget + nested structures to experimental variograms.

    Parameters
    ----------
    experimental : sequence of (ExperimentalVariogram, axis)
        ``axis`` 0, 1, 2 for the major, semi and minor directions of ``orientation``, or a
        unit direction vector (3,) for any other direction; None for an omnidirectional
        variogram (the fitted ranges are then isotropic).
    kinds : sequence of str
        Kind of each structure, 1 to 3 of them.
    orientation : Orientation
    fixed : dict, optional
        Parameters to hold, e.g. ``{"nugget": 0.05, "sill1": 0.3, "range2_major": 150}``
        (structures count from 1; range axes major, semi, minor).
    weighting : {"pairs_over_distance_squared", "pairs", "equal"}

    Returns
    -------
    VariogramModel

    Notes
    -----
    Along a unit direction d, a structure's reduced distance is
    ``h * |diag(1/a) R d|``.  Minimises ``sum_j w_j (gamma_model(h_j) - gamma_j)^2`` with ``w_j = N_j / h_j^2`` by
    default (Cressie 1985; the default of gstat's fit.variogram, Pebesma 2004).
    """
    return _fit(experimental, kinds, orientation, fixed, weighting)[0]


def _fit(experimental, kinds, orientation, fixed, weighting):
    if not 1 <= len(kinds) <= 3:
        raise ValueError("fit between one and three structures")
    for k in kinds:
        if k not in KINDS:
            raise ValueError(f"unknown structure kind {k!r}")
    fixed = dict(fixed or {})
    isotropic = all(axis is None for _, axis in experimental)
    names = ["nugget"] + [f"sill{k + 1}" for k in range(len(kinds))]
    axes_names = ("major",) if isotropic else ("major", "semi", "minor")
    names += [f"range{k + 1}_{a}" for k in range(len(kinds)) for a in axes_names]
    unknown = set(fixed) - set(names)
    if unknown:
        raise ValueError(f"cannot fix {sorted(unknown)}; parameters are {names}")

    h, g, w, ax, comp = [], [], [], [], []
    axes = orientation.axes()
    for ev, axis in experimental:
        ok = (ev.pairs > 0) & np.isfinite(ev.value)
        h.append(ev.distance[ok])
        g.append(ev.value[ok])
        if weighting == "pairs_over_distance_squared":
            w.append(ev.pairs[ok] / ev.distance[ok] ** 2)
        elif weighting == "pairs":
            w.append(ev.pairs[ok].astype(float))
        else:
            w.append(np.ones(ok.sum()))
        if axis is None or np.ndim(axis) == 0:
            a = 0 if axis is None else int(axis)
            c = np.eye(3)[a]
        else:
            d = np.asarray(axis, dtype=np.float64)
            c = np.abs(axes @ (d / np.linalg.norm(d)))
            a = int(np.argmax(c))
        ax.append(np.full(ok.sum(), a))
        comp.append(np.tile(c, (ok.sum(), 1)))
    h, g, w, ax, comp = map(np.concatenate, (h, g, w, ax, comp))
    if len(h) < 3:
        raise ValueError("too few lags with pairs to fit a model")
    sqrt_w = np.sqrt(w / w.mean())
    top = float(np.max(g))
    hmax = float(np.max(h))
    start = {"nugget": 0.5 * float(g[np.argmin(h)]) if len(g) else 0.0}
    for k in range(len(kinds)):
        start[f"sill{k + 1}"] = max(top - start["nugget"], 1e-6) / len(kinds)
        for a in axes_names:
            start[f"range{k + 1}_{a}"] = (
                (
                    float(np.max(h[ax == axes_names.index(a)]))
                    if np.any(ax == axes_names.index(a))
                    else hmax
                )
                * (k + 1)
                / (len(kinds) + 1)
            )
    free = [n for n in names if n not in fixed]

    def unpack(x):
        p = dict(fixed)
        p.update(zip(free, x, strict=True))
        return p

    def predict(p):
        out = np.full(len(h), p["nugget"])
        for k, kind in enumerate(kinds):
            if isotropic:
                a = p[f"range{k + 1}_major"]
                r = h / a
            else:
                ranges = np.array([p[f"range{k + 1}_{n}"] for n in axes_names])
                r = h * np.sqrt(((comp / ranges) ** 2).sum(axis=1))
            out += p[f"sill{k + 1}"] * (1.0 - correlation(KINDS[kind], r))
        return out

    # a range is bounded by twice the longest lag seen along its own axis
    axis_max = {
        a: float(np.max(h[ax == i])) if np.any(ax == i) else hmax for i, a in enumerate(axes_names)
    }

    def range_bound(n):
        return 2.0 * axis_max[n.split("_")[1]]

    lower = [0.0 if n == "nugget" or n.startswith("sill") else 1e-3 * range_bound(n) for n in free]
    upper = [np.inf if n == "nugget" or n.startswith("sill") else range_bound(n) for n in free]
    x0 = np.clip([start[n] for n in free], np.array(lower) + 1e-12, np.array(upper) - 1e-12)
    best = None
    # a few starts guard against a poor local minimum
    for scale in (1.0, 0.5, 2.0):
        x = x0.copy()
        for i, n in enumerate(free):
            if n.startswith("range"):
                x[i] = np.clip(x[i] * scale, lower[i] * 1.01, upper[i] * 0.99)
        res = least_squares(
            lambda x: sqrt_w * (predict(unpack(x)) - g),
            x,
            bounds=(lower, upper),
            method="trf",
            x_scale="jac",
        )
        if best is None or res.cost < best.cost:
            best = res
    p = unpack(best.x)
    structures = []
    for k, kind in enumerate(kinds):
        sill = p[f"sill{k + 1}"]
        if sill <= 1e-12 * max(top, 1e-300):
            continue
        r = tuple(p[f"range{k + 1}_{a}"] for a in axes_names)
        ranges = (r[0], r[0], r[0]) if isotropic else r
        structures.append(Structure(kind, sill, ranges, orientation))
    return VariogramModel(max(p["nugget"], 0.0), structures), float(best.cost)


def find_azimuth(
    points: np.ndarray,
    values: np.ndarray,
    *,
    lag: float,
    n_lags: int,
    kinds: Sequence[str] = ("spherical",),
    step: float = 15.0,
    angular_tolerance: float = 15.0,
    refine: float = 2.5,
) -> tuple[float, VariogramModel]:
    """Azimuth of the major axis of a horizontal anisotropy, by fitting one geometric
    anisotropy jointly to a fan of horizontal directional variograms.

    Parameters
    ----------
    points : (n, 3) float64, metres
    values : (n,) float64
    lag, n_lags : lag width (metres) and count of the fan's variograms
    kinds : structure kinds of the model
    step : float, degrees between the fan's directions
    refine : float, degrees; resolution of the search over azimuths

    Returns
    -------
    azimuth : float, degrees in [0, 180)
    model : VariogramModel fitted at that azimuth (plunge and tilt zero); horizontal data
        do not inform the minor (vertical) range, which is set equal to the semi range

    Notes
    -----
    Using every direction at once is far steadier than picking the single direction whose
    variogram rises slowest.
    """
    from .experimental import direction_vector, experimental_variogram

    fan = []
    for az in np.arange(0.0, 180.0, step):
        ev = experimental_variogram(
            points,
            values,
            lag=lag,
            n_lags=n_lags,
            direction=(az, 0.0),
            angular_tolerance=angular_tolerance,
        )
        fan.append((ev, direction_vector(az, 0.0)))
    best = None
    for az in np.arange(0.0, 180.0, refine):
        model, cost = _fit(fan, kinds, Orientation(az, 0.0, 0.0), {}, "pairs_over_distance_squared")
        if best is None or cost < best[0]:
            best = (cost, az, model)
    cost, az, model = best
    # the fit may settle with its "major" axis the shorter one: turn it a right angle
    reach = [sum(s.sill * s.ranges[i] for s in model.structures) for i in (0, 1)]
    swap = reach[1] > reach[0]
    if swap:
        az = (az + 90.0) % 180.0
    o = Orientation(az, 0.0, 0.0)
    structures = []
    for s in model.structures:
        major, semi = (s.ranges[1], s.ranges[0]) if swap else (s.ranges[0], s.ranges[1])
        # horizontal data say nothing of the vertical: give the minor axis the semi range
        structures.append(Structure(s.kind, s.sill, (major, semi, semi), o))
    return float(az), VariogramModel(model.nugget, structures)
