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

__all__ = ["fit_variogram", "principal_directions"]


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
    experimental: Sequence[tuple[ExperimentalVariogram, int | None]],
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
        ``axis`` 0, 1, 2 for the major, semi and minor directions of ``orientation``;
        None for an omnidirectional variogram (the fitted ranges are then isotropic).
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
    Minimises ``sum_j w_j (gamma_model(h_j) - gamma_j)^2`` with ``w_j = N_j / h_j^2`` by
    default (Cressie 1985; the default of gstat's fit.variogram, Pebesma 2004).
    """
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

    h, g, w, ax = [], [], [], []
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
        ax.append(np.full(ok.sum(), 0 if axis is None else axis))
    h, g, w, ax = map(np.concatenate, (h, g, w, ax))
    if len(h) < 3:
        raise ValueError("too few lags with pairs to fit a model")
    sqrt_w = np.sqrt(w / w.mean())
    top = float(np.max(g))
    hmax = float(np.max(h))
    start = {"nugget": 0.5 * float(g[np.argmin(h)]) if len(g) else 0.0}
    for k in range(len(kinds)):
        start[f"sill{k + 1}"] = max(top - start["nugget"], 1e-6) / len(kinds)
        for a in axes_names:
            start[f"range{k + 1}_{a}"] = (float(np.max(h[ax == axes_names.index(a)])) if np.any(ax == axes_names.index(a))
                                          else hmax) * (k + 1) / (len(kinds) + 1)
    free = [n for n in names if n not in fixed]

    def unpack(x):
        p = dict(fixed)
        p.update(zip(free, x, strict=True))
        return p

    def predict(p):
        out = np.full(len(h), p["nugget"])
        for k, kind in enumerate(kinds):
            if isotropic:
                a = np.full(len(h), p[f"range{k + 1}_major"])
            else:
                ranges = np.array([p[f"range{k + 1}_{n}"] for n in axes_names])
                a = ranges[ax]
            out += p[f"sill{k + 1}"] * (1.0 - correlation(KINDS[kind], h / a))
        return out

    # a range is bounded by twice the longest lag seen along its own axis
    axis_max = {a: float(np.max(h[ax == i])) if np.any(ax == i) else hmax for i, a in enumerate(axes_names)}

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
        res = least_squares(lambda x: sqrt_w * (predict(unpack(x)) - g), x, bounds=(lower, upper), method="trf", x_scale="jac")
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
    return VariogramModel(max(p["nugget"], 0.0), structures)
