"""The invented demo deposit: a gold lode with a plunging high-grade shoot, its true grades
everywhere, and a drilling programme through it.

Scenario (invented): the Tarnwick lode of the Corrie Vale project, held by the fictional
Orrimond Minerals. A tabular lode striking 020 and dipping 55 degrees toward 110,
8 to 25 m thick, with a high-grade shoot plunging within it, a low-grade halo and waste.

Everything is deterministic from the seed.  The truth is used by tests and by the marked
"check against the known truth" section of the demo report, never by the estimator.
"""

from __future__ import annotations

from dataclasses import dataclass
from pathlib import Path

import numpy as np

from blockmodel.data.desurvey import positions_along_hole
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

__all__ = ["DEMO_FILES", "DemoDeposit", "build_demo", "write_demo"]

DEMO_FILES = (
    "collars.csv",
    "surveys.csv",
    "assays.csv",
    "lode.ply",
    "halo.ply",
    "topography.ply",
    "truth_blocks.parquet",
    "project.toml",
)
# the demo's project file ships in the package; a new demo folder reports into itself
PROJECT_REPORT_FOLDER = ('folder = "../reports/demo"', 'folder = "report"')


def demo_project_text() -> str:
    """The demo's project file as ``make-demo`` writes it (report folder inside it)."""
    from importlib.resources import files

    text = files("blockmodel.demo").joinpath("project.toml").read_text(encoding="utf-8")
    old, new = PROJECT_REPORT_FOLDER
    if old not in text:
        raise RuntimeError("the packaged demo project has no report folder line")
    return text.replace(old, new)


SEED = 20261201
ORIGIN = np.array([512000.0, 7034000.0, 900.0])  # minimum corner of the demo block grid
GRID_SHAPE = (40, 50, 60)
BLOCK = (10.0, 10.0, 5.0)
FINE = (2.5, 2.5, 2.5)
CENTRE = ORIGIN + [180.0, 250.0, 200.0]
STRIKE, DIP, DIP_DIRECTION = 20.0, 55.0, 110.0
LODE_ORIENTATION = Orientation(STRIKE, 0.0, DIP)
# Continuity of the Gaussian field: long along strike, shorter down dip, short across.
TRUTH_MODEL = VariogramModel(
    0.0,
    [
        Structure("spherical", 0.5, (90.0, 60.0, 12.0), LODE_ORIENTATION),
        Structure("spherical", 0.5, (250.0, 150.0, 30.0), LODE_ORIENTATION),
    ],
)
DENSITY = {"lode": 2.75, "halo": 2.70, "waste": 2.65}  # t/m3, common practice values
LOGNORMAL = {"lode": 0.8, "halo": 0.7, "waste": 0.5}  # log standard deviations
MEAN = {"lode": 1.5, "shoot": 3.5, "halo": 0.3, "waste": 0.02}  # g/t Au; shoot: added at its axis
ASSAY_NOISE = 0.5  # log standard deviation of sampling and assay error


def _frame():
    s = np.array([np.sin(np.radians(STRIKE)), np.cos(np.radians(STRIKE)), 0.0])
    cd, sd = np.cos(np.radians(DIP)), np.sin(np.radians(DIP))
    d = np.array(
        [cd * np.sin(np.radians(DIP_DIRECTION)), cd * np.cos(np.radians(DIP_DIRECTION)), -sd]
    )
    n = np.cross(d, s)  # points up and toward the hanging wall side
    return s, d, n / np.linalg.norm(n)


def _thickness(u, v):
    return 16.5 + 8.0 * np.sin(u / 85.0) * np.cos(v / 65.0)


def _undulation(u, v):
    return 4.0 * np.sin(u / 120.0 + 0.5) + 3.0 * np.cos(v / 90.0)


def shoot_distance(u, v):
    """Distance (m, in the lode plane, along strike) from the axis of the high-grade shoot,
    which plunges along strike with depth."""
    return np.abs(u - (-40.0 + 0.45 * v))


def in_shoot(u, v):
    """Inside the high-grade shoot (where infill drilling goes)."""
    return shoot_distance(u, v) < 45.0


def topography_elevation(x, y):
    """Elevation (m) of the demo's ground surface at (x, y) (arrays, metres)."""
    xl, yl = x - ORIGIN[0], y - ORIGIN[1]
    return 1182.0 + 8.0 * np.sin(xl / 90.0) + 6.0 * np.cos(yl / 120.0)


def _slab(extent_u, extent_v, extra, step=10.0) -> Surface:
    """Closed surface between footwall and hanging wall of the lode (plus ``extra`` metres)."""
    s, d, n = _frame()
    us = np.arange(extent_u[0], extent_u[1] + 1e-9, step)
    vs = np.arange(extent_v[0], extent_v[1] + 1e-9, step)
    U, V = np.meshgrid(us, vs, indexing="ij")
    half = _thickness(U, V) / 2 + extra
    mid = _undulation(U, V)
    nu, nv = U.shape

    def sheet(offset):
        p = CENTRE + U[..., None] * s + V[..., None] * d + (mid + offset)[..., None] * n
        return p.reshape(-1, 3)

    top, bottom = sheet(half), sheet(-half)
    verts = np.vstack([top, bottom])
    sheet_tris = grid_triangles(nu, nv)
    off = nu * nv
    tris = [sheet_tris, sheet_tris[:, [0, 2, 1]] + off]  # bottom sheet faces the other way
    idx = np.arange(nu * nv).reshape(nu, nv)
    ring = np.concatenate([idx[:, 0], idx[-1, 1:], idx[-2::-1, -1], idx[0, -2:0:-1]])
    r0, r1 = ring, np.roll(ring, -1)
    tris += [np.column_stack([r0, r1, r1 + off]), np.column_stack([r0, r1 + off, r0 + off])]
    return Surface(verts, np.vstack(tris).astype(np.int64))


def lode_surface() -> Surface:
    """The demo lode's closed solid."""
    return _slab((-210.0, 210.0), (-150.0, 250.0), 0.0)


def halo_surface() -> Surface:
    """The closed solid of the low-grade halo around the lode (12 m beyond it)."""
    return _slab((-225.0, 225.0), (-165.0, 265.0), 12.0)


def topography_surface(step=20.0) -> Surface:
    """The demo's ground surface as a triangulated grid (``step`` metres)."""
    xs = ORIGIN[0] + np.arange(-20.0, 420.0 + 1e-9, step)
    ys = ORIGIN[1] + np.arange(-20.0, 520.0 + 1e-9, step)
    X, Y = np.meshgrid(xs, ys, indexing="ij")
    verts = np.column_stack([X.ravel(), Y.ravel(), topography_elevation(X, Y).ravel()])
    nu, nv = X.shape
    return Surface(verts, grid_triangles(nu, nv))


def classify(
    points: np.ndarray, lattice: Lattice, column: np.ndarray, crossings: dict
) -> np.ndarray:
    """Domain code per point: 2 lode, 1 halo, 0 waste (lode has priority)."""
    code = np.zeros(len(points), dtype=np.int8)
    code[points_inside(crossings["halo"], column, points[:, 2])] = 1
    code[points_inside(crossings["lode"], column, points[:, 2])] = 2
    return code


@dataclass
class DemoDeposit:
    """Truth on the fine grid and the drilling through it."""

    grades: np.ndarray  # (nx, ny, nz) g/t on the fine grid, NaN above topography
    domains: np.ndarray  # (nx, ny, nz) int8: 0 waste, 1 halo, 2 lode, -1 air
    collars: list
    surveys: list
    assays: list


def _fine_lattice():
    shape = tuple(int(round(g * b / f)) for g, b, f in zip(GRID_SHAPE, BLOCK, FINE, strict=True))
    lat = Lattice(
        ORIGIN[0] + FINE[0] / 2, FINE[0], shape[0], ORIGIN[1] + FINE[1] / 2, FINE[1], shape[1]
    )
    return shape, lat


def build_demo(seed: int = SEED) -> DemoDeposit:
    """Simulate the truth and drill it. Deterministic from ``seed``."""
    rng = np.random.default_rng(seed)
    shape, lat = _fine_lattice()
    crossings = {
        "lode": column_crossings(lode_surface(), lat),
        "halo": column_crossings(halo_surface(), lat),
    }
    gx = ORIGIN[0] + (np.arange(shape[0]) + 0.5) * FINE[0]
    gy = ORIGIN[1] + (np.arange(shape[1]) + 0.5) * FINE[1]
    gz = ORIGIN[2] + (np.arange(shape[2]) + 0.5) * FINE[2]
    X, Y, Z = np.meshgrid(gx, gy, gz, indexing="ij")
    pts = np.column_stack([X.ravel(), Y.ravel(), Z.ravel()])
    ii, jj = np.meshgrid(np.arange(shape[0]), np.arange(shape[1]), indexing="ij")
    column = np.repeat((ii + lat.nx * jj).ravel(), shape[2])
    domains = classify(pts, lat, column, crossings).reshape(shape)
    domains[Z > topography_elevation(X, Y)] = -1
    field = simulate_gaussian(shape, FINE, TRUTH_MODEL, rng)
    s, d, _ = _frame()
    rel = pts - CENTRE
    enrichment = MEAN["shoot"] * np.exp(-((shoot_distance(rel @ s, rel @ d) / 40.0) ** 2)).reshape(
        shape
    )
    mean = np.select(
        [domains == 2, domains == 1], [MEAN["lode"] + enrichment, MEAN["halo"]], MEAN["waste"]
    )
    sigma = np.select(
        [domains == 2, domains == 1], [LOGNORMAL["lode"], LOGNORMAL["halo"]], LOGNORMAL["waste"]
    )
    grades = mean * np.exp(sigma * field - sigma**2 / 2)
    grades[domains < 0] = np.nan
    collars, surveys, assays = _drill(rng, grades, domains)
    return DemoDeposit(grades, domains, collars, surveys, assays)


def _hole_targets(rng):
    """Aim points (u, v) on the lode: 40 m sections, 20 m infill over the shoot."""
    targets = [
        (u, v) for u in np.arange(-200.0, 201.0, 40.0) for v in np.arange(-110.0, 231.0, 40.0)
    ]
    infill = [
        (u, v)
        for u in np.arange(-200.0, 201.0, 20.0)
        for v in np.arange(-110.0, 231.0, 20.0)
        if in_shoot(u, v)
    ]
    targets += [t for t in infill if t not in targets]
    return [(u + rng.normal(0, 2.0), v + rng.normal(0, 2.0)) for u, v in targets]


def _drill(rng, grades, domains):
    shape, _lat = _fine_lattice()
    s, d, n = _frame()
    collars, surveys, assays = [], [], []
    for number, (u, v) in enumerate(_hole_targets(rng), start=1):
        hole = f"TW{number:03d}"
        target = CENTRE + u * s + v * d + _undulation(u, v) * n
        az0 = (DIP_DIRECTION + 180.0 + rng.normal(0, 3.0)) % 360.0
        dip0 = -60.0 + rng.normal(0, 3.0)
        t0 = np.array(
            [
                np.cos(np.radians(dip0)) * np.sin(np.radians(az0)),
                np.cos(np.radians(dip0)) * np.cos(np.radians(az0)),
                np.sin(np.radians(dip0)),
            ]
        )
        back = 0.0
        for _ in range(30):  # walk back up the hole to the topography
            c = target - back * t0
            back += (topography_elevation(c[0], c[1]) - c[2]) / -t0[2] * 0.9 + 0.01
        collar = target - back * t0
        collar[2] = topography_elevation(collar[0], collar[1])
        depth = float(np.ceil(back + 45.0))
        single = number == 7
        st_depth = np.array([0.0]) if single else np.arange(0.0, depth, 30.0)
        drift_dip = 0.0 if single else rng.normal(0.6, 0.2)
        drift_az = 0.0 if single else rng.normal(0.4, 0.3)
        st_dip = np.clip(dip0 + drift_dip * np.arange(len(st_depth)), -89.0, -20.0)
        st_az = (az0 + drift_az * np.arange(len(st_depth))) % 360.0
        collars.append((hole, *np.round(collar, 2), depth))
        surveys += [
            (hole, float(a), round(float(b), 2), round(float(c), 2))
            for a, b, c in zip(st_depth, st_az, st_dip, strict=True)
        ]
        step = 0.25
        md = np.arange(step / 2, depth, step)
        pos = positions_along_hole(collar, st_depth, st_az, st_dip, md)
        cell = np.floor((pos - ORIGIN) / FINE).astype(np.int64)
        ok = np.all((cell >= 0) & (cell < shape), axis=1)
        cell = np.clip(cell, 0, np.array(shape) - 1)
        dom = np.where(ok, domains[cell[:, 0], cell[:, 1], cell[:, 2]], 0)
        val = np.where(ok, grades[cell[:, 0], cell[:, 1], cell[:, 2]], MEAN["waste"])
        dom = np.where(dom < 0, 0, dom)
        val = np.where(np.isnan(val), MEAN["waste"], val)
        names = {0: "waste", 1: "halo", 2: "lode"}
        # cut into runs of one domain, then 1 m samples in the lode and 2 m elsewhere
        edges = np.flatnonzero(np.diff(dom)) + 1
        starts = np.r_[0, edges]
        ends = np.r_[edges, len(dom)]
        for a, b in zip(starts, ends, strict=True):
            top, bottom = a * step, b * step
            length = 1.0 if dom[a] == 2 else 2.0
            cuts = np.r_[np.arange(top, bottom - 1e-9, length), bottom]
            if len(cuts) > 2 and cuts[-1] - cuts[-2] < 0.3:
                cuts = np.delete(cuts, -2)
            for f, t in zip(cuts[:-1], cuts[1:], strict=True):
                sel = slice(int(round(f / step)), int(round(t / step)))
                truth = float(val[sel].mean())
                grade = truth * np.exp(ASSAY_NOISE * rng.standard_normal() - ASSAY_NOISE**2 / 2)
                assays.append([hole, round(f, 2), round(t, 2), grade, names[int(dom[a])]])
    # Realistic defects: below-detection strings, unsampled intervals.
    for row in assays:
        row[3] = "<0.002" if row[3] < 0.002 else f"{row[3]:.3f}"
    waste_rows = [i for i, r in enumerate(assays) if r[4] != "lode"]
    for i in sorted(rng.choice(waste_rows, size=6, replace=False), reverse=True):
        del assays[i]
    return collars, surveys, assays


def truth_blocks(deposit: DemoDeposit):
    """True mean grade of each demo block per domain (lode and halo), from the fine field."""
    import pandas as pd

    f = tuple(int(round(b / c)) for b, c in zip(BLOCK, FINE, strict=True))
    nx, ny, nz = GRID_SHAPE
    dom = deposit.domains.reshape(nx, f[0], ny, f[1], nz, f[2])
    grd = np.nan_to_num(deposit.grades).reshape(nx, f[0], ny, f[1], nz, f[2])
    rows = []
    cells = f[0] * f[1] * f[2]
    for code, name in ((2, "lode"), (1, "halo")):
        m = dom == code
        count = m.sum(axis=(1, 3, 5))
        total = np.where(m, grd, 0).sum(axis=(1, 3, 5))
        i, j, k = np.nonzero(count)
        centre = ORIGIN + (np.column_stack([i, j, k]) + 0.5) * BLOCK
        rows.append(
            pd.DataFrame(
                {
                    "x": centre[:, 0],
                    "y": centre[:, 1],
                    "z": centre[:, 2],
                    "domain": name,
                    "proportion": count[i, j, k] / cells,
                    "au_true": total[i, j, k] / count[i, j, k],
                }
            )
        )
    return pd.concat(rows, ignore_index=True)


def write_demo(folder: Path, seed: int = SEED) -> DemoDeposit:
    """Write the demo's data files (CSV tables, PLY surfaces, true block grades) and a
    project file that runs on them, reporting into ``folder/report``.

    Never overwrites: if any of the files exists already, nothing is written and
    :class:`~blockmodel.errors.InputError` names them.  Each file is written under a
    temporary name and renamed when complete.
    """
    import os

    import pandas as pd

    from blockmodel.app.outputs import atomic_path, check_new_files

    folder = Path(folder)
    check_new_files([folder / n for n in DEMO_FILES])
    folder.mkdir(parents=True, exist_ok=True)
    deposit = build_demo(seed)
    writers = {
        "collars.csv": lambda p: pd.DataFrame(
            deposit.collars, columns=["hole_id", "x", "y", "z", "depth"]
        ).to_csv(p, index=False),
        "surveys.csv": lambda p: pd.DataFrame(
            deposit.surveys, columns=["hole_id", "depth", "azimuth", "dip"]
        ).to_csv(p, index=False),
        "assays.csv": lambda p: pd.DataFrame(
            deposit.assays, columns=["hole_id", "from", "to", "au", "domain"]
        ).to_csv(p, index=False),
        "lode.ply": lambda p: write_ply(p, lode_surface()),
        "halo.ply": lambda p: write_ply(p, halo_surface()),
        "topography.ply": lambda p: write_ply(p, topography_surface()),
        "truth_blocks.parquet": lambda p: truth_blocks(deposit).to_parquet(p, index=False),
        "project.toml": lambda p: p.write_text(demo_project_text(), encoding="utf-8"),
    }
    for name in DEMO_FILES:
        tmp = atomic_path(folder / name)
        try:
            writers[name](tmp)
            check_new_files([folder / name])  # appeared meanwhile: still never overwrite
            os.replace(tmp, folder / name)
        finally:
            tmp.unlink(missing_ok=True)
    return deposit
