"""Intervals and ranks of a sweep's designs: which designs cannot be told apart, and the edge of the range.

Every design of a sweep is judged by the same observers, so its statistics are resampled with the
*same* resamples of the observers (same seed, same population) chunk by chunk: the replicates of
different designs are paired. Per chunk, :func:`interval_variables` keeps each design's intervals
and the replicates of its 95th percentile (``resample`` values per design, small next to the
pairs); on the combined sweep, :func:`ranking_variables` turns them into each design's probability
of being the best, a rank interval and the set of designs that cannot be told apart from the
best (:func:`metasim.statistics.rank_designs`), warns when the best design sits on the edge of a
swept parameter's range (:func:`metasim.statistics.comparison.edge_warnings`) and says how many
observers a chosen half-width on the 95th percentile would need.

Variables (dims):

=============================================  ================================================
``delta_e_2000_overall_interval`` (design,     percentile interval of each statistic over all
bound, statistic)                              observer × stimulus pairs (none for the maximum)
``share_beyond_overall_interval`` (design,     interval of each share beyond a threshold
bound, threshold)
``delta_e_2000_p95_replicates`` (design,       the 95th percentile in each resample (paired)
resample)
``best_probability`` (design)                  share of resamples in which the design is best
``rank``, ``rank_interval`` (bound, design)    rank by the 95th percentile and its interval
``indistinguishable_from_best`` (design)       cannot be told apart from the best at the level
``observers_needed_p95`` (design)              observers for the target half-width on p95
=============================================  ================================================

Attributes of the combined sweep: ``best_design``, ``best_set``, ``edge_warnings`` (sentences,
joined by " | "; empty for an interior optimum), ``ranking_level``, ``ranking_statistic``,
``interval_method``, ``interval_level``, ``interval_resamples``, ``interval_seed``,
``target_half_width``.
"""

from __future__ import annotations

import numpy as np
import xarray as xr

from metasim.units import DELTA_E00
from metasim.statistics import DEFAULT_LEVEL, DEFAULT_RESAMPLES, population_statistics
from metasim.statistics.comparison import (
    DEFAULT_HALF_WIDTH,
    edge_warnings,
    half_width,
    observers_needed,
    rank_designs,
)

REPLICATES = "delta_e_2000_p95_replicates"


def interval_variables(delta_e: xr.DataArray, *, level: float = DEFAULT_LEVEL, resamples: int = DEFAULT_RESAMPLES,
                       seed: int = 0, pooled: str | None = None) -> tuple[dict, dict]:
    """The interval and replicate variables of a chunk's designs, and their attributes.

    Parameters
    ----------
    delta_e : DataArray
        CIE 2000 differences (design, observer, stimulus) of the chunk's designs.
    level, resamples, seed
        As for :func:`metasim.statistics.population_statistics` (the same for every chunk).
    pooled : str, optional
        Which stimuli the tables pool (attribute).

    Returns
    -------
    (dict, dict)
        DataArrays by name (dims as in the module docstring) and the interval attributes.
    """
    table = population_statistics(delta_e, interval=True, replicates=True, level=level, resamples=resamples,
                                  seed=seed, pooled=pooled)

    def plain(value, *dims):
        value = value.transpose(*dims)
        return xr.DataArray(value.values, dims=dims, attrs=dict(value.attrs))

    out = {
        "delta_e_2000_overall_interval": plain(table["statistics_interval"], "design", "bound", "statistic"),
        "share_of_pairs_above_threshold_interval": plain(table["share_beyond_interval"], "design", "bound", "threshold"),
        REPLICATES: plain(table["statistics_replicates"].sel(statistic="p95", drop=True), "design", "resample"),
    }
    out[REPLICATES].attrs.update({"units": DELTA_E00, "long_name": "95th percentile of CIE 2000 differences over all "
                                  "observer x stimulus pairs, in each resample of the observers (paired across designs)"})
    attrs = {key: table.attrs[key] for key in ("interval_method", "interval_level", "interval_resamples",
                                               "interval_seed")}
    return out, attrs


def swept_parameters(sweep: xr.Dataset) -> dict:
    """The numeric design coordinates that take at least two values (the swept parameters)."""
    out = {}
    for name, coord in sweep.coords.items():
        if coord.dims == ("design",) and name != "design" and coord.dtype.kind in "iuf" \
                and np.unique(coord.values).size > 1:
            out[name] = coord.values
    return out


def _units(sweep: xr.Dataset, name: str) -> str:
    units = str(sweep[name].attrs.get("units", ""))
    if not units and "_nm" in name:
        units = "nm"
    return units


def ranking_variables(sweep: xr.Dataset, *, level: float | None = None,
                      target_half_width: float = DEFAULT_HALF_WIDTH) -> tuple[dict, dict]:
    """Ranks, best probabilities, the best set, edge warnings and the observers needed, of a
    combined sweep holding :func:`interval_variables` (empty when it does not).

    Returns
    -------
    (dict, dict)
        DataArrays by name (module docstring) and the attributes ``best_design``, ``best_set``,
        ``edge_warnings``, ``ranking_level``, ``ranking_statistic`` and ``target_half_width``.
    """
    if REPLICATES not in sweep or "delta_e_2000_overall" not in sweep:
        return {}, {}
    level = float(sweep.attrs.get("interval_level", DEFAULT_LEVEL) if level is None else level)
    replicates = sweep[REPLICATES].transpose("resample", "design")
    point = sweep["delta_e_2000_overall"].sel(statistic="p95")
    ranking = rank_designs(replicates, point, level=level)
    best = int(np.flatnonzero(ranking["rank"].values == 1)[0])
    parameters = swept_parameters(sweep)
    edges = edge_warnings(parameters, best, {name: _units(sweep, name) for name in parameters})
    observers = int(sweep.attrs.get("observer_count", 0))
    p95 = sweep["delta_e_2000_overall_interval"].sel(statistic="p95")
    needed = [observers_needed(float(half_width(p95.isel(design=i))), observers, target_half_width)
              if observers and np.isfinite(float(half_width(p95.isel(design=i)))) else -1
              for i in range(sweep.sizes["design"])]
    out = {name: xr.DataArray(ranking[name].values, dims=ranking[name].dims, attrs=dict(ranking[name].attrs))
           for name in ("best_probability", "rank", "rank_interval", "indistinguishable_from_best")}
    out["observers_needed_p95"] = xr.DataArray(np.asarray(needed, dtype=np.int64), dims="design", attrs={
        "units": "1", "long_name": "observers needed for the target interval half-width on the 95th percentile "
                                   "(half-widths shrink as 1/sqrt(n); -1: unknown)",
        "target_half_width": float(target_half_width)})
    labels = [str(v) for v in sweep["design"].values]
    together = [labels[i] for i in np.flatnonzero(ranking["indistinguishable_from_best"].values)]
    attrs = {"best_design": labels[best], "best_set": ", ".join(together), "edge_warnings": " | ".join(edges),
             "ranking_level": level, "ranking_statistic": "p95 (95th percentile over all observer x stimulus pairs)",
             "target_half_width": float(target_half_width)}
    return out, attrs


__all__ = ["REPLICATES", "interval_variables", "swept_parameters", "ranking_variables"]
