"""The invented demo deposit: reproducible, clustered like a real programme, with its defects."""

import filecmp

import numpy as np
import pandas as pd
import pytest

from blockmodel.config.project import load_project
from blockmodel.data.drillholes import load_drillholes
from blockmodel.demo.deposit import (
    build_demo,
    halo_surface,
    lode_surface,
    topography_elevation,
    write_demo,
)
from blockmodel.model.solids import column_crossings, points_inside

from .conftest import DEMO


@pytest.fixture(scope="module")
def regenerated(tmp_path_factory):
    folder = tmp_path_factory.mktemp("demo")
    write_demo(folder)
    return folder


@pytest.mark.parametrize(
    "name", ["collars.csv", "surveys.csv", "assays.csv", "lode.ply", "halo.ply", "topography.ply"]
)
def test_same_seed_reproduces_committed_files(regenerated, name):
    assert filecmp.cmp(regenerated / name, DEMO / name, shallow=False)


def test_make_demo_writes_a_runnable_project(regenerated, capsys):
    """The packaged project file is the committed demo's, reporting into the new folder."""
    from blockmodel.app.cli import main
    from blockmodel.demo.deposit import PROJECT_REPORT_FOLDER

    written = (regenerated / "project.toml").read_text()
    old, new = PROJECT_REPORT_FOLDER
    assert written == (DEMO / "project.toml").read_text().replace(old, new)
    assert main(["check", str(regenerated / "project.toml")]) == 0, capsys.readouterr().err


def test_truth_blocks_reproduced(regenerated):
    pd.testing.assert_frame_equal(
        pd.read_parquet(regenerated / "truth_blocks.parquet"),
        pd.read_parquet(DEMO / "truth_blocks.parquet"),
    )


def test_size_under_15_mb():
    assert sum(p.stat().st_size for p in DEMO.iterdir()) < 15e6


@pytest.fixture(scope="module")
def demo_holes():
    return load_drillholes(load_project(DEMO / "project.toml").data)


def test_naive_mean_clearly_above_truth(demo_holes):
    truth = pd.read_parquet(DEMO / "truth_blocks.parquet")
    lode = truth[truth["domain"] == "lode"]
    true_mean = np.average(lode["au_true"], weights=lode["proportion"])
    iv = demo_holes.intervals[demo_holes.intervals["domain"] == "lode"]
    naive = np.average(iv["au"], weights=iv["to"] - iv["from"])
    print(f"lode: naive sample mean {naive:.3f} g/t, true mean {true_mean:.3f} g/t")
    assert naive > 1.15 * true_mean


def test_holes_hit_the_lode_where_the_solid_says(demo_holes):
    # The logged domain of every interval equals the solid's verdict at the centre of the
    # 2.5 m truth cell holding the interval's mid-point (the demo logs by truth cell).
    from blockmodel.data.compositing import hole_positions
    from blockmodel.demo.deposit import FINE, ORIGIN, _fine_lattice

    iv = demo_holes.intervals
    mid = hole_positions(
        demo_holes, iv["hole"].to_numpy(), ((iv["from"] + iv["to"]) / 2).to_numpy(float)
    )
    shape, lat = _fine_lattice()
    cell = np.floor((mid - ORIGIN) / FINE).astype(int)
    centre = ORIGIN + (cell + 0.5) * FINE
    inside_grid = np.all((cell >= 0) & (cell < shape), axis=1)
    inside_grid &= centre[:, 2] <= topography_elevation(
        centre[:, 0], centre[:, 1]
    )  # cells above ground are air
    cell, logged = cell[inside_grid], iv["domain"].to_numpy()[inside_grid]
    col = cell[:, 0] + lat.nx * cell[:, 1]
    z = ORIGIN[2] + (cell[:, 2] + 0.5) * FINE[2]
    in_lode = points_inside(column_crossings(lode_surface(), lat), col, z)
    in_halo = points_inside(column_crossings(halo_surface(), lat), col, z) & ~in_lode
    assert (logged == "lode").sum() > 1000
    np.testing.assert_array_equal(in_lode, logged == "lode")
    np.testing.assert_array_equal(in_halo, logged == "halo")


def test_defects_present_and_handled(demo_holes):
    raw = (DEMO / "assays.csv").read_text()
    assert raw.count("<0.002") >= 3
    assert demo_holes.below_detection["au"] == raw.count("<0.002")
    warnings = [w.problem for w in demo_holes.warnings]
    assert sum("gap in sampling" in w for w in warnings) >= 3
    assert sum("single survey" in w for w in warnings) == 1
    holes = len(demo_holes.collars)
    assert 120 <= holes <= 180


def test_projected_coordinates():
    c = pd.read_csv(DEMO / "collars.csv")
    assert c["x"].between(4e5, 6e5).all() and c["y"].between(6.9e6, 7.1e6).all()


def test_build_is_deterministic():
    a, b = build_demo(5), build_demo(5)
    np.testing.assert_array_equal(a.grades, b.grades)
    assert a.assays == b.assays
