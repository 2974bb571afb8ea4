"""The stages of a run, in order.  Each is a function from inputs to a frozen result and
writes no file; none changes another's output.

1. :mod:`~blockmodel.stages.composites` — drillholes loaded, checked, composited, capped
2. :mod:`~blockmodel.stages.domain_model` — the grid and each block's share of each domain
3. :mod:`~blockmodel.stages.declustering` — declustering weights and statistics
4. :mod:`~blockmodel.stages.variography` — experimental variograms and the model
   :mod:`~blockmodel.stages.neighbourhood` — kriging neighbourhood analysis
5. :mod:`~blockmodel.stages.estimate` — the block model, estimated and classified
6. :mod:`~blockmodel.stages.checks` — what the estimate cannot be trusted for
7. :mod:`~blockmodel.stages.validation` — cross-validation, swaths, global bias
8. :mod:`~blockmodel.stages.support` — change of support (discrete Gaussian model)
9. :mod:`~blockmodel.stages.tables` — grade–tonnage tables; the truth of invented deposits

:func:`~blockmodel.stages.run.run_stages` calls them in that order;
:mod:`blockmodel.report` renders the results.
"""

from blockmodel.stages.checks import estimate_warnings, hole_spacing
from blockmodel.stages.composites import Composites, load_and_composite
from blockmodel.stages.declustering import Declustering, DomainDeclustering, decluster
from blockmodel.stages.domain_model import (
    DomainModel,
    block_model_grid,
    build_domain_model,
    model_proportions,
)
from blockmodel.stages.estimate import classify, estimate_block_model
from blockmodel.stages.neighbourhood import Neighbourhood, neighbourhood_analysis
from blockmodel.stages.run import EngineOptions, RunResults, Steps, run_stages
from blockmodel.stages.support import Support, support_curves
from blockmodel.stages.tables import TruthCheck, grade_tonnage_tables, truth_check
from blockmodel.stages.validation import Validation, validate
from blockmodel.stages.variography import Variography, variography

__all__ = [
    "Composites",
    "Declustering",
    "DomainDeclustering",
    "DomainModel",
    "EngineOptions",
    "Neighbourhood",
    "RunResults",
    "Steps",
    "Support",
    "TruthCheck",
    "Validation",
    "Variography",
    "block_model_grid",
    "build_domain_model",
    "classify",
    "decluster",
    "estimate_block_model",
    "estimate_warnings",
    "grade_tonnage_tables",
    "hole_spacing",
    "load_and_composite",
    "model_proportions",
    "neighbourhood_analysis",
    "run_stages",
    "support_curves",
    "truth_check",
    "validate",
    "variography",
]
