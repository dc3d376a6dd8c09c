"""The mismatch engine: observer populations × stimuli × reference/test renderings.

See :mod:`metasim.metamerism.engine` (the procedure), :mod:`~metasim.metamerism.stimuli`
(stimulus sets), :mod:`~metasim.metamerism.summary` (statistics), :mod:`~metasim.metamerism.index`
(observer metamerism index), :mod:`~metasim.metamerism.choices` (calibration-observer ranking
and white-point offsets) and :mod:`~metasim.metamerism.categories` (representative observers).
"""

from metasim.metamerism.categories import observer_categories, observer_features
from metasim.metamerism.engine import ADAPTED_WHITES, mismatch, resolve_calibration_observer, resolve_observers
from metasim.metamerism.choices import CANDIDATES, rank_calibration_observers, white_point_offsets
from metasim.metamerism.index import observer_metamerism_index
from metasim.metamerism import stimuli
from metasim.metamerism.stimuli import (
    cie_13_3_samples,
    combine,
    distinct,
    duplicate_colours,
    neutral_ramp,
    primaries_and_secondaries,
    read_stimuli_csv,
    reflectance_set,
    rgb_cube_grid,
    rgb_set,
    xyz_set,
)
from metasim.metamerism.summary import DECADES, STATISTICS, THRESHOLDS, age_band_edges, decade_age_bands, summarise

__all__ = [
    "mismatch",
    "resolve_observers",
    "resolve_calibration_observer",
    "ADAPTED_WHITES",
    "observer_metamerism_index",
    "observer_categories",
    "observer_features",
    "rank_calibration_observers",
    "white_point_offsets",
    "CANDIDATES",
    "stimuli",
    "neutral_ramp",
    "primaries_and_secondaries",
    "rgb_cube_grid",
    "rgb_set",
    "cie_13_3_samples",
    "reflectance_set",
    "xyz_set",
    "read_stimuli_csv",
    "combine",
    "distinct",
    "duplicate_colours",
    "summarise",
    "DECADES",
    "decade_age_bands",
    "age_band_edges",
    "STATISTICS",
    "THRESHOLDS",
]
