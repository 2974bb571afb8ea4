"""blockmodel: drillholes to a validated, classified block model and a grade-tonnage report.

Public names
------------
Orientation
    Three angles (azimuth, plunge, tilt) fixing an ellipsoid's axes.
Structure, VariogramModel
    Nested anisotropic variogram models (practical ranges).
SearchEllipsoid
    Oriented neighbourhood with sample, per-hole and octant limits.
krige, estimate
    Ordinary / simple kriging (point or block), inverse distance, nearest sample.
"""

from blockmodel.estimation.kriging import estimate, krige
from blockmodel.estimation.orientation import Orientation
from blockmodel.estimation.search import SearchEllipsoid
from blockmodel.estimation.systems import discretisation_offsets
from blockmodel.variography.models import Structure, VariogramModel

__all__ = [
    "Orientation",
    "SearchEllipsoid",
    "Structure",
    "VariogramModel",
    "discretisation_offsets",
    "estimate",
    "krige",
]
__version__ = "0.1.0"
