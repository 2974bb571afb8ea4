"""Cross-validation, swaths and global bias."""

import numpy as np
import pandas as pd
import pytest

import blockmodel as bm
from blockmodel.assess.validation import cross_validate, global_bias, swath
from blockmodel.simulation.spectral import simulate_gaussian


@pytest.fixture(scope="module")
def stationary():
    model = bm.VariogramModel(0.2, [bm.Structure("spherical", 0.8, (30.0, 30.0, 30.0))])
    rng = np.random.default_rng(5)
    f = simulate_gaussian((60, 60, 20), (2.0, 2.0, 2.0), model, rng)
    # vertical "holes": columns of samples every 2 m down
    cols = rng.choice(60 * 60, 60, replace=False)
    i, j = np.unravel_index(cols, (60, 60))
    i, j = np.repeat(i, 20), np.repeat(j, 20)
    k = np.tile(np.arange(20), 60)
    pts = (np.column_stack([i, j, k]) + 0.5) * 2.0
    return model, pts, f[i, j, k], np.repeat(np.arange(60), 20)


@pytest.mark.parametrize("leave_out", ["hole", "sample"])
def test_standardised_error_variance_near_one(stationary, leave_out):
    # With the true model, standardised errors have unit variance (common practice check).
    model, pts, vals, holes = stationary
    search = bm.SearchEllipsoid((60, 60, 60), min_samples=4, max_samples=24)
    cv = cross_validate(pts, vals, holes, model, search, leave_out=leave_out)
    print(leave_out, cv.summary())
    assert 0.7 <= cv.variance_standardised_error <= 1.3
    assert abs(cv.mean_error) < 0.1
    assert cv.estimated == cv.total


def test_leave_one_out_uses_no_sample_at_the_target(stationary):
    model, pts, vals, holes = stationary
    search = bm.SearchEllipsoid((60, 60, 60), min_samples=4, max_samples=24)
    cv = cross_validate(pts[:200], vals[:200], holes[:200], model, search, leave_out="sample")
    # the same as kriging each sample from all the others, one at a time
    for n in (0, 57, 133):
        keep = np.arange(200) != n
        ref = bm.krige(pts[:200][keep], vals[:200][keep], pts[n : n + 1], model, search)
        assert cv.table["estimate"][n] == pytest.approx(ref.estimate[0], rel=1e-10)


def test_swath_and_bias():
    blocks = pd.DataFrame(
        {
            "domain": "d",
            "x": [5.0, 15, 25, 35],
            "tonnes": [1.0, 1, 2, 2],
            "au": [1.0, 2, 3, 4],
            "au_nearest": [1.0, 2, 3, 6],
        }
    )
    comps = pd.DataFrame({"x": [4.0, 16, 26, 36], "au": [1.0, 2, 3, 4]})
    s = swath(blocks, comps, "au", "x", 20.0, np.array([1.0, 3.0, 1.0, 1.0]))
    np.testing.assert_allclose(s["kriged"], [1.5, 3.5])
    # slices 0-20 and 20-40 m: composites 1 (weight 1) and 2 (weight 3), then 3 and 4
    np.testing.assert_allclose(s["composites"], [(1 + 6) / 4, 3.5])
    b = global_bias(blocks, "au")
    kriged, nearest = (1 + 2 + 6 + 8) / 6, (1 + 2 + 6 + 12) / 6
    assert b["difference_percent"][0] == pytest.approx(100 * (kriged - nearest) / nearest)
