"""The project file's input tables: which files, which grades, and the user's column names
(each setting declared once with :func:`~blockmodel.config.schema.setting`)."""

from __future__ import annotations

from dataclasses import dataclass
from pathlib import Path

from blockmodel.config.schema import setting

__all__ = [
    "METAL_GRAMS",
    "UNITS",
    "UNIT_GRAMS_PER_TONNE",
    "Columns",
    "DataFiles",
    "PointColumns",
    "metal_units",
]

UNITS = ("g/t", "ppm", "%", "ppb")
UNIT_GRAMS_PER_TONNE = {"g/t": 1.0, "ppm": 1.0, "ppb": 1e-3, "%": 1e4}  # metal at grade 1
# grams in each metal unit: the troy ounce and the pound by their international definitions
METAL_GRAMS = {"troy oz": 31.1034768, "lb": 453.59237, "g": 1.0, "kg": 1e3, "t": 1e6}

_DEFAULT_METAL_UNITS = {
    "g/t": ("troy oz", "kg"),
    "ppm": ("troy oz", "kg"),
    "ppb": ("g",),
    "%": ("t",),
}


def metal_units(grade_unit: str, metal_unit: str | None = None) -> list[tuple[str, float]]:
    """(unit name, factor) pairs: metal = tonnes x grade x factor, in the trade's units.

    Parameters
    ----------
    grade_unit : str
        g/t (and ppm, the same ratio) -> troy ounces and kilograms; ppb -> grams;
        % -> tonnes.
    metal_unit : str, optional
        The one unit wanted instead (``report.metal_units``, e.g. tonnes of a base metal
        whose grade is in ppm): one of troy oz, lb, g, kg, t.
    """
    if grade_unit not in UNIT_GRAMS_PER_TONNE:
        raise ValueError(f"unknown grade unit {grade_unit!r}")
    names = _DEFAULT_METAL_UNITS[grade_unit] if metal_unit is None else (metal_unit,)
    grams = UNIT_GRAMS_PER_TONNE[grade_unit]
    return [(n, grams / METAL_GRAMS[n]) for n in names]


@dataclass(frozen=True)
class Columns:
    """Names of the columns in the input files, mapped to what they mean."""

    hole: str = setting("hole_id", doc="hole identifier (all three tables)")
    x: str = setting("x", doc="collar easting, metres")
    y: str = setting("y", doc="collar northing, metres")
    z: str = setting("z", doc="collar elevation, metres")
    depth: str = setting("depth", doc="hole length in the collars table, metres")
    survey_depth: str = setting("depth", doc="depth of a survey station, metres")
    azimuth: str = setting("azimuth", doc="survey azimuth, degrees clockwise from north")
    dip: str = setting("dip", doc="survey dip, degrees, negative downward")
    depth_from: str = setting("from", doc="start of a sample interval, metres down the hole")
    depth_to: str = setting("to", doc="end of a sample interval, metres down the hole")
    domain: str = setting("domain", doc="geology code of a sample interval")


@dataclass(frozen=True)
class PointColumns:
    """Names of the columns in the point-sample table, mapped to what they mean."""

    sample: str = setting("sample_id", doc="sample identifier, unique in the table")
    line: str = setting(
        "",
        doc="channel, trench or line of each sample: samples of one line count as one hole "
        "in the search's per-hole limit and in cross-validation; none: each sample alone",
    )
    x: str = setting("x", doc="sample easting, metres")
    y: str = setting("y", doc="sample northing, metres")
    z: str = setting("z", doc="sample elevation, metres")
    domain: str = setting("domain", doc="geology code of a sample")
    length: str = setting(
        "", doc="sample length, metres (weighs metal in capping); none: the composite length"
    )


@dataclass(frozen=True)
class DataFiles:
    """The input tables and how to read them: drillholes (collars, surveys and intervals
    together), point samples, or both."""

    grades: dict[str, str] = setting(
        doc='grade columns and their units, e.g. { au = "g/t" }', choices=UNITS
    )
    collars: Path | None = setting(None, doc="collars table (CSV)")
    surveys: Path | None = setting(None, doc="downhole surveys table (CSV)")
    intervals: Path | None = setting(None, doc="sample intervals table with grades and codes (CSV)")
    points: Path | None = setting(
        None,
        doc="point samples (CSV) beside or instead of drillholes: channel, trench, surface "
        "or blast-hole samples with x, y, z, a domain code and the grade columns",
    )
    columns: Columns = setting(doc="your column names", factory=Columns)
    point_columns: PointColumns = setting(
        doc="your column names in the point-sample table", factory=PointColumns
    )
    below_detection_factor: float = setting(
        0.5,
        doc="a value below detection (written negative) becomes this share of the limit",
        low=0.0,
        high=1.0,
        strict_low=True,
    )
    missing_values: tuple[float, ...] = setting(
        (-99.0, -999.0), doc="numbers that mean 'not sampled'"
    )
    density: str = setting("", doc="column of measured density (t/m3) in the intervals, if any")

    @property
    def has_drillholes(self) -> bool:
        """Whether the project has drillhole tables."""
        return self.intervals is not None

    @property
    def samples(self) -> Path:
        """The table that holds the sample codes and grades: the intervals, else the points
        (named in messages about codes and grades)."""
        return self.intervals if self.intervals is not None else self.points
