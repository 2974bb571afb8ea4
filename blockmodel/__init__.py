"""blockmodel: drillholes to a validated, classified block model and a grade–tonnage report.

Every name below is imported on first use, so ``import blockmodel`` is quick.

The estimator, on arrays
------------------------
Orientation
    Three angles (azimuth, plunge, tilt) fixing an ellipsoid's axes.
Structure, VariogramModel
    Nested anisotropic variogram models (practical ranges).
SearchEllipsoid
    Oriented neighbourhood with sample, per-hole and octant limits.
krige, estimate, discretisation_offsets
    Ordinary / simple kriging (point or block), inverse distance, nearest sample.
experimental_variogram, fit_variogram
    Directional, omnidirectional and downhole variograms; weighted least-squares fits.
cell_declustering, change_of_support, grade_tonnage
    Declustering weights; discrete Gaussian change of support; grade–tonnage tables.
simulate_gaussian, gaussian_transform, plan_simulation, simulate_blocks
    Unconditional spectral fields; normal scores with stated tails; conditional
    simulation of block grades (prepared once, realisations reproducible one by one).

A project, stage by stage (each returns a frozen result; none changes its inputs)
----------------------------------------------------------------------------------
load_project
    Read and check a project file.
load_and_composite, build_domain_model, decluster, variograms,
neighbourhood_analysis, estimate_block_model, classify, validate, support_curves,
grade_tonnage_tables, statement_tables, simulate
    The stages of a run, in order (``variograms`` is the variography stage; the name
    ``variography`` is the subpackage).
run_stages, simulate_results
    All of them; returns a RunResults (with the simulation when ``[simulation] in_run``);
    the conditional simulation of a run's results.
write_run_files, read_run
    The result files of a run, written and read back.
render_view
    A 3D view of a block model to PNG.
"""

from importlib import import_module

_WHERE = {
    "Orientation": "blockmodel.estimation.orientation",
    "SearchEllipsoid": "blockmodel.estimation.search",
    "Structure": "blockmodel.variography.models",
    "VariogramModel": "blockmodel.variography.models",
    "discretisation_offsets": "blockmodel.estimation.systems",
    "estimate": "blockmodel.estimation.kriging",
    "krige": "blockmodel.estimation.kriging",
    "experimental_variogram": "blockmodel.variography.experimental",
    "fit_variogram": "blockmodel.variography.fitting",
    "cell_declustering": "blockmodel.assess.declustering",
    "change_of_support": "blockmodel.assess.support",
    "grade_tonnage": "blockmodel.report.tables",
    "simulate_gaussian": "blockmodel.simulation.spectral",
    "gaussian_transform": "blockmodel.simulation.transform",
    "plan_simulation": "blockmodel.simulation.conditional",
    "simulate_blocks": "blockmodel.simulation.conditional",
    "load_project": "blockmodel.config.project",
    "load_and_composite": "blockmodel.stages.composites",
    "build_domain_model": "blockmodel.stages.domain_model",
    "decluster": "blockmodel.stages.declustering",
    "variograms": ("blockmodel.stages.variography", "variography"),
    "neighbourhood_analysis": "blockmodel.stages.neighbourhood",
    "estimate_block_model": "blockmodel.stages.estimate",
    "classify": "blockmodel.stages.estimate",
    "validate": "blockmodel.stages.validation",
    "support_curves": "blockmodel.stages.support",
    "grade_tonnage_tables": "blockmodel.stages.tables",
    "statement_tables": "blockmodel.stages.tables",
    "simulate": "blockmodel.stages.simulation",
    "run_stages": "blockmodel.stages.run",
    "simulate_results": "blockmodel.stages.run",
    "write_run_files": "blockmodel.report.files",
    "read_run": "blockmodel.report.files",
    "render_view": "blockmodel.report.views",
}

__all__ = sorted(_WHERE)
__version__ = "0.1.0"


def __getattr__(name: str):
    """Import a public name's module on first use."""
    if name in _WHERE:
        module, attribute = (
            _WHERE[name] if isinstance(_WHERE[name], tuple) else (_WHERE[name], name)
        )
        value = getattr(import_module(module), attribute)
        globals()[name] = value
        return value
    raise AttributeError(f"module 'blockmodel' has no attribute {name!r}")


def __dir__() -> list[str]:
    return sorted([*globals(), *_WHERE])
