"""Plans and sections of the block model as PNG, with composites drawn as hole traces,
north arrow and scale bar; colouring by grade (continuous) or by class and domain
(categorical)."""

from __future__ import annotations

from pathlib import Path

import numpy as np

from blockmodel.report.figures import CLASS_COLOURS, GRADE_CMAP, pyplot, save_png

__all__ = [
    "collar_plan_figure",
    "column_unit",
    "composite_segments",
    "per_block",
    "plan_figure",
    "section_figure",
]


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
    plt = pyplot()
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
    save_png(fig, path)


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
    plt = pyplot()
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
    save_png(fig, path)


def collar_plan_figure(collars, composites, spacing: dict[str, float], path: Path) -> None:
    """Plan of the drilling: collars, hole traces (from the composites) coloured by domain,
    and the drill spacing of each domain in the legend.

    Parameters
    ----------
    collars : DataFrame ``hole, x, y``
    composites : DataFrame ``hole, from, x, y, domain`` (and ``source``: point samples are
        marked, not joined into traces)
    spacing : dict of domain to drill spacing, metres
    """
    plt = pyplot()
    fig, ax = plt.subplots(figsize=(7.5, 7.5))
    ordered = composites.sort_values(["hole", "from"], kind="stable")
    points = ordered["source"] == "points" if "source" in ordered else False
    for _, part in ordered[~points].groupby("hole", sort=False):
        ax.plot(part["x"], part["y"], "-", color="#999999", lw=0.6, zorder=1)
    palette = ["#0072B2", "#E69F00", "#009E73", "#CC79A7", "#56B4E9", "#D55E00"]
    for n, (name, part) in enumerate(ordered.groupby("domain", sort=False)):
        if name not in spacing:
            continue
        gap = spacing[name]
        label = f"{name} (drill spacing {gap:.0f} m)" if np.isfinite(gap) else name
        ax.plot(part["x"], part["y"], ".", ms=2, color=palette[n % len(palette)], label=label)
    if len(collars):
        ax.plot(collars["x"], collars["y"], "k+", ms=5, label="collars")
    if np.any(points):
        ax.plot(*ordered.loc[points, ["x", "y"]].to_numpy().T, "kx", ms=3, label="point samples")
    ax.set_aspect("equal")
    ax.set_xlabel("east (m)")
    ax.set_ylabel("north (m)")
    ax.grid(alpha=0.3)
    ax.legend(fontsize=8, loc="best")
    ext = ax.axis()
    _north_and_scale(ax, ext)
    ax.set_title("Collars and hole traces; composites coloured by domain", fontsize=10)
    save_png(fig, path)
