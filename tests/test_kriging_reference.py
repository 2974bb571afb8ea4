"""Kriging against published worked examples and reference libraries."""

import numpy as np
import pytest

import blockmodel as bm

# Isaaks & Srivastava (1989), An Introduction to Applied Geostatistics, ch. 12:
# seven samples around the target (65, 137).
IS_POINTS = np.array(
    [[61, 139], [63, 140], [64, 129], [68, 128], [71, 140], [73, 141], [75, 128]], float
)
IS_VALUES = np.array([477, 696, 227, 646, 606, 791, 783], float)
IS_TARGET = np.array([[65.0, 137.0, 0.0]])
WIDE = bm.SearchEllipsoid(ranges=(1e4, 1e4, 1e4), min_samples=1, max_samples=50)


def _xyz(xy):
    return np.column_stack([xy, np.zeros(len(xy))])


@pytest.mark.parametrize(
    ("model", "estimate", "variance"),
    [
        # exponential covariance 10 exp(-0.3 h): practical range 10
        (bm.VariogramModel(0, [bm.Structure("exponential", 10, (10, 10, 10))]), 592.73, 8.96),
        # nugget 5 + exponential 5
        (bm.VariogramModel(5, [bm.Structure("exponential", 5, (10, 10, 10))]), 596.78, 10.31),
    ],
)
def test_isaaks_srivastava_ch12(model, estimate, variance):
    table = bm.krige(_xyz(IS_POINTS), IS_VALUES, IS_TARGET, model, WIDE)
    assert table.estimate[0] == pytest.approx(estimate, abs=0.006)
    assert table.variance[0] == pytest.approx(variance, abs=0.006)


def test_isaaks_srivastava_ch12_weights():
    # Weights published in the same example: 0.1729 0.3178 0.1287 0.0864 0.1511 0.0572 0.0858.
    # Read them back by kriging indicator data: the estimate of e_i is weight i.
    model = bm.VariogramModel(0, [bm.Structure("exponential", 10, (10, 10, 10))])
    expected = [0.1729, 0.3178, 0.1287, 0.0864, 0.1511, 0.0572, 0.0858]
    for i, w in enumerate(expected):
        e = np.zeros(7)
        e[i] = 1.0
        got = bm.krige(_xyz(IS_POINTS), e, IS_TARGET, model, WIDE).estimate[0]
        assert got == pytest.approx(w, abs=6e-5)


def test_isaaks_srivastava_ch12_gaussian():
    # Gaussian covariance 10 exp(-3 (h/10)^2): estimate 559.37, variance 4.78. Without a
    # nugget the model warns about conditioning, as designed.
    with pytest.warns(RuntimeWarning, match="ill-conditioned"):
        model = bm.VariogramModel(0, [bm.Structure("gaussian", 10, (10, 10, 10))])
    table = bm.krige(_xyz(IS_POINTS), IS_VALUES, IS_TARGET, model, WIDE)
    assert table.estimate[0] == pytest.approx(559.37, abs=0.006)
    assert table.variance[0] == pytest.approx(4.78, abs=0.006)


def test_gstat_meuse_block_kriging(meuse):
    # gstat (Pebesma 2004) block kriging of Meuse zinc (data: Pebesma & Bivand, copy in
    # scikit-gstat): 40 x 40 m blocks, 40 nearest samples, nugget 24,200 + spherical
    # 134,000, range 800 -> 268.7324 and 19,568.76 at (181170, 333250). The discretisation
    # reproduced is gstat's regular one, set = list(nblockdiscr = 4) in its tests/blockkr.R:
    # 16 points at offsets -15, -5, 5, 15 m in x and y (not its default Gaussian
    # quadrature); discretisation (4, 4, 1) here gives exactly those offsets.
    xyz = _xyz(meuse[["x", "y"]].to_numpy(float))
    model = bm.VariogramModel(24200, [bm.Structure("spherical", 134000, (800, 800, 800))])
    search = bm.SearchEllipsoid((1e6, 1e6, 1e6), min_samples=1, max_samples=40)
    table = bm.krige(
        xyz,
        meuse["zinc"].to_numpy(float),
        np.array([[181170.0, 333250.0, 0.0]]),
        model,
        search,
        block_size=(40, 40, 1),
        discretisation=(4, 4, 1),
    )
    np.testing.assert_allclose(
        bm.discretisation_offsets((40, 40, 1), (4, 4, 1))[:, :2],
        np.array([(x, y) for y in (-15, -5, 5, 15) for x in (-15, -5, 5, 15)]),
    )
    assert table.estimate[0] == pytest.approx(268.7324, abs=5e-4)
    assert table.variance[0] == pytest.approx(19568.76, abs=5e-3)


def _reduced_frame(azimuth, plunge, tilt, ranges):
    """(3, 3) matrix taking an offset in metres (x east, y north, z up) to the frame where
    the ellipsoid is the unit sphere, built from the README's convention alone: the major
    axis has bearing ``azimuth`` and dips ``plunge`` below the horizontal; before the tilt
    the semi axis is horizontal, 90 degrees clockwise of the major's bearing, and the minor
    axis completes a right-handed set (minor = semi x major); the tilt turns semi and minor
    about the major axis, clockwise looking along it."""
    az, pl, tl = np.radians([azimuth, plunge, tilt])
    major = np.array([np.sin(az) * np.cos(pl), np.cos(az) * np.cos(pl), -np.sin(pl)])
    semi0 = np.array([np.cos(az), -np.sin(az), 0.0])
    minor0 = np.cross(semi0, major)
    semi = np.cos(tl) * semi0 - np.sin(tl) * minor0
    minor = np.sin(tl) * semi0 + np.cos(tl) * minor0
    return np.vstack([major, semi, minor]) / np.asarray(ranges, float)[:, None]


def test_reduced_frame_matches_the_golden_vectors():
    """The independent formula agrees with the hand-derived table of the orientation
    module (so the comparison below checks the package's rotation from outside)."""
    s, c = 0.5, np.sqrt(3) / 2
    np.testing.assert_allclose(
        _reduced_frame(0, 0, 30, (1, 1, 1)), [(0, 1, 0), (c, 0, -s), (s, 0, c)], atol=1e-12
    )
    np.testing.assert_allclose(
        _reduced_frame(0, 30, 0, (1, 1, 1)), [(0, c, -s), (1, 0, 0), (0, s, c)], atol=1e-12
    )


@pytest.mark.parametrize("n_closest", [None, 24])
def test_pykrige_anisotropic_3d(rng, n_closest):
    # pykrige (general-purpose library) OrdinaryKriging3D, isotropic, fed coordinates we
    # rotate and scale into the structure's isotropic frame with _reduced_frame, written
    # here from the convention in words, not with the package's own transform.
    from pykrige.ok3d import OrdinaryKriging3D

    o = bm.Orientation(35, 20, 15)
    s = bm.Structure("exponential", 2.0, (120, 60, 20), o)
    model = bm.VariogramModel(0.3, [s])
    pts = rng.uniform([0, 0, 0], [200, 200, 80], size=(150, 3)) + [5e5, 7e6, 1000]
    vals = rng.lognormal(0, 0.8, size=150)
    targets = rng.uniform([20, 20, 10], [180, 180, 70], size=(40, 3)) + [5e5, 7e6, 1000]
    a = _reduced_frame(35, 20, 15, (120, 60, 20))
    p_iso, t_iso = (pts - [5e5, 7e6, 1000]) @ a.T, (targets - [5e5, 7e6, 1000]) @ a.T
    ok = OrdinaryKriging3D(
        *p_iso.T,
        vals,
        variogram_model="exponential",
        # pykrige's "sill" is the total sill (nugget + partial sill)
        variogram_parameters={"sill": 2.3, "range": 1.0, "nugget": 0.3},
    )
    if n_closest is None:
        ref, ref_var = ok.execute("points", *t_iso.T, backend="vectorized")
        search = bm.SearchEllipsoid((1e6, 1e6, 1e6), min_samples=1, max_samples=1000)
    else:
        ref, ref_var = ok.execute("points", *t_iso.T, backend="loop", n_closest_points=n_closest)
        search = bm.SearchEllipsoid((1e6 * 120, 1e6 * 60, 1e6 * 20), o, max_samples=n_closest)
    table = bm.krige(pts, vals, targets, model, search)
    np.testing.assert_allclose(table.estimate, np.asarray(ref), rtol=1e-6)
    np.testing.assert_allclose(table.variance, np.asarray(ref_var), rtol=1e-6)


def test_gstools_ordinary_kriging_3d(rng):
    # gstools (general-purpose library) ordinary kriging, exact interpolation (exact=True)
    # and a true inverse (pseudo_inv=False). Its Exponential len_scale is a third of the
    # practical range (of an exponential model reaching 95 % of its sill: common practice).
    import gstools as gs

    pts = rng.uniform(0, 100, size=(120, 3))
    vals = rng.normal(size=120)
    targets = rng.uniform(10, 90, size=(30, 3))
    model = bm.VariogramModel(0.2, [bm.Structure("exponential", 1.5, (60.0, 60.0, 60.0))])
    ref_model = gs.Exponential(dim=3, var=1.5, len_scale=20.0, nugget=0.2)
    ok = gs.krige.Ordinary(ref_model, pts.T, vals, exact=True, pseudo_inv=False)
    field, var = ok(targets.T, return_var=True)
    table = bm.krige(
        pts, vals, targets, model, bm.SearchEllipsoid((1e4, 1e4, 1e4), max_samples=500)
    )
    np.testing.assert_allclose(table.estimate, field, rtol=1e-8, atol=1e-10)
    np.testing.assert_allclose(table.variance, var, rtol=1e-8)
