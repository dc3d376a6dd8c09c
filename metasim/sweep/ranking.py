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
``share_of_pairs_above_threshold_interval``    interval of each share above a threshold
(design, bound, threshold)
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

from pathlib import Path

import numpy as np
import xarray as xr

from metasim.units import DELTA_E00
from metasim.statistics import DEFAULT_LEVEL, DEFAULT_RESAMPLES, population_statistics
from metasim.statistics.comparison import (
    DEFAULT_HALF_WIDTH,
    edge_warnings,
    observers_needed,
    ranking_arrays,
)
from metasim.statistics.resampling import check_interval_settings

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
        "share_of_pairs_above_threshold_interval": plain(table["share_above_threshold_interval"], "design",
                                                         "bound", "threshold"),
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


#: bytes of replicates (and of their ranks) held at once while a sweep's designs are ranked
RANKING_BYTES = 32 << 20


def _blocks(count: int, size: int):
    return [(a, min(a + size, count)) for a in range(0, count, size)]


def _column_mean(values: np.ndarray) -> np.ndarray:
    """``values.mean(axis=0)`` of a (resample, design) block, summed resample after resample for every
    block width (numpy sums a single column pairwise, several columns row after row)."""
    if values.shape[1] == 1:
        return np.concatenate([values, values], axis=1).mean(axis=0)[:1]
    return values.mean(axis=0)


def rank_in_blocks(read, count: int, resamples: int, point: np.ndarray, *, level: float = DEFAULT_LEVEL,
                   block_bytes: int = RANKING_BYTES, scratch=None) -> tuple[dict, int, np.ndarray]:
    """:func:`metasim.statistics.rank_designs` of many designs, reading their replicates in blocks.

    The same numbers as ``rank_designs`` of the whole (resample × design) array, holding about
    ``block_bytes`` of it at once: the lowest value of each resample and how many designs reach it
    are kept while the designs go by in blocks; the ranks within each resample are computed a few
    resamples at a time from a copy of the replicates laid out resample by resample in a scratch
    file (folder ``scratch``), and their intervals read back design block by design block.

    Parameters
    ----------
    read : callable
        ``read(start, stop)``: the replicates of designs ``start .. stop`` as a (resample, design) array.
    count, resamples : int
        Designs and resamples.
    point : ndarray
        The full-sample statistic per design.

    Returns
    -------
    (dict, int, ndarray)
        The variables of ``rank_designs`` (:func:`metasim.statistics.comparison.ranking_arrays`),
        the index of the best design and the mask of the designs that cannot be told from it.
    """
    import tempfile

    alpha = 1 - float(level)
    row = max(1, int(resamples)) * 8
    size = max(2, int(block_bytes) // (6 * row))  # designs per block: the block and its temporaries

    def block(a: int, b: int) -> np.ndarray:
        values = np.asarray(read(a, b), dtype=float)
        return np.where(np.isnan(values), np.inf, values) if np.isnan(values).any() else values

    full = np.asarray(point, dtype=float)
    order = np.argsort(np.where(np.isnan(full), np.inf, full), kind="stable")
    point_rank = np.empty(count, dtype=np.int64)
    point_rank[order] = np.arange(1, count + 1)
    best = int(order[0])
    best_values = block(best, best + 1)[:, 0]
    lowest = np.full(resamples, np.inf)
    reaching = np.zeros(resamples, dtype=np.int64)
    with tempfile.TemporaryDirectory(dir=scratch, prefix=".ranking-") as folder:
        by_resample = Path(folder) / "replicates.f8"
        with open(by_resample, "wb") as out:
            out.truncate(count * row)
            for a, b in _blocks(count, size):  # the lowest value of each resample, and the designs reaching it
                values = block(a, b)
                low = values.min(axis=1)
                reach = (values == low[:, None]).sum(axis=1)
                below, equal = low < lowest, low == lowest
                lowest[below], reaching[below] = low[below], reach[below]
                reaching[equal] += reach[equal]
                for r in range(resamples):  # laid out resample by resample
                    out.seek((r * count + a) * 8)
                    out.write(np.ascontiguousarray(values[r]).tobytes())
        ranks_file = Path(folder) / "ranks.i4"
        rows = max(1, int(block_bytes) // (4 * 8 * count))  # resamples ranked at once
        with open(by_resample, "rb") as source, open(ranks_file, "wb") as out:
            for r0, r1 in _blocks(resamples, rows):
                values = np.frombuffer(source.read((r1 - r0) * count * 8), dtype=np.float64).reshape(r1 - r0, count)
                ranks = values.argsort(axis=1, kind="stable").argsort(axis=1, kind="stable") + 1
                out.write(ranks.astype(np.int32).tobytes())
        probability = np.empty(count)
        lower_difference = np.empty(count)
        rank_bounds = np.empty((2, count), dtype=np.int64)
        with open(ranks_file, "rb") as ranks_source:
            for a, b in _blocks(count, size):
                values = block(a, b)
                probability[a:b] = _column_mean((values == lowest[:, None]) / reaching[:, None])
                lower_difference[a:b] = np.quantile(values - best_values[:, None], alpha / 2, axis=0)
                ranks = np.empty((resamples, b - a), dtype=np.int32)
                for r in range(resamples):
                    ranks_source.seek((r * count + a) * 4)
                    ranks[r] = np.frombuffer(ranks_source.read((b - a) * 4), dtype=np.int32)
                rank_bounds[:, a:b] = np.quantile(ranks.astype(np.int64), [alpha / 2, 1 - alpha / 2], axis=0,
                                                  method="inverted_cdf")
    together = lower_difference <= 0
    together[best] = True
    return ranking_arrays(probability, point_rank, rank_bounds, together, level=level), best, together


def ranking_variables(sweep: xr.Dataset, *, level: float | None = None,
                      target_half_width: float = DEFAULT_HALF_WIDTH, block_bytes: int = RANKING_BYTES,
                      scratch=None) -> tuple[dict, dict]:
    """Ranks, best probabilities, the best set, edge warnings and the observers needed, of a
    combined sweep holding :func:`interval_variables` (empty when it does not).

    The sweep may be opened from its file (:func:`metasim.sweep.store.open_sweep`): its replicates
    are read in blocks of designs (:func:`rank_in_blocks`, about ``block_bytes`` at once; scratch
    files in the folder ``scratch``), so memory does not grow with the resamples × designs.

    Returns
    -------
    (dict, dict)
        DataArrays by name (module docstring) and the attributes ``best_design``, ``best_set``,
        ``edge_warnings``, ``ranking_level``, ``ranking_statistic`` and ``target_half_width``.
    """
    if REPLICATES not in sweep or "delta_e_2000_overall" not in sweep:
        return {}, {}
    level = float(sweep.attrs.get("interval_level", DEFAULT_LEVEL) if level is None else level)
    check_interval_settings(level, DEFAULT_RESAMPLES)  # the level only, as rank_designs checks it
    count, resamples = sweep.sizes["design"], sweep.sizes["resample"]
    replicates = sweep[REPLICATES]

    def read(a: int, b: int) -> np.ndarray:
        return replicates.isel(design=slice(a, b)).transpose("resample", "design").values

    point = sweep["delta_e_2000_overall"].sel(statistic="p95").values
    ranking, best, together = rank_in_blocks(read, count, resamples, point, level=level, block_bytes=block_bytes,
                                             scratch=scratch)
    parameters = swept_parameters(sweep)
    edges = edge_warnings(parameters, best, {name: _units(sweep, name) for name in parameters})
    observers = int(sweep.attrs.get("observer_count", 0))
    p95 = sweep["delta_e_2000_overall_interval"].sel(statistic="p95")
    widths = ((p95.sel(bound="upper") - p95.sel(bound="lower")) / 2).values  # as half_width computes it
    needed = [observers_needed(float(h), observers, target_half_width) if observers and np.isfinite(float(h)) else -1
              for h in widths]
    out = dict(ranking)
    out["observers_needed_p95"] = xr.DataArray(np.asarray(needed, dtype=np.int64), dims="design", attrs={
        "units": "1", "long_name": "observers needed for the target interval half-width on the 95th percentile "
                                   "(half-widths shrink as 1/sqrt(n); -1: unknown)",
        "target_half_width": float(target_half_width)})
    labels = sweep["design"].values
    attrs = {"best_design": str(labels[best]), "best_set": ", ".join(str(labels[i]) for i in np.flatnonzero(together)),
             "edge_warnings": " | ".join(edges), "ranking_level": level,
             "ranking_statistic": "p95 (95th percentile over all observer x stimulus pairs)",
             "target_half_width": float(target_half_width)}
    return out, attrs


__all__ = ["REPLICATES", "RANKING_BYTES", "interval_variables", "swept_parameters", "rank_in_blocks", "ranking_variables"]
