"""The kriging neighbourhood analysis in a report: drill spacing, test blocks, where the
figures stop improving, the figures at the project's settings and, on its own page, one
figure per test block."""

from __future__ import annotations

from pathlib import Path

import pandas as pd

from blockmodel.report.files import safe_stem
from blockmodel.report.html import HtmlReport
from blockmodel.stages.neighbourhood import FIGURES, SWEEPS, Neighbourhood

__all__ = ["render_neighbourhood"]


def render_neighbourhood(
    result: Neighbourhood, folder: Path, report: HtmlReport, *, figures: bool
) -> None:
    """The analysis section; with ``figures``, one PNG per domain and test block drawn
    into ``folder`` and shown."""
    from blockmodel.report import plots

    report.heading("Kriging neighbourhood analysis")
    report.paragraph(
        "Representative blocks of each domain kriged under one change of setting at a "
        "time, the others at the project's values (Vann, Jackson & Bertoli 2003). A slope "
        "of regression near 1 and a high kriging efficiency mean little conditional bias; "
        "the figures describe these test blocks only, and the choice of neighbourhood "
        "remains the geologist's. All figures: neighbourhood.csv."
    )
    spacing = pd.DataFrame(
        [
            {
                "domain": name,
                "drill spacing (m)": d.spacing,
                "test block": b.label,
                "x": b.centre[0],
                "y": b.centre[1],
                "z": b.centre[2],
                "holes within one spacing": b.holes_near,
                "nearest sample (m)": b.nearest,
            }
            for name, d in result.by_domain.items()
            for b in d.blocks
        ]
    )
    report.paragraph(
        "Drill spacing: the median distance from each hole to its nearest neighbour, "
        "measured in the plane of the domain's variogram model (major and semi axes)."
    )
    report.table(spacing, digits=1)
    table = result.table()
    if len(table):
        now = table[table["current"] & (table["sweep"] == "max_samples")]
        report.paragraph("At the project's settings:")
        report.table(
            now[["domain", "block", *FIGURES]],
            digits=3,
        )
    report.paragraph(
        f"Where slope and efficiency stop improving (within {100 * result.fraction:g} % of "
        "their best over the sweep, slopes above 1 counted as 1):"
    )
    for name, d in result.by_domain.items():
        report.paragraph(f"{name}:")
        report.table(d.summary, digits=2)
    if not figures:
        return
    labels = {k: v[0] for k, v in SWEEPS.items()}
    for name, d in result.by_domain.items():
        for b in d.blocks:
            rows = d.table[d.table["block"] == b.label]
            p = (
                folder
                / f"neighbourhood_{safe_stem(name)}_{safe_stem(b.label.replace(' ', '_'))}.png"
            )
            note = (
                f"{name}, {b.label} block\ncentre ({b.centre[0]:.1f}, {b.centre[1]:.1f}, "
                f"{b.centre[2]:.1f}) m\n{b.holes_near} hole(s) within one drill spacing\n"
                f"nearest sample {b.nearest:.1f} m\ndrill spacing {d.spacing:.1f} m\n\n"
                "dotted line: the project's setting"
            )
            plots.neighbourhood_figure(
                rows, labels, p, f"Kriging neighbourhood analysis: {name}, {b.label} block", note
            )
            report.image(p, f"Slope and efficiency against each setting, {name}, {b.label}")
