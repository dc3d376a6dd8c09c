"""Comparing designs seen by the same observers: paired differences, ranks, the edge of a sweep, sample size.

* :func:`paired_comparison` — two designs judged by the same observers on the same stimuli: the
  difference of each statistic with its interval (both designs resampled with the *same*
  observers, so what the two have in common cancels), and the share of observers for whom the
  second design looks closer to the reference than the first.
* :func:`rank_designs` — many designs resampled together: for each, the probability of being the
  best (lowest) over the resamples, an interval of its rank, and whether it can be told apart
  from the best at the chosen level (the paired difference's interval lies above zero).
* :func:`edge_warnings` — the best design of a sweep on the edge of a swept parameter's range.
* :func:`observers_needed` — how many observers an interval half-width needs (half-widths of
  these intervals shrink as 1 / √n, Efron & Tibshirani 1993 §2.3 and ch. 5).

References
----------
Efron, B. & Tibshirani, R. J. (1993). *An Introduction to the Bootstrap*. Chapman & Hall.
"""

from __future__ import annotations

import math

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
    resample_counts,
)
from metasim.statistics.summaries import THRESHOLDS, observer_weights
from metasim.statistics.tables import BOUNDS, population_statistics

#: Default interval half-width asked of the 95th percentile when advising a population size, in
#: CIE 2000 units (our choice: a tenth of the one-unit threshold).
DEFAULT_HALF_WIDTH = 0.1


def _same_observers(first: xr.DataArray, second: xr.DataArray) -> None:
    for dim in ("observer", "stimulus"):
        if dim not in first.dims or dim not in second.dims:
            raise StatisticsError(f"a paired comparison needs '{dim}' on both designs, got {first.dims} and {second.dims}")
        if first.sizes[dim] != second.sizes[dim] or (
                dim in first.coords and dim in second.coords
                and not np.array_equal(first[dim].values, second[dim].values)):
            raise StatisticsError(f"the two designs were not judged by the same {dim}s; a paired comparison "
                                  "needs the same observers and stimuli on both sides")


def paired_comparison(first: xr.DataArray, second: xr.DataArray, *, labels=("A", "B"), weights=None,
                      thresholds=THRESHOLDS, level: float = DEFAULT_LEVEL, resamples: int = DEFAULT_RESAMPLES,
                      seed: int = 0, pooled: str | None = None) -> xr.Dataset:
    """Compare two designs seen by the same observers (each an (observer, stimulus) DataArray).

    Parameters
    ----------
    first, second : DataArray
        Differences from the reference of design A and design B, dims ``observer`` and ``stimulus``
        (the same observers and stimuli, in the same order).
    labels : (str, str)
        Names of the two designs.
    weights, thresholds, level, resamples, seed, pooled
        As for :func:`~metasim.statistics.population_statistics`.

    Returns
    -------
    Dataset
        ``statistics`` (design, statistic) and ``statistics_interval`` (bound, design, statistic)
        of both designs pooled over observer × stimulus pairs, ``share_above_threshold`` (design,
        threshold) with its interval likewise; ``difference`` (statistic: B − A) and
        ``difference_interval`` (bound, statistic); ``share_above_threshold_difference``
        (threshold) with its interval; ``share_second_closer`` — the weighted share of observers
        whose mean difference over the stimuli is smaller with B than with A (ties count half) —
        with ``share_second_closer_interval`` (bound).

    Examples
    --------
    >>> import numpy as np, xarray as xr
    >>> a = xr.DataArray(np.random.default_rng(1).gamma(2.0, 1.0, (60, 5)), dims=("observer", "stimulus"))
    >>> result = paired_comparison(a, a - 0.5)  # B closer by 0.5 for every observer
    >>> result["difference"].sel(statistic="mean").round(12).item(), result["share_second_closer"].item()
    (-0.5, 1.0)
    """
    _same_observers(first, second)
    if len(labels) != 2 or labels[0] == labels[1]:
        raise StatisticsError(f"labels={labels!r} is not allowed; give two different names")
    first = first.transpose("observer", "stimulus")
    second = second.transpose("observer", "stimulus").drop_vars(
        [c for c in second.coords if c not in ("observer", "stimulus")])
    stacked = xr.concat([first.drop_vars([c for c in first.coords if c not in ("observer", "stimulus")]), second],
                        dim="design").assign_coords(design=list(labels))
    for name, coord in first.coords.items():  # observer weights and ages travel with the observers
        if coord.dims == ("observer",) and name != "observer":
            stacked = stacked.assign_coords({name: coord})
    table = population_statistics(stacked, weights=weights, thresholds=thresholds, interval=True, replicates=True,
                                  level=level, resamples=resamples, seed=seed, pooled=pooled)
    reps = table["statistics_replicates"].transpose("resample", "statistic", "design").values
    share_reps = table["share_above_threshold_replicates"].transpose("resample", "threshold", "design").values
    point = table["statistics"].transpose("statistic", "design").values
    share_point = table["share_above_threshold"].transpose("threshold", "design").values
    w = observer_weights(stacked, weights)
    w = np.ones(stacked.sizes["observer"]) if w is None else w
    per_observer = stacked.mean("stimulus").transpose("design", "observer").values
    closer = np.where(per_observer[1] < per_observer[0], 1.0, np.where(per_observer[1] == per_observer[0], 0.5, 0.0))
    counts = resample_counts(stacked.sizes["observer"], resamples, seed)  # the same resamples as the table
    closer_reps = (counts * w) @ closer / ((counts * w).sum(axis=1))
    diff_reps = reps[..., 1] - reps[..., 0]
    diff_bounds = percentile_interval(diff_reps, level, axis=0)
    diff_bounds[:, 3] = np.nan  # no interval of the maximum
    interval_attrs = {"interval_method": INTERVAL_METHOD, "interval_level": float(level),
                      "interval_resamples": int(resamples), "interval_seed": int(seed)}
    units = table["statistics"].attrs.get("units", "1")
    out = xr.Dataset(
        {
            "statistics": (("design", "statistic"), point.T, dict(table["statistics"].attrs)),
            "statistics_interval": (("bound", "design", "statistic"),
                                    table["statistics_interval"].transpose("bound", "design", "statistic").values,
                                    dict(table["statistics_interval"].attrs)),
            "share_above_threshold": (("design", "threshold"), share_point.T,
                                      dict(table["share_above_threshold"].attrs)),
            "share_above_threshold_interval": (("bound", "design", "threshold"),
                                               table["share_above_threshold_interval"].transpose(
                                                   "bound", "design", "threshold").values,
                                               dict(table["share_above_threshold_interval"].attrs)),
            "difference": ("statistic", point[:, 1] - point[:, 0],
                           {"units": units, "long_name": f"{labels[1]} minus {labels[0]}, each statistic"}),
            "difference_interval": (("bound", "statistic"), diff_bounds,
                                    {"units": units, "long_name": f"{100 * level:g} % interval of the difference",
                                     **interval_attrs}),
            "share_above_threshold_difference": ("threshold", share_point[:, 1] - share_point[:, 0],
                                                 {"units": "1", "long_name": f"{labels[1]} minus {labels[0]}, share "
                                                                             "above each threshold"}),
            "share_above_threshold_difference_interval": (("bound", "threshold"),
                                                          percentile_interval(share_reps[..., 1] - share_reps[..., 0],
                                                                              level, axis=0),
                                                          {"units": "1", "long_name": f"{100 * level:g} % interval of "
                                                           "the difference of the shares above each threshold",
                                                           **interval_attrs}),
            "share_second_closer": ((), float(w @ closer / w.sum()), {
                "units": "1", "long_name": f"share of observers for whom {labels[1]} looks closer to the reference "
                                           f"than {labels[0]} (mean difference over the stimuli; ties count half)"}),
            "share_second_closer_interval": ("bound", percentile_interval(closer_reps, level),
                                             {"units": "1", "long_name": f"{100 * level:g} % interval of the share "
                                                                         "of observers who see the second closer",
                                              **interval_attrs}),
        },
        coords={"design": list(labels), "statistic": table["statistic"].values, "threshold": table["threshold"],
                "bound": list(BOUNDS)},
    )
    out.attrs = {**table.attrs, "first": str(labels[0]), "second": str(labels[1]),
                 "comparison": "paired: both designs resampled with the same observers", "metasim_version": __version__}
    return out


def rank_designs(replicates: xr.DataArray, point: xr.DataArray | None = None, *, dim: str = "design",
                 level: float = DEFAULT_LEVEL) -> xr.Dataset:
    """Probability of being best, rank intervals and the designs that cannot be told from the best.

    Parameters
    ----------
    replicates : DataArray
        One statistic (lower is better, e.g. the 95th percentile) of every design in every resample,
        dims (``resample``, ``dim``): all designs resampled with the same observers (same seed).
    point : DataArray, optional
        The full-sample statistic per design (default: the median of the replicates).
    level : float
        Level of the rank intervals and of the paired differences to the best design.

    Returns
    -------
    Dataset
        ``best_probability`` (design): share of resamples in which the design is lowest (ties
        share); ``rank`` (design): rank of the full-sample statistic (1 = best); ``rank_interval``
        (bound, design): percentile interval of the rank over the resamples (attained ranks);
        ``indistinguishable_from_best`` (design): True where the interval of the paired difference
        to the best design reaches down to zero or below. Attributes ``best_design`` and
        ``best_set`` (the designs that cannot be told apart from the best, comma separated).

    Examples
    --------
    >>> import numpy as np, xarray as xr
    >>> replicates = xr.DataArray(np.array([[5.0, 4.0, 9.0], [4.5, 4.2, 9.1], [5.2, 3.9, 8.8]] * 100),
    ...                           dims=("resample", "design"), coords={"design": ["a", "b", "c"]})
    >>> ranking = rank_designs(replicates)
    >>> ranking.attrs["best_design"], ranking.attrs["best_set"], ranking["best_probability"].values.round(2).tolist()
    ('b', 'b', [0.0, 1.0, 0.0])
    """
    if "resample" not in replicates.dims or dim not in replicates.dims or replicates.ndim != 2:
        raise StatisticsError(f"rank_designs needs replicates with dims ('resample', '{dim}'), got {replicates.dims}")
    check_interval_settings(level, DEFAULT_RESAMPLES)  # the level only: replicates come as they were drawn
    reps = replicates.transpose("resample", dim).values.astype(float)
    if np.isnan(reps).any():
        reps = np.where(np.isnan(reps), np.inf, reps)  # a design without a value never ranks first
    full = (np.median(reps, axis=0) if point is None else
            np.asarray(point.transpose(dim).values if isinstance(point, xr.DataArray) else point, dtype=float))
    ranks = reps.argsort(axis=1, kind="stable").argsort(axis=1, kind="stable") + 1  # 1 = lowest in that resample
    lowest = reps == reps.min(axis=1, keepdims=True)
    probability = (lowest / lowest.sum(axis=1, keepdims=True)).mean(axis=0)
    alpha = 1 - float(level)
    rank_bounds = np.quantile(ranks, [alpha / 2, 1 - alpha / 2], axis=0, method="inverted_cdf")
    order = np.argsort(np.where(np.isnan(full), np.inf, full), kind="stable")
    point_rank = np.empty(full.size, dtype=np.int64)
    point_rank[order] = np.arange(1, full.size + 1)
    best = int(order[0])
    lower_difference = np.quantile(reps - reps[:, [best]], alpha / 2, axis=0)
    together = lower_difference <= 0
    together[best] = True
    labels = [str(v) for v in replicates[dim].values] if dim in replicates.coords else [str(i) for i in range(full.size)]
    out = xr.Dataset(ranking_arrays(probability, point_rank, rank_bounds, together, dim=dim, level=level),
                     coords={"bound": list(BOUNDS), **{k: v.variable for k, v in replicates.coords.items()
                                                       if v.dims == (dim,)}})
    out.attrs = {"best_design": labels[best], "best_set": ", ".join(labels[i] for i in np.flatnonzero(together)),
                 "ranking_level": float(level), "resamples": int(reps.shape[0]),
                 "ranking_method": "designs resampled with the same observers; ranks per resample",
                 "metasim_version": __version__}
    return out


def ranking_arrays(probability, point_rank, rank_bounds, together, *, dim: str = "design",
                   level: float = DEFAULT_LEVEL) -> dict:
    """The variables of :func:`rank_designs` (DataArrays by name, with their units and long names)
    from its numbers: best probabilities, point ranks, rank bounds (2 × designs) and the best set's mask."""
    attrs = {"units": "1"}
    return {
        "best_probability": xr.DataArray(np.asarray(probability), dims=dim, attrs={
            **attrs, "long_name": "share of resamples in which the design is best"}),
        "rank": xr.DataArray(np.asarray(point_rank), dims=dim, attrs={
            **attrs, "long_name": "rank of the design (1 = lowest statistic)"}),
        "rank_interval": xr.DataArray(np.asarray(rank_bounds).astype(np.int64), dims=("bound", dim), attrs={
            **attrs, "long_name": f"{100 * level:g} % interval of the rank over the resamples"}),
        "indistinguishable_from_best": xr.DataArray(np.asarray(together), dims=dim, attrs={
            **attrs, "long_name": f"the paired difference to the best design is not above zero at {100 * level:g} %"}),
    }


def edge_warnings(parameters: dict, best: int, units: dict | None = None) -> list[str]:
    """Warnings for a best design on the edge of a swept parameter's range.

    Parameters
    ----------
    parameters : dict of str to array_like
        Each swept parameter's value per design (only those taking at least two values count).
    best : int
        Position of the best design.
    units : dict, optional
        Units per parameter for the messages (e.g. ``{"R_peak_nm": "nm"}``).

    Returns
    -------
    list of str
        One sentence per parameter whose range the best design sits on the edge of, e.g. "the best
        design has R_peak_nm = 650 nm, the upper end of the swept range 610-650 nm: extend the range
        beyond 650 nm"; empty for an interior optimum.
    """
    messages = []
    for name, values in parameters.items():
        v = np.asarray(values)
        if v.dtype.kind not in "iuf" or np.unique(v).size < 2:
            continue
        lo, hi, at = float(np.min(v)), float(np.max(v)), float(v[best])
        unit = f" {units[name]}" if units and units.get(name) not in (None, "", "1") else ""
        if at in (lo, hi):
            end, way = ("upper", "beyond") if at == hi else ("lower", "below")
            messages.append(f"the best design has {name} = {at:g}{unit}, the {end} end of the swept range "
                            f"{lo:g}-{hi:g}{unit}: extend the range {way} {at:g}{unit}")
    return messages


def observers_needed(half_width, observer_count: int, target_half_width: float = DEFAULT_HALF_WIDTH) -> int:
    """Observers needed for an interval half-width of ``target_half_width``.

    Interval half-widths shrink as 1 / √n (Efron & Tibshirani 1993), so ``n · (h / target)²``
    observers, rounded up, bring the half-width ``h`` seen with ``observer_count`` observers down
    to the target.
    """
    if not (isinstance(target_half_width, (int, float, np.floating)) and target_half_width > 0):
        raise StatisticsError(f"target half-width {target_half_width!r} is not allowed; give a number > 0")
    h = float(half_width)
    if not np.isfinite(h) or observer_count < 1:
        raise StatisticsError("observers_needed needs a finite half-width and at least one observer")
    return max(1, int(math.ceil(observer_count * (h / float(target_half_width)) ** 2)))


def half_width(interval: xr.DataArray) -> xr.DataArray:
    """Half the width of an interval (dim ``bound``)."""
    return (interval.sel(bound="upper") - interval.sel(bound="lower")) / 2


__all__ = ["DEFAULT_HALF_WIDTH", "paired_comparison", "rank_designs", "edge_warnings", "observers_needed", "half_width"]
