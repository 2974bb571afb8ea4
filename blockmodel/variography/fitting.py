"""Fitting a nested variogram model to experimental variograms.

All structures share one orientation; the experimental variograms are computed along its
principal axes (major, semi, minor) and fitted jointly by weighted least squares.
"""

from __future__ import annotations

from collections.abc import Sequence
from dataclasses import dataclass

import numpy as np
from scipy.optimize import least_squares

from blockmodel.estimation.orientation import Orientation
from blockmodel.variography.experimental import ExperimentalVariogram
from blockmodel.variography.models import KINDS, Structure, VariogramModel, correlation

__all__ = [
    "FittedModel",
    "fit_variogram",
    "fit_variogram_checked",
    "principal_directions",
]


def principal_directions(orientation: Orientation) -> list[tuple[float, float]]:
    """(azimuth, plunge) in degrees of the major, semi and minor axes."""
    out = []
    for v in orientation.axes():
        if v[2] > 0:  # express each axis pointing downward or horizontal
            v = -v
        az = float(np.degrees(np.arctan2(v[0], v[1])) % 360.0)
        out.append((az, float(np.degrees(np.arcsin(np.clip(-v[2], -1, 1))))))
    return out


MIN_PAIRS = 30  # fewest pairs for a lag to be fitted (Journel & Huijbregts 1978, common practice)
POOR_FIT = 0.5  # a direction whose weighted R² is below this is reported as poorly fitted


@dataclass(frozen=True)
class FittedModel:
    """A fitted model and how well it follows each experimental variogram.

    Attributes
    ----------
    model : VariogramModel
    quality : dict label -> float
        Weighted coefficient of determination per experimental variogram (1 = exact;
        NaN where the variogram had too few lags to judge).
    lags_used, lags_dropped : int
        Lags fitted, and lags left out for holding fewer than ``MIN_PAIRS`` pairs.
    """

    model: VariogramModel
    quality: dict[str, float]
    lags_used: int
    lags_dropped: int

    def poor(self) -> dict[str, float]:
        """The directions the model follows poorly (R² below ``POOR_FIT``)."""
        return {k: v for k, v in self.quality.items() if v < POOR_FIT}


def fit_variogram(
    experimental: Sequence[tuple[ExperimentalVariogram, int | np.ndarray | None]],
    kinds: Sequence[str],
    orientation: Orientation,
    *,
    fixed: dict[str, float] | None = None,
    weighting: str = "pairs_over_distance_squared",
    extent: float | None = None,
    min_pairs: int = MIN_PAIRS,
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
    extent : float, optional, metres
        Size of the data (e.g. the diagonal of its bounding box): no range exceeds it.
        Default: twice the longest lag.
    min_pairs : int
        Lags with fewer pairs are left out.

    Returns
    -------
    VariogramModel

    Notes
    -----
    Along a unit direction d, a structure's reduced distance is
    ``h * |diag(1/a) R d|``.  Minimises ``sum_j w_j (gamma_model(h_j) - gamma_j)^2`` with
    ``w_j = N_j / h_j^2`` by default (Cressie 1985).  Each structure keeps
    major >= semi >= minor (free ranges are fitted as the major range and, for the semi and
    the minor, the fraction of the way from the lower bound up to the axis above), and every
    range lies between half the shortest lag distance and ``extent``.
    """
    return fit_variogram_checked(
        experimental,
        kinds,
        orientation,
        fixed=fixed,
        weighting=weighting,
        extent=extent,
        min_pairs=min_pairs,
    ).model


def fit_variogram_checked(
    experimental: Sequence[tuple[ExperimentalVariogram, int | np.ndarray | None]],
    kinds: Sequence[str],
    orientation: Orientation,
    *,
    fixed: dict[str, float] | None = None,
    weighting: str = "pairs_over_distance_squared",
    extent: float | None = None,
    min_pairs: int = MIN_PAIRS,
) -> FittedModel:
    """As :func:`fit_variogram`, with the fit's quality per experimental variogram."""
    model, _, quality, used, dropped = _fit(
        experimental, kinds, orientation, fixed, weighting, extent, min_pairs
    )
    return FittedModel(model, quality, used, dropped)


def _fit(experimental, kinds, orientation, fixed, weighting, extent=None, min_pairs=MIN_PAIRS):
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

    h, g, w, ax, comp, which = [], [], [], [], [], []
    axes = orientation.axes()
    dropped = 0
    for n_ev, (ev, axis) in enumerate(experimental):
        ok = (ev.pairs >= max(min_pairs, 1)) & np.isfinite(ev.value) & (ev.distance > 0)
        dropped += int(((ev.pairs > 0) & ~ok).sum())
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
        which.append(np.full(ok.sum(), n_ev))
    h, g, w, ax, comp, which = map(np.concatenate, (h, g, w, ax, comp, which))
    if len(h) < 3:
        raise ValueError(
            f"too few lags with {min_pairs} or more pairs to fit a model ({len(h)} found)"
        )
    sqrt_w = np.sqrt(w / w.mean())
    top = float(np.max(g))
    hmax = float(np.max(h))
    extent = float(extent) if extent is not None else 2.0 * hmax
    range_lo = 0.5 * float(np.min(h))
    range_hi = max(extent, 2.0 * range_lo)
    start = {"nugget": 0.5 * float(g[np.argmin(h)])}
    for k in range(len(kinds)):
        start[f"sill{k + 1}"] = max(top - start["nugget"], 1e-6) / len(kinds)
        for a in axes_names:
            along = ax == axes_names.index(a)
            start[f"range{k + 1}_{a}"] = (
                (float(np.max(h[along])) if np.any(along) else hmax) * (k + 1) / (len(kinds) + 1)
            )
    # Free parameters: nugget and sills as they are; the ranges of a structure none of whose
    # ranges is fixed as the major and, for the semi and the minor, the fraction of the way
    # from the shortest range allowed up to the axis above, so the order can never invert
    # and no range falls below that bound.
    ordered = [
        k
        for k in range(len(kinds))
        if not isotropic and not any(f"range{k + 1}_{a}" in fixed for a in axes_names)
    ]
    free = []
    for n in names:
        if n in fixed:
            continue
        if n.startswith("range") and int(n[5:].split("_")[0]) - 1 in ordered:
            axis_name = n.split("_")[1]
            free.append(n if axis_name == "major" else f"fraction{n[5:]}")
        else:
            free.append(n)

    def unpack(x):
        p = dict(fixed)
        p.update(zip(free, x, strict=True))
        for k in ordered:
            major = p[f"range{k + 1}_major"]
            semi = range_lo + (major - range_lo) * p.pop(f"fraction{k + 1}_semi")
            p[f"range{k + 1}_semi"] = semi
            p[f"range{k + 1}_minor"] = range_lo + (semi - range_lo) * p.pop(
                f"fraction{k + 1}_minor"
            )
        return p

    def predict(p):
        out = np.full(len(h), p["nugget"])
        for k, kind in enumerate(kinds):
            if isotropic:
                r = h / p[f"range{k + 1}_major"]
            else:
                ranges = np.array([p[f"range{k + 1}_{n}"] for n in axes_names])
                r = h * np.sqrt(((comp / ranges) ** 2).sum(axis=1))
            out += p[f"sill{k + 1}"] * (1.0 - correlation(KINDS[kind], r))
        return out

    def bounds(n):
        if n == "nugget" or n.startswith("sill"):
            return 0.0, np.inf
        if n.startswith("fraction"):
            return 0.0, 1.0
        return range_lo, range_hi

    lower = np.array([bounds(n)[0] for n in free])
    upper = np.array([bounds(n)[1] for n in free])

    def initial(n):
        if n.startswith("fraction"):
            k, axis_name = n.removeprefix("fraction").split("_")
            prev = "major" if axis_name == "semi" else "semi"
            above = start[f"range{k}_{prev}"] - range_lo
            return (start[f"range{k}_{axis_name}"] - range_lo) / above if above > 0 else 1.0
        return start[n]

    x0 = np.clip([initial(n) for n in free], lower + 1e-9, upper - 1e-9)
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
    fitted = predict(p)
    quality = {}
    for n_ev, (ev, _) in enumerate(experimental):
        part = which == n_ev
        label = ev.label or str(n_ev)
        if part.sum() < 3:
            quality[label] = float("nan")
            continue
        ww, gg = w[part], g[part]
        mean = np.average(gg, weights=ww)
        spread = float(np.sum(ww * (gg - mean) ** 2))
        quality[label] = (
            float(1.0 - np.sum(ww * (fitted[part] - gg) ** 2) / spread) if spread > 0 else 1.0
        )
    structures = []
    for k, kind in enumerate(kinds):
        sill = p[f"sill{k + 1}"]
        if sill <= 1e-12 * max(top, 1e-300):
            continue
        r = tuple(p[f"range{k + 1}_{a}"] for a in axes_names)
        ranges = (r[0], r[0], r[0]) if isotropic else r
        structures.append(Structure(kind, sill, ranges, orientation))
    model = VariogramModel(max(p["nugget"], 0.0), structures)
    return model, float(best.cost), quality, len(h), dropped
