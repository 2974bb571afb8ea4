"""Renders are not blank, and the plan shows the block values of its level."""

import numpy as np
import pandas as pd
import pytest
from matplotlib import colormaps
from matplotlib.image import imread

from blockmodel.model.grid import BlockGrid
from blockmodel.report import maps
from blockmodel.report.figures import GRADE_CMAP


def _distinct_colours(png):
    img = imread(png)[..., :3]
    flat = (img.reshape(-1, 3) * 255).round().astype(int)
    background = np.all(flat >= 250, axis=1)
    return len(np.unique(flat, axis=0)), 1 - background.mean()


@pytest.fixture
def grid_and_blocks(rng):
    grid = BlockGrid((5e5, 7e6, 1000.0), (10.0, 10.0, 5.0), (20, 15, 6))
    ii, jj, kk = np.meshgrid(range(20), range(15), range(6), indexing="ij")
    flat = grid.flat_index(ii.ravel(), jj.ravel(), kk.ravel())
    c = grid.centres(flat)
    b = pd.DataFrame(
        {
            "x": c[:, 0],
            "y": c[:, 1],
            "z": c[:, 2],
            "i": ii.ravel(),
            "j": jj.ravel(),
            "k": kk.ravel(),
            "domain": "lode",
            "tonnes": 1000.0,
            "au": rng.lognormal(0, 0.6, size=len(flat)),
            "class": rng.choice(["Measured", "Indicated", "Inferred"], size=len(flat)),
        }
    )
    return grid, b


def test_plan_shows_values_of_its_level(grid_and_blocks, tmp_path):
    grid, b = grid_and_blocks
    path = tmp_path / "plan.png"
    maps.plan_figure(b, grid, "au", 1012.0, path, "g/t", vmin=0.0, vmax=4.0)
    colours, share = _distinct_colours(path)
    assert colours > 200 and share > 0.3
    # the block at (i, j) = (10, 7) on level k = 2: find its pixel through the axes transform
    import matplotlib

    matplotlib.use("Agg", force=True)
    one = b[(b.i == 10) & (b.j == 7) & (b.k == 2)].iloc[0]
    expected = np.array(colormaps[GRADE_CMAP](np.clip(one.au / 4.0, 0, 1))[:3])
    img = imread(path)[..., :3]
    # locate the image area: the largest box of non-white pixels left of the colour bar
    mask = ~np.all(img > 0.97, axis=2)
    rows, cols = np.nonzero(mask[:, : int(img.shape[1] * 0.75)])
    # image extent fills the axes: map (i, j) to pixel by the frame of the coloured region
    coloured = np.nonzero(np.abs(img - img[:, :, :1]).sum(axis=2) > 0.02)
    top, bottom = coloured[0].min(), coloured[0].max()
    left, right = (
        coloured[1].min(),
        np.percentile(coloured[1][coloured[1] < img.shape[1] * 0.75], 100),
    )
    px = int(left + (10.5 / 20) * (right - left))
    py = int(bottom - (7.5 / 15) * (bottom - top))
    assert np.abs(img[py, px] - expected).max() < 0.05
    assert rows.size and cols.size


def test_section_not_blank(grid_and_blocks, tmp_path):
    grid, b = grid_and_blocks
    path = tmp_path / "section.png"
    maps.section_figure(b, grid, "au", (5e5 + 100, 7e6 + 75, 1015), 60.0, 20.0, path, "g/t")
    colours, share = _distinct_colours(path)
    assert colours > 200 and share > 0.1


@pytest.mark.parametrize("column", ["au", "class"])
def test_3d_render_off_screen_not_blank(grid_and_blocks, tmp_path, column):
    # VTK chooses its own off-screen back end (EGL here); nothing is forced.
    from blockmodel.report.views import render_view

    grid, b = grid_and_blocks
    path = tmp_path / f"{column}.png"
    render_view(grid, b, column, path, unit="g/t", window_size=(800, 600))
    colours, share = _distinct_colours(path)
    assert share > 0.1
    assert colours > (200 if column == "au" else 4)


def test_3d_render_prints_no_display_warning(grid_and_blocks, tmp_path, capfd, monkeypatch):
    """Rendering off-screen on a machine with no display once printed VTK's 'bad X server
    connection' warning with raw colour codes on every run and view."""
    from blockmodel.report.views import render_view

    monkeypatch.delenv("DISPLAY", raising=False)
    grid, b = grid_and_blocks
    render_view(grid, b, "au", tmp_path / "v.png", unit="g/t", window_size=(400, 300))
    err = capfd.readouterr().err
    assert "X server" not in err and "\x1b[" not in err, err


def test_view_without_display_or_png_stops(box_site, capsys, monkeypatch):
    """With no display and no --png a view once exited 0 having done nothing."""
    from blockmodel.app.cli import main

    monkeypatch.delenv("DISPLAY", raising=False)
    monkeypatch.delenv("WAYLAND_DISPLAY", raising=False)
    monkeypatch.setattr("sys.platform", "linux")
    code = main(
        [
            "view",
            str(box_site / "data" / "project.toml"),
            str(box_site / "out" / "block_model.parquet"),
        ]
    )
    err = capsys.readouterr().err
    assert code == 2 and "--png" in err and "Traceback" not in err


def test_axes_show_numbers_in_full():
    """Projected coordinates once showed as a '+7.034e6' offset above the axis."""
    from blockmodel.report.figures import pyplot, tidy_axes

    plt = pyplot()
    fig, ax = plt.subplots()
    ax.plot([512000.0, 512400.0], [7034000.0, 7034480.0])
    tidy_axes(fig)
    fig.canvas.draw()
    assert ax.yaxis.get_offset_text().get_text() == ""
    assert ax.xaxis.get_offset_text().get_text() == ""
    assert len(ax.get_yticks()) <= 9  # at most seven inside, one either side
    labels = [t.get_text() for t in ax.get_yticklabels() if t.get_text()]
    assert any(text.startswith("7034") for text in labels), labels
    plt.close(fig)
