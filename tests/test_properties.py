"""Property-based tests (hypothesis): random valid inputs keep their invariants; random
corruption never ends in a traceback."""

import numpy as np
import pandas as pd
import pytest
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

import blockmodel as bm
from blockmodel.config.project import Compositing, load_project
from blockmodel.data.compositing import composite
from blockmodel.data.drillholes import DrillholeSet, load_drillholes
from blockmodel.errors import InputError

from .conftest import SMALL_FILES, SMALL_PROJECT

SETTINGS = settings(
    max_examples=40, deadline=None, suppress_health_check=[HealthCheck.function_scoped_fixture]
)


@st.composite
def interval_tables(draw):
    n = draw(st.integers(1, 30))
    lengths = draw(st.lists(st.floats(0.1, 5.0), min_size=n, max_size=n))
    edges = np.cumsum([0.0, *lengths])
    domains = draw(st.lists(st.sampled_from(["ore", "halo"]), min_size=n, max_size=n))
    grades = draw(st.lists(st.floats(0.0, 50.0), min_size=n, max_size=n))
    return pd.DataFrame(
        {"hole": "H", "from": edges[:-1], "to": edges[1:], "domain": domains, "au": grades}
    )


@SETTINGS
@given(
    intervals=interval_tables(),
    length=st.floats(0.5, 6.0),
    residual=st.sampled_from(["merge", "keep"]),
)
def test_compositing_conserves_metal(intervals, length, residual):
    collars = pd.DataFrame({"hole": ["H"], "x": [0.0], "y": [0.0], "z": [0.0], "depth": [500.0]})
    surveys = pd.DataFrame({"hole": ["H"], "depth": [0.0], "azimuth": [45.0], "dip": [-60.0]})
    holes = DrillholeSet(collars, surveys, intervals, ["au"])
    comps, s = composite(holes, Compositing(length=length, residual=residual, min_coverage=0.0))
    metal = float(((intervals["to"] - intervals["from"]) * intervals["au"]).sum())
    assert s.dropped_low_coverage == 0
    assert float((comps["length"] * comps["au"]).sum()) == pytest.approx(metal, rel=1e-9, abs=1e-9)
    assert float(comps["length"].sum()) == pytest.approx(float(intervals["to"].iloc[-1]), rel=1e-12)


@SETTINGS
@given(
    n=st.integers(4, 40),
    nugget=st.floats(0.0, 1.0),
    sill=st.floats(0.1, 5.0),
    ranges=st.tuples(st.floats(5, 200), st.floats(5, 200), st.floats(5, 200)),
    angles=st.tuples(st.floats(0, 360), st.floats(-90, 90), st.floats(-90, 90)),
    seed=st.integers(0, 2**32 - 1),
    block=st.booleans(),
)
def test_kriging_invariants(n, nugget, sill, ranges, angles, seed, block):
    rng = np.random.default_rng(seed)
    o = bm.Orientation(*angles)
    model = bm.VariogramModel(nugget + 1e-3, [bm.Structure("spherical", sill, ranges, o)])
    pts = rng.uniform(0, 100, size=(n, 3)) + [5e5, 7e6, 0]
    vals = rng.lognormal(size=n)
    targets = rng.uniform(0, 100, size=(20, 3)) + [5e5, 7e6, 0]
    search = bm.SearchEllipsoid((1e4, 1e4, 1e4), min_samples=1, max_samples=16)
    t = bm.krige(pts, vals, targets, model, search, block_size=(10, 10, 5) if block else None)
    assert np.isfinite(t.estimate).all() and not t.ill_conditioned.any()
    np.testing.assert_allclose(t.weight_sum, 1.0, atol=1e-8)
    assert (t.variance > -1e-8 * model.total_sill).all()
    if not block:
        at = bm.krige(pts, vals, pts[:3], model, search)
        np.testing.assert_allclose(at.estimate, vals[:3], rtol=1e-7)


@pytest.fixture
def project_folder(tmp_path):
    for name, text in SMALL_FILES.items():
        (tmp_path / name).write_text(text)
    (tmp_path / "project.toml").write_text(SMALL_PROJECT)
    return tmp_path


@SETTINGS
@given(
    file=st.sampled_from(sorted(SMALL_FILES)),
    edits=st.lists(
        st.tuples(st.integers(0, 400), st.integers(0, 3), st.binary(min_size=0, max_size=3)),
        min_size=1,
        max_size=6,
    ),
)
def test_corrupted_tables_never_traceback(project_folder, file, edits):
    data = bytearray(SMALL_FILES[file].encode())
    for pos, cut, insert in edits:
        pos = min(pos, len(data))
        data[pos : pos + cut] = insert
    (project_folder / file).write_bytes(bytes(data))
    try:
        holes = load_drillholes(load_project(project_folder / "project.toml").data)
    except InputError as exc:
        assert exc.problems and str(exc)
    else:
        assert len(holes.collars) >= 1
    finally:
        (project_folder / file).write_text(SMALL_FILES[file])


@SETTINGS
@given(
    rows=st.lists(
        st.tuples(
            st.sampled_from(["A1", "A2", "A3"]),
            st.floats(0, 40, allow_nan=False),
            st.floats(0.1, 4),
            st.one_of(
                st.floats(0, 100).map(lambda v: f"{v:.3f}"),
                st.just(""),
                st.just("<0.01"),
                st.just("-99"),
            ),
        ),
        min_size=1,
        max_size=25,
    ),
)
def test_random_interval_tables_load_or_explain(project_folder, rows):
    lines = ["hole_id,from,to,au,domain"] + [
        f"{h},{f:.2f},{f + length:.2f},{g},ore" for h, f, length, g in rows
    ]
    (project_folder / "assays.csv").write_text("\n".join(lines) + "\n")
    try:
        holes = load_drillholes(load_project(project_folder / "project.toml").data)
    except InputError as exc:
        assert all(p.file.endswith(".csv") for p in exc.problems)
    else:
        iv = holes.intervals
        assert (iv["to"] > iv["from"]).all()
        assert (iv["au"].dropna() >= 0).all()
