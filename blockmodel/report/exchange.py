"""Open exchange: the drillholes, composites, domain solids and block model as one Open
Mining Format file (``omf`` package), readable by any OMF-aware program."""

from __future__ import annotations

from pathlib import Path

import numpy as np
import pandas as pd

from blockmodel.model.grid import BlockGrid

__all__ = ["OMF_MARK", "is_tool_omf", "write_omf"]

OMF_MARK = "written by blockmodel"  # the OMF project's description: a file the tool wrote


def is_tool_omf(path: Path) -> bool:
    """Whether the OMF file at ``path`` was written by this tool (its mark)."""
    import warnings

    import omf

    try:
        with warnings.catch_warnings():
            warnings.filterwarnings("ignore", category=DeprecationWarning)
            return omf.OMFReader(str(path)).get_project().description == OMF_MARK
    except Exception:  # not an OMF file at all: not ours
        return False


def write_omf(
    name: str,
    intervals: pd.DataFrame,
    starts: np.ndarray,
    ends: np.ndarray,
    composites: pd.DataFrame,
    grades: list[str],
    solids: dict[str, object],
    blocks: pd.DataFrame,
    grid: BlockGrid,
    path: Path,
) -> None:
    """Write one OMF file.

    Parameters
    ----------
    name : str
        The project's name.
    intervals : DataFrame
        The composites' intervals (``hole, from, to``, ``domain`` and the grades); drawn
        as one line segment each, from ``starts`` to ``ends`` ((n, 3) float64, metres).
    composites : DataFrame
        Composite centres ``x, y, z``, ``domain`` and the grades (a point set).
    solids : dict of domain name to Surface
    blocks : DataFrame
        The block model; its numeric columns become cell data of a regular volume
        (tonnage-weighted over the domains sharing a block), its class the most tonnes'.
    grid : BlockGrid
    path : Path
    """
    import warnings

    from blockmodel.report.views import block_image

    with warnings.catch_warnings():
        # omf's vector helper predates numpy 2's __array_wrap__ signature; harmless here
        warnings.filterwarnings("ignore", message=".*__array_wrap__.*", category=DeprecationWarning)
        _write(
            name,
            intervals,
            starts,
            ends,
            composites,
            grades,
            solids,
            blocks,
            grid,
            path,
            block_image,
        )


def _write(
    name, intervals, starts, ends, composites, grades, solids, blocks, grid, path, block_image
):
    """The body of :func:`write_omf`."""
    import omf

    n = len(intervals)
    vertices = np.empty((2 * n, 3))
    vertices[0::2], vertices[1::2] = starts, ends
    segments = np.arange(2 * n, dtype=np.int64).reshape(n, 2)
    holes = omf.LineSetElement(
        name="drillholes",
        description="composite intervals along the desurveyed holes",
        geometry=omf.LineSetGeometry(vertices=vertices, segments=segments),
        data=[
            omf.ScalarData(name=g, array=intervals[g].to_numpy(float), location="segments")
            for g in grades
        ]
        + [
            omf.StringData(name=c, array=intervals[c].astype(str).tolist(), location="segments")
            for c in ("hole", "domain")
        ],
    )
    points = omf.PointSetElement(
        name="composites",
        geometry=omf.PointSetGeometry(vertices=composites[["x", "y", "z"]].to_numpy(float)),
        data=[
            omf.ScalarData(name=g, array=composites[g].to_numpy(float), location="vertices")
            for g in grades
        ]
        + [
            omf.StringData(
                name="domain", array=composites["domain"].astype(str).tolist(), location="vertices"
            )
        ],
    )
    surfaces = [
        omf.SurfaceElement(
            name=f"solid {domain}",
            geometry=omf.SurfaceGeometry(
                vertices=np.asarray(s.vertices, dtype=np.float64),
                triangles=np.asarray(s.triangles, dtype=np.int64),
            ),
        )
        for domain, s in solids.items()
    ]
    numeric = [
        c
        for c in blocks.columns
        if c not in ("domain", "class", "x", "y", "z", "i", "j", "k")
        and blocks[c].dtype.kind in "fiub"
        and c != "tonnes"
    ]
    image = block_image(grid, blocks, numeric)
    volume = omf.VolumeElement(
        name="block model",
        description="cell values tonnage-weighted over the domains sharing a block",
        geometry=omf.VolumeGridGeometry(
            origin=np.asarray(grid.origin, dtype=np.float64),
            tensor_u=np.full(grid.shape[0], grid.block_size[0]),
            tensor_v=np.full(grid.shape[1], grid.block_size[1]),
            tensor_w=np.full(grid.shape[2], grid.block_size[2]),
        ),
        data=[
            omf.ScalarData(
                name=c, array=np.asarray(image.cell_data[c], dtype=np.float64), location="cells"
            )
            for c in [*numeric, "tonnes"]
            if c in image.cell_data
        ],
    )
    project = omf.Project(
        name=name, description=OMF_MARK, elements=[holes, points, *surfaces, volume]
    )
    project.validate()
    omf.OMFWriter(project, str(path))
