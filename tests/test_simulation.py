"""Spectral simulation: averaged over realisations, the experimental covariance matches the model."""

import numpy as np

import blockmodel as bm
from blockmodel.simulation.spectral import simulate_gaussian


def test_covariance_matches_model():
    # The covariance of the FFT (circulant embedding) simulation is the model's exactly in
    # expectation (Dietrich & Newsam 1997); check it on lags along each axis over realisations.
    o = bm.Orientation(0, 0, 0)
    model = bm.VariogramModel(0.0, [bm.Structure("spherical", 1.0, (12.0, 6.0, 4.0), o)])
    rng = np.random.default_rng(11)
    shape, spacing = (48, 48, 24), (1.0, 1.0, 1.0)
    lags = {0: [1, 3, 6], 1: [1, 3, 5], 2: [1, 2, 3]}
    acc = {(a, l): [] for a in lags for l in lags[a]}
    var = []
    for _ in range(40):
        f = simulate_gaussian(shape, spacing, model, rng)
        f = f - f.mean()
        var.append(np.mean(f * f))
        for a, ls in lags.items():
            for l in ls:
                head = np.take(f, range(0, shape[a] - l), axis=a)
                tail = np.take(f, range(l, shape[a]), axis=a)
                acc[(a, l)].append(np.mean(head * tail))
    axes = np.eye(3)
    for (a, l), vals in acc.items():
        expected = model.covariance((axes[a] * l)[None, :])[0]
        # the mean removed per realisation lowers every covariance by about the same amount
        got = np.mean(vals) + (1.0 - np.mean(var))
        assert abs(got - expected) < 0.06, (a, l, got, expected)
    assert abs(np.mean(var) - 1.0) < 0.15
