"""Observers: standard CIE observers, the CIE 170-1 physiological model, individuals, populations."""

from metasim.observers.standard import (
    CONES,
    STANDARD_OBSERVERS,
    XYZ,
    cone_fundamentals,
    standard_observer,
)

__all__ = ["CONES", "XYZ", "STANDARD_OBSERVERS", "standard_observer", "cone_fundamentals"]
