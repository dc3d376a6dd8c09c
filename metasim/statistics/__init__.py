"""The statistics layer: weighted population statistics, intervals, paired comparisons and ranks.

Every summary metasim writes (engine, study, sweep, command line, report) is computed here, by the
definitions of :mod:`metasim.statistics.summaries` (weighted mean, quantiles — numpy's linear
method without weights, numpy's weighted ``inverted_cdf`` with them —, maximum, shares above
thresholds). :func:`population_statistics` makes the labelled tables, each saying what it pools;
:mod:`~metasim.statistics.resampling` adds percentile intervals from resampling observers;
:mod:`~metasim.statistics.comparison` compares two designs seen by the same observers, ranks many
designs (probability of being best, rank intervals, the set that cannot be told apart), warns
when a sweep's best design sits on the edge of its range and says how many observers a chosen
interval half-width needs; :mod:`~metasim.statistics.headline` states the answer in one sentence.

The layer imports no other metasim layer (numpy, xarray and compiled passes only), so every layer
may use it.
"""

from metasim.statistics.resampling import (
    DEFAULT_LEVEL,
    DEFAULT_RESAMPLES,
    INTERVAL_METHOD,
    percentile_interval,
    pooled_replicates,
    resample_counts,
)
from metasim.statistics.summaries import (
    QUANTILE_DEFINITION,
    QUANTILE_LEVELS,
    STATISTICS,
    THRESHOLDS,
    observer_weights,
    quantiles,
    share_above_threshold,
    share_beyond as share_beyond,  # the old name of share_above_threshold, one release (not in __all__)
    statistics_along,
    weighted_mean,
)
from metasim.statistics.tables import BOUNDS, population_statistics

__all__ = [
    "STATISTICS",
    "QUANTILE_LEVELS",
    "THRESHOLDS",
    "QUANTILE_DEFINITION",
    "DEFAULT_LEVEL",
    "DEFAULT_RESAMPLES",
    "INTERVAL_METHOD",
    "BOUNDS",
    "weighted_mean",
    "quantiles",
    "share_above_threshold",
    "statistics_along",
    "observer_weights",
    "population_statistics",
    "resample_counts",
    "pooled_replicates",
    "percentile_interval",
]
