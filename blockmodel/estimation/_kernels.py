"""Compiled kernels of the estimator: covariance sums and batched kriging solves.

Pure arrays in, arrays out; no pandas, plotting or I/O.  Compiled with numba and cached on
disk so the command line starts fast.  No ``fastmath``: results must be bit-identical
whatever the chunking or the backend.
"""

from __future__ import annotations

import numpy as np
from numba import njit

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


def reduced(points, mats):
    """Points in each structure's reduced frame: (s, n, 3), written element-wise so every row
    gets the same arithmetic whatever the batch."""
    out = np.empty((mats.shape[0], points.shape[0], 3))
    for s in range(mats.shape[0]):
        for r in range(3):
            out[s, :, r] = (
                points[:, 0] * mats[s, r, 0]
                + points[:, 1] * mats[s, r, 1]
                + points[:, 2] * mats[s, r, 2]
            )
    return out


@njit(cache=_CACHE, inline="always")
def _mean_correlations(kind, x, y, z, k, tx, ty, tz, ox, oy, oz, out):
    """Mean correlation between each of the k reduced points (x, y, z: (>= k,) each) and
    the discretisation points of a target (tx, ty, tz) + (ox, oy, oz)[o] into ``out[:k]``.

    Offset by offset, one loop over the points of one kind with no branch and no sum
    across the loop (so the compiler vectorises it); each point's sum over the offsets is
    in offset order, the same arithmetic in every call."""
    d = ox.shape[0]
    for i in range(k):
        out[i] = 0.0
    for o in range(d):
        qx = tx + ox[o]
        qy = ty + oy[o]
        qz = tz + oz[o]
        if kind == 0:
            for i in range(k):
                dx = x[i] - qx
                dy = y[i] - qy
                dz = z[i] - qz
                r2c = min(dx * dx + dy * dy + dz * dz, 1.0)
                r = np.sqrt(r2c)
                out[i] += 1.0 - r * (1.5 - 0.5 * r2c)
        elif kind == 1:
            for i in range(k):
                dx = x[i] - qx
                dy = y[i] - qy
                dz = z[i] - qz
                out[i] += np.exp(-3.0 * np.sqrt(dx * dx + dy * dy + dz * dz))
        elif kind == 2:
            for i in range(k):
                dx = x[i] - qx
                dy = y[i] - qy
                dz = z[i] - qz
                out[i] += np.exp(-3.0 * (dx * dx + dy * dy + dz * dz))
        else:
            for i in range(k):
                dx = x[i] - qx
                dy = y[i] - qy
                dz = z[i] - qz
                r2c = min(dx * dx + dy * dy + dz * dz, 1.0)
                r = np.sqrt(r2c)
                out[i] += 1.0 - r2c * (7.0 - r * (8.75 - r2c * (3.5 - 0.75 * r2c)))
    for i in range(k):
        out[i] /= d


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


# pivots per panel of the Cholesky factorisation
_PANEL = 4


@njit(cache=_CACHE, inline="always")
def _pivot(a, q, n):
    """Take the square root of pivot q and scale the rest of row q by it; return the
    squared pivot (not positive: the matrix is not positive definite)."""
    s = a[q, q]
    if s > 0.0:
        d = np.sqrt(s)
        a[q, q] = d
        inv = 1.0 / d
        for i in range(q + 1, n):
            a[q, i] = a[q, i] * inv
    return s


@njit(cache=_CACHE)
def _cholesky(a):
    """In-place upper Cholesky factor U (C = U'U) of a symmetric matrix given by the
    upper triangle of ``a`` (k, >= k; columns past k are left alone); returns the ratio
    of the smallest to the largest squared pivot (0 if not positive definite).

    Right-looking, by panels of four pivots: each panel is factored alone, then the rows
    below it receive the panel's four updates in one pass along contiguous rows (the
    compiler vectorises it).  Each entry receives the same subtractions in the same order
    as the textbook inner-product form, so the factor is the same to the last bit."""
    n = a.shape[0]
    pmin = np.inf
    pmax = 0.0
    j = 0
    while j < n:
        e = min(j + _PANEL, n)
        for q in range(j, e):
            s = _pivot(a, q, n)
            if not s > 0.0:
                return 0.0
            pmin = min(pmin, s)
            pmax = max(pmax, s)
            for r in range(q + 1, e):
                f = a[q, r]
                for i in range(r, n):
                    a[r, i] -= f * a[q, i]
        if e - j == _PANEL:
            for r in range(e, n):
                f0 = a[j, r]
                f1 = a[j + 1, r]
                f2 = a[j + 2, r]
                f3 = a[j + 3, r]
                for i in range(r, n):
                    a[r, i] = (
                        a[r, i]
                        - f0 * a[j, i]
                        - f1 * a[j + 1, i]
                        - f2 * a[j + 2, i]
                        - f3 * a[j + 3, i]
                    )
        j = e
    return pmin / pmax


@njit(cache=_CACHE, inline="always")
def _cholesky_solve(upper, b, columns):
    """Solve U'U x = b in place for the right-hand sides ``b[:columns]`` (each a row of
    b, (>= columns, >= k)), U (k, >= k) from :func:`_cholesky`.  Two at a time, so the
    back substitution runs two independent chains of products; each gets the same
    arithmetic as when solved alone."""
    c = 0
    while c + 1 < columns:
        _solve_pair(upper, b[c], b[c + 1])
        c += 2
    if c < columns:
        _solve_one(upper, b[c])


@njit(cache=_CACHE, inline="always")
def _solve_one(upper, x):
    """Solve U'U x = b in place for one right-hand side x (k,)."""
    n = upper.shape[0]
    for p in range(n):
        x[p] = x[p] / upper[p, p]
        f = x[p]
        for i in range(p + 1, n):
            x[i] -= upper[p, i] * f
    for i in range(n - 1, -1, -1):
        s = x[i]
        for p in range(i + 1, n):
            s -= upper[i, p] * x[p]
        x[i] = s / upper[i, i]


@njit(cache=_CACHE, inline="always")
def _solve_pair(upper, x, y):
    """Solve U'U x = b for two right-hand sides x and y (k,) in place, interleaved."""
    n = upper.shape[0]
    for p in range(n):
        d = upper[p, p]
        x[p] = x[p] / d
        y[p] = y[p] / d
        f = x[p]
        g = y[p]
        for i in range(p + 1, n):
            u = upper[p, i]
            x[i] -= u * f
            y[i] -= u * g
    for i in range(n - 1, -1, -1):
        s = x[i]
        t = y[i]
        for p in range(i + 1, n):
            u = upper[i, p]
            s -= u * x[p]
            t -= u * y[p]
        d = upper[i, i]
        x[i] = s / d
        y[i] = t / d


@njit(cache=_CACHE, inline="always")
def _add_correlation_row(kind, sill, x, y, z, j, k, row):
    """Add ``sill`` times the correlation between reduced point j and points 0 .. k - 1
    (coordinates x, y, z: (k,) each) to ``row[:k]``: one loop per kind, no branch in it,
    so the compiler vectorises it.  The whole row, though only the part right of the
    diagonal is used: a loop of fixed length from 0 runs about three times faster than
    the shorter one from j + 1, and the entries used get the same arithmetic."""
    px = x[j]
    py = y[j]
    pz = z[j]
    if kind == 0:
        for i in range(k):
            dx = x[i] - px
            dy = y[i] - py
            dz = z[i] - pz
            r2c = min(dx * dx + dy * dy + dz * dz, 1.0)
            r = np.sqrt(r2c)
            row[i] += sill * (1.0 - r * (1.5 - 0.5 * r2c))
    elif kind == 1:
        for i in range(k):
            dx = x[i] - px
            dy = y[i] - py
            dz = z[i] - pz
            row[i] += sill * np.exp(-3.0 * np.sqrt(dx * dx + dy * dy + dz * dz))
    elif kind == 2:
        for i in range(k):
            dx = x[i] - px
            dy = y[i] - py
            dz = z[i] - pz
            row[i] += sill * np.exp(-3.0 * (dx * dx + dy * dy + dz * dz))
    else:
        for i in range(k):
            dx = x[i] - px
            dy = y[i] - py
            dz = z[i] - pz
            r2c = min(dx * dx + dy * dy + dz * dz, 1.0)
            r = np.sqrt(r2c)
            row[i] += sill * (1.0 - r2c * (7.0 - r * (8.75 - r2c * (3.5 - 0.75 * r2c))))


# targets whose systems are solved together (with the group's v)
_BATCH = 8


@njit(cache=_CACHE, inline="always")
def _target_covariances(
    samples_r,
    target,
    offsets_r,
    idx,
    local,
    k,
    kinds,
    sills,
    mats,
    nugget,
    point_support,
    tr,
    scratch,
    cbar,
):
    """Mean covariance between each of the k neighbours and the target's discretisation
    into ``cbar[:k]`` (nugget added where a point target coincides with the sample); the
    target in each structure's reduced frame into ``tr``."""
    n_struct = kinds.shape[0]
    for st in range(n_struct):
        for r in range(3):
            tr[st, r] = (
                mats[st, r, 0] * target[0] + mats[st, r, 1] * target[1] + mats[st, r, 2] * target[2]
            )
    for i in range(k):
        cbar[i] = 0.0
    for st in range(n_struct):
        _mean_correlations(
            kinds[st],
            local[st, 0],
            local[st, 1],
            local[st, 2],
            k,
            tr[st, 0],
            tr[st, 1],
            tr[st, 2],
            offsets_r[st, 0],
            offsets_r[st, 1],
            offsets_r[st, 2],
            scratch,
        )
        for i in range(k):
            cbar[i] += sills[st] * scratch[i]
    if point_support:
        for i in range(k):
            s_i = idx[i]
            at_target = True
            for st in range(n_struct):
                if (
                    samples_r[st, s_i, 0] != tr[st, 0]
                    or samples_r[st, s_i, 1] != tr[st, 1]
                    or samples_r[st, s_i, 2] != tr[st, 2]
                ):
                    at_target = False
            if at_target:
                cbar[i] += nugget


@njit(cache=_CACHE, nogil=True)
def krige_groups(
    first,
    last,
    samples_r,
    values,
    targets,
    offsets_r,
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
    negative_count,
    weight_sum,
    ill_conditioned,
):
    """Solve one kriging system per group of targets sharing a neighbourhood, for groups
    ``first .. last - 1`` (split over threads by :func:`blockmodel.estimation._threads.run_split`).

    Parameters
    ----------
    samples_r : (s, n, 3) float64, samples in each structure's reduced frame (:func:`reduced`)
    values : (n,) float64
    targets : (m, 3) float64, block centres or points, local metres
    offsets_r : (s, 3, d) float64, discretisation offsets in each reduced frame, component
        major (one zero offset for point support)
    neighbours : (m, k) int64, sample indices sorted ascending, padded at the end
    counts : (m,) int64, number of valid neighbours per target
    order : (m,) int64, targets ordered so that each group is contiguous
    group_starts : (g + 1,) int64, start of each group within ``order``
    kinds, sills, mats : packed variogram structures
    nugget, cvv, mean, condition_limit : float
    point_support, simple : bool

    Outputs (written in place, indexed by target): estimate, variance, slope, lagrange,
    negative_weights (sum of negative weights), negative_count (how many), weight_sum,
    ill_conditioned (bool).

    Notes
    -----
    Covariances are evaluated in each structure's reduced frame, where the structure is
    isotropic with range 1, so each separation costs three subtractions and a square sum.
    """
    n_struct = kinds.shape[0]
    c0 = 0.0
    for st in range(n_struct):
        c0 += sills[st]
    kmax = neighbours.shape[1]
    # rows of C padded to a multiple of four entries, so the row loops have no remainder
    # (the padding's entries are computed from stale coordinates and never read)
    local = np.zeros((n_struct, 3, -(-kmax // 4) * 4))
    scratch = np.empty(kmax)
    work = np.empty((_BATCH + 1, kmax))  # right-hand sides solved together, one per row
    cbars = np.empty((_BATCH, kmax))
    v = np.empty(kmax)
    tr = np.empty((n_struct, 3))
    for g in range(first, last):
        lead = order[group_starts[g]]
        k = counts[lead]
        width = -(-k // 4) * 4
        a = np.zeros((k, width))
        idx = neighbours[lead, :k]
        # the neighbourhood's reduced coordinates, contiguous; the upper triangle of C
        for st in range(n_struct):
            for r in range(3):
                for i in range(k):
                    local[st, r, i] = samples_r[st, idx[i], r]
        for j in range(k):
            for st in range(n_struct):
                _add_correlation_row(
                    kinds[st], sills[st], local[st, 0], local[st, 1], local[st, 2], j, width, a[j]
                )
            a[j, j] = nugget + c0
        # C = U'U once per group. Ordinary kriging by the Schur complement of the bordered
        # system: C u = cbar, C v = 1, mu = (1'u - 1) / 1'v, lambda = u - mu v; v is solved
        # with the group's first batch of targets, all in one pass
        ratio = _cholesky(a)
        sum_v = 0.0
        lo = group_starts[g]
        hi = group_starts[g + 1]
        for start in range(lo, hi, _BATCH):
            stop = min(start + _BATCH, hi)
            shift = 1 if start == lo and not simple else 0
            if shift:
                for i in range(k):
                    work[0, i] = 1.0
            for t in range(start, stop):
                b = order[t]
                cbar = cbars[t - start]
                _target_covariances(
                    samples_r,
                    targets[b],
                    offsets_r,
                    idx,
                    local,
                    k,
                    kinds,
                    sills,
                    mats,
                    nugget,
                    point_support,
                    tr,
                    scratch,
                    cbar,
                )
                for i in range(k):
                    work[shift + t - start, i] = cbar[i]
                ill_conditioned[b] = ratio < condition_limit
            if ratio == 0.0:
                continue
            _cholesky_solve(a, work, shift + stop - start)
            if shift:
                for i in range(k):
                    v[i] = work[0, i]
                    sum_v += v[i]
            for t in range(start, stop):
                b = order[t]
                cbar = cbars[t - start]
                col = shift + t - start
                mu = 0.0
                if not simple:
                    sum_u = 0.0
                    for i in range(k):
                        sum_u += work[col, i]
                    mu = (sum_u - 1.0) / sum_v
                    for i in range(k):
                        work[col, i] -= mu * v[i]
                est = 0.0
                lc = 0.0
                wsum = 0.0
                neg = 0.0
                n_neg = 0.0
                for i in range(k):
                    w = work[col, i]
                    wsum += w
                    lc += w * cbar[i]
                    if w < 0.0:
                        neg += w
                        n_neg += 1.0
                    if simple:
                        est += w * (values[idx[i]] - mean)
                    else:
                        est += w * values[idx[i]]
                if simple:
                    est += mean
                estimate[b] = est
                variance[b] = cvv - lc - mu
                # lambda' C lambda = lambda' cbar - mu * sum(lambda); sum(lambda) = 1 for OK
                var_est = lc - mu * wsum
                slope[b] = lc / var_est if var_est > 0.0 else np.nan
                lagrange[b] = mu
                negative_weights[b] = neg
                negative_count[b] = n_neg
                weight_sum[b] = wsum
