"""Compiled non-dominated sorting behind :func:`metasim.sweep.pareto.pareto_ranks`.

The efficient non-dominated sort with binary search (Zhang et al. 2015): points taken in
lexicographic order, each put into the first front none of whose members dominates it (fronts
searched by bisection). The fronts' members are kept in blocks of :data:`BLOCK` points (their
values copied in, so a front is scanned from contiguous memory); the scan stops at the first
dominating member. The blocks sit in segments of :data:`SEGMENT` blocks, added as the fronts fill
(never copied), so the working memory is the points' copies, the part-filled last block of each
front and a few numbers per block and per front.
"""

from __future__ import annotations

import numba
import numpy as np

BLOCK = 64
SEGMENT = 256


@numba.njit(cache=True, inline="always")
def _dominated(segments, counts, following, first, front, point, k):
    """Whether a member of ``front`` (all objectives minimised) dominates ``point``."""
    b = first[front]
    while b >= 0:
        values = segments[b // SEGMENT]
        s = b % SEGMENT
        for j in range(counts[b]):
            no_worse = True
            better = False
            for c in range(k):
                a = values[s, j, c]
                if a > point[c]:
                    no_worse = False
                    break
                if a < point[c]:
                    better = True
            if no_worse and better:
                return True
        b = following[b]
    return False


@numba.njit(cache=True)
def _grown(table, size, fill):
    """``table`` in a longer array of ``size`` entries, the new ones ``fill``."""
    out = np.full(size, fill, dtype=np.int64)
    out[:table.shape[0]] = table
    return out


@numba.njit(cache=True, nogil=True)
def sorted_ranks(points, order, ranks):
    """ranks[order[i]] = the front (1 = first) of point order[i]; ``points`` (k, n): each objective's
    values in a row, every objective minimised; ``order`` (m,) indexes finite points in lexicographic
    order (first objective, then the next ...). Entries of ``ranks`` not in ``order`` are left as they are."""
    m = order.shape[0]
    k = points.shape[0]
    point = np.empty(k)
    segments = [np.empty((SEGMENT, BLOCK, k))]
    room = SEGMENT  # blocks the tables hold
    counts = np.zeros(room, dtype=np.int64)
    following = np.full(room, -1, dtype=np.int64)
    fronts_room = 64
    first = np.full(fronts_room, -1, dtype=np.int64)  # first and last block of each front
    last = np.full(fronts_room, -1, dtype=np.int64)
    blocks = 0
    fronts = 0
    for i in range(m):
        for c in range(k):
            point[c] = points[c, order[i]]
        low, high = 0, fronts
        while low < high:
            mid = (low + high) // 2
            if _dominated(segments, counts, following, first, mid, point, k):
                low = mid + 1
            else:
                high = mid
        if low == fronts:
            fronts += 1
            if fronts > fronts_room:
                fronts_room *= 2
                first = _grown(first, fronts_room, -1)
                last = _grown(last, fronts_room, -1)
        b = last[low]
        if b < 0 or counts[b] == BLOCK:
            if blocks == len(segments) * SEGMENT:  # a new segment of blocks
                segments.append(np.empty((SEGMENT, BLOCK, k)))
            if blocks == room:
                room *= 2
                counts = _grown(counts, room, 0)
                following = _grown(following, room, -1)
            if b < 0:
                first[low] = blocks
            else:
                following[b] = blocks
            last[low] = blocks
            b = blocks
            blocks += 1
        values = segments[b // SEGMENT]
        for c in range(k):
            values[b % SEGMENT, counts[b], c] = point[c]
        counts[b] += 1
        ranks[order[i]] = low + 1
