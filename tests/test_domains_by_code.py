"""Domains placed from composite codes (no solid) and density estimated from composites."""

import numpy as np
import pandas as pd

from blockmodel.app.cli import main


def test_domain_from_codes_without_solid(box_project, capsys):
    text = box_project.read_text().replace('solid = "ore.ply"\n', "")
    box_project.write_text(text.replace("[grid]", "[grid]\ncode_reach = 12.0"))
    assert main(["run", str(box_project)]) == 0, capsys.readouterr().err
    b = pd.read_parquet(box_project.parent / "out" / "block_model.parquet")
    # ore composites lie between 20 and 80 m elevation: blocks there near a hole are ore,
    # blocks among the waste samples above are not
    assert b["z"].between(20, 80).all()
    assert len(b) > 50 and b["proportion"].between(0.0, 1.0).all()
    # a block whose every sub-cell lies within reach of a hole is wholly ore
    assert (b["proportion"] == 1.0).sum() > 50


def test_seam_thinner_than_a_block_gets_partial_blocks(box_project, capsys):
    """Ore 12 m thick (depths 24-36 m, elevations 64-76 m) across two 10 m block levels:
    each level is 0.6 ore.  The codes are read as a nearest-composite partition of space
    at sub-cell resolution; placing whole blocks by their centres counted 20 m of ore."""
    folder = box_project.parent
    a = pd.read_csv(folder / "assays.csv")
    a["domain"] = np.where((a["from"] >= 24) & (a["from"] < 36), "ore", "waste")
    a.to_csv(folder / "assays.csv", index=False)
    text = box_project.read_text().replace('solid = "ore.ply"\n', "")
    text = text.replace("[grid]", "[grid]\ncode_reach = 12.0\nsubcells = [4, 4, 10]")
    box_project.write_text(text.replace("min_samples = 3", "min_samples = 1"))
    assert main(["run", str(box_project)]) == 0, capsys.readouterr().err
    b = pd.read_parquet(folder / "out" / "block_model.parquet")
    assert set(b["z"]) == {65.0, 75.0}
    np.testing.assert_allclose(b["proportion"].max(), 0.6, rtol=1e-6)
    # blocks near a hole have all sub-cells within reach: 0.6 of the block, to float32
    assert np.isclose(b["proportion"], 0.6, rtol=1e-6).sum() > 20


def test_density_estimated_from_composites(box_project, capsys):
    a = pd.read_csv(box_project.parent / "assays.csv")
    a["sg"] = np.where(a["domain"] == "ore", 3.1, 2.6)
    a.to_csv(box_project.parent / "assays.csv", index=False)
    text = box_project.read_text().replace(
        'grades = { cu = "%" }', 'grades = { cu = "%" }\ndensity = "sg"'
    )
    box_project.write_text(
        text.replace("density = 2.8", "density = 2.8\ndensity_from_composites = true")
    )
    assert main(["run", str(box_project)]) == 0, capsys.readouterr().err
    b = pd.read_parquet(box_project.parent / "out" / "block_model.parquet")
    np.testing.assert_allclose(b["density"], 3.1)
    np.testing.assert_allclose(b["tonnes"], 1000.0 * b["proportion"] * 3.1)


def test_density_option_needs_a_column(box_project, capsys):
    box_project.write_text(
        box_project.read_text().replace(
            "density = 2.8", "density = 2.8\ndensity_from_composites = true"
        )
    )
    assert main(["run", str(box_project)]) == 2
    assert "data.density" in capsys.readouterr().err


def test_domain_with_its_own_search(box_project, capsys):
    text = box_project.read_text()
    own = "[[domains.search]]\nranges = [30.0, 30.0, 15.0]\nmin_samples = 2\nmax_samples = 6\n\n"
    text = text.replace("[variography]", own + "[variography]")
    box_project.write_text(text)
    assert main(["run", str(box_project)]) == 0, capsys.readouterr().err
    b = pd.read_parquet(box_project.parent / "out" / "block_model.parquet")
    assert b["cu_samples"].max() == 6  # the domain's passes, not the project's (16)
