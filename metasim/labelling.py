"""Labelled xarray objects from numpy values: the coordinates of given sources, fixed label sets.

General helpers any layer may use (like :mod:`metasim.errors` and :mod:`metasim.checks`): a model
computes on numpy arrays in a known axis order and labels the result once, here, with the
coordinates of its inputs, without realigning or copying them.
"""

from __future__ import annotations

from functools import lru_cache
from typing import Mapping, Sequence

import xarray as xr


@lru_cache(maxsize=64)
def label_coordinate(dim: str, labels: tuple) -> xr.Coordinates:
    """A dimension coordinate of fixed labels (``labels`` a tuple), built once and shared (cached).

    Examples
    --------
    >>> from metasim.labelling import label_coordinate
    >>> label_coordinate("xyz", ("X", "Y", "Z"))["xyz"].values.tolist()
    ['X', 'Y', 'Z']
    """
    return xr.Coordinates({dim: list(labels)})


def coordinates(dims: Sequence[str], sources=(), *, labels: Mapping[str, Sequence] | None = None) -> xr.Coordinates:
    """The coordinates of ``sources`` that lie along ``dims`` only, with their existing indexes.

    Sources are DataArrays, Datasets or Coordinates; the first one holding a name wins. ``labels``
    adds dimension coordinates of fixed labels (for example ``{"xyz": ("X", "Y", "Z")}``), which
    take precedence over a source coordinate of the same name. Nothing is realigned or re-indexed.

    Parameters
    ----------
    dims : sequence of str
        The dims of the object to be labelled.
    sources : sequence
        DataArrays, Datasets or Coordinates to take coordinates from (the first holding a name wins).
    labels : mapping, optional
        Dimension coordinates of fixed labels, taking precedence over the sources.

    Returns
    -------
    xarray.Coordinates
        The coordinates along ``dims`` only.

    Examples
    --------
    >>> import xarray as xr
    >>> from metasim.labelling import coordinates
    >>> source = xr.DataArray([1.0, 2.0], dims="stimulus", coords={"stimulus": ["a", "b"]})
    >>> sorted(coordinates(("stimulus", "xyz"), [source], labels={"xyz": ("X", "Y", "Z")}))
    ['stimulus', 'xyz']
    """
    allowed = set(dims)
    labels = labels or {}
    variables, indexes = {}, {}
    for source in sources:
        coords = source if isinstance(source, xr.Coordinates) else source.coords
        xindexes = coords.xindexes
        for key, variable in coords.variables.items():
            if key in variables or key in labels or not set(variable.dims) <= allowed:
                continue
            variables[key] = variable
            if key in xindexes:
                indexes[key] = xindexes[key]
    for dim, values_of_dim in labels.items():
        fixed = label_coordinate(dim, tuple(values_of_dim))
        variables[dim] = fixed.variables[dim]
        indexes[dim] = fixed.xindexes[dim]
    return xr.Coordinates(variables, indexes=indexes)


def labelled(values, dims: Sequence[str], sources=(), *, labels: Mapping[str, Sequence] | None = None,
             attrs: dict | None = None, name=None) -> xr.DataArray:
    """A DataArray of numpy ``values`` over ``dims``, labelled by :func:`coordinates` of ``sources``.

    Parameters
    ----------
    values : ndarray
        The numbers, one axis per dim.
    dims : sequence of str
        Their dims.
    sources, labels
        As for :func:`coordinates`.
    attrs : dict, optional
        Attributes (``units``, ``long_name``).
    name : str, optional
        The DataArray's name.

    Returns
    -------
    DataArray
        ``values`` with dims, coordinates and attributes.

    Examples
    --------
    >>> import numpy as np
    >>> from metasim.labelling import labelled
    >>> labelled(np.zeros((2, 3)), ("stimulus", "xyz"), labels={"xyz": ("X", "Y", "Z")}).dims
    ('stimulus', 'xyz')
    """
    dims = tuple(dims)
    # a one-variable Dataset takes the coordinates as they are (the DataArray constructor deep-copies them)
    ds = xr.Dataset({"__labelled__": (dims, values, attrs)}, coords=coordinates(dims, sources, labels=labels))
    out = ds["__labelled__"]
    out.name = name
    return out


__all__ = ["label_coordinate", "coordinates", "labelled"]
