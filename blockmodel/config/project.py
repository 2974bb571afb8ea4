"""The project file: TOML parsed once into frozen dataclasses.

Unknown keys are errors naming the key, its section and the closest valid key; wrong
types and out-of-range values are errors naming the key.  Paths resolve relative to the
project file.  :func:`resolved` gives the full configuration, defaults included, for the
run manifest.
"""

from __future__ import annotations

import dataclasses
import difflib
import math
import os
import re
import tomllib
import types
import typing
from dataclasses import dataclass, field
from pathlib import Path

from blockmodel.errors import InputError, Problem

__all__ = [
    "CappingRule",
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
    "Project",
    "Report",
    "SearchPass",
    "StructureSpec",
    "Validation",
    "Variography",
    "grid_memory_bytes",
    "load_project",
    "resolved",
]


@dataclass(frozen=True)
class Columns:
    """Names of the columns in the input files, mapped to what they mean."""

    hole: str = "hole_id"
    x: str = "x"
    y: str = "y"
    z: str = "z"
    depth: str = "depth"
    survey_depth: str = "depth"
    azimuth: str = "azimuth"
    dip: str = "dip"
    depth_from: str = "from"
    depth_to: str = "to"
    domain: str = "domain"


@dataclass(frozen=True)
class DataFiles:
    """Input tables. ``grades`` maps each grade column to its unit (g/t, ppm, %, ppb)."""

    collars: Path
    surveys: Path
    intervals: Path
    grades: dict[str, str]
    columns: Columns = field(default_factory=Columns)
    below_detection_factor: float = 0.5
    missing_values: tuple[float, ...] = (-99.0, -999.0)
    density: str = ""  # optional column of measured density (t/m3) in the intervals


@dataclass(frozen=True)
class Domain:
    """A geological domain: its code in the intervals, its solid, its density (t/m3)."""

    name: str
    density: float
    code: str = ""
    solid: Path | None = None
    estimate: bool = True
    density_from_composites: bool = False  # inverse-distance estimate of data.density
    search: tuple[SearchPass, ...] = ()  # this domain's own passes; empty: the project's


@dataclass(frozen=True)
class Compositing:
    length: float = 2.0
    min_coverage: float = 0.5
    residual: str = "merge"  # merge | keep | drop


@dataclass(frozen=True)
class CappingRule:
    domain: str
    grade: str
    value: float | None = None
    percentile: float | None = None


@dataclass(frozen=True)
class Declustering:
    method: str = "cell"  # cell | nearest | none
    cell_sizes: tuple[float, float, int] = (10.0, 200.0, 20)
    anisotropy: tuple[float, float, float] = (1.0, 1.0, 1.0)
    origins: int = 8
    choose: str = "minimum"  # minimum | maximum | fixed
    fixed_size: float = 50.0


@dataclass(frozen=True)
class Variography:
    lag: float = 10.0
    lags: int = 15
    lag_tolerance: float | None = None  # None: lag k holds (k-1) lag < d <= k lag
    angular_tolerance: float = 22.5
    horizontal_bandwidth: float = 25.0
    vertical_bandwidth: float = 10.0
    estimator: str = "semivariogram"  # semivariogram | correlogram | pairwise_relative
    structures: int = 2
    kinds: tuple[str, ...] = ("spherical", "spherical")
    orientation: tuple[float, float, float] | None = None
    use_declustering_weights: bool = False
    transform: str = "none"  # none | normal_scores
    fixed: dict[str, float] = field(
        default_factory=dict
    )  # e.g. { nugget = 0.2, range1_major = 60.0 }
    minor_lag: float = 2.5


@dataclass(frozen=True)
class StructureSpec:
    kind: str
    sill: float
    ranges: tuple[float, float, float]
    orientation: tuple[float, float, float] = (0.0, 0.0, 0.0)


@dataclass(frozen=True)
class ModelSpec:
    nugget: float
    structures: tuple[StructureSpec, ...]


@dataclass(frozen=True)
class SearchPass:
    ranges: tuple[float, float, float]
    orientation: tuple[float, float, float] | None = None
    min_samples: int = 4
    max_samples: int = 24
    max_per_hole: int | None = None
    max_per_octant: int | None = None
    min_octants: int = 0


@dataclass(frozen=True)
class Grid:
    origin: tuple[float, float, float]
    block_size: tuple[float, float, float]
    shape: tuple[int, int, int]
    subcells: tuple[int, int, int] = (4, 4, 4)
    topography: Path | None = None
    code_reach: float = 50.0  # metres: blocks of solid-less domains lie this near their composites


@dataclass(frozen=True)
class Estimation:
    method: str = "ordinary"  # ordinary | simple
    discretisation: tuple[int, int, int] = (4, 4, 2)
    boundaries: str = "hard"  # hard | soft
    idw_power: float = 2.0
    chunk_size: int = 20_000
    workers: int = 0  # 0 = all cores
    backend: str = "processes"  # serial | processes | dask
    cluster: str = ""


@dataclass(frozen=True)
class Validation:
    leave_out: str = "hole"  # hole | sample


@dataclass(frozen=True)
class ClassRule:
    name: str
    max_pass: int = 99
    min_holes: int = 0
    min_samples: int = 0
    max_distance: float | None = None
    min_slope: float | None = None


@dataclass(frozen=True)
class Classification:
    rules: tuple[ClassRule, ...] = (
        ClassRule("Measured", max_pass=1, min_holes=3, min_slope=0.8),
        ClassRule("Indicated", max_pass=2, min_holes=2, min_slope=0.5),
    )
    fallback: str = "Inferred"
    clean_up: bool = True


@dataclass(frozen=True)
class Report:
    folder: Path
    cutoffs: tuple[float, ...] = (0.0, 0.5, 1.0, 1.5, 2.0, 3.0, 5.0)
    write_csv: bool = False


@dataclass(frozen=True)
class Project:
    name: str
    data: DataFiles
    domains: tuple[Domain, ...]
    grid: Grid
    report: Report
    compositing: Compositing = field(default_factory=Compositing)
    capping: tuple[CappingRule, ...] = ()
    declustering: Declustering = field(default_factory=Declustering)
    variography: Variography = field(default_factory=Variography)
    variogram: dict[str, ModelSpec] = field(default_factory=dict)
    search: tuple[SearchPass, ...] = ()
    estimation: Estimation = field(default_factory=Estimation)
    validation: Validation = field(default_factory=Validation)
    classification: Classification = field(default_factory=Classification)
    source: Path = Path("project.toml")
    truth: Path | None = None

    @property
    def grades(self) -> list[str]:
        return list(self.data.grades)

    def passes_for(self, domain: str) -> tuple[SearchPass, ...]:
        """The search passes of a domain: its own, or the project's."""
        return self.domain(domain).search or self.search

    def domain(self, name: str) -> Domain:
        return next(d for d in self.domains if d.name == name)


_CHOICES = {
    ("compositing", "residual"): ("merge", "keep", "drop"),
    ("declustering", "method"): ("cell", "nearest", "none"),
    ("declustering", "choose"): ("minimum", "maximum", "fixed"),
    ("variography", "estimator"): ("semivariogram", "correlogram", "pairwise_relative"),
    ("variography", "transform"): ("none", "normal_scores"),
    ("estimation", "method"): ("ordinary", "simple"),
    ("estimation", "boundaries"): ("hard", "soft"),
    ("estimation", "backend"): ("serial", "processes", "dask"),
    ("validation", "leave_out"): ("hole", "sample"),
}
_UNITS = ("g/t", "ppm", "%", "ppb")


class _Reader:
    def __init__(self, path: Path):
        self.path = path
        self.base = path.parent

    def fail(self, key: str, message: str) -> typing.NoReturn:
        raise InputError([Problem(str(self.path), None, None, key, message)])

    def build(self, cls, data, key: str):
        if not isinstance(data, dict):
            self.fail(key, f"'{key}' must be a table")
        hints = typing.get_type_hints(cls)
        names = [f.name for f in dataclasses.fields(cls) if f.name not in ("source",)]
        for k in data:
            if k not in names:
                close = difflib.get_close_matches(k, names, n=1, cutoff=0.5)
                hint = (
                    f"; did you mean '{close[0]}'?"
                    if close
                    else f"; valid keys: {', '.join(names)}"
                )
                where = f"section [{key}]" if key else "the top level"
                self.fail(f"{key}.{k}".strip("."), f"unknown key '{k}' in {where}{hint}")
        kwargs = {}
        for f in dataclasses.fields(cls):
            if f.name not in data:
                if f.default is dataclasses.MISSING and f.default_factory is dataclasses.MISSING:
                    if f.name == "source":
                        continue
                    self.fail(f"{key}.{f.name}".strip("."), f"missing required key '{f.name}'")
                continue
            sub = f"{key}.{f.name}".strip(".")
            kwargs[f.name] = self.convert(hints[f.name], data[f.name], sub)
            choices = _CHOICES.get((key, f.name))
            if choices and kwargs[f.name] not in choices:
                self.fail(
                    sub, f"'{sub}' must be one of {', '.join(choices)}; got {kwargs[f.name]!r}"
                )
        return cls(**kwargs)

    def convert(self, tp, value, key: str):
        origin = typing.get_origin(tp)
        args = typing.get_args(tp)
        if origin in (typing.Union, types.UnionType):
            inner = next(a for a in args if a is not type(None))
            return self.convert(inner, value, key)
        if dataclasses.is_dataclass(tp):
            return self.build(tp, value, key)
        if tp is Path:
            if not isinstance(value, str):
                self.fail(key, f"'{key}' must be a file path (text)")
            return (self.base / value).resolve()
        if tp is bool:
            if not isinstance(value, bool):
                self.fail(key, f"'{key}' must be true or false; got {value!r}")
            return value
        if tp is float:
            if isinstance(value, bool) or not isinstance(value, (int, float)):
                self.fail(key, f"'{key}' must be a number; got {value!r}")
            if not math.isfinite(value) or abs(value) > 1e12:
                self.fail(key, f"'{key}' must be a finite number of sensible size; got {value!r}")
            return float(value)
        if tp is int:
            if isinstance(value, bool) or not isinstance(value, int):
                self.fail(key, f"'{key}' must be a whole number; got {value!r}")
            return value
        if tp is str:
            if not isinstance(value, str):
                self.fail(key, f"'{key}' must be text; got {value!r}")
            return value
        if origin is tuple:
            if not isinstance(value, list):
                self.fail(key, f"'{key}' must be a list; got {value!r}")
            if len(args) == 2 and args[1] is Ellipsis:
                return tuple(self.convert(args[0], v, f"{key}[{i}]") for i, v in enumerate(value))
            if len(value) != len(args):
                self.fail(key, f"'{key}' must have {len(args)} entries; got {len(value)}")
            return tuple(
                self.convert(a, v, f"{key}[{i}]")
                for i, (a, v) in enumerate(zip(args, value, strict=True))
            )
        if origin is dict:
            if not isinstance(value, dict):
                self.fail(key, f"'{key}' must be a table")
            return {k: self.convert(args[1], v, f"{key}.{k}") for k, v in value.items()}
        raise TypeError(f"unsupported type {tp} for {key}")  # pragma: no cover - schema bug


def grid_memory_bytes(p: Project) -> float:
    """Memory a run needs for its block grid at worst (every block in every domain):
    proportions (4 bytes per block and domain) and the block model's columns (8 bytes each:
    ten for position, domain and tonnes, eleven per grade)."""
    blocks = math.prod(p.grid.shape)
    return float(blocks) * (4 * len(p.domains) + 8 * (10 + 11 * len(p.data.grades)))


def _physical_memory() -> float:
    try:
        return float(os.sysconf("SC_PHYS_PAGES") * os.sysconf("SC_PAGE_SIZE"))
    except (ValueError, OSError, AttributeError):  # not reported: assume a laptop
        return 8.0 * 2**30


def _check_values(p: Project, r: _Reader) -> None:
    def positive(key, values):
        if any(not v > 0 for v in values):
            r.fail(key, f"'{key}' must be positive; got {list(values)}")

    for g, unit in p.data.grades.items():
        if unit not in _UNITS:
            r.fail(
                f"data.grades.{g}",
                f"unit of grade '{g}' must be one of {', '.join(_UNITS)}; got {unit!r}",
            )
    if not p.data.grades:
        r.fail("data.grades", 'name at least one grade column, e.g. grades = { au = "g/t" }')
    if not 0 < p.data.below_detection_factor <= 1:
        r.fail("data.below_detection_factor", "'data.below_detection_factor' must lie in (0, 1]")
    positive("grid.block_size", p.grid.block_size)
    positive("grid.shape", p.grid.shape)
    positive("grid.subcells", p.grid.subcells)
    positive("compositing.length", [p.compositing.length])
    if not 0 <= p.compositing.min_coverage <= 1:
        r.fail("compositing.min_coverage", "'compositing.min_coverage' must lie in [0, 1]")
    positive("variography.lag", [p.variography.lag])
    positive("variography.minor_lag", [p.variography.minor_lag])
    tol = p.variography.lag_tolerance
    if tol is not None and not 0 < tol <= p.variography.lag / 2:
        r.fail("variography.lag_tolerance", "'variography.lag_tolerance' must lie in (0, lag / 2]")
    positive("variography.lags", [p.variography.lags])
    positive("estimation.discretisation", p.estimation.discretisation)
    positive("estimation.chunk_size", [p.estimation.chunk_size])
    names = [d.name for d in p.domains]
    if not names:
        r.fail("domains", "declare at least one [[domains]] table")
    if len(set(names)) != len(names):
        r.fail("domains", f"domain names must be unique; got {names}")
    for i, name in enumerate(names):
        if name.strip().lower() == "all" or not name.strip():
            r.fail(
                f"domains[{i}].name",
                f"domain name {name!r} is not allowed: 'all' marks totals in the tables",
            )
    for i, rule in enumerate(p.classification.rules):
        if rule.name.strip().lower() == "all" or not rule.name.strip():
            r.fail(
                f"classification.rules[{i}].name",
                f"class name {rule.name!r} is not allowed: 'all' marks totals in the tables",
            )
    for i, d in enumerate(p.domains):
        positive(f"domains[{i}].density", [d.density])
        if d.density_from_composites and not p.data.density:
            r.fail(
                f"domains[{i}].density_from_composites", "needs data.density, the density column"
            )
    positive("grid.code_reach", [p.grid.code_reach])
    for i, c in enumerate(p.capping):
        if c.domain not in names:
            r.fail(
                f"capping[{i}].domain",
                f"unknown domain '{c.domain}'; domains are {', '.join(names)}",
            )
        if c.grade not in p.data.grades:
            r.fail(f"capping[{i}].grade", f"unknown grade '{c.grade}'")
        if (c.value is None) == (c.percentile is None):
            r.fail(f"capping[{i}]", "give exactly one of 'value' or 'percentile'")
        if c.percentile is not None and not 0 < c.percentile < 100:
            r.fail(f"capping[{i}].percentile", "'percentile' must lie in (0, 100)")
    searches = [(f"search[{i}]", s) for i, s in enumerate(p.search)]
    searches += [
        (f"domains[{n}].search[{i}]", s)
        for n, d in enumerate(p.domains)
        for i, s in enumerate(d.search)
    ]
    for key, s in searches:
        positive(f"{key}.ranges", s.ranges)
        if not 1 <= s.min_samples <= s.max_samples:
            r.fail(key, "need 1 <= min_samples <= max_samples")
    orientations = [("variography.orientation", p.variography.orientation)]
    orientations += [(f"{key}.orientation", s.orientation) for key, s in searches]
    orientations += [
        (f"variogram.{key}.structures[{j}].orientation", st.orientation)
        for key, spec in p.variogram.items()
        for j, st in enumerate(spec.structures)
    ]
    for key, o in orientations:
        if o is None:
            continue
        az, plunge, tilt = o
        if not (-360 <= az <= 360 and -90 <= plunge <= 90 and -180 <= tilt <= 180):
            r.fail(
                key,
                f"'{key}' is [azimuth, plunge, tilt] with azimuth in [-360, 360], plunge in "
                f"[-90, 90] and tilt in [-180, 180] degrees; got {list(o)}",
            )
    if any(n > 20 for n in p.estimation.discretisation):
        points = math.prod(p.estimation.discretisation)
        r.fail(
            "estimation.discretisation",
            "'estimation.discretisation' takes at most 20 points per axis (4 x 4 x 2 is usual); "
            f"got {list(p.estimation.discretisation)}: {points:,} points per block, "
            f"{points * 24 / 2**30:,.1f} GiB for their offsets alone",
        )
    if any(n > 50 for n in p.grid.subcells):
        r.fail(
            "grid.subcells",
            f"'grid.subcells' takes at most 50 per axis; got {list(p.grid.subcells)}",
        )
    need = grid_memory_bytes(p)
    have = _physical_memory()
    if need > 0.5 * have:
        r.fail(
            "grid.shape",
            f"a grid of {math.prod(p.grid.shape):,} blocks needs about {need / 2**30:,.1f} GiB, "
            f"more than half of this machine's {have / 2**30:,.1f} GiB; use larger blocks or a "
            "smaller grid",
        )
    cut = list(p.report.cutoffs)
    if not cut:
        r.fail(
            "report.cutoffs", "'report.cutoffs' needs at least one cut-off grade, e.g. [0.0, 0.5]"
        )
    if cut != sorted(cut) or len(set(cut)) != len(cut) or any(c < 0 for c in cut):
        r.fail(
            "report.cutoffs",
            f"'report.cutoffs' must be non-negative and strictly increasing; got {cut}",
        )
    lo, hi, n = p.declustering.cell_sizes
    if not (0 < lo < hi and n >= 2):
        r.fail(
            "declustering.cell_sizes",
            "'declustering.cell_sizes' is [smallest, largest, count] with 0 < smallest < largest, count >= 2",
        )
    for key, spec in p.variogram.items():
        if spec.nugget < 0:
            r.fail(f"variogram.{key}.nugget", "nugget must be >= 0")
        for j, s in enumerate(spec.structures):
            positive(f"variogram.{key}.structures[{j}].ranges", s.ranges)
            positive(f"variogram.{key}.structures[{j}].sill", [s.sill])


def load_project(path: str | Path) -> Project:
    """Read and check a project file.

    Parameters
    ----------
    path : str or Path
        The TOML project file.

    Returns
    -------
    Project

    Raises
    ------
    InputError
        Unreadable file, bad TOML, unknown keys, wrong types or values, missing data files.
    """
    path = Path(path).resolve()
    r = _Reader(path)
    try:
        raw = tomllib.loads(path.read_text(encoding="utf-8"))
    except FileNotFoundError:
        raise InputError([Problem(str(path), None, None, None, "project file not found")]) from None
    except UnicodeDecodeError as exc:
        raise InputError(
            [Problem(str(path), None, None, None, f"not UTF-8 text ({exc.reason})")]
        ) from None
    except tomllib.TOMLDecodeError as exc:
        line = getattr(exc, "lineno", None)
        if line is None:  # Python < 3.14 gives the line only in the message
            found = re.search(r"line (\d+)", str(exc))
            line = int(found.group(1)) if found else None
        raise InputError([Problem(str(path), line, None, None, f"not valid TOML: {exc}")]) from None
    # [variogram] nests models as variogram.<domain>.<grade>; flatten to "domain.grade".
    models = raw.get("variogram", {})
    if isinstance(models, dict):
        flat = {}
        for dom, per_grade in models.items():
            if isinstance(per_grade, dict) and "nugget" not in per_grade:
                for g, spec in per_grade.items():
                    flat[f"{dom}.{g}"] = spec
            else:
                flat[dom] = per_grade
        raw = {**raw, "variogram": flat}
    project = r.build(Project, raw, "")
    project = dataclasses.replace(
        project,
        source=path,
        domains=tuple(dataclasses.replace(d, code=d.code or d.name) for d in project.domains),
    )
    _check_values(project, r)
    missing = [
        (k, p)
        for k, p in [
            ("data.collars", project.data.collars),
            ("data.surveys", project.data.surveys),
            ("data.intervals", project.data.intervals),
            ("grid.topography", project.grid.topography),
            ("truth", project.truth),
        ]
        + [(f"domains.{d.name}.solid", d.solid) for d in project.domains]
        if p is not None and not p.is_file()
    ]
    if missing:
        raise InputError(
            [Problem(str(path), None, None, k, f"file not found: {p}") for k, p in missing]
        )
    return project


def resolved(project: Project) -> dict:
    """The full configuration, defaults included, as plain JSON-ready values."""

    def plain(v):
        if dataclasses.is_dataclass(v):
            return {f.name: plain(getattr(v, f.name)) for f in dataclasses.fields(v)}
        if isinstance(v, dict):
            return {k: plain(x) for k, x in v.items()}
        if isinstance(v, (list, tuple)):
            return [plain(x) for x in v]
        if isinstance(v, Path):
            return str(v)
        return v

    return plain(project)
