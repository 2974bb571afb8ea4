"""The views of a run's report: plan, section and 3D slices through the main domain."""

from __future__ import annotations

from pathlib import Path

import numpy as np
import pandas as pd

from blockmodel.config.project import Project
from blockmodel.model.grid import BlockGrid
from blockmodel.report.files import safe_stem
from blockmodel.report.html import HtmlReport

__all__ = ["render_views"]


def render_views(
    project: Project,
    grid: BlockGrid,
    blocks: pd.DataFrame,
    composites: pd.DataFrame,
    models: dict,
    folder: Path,
    report: HtmlReport,
) -> None:
    """A plan and a section through the main domain's centre (its tonnage-weighted centre
    snapped to a block centre), 3D slices of the first grade along each axis, and 3D
    slices coloured by class with the domain solids."""
    from blockmodel.report import maps

    primary = project.grades[0]
    unit = project.data.grades[primary]
    main = project.domains[0].name
    b = blocks[blocks["domain"] == main]
    centre = (b[["x", "y", "z"]].to_numpy(float) * b[["tonnes"]].to_numpy()).sum(axis=0) / b[
        "tonnes"
    ].sum()
    # snap to a block centre so slices cut through blocks, not along their faces
    centre = (
        np.asarray(grid.origin)
        + (np.floor((centre - grid.origin) / grid.block_size) + 0.5) * grid.block_size
    )
    report.heading("Views")
    p = folder / "plan.png"
    maps.plan_figure(blocks, grid, primary, float(centre[2]), p, unit, composites=composites)
    report.image(p, f"Plan through the centre of the {main} domain")
    from blockmodel.report.maps import column_unit

    for what, words in (
        ("variance", "kriging variance"),
        ("slope", "slope of regression"),
        ("pass", "search pass"),
    ):
        column = f"{primary}_{what}"
        p = folder / f"plan_{safe_stem(what)}.png"
        maps.plan_figure(
            blocks, grid, column, float(centre[2]), p, column_unit(column, project.data.grades)
        )
        report.image(p, f"Plan of the {words} through the centre of the {main} domain")
    # across strike: a right angle to the major axis of the main domain's model
    model = models.get(f"{main}.{primary}")
    strike_normal = (
        (model.structures[0].orientation.azimuth + 90.0) % 360.0
        if model and model.structures
        else 90.0
    )
    p = folder / "section.png"
    maps.section_figure(
        blocks,
        grid,
        primary,
        centre,
        strike_normal,
        2 * grid.block_size[0],
        p,
        unit,
        composites=composites,
    )
    report.image(p, f"Section across the {main} domain through its centre")
    try:
        from blockmodel.report.views import render_view

        for axis in "xyz":
            pos = [None, None, None]
            pos["xyz".index(axis)] = float(centre["xyz".index(axis)])
            p = folder / f"slice_{axis}.png"
            render_view(
                grid,
                blocks,
                primary,
                p,
                unit=unit,
                slices=tuple(pos),
                composites=composites[composites["domain"] == main],
            )
            report.image(p, f"3D slice normal to {axis} through the {main} centre, {primary}")
        from blockmodel.model.solids import read_surface

        solids = [read_surface(d.solid) for d in project.domains if d.solid is not None]
        p = folder / "slices_class.png"
        render_view(grid, blocks, "class", p, slices=tuple(centre), solids=solids)
        report.image(p, "3D slices coloured by proposed class, with the domain solids")
    except Exception as exc:  # no rendering back end on this machine: say so, keep the run
        report.paragraph(f"3D views could not be rendered here: {exc}")
