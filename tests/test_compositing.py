"""Compositing within domains and capping."""

import numpy as np
import pandas as pd
import pytest

from blockmodel.config.sections import CappingRule, Compositing
from blockmodel.data.compositing import cap_grades, composite
from blockmodel.data.drillholes import DrillholeSet


def _holes(intervals):
    collars = pd.DataFrame({"hole": ["H"], "x": [0.0], "y": [0.0], "z": [100.0], "depth": [200.0]})
    surveys = pd.DataFrame({"hole": ["H"], "depth": [0.0], "azimuth": [0.0], "dip": [-90.0]})
    return DrillholeSet(collars, surveys, pd.DataFrame(intervals), ["au"])


def test_ten_metres_of_one_grade_gives_five_composites():
    # common practice identity
    comps, s = composite(
        _holes({"hole": ["H"], "from": [0.0], "to": [10.0], "domain": ["ore"], "au": [3.0]}),
        Compositing(length=2.0),
    )
    assert len(comps) == 5 and s.dropped_low_coverage == 0
    np.testing.assert_allclose(comps["au"], 3.0)
    np.testing.assert_allclose(comps["length"], 2.0)
    np.testing.assert_allclose(comps["z"], 100 - np.array([1, 3, 5, 7, 9.0]))


def test_metal_conserved_when_nothing_dropped(rng):
    edges = np.cumsum(np.r_[0.0, rng.uniform(0.3, 3.0, size=60)])
    domains = np.where(np.arange(60) < 25, "ore", np.where(np.arange(60) < 40, "halo", "ore"))
    table = {
        "hole": ["H"] * 60,
        "from": edges[:-1],
        "to": edges[1:],
        "domain": domains,
        "au": rng.lognormal(0, 1, size=60),
    }
    for residual in ("merge", "keep"):
        comps, s = composite(_holes(table), Compositing(length=2.0, residual=residual))
        assert s.dropped_low_coverage == 0 and s.residuals_dropped == 0
        metal_in = np.sum((edges[1:] - edges[:-1]) * table["au"])
        assert np.sum(comps["length"] * comps["au"]) == pytest.approx(metal_in, rel=1e-12)
        # composites never straddle a domain contact
        for dom, f, t in comps[["domain", "from", "to"]].itertuples(index=False):
            inside = (edges[:-1] < t - 1e-9) & (edges[1:] > f + 1e-9)
            assert set(domains[inside]) == {dom}


def test_low_coverage_dropped_and_residual_rules():
    table = {
        "hole": ["H"] * 3,
        "from": [0.0, 2.0, 4.0],
        "to": [1.5, 4.0, 5.5],
        "domain": ["ore"] * 3,
        "au": [1.0, np.nan, 2.0],
    }
    comps, s = composite(_holes(table), Compositing(length=2.0, min_coverage=0.5))
    # 0-2: 1.5 m assayed (75 %) kept; 2-4 nothing assayed -> dropped; residual 4-5.5 >= 1 m kept
    assert s.dropped_low_coverage == 1
    np.testing.assert_allclose(comps["from"], [0.0, 4.0])
    np.testing.assert_allclose(comps["coverage"], [0.75, 1.0])
    short = {"hole": ["H"], "from": [0.0], "to": [4.6], "domain": ["ore"], "au": [1.0]}
    merged, s = composite(_holes(short), Compositing(length=2.0, residual="merge"))
    assert list(merged["to"]) == [2.0, 4.6] and s.residuals_merged == 1
    dropped, s = composite(_holes(short), Compositing(length=2.0, residual="drop"))
    assert list(dropped["to"]) == [2.0, 4.0] and s.residuals_dropped == 1


def test_capping_by_value_and_percentile():
    comps = pd.DataFrame(
        {"domain": ["ore"] * 4 + ["halo"], "length": [2.0] * 5, "au": [1.0, 2.0, 3.0, 10.0, 50.0]}
    )
    capped, s = cap_grades(comps, [CappingRule("ore", "au", value=5.0)])
    np.testing.assert_allclose(capped["au"], [1, 2, 3, 5, 50])
    np.testing.assert_allclose(capped["au_uncapped"], comps["au"])
    assert s[0].capped == 1 and s[0].metal_removed_percent == pytest.approx(100 * 5 / 16)
    # percentile by linear interpolation between order statistics (Hyndman & Fan 1996,
    # definition 7): ore grades 1, 2, 3, 10; the 50th lies at (n - 1) p = 1.5, half way
    # from 2 to 3; the 90th at 2.7, 0.7 of the way from 3 to 10
    capped, s = cap_grades(comps, [CappingRule("ore", "au", percentile=50.0)])
    assert s[0].limit == pytest.approx(2.5)
    np.testing.assert_allclose(capped["au"], [1, 2, 2.5, 2.5, 50])
    capped, s = cap_grades(comps, [CappingRule("ore", "au", percentile=90.0)])
    assert s[0].limit == pytest.approx(7.9) and s[0].capped == 1
