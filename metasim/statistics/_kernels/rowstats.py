"""Compiled pass behind :mod:`metasim.statistics.sorted_rows`: quantiles, maximum and shares beyond
thresholds read off rows sorted by numpy (numpy's linear quantile: virtual index (n − 1)·q)."""

from __future__ import annotations

import math

import numba
import numpy as np

from metasim._threads import run_in_parts
from metasim.colorimetry._kernels.types import writable


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


@numba.njit(cache=True, nogil=True)
def _sorted_rows(ordered, by_column, thresholds, out, shares, start, stop):
    for g in range(start, stop):
        row = ordered[:, g] if by_column else ordered[g]
        _summarise_sorted(row, thresholds, out, shares, g)


def sorted_rows(ordered: np.ndarray, thresholds: np.ndarray, out: np.ndarray, shares: np.ndarray, *,
                by_column: bool = False) -> None:
    """out[1:4, g] (median, p95, max) and shares[t, g] beyond thresholds[t] of every sorted row g of
    ``ordered`` (2-D; with ``by_column`` its columns), rows on the kernel threads."""
    if ordered.flags.f_contiguous and not ordered.flags.c_contiguous:  # read its transpose: no copy
        ordered, by_column = ordered.T, not by_column
    count = ordered.shape[1] if by_column else ordered.shape[0]
    run_in_parts(_sorted_rows, count, writable(ordered), bool(by_column), writable(thresholds), out, shares)


#: Argument types of the kernels as the entry points above call them (compiled ahead of need by
#: :mod:`metasim._warmup`; ``tests/test_kernels.py`` checks a study calls exactly these).
SIGNATURES = {
    "_sorted_rows": ("float64[:, ::1]", "boolean", "float64[::1]", "float64[:, ::1]", "float64[:, ::1]",
                     "int64", "int64"),
}
