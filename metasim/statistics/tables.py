"""Labelled tables of population statistics, with intervals from resampling observers.

:func:`population_statistics` is the one function behind every summary table metasim writes:
statistics over observers (per stimulus), over stimuli (per observer) or over both (pooled
observer × stimulus pairs, optionally per group of observers such as age bands), each table
saying in its attributes what it pools. With ``interval=True`` every statistic but the maximum
comes with a percentile interval from resampling observers (:mod:`metasim.statistics.resampling`).
"""

from __future__ import annotations

import numpy as np
import xarray as xr

from metasim._version import __version__
from metasim.errors import StatisticsError
from metasim.statistics.resampling import (
    DEFAULT_LEVEL,
    DEFAULT_RESAMPLES,
    INTERVAL_METHOD,
    check_interval_settings,
    percentile_interval,
    pooled_replicates,
    resample_counts,
)
from metasim.statistics.summaries import (
    QUANTILE_DEFINITION,
    STATISTICS,
    THRESHOLDS,
    observer_weights,
    share_above_threshold,
    statistics_along,
    weights_note,
)

BOUNDS = ("lower", "upper")


def _general_pool(pool: np.ndarray, weights: np.ndarray, thresholds: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Statistics of one pool (members, values) with per-member weights, NaN left out: (4,), (T,)."""
    flat = pool.ravel()
    w = np.repeat(weights, pool.shape[1])
    keep = w > 0
    return statistics_along(flat[keep], w[keep], 0), share_above_threshold(flat[keep], thresholds, w[keep], 0)


def pool_statistics(pool: np.ndarray, weights: np.ndarray | None, thresholds: np.ndarray,
                    counts: np.ndarray | None, members: np.ndarray | None = None) -> tuple[np.ndarray, np.ndarray]:
    """Statistics (4, 1 + R) and shares above (T, 1 + R) of the values of ``members`` of an
    (observer, values) array, for the full sample (column 0) and each resample (``counts``)."""
    n_columns = 1 + (0 if counts is None else counts.shape[0])
    sub = pool if members is None else pool[members]
    if sub.size == 0:
        return np.full((4, n_columns), np.nan), np.full((thresholds.size, n_columns), np.nan)
    if np.isnan(sub).any():  # left-out values: the plain definitions, one resample at a time
        base = np.ones(pool.shape[0]) if weights is None else weights
        chosen = np.arange(pool.shape[0]) if members is None else members
        stats, shares = zip(*[_general_pool(sub, (base if r == 0 else base * counts[r - 1])[chosen], thresholds)
                              for r in range(n_columns)])
        return np.stack(stats, axis=1), np.stack(shares, axis=1)
    out = pooled_replicates(pool, weights=weights, members=members, quantiles=(0.5, 0.95), thresholds=thresholds,
                            counts=counts)
    stats = np.vstack([out["mean"], out["quantiles"], np.full(n_columns, np.nan)])
    stats[3, 0] = out["max"]
    return stats, out["share_above_threshold"]


def population_statistics(values: xr.DataArray, *, over=("observer", "stimulus"), weights=None,
                          thresholds=THRESHOLDS, group: xr.DataArray | None = None, interval: bool = False,
                          level: float = DEFAULT_LEVEL, resamples: int = DEFAULT_RESAMPLES, seed: int = 0,
                          replicates: bool = False, pooled: str | None = None, includes_white: bool = False
                          ) -> xr.Dataset:
    """mean, median, p95, max and shares above thresholds of ``values`` over the dims ``over``.

    Parameters
    ----------
    values : DataArray
        Differences with an ``observer`` dim (and usually ``stimulus``; other dims such as
        ``design`` are kept).
    over : sequence of str
        The dims the statistics pool: ``("observer", "stimulus")`` (all pairs), ``("observer",)``
        (per stimulus) or ``("stimulus",)`` (per observer).
    weights : array_like, DataArray, False or None
        Observer weights; None: the ``weight`` coordinate on ``observer`` when present; False:
        equal weights.
    thresholds : sequence of float
        Shares of values above each (common practice: 1, 2, 3 CIE 2000 units, no source).
    group : DataArray, optional
        A label per observer (dim ``observer``; its name becomes the output dim, e.g.
        ``age_band``): statistics of each group's pool; observers labelled "" belong to none.
    interval : bool
        Add percentile intervals from resampling observers (needs ``observer`` in ``over``).
    level, resamples, seed
        Interval level (default 0.95), resamples (default 400, at least 200) and seed.
    replicates : bool
        Also return every resample's statistics (dim ``resample``): comparisons and ranks of
        designs seen by the same observers use them (same seed: the same resamples).
    pooled : str, optional
        What the table pools, for its attributes (default: the stimulus count).
    includes_white : bool
        Whether ``values`` hold the white pair beside the stimuli (for the attributes).

    Returns
    -------
    Dataset
        ``statistics`` (statistic, …), ``share_above_threshold`` (threshold, …); with intervals
        ``statistics_interval`` and ``share_above_threshold_interval`` (bound = lower, upper; no interval
        of the maximum: NaN); with replicates ``statistics_replicates``,
        ``share_above_threshold_replicates`` (resample, …). Attributes say what is pooled, the weights,
        the quantile definition and the interval method, level, resamples and seed.

    Examples
    --------
    >>> import numpy as np, xarray as xr
    >>> values = xr.DataArray(np.arange(12.0).reshape(4, 3), dims=("observer", "stimulus"))
    >>> table = population_statistics(values, thresholds=(5.0,))
    >>> table["statistics"].values.tolist(), table["share_above_threshold"].values.tolist()  # numpy's linear quantiles
    ([5.5, 5.5, 10.45, 11.0], [0.5])
    >>> table.attrs["pooled_over"]
    'observer x stimulus pairs'
    >>> population_statistics(values, interval=True, seed=1)["statistics_interval"].dims
    ('bound', 'statistic')
    """
    if not isinstance(values, xr.DataArray):
        raise StatisticsError(f"population statistics need a DataArray, got {type(values).__name__}")
    over = (over,) if isinstance(over, str) else tuple(over)
    missing = [d for d in over if d not in values.dims]
    if not over or missing or len(set(over)) != len(over):
        raise StatisticsError(f"over={over!r} is not allowed; give dims of the values {tuple(values.dims)}")
    resampled = interval or replicates
    if resampled:
        check_interval_settings(level, resamples)
        if "observer" not in over:
            raise StatisticsError(f"intervals resample observers: over={over!r} must include 'observer'")
    if group is not None and "observer" not in over:
        raise StatisticsError("statistics per group of observers need 'observer' in over")
    thresholds = np.asarray(thresholds, dtype=float).ravel()
    w = observer_weights(values, weights) if "observer" in values.dims else None
    w_pool = w if "observer" in over else None
    rest = [d for d in values.dims if d not in over]
    pooled_dims = [d for d in over if d != "observer"]
    lead = ["observer"] if "observer" in over else []
    arranged = values.transpose(*rest, *lead, *pooled_dims).values.astype(float, copy=False)
    rest_shape = arranged.shape[:len(rest)]
    k = int(np.prod(rest_shape))
    n_obs = values.sizes["observer"] if lead else 1
    blocks = arranged.reshape(k, n_obs, -1)
    counts = resample_counts(values.sizes["observer"], resamples, seed) if resampled else None
    n_columns = 1 + (0 if counts is None else resamples)
    groups = [("", None)]
    if group is not None:
        labels = np.asarray(group.transpose("observer").values).astype(str)
        names = [g for g in dict.fromkeys(labels.tolist()) if g != ""]
        groups = [(g, np.flatnonzero(labels == g)) for g in names]
    stats = np.empty((len(groups), k, 4, n_columns))
    shares = np.empty((len(groups), k, thresholds.size, n_columns))
    simple = counts is None and group is None and (not lead or blocks.shape[2] == 1)
    if simple:  # no resampling, one value per observer or no observers pooled: vectorised numpy
        flat = blocks.reshape(k, -1)
        stats[0, :, :, 0] = statistics_along(flat, w_pool, axis=1).T
        shares[0, :, :, 0] = share_above_threshold(flat, thresholds, w_pool, axis=1).T
    else:
        for g, (_, members) in enumerate(groups):
            for i in range(k):
                stats[g, i], shares[g, i] = pool_statistics(blocks[i], w_pool, thresholds, counts, members)
    group_dim = [] if group is None else [group.name or "group"]
    out_rest = [*group_dim, *rest]
    shape = [len(groups)] if group is not None else []

    def shaped(array):  # (G, K, L, C) → (L, [G], *rest, C)
        body = array if group is not None else array[0]
        return np.moveaxis(body, -2, 0).reshape(array.shape[-2], *shape, *rest_shape, array.shape[-1])

    s_all, t_all = shaped(stats), shaped(shares)
    attrs = table_attrs(values, over, w, pooled, includes_white)
    data = {
        "statistics": (("statistic", *out_rest), s_all[..., 0],
                       {"units": values.attrs.get("units", "1"), "long_name": f"statistics over {attrs['pooled_over']}"}),
        "share_above_threshold": (("threshold", *out_rest), t_all[..., 0],
                                  {"units": "1", "long_name": f"share above each threshold, over {attrs['pooled_over']}"}),
    }
    interval_attrs = {}
    if interval:
        interval_attrs = {"interval_method": INTERVAL_METHOD, "interval_level": float(level),
                          "interval_resamples": int(resamples), "interval_seed": int(seed)}
        s_bounds = percentile_interval(s_all[..., 1:], level)
        s_bounds[:, 3] = np.nan  # no interval of the maximum
        data["statistics_interval"] = (("bound", "statistic", *out_rest), s_bounds, {
            "units": data["statistics"][2]["units"], "long_name": f"{100 * level:g} % interval of each statistic",
            **interval_attrs})
        data["share_above_threshold_interval"] = (("bound", "threshold", *out_rest), percentile_interval(t_all[..., 1:], level), {
            "units": "1", "long_name": f"{100 * level:g} % interval of each share", **interval_attrs})
    if replicates:
        data["statistics_replicates"] = (("resample", "statistic", *out_rest), np.moveaxis(s_all[..., 1:], -1, 0),
                                         {"units": data["statistics"][2]["units"], "long_name": "statistics of each resample"})
        data["share_above_threshold_replicates"] = (("resample", "threshold", *out_rest),
                                                    np.moveaxis(t_all[..., 1:], -1, 0),
                                                    {"units": "1", "long_name": "shares of each resample"})
    coords = {"statistic": list(STATISTICS),
              "threshold": ("threshold", thresholds, {"units": values.attrs.get("units", "1"),
                                                      "long_name": "difference threshold"})}
    if interval:
        coords["bound"] = list(BOUNDS)
    if group is not None:
        coords[group_dim[0]] = [g for g, _ in groups]
    for name, coord in values.coords.items():
        if set(coord.dims) <= set(rest):
            coords[name] = coord.variable
    out = xr.Dataset(data, coords=coords)
    for name in ("statistics", "share_above_threshold"):
        out[name].attrs.update({key: attrs[key] for key in ("pooled_over", "pooled_stimuli", "includes_white",
                                                             "observer_weights")})
    out.attrs = {**attrs, **interval_attrs, "metasim_version": __version__}
    return out


def table_attrs(values: xr.DataArray, over, weights, pooled: str | None, includes_white: bool) -> dict:
    """What a table pools, as attributes."""
    names = {"observer": "observers", "stimulus": "stimuli"}
    if set(over) == {"observer", "stimulus"}:
        pooled_over = "observer x stimulus pairs"
    else:
        pooled_over = " x ".join(names.get(d, d) for d in over)
        kept = [d for d in ("stimulus", "observer") if d in values.dims and d not in over]
        if kept:
            pooled_over += f" (per {kept[0]})"
    n_stimuli = values.sizes.get("stimulus")
    stimuli = pooled or (f"{n_stimuli} stimuli" if n_stimuli is not None else "")
    return {
        "pooled_over": pooled_over,
        "pooled_stimuli": stimuli,
        "includes_white": "yes: the white pair pooled with the stimuli" if includes_white else "no",
        "observer_weights": weights_note(weights),
        "observer_count": int(values.sizes.get("observer", 0)),
        "quantile_definition": QUANTILE_DEFINITION,
    }


__all__ = ["BOUNDS", "population_statistics", "pool_statistics", "table_attrs"]
