"""Shared fixtures: seeded generators and small reference data sets."""

from __future__ import annotations

from pathlib import Path

import numpy as np
import pytest

REPO = Path(__file__).resolve().parents[1]
DEMO = REPO / "demo_drillholes"


@pytest.fixture
def rng() -> np.random.Generator:
    return np.random.default_rng(20261201)


@pytest.fixture(scope="session")
def meuse():
    """Meuse river data (Pebesma & Bivand), the copy bundled with scikit-gstat."""
    import pandas as pd
    import skgstat

    path = Path(skgstat.__file__).parent / "data" / "samples" / "meuse.txt"
    return pd.read_csv(path)


SMALL_PROJECT = """
name = "small test project"

[data]
collars = "collars.csv"
surveys = "surveys.csv"
intervals = "assays.csv"
grades = { au = "g/t" }

[[domains]]
name = "ore"
density = 2.7

[[domains]]
name = "waste"
density = 2.6
estimate = false

[grid]
origin = [0.0, 0.0, 0.0]
block_size = [10.0, 10.0, 5.0]
shape = [10, 10, 10]

[report]
folder = "out"
"""

SMALL_FILES = {
    "collars.csv": "hole_id,x,y,z,depth\nA1,10,10,100,30\nA2,40,10,100,30\nA3,10,40,100,30\n",
    "surveys.csv": "hole_id,depth,azimuth,dip\nA1,0,0,-90\nA1,20,0,-88\nA2,0,90,-60\nA2,25,90,-61\nA3,0,180,-70\nA3,25,180,-70\n",
    "assays.csv": (
        "hole_id,from,to,au,domain\n"
        "A1,0,2,0.1,waste\nA1,2,4,1.5,ore\nA1,4,6,2.5,ore\nA1,6,8,<0.01,ore\nA1,8,10,,ore\n"
        "A2,0,10,3.0,ore\nA2,10,12,0.2,waste\n"
        "A3,0,1,1.0,ore\nA3,1,3,2.0,ore\nA3,5,7,-99,ore\n"
    ),
}


@pytest.fixture
def small_project(tmp_path):
    """A valid three-hole project in a temporary folder; returns the project file path."""
    for name, text in SMALL_FILES.items():
        (tmp_path / name).write_text(text)
    path = tmp_path / "project.toml"
    path.write_text(SMALL_PROJECT)
    return path


BOX_PROJECT = """
name = "box test project"

[data]
collars = "collars.csv"
surveys = "surveys.csv"
intervals = "assays.csv"
grades = { cu = "%" }

[[domains]]
name = "ore"
solid = "ore.ply"
density = 2.8

[variography]
lag = 10.0
lags = 8

[[search]]
ranges = [80.0, 80.0, 40.0]
min_samples = 3
max_samples = 16

[grid]
origin = [0.0, 0.0, 0.0]
block_size = [10.0, 10.0, 10.0]
shape = [10, 10, 10]

[estimation]
backend = "serial"

[report]
folder = "out"
cutoffs = [0.0, 0.5, 1.0]
"""


@pytest.fixture
def box_project(tmp_path):
    """A small complete project: 16 vertical holes through a box of ore; returns its file."""
    return make_box_project(tmp_path)


def make_box_project(tmp_path: Path) -> Path:
    """Write the box project's files into ``tmp_path``; returns the project file."""
    from blockmodel.model.solids import box_surface, write_ply

    rng = np.random.default_rng(7)
    collars, surveys, assays = (
        ["hole_id,x,y,z,depth"],
        ["hole_id,depth,azimuth,dip"],
        ["hole_id,from,to,cu,domain"],
    )
    for n, (x, y) in enumerate(rng.uniform(5, 95, size=(16, 2))):
        hole = f"B{n:02d}"
        collars.append(f"{hole},{x:.2f},{y:.2f},100,100")
        surveys.append(f"{hole},0,0,-90")
        for f in range(0, 100, 2):
            dom = "ore" if 20 <= f < 80 else "waste"
            grade = rng.lognormal(0, 0.5) if dom == "ore" else rng.lognormal(-3, 0.5)
            assays.append(f"{hole},{f},{f + 2},{grade:.4f},{dom}")
    for name, lines in (("collars.csv", collars), ("surveys.csv", surveys), ("assays.csv", assays)):
        (tmp_path / name).write_text("\n".join(lines) + "\n")
    write_ply(tmp_path / "ore.ply", box_surface((0, 0, 20), (100, 100, 80)))
    path = tmp_path / "project.toml"
    path.write_text(BOX_PROJECT)
    return path


@pytest.fixture(scope="session")
def box_site(tmp_path_factory):
    """A workspace shared by the session: ``data/`` holds the box project's inputs, ``out/``
    a report the tool wrote from them (one full run).  Copy it before changing anything."""
    from blockmodel.app.cli import main

    top = tmp_path_factory.mktemp("site")
    (top / "data").mkdir()
    project = make_box_project(top / "data")
    assert main(["run", str(project), "--out", str(top / "out")]) == 0
    return top
