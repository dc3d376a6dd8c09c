"""Compiled summary statistics of many rows: mean, median, 95th percentile and maximum.

Equal to numpy's ``mean``, ``quantile`` (default "linear" method: virtual index (n − 1)·q, the
same interpolation formula) and ``max`` to rounding, for rows without NaN; the rows are summarised
in parallel, each with two selections (quickselect) instead of a sort.
"""

from __future__ import annotations

import math

import numba
import numpy as np


@numba.njit(cache=True, inline="always")
def _select(buf, lo, hi, k):
    """Rearrange buf[lo:hi] so that buf[k] is the k-th smallest, smaller ones before it (Hoare)."""
    while hi - lo > 1:
        mid = (lo + hi - 1) // 2
        a, b, c = buf[lo], buf[mid], buf[hi - 1]
        pivot = max(min(a, b), min(max(a, b), c))  # median of three
        i, j = lo, hi - 1
        while i <= j:
            while buf[i] < pivot:
                i += 1
            while buf[j] > pivot:
                j -= 1
            if i <= j:
                buf[i], buf[j] = buf[j], buf[i]
                i += 1
                j -= 1
        if k <= j:
            hi = j + 1
        elif k >= i:
            lo = i
        else:
            return


@numba.njit(cache=True, inline="always")
def _quantile_sorted_part(buf, n, q):
    """numpy's linear quantile q of buf[:n] (buf is rearranged)."""
    virtual = (n - 1) * q
    previous = int(math.floor(virtual))
    previous = min(max(previous, 0), n - 1)
    _select(buf, 0, n, previous)
    a = buf[previous]
    following = min(previous + 1, n - 1)
    b = a
    if following > previous:
        b = buf[following]
        for m in range(following + 1, n):  # the next order statistic: minimum of the upper part
            b = min(b, buf[m])
    gamma = virtual - previous
    diff = b - a
    return b - diff * (1.0 - gamma) if gamma >= 0.5 else a + diff * gamma


@numba.njit(cache=True, parallel=True)
def _segment_stats(flat, starts, stops, thresholds, out, shares):
    """Per segment flat[starts[g]:stops[g]] (no NaN): out[:, g] = mean, median, p95, max and
    shares[t, g] = share of its values above thresholds[t]."""
    for g in numba.prange(starts.shape[0]):
        n = stops[g] - starts[g]
        buf = flat[starts[g]:stops[g]].copy()
        total = 0.0
        top = buf[0]
        for m in range(n):
            total += buf[m]
            top = max(top, buf[m])
        for t in range(thresholds.shape[0]):
            above = 0
            for m in range(n):
                above += buf[m] > thresholds[t]
            shares[t, g] = above / n
        out[0, g] = total / n
        out[3, g] = top
        out[2, g] = _quantile_sorted_part(buf, n, 0.95)
        out[1, g] = _quantile_sorted_part(buf, n, 0.5)


def segment_stats(flat: np.ndarray, lengths, thresholds=()) -> tuple[np.ndarray, np.ndarray]:
    """Statistics of consecutive segments of ``flat`` with the given (positive) lengths.

    Returns (4, S) mean, median, p95, max and (T, S) shares of values above each threshold.
    """
    flat = np.ascontiguousarray(flat, dtype=float).ravel()
    lengths = np.asarray(lengths, dtype=np.int64)
    stops = np.cumsum(lengths)
    starts = stops - lengths
    thresholds = np.asarray(thresholds, dtype=float).ravel()
    out = np.empty((4, lengths.size))
    shares = np.empty((thresholds.size, lengths.size))
    if lengths.size:
        _segment_stats(flat, starts, stops, thresholds, out, shares)
    return out, shares


def row_stats(rows: np.ndarray, thresholds=()) -> np.ndarray | tuple[np.ndarray, np.ndarray]:
    """(4, R) mean, median, p95, max of each row of a 2-D float array without NaN (and, with
    ``thresholds``, the (T, R) shares of each row above them)."""
    rows = np.ascontiguousarray(rows, dtype=float)
    if rows.shape[1] == 0:
        out = np.full((4, rows.shape[0]), np.nan)
        return (out, np.full((len(thresholds), rows.shape[0]), np.nan)) if len(thresholds) else out
    out, shares = segment_stats(rows, np.full(rows.shape[0], rows.shape[1]), thresholds)
    return (out, shares) if len(thresholds) else out
