"""Former home of the observer categories, kept so that old imports keep working.

Categories moved to :mod:`metasim.metamerism.categories`: they judge observers by the CIELAB they
see of a stimulus set, so they use the colorimetry layer and the stimulus sets, which lie below the
observers layer. This module imports nothing when it loads; its names are looked up in the new home
on first use.
"""

from __future__ import annotations

_MOVED = ("observer_categories", "observer_features")


def __getattr__(name: str):
    if name in _MOVED:
        from metasim.metamerism import categories

        return getattr(categories, name)
    raise AttributeError(f"module {__name__!r} has no attribute {name!r}")


__all__ = list(_MOVED)
