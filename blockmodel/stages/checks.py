"""Stage 6: checks of the estimate, each a warning in words when something in the block
model cannot be trusted as it stands."""

from __future__ import annotations

import numpy as np
import pandas as pd

from blockmodel.config.project import Project
from blockmodel.stages.composites import Composites
from blockmodel.stages.domain_model import DomainModel

__all__ = ["estimate_warnings", "hole_spacing"]


ABOVE_TOPOGRAPHY = 2.0  # metres a composite may stand above the surface (survey error)


def _above_topography(project, composites) -> list[str]:
    """Holes whose composites rise above the topography (a wrong collar or dip sign)."""
    if project.grid.topography is None or len(composites) == 0:
        return []
    from scipy.interpolate import griddata

    from blockmodel.model.solids import read_surface

    surface = read_surface(project.grid.topography)
    xy = composites[["x", "y"]].to_numpy(float)
    ground = griddata(surface.vertices[:, :2], surface.vertices[:, 2], xy, method="linear")
    height = composites["z"].to_numpy(float) - ground
    above = np.isfinite(height) & (height > ABOVE_TOPOGRAPHY)
    out = []
    for hole in pd.unique(composites["hole"][above]):
        mine = above & (composites["hole"] == hole).to_numpy()
        out.append(
            f"hole {hole}: {int(mine.sum())} composite(s) lie above the topography, up to "
            f"{height[mine].max():.1f} m; check its collar elevation and the sign of its dips"
        )
    return out


EXTRAPOLATED_SHARE = 0.05  # of a domain's tonnes beyond one hole spacing: warn


def hole_spacing(points: np.ndarray, holes: np.ndarray) -> float:
    """The wider spacing between holes: the 90th percentile, over samples, of the distance
    from a sample to the nearest sample of another hole (metres; NaN with fewer than two
    holes).  A regular pattern gives its spacing; infill holes among a wider pattern do
    not shrink it.

    Parameters
    ----------
    points : (n, 3) float64, metres
    holes : (n,) hole ids
    """
    from scipy.spatial import cKDTree

    codes = np.unique(holes, return_inverse=True)[1].ravel()
    if codes.max(initial=0) < 1:
        return float("nan")
    tree = cKDTree(points)
    nearest = np.full(len(points), np.inf)
    k = 8
    todo = np.arange(len(points))
    while len(todo):
        k = min(2 * k, len(points))
        dist, idx = tree.query(points[todo], k=k)
        other = codes[idx] != codes[todo, None]
        found = other.any(axis=1)
        nearest[todo[found]] = dist[found, other[found].argmax(axis=1)]
        todo = todo[~found] if k < len(points) else todo[:0]
    return float(np.percentile(nearest[np.isfinite(nearest)], 90))


def _extrapolation_warnings(composites: pd.DataFrame, estimated: pd.DataFrame) -> list[str]:
    """Domains with more than 5 % of their estimated tonnes farther from every composite
    than the wider spacing between holes (:func:`hole_spacing`); common practice is to
    extrapolate no further than about half the drill spacing beyond the last hole."""
    from scipy.spatial import cKDTree

    out = []
    for name, blocks in estimated.groupby("domain", sort=False):
        own = composites[composites["domain"] == name]
        if own["hole"].nunique() < 2:
            continue
        points = own[["x", "y", "z"]].to_numpy(float)
        spacing = hole_spacing(points, own["hole"].to_numpy())
        dist = cKDTree(points).query(blocks[["x", "y", "z"]].to_numpy(float), workers=-1)[0]
        far = dist > spacing
        share = blocks["tonnes"].to_numpy()[far].sum() / blocks["tonnes"].sum()
        if share > EXTRAPOLATED_SHARE:
            out.append(
                f"{100 * share:.1f} % of the estimated tonnes of domain '{name}' "
                f"({int(far.sum())} blocks) lie farther from every composite than the wider "
                f"spacing between holes ({spacing:.0f} m): extrapolated beyond the drilling; "
                "check the solid's extent and the classification"
            )
    return out


def estimate_warnings(
    project: Project, composites: Composites, domains: DomainModel, blocks: pd.DataFrame
) -> tuple[str, ...]:
    """What the estimate cannot be trusted for, in words for the terminal and the report:
    composites above the topography, solids partly outside the grid, blocks above the
    highest collar without a topography, tonnes extrapolated beyond the drilling, negative
    estimates and blocks left unestimated."""
    comps, grid, shares = composites, domains.grid, domains.solid_shares
    out = _above_topography(project, comps.table)
    primary = project.grades[0]
    for name, share in shares.items():
        if share < 1.0:
            out.append(
                f"{100 * (1 - share):.2f} % of the volume of domain '{name}' lies outside the "
                "block grid and is not in the tonnes"
            )
    estimated = blocks[np.isfinite(blocks[primary])]
    if project.grid.topography is None:
        tops = [comps.holes.collars["z"]]
        if comps.points is not None:
            tops.append(comps.points.table["z"])
        top = float(pd.concat(tops).max())
        above = estimated[estimated["z"] - grid.block_size[2] / 2 > top]
        if len(above):
            out.append(
                f"{len(above)} estimated block(s), {above['tonnes'].sum():,.0f} t, lie wholly above "
                f"the highest collar or sample (z {top:.1f} m) and no topography is given: they "
                "may be air"
            )
    for g in project.grades:
        low = blocks[blocks[g] < 0]
        if len(low):
            out.append(
                f"{len(low)} block estimate(s) of {g} are below zero (lowest "
                f"{low[g].min():.4g} {project.data.grades[g]}, {low['tonnes'].sum():,.0f} t): "
                "negative kriging weights; they count at cut-off 0 and are kept as estimated"
            )
    out += _extrapolation_warnings(comps.table, estimated)
    unestimated = blocks[~np.isfinite(blocks[primary])]
    if len(unestimated):
        out.append(
            f"{len(unestimated)} block(s), {unestimated['tonnes'].sum():,.0f} t, inside the domains "
            f"were not estimated for {primary} (no search pass found enough samples); they "
            "are not in the grade–tonnage tables"
        )
    return tuple(out)
