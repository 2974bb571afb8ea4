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
