"""The sections of the project file, each a frozen dataclass whose fields are the
section's settings, declared once with :func:`~blockmodel.config.schema.setting` (the
input tables' sections in :mod:`blockmodel.config.data_files`, re-exported here)."""

from __future__ import annotations

from dataclasses import dataclass
from pathlib import Path

from blockmodel.assess.declustering import SPARSE_QUANTILE
from blockmodel.config.data_files import METAL_GRAMS, Columns, DataFiles, PointColumns
from blockmodel.config.schema import setting
from blockmodel.estimation.search import MAX_SAMPLES, MIN_SAMPLES
from blockmodel.estimation.systems import DISCRETISATION
from blockmodel.variography.models import KINDS as _MODEL_KINDS

__all__ = [
    "CappingRule",
    "CellSweep",
    "ClassRule",
    "Classification",
    "Columns",
    "Compositing",
    "DataFiles",
    "Declustering",
    "Domain",
    "Estimation",
    "Grid",
    "ModelSpec",
    "PointColumns",
    "Report",
    "SearchPass",
    "Simulation",
    "StructureSpec",
    "Validation",
    "Variography",
]

# bounds of an orientation [azimuth, plunge, tilt], degrees
ANGLES = {
    "low": (-360.0, -90.0, -180.0),
    "high": (360.0, 90.0, 180.0),
    "parts": ("azimuth", "plunge", "tilt"),
}
KINDS = tuple(_MODEL_KINDS)


@dataclass(frozen=True)
class SearchPass:
    """One pass of the neighbour search (see :class:`~blockmodel.SearchEllipsoid`)."""

    ranges: tuple[float, float, float] = setting(
        doc="search radii along major, semi and minor axes, metres", low=0.0, strict_low=True
    )
    orientation: tuple[float, float, float] | None = setting(
        None,
        doc="[azimuth, plunge, tilt] of the ellipsoid; none takes the variogram model's",
        **ANGLES,
    )
    min_samples: int = setting(
        MIN_SAMPLES, doc="fewest samples to estimate a block in this pass", low=1
    )
    max_samples: int = setting(MAX_SAMPLES, doc="most samples used, nearest first", low=1)
    max_per_hole: int | None = setting(None, doc="most samples from any one hole", low=1)
    max_per_octant: int | None = setting(
        None, doc="most samples from any octant of the ellipsoid", low=1
    )
    min_octants: int = setting(0, doc="fewest octants that must hold a sample", low=0, high=8)


@dataclass(frozen=True)
class Domain:
    """A geological domain, in priority order: where solids overlap, the first wins."""

    name: str = setting(doc="the domain's name in outputs ('all' is reserved for totals)")
    density: float = setting(doc="dry bulk density, t/m3", low=0.0, strict_low=True)
    code: str = setting("", doc="its code in the intervals' domain column; none: the name")
    solid: Path | None = setting(
        None,
        doc="closed solid (PLY, STL, OBJ, VTK); none: placed from the codes of the composites",
    )
    estimate: bool = setting(True, doc="estimate this domain's grades")
    density_from_composites: bool = setting(
        False, doc="estimate density by inverse distance from data.density"
    )
    search: tuple[SearchPass, ...] = setting(
        (), doc="this domain's own search passes; none: the project's"
    )
    declustering: Declustering | None = setting(
        None,
        doc="this domain's own declustering (e.g. infill clustered in its high grades only): "
        "the keys given replace the project's [declustering] values, the others are the "
        "project's; none: the project's",
        keys_of="declustering",
    )


@dataclass(frozen=True)
class Compositing:
    """Compositing down the holes, within domains."""

    length: float = setting(2.0, doc="composite length, metres", low=0.0, strict_low=True)
    min_coverage: float = setting(
        0.5, doc="least sampled share of a composite's length to keep it", low=0.0, high=1.0
    )
    residual: str = setting(
        "merge",
        doc="a short last piece at a domain boundary: merged into the one before, kept or dropped",
        choices=("merge", "keep", "drop"),
    )


@dataclass(frozen=True)
class CappingRule:
    """A top cut of one grade in one domain, by value or by percentile."""

    domain: str = setting(doc="the domain it applies to")
    grade: str = setting(doc="the grade it caps")
    value: float | None = setting(None, doc="cap at this grade", low=0.0)
    percentile: float | None = setting(
        None, doc="cap at this percentile of the composites", low=0.0, high=100.0, strict_low=True
    )


@dataclass(frozen=True)
class CellSweep:
    """Cell sizes tried by cell declustering: ``count`` sizes evenly from ``smallest`` to
    ``largest`` (along x; y and z follow ``cell_shape``)."""

    smallest: float = setting(10.0, doc="smallest cell, metres", low=0.0, strict_low=True)
    largest: float = setting(200.0, doc="largest cell, metres", low=0.0, strict_low=True)
    count: int = setting(20, doc="number of sizes tried", low=2)


@dataclass(frozen=True)
class Declustering:
    """Declustering weights of the composites (per domain)."""

    method: str = setting(
        "cell",
        doc="cell: cell declustering; nearest: share of blocks nearest each composite; none",
        choices=("cell", "nearest", "none"),
    )
    cell_sizes: CellSweep = setting(doc="the cell sizes swept", factory=CellSweep)
    cell_shape: tuple[float, float, float] = setting(
        (1.0, 1.0, 1.0),
        doc="relative cell lengths along x, y, z",
        low=0.0,
        strict_low=True,
    )
    grid_shifts: int = setting(
        8, doc="shifted cell grids averaged for each size (along the diagonal)", low=1
    )
    keep: str = setting(
        "hole_spacing",
        doc="the cell size kept: hole_spacing: the spacing of the domain's holes where "
        "sparsest (of the distances from each hole's intercept, the mean position of its "
        f"composites, to the nearest other, the {100 * SPARSE_QUANTILE:.0f}th percentile; "
        "a domain sampled by one hole keeps equal weights, with a warning); lowest_mean or "
        "highest_mean: the size of the lowest or highest declustered mean, for drilling "
        "clustered in high or low grades only (on a regular pattern the lowest mean lies "
        "below the true one); given_size",
        choices=("hole_spacing", "lowest_mean", "highest_mean", "given_size"),
    )
    given_size: float = setting(
        50.0, doc="cell size kept with keep = given_size, metres", low=0.0, strict_low=True
    )


@dataclass(frozen=True)
class Variography:
    """Experimental variograms and the automatic fit."""

    lag: float = setting(
        10.0, doc="lag width along major and semi axes, metres", low=0.0, strict_low=True
    )
    lags: int = setting(15, doc="number of lags", low=1)
    lag_tolerance: float | None = setting(
        None,
        doc="centred lags: lag k holds pairs within this of k lags; none: adjoining bins",
        low=0.0,
        strict_low=True,
    )
    angular_tolerance: float = setting(
        22.5,
        doc="largest angle of a pair from the direction, degrees",
        low=0.0,
        high=90.0,
        strict_low=True,
    )
    side_band: float = setting(
        25.0,
        doc="largest offset of a pair from the direction line, measured horizontally at "
        "right angles to it, metres",
        low=0.0,
        strict_low=True,
    )
    updown_band: float = setting(
        10.0,
        doc="largest offset of a pair from the direction line, measured in the vertical "
        "plane holding the direction, at right angles to it, metres",
        low=0.0,
        strict_low=True,
    )
    estimator: str = setting(
        "semivariogram",
        doc="what is computed for each lag",
        choices=("semivariogram", "correlogram", "pairwise_relative"),
    )
    structures: int = setting(2, doc="nested structures fitted", low=1, high=3)
    kinds: tuple[str, ...] = setting(
        ("spherical", "spherical"), doc="model of each structure", choices=KINDS
    )
    orientation: tuple[float, float, float] | None = setting(
        None,
        doc="[azimuth, plunge, tilt] of continuity; none: found from the data in 3D",
        **ANGLES,
    )
    use_declustering_weights: bool = setting(False, doc="weigh each pair by w_i w_j")
    transform: str = setting(
        "none",
        doc="variograms of the grades or of their normal scores",
        choices=("none", "normal_scores"),
    )
    fixed: dict[str, float] = setting(
        doc="parameters held in the fit, e.g. { nugget = 0.2, range1_major = 60.0 }",
        factory=dict,
    )
    minor_lag: float = setting(
        2.5, doc="lag width along the minor axis, metres", low=0.0, strict_low=True
    )


@dataclass(frozen=True)
class StructureSpec:
    """One nested structure of a given variogram model."""

    kind: str = setting(doc="model of the structure", choices=KINDS)
    sill: float = setting(doc="partial sill", low=0.0, strict_low=True)
    ranges: tuple[float, float, float] = setting(
        doc="practical ranges along major, semi, minor, metres", low=0.0, strict_low=True
    )
    orientation: tuple[float, float, float] = setting(
        (0.0, 0.0, 0.0), doc="[azimuth, plunge, tilt], degrees", **ANGLES
    )


@dataclass(frozen=True)
class ModelSpec:
    """A variogram model given in the project file (``[variogram.DOMAIN.GRADE]``)."""

    nugget: float = setting(doc="nugget effect", low=0.0)
    structures: tuple[StructureSpec, ...] = setting(doc="nested structures")


@dataclass(frozen=True)
class Grid:
    """The block grid."""

    origin: tuple[float, float, float] = setting(doc="corner of the grid (lowest x, y, z), metres")
    block_size: tuple[float, float, float] = setting(
        doc="block size along x, y, z, metres", low=0.0, strict_low=True
    )
    shape: tuple[int, int, int] = setting(doc="blocks along x, y, z", low=1)
    subcells: tuple[int, int, int] = setting(
        (4, 4, 4), doc="sub-cells per block side for proportions", low=1, high=50
    )
    topography: Path | None = setting(None, doc="surface above which blocks are air")
    code_reach: float = setting(
        50.0,
        doc="domains without a solid lie within this of their composites, metres",
        low=0.0,
        strict_low=True,
    )


@dataclass(frozen=True)
class Estimation:
    """How blocks are estimated and where the work runs."""

    method: str = setting("ordinary", doc="kriging kind", choices=("ordinary", "simple"))
    discretisation: tuple[int, int, int] = setting(
        DISCRETISATION, doc="points per block along x, y, z", low=1, high=20
    )
    boundaries: str = setting(
        "hard", doc="hard: a domain's own composites only; soft: all", choices=("hard", "soft")
    )
    idw_power: float = setting(
        2.0, doc="power of the inverse-distance check model", low=0.0, strict_low=True
    )
    chunk_size: int = setting(20_000, doc="blocks per chunk (memory; results do not change)", low=1)
    workers: int = setting(0, doc="local processes; 0: all cores", low=0)
    backend: str = setting(
        "processes", doc="where chunks run", choices=("serial", "processes", "dask")
    )
    cluster: str = setting("", doc="address of a running dask.distributed scheduler")


@dataclass(frozen=True)
class Validation:
    """Cross-validation."""

    leave_out: str = setting(
        "hole", doc="what each re-estimate leaves out", choices=("hole", "sample")
    )


@dataclass(frozen=True)
class ProductionVolume:
    """A volume mined in one period (a year, a quarter, a set of benches): the simulated
    blocks whose centre lies in the box ``low <= centre < high``."""

    name: str = setting(doc="the period or volume, e.g. 'year 1' ('all' is reserved)")
    low: tuple[float, float, float] = setting(doc="lowest corner x, y, z, metres")
    high: tuple[float, float, float] = setting(doc="highest corner x, y, z, metres")


@dataclass(frozen=True)
class Simulation:
    """Conditional simulation of grades: normal scores, spectral fields conditioned by
    simple kriging, back to grades on the block discretisation, averaged to blocks."""

    realisations: int = setting(50, doc="realisations per domain and grade", low=2)
    seed: int = setting(1, doc="seed of the realisations (each reproducible alone)", low=0)
    in_run: bool = setting(False, doc="blockmodel run simulates too")
    block_size: tuple[float, float, float] | None = setting(
        None,
        doc="the selective mining unit the realisations are averaged to, metres along x, "
        "y, z; each side a whole fraction of the grid's block (e.g. 5 of 10); none: the "
        "grid's block",
        low=0.0,
        strict_low=True,
    )
    discretisation: tuple[int, int, int] | None = setting(
        None,
        doc="nodes per simulated block (or mining unit) along x, y, z; none: the node "
        "spacing of estimation.discretisation in the grid's block",
        low=1,
        high=20,
    )
    neighbours: int = setting(24, doc="data per node in the conditioning kriging", low=1)
    mean_uncertainty: bool = setting(
        True,
        doc="each realisation draws its domain's mean normal score from the variance of "
        "the declustered mean under the normal scores' model; false: the mean is known "
        "and the bands leave out its uncertainty",
    )
    variance_uncertainty: bool = setting(
        True,
        doc="each realisation draws the factor on its normal scores' sill from the spread "
        "the composites' declustered variance has under the model (a scaled inverse "
        "chi-square); false: the sill is known and the bands leave out the uncertainty of "
        "the histogram's spread",
    )
    model_draws: int = setting(
        10,
        doc="draws of each fitted normal-score model, by a parametric bootstrap of its fit "
        "(values drawn at the composites under the model and fitted again; the nugget, the "
        "sills and, with simulation.draw_ranges, the ranges move): realisation r follows "
        "draw r modulo their number, "
        "each draw costing one more set of conditioning weights; 0 or 1: the model is known "
        "and the bands leave out its uncertainty (a model given in simulation.models, or "
        "simulation.model = 'standardised', is always taken as known)",
        low=0,
    )
    draw_ranges: bool = setting(
        True,
        doc="the model's draws move the structures' ranges too (refitted freely, orientation "
        "and kinds kept): each draw's conditioning weights and spectrum are its own; false: "
        "the ranges stay as fitted and the draws share them (faster; the bands leave out "
        "the ranges' uncertainty)",
    )
    local_mean_window: dict[str, float] = setting(
        doc="domains and grades whose normal scores follow a trend (e.g. a high-grade "
        "shoot inside the domain), simulated about a local mean: a Gaussian-kernel "
        "average of the declustered scores whose window is the given fraction of the "
        'ranges of their longest structure, e.g. { "lode.au" = 0.5 }; others: one mean',
        entry="DOMAIN.GRADE",
        low=0.0,
        strict_low=True,
        factory=dict,
    )
    model: str = setting(
        "fit",
        doc="the normal scores' variogram of a domain and grade not in simulation.models: "
        "fit: the grade model's structures and ranges with the nugget and sills fitted to "
        "the normal scores' experimental variograms along its axes; standardised: the grade "
        "model's shape; either scaled so that its variance among the composites is theirs, "
        "1 (a sill of 1 when its ranges are short against the domain; with a local mean: "
        "the residuals' variance)",
        choices=("fit", "standardised"),
    )
    models: dict[str, ModelSpec] = setting(
        doc="normal-score variogram models given by the user (nugget and sills adding up "
        'to 1), e.g. [simulation.models."lode.au"]; they take precedence over model',
        entry="DOMAIN.GRADE",
        factory=dict,
    )
    capped_grades: bool = setting(
        False,
        doc="the realisations reproduce the capped composites; false: the composites before "
        "capping (in the normal-score transform each grade keeps its own quantile, and a "
        "cap would take the upper tail's metal out of every realisation)",
    )
    minimum: float = setting(0.0, doc="lowest grade of the back-transform (lower tail)", low=0.0)
    maximum: dict[str, float] = setting(
        doc="highest grade of the back-transform per domain and grade, e.g. "
        '{ "lode.au" = 60.0 }; none: no bound for the lognormal tail, the largest composite '
        "for the linear and hyperbolic tails (which then add nothing above it)",
        entry="DOMAIN.GRADE",
        low=0.0,
        strict_low=True,
        factory=dict,
    )
    upper_tail: str = setting(
        "lognormal",
        doc="upper tail above the largest composite, up to the maximum: lognormal: the log "
        "of the grade goes on linearly in the normal score at the slope fitted to the top "
        "tenth of the declustered composites; linear: linear in probability to the maximum; "
        "hyperbolic: a power law of the probability above, exponent omega",
        choices=("lognormal", "hyperbolic", "linear"),
    )
    omega: float = setting(
        1.5, doc="exponent of the hyperbolic tail (larger: thinner)", low=1.0, strict_low=True
    )
    workers: int = setting(1, doc="threads over realisations; 0: all cores", low=0)
    keep_realisations: bool = setting(
        False, doc="also write every realisation's block grades (long Parquet table)"
    )
    volumes: tuple[ProductionVolume, ...] = setting(
        (),
        doc="production volumes whose tonnes, grade and metal above the statement cut-off "
        "are reported with their bands, e.g. [[simulation.volumes]] name = 'year 1'",
    )


@dataclass(frozen=True)
class ClassRule:
    """A class given to blocks meeting every limit (rules are tried in order)."""

    name: str = setting(doc="the class ('all' is reserved for totals)")
    max_pass: int = setting(99, doc="latest search pass", low=1)
    min_holes: int = setting(0, doc="fewest holes among the samples", low=0)
    min_samples: int = setting(0, doc="fewest samples", low=0)
    max_distance: float | None = setting(
        None, doc="largest mean sample distance, metres", low=0.0, strict_low=True
    )
    min_slope: float | None = setting(None, doc="least slope of regression")


@dataclass(frozen=True)
class Classification:
    """Proposed classes from numeric rules."""

    rules: tuple[ClassRule, ...] = setting(
        (
            ClassRule("Measured", max_pass=1, min_holes=3, min_slope=0.8),
            ClassRule("Indicated", max_pass=2, min_holes=2, min_slope=0.5),
        ),
        doc="the rules, tried in order",
    )
    fallback: str = setting("Inferred", doc="class of any other estimated block")
    clean_up: bool = setting(
        True, doc="give an isolated block the most common class of its neighbours"
    )


@dataclass(frozen=True)
class Report:
    """Where and how results are reported."""

    folder: Path = setting(doc="report folder")
    cutoffs: tuple[float, ...] = setting(
        (0.0, 0.5, 1.0, 1.5, 2.0, 3.0, 5.0), doc="cut-off grades, increasing", low=0.0
    )
    write_csv: bool = setting(False, doc="also write the block model as CSV")
    metal_units: dict[str, str] = setting(
        doc="the unit metal is reported in, per grade, where the grade's unit does not say "
        'it: g/t and ppm give troy oz (and kg), ppb g and % t; e.g. { zn = "t" } for a '
        "base metal in ppm",
        choices=tuple(METAL_GRAMS),
        entry="GRADE",
        factory=dict,
    )
    statement_cutoffs: dict[str, float] = setting(
        doc="reporting cut-off of the statement table per domain; a domain not named takes "
        "the lowest report cut-off above zero",
        low=0.0,
        entry="DOMAIN",
        factory=dict,
    )
