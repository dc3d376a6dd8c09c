"""Resampling observers: seeded resample counts, replicates of pooled statistics, percentile intervals.

The population is resampled as a whole: each resample draws as many observers as there are, with
replacement and equal probability (the nonparametric bootstrap, Efron & Tibshirani 1993, ch. 6).
A resample is held as *counts* (how often each observer was drawn), and a statistic of the resample
is the statistic with each observer's weight multiplied by its count: no data is copied per
resample. Observer weights (categories) multiply in. Every stimulus of a drawn observer comes
along, so the correlation of one observer's differences over stimuli is kept (resampling whole
observers, not single pairs).

Intervals are percentile intervals of the replicates (Efron & Tibshirani 1993, ch. 13): the
``(1 - level) / 2`` and ``(1 + level) / 2`` quantiles of the resampled statistic (numpy's linear
quantile). No interval is given for the maximum (the bootstrap does not estimate an extreme
reliably; Efron & Tibshirani 1993, §7.4).

References
----------
Efron, B. & Tibshirani, R. J. (1993). *An Introduction to the Bootstrap*. Chapman & Hall.
"""

from __future__ import annotations

import numpy as np

from metasim import _warmup
from metasim.colorimetry._kernels.types import writable
from metasim.errors import StatisticsError
from metasim.statistics._kernels import pooled as _pooled

#: Resamples drawn by default (Efron & Tibshirani 1993 suggest at least 200 for percentile intervals
#: of moderate accuracy; more narrows only the resampling noise of the bounds).
DEFAULT_RESAMPLES = 400
DEFAULT_LEVEL = 0.95
INTERVAL_METHOD = ("percentile interval from resampling observers with replacement, every stimulus of a drawn "
                   "observer kept (Efron & Tibshirani 1993)")
#: Half-width of the window around each quantile, in standard deviations of the resampled rank.
_WINDOW_SDS = 4.5
_BINS = 8192


def check_interval_settings(level: float, resamples: int) -> None:
    """Raise StatisticsError unless 0 < level < 1 and resamples is an integer >= 200."""
    if not (isinstance(level, (float, int, np.floating)) and 0 < float(level) < 1):
        raise StatisticsError(f"level={level!r} is not allowed; give a confidence level between 0 and 1, e.g. 0.95")
    if not isinstance(resamples, (int, np.integer)) or isinstance(resamples, bool) or resamples < 200:
        raise StatisticsError(f"resamples={resamples!r} is not allowed; give a whole number >= 200")


def resample_counts(n_observers: int, resamples: int = DEFAULT_RESAMPLES, seed: int = 0) -> np.ndarray:
    """How often each observer is drawn in each resample: (resamples, n_observers) float counts.

    Each row sums to ``n_observers`` (a multinomial draw with equal probabilities). The draws are
    32-bit outputs of numpy's PCG64 bit generator seeded with ``seed`` (a stream numpy keeps stable
    across versions), mapped to observers by Lemire's multiply-shift method with rejection
    (Lemire 2019, exactly uniform). The same ``seed``, ``n_observers`` and ``resamples`` give the
    same counts, so statistics of designs seen by the same observers are resampled together
    (paired), chunk by chunk of a sweep alike.

    Parameters
    ----------
    n_observers : int
        Observers in the population, at least 1.
    resamples : int
        Resamples (rows).
    seed : int
        Seed of the PCG64 stream.

    Returns
    -------
    ndarray (resamples, observer)
        Whole-number counts as floats, each row summing to ``n_observers``.

    Raises
    ------
    StatisticsError
        ``n_observers`` < 1.

    References
    ----------
    Efron, B. & Tibshirani, R. J. (1993). *An Introduction to the Bootstrap*. Chapman & Hall, ch. 6
    (resampling with replacement); Lemire, D. (2019). Fast random integer generation in an interval.
    *ACM Transactions on Modeling and Computer Simulation* 29(1), 3, doi:10.1145/3230636.

    Examples
    --------
    >>> from metasim.statistics import resample_counts
    >>> counts = resample_counts(4, 200, seed=7)
    >>> counts.shape, set(counts.sum(axis=1).tolist())
    ((200, 4), {4.0})
    >>> counts[:2].tolist()
    [[0.0, 0.0, 2.0, 2.0], [1.0, 0.0, 1.0, 2.0]]
    """
    if n_observers < 1:
        raise StatisticsError("resampling needs at least one observer")
    n_resamples, n_observers = int(resamples), int(n_observers)
    words = (n_resamples * n_observers + 1) // 2 + 64
    while True:  # more words only if the rare rejections used up the spare ones
        raw = np.random.PCG64(seed).random_raw(words)
        counts = np.zeros((n_resamples, n_observers))
        _warmup.wait(_pooled.resample_counts)  # compiled ahead in a helper process (metasim._warmup)
        if _pooled.resample_counts(raw, counts) >= 0:
            return counts
        words *= 2


def percentile_interval(replicates: np.ndarray, level: float = DEFAULT_LEVEL, axis: int = -1) -> np.ndarray:
    """(2, ...) lower and upper percentile bounds of ``replicates`` along ``axis``.

    Parameters
    ----------
    replicates : ndarray
        Resampled values of a statistic (e.g. the median CIE 2000 difference of every resample),
        in its unit.
    level : float
        The confidence level, e.g. 0.95: bounds at the (1 − level)/2 and (1 + level)/2 quantiles
        (numpy's linear quantile).
    axis : int
        The resample axis.

    Returns
    -------
    ndarray
        Shape ``(2, *rest)``: lower and upper bound, in the statistic's unit.

    References
    ----------
    Efron, B. & Tibshirani, R. J. (1993). *An Introduction to the Bootstrap*. Chapman & Hall,
    doi:10.1201/9780429246593, ch. 13 (percentile intervals).

    Examples
    --------
    >>> import numpy as np
    >>> from metasim.statistics import percentile_interval
    >>> replicates = np.random.default_rng(1).normal(2.0, 0.1, 400)
    >>> percentile_interval(replicates, 0.95).round(2).tolist()
    [1.82, 2.18]
    """
    alpha = 1.0 - float(level)
    return np.quantile(replicates, [alpha / 2, 1 - alpha / 2], axis=axis)


def _linear_targets(totals: np.ndarray, q: float):
    """Order-statistic targets (1-based counts) and interpolation weights of numpy's linear quantile."""
    virtual = (totals - 1) * q
    previous = np.clip(np.floor(virtual), 0, totals - 1)
    following = np.minimum(previous + 1, totals - 1)
    return previous + 1, following + 1, virtual - previous


def _lerp(a, b, gamma):
    """numpy's linear interpolation (``numpy.lib._function_base_impl._lerp``)."""
    diff = b - a
    return np.where(gamma >= 0.5, b - diff * (1 - gamma), a + diff * gamma)


def _exact_quantile(rows: np.ndarray, weights: np.ndarray, q: float, weighted: bool) -> float:
    """The pooled quantile of ``rows`` (M, S) with per-row weights, from the whole pool (fallback)."""
    keep = weights > 0
    rows, weights = rows[keep], weights[keep]
    if not weighted:  # integer counts: numpy's linear quantile of the repeated rows
        return float(np.quantile(np.repeat(rows, weights.astype(np.int64), axis=0).ravel(), q))
    flat = rows.ravel()
    return float(np.quantile(flat, q, weights=np.repeat(weights, rows.shape[1]), method="inverted_cdf"))


def pooled_replicates(values: np.ndarray, *, weights: np.ndarray | None = None, members: np.ndarray | None = None,
                      quantiles=(0.5, 0.95), thresholds=(), counts: np.ndarray | None = None) -> dict:
    """Pooled statistics of (observer, stimulus) ``values`` for the full sample and every resample.

    Parameters
    ----------
    values : ndarray (observer, stimulus)
        Finite values (no NaN).
    weights : ndarray (observer,), optional
        Observer weights; None for equal weights. Quantiles are numpy's linear method without
        weights and numpy's weighted ``inverted_cdf`` with them.
    members : ndarray of int, optional
        The observers of the pool (default all).
    quantiles, thresholds : sequences of float
    counts : ndarray (R, observer), optional
        Resample counts (:func:`resample_counts`); None for the full sample only.

    Returns
    -------
    dict
        ``mean`` (1 + R), ``quantiles`` (Q, 1 + R), ``share_above_threshold`` (T, 1 + R), ``max`` (float):
        column 0 is the full sample, columns 1.. the resamples; values in the unit of ``values``,
        shares as fractions 0..1.

    References
    ----------
    Efron, B. & Tibshirani, R. J. (1993). *An Introduction to the Bootstrap*. Chapman & Hall,
    doi:10.1201/9780429246593, ch. 6 and 13; Hyndman, R. J. & Fan, Y. (1996). Sample quantiles in statistical
    packages. *The American Statistician* 50(4), 361-365, doi:10.1080/00031305.1996.10473566.

    Examples
    --------
    The median of 30 observers × 5 stimuli, pooled, and its 95 % percentile interval from 200
    resamples of the observers:

    >>> import numpy as np
    >>> from metasim.statistics import percentile_interval, pooled_replicates, resample_counts
    >>> values = np.abs(np.random.default_rng(2).normal(1.0, 0.5, (30, 5)))
    >>> out = pooled_replicates(values, quantiles=(0.5,), thresholds=(1.0,),
    ...                         counts=resample_counts(30, 200, seed=3))
    >>> out["quantiles"].shape, round(float(out["quantiles"][0, 0]), 4), round(float(np.median(values)), 4)
    ((1, 201), 0.977, 0.977)
    >>> percentile_interval(out["quantiles"][0, 1:]).round(2).tolist()
    [0.9, 1.08]
    """
    values = writable(values)  # one argument type per kernel parameter (metasim._warmup)
    n_observers, n_stimuli = values.shape
    weighted = weights is not None
    w = np.ones(n_observers) if weights is None else writable(weights)
    members = np.arange(n_observers) if members is None else writable(members, np.int64)
    thresholds = writable(np.asarray(thresholds, dtype=float).ravel())
    n_columns = 1 + (0 if counts is None else counts.shape[0])
    if members.size == 0 or n_stimuli == 0:
        nan = np.full(n_columns, np.nan)
        return {"mean": nan, "quantiles": np.tile(nan, (len(quantiles), 1)),
                "share_above_threshold": np.tile(nan, (thresholds.size, 1)), "max": np.nan}
    pool = values if members.size == n_observers else values[members]
    low, high = float(pool.min()), float(pool.max())
    scale = _pooled.FINE / (high - low) if high > low else 0.0
    hist, hist_count = np.zeros(_pooled.FINE), np.zeros(_pooled.FINE, dtype=np.int64)
    coarse = np.zeros((members.size, _pooled.COARSE))
    sums, above = np.zeros(members.size), np.zeros((members.size, thresholds.size))
    _warmup.wait(_pooled.first_pass, _pooled.gather_windows, _pooled.walk)
    _pooled.first_pass(values, members, w, low, scale, thresholds, hist, hist_count, coarse, sums, above)
    member_w = w[members]
    if counts is None:
        resample_w = np.empty((0, members.size))
    elif weighted or members.size != n_observers:
        resample_w = np.ascontiguousarray(counts[:, members] * member_w[None, :])
    else:
        resample_w = np.ascontiguousarray(counts, dtype=float)  # (R, M): equal weights, every observer
    totals = n_stimuli * np.concatenate([[member_w.sum()], resample_w.sum(axis=1)])
    per_member = np.column_stack([sums, above])
    pooled = np.concatenate([member_w[None, :] @ per_member, resample_w @ per_member]) / totals[:, None]
    out = {"mean": pooled[:, 0], "share_above_threshold": np.ascontiguousarray(pooled[:, 1:].T), "max": high}
    # the full-sample mean as numpy computes it (pairwise summation), so it equals numpy exactly
    out["mean"][0] = float(np.average(pool.mean(axis=1), weights=member_w)) if weighted else float(pool.mean())
    cumulative = np.cumsum(hist)
    coarse_below = np.cumsum(coarse, axis=1) - coarse  # per member, values in lower coarse bins
    ratio = _pooled.FINE // _pooled.COARSE
    results = np.empty((len(quantiles), n_columns))
    plans = []
    for q in quantiles:  # the window of each quantile, from the histograms
        if weighted:
            targets, gamma = (q * totals)[None, :], None
        else:
            first, second, gamma = _linear_targets(totals, q)
            targets = np.stack([first, second])
        centre = targets[0, 0]
        bin_q = min(int(np.searchsorted(cumulative, centre, side="left")), _pooled.FINE - 1)
        spread = 0.0
        if counts is not None:  # spread of the resampled rank from each member's count below the quantile
            c, inside = divmod(bin_q, ratio)
            below_q = coarse_below[:, c] + coarse[:, c] * (inside + 0.5) / ratio
            spread = float(np.sqrt(members.size * (member_w * (below_q - q * n_stimuli)).var()))
        half = _WINDOW_SDS * spread + hist[bin_q] + 2 * member_w.max()
        first_bin = min(int(np.searchsorted(cumulative, centre - half, side="left")), bin_q)
        last_bin = max(min(int(np.searchsorted(cumulative, centre + half, side="left")), _pooled.FINE - 1), bin_q)
        plans.append((q, np.ascontiguousarray(targets), gamma, first_bin, last_bin))
    first_bins = np.array([p[3] for p in plans], dtype=np.int64)
    last_bins = np.array([p[4] for p in plans], dtype=np.int64)
    sizes = [int(hist_count[first:last + 1].sum()) for first, last in zip(first_bins, last_bins)]
    offsets = np.concatenate([[0], np.cumsum(sizes)]).astype(np.int64)
    windows = np.empty(offsets[-1] + len(plans))  # one spare slot after each window
    owners = np.empty(offsets[-1] + len(plans), dtype=np.int64)
    belows = np.empty((members.size, len(plans)))
    _pooled.gather_windows(values, members, low, scale, first_bins, last_bins, offsets, windows, owners, belows)
    for i, (q, targets, gamma, _, _) in enumerate(plans):
        window, owner = windows[offsets[i] + i:offsets[i + 1] + i], owners[offsets[i] + i:offsets[i + 1] + i]
        order = np.argsort(window)
        window, owner, below = window[order], owner[order], belows[:, i]
        # the full sample's position in the window, then every resample walks from there
        positions = np.empty(targets.shape, dtype=np.int64)
        full = np.empty((targets.shape[0], 1), dtype=np.int64)
        first_reached = np.array([float(below @ member_w) + member_w[owner[0]]])
        _pooled.walk(owner, np.ascontiguousarray(member_w[None, :]), first_reached, 0, targets[:, :1].copy(), full)
        positions[:, :1] = full
        start = max(int(full[0, 0]), 0)
        within = np.bincount(owner[:start + 1], minlength=members.size)
        reached = resample_w @ (below + within)
        resampled = np.empty((targets.shape[0], targets.shape[1] - 1), dtype=np.int64)
        _pooled.walk(owner, resample_w, reached, start, np.ascontiguousarray(targets[:, 1:]), resampled)
        positions[:, 1:] = resampled
        outside = (positions < 0).any(axis=0)
        picked = window[np.maximum(positions, 0)]
        results[i] = picked[0] if weighted else _lerp(picked[0], picked[1], gamma)
        for r in np.flatnonzero(outside):  # rare: the resample's quantile left the window
            results[i, r] = _exact_quantile(pool, member_w if r == 0 else resample_w[r - 1], q, weighted)
    out["quantiles"] = results
    return out


__all__ = ["DEFAULT_RESAMPLES", "DEFAULT_LEVEL", "INTERVAL_METHOD", "check_interval_settings", "resample_counts",
           "percentile_interval", "pooled_replicates"]
