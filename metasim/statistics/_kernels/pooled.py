"""Compiled passes behind :mod:`metasim.statistics.resampling`: pooled statistics and their replicates.

A *pool* is every value of some observers (``members``) over all stimuli: an (observer, stimulus)
array read row by row, each value carrying its observer's weight. The quantiles of a pool, for the
full sample and for every resample of the observers at once, are found without sorting the pool:

1. one pass bins the values (a histogram of weights over ``FINE`` equal bins, and per observer a
   histogram over ``COARSE`` bins) and keeps each observer's sum and counts beyond the thresholds
   (the means and shares need nothing else);
2. the bin holding each quantile is read off the cumulative histogram, and each observer's count
   below it (from its coarse histogram) gives the spread of the resampled quantile's rank;
3. a second pass gathers the values of the bins within a few standard deviations of that rank
   (the *window*, then sorted with their observer ids) and each observer's count below it;
4. per resample, a walk through the sorted window from the full sample's quantile, forwards or
   backwards, adding or removing the resampled weight of each value until the cumulative weight
   meets the target: the walk is as long as the resample's shift, a fraction of the window.

A resample whose order statistic falls outside the window is flagged; the caller computes it from
the whole pool. Every loop runs over observers, stimuli or window values, never in Python.
"""

from __future__ import annotations

import numba
import numpy as np

#: Fine bins of the pool's histogram and coarse bins of each observer's (a coarse bin holds
#: FINE // COARSE fine bins).
FINE = 8192
COARSE = 64
_SHIFT = 7  # FINE // COARSE == 2 ** _SHIFT


@numba.njit(cache=True, inline="always")
def _bin_of(value, low, scale):
    b = int((value - low) * scale)
    return 0 if b < 0 else (FINE - 1 if b >= FINE else b)


@numba.njit(cache=True)
def first_pass(values, members, weights, low, scale, thresholds, hist, hist_count, coarse, sums, above):
    """Fill the fine histogram of weights (FINE) and of counts, each member's coarse histogram
    (M, COARSE), per-member sums (M) and counts above each threshold (M, T); outputs zeroed."""
    n_stimuli = values.shape[1]
    bins = np.empty(n_stimuli, dtype=np.int64)
    for a in range(members.shape[0]):
        row = values[members[a]]
        w = weights[members[a]]
        total = 0.0
        for s in range(n_stimuli):
            total += row[s]
            bins[s] = _bin_of(row[s], low, scale)
        sums[a] = total
        for t in range(thresholds.shape[0]):
            count = 0
            limit = thresholds[t]
            for s in range(n_stimuli):
                count += row[s] > limit
            above[a, t] = count
        for s in range(n_stimuli):
            b = bins[s]
            hist[b] += w
            hist_count[b] += 1
            coarse[a, b >> _SHIFT] += 1.0


@numba.njit(cache=True)
def gather_windows(values, members, low, scale, first_bins, last_bins, offsets, window, owner, below):
    """Gather the values of fine bins first_bins[q]..last_bins[q] of every window q, with their
    member positions, into window / owner at offsets[q] + q onwards (in pool order; numpy sorts
    each window, faster than a compiled sort; one spare slot after each window takes the last
    unkept write), and each member's count of values in bins below each window into below (M, Q)."""
    for q in range(first_bins.shape[0]):
        first, last = first_bins[q], last_bins[q]
        n = offsets[q] + q
        for a in range(members.shape[0]):
            row = values[members[a]]
            count = 0
            for s in range(row.shape[0]):
                b = _bin_of(row[s], low, scale)
                count += b < first
                window[n] = row[s]  # written always, kept only when inside (no branch)
                owner[n] = a
                n += (b >= first) & (b <= last)
            below[a, q] = count


@numba.njit(cache=True)
def walk(owner, resample_weights, reached, centre, targets, out):
    """Position in the window of each resample's order statistic, walking from ``centre``.

    ``resample_weights`` (R, M): each member's weight in each resample; ``reached`` (R): cumulative
    weight up to and including window[centre]; ``targets`` (K, R), ascending in K. Writes (K, R)
    positions into ``out``, -1 where the order statistic lies outside the window.
    """
    m = owner.shape[0]
    for r in range(resample_weights.shape[0]):
        weights = resample_weights[r]
        j = centre
        acc = reached[r]
        for k in range(targets.shape[0]):
            target = targets[k, r]
            if j < 0:
                out[k, r] = -1
                continue
            if acc >= target:  # back while the value before still reaches the target
                while j > 0 and acc - weights[owner[j]] >= target:
                    acc -= weights[owner[j]]
                    j -= 1
                if j == 0 and acc - weights[owner[0]] >= target:
                    j = -1  # reached below the window
            else:
                while acc < target and j < m - 1:
                    j += 1
                    acc += weights[owner[j]]
                if acc < target:
                    j = -1  # not reached inside the window
            out[k, r] = j


@numba.njit(cache=True)
def resample_counts(raw, counts):
    """Fill ``counts`` (R, n, zeroed): how often each of n observers is drawn in each resample,
    from raw 64-bit words.

    Each word gives two 32-bit draws, mapped to 0..n-1 by Lemire's multiply-shift method with
    rejection (exactly uniform). Returns the number of words used, or -1 if ``raw`` ran out (the
    caller draws more).
    """
    n_resamples, n_observers = counts.shape
    n = np.uint64(n_observers)
    limit = np.uint64((1 << 32) % n_observers)  # products whose low half is below this are rejected
    mask = np.uint64(0xFFFFFFFF)
    half = 0
    used = 0
    word = np.uint64(0)
    for r in range(n_resamples):
        drawn = 0
        while drawn < n_observers:
            if half == 0:
                if used == raw.shape[0]:
                    return -1
                word = raw[used]
                used += 1
                draw = word & mask
                half = 1
            else:
                draw = word >> np.uint64(32)
                half = 0
            product = draw * n
            if (product & mask) < limit:
                continue
            counts[r, np.int64(product >> np.uint64(32))] += 1.0
            drawn += 1
    return used


#: Argument types of the kernels as :mod:`metasim.statistics.resampling` calls them (compiled ahead
#: of need by :mod:`metasim._warmup`; ``tests/test_kernels.py`` checks a study calls exactly these).
SIGNATURES = {
    "first_pass": ("float64[:, ::1]", "int64[::1]", "float64[::1]", "float64", "float64", "float64[::1]",
                   "float64[::1]", "int64[::1]", "float64[:, ::1]", "float64[::1]", "float64[:, ::1]"),
    "gather_windows": ("float64[:, ::1]", "int64[::1]", "float64", "float64", "int64[::1]", "int64[::1]",
                       "int64[::1]", "float64[::1]", "int64[::1]", "float64[:, ::1]"),
    "walk": ("int64[::1]", "float64[:, ::1]", "float64[::1]", "int64", "float64[:, ::1]", "int64[:, ::1]"),
    "resample_counts": ("uint64[::1]", "float64[:, ::1]"),
}
