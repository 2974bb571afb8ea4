"""Experimental variograms and fitting against gstat on the Meuse data, and on a field
simulated with a known anisotropic model."""

import numpy as np
import pytest

import blockmodel as bm
from blockmodel.simulation.spectral import simulate_gaussian
from blockmodel.variography.directions import find_orientation
from blockmodel.variography.experimental import (
    direction_vector,
    experimental_variogram,
    normal_scores,
)
from blockmodel.variography.fitting import fit_variogram, principal_directions


@pytest.fixture(scope="module")
def meuse_log_zinc(meuse):
    xy = meuse[["x", "y"]].to_numpy(float)
    pts = np.column_stack([xy, np.zeros(len(xy))])
    # gstat default lags: cutoff = bounding-box diagonal / 3, width = cutoff / 15
    cutoff = np.linalg.norm(xy.max(axis=0) - xy.min(axis=0)) / 3
    assert cutoff == pytest.approx(1596.62, abs=0.01)
    return pts, np.log(meuse["zinc"].to_numpy(float)), cutoff / 15


def test_meuse_lags_match_gstat(meuse_log_zinc):
    # gstat variogram(log(zinc) ~ 1, meuse) (Pebesma 2004; Bivand et al. 2013):
    # lag 1: 57 pairs, 79.29 m, 0.12345; lag 2: 299 pairs, 163.97 m, 0.21622
    pts, v, width = meuse_log_zinc
    ev = experimental_variogram(pts, v, lag=width, n_lags=15)
    assert list(ev.pairs[:2]) == [57, 299]
    np.testing.assert_allclose(ev.distance[:2], [79.29, 163.97], atol=0.005)
    np.testing.assert_allclose(ev.value[:2], [0.12345, 0.21622], atol=5e-6)


def test_meuse_all_lags_match_scikit_gstat(meuse_log_zinc):
    """All 15 lags, pair counts and semivariogram values, against scikit-gstat's
    Variogram (a general-purpose library; even bins up to the same cutoff, the
    classical estimator), computed in the same run."""
    skgstat = pytest.importorskip("skgstat")
    pts, v, width = meuse_log_zinc
    ev = experimental_variogram(pts, v, lag=width, n_lags=15)
    ref = skgstat.Variogram(
        pts[:, :2],
        v,
        bin_func="even",
        n_lags=15,
        maxlag=15 * width,
        estimator="matheron",
        fit_method=None,
    )
    np.testing.assert_allclose(ref.bins, width * np.arange(1, 16), rtol=1e-12)
    assert list(ev.pairs) == list(ref.bin_count)
    np.testing.assert_allclose(ev.value, ref.experimental, rtol=1e-12)


def test_meuse_spherical_fit_matches_gstat(meuse_log_zinc):
    # gstat fit.variogram with N/h^2 weights: nugget 0.0507, partial sill 0.5906, range 897
    pts, v, width = meuse_log_zinc
    ev = experimental_variogram(pts, v, lag=width, n_lags=15)
    m = fit_variogram([(ev, None)], ["spherical"], bm.Orientation())
    assert m.nugget == pytest.approx(0.0507, rel=0.01)
    assert m.structures[0].sill == pytest.approx(0.5906, rel=0.01)
    assert m.structures[0].ranges[0] == pytest.approx(897, rel=0.01)


def test_fixed_parameters_are_held(meuse_log_zinc):
    pts, v, width = meuse_log_zinc
    ev = experimental_variogram(pts, v, lag=width, n_lags=15)
    m = fit_variogram(
        [(ev, None)], ["spherical"], bm.Orientation(), fixed={"nugget": 0.1, "range1_major": 700.0}
    )
    assert m.nugget == 0.1 and m.structures[0].ranges[0] == 700.0
    with pytest.raises(ValueError, match="cannot fix"):
        fit_variogram([(ev, None)], ["spherical"], bm.Orientation(), fixed={"sill": 1.0})


@pytest.fixture(scope="module")
def anisotropic_field():
    o = bm.Orientation(30, 0, 0)
    true = bm.VariogramModel(0.0, [bm.Structure("spherical", 1.0, (40.0, 20.0, 8.0), o)])
    rng = np.random.default_rng(3)
    shape, sp = (120, 120, 40), (2.0, 2.0, 2.0)
    f = simulate_gaussian(shape, sp, true, rng)
    idx = rng.choice(f.size, 8000, replace=False)  # enough pairs along the minor axis (>= 30 a lag)
    i, j, k = np.unravel_index(idx, shape)
    return o, (np.column_stack([i, j, k]) + 0.5) * sp, f[i, j, k]


def test_fit_recovers_simulated_anisotropy(anisotropic_field):
    # Truth: spherical, ranges (40, 20, 8) m at azimuth 30 (the demo's spectral simulator).
    o, pts, vals = anisotropic_field
    evs = []
    for axis, (az, pl) in enumerate(principal_directions(o)):
        lag = 4.0 if axis < 2 else 1.5
        evs.append(
            (
                experimental_variogram(
                    pts,
                    vals,
                    lag=lag,
                    n_lags=12,
                    direction=(az, pl),
                    angular_tolerance=15,
                    side_band=6,
                    updown_band=4,
                ),
                axis,
            )
        )
    m = fit_variogram(evs, ["spherical"], o)
    print("fitted ranges", m.structures[0].ranges)
    np.testing.assert_allclose(m.structures[0].ranges, (40, 20, 8), rtol=0.2)


def test_major_direction_found(anisotropic_field):
    _, pts, vals = anisotropic_field
    found = find_orientation(pts, vals, lag=4.0, n_lags=10)
    print(found.describe())
    azimuth = found.orientation.azimuth
    assert abs((azimuth - 30 + 90) % 180 - 90) <= 10 and found.orientation.plunge < 10


def test_pairs_within_a_hole_only():
    pts = np.array([[0, 0, 0], [0, 0, -2.0], [0, 0, -4.0], [1, 0, 0], [1, 0, -2.0]])
    ev = experimental_variogram(
        pts,
        np.array([1.0, 2, 3, 5, 7]),
        lag=2.0,
        n_lags=2,
        holes=np.array(["a", "a", "a", "b", "b"]),
    )
    # lag 1 (0, 2]: a: (1,2), (2,3); b: (5,7) -> 3 pairs; lag 2 (2, 4]: a: (1,3)
    assert list(ev.pairs) == [3, 1]
    assert ev.value[0] == pytest.approx((1 + 1 + 4) / 2 / 3)


def test_centred_lags_with_tolerance():
    # lag k holds |d - k lag| <= tolerance; distances 4.9, 5.6, 10.2 and 7.5 (in a gap)
    pts = np.array([[0, 0, 0], [4.9, 0, 0], [0, 5.6, 0], [0, 0, 10.2], [7.5, 100, 0]])
    vals = np.array([0.0, 1.0, 2.0, 3.0, 9.0])
    ev = experimental_variogram(pts[:4], vals[:4], lag=5.0, n_lags=2, lag_tolerance=1.0)
    # pairs from the origin: 4.9 and 5.6 in lag 1, 10.2 in lag 2; others: |(4.9,0,0)-(0,5.6,0)| = 7.44 (gap),
    # |(4.9,0,0)-(0,0,10.2)| = 11.3 (out), |(0,5.6,0)-(0,0,10.2)| = 11.6 (out)
    assert list(ev.pairs) == [2, 1]
    with pytest.raises(ValueError, match="lag_tolerance"):
        experimental_variogram(pts, vals, lag=5.0, n_lags=2, lag_tolerance=3.0)


def test_normal_scores_against_the_normal_table():
    """Five values take the standard normal quantiles of their plotting positions
    (rank - 1/2) / n = 0.1, 0.3, 0.5, 0.7, 0.9: -1.281552, -0.524401, 0, 0.524401, 1.281552
    (standard normal quantiles as printed in any normal table; recalled from memory, and
    scipy's norm.ppf agrees to 1e-6); doubling the
    weight of the largest value moves the positions to 1/12, 3/12, 5/12, 7/12, 10/12."""
    from scipy.stats import norm

    y, table = normal_scores(np.array([3.0, 1.0, 4.0, 1.5, 9.0]))
    np.testing.assert_allclose(y, [0.0, -1.281552, 0.524401, -0.524401, 1.281552], atol=1e-6)
    np.testing.assert_allclose(table.back(y), [3.0, 1.0, 4.0, 1.5, 9.0], rtol=1e-12)
    y, _ = normal_scores(np.array([3.0, 1.0, 4.0, 1.5, 9.0]), np.array([1, 1, 1, 1, 2.0]))
    expected = norm.ppf(np.array([5, 1, 7, 3, 10]) / 12)
    np.testing.assert_allclose(y, expected, rtol=1e-12)


def test_correlogram_of_independent_values_is_near_one(rng):
    pts = rng.uniform(0, 100, size=(800, 3))
    ev = experimental_variogram(
        pts, rng.normal(size=800), lag=10, n_lags=5, estimator="correlogram"
    )
    assert np.all(np.abs(ev.value - 1) < 0.1)


def test_mean_hole_direction_follows_the_holes():
    """The downhole variogram joins the fit along the holes' mean direction (here two holes
    at -60 toward 290, one listed bottom-up: the sign does not matter)."""
    import pandas as pd

    from blockmodel.data.desurvey import direction
    from blockmodel.stages.variography import _mean_hole_direction

    t = direction([290.0], [-60.0])[0]
    rows = []
    for hole, start, order in (("A", (0.0, 0.0, 0.0), 1), ("B", (50.0, 0.0, 0.0), -1)):
        for k in range(10)[::order]:
            p = np.asarray(start) + (2.0 * k + 1.0) * t
            rows.append({"hole": hole, "from": 2.0 * k, "x": p[0], "y": p[1], "z": p[2]})
    got = _mean_hole_direction(pd.DataFrame(rows))
    np.testing.assert_allclose(got, t, atol=1e-12)


@pytest.mark.parametrize(
    ("span", "direction", "bands", "tolerance", "estimator", "by_hole"),
    [
        (300.0, (30.0, 20.0), (8.0, 4.0), None, "semivariogram", False),
        (80.0, (110.0, -45.0), (np.inf, np.inf), 3.0, "correlogram", False),
        (60.0, None, (np.inf, np.inf), None, "pairwise_relative", False),
        (100.0, (0.0, 90.0), (np.inf, np.inf), None, "semivariogram", True),
    ],
)
def test_pair_sums_equal_a_plain_loop_over_every_pair(
    rng, span, direction, bands, tolerance, estimator, by_hole
):
    """Oracle: the compiled cell-by-cell pair sums equal a plain loop over all n(n-1)/2
    pairs with the same rules (direction cone, bands, lag bins, weights, holes), for cells
    smaller than the data (span 300 m: 25 m cells) and about as large (span 60 m)."""
    n = 400
    pts = rng.uniform(0, span, (n, 3))
    vals = rng.lognormal(size=n)
    w = rng.uniform(0.5, 1.5, n)
    holes = rng.integers(0, 12, n) if by_hole else None
    lag, n_lags = 12.0, 6
    got = experimental_variogram(
        pts,
        vals,
        lag=lag,
        n_lags=n_lags,
        lag_tolerance=tolerance,
        direction=direction,
        angular_tolerance=20.0,
        side_band=bands[0],
        updown_band=bands[1],
        estimator=estimator,
        weights=w,
        holes=holes,
    )
    count = np.zeros(n_lags)
    sums = np.zeros((8, n_lags))
    p = pts - pts.min(axis=0)
    for i in range(n):
        for j in range(i + 1, n):
            if holes is not None and holes[i] != holes[j]:
                continue
            h = p[j] - p[i]
            d = np.linalg.norm(h)
            if tolerance is None:
                k = int(np.ceil(d / lag)) - 1
            else:
                k = int(np.rint(d / lag)) - 1
                if abs(d - (k + 1) * lag) > tolerance:
                    continue
            if d == 0 or not 0 <= k < n_lags:
                continue
            if direction is not None:
                u = direction_vector(*direction)
                az = np.radians(direction[0])
                e_h = np.array([np.cos(az), -np.sin(az), 0.0])
                if abs(h @ u) < np.cos(np.radians(20.0)) * d:
                    continue
                if abs(h @ e_h) > bands[0] or abs(h @ np.cross(e_h, u)) > bands[1]:
                    continue
            zi, zj, pw = vals[i], vals[j], w[i] * w[j]
            g = (zi - zj) ** 2 / 2
            if estimator == "pairwise_relative":
                g /= ((zi + zj) / 2) ** 2
            count[k] += 1
            sums[:, k] += pw * np.array([1, d, g, zi, zj, zi * zi, zj * zj, zi * zj])
    np.testing.assert_array_equal(got.pairs, count)
    with np.errstate(invalid="ignore", divide="ignore"):
        wsum = sums[0]
        np.testing.assert_allclose(got.distance, sums[1] / wsum, rtol=1e-12)
        if estimator == "correlogram":
            mh, mt = sums[3] / wsum, sums[4] / wsum
            cov = sums[7] / wsum - mh * mt
            vh, vt = sums[5] / wsum - mh**2, sums[6] / wsum - mt**2
            expected = 1 - cov / np.sqrt(vh * vt)
        else:
            expected = sums[2] / wsum
    np.testing.assert_allclose(got.value, expected, rtol=1e-9)
    assert count.sum() >= 20  # the case tests something


def test_directional_variogram_matches_gstools(rng):
    """A directional variogram (22.5 degree cone about azimuth 20, plunge 30) against
    gstools' ``vario_estimate`` with the same bins and cone (a general-purpose library,
    Matheron estimator), computed in the same run: pair counts and values."""
    gs = pytest.importorskip("gstools")
    pts = rng.uniform(0, 300, (2000, 3))
    vals = rng.lognormal(size=2000)
    ev = experimental_variogram(pts, vals, lag=10.0, n_lags=12, direction=(20.0, 30.0))
    _, gamma, counts = gs.vario_estimate(
        pts.T,
        vals,
        np.arange(13) * 10.0,
        direction=[direction_vector(20.0, 30.0)],
        angles_tol=np.radians(22.5),
        return_counts=True,
    )
    assert list(ev.pairs) == list(np.ravel(counts))
    np.testing.assert_allclose(ev.value, np.ravel(gamma), rtol=1e-10)


def test_fitted_ranges_stay_within_their_documented_bounds(rng):
    """Property: whatever the lags say, every fitted range lies between half the shortest
    lag distance and the extent, major >= semi >= minor (fit_variogram's contract).  A
    structure much thinner across than any lag (minor range 0.2 to 0.6 m, lags from 2 m)
    cannot be told from a nugget across; its minor range stops at the bound (1 m), where
    fitting the semi and minor ranges as ratios of the axis above would go under it."""
    from blockmodel.variography.experimental import ExperimentalVariogram
    from blockmodel.variography.models import Structure, VariogramModel

    orientation = bm.Orientation(30.0, 10.0, 40.0)
    axes = orientation.axes()
    for _ in range(5):
        truth = VariogramModel(
            0.0,
            [
                Structure("spherical", 0.5, (rng.uniform(40, 80), 30.0, rng.uniform(0.2, 0.6)),
                          orientation),
                Structure("spherical", 0.5, (120.0, 90.0, 20.0), orientation),
            ],
        )  # fmt: skip
        # along the axes, and 3° off the major toward the minor (as holes or a cone see it)
        off = np.cos(np.radians(3.0)) * axes[0] + np.sin(np.radians(3.0)) * axes[2]
        evs = []
        for axis, lag in ((0, 10.0), (1, 10.0), (2, 2.0), (off, 10.0)):
            h = lag * np.arange(1, 11)
            value = truth.variogram(h[:, None] * (axes[axis] if np.ndim(axis) == 0 else axis))
            evs.append((ExperimentalVariogram(np.full(10, 500), h, value, "semivariogram"), axis))
        model = fit_variogram(evs, ["spherical", "spherical"], orientation, extent=300.0)
        for s in model.structures:
            assert 1.0 - 1e-9 <= s.ranges[2] <= s.ranges[1] <= s.ranges[0] <= 300.0, s.ranges
