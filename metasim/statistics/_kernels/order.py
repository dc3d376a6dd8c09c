"""Compiled summaries of unsorted rows: numpy's mean, linear quantiles and maximum, without a sort.

The statistics layer's definitions for equal weights and no NaN (:mod:`metasim.statistics.summaries`),
the compiled pass behind :mod:`metasim.statistics.selection`; :func:`summarise` is also called, per
design, by the sweep's compiled pass (:mod:`metasim.sweep._kernels.designs`), so a sweep's
statistics are this layer's.

* :func:`numpy_sum` adds in numpy's own order (pairwise: blocks of at most 128 values summed in
  eight lanes, halves split on multiples of eight), so a mean here equals ``numpy.mean`` of the
  same contiguous values bit for bit.
* :func:`order_statistics` finds exact order statistics (the k-th smallest values) by bucket
  selection: one pass counts the values per bucket of [min, max] (the bucket of a value never
  decreases with the value), the buckets holding the wanted ranks are gathered and only they are
  sorted. For non-negative differences this is several times faster than sorting the row; the
  values found are the sorted row's, so the quantiles equal numpy's "linear" method (virtual index
  (n − 1)·q, the same interpolation formula as :mod:`metasim.statistics._kernels.rowstats`).
* :func:`summarise_groups` does the same selection for several sets drawn from one array at once
  (all values, the rows of each group, the array with a few values replaced) with one count and
  one gather pass: the sweep's statistics over all pairs, per age band and of the metamerism index.

Rows must not hold NaN (callers check and take numpy's route otherwise).
"""

from __future__ import annotations

import math

import numba
import numpy as np

_BUCKETS = 2048
_SORT_BELOW = 256  # rows shorter than this are simply sorted
_QUANTILES = (0.5, 0.95)


@numba.njit(cache=True, inline="always")
def _block_sum(x, start, n):
    """numpy's pairwise_sum for n <= 128 values x[start:start + n]."""
    if n < 8:
        total = 0.0
        for i in range(n):
            total += x[start + i]
        return total
    r0, r1, r2, r3 = x[start], x[start + 1], x[start + 2], x[start + 3]
    r4, r5, r6, r7 = x[start + 4], x[start + 5], x[start + 6], x[start + 7]
    i = 8
    stop = n - n % 8
    while i < stop:
        r0 += x[start + i]
        r1 += x[start + i + 1]
        r2 += x[start + i + 2]
        r3 += x[start + i + 3]
        r4 += x[start + i + 4]
        r5 += x[start + i + 5]
        r6 += x[start + i + 6]
        r7 += x[start + i + 7]
        i += 8
    total = ((r0 + r1) + (r2 + r3)) + ((r4 + r5) + (r6 + r7))
    while i < n:
        total += x[start + i]
        i += 1
    return total


@numba.njit(cache=True)
def numpy_sum(x, start, n):
    """Σ x[start:start + n] in numpy's pairwise order (``numpy.add.reduce`` of contiguous float64).

    numpy halves a span longer than 128 at a multiple of 8 and adds the two sums; the same tree is
    walked here with an explicit stack (numba's cached code does not link self-recursion)."""
    if n <= 128:
        return _block_sum(x, start, n)
    spans = np.empty((64, 3), dtype=np.int64)  # start, length, stage (0: new, 1: left pushed, 2: both)
    sums = np.empty(64)
    top, held = 0, 0
    spans[0, 0], spans[0, 1], spans[0, 2] = start, n, 0
    while top >= 0:
        first, length, stage = spans[top, 0], spans[top, 1], spans[top, 2]
        if length <= 128:
            sums[held] = _block_sum(x, first, length)
            held += 1
            top -= 1
            continue
        half = length // 2
        half -= half % 8  # numpy splits on a multiple of its unroll factor
        if stage == 0:
            spans[top, 2] = 1
            top += 1
            spans[top, 0], spans[top, 1], spans[top, 2] = first, half, 0
        elif stage == 1:
            spans[top, 2] = 2
            top += 1
            spans[top, 0], spans[top, 1], spans[top, 2] = first + half, length - half, 0
        else:
            held -= 1
            sums[held - 1] = sums[held - 1] + sums[held]
            top -= 1
    return sums[0]


@numba.njit(cache=True)
def _sort_select(x, start, n, ranks, out):
    values = np.sort(x[start:start + n])
    for j in range(ranks.shape[0]):
        out[j] = values[ranks[j]]


@numba.njit(cache=True, fastmath={"nnan", "ninf"})
def _extremes(x, start, n):
    """min and max of x[start:start + n] (no NaN), in eight lanes so the compares pipeline."""
    low = np.full(8, x[start])
    high = np.full(8, x[start])
    stop = start + n - n % 8
    for i in range(start, stop, 8):
        for k in range(8):
            v = x[i + k]
            low[k] = v if v < low[k] else low[k]
            high[k] = v if v > high[k] else high[k]
    lo, hi = low.min(), high.max()
    for i in range(stop, start + n):
        v = x[i]
        lo = v if v < lo else lo
        hi = v if v > hi else hi
    return lo, hi


@numba.njit(cache=True, inline="always")
def _bucket(v, lo, scale):
    b = int((v - lo) * scale)
    return b if b < _BUCKETS - 1 else _BUCKETS - 1


@numba.njit(cache=True)
def order_statistics(x, start, n, ranks, out):
    """out[j] = the ranks[j]-th smallest of x[start:start + n] (0-based; ranks ascending, < n; no NaN)."""
    if n < _SORT_BELOW:
        _sort_select(x, start, n, ranks, out)
        return
    lo, hi = _extremes(x, start, n)
    if not hi > lo:  # all equal
        for j in range(ranks.shape[0]):
            out[j] = lo
        return
    scale = _BUCKETS / (hi - lo)
    if not math.isfinite(scale):
        _sort_select(x, start, n, ranks, out)
        return
    # counts per bucket, in four interleaved tables (a run of equal buckets does not wait on itself);
    # the bucket never decreases with the value
    tables = np.zeros((4, _BUCKETS), dtype=np.int64)
    quarter = n // 4
    for i in range(quarter):
        k = start + 4 * i
        tables[0, _bucket(x[k], lo, scale)] += 1
        tables[1, _bucket(x[k + 1], lo, scale)] += 1
        tables[2, _bucket(x[k + 2], lo, scale)] += 1
        tables[3, _bucket(x[k + 3], lo, scale)] += 1
    for i in range(start + 4 * quarter, start + n):
        tables[0, _bucket(x[i], lo, scale)] += 1
    # the bucket of each wanted rank and how many values lie below that bucket
    m = ranks.shape[0]
    bucket_of = np.empty(m, dtype=np.int64)
    before = np.empty(m, dtype=np.int64)
    below, b, j = 0, 0, 0
    count = tables[0, 0] + tables[1, 0] + tables[2, 0] + tables[3, 0]
    while j < m:
        if ranks[j] < below + count:
            bucket_of[j], before[j] = b, below
            j += 1
        else:
            below += count
            b += 1
            count = tables[0, b] + tables[1, b] + tables[2, b] + tables[3, b]
    # the distinct wanted buckets (ranks ascending: equal buckets are neighbours), gathered and sorted
    wanted = np.full(_BUCKETS, -1, dtype=np.int64)  # bucket -> slot
    offsets = np.zeros(m + 1, dtype=np.int64)
    slot_of = np.empty(m, dtype=np.int64)
    slots = 0
    for j in range(m):
        b = bucket_of[j]
        if wanted[b] < 0:
            wanted[b] = slots
            offsets[slots + 1] = offsets[slots] + tables[0, b] + tables[1, b] + tables[2, b] + tables[3, b]
            slots += 1
        slot_of[j] = wanted[b]
    gathered = np.empty(offsets[slots])
    fill = offsets[:slots].copy()
    for i in range(start, start + n):
        v = x[i]
        k = wanted[_bucket(v, lo, scale)]
        if k >= 0:
            gathered[fill[k]] = v
            fill[k] += 1
    for k in range(slots):
        gathered[offsets[k]:offsets[k + 1]].sort()
    for j in range(m):
        k = slot_of[j]
        out[j] = gathered[offsets[k] + ranks[j] - before[j]]


@numba.njit(cache=True, inline="always")
def _linear(a, b, virtual, previous):
    """numpy's linear interpolation between the order statistics a (at previous) and b."""
    gamma = virtual - previous
    diff = b - a
    return b - diff * (1.0 - gamma) if gamma >= 0.5 else a + diff * gamma


@numba.njit(cache=True, inline="always")
def _wanted_ranks(n, ranks, virtual):
    """ranks (5,): the order statistics :func:`summarise` reads for n values (the two around each
    quantile's virtual index (n − 1)·q, then the maximum); virtual (2,): the virtual indexes."""
    for q in range(2):
        virtual[q] = (n - 1) * _QUANTILES[q]
        previous = min(max(int(math.floor(virtual[q])), 0), n - 1)
        ranks[2 * q] = previous
        ranks[2 * q + 1] = min(previous + 1, n - 1)
    ranks[4] = n - 1


@numba.njit(cache=True)
def summarise(x, start, n, out):
    """out[0:4] = mean, median, 95th percentile (numpy's linear method) and maximum of x[start:start + n]."""
    ranks = np.empty(5, dtype=np.int64)
    virtual = np.empty(2)
    _wanted_ranks(n, ranks, virtual)
    found = np.empty(5)
    order_statistics(x, start, n, ranks, found)
    out[0] = numpy_sum(x, start, n) / n
    for q in range(2):
        out[1 + q] = _linear(found[2 * q], found[2 * q + 1], virtual[q], ranks[2 * q])
    out[3] = found[4]


@numba.njit(cache=True)
def summarise_in_order(x, start, n, out):
    """As :func:`summarise`, the mean added value after value: numpy's order when it reduces an
    axis that is not the last (the observers of an (observer, stimulus) array, say)."""
    summarise(x, start, n, out)
    total = 0.0
    for i in range(start, start + n):
        total += x[i]
    out[0] = total / n


@numba.njit(cache=True, nogil=True)
def summarise_rows(rows, out, start, stop):
    """out[r] = mean, median, p95, max of rows[r] for r in start:stop (a C-contiguous (R, n) float
    array); a serial loop that releases the GIL, run in parts on the kernel threads by the caller."""
    n = rows.shape[1]
    flat = rows.reshape(-1)
    for r in range(start, stop):
        summarise(flat, r * n, n, out[r])


@numba.njit(cache=True)
def summarise_groups(values, group_of, row, replaced, replacement, with_groups, overall, groups, changed):
    """:func:`summarise` of several sets drawn from one array of values, with one bucket count and
    one gather pass shared by all of them, each result equal to :func:`summarise` of the set alone.

    values (R·row,): R rows of ``row`` values; group_of (R,): the group of each row (−1: none);
    replaced (K,) ascending positions of values and replacement (K,): the values there in a second
    array (``values`` with those positions replaced). Writes the median, 95th percentile and
    maximum (items 1-3 of :func:`summarise`'s four; the mean, item 0, is the caller's: it needs each
    set's values in order) to ``overall`` (4,) for all values, ``groups`` (4, G) for the rows of
    each group (NaN for an empty group; only if ``with_groups``) and ``changed`` (4,) for the second
    array (only if K > 0). Values must not be NaN.
    """
    n = values.shape[0]
    rows = n // row
    n_groups = groups.shape[1] if with_groups else 0
    k_replaced = replaced.shape[0]
    sets = 1 + n_groups + (1 if k_replaced > 0 else 0)  # set 0: all values; 1..G: groups; last: changed
    lo, hi = _extremes(values, 0, n)
    for j in range(k_replaced):
        v = replacement[j]
        lo = v if v < lo else lo
        hi = v if v > hi else hi
    scale = _BUCKETS / (hi - lo) if hi > lo else 0.0
    if not math.isfinite(scale):
        scale = 0.0
    # counts per bucket of each group's rows (and of rows in no group), then of the sets
    tables = np.zeros((n_groups + 1, _BUCKETS), dtype=np.int64)
    bucket = np.empty(n, dtype=np.int16)
    for r in range(rows):
        g = group_of[r] if with_groups and group_of[r] >= 0 else n_groups
        table = tables[g]
        for i in range(r * row, (r + 1) * row):
            b = _bucket(values[i], lo, scale)
            bucket[i] = b
            table[b] += 1
    counts = np.zeros((sets, _BUCKETS), dtype=np.int64)
    sizes = np.zeros(sets, dtype=np.int64)
    for g in range(n_groups + 1):
        for b in range(_BUCKETS):
            counts[0, b] += tables[g, b]
    sizes[0] = n
    for g in range(n_groups):
        counts[1 + g] = tables[g]
        sizes[1 + g] = tables[g].sum()
    if k_replaced > 0:
        last = sets - 1
        counts[last] = counts[0]
        for j in range(k_replaced):
            counts[last, bucket[replaced[j]]] -= 1
            counts[last, _bucket(replacement[j], lo, scale)] += 1
        sizes[last] = n
    # the bucket of each wanted rank of each set; slots for the distinct (set, bucket) pairs
    ranks = np.empty((sets, 5), dtype=np.int64)
    virtual = np.empty((sets, 2))
    slot_of = np.full((sets, 5), -1, dtype=np.int64)
    before = np.zeros((sets, 5), dtype=np.int64)
    wanted = np.full((sets, _BUCKETS), -1, dtype=np.int64)  # (set, bucket) -> slot
    offsets = np.zeros(5 * sets + 1, dtype=np.int64)
    slots = 0
    for t in range(sets):
        if sizes[t] == 0:
            continue
        _wanted_ranks(sizes[t], ranks[t], virtual[t])
        below, b, j = 0, 0, 0
        while j < 5:
            if ranks[t, j] < below + counts[t, b]:
                if wanted[t, b] < 0:
                    wanted[t, b] = slots
                    offsets[slots + 1] = offsets[slots] + counts[t, b]
                    slots += 1
                slot_of[t, j] = wanted[t, b]
                before[t, j] = below
                j += 1
            else:
                below += counts[t, b]
                b += 1
    gathered = np.empty(offsets[slots])
    fill = offsets[:slots].copy()
    last = sets - 1
    j_next = 0  # the next replaced position
    for r in range(rows):
        g = group_of[r] if with_groups and group_of[r] >= 0 else -1
        for i in range(r * row, (r + 1) * row):
            b = bucket[i]
            v = values[i]
            k = wanted[0, b]
            if k >= 0:
                gathered[fill[k]] = v
                fill[k] += 1
            if g >= 0:
                k = wanted[1 + g, b]
                if k >= 0:
                    gathered[fill[k]] = v
                    fill[k] += 1
            if k_replaced > 0:
                if j_next < k_replaced and replaced[j_next] == i:
                    j_next += 1
                else:
                    k = wanted[last, b]
                    if k >= 0:
                        gathered[fill[k]] = v
                        fill[k] += 1
    for j in range(k_replaced):
        k = wanted[last, _bucket(replacement[j], lo, scale)]
        if k >= 0:
            gathered[fill[k]] = replacement[j]
            fill[k] += 1
    for k in range(slots):
        gathered[offsets[k]:offsets[k + 1]].sort()
    found = np.empty(5)
    result = np.full((sets, 3), np.nan)  # median, p95, max of each set
    for t in range(sets):
        if sizes[t] == 0:
            continue
        for j in range(5):
            k = slot_of[t, j]
            found[j] = gathered[offsets[k] + ranks[t, j] - before[t, j]]
        for q in range(2):
            result[t, q] = _linear(found[2 * q], found[2 * q + 1], virtual[t, q], ranks[t, 2 * q])
        result[t, 2] = found[4]
    for q in range(3):
        overall[1 + q] = result[0, q]
        for g in range(n_groups):
            groups[1 + q, g] = result[1 + g, q]
        if k_replaced > 0:
            changed[1 + q] = result[sets - 1, q]


#: Argument types of the kernels as :mod:`metasim.statistics.selection` calls them (compiled ahead of
#: need by :mod:`metasim._warmup` in the test suite's warm-up).
SIGNATURES = {
    "summarise_rows": ("float64[:, ::1]", "float64[:, ::1]", "int64", "int64"),
}
