"""The demo from the command line: files, determinism, re-reporting and the known truth."""

import json

import numpy as np
import pandas as pd
import pytest

from blockmodel.app.cli import main
from blockmodel.assess.truth import compare_with_truth
from blockmodel.config.project import load_project
from blockmodel.model.grid import BlockGrid

from .conftest import DEMO

FILES = [
    "composites.csv",
    "declustering.csv",
    "variogram_models.toml",
    "block_model.parquet",
    "block_model.vti",
    "grade_tonnage.csv",
    "report.html",
    "manifest.json",
    "plan.png",
    "section.png",
    "slice_x.png",
    "slices_class.png",
    "grade_tonnage_au.png",
    "variogram_lode_au.png",
    "cross_validation_lode.png",
    "swath_lode.png",
    "change_of_support_lode.png",
    "change_of_support.csv",
    "experimental_variograms.csv",
    "cross_validation.csv",
    "swaths.csv",
    "neighbourhood.csv",
    "statement.csv",
    "statement.xlsx",
    "collar_plan.png",
    "composites_lode_au.png",
    "plan_variance.png",
    "plan_slope.png",
    "plan_pass.png",
    "grade_tonnage_au_lode.png",
    "swath_by_class_lode.png",
]


@pytest.fixture(scope="module")
def two_runs(tmp_path_factory):
    base = tmp_path_factory.mktemp("runs")
    for name in ("a", "b"):
        assert main(["run", str(DEMO / "project.toml"), "--out", str(base / name)]) == 0
    return base / "a", base / "b"


def test_files_written(two_runs):
    a, _ = two_runs
    for name in FILES:
        assert (a / name).is_file(), name
    html = (a / "report.html").read_text()
    assert html.count("Competent or Qualified Person") >= 2  # cautions at top and bottom
    assert "Check against the known truth" in html
    assert not list(a.parent.glob(".*partial*"))


def test_block_model_columns(two_runs):
    b = pd.read_parquet(two_runs[0] / "block_model.parquet")
    expected = [
        "x",
        "y",
        "z",
        "i",
        "j",
        "k",
        "domain",
        "proportion",
        "density",
        "tonnes",
        "au",
        "au_variance",
        "au_slope",
        "au_efficiency",
        "au_samples",
        "au_holes",
        "au_distance",
        "au_pass",
        "au_nearest",
        "au_inverse_distance",
    ]
    assert list(b.columns[: len(expected)]) == expected
    assert (b["proportion"] > 0).all() and set(b["domain"]) == {"lode", "halo"}


def test_runs_are_deterministic(two_runs):
    a, b = two_runs
    for name in ("block_model.parquet", "grade_tonnage.csv", "composites.csv"):
        assert (a / name).read_bytes() == (b / name).read_bytes(), name
    ma, mb = (json.loads((p / "manifest.json").read_text()) for p in two_runs)
    ma.pop("timings_s"), mb.pop("timings_s")
    assert ma == mb
    assert set(ma["inputs_sha256"]) >= {"assays.csv", "lode.ply", "project.toml"}


def test_report_and_manifest_name_no_path_of_this_machine(two_runs):
    """Paths are relative to the project file's folder, so a report passed on reads the
    same anywhere (the data warnings name 'assays.csv', the configuration 'collars.csv')."""
    a, _ = two_runs
    for name in ("report.html", "manifest.json"):
        text = (a / name).read_text(encoding="utf-8")
        assert str(DEMO) not in text and str(DEMO.parent) not in text, name
    manifest = json.loads((a / "manifest.json").read_text())
    assert manifest["project"] == "project.toml"
    assert manifest["configuration"]["data"]["collars"] == "collars.csv"
    assert manifest["configuration"]["report"]["folder"] == "../reports/demo"
    assert ">assays.csv<" in (a / "report.html").read_text(encoding="utf-8")


def test_vti_cell_order(two_runs):
    import pyvista as pv

    image = pv.read(two_runs[0] / "block_model.vti")
    b = pd.read_parquet(two_runs[0] / "block_model.parquet")
    project = load_project(DEMO / "project.toml")
    assert tuple(np.asarray(image.dimensions) - 1) == project.grid.shape
    one = b[b["domain"] == "lode"].iloc[100]
    flat = int(one.i + 40 * (one.j + 50 * one.k))
    rows = b[(b.i == one.i) & (b.j == one.j) & (b.k == one.k)]
    assert image.cell_data["tonnes"][flat] == pytest.approx(rows["tonnes"].sum())


def test_report_again_at_new_cutoffs(two_runs, tmp_path):
    out = tmp_path / "again"
    assert (
        main(
            [
                "report",
                str(DEMO / "project.toml"),
                str(two_runs[0] / "block_model.parquet"),
                "--out",
                str(out),
                "--cutoffs",
                "0.25",
                "0.75",
            ]
        )
        == 0
    )
    gt = pd.read_csv(out / "grade_tonnage.csv")
    assert sorted(gt["cutoff"].unique()) == [0.25, 0.75]


@pytest.fixture(scope="module")
def truth_figures(two_runs):
    project = load_project(DEMO / "project.toml")
    grid = BlockGrid(project.grid.origin, project.grid.block_size, project.grid.shape)
    blocks = pd.read_parquet(two_runs[0] / "block_model.parquet")
    truth = pd.read_parquet(DEMO / "truth_blocks.parquet")
    figures = compare_with_truth(blocks, truth, grid, "au", "lode")
    print("lode against the known truth:", {k: round(v, 3) for k, v in figures.items()})
    return figures


def test_kriged_lode_mean_within_5_percent_of_truth(truth_figures):
    assert abs(truth_figures["mean_difference_percent"]) <= 5.0


def test_slope_true_on_kriged_indicated_or_better(truth_figures):
    assert 0.8 <= truth_figures["slope_true_on_kriged_indicated_or_better"] <= 1.2


def test_tonnage_above_median_within_10_percent(truth_figures):
    assert abs(truth_figures["tonnage_difference_percent"]) <= 10.0


def _automatic_demo(folder):
    """A copy of the demo asking for automatic variography: no orientation, no model."""
    import shutil

    shutil.copytree(DEMO, folder)
    text = (folder / "project.toml").read_text()
    start = text.index("[variogram.lode.au]")
    text = text[:start] + text[text.index("# Search passes") :]
    lines = [line for line in text.splitlines() if not line.startswith("orientation = [20.0")]
    (folder / "project.toml").write_text("\n".join(lines) + "\n")
    return folder / "project.toml"


@pytest.fixture(scope="module")
def automatic_run(tmp_path_factory):
    project_file = _automatic_demo(tmp_path_factory.mktemp("auto") / "demo")
    assert "[variogram." not in project_file.read_text()
    assert main(["run", str(project_file), "--out", str(project_file.parent / "out")]) == 0
    return project_file


@pytest.mark.parametrize("domain", ["lode", "halo"])
def test_truth_checks_hold_with_the_automatic_fit(automatic_run, domain):
    """The demo's truth checks with no interpreted orientation or model: the tool finds
    the orientation and fits the model itself."""
    project = load_project(automatic_run)
    grid = BlockGrid(project.grid.origin, project.grid.block_size, project.grid.shape)
    blocks = pd.read_parquet(automatic_run.parent / "out" / "block_model.parquet")
    truth = pd.read_parquet(DEMO / "truth_blocks.parquet")
    figures = compare_with_truth(blocks, truth, grid, "au", domain)
    print(domain, "automatic:", {k: round(v, 3) for k, v in figures.items()})
    assert abs(figures["mean_difference_percent"]) <= 5.0
    assert 0.8 <= figures["slope_true_on_kriged_indicated_or_better"] <= 1.2
    assert abs(figures["tonnage_difference_percent"]) <= 10.0


@pytest.mark.parametrize(
    ("args", "name"),
    [
        (["--kind", "slices", "--field", "au_slope"], "slices.png"),
        (["--kind", "cutoff", "--cutoff", "3.0"], "cutoff.png"),
        (["--kind", "plan", "--z", "1050"], "plan.png"),
        (["--kind", "section", "--azimuth", "110", "--width", "20"], "section.png"),
    ],
)
def test_view_command_writes_png(two_runs, tmp_path, args, name):
    from matplotlib.image import imread

    png = tmp_path / name
    assert (
        main(
            [
                "view",
                str(DEMO / "project.toml"),
                str(two_runs[0] / "block_model.parquet"),
                *args,
                "--png",
                str(png),
            ]
        )
        == 0
    )
    img = imread(png)[..., :3]
    assert len(np.unique((img.reshape(-1, 3) * 255).astype(int), axis=0)) > 100


def test_view_unknown_field(two_runs, capsys):
    assert (
        main(
            [
                "view",
                str(DEMO / "project.toml"),
                str(two_runs[0] / "block_model.parquet"),
                "--field",
                "ag",
                "--png",
                "x.png",
            ]
        )
        == 2
    )
    assert "no column 'ag'" in capsys.readouterr().err
