"""Charts as PNG: variograms, direction maps, declustering, grade–tonnage curves, swaths
and cross-validation (plans and sections are in :mod:`blockmodel.report.maps`)."""

from __future__ import annotations

from pathlib import Path

import numpy as np

from blockmodel.report.figures import GRADE_CMAP, pyplot, save_png

__all__ = [
    "composites_figure",
    "cross_validation_figure",
    "declustering_figure",
    "direction_map_figure",
    "grade_tonnage_figure",
    "neighbourhood_figure",
    "swath_by_class_figure",
    "swath_figure",
    "variogram_figure",
]


def variogram_figure(res, path: Path, unit: str) -> None:
    """Experimental variograms along the principal axes and downhole, with the model."""
    plt = pyplot()
    from blockmodel.variography.fitting import principal_directions

    fig, axes = plt.subplots(1, 4, figsize=(16, 3.8), sharey=True)
    dirs = principal_directions(res.orientation)
    axes_vec = res.orientation.axes()
    for n, ax in enumerate(axes):
        ev = res.directional[n] if n < 3 else res.downhole
        ok = ev.pairs > 0
        ax.plot(ev.distance[ok], ev.value[ok], "o", color="#2c7fb8", label="experimental")
        for d, v, p in zip(ev.distance[ok], ev.value[ok], ev.pairs[ok], strict=True):
            ax.annotate(
                str(p), (d, v), textcoords="offset points", xytext=(0, 5), fontsize=6, ha="center"
            )
        along = axes_vec[n] if n < 3 else res.downhole_direction
        if res.model is not None and along is not None:
            hmax = max(float(np.nanmax(ev.distance[ok], initial=1.0)), 1.0) * 1.1
            h = np.linspace(0, hmax, 200)
            # the model is in grade units; draw it in the experimental variogram's units
            gam = res.model.variogram(h[:, None] * np.asarray(along)[None, :]) / res.scale
            ax.plot(h, gam, "-", color="#d95f0e", label="model")
        if res.model is not None:
            ax.axhline(res.model.nugget / res.scale, color="#d95f0e", ls=":", lw=1, label="nugget")
        title = ("major", "semi", "minor", "downhole")[n]
        if n < 3:
            title += f" (az {int(round(dirs[n][0])) % 360}, plunge {int(round(dirs[n][1]))})"
        ax.set_title(title, fontsize=9)
        ax.set_xlabel("distance (m)")
        ax.grid(alpha=0.3)
    axes[0].set_ylabel(_variogram_label(res, unit))
    axes[0].legend(fontsize=8)
    fig.suptitle(f"Variograms: {res.domain} {res.grade}; numbers are pair counts", fontsize=10)
    save_png(fig, path)


def _variogram_label(res, unit: str) -> str:
    estimator = res.directional[0].estimator
    if res.scores is not None:
        return (
            "semivariogram of normal scores"
            if estimator == "semivariogram"
            else f"{estimator} of normal scores"
        )
    return {
        "semivariogram": f"semivariogram ({unit})²",
        "correlogram": "1 − correlation",
        "pairwise_relative": "pairwise relative variogram",
    }[estimator]


def direction_map_figure(res, path: Path, unit: str) -> None:
    """Variogram value by azimuth and lag for a fan of plunges, to choose the axes."""
    plt = pyplot()
    scan = res.scan
    plunges = scan["plunges"]
    fig, axes = plt.subplots(1, len(plunges), figsize=(5 * len(plunges), 4), sharey=True)
    top = np.nanpercentile(scan["value"], 95)
    for ax, p, values in zip(np.atleast_1d(axes), plunges, scan["value"], strict=True):
        lag = np.arange(1, values.shape[1] + 1)
        im = ax.pcolormesh(
            lag, scan["azimuths"], values, cmap=GRADE_CMAP, vmin=0, vmax=top, shading="nearest"
        )
        ax.set_title(f"plunge {p:.0f}°", fontsize=9)
        ax.set_xlabel(f"lag (distance in units of {scan['lag']:g} m)")
    np.atleast_1d(axes)[0].set_ylabel("azimuth (degrees)")
    fig.colorbar(im, ax=axes, label=_variogram_label(res, unit))
    az, pl = scan["major"]
    fig.suptitle(
        f"Variogram by direction, {res.domain} {res.grade}: slowest rise at azimuth {az:.0f}, "
        f"plunge {pl:.0f} (low values = long continuity)",
        fontsize=10,
    )
    save_png(fig, path)


def declustering_figure(sizes, means, chosen, naive, path: Path, label: str, unit: str) -> None:
    """Declustered mean against cell size, with the naive mean and the chosen size marked."""
    plt = pyplot()
    fig, ax = plt.subplots(figsize=(6, 4))
    ax.plot(sizes, means, "o-", color="#2c7fb8", label="declustered mean")
    ax.axhline(naive, color="grey", ls="--", label="naive mean")
    ax.axvline(chosen, color="#d95f0e", label=f"chosen {chosen:.0f} m")
    ax.set_xlabel("cell size along x (m)")
    ax.set_ylabel(f"mean ({unit})")
    ax.set_title(f"Cell declustering: {label}")
    ax.legend()
    ax.grid(alpha=0.3)
    save_png(fig, path)


def grade_tonnage_figure(
    curves: dict[str, tuple[np.ndarray, np.ndarray, np.ndarray]], path: Path, unit: str, title: str
) -> None:
    """Tonnes (left axis, solid) and grade (right axis, dashed) against cut-off per curve;
    curves named after a class take the class's colour."""
    from blockmodel.report.figures import CLASS_COLOURS

    plt = pyplot()
    fig, ax = plt.subplots(figsize=(7, 4.5))
    ax2 = ax.twinx()
    others = plt.get_cmap("tab10").colors
    for n, (name, (cut, tonnes, grade)) in enumerate(curves.items()):
        c = "black" if name.startswith("all") else CLASS_COLOURS.get(name, others[n % 10])
        ax.plot(cut, np.asarray(tonnes) / 1e6, "-", color=c, label=f"{name} tonnes")
        ax2.plot(cut, grade, "--", color=c, label=f"{name} grade")
    ax.set_xlabel(f"cut-off ({unit})")
    ax.set_ylabel("tonnes above cut-off (Mt)")
    ax2.set_ylabel(f"mean grade above cut-off ({unit})")
    lines = ax.get_legend_handles_labels()
    lines2 = ax2.get_legend_handles_labels()
    ax.legend(
        lines[0] + lines2[0],
        lines[1] + lines2[1],
        fontsize=7,
        loc="upper left",
        bbox_to_anchor=(1.12, 1.0),
    )
    ax.grid(alpha=0.3)
    ax.set_title(title)
    save_png(fig, path)


def swath_figure(tables: dict[str, object], path: Path, grade: str, unit: str, title: str) -> None:
    """Swath plots (one per axis): kriged, nearest-sample and declustered composite means per slice, with composite counts."""
    from matplotlib.ticker import MaxNLocator

    plt = pyplot()
    fig, axes = plt.subplots(1, len(tables), figsize=(5.6 * len(tables), 4.2))
    for ax, (axis, t) in zip(np.atleast_1d(axes), tables.items(), strict=True):
        ax.xaxis.set_major_locator(MaxNLocator(nbins=4))
        ax.plot(t["centre"], t["kriged"], "-o", ms=3, label="kriged")
        ax.plot(t["centre"], t["nearest"], "-s", ms=3, label="nearest sample")
        ax.plot(t["centre"], t["composites"], "-^", ms=3, label="declustered composites")
        ax2 = ax.twinx()
        ax2.bar(
            t["centre"],
            t["composite_count"],
            width=(t["centre"].iloc[1] - t["centre"].iloc[0]) * 0.8 if len(t) > 1 else 1,
            color="grey",
            alpha=0.2,
        )
        ax2.set_ylabel("composites per slice", fontsize=8)
        ax.set_xlabel(f"{axis} (m)")
        ax.set_ylabel(f"{grade} ({unit})")
        ax.grid(alpha=0.3)
    np.atleast_1d(axes)[0].legend(fontsize=7)
    fig.suptitle(title, fontsize=10)
    fig.tight_layout(w_pad=2.5)
    save_png(fig, path)


def cross_validation_figure(cv, path: Path, grade: str, unit: str, title: str) -> None:
    """True against re-estimated grades of the composites left out, with the 1:1 line and the regression."""
    plt = pyplot()
    t = cv.table.dropna(subset=["true", "estimate"])
    fig, ax = plt.subplots(figsize=(5, 5))
    ax.scatter(t["estimate"], t["true"], s=4, alpha=0.4, color="#2c7fb8")
    if len(t) == 0:
        ax.text(0.5, 0.5, "no composite could be re-estimated", ha="center", transform=ax.transAxes)
    top = float(max(t["true"].quantile(0.995), t["estimate"].max())) if len(t) else 1.0
    top = top if np.isfinite(top) and top > 0 else 1.0
    ax.plot([0, top], [0, top], "k--", lw=1, label="1:1")
    ax.set_xlim(0, top)
    ax.set_ylim(0, top)
    ax.set_xlabel(f"estimate ({unit})")
    ax.set_ylabel(f"true composite {grade} ({unit})")
    ax.set_title(
        f"{title}\nslope {cv.slope_true_on_estimate:.2f}, r {cv.correlation:.2f}", fontsize=9
    )
    ax.legend()
    ax.grid(alpha=0.3)
    save_png(fig, path)


def neighbourhood_figure(rows, labels: dict, path: Path, title: str, note: str) -> None:
    """Slope of regression and kriging efficiency of one test block against each sweep's
    settings (one panel per sweep, the project's setting marked), with ``note`` (the
    block, its place and the drill spacing) in the last panel.

    Parameters
    ----------
    rows : DataFrame
        The block's rows of the analysis table (``sweep, setting, value, current, slope,
        efficiency``).
    labels : dict of sweep name to axis label
    """
    plt = pyplot()
    sweeps = list(dict.fromkeys(rows["sweep"]))
    fig, axes = plt.subplots(2, 4, figsize=(15, 6.8))
    flat = axes.ravel()
    for ax, sweep in zip(flat, sweeps, strict=False):
        part = rows[rows["sweep"] == sweep]
        x = np.arange(len(part))
        ax.plot(x, part["slope"], "-o", ms=4, color="#2c7fb8", label="slope of regression")
        ax.plot(x, part["efficiency"], "--s", ms=4, color="#d95f0e", label="kriging efficiency")
        now = np.flatnonzero(part["current"].to_numpy())
        for i in now:
            ax.axvline(i, color="#444444", ls=":", lw=1.2)
            ax.annotate(
                "project",
                (i, 1.0),
                xycoords=("data", "axes fraction"),
                ha="center",
                va="bottom",
                fontsize=8,
                color="#444444",
            )
        ax.set_xticks(x)
        ax.set_xticklabels(
            part["setting"],
            rotation=45 if len(part) > 7 else 0,
            fontsize=8,
            ha="right" if len(part) > 7 else "center",
        )
        ax.set_xlabel(labels[sweep], fontsize=9)
        ax.axhline(1.0, color="grey", lw=0.6)
        ax.axhline(0.0, color="grey", lw=0.6)
        ax.grid(alpha=0.3)
    for ax in axes[:, 0]:
        ax.set_ylabel("slope / efficiency (ratio)")
    flat[0].legend(fontsize=8, loc="lower right")
    for ax in flat[len(sweeps) :]:
        ax.axis("off")
    flat[-1].text(0.0, 1.0, note, va="top", ha="left", fontsize=9, wrap=True)
    fig.suptitle(title, fontsize=11)
    fig.tight_layout()
    save_png(fig, path)


def composites_figure(
    values: np.ndarray,
    weights: np.ndarray,
    cap,
    path: Path,
    title: str,
    unit: str,
) -> None:
    """Histogram (log grade axis, declustering-weighted) and log-probability plot of one
    domain's composite grades before capping, with the cap and the metal it removes.

    Parameters
    ----------
    values : (n,) float64, grade units, uncapped
    weights : (n,) float64, declustering weights
    cap : CappingSummary or None
    """
    from scipy.stats import norm

    plt = pyplot()
    ok = np.isfinite(values) & (values > 0)
    v, w = values[ok], weights[ok]
    fig, (left, right) = plt.subplots(1, 2, figsize=(12, 4.2))
    bins = np.logspace(np.log10(v.min()), np.log10(v.max()), 40) if len(v) > 1 else 10
    left.hist(v, bins=bins, weights=w / w.sum() * 100, color="#2c7fb8", alpha=0.8)
    left.set_xscale("log")
    left.set_xlabel(f"grade ({unit}, log scale)")
    left.set_ylabel("share of composites, declustered (%)")
    order = np.argsort(v)
    cdf = (np.cumsum(w[order]) - 0.5 * w[order]) / w.sum()
    right.plot(v[order], norm.ppf(cdf), ".", ms=3, color="#2c7fb8")
    right.set_xscale("log")
    probs = np.array([0.001, 0.01, 0.1, 0.5, 0.9, 0.99, 0.999])
    right.set_yticks(norm.ppf(probs))
    right.set_yticklabels([f"{100 * p:g}" for p in probs])
    right.set_xlabel(f"grade ({unit}, log scale)")
    right.set_ylabel("cumulative probability (%), declustered")
    for ax in (left, right):
        ax.grid(alpha=0.3, which="both")
        if cap is not None:
            ax.axvline(cap.limit, color="#d95f0e", lw=1.5)
    if cap is not None:
        right.annotate(
            f"cap {cap.limit:.3g} {unit}: {cap.capped} of {cap.composites} composites cut, "
            f"{cap.metal_removed_percent:.1f} % of the metal removed",
            (0.02, 0.95),
            xycoords="axes fraction",
            fontsize=8,
            va="top",
            color="#d95f0e",
        )
    fig.suptitle(title, fontsize=10)
    save_png(fig, path)


def swath_by_class_figure(
    by_class: dict[str, dict], path: Path, grade: str, unit: str, title: str
) -> None:
    """Swaths of the kriged blocks of each class (in the class colours) against the
    declustered composites, one panel per axis."""
    from matplotlib.ticker import MaxNLocator

    from blockmodel.report.figures import CLASS_COLOURS

    plt = pyplot()
    axes_names = list(next(iter(by_class.values())))
    fig, axes = plt.subplots(1, len(axes_names), figsize=(5.6 * len(axes_names), 4.2))
    for ax, axis in zip(np.atleast_1d(axes), axes_names, strict=True):
        ax.xaxis.set_major_locator(MaxNLocator(nbins=4))
        first = None
        for cls, tables in by_class.items():
            t = tables[axis]
            first = t if first is None else first
            ax.plot(
                t["centre"],
                t["kriged"],
                "-o",
                ms=3,
                label=f"kriged, {cls}",
                color=CLASS_COLOURS.get(cls, "#555555"),
            )
        ax.plot(
            first["centre"],
            first["composites"],
            "--",
            color="black",
            lw=1,
            label="declustered composites",
        )
        ax.set_xlabel(f"{axis} (m)")
        ax.set_ylabel(f"{grade} ({unit})")
        ax.grid(alpha=0.3)
    np.atleast_1d(axes)[0].legend(fontsize=7)
    fig.suptitle(title, fontsize=10)
    fig.tight_layout(w_pad=2.5)
    save_png(fig, path)
