"""Grade–tonnage tables (tonnes, mean grade and metal above cut-offs, per domain and class)
and the statement table drawn from them at each domain's reporting cut-off; classes
always in confidence order."""

from __future__ import annotations

from collections.abc import Sequence

import numpy as np
import pandas as pd

from blockmodel.config.data_files import metal_units

__all__ = [
    "CONFIDENCE",
    "STATEMENT_ROUNDING",
    "grade_tonnage",
    "grade_tonnage_pivot",
    "metal_units",
    "round_significant",
    "rounded_statement",
    "significant_text",
    "statement",
]

CONFIDENCE = ("Measured", "Indicated", "Inferred")  # classes, most confident first


def grade_tonnage(
    table: pd.DataFrame,
    grade: str,
    grade_unit: str,
    cutoffs: Sequence[float],
    *,
    class_column: str = "class",
    class_order: Sequence[str] = CONFIDENCE,
    metal_unit: str | None = None,
) -> pd.DataFrame:
    """Tonnes, grade and metal at or above each cut-off, per domain and class, with totals.

    Parameters
    ----------
    table : DataFrame
        Block model rows with ``domain, tonnes``, the grade and the class column.
    grade : str
    grade_unit : str
    cutoffs : sequence of float, grade units, increasing
    class_column : str
    class_order : sequence of str
        Classes in confidence order (most confident first); others follow by name.
    metal_unit : str, optional
        The metal unit instead of the grade unit's (:func:`metal_units`).

    Returns
    -------
    DataFrame
        Columns ``domain, class, cutoff, tonnes, grade, metal, metal_unit, note`` (one row per
        metal unit), with ``all`` rows for totals over domains, classes or both.  Blocks
        whose grade was not estimated are left out.  ``grade`` is empty only where no tonnes
        lie above the cut-off, and ``note`` then says so.
    """
    g = table[grade].to_numpy(float)
    est = np.isfinite(g)
    base = pd.DataFrame(
        {
            "domain": table["domain"].to_numpy()[est],
            "class": table[class_column].to_numpy()[est] if class_column in table else "all",
            "tonnes": table["tonnes"].to_numpy(float)[est],
            "g": g[est],
        }
    )
    units = metal_units(grade_unit, metal_unit)
    rows = []
    groups = [("all", "all", np.ones(len(base), dtype=bool))]
    for dom in pd.unique(base["domain"]):
        groups.append((dom, "all", (base["domain"] == dom).to_numpy()))
    present = list(pd.unique(base["class"]))
    ordered = [c for c in class_order if c in present] + sorted(
        c for c in present if c not in class_order
    )
    for cls in ordered:
        groups.append(("all", cls, (base["class"] == cls).to_numpy()))
        for dom in pd.unique(base["domain"]):
            groups.append((dom, cls, ((base["domain"] == dom) & (base["class"] == cls)).to_numpy()))
    t_all, g_all = base["tonnes"].to_numpy(), base["g"].to_numpy()
    for dom, cls, mask in groups:
        t, v = t_all[mask], g_all[mask]
        for c in cutoffs:
            # at a cut-off of zero or below every estimated block counts, including the few
            # that kriging puts below zero, so the row equals the model's estimated tonnes
            above = v >= c if c > 0 else np.ones(len(v), dtype=bool)
            tonnes = float(t[above].sum())
            gram_units = float(t[above] @ v[above])
            mean = gram_units / tonnes if tonnes > 0 else float("nan")
            note = "" if tonnes > 0 else "no tonnes at or above this cut-off"
            for unit, factor in units:
                rows.append((dom, cls, float(c), tonnes, mean, gram_units * factor, unit, note))
    columns = ["domain", "class", "cutoff", "tonnes", "grade", "metal", "metal_unit", "note"]
    return pd.DataFrame(rows, columns=columns)


def statement(
    gt: pd.DataFrame,
    grade_unit: str,
    cutoffs: dict[str, float],
    class_order: Sequence[str] = CONFIDENCE,
    *,
    metal_unit: str | None = None,
) -> pd.DataFrame:
    """The statement table of one grade, unrounded: per domain at its reporting cut-off,
    one row per class in confidence order with ``Measured + Indicated`` after Indicated
    (when both exist), then the domain's total; then the same over all domains (each at
    its own cut-off).

    Parameters
    ----------
    gt : DataFrame
        A table from :func:`grade_tonnage` holding every domain's reporting cut-off.
    grade_unit : str
    cutoffs : dict of domain to cut-off grade
    class_order : sequence of str
    metal_unit : str, optional
        As for :func:`grade_tonnage`.

    Returns
    -------
    DataFrame with ``domain, class, cutoff, tonnes, grade`` and one ``metal (UNIT)``
    column per metal unit; grade is tonnage-weighted (metal over tonnes).
    """
    first = gt[gt["metal_unit"] == metal_units(grade_unit, metal_unit)[0][0]]
    rows = []
    for domain, cut in cutoffs.items():
        at = first[(first["domain"] == domain) & np.isclose(first["cutoff"], cut)]
        if at.empty:
            raise ValueError(f"the grade-tonnage table has no cut-off {cut:g} for '{domain}'")
        by_class = {c: r for c, r in zip(at["class"], at.itertuples(), strict=True)}
        present = [c for c in by_class if c != "all"]
        ordered = [c for c in class_order if c in present] + sorted(
            c for c in present if c not in class_order
        )
        for cls in ordered:
            rows.append(
                (domain, cls, cut, by_class[cls].tonnes, by_class[cls].tonnes * _g(by_class[cls]))
            )
            if cls == "Indicated" and "Measured" in by_class:
                m, i = by_class["Measured"], by_class["Indicated"]
                rows.append(
                    (
                        domain,
                        "Measured + Indicated",
                        cut,
                        m.tonnes + i.tonnes,
                        m.tonnes * _g(m) + i.tonnes * _g(i),
                    )
                )
        total = by_class["all"]
        rows.append((domain, "Total", cut, total.tonnes, total.tonnes * _g(total)))
    frame = pd.DataFrame(rows, columns=["domain", "class", "cutoff", "tonnes", "grade_tonnes"])
    overall = frame.groupby("class", sort=False)[["tonnes", "grade_tonnes"]].sum().reset_index()
    overall.insert(0, "domain", "all domains")
    overall.insert(2, "cutoff", np.nan)
    frame = pd.concat([frame, overall], ignore_index=True)
    with np.errstate(invalid="ignore", divide="ignore"):
        frame["grade"] = np.where(
            frame["tonnes"] > 0, frame["grade_tonnes"] / frame["tonnes"], np.nan
        )
    for u, factor in metal_units(grade_unit, metal_unit):
        frame[f"metal ({u})"] = frame["grade_tonnes"] * factor
    return frame.drop(columns="grade_tonnes")


def _g(row) -> float:
    """A grade–tonnage row's grade, zero where it holds no tonnes."""
    return 0.0 if not row.tonnes > 0 else float(row.grade)


def round_significant(values, figures: int = 3, *, finest: float = 0.0) -> np.ndarray:
    """``values`` rounded to ``figures`` significant figures, never to a step finer than
    ``finest`` (e.g. tonnes to no finer than 1,000 t)."""
    v = np.asarray(values, dtype=np.float64)
    out = np.full(v.shape, np.nan)
    ok = np.isfinite(v) & (v != 0)
    magnitude = np.floor(np.log10(np.abs(v[ok])))
    step = 10.0 ** (magnitude - figures + 1)
    if finest > 0:
        step = np.maximum(step, finest)
    out[ok] = np.round(v[ok] / step) * step
    out[np.isfinite(v) & (v == 0)] = 0.0
    return out


STATEMENT_ROUNDING = (
    "Tonnes, grades and metal rounded to three significant figures (tonnes to no finer than "
    "1,000 t) to reflect the precision of an estimate; totals may not add exactly because "
    "of rounding. Unrounded values: statement.csv."
)


def rounded_statement(frame: pd.DataFrame) -> pd.DataFrame:
    """The statement as read in a report: numbers rounded (:data:`STATEMENT_ROUNDING`)
    and written with thousands separators and no false decimals."""
    out = frame[["domain", "class"]].copy()
    out["cut-off"] = ["" if not np.isfinite(c) else f"{c:g}" for c in frame["cutoff"]]
    out["tonnes"] = significant_text(frame["tonnes"], finest=1000.0)
    out["grade"] = significant_text(frame["grade"])
    for c in frame.columns:
        if c.startswith("metal"):
            out[c] = significant_text(frame[c])
    return out


def significant_text(values, figures: int = 3, *, finest: float = 0.0) -> list[str]:
    """``values`` rounded as :func:`round_significant` rounds them, written with thousands
    separators and only the decimals the rounding leaves (e.g. 17.2, 711,000, 0.002; a
    missing value as a dash)."""
    return [_plain(v) for v in round_significant(values, figures, finest=finest)]


def _plain(v: float) -> str:
    """A rounded number with thousands separators and only the decimals it has."""
    if not np.isfinite(v):
        return "–"
    if v == int(v):
        return f"{int(v):,}"
    text = f"{v:.6f}".rstrip("0")
    whole, _, frac = text.partition(".")
    return f"{int(whole):,}.{frac}"


def grade_tonnage_pivot(rows: pd.DataFrame, grade_unit: str, metal_unit: str) -> pd.DataFrame:
    """One domain's grade–tonnage rows (one metal unit) as read in a report: a row per
    cut-off, and per class (confidence order, ``all`` last) its tonnes, grade and metal,
    rounded (:func:`round_significant`) and written without false decimals."""
    classes = [c for c in dict.fromkeys(rows["class"]) if c != "all"] + ["all"]
    out = pd.DataFrame(
        {f"cut-off ({grade_unit})": [f"{c:g}" for c in dict.fromkeys(rows["cutoff"])]}
    )
    for cls in classes:
        part = rows[rows["class"] == cls]
        label = "all classes" if cls == "all" else cls
        out[f"{label}: tonnes (t)"] = significant_text(part["tonnes"], finest=1000.0)
        out[f"{label}: grade ({grade_unit})"] = significant_text(part["grade"])
        out[f"{label}: metal ({metal_unit})"] = significant_text(part["metal"])
    return out
