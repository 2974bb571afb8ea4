"""The commands that write one file from a block model: a view (PNG or a window) and the
Open Mining Format export.  Each replaces only a file the tool wrote."""

from __future__ import annotations

import os
import sys
from pathlib import Path

import pandas as pd

from blockmodel.app.commands import input_files
from blockmodel.app.outputs import atomic_path, need_file
from blockmodel.config.project import Project
from blockmodel.errors import InputError, Problem

__all__ = ["export", "has_display", "view"]


def view(
    project: Project,
    block_model: Path,
    *,
    kind: str = "slices",
    field: str | None = None,
    point: tuple[float | None, float | None, float | None] = (None, None, None),
    azimuth: float = 90.0,
    width: float = 20.0,
    cutoff: float | None = None,
    png: Path | None = None,
) -> None:
    """Render one view of a block model: 3D slices, blocks above a cut-off, a plan or a
    section, to ``png`` (a PNG the tool wrote may be replaced, nothing else) or to a
    window.

    Parameters
    ----------
    kind : {"slices", "cutoff", "plan", "section"}
    field : str, optional
        Column to colour by (default: the first grade).
    point : three floats or None, metres
        Slice or section point (x, y, z); None takes the blocks' mean.
    azimuth, width : float
        Section azimuth (degrees) and width (metres).
    cutoff : float, optional
        With ``kind="cutoff"``: show blocks at or above it.
    """
    from blockmodel.report.maps import column_unit
    from blockmodel.stages.domain_model import block_model_grid

    need_file(block_model)
    if png is None and not has_display():
        raise InputError(
            "this machine has no display for a window: pass --png FILE to write the view "
            "to an image"
        )
    if png is not None:
        _check_png_target(png, [*input_files(project), block_model])
    if kind in ("plan", "section") and png is None:
        raise InputError("plans and sections are written to PNG: give --png")
    if kind == "cutoff" and cutoff is None:
        raise InputError("--kind cutoff needs --cutoff")
    grid = block_model_grid(project)
    blocks = pd.read_parquet(block_model)
    field = field or project.grades[0]
    if field not in blocks:
        raise InputError(
            f"{block_model}: no column '{field}'; columns: {', '.join(blocks.columns)}"
        )
    unit = column_unit(field, project.data.grades)
    centre = blocks[["x", "y", "z"]].mean().to_numpy()
    at = [c if v is None else v for v, c in zip(point, centre, strict=True)]
    tmp = None
    if png is not None:
        Path(png).parent.mkdir(parents=True, exist_ok=True)
        tmp = atomic_path(png)
    try:
        if kind in ("plan", "section"):
            from blockmodel.report import maps

            if kind == "plan":
                maps.plan_figure(blocks, grid, field, at[2], tmp, unit)
            else:
                maps.section_figure(blocks, grid, field, at, azimuth, width, tmp, unit)
        else:
            from blockmodel.report.views import render_view

            render_view(
                grid,
                blocks,
                field,
                tmp,
                unit=unit,
                slices=tuple(at),
                cutoff=cutoff if kind == "cutoff" else None,
            )
        if tmp is not None:
            os.replace(tmp, png)
    finally:
        if tmp is not None:
            tmp.unlink(missing_ok=True)


def has_display() -> bool:
    """Whether a window can open here: on Linux and other X11 or Wayland systems, a
    ``DISPLAY`` or ``WAYLAND_DISPLAY``; macOS and Windows always have one."""
    if sys.platform in ("darwin", "win32"):
        return True
    return bool(os.environ.get("DISPLAY") or os.environ.get("WAYLAND_DISPLAY"))


def _check_png_target(png: Path, inputs: list[Path]) -> None:
    """A view may replace a PNG the tool wrote, never an input or any other file."""
    from blockmodel.report.figures import PNG_SOFTWARE

    png = Path(png)
    if any(png.resolve() == Path(p).resolve() for p in inputs):
        raise InputError([Problem(str(png), None, None, None, "is an input file; not overwritten")])
    if png.is_dir():
        raise InputError([Problem(str(png), None, None, None, "is a folder; give a PNG file name")])
    if png.exists():
        try:
            from PIL import Image

            with Image.open(png) as im:
                ours = getattr(im, "text", {}).get("Software") == PNG_SOFTWARE
        except Exception:
            ours = False
        if not ours:
            raise InputError(
                [
                    Problem(
                        str(png),
                        None,
                        None,
                        None,
                        "exists and was not written by blockmodel; not overwritten (choose "
                        "another file name)",
                    )
                ]
            )


def export(project: Project, block_model: Path, omf_path: Path) -> Path:
    """The drillholes, composites, domain solids and block model as one Open Mining Format
    file; replaces only an OMF file this tool wrote (its mark), never another file."""
    from blockmodel.data.compositing import hole_positions
    from blockmodel.model.solids import read_surface
    from blockmodel.report.exchange import is_tool_omf, write_omf
    from blockmodel.stages.composites import load_and_composite
    from blockmodel.stages.domain_model import block_model_grid

    need_file(block_model)
    omf_path = Path(omf_path)
    if any(omf_path.resolve() == Path(p).resolve() for p in [*input_files(project), block_model]):
        raise InputError(
            [Problem(str(omf_path), None, None, "--omf", "is an input file; not overwritten")]
        )
    if omf_path.exists() and not is_tool_omf(omf_path):
        raise InputError(
            [
                Problem(
                    str(omf_path),
                    None,
                    None,
                    "--omf",
                    "exists and was not written by blockmodel; not overwritten (choose another "
                    "file name)",
                )
            ]
        )
    from blockmodel.app.commands import step_reporter

    steps = step_reporter()
    with steps("load, check and composite"):
        comps = load_and_composite(project)
    table = comps.drillholes().sort_values(["hole", "from"], kind="stable")
    holes = table["hole"].to_numpy()
    starts = hole_positions(comps.holes, holes, table["from"].to_numpy(float))
    ends = hole_positions(comps.holes, holes, table["to"].to_numpy(float))
    solids = {d.name: read_surface(d.solid) for d in project.domains if d.solid is not None}
    blocks = pd.read_parquet(block_model)
    omf_path.parent.mkdir(parents=True, exist_ok=True)
    tmp = atomic_path(omf_path)
    try:
        with steps("writing the Open Mining Format file"):
            write_omf(
                project.name,
                table,
                starts,
                ends,
                comps.table,
                project.grades,
                solids,
                blocks,
                block_model_grid(project),
                tmp,
            )
        os.replace(tmp, omf_path)
    finally:
        tmp.unlink(missing_ok=True)
    return omf_path
