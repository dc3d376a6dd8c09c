"""Unweighted statistics of many unsorted rows at once, by selection: the fast path for long rows.

The statistics layer's definitions (:mod:`metasim.statistics.summaries`) for equal weights and no
NaN — mean, median, 95th percentile (numpy's "linear" method), maximum — computed for every row of
a 2-D array in one compiled pass (rows in parts on the kernel threads) (:mod:`metasim.statistics._kernels.order`) that sorts
nothing: the order statistics are found by bucket selection and the sum is added in numpy's own
pairwise order, so each row's numbers equal ``numpy.mean``, ``numpy.quantile`` and ``numpy.max``
of that row bit for bit. Rows with NaN or observer weights go the layer's general route
(:func:`metasim.statistics.summaries.statistics_along`).

The sweep's per-design pass (:mod:`metasim.sweep._kernels.designs`) calls the same compiled
summary on each design's observer × stimulus pairs.
"""

from __future__ import annotations

import numpy as np

from metasim._threads import run_in_parts
from metasim.colorimetry._kernels.types import writable
from metasim.statistics._kernels.order import summarise_rows
from metasim.statistics.summaries import STATISTICS, statistics_along


def row_statistics(rows: np.ndarray) -> np.ndarray:
    """(R, 4) mean, median, p95, max of each row of a 2-D float array without NaN (NaN for empty rows).

    Examples
    --------
    >>> np.round(row_statistics(np.array([[1.0, 2.0, 3.0, 10.0]])), 9).tolist()  # numpy linear quantiles
    [[4.0, 2.5, 8.95, 10.0]]
    """
    rows = writable(rows)  # one argument type per kernel parameter: one compiled version
    out = np.empty((rows.shape[0], len(STATISTICS)))
    if rows.shape[1] == 0:
        out[:] = np.nan
    elif rows.shape[0]:
        run_in_parts(summarise_rows, rows.shape[0], rows, out)  # rows in parts on the kernel threads
    return out


def statistics_of_rows(rows: np.ndarray, weights: np.ndarray | None = None) -> np.ndarray:
    """(R, 4) mean, median, p95, max of each row of a 2-D array, by the layer's definitions.

    ``weights``: one per column (observer weights repeated for each stimulus, say), or None for
    equal weights. Equal weights without NaN take :func:`row_statistics`; anything else
    :func:`~metasim.statistics.summaries.statistics_along` (weighted ``inverted_cdf`` quantiles,
    NaN left out).
    """
    rows = np.asarray(rows, dtype=float)
    if weights is None and rows.shape[1] > 0 and not np.isnan(rows).any():
        return row_statistics(rows)
    return statistics_along(rows, weights, 1).T


__all__ = ["row_statistics", "statistics_of_rows"]
