"""Declustering weights."""

import numpy as np
import pandas as pd
import pytest

from blockmodel.assess.declustering import cell_declustering, nearest_neighbour_weights

from .conftest import DEMO


def test_regular_grid_gets_equal_weights():
    # On a regular grid every cell holds one sample whatever the origin: equal weights
    # (Journel 1983; follows from the definition of cell weights).
    g = np.arange(0, 100, 10.0) + 5
    pts = np.array(np.meshgrid(g, g, [0.0])).reshape(3, -1).T
    res = cell_declustering(pts, np.arange(len(pts), dtype=float), np.array([10.0]), grid_shifts=4)
    np.testing.assert_allclose(res.weights, 1.0)
    nn = nearest_neighbour_weights(pts, pts + 0.1)
    np.testing.assert_allclose(nn, 1.0)


def test_duplicated_cluster_halves_weights(rng):
    pts = rng.uniform(0, 100, size=(50, 3))
    pts[:, 2] = 0
    vals = rng.normal(size=50)
    base = cell_declustering(pts, vals, np.array([25.0]), keep="given_size", given_size=25.0)
    dup = cell_declustering(
        np.vstack([pts, pts[:10]]),
        np.r_[vals, vals[:10]],
        np.array([25.0]),
        keep="given_size",
        given_size=25.0,
    )
    # cells holding duplicated samples: each copy gets half of what the original had,
    # exactly when a cell's samples are all duplicated; compare total weight per location
    w_dup = dup.weights[:10] + dup.weights[50:]
    scale = base.weights.sum() / dup.weights.sum()
    np.testing.assert_allclose(dup.weights[:10], dup.weights[50:])
    assert np.all(dup.weights[:10] * scale < base.weights[:10])
    np.testing.assert_allclose(dup.weights[:10] / w_dup, 0.5)


def test_duplicated_isolated_sample_halves_exactly():
    pts = np.array([[5.0, 5, 0], [55, 5, 0], [5, 55, 0], [55, 55, 0]])
    res = cell_declustering(
        np.vstack([pts, pts[:1]]),
        np.ones(5),
        np.array([50.0]),
        grid_shifts=1,
        keep="given_size",
        given_size=50.0,
    )
    np.testing.assert_allclose(res.weights[[0, 4]], res.weights[1] / 2)


def test_demo_declustered_lode_mean_closer_to_truth():
    from blockmodel import stages
    from blockmodel.config.project import load_project

    project = load_project(DEMO / "project.toml")
    comps = stages.load_and_composite(project)
    decl = stages.decluster(project, comps.table).by_domain["lode"]
    truth = pd.read_parquet(DEMO / "truth_blocks.parquet")
    lode = truth[truth["domain"] == "lode"]
    true_mean = np.average(lode["au_true"], weights=lode["proportion"])
    naive, declustered = decl.naive_mean["au"], decl.declustered_mean["au"]
    print(
        f"lode true {true_mean:.3f}, naive {naive:.3f}, declustered {declustered:.3f} g/t; "
        f"cell {decl.cell.chosen_size:.0f} m"
    )
    assert abs(declustered - true_mean) < abs(naive - true_mean)
    assert decl.weights.sum() == pytest.approx(len(decl.weights))
