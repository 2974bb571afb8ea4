"""3D views with pyvista: orthogonal slices, blocks above a cut-off, drillhole traces and
domain solids; off-screen to PNG, or in a window when a display exists.

pyvista is imported only here and only when a view is asked for; no window class is forced,
so VTK picks what the machine offers (EGL when there is no display).
"""

from __future__ import annotations

from pathlib import Path

import numpy as np

from blockmodel.model.grid import BlockGrid
from blockmodel.report.figures import CLASS_COLOURS, GRADE_CMAP

__all__ = ["block_image", "render_view"]


def _write_png(image: np.ndarray, path: Path) -> None:
    """Write an RGB(A) array as PNG, with the tool's "Software" text chunk."""
    from PIL import Image, PngImagePlugin

    from blockmodel.report.figures import PNG_SOFTWARE

    info = PngImagePlugin.PngInfo()
    info.add_text("Software", PNG_SOFTWARE)
    Image.fromarray(np.ascontiguousarray(image)).save(path, format="PNG", pnginfo=info)


def block_image(grid: BlockGrid, blocks, columns: list[str]):
    """pyvista ImageData with one cell per block; per column the tonnage-weighted mean over
    the block's domain rows (NaN where none). Cell order is x fastest (see :mod:`blockmodel.model.grid`)."""
    import pyvista as pv

    image = pv.ImageData(
        dimensions=np.asarray(grid.shape) + 1, spacing=grid.block_size, origin=grid.origin
    )
    flat = grid.flat_index(blocks["i"].to_numpy(), blocks["j"].to_numpy(), blocks["k"].to_numpy())
    t = blocks["tonnes"].to_numpy(float)
    tonnes = np.bincount(flat, weights=t, minlength=grid.n_blocks)
    for c in columns:
        v = blocks[c].to_numpy()
        if v.dtype.kind in "OUS":
            codes = {name: n for n, name in enumerate(CLASS_COLOURS)}
            v = np.array([codes.get(x, len(codes) - 1) for x in v], dtype=float)
            # the class of the largest share of the block
            out = np.full(grid.n_blocks, np.nan)
            order = np.argsort(t, kind="stable")
            out[flat[order]] = v[order]
            image.cell_data[c] = out
            continue
        v = v.astype(float)
        ok = np.isfinite(v)
        s = np.bincount(flat[ok], weights=t[ok] * v[ok], minlength=grid.n_blocks)
        w = np.bincount(flat[ok], weights=t[ok], minlength=grid.n_blocks)
        with np.errstate(invalid="ignore", divide="ignore"):
            image.cell_data[c] = np.where(w > 0, s / w, np.nan)
    image.cell_data["tonnes"] = tonnes
    return image


def _traces(composites, grade: str | None):
    """Drillhole traces as polylines through the composites' ends, coloured by grade."""
    import pyvista as pv

    from blockmodel.report.maps import composite_segments

    start, end = composite_segments(composites)
    n = len(start)
    points = np.empty((2 * n, 3))
    points[0::2], points[1::2] = start, end
    lines = np.column_stack([np.full(n, 2), 2 * np.arange(n), 2 * np.arange(n) + 1]).ravel()
    poly = pv.PolyData(points, lines=lines)
    if grade is not None:
        poly.point_data["grade"] = np.repeat(composites[grade].to_numpy(float), 2)
    return poly


def render_view(
    grid: BlockGrid,
    blocks,
    column: str,
    path: Path | None,
    *,
    unit: str = "",
    slices: tuple[float | None, float | None, float | None] | None = None,
    cutoff: float | None = None,
    composites=None,
    solids: list | None = None,
    window_size: tuple[int, int] = (1200, 900),
) -> None:
    """Render a 3D view of the block model to PNG (``path``) or a window (``path`` None).

    Parameters
    ----------
    grid : BlockGrid
    blocks : DataFrame, block model rows
    column : str, the field to colour by (a grade, its slope, ``class`` ...)
    slices : (x, y, z) metres, optional
        Orthogonal slice positions (None skips an axis); default: through the model centre.
    cutoff : float, optional
        Show blocks with ``column >= cutoff`` as a solid instead of slices.
    composites : DataFrame, optional
        Drillhole composites, drawn as segments of their traces coloured by grade.
    solids : list of Surface, optional
        Domain solids, drawn as translucent outlines.
    """
    import pyvista as pv

    # VTK tries an X window before falling back to off-screen EGL and logs a warning on
    # the way; only its errors are worth the user's attention
    with pv.vtk_verbosity("error"):
        _render(
            pv, grid, blocks, column, path, unit, slices, cutoff, composites, solids, window_size
        )


def _render(pv, grid, blocks, column, path, unit, slices, cutoff, composites, solids, window_size):
    """The body of :func:`render_view`: each slice is the one layer of blocks it cuts,
    drawn as blocks with the drillholes near it and the solids' outlines in its plane;
    the camera frames the blocks shown, looking across a single slice."""
    categorical = blocks[column].dtype.kind in "OUS"
    image = block_image(grid, blocks, [column])
    plotter = pv.Plotter(off_screen=path is not None, window_size=list(window_size))
    plotter.set_background("white")
    bar_common = {
        "color": "black",
        "vertical": True,
        "position_x": 0.89,
        "position_y": 0.15,
        "height": 0.7,
        "width": 0.05,
        "title_font_size": 16,
        "label_font_size": 14,
    }
    if categorical:
        from matplotlib.colors import ListedColormap

        cmap = ListedColormap(list(CLASS_COLOURS.values()))
        clim = [-0.5, len(CLASS_COLOURS) - 0.5]  # each label in the middle of its colour
        bar = {**bar_common, "title": "class\n", "n_labels": 0}
        annotations = {float(n): name for n, name in enumerate(CLASS_COLOURS)}
    else:
        cmap = GRADE_CMAP
        v = image.cell_data[column]
        clim = [float(np.nanpercentile(v, 1)), float(np.nanpercentile(v, 99))]
        bar = {
            **bar_common,
            "title": (f"{column} ({unit})" if unit else column) + "\n",
            "fmt": "%.3g",
        }
        annotations = None
    shown = []
    if cutoff is not None and not categorical:
        mesh = image.threshold(value=cutoff, scalars=column)
        if mesh.n_cells:
            shown.append(mesh)
    else:
        centre = np.asarray(grid.origin) + np.asarray(grid.shape) * np.asarray(grid.block_size) / 2
        pos = slices or tuple(centre)
        for n, p in enumerate(pos):
            if p is None:
                continue
            layer = int(np.floor((p - grid.origin[n]) / grid.block_size[n]))
            if not 0 <= layer < grid.shape[n]:
                continue
            voi = [0, grid.shape[0], 0, grid.shape[1], 0, grid.shape[2]]
            voi[2 * n], voi[2 * n + 1] = layer, layer + 1  # point indices bounding one layer
            slab = image.extract_subset(voi).threshold(value=(-1e300, 1e300), scalars=column)
            if slab.n_cells:
                shown.append(slab)
    for mesh in shown:
        plotter.add_mesh(
            mesh,
            scalars=column,
            cmap=cmap,
            clim=clim,
            scalar_bar_args=bar,
            annotations=annotations,
            show_edges=False,
        )
    planes = (
        []
        if cutoff is not None or slices is None
        else [(n, p) for n, p in enumerate(slices) if p is not None]
    )
    if composites is not None and len(composites):
        if planes:
            # only the drilling near the slice planes, so it does not hide them
            near = np.zeros(len(composites), dtype=bool)
            for n, p in planes:
                near |= np.abs(composites["xyz"[n]].to_numpy(float) - p) <= 2 * grid.block_size[n]
            composites = composites[near]
        if len(composites):
            traces = _traces(
                composites, column if column in composites and not categorical else None
            )
            if "grade" in traces.point_data:
                plotter.add_mesh(
                    traces,
                    scalars="grade",
                    cmap=cmap,
                    clim=clim,
                    line_width=5,
                    render_lines_as_tubes=True,
                    show_scalar_bar=False,
                )
            else:
                plotter.add_mesh(traces, color="black", line_width=2)
    for s in solids or []:
        faces = np.column_stack([np.full(len(s.triangles), 3), s.triangles]).ravel()
        surface = pv.PolyData(s.vertices, faces)
        if planes:  # the solid's outline in each slice plane
            for n, p in planes:
                normal = np.eye(3)[n]
                cut = surface.slice(
                    normal=normal, origin=normal * p + (1 - normal) * s.vertices.mean(axis=0)
                )
                if cut.n_points:
                    plotter.add_mesh(cut, color="black", line_width=2)
        else:
            plotter.add_mesh(surface, color="grey", opacity=0.15)
    bounds = _bounds(shown) if shown else image.bounds
    # orientation arrows, a scale bar and the slice positions in words read better at
    # report size than VTK's 3D axis labels
    plotter.add_axes(xlabel="E", ylabel="N", zlabel="Up", color="black", line_width=3)
    _scale_bar(plotter, bounds, planes[0][0] if len(planes) == 1 else None)
    where = "; ".join(f"{'xyz'[n]} = {p:,.1f} m" for n, p in planes)
    size = " x ".join(f"{b:g}" for b in grid.block_size)
    plotter.add_text(
        (f"slice {where}; " if where else "") + f"blocks {size} m",
        position="upper_left",
        font_size=11,
        color="black",
    )
    if len(planes) == 1:  # look across the single slice, a little from above
        n = planes[0][0]
        view = {0: (1.0, 0.25, 0.35), 1: (0.25, -1.0, 0.35), 2: (0.0, 0.0, 1.0)}[n]
        up = (0.0, 1.0, 0.0) if n == 2 else (0.0, 0.0, 1.0)
        plotter.view_vector(view, viewup=up)
    else:
        plotter.view_isometric()
    plotter.reset_camera(bounds=bounds)
    plotter.camera.zoom(1.0)
    if path is None:
        plotter.show()
    else:
        image = plotter.screenshot(None, return_img=True)
        plotter.close()
        _write_png(image, path)


def _scale_bar(plotter, bounds, view: int | None) -> None:
    """A scale bar of a round length (1, 2 or 5 times a power of ten, at most half the
    extent of ``bounds``) along the edge of the blocks shown nearest the camera: for a view
    across the slice normal to axis ``view`` (0, 1, 2), or the isometric view (None)."""
    low, high = np.array(bounds[0::2], dtype=float), np.array(bounds[1::2], dtype=float)
    # axis the bar runs along, and the corner of the box it starts from (1 = high side)
    along, corner = {
        None: (0, (0, 1, 0)),
        0: (1, (1, 0, 0)),
        1: (0, (0, 0, 0)),
        2: (0, (0, 0, 1)),
    }[view]
    extent = float(high[along] - low[along])
    if extent <= 0:
        return
    power = 10.0 ** np.floor(np.log10(extent / 2))
    length = max(m * power for m in (1.0, 2.0, 5.0) if m * power <= extent / 2)
    start = np.where(np.array(corner) == 1, high, low)
    end = start.copy()
    end[along] += length
    ruler = plotter.add_ruler(
        start,
        end,
        title=f"{length:g} m",
        number_labels=2,
        show_labels=False,
        tick_length=8,
        label_color="black",
        tick_color="black",
    )
    ruler.GetProperty().SetLineWidth(3)
    text = ruler.GetTitleTextProperty()
    text.SetItalic(False)
    text.SetShadow(False)
    text.SetBold(True)


def _bounds(meshes) -> tuple[float, ...]:
    """Bounds (xmin, xmax, ymin, ymax, zmin, zmax) holding every mesh."""
    b = np.array([m.bounds for m in meshes], dtype=np.float64)
    return tuple(
        float(v)
        for pair in zip(b[:, 0::2].min(axis=0), b[:, 1::2].max(axis=0), strict=True)
        for v in pair
    )
