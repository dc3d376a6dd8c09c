"""Population statistics of difference values: weighted mean, median, 95th percentile, maximum, shares.

Definitions (used by every table metasim writes):

* **Weights.** Observers may carry weights (the ``weight`` coordinate of observer categories: the
  share of the population each represents). Stimuli are weighted equally. A pooled statistic over
  observer × stimulus pairs gives every pair its observer's weight.
* **Mean**: the weighted arithmetic mean.
* **Quantiles** (median = 0.5, ``p95`` = 0.95). Without weights: numpy's default ``linear`` method
  (Hyndman & Fan 1996 definition 7: virtual index (n − 1)·q, linear interpolation between the two
  neighbouring order statistics), so a plain population gives exactly ``numpy.quantile``. With
  weights: the inverse of the weighted empirical distribution function, i.e. the smallest value
  whose cumulative weight share reaches q (Hyndman & Fan definition 1 with weights), exactly
  ``numpy.quantile(..., weights=w, method="inverted_cdf")`` (numpy >= 2.0).
* **Maximum**: the largest value (weights play no part).
* **Share above a threshold t**: the weighted share of values strictly greater than t.
* NaN values are left out (their weight counts for nothing).

References
----------
Hyndman, R. J. & Fan, Y. (1996). Sample quantiles in statistical packages. *The American
Statistician* 50(4), 361-365.
"""

from __future__ import annotations

import warnings

import numpy as np
import xarray as xr

from metasim.checks import warn_renamed
from metasim.errors import DeprecatedNameWarning, StatisticsError
from metasim.statistics.sorted_rows import row_stats

STATISTICS = ("mean", "median", "p95", "max")
#: The quantile level of each quantile statistic.
QUANTILE_LEVELS = {"median": 0.5, "p95": 0.95}
#: Common-practice thresholds of visibility for CIE 2000 differences (no source): 1 is about one
#: just-noticeable difference, 2 noticeable side by side, 3 obvious.
THRESHOLDS = (1.0, 2.0, 3.0)
QUANTILE_DEFINITION = ("unweighted: numpy linear quantile (Hyndman & Fan 1996 definition 7); weighted: "
                       "smallest value whose cumulative weight share reaches q (numpy inverted_cdf with weights)")


def check_weights(weights, count: int | None = None) -> np.ndarray | None:
    """Observer weights as a float array (None stays None); finite, >= 0, not all zero."""
    if weights is None:
        return None
    w = np.asarray(weights, dtype=float).ravel()
    if count is not None and w.size != count:
        raise StatisticsError(f"{w.size} observer weights for {count} observers; give one weight per observer")
    if w.size == 0 or not np.isfinite(w).all() or (w < 0).any() or w.sum() <= 0:
        raise StatisticsError("observer weights must be finite, >= 0 and not all zero")
    return w


def weighted_mean(values, weights=None, axis: int = 0) -> np.ndarray:
    """Weighted mean along ``axis`` (weights along that axis; None: equal), NaN left out.

    Parameters
    ----------
    values : array_like
        The values (any unit; e.g. CIE 2000 differences, observer × stimulus).
    weights : array_like, optional
        One weight per entry along ``axis`` (e.g. observer weights), or the shape of ``values``;
        finite and ≥ 0. None: equal weights.
    axis : int
        The axis to reduce (e.g. the observer axis).

    Returns
    -------
    ndarray
        ``values`` reduced along ``axis``, in their unit; NaN where no value has weight.

    Examples
    --------
    Two observers (rows) × three stimuli, the first observer standing for three times the share of
    the population:

    >>> from metasim.statistics import weighted_mean
    >>> differences = [[0.5, 1.5, 2.5], [1.0, 3.5, 0.2]]
    >>> weighted_mean(differences).tolist(), weighted_mean(differences, [3, 1]).tolist()
    ([0.75, 2.5, 1.35], [0.625, 2.0, 1.925])
    """
    values = np.moveaxis(np.asarray(values, dtype=float), axis, -1)
    finite = ~np.isnan(values)
    if weights is None and finite.all():
        return values.mean(axis=-1)
    w = np.ones(values.shape[-1]) if weights is None else np.asarray(weights, dtype=float)
    if w.ndim > 1:
        w = np.moveaxis(w, axis, -1)
    w = np.where(finite, w, 0.0)
    total = w.sum(-1)
    with np.errstate(invalid="ignore", divide="ignore"):  # as numpy.average: sum(w * x) / sum(w)
        return (np.where(finite, values, 0.0) * w).sum(-1) / np.where(total > 0, total, np.nan)


def quantiles(values, levels, weights=None, axis: int = 0) -> np.ndarray:
    """Quantiles at ``levels`` (0..1) along ``axis``, by the definitions of this module.

    Parameters
    ----------
    values : array_like
        The values (any unit); NaN left out.
    levels : sequence of float
        Quantile levels in 0..1.
    weights : array_like, optional
        One weight per entry along ``axis`` (or the shape of ``values``); None for equal weights
        (numpy's linear method), otherwise numpy's weighted ``inverted_cdf``.
    axis : int
        The axis to reduce.

    Returns
    -------
    ndarray
        Shape ``(len(levels), *rest)``, in the values' unit; NaN where no value has weight.

    Raises
    ------
    StatisticsError
        A level outside 0..1 or not finite.

    References
    ----------
    Hyndman, R. J. & Fan, Y. (1996). Sample quantiles in statistical packages. *The American
    Statistician* 50(4), 361-365, doi:10.1080/00031305.1996.10473566.

    Examples
    --------
    >>> from metasim.statistics import quantiles
    >>> values = [0.5, 1.0, 1.5, 2.5, 3.5]
    >>> quantiles(values, [0.5, 0.95]).round(3).tolist()  # as numpy.quantile (linear)
    [1.5, 3.3]
    >>> quantiles(values, [0.5], weights=[1, 1, 1, 1, 4]).tolist()  # weighted inverted_cdf
    [2.5]
    """
    levels = np.asarray(levels, dtype=float).ravel()
    if ((levels < 0) | (levels > 1)).any() or not np.isfinite(levels).all():
        raise StatisticsError(f"quantile levels {levels.tolist()} are not allowed; give levels between 0 and 1")
    values = np.moveaxis(np.asarray(values, dtype=float), axis, -1)
    if values.shape[-1] == 0:
        return np.full((levels.size, *values.shape[:-1]), np.nan)
    nan = np.isnan(values)
    if weights is None:
        if nan.any():
            with warnings.catch_warnings():
                warnings.simplefilter("ignore", RuntimeWarning)  # all-NaN slices give NaN
                return np.nanquantile(values, levels, axis=-1)
        return np.quantile(values, levels, axis=-1)
    w = np.asarray(weights, dtype=float)
    if w.ndim == 1:
        w = np.broadcast_to(w, values.shape)
    else:
        w = np.moveaxis(w, axis, -1)
    w = np.where(nan, 0.0, w)
    order = np.argsort(np.where(nan, np.inf, values), axis=-1)
    ordered = np.take_along_axis(values, order, -1)
    cdf = np.take_along_axis(w, order, -1).cumsum(-1)
    total = cdf[..., -1:]
    with np.errstate(invalid="ignore", divide="ignore"):
        cdf = cdf / total  # as numpy: cumulative weight share
    cdf = np.where(cdf == 0, -1.0, cdf)  # leading zero weights never hold a quantile (as numpy)
    index = (cdf[None] < levels.reshape(-1, *([1] * values.ndim))).sum(-1)
    index = np.minimum(index, values.shape[-1] - 1)
    out = np.take_along_axis(np.broadcast_to(ordered, (levels.size, *ordered.shape)), index[..., None], -1)[..., 0]
    return np.where(total[..., 0] > 0, out, np.nan)


def share_above_threshold(values, thresholds=THRESHOLDS, weights=None, axis: int = 0) -> np.ndarray:
    """Weighted share of values strictly greater than each threshold, along ``axis``.

    Returns shape ``(len(thresholds), *rest)``; NaN values are left out.

    Parameters
    ----------
    values : array_like
        The values, e.g. CIE 2000 differences (ΔE00) of observer × stimulus; NaN left out.
    thresholds : sequence of float
        The thresholds, in the values' unit (default :data:`THRESHOLDS`: 1, 2 and 3 ΔE00, common
        practice, no source).
    weights : array_like, optional
        One weight per entry along ``axis`` (e.g. observer weights); None: equal weights.
    axis : int
        The axis to reduce (e.g. the observer axis).

    Returns
    -------
    ndarray
        Shape ``(len(thresholds), *rest)``: shares 0..1 (unit 1); NaN where no value has weight.

    Examples
    --------
    Two observers (rows) × three stimuli; the share of observers above 1 and 2 ΔE00 per stimulus
    (a value equal to a threshold is not above it):

    >>> from metasim.statistics import share_above_threshold
    >>> differences = [[0.5, 1.5, 2.5], [1.0, 3.5, 0.2]]
    >>> share_above_threshold(differences, (1.0, 2.0)).tolist()
    [[0.0, 1.0, 0.5], [0.0, 0.5, 0.5]]
    >>> share_above_threshold(differences, (1.0, 2.0), weights=[3, 1]).tolist()
    [[0.0, 1.0, 0.75], [0.0, 0.25, 0.75]]
    """
    t = np.asarray(thresholds, dtype=float).ravel()
    values = np.moveaxis(np.asarray(values, dtype=float), axis, -1)
    above = (values[None] > t.reshape(-1, *([1] * values.ndim))).astype(float)
    above = np.where(np.isnan(values)[None], np.nan, above)
    return weighted_mean(above, weights, axis=-1)


def share_beyond(values, thresholds=THRESHOLDS, weights=None, axis: int = 0) -> np.ndarray:
    """The old name of :func:`share_above_threshold` (works for one release, with a warning)."""
    warn_renamed("share_beyond()", "share_above_threshold()", DeprecatedNameWarning)
    return share_above_threshold(values, thresholds, weights, axis)


def statistics_along(values, weights=None, axis: int = 0) -> np.ndarray:
    """mean, median, p95, max along ``axis``: shape ``(4, *rest)`` (NaN left out).

    Equal weights without NaN take the fast path (:mod:`metasim.statistics.sorted_rows`: rows
    sorted by numpy, the statistics read off them in one compiled pass; the same numbers).

    Parameters
    ----------
    values : array_like
        The values (any unit); NaN left out.
    weights : array_like, optional
        One weight per entry along ``axis``; None: equal weights.
    axis : int
        The axis to reduce (e.g. the observer axis of observer × stimulus differences).

    Returns
    -------
    ndarray
        Shape ``(4, *rest)``: the statistics of :data:`STATISTICS` (mean, median, p95, max) in
        that order, in the values' unit; quantiles as :func:`quantiles`.

    References
    ----------
    Hyndman, R. J. & Fan, Y. (1996). Sample quantiles in statistical packages. *The American
    Statistician* 50(4), 361-365, doi:10.1080/00031305.1996.10473566.

    Examples
    --------
    >>> from metasim.statistics import statistics_along
    >>> statistics_along([0.5, 1.0, 1.5, 2.5, 3.5]).round(3).tolist()  # mean, median, p95, max
    [1.8, 1.5, 3.3, 3.5]
    """
    values = np.asarray(values, dtype=float)
    if weights is None and values.ndim >= 1 and values.shape[axis] > 0 and not np.isnan(values).any():
        moved = np.moveaxis(values, axis, -1)
        rows = moved.reshape(-1, moved.shape[-1])
        return row_stats(rows).reshape(len(STATISTICS), *moved.shape[:-1])
    mean = weighted_mean(values, weights, axis)
    median, p95 = quantiles(values, (0.5, 0.95), weights, axis)
    moved = np.moveaxis(values, axis, -1)
    if moved.shape[-1] == 0:
        peak = np.full(moved.shape[:-1], np.nan)
    elif np.isnan(moved).any():
        peak = np.where(np.isnan(moved).all(-1), np.nan, np.nanmax(np.where(np.isnan(moved), -np.inf, moved), -1))
    else:
        peak = moved.max(-1)
    return np.stack([mean, median, p95, peak])


def observer_weights(values: xr.DataArray | xr.Dataset, weights=None) -> np.ndarray | None:
    """The observer weights a table uses: ``weights`` if given (one per observer; ``False`` for
    equal weights), else the ``weight`` coordinate on ``observer`` when there is one, else None.

    Parameters
    ----------
    values : xarray.DataArray or xarray.Dataset (observer, ...)
        The values a table summarises; their ``weight`` coordinate (observer) is used when
        ``weights`` is None (observer categories carry one: the share of the population each
        stands for).
    weights : array_like, xarray.DataArray (observer), False or None
        Weights to use instead (finite, ≥ 0, not all zero, one per observer); False: equal weights
        even when ``values`` carry a ``weight`` coordinate.

    Returns
    -------
    ndarray (observer,) or None
        The weights as floats; None for equal weights.

    Raises
    ------
    StatisticsError
        Weights of another count than the observers, negative, non-finite or all zero.

    Examples
    --------
    >>> import xarray as xr
    >>> from metasim.statistics import observer_weights
    >>> differences = xr.DataArray([[0.5, 1.5], [1.0, 3.5]], dims=("observer", "stimulus"),
    ...                            coords={"weight": ("observer", [0.75, 0.25])})
    >>> observer_weights(differences).tolist(), observer_weights(differences, False)
    ([0.75, 0.25], None)
    """
    if weights is False:
        return None
    count = values.sizes.get("observer")
    if weights is None:
        if "weight" in values.coords and values.coords["weight"].dims == ("observer",):
            return check_weights(values.coords["weight"].values, count)
        return None
    if isinstance(weights, xr.DataArray):
        weights = weights.transpose("observer").values if "observer" in weights.dims else weights.values
    return check_weights(weights, count)


def weights_note(weights) -> str:
    return "equal" if weights is None else "the observers' weights (share of the population each stands for)"


__all__ = ["STATISTICS", "QUANTILE_LEVELS", "THRESHOLDS", "QUANTILE_DEFINITION", "check_weights", "weighted_mean",
           "quantiles", "share_above_threshold", "statistics_along", "observer_weights", "weights_note"]
