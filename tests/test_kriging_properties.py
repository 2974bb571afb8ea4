"""Kriging properties and the oracle: the batched fast path equals a plain per-block loop."""

import numpy as np
import pytest

import blockmodel as bm

O = bm.Orientation(40, 15, 10)
MODEL = bm.VariogramModel(
    0.2,
    [
        bm.Structure("spherical", 0.6, (80, 50, 20), O),
        bm.Structure("exponential", 0.4, (200, 120, 40), O),
    ],
)
SEARCH = bm.SearchEllipsoid((150, 100, 40), O, min_samples=3, max_samples=16)


def _data(rng, n=400):
    pts = rng.uniform([0, 0, 0], [300, 300, 100], size=(n, 3))
    vals = rng.lognormal(0, 0.7, size=n)
    holes = np.repeat(np.arange(n // 10), 10)
    targets = rng.uniform([20, 20, 10], [280, 280, 90], size=(120, 3))
    return pts, vals, holes, targets


def _plain_loop(pts, vals, targets, model, search, block_size, disc):
    """Reference: one block at a time, brute-force search, numpy solve of the bordered system."""
    offsets = bm.discretisation_offsets(block_size, disc)
    a = search.transform()
    out = np.full((len(targets), 4), np.nan)
    for b, t in enumerate(targets):
        d = np.linalg.norm((pts - t) @ a.T, axis=1)
        order = np.argsort(d, kind="stable")
        near = order[d[order] <= 1.0][: search.max_samples]
        if len(near) < search.min_samples:
            continue
        p = pts[near]
        k = len(near)
        lhs = np.ones((k + 1, k + 1))
        lhs[k, k] = 0.0
        lhs[:k, :k] = model.covariance((p[:, None, :] - p[None, :, :]).reshape(-1, 3)).reshape(k, k)
        nodes = t + offsets
        cbar = (
            model.structured_covariance((p[:, None, :] - nodes[None, :, :]).reshape(-1, 3))
            .reshape(k, -1)
            .mean(axis=1)
        )
        cvv = model.structured_covariance(
            (offsets[:, None, :] - offsets[None, :, :]).reshape(-1, 3)
        ).mean()
        sol = np.linalg.solve(lhs, np.append(cbar, 1.0))
        lam = sol[:k]
        variance = cvv - lam @ cbar - sol[k]
        # slope of the regression of true block on estimate, and efficiency (definitions in blockmodel/estimation/kriging.py)
        slope = (lam @ cbar) / (lam @ lhs[:k, :k] @ lam)
        out[b] = lam @ vals[near], variance, slope, (cvv - variance) / cvv
    return out


def test_fast_path_equals_plain_loop(rng):
    pts, vals, _, targets = _data(rng)
    table = bm.krige(
        pts, vals, targets, MODEL, SEARCH, block_size=(10, 10, 5), discretisation=(3, 3, 2)
    )
    ref = _plain_loop(pts, vals, targets, MODEL, SEARCH, (10, 10, 5), (3, 3, 2))
    np.testing.assert_allclose(table.estimate, ref[:, 0], rtol=1e-9, atol=1e-12)
    np.testing.assert_allclose(table.variance, ref[:, 1], rtol=1e-9, atol=1e-12)
    np.testing.assert_allclose(table.slope, ref[:, 2], rtol=1e-9)
    np.testing.assert_allclose(table.efficiency, ref[:, 3], rtol=1e-9, atol=1e-12)


def test_weights_sum_to_one_and_slope_definition(rng):
    """Ordinary kriging identities (Journel & Huijbregts 1978, V.A; the definitions in the
    kriging module): weights sum to one; with S = C_00 - variance - mu (the weighted
    point-to-block covariance), the slope is S / (S - mu) and the efficiency
    (C_00 - variance) / C_00, where C_00 is the block's mean covariance computed here."""
    pts, vals, _, targets = _data(rng)
    table = bm.krige(pts, vals, targets, MODEL, SEARCH, block_size=(10, 10, 5))
    ok = table.search_pass > 0
    assert ok.sum() > 50
    np.testing.assert_allclose(table.weight_sum[ok], 1.0, atol=1e-10)
    offsets = bm.discretisation_offsets((10, 10, 5), (4, 4, 2))
    cvv = MODEL.structured_covariance((offsets[:, None] - offsets[None]).reshape(-1, 3)).mean()
    var, mu = table.variance[ok].to_numpy(), table.lagrange[ok].to_numpy()
    weighted = cvv - var - mu
    np.testing.assert_allclose(table.slope[ok], weighted / (weighted - mu), rtol=1e-9)
    np.testing.assert_allclose(table.efficiency[ok], (cvv - var) / cvv, rtol=1e-9)
    assert np.all(table.efficiency[ok] <= 1.0) and np.all(var >= 0)


def test_exact_at_samples_point_support(rng):
    pts, vals, _, _ = _data(rng, 200)
    model = bm.VariogramModel(0.0, [bm.Structure("spherical", 1.0, (90, 60, 30), O)])
    table = bm.krige(pts, vals, pts[:30], model, SEARCH)
    np.testing.assert_allclose(table.estimate, vals[:30], rtol=1e-9)
    np.testing.assert_allclose(table.variance, 0.0, atol=1e-9)


def test_exact_at_samples_with_nugget_point_support(rng):
    # Point kriging is an exact interpolator, nugget or not (Journel & Huijbregts 1978, V.A).
    pts, vals, _, _ = _data(rng, 200)
    table = bm.krige(pts, vals, pts[:30], MODEL, SEARCH)
    np.testing.assert_allclose(table.estimate, vals[:30], rtol=1e-9)


def test_translation_invariance(rng):
    pts, vals, holes, targets = _data(rng)
    kw = dict(block_size=(10, 10, 5), hole_ids=holes)
    a = bm.krige(pts, vals, targets, MODEL, SEARCH, **kw)
    shift = np.array([5e5, 7e6, 0.0])
    b = bm.krige(pts + shift, vals, targets + shift, MODEL, SEARCH, **kw)
    np.testing.assert_allclose(a.estimate, b.estimate, rtol=1e-9)
    np.testing.assert_allclose(a.variance, b.variance, rtol=1e-8)
    np.testing.assert_array_equal(a.n_samples, b.n_samples)


def test_rotation_invariance(rng):
    # Rotating data, targets and every orientation by the same bearing changes nothing.
    pts, vals, _, targets = _data(rng)
    theta = np.radians(33.0)
    rot = np.array(
        [[np.cos(theta), -np.sin(theta), 0], [np.sin(theta), np.cos(theta), 0], [0, 0, 1]]
    )
    # rows are new (x, y, z): a vector at bearing b goes to bearing b + 33
    rot = np.array(
        [[np.cos(theta), np.sin(theta), 0], [-np.sin(theta), np.cos(theta), 0], [0, 0, 1]]
    )
    o2 = bm.Orientation(O.azimuth + 33.0, O.plunge, O.tilt)
    np.testing.assert_allclose(o2.axes(), O.axes() @ rot.T, atol=1e-12)
    model2 = bm.VariogramModel(
        0.2,
        [bm.Structure(s.kind, s.sill, s.ranges, o2) for s in MODEL.structures],
    )
    search2 = bm.SearchEllipsoid((150, 100, 40), o2, min_samples=3, max_samples=16)
    a = bm.krige(pts, vals, targets, MODEL, SEARCH)
    b = bm.krige(pts @ rot.T, vals, targets @ rot.T, model2, search2)
    np.testing.assert_allclose(a.estimate, b.estimate, rtol=1e-8)
    np.testing.assert_allclose(a.variance, b.variance, rtol=1e-8)


def test_block_estimate_is_mean_of_point_estimates(rng):
    pts, vals, _, targets = _data(rng, 120)
    wide = bm.SearchEllipsoid((1e5, 1e5, 1e5), min_samples=1, max_samples=500)
    offsets = bm.discretisation_offsets((10, 10, 5), (4, 4, 2))
    block = bm.krige(
        pts, vals, targets[:5], MODEL, wide, block_size=(10, 10, 5), discretisation=(4, 4, 2)
    )
    for b, t in enumerate(targets[:5]):
        points = bm.krige(pts, vals, t + offsets, MODEL, wide)
        assert block.estimate[b] == pytest.approx(points.estimate.mean(), rel=1e-10)


def test_simple_kriging_one_sample():
    # One sample: the weight is C(h)/C(0) and the mean takes the rest (common practice
    # identity of simple kriging; Journel & Huijbregts 1978, V.A.1).
    model = bm.VariogramModel(0.1, [bm.Structure("spherical", 0.9, (50, 50, 50))])
    search = bm.SearchEllipsoid((100, 100, 100), min_samples=1, max_samples=4)
    h = np.array([[20.0, 0.0, 0.0]])
    w = model.covariance(h)[0] / model.total_sill
    table = bm.krige(np.zeros((1, 3)), [5.0], h, model, search, method="simple", mean=2.0)
    assert table.estimate[0] == pytest.approx(2.0 + w * 3.0, rel=1e-12)
    assert table.slope[0] == pytest.approx(1.0)


def test_chunk_size_does_not_change_results(rng):
    pts, vals, holes, targets = _data(rng)
    s = bm.SearchEllipsoid(
        (150, 100, 40), O, min_samples=3, max_samples=16, max_per_hole=3, max_per_octant=4
    )
    a = bm.krige(pts, vals, targets, MODEL, s, block_size=(10, 10, 5), hole_ids=holes, chunk_size=7)
    b = bm.krige(
        pts, vals, targets, MODEL, s, block_size=(10, 10, 5), hole_ids=holes, chunk_size=10**5
    )
    for c in a.columns:
        np.testing.assert_array_equal(a[c].to_numpy(), b[c].to_numpy(), err_msg=c)


def test_search_limits_and_passes(rng):
    pts, vals, holes, targets = _data(rng)
    far = np.array([[5000.0, 5000.0, 50.0]])
    targets = np.vstack([targets, far])
    first = bm.SearchEllipsoid((40, 30, 15), O, min_samples=8, max_samples=12, max_per_hole=2)
    second = bm.SearchEllipsoid((300, 200, 80), O, min_samples=3, max_samples=12, max_per_hole=2)
    table = bm.krige(pts, vals, targets, MODEL, [first, second], hole_ids=holes)
    assert set(table.search_pass.unique()) <= {0, 1, 2}
    assert (table.search_pass == 2).any() and (table.search_pass == 1).any()
    assert table.search_pass.iloc[-1] == 0 and np.isnan(table.estimate.iloc[-1])
    assert table.n_samples.iloc[-1] == 0
    est = table.search_pass > 0
    # no more than 2 samples per hole: at least n_samples / 2 holes
    assert np.all(table.n_holes[est] * 2 >= table.n_samples[est])


def test_idw_and_nearest(rng):
    pts, vals, _, targets = _data(rng)
    nn = bm.krige(pts, vals, targets, None, SEARCH, method="nearest")
    idw = bm.krige(pts, vals, targets, None, SEARCH, method="inverse_distance", power=2)
    a = SEARCH.transform()
    for b in range(10):
        d = np.linalg.norm((pts - targets[b]) @ a.T, axis=1)
        order = np.argsort(d)[:16]
        order = order[d[order] <= 1]
        if len(order) < 3:
            continue
        assert nn.estimate[b] == vals[order[0]]
        euclid = np.linalg.norm(pts[order] - targets[b], axis=1).mean()
        assert nn.mean_distance[b] == pytest.approx(euclid, rel=1e-12)
        w = 1 / d[order] ** 2
        assert idw.estimate[b] == pytest.approx((w * vals[order]).sum() / w.sum(), rel=1e-12)


def test_duplicates_are_merged_and_reported(rng):
    pts, vals, _, targets = _data(rng, 100)
    pts2 = np.vstack([pts, pts[:5]])
    vals2 = np.concatenate([vals, vals[:5] + 1.0])
    table = bm.krige(pts2, vals2, targets, MODEL, SEARCH)
    assert table.attrs["merged_duplicates"] == 5
    assert np.isfinite(table.estimate[table.search_pass > 0]).all()
    assert not table.ill_conditioned.any()


def test_bad_arguments(rng):
    pts, vals, _, targets = _data(rng, 50)
    with pytest.raises(ValueError, match="method"):
        bm.krige(pts, vals, targets, MODEL, SEARCH, method="universal")
    with pytest.raises(ValueError, match=r"\(n, 3\)"):
        bm.krige(pts[:, :2], vals, targets, MODEL, SEARCH)
    with pytest.raises(ValueError, match="mean"):
        bm.krige(pts, vals, targets, MODEL, SEARCH, method="simple")
    with pytest.raises(ValueError, match="min_samples"):
        bm.SearchEllipsoid((10, 10, 10), min_samples=5, max_samples=2)


def _textbook_cholesky(a):
    """Oracle: the inner-product Cholesky form, one entry at a time (C = U'U, U upper),
    subtracting the products in increasing order and scaling by the pivot's reciprocal."""
    n = len(a)
    u = np.zeros_like(a)
    for j in range(n):
        s = a[j, j]
        for p in range(j):
            s -= u[p, j] * u[p, j]
        u[j, j] = np.sqrt(s)
        inv = 1.0 / u[j, j]
        for i in range(j + 1, n):
            s = a[j, i]
            for p in range(j):
                s -= u[p, j] * u[p, i]
            u[j, i] = s * inv
    return u


@pytest.mark.parametrize("n", [1, 3, 4, 5, 8, 13, 24, 25, 31])
def test_cholesky_by_panels_equals_the_textbook_form_bit_for_bit(rng, n):
    """Oracle: the kernel's factor (panels of four pivots) equals the inner-product form
    to the last bit, whatever n modulo four; right-hand sides solved two at a time each
    equal the same one solved alone, and numpy's solve to 1e-10."""
    from blockmodel.estimation import _kernels

    x = rng.normal(size=(n, n))
    a = x @ x.T + n * np.eye(n)
    u = np.triu(a)
    ratio = _kernels._cholesky(u)
    assert ratio > 0.0
    np.testing.assert_array_equal(np.triu(u), _textbook_cholesky(a))
    rhs = rng.normal(size=(5, n))  # one right-hand side per row
    together = rhs.copy()
    _kernels._cholesky_solve(u, together, 5)
    for c in range(5):
        alone = rhs[c : c + 1].copy()
        _kernels._cholesky_solve(u, alone, 1)
        np.testing.assert_array_equal(together[c], alone[0])
    np.testing.assert_allclose(together.T, np.linalg.solve(a, rhs.T), rtol=1e-10, atol=1e-12)


def test_cholesky_reports_a_matrix_that_is_not_positive_definite():
    """A pivot that is not positive (here the fifth, inside the second panel) gives 0."""
    from blockmodel.estimation import _kernels

    a = np.eye(6)
    a[4, 4] = -1.0
    assert _kernels._cholesky(a) == 0.0
