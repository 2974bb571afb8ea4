"""A family of invented test deposits with known truth, generated from seeds.

Each deposit is a fine grid of true grades (2.5 m cells) in a main domain and waste, made
from a Gaussian random field (spectral simulation) with an anisotropy that follows the
body, turned lognormal; drillholes sample it with assay noise.  Written to a folder as CSV
tables, closed PLY solids (where the deposit has them), a topography (where it has one),
the true block grades and a project file asking for automatic variography (no orientation
and no model given).

- ``pipe``: a steep pipe plunging 75° toward 030, copper grades in %.
- ``seam``: a flat-lying stratabound seam, zinc in ppm, other column names, no solids
  (domains placed from the interval codes), vertical holes every 25 m.
- ``lode``: a lode dipping 50° toward 100 with a high-grade shoot plunging within it, gold
  in g/t, cut by a topography surface; its solid ends where the drilling ends, as an
  interpreted solid does.

A deposit is fit to test an estimator only if its drilling represents its truth: the test
asserts that the written assays' mean is within 3 % of the true mean before the run (seed 2
of the seam and of the lode miss it, by +3.3 % and −3.3 %).

All names, places and numbers are invented.
"""

from __future__ import annotations

from dataclasses import dataclass
from pathlib import Path

import numpy as np
import pandas as pd

from blockmodel.data.desurvey import direction, positions_along_hole
from blockmodel.estimation.orientation import Orientation
from blockmodel.model.solids import (
    Lattice,
    Surface,
    column_crossings,
    grid_triangles,
    points_inside,
    write_ply,
)
from blockmodel.simulation.spectral import simulate_gaussian
from blockmodel.variography.models import Structure, VariogramModel

CELL = 2.5
BLOCK = (10.0, 10.0, 5.0)
ASSAY_NOISE = 0.3  # log standard deviation of sampling and assay error


@dataclass
class Spec:
    name: str
    grade: str
    unit: str
    origin: tuple[float, float, float]
    shape: tuple[int, int, int]  # blocks
    model: VariogramModel  # of the Gaussian field
    mean: float  # main domain, grade units
    sigma: float  # log standard deviation
    waste: float
    columns: dict[str, str]
    solid: Surface | None
    topography: Surface | None
    collars: np.ndarray  # (h, 2) x, y
    hole_azimuth: float
    hole_dip: float
    hole_depth: float
    spacing: float  # between holes, metres


def _tube(base, axis, length, radius, sides=24, rings=24) -> Surface:
    """A closed cylinder around the line from ``base`` along unit ``axis``."""
    axis = np.asarray(axis, float) / np.linalg.norm(axis)
    a = np.cross(axis, [0.0, 0.0, 1.0] if abs(axis[2]) < 0.9 else [1.0, 0.0, 0.0])
    a /= np.linalg.norm(a)
    b = np.cross(axis, a)
    t = np.linspace(0.0, length, rings)
    phi = 2 * np.pi * np.arange(sides) / sides
    ring = radius * (np.cos(phi)[:, None] * a + np.sin(phi)[:, None] * b)
    verts = (np.asarray(base) + t[:, None, None] * axis + ring[None]).reshape(-1, 3)
    tris = []
    for r in range(rings - 1):
        for s in range(sides):
            p, q = r * sides + s, r * sides + (s + 1) % sides
            tris += [[p, q, q + sides], [p, q + sides, p + sides]]
    bottom, top = len(verts), len(verts) + 1
    verts = np.vstack([verts, base, np.asarray(base) + length * axis])
    last = (rings - 1) * sides
    for s in range(sides):
        tris.append([bottom, (s + 1) % sides, s])
        tris.append([top, last + s, last + (s + 1) % sides])
    return Surface(verts, np.asarray(tris, dtype=np.int64))


def _slab(centre, strike, dip, extent_u, extent_v, thickness, step=10.0) -> Surface:
    """A closed tabular body: two sheets ``thickness`` apart around the plane through
    ``centre`` striking ``strike`` and dipping ``dip`` (degrees) to the right of strike."""
    s = direction([strike], [0.0])[0]
    d = direction([strike + 90.0], [-dip])[0]
    n = np.cross(d, s)
    us = np.arange(extent_u[0], extent_u[1] + 1e-9, step)
    vs = np.arange(extent_v[0], extent_v[1] + 1e-9, step)
    U, V = np.meshgrid(us, vs, indexing="ij")
    wave = 2.0 * np.sin(U / 60.0) * np.cos(V / 45.0)

    def sheet(offset):
        p = np.asarray(centre) + U[..., None] * s + V[..., None] * d
        return (p + (wave + offset)[..., None] * n).reshape(-1, 3)

    nu, nv = U.shape
    verts = np.vstack([sheet(thickness / 2), sheet(-thickness / 2)])
    tri = grid_triangles(nu, nv)
    off = nu * nv
    tris = [tri, tri[:, [0, 2, 1]] + off]
    idx = np.arange(nu * nv).reshape(nu, nv)
    ring = np.concatenate([idx[:, 0], idx[-1, 1:], idx[-2::-1, -1], idx[0, -2:0:-1]])
    r0, r1 = ring, np.roll(ring, -1)
    tris += [np.column_stack([r0, r1, r1 + off]), np.column_stack([r0, r1 + off, r0 + off])]
    return Surface(verts, np.vstack(tris).astype(np.int64))


def _surface_grid(origin, size, height, step=10.0) -> Surface:
    xs = origin[0] - 20 + np.arange(0.0, size[0] + 40 + 1e-9, step)
    ys = origin[1] - 20 + np.arange(0.0, size[1] + 40 + 1e-9, step)
    X, Y = np.meshgrid(xs, ys, indexing="ij")
    verts = np.column_stack([X.ravel(), Y.ravel(), height(X, Y).ravel()])
    return Surface(verts, grid_triangles(*X.shape))


def _holes(origin, size, spacing, rng):
    xs = origin[0] + np.arange(spacing / 2, size[0], spacing)
    ys = origin[1] + np.arange(spacing / 2, size[1], spacing)
    X, Y = np.meshgrid(xs, ys, indexing="ij")
    return np.column_stack([X.ravel(), Y.ravel()]) + rng.normal(0, 1.5, (X.size, 2))


def spec(name: str, seed: int) -> Spec:
    rng = np.random.default_rng(seed)
    if name == "pipe":
        origin, shape = (700_000.0, 6_400_000.0, 0.0), (16, 16, 32)
        size = np.asarray(shape) * BLOCK
        o = Orientation(30.0, 75.0, 0.0)
        axis = o.axes()[0]  # plunging: pointing down
        # the pipe's axis passes through the centre of the grid; its ends stay inside it
        reach = (size[2] / 2 - 12.0) / abs(axis[2])
        top = np.asarray(origin) + size / 2 - axis * reach
        solid = _tube(top, axis, 2 * reach, 25.0)
        model = VariogramModel(0.1, [Structure("spherical", 0.9, (90.0, 35.0, 30.0), o)])
        return Spec(
            "pipe", "cu", "%", origin, shape, model, 1.2, 0.6, 0.05,
            {}, solid, None, _holes(origin, size[:2], 16.0, rng), 0.0, -90.0, size[2], 16.0,
        )  # fmt: skip
    if name == "seam":
        origin, shape = (455_000.0, 3_210_000.0, 100.0), (24, 24, 10)
        size = np.asarray(shape) * BLOCK
        o = Orientation(60.0, 0.0, 0.0)
        model = VariogramModel(0.1, [Structure("spherical", 0.9, (150.0, 90.0, 6.0), o)])
        columns = {
            "hole": "HoleID", "x": "East", "y": "North", "z": "RL", "depth": "TotalDepth",
            "survey_depth": "At", "azimuth": "Az", "dip": "Incl", "depth_from": "From",
            "depth_to": "To", "domain": "Lith",
        }  # fmt: skip
        return Spec(
            "seam", "zn", "ppm", origin, shape, model, 9000.0, 0.7, 300.0,
            columns, None, None, _holes(origin, size[:2], 25.0, rng), 0.0, -90.0, size[2], 25.0,
        )  # fmt: skip
    if name == "lode":
        origin, shape = (281_000.0, 5_120_000.0, 200.0), (24, 24, 30)
        size = np.asarray(shape) * BLOCK
        o = Orientation(10.0, 30.0, 50.0)  # major plunging 30° within the lode plane
        model = VariogramModel(0.1, [Structure("spherical", 0.9, (100.0, 50.0, 10.0), o)])
        centre = np.asarray(origin) + size / 2

        def height(x, y):
            return origin[2] + size[2] - 12.0 + 8.0 * np.sin((x - origin[0]) / 50.0)

        # the lode's interpretation ends where the drilling ends: the deepest holes cross
        # it 50-75 m down dip of the centre, so the solid stops at 60 m
        solid = _slab(centre, 10.0, 50.0, (-140.0, 140.0), (-130.0, 60.0), 18.0)
        topo = _surface_grid(origin, size, height)
        return Spec(
            "lode", "au", "g/t", origin, shape, model, 2.0, 0.8, 0.02,
            {}, solid, topo, _holes(origin, size[:2], 20.0, rng), 280.0, -55.0, 260.0, 20.0,
        )  # fmt: skip
    raise ValueError(name)


@dataclass
class Truth:
    grades: np.ndarray  # fine grid, NaN in air
    main: np.ndarray  # fine grid bool: inside the main domain (and below topography)
    blocks: pd.DataFrame  # x, y, z, domain, proportion, {grade}_true


def simulate(sp: Spec, seed: int) -> Truth:
    rng = np.random.default_rng(seed)
    factor = tuple(int(round(b / CELL)) for b in BLOCK)
    fine = tuple(n * f for n, f in zip(sp.shape, factor, strict=True))
    origin = np.asarray(sp.origin)
    axes = [origin[a] + (np.arange(fine[a]) + 0.5) * CELL for a in range(3)]
    X, Y, Z = np.meshgrid(*axes, indexing="ij")
    pts = np.column_stack([X.ravel(), Y.ravel(), Z.ravel()])
    if sp.solid is not None:
        lat = Lattice(axes[0][0], CELL, fine[0], axes[1][0], CELL, fine[1])
        cross = column_crossings(sp.solid, lat)
        ii, jj = np.meshgrid(np.arange(fine[0]), np.arange(fine[1]), indexing="ij")
        column = np.repeat((ii + lat.nx * jj).ravel(), fine[2])
        main = points_inside(cross, column, pts[:, 2]).reshape(fine)
    else:  # the seam: 12 m thick, gently undulating, no solid
        mid = sp.origin[2] + 25.0 + 3.0 * np.sin((X - sp.origin[0]) / 70.0)
        main = np.abs(Z - mid) < 6.0
    air = np.zeros(fine, dtype=bool)
    if sp.topography is not None:
        from blockmodel.model.solids import surface_elevation

        lat = Lattice(axes[0][0], CELL, fine[0], axes[1][0], CELL, fine[1])
        top = surface_elevation(sp.topography, lat).reshape(fine[1], fine[0]).T
        air = Z > top[:, :, None]
    main &= ~air
    field = simulate_gaussian(fine, (CELL,) * 3, sp.model, rng)
    mean = np.where(main, sp.mean, sp.waste)
    if sp.name == "lode":  # a high-grade shoot plunging within the lode
        o = Orientation(10.0, 30.0, 50.0).axes()
        rel = pts - (origin + np.asarray(sp.shape) * BLOCK / 2)
        across = np.linalg.norm(rel - np.outer(rel @ o[0], o[0]), axis=1).reshape(fine)
        mean = mean * np.where(main, 1.0 + 1.5 * np.exp(-((across / 30.0) ** 2)), 1.0)
    sigma = np.where(main, sp.sigma, 0.4)
    grades = mean * np.exp(sigma * field - sigma**2 / 2)
    grades[air] = np.nan
    # true block grades of the main domain
    nx, ny, nz = sp.shape
    fx, fy, fz = factor
    m = main.reshape(nx, fx, ny, fy, nz, fz)
    g = np.where(main, np.nan_to_num(grades), 0.0).reshape(nx, fx, ny, fy, nz, fz)
    count = m.sum(axis=(1, 3, 5))
    total = g.sum(axis=(1, 3, 5))
    i, j, k = np.nonzero(count)
    centre = origin + (np.column_stack([i, j, k]) + 0.5) * BLOCK
    blocks = pd.DataFrame(
        {
            "x": centre[:, 0],
            "y": centre[:, 1],
            "z": centre[:, 2],
            "domain": "main",
            "proportion": count[i, j, k] / (fx * fy * fz),
            f"{sp.grade}_true": total[i, j, k] / count[i, j, k],
        }
    )
    return Truth(grades, main, blocks)


def drill(sp: Spec, truth: Truth, seed: int):
    """Collars, surveys and assays (lists of rows) through the truth."""
    rng = np.random.default_rng(seed)
    origin = np.asarray(sp.origin)
    fine = truth.grades.shape
    collars, surveys, assays = [], [], []
    for n, (x, y) in enumerate(sp.collars):
        hole = f"{sp.name[:2].upper()}{n:03d}"
        column = np.floor((np.array([x, y]) - origin[:2]) / CELL).astype(int)
        if np.any(column < 0) or np.any(column >= fine[:2]):
            continue
        col_grades = truth.grades[column[0], column[1]]
        solid_top = np.flatnonzero(np.isfinite(col_grades))
        if len(solid_top) == 0:
            continue
        z = origin[2] + (solid_top[-1] + 1) * CELL
        az = (sp.hole_azimuth + rng.normal(0, 2.0)) % 360.0
        dip = float(np.clip(sp.hole_dip + rng.normal(0, 1.5), -90.0, -30.0))
        collar = np.array([x, y, z])
        collars.append((hole, round(x, 2), round(y, 2), round(z, 2), sp.hole_depth))
        surveys.append((hole, 0.0, round(az, 2), round(dip, 2)))
        surveys.append((hole, sp.hole_depth, round(az, 2), round(dip, 2)))
        step = 0.25
        md = np.arange(step / 2, sp.hole_depth, step)
        pos = positions_along_hole(collar, np.array([0.0]), np.array([az]), np.array([dip]), md)
        cell = np.floor((pos - origin) / CELL).astype(np.int64)
        ok = np.all((cell >= 0) & (cell < fine), axis=1)
        cell = np.clip(cell, 0, np.array(fine) - 1)
        inside = np.where(ok, truth.main[cell[:, 0], cell[:, 1], cell[:, 2]], False)
        value = np.where(ok, truth.grades[cell[:, 0], cell[:, 1], cell[:, 2]], np.nan)
        edges = np.flatnonzero(np.diff(inside.astype(int))) + 1
        for a, b in zip(np.r_[0, edges], np.r_[edges, len(md)], strict=True):
            cuts = np.r_[np.arange(a * step, b * step - 1e-9, 2.0), b * step]
            if len(cuts) > 2 and cuts[-1] - cuts[-2] < 0.5:
                cuts = np.delete(cuts, -2)
            for f, t in zip(cuts[:-1], cuts[1:], strict=True):
                sel = slice(int(round(f / step)), int(round(t / step)))
                v = value[sel]
                if not np.isfinite(v).any():
                    continue
                grade = float(np.nanmean(v)) * np.exp(
                    ASSAY_NOISE * rng.standard_normal() - ASSAY_NOISE**2 / 2
                )
                code = "main" if inside[a] else "waste"
                assays.append((hole, round(f, 2), round(t, 2), f"{grade:.4g}", code))
    return collars, surveys, assays


def write(sp: Spec, truth: Truth, drilling, folder: Path, cutoffs) -> Path:
    """Write the deposit's files and a project asking for automatic variography."""
    folder.mkdir(parents=True, exist_ok=True)
    c = {
        "hole": "hole_id", "x": "x", "y": "y", "z": "z", "depth": "depth",
        "survey_depth": "depth", "azimuth": "azimuth", "dip": "dip",
        "depth_from": "from", "depth_to": "to", "domain": "domain", **sp.columns,
    }  # fmt: skip
    collars, surveys, assays = drilling
    pd.DataFrame(collars, columns=[c["hole"], c["x"], c["y"], c["z"], c["depth"]]).to_csv(
        folder / "collars.csv", index=False
    )
    pd.DataFrame(surveys, columns=[c["hole"], c["survey_depth"], c["azimuth"], c["dip"]]).to_csv(
        folder / "surveys.csv", index=False
    )
    pd.DataFrame(
        assays, columns=[c["hole"], c["depth_from"], c["depth_to"], sp.grade, c["domain"]]
    ).to_csv(folder / "assays.csv", index=False)
    truth.blocks.to_parquet(folder / "truth.parquet", index=False)
    solid = ""
    if sp.solid is not None:
        write_ply(folder / "main.ply", sp.solid)
        solid = 'solid = "main.ply"\n'
    topo = ""
    if sp.topography is not None:
        write_ply(folder / "topography.ply", sp.topography)
        topo = 'topography = "topography.ply"\n'
    columns = "\n".join(f'{k} = "{v}"' for k, v in c.items())
    cut = ", ".join(f"{x:.6g}" for x in cutoffs)
    spacing = sp.spacing
    text = f"""name = "Invented {sp.name} deposit"
truth = "truth.parquet"

[data]
collars = "collars.csv"
surveys = "surveys.csv"
intervals = "assays.csv"
grades = {{ {sp.grade} = "{sp.unit}" }}

[data.columns]
{columns}

[[domains]]
name = "main"
code = "main"
density = 2.7
{solid}
[variography]
lag = {spacing:.1f}
lags = 10
minor_lag = 2.0

[[search]]
ranges = [{3 * spacing:.0f}, {3 * spacing:.0f}, {1.5 * spacing:.0f}]
min_samples = 6
max_samples = 16
max_per_hole = 4

[[search]]
ranges = [{6 * spacing:.0f}, {6 * spacing:.0f}, {3 * spacing:.0f}]
min_samples = 4
max_samples = 16
max_per_hole = 4

[[search]]
ranges = [{12 * spacing:.0f}, {12 * spacing:.0f}, {6 * spacing:.0f}]
min_samples = 2
max_samples = 16

[grid]
origin = [{sp.origin[0]}, {sp.origin[1]}, {sp.origin[2]}]
block_size = [{BLOCK[0]}, {BLOCK[1]}, {BLOCK[2]}]
shape = [{sp.shape[0]}, {sp.shape[1]}, {sp.shape[2]}]
{topo}code_reach = {spacing:.1f}

[estimation]
backend = "serial"

[report]
folder = "report"
cutoffs = [{cut}]
"""
    (folder / "project.toml").write_text(text)
    return folder / "project.toml"


def build(name: str, folder: Path, seed: int = 1) -> tuple[Path, Truth, Spec]:
    """Generate deposit ``name`` into ``folder``; returns the project file, truth and spec."""
    sp = spec(name, seed)
    truth = simulate(sp, seed + 1)
    drilling = drill(sp, truth, seed + 2)
    median = float(np.median(truth.blocks[f"{sp.grade}_true"]))
    cutoffs = sorted({0.0, round(median, 6)})
    return write(sp, truth, drilling, folder, cutoffs), truth, sp


def assay_mean(folder: Path, sp: Spec) -> float:
    """Length-weighted mean grade of the main domain's assay intervals as written."""
    c = {"depth_from": "from", "depth_to": "to", "domain": "domain", **sp.columns}
    a = pd.read_csv(folder / "assays.csv")
    a = a[a[c["domain"]] == "main"]
    length = (a[c["depth_to"]] - a[c["depth_from"]]).to_numpy(float)
    return float(length @ a[sp.grade].to_numpy(float) / length.sum())


def figures(project_file: Path, out: Path, domain: str, truth_file: Path | None = None):
    """The estimate in ``out`` against the truth for ``domain``: the figures of
    :func:`blockmodel.assess.truth.compare_with_truth`, the change-of-support tonnage above the
    median true block grade against the true tonnage there, and the true blocks that were
    not estimated."""
    from blockmodel.assess.truth import compare_with_truth
    from blockmodel.config.project import load_project
    from blockmodel.model.grid import BlockGrid

    project = load_project(project_file)
    grade = project.grades[0]
    grid = BlockGrid(project.grid.origin, project.grid.block_size, project.grid.shape)
    blocks = pd.read_parquet(out / "block_model.parquet")
    truth = pd.read_parquet(truth_file or project_file.parent / "truth.parquet")
    fig = compare_with_truth(blocks, truth, grid, grade, domain)
    support = pd.read_csv(out / "change_of_support.csv")
    support = support[support["domain"] == domain]
    at = support[np.isclose(support["cutoff"], fig["median_cutoff"], rtol=1e-5)].iloc[0]
    fig["support_tonnage_difference_percent"] = 100 * (
        at["tonnes"] / fig["tonnes_above_cutoff_true"] - 1
    )
    own = blocks[(blocks["domain"] == domain) & np.isfinite(blocks[grade])]
    estimated = set(grid.flat_index(own["i"].to_numpy(), own["j"].to_numpy(), own["k"].to_numpy()))
    flat = grid.block_of(truth.loc[truth["domain"] == domain, ["x", "y", "z"]].to_numpy(float))
    fig["true_blocks_not_estimated"] = int(sum(f not in estimated for f in flat))
    return fig
