"""One-sentence answers with their intervals, for the command line and the reports.

Numbers: values below 10 with two decimals, larger ones with one (a value and its interval share
one precision); shares as whole percentages;
each followed by its interval in brackets ("4.24 (3.90-4.61)", "87 % (84-90 %)").
"""

from __future__ import annotations

import numpy as np
import xarray as xr

from metasim.statistics.comparison import half_width, observers_needed
from metasim.units import format_share

DASH = "\u2013"


def _decimals(*values) -> int:
    return 2 if max(abs(float(v)) for v in values) < 10 else 1


def number(value, decimals: int | None = None) -> str:
    """A difference value as printed: two decimals below 10, one from 10 on (or ``decimals``)."""
    v = float(value)
    if not np.isfinite(v):
        return "n/a"
    return f"{v:.{_decimals(v) if decimals is None else decimals}f}"


def _bounds(interval):
    """(lower, upper) of an interval (DataArray with ``bound``, or a pair); None if missing or NaN."""
    if interval is None:
        return None
    if isinstance(interval, xr.DataArray):
        lo, hi = float(interval.sel(bound="lower")), float(interval.sel(bound="upper"))
    else:
        lo, hi = float(interval[0]), float(interval[1])
    return (lo, hi) if np.isfinite(lo) and np.isfinite(hi) else None


def with_interval(value, interval=None) -> str:
    """``"4.24 (3.90-4.61)"``; the value alone when there is no interval."""
    bounds = _bounds(interval)
    if bounds is None:
        return number(value)
    digits = _decimals(value, *bounds)  # one precision for the value and its bounds
    return f"{number(value, digits)} ({number(bounds[0], digits)}{DASH}{number(bounds[1], digits)})"


def share_with_interval(value, interval=None) -> str:
    """``"87 % (84-90 %)"``; the share alone when there is no interval."""
    text = format_share(value)
    bounds = _bounds(interval)
    if bounds is None:
        return text
    return f"{text} ({format_share(bounds[0], sign=False)}{DASH}{format_share(bounds[1])})"


def _cell(table: xr.Dataset, name: str, **where):
    value = table[name].sel(**where)
    interval = table[f"{name}_interval"].sel(**where) if f"{name}_interval" in table else None
    return value, interval


def design_headline(table: xr.Dataset, design: str, reference: str, *, threshold: float = 2.0) -> str:
    """One design against the reference: p95, median and share beyond ``threshold``, with intervals.

    ``table`` is a :func:`~metasim.statistics.population_statistics` result for that design alone
    (dims ``statistic``, ``threshold``, ``bound``).
    """
    p95, p95_i = _cell(table, "statistics", statistic="p95")
    med, med_i = _cell(table, "statistics", statistic="median")
    text = (f"{design} differs from {reference} by a 95th percentile of {with_interval(p95, p95_i)} CIE 2000 units, "
            f"median {with_interval(med, med_i)}")
    if "share_above_threshold" in table and threshold in table["threshold"].values:
        share, share_i = _cell(table, "share_above_threshold", threshold=threshold)
        text += f"; {share_with_interval(share, share_i)} of viewer x colour pairs beyond {threshold:g}"
    return text + "."


def comparison_headline(comparison: xr.Dataset, reference: str) -> str:
    """Two designs seen by the same observers (:func:`~metasim.statistics.paired_comparison`), e.g.
    "B differs from the monitor less than A for 87 % (84-90 %) of viewers; p95 4.24 (3.90-4.61) vs
    10.3 (9.7-11.0)"."""
    first, second = comparison.attrs["first"], comparison.attrs["second"]
    share = float(comparison["share_second_closer"])
    bounds = comparison["share_second_closer_interval"]
    lo, hi = float(bounds.sel(bound="lower")), float(bounds.sel(bound="upper"))
    winner, loser = (second, first) if share >= 0.5 else (first, second)
    if share < 0.5:
        share, lo, hi = 1 - share, 1 - hi, 1 - lo
    p95 = {d: with_interval(comparison["statistics"].sel(design=d, statistic="p95"),
                            comparison["statistics_interval"].sel(design=d, statistic="p95")) for d in (first, second)}
    return (f"{winner} differs from {reference} less than {loser} for {share_with_interval(share, (lo, hi))} of "
            f"viewers; 95th percentile {p95[winner]} vs {p95[loser]} CIE 2000 units.")


def sweep_headline(ranking: xr.Dataset, statistics: xr.DataArray, interval: xr.DataArray | None, *,
                   describe=None, edges=(), statistic: str = "95th percentile") -> str:
    """The best design of a sweep, its statistic with interval, its probability of being best, the
    designs that cannot be told apart from it and any edge warning."""
    best = ranking.attrs["best_design"]
    dim = ranking["best_probability"].dims[0]
    labels = [str(v) for v in ranking[dim].values]
    index = labels.index(best)
    name = describe(index) if describe else f"design {best}"
    value = statistics.isel({dim: index})
    text = (f"Best: {name}, {statistic} {with_interval(value, None if interval is None else interval.isel({dim: index}))}"
            f" CIE 2000 units, lowest in {format_share(ranking['best_probability'][index])} of resamples")
    together = [i for i, flag in enumerate(ranking["indistinguishable_from_best"].values) if flag and i != index]
    level = 100 * float(ranking.attrs.get("ranking_level", 0.95))
    if together:
        others = ", ".join(describe(i) if describe else f"design {labels[i]}" for i in together[:5])
        more = f" and {len(together) - 5} more" if len(together) > 5 else ""
        text += f"; it cannot be told apart at {level:g} % from {others}{more}"
    text += "."
    for message in edges:
        text += f" Note: {message}."
    return text


def population_advice(interval: xr.DataArray, observer_count: int, target_half_width: float,
                      statistic: str = "95th percentile") -> str:
    """``"With 1000 observers the 95th percentile is known to ±0.21; ±0.10 needs about 4410."``"""
    half = float(half_width(interval))
    if not np.isfinite(half):
        return ""
    needed = observers_needed(half, observer_count, target_half_width)
    return (f"With {observer_count} observers the {statistic} is known to \u00b1{number(half)}; "
            f"\u00b1{number(target_half_width)} needs about {needed} observers.")


__all__ = ["number", "with_interval", "share_with_interval", "design_headline", "comparison_headline",
           "sweep_headline", "population_advice"]
