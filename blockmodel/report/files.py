"""The result files of a run, written in one place and read back: tables as CSV (ten
significant digits) or Parquet, the block model as Parquet, CSV and a VTK image, the
variogram models as TOML.  A later command reads a report folder with :func:`read_run`
instead of recomputing.

============================  =========================================================
file                          what it holds
============================  =========================================================
composites.csv                composites, with their ``declustering_weight``
declustering.csv              per domain and grade: naive and declustered statistics
variogram_models.toml         the model of each domain and grade, as a project file takes it
experimental_variograms.csv   every experimental variogram: domain, grade, direction, lag
normal_scores_D_G.csv         back-transform table (normal-score variography only)
block_model.parquet           the block model (``block_model.csv`` on request)
block_model.vti               the block model as a VTK image (x fastest)
neighbourhood.csv             neighbourhood analysis: per test block and sweep point
cross_validation.csv          per composite left out: true, estimate, error, variance
swaths.csv                    per domain, class (all: every block), axis and slice
change_of_support.csv         discrete Gaussian grade–tonnage curve per domain
grade_tonnage.csv             kriged blocks at each cut-off, per domain and class
statement.csv                 the statement table (unrounded), per grade, domain and class
statement.xlsx                the statement, one sheet per grade, and the grade–tonnage tables
============================  =========================================================
"""

from __future__ import annotations

import hashlib
import re
import tomllib
from dataclasses import dataclass
from pathlib import Path

import pandas as pd

from blockmodel.model.grid import BlockGrid
from blockmodel.variography.models import Structure, VariogramModel

__all__ = [
    "SavedRun",
    "read_models",
    "read_run",
    "read_table",
    "safe_stem",
    "write_block_model",
    "write_grade_tonnage",
    "write_models",
    "write_run_files",
    "write_statement_workbook",
    "write_table",
    "write_variography_files",
]

LABELS = ("domain", "class", "x", "y", "z", "i", "j", "k")


def safe_stem(name: str) -> str:
    """A file-name part for a user's name (domain, grade): letters, digits, ``-`` and ``_``
    only, at most 40 characters; a name that had to change gets a short hash of itself, so
    two names never give the same file."""
    stem = re.sub(r"[^A-Za-z0-9_-]", "_", name)[:40]
    if stem == name:
        return stem
    return f"{stem}-{hashlib.sha1(name.encode('utf-8')).hexdigest()[:8]}"


def write_table(frame: pd.DataFrame, path: Path) -> None:
    """``frame`` as Parquet (by the suffix) or CSV with ten significant digits."""
    if path.suffix == ".parquet":
        frame.to_parquet(path, index=False)
    else:
        frame.to_csv(path, index=False, float_format="%.10g", lineterminator="\n")


def write_block_model(
    blocks: pd.DataFrame, grid: BlockGrid, folder: Path, *, csv: bool = False
) -> pd.DataFrame:
    """``block_model.parquet``, ``block_model.vti`` (cell data, x fastest) and, with
    ``csv``, ``block_model.csv``; returns the table written (working columns dropped)."""
    from blockmodel.report.views import block_image

    out = blocks.drop(columns=[c for c in blocks if c.endswith("_ill_conditioned")])
    write_table(out, folder / "block_model.parquet")
    if csv:
        write_table(out, folder / "block_model.csv")
    numeric = [c for c in out.columns if c not in LABELS]
    block_image(grid, out, numeric + ["class"]).save(str(folder / "block_model.vti"))
    return out


def write_models(variography: dict, path: Path) -> None:
    """The variogram models as TOML, ready to paste into a project file."""
    snippets = [
        f"# {key}: {res.source}\n" + res.model.to_toml(key) for key, res in variography.items()
    ]
    path.write_text("\n".join(snippets), encoding="utf-8")


def read_models(path: Path) -> dict[str, VariogramModel]:
    """The models of a ``variogram_models.toml`` written by :func:`write_models`, by
    ``domain.grade`` key."""
    from blockmodel.estimation.orientation import Orientation

    data = tomllib.loads(Path(path).read_text(encoding="utf-8")).get("variogram", {})
    out = {}
    for domain, grades in data.items():
        for grade, spec in grades.items():
            out[f"{domain}.{grade}"] = VariogramModel(
                spec["nugget"],
                [
                    Structure(
                        s["kind"], s["sill"], tuple(s["ranges"]), Orientation(*s["orientation"])
                    )
                    for s in spec.get("structures", [])
                ],
            )
    return out


def experimental_table(variography: dict) -> pd.DataFrame:
    """Every experimental variogram as rows ``domain, grade, direction, lag, pairs,
    distance, value`` (direction: major, semi, minor or downhole)."""
    frames = []
    for res in variography.values():
        for ev in (*res.directional, res.downhole):
            frames.append(
                pd.DataFrame(
                    {
                        "domain": res.domain,
                        "grade": res.grade,
                        "direction": ev.label,
                        "lag": range(1, len(ev.pairs) + 1),
                        "pairs": ev.pairs,
                        "distance": ev.distance,
                        "value": ev.value,
                    }
                )
            )
    return pd.concat(frames, ignore_index=True)


def write_variography_files(project, declustering, variography: dict, folder: Path) -> None:
    """``declustering.csv``, ``variogram_models.toml``, ``experimental_variograms.csv`` and
    the normal-score tables."""
    write_table(declustering.table(project.grades), folder / "declustering.csv")
    write_models(variography, folder / "variogram_models.toml")
    write_table(experimental_table(variography), folder / "experimental_variograms.csv")
    for key, res in variography.items():
        if res.scores is not None:
            table = pd.DataFrame({"value": res.scores.values, "normal_score": res.scores.scores})
            write_table(table, folder / f"normal_scores_{safe_stem(key.replace('.', '_'))}.csv")


def write_grade_tonnage(
    project, tables: dict[str, pd.DataFrame], statements: dict[str, pd.DataFrame], folder: Path
) -> None:
    """``grade_tonnage.csv`` for the first grade (``grade_tonnage_G.csv`` for the others),
    ``statement.csv`` and the spreadsheet ``statement.xlsx``."""
    for n, (g, gt) in enumerate(tables.items()):
        write_table(gt, folder / ("grade_tonnage.csv" if n == 0 else f"grade_tonnage_{g}.csv"))
    stacked = pd.concat([s.assign(grade_name=g) for g, s in statements.items()], ignore_index=True)
    stacked = stacked[["grade_name", *[c for c in stacked.columns if c != "grade_name"]]]
    write_table(stacked, folder / "statement.csv")
    write_statement_workbook(project, tables, statements, folder / "statement.xlsx")


def write_statement_workbook(
    project, tables: dict[str, pd.DataFrame], statements: dict[str, pd.DataFrame], path: Path
) -> None:
    """One sheet per grade with its statement table (unrounded, units in the headers) and
    one with every grade–tonnage table; openpyxl writes it."""
    with pd.ExcelWriter(path, engine="openpyxl") as book:
        for g, s in statements.items():
            unit = project.data.grades[g]
            sheet = s.rename(
                columns={
                    "cutoff": f"cut-off ({unit})",
                    "tonnes": "tonnes (t)",
                    "grade": f"grade ({unit})",
                }
            )
            sheet.to_excel(book, sheet_name=f"statement {g}"[:31], index=False)
        frames = [gt.assign(grade_name=g) for g, gt in tables.items()]
        pd.concat(frames, ignore_index=True).to_excel(book, sheet_name="grade-tonnage", index=False)


def composites_table(results) -> pd.DataFrame:
    """The composites with their declustering weight, ordered by hole and depth."""
    table = results.composites.table.assign(declustering_weight=results.declustering.weights)
    return table.sort_values(["hole", "from"], kind="stable")


def cross_validation_table(validation) -> pd.DataFrame:
    """Every composite left out and re-estimated, per domain."""
    frames = [
        v.cross_validation.table.assign(domain=name) for name, v in validation.by_domain.items()
    ]
    return pd.concat(frames, ignore_index=True) if frames else pd.DataFrame()


def swaths_table(validation) -> pd.DataFrame:
    """Every swath slice, per domain and axis."""
    frames = [
        t.assign(domain=name, **{"class": "all"}, axis=axis)
        for name, v in validation.by_domain.items()
        for axis, t in v.swaths.items()
    ] + [
        t.assign(domain=name, **{"class": cls}, axis=axis)
        for name, v in validation.by_domain.items()
        for cls, tables in v.class_swaths.items()
        for axis, t in tables.items()
    ]
    return pd.concat(frames, ignore_index=True) if frames else pd.DataFrame()


def write_run_files(results, folder: Path, *, csv: bool = False) -> None:
    """Every result file of a run (the table in this module's docstring)."""
    write_table(composites_table(results), folder / "composites.csv")
    write_variography_files(results.project, results.declustering, results.variography, folder)
    write_block_model(results.blocks, results.domains.grid, folder, csv=csv)
    write_table(results.neighbourhood.table(), folder / "neighbourhood.csv")
    write_table(cross_validation_table(results.validation), folder / "cross_validation.csv")
    write_table(swaths_table(results.validation), folder / "swaths.csv")
    if results.support.by_domain:
        write_table(results.support.table(), folder / "change_of_support.csv")
    write_grade_tonnage(results.project, results.tables, results.statements, folder)


@dataclass(frozen=True)
class SavedRun:
    """The result files of a report folder, read back (see :func:`read_run`)."""

    composites: pd.DataFrame
    declustering: pd.DataFrame
    models: dict[str, VariogramModel]
    experimental: pd.DataFrame
    neighbourhood: pd.DataFrame
    blocks: pd.DataFrame
    cross_validation: pd.DataFrame
    swaths: pd.DataFrame
    support: pd.DataFrame | None
    grade_tonnage: pd.DataFrame


TEXT_COLUMNS = (
    "domain",
    "hole",
    "class",
    "grade",
    "direction",
    "axis",
    "metal_unit",
    "note",
    "grade_name",
    "block",
    "sweep",
    "setting",
)


def read_table(path: Path) -> pd.DataFrame:
    """A CSV written by :func:`write_table`: an empty number is missing, the text columns
    (:data:`TEXT_COLUMNS`) stay text as written (empty, ``NA`` or ``12`` alike)."""
    frame = pd.read_csv(
        path, dtype=dict.fromkeys(TEXT_COLUMNS, str), keep_default_na=False, na_values=[""]
    )
    for c in TEXT_COLUMNS:
        if c in frame:
            frame[c] = frame[c].fillna("")
    return frame


def read_run(folder: Path) -> SavedRun:
    """Read back the result files a run wrote into ``folder``."""
    folder = Path(folder)
    support = folder / "change_of_support.csv"
    return SavedRun(
        composites=read_table(folder / "composites.csv"),
        declustering=read_table(folder / "declustering.csv"),
        models=read_models(folder / "variogram_models.toml"),
        experimental=read_table(folder / "experimental_variograms.csv"),
        neighbourhood=read_table(folder / "neighbourhood.csv"),
        blocks=pd.read_parquet(folder / "block_model.parquet"),
        cross_validation=read_table(folder / "cross_validation.csv"),
        swaths=read_table(folder / "swaths.csv"),
        support=read_table(support) if support.exists() else None,
        grade_tonnage=read_table(folder / "grade_tonnage.csv"),
    )
