"""Compiled pass behind :mod:`metasim.statistics.sorted_rows`: quantiles, maximum and shares beyond
thresholds read off rows sorted by numpy (numpy's linear quantile: virtual index (n − 1)·q)."""

from __future__ import annotations

import math

import numba


@numba.njit(cache=True, inline="always")
def _quantile_of_sorted(row, n, q):
    """numpy's linear quantile q of the sorted row[:n]."""
    virtual = (n - 1) * q
    previous = min(max(int(math.floor(virtual)), 0), n - 1)
    following = min(previous + 1, n - 1)
    a, b = row[previous], row[following]
    gamma = virtual - previous
    diff = b - a
    return b - diff * (1.0 - gamma) if gamma >= 0.5 else a + diff * gamma


@numba.njit(cache=True, inline="always")
def _count_above(row, n, threshold):
    """How many of the sorted row[:n] are > threshold (binary search)."""
    lo, hi = 0, n
    while lo < hi:
        mid = (lo + hi) // 2
        if row[mid] > threshold:
            hi = mid
        else:
            lo = mid + 1
    return n - lo


@numba.njit(cache=True, inline="always")
def _summarise_sorted(row, thresholds, out, shares, g):
    n = row.shape[0]
    out[1, g] = _quantile_of_sorted(row, n, 0.5)
    out[2, g] = _quantile_of_sorted(row, n, 0.95)
    out[3, g] = row[n - 1]
    for t in range(thresholds.shape[0]):
        shares[t, g] = _count_above(row, n, thresholds[t]) / n


@numba.njit(cache=True, nogil=True, parallel=True)
def sorted_rows(rows, thresholds, out, shares):
    for g in numba.prange(rows.shape[0]):
        _summarise_sorted(rows[g], thresholds, out, shares, g)


@numba.njit(cache=True, nogil=True)
def sorted_one(row, thresholds, out, shares, g):
    _summarise_sorted(row, thresholds, out, shares, g)
