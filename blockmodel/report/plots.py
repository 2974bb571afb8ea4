"""Figures as PNG (matplotlib, loaded lazily, Agg backend): variograms, declustering,
grade-tonnage curves, swaths, cross-validation, plans and sections.

Grades use the perceptually uniform 'cividis' colour map; classes use the palette below.
"""

from __future__ import annotations

from pathlib import Path

import numpy as np

__all__ = ["CLASS_COLOURS", "GRADE_CMAP"]

GRADE_CMAP = "cividis"
CLASS_COLOURS = {
    "Measured": "#1b7837",
    "Indicated": "#5aae61",
    "Inferred": "#f4a582",
    "Unestimated": "#bababa",
}


def _plt():
    import matplotlib

    matplotlib.use("Agg", force=True)
    import matplotlib.pyplot as plt

    return plt


PNG_SOFTWARE = "blockmodel"  # PNG text chunk "Software": marks the images the tool wrote


def _save(fig, path: Path) -> None:
    fig.savefig(path, dpi=110, bbox_inches="tight", metadata={"Software": PNG_SOFTWARE})
    _plt().close(fig)


def variogram_figure(res, path: Path, unit: str) -> None:
    """Experimental variograms along the principal axes and downhole, with the model."""
    plt = _plt()
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
        if res.model is not None and n < 3:
            hmax = max(float(np.nanmax(ev.distance[ok], initial=1.0)), 1.0) * 1.1
            h = np.linspace(0, hmax, 200)
            # the model is in grade units; draw it in the experimental variogram's units
            gam = res.model.variogram(h[:, None] * axes_vec[n][None, :]) / res.scale
            ax.plot(h, gam, "-", color="#d95f0e", label="model")
        title = ("major", "semi", "minor", "downhole")[n]
        if n < 3:
            title += f" (az {dirs[n][0]:.0f}, plunge {dirs[n][1]:.0f})"
        ax.set_title(title, fontsize=9)
        ax.set_xlabel("distance (m)")
        ax.grid(alpha=0.3)
    axes[0].set_ylabel(_variogram_label(res, unit))
    axes[0].legend(fontsize=8)
    fig.suptitle(f"Variograms: {res.domain} {res.grade}; numbers are pair counts", fontsize=10)
    _save(fig, path)


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
    plt = _plt()
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
    _save(fig, path)


def declustering_figure(sizes, means, chosen, naive, path: Path, label: str, unit: str) -> None:
    plt = _plt()
    fig, ax = plt.subplots(figsize=(6, 4))
    ax.plot(sizes, means, "o-", color="#2c7fb8", label="declustered mean")
    ax.axhline(naive, color="grey", ls="--", label="naive mean")
    ax.axvline(chosen, color="#d95f0e", label=f"chosen {chosen:.0f} m")
    ax.set_xlabel("cell size along x (m)")
    ax.set_ylabel(f"mean ({unit})")
    ax.set_title(f"Cell declustering: {label}")
    ax.legend()
    ax.grid(alpha=0.3)
    _save(fig, path)


def grade_tonnage_figure(
    curves: dict[str, tuple[np.ndarray, np.ndarray, np.ndarray]], path: Path, unit: str, title: str
) -> None:
    """Tonnes (left axis, solid) and grade (right axis, dashed) against cut-off per curve."""
    plt = _plt()
    fig, ax = plt.subplots(figsize=(7, 4.5))
    ax2 = ax.twinx()
    colours = plt.get_cmap("tab10").colors
    for n, (name, (cut, tonnes, grade)) in enumerate(curves.items()):
        c = colours[n % 10]
        ax.plot(cut, np.asarray(tonnes) / 1e6, "-", color=c, label=f"{name} tonnes")
        ax2.plot(cut, grade, "--", color=c, label=f"{name} grade")
    ax.set_xlabel(f"cut-off ({unit})")
    ax.set_ylabel("tonnes above cut-off (Mt)")
    ax2.set_ylabel(f"mean grade above cut-off ({unit})")
    lines = ax.get_legend_handles_labels()
    lines2 = ax2.get_legend_handles_labels()
    ax.legend(lines[0] + lines2[0], lines[1] + lines2[1], fontsize=7, loc="upper right")
    ax.grid(alpha=0.3)
    ax.set_title(title)
    _save(fig, path)


def swath_figure(tables: dict[str, object], path: Path, grade: str, unit: str, title: str) -> None:
    plt = _plt()
    fig, axes = plt.subplots(1, len(tables), figsize=(5 * len(tables), 3.8))
    for ax, (axis, t) in zip(np.atleast_1d(axes), tables.items(), strict=True):
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
    _save(fig, path)


def cross_validation_figure(cv, path: Path, grade: str, unit: str, title: str) -> None:
    plt = _plt()
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
    _save(fig, path)


def _norm(values, vmin=None, vmax=None):
    v = np.asarray(values, dtype=float)
    lo = np.nanpercentile(v, 1) if vmin is None else vmin
    hi = np.nanpercentile(v, 99) if vmax is None else vmax
    return lo, max(hi, lo + 1e-12)


def composite_segments(composites) -> tuple[np.ndarray, np.ndarray]:
    """Start and end (n, 3) of each composite along its hole: the mid-point plus or minus
    half its length along the local hole direction (from its neighbours in the hole)."""
    if {"hole", "from"} <= set(composites.columns):  # neighbours down each hole, in order
        order = np.lexsort((composites["from"].to_numpy(float), composites["hole"].to_numpy()))
        start, end = composite_segments(composites.iloc[order].drop(columns="from"))
        back = np.empty_like(order)
        back[order] = np.arange(len(order))
        return start[back], end[back]
    mid = composites[["x", "y", "z"]].to_numpy(float)
    half = composites["length"].to_numpy(float)[:, None] / 2 if "length" in composites else 1.0
    holes = composites["hole"].to_numpy() if "hole" in composites else np.arange(len(mid))
    direction = np.tile([0.0, 0.0, -1.0], (len(mid), 1))
    same_next = np.r_[holes[1:] == holes[:-1], False]
    same_prev = np.r_[False, holes[1:] == holes[:-1]]
    nxt = np.where(same_next[:, None], np.roll(mid, -1, axis=0), mid)
    prv = np.where(same_prev[:, None], np.roll(mid, 1, axis=0), mid)
    step = nxt - prv
    norm = np.linalg.norm(step, axis=1)
    ok = norm > 0
    direction[ok] = step[ok] / norm[ok, None]
    return mid - direction * half, mid + direction * half


def _draw_segments(ax, start, end, values, lo, hi, label):
    from matplotlib.collections import LineCollection

    lines = LineCollection(
        np.stack([start, end], axis=1), cmap=GRADE_CMAP, linewidths=4, label=label
    )
    lines.set_array(np.asarray(values, dtype=float))
    lines.set_clim(lo, hi)
    ax.add_collection(lines)
    # thin dark outline so bars stand out from blocks of the same colour
    outline = LineCollection(
        np.stack([start, end], axis=1), colors="k", linewidths=5.5, zorder=lines.get_zorder() - 0.1
    )
    ax.add_collection(outline)


def per_block(blocks, column: str):
    """One row per block: tonnage-weighted mean of ``column`` over its domain rows.

    Returns a DataFrame with ``i, j, k, x, y, z`` and the column (NaN where unestimated).
    """
    import pandas as pd

    v = blocks[column].to_numpy(float)
    t = blocks["tonnes"].to_numpy(float)
    ok = np.isfinite(v)
    frame = pd.DataFrame(
        {
            "i": blocks["i"].to_numpy(),
            "j": blocks["j"].to_numpy(),
            "k": blocks["k"].to_numpy(),
            "x": blocks["x"].to_numpy(),
            "y": blocks["y"].to_numpy(),
            "z": blocks["z"].to_numpy(),
            "_w": np.where(ok, t, 0.0),
            "_s": np.where(ok, t * np.nan_to_num(v), 0.0),
        }
    )
    g = (
        frame.groupby(["i", "j", "k"], sort=True)
        .agg(
            x=("x", "first"), y=("y", "first"), z=("z", "first"), _w=("_w", "sum"), _s=("_s", "sum")
        )
        .reset_index()
    )
    with np.errstate(invalid="ignore", divide="ignore"):
        g[column] = np.where(g["_w"] > 0, g["_s"] / g["_w"], np.nan)
    return g.drop(columns=["_w", "_s"])


DOMAIN_COLOURS = ("#4477aa", "#ee6677", "#228833", "#ccbb44", "#66ccee", "#aa3377", "#bbbbbb")


def _is_categorical(blocks, column: str) -> bool:
    return blocks[column].dtype.kind in "OUSb" or str(blocks[column].dtype) == "category"


def _colouring(blocks, column: str, vmin=None, vmax=None):
    """Per-block values ready to draw, and how to colour them.

    Numeric columns: the tonnage-weighted mean per block, the grade colour map, limits at
    the 1st and 99th percentiles.  Categorical columns (class, domain): the category holding
    most of the block's tonnes, as a number, with one colour per category (classes in
    confidence order, in the class palette).

    Returns
    -------
    per-block DataFrame, and a dict with ``cmap, vmin, vmax, ticks, labels``.
    """
    if not _is_categorical(blocks, column):
        lo, hi = _norm(blocks[column], vmin, vmax)
        return per_block(blocks, column), {
            "cmap": GRADE_CMAP, "vmin": lo, "vmax": hi, "ticks": None, "labels": None
        }  # fmt: skip
    from matplotlib.colors import ListedColormap

    values = blocks[column].astype(str)
    present = set(values)
    if column == "class":
        names = [n for n in CLASS_COLOURS if n in present] + sorted(present - set(CLASS_COLOURS))
        colours = [CLASS_COLOURS.get(n, "#7f7f7f") for n in names]
    else:
        names = list(dict.fromkeys(values))  # first-seen order: the project's domain order
        colours = [DOMAIN_COLOURS[n % len(DOMAIN_COLOURS)] for n in range(len(names))]
    codes = values.map({n: i for i, n in enumerate(names)}).to_numpy(float)
    order = np.argsort(-blocks["tonnes"].to_numpy(float), kind="stable")
    frame = blocks.iloc[order][["i", "j", "k", "x", "y", "z"]].assign(**{column: codes[order]})
    frame = frame.drop_duplicates(["i", "j", "k"]).sort_values(["k", "j", "i"])
    return frame.reset_index(drop=True), {
        "cmap": ListedColormap(colours),
        "vmin": -0.5,
        "vmax": len(names) - 0.5,
        "ticks": list(range(len(names))),
        "labels": names,
    }


def column_unit(column: str, grades: dict[str, str]) -> str:
    """The unit of a block-model column: a grade's unit, its square for the kriging
    variance, metres for distances, nothing for counts, ratios and labels."""
    grade, _, what = column.partition("_")
    if grade not in grades:
        return {"density": "t/m3", "tonnes": "t", "x": "m", "y": "m", "z": "m"}.get(column, "")
    unit = grades[grade]
    if what in ("", "nearest", "inverse_distance"):
        return unit
    if what == "variance":
        return f"({unit})²"
    return "m" if what == "distance" else ""


def _colour_bar(fig, mappable, ax, style, label: str) -> None:
    bar = fig.colorbar(mappable, ax=ax, shrink=0.8, label=label, ticks=style["ticks"])
    if style["labels"] is not None:
        bar.ax.set_yticklabels(style["labels"])


def plan_figure(
    blocks,
    grid,
    column: str,
    elevation: float,
    path: Path,
    unit: str,
    composites=None,
    tolerance: float | None = None,
    vmin=None,
    vmax=None,
) -> None:
    """Horizontal plan of one block level, with composites within ``tolerance`` metres."""
    plt = _plt()
    k = int(np.floor((elevation - grid.origin[2]) / grid.block_size[2]))
    table, style = _colouring(blocks, column, vmin, vmax)
    level = table[table["k"] == k]
    img = np.full((grid.shape[1], grid.shape[0]), np.nan)
    img[level["j"].to_numpy(), level["i"].to_numpy()] = level[column].to_numpy()
    lo, hi = style["vmin"], style["vmax"]
    ox, oy = grid.origin[0], grid.origin[1]
    ext = (ox, ox + grid.shape[0] * grid.block_size[0], oy, oy + grid.shape[1] * grid.block_size[1])
    fig, ax = plt.subplots(figsize=(7, 7))
    im = ax.imshow(
        img,
        origin="lower",
        extent=ext,
        cmap=style["cmap"],
        vmin=lo,
        vmax=hi,
        interpolation="nearest",
    )
    g = column.split("_")[0]
    if composites is not None and g in composites and style["labels"] is None:
        tol = tolerance if tolerance is not None else grid.block_size[2]
        z_c = grid.origin[2] + (k + 0.5) * grid.block_size[2]
        start, end = composite_segments(composites)
        near = np.abs(composites["z"].to_numpy(float) - z_c) <= tol
        _draw_segments(
            ax,
            start[near, :2],
            end[near, :2],
            composites[g].to_numpy()[near],
            lo,
            hi,
            f"composites within {tol:g} m",
        )
        ax.legend(fontsize=8, loc="lower right")
    _colour_bar(fig, im, ax, style, f"{column} ({unit})" if unit else column)
    _north_and_scale(ax, ext)
    ax.set_xlabel("east (m)")
    ax.set_ylabel("north (m)")
    ax.tick_params(axis="x", labelrotation=30)
    ax.set_title(
        f"Plan at elevation {grid.origin[2] + (k + 0.5) * grid.block_size[2]:.1f} m: {column}"
    )
    ax.ticklabel_format(useOffset=False, style="plain")
    _save(fig, path)


def _nice_length(approx: float) -> float:
    """1, 2 or 5 times a power of ten, at most ``approx``."""
    power = 10 ** np.floor(np.log10(approx))
    return float(max(m * power for m in (1, 2, 5) if m * power <= approx))


def _north_and_scale(ax, ext) -> None:
    w = ext[1] - ext[0]
    h = ext[3] - ext[2]
    x0, y0 = ext[0] + 0.05 * w, ext[2] + 0.05 * h
    bar = _nice_length(w / 5)
    ax.plot([x0, x0 + bar], [y0, y0], "k-", lw=3)
    ax.text(x0 + bar / 2, y0 + 0.015 * h, f"{bar:.0f} m", ha="center", fontsize=8)
    ax.annotate(
        "N",
        xy=(ext[1] - 0.07 * w, ext[3] - 0.05 * h),
        xytext=(ext[1] - 0.07 * w, ext[3] - 0.15 * h),
        arrowprops={"arrowstyle": "->", "lw": 1.5},
        ha="center",
        fontsize=10,
        weight="bold",
    )


def section_figure(
    blocks,
    grid,
    column: str,
    point,
    azimuth: float,
    width: float,
    path: Path,
    unit: str,
    composites=None,
    vmin=None,
    vmax=None,
) -> None:
    """Vertical section along ``azimuth`` through ``point``: blocks within half the width,
    and composites within ``width / 2`` of the section plane drawn at their positions."""
    plt = _plt()
    from matplotlib.collections import PatchCollection
    from matplotlib.patches import Rectangle

    blocks, style = _colouring(blocks, column, vmin, vmax)
    az = np.radians(azimuth)
    along = np.array([np.sin(az), np.cos(az)])
    across = np.array([np.cos(az), -np.sin(az)])
    rel = blocks[["x", "y"]].to_numpy() - np.asarray(point)[:2]
    near = np.abs(rel @ across) <= width / 2
    b = blocks[near & np.isfinite(blocks[column])]
    s = rel[near & np.isfinite(blocks[column]).to_numpy()] @ along
    lo, hi = style["vmin"], style["vmax"]
    fig, ax = plt.subplots(figsize=(9, 6))
    step = abs(grid.block_size[0] * along[0]) + abs(grid.block_size[1] * along[1])
    patches = [
        Rectangle((si - step / 2, zi - grid.block_size[2] / 2), step, grid.block_size[2])
        for si, zi in zip(s, b["z"], strict=True)
    ]
    pc = PatchCollection(patches, cmap=style["cmap"])
    pc.set_array(b[column].to_numpy())
    pc.set_clim(lo, hi)
    ax.add_collection(pc)
    g = column.split("_")[0]
    if composites is not None and len(composites) and g in composites and style["labels"] is None:
        crel = composites[["x", "y"]].to_numpy() - np.asarray(point)[:2]
        cn = np.abs(crel @ across) <= width / 2
        start, end = composite_segments(composites)

        def project(p):
            return np.column_stack([(p[:, :2] - np.asarray(point)[:2]) @ along, p[:, 2]])

        _draw_segments(
            ax,
            project(start[cn]),
            project(end[cn]),
            composites[g].to_numpy()[cn],
            lo,
            hi,
            f"composites within {width / 2:g} m",
        )
        ax.legend(fontsize=8, loc="lower left")
    _colour_bar(fig, pc, ax, style, f"{column} ({unit})" if unit else column)
    ax.autoscale()
    ax.set_aspect("equal")
    x0, x1 = ax.get_xlim()
    y0, y1 = ax.get_ylim()
    bar = 10 ** np.floor(np.log10((x1 - x0) / 4))
    ax.plot(
        [x0 + 0.05 * (x1 - x0), x0 + 0.05 * (x1 - x0) + bar],
        [y1 - 0.06 * (y1 - y0)] * 2,
        "k-",
        lw=3,
    )
    ax.text(
        x0 + 0.05 * (x1 - x0) + bar / 2,
        y1 - 0.045 * (y1 - y0),
        f"{bar:.0f} m",
        ha="center",
        fontsize=8,
    )
    ax.set_xlabel(f"distance along azimuth {azimuth:.0f} from ({point[0]:.0f}, {point[1]:.0f}) (m)")
    ax.set_ylabel("elevation (m)")
    ax.set_title(f"Section along {azimuth:.0f}°, width {width:.0f} m: {column}")
    ax.grid(alpha=0.2)
    _save(fig, path)
