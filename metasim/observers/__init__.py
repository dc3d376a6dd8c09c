"""Observers: standard CIE observers, the CIE 170-1 physiological model, individuals, populations.

``observer_categories`` and ``observer_features`` live in :mod:`metasim.metamerism.categories`;
the names here stay for old imports until the next release and are looked up there on first use,
with a DeprecationWarning naming the new home.
"""

import importlib

from metasim.observers.files import check_observers, read_observers
from metasim.observers.physiological import (
    DEVIATIONS,
    cie2006_observer,
    lens_components_dataset,
    low_density_absorbance,
    ocular_media_density,
    physiological_observers,
    read_lens_components,
)
from metasim.observers.pigments import ABSORBANCE_INTERPOLATIONS, PEAK_SHIFT_AXES
from metasim.observers.population import DEFAULT_SD, observer_population
from metasim.observers.standard import (
    CONES,
    STANDARD_OBSERVERS,
    XYZ,
    cone_fundamentals,
    standard_observer,
)



def __getattr__(name: str):
    categories = importlib.import_module("metasim.observers.categories")  # the old home: imports nothing
    if name in categories._MOVED:  # moved to the metamerism layer
        return categories.moved_name(name, __name__)
    raise AttributeError(f"module {__name__!r} has no attribute {name!r}")


__all__ = [
    "CONES",
    "XYZ",
    "STANDARD_OBSERVERS",
    "standard_observer",
    "cone_fundamentals",
    "DEVIATIONS",
    "DEFAULT_SD",
    "PEAK_SHIFT_AXES",
    "ABSORBANCE_INTERPOLATIONS",
    "cie2006_observer",
    "physiological_observers",
    "low_density_absorbance",
    "ocular_media_density",
    "read_lens_components",
    "lens_components_dataset",
    "observer_population",
    "check_observers",
    "read_observers",
]
