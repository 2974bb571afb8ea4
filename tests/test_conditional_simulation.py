"""Conditional simulation checked against theory and a reference library.

Sources named beside each check:
- the simple-kriging identity: conditioning an unconditional Gaussian field by simple
  kriging of its residuals gives, over realisations, the simple-kriging estimate as mean and
  the simple-kriging variance as variance (Journel & Huijbregts 1978, §VII.C; Chilès &
  Delfiner 2012, §7.3.1);
- reproduction of the histogram and of the variogram model by the realisations (ibid.);
- gstools' conditioned random fields (``gstools.CondSRF`` with simple kriging), a
  general-purpose reference library, on the same model and data;
- the tail models of the back-transform (Deutsch & Journel 1998, GSLIB §V.1.6).
"""

from __future__ import annotations

import pickle
import re
from dataclasses import replace

import numpy as np
import pandas as pd
import pytest
from scipy.stats import ks_2samp

import blockmodel as bm
from blockmodel.app.cli import main
from blockmodel.simulation.conditional import plan_simulation, simulate_blocks
from blockmodel.simulation.transform import gaussian_transform
from blockmodel.variography.experimental import experimental_variogram

MODEL = bm.VariogramModel(0.1, [bm.Structure("spherical", 0.9, (8.0, 8.0, 8.0), bm.Orientation())])


def _small_plan(
    rng,
    shape=(12, 12, 2),
    n_data=10,
    model=MODEL,
    neighbours=50,
    weights=None,
    *,
    mean_uncertainty=False,
    variance_uncertainty=False,
    local_mean_window=0.0,
    trend=0.0,
    spread=1.0,
):
    """Nodes = blocks of 1 m on a small grid; data at node centres; scores N(0, 1) times
    ``spread`` plus ``trend`` times x / 12."""
    ijk = np.stack(np.meshgrid(*[np.arange(n) for n in shape], indexing="ij"), -1)
    ijk = ijk.reshape(-1, 3)
    data = ijk[rng.choice(len(ijk), n_data, replace=False)] + 0.5
    scores = spread * rng.standard_normal(n_data) + trend * data[:, 0] / 12.0
    _, transform = gaussian_transform(rng.lognormal(size=50), np.ones(50))
    plan = plan_simulation(
        ijk,
        np.zeros(3),
        np.ones(3),
        (1, 1, 1),
        data,
        scores,
        model,
        transform,
        (7,),
        neighbours=neighbours,
        weights=weights,
        mean_uncertainty=mean_uncertainty,
        variance_uncertainty=variance_uncertainty,
        local_mean_window=local_mean_window,
    )
    return plan, data, scores


def _assert_ensemble(plan, expected, var, mean_tolerance=0.01, R=1000):
    """The ensemble of R realisations: mean ``expected`` within 4.5 standard errors
    (sqrt(var / R)) at every node, variance ``var`` within 4.5 relative standard errors
    (sqrt(2 / (R - 1)) = 0.045) at every node and within ``mean_tolerance`` on average
    over the nodes, and the data honoured exactly at their nodes.  Returns the nodes
    where the variance is positive."""
    ys = np.array([plan.realisation_scores(r) for r in range(R)])
    free = var > 1e-9
    z = (ys.mean(axis=0) - expected)[free] / np.sqrt(var[free] / R)
    assert np.abs(z).max() < 4.5
    rel = (ys.var(axis=0, ddof=1) - var)[free] / var[free]
    assert np.abs(rel).max() < 4.5 * np.sqrt(2 / (R - 1))
    assert abs(rel.mean()) < mean_tolerance
    # simple kriging is an exact interpolator
    at = np.flatnonzero(np.isin(plan.targets, plan.data_nodes))
    np.testing.assert_allclose(ys[:, at].std(axis=0), 0.0, atol=1e-12)
    return free


def test_simple_kriging_identity(rng):
    """Journel & Huijbregts (1978) §VII.C: E[Y_c] = SK estimate, Var[Y_c] = SK variance.

    With R = 1000 realisations the ensemble mean at a node has standard error
    sqrt(var / R) and the ensemble variance a relative standard error sqrt(2 / (R - 1))
    = 0.045: every node within 4.5 standard errors, and the average relative variance
    error over the nodes within 0.01 (the nodes' errors are correlated, so 0.01 is
    about 3 of its standard errors here)."""
    plan, _, _ = _small_plan(rng)
    _assert_ensemble(plan, plan.weights.apply(plan.data_scores), plan.weights.variance)


def test_simple_kriging_identity_with_an_uncertain_mean(rng):
    """Each realisation draws its mean m_r ~ N(0, s_m^2) independently of its field, so
    (conditioning as in Journel & Huijbregts 1978, §VII.C, with mean m_r) the ensemble mean
    is still the simple-kriging estimate and the ensemble variance at a node is the
    simple-kriging variance plus (1 - sum of its weights)^2 s_m^2.  s_m^2 is the variance
    of the declustered mean at the data kept.  Tolerances as in the test above (R = 1000)."""
    from blockmodel.simulation.mean_uncertainty import declustered_mean_variance

    weights = rng.uniform(0.5, 2.0, 10)
    plan, _, _ = _small_plan(rng, weights=weights, mean_uncertainty=True)
    expected_sd = np.sqrt(
        declustered_mean_variance(plan.nodes.centres(plan.data_nodes), weights, MODEL)
    )
    assert plan.mean_sd == pytest.approx(expected_sd, rel=1e-12) and plan.mean_sd > 0.1
    free_share = 1.0 - plan.weights.weights.sum(axis=1)  # recomputed here, not read
    var = plan.weights.variance + free_share**2 * plan.mean_sd**2
    # the nodes' errors share each realisation's mean: 0.02 is about 3 standard errors here
    free = _assert_ensemble(plan, plan.weights.apply(plan.data_scores), var, 0.02)
    # the added variance is large enough here for the check to see it
    assert (free_share[free] ** 2 * plan.mean_sd**2 / var[free]).max() > 0.2


def test_simple_kriging_identity_with_an_uncertain_variance(rng):
    """Each realisation scales its sill by a = nu / chi2(nu), independently of its field
    and its mean, so (conditioning as in Journel & Huijbregts 1978, §VII.C, of a field of
    sill a times the model's) the ensemble mean is still the simple-kriging estimate and
    the ensemble variance at a node is E[a] = nu / (nu - 2) times the simple-kriging
    variance plus (1 - sum of its weights)^2 E[a] s_m^2 (the mean's draw is scaled with
    the field: its variance under sill a).  nu is that of the declustered variance at the
    data kept.  Tolerances as in the tests above (R = 1000)."""
    from blockmodel.report.simulation_section import _dof
    from blockmodel.simulation.conditional import FEWEST_DOF
    from blockmodel.simulation.variance_uncertainty import declustered_variance_dof

    weights = rng.uniform(0.5, 2.0, 30)
    plan, _, _ = _small_plan(
        rng, n_data=30, weights=weights, mean_uncertainty=True, variance_uncertainty=True
    )
    at_data = plan.nodes.centres(plan.data_nodes)
    nu = declustered_variance_dof(at_data, weights, MODEL)
    # fewer degrees of freedom than data; enough (above 8) for the factor's spread to be
    # finite and the ensemble's variance to settle
    assert plan.variance_dof == pytest.approx(nu, rel=1e-12) and 8.0 < nu < 29.0
    factors = np.array([plan.variance_factor(r) for r in range(20000)])
    # the mean of nu / chi2(nu) is nu / (nu - 2); its draws' standard error sets the bound
    expected = nu / (nu - 2.0)
    assert abs(factors.mean() - expected) < 4.5 * factors.std() / np.sqrt(len(factors))
    assert plan.variance_factor(7) == plan.variance_factor(7)  # its own seed
    free_share = 1.0 - plan.weights.weights.sum(axis=1)
    var = expected * (plan.weights.variance + free_share**2 * plan.mean_sd**2)
    # a heavy-tailed factor shared by every node: 0.05 is about 3 standard errors here
    _assert_ensemble(plan, plan.weights.apply(plan.data_scores), var, 0.05)
    # three data: too few degrees of freedom for the factor to have a finite variance; the
    # sill is taken as known, and the page says so
    few, _, _ = _small_plan(rng, n_data=3, variance_uncertainty=True)
    assert few.variance_dof <= FEWEST_DOF
    assert {few.variance_factor(r) for r in range(50)} == {1.0}
    assert _dof(few.variance_dof).endswith("too few to draw, taken as known")
    assert _dof(plan.variance_dof) == round(nu) and _dof(np.inf) == "known"


def test_the_declustered_variance_has_its_degrees_of_freedom(rng):
    """Reference: n independent values of equal weight: their variance about their mean
    has n - 1 degrees of freedom (Cochran's theorem; recalled from memory).  Oracle: the
    mean and variance of the quadratic form y'Ay, A = diag(w) - ww', of a Gaussian vector
    of covariance C are tr(AC) and 2 tr(ACAC) (moments of Gaussian quadratic forms; recalled
    from memory), computed with dense matrices on an anisotropic nested model with a
    nugget and uneven weights, and by Monte Carlo (40,000 draws; the mean within 4.5 of its
    standard errors)."""
    from blockmodel.simulation.variance_uncertainty import declustered_variance_dof

    points = rng.uniform(0, 100, size=(200, 3))
    assert declustered_variance_dof(
        points, np.ones(200), bm.VariogramModel(2.0, [])
    ) == pytest.approx(199.0, rel=1e-12)
    o = bm.Orientation(30.0, 10.0, 0.0)
    model = bm.VariogramModel(
        0.15,
        [
            bm.Structure("spherical", 0.5, (40, 20, 8), o),
            bm.Structure("exponential", 0.35, (90, 60, 30), o),
        ],
    )
    w = rng.uniform(0.2, 3.0, 200)
    wn = w / w.sum()
    cov = model.covariance((points[:, None, :] - points[None, :, :]).reshape(-1, 3))
    cov = cov.reshape(200, 200)
    a = np.diag(wn) - np.outer(wn, wn)
    mean, spread = np.trace(a @ cov), 2.0 * np.trace(a @ cov @ a @ cov)
    nu = declustered_variance_dof(points, w, model)
    assert nu == pytest.approx(2.0 * mean**2 / spread, rel=1e-10)
    y = np.linalg.cholesky(cov) @ rng.standard_normal((200, 40000))
    v = (wn[:, None] * (y - wn @ y) ** 2).sum(axis=0)
    assert abs(v.mean() - mean) < 4.5 * v.std() / np.sqrt(v.size)
    assert v.var() == pytest.approx(spread, rel=0.05)  # 40,000 draws: under 1 % error


def test_simple_kriging_identity_with_a_local_mean(rng):
    """Simple kriging with varying local means (Goovaerts 1997, chapter 6; recalled from
    memory) conditioning a field of the residuals' variance s^2: the ensemble mean at a
    node is m(u) + the simple-kriging estimate of the residuals y - m, the ensemble
    variance s^2 times the simple-kriging variance (Journel & Huijbregts 1978, §VII.C,
    applied to the residuals).  m and s are recomputed here by a plain loop over the data
    (kernel weight times declustering weight, window 0.4 of the 8 m ranges, cut at 4
    windows).  Tolerances as in the identity tests above (R = 1000)."""
    weights = rng.uniform(0.5, 2.0, 30)
    plan, _, _ = _small_plan(
        rng, n_data=30, weights=weights, local_mean_window=0.4, trend=3.0, spread=0.5
    )
    kept = plan.nodes.centres(plan.data_nodes)
    assert len(kept) == 30  # no two data share a node here

    def plain(u):
        d2 = (((u - kept) / 8.0) ** 2).sum(axis=1) / 0.4**2
        k = np.where(d2 <= 16.0, weights * np.exp(-0.5 * d2), 0.0)
        return (k * plan.data_scores).sum() / k.sum()

    targets = plan.nodes.centres(plan.targets)
    np.testing.assert_allclose(plan.target_mean, [plain(u) for u in targets], atol=1e-12)
    np.testing.assert_allclose(plan.data_mean, [plain(u) for u in kept], atol=1e-12)
    residual = plan.data_scores - plan.data_mean
    s = np.sqrt(np.sum(weights * residual**2) / weights.sum())
    assert plan.residual_sd == pytest.approx(s, rel=1e-12)
    # the trend is real here: the local mean spans more than the residuals' spread, and
    # their variance is far enough from 1 for the variance check to see it
    assert np.ptp(plan.target_mean) > 2 * s and s < 0.7
    expected = plan.target_mean + plan.weights.apply(residual)
    _assert_ensemble(plan, expected, s**2 * plan.weights.variance)


def test_kernel_mean_equals_a_plain_loop(rng):
    """Oracle: the cell-sorted kernel average equals a plain loop over every datum, in a
    rotated anisotropic frame, for points at a datum, near the data and beyond the cut
    (those take the weighted mean of all the data), with 1 and 2 threads."""
    from blockmodel.estimation import _threads
    from blockmodel.simulation.local_mean import CUT, kernel_mean

    data = rng.uniform(0.0, 100.0, (400, 3))
    values = rng.standard_normal(400)
    w = rng.uniform(0.2, 3.0, 400)
    points = rng.uniform(-60.0, 160.0, (3000, 3))
    points[:7] = data[:7]
    metric = bm.Structure("spherical", 1.0, (60.0, 25.0, 10.0), bm.Orientation(35, 20, -10))
    metric = metric.transform()
    window = 0.3
    plain = np.empty(len(points))
    for i, u in enumerate(points):
        d2 = (((u - data) @ metric.T) ** 2).sum(axis=1) / window**2
        k = np.where(d2 <= CUT**2, w * np.exp(-0.5 * d2), 0.0)
        plain[i] = (k * values).sum() / k.sum() if k.sum() > 0 else np.average(values, weights=w)
    outside = np.array([np.isclose(p, np.average(values, weights=w)) for p in plain]).sum()
    assert 50 < outside < len(points) - 50  # both kinds of point are checked
    before = _threads.threads()
    try:
        _threads.set_threads(1)
        one = kernel_mean(data, values, w, points, metric, window)
        _threads.set_threads(2)
        two = kernel_mean(data, values, w, points, metric, window)
    finally:
        _threads.set_threads(before)
    np.testing.assert_array_equal(one, two)
    np.testing.assert_allclose(one, plain, rtol=0, atol=1e-12)


def test_a_local_mean_needs_a_structure(rng):
    """A pure-nugget model has no ranges to scale the local mean's window by."""
    with pytest.raises(ValueError, match="structure"):
        _small_plan(rng, model=bm.VariogramModel(1.0, []), local_mean_window=0.5)


def test_variance_of_the_declustered_mean(rng):
    """Reference: for n equally spaced values with correlation rho^|i - j| (an exponential
    covariance along a line) the variance of their plain mean is
    (1/n) (1 + rho) / (1 - rho) - 2 rho (1 - rho^n) / (n^2 (1 - rho)^2), the variance of
    the mean of a first-order autoregressive series (e.g. Box, Jenkins & Reinsel, *Time
    Series Analysis*; recalled from memory).  Oracle: w'Cw by a plain double loop on an
    anisotropic nested model with a nugget and uneven weights, the same for 1 and 2
    threads."""
    from blockmodel.estimation import _threads
    from blockmodel.simulation.mean_uncertainty import declustered_mean_variance

    n, spacing, a = 60, 2.0, 30.0
    line = np.column_stack([np.arange(n) * spacing, np.zeros(n), np.zeros(n)])
    model = bm.VariogramModel(0.0, [bm.Structure("exponential", 1.0, (a, a, a))])
    rho = np.exp(-3.0 * spacing / a)
    expected = (1 + rho) / (1 - rho) / n - 2 * rho * (1 - rho**n) / (n**2 * (1 - rho) ** 2)
    assert declustered_mean_variance(line, np.ones(n), model) == pytest.approx(expected, rel=1e-12)

    o = bm.Orientation(30.0, 10.0, 0.0)
    nested = bm.VariogramModel(
        0.15,
        [
            bm.Structure("spherical", 0.5, (40, 20, 8), o),
            bm.Structure("gaussian", 0.35, (90, 60, 30), o),
        ],
    )
    pts = rng.uniform(0, 100, size=(300, 3))
    w = rng.uniform(0.2, 3.0, 300)
    wn = w / w.sum()
    plain = 0.0
    for i in range(300):
        plain += wn[i] * float(np.dot(wn, nested.covariance(pts[i] - pts)))
    before = _threads.threads()
    try:
        _threads.set_threads(1)
        one = declustered_mean_variance(pts, w, nested)
        _threads.set_threads(2)
        two = declustered_mean_variance(pts, w, nested)
    finally:
        _threads.set_threads(before)
    assert one == two
    assert one == pytest.approx(plain, rel=1e-12)


def test_the_sill_gives_the_composites_their_variance(rng):
    """Identity (derived in :mod:`blockmodel.simulation.dispersion`; the dispersion variance
    of Journel & Huijbregts 1978, recalled from memory): under a stationary Gaussian model
    of sill s and correlation R, the expected declustered variance of the values at the
    data about their declustered mean is s (1 - w'Rw).  Monte Carlo, 4,000 draws at 80
    data of a model whose ranges reach across them: at the sill found (1.2 or more) the
    mean declustered variance is 1 within 4 standard errors, and at sill 1 it falls short
    by more than 8.  A short-range model keeps a sill within 3 % of 1; ranges far beyond
    the data stop with an error."""
    from blockmodel.simulation.dispersion import dispersion_sill
    from blockmodel.stages.variography import scaled_model

    pts = rng.uniform(0.0, 1.0, (80, 3)) * [60.0, 60.0, 20.0]
    w = rng.uniform(0.3, 3.0, 80)
    wn = w / w.sum()
    shape = bm.VariogramModel(0.1, [bm.Structure("spherical", 0.9, (150.0, 150.0, 50.0))])
    sill = dispersion_sill(pts, w, shape)
    assert sill >= 1.2
    h = (pts[:, None, :] - pts[None, :, :]).reshape(-1, 3)
    for s, at_sill in ((sill, True), (1.0, False)):
        cov = scaled_model(shape, s).covariance(h).reshape(80, 80)
        draws = rng.standard_normal((4000, 80)) @ np.linalg.cholesky(cov).T
        spread = ((draws - (draws @ wn)[:, None]) ** 2) @ wn
        z = (spread.mean() - 1.0) / (spread.std(ddof=1) / np.sqrt(len(spread)))
        assert (abs(z) < 4.0) if at_sill else (z < -8.0), (s, spread.mean(), z)
    short = bm.VariogramModel(0.1, [bm.Structure("spherical", 0.9, (3.0, 3.0, 3.0))])
    assert dispersion_sill(pts, w, short) == pytest.approx(1.0, abs=0.03)
    with pytest.raises(ValueError, match="too long against the domain"):
        far = bm.VariogramModel(0.0, [bm.Structure("spherical", 1.0, (1e5, 1e5, 1e5))])
        dispersion_sill(pts, w, far)


def test_realisations_reproduce_histogram_and_variogram(rng):
    """Chilès & Delfiner (2012) §7.3: realisations reproduce the data's distribution and
    the variogram model.  Domain 40 x 40 x 6 m with a 8 m range (many ranges, so one
    realisation's histogram is close to the model's): the pooled node grades of 30
    realisations are within Kolmogorov-Smirnov distance 0.05 of the data, and the
    normal-score variogram along x at 1, 3 and 6 m, averaged over the realisations, within
    0.08 of the model (a sill of 1)."""
    truth = bm.simulate_gaussian((40, 40, 6), (1.0, 1.0, 1.0), MODEL, rng).ravel()
    grades = np.exp(truth)  # lognormal grades
    pick = rng.choice(truth.size, 150, replace=False)
    ijk = np.column_stack(np.unravel_index(np.arange(truth.size), (40, 40, 6)))
    data = ijk[pick] + 0.5
    scores, transform = gaussian_transform(grades[pick], np.ones(150), maximum=grades.max())
    plan = plan_simulation(
        ijk, np.zeros(3), np.ones(3), (1, 1, 1), data, scores, MODEL, transform, (3,)
    )
    blocks = simulate_blocks(plan, 30)
    assert ks_2samp(blocks.ravel(), grades[pick]).statistic < 0.05
    centres = plan.nodes.centres(plan.targets)
    sub = rng.choice(len(centres), 2500, replace=False)
    values = []
    for r in range(0, 30, 3):
        y = plan.realisation_scores(r)
        ev = experimental_variogram(
            centres[sub],
            y[sub],
            lag=1.0,
            n_lags=6,
            direction=(90.0, 0.0),
            angular_tolerance=20.0,
            lag_tolerance=0.25,
        )
        values.append(ev.value)
    got = np.nanmean(values, axis=0)
    for lag in (1, 3, 6):
        expected = MODEL.variogram(np.array([[lag, 0.0, 0.0]]))[0]
        assert abs(got[lag - 1] - expected) < 0.08, (lag, got[lag - 1], expected)


# gstools draws the spherical model's spectral density by MCMC (emcee); walkers that step
# outside the density's support compare -inf with -inf, which numpy reports as a warning
# on some platforms (seen on CI, not here). The move is rejected either way.
@pytest.mark.filterwarnings("ignore:invalid value encountered:RuntimeWarning:emcee")
def test_agrees_with_gstools_conditioned_fields(rng):
    """gstools' CondSRF (simple kriging, randomisation method) on the same spherical model
    and data: the two ensembles' means agree within 4.5 standard errors of their
    difference at every node, and their variances within 4.5 relative standard errors
    on average over the nodes (80 realisations each)."""
    gs = pytest.importorskip("gstools")
    plan, data, scores = _small_plan(rng, shape=(8, 8, 2), n_data=8)
    nodes = plan.nodes.centres(plan.targets)
    model = gs.Spherical(dim=3, var=0.9, len_scale=8.0, nugget=0.1)
    field = gs.CondSRF(gs.krige.Simple(model, cond_pos=data.T, cond_val=scores, mean=0.0))
    R = 80
    theirs = np.array([field(nodes.T, seed=100 + r) for r in range(R)])
    ours = np.array([plan.realisation_scores(r) for r in range(R)])
    free = plan.weights.variance > 1e-9
    se = np.sqrt((ours.var(axis=0) + theirs.var(axis=0)) / R)
    z = (ours.mean(axis=0) - theirs.mean(axis=0))[free] / se[free]
    assert np.abs(z).max() < 4.5
    ratio = ours.var(axis=0, ddof=1)[free] / theirs.var(axis=0, ddof=1)[free]
    assert abs(np.log(ratio).mean()) < 4.5 * np.sqrt(2 / (R - 1)) / np.sqrt(free.sum() / 8)


def test_realisations_do_not_depend_on_threads_or_batches(rng):
    """Each realisation is drawn from its own seed: threads and batching change nothing."""
    plan, _, _ = _small_plan(rng)
    one = simulate_blocks(plan, 6)
    np.testing.assert_array_equal(simulate_blocks(plan, 6, threads=3), one)
    np.testing.assert_array_equal(simulate_blocks(plan, 2, first=4), one[:, 4:])


def test_back_transform_tails(rng):
    """Deutsch & Journel (1998) §V.1.6: the table is reproduced at the data; below it the
    tail is linear in probability down to the minimum; above it the hyperbolic tail
    z = z_K ((1 - p_K) / (1 - p)) ** (1 / omega), never beyond the maximum."""
    from scipy.special import ndtr

    z = rng.lognormal(0, 1, 300)
    w = rng.uniform(0.5, 1.5, 300)
    y, t = gaussian_transform(
        z, w, minimum=0.0, maximum=3 * z.max(), upper_tail="hyperbolic", omega=2.0
    )
    np.testing.assert_allclose(t.back(y), z, rtol=1e-12)
    lo, hi = t.scores[0], t.scores[-1]
    below = t.back(np.array([lo - 0.5]))[0]
    assert below == pytest.approx(t.values[0] * ndtr(lo - 0.5) / ndtr(lo))
    above = t.back(np.array([hi + 0.3]))[0]
    expected = t.values[-1] * ((1 - ndtr(hi)) / (1 - ndtr(hi + 0.3))) ** 0.5
    assert above == pytest.approx(min(expected, 3 * z.max()))
    assert t.back(np.array([40.0]))[0] == 3 * z.max()
    many = t.back(np.linspace(-8, 8, 2001))
    assert np.all(np.diff(many) >= 0) and many.min() >= 0.0


def test_lognormal_tail_follows_the_lognormal_slope(rng):
    """The lognormal tail (the default): for lognormal composites, whose log is linear in
    the normal score, z = exp(mu + sigma y) (Rivoirard 1994, ch. 2: the lognormal
    anamorphosis), the tail's slope is sigma: from 100 000 values within 5 %, about 5
    standard deviations of the fit's sampling error (0.0092 over 100 seeds, measured
    2026-12-04).  Above the table the grade is the largest value times exp(slope (y -
    y_last)), with no bound unless one is given."""
    mu, sigma = -1.0, 0.9
    z = np.exp(mu + sigma * rng.standard_normal(100_000))
    _, t = gaussian_transform(z, np.ones_like(z))
    assert t.upper_tail == "lognormal" and np.isinf(t.maximum)
    assert t.slope == pytest.approx(sigma, rel=0.05)
    y = np.array([5.0, 6.0, 7.0])
    above = t.back(y)
    assert above == pytest.approx(z.max() * np.exp(t.slope * (y - t.scores[-1])), rel=1e-12)
    assert np.all(np.diff(t.back(np.linspace(-8, 8, 2001))) >= 0)
    _, bounded = gaussian_transform(z, np.ones_like(z), maximum=1.2 * z.max())
    assert bounded.back(np.array([8.0]))[0] == 1.2 * z.max()


def test_lognormal_tail_slope_is_the_top_least_squares_line():
    """Oracle: the slope is numpy's least-squares line of log grade on score through the
    table's points at declustered probability 0.9 and above, or its three highest if
    more; with one positive value up there, no tail (the largest value is the top)."""
    from scipy.special import ndtri

    rng = np.random.default_rng(7)
    for n in (13, 400):
        z = np.round(rng.lognormal(0.0, 1.0, n), 2)
        w = rng.uniform(0.5, 2.0, n)
        _, t = gaussian_transform(z, w)
        top = t.scores >= min(ndtri(0.9), t.scores[-3])
        assert top.sum() >= 3
        expected = np.polyfit(t.scores[top], np.log(t.values[top]), 1)[0]
        assert t.slope == pytest.approx(expected, rel=1e-12)
        assert t.slope_points == top.sum()
    _, flat = gaussian_transform(np.r_[np.zeros(30), 1.0], np.ones(31))
    assert flat.slope == 0.0 and flat.slope_points == 0
    assert flat.back(np.array([5.0]))[0] == 1.0


def test_simulate_command_writes_its_outputs(box_site, tmp_path, capsys):
    """The command on the box project: per-block summary, bands table and page; at cut-off
    0 every realisation counts every estimated block, so P10 = P90 = the kriged tonnes
    (common practice: the grade-tonnage curve starts at the whole estimated tonnage)."""
    import shutil

    data = tmp_path / "data"
    shutil.copytree(box_site / "data", data)
    # about a local mean (simulation.local_mean_window), named on the page
    with open(data / "project.toml", "a") as f:
        f.write('\n[simulation]\nlocal_mean_window = { "ore.cu" = 0.5 }\n')
    out = tmp_path / "sim"
    args = ["simulate", str(data / "project.toml"), "--realisations", "6", "--out", str(out)]
    assert main(args) == 0
    summary = pd.read_parquet(out / "simulation_summary.parquet")
    for column in ("cu_etype", "cu_sim_variance", "cu_p10", "cu_p50", "cu_p90", "cu_above_0.5"):
        assert column in summary
    assert (summary["cu_p10"] <= summary["cu_p90"]).all()
    bands = pd.read_csv(out / "simulation_grade_tonnage.csv")
    blocks = pd.read_parquet(box_site / "out" / "block_model.parquet")
    zero = bands[(bands["domain"] == "all") & (bands["class"] == "all") & (bands["cutoff"] == 0)]
    estimated = blocks.loc[blocks["cu"].notna(), "tonnes"].sum()
    assert zero["tonnes_p10"].iloc[0] == pytest.approx(estimated)
    assert zero["tonnes_p90"].iloc[0] == pytest.approx(estimated)
    page = (out / "simulation.html").read_text()
    assert "Reproduction: the mean grade" in page
    assert "about a locally varying mean" in page and "residual standard deviation" in page
    # no maximum given: the lognormal tail, its slope as a factor per unit score, no bound
    assert re.search(
        r"above [0-9.]+: times [0-9.]+ per unit of normal score \(fitted to the top [0-9]+ "
        r"grades\), unbounded",
        page,
    )
    # the same seed gives the same realisations
    again = tmp_path / "again"
    assert main([*args[:-1], str(again)]) == 0
    pd.testing.assert_frame_equal(pd.read_parquet(again / "simulation_summary.parquet"), summary)
    assert main(["simulate", str(data / "project.toml"), "--realisations", "1"]) == 2
    assert "--realisations" in capsys.readouterr().err


def test_a_structure_fitted_to_no_sill_is_left_out_of_the_normal_scores_model(
    monkeypatch, tmp_path
):
    """The normal scores' fit leaves out a structure whose sill comes out zero; each
    structure kept takes the orientation of the grade model's structure with its kind and
    ranges (the fit itself is replaced here by one that kept the second structure only)."""
    import importlib
    from types import SimpleNamespace

    from blockmodel.config.project import load_project
    from tests.conftest import make_box_project

    stage = importlib.import_module("blockmodel.stages.variography")
    project = load_project(make_box_project(tmp_path))

    first, second = bm.Orientation(10.0, 0.0, 0.0), bm.Orientation(70.0, 20.0, 5.0)
    grade_model = bm.VariogramModel(
        0.1,
        [
            bm.Structure("spherical", 0.5, (30.0, 20.0, 10.0), first),
            bm.Structure("exponential", 0.4, (90.0, 60.0, 30.0), second),
        ],
    )
    kept = bm.VariogramModel(0.6, [bm.Structure("exponential", 0.4, (90.0, 60.0, 30.0), first)])
    fitted = SimpleNamespace(fit=SimpleNamespace(model=kept))
    monkeypatch.setattr(stage, "domain_variography", lambda *args, **kwargs: fitted)
    grade = SimpleNamespace(domain="ore", grade="cu", model=grade_model)
    model, source = stage.normal_score_model(project, None, None, grade)
    assert source == "nugget and sills fitted to the normal scores"
    (s,) = model.structures
    assert s.kind == "exponential" and s.orientation == second
    assert model.total_sill == pytest.approx(1.0) and model.nugget == pytest.approx(0.6)


def test_the_realisations_reproduce_the_grades_before_capping(tmp_path):
    """A capped domain is simulated from its composites before capping (the transform's
    table tops at the largest uncapped composite, their mean is the uncapped one);
    ``simulation.capped_grades = true`` simulates the capped composites instead, and a
    maximum between the cap and the largest composite is then allowed."""
    from blockmodel.config.project import load_project
    from blockmodel.errors import InputError
    from blockmodel.stages.run import run_stages, simulate_results
    from tests.conftest import make_box_project

    path = make_box_project(tmp_path)
    base = path.read_text()
    path.write_text(base + '\n[[capping]]\ndomain = "ore"\ngrade = "cu"\npercentile = 90.0\n')
    results = run_stages(load_project(path))
    table = results.composites.table
    ore = table[table["domain"] == "ore"]
    cap, top = ore["cu"].max(), ore["cu_uncapped"].max()
    assert top > 1.5 * cap
    uncapped = simulate_results(results, realisations=4, workers=1).by_key["ore.cu"]
    assert uncapped.transform.values[-1] == top
    assert uncapped.declustered_mean > np.average(
        ore["cu"], weights=results.declustering.weights[ore.index]
    )
    # a maximum between the cap and the largest composite is below what is simulated
    between = path.read_text() + f'\n[simulation]\nmaximum = {{ "ore.cu" = {(cap + top) / 2} }}\n'
    path.write_text(between)
    with pytest.raises(InputError, match=r"below the largest composite .*, before capping"):
        simulate_results(run_stages(load_project(path)), realisations=2, workers=1)
    path.write_text(between.replace("[simulation]", "[simulation]\ncapped_grades = true"))
    results = run_stages(load_project(path))
    capped = simulate_results(results, realisations=4, workers=1).by_key["ore.cu"]
    assert capped.transform.values[-1] == cap
    assert capped.declustered_mean < uncapped.declustered_mean
    assert capped.grades.mean() < uncapped.grades.mean()


def test_a_run_can_include_the_simulation(tmp_path):
    """``[simulation] in_run = true``: the run's report gains the section and its files."""
    from tests.conftest import make_box_project

    project = make_box_project(tmp_path)
    project.write_text(project.read_text() + "\n[simulation]\nin_run = true\nrealisations = 3\n")
    assert main(["run", str(project)]) == 0
    out = tmp_path / "out"
    assert (out / "simulation_summary.parquet").is_file()
    assert (out / "simulation_grade_tonnage_ore_cu.png").is_file()
    assert "Uncertainty: conditional simulation" in (out / "report.html").read_text()


def _true_and_simulated_curves(truth, sim, grade, cutoffs):
    """Per simulated domain: the true (1, k) and realised (r, k) tonnes and metal above each
    cut-off, over the simulated blocks whose true grade is known."""
    from blockmodel.assess.uncertainty import realisation_curves

    out = {}
    for key, s in sim.by_key.items():
        b = sim.units.table.iloc[s.rows].merge(
            truth, on=["x", "y", "z", "domain"], how="left", validate="one_to_one"
        )
        known = b[f"{grade}_true"].notna().to_numpy()
        tonnes, true = b["tonnes"].to_numpy()[known], b[f"{grade}_true"].to_numpy()[known]
        out[key] = (
            *realisation_curves(tonnes, true[:, None], cutoffs),
            *realisation_curves(tonnes, s.grades[known], cutoffs),
        )
    return out


def _truth_in_the_bands(truth, sim, grade, cutoffs):
    """Per simulated domain: the share of the (tonnes, metal) x report cut-off points with
    true tonnes whose truth lies inside the realisations' P10-P90 band, and whether the true
    metal above the middle report cut-off lies inside the P5-P95 band."""
    middle = len(cutoffs) // 2
    out = {}
    for key, (t_true, m_true, t_sim, m_sim) in _true_and_simulated_curves(
        truth, sim, grade, cutoffs
    ).items():
        inside = []
        for values, real in ((t_sim, t_true[0]), (m_sim, m_true[0])):
            lo, hi = np.percentile(values, [10, 90], axis=0)
            inside += list(((real >= lo) & (real <= hi))[t_true[0] > 0])
        lo, hi = np.percentile(m_sim[:, middle], [5, 95])
        out[key] = (float(np.mean(inside)), bool(lo <= m_true[0, middle] <= hi))
    return out


@pytest.fixture(scope="module")
def demo_bands(tmp_path_factory):
    """The demo's truth against its realisations' bands (100 realisations), per domain."""
    from blockmodel.config.project import load_project
    from blockmodel.demo.deposit import write_demo
    from blockmodel.stages.run import run_stages, simulate_results

    folder = tmp_path_factory.mktemp("demo")
    write_demo(folder / "demo")
    project = load_project(folder / "demo" / "project.toml")
    results = run_stages(project)
    sim = simulate_results(results, realisations=100, workers=0)
    truth = pd.read_parquet(project.truth)
    return _truth_in_the_bands(truth, sim, "au", np.asarray(project.report.cutoffs))


@pytest.mark.slow
@pytest.mark.parametrize(
    "domain",
    [
        "lode",
        "halo",
    ],
)
def test_demo_truth_lies_in_the_bands(demo_bands, domain):
    """On the invented demo, whose true blocks are known: per domain, the true block
    tonnes and metal above each report cut-off inside the realisations' P10-P90 band at
    80 % or more of the cut-offs with true tonnes, and the true metal above the middle
    report cut-off (1.5 g/t) inside the P5-P95 band (acceptance bar of the simulation,
    100 realisations).  The demo project simulates about a locally varying mean (the
    lode's shoot is a trend inside the domain).  Measured 2026-12-04: the lode 16 of 16
    points inside, the halo 12 of 14 (its true tonnes and metal above 3 g/t, an undrilled
    pocket at the model's foot, at the 99th percentile).  With the upper tail stopped at
    the largest composite (3.9 g/t), the halo had 10 of 14: the tonnes and metal above 2
    g/t lay above P90 too."""
    share, middle = demo_bands[f"{domain}.au"]
    assert share >= 0.8 and middle, (share, middle)


@pytest.mark.slow
@pytest.mark.parametrize(
    "name",
    [
        pytest.param(
            "pipe",
            marks=pytest.mark.xfail(
                reason="not met (measured 2026-12-04, 100 realisations, 10 draws of the "
                "model moving its nugget, sills and ranges, lognormal upper tail): 3 of the "
                "4 points inside; the true tonnes above the median lie at the 5th "
                "percentile of the realisations (the 1st with the ranges kept; the fitted "
                "major range is 44 m, the true one 90 m; the fitted major axis plunges 16 "
                "degrees, the true one 75, and the draws keep the orientation). One seed "
                "decides this check (see the docstring)",
                strict=True,
            ),
        ),
        "seam",
        "lode",
    ],
)
def test_invented_deposits_truth_lies_in_the_bands(tmp_path, name):
    """On the invented test deposits (tests/deposits.py, seed 1), whose true blocks are
    known: the same bar as the demo's, at their report cut-offs (0 and the median true
    block grade), 100 realisations.  One seed decides this check: a calibrated band
    passes it in 51 to 80 % of seeds (see the calibration test below); over seeds 1 to 20
    it passed in 15 of the pipe, 11 of the seam and 17 of the lode (measured 2026-12-04,
    10 draws of the model moving its nugget, sills and ranges, the lognormal upper tail;
    about 15, 11 and 16 with the ranges kept), seed 1 in the seam and the lode."""
    from blockmodel.config.project import load_project
    from blockmodel.stages.run import run_stages, simulate_results

    from . import deposits

    project_file, truth, spec = deposits.build(name, tmp_path / name)
    project = load_project(project_file)
    results = run_stages(project)
    sim = simulate_results(results, realisations=100, workers=0)
    cutoffs = np.asarray(project.report.cutoffs)
    for key, (share, middle) in _truth_in_the_bands(truth.blocks, sim, spec.grade, cutoffs).items():
        assert share >= 0.8 and middle, (key, share, middle)


COVERAGE_SEEDS = 20
# Binomial(20, 0.8): 11 or fewer seeds inside happen with probability 0.010; Binomial(20,
# 0.1): 6 or more seeds on one side with probability 0.011 (scipy.stats.binom)
COVERAGE_LEAST = 12
COVERAGE_ONE_SIDE = 5


@pytest.mark.slow
@pytest.mark.parametrize(
    "name",
    ["pipe", "seam", "lode"],
)
def test_bands_hold_the_truth_over_many_deposits(tmp_path, name):
    """Calibration of the bands: over seeds 1 to 20 of an invented deposit (every seed, none
    left out), each drawn, drilled and simulated anew (100 realisations), the true tonnes and
    metal above the median cut-off and the true metal above cut-off 0 lie inside the
    realisations' P10-P90 band.  For bands that are calibrated, the count of seeds with the
    truth inside is Binomial(20, 0.8) for each quantity (expected 16; below 12 with
    probability 1 %), and on each side Binomial(20, 0.1) (expected 2; above 5 with
    probability 1 %): a band that is wide enough but off-centre fails the second bound.
    One seed cannot tell a calibrated band from a poor one: the single-seed check above
    asks for three such 80 % events at once (true metal above 0, tonnes and metal above
    the median), which a calibrated band meets in 51 % (independent events) to 80 % (fully
    dependent) of seeds.  Measured 2026-12-04 with 10 draws of the model moving its
    nugget, sills and ranges (``simulation.model_draws``) and the lognormal upper tail
    (tonnes above the median, metal above the median, metal above 0): inside in 18, 17,
    16 seeds of the pipe (below 2, 1, 2; above 0, 2, 2), 13, 16, 17 of the seam (below 4,
    1, 0; above 3, 3, 3) and 19, 17, 17 of the lode (below 0, 0, 0; above 1, 3, 3).  With
    the upper tail stopped at the largest composite the counts were the same but for the
    pipe's metal above 0 (17: one seed moved from the 11th to the 10th percentile).  With
    the ranges kept (2026-12-03): 18, 15, 16 of the pipe, 13, 15, 16 of the seam and 18,
    16, 16 of the lode.  With the model taken as known the seam's tonnes were inside in 11
    seeds (below 4, above 5): too narrow a band, from the nugget's share that the fit
    cannot pin down."""
    from blockmodel.config.project import load_project
    from blockmodel.stages.run import run_stages, simulate_results

    from . import deposits

    below, above = np.zeros(3, dtype=int), np.zeros(3, dtype=int)
    for seed in range(1, COVERAGE_SEEDS + 1):
        project_file, truth, spec = deposits.build(name, tmp_path / f"{name}{seed}", seed)
        project = load_project(project_file)
        sim = simulate_results(run_stages(project), realisations=100, workers=0)
        cutoffs = np.asarray(project.report.cutoffs)
        middle = len(cutoffs) // 2
        curves = _true_and_simulated_curves(truth.blocks, sim, spec.grade, cutoffs)
        (t_true, m_true, t_sim, m_sim) = curves["main." + spec.grade]
        for n, (values, real) in enumerate(
            (
                (t_sim[:, middle], t_true[0, middle]),
                (m_sim[:, middle], m_true[0, middle]),
                (m_sim[:, 0], m_true[0, 0]),
            )
        ):
            lo, hi = np.percentile(values, [10, 90])
            below[n] += real < lo
            above[n] += real > hi
    inside = COVERAGE_SEEDS - below - above
    assert np.all(inside >= COVERAGE_LEAST), (inside, below, above)
    assert np.all(below <= COVERAGE_ONE_SIDE) and np.all(above <= COVERAGE_ONE_SIDE), (
        below,
        above,
    )


def test_realisations_on_a_cluster_equal_the_local_ones(rng):
    """A dask.distributed cluster computes the same realisations as this process (each
    drawn from its own seed), batch by batch, with two draws of the model: realisation r
    follows plan ``r % 2`` (the second made when its turn comes)."""
    from distributed import LocalCluster

    from blockmodel.stages.simulation import _run

    plan, _, _ = _small_plan(rng)
    other = bm.VariogramModel(0.4, [bm.Structure("spherical", 0.6, (8.0, 8.0, 8.0))])
    second, _, _ = _small_plan(np.random.default_rng(12345), model=other)
    local = np.empty((plan.block_nodes.size, 12))
    local[:, 0::2] = simulate_blocks(plan, 6, first=0, step=2)
    local[:, 1::2] = simulate_blocks(second, 6, first=1, step=2)
    np.testing.assert_array_equal(local[:, 2::2], simulate_blocks(plan, 5, first=2, step=2))
    assert np.array_equal(_run([plan, lambda: second], 12, 2, "test", None, "", {}), local)
    with LocalCluster(
        n_workers=2, threads_per_worker=1, host="127.0.0.1", dashboard_address=None, processes=True
    ) as cluster:
        remote = _run([plan, lambda: second], 12, 2, "test", None, cluster.scheduler_address, {})
    np.testing.assert_array_equal(remote, local)


def test_a_plan_like_another_equals_one_made_afresh(rng, monkeypatch):
    """Oracle: a plan under a second model made ``like`` a first plan (its neighbours and
    local mean taken over, the two models sharing their longest structure) equals the plan
    made afresh under the second model, array for array; a model whose longest structure
    differs searches again and equals its fresh plan too."""
    from blockmodel.simulation import conditional, conditioning

    searches = []
    tree, kernel = conditioning.cKDTree, conditional.local_mean
    monkeypatch.setattr(conditioning, "cKDTree", lambda *a: searches.append(1) or tree(*a))
    monkeypatch.setattr(conditional, "local_mean", lambda *a: searches.append(2) or kernel(*a))
    first, data, scores = _small_plan(rng, neighbours=6, local_mean_window=0.5, trend=1.0)
    ijk = np.stack(np.meshgrid(*[np.arange(n) for n in (12, 12, 2)], indexing="ij"), -1)
    ijk = ijk.reshape(-1, 3)
    args = (ijk, np.zeros(3), np.ones(3), (1, 1, 1), data, scores)
    options = {"neighbours": 6, "local_mean_window": 0.5}
    longest = MODEL.structures[0]
    for model, found in (
        (bm.VariogramModel(0.4, [bm.Structure("spherical", 0.6, longest.ranges)]), []),
        (bm.VariogramModel(0.4, [bm.Structure("spherical", 0.6, (5.0, 5.0, 2.0))]), [1, 2]),
    ):
        searches.clear()
        like = plan_simulation(*args, model, first.transform, (7,), **options, like=first)
        assert searches == found  # neighbours and local mean taken over, or found again
        fresh = plan_simulation(*args, model, first.transform, (7,), **options)
        for a, b in (
            (like.weights.index, fresh.weights.index),
            (like.weights.weights, fresh.weights.weights),
            (like.weights.variance, fresh.weights.variance),
            (like.target_mean, fresh.target_mean),
            (like.data_mean, fresh.data_mean),
        ):
            np.testing.assert_array_equal(a, b)
        assert like.residual_sd == fresh.residual_sd
        np.testing.assert_array_equal(simulate_blocks(like, 3), simulate_blocks(fresh, 3))


def test_plans_sharing_their_parts_equal_plans_made_afresh(rng, monkeypatch):
    """Oracle: plans handed one store (``shared``) under models that differ in their nugget
    and sills only equal the plans made afresh, array for array (spectrum, weights,
    realisations), and a later plan evaluates no correlation at all where the first plan's
    periodic embedding holds for it; a model that drops the longest structure (other
    neighbours) evaluates its own correlations and equals its fresh plan too."""
    from blockmodel.variography.models import Structure

    calls = []
    correlation = Structure.correlation
    monkeypatch.setattr(
        Structure, "correlation", lambda self, h: calls.append(1) or correlation(self, h)
    )
    ijk = np.stack(np.meshgrid(*[np.arange(n) for n in (12, 12, 2)], indexing="ij"), -1)
    ijk = ijk.reshape(-1, 3)
    data = ijk[rng.choice(len(ijk), 15, replace=False)] + 0.5
    scores = rng.standard_normal(15)
    _, transform = gaussian_transform(rng.lognormal(size=50), np.ones(50))
    short = bm.Structure("spherical", 0.3, (4.0, 3.0, 2.0), bm.Orientation(30.0, 0.0, 0.0))
    long_ = bm.Structure("spherical", 0.5, (15.0, 9.0, 3.0), bm.Orientation(30.0, 10.0, 0.0))
    args = (ijk, np.zeros(3), np.ones(3), (1, 1, 1), data, scores)
    options = {"neighbours": 8, "seed": (7,)}
    shared: dict = {}
    first = plan_simulation(
        *args, bm.VariogramModel(0.2, [short, long_]), transform, **options, shared=shared
    )
    for model, evaluated in (
        # a larger nugget: the first plan's periodic embedding holds (a model that needs a
        # wider one transforms its covariance at that width, and stores it)
        (bm.VariogramModel(0.6, [replace(short, sill=0.25), replace(long_, sill=0.15)]), False),
        (bm.VariogramModel(0.5, [replace(short, sill=0.5)]), True),
    ):
        calls.clear()
        later = plan_simulation(*args, model, transform, **options, like=first, shared=shared)
        assert bool(calls) == evaluated
        fresh = plan_simulation(*args, model, transform, **options)
        for a, b in (
            (later.simulator.amplitude, fresh.simulator.amplitude),
            (later.weights.index, fresh.weights.index),
            (later.weights.weights, fresh.weights.weights),
            (later.weights.variance, fresh.weights.variance),
        ):
            np.testing.assert_array_equal(a, b)
        np.testing.assert_array_equal(simulate_blocks(later, 3), simulate_blocks(fresh, 3))
        # the store stays with the caller: a plan sent to a cluster's workers carries none
        assert len(pickle.dumps(later)) == len(pickle.dumps(fresh))


def test_realisations_follow_draws_of_the_model(tmp_path):
    """``simulation.model_draws = 3``: three draws of the normal scores' model, centred on
    the fitted model (their mean nugget and sill shares equal its shares where no share was
    clipped at zero), their ranges drawn, their kinds and orientation kept; with
    ``draw_ranges = false`` they keep its structures' ranges; realisation r the same
    whatever the number of realisations or threads; ``model_draws = 0`` takes the fitted
    model as known."""
    import dataclasses

    from blockmodel.config.project import load_project
    from blockmodel.simulation.model_uncertainty import _shares
    from blockmodel.stages.run import run_stages, simulate_results
    from tests.conftest import make_box_project

    project = load_project(make_box_project(tmp_path))
    draws3 = dataclasses.replace(
        project, simulation=dataclasses.replace(project.simulation, model_draws=3)
    )
    results = run_stages(draws3)
    seven = simulate_results(results, realisations=7, workers=1).by_key["ore.cu"]
    four = simulate_results(results, realisations=4, workers=2).by_key["ore.cu"]
    np.testing.assert_array_equal(seven.grades[:, :4], four.grades)
    assert len(seven.model_draws) == 3
    structures = results.variography["ore.cu"].model.structures
    shares = np.array([_shares(m, structures) for m in seven.model_draws])
    assert np.ptp(shares, axis=0).max() > 0.01  # the draws differ
    assert np.all(shares > 0)  # none clipped here (nugget shares 0.35 to 0.50)
    np.testing.assert_allclose(shares.mean(axis=0), _shares(seven.model, structures))
    ranges = np.array([[st.ranges for st in m.structures] for m in seven.model_draws])
    assert ranges.shape == (3, len(structures), 3)  # each draw holds every structure
    assert np.ptp(ranges[:, 0, 0]) > 1.0  # the short structure's major ranges differ (m)
    for m in seven.model_draws:
        assert [(st.kind, st.orientation) for st in m.structures] == [
            (st.kind, st.orientation) for st in structures
        ]
    fixed = dataclasses.replace(draws3.simulation, draw_ranges=False)
    fixed = dataclasses.replace(results, project=dataclasses.replace(draws3, simulation=fixed))
    for m in simulate_results(fixed, realisations=2, workers=1).by_key["ore.cu"].model_draws:
        assert {st.ranges for st in m.structures} <= {st.ranges for st in structures}
    known_model = dataclasses.replace(
        project, simulation=dataclasses.replace(project.simulation, model_draws=0)
    )
    known = simulate_results(dataclasses.replace(results, project=known_model), realisations=4)
    known = known.by_key["ore.cu"]
    assert known.model_draws == ()
    assert not np.array_equal(known.grades, four.grades)


def test_reproduction_of_the_declustered_mean(rng):
    """Oracle: the realisations' tonnes-weighted mean grade per domain, its P10/P50/P90,
    its relative difference from the declustered mean and the blocks' kriged mean, computed
    by a plain loop; flagged
    beyond 5 % (common practice) and not within it."""
    from blockmodel.stages.mining_units import MiningUnits
    from blockmodel.stages.simulation import DomainSimulation, Simulation

    blocks = pd.DataFrame({"tonnes": rng.uniform(100.0, 900.0, 40), "au": rng.uniform(0, 2, 40)})
    by_key = {}
    mean = float(np.exp(0.3**2 / 2))  # of the lognormal drawn
    for name, rows, shift in (("near", np.arange(0, 25), 1.0), ("far", np.arange(25, 40), 1.2)):
        grades = rng.lognormal(0.0, 0.3, (len(rows), 30)) * shift
        by_key[f"{name}.au"] = DomainSimulation(
            name, "au", None, "", None, rows, grades, 0, 0, mean, 0, 0, 0, 0.0, {}
        )
    units = MiningUnits(blocks, np.ones(3), np.ones(3, dtype=np.int64), (1, 1, 1))
    sim = Simulation(30, 1, np.array([0.0]), by_key, [], units, None)
    table = sim.reproduction().set_index("domain.grade")
    for key, d in by_key.items():
        t = blocks["tonnes"].to_numpy()[d.rows]
        means = [sum(t[i] * d.grades[i, r] for i in range(len(t))) / t.sum() for r in range(30)]
        row = table.loc[key]
        assert row["realisations P50"] == pytest.approx(np.median(means), rel=1e-12)
        assert row["realisations P10"] == pytest.approx(np.percentile(means, 10), rel=1e-12)
        assert row["difference"] == pytest.approx(np.mean(means) / mean - 1.0, rel=1e-12)
        assert row["flagged"] == (abs(np.mean(means) / mean - 1.0) > 0.05)
        kriged = sum(t[i] * blocks["au"].iloc[d.rows[i]] for i in range(len(t))) / t.sum()
        assert row["kriged mean"] == pytest.approx(kriged, rel=1e-12)
    assert table.loc["far.au", "flagged"] and not table.loc["near.au", "flagged"]


def test_a_normal_score_model_given_in_the_project_file(tmp_path, capsys):
    """``[simulation.models."ore.cu"]`` is used as given (quoted key or nested tables);
    one whose nugget and sills do not add up to 1, or naming no domain and grade, stops
    with exit status 2 naming the key."""
    from blockmodel.config.project import load_project
    from blockmodel.stages.run import run_stages, simulate_results
    from tests.conftest import make_box_project

    project_file = make_box_project(tmp_path)
    base = project_file.read_text()
    given = (
        "nugget = 0.3\nstructures = [{ kind = 'exponential', sill = 0.7, "
        "ranges = [60.0, 40.0, 20.0], orientation = [30.0, 0.0, 0.0] }]\n"
    )
    for header in ('[simulation.models."ore.cu"]', "[simulation.models.ore.cu]"):
        project_file.write_text(base + f"\n{header}\n{given}")
        project = load_project(project_file)
        assert set(project.simulation.models) == {"ore.cu"}
    results = run_stages(project)
    sim = simulate_results(results, realisations=2, workers=1)
    d = sim.by_key["ore.cu"]
    assert d.model_source == "given in the project file"
    assert d.model.nugget == 0.3
    (st,) = d.model.structures
    assert (st.kind, st.sill, st.ranges) == ("exponential", 0.7, (60.0, 40.0, 20.0))
    assert st.orientation.azimuth == 30.0
    for header, body, key in (
        ('[simulation.models."ore.cu"]', given.replace("0.7", "0.5"), "simulation.models.ore.cu"),
        ('[simulation.models."vein.cu"]', given, "simulation.models.vein.cu"),
    ):
        project_file.write_text(base + f"\n{header}\n{body}")
        assert main(["check", str(project_file)]) == 2
        assert key in capsys.readouterr().err


def test_a_local_mean_needs_ranges_and_a_pure_nugget_model_runs(tmp_path, capsys):
    """With a pure-nugget grade model (so a pure-nugget normal-score model, which has no
    ranges to scale the window by), a local mean makes ``simulate`` stop with exit status
    2 naming the key; without it, that model runs through a whole run, kriging efficiency
    undefined where blocks do not vary."""
    from tests.conftest import make_box_project

    project_file = make_box_project(tmp_path)
    base = project_file.read_text() + "\n[variogram.ore.cu]\nnugget = 1.0\nstructures = []\n"
    local = '\n[simulation]\nlocal_mean_window = { "ore.cu" = 0.5 }\n'
    project_file.write_text(base + local)
    out = tmp_path / "sim"
    assert main(["simulate", str(project_file), "--realisations", "3", "--out", str(out)]) == 2
    err = capsys.readouterr().err
    assert "simulation.local_mean_window.ore.cu" in err and "Traceback" not in err
    assert not out.exists() and not list(tmp_path.glob(".sim*"))  # nothing half-written
    project_file.write_text(base)
    assert main(["run", str(project_file)]) == 0
    blocks = pd.read_parquet(tmp_path / "out" / "block_model.parquet")
    assert blocks["cu"].notna().any() and blocks["cu_efficiency"].isna().all()


def test_ranges_beyond_the_domain_stop_the_simulation(tmp_path, capsys):
    """A grade model whose ranges dwarf the domain leaves the normal scores' sill unfixed
    by the composites (:mod:`blockmodel.simulation.dispersion`): ``simulate`` stops with
    exit status 2 naming the key and writes nothing; a model given for the normal scores
    is used as given and runs."""
    from tests.conftest import make_box_project

    project_file = make_box_project(tmp_path)
    far = (
        "\n[variogram.ore.cu]\nnugget = 0.0\nstructures = [{ kind = 'spherical', sill = 1.0, "
        "ranges = [1e5, 1e5, 1e5] }]\n"
    )
    base = project_file.read_text() + far
    project_file.write_text(base)
    out = tmp_path / "sim"
    assert main(["simulate", str(project_file), "--realisations", "3", "--out", str(out)]) == 2
    err = capsys.readouterr().err
    assert "simulation.models.ore.cu" in err and "too long" in err and "Traceback" not in err
    assert not out.exists() and not list(tmp_path.glob(".sim*"))
    given = (
        '\n[simulation.models."ore.cu"]\nnugget = 0.3\nstructures = [{ kind = '
        "'exponential', sill = 0.7, ranges = [60.0, 40.0, 20.0] }]\n"
    )
    project_file.write_text(base + given)
    assert main(["simulate", str(project_file), "--realisations", "3", "--out", str(out)]) == 0


def test_a_bootstrap_beyond_its_data_limit_stops_with_the_setting_named(
    tmp_path, capsys, monkeypatch
):
    """More composites than the bootstrap factorises (the limit lowered to 10 here):
    ``simulate`` stops with exit status 2 naming ``simulation.model_draws`` and writes
    nothing; ``model_draws = 0`` takes the model as known and runs."""
    from blockmodel.simulation import model_uncertainty
    from tests.conftest import make_box_project

    monkeypatch.setattr(model_uncertainty, "MOST_BOOTSTRAP_DATA", 10)
    project_file = make_box_project(tmp_path)
    out = tmp_path / "sim"
    assert main(["simulate", str(project_file), "--realisations", "3", "--out", str(out)]) == 2
    err = capsys.readouterr().err
    assert "simulation.model_draws" in err and "at most 10 data" in err
    assert "Traceback" not in err and not out.exists()
    project_file.write_text(project_file.read_text() + "\n[simulation]\nmodel_draws = 0\n")
    assert main(["simulate", str(project_file), "--realisations", "3", "--out", str(out)]) == 0


def _simulate_stopped_by_a_later_call(tmp_path, capsys, monkeypatch, name, fail):
    """``blockmodel simulate`` on the box project with ``blockmodel.stages.simulation.name``
    calling ``fail(*args)`` from its second call on (the first, the data's own, goes
    through): exit status 2, no traceback, nothing written; the message."""
    import importlib

    from tests.conftest import make_box_project

    simulation = importlib.import_module("blockmodel.stages.simulation")
    original = getattr(simulation, name)
    calls = []

    def later_fails(*args, **kwargs):
        calls.append(1)
        return fail(*args) if len(calls) > 1 else original(*args, **kwargs)

    monkeypatch.setattr(simulation, name, later_fails)
    project_file = make_box_project(tmp_path)
    out = tmp_path / "sim"
    assert main(["simulate", str(project_file), "--realisations", "3", "--out", str(out)]) == 2
    err = capsys.readouterr().err
    assert "Traceback" not in err and not out.exists()
    return err


def test_a_failed_refit_of_the_bootstrap_names_its_setting(tmp_path, capsys, monkeypatch):
    """A bootstrap draw whose fit fails (the fit is made to fail after the data's own fit
    here) stops ``simulate`` with exit status 2 naming ``simulation.model_draws``, not the
    variography the data passed."""
    from blockmodel.errors import setting_error

    def fit(project, *args):
        raise setting_error(project.source, "variography", "cannot fit a variogram")

    err = _simulate_stopped_by_a_later_call(
        tmp_path, capsys, monkeypatch, "normal_score_model", fit
    )
    assert "simulation.model_draws" in err and "bootstrap draw 1 failed" in err


def test_a_draw_whose_ranges_cannot_fix_its_sill_names_its_settings(tmp_path, capsys, monkeypatch):
    """A draw of the model whose sill the composites' variance cannot fix (its ranges too
    long against the domain; made to happen here after the fitted model's own sill) stops
    ``simulate`` with exit status 2 naming ``simulation.model_draws`` and the ways out,
    ``simulation.draw_ranges`` first."""

    def sill(*args):
        raise ValueError("its ranges are too long against the domain")

    err = _simulate_stopped_by_a_later_call(tmp_path, capsys, monkeypatch, "dispersion_sill", sill)
    assert "simulation.model_draws" in err and "simulation.draw_ranges = false" in err


def test_nodes_of_a_domain_placed_by_codes(tmp_path):
    """Oracle: a domain without a solid (the seam of tests/deposits.py, placed from its
    interval codes) simulates only the nodes of its own part of each block.  With nodes at
    the sub-cell centres, the share of each block's nodes that pass the domain's test equals
    the block's proportion in the domain model (same nearest-composite rule); and each node
    passes exactly when its nearest composite, found by brute force, is of the domain and
    within ``grid.code_reach``."""
    from blockmodel.config.project import load_project
    from blockmodel.simulation.conditional import NodeGrid
    from blockmodel.stages.composites import load_and_composite
    from blockmodel.stages.domain_model import build_domain_model
    from blockmodel.stages.simulation import _inside, _solids

    from . import deposits

    project_file, _, _ = deposits.build("seam", tmp_path / "seam")
    project = load_project(project_file)
    table = load_and_composite(project).table
    model = build_domain_model(project, table)
    grid, sub = model.grid, np.asarray(project.grid.subcells)
    spacing = np.asarray(grid.block_size) / sub
    nodes = NodeGrid(np.asarray(grid.origin) + spacing / 2, spacing, tuple(grid.shape * sub))
    test = _inside(project, "main", _solids(project), table)
    rows = np.flatnonzero(model.proportions[:, 0] > 0)
    ijk = grid.ijk(rows)
    local = np.stack(np.meshgrid(*[np.arange(s) for s in sub], indexing="ij"), -1).reshape(-1, 3)
    abc = (ijk * sub)[:, None, :] + local[None]
    flat = np.ravel_multi_index(abc.reshape(-1, 3).T, nodes.shape)
    passed = test(nodes, flat)
    share = passed.reshape(len(rows), len(local)).mean(axis=1)
    np.testing.assert_allclose(share, model.proportions[rows, 0], atol=1e-6)
    assert 0 < share.min() < 1  # the seam has partial blocks
    pick = np.random.default_rng(3).choice(len(flat), 400, replace=False)
    points = nodes.centres(flat[pick])
    data = table[["x", "y", "z"]].to_numpy(float)
    for point, ok in zip(points, passed[pick], strict=True):
        d = np.linalg.norm(data - point, axis=1)
        nearest = int(np.argmin(d))
        expected = table["domain"].iloc[nearest] == "main" and d[nearest] <= project.grid.code_reach
        assert ok == expected
