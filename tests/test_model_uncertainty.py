"""The normal-score model's uncertainty: Gaussian draws at the data and the centred
bootstrap draws of the model (blockmodel.simulation.model_uncertainty)."""

from __future__ import annotations

import numpy as np
import pytest

from blockmodel.estimation.orientation import Orientation
from blockmodel.simulation.model_uncertainty import centred_models, gaussian_at_points
from blockmodel.variography.models import Structure, VariogramModel

TILTED = Orientation(azimuth=30.0, plunge=20.0, tilt=10.0)
MODEL = VariogramModel(
    0.2,
    [
        Structure("spherical", 0.5, (40.0, 25.0, 10.0), TILTED),
        Structure("exponential", 0.3, (150.0, 90.0, 30.0), TILTED),
    ],
)


def test_draws_at_the_points_have_the_models_covariance(rng):
    """Oracle: the sample covariance of 40,000 draws at 6 points equals the model's
    covariance matrix (nugget on the diagonal).  The standard error of a sample covariance
    of Gaussian values is ``sqrt((C_ij^2 + C_ii C_jj) / N)``, at most 0.0071 here; the test
    allows 5 of them (definition of a Gaussian vector's covariance)."""
    points = rng.uniform(0.0, 60.0, (6, 3))
    draws = gaussian_at_points(points, MODEL, 40_000, rng)
    assert draws.shape == (40_000, 6)
    h = (points[:, None, :] - points[None, :, :]).reshape(-1, 3)
    expected = MODEL.covariance(h).reshape(6, 6)
    sample = draws.T @ draws / len(draws)
    error = np.sqrt((expected**2 + np.outer(np.diag(expected), np.diag(expected))) / len(draws))
    assert np.all(np.abs(sample - expected) < 5 * error)


def test_draws_are_reproducible_from_their_generator():
    points = np.random.default_rng(3).uniform(0.0, 60.0, (30, 3))
    one = gaussian_at_points(points, MODEL, 4, np.random.default_rng(9))
    np.testing.assert_array_equal(
        one, gaussian_at_points(points, MODEL, 4, np.random.default_rng(9))
    )


def _shares(m: VariogramModel) -> np.ndarray:
    sills = {st.ranges: st.sill for st in m.structures}
    return np.array([m.nugget, *(sills.get(st.ranges, 0.0) for st in MODEL.structures)])


def test_centred_draws_keep_the_fitted_model_at_their_centre(rng):
    """The draws are the fitted model plus each refit's deviation from the refits' mean
    (bootstrap bias correction, Efron & Tibshirani 1993, ch. 10): without clipping, their
    mean shares equal the fitted model's, each draw's deviation equals its refit's, and
    the structures keep their kinds, ranges and orientations and the total sill."""
    biased = np.array([0.35, 0.45, 0.2])  # the refits' centre, off the fitted model
    refits = []
    for _ in range(8):
        s = biased + rng.normal(0.0, 0.04, 3)
        refits.append(
            VariogramModel(
                s[0] * 2.0,  # refits at another total sill: only shares count
                [
                    Structure(st.kind, v * 2.0, st.ranges, st.orientation)
                    for st, v in zip(MODEL.structures, s[1:], strict=True)
                ],
            )
        )
    draws = centred_models(MODEL, refits)
    shares = np.array([_shares(m) for m in draws])
    refit_shares = np.array([_shares(m) / m.total_sill for m in refits])
    np.testing.assert_allclose(shares.mean(axis=0), _shares(MODEL), atol=1e-12)
    np.testing.assert_allclose(
        shares - _shares(MODEL), refit_shares - refit_shares.mean(axis=0), atol=1e-12
    )
    for m in draws:
        assert m.total_sill == pytest.approx(MODEL.total_sill)
        for st, ref in zip(m.structures, MODEL.structures, strict=True):
            assert (st.kind, st.ranges, st.orientation) == (ref.kind, ref.ranges, ref.orientation)


def test_a_structure_fitted_to_zero_counts_as_a_zero_share():
    """A refit that left a structure out (its sill fitted to zero) counts it as 0; a draw
    whose share falls below zero leaves the structure out and the other shares rescale to
    the total sill."""
    short, long = MODEL.structures
    refits = [
        VariogramModel(0.2, [short]),  # the long structure left out
        VariogramModel(0.2, [short, Structure(long.kind, 1.6, long.ranges, long.orientation)]),
    ]
    draws = centred_models(MODEL, refits)
    # shares of the refits: (0.2857, 0.7143, 0) and (0.0870, 0.2174, 0.6957); their mean
    # (0.1863, 0.4658, 0.3478); the first draw's long share 0.3 - 0.3478 < 0: left out
    assert [len(m.structures) for m in draws] == [1, 2]
    assert draws[0].total_sill == pytest.approx(1.0)
    first = np.array([0.2 + 0.2857 - 0.1863, 0.5 + 0.7143 - 0.4658])
    np.testing.assert_allclose(_shares(draws[0])[:2], first / first.sum(), atol=2e-4)


def test_draws_take_the_structures_the_fit_may_keep():
    """The fit may keep a structure the fitted model left out (two structures of one kind
    and nearly the same ranges, each fitted to zero in turn): the shares are counted over
    every structure the fit may keep, and a draw keeps those whose share stays positive."""
    short = MODEL.structures[0]
    twin = Structure(short.kind, 0.3, (40.001, 25.0, 10.0), TILTED)
    reference = VariogramModel(0.2, [short])
    refits = [VariogramModel(0.2, [twin]), VariogramModel(0.2, [short]), reference]
    draws = centred_models(reference, refits, [short, twin])
    # shares of the refits: (0.4, 0, 0.6), (0.2/0.7, 0.5/0.7, 0), (0.2/0.7, 0.5/0.7, 0)
    assert [[st.ranges for st in m.structures] for m in draws] == [
        [short.ranges, twin.ranges],
        [short.ranges],
        [short.ranges],
    ]
    mean = np.array([0.4 + 0.4 / 0.7, 1.0 / 0.7, 0.6]) / 3
    first = np.array([0.2 / 0.7, 0.5 / 0.7, 0.0]) + np.array([0.4, 0.0, 0.6]) - mean
    first *= 0.7 / first.sum()
    assert draws[0].nugget == pytest.approx(first[0])
    assert [st.sill for st in draws[0].structures] == pytest.approx(first[1:])


def test_a_structure_of_a_kind_the_fitted_model_lacks_is_an_error():
    other = VariogramModel(0.1, [Structure("gaussian", 0.9, (12.0, 12.0, 12.0))])
    with pytest.raises(ValueError, match="matches none"):
        centred_models(MODEL, [other, other])


def _scaled(st: Structure, factors) -> Structure:
    return Structure(st.kind, st.sill, tuple(np.multiply(st.ranges, factors)), st.orientation)


def test_drawn_ranges_move_by_the_refits_ratios(rng):
    """Oracle, by hand: each drawn range is the fitted range times the refit's ratio to the
    geometric mean of the refits' (the bootstrap's bias correction on a log scale, Efron &
    Tibshirani 1993, ch. 10): the draws' geometric mean is the fitted range; the kinds,
    orientations and the total sill stay; a range that all refits share stays as fitted."""
    short, long = MODEL.structures
    # within 0.9-1.1 of each other: no semi passes its major (the next test)
    factors = rng.uniform(0.9, 1.1, (6, 2, 3))
    factors[:, 1, 2] = 1.3  # every refit's long minor range the same: no spread to draw
    refits = [VariogramModel(0.2, [_scaled(short, f[0]), _scaled(long, f[1])]) for f in factors]
    draws = centred_models(MODEL, refits)
    logs = np.log(factors)
    expected = np.exp(logs - logs.mean(axis=0))
    expected[:, 1, 2] = 1.0
    for m, e in zip(draws, expected, strict=True):
        assert m.total_sill == pytest.approx(MODEL.total_sill)
        for st, ref, ratio in zip(m.structures, MODEL.structures, e, strict=True):
            assert (st.kind, st.orientation) == (ref.kind, ref.orientation)
            np.testing.assert_allclose(st.ranges, np.multiply(ref.ranges, ratio), rtol=1e-12)
    for k, ref in enumerate(MODEL.structures):
        drawn = np.array([m.structures[k].ranges for m in draws])
        np.testing.assert_allclose(np.exp(np.log(drawn).mean(axis=0)), ref.ranges, rtol=1e-12)
    assert {m.structures[1].ranges[2] for m in draws} == {long.ranges[2]}


def test_drawn_ranges_keep_their_order_and_the_longest():
    """A draw's ranges never grow from major to minor (a semi that would pass the major is
    set to it) and none passes ``longest`` (the fit's own bound)."""
    short, long = MODEL.structures
    refits = [
        VariogramModel(0.2, [_scaled(short, (0.5, 2.0, 1.0)), long]),
        VariogramModel(0.2, [_scaled(short, (2.0, 0.5, 1.0)), _scaled(long, (3.0, 1.0, 1.0))]),
    ]
    first, second = centred_models(MODEL, refits, longest=200.0)
    # the short structure's ratios: (0.5, 2, 1) and (2, 0.5, 1) over their geometric mean 1
    assert first.structures[0].ranges == pytest.approx((20.0, 20.0, 10.0))
    assert second.structures[0].ranges == pytest.approx((80.0, 12.5, 10.0))
    # the long major: 150 times 1 / sqrt(3) (86.6, below the semi, which follows it) and
    # sqrt(3) (259.8, beyond 200)
    assert first.structures[1].ranges == pytest.approx((150.0 / 3**0.5, 150.0 / 3**0.5, 30.0))
    assert second.structures[1].ranges == pytest.approx((200.0, 90.0, 30.0))


def test_a_refits_structures_pair_with_the_nearest_of_their_kind():
    """Two structures of one kind, refitted in the other order and with other ranges, pair
    with the fitted structure whose ranges are nearest (log ratios summed over the axes),
    not by their place in the refit; one left out pairs with the nearer."""
    from blockmodel.simulation.model_uncertainty import _counterparts

    short = Structure("spherical", 0.4, (40.0, 25.0, 10.0), TILTED)
    long = Structure("spherical", 0.4, (42.0, 40.0, 30.0), TILTED)
    fitted = [short, long]
    swapped = VariogramModel(0.2, [_scaled(long, (1.2, 0.9, 1.1)), _scaled(short, 0.8)])
    assert _counterparts(swapped, fitted) == [1, 0]
    assert _counterparts(VariogramModel(0.2, [_scaled(long, 0.7)]), fitted) == [1]
    assert _counterparts(VariogramModel(0.2, [_scaled(short, 1.4)]), fitted) == [0]


def test_too_many_points_are_refused(monkeypatch):
    from blockmodel.simulation import model_uncertainty

    monkeypatch.setattr(model_uncertainty, "MOST_BOOTSTRAP_DATA", 10)
    with pytest.raises(ValueError, match="at most 10 data"):
        gaussian_at_points(np.zeros((11, 3)), MODEL, 1, np.random.default_rng(0))


def test_the_spread_of_the_draws_lists_every_structure_once():
    """The page's listing: each structure met once (a draw lacking one counts 0 and NaN
    ranges), each draw's shares and ranges over them."""
    from blockmodel.simulation.model_uncertainty import draws_spread

    short, long = MODEL.structures
    structures, shares, ranges = draws_spread([VariogramModel(0.5, [long]), MODEL])
    assert structures == [long, short]
    np.testing.assert_allclose(shares, [[0.5 / 0.8, 0.3 / 0.8, 0.0], [0.2, 0.3, 0.5]])
    np.testing.assert_allclose(ranges[1], [long.ranges, short.ranges])
    assert np.isnan(ranges[0, 1]).all()
