"""Unconditional Gaussian simulation on a regular grid by the spectral (FFT) method.

The covariance is sampled on a periodic grid padded beyond the correlation ranges; its
discrete Fourier transform is the spectral density (negative values from truncation are set
to zero); white noise filtered by its square root has that covariance.  The spectral
amplitude is computed once (:class:`SpectralSimulator`) and reused for every realisation.

References
----------
Chilès, J.-P. & Delfiner, P. (2012), *Geostatistics: Modeling Spatial Uncertainty*, §7.5.
Dietrich, C. R. & Newsam, G. N. (1997), SIAM J. Sci. Comput. 18(4).
"""

from __future__ import annotations

import dataclasses

import numpy as np

from blockmodel.variography.models import VariogramModel

__all__ = ["SpectralSimulator", "simulate_gaussian"]

# largest share of the spectrum that may be negative (and clipped) in an automatic embedding
NEGATIVE_TOLERANCE = 1e-4


def _reach(model: VariogramModel) -> np.ndarray:
    """Half-extent (3,) along x, y, z of the largest range ellipsoid of the model, metres."""
    out = np.zeros(3)
    for s in model.structures:
        axes = s.orientation.axes()  # rows: major, semi, minor as unit vectors
        out = np.maximum(out, np.sqrt(((np.asarray(s.ranges)[:, None] * axes) ** 2).sum(0)))
    return out


class SpectralSimulator:
    """Zero-mean Gaussian fields with a model's covariance on one regular grid.

    Parameters
    ----------
    shape : (nx, ny, nz)
        Nodes along x, y, z.
    spacing : (3,) float, metres between nodes
    model : VariogramModel
        Its covariance (nugget included as white noise at the nodes).
    padding : (3,) int, optional
        Extra nodes per axis for the periodic embedding; default: the model's reach along
        each axis, grown (x1.5, x2, x3) while more than 0.01 % of the spectrum is negative.
    workers : int
        Threads for the Fourier transforms (results do not depend on it).
    parts : dict, optional
        A store of each structure's spectrum at unit sill, per padded grid: filled here and
        read by later simulators of the same grid (models that differ in their nugget and
        sills only then cost no Fourier transform of their covariance); the simulator is
        the same with or without it.

    Notes
    -----
    The spectrum is the nugget plus each structure's sill times its unit-sill spectrum
    (the transform is linear), so that a store can serve models with other sills.
    """

    def __init__(
        self,
        shape: tuple[int, int, int],
        spacing: tuple[float, float, float],
        model: VariogramModel,
        *,
        padding: tuple[int, int, int] | None = None,
        workers: int = 1,
        parts: dict | None = None,
    ):

        spacing = np.asarray(spacing, dtype=np.float64)
        self.shape = tuple(int(a) for a in shape)
        self.workers = int(workers)
        if padding is not None:
            self._embed(tuple(int(p) for p in padding), spacing, model, parts)
            return
        # padding by the model's reach along each axis, grown until the embedded covariance
        # is positive definite (no negative spectrum to clip; Dietrich & Newsam 1997)
        reach = _reach(model)
        for factor in (1.0, 1.5, 2.0, 3.0):
            self._embed(
                tuple(int(np.ceil(factor * reach[a] / spacing[a])) for a in range(3)),
                spacing,
                model,
                parts,
            )
            if self.negative_share <= NEGATIVE_TOLERANCE:
                break

    def _embed(self, padding, spacing, model, parts) -> None:
        from scipy import fft

        # even lengths keep the real transforms' sizes simple; the padding only grows
        self.padded = tuple(
            int(a + b + (a + b) % 2) for a, b in zip(self.shape, padding, strict=True)
        )
        spectrum = np.full((*self.padded[:2], self.padded[2] // 2 + 1), model.nugget)
        for st in model.structures:
            key = (self.padded, tuple(spacing), dataclasses.replace(st, sill=1.0))
            unit = None if parts is None else parts.get(key)
            if unit is None:
                grid = _periodic(self.padded, spacing, st.correlation)
                # a copy: the real part alone, not a view holding the complex transform
                unit = np.ascontiguousarray(fft.rfftn(grid, workers=self.workers).real)
                if parts is not None:
                    parts[key] = unit
            spectrum += st.sill * unit
        # share of the spectrum lost where it is negative and clipped (0 when exact)
        self.negative_share = float(-spectrum[spectrum < 0].sum() / np.abs(spectrum).sum())
        self.amplitude = np.sqrt(np.clip(spectrum, 0.0, None))

    @property
    def cells(self) -> int:
        """Nodes of the padded grid (the size of each transform)."""
        return int(np.prod(self.padded))

    def draw(self, rng: np.random.Generator) -> np.ndarray:
        """One realisation, (nx, ny, nz) float64 indexed [i, j, k] (x, y, z)."""
        from scipy import fft

        noise = fft.rfftn(rng.standard_normal(self.padded), workers=self.workers)
        noise *= self.amplitude
        field = fft.irfftn(noise, s=self.padded, axes=(0, 1, 2), workers=self.workers)
        nx, ny, nz = self.shape
        return np.ascontiguousarray(field[:nx, :ny, :nz])


def _periodic(n, spacing, of_lags) -> np.ndarray:
    """``of_lags`` ((q, 3) separations in metres to (q,) values) on a periodic grid of
    ``n`` nodes (signed, wrapped lags: anisotropy needs the sign)."""
    lags = [
        np.where(np.arange(m) <= m // 2, np.arange(m), np.arange(m) - m) * d
        for m, d in zip(n, spacing, strict=True)
    ]
    out = np.empty(n)
    gy, gz = np.meshgrid(lags[1], lags[2], indexing="ij")
    plane = np.column_stack([np.zeros(gy.size), gy.ravel(), gz.ravel()])
    for i, hx in enumerate(lags[0]):
        plane[:, 0] = hx
        out[i] = of_lags(plane).reshape(n[1], n[2])
    return out


def _periodic_covariance(n, spacing, model: VariogramModel) -> np.ndarray:
    """The model's covariance on a periodic grid of ``n`` nodes; the nugget at lag zero."""
    cov = _periodic(n, spacing, model.structured_covariance)
    cov[0, 0, 0] += model.nugget
    return cov


def simulate_gaussian(
    shape: tuple[int, int, int],
    spacing: tuple[float, float, float],
    model: VariogramModel,
    rng: np.random.Generator,
    *,
    padding: tuple[int, int, int] | None = None,
) -> np.ndarray:
    """One realisation of a zero-mean Gaussian field with the model's covariance.

    The invented deposits are made with it, so it stays as it is: padding by the largest
    range, a negative spectrum clipped (:class:`SpectralSimulator` pads until there is none).

    Parameters
    ----------
    shape : (nx, ny, nz)
    spacing : (3,) float, metres between cell centres
    model : VariogramModel
        Its covariance (nugget included as white noise).
    rng : numpy Generator
    padding : (3,) int, optional
        Extra cells per axis for the periodic embedding; default: the largest range.

    Returns
    -------
    (nx, ny, nz) float64, indexed [i, j, k] (x, y, z)
    """
    spacing = np.asarray(spacing, dtype=np.float64)
    if padding is None:
        reach = max(max(s.ranges) for s in model.structures) if model.structures else 0.0
        padding = tuple(int(np.ceil(reach / d)) for d in spacing)
    n = tuple(int(a + b) for a, b in zip(shape, padding, strict=True))
    spectrum = np.fft.rfftn(_periodic_covariance(n, spacing, model))
    amplitude = np.sqrt(np.clip(spectrum.real, 0.0, None))
    del spectrum
    noise = np.fft.rfftn(rng.standard_normal(n))
    field = np.fft.irfftn(amplitude * noise, s=n, axes=(0, 1, 2))
    return np.ascontiguousarray(field[: shape[0], : shape[1], : shape[2]])
