"""Compositing to a fixed downhole length within domains, and capping (top-cutting)."""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
import pandas as pd

from blockmodel.config.sections import CappingRule, Compositing
from blockmodel.data.desurvey import positions_along_hole
from blockmodel.data.drillholes import DrillholeSet

__all__ = ["CappingSummary", "CompositingSummary", "cap_grades", "composite", "hole_positions"]


@dataclass
class CompositingSummary:
    """Counts of what compositing kept, dropped and merged."""

    composites: int
    dropped_low_coverage: int
    residuals_merged: int
    residuals_dropped: int


def hole_positions(holes: DrillholeSet, hole_column: np.ndarray, depths: np.ndarray) -> np.ndarray:
    """Desurveyed positions of downhole depths.

    Parameters
    ----------
    holes : DrillholeSet
    hole_column : (n,) str, hole of each depth
    depths : (n,) float64, metres downhole

    Returns
    -------
    (n, 3) float64, metres
    """
    out = np.full((len(depths), 3), np.nan)
    collars = holes.collars.set_index("hole")
    surveys = {h: g for h, g in holes.surveys.groupby("hole", sort=False)}
    hole_column = np.asarray(hole_column)
    for hole in pd.unique(hole_column):
        rows = np.flatnonzero(hole_column == hole)
        s = surveys[hole]
        collar = collars.loc[hole, ["x", "y", "z"]].to_numpy(float)
        out[rows] = positions_along_hole(
            collar,
            s["depth"].to_numpy(float),
            s["azimuth"].to_numpy(float),
            s["dip"].to_numpy(float),
            depths[rows],
        )
    return out


def _runs(frame: pd.DataFrame):
    """Split one hole's intervals into runs of one domain code (gaps allowed)."""
    codes = frame["domain"].to_numpy()
    start = 0
    for k in range(1, len(codes) + 1):
        if k == len(codes) or codes[k] != codes[start]:
            yield frame.iloc[start:k]
            start = k


def composite(
    holes: DrillholeSet, settings: Compositing
) -> tuple[pd.DataFrame, CompositingSummary]:
    """Composite sample intervals to a fixed length, breaking at domain boundaries.

    Parameters
    ----------
    holes : DrillholeSet
    settings : Compositing
        ``length`` (metres), ``min_coverage`` (share of the composite with an assay),
        ``residual``: what to do with a last piece shorter than half the length
        (``merge`` into the previous composite, ``keep`` or ``drop``).

    Returns
    -------
    composites : DataFrame
        Columns ``hole, from, to, x, y, z, domain, length, coverage`` and one per grade
        (length-weighted mean over assayed length); x, y, z at the mid-point.
    summary : CompositingSummary

    Notes
    -----
    Metal (length x grade) is conserved when no composite is dropped.
    """
    L = settings.length
    grades = holes.grades
    rows = []
    dropped = merged = residual_dropped = 0
    for hole, frame in holes.intervals.groupby("hole", sort=False):
        for run in _runs(frame):
            f, t = run["from"].to_numpy(float), run["to"].to_numpy(float)
            start, end = f.min(), t.max()
            n_full = int(np.floor((end - start) / L + 1e-9))
            edges = start + L * np.arange(n_full + 1)
            residual = end - edges[-1]
            if residual > 1e-9:
                if n_full == 0 or residual >= L / 2 or settings.residual == "keep":
                    edges = np.append(edges, end)
                elif settings.residual == "merge":
                    edges[-1] = end
                    merged += 1
                else:
                    residual_dropped += 1
            a, b = edges[:-1], edges[1:]
            overlap = np.clip(
                np.minimum(b[:, None], t[None, :]) - np.maximum(a[:, None], f[None, :]), 0, None
            )
            record = {
                "hole": hole,
                "from": a,
                "to": b,
                "domain": run["domain"].iloc[0],
                "length": b - a,
            }
            coverage = np.zeros(len(a))
            for g in grades:
                v = run[g].to_numpy(float)
                has = np.isfinite(v)
                sampled = overlap[:, has].sum(axis=1)
                metal = overlap[:, has] @ v[has]
                cov = sampled / (b - a)
                with np.errstate(invalid="ignore", divide="ignore"):
                    record[g] = np.where(
                        cov >= settings.min_coverage - 1e-12, metal / sampled, np.nan
                    )
                coverage = np.maximum(coverage, cov)
            record["coverage"] = coverage
            if "density" in run:  # measured density: length-weighted where measured
                v = run["density"].to_numpy(float)
                has = np.isfinite(v)
                with np.errstate(invalid="ignore", divide="ignore"):
                    record["density"] = (overlap[:, has] @ v[has]) / overlap[:, has].sum(axis=1)
            part = pd.DataFrame(record)
            # a grade under the minimum coverage is NaN; a composite with no grade is dropped
            keep = np.isfinite(part[grades].to_numpy(float)).any(axis=1)
            dropped += int((~keep).sum())
            rows.append(part[keep])
    comps = (
        pd.concat(rows, ignore_index=True)
        if rows
        else pd.DataFrame(columns=["hole", "from", "to", "domain", "length", "coverage", *grades])
    )
    mid = hole_positions(
        holes, comps["hole"].to_numpy(), ((comps["from"] + comps["to"]) / 2).to_numpy(float)
    )
    comps["x"], comps["y"], comps["z"] = mid[:, 0], mid[:, 1], mid[:, 2]
    extra = ["density"] if "density" in comps else []
    comps = comps[
        ["hole", "from", "to", "x", "y", "z", "domain", "length", "coverage", *grades, *extra]
    ]
    return comps, CompositingSummary(len(comps), dropped, merged, residual_dropped)


@dataclass
class CappingSummary:
    """One capping rule applied: its limit, how many composites it cut, and the metal removed (percent)."""

    domain: str
    grade: str
    limit: float
    capped: int
    composites: int
    metal_removed_percent: float


def cap_grades(
    composites: pd.DataFrame, rules: tuple[CappingRule, ...] | list[CappingRule]
) -> tuple[pd.DataFrame, list[CappingSummary]]:
    """Cap grades per domain, by value or by percentile of that domain's composites.

    Parameters
    ----------
    composites : DataFrame
        From :func:`composite`.
    rules : sequence of CappingRule

    Returns
    -------
    capped : DataFrame
        A copy; each capped grade ``g`` keeps its original values in ``g_uncapped``.
    summaries : list of CappingSummary
        Limit, number capped and share of metal (length x grade) removed.
    """
    out = composites.copy()
    summaries = []
    for rule in rules:
        g = rule.grade
        if f"{g}_uncapped" not in out:
            out[f"{g}_uncapped"] = out[g]
        mask = (out["domain"] == rule.domain) & out[g].notna()
        values = out.loc[mask, f"{g}_uncapped"].to_numpy(float)
        if len(values) == 0:
            continue
        limit = (
            rule.value if rule.value is not None else float(np.percentile(values, rule.percentile))
        )
        capped = np.minimum(values, limit)
        lengths = out.loc[mask, "length"].to_numpy(float)
        metal = lengths @ values
        out.loc[mask, g] = capped
        removed = 100.0 * (metal - lengths @ capped) / metal if metal > 0 else 0.0
        summaries.append(
            CappingSummary(
                rule.domain,
                g,
                float(limit),
                int((values > limit).sum()),
                len(values),
                float(removed),
            )
        )
    return out, summaries
