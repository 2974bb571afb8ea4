"""Faults found by trying the tool as a new user would: each gives one clear message with
exit status 2 (no traceback, nothing written), or a correct run with a named warning."""

from __future__ import annotations

import numpy as np
import pandas as pd
import pytest

from blockmodel.app.cli import main


def _set_field(folder, name, hole, column, value, *, row=0):
    """Set ``column`` of the ``row``-th line of ``hole`` in a CSV to the text ``value``."""
    frame = pd.read_csv(folder / name, dtype=str, keep_default_na=False)
    index = frame.index[frame["hole_id"] == hole][row]
    frame.loc[index, column] = value
    frame.to_csv(folder / name, index=False)


def _edit(path, old, new):
    text = path.read_text()
    assert old in text, old
    path.write_text(text.replace(old, new, 1))


def _stopped(project, capsys, *words, command="run"):
    code = main([command, str(project)])
    err = capsys.readouterr().err
    assert code == 2, err
    assert "Traceback" not in err
    for w in words:
        assert w in err, (w, err)
    assert not (project.parent / "out").exists()
    return err


# (id, file, hole, column, value, words in the message)
FIELD_FAULTS = [
    ("collar x inf", "collars.csv", "B01", "x", "inf", ["collars.csv", "B01", "x", "not a number"]),
    ("collar y -inf", "collars.csv", "B01", "y", "-inf", ["B01", "y", "not a number"]),
    ("collar z 1e308", "collars.csv", "B02", "z", "1e308", ["B02", "z", "possible range"]),
    ("collar depth inf", "collars.csv", "B02", "depth", "inf", ["B02", "depth"]),
    ("collar depth 1e308", "collars.csv", "B02", "depth", "1e308", ["B02", "possible range"]),
    ("survey azimuth inf", "surveys.csv", "B03", "azimuth", "inf", ["surveys.csv", "B03"]),
    ("survey dip nan", "surveys.csv", "B03", "dip", "nan", ["B03", "dip", "not a number"]),
    ("survey depth 1e308", "surveys.csv", "B03", "depth", "1e308", ["B03", "possible range"]),
    ("from -inf", "assays.csv", "B04", "from", "-inf", ["assays.csv", "B04", "from"]),
    ("to 1e308", "assays.csv", "B04", "to", "1e308", ["B04", "to", "possible range"]),
    ("negative from", "assays.csv", "B04", "from", "-2", ["B04", "from", "possible range"]),
    ("underscore number", "collars.csv", "B05", "depth", "1_000", ["B05", "not a number"]),
    ("thousands comma", "collars.csv", "B05", "x", "1,000", ["B05", "separators"]),
    ("grade nan", "assays.csv", "B06", "cu", "NaN", ["B06", "cu", "leave the cell blank"]),
    ("grade 1e308", "assays.csv", "B06", "cu", "1e308", ["B06", "more than the whole rock"]),
    ("grade 150 %", "assays.csv", "B06", "cu", "150", ["B06", "more than the whole rock"]),
]


@pytest.mark.parametrize(
    ("label", "name", "hole", "column", "value", "words"),
    FIELD_FAULTS,
    ids=[f[0] for f in FIELD_FAULTS],
)
def test_bad_number_is_located(box_project, capsys, label, name, hole, column, value, words):
    _set_field(box_project.parent, name, hole, column, value)
    _stopped(box_project, capsys, *words, command="check")
    _stopped(box_project, capsys, *words)


# (id, old text of the project file, new text, words)
PROJECT_FAULTS = [
    ("empty cut-offs", "cutoffs = [0.0, 0.5, 1.0]", "cutoffs = []", ["report.cutoffs"]),
    ("infinite range", "ranges = [80.0, 80.0, 40.0]", "ranges = [inf, 80.0, 40.0]", ["finite"]),
    (
        "search plunge 95",
        "ranges = [80.0, 80.0, 40.0]",
        "ranges = [80.0, 80.0, 40.0]\norientation = [0.0, 95.0, 0.0]",
        ["search[0].orientation", "plunge"],
    ),
    ("huge grid", "shape = [10, 10, 10]", "shape = [100000, 100000, 100000]", ["GiB", "grid"]),
    (
        "huge discretisation",
        "[estimation]",
        "[estimation]\ndiscretisation = [1000, 1000, 1000]",
        ["estimation.discretisation"],
    ),
    ("toml syntax", "lags = 8", "lags = = 8", ["project.toml", "not valid TOML"]),
    ("domain all", 'name = "ore"', 'name = "all"\ncode = "ore"', ["domains[0].name", "'all'"]),
    ("min samples above data", "min_samples = 3", "min_samples = 16\nmax_samples = 900", None),
    (
        "grid 50 km away",
        "origin = [0.0, 0.0, 0.0]",
        "origin = [50000.0, 0.0, 0.0]",
        ["ore", "lies inside the block grid"],
    ),
]


@pytest.mark.parametrize(
    ("label", "old", "new", "words"), PROJECT_FAULTS, ids=[f[0] for f in PROJECT_FAULTS]
)
def test_bad_setting_is_named(box_project, capsys, label, old, new, words):
    if label == "min samples above data":
        old, new = "max_samples = 16", "max_samples = 900"
        _edit(box_project, "min_samples = 3", "min_samples = 900")
        words = ["900", "composites"]
    _edit(box_project, old, new)
    err = _stopped(box_project, capsys, *words)
    if label == "toml syntax":
        assert "project.toml  " in err.splitlines()[2] and " 1" in err  # the line column is filled


def test_solid_far_from_the_grid(box_project, capsys):
    from blockmodel.model.solids import box_surface, write_ply

    write_ply(box_project.parent / "ore.ply", box_surface((1e5, 0, 20), (1e5 + 100, 100, 80)))
    _stopped(box_project, capsys, "ore.ply", "0.0 %", "grid.shape")


def test_solid_not_closed(box_project, capsys):
    from blockmodel.model.solids import read_surface, write_ply

    solid = read_surface(box_project.parent / "ore.ply")
    from blockmodel.model.solids import Surface

    write_ply(box_project.parent / "ore.ply", Surface(solid.vertices, solid.triangles[2:]))
    _stopped(box_project, capsys, "ore.ply", "not closed")


def test_topography_above_nothing(box_project, capsys):
    from blockmodel.model.solids import Surface, grid_triangles, write_ply

    xs, ys = np.meshgrid(np.linspace(-10, 110, 5), np.linspace(-10, 110, 5), indexing="ij")
    flat = np.column_stack([xs.ravel(), ys.ravel(), np.full(xs.size, -50.0)])
    write_ply(box_project.parent / "topo.ply", Surface(flat, grid_triangles(5, 5)))
    _edit(box_project, "shape = [10, 10, 10]", 'shape = [10, 10, 10]\ntopography = "topo.ply"')
    _stopped(box_project, capsys, "holds no rock", "topography")


def test_bare_cr_line_endings(box_project, capsys):
    for name in ("collars.csv", "surveys.csv"):
        f = box_project.parent / name
        f.write_bytes(f.read_bytes().replace(b"\n", b"\r"))
    assert main(["check", str(box_project)]) == 0, capsys.readouterr().err


def test_miscased_domain_code_stops_with_a_suggestion(box_project, capsys):
    a = box_project.parent / "assays.csv"
    frame = pd.read_csv(a, dtype=str)
    frame.loc[frame.index[:30], "domain"] = frame.loc[frame.index[:30], "domain"].replace(
        "ore", "Ore"
    )
    frame.to_csv(a, index=False)
    _stopped(box_project, capsys, "'Ore'", "did you mean 'ore'", command="check")


def test_undeclared_codes_are_listed_with_counts(box_project, capsys):
    assert main(["check", str(box_project)]) == 0
    out = capsys.readouterr().out
    waste = int((pd.read_csv(box_project.parent / "assays.csv")["domain"] == "waste").sum())
    assert f"code 'waste' in {waste} interval(s) matches no domain" in out


def test_upward_dips_are_named(small_project, capsys):
    s = small_project.parent / "surveys.csv"
    s.write_text(s.read_text().replace(",-", ","))  # every dip given positive
    assert main(["check", str(small_project)]) == 0
    out = capsys.readouterr().out
    for hole in ("A1", "A2", "A3"):
        assert f"{hole}  dip" in out
    assert out.count("points upward") == 3


def test_report_cutoffs_must_increase(box_project, capsys, tmp_path):
    for bad in (["1", "0.5"], ["-1", "0.5"]):
        code = main(
            [
                "report",
                str(box_project),
                str(tmp_path / "x.parquet"),
                "--out",
                str(tmp_path / "r"),
                "--cutoffs",
                *bad,
            ]
        )
        err = capsys.readouterr().err
        assert code == 2 and "--cutoffs" in err and "Traceback" not in err


def test_cutoff_zero_counts_every_estimated_block():
    from blockmodel.report.tables import grade_tonnage

    blocks = pd.DataFrame(
        {
            "domain": ["a"] * 4,
            "class": ["Indicated"] * 4,
            "tonnes": [100.0, 200.0, 300.0, 400.0],
            "au": [-0.18, 0.5, 1.0, np.nan],
        }
    )
    gt = grade_tonnage(blocks, "au", "g/t", [0.0, 0.5])
    zero = gt[(gt["cutoff"] == 0) & (gt["domain"] == "all") & (gt["class"] == "all")]
    assert zero["tonnes"].iloc[0] == 600.0  # every estimated block, the negative one too
    assert zero["grade"].iloc[0] == pytest.approx((-18 + 100 + 300) / 600)


def test_truth_on_another_grid_is_refused():
    from blockmodel.assess.truth import TruthMismatch, compare_with_truth
    from blockmodel.model.grid import BlockGrid

    grid = BlockGrid((0.0, 0.0, 0.0), (10.0, 10.0, 5.0), (4, 4, 4))
    blocks = pd.DataFrame(
        {
            "domain": "a",
            "i": [0],
            "j": [0],
            "k": [0],
            "tonnes": [1.0],
            "au": [1.0],
            "density": [2.7],
        }
    )
    truth = pd.DataFrame(
        {"x": [7.5], "y": [5.0], "z": [2.5], "domain": "a", "proportion": [1.0], "au_true": [1.0]}
    )
    with pytest.raises(TruthMismatch, match="not the block model's blocks"):
        compare_with_truth(blocks, truth, grid, "au", "a")


@pytest.mark.parametrize("kind", ["plan", "section"])
@pytest.mark.parametrize("field", ["class", "domain", "cu_variance"])
def test_view_of_labels_and_statistics(box_site, tmp_path, capsys, kind, field):
    """``--field class`` and ``--field domain`` once crashed on plans and sections."""
    png = tmp_path / f"{kind}_{field}.png"
    code = main(
        [
            "view",
            str(box_site / "data" / "project.toml"),
            str(box_site / "out" / "block_model.parquet"),
            "--kind",
            kind,
            "--field",
            field,
            "--png",
            str(png),
        ]
    )
    assert code == 0, capsys.readouterr().err
    import matplotlib.image

    pixels = matplotlib.image.imread(png)[..., :3].reshape(-1, 3)
    assert len(np.unique(pixels, axis=0)) > 20  # a drawn figure, not a blank page


def test_thousand_metre_blocks_are_explained(box_project, capsys):
    _edit(box_project, "block_size = [10.0, 10.0, 10.0]", "block_size = [1000.0, 1000.0, 1000.0]")
    _stopped(box_project, capsys, "holds no rock", "sub-cells are [250.0, 250.0, 250.0] m")


def test_composites_above_the_topography_are_named(box_project, capsys):
    from blockmodel.model.solids import Surface, grid_triangles, write_ply

    xs, ys = np.meshgrid(np.linspace(-10, 110, 5), np.linspace(-10, 110, 5), indexing="ij")
    ground = np.column_stack([xs.ravel(), ys.ravel(), np.full(xs.size, 90.0)])
    write_ply(box_project.parent / "topo.ply", Surface(ground, grid_triangles(5, 5)))
    _edit(box_project, "shape = [10, 10, 10]", 'shape = [10, 10, 10]\ntopography = "topo.ply"')
    s = box_project.parent / "surveys.csv"
    s.write_text(s.read_text().replace("B03,0,0,-90", "B03,0,0,90"))  # dip given upward
    code = main(["run", str(box_project)])
    err = capsys.readouterr().err
    assert code == 0, err
    assert "B03  dip" in err and "points upward" in err
    assert "hole B03:" in err and "above the topography" in err
    html = (box_project.parent / "out" / "report.html").read_text()
    assert "hole B03:" in html


@pytest.mark.parametrize("name", ["a/b", "..", "d" * 300])
def test_domain_names_make_safe_file_names(box_project, capsys, name):
    import tomllib

    _edit(box_project, 'name = "ore"', f'name = "{name}"\ncode = "ore"')
    _edit(box_project, "lags = 8", "lags = 8\norientation = [0.0, 0.0, 0.0]")  # no search
    assert tomllib.loads(box_project.read_text())["domains"][0]["name"] == name
    code = main(["variography", str(box_project), "--out", str(box_project.parent / "v")])
    assert code == 0, capsys.readouterr().err
    files = [p.name for p in (box_project.parent / "v").iterdir()]
    assert all("/" not in f and len(f) < 80 for f in files)
    assert any(f.startswith("declustering_") and f.endswith(".png") for f in files)
    assert not (box_project.parent.parent / "b").exists()


def test_solid_volume_share_and_closedness_against_a_box():
    """Analytic checks: a 10 x 20 x 30 m box holds 6,000 m³; a box covering x 5-20, z 0-15
    holds a quarter of it (to the 400-column lattice, within 1 %); the box is closed and
    loses that when two triangles go."""
    from blockmodel.model.solids import (
        Surface,
        box_surface,
        open_edges,
        share_inside_box,
        solid_volume,
    )

    box = box_surface((0, 0, 0), (10, 20, 30))
    assert solid_volume(box) == pytest.approx(6000.0, rel=1e-12)
    assert share_inside_box(box, (0, 0, 0), (10, 20, 30)) == pytest.approx(1.0, abs=1e-9)
    assert share_inside_box(box, (5, 0, 0), (20, 20, 15)) == pytest.approx(0.25, rel=0.01)
    assert share_inside_box(box, (50, 0, 0), (60, 20, 30)) == 0.0
    assert open_edges(box) == 0
    assert open_edges(Surface(box.vertices, box.triangles[2:])) > 0


def _grid_of_holes(spacing, n=4):
    xy = np.arange(n) * spacing
    rows = [
        (f"H{i}{j}", x, y, z)
        for i, x in enumerate(xy)
        for j, y in enumerate(xy)
        for z in np.arange(1.0, 50.0, 2.0)
    ]
    return pd.DataFrame(rows, columns=["hole", "x", "y", "z"]).assign(domain="ore")


def test_hole_spacing_of_a_regular_grid():
    from blockmodel.stages.checks import hole_spacing

    comps = _grid_of_holes(20.0)
    got = hole_spacing(comps[["x", "y", "z"]].to_numpy(float), comps["hole"].to_numpy())
    assert got == pytest.approx(20.0)
    # a 40 m pattern of 36 holes with four infill holes in one corner: still 40 m
    wide = _grid_of_holes(40.0, n=6)
    infill = _grid_of_holes(40.0, n=2).assign(
        x=lambda f: f["x"] + 20.0, hole=lambda f: "I" + f["hole"]
    )
    both = pd.concat([wide, infill])
    got = hole_spacing(both[["x", "y", "z"]].to_numpy(float), both["hole"].to_numpy())
    assert got == pytest.approx(40.0)


def test_blocks_beyond_the_drilling_are_named():
    """A domain drilled over 60 x 60 m but modelled over 160 x 160 m: most tonnes lie
    farther from every composite than the 20 m hole spacing; the run says so."""
    from blockmodel.stages.checks import _extrapolation_warnings

    comps = _grid_of_holes(20.0)
    centres = np.arange(5.0, 160.0, 10.0)
    X, Y, Z = np.meshgrid(centres, centres, [25.0], indexing="ij")
    blocks = pd.DataFrame(
        {"x": X.ravel(), "y": Y.ravel(), "z": Z.ravel(), "domain": "ore", "tonnes": 100.0}
    )
    (message,) = _extrapolation_warnings(comps, blocks)
    assert "domain 'ore'" in message and "(20 m)" in message and "extrapolated" in message
    inside = blocks[(blocks["x"] < 60) & (blocks["y"] < 60)]
    assert _extrapolation_warnings(comps, inside) == []
