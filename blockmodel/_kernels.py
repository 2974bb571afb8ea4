"""Compiled kernels of the estimator: covariance sums and batched kriging solves.

Pure arrays in, arrays out; no pandas, plotting or I/O.  Compiled with numba and cached on
disk so the command line starts fast.  No ``fastmath``: results must be bit-identical
whatever the chunking or the backend.
"""

from __future__ import annotations

import numpy as np
from numba import njit, prange

_CACHE = True


@njit(cache=_CACHE, inline="always")
def _structured_cov(dx, dy, dz, kinds, sills, mats):
    """Sum of structure covariances at separation (dx, dy, dz); nugget excluded."""
    total = 0.0
    for s in range(kinds.shape[0]):
        u = mats[s, 0, 0] * dx + mats[s, 0, 1] * dy + mats[s, 0, 2] * dz
        v = mats[s, 1, 0] * dx + mats[s, 1, 1] * dy + mats[s, 1, 2] * dz
        w = mats[s, 2, 0] * dx + mats[s, 2, 1] * dy + mats[s, 2, 2] * dz
        r2 = u * u + v * v + w * w
        kind = kinds[s]
        if kind == 0:
            if r2 < 1.0:
                r = np.sqrt(r2)
                total += sills[s] * (1.0 - r * (1.5 - 0.5 * r2))
        elif kind == 1:
            total += sills[s] * np.exp(-3.0 * np.sqrt(r2))
        elif kind == 2:
            total += sills[s] * np.exp(-3.0 * r2)
        else:
            if r2 < 1.0:
                r = np.sqrt(r2)
                poly = r2 * (7.0 - r * (8.75 - r2 * (3.5 - 0.75 * r2)))
                total += sills[s] * (1.0 - poly)
    return total


@njit(cache=_CACHE)
def mean_block_covariance(offsets, kinds, sills, mats):
    """Mean structured covariance between all pairs of discretisation offsets, C(V, V)."""
    d = offsets.shape[0]
    total = 0.0
    for a in range(d):
        for b in range(d):
            total += _structured_cov(
                offsets[a, 0] - offsets[b, 0],
                offsets[a, 1] - offsets[b, 1],
                offsets[a, 2] - offsets[b, 2],
                kinds,
                sills,
                mats,
            )
    return total / (d * d)


@njit(cache=_CACHE)
def _lu_factor(a, piv):
    """In-place LU with partial pivoting; returns min |pivot| / max |pivot| (0 if singular)."""
    n = a.shape[0]
    pmin = np.inf
    pmax = 0.0
    for k in range(n):
        p = k
        best = abs(a[k, k])
        for i in range(k + 1, n):
            if abs(a[i, k]) > best:
                best = abs(a[i, k])
                p = i
        piv[k] = p
        if p != k:
            for j in range(n):
                tmp = a[k, j]
                a[k, j] = a[p, j]
                a[p, j] = tmp
        pmin = min(pmin, best)
        pmax = max(pmax, best)
        if best == 0.0:
            return 0.0
        inv = 1.0 / a[k, k]
        for i in range(k + 1, n):
            a[i, k] *= inv
            f = a[i, k]
            if f != 0.0:
                for j in range(k + 1, n):
                    a[i, j] -= f * a[k, j]
    return pmin / pmax


@njit(cache=_CACHE)
def _lu_solve(lu, piv, b):
    n = lu.shape[0]
    for k in range(n):
        p = piv[k]
        if p != k:
            tmp = b[k]
            b[k] = b[p]
            b[p] = tmp
    for i in range(n):
        s = b[i]
        for j in range(i):
            s -= lu[i, j] * b[j]
        b[i] = s
    for i in range(n - 1, -1, -1):
        s = b[i]
        for j in range(i + 1, n):
            s -= lu[i, j] * b[j]
        b[i] = s / lu[i, i]


@njit(cache=_CACHE, parallel=True)
def krige_groups(
    samples,
    values,
    targets,
    offsets,
    neighbours,
    counts,
    order,
    group_starts,
    kinds,
    sills,
    mats,
    nugget,
    cvv,
    point_support,
    simple,
    mean,
    condition_limit,
    estimate,
    variance,
    slope,
    lagrange,
    negative_weights,
    weight_sum,
    ill_conditioned,
):
    """Solve one kriging system per group of targets sharing a neighbourhood.

    Parameters
    ----------
    samples : (n, 3) float64, local metres
    values : (n,) float64
    targets : (m, 3) float64, block centres or points, local metres
    offsets : (d, 3) float64, discretisation offsets from the block centre (one zero row
        for point support)
    neighbours : (m, k) int64, sample indices sorted ascending, padded at the end
    counts : (m,) int64, number of valid neighbours per target
    order : (m,) int64, targets ordered so that each group is contiguous
    group_starts : (g + 1,) int64, start of each group within ``order``
    kinds, sills, mats : packed variogram structures
    nugget, cvv, mean, condition_limit : float
    point_support, simple : bool

    Outputs (written in place, indexed by target): estimate, variance, slope, lagrange,
    negative_weights (sum of negative weights), weight_sum, ill_conditioned (bool).
    """
    n_groups = group_starts.shape[0] - 1
    n_off = offsets.shape[0]
    for g in prange(n_groups):
        first = order[group_starts[g]]
        k = counts[first]
        size = k if simple else k + 1
        a = np.zeros((size, size))
        piv = np.zeros(size, dtype=np.int64)
        idx = neighbours[first, :k]
        for i in range(k):
            xi = samples[idx[i]]
            a[i, i] = nugget + _structured_cov(0.0, 0.0, 0.0, kinds, sills, mats)
            for j in range(i + 1, k):
                xj = samples[idx[j]]
                c = _structured_cov(xi[0] - xj[0], xi[1] - xj[1], xi[2] - xj[2], kinds, sills, mats)
                a[i, j] = c
                a[j, i] = c
            if not simple:
                a[i, k] = 1.0
                a[k, i] = 1.0
        ratio = _lu_factor(a, piv)
        rhs = np.empty(size)
        cbar = np.empty(k)
        for t in range(group_starts[g], group_starts[g + 1]):
            b = order[t]
            cx = targets[b, 0]
            cy = targets[b, 1]
            cz = targets[b, 2]
            for i in range(k):
                xi = samples[idx[i]]
                acc = 0.0
                for o in range(n_off):
                    dx = xi[0] - cx - offsets[o, 0]
                    dy = xi[1] - cy - offsets[o, 1]
                    dz = xi[2] - cz - offsets[o, 2]
                    acc += _structured_cov(dx, dy, dz, kinds, sills, mats)
                    if point_support and dx == 0.0 and dy == 0.0 and dz == 0.0:
                        acc += nugget
                cbar[i] = acc / n_off
                rhs[i] = cbar[i]
            if not simple:
                rhs[k] = 1.0
            ill_conditioned[b] = ratio < condition_limit
            if ratio == 0.0:
                continue
            _lu_solve(a, piv, rhs)
            est = 0.0
            lc = 0.0
            wsum = 0.0
            neg = 0.0
            for i in range(k):
                w = rhs[i]
                wsum += w
                lc += w * cbar[i]
                if w < 0.0:
                    neg += w
                if simple:
                    est += w * (values[idx[i]] - mean)
                else:
                    est += w * values[idx[i]]
            mu = 0.0
            if simple:
                est += mean
            else:
                mu = rhs[k]
            estimate[b] = est
            variance[b] = cvv - lc - mu
            # lambda' C lambda = lambda' cbar - mu * sum(lambda); sum(lambda) = 1 for OK
            var_est = lc - mu * wsum
            slope[b] = lc / var_est if var_est > 0.0 else np.nan
            lagrange[b] = mu
            negative_weights[b] = neg
            weight_sum[b] = wsum


@njit(cache=_CACHE)
def select_neighbours(
    cand, local, hole_of, max_samples, max_per_hole, max_per_octant, out, counts, octants_filled
):
    """Apply per-hole and per-octant limits to distance-ordered candidates.

    Parameters
    ----------
    cand : (m, q) int64, candidate sample indices by increasing distance, n = none
    local : (m, q, 3) float64, candidate offsets from the target in the search frame
    hole_of : (n,) int64, hole code of each sample
    max_samples, max_per_hole, max_per_octant : int (<= 0 means no limit)
    out : (m, max_samples) int64, chosen indices (written), padded with n
    counts : (m,) int64 (written)
    octants_filled : (m,) int64 (written)
    """
    m, q = cand.shape
    n = hole_of.shape[0]
    for t in range(m):
        used = 0
        holes_seen = np.full(max_samples, -1, dtype=np.int64)
        holes_count = np.zeros(max_samples, dtype=np.int64)
        n_seen = 0
        octant_count = np.zeros(8, dtype=np.int64)
        for c in range(q):
            s = cand[t, c]
            if s >= n:
                break
            h = hole_of[s]
            pos = -1
            if max_per_hole > 0:
                pos = -1
                for u in range(n_seen):
                    if holes_seen[u] == h:
                        pos = u
                        break
                if pos >= 0 and holes_count[pos] >= max_per_hole:
                    continue
            octant = 0
            if local[t, c, 0] < 0.0:
                octant += 1
            if local[t, c, 1] < 0.0:
                octant += 2
            if local[t, c, 2] < 0.0:
                octant += 4
            if max_per_octant > 0 and octant_count[octant] >= max_per_octant:
                continue
            octant_count[octant] += 1
            if max_per_hole > 0:
                if pos >= 0:
                    holes_count[pos] += 1
                else:
                    holes_seen[n_seen] = h
                    holes_count[n_seen] = 1
                    n_seen += 1
            out[t, used] = s
            used += 1
            if used == max_samples:
                break
        counts[t] = used
        filled = 0
        for o in range(8):
            if octant_count[o] > 0:
                filled += 1
        octants_filled[t] = filled
        for c in range(used, max_samples):
            out[t, c] = n
