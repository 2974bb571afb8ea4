"""The numerical core imports no pandas, pyvista or matplotlib (DESIGN §2)."""

import ast
from pathlib import Path

import pytest

CORE = ["orientation.py", "variogram.py", "search.py", "kriging.py", "_kernels.py", "simulation.py",
        "declustering.py", "experimental.py", "fitting.py", "support.py", "grid.py", "desurvey.py"]
PACKAGE = Path(__file__).resolve().parents[1] / "blockmodel"


@pytest.mark.parametrize("module", CORE)
def test_core_imports_no_edge_libraries(module):
    tree = ast.parse((PACKAGE / module).read_text())
    typing_only = {id(n) for node in ast.walk(tree) if isinstance(node, ast.If)
                   and getattr(node.test, "id", "") == "TYPE_CHECKING" for n in ast.walk(node)}
    names = set()
    for node in ast.walk(tree):
        if id(node) in typing_only:
            continue
        if isinstance(node, ast.Import):
            names |= {a.name.split(".")[0] for a in node.names}
        elif isinstance(node, ast.ImportFrom) and node.module and node.level == 0:
            names.add(node.module.split(".")[0])
    assert not names & {"pandas", "pyvista", "matplotlib", "vtk"}, names


def test_public_names():
    import blockmodel as bm

    for name in ("Orientation", "Structure", "VariogramModel", "SearchEllipsoid", "krige"):
        assert name in bm.__all__ and hasattr(bm, name)
