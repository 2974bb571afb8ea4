"""Kriging neighbourhood analysis (Vann, Jackson & Bertoli 2003): figures at the
project's settings equal the block model's, negative weights and the weight of the mean
against a plain numpy solve, the drill spacing in the plane of continuity, and the known
behaviour on a regular grid of samples."""

import numpy as np
import pandas as pd
import pytest

import blockmodel as bm
from blockmodel import stages
from blockmodel.app.cli import main
from blockmodel.assess.neighbourhood import adequate_index, choose_test_blocks, drill_spacing
from blockmodel.config.project import load_project
from blockmodel.estimation.kriging import estimate

from .conftest import make_box_project


@pytest.fixture(scope="module")
def box_results(tmp_path_factory):
    project = load_project(make_box_project(tmp_path_factory.mktemp("kna")))
    steps = stages.Steps(lambda m: None, lambda m: None)
    return stages.run_stages(project, steps, stages.EngineOptions(backend="serial"))


def test_project_settings_give_the_block_models_figures(box_results):
    """The analysis at the project's own settings kriges the test blocks exactly as the
    run did: same slope, efficiency and variance as the block model's rows."""
    table = box_results.neighbourhood.table()
    now = table[table["current"] & (table["sweep"] == "max_samples")]
    assert len(now) == 3
    merged = now.merge(box_results.blocks, on=["domain", "x", "y", "z"], validate="one_to_one")
    assert len(merged) == 3
    np.testing.assert_allclose(merged["slope"], merged["cu_slope"], rtol=1e-12)
    np.testing.assert_allclose(merged["efficiency"], merged["cu_efficiency"], rtol=1e-12)
    np.testing.assert_allclose(merged["variance"], merged["cu_variance"], rtol=1e-12)
    assert (merged["samples"] == merged["cu_samples"]).all()
    # every sweep holds the project's setting once per test block
    assert (table.groupby(["block", "sweep"])["current"].sum() == 1).all()


def _numpy_weights(pts, target, model, offsets, simple):
    """Weights of one block by a plain numpy solve (covariance form)."""
    k = len(pts)
    c = model.covariance((pts[:, None] - pts[None]).reshape(-1, 3)).reshape(k, k)
    nodes = target + offsets
    cbar = model.structured_covariance((pts[:, None] - nodes[None]).reshape(-1, 3))
    cbar = cbar.reshape(k, -1).mean(axis=1)
    if simple:
        return np.linalg.solve(c, cbar)
    lhs = np.ones((k + 1, k + 1))
    lhs[k, k] = 0.0
    lhs[:k, :k] = c
    return np.linalg.solve(lhs, np.append(cbar, 1.0))[:k]


@pytest.mark.parametrize("method", ["ordinary", "simple"])
def test_negative_weights_and_weight_of_mean_against_numpy(rng, method):
    # a cluster of samples screened by closer ones gives negative weights
    near = rng.uniform(-6, 6, size=(8, 3))
    far = rng.uniform(-6, 6, size=(8, 3)) + [30.0, 0.0, 0.0]
    pts = np.vstack([near, far])
    vals = rng.lognormal(size=len(pts))
    model = bm.VariogramModel(0.05, [bm.Structure("gaussian", 1.0, (40.0, 40.0, 40.0))])
    search = bm.SearchEllipsoid((1e4, 1e4, 1e4), min_samples=1, max_samples=len(pts))
    target = np.array([[2.0, 0.0, 0.0]])
    res = estimate(
        pts,
        vals,
        target,
        model,
        search,
        method=method,
        mean=1.5,
        block_size=(4, 4, 4),
        discretisation=(2, 2, 2),
    )
    w = _numpy_weights(
        pts, target[0], model, bm.discretisation_offsets((4, 4, 4), (2, 2, 2)), method == "simple"
    )
    assert (w < 0).sum() > 0  # the case tests something
    assert res["negative_count"][0] == (w < 0).sum()
    assert res["negative_weights"][0] == pytest.approx(w[w < 0].sum(), rel=1e-8)
    assert res["weight_sum"][0] == pytest.approx(w.sum(), rel=1e-10)
    if method == "simple":
        assert 1 - res["weight_sum"][0] == pytest.approx(1 - w.sum(), abs=1e-10)


def _regular_grid(spacing=10.0):
    xy = np.arange(5.0, 100.0, spacing)
    z = np.arange(1.0, 60.0, 2.0)
    X, Y, Z = np.meshgrid(xy, xy, z, indexing="ij")
    pts = np.column_stack([X.ravel(), Y.ravel(), Z.ravel()])
    holes = (X.ravel() * 1000 + Y.ravel()).astype(int)
    return pts, holes


def test_regular_grid_more_samples_level_off_and_larger_blocks_do_better():
    """Known behaviour (common practice; Vann et al. 2003): with a spherical model on a
    regular grid, efficiency never falls as nearest samples are added and levels off, the
    slope rises toward 1; larger blocks have higher efficiency."""
    pts, holes = _regular_grid()
    vals = np.zeros(len(pts))  # figures do not depend on the values
    model = bm.VariogramModel(0.1, [bm.Structure("spherical", 0.9, (60.0, 60.0, 60.0))])
    target = np.array([[50.0, 50.0, 30.0]])
    slope, eff = [], []
    for m in (4, 8, 16, 24, 32, 48, 64):
        s = bm.SearchEllipsoid((200.0, 200.0, 200.0), min_samples=1, max_samples=m)
        r = estimate(pts, vals, target, model, s, block_size=(10, 10, 10), hole_ids=holes)
        slope.append(r["slope"][0])
        eff.append(r["efficiency"][0])
    assert np.all(np.diff(eff) >= -1e-9), eff
    assert slope[-1] > slope[0] and abs(slope[-1] - 1) < 0.1, slope
    assert abs(eff[-1] - eff[-2]) < 0.02 and abs(slope[-1] - slope[-2]) < 0.02
    # for the block sizes the neighbourhood must span the block: four samples from each
    # of the 36 nearest holes
    s = bm.SearchEllipsoid((200.0, 200.0, 200.0), min_samples=1, max_samples=144, max_per_hole=4)
    by_size = [
        estimate(pts, vals, target, model, s, block_size=(b, b, 10), hole_ids=holes)["efficiency"][
            0
        ]
        for b in (5.0, 10.0, 20.0, 40.0)
    ]
    assert np.all(np.diff(by_size) > 0), by_size


def test_drill_spacing_in_the_plane_of_continuity():
    """Holes 30 m apart along strike (north) and 20 m in plan across it, crossing a plane
    dipping 45 degrees east: in plan the nearest hole is 20 m away, in the plane
    20 / cos 45 = 28.28 m."""
    rows = []
    for i in range(8):
        for j in range(8):
            x, y = 20.0 * i, 30.0 * j
            z = -x  # the plane z = -x dips 45 degrees east
            for dz in (-1.0, 1.0):
                rows.append((x, y, z + dz, f"H{i}{j}"))
    pts = np.array([r[:3] for r in rows])
    holes = np.array([r[3] for r in rows])
    assert drill_spacing(pts, holes, bm.Orientation(0, 0, 0)) == pytest.approx(20.0)
    assert drill_spacing(pts, holes, bm.Orientation(0, 0, 45)) == pytest.approx(
        20.0 / np.cos(np.radians(45)), rel=1e-9
    )


def test_test_blocks_and_adequate_setting():
    pts, holes = _regular_grid(spacing=20.0)
    inner = pts[(pts[:, 0] < 60) & (pts[:, 1] < 60)]  # drilling clustered in one corner
    inner_holes = holes[(pts[:, 0] < 60) & (pts[:, 1] < 60)]
    c = np.arange(5.0, 100.0, 10.0)
    X, Y = np.meshgrid(c, c, indexing="ij")
    centres = np.column_stack([X.ravel(), Y.ravel(), np.full(X.size, 31.0)])
    well, typical, poor = choose_test_blocks(centres, inner, inner_holes, 20.0)
    assert well.holes_near >= typical.holes_near >= poor.holes_near
    assert well.nearest <= typical.nearest <= poor.nearest
    assert poor.centre[0] > 60 or poor.centre[1] > 60
    assert adequate_index(np.array([0.5, 0.9, 0.97, 1.0]), np.array([0.3, 0.6, 0.7, 0.71])) == 2
    assert adequate_index(np.array([np.nan, np.nan]), np.array([np.nan, np.nan])) is None
    # slopes above 1 count as 1: no reward for overshooting
    assert adequate_index(np.array([0.96, 1.3]), np.array([0.5, 0.5])) == 0


def test_neighbourhood_command(box_project, capsys):
    out = box_project.parent / "kna"
    code = main(["neighbourhood", str(box_project), "--out", str(out), "--blocks", "45,45,55"])
    assert code == 0, capsys.readouterr().err
    table = pd.read_csv(out / "neighbourhood.csv")
    assert {"well informed", "typical", "poorly informed", "given 1"} <= set(table["block"])
    assert len(list(out.glob("neighbourhood_ore_*.png"))) == 4
    html = (out / "neighbourhood.html").read_text()
    assert "Kriging neighbourhood analysis" in html and "Competent or Qualified Person" in html
    code = main(["neighbourhood", str(box_project), "--out", str(out) + "2", "--blocks", "1,2"])
    err = capsys.readouterr().err
    assert code == 2 and "--blocks" in err and "Traceback" not in err


def test_domain_without_search_is_named(box_project, capsys):
    """A project may leave out its search for check and variography; kriging and the
    neighbourhood analysis stop with a message naming the domain, not a traceback."""
    text = box_project.read_text()
    start = text.index("[[search]]")
    box_project.write_text(text[:start] + text[text.index("[grid]") :])
    for command in ("neighbourhood", "run"):
        code = main([command, str(box_project), "--out", str(box_project.parent / command)])
        err = capsys.readouterr().err
        assert code == 2 and "domain 'ore' has no search" in err and "Traceback" not in err
