"""Closed triangulated solids and surfaces: reading, and inside tests by vertical rays.

A point is inside a closed solid when a vertical ray upward from it crosses the surface an
odd number of times.  Points come on a regular lattice of (x, y) columns, so crossings are
found once per column and shared by every point above it.
"""

from __future__ import annotations

from dataclasses import dataclass
from pathlib import Path

import numpy as np

from blockmodel.errors import InputError, Problem

__all__ = [
    "BOX_TRIANGLES",
    "Lattice",
    "Surface",
    "box_surface",
    "column_crossings",
    "grid_triangles",
    "open_edges",
    "points_inside",
    "read_solid",
    "read_surface",
    "share_inside_box",
    "solid_volume",
    "surface_elevation",
    "write_ply",
]


_NUDGE = (np.sqrt(2.0) * 1e-7, np.sqrt(3.0) * 1e-7)


@dataclass(frozen=True)
class Surface:
    """Triangulated surface: vertices (v, 3) float64 metres, triangles (t, 3) int64."""

    vertices: np.ndarray
    triangles: np.ndarray


@dataclass(frozen=True)
class Lattice:
    """Regular (x, y) columns: centres ``x0 + i dx`` (i < nx), ``y0 + j dy`` (j < ny)."""

    x0: float
    dx: float
    nx: int
    y0: float
    dy: float
    ny: int


#: Triangles of a box whose corners are numbered (x, y, z) bits: 0 (0,0,0), 1 (1,0,0),
#: 2 (1,1,0), 3 (0,1,0), then 4 to 7 the same on top.
BOX_TRIANGLES = np.array(
    [
        [0, 2, 1],
        [0, 3, 2],
        [4, 5, 6],
        [4, 6, 7],
        [0, 1, 5],
        [0, 5, 4],
        [1, 2, 6],
        [1, 6, 5],
        [2, 3, 7],
        [2, 7, 6],
        [3, 0, 4],
        [3, 4, 7],
    ],
    dtype=np.int64,
)


def box_surface(lo, hi) -> Surface:
    """A closed axis-aligned box between corners ``lo`` and ``hi`` (metres)."""
    (x0, y0, z0), (x1, y1, z1) = lo, hi
    v = np.array(
        [
            [x0, y0, z0],
            [x1, y0, z0],
            [x1, y1, z0],
            [x0, y1, z0],
            [x0, y0, z1],
            [x1, y0, z1],
            [x1, y1, z1],
            [x0, y1, z1],
        ],
        dtype=np.float64,
    )
    return Surface(v, BOX_TRIANGLES.copy())


def grid_triangles(nu: int, nv: int) -> np.ndarray:
    """Two triangles per cell of an (nu, nv) grid of vertices numbered ``v + nv * u``."""
    idx = np.arange(nu * nv).reshape(nu, nv)
    a, b = idx[:-1, :-1].ravel(), idx[1:, :-1].ravel()
    c, e = idx[1:, 1:].ravel(), idx[:-1, 1:].ravel()
    return np.vstack([np.column_stack([a, b, c]), np.column_stack([a, c, e])]).astype(np.int64)


def read_surface(path: Path) -> Surface:
    """Read a triangulated surface (PLY, STL, OBJ or VTK) with pyvista.

    Parameters
    ----------
    path : Path

    Returns
    -------
    Surface
    """
    import pyvista as pv

    try:
        mesh = pv.read(str(path))
    except Exception as exc:  # pyvista raises many types for unreadable files
        raise InputError(
            [Problem(str(path), None, None, None, f"cannot read surface: {exc}")]
        ) from None
    mesh = mesh.extract_surface(algorithm="dataset_surface").triangulate()
    faces = np.asarray(mesh.faces).reshape(-1, 4)
    if len(faces) == 0:
        raise InputError([Problem(str(path), None, None, None, "surface has no triangles")])
    return Surface(np.asarray(mesh.points, dtype=np.float64), faces[:, 1:].astype(np.int64))


def write_ply(path: Path, surface: Surface) -> None:
    """Write a surface as ASCII PLY (an open format every 3D viewer reads)."""
    v, t = surface.vertices, surface.triangles
    head = [
        "ply",
        "format ascii 1.0",
        f"element vertex {len(v)}",
        "property double x",
        "property double y",
        "property double z",
        f"element face {len(t)}",
        "property list uchar int vertex_indices",
        "end_header",
    ]
    body = [f"{a:.3f} {b:.3f} {c:.3f}" for a, b, c in v] + [f"3 {a} {b} {c}" for a, b, c in t]
    Path(path).write_text("\n".join(head + body) + "\n", encoding="ascii")


def column_crossings(surface: Surface, lattice: Lattice) -> tuple[np.ndarray, np.ndarray]:
    """Elevations where each lattice column crosses the surface.

    Returns
    -------
    column : (q,) int64
        Flat column index ``i + nx * j``, sorted.
    z : (q,) float64
        Crossing elevations, sorted within each column.
    """
    v, t = surface.vertices, surface.triangles
    p0, p1, p2 = v[t[:, 0]], v[t[:, 1]], v[t[:, 2]]
    xy = np.stack([p0[:, :2], p1[:, :2], p2[:, :2]], axis=1)
    lo = np.ceil((xy.min(axis=1) - [lattice.x0, lattice.y0]) / [lattice.dx, lattice.dy]).astype(
        np.int64
    )
    hi = np.floor((xy.max(axis=1) - [lattice.x0, lattice.y0]) / [lattice.dx, lattice.dy]).astype(
        np.int64
    )
    lo = np.maximum(lo, 0)
    hi = np.minimum(hi, [lattice.nx - 1, lattice.ny - 1])
    ni = np.maximum(hi[:, 0] - lo[:, 0] + 1, 0)
    nj = np.maximum(hi[:, 1] - lo[:, 1] + 1, 0)
    counts = ni * nj
    tri = np.repeat(np.arange(len(t)), counts)
    local = np.arange(counts.sum()) - np.repeat(np.cumsum(counts) - counts, counts)
    ii = lo[tri, 0] + local % np.maximum(ni[tri], 1)
    jj = lo[tri, 1] + local // np.maximum(ni[tri], 1)
    # Nudge the rays by a tiny, irrational fraction of a column so that none passes exactly
    # through a vertex or along a shared edge (which would count a crossing twice).
    px = lattice.x0 + ii * lattice.dx + _NUDGE[0] * lattice.dx
    py = lattice.y0 + jj * lattice.dy + _NUDGE[1] * lattice.dy
    a, b, c = p0[tri], p1[tri], p2[tri]
    det = (b[:, 0] - a[:, 0]) * (c[:, 1] - a[:, 1]) - (c[:, 0] - a[:, 0]) * (b[:, 1] - a[:, 1])
    with np.errstate(divide="ignore", invalid="ignore"):
        det = np.where(det == 0, np.nan, det)
        l1 = ((px - a[:, 0]) * (c[:, 1] - a[:, 1]) - (c[:, 0] - a[:, 0]) * (py - a[:, 1])) / det
        l2 = ((b[:, 0] - a[:, 0]) * (py - a[:, 1]) - (px - a[:, 0]) * (b[:, 1] - a[:, 1])) / det
    l0 = 1.0 - l1 - l2
    # half-open rule so a column through a shared edge is counted once
    hit = np.isfinite(det) & (l1 >= 0) & (l2 >= 0) & (l0 > 0)
    with np.errstate(invalid="ignore"):
        z = l0 * a[:, 2] + l1 * b[:, 2] + l2 * c[:, 2]
    col = (ii + lattice.nx * jj)[hit]
    z = z[hit]
    order = np.lexsort((z, col))
    return col[order], z[order]


def points_inside(
    crossings: tuple[np.ndarray, np.ndarray], column: np.ndarray, z: np.ndarray
) -> np.ndarray:
    """Whether points (column index, elevation) are inside the closed solid.

    Parameters
    ----------
    crossings : from :func:`column_crossings`
    column : (n,) int64, flat lattice column of each point
    z : (n,) float64, elevation of each point

    Returns
    -------
    (n,) bool
    """
    col, zc = crossings
    if len(col) == 0:
        return np.zeros(len(z), dtype=bool)
    # one sort key per (column, elevation): column + a fraction in (0, 1) for the elevation
    lo = min(float(zc.min()), float(np.min(z))) - 1.0
    span = max(float(zc.max()), float(np.max(z))) + 1.0 - lo
    base = lo
    key_c = col + (zc - base) / span
    key_p = column + (z - base) / span
    end = np.searchsorted(col, column, side="right")
    above = end - np.searchsorted(key_c, key_p, side="right")
    return (above % 2) == 1


def surface_elevation(surface: Surface, lattice: Lattice) -> np.ndarray:
    """Highest elevation of an open surface (topography) over each column; NaN where absent.

    Returns
    -------
    (nx * ny,) float64
    """
    col, z = column_crossings(surface, lattice)
    out = np.full(lattice.nx * lattice.ny, np.nan)
    last = np.r_[col[1:] != col[:-1], True]
    out[col[last]] = z[last]
    return out


def open_edges(surface: Surface, tolerance: float = 1e-6) -> int:
    """Edges not shared by exactly two triangles (0 for a closed, watertight solid).

    Vertices closer than ``tolerance`` metres (on a grid of that size) count as one, so a
    file that repeats vertices per triangle is judged by its shape.
    """
    keys = np.round(surface.vertices / tolerance).astype(np.int64)
    _, ids = np.unique(keys, axis=0, return_inverse=True)
    t = ids.reshape(-1)[surface.triangles]
    edges = np.sort(np.concatenate([t[:, [0, 1]], t[:, [1, 2]], t[:, [2, 0]]]), axis=1)
    edges = edges[edges[:, 0] != edges[:, 1]]  # degenerate triangles add nothing
    _, counts = np.unique(edges, axis=0, return_counts=True)
    return int(np.sum(counts != 2))


def read_solid(path: Path) -> Surface:
    """Read a domain solid and check that it is closed (watertight).

    A solid with holes in its surface gives wrong inside tests along the vertical rays
    through the holes, so it is refused with the number of open edges.
    """
    surface = read_surface(path)
    bad = open_edges(surface)
    if bad:
        raise InputError(
            [
                Problem(
                    str(path),
                    None,
                    None,
                    None,
                    f"the solid is not closed: {bad} edge(s) do not join exactly two "
                    "triangles; close it in the modelling software before estimating",
                )
            ]
        )
    return surface


def solid_volume(surface: Surface) -> float:
    """Volume (m3) enclosed by a closed surface, by the divergence theorem:
    the sum over triangles of ``p0 · (p1 × p2) / 6``, whatever their orientation sign."""
    v = surface.vertices - surface.vertices.mean(axis=0)  # local origin: no cancellation
    p0, p1, p2 = (v[surface.triangles[:, n]] for n in range(3))
    return float(abs(np.einsum("ij,ij->i", p0, np.cross(p1, p2)).sum()) / 6.0)


def share_inside_box(surface: Surface, lo, hi, columns: tuple[int, int] = (400, 400)) -> float:
    """Share of a closed solid's volume that lies inside the box ``lo``-``hi`` (metres).

    Vertical columns on a ``columns`` lattice over the box cross the solid; the inside
    stretches between successive crossings, clipped to the box's elevations, add up to the
    volume inside the box.
    """
    lo, hi = np.asarray(lo, dtype=np.float64), np.asarray(hi, dtype=np.float64)
    total = solid_volume(surface)
    if total <= 0:
        return 0.0
    nx, ny = columns
    dx, dy = (hi[0] - lo[0]) / nx, (hi[1] - lo[1]) / ny
    lattice = Lattice(lo[0] + dx / 2, dx, nx, lo[1] + dy / 2, dy, ny)
    col, z = column_crossings(surface, lattice)
    counts = np.bincount(col, minlength=nx * ny)
    z = z[counts[col] % 2 == 0]  # a closed solid is crossed an even number of times
    bottom, top = z[0::2], z[1::2]
    inside = np.clip(np.minimum(top, hi[2]) - np.maximum(bottom, lo[2]), 0, None).sum()
    return float(min(inside * dx * dy / total, 1.0))
