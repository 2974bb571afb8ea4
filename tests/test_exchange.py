"""Open Mining Format export: read back with the omf package and omfvista, block values
and hole positions as written, and nothing overwritten that the tool did not write."""

import numpy as np
import pandas as pd
import pytest

from blockmodel.app.cli import main

omf = pytest.importorskip("omf")

# omf's vector helper predates numpy 2's __array_wrap__ signature (third party, harmless)
pytestmark = pytest.mark.filterwarnings("ignore:.*__array_wrap__.*:DeprecationWarning")


@pytest.fixture(scope="module")
def exported(box_site, tmp_path_factory):
    path = tmp_path_factory.mktemp("omf") / "box.omf"
    code = main(
        [
            "export",
            str(box_site / "data" / "project.toml"),
            str(box_site / "out" / "block_model.parquet"),
            "--omf",
            str(path),
        ]
    )
    assert code == 0
    return path


def test_block_values_and_hole_positions_round_trip(box_site, exported):
    from blockmodel.config.project import load_project
    from blockmodel.stages.domain_model import block_model_grid

    project = omf.OMFReader(str(exported)).get_project()
    elements = {e.name: e for e in project.elements}
    assert set(elements) == {"drillholes", "composites", "solid ore", "block model"}
    grid = block_model_grid(load_project(box_site / "data" / "project.toml"))
    blocks = pd.read_parquet(box_site / "out" / "block_model.parquet")
    volume = elements["block model"]
    values = {d.name: np.asarray(d.array) for d in volume.data}
    flat = grid.flat_index(blocks["i"], blocks["j"], blocks["k"])
    np.testing.assert_allclose(values["cu"][flat], blocks["cu"], rtol=1e-12)
    np.testing.assert_allclose(volume.geometry.origin, grid.origin)
    assert len(volume.geometry.tensor_u) == grid.shape[0]
    comps = pd.read_csv(box_site / "out" / "composites.csv")
    points = np.asarray(elements["composites"].geometry.vertices)
    # the CSV keeps ten significant digits: compare in that precision, sorted alike
    got = pd.DataFrame(points, columns=["x", "y", "z"]).round(6).sort_values(["x", "y", "z"])
    ref = comps[["x", "y", "z"]].round(6).sort_values(["x", "y", "z"])
    np.testing.assert_allclose(got.to_numpy(), ref.to_numpy(), atol=1e-9)
    # vertical holes: each interval runs from its 'from' to its 'to' below the collar
    lines = elements["drillholes"]
    v = np.asarray(lines.geometry.vertices)
    lengths = np.linalg.norm(v[1::2] - v[0::2], axis=1)
    np.testing.assert_allclose(np.sort(lengths), np.sort(comps["to"] - comps["from"]), atol=1e-9)


def test_omfvista_reads_it(exported):
    omfvista = pytest.importorskip("omfvista")
    blocks = omfvista.load_project(str(exported))
    assert blocks.n_blocks == 4


def test_export_never_overwrites_another_file(box_site, tmp_path, capsys):
    other = tmp_path / "mine.omf"
    other.write_bytes(b"the user's own file")
    code = main(
        [
            "export",
            str(box_site / "data" / "project.toml"),
            str(box_site / "out" / "block_model.parquet"),
            "--omf",
            str(other),
        ]
    )
    assert code == 2 and "not overwritten" in capsys.readouterr().err
    assert other.read_bytes() == b"the user's own file"
