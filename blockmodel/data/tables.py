"""Reading the drillhole tables as text and turning their cells into numbers: encoding,
delimiter and header checked; every number strict (plain decimals only) and within the
range its field can hold; grades below detection and missing values counted."""

from __future__ import annotations

import csv
import io
import re
from pathlib import Path

import numpy as np
import pandas as pd

from blockmodel.config.sections import DataFiles
from blockmodel.errors import InputError, Problem

__all__ = [
    "COORDINATE_LIMIT",
    "DEPTH_LIMIT",
    "GRADE_LIMITS",
    "parse_grades",
    "parse_number",
    "parse_numbers",
    "read_table",
]


def read_table(path: Path, required: dict[str, str]) -> pd.DataFrame:
    """Read a CSV as text, checking encoding, delimiter and header.

    Parameters
    ----------
    path : Path
    required : dict
        Meaning -> column name expected in the header.

    Returns
    -------
    DataFrame of str (blank cells are ""), with a ``_line`` column (file line number).
    """
    name = str(path)
    try:
        raw = path.read_bytes()
    except OSError as exc:
        raise InputError(
            [Problem(name, None, None, None, f"cannot read file: {exc.strerror}")]
        ) from None
    try:
        text = raw.decode("utf-8-sig")
    except UnicodeDecodeError as exc:
        line = raw[: exc.start].count(b"\n") + 1
        raise InputError(
            [Problem(name, line, None, None, "not UTF-8 text (save the file as UTF-8 CSV)")]
        ) from None
    if not text.strip():
        raise InputError([Problem(name, None, None, None, "file is empty")])
    # line endings of any system: CRLF, LF, or a bare CR
    rows = list(csv.reader(io.StringIO(text.replace("\r\n", "\n").replace("\r", "\n"))))
    header = [h.strip() for h in rows[0]]
    if len(header) == 1 and any(sep in header[0] for sep in ";\t|"):
        raise InputError(
            [
                Problem(
                    name,
                    1,
                    None,
                    None,
                    "columns are not separated by commas (found ';', tab or '|'); save as comma-separated CSV",
                )
            ]
        )
    dupes = sorted({h for h in header if header.count(h) > 1})
    if dupes:
        raise InputError(
            [
                Problem(name, 1, None, h, f"column '{h}' appears more than once in the header")
                for h in dupes
            ]
        )
    absent = [(meaning, col) for meaning, col in required.items() if col not in header]
    if absent:
        raise InputError(
            [
                Problem(
                    name,
                    1,
                    None,
                    col,
                    f"missing column '{col}' ({meaning}); header has: {', '.join(header)}",
                )
                for meaning, col in absent
            ]
        )
    body = rows[1:]
    hole_at = header.index(required["hole id"]) if "hole id" in required else None
    lines = []
    records = []
    for i, r in enumerate(body, start=2):
        if not any(c.strip() for c in r):
            continue
        if len(r) != len(header):
            hole = r[hole_at].strip() if hole_at is not None and hole_at < len(r) else None
            message = f"row has {len(r)} fields, header has {len(header)}"
            raise InputError([Problem(name, i, hole, None, message)])
        records.append([c.strip() for c in r])
        lines.append(i)
    if not records:
        raise InputError([Problem(name, None, None, None, "file has a header but no rows")])
    table = pd.DataFrame(records, columns=header, dtype=object)
    table["_line"] = lines
    return table


# A plain decimal number as drill logs write it: no thousands separators or underscores
# (Python would read "1_000" as 1000), no "inf" or "nan".
_NUMBER = re.compile(r"[+-]?(\d+\.?\d*|\.\d+)([eE][+-]?\d+)?")

# Largest magnitudes that can be real (metres): projected northings reach 1e7; the deepest
# drillholes are about 12 km.
COORDINATE_LIMIT = 1e8
DEPTH_LIMIT = 20_000.0


def parse_number(text: str) -> float | None:
    """The value of a plain decimal number, or None when the text is not one."""
    if not _NUMBER.fullmatch(text):
        return None
    value = float(text)
    return value if np.isfinite(value) else None


def parse_numbers(
    table: pd.DataFrame,
    col: str,
    file: str,
    problems: list[Problem],
    hole_col: str,
    *,
    allow_blank: bool = False,
    low: float = -np.inf,
    high: float = np.inf,
) -> np.ndarray:
    """Column ``col`` of a table read by :func:`read_table` as (n,) float64; a problem is
    appended (naming ``file``, the line, the hole and ``col``) for a blank, a non-number or
    a value outside [low, high], and NaN stands in the result where one was found."""
    out = np.full(len(table), np.nan)
    for n, (v, line, hole) in enumerate(
        zip(table[col].astype(str), table["_line"], table[hole_col], strict=True)
    ):
        if v == "":
            if not allow_blank:
                problems.append(Problem(file, int(line), hole, col, "missing value"))
            continue
        value = parse_number(v)
        if value is None:
            hint = " (write numbers without separators)" if "_" in v or "," in v else ""
            problems.append(Problem(file, int(line), hole, col, f"not a number: {v!r}{hint}"))
        elif not low <= value <= high:
            problems.append(
                Problem(
                    file,
                    int(line),
                    hole,
                    col,
                    f"{v} is outside the possible range [{low:g}, {high:g}]",
                )
            )
        else:
            out[n] = value
    return out


# Grades above these are more metal than rock: 100 % in each unit.
GRADE_LIMITS = {"%": 100.0, "g/t": 1e6, "ppm": 1e6, "ppb": 1e9}


def parse_grades(
    table: pd.DataFrame,
    col: str,
    file: str,
    data: DataFiles,
    problems: list[Problem],
    hole_col: str,
) -> tuple[np.ndarray, int, int]:
    """Grade column ``col`` as (n,) float64 in its unit: ``<limit`` (below detection)
    becomes ``data.below_detection_factor`` times the limit; blanks and
    ``data.missing_values`` are NaN; negative grades and grades above the whole rock
    (:data:`GRADE_LIMITS`) are problems.  Returns the values and the counts of
    below-detection and missing values."""
    unit = data.grades[col]
    grade_limit = GRADE_LIMITS[unit]
    text = table[col].astype(str)
    out = np.full(len(text), np.nan)
    below = 0
    missing = 0
    sentinels = set(data.missing_values)
    for n, (t, line, hole) in enumerate(zip(text, table["_line"], table[hole_col], strict=True)):
        if t == "":
            missing += 1
            continue
        if t.startswith("<"):
            limit = parse_number(t[1:].strip())
            if limit is None or not 0 <= limit <= grade_limit:
                problems.append(
                    Problem(file, int(line), hole, col, f"not a detection limit: {t!r}")
                )
                continue
            out[n] = limit * data.below_detection_factor
            below += 1
            continue
        v = parse_number(t)
        if v is None:
            hint = (
                "; leave the cell blank for a missing value"
                if t.lower() in ("nan", "na", "n/a", "null", "none", "-")
                else ""
            )
            problems.append(Problem(file, int(line), hole, col, f"not a number: {t!r}{hint}"))
        elif v in sentinels:
            missing += 1
        elif v < 0:
            problems.append(
                Problem(
                    file,
                    int(line),
                    hole,
                    col,
                    f"negative grade {t} (if it marks a missing value, add {v:g} to "
                    "data.missing_values)",
                )
            )
        elif v > grade_limit:
            problems.append(
                Problem(
                    file,
                    int(line),
                    hole,
                    col,
                    f"grade {t} is more than the whole rock ({grade_limit:g} {unit})",
                )
            )
        else:
            out[n] = v
    return out, below, missing
