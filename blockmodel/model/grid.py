"""The regular block grid: origin at the minimum corner; block ``(i, j, k)`` has its centre
at ``origin + (i + 1/2, j + 1/2, k + 1/2) * block_size`` and flat index
``i + nx * (j + ny * k)`` (x fastest, the cell order of VTK images)."""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

__all__ = ["BlockGrid"]


@dataclass(frozen=True)
class BlockGrid:
    """Regular grid of blocks.

    Parameters
    ----------
    origin : (3,) float, metres; minimum corner of block (0, 0, 0)
    block_size : (3,) float, metres (dx, dy, dz)
    shape : (3,) int (nx, ny, nz)

    Notes
    -----
    Block (i, j, k) has centre ``origin + (i + 1/2, j + 1/2, k + 1/2) * block_size`` and flat
    index ``i + nx * (j + ny * k)``, the order of VTK image cell data.
    """

    origin: tuple[float, float, float]
    block_size: tuple[float, float, float]
    shape: tuple[int, int, int]

    def __post_init__(self) -> None:
        o = np.asarray(self.origin, dtype=np.float64)
        s = np.asarray(self.block_size, dtype=np.float64)
        n = np.asarray(self.shape)
        if o.shape != (3,) or s.shape != (3,) or n.shape != (3,):
            raise ValueError("origin, block_size and shape each need three values")
        if np.any(s <= 0) or np.any(n < 1):
            raise ValueError(
                f"block sizes must be positive and counts >= 1; got {self.block_size}, {self.shape}"
            )
        object.__setattr__(self, "origin", tuple(float(v) for v in o))
        object.__setattr__(self, "block_size", tuple(float(v) for v in s))
        object.__setattr__(self, "shape", tuple(int(v) for v in n))

    @property
    def n_blocks(self) -> int:
        """Number of blocks in the grid."""
        nx, ny, nz = self.shape
        return nx * ny * nz

    @property
    def block_volume(self) -> float:
        """Volume of one block, cubic metres."""
        dx, dy, dz = self.block_size
        return dx * dy * dz

    def flat_index(self, i: np.ndarray, j: np.ndarray, k: np.ndarray) -> np.ndarray:
        """Flat index ``i + nx * (j + ny * k)`` of block indices (arrays of int)."""
        nx, ny, _ = self.shape
        return np.asarray(i) + nx * (np.asarray(j) + ny * np.asarray(k))

    def ijk(self, flat: np.ndarray) -> np.ndarray:
        """(n, 3) int64 block indices of flat indices."""
        nx, ny, _ = self.shape
        flat = np.asarray(flat, dtype=np.int64)
        return np.column_stack([flat % nx, (flat // nx) % ny, flat // (nx * ny)])

    def centres(self, flat: np.ndarray | None = None) -> np.ndarray:
        """(n, 3) float64 block centres in metres (all blocks when ``flat`` is None)."""
        if flat is None:
            flat = np.arange(self.n_blocks)
        return np.asarray(self.origin) + (self.ijk(flat) + 0.5) * np.asarray(self.block_size)

    def block_of(self, points: np.ndarray) -> np.ndarray:
        """Flat index of the block holding each point; -1 outside the grid."""
        rel = np.floor((np.asarray(points) - self.origin) / self.block_size).astype(np.int64)
        inside = np.all((rel >= 0) & (rel < self.shape), axis=1)
        out = np.full(len(rel), -1, dtype=np.int64)
        out[inside] = self.flat_index(rel[inside, 0], rel[inside, 1], rel[inside, 2])
        return out
