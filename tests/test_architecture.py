"""The numerical core pulls in no pandas, pyvista or matplotlib, however it imports them
(absolute, relative or through another module of the package)."""

import ast
import subprocess
import sys
from pathlib import Path

import pytest

CORE = [
    "estimation/orientation.py",
    "estimation/search.py",
    "estimation/kriging.py",
    "estimation/systems.py",
    "estimation/_kernels.py",
    "estimation/_neighbours.py",
    "variography/models.py",
    "variography/experimental.py",
    "variography/fitting.py",
    "variography/directions.py",
    "simulation/spectral.py",
    "assess/declustering.py",
    "assess/support.py",
    "model/grid.py",
    "data/desurvey.py",
]
EDGE = {"pandas", "pyvista", "matplotlib", "vtk"}
PACKAGE = Path(__file__).resolve().parents[1] / "blockmodel"


def _module_level_imports(path: Path) -> set[str]:
    """Absolute names imported at module level (relative imports resolved)."""
    package = ["blockmodel", *path.relative_to(PACKAGE).parent.parts]
    names = set()
    for node in ast.parse(path.read_text()).body:
        if isinstance(node, ast.Import):
            names |= {a.name for a in node.names}
        elif isinstance(node, ast.ImportFrom):
            base = package[: len(package) - node.level + 1] if node.level else []
            module = ".".join([*base, *([node.module] if node.module else [])])
            names.add(module)
            names |= {f"{module}.{a.name}" for a in node.names}  # a module or a name in it
    return names


@pytest.mark.parametrize("module", CORE)
def test_core_imports_no_edge_libraries(module):
    # module-level imports (what importing the core pulls in); a lazy import inside the
    # public DataFrame wrapper, or one for type checking only, does not count
    names = _module_level_imports(PACKAGE / module)
    assert not {n.split(".")[0] for n in names} & EDGE, names


def test_relative_imports_are_resolved():
    """The check above sees through ``from .. import x``: a made-up module proves it."""
    path = PACKAGE / "estimation" / "search.py"
    tree = "from ..report import plots\nfrom . import _kernels\nfrom .grid import G\n"
    fake = path.with_name("_architecture_probe.py")
    fake.write_text(tree)
    try:
        names = _module_level_imports(fake)
    finally:
        fake.unlink()
    assert {"blockmodel.report", "blockmodel.report.plots", "blockmodel.estimation._kernels"} <= (
        names
    )
    assert "blockmodel.estimation.grid" in names


def test_importing_the_core_loads_no_edge_library():
    """Whatever the import path (relative, or through another module), importing every
    core module in a fresh interpreter leaves pandas, matplotlib and pyvista unloaded."""
    modules = ", ".join("blockmodel." + m.removesuffix(".py").replace("/", ".") for m in CORE)
    code = (
        f"import importlib, sys\nfor m in '{modules}'.split(', '): importlib.import_module(m)\n"
        f"print(sorted(k for k in sys.modules if k.split('.')[0] in {sorted(EDGE)!r}))"
    )
    out = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, check=True)
    assert out.stdout.strip() == "[]", out.stdout


def test_public_names():
    import blockmodel as bm

    for name in ("Orientation", "Structure", "VariogramModel", "SearchEllipsoid", "krige"):
        assert name in bm.__all__ and hasattr(bm, name)


def test_every_public_function_has_a_docstring():
    """Module-level functions, classes and their methods not marked private (a leading
    underscore) carry a docstring."""
    missing = []
    for path in sorted(PACKAGE.rglob("*.py")):
        tree = ast.parse(path.read_text())
        for node in tree.body:
            if not isinstance(node, (ast.FunctionDef, ast.ClassDef)) or node.name.startswith("_"):
                continue
            if not ast.get_docstring(node):
                missing.append(f"{path.relative_to(PACKAGE)}:{node.name}")
            if isinstance(node, ast.ClassDef):
                for item in node.body:
                    if (
                        isinstance(item, ast.FunctionDef)
                        and not item.name.startswith("_")
                        and not ast.get_docstring(item)
                    ):
                        missing.append(f"{path.relative_to(PACKAGE)}:{node.name}.{item.name}")
    assert not missing, missing


def test_package_import_is_light_and_every_public_name_resolves():
    """``import blockmodel`` (and so ``blockmodel --help``) loads neither numba, scipy,
    pandas nor matplotlib; each public name is imported on first use."""
    code = (
        "import sys, blockmodel\n"
        "heavy = {'numba', 'scipy', 'pandas', 'matplotlib', 'pyvista'}\n"
        "print(sorted(k for k in sys.modules if k.split('.')[0] in heavy))\n"
        "missing = [n for n in blockmodel.__all__ if getattr(blockmodel, n, None) is None]\n"
        "print(missing)"
    )
    out = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, check=True)
    loaded, missing = out.stdout.strip().splitlines()
    assert loaded == "[]" and missing == "[]", out.stdout
