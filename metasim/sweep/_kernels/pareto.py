"""Compiled non-dominated sorting behind :func:`metasim.sweep.pareto.pareto_ranks`.

The efficient non-dominated sort with binary search (Zhang et al. 2015): points taken in
lexicographic order, each put into the first front none of whose members dominates it (fronts
searched by bisection). The fronts' members are kept in blocks of :data:`BLOCK` points (their
values copied in, so a front is scanned from contiguous memory); the scan stops at the first
dominating member. Memory is linear in the points.
"""

from __future__ import annotations

import numba
import numpy as np

BLOCK = 64


@numba.njit(cache=True, inline="always")
def _dominated(values, counts, following, first, front, point, k):
    """Whether a member of ``front`` (all objectives minimised) dominates ``point``."""
    b = first[front]
    while b >= 0:
        for j in range(counts[b]):
            no_worse = True
            better = False
            for c in range(k):
                a = values[b, j, c]
                if a > point[c]:
                    no_worse = False
                    break
                if a < point[c]:
                    better = True
            if no_worse and better:
                return True
        b = following[b]
    return False


@numba.njit(cache=True, nogil=True)
def sorted_ranks(points, order, ranks):
    """ranks[order[i]] = the front (1 = first) of points[order[i]]; ``points`` (n, k), every
    objective minimised; ``order`` (m,) indexes finite points in lexicographic order (first
    objective, then the next ...). Entries of ``ranks`` not in ``order`` are left as they are.

    Working memory: the fronts' copies of the m points (m × k values) and a few numbers per front
    (the block pool and the front tables grow when needed)."""
    m = order.shape[0]
    k = points.shape[1]
    capacity = m // BLOCK + 16
    values = np.empty((capacity, BLOCK, k))
    counts = np.zeros(capacity, dtype=np.int64)
    following = np.full(capacity, -1, dtype=np.int64)
    room = 64
    first = np.full(room, -1, dtype=np.int64)  # first and last block of each front
    last = np.full(room, -1, dtype=np.int64)
    blocks = 0
    fronts = 0
    for i in range(m):
        point = points[order[i]]
        low, high = 0, fronts
        while low < high:
            mid = (low + high) // 2
            if _dominated(values, counts, following, first, mid, point, k):
                low = mid + 1
            else:
                high = mid
        if low == fronts:
            fronts += 1
            if fronts > room:  # more fronts than the tables hold
                room *= 2
                wider = np.full(room, -1, dtype=np.int64)
                wider[:fronts - 1] = first[:fronts - 1]
                first = wider
                wider = np.full(room, -1, dtype=np.int64)
                wider[:fronts - 1] = last[:fronts - 1]
                last = wider
        b = last[low]
        if b < 0 or counts[b] == BLOCK:
            if blocks == capacity:  # grow the block pool (by a quarter: every front has one part-filled block)
                capacity += capacity // 4 + 16
                grown = np.empty((capacity, BLOCK, k))
                grown[:blocks] = values[:blocks]
                values = grown
                more = np.zeros(capacity, dtype=np.int64)
                more[:blocks] = counts[:blocks]
                counts = more
                linked = np.full(capacity, -1, dtype=np.int64)
                linked[:blocks] = following[:blocks]
                following = linked
            if b < 0:
                first[low] = blocks
            else:
                following[b] = blocks
            last[low] = blocks
            b = blocks
            blocks += 1
        for c in range(k):
            values[b, counts[b], c] = point[c]
        counts[b] += 1
        ranks[order[i]] = low + 1
