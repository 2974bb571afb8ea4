"""The discrete Gaussian change of support against closed forms, a reference library and a
brute-force truth.

The model (Matheron 1976; Rivoirard 1994, ch. 2 and 7): point grades ``Z = phi(Y)`` with
Hermite coefficients phi_n; block grades ``Z_v = sum phi_n r^n H_n(Y_v)``.  For a lognormal
point law ``Z = m exp(sY - s^2/2)`` the block law is lognormal with log-sd ``s r``, so
``T(c) = 1 - G(y_c)`` and ``grade(c) = m (1 - G(y_c - s r)) / T(c)`` with
``y_c = (ln(c/m) + (s r)^2 / 2) / (s r)``.
"""

from __future__ import annotations

import numpy as np
import pytest
from scipy.stats import norm

from blockmodel.assess.support import (
    block_grade_tonnage,
    empirical_anamorphosis,
    support_coefficient,
)


def _lognormal_blocks(s, r, cutoffs, m=1.0):
    sr = s * r
    yc = (np.log(np.asarray(cutoffs) / m) + sr * sr / 2) / sr
    t = 1 - norm.cdf(yc)
    return t, m * (1 - norm.cdf(yc - sr)) / t


def _stratified_lognormal(s, n, m=1.0):
    """A sample of n lognormal values at the mid-quantiles (no sampling noise)."""
    return m * np.exp(s * norm.ppf((np.arange(n) + 0.5) / n) - s * s / 2)


@pytest.mark.parametrize("n", [500, 5000])
@pytest.mark.parametrize("s", [0.5, 1.0, 2.0])
@pytest.mark.parametrize("r", [0.3, 0.6, 0.8, 0.9, 0.97])
def test_lognormal_closed_form_on_empirical_samples(s, n, r):
    values = _stratified_lognormal(s, n)
    ana = empirical_anamorphosis(values)
    sr = s * r
    cutoffs = np.exp(sr * norm.ppf([0.1, 0.3, 0.5, 0.7, 0.9]) - sr * sr / 2)  # block deciles
    t, g = _lognormal_blocks(s, r, cutoffs)
    got = block_grade_tonnage(ana, r, cutoffs)
    # A finite sample holds less of the upper tail than the population (n = 500 at s = 2
    # misses 19 % of the metal): grades are compared after scaling by the sample's mean, and
    # the tonnage bound widens where the sample is that short of the law.
    tail_metal = 1 - norm.cdf(norm.ppf(1 - 0.5 / n) - s)
    short = tail_metal >= 0.05  # only s = 2 with n = 500 (19 %)
    assert np.abs(got[:, 0] - t).max() < (0.04 if short else 0.01)
    np.testing.assert_allclose(got[:, 1], g * values.mean(), rtol=0.1 if short else 0.02)


def test_high_support_coefficient_no_longer_breaks(rng):
    """r above ~0.79 once gave 100 % tonnage at every cut-off (a far-left-tail wiggle of the
    expansion carried across the curve).  Standard lognormal sample of 1,000, block variance
    0.6 x point variance."""
    values = rng.lognormal(0.0, 1.0, 1000)
    ana = empirical_anamorphosis(values)
    r = support_coefficient(ana, 0.6 * ana.variance)
    assert 0.79 < r < 0.95
    got = block_grade_tonnage(ana, r, np.array([0.3, 0.5, 0.8, 1.5]))
    assert np.all(np.diff(got[:, 0]) < 0) and got[0, 0] < 0.97
    assert np.all(np.diff(got[:, 1]) > 0)


@pytest.mark.parametrize("r", [0.3, 0.6, 0.8, 0.9, 0.97])
def test_same_as_gstlearn_on_identical_coefficients(rng, r):
    """gstlearn's Hermite anamorphosis and selectivity curves (AnamHermite, Selectivity),
    given our coefficients and r, give the same tonnage and grade."""
    import gstlearn as gl

    values = rng.lognormal(0.5, 0.9, 2000)
    ana = empirical_anamorphosis(values)
    cutoffs = np.quantile(values, [0.2, 0.4, 0.6, 0.8])
    anam = gl.AnamHermite.create(nbpoly=len(ana.coefficients))
    anam.setPsiHns(list(ana.coefficients))
    anam.setRCoef(r)
    sel = gl.Selectivity.createByCuts(list(cutoffs))
    sel.calculateFromAnamorphosis(anam)
    ref_t = np.array([sel.getTest(i) for i in range(len(cutoffs))])
    ref_g = np.array([sel.getMest(i) for i in range(len(cutoffs))])
    got = block_grade_tonnage(ana, r, cutoffs)
    # gstlearn integrates the raw expansion over the whole line; ours holds it flat past the
    # data's Gaussian range, which moves grade by the tail's share of metal (< 1 % here)
    np.testing.assert_allclose(got[:, 0], ref_t, atol=2e-3)
    np.testing.assert_allclose(got[:, 1], ref_g, rtol=1e-2)


@pytest.mark.parametrize("s", [0.7, 1.2])
def test_against_blocks_of_a_simulated_field(s):
    """Brute-force truth: a lognormal field simulated on 1 m cells (spectral simulation,
    spherical range 24 m), averaged to 8 x 8 m blocks.  Given the true block variance, the
    model's block curve follows the true blocks' grade-tonnage curve; the discrete Gaussian
    model is an approximation, within a few per cent at this skewness (common practice)."""
    from blockmodel.estimation.orientation import Orientation
    from blockmodel.simulation.spectral import simulate_gaussian
    from blockmodel.variography.models import Structure, VariogramModel

    model = VariogramModel(0.0, [Structure("spherical", 1.0, (24.0, 24.0, 24.0), Orientation())])
    y = simulate_gaussian((384, 384, 1), (1.0, 1.0, 1.0), model, np.random.default_rng(5))
    z = np.exp(s * y[:, :, 0] - s * s / 2)
    blocks = z.reshape(48, 8, 48, 8).mean(axis=(1, 3)).ravel()
    ana = empirical_anamorphosis(z.ravel())
    r = support_coefficient(ana, blocks.var())
    cutoffs = np.quantile(blocks, [0.1, 0.3, 0.5, 0.7, 0.9])
    got = block_grade_tonnage(ana, r, cutoffs)
    true_t = np.array([(blocks >= c).mean() for c in cutoffs])
    true_g = np.array([blocks[blocks >= c].mean() for c in cutoffs])
    assert np.abs(got[:, 0] - true_t).max() < 0.02
    np.testing.assert_allclose(got[:, 1], true_g, rtol=0.04)


def test_blocks_that_do_not_vary(rng):
    """A pure-nugget model leaves no variance at block support: the support coefficient is
    0 and every block carries the declustered mean, so all the tonnes lie above a cut-off
    below the mean at the mean grade, and none above it (the discrete Gaussian model at
    r = 0: ``Z_v = phi_0``, the mean; common practice)."""
    values = rng.lognormal(0.0, 0.8, 400)
    ana = empirical_anamorphosis(values)
    assert support_coefficient(ana, 0.0) == 0.0
    mean = float(np.mean(values))
    curve = block_grade_tonnage(ana, 0.0, np.array([0.0, 0.9 * mean, 1.1 * mean]))
    np.testing.assert_allclose(curve[:2, 0], 1.0)
    np.testing.assert_allclose(curve[:2, 1], ana.coefficients[0], rtol=1e-12)
    assert ana.coefficients[0] == pytest.approx(mean, rel=0.02)
    assert curve[2, 0] == 0.0 and np.isnan(curve[2, 1])
