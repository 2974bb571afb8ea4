"""Grade-tonnage tables: tonnes, mean grade and metal above cut-offs, per domain and class."""

from __future__ import annotations

from collections.abc import Sequence

import numpy as np
import pandas as pd

__all__ = ["TROY_OUNCE_GRAMS", "grade_tonnage", "metal_units"]

TROY_OUNCE_GRAMS = 31.1034768  # grams per troy ounce (international definition)


def metal_units(grade_unit: str) -> list[tuple[str, float]]:
    """(unit name, factor) pairs: metal = tonnes x grade x factor, in the trade's units.

    g/t (and ppm, the same ratio) -> troy ounces and kilograms; ppb -> grams; % -> tonnes.
    """
    if grade_unit in ("g/t", "ppm"):
        return [("troy oz", 1.0 / TROY_OUNCE_GRAMS), ("kg", 1e-3)]
    if grade_unit == "ppb":
        return [("g", 1e-3)]
    if grade_unit == "%":
        return [("t", 1e-2)]
    raise ValueError(f"unknown grade unit {grade_unit!r}")


def grade_tonnage(
    table: pd.DataFrame,
    grade: str,
    grade_unit: str,
    cutoffs: Sequence[float],
    *,
    class_column: str = "class",
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
    units = metal_units(grade_unit)
    rows = []
    groups = [("all", "all", np.ones(len(base), dtype=bool))]
    for dom in pd.unique(base["domain"]):
        groups.append((dom, "all", (base["domain"] == dom).to_numpy()))
    for cls in pd.unique(base["class"]):
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
