"""The project file: TOML parsed once into frozen dataclasses.

Unknown keys are errors naming the key, its section and the closest valid key; wrong
types and out-of-range values are errors naming the key.  Paths resolve relative to the
project file.  :func:`resolved` gives the full configuration, defaults included, for the
run manifest.
"""

from __future__ import annotations

import dataclasses
import math
import os
import re
import tomllib
from dataclasses import dataclass
from pathlib import Path

from blockmodel.config.data_files import metal_units
from blockmodel.config.reader import Reader
from blockmodel.config.schema import setting
from blockmodel.config.sections import (
    CappingRule,
    Classification,
    Compositing,
    DataFiles,
    Declustering,
    Domain,
    Estimation,
    Grid,
    ModelSpec,
    Report,
    SearchPass,
    Simulation,
    Validation,
    Variography,
)
from blockmodel.errors import InputError, Problem

__all__ = ["Project", "grid_memory_bytes", "load_project", "relative", "resolved"]


@dataclass(frozen=True)
class Project:
    """A whole project file."""

    name: str = setting(doc="the project's name, shown in reports")
    data: DataFiles = setting(doc="input tables")
    domains: tuple[Domain, ...] = setting(doc="geological domains, in priority order")
    grid: Grid = setting(doc="the block grid")
    report: Report = setting(doc="outputs")
    compositing: Compositing = setting(doc="compositing", factory=Compositing)
    capping: tuple[CappingRule, ...] = setting((), doc="top cuts")
    declustering: Declustering = setting(doc="declustering", factory=Declustering)
    variography: Variography = setting(doc="variography", factory=Variography)
    variogram: dict[str, ModelSpec] = setting(
        doc="variogram models given by the user, one per domain and grade",
        entry="DOMAIN.GRADE",
        factory=dict,
    )
    search: tuple[SearchPass, ...] = setting((), doc="search passes, tried in order")
    estimation: Estimation = setting(doc="estimation", factory=Estimation)
    validation: Validation = setting(doc="validation", factory=Validation)
    classification: Classification = setting(doc="classification", factory=Classification)
    simulation: Simulation = setting(doc="conditional simulation", factory=Simulation)
    truth: Path | None = setting(None, doc="true block grades (invented deposits only)")
    source: Path = Path("project.toml")

    @property
    def grades(self) -> list[str]:
        """The grade columns, in the project's order (the first drives classification)."""
        return list(self.data.grades)

    def passes_for(self, domain: str) -> tuple[SearchPass, ...]:
        """The search passes of a domain: its own, or the project's."""
        return self.domain(domain).search or self.search

    def declustering_for(self, domain: str) -> Declustering:
        """The declustering of a domain: its own, or the project's."""
        return self.domain(domain).declustering or self.declustering

    def statement_cutoff(self, domain: str, cutoffs=None) -> float:
        """The statement's reporting cut-off of ``domain``: its own, or the lowest of the
        report cut-offs (``cutoffs``, default the project's) above zero (zero when none)."""
        if domain in self.report.statement_cutoffs:
            return self.report.statement_cutoffs[domain]
        cutoffs = self.report.cutoffs if cutoffs is None else cutoffs
        return min((c for c in cutoffs if c > 0), default=0.0)

    def metal_units(self, grade: str) -> list[tuple[str, float]]:
        """(unit, factor) pairs of ``grade``'s metal (``metal = tonnes x grade x factor``):
        the unit of ``report.metal_units``, or those of its grade unit
        (:func:`~blockmodel.config.data_files.metal_units`)."""
        return metal_units(self.data.grades[grade], self.report.metal_units.get(grade))

    def domain(self, name: str) -> Domain:
        """The domain called ``name``."""
        return next(d for d in self.domains if d.name == name)


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


def _check_values(p: Project, r: Reader) -> None:
    """Rules that tie settings together (each setting's own bounds and choices are
    checked as it is read, from its declaration)."""
    if not p.data.grades:
        r.fail("data.grades", 'name at least one grade column, e.g. grades = { au = "g/t" }')
    tables = {"collars": p.data.collars, "surveys": p.data.surveys, "intervals": p.data.intervals}
    given = [k for k, v in tables.items() if v is not None]
    if given and len(given) < 3:
        absent = [k for k in tables if k not in given]
        r.fail(
            f"data.{absent[0]}",
            "drillholes need all three tables (collars, surveys and intervals); "
            f"missing: {', '.join('data.' + k for k in absent)}",
        )
    if not given and p.data.points is None:
        r.fail(
            "data",
            "give the drillhole tables (data.collars, data.surveys, data.intervals), "
            "point samples (data.points), or both",
        )
    if p.data.density and not given:
        r.fail("data.density", "data.density is a column of the intervals table; give them")
    tol = p.variography.lag_tolerance
    if tol is not None and not tol <= p.variography.lag / 2:
        r.fail("variography.lag_tolerance", "'variography.lag_tolerance' must lie in (0, lag / 2]")
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
        if d.density_from_composites and not p.data.density:
            r.fail(
                f"domains[{i}].density_from_composites", "needs data.density, the density column"
            )
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
    searches = [(f"search[{i}]", s) for i, s in enumerate(p.search)]
    searches += [
        (f"domains[{n}].search[{i}]", s)
        for n, d in enumerate(p.domains)
        for i, s in enumerate(d.search)
    ]
    for key, s in searches:
        if not s.min_samples <= s.max_samples:
            r.fail(key, "need 1 <= min_samples <= max_samples")
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
    if cut != sorted(cut) or len(set(cut)) != len(cut):
        r.fail(
            "report.cutoffs",
            f"'report.cutoffs' must be non-negative and strictly increasing; got {cut}",
        )
    for name in p.report.statement_cutoffs:
        if name not in names:
            r.fail(
                f"report.statement_cutoffs.{name}",
                f"unknown domain '{name}'; domains are {', '.join(names)}",
            )
    for name in p.report.metal_units:
        if name not in p.data.grades:
            r.fail(
                f"report.metal_units.{name}",
                f"unknown grade '{name}'; grades are {', '.join(p.data.grades)}",
            )
    for setting_name in ("maximum", "models", "local_mean_window"):
        for key in getattr(p.simulation, setting_name):
            domain, _, grade = key.partition(".")
            if domain not in names or grade not in p.data.grades:
                r.fail(
                    f"simulation.{setting_name}.{key}",
                    f"'{key}' names no domain and grade; use DOMAIN.GRADE, e.g. "
                    f"'{names[0]}.{next(iter(p.data.grades), 'au')}'",
                )
    for key, spec in p.simulation.models.items():
        total = spec.nugget + sum(st.sill for st in spec.structures)
        if not spec.structures or abs(total - 1.0) > 0.01:
            r.fail(
                f"simulation.models.{key}",
                "a normal-score model needs at least one structure, and its nugget and "
                f"sills must add up to 1 (the normal scores' variance); they add up to {total:g}",
            )
    unit = p.simulation.block_size
    if unit is not None:
        parts = [b / u for b, u in zip(p.grid.block_size, unit, strict=True)]
        if any(abs(x - round(x)) > 1e-6 or round(x) < 1 for x in parts):
            r.fail(
                "simulation.block_size",
                "each side of the selective mining unit must divide the grid's block "
                f"({' x '.join(f'{b:g}' for b in p.grid.block_size)} m) a whole number of "
                f"times; got {' x '.join(f'{u:g}' for u in unit)} m",
            )
    volumes = [v.name for v in p.simulation.volumes]
    for i, v in enumerate(p.simulation.volumes):
        key = f"simulation.volumes[{i}]"
        if v.name.strip().lower() == "all" or not v.name.strip():
            r.fail(f"{key}.name", f"volume name {v.name!r} is not allowed")
        if volumes.count(v.name) > 1:
            r.fail(f"{key}.name", f"volume names must be unique; '{v.name}' is repeated")
        if not all(a < b for a, b in zip(v.low, v.high, strict=True)):
            r.fail(
                f"{key}.high",
                f"each side of 'high' must exceed 'low'; got low {list(v.low)}, "
                f"high {list(v.high)}",
            )
    own = [(f"domains[{n}].", d.declustering) for n, d in enumerate(p.domains) if d.declustering]
    for where, dc in [("", p.declustering), *own]:
        sweep = dc.cell_sizes
        if not sweep.smallest < sweep.largest:
            r.fail(
                f"{where}declustering.cell_sizes",
                f"'{where}declustering.cell_sizes' needs smallest < largest; "
                f"got smallest {sweep.smallest:g}, largest {sweep.largest:g}",
            )


def _own_declustering(project: Project, domain: Domain, raw: dict) -> Declustering | None:
    """A domain's own declustering: the project's with the keys the domain's table gives
    (``raw``, as read) replaced; None when it gives none."""
    if domain.declustering is None:
        return None
    given = {k: getattr(domain.declustering, k) for k in raw["declustering"]}
    return dataclasses.replace(project.declustering, **given)


def _flat_models(models):
    """Models nested as ``{domain: {grade: model}}`` keyed ``"domain.grade"``; anything
    else is left for the reader to report."""
    if not isinstance(models, dict):
        return models
    flat = {}
    for dom, per_grade in models.items():
        if isinstance(per_grade, dict) and "nugget" not in per_grade:
            for g, spec in per_grade.items():
                flat[f"{dom}.{g}"] = spec
        else:
            flat[dom] = per_grade
    return flat


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
    r = Reader(path)
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
    # [variogram] and [simulation.models] nest models as <domain>.<grade> (or one quoted
    # "domain.grade" key); flatten to "domain.grade".
    raw = {**raw, "variogram": _flat_models(raw.get("variogram", {}))}
    if isinstance(raw.get("simulation"), dict) and "models" in raw["simulation"]:
        sim = raw["simulation"]
        raw["simulation"] = {**sim, "models": _flat_models(sim["models"])}
    project = r.build(Project, raw, "")
    project = dataclasses.replace(
        project,
        source=path,
        domains=tuple(
            dataclasses.replace(
                d, code=d.code or d.name, declustering=_own_declustering(project, d, given)
            )
            for d, given in zip(project.domains, raw.get("domains", []), strict=True)
        ),
    )
    _check_values(project, r)
    missing = [
        (k, p)
        for k, p in [
            ("data.collars", project.data.collars),
            ("data.surveys", project.data.surveys),
            ("data.intervals", project.data.intervals),
            ("data.points", project.data.points),
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


def relative(path, project: Project) -> str:
    """``path`` as written relative to the project file's folder (``/`` separators), so a
    report names files the same way on every machine."""
    return Path(os.path.relpath(Path(path), project.source.parent)).as_posix()


def resolved(project: Project) -> dict:
    """The full configuration, defaults included, as plain JSON-ready values; paths
    relative to the project file's folder."""

    def plain(v):
        if dataclasses.is_dataclass(v):
            return {f.name: plain(getattr(v, f.name)) for f in dataclasses.fields(v)}
        if isinstance(v, dict):
            return {k: plain(x) for k, x in v.items()}
        if isinstance(v, (list, tuple)):
            return [plain(x) for x in v]
        if isinstance(v, Path):
            return relative(v, project)
        return v

    return plain(project)
