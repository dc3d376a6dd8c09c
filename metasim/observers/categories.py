"""Former home of the observer categories, kept so that old imports keep working for one release.

Categories moved to :mod:`metasim.metamerism.categories`: they judge observers by the CIELAB they
see of a stimulus set, so they use the colorimetry layer and the stimulus sets, which lie below the
observers layer. This module imports nothing when it loads; its names are looked up in the new home
on first use, with a DeprecationWarning naming it.
"""

from __future__ import annotations

import warnings

_MOVED = ("observer_categories", "observer_features")


def moved_name(name: str, old_module: str):
    """``name`` from :mod:`metasim.metamerism.categories`, with a DeprecationWarning saying that
    ``old_module.name`` is its old import path (it works until the next release)."""
    warnings.warn(f"{old_module}.{name} has moved to metasim.metamerism.categories.{name}; "
                  "the old import path works until the next release", DeprecationWarning, stacklevel=3)
    from metasim.metamerism import categories

    return getattr(categories, name)


def __getattr__(name: str):
    if name in _MOVED:
        return moved_name(name, __name__)
    raise AttributeError(f"module {__name__!r} has no attribute {name!r}")


__all__ = list(_MOVED)
