"""Importing the numerical core pulls in no pandas, pyvista or matplotlib (DESIGN §2)."""

import ast
from pathlib import Path

import pytest

CORE = [
    "orientation.py",
    "variogram.py",
    "search.py",
    "kriging.py",
    "_kernels.py",
    "simulation.py",
    "declustering.py",
    "experimental.py",
    "fitting.py",
    "support.py",
    "grid.py",
    "desurvey.py",
]
PACKAGE = Path(__file__).resolve().parents[1] / "blockmodel"


@pytest.mark.parametrize("module", CORE)
def test_core_imports_no_edge_libraries(module):
    # module-level imports (what importing the core pulls in); a lazy import inside the
    # public DataFrame wrapper, or one for type checking only, does not count
    tree = ast.parse((PACKAGE / module).read_text())
    names = set()
    for node in tree.body:
        if isinstance(node, ast.Import):
            names |= {a.name.split(".")[0] for a in node.names}
        elif isinstance(node, ast.ImportFrom) and node.module and node.level == 0:
            names.add(node.module.split(".")[0])
    assert not names & {"pandas", "pyvista", "matplotlib", "vtk"}, names


def test_public_names():
    import blockmodel as bm

    for name in ("Orientation", "Structure", "VariogramModel", "SearchEllipsoid", "krige"):
        assert name in bm.__all__ and hasattr(bm, name)
