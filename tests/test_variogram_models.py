"""Variogram models: practical ranges, covariance form, anisotropy, invalid models."""

import numpy as np
import pytest

import blockmodel as bm


def _model(kind, sill=2.0, ranges=(100, 50, 10), nugget=0.5, o=None):
    o = o or bm.Orientation(30, 10, 20)
    return bm.VariogramModel(nugget, [bm.Structure(kind, sill, ranges, o)])


@pytest.mark.parametrize(
    ("kind", "share"),
    # Practical range: spherical and cubic reach the sill, exponential and Gaussian 95 %
    # (models module docstring; Chilès & Delfiner 2012, §2.5).
    [
        ("spherical", 1.0),
        ("cubic", 1.0),
        ("exponential", 1 - np.exp(-3)),
        ("gaussian", 1 - np.exp(-3)),
    ],
)
def test_practical_range_along_each_axis(kind, share):
    m = _model(kind)
    axes = bm.Orientation(30, 10, 20).axes()
    for axis, a in zip(axes, (100, 50, 10), strict=True):
        g = m.variogram((axis * a)[None, :])[0]
        assert g == pytest.approx(0.5 + 2.0 * share, rel=1e-12)


def test_variogram_zero_at_origin_and_covariance_identity(rng):
    m = _model("spherical")
    assert m.variogram(np.zeros((1, 3)))[0] == 0.0
    assert m.covariance(np.zeros((1, 3)))[0] == pytest.approx(m.total_sill)
    h = rng.normal(scale=40, size=(100, 3))
    np.testing.assert_allclose(m.covariance(h) + m.variogram(h), m.total_sill)


def test_spherical_formula_isotropic():
    # gamma(h) = c (1.5 h/a - 0.5 (h/a)^3), h < a (Journel & Huijbregts 1978, eq. II.21)
    m = bm.VariogramModel(0, [bm.Structure("spherical", 3.0, (80, 80, 80))])
    h = np.array([[40.0, 0, 0]])
    assert m.variogram(h)[0] == pytest.approx(3.0 * (1.5 * 0.5 - 0.5 * 0.125))


def test_invalid_models():
    with pytest.raises(ValueError, match="sill"):
        bm.Structure("spherical", -1.0, (10, 10, 10))
    with pytest.raises(ValueError, match="ranges"):
        bm.Structure("spherical", 1.0, (10, 0, 10))
    with pytest.raises(ValueError, match="kind"):
        bm.Structure("wave", 1.0, (10, 10, 10))
    with pytest.raises(ValueError, match="nugget"):
        bm.VariogramModel(-0.1, [bm.Structure("spherical", 1.0, (10, 10, 10))])
    with pytest.warns(RuntimeWarning, match="ill-conditioned"):
        bm.VariogramModel(0.0, [bm.Structure("gaussian", 1.0, (10, 10, 10))])


def test_toml_snippet_round_trip():
    import tomllib

    m = _model("exponential")
    parsed = tomllib.loads(m.to_toml("au"))["variogram"]["au"]
    assert parsed["nugget"] == 0.5
    assert parsed["structures"][0]["ranges"] == [100.0, 50.0, 10.0]


@pytest.mark.parametrize("kind", ["spherical", "exponential", "gaussian", "cubic"])
def test_correlation_slope_equals_finite_differences(kind):
    """Oracle: the analytic derivative of each correlation (used by the orientation
    finder's Jacobian) equals a central difference, away from the range's kink."""
    from blockmodel.variography.models import KINDS, correlation, correlation_slope

    r = np.r_[np.linspace(0.01, 0.98, 60), np.linspace(1.02, 2.5, 20)]
    step = 1e-6
    numeric = (correlation(KINDS[kind], r + step) - correlation(KINDS[kind], r - step)) / (2 * step)
    np.testing.assert_allclose(correlation_slope(KINDS[kind], r), numeric, atol=1e-8)
