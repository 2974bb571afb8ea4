"""Compiled kernels of the neighbour search: choosing samples under per-hole and octant
limits from a candidate list shared by nearby targets, grouping targets that share a
neighbourhood, and summarising neighbourhoods.

Pure arrays in, arrays out; compiled with numba and cached on disk; no ``fastmath``.  The
per-target kernels release the GIL and take the range of targets they handle, for
:func:`blockmodel.estimation._threads.run_split`.
"""

from __future__ import annotations

import numpy as np
from numba import njit

_CACHE = True


def group_rows(rows: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Order rows (m, k) int64 so that identical rows are contiguous; returns (order, group
    starts).

    Rows are hashed (FNV-1a over their entries) and sorted by hash (stable); a group ends
    wherever a row differs from the one before, so a hash collision can only split a group,
    never merge different rows.  The sort is numpy's: compiling one costs seconds.
    """
    rows = np.ascontiguousarray(rows, dtype=np.int64)
    order = np.argsort(_row_hashes(rows), kind="stable").astype(np.int64)
    return order, _group_starts(rows, order)


@njit(cache=_CACHE)
def _row_hashes(rows):
    m, k = rows.shape
    h = np.empty(m, dtype=np.uint64)
    prime = np.uint64(1099511628211)
    for t in range(m):
        x = np.uint64(14695981039346656037)
        for c in range(k):
            x = (x ^ np.uint64(rows[t, c])) * prime
        h[t] = x
    return h


@njit(cache=_CACHE)
def _group_starts(rows, order):
    m, k = rows.shape
    starts = np.empty(m + 1, dtype=np.int64)
    n = 0
    for p in range(m):
        new = p == 0
        if not new:
            a, b = order[p - 1], order[p]
            for c in range(k):
                if rows[a, c] != rows[b, c]:
                    new = True
                    break
        if new:
            starts[n] = p
            n += 1
    starts[n] = m
    return starts[: n + 1].copy()


@njit(cache=_CACHE, nogil=True)
def summarise_neighbours(
    first,
    last,
    index,
    count,
    distance,
    samples,
    targets,
    values,
    hole_codes,
    power,
    n_holes,
    mean_distance,
    nearest,
    inverse_distance,
):
    """Per target ``first .. last - 1``: distinct holes, mean Euclidean distance (metres),
    nearest sample value and inverse-distance estimate (anisotropic distance to the given
    power).

    ``index`` and ``distance`` are ordered by increasing anisotropic distance.
    """
    for t in range(first, last):
        k = count[t]
        holes = np.empty(k, dtype=np.int64)
        dsum = 0.0
        wsum = 0.0
        vsum = 0.0
        exact = -1
        for i in range(k):
            s = index[t, i]
            holes[i] = hole_codes[s]
            dx = samples[s, 0] - targets[t, 0]
            dy = samples[s, 1] - targets[t, 1]
            dz = samples[s, 2] - targets[t, 2]
            dsum += np.sqrt(dx * dx + dy * dy + dz * dz)
            d = distance[t, i]
            if d <= 1e-12:
                if exact < 0:
                    exact = s
            else:
                w = 1.0 / d**power
                wsum += w
                vsum += w * values[s]
        distinct = 0  # a plain count (a neighbourhood is small; a sort costs compile time)
        for i in range(k):
            seen = False
            for j in range(i):
                if holes[j] == holes[i]:
                    seen = True
                    break
            if not seen:
                distinct += 1
        n_holes[t] = distinct
        mean_distance[t] = dsum / k
        nearest[t] = values[index[t, 0]]
        inverse_distance[t] = values[exact] if exact >= 0 else vsum / wsum


@njit(cache=_CACHE, nogil=True)
def select_in_groups(
    first,
    last,
    group_of,
    offsets,
    candidates,
    samples_t,
    targets_t,
    hole_of,
    n_holes,
    max_per_hole,
    max_per_octant,
    skip_coincident,
    out,
    distance,
    counts,
    octants_filled,
):
    """Per target ``first .. last - 1``: the samples of its group's candidate list inside
    the unit sphere, by increasing distance (ties by sample index), then the per-hole and
    per-octant limits, until ``k = out.shape[1]`` are chosen.

    The samples inside are walked in that order without a full sort: they are placed in
    buckets of equal volume of the sphere (by the cube of the distance, which keeps the
    order), and a bucket is sorted (insertion) only when the walk reaches it.

    Parameters
    ----------
    group_of : (m,) int64, the group of each target
    offsets : (g + 1,) int64, group g's candidates are ``candidates[offsets[g]:offsets[g+1]]``
        (every sample within reach of any target of the group)
    samples_t, targets_t : (n, 3), (m, 3) float64, the search frame
    hole_of : (n,) int64, hole code of each sample
    n_holes : int, more than the largest hole code
    max_per_hole, max_per_octant : int (<= 0 means no limit)
    skip_coincident : bool, leave out a sample at the target itself
    out : (m, k) int64, chosen indices (written), padded with n
    distance : (m, k) float64, their distances (written), inf where padded
    counts : (m,) int64, how many were chosen (written)
    octants_filled : (m,) int64, octants holding a chosen sample (written)
    """
    n = hole_of.shape[0]
    k_max = out.shape[1]
    longest = 0
    for t in range(first, last):
        longest = max(longest, offsets[group_of[t] + 1] - offsets[group_of[t]])
    # work arrays for the longest candidate list, reused by every target
    dist = np.empty(longest)
    near = np.empty(longest, dtype=np.int64)
    order = np.empty(longest, dtype=np.int64)
    starts = np.empty(longest + 1, dtype=np.int64)
    bucket = np.empty(longest, dtype=np.int64)
    # samples chosen per hole code for the current target (valid where stamped with it)
    hole_stamp = np.full(n_holes, -1, dtype=np.int64)
    hole_count = np.empty(n_holes, dtype=np.int64)
    octant_count = np.empty(8, dtype=np.int64)
    for t in range(first, last):
        g = group_of[t]
        a, b = offsets[g], offsets[g + 1]
        k = 0
        for c in range(a, b):
            s = candidates[c]
            dx = samples_t[s, 0] - targets_t[t, 0]
            dy = samples_t[s, 1] - targets_t[t, 1]
            dz = samples_t[s, 2] - targets_t[t, 2]
            d = np.sqrt(dx * dx + dy * dy + dz * dz)
            if d <= 1.0 + 1e-12 and not (skip_coincident and d <= 1e-12):
                dist[k] = d
                near[k] = s
                k += 1
        _buckets_by_volume(dist, k, order, starts, bucket)
        octant_count[:] = 0
        used = 0
        for b_i in range(k):
            lo, hi = starts[b_i], starts[b_i + 1]
            _sort_bucket(order, lo, hi, dist, near)
            for c in range(lo, hi):
                s = near[order[c]]
                h = hole_of[s]
                if max_per_hole > 0 and hole_stamp[h] == t and hole_count[h] >= max_per_hole:
                    continue
                octant = 0
                if samples_t[s, 0] - targets_t[t, 0] < 0.0:
                    octant += 1
                if samples_t[s, 1] - targets_t[t, 1] < 0.0:
                    octant += 2
                if samples_t[s, 2] - targets_t[t, 2] < 0.0:
                    octant += 4
                if max_per_octant > 0 and octant_count[octant] >= max_per_octant:
                    continue
                octant_count[octant] += 1
                if max_per_hole > 0:
                    if hole_stamp[h] == t:
                        hole_count[h] += 1
                    else:
                        hole_stamp[h] = t
                        hole_count[h] = 1
                out[t, used] = s
                distance[t, used] = dist[order[c]]
                used += 1
                if used == k_max:
                    break
            if used == k_max:
                break
        counts[t] = used
        filled = 0
        for o in range(8):
            if octant_count[o] > 0:
                filled += 1
        octants_filled[t] = filled
        for c in range(used, k_max):
            out[t, c] = n
            distance[t, c] = np.inf


@njit(cache=_CACHE, inline="always")
def _buckets_by_volume(dist, k, order, starts, bucket):
    """Positions 0 .. k - 1 of ``dist`` (all in [0, 1 + 1e-12]) placed in k buckets by
    ``floor(k d^3)``, which never puts a larger distance in an earlier bucket: the
    positions by bucket into ``order[:k]``, the bucket starts into ``starts[:k + 1]``
    (``bucket``: work space of k)."""
    for j in range(k + 1):
        starts[j] = 0
    for i in range(k):
        d = dist[i]
        bucket[i] = min(int(d * d * d * k), k - 1)
        starts[bucket[i] + 1] += 1
    for j in range(k):
        starts[j + 1] += starts[j]
    # fill each bucket from its start, then step the starts back one bucket
    for i in range(k):
        order[starts[bucket[i]]] = i
        starts[bucket[i]] += 1
    for j in range(k, 0, -1):
        starts[j] = starts[j - 1]
    starts[0] = 0


@njit(cache=_CACHE, inline="always")
def _sort_bucket(order, lo, hi, dist, near):
    """Insertion sort of ``order[lo:hi]`` by (dist, near)."""
    for i in range(lo + 1, hi):
        x = order[i]
        j = i
        while j > lo:
            y = order[j - 1]
            if dist[y] < dist[x] or (dist[y] == dist[x] and near[y] < near[x]):
                break
            order[j] = y
            j -= 1
        order[j] = x


@njit(cache=_CACHE, nogil=True)
def order_by_centre(first, last, offsets, candidates, samples_t, centres, centre_distance):
    """Per group ``first .. last - 1``: sort its candidates (``candidates[offsets[g]:
    offsets[g + 1]]``, in place) by their distance from the group's centre (g, 3), written
    to ``centre_distance`` beside them."""
    for g in range(first, last):
        a, b = offsets[g], offsets[g + 1]
        for c in range(a, b):
            s = candidates[c]
            dx = samples_t[s, 0] - centres[g, 0]
            dy = samples_t[s, 1] - centres[g, 1]
            dz = samples_t[s, 2] - centres[g, 2]
            centre_distance[c] = np.sqrt(dx * dx + dy * dy + dz * dz)
        _shell_sort(centre_distance, candidates, a, b)


# gaps of the Shell sort (Ciura's sequence, extended by 2.25 times)
_GAPS = np.array([1, 4, 10, 23, 57, 132, 301, 701, 1577, 3548, 7983, 17961, 40412, 90927])


@njit(cache=_CACHE, inline="always")
def _shell_sort(keys, items, lo, hi):
    """Sort ``keys[lo:hi]`` ascending in place, moving ``items[lo:hi]`` with them (a hand
    written sort: numba's own argsort costs seconds to compile)."""
    n = hi - lo
    g = 0
    while g + 1 < _GAPS.shape[0] and _GAPS[g + 1] < n:
        g += 1
    while g >= 0:
        gap = _GAPS[g]
        for i in range(lo + gap, hi):
            key = keys[i]
            item = items[i]
            j = i
            while j - gap >= lo and keys[j - gap] > key:
                keys[j] = keys[j - gap]
                items[j] = items[j - gap]
                j -= gap
            keys[j] = key
            items[j] = item
        g -= 1


@njit(cache=_CACHE, nogil=True)
def nearest_in_groups(
    first,
    last,
    group_of,
    offsets,
    candidates,
    samples_t,
    targets_t,
    skip_coincident,
    centre_distance,
    half,
    out,
    distance,
    counts,
):
    """Per target ``first .. last - 1``: the ``k = out.shape[1]`` nearest samples of its
    group's candidate list inside the unit sphere, by increasing distance (ties by sample
    index), kept by insertion into a sorted list of k.

    The candidates come sorted by their distance D from the group's centre
    (:func:`order_by_centre`), so they mostly arrive in order, and a target at most
    ``half`` from the centre stops once ``D - half`` exceeds its k-th distance: no later
    candidate can be nearer (triangle inequality; a margin of 1e-9 covers rounding).

    Parameters are as in :func:`select_in_groups`; ``centre_distance`` as written by
    :func:`order_by_centre`; ``distance`` (m, k) float64 receives the distances (inf where
    padded), ``out`` is padded with n.
    """
    n = samples_t.shape[0]
    k = out.shape[1]
    for t in range(first, last):
        a, b = offsets[group_of[t]], offsets[group_of[t] + 1]
        tx, ty, tz = targets_t[t, 0], targets_t[t, 1], targets_t[t, 2]
        used = 0
        worst = 1.0 + 1e-12
        for c in range(a, b):
            if used == k and centre_distance[c] - half > worst + 1e-9:
                break
            s = candidates[c]
            dx = samples_t[s, 0] - tx
            dy = samples_t[s, 1] - ty
            dz = samples_t[s, 2] - tz
            d = np.sqrt(dx * dx + dy * dy + dz * dz)
            if d > worst or (skip_coincident and d <= 1e-12):
                continue
            if used == k and d == worst and s > out[t, k - 1]:
                continue
            i = used if used < k else k - 1
            while i > 0 and (
                distance[t, i - 1] > d or (distance[t, i - 1] == d and out[t, i - 1] > s)
            ):
                distance[t, i] = distance[t, i - 1]
                out[t, i] = out[t, i - 1]
                i -= 1
            distance[t, i] = d
            out[t, i] = s
            if used < k:
                used += 1
            if used == k:
                worst = distance[t, k - 1]
        counts[t] = used
        for c in range(used, k):
            out[t, c] = n
            distance[t, c] = np.inf
