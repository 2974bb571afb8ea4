"""Writing results as files: tables as CSV or Parquet, the block model as Parquet, CSV
and a VTK image, variogram models as TOML; and reading them back."""

from __future__ import annotations

import hashlib
import re
import tomllib
from pathlib import Path

import pandas as pd

from blockmodel.model.grid import BlockGrid
from blockmodel.variography.models import Structure, VariogramModel

__all__ = ["read_models", "safe_stem", "write_block_model", "write_models", "write_table"]

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
