"""Observer sets from files: checked in full before anything is computed with them.

An observer file (``metasim observers``, or :func:`metasim.io.save_dataset` of
:func:`metasim.observer_population`) is a Dataset with ``cmf`` (``observer`` × ``xyz`` ×
``wavelength``: each observer's XYZ colour-matching functions) and often ``lms`` (cone
fundamentals). :func:`read_observers` loads one and :func:`check_observers` checks it, so a NaN, a
sign error, an empty function or a missing coordinate ends in one clear line naming the file, the
observer and the wavelength, not in NaN statistics or a traceback after the whole computation.

What is checked
---------------
* layout: ``cmf`` with dims ``observer``, ``xyz``, ``wavelength``; an ``observer`` coordinate with
  unique labels; ``xyz`` = X, Y, Z; a strictly ascending, uniform ``wavelength`` coordinate, equal
  to the grid the displays use when one is given; at least one observer;
* values: every value finite; ȳ and z̄ not negative, and cone fundamentals (``lms``) not negative
  (they are sums of non-negative cone fundamentals with non-negative coefficients, CIE 170-2:2015);
  x̄ may dip below zero (the CIE 170-2 transform of a shifted L cone; metasim's own populations
  reach about −14 % of the peak) but not below :data:`X_BAR_NEGATIVE_SHARE` of its peak; no
  function may be all zero (its peak must be positive);
* coordinates metasim reads: ``weight`` (categories) finite, not negative and not all zero;
  ``age_years`` finite and positive.
"""

from __future__ import annotations

import os

import numpy as np
import xarray as xr

from metasim.errors import GridMismatchError, ObserverError, SpectrumError
from metasim.io import load_dataset
from metasim.spectra import check_wavelengths

#: How far below zero an observer's x̄ may dip, as a share of its peak (common practice, no source:
#: twice the −14 % seen in metasim's own populations).
X_BAR_NEGATIVE_SHARE = 0.25
#: Round-off allowed below zero for functions that cannot be negative, as a share of their peak.
ROUND_OFF_SHARE = 1e-9
_DIMS = ("observer", "xyz", "wavelength")


def _label(observers: xr.Dataset, index: int) -> str:
    return f"observer {observers['observer'].values[index]!s}"


def _check_functions(observers: xr.Dataset, name: str, components: list[str], where: str,
                     negative_share: dict) -> None:
    component_dim = "xyz" if name == "cmf" else "cone"
    values = np.asarray(observers[name].transpose("observer", component_dim, "wavelength").values, dtype=float)
    wl = observers["wavelength"].values
    bad = ~np.isfinite(values)
    if bad.any():
        o, c, w = np.argwhere(bad)[0]
        raise ObserverError(f"{where}: {_label(observers, o)}: {name} {components[c]} at {wl[w]:g} nm is "
                            f"{float(values[o, c, w])}; every value must be finite")
    peak = values.max(axis=-1)
    if (peak <= 0).any():
        o, c = np.argwhere(peak <= 0)[0]
        raise ObserverError(f"{where}: {_label(observers, o)}: {name} {components[c]} is all zero or negative (peak "
                            f"{peak[o, c]:g}); each function needs a positive peak")
    for c, component in enumerate(components):
        floor = -negative_share.get(component, ROUND_OFF_SHARE) * peak[:, c]
        low = values[:, c, :] < floor[:, None]
        if low.any():
            o, w = np.argwhere(low)[0]
            allowed = ("not below zero" if component not in negative_share
                       else f"not below -{100 * negative_share[component]:g} % of its peak")
            raise ObserverError(f"{where}: {_label(observers, o)}: {name} {component} at {wl[w]:g} nm is "
                                f"{values[o, c, w]:.4g} (peak {peak[o, c]:.4g}); allowed: {allowed}")


def check_observers(observers, *, where: str = "observers", wavelengths=None) -> xr.Dataset:
    """Check an observer set (see the module docstring); returns it unchanged.

    Parameters
    ----------
    observers : Dataset
        An observer set (``cmf`` with an ``observer`` dim; module docstring).
    where : str
        How messages name the set (e.g. the file).
    wavelengths : optional
        The grid the observers must share with the displays (checked when given).

    Returns
    -------
    Dataset
        ``observers``, unchanged.

    Raises
    ------
    ObserverError
        Layout or values not allowed, naming ``where``.
    GridMismatchError
        Another grid than ``wavelengths``.

    Examples
    --------
    >>> import metasim
    >>> from metasim.observers import check_observers
    >>> audience = metasim.observer_population(3, seed=1)
    >>> check_observers(audience) is audience
    True
    """
    if not isinstance(observers, xr.Dataset):
        raise ObserverError(f"{where}: holds a single {type(observers).__name__}, not an observer set (a Dataset with "
                            "'cmf'); make one with metasim.observer_population and save_dataset")
    if "cmf" not in observers.data_vars:
        raise ObserverError(f"{where}: no 'cmf' variable (XYZ colour-matching functions); it holds "
                            f"{', '.join(map(str, observers.data_vars)) or 'no variables'}; not an observer file")
    dims = observers["cmf"].dims
    missing = [d for d in _DIMS if d not in dims]
    extra = [d for d in dims if d not in _DIMS]
    if missing or extra:
        raise ObserverError(f"{where}: 'cmf' has dims {tuple(dims)}; need {_DIMS}"
                            + (f" (missing {', '.join(missing)})" if missing else f" (unexpected {', '.join(extra)})"))
    for dim in _DIMS:
        if dim not in observers.coords:
            raise ObserverError(f"{where}: no {dim!r} coordinate; the {dim} dim needs its labels")
    if observers.sizes["observer"] == 0:
        raise ObserverError(f"{where}: holds no observers; give at least one")
    labels = [str(v) for v in observers["observer"].values]
    if len(set(labels)) != len(labels):
        raise ObserverError(f"{where}: observer labels repeat; each observer needs a unique label")
    if [str(v) for v in observers["xyz"].values] != ["X", "Y", "Z"]:
        raise ObserverError(f"{where}: xyz coordinate is {[str(v) for v in observers['xyz'].values]}; need X, Y, Z")
    try:
        grid = check_wavelengths(observers["wavelength"].values, where=f"{where}: wavelength", uniform=True)
    except SpectrumError as exc:
        raise ObserverError(str(exc)) from None
    if wavelengths is not None:
        target = np.asarray(getattr(wavelengths, "values", wavelengths), dtype=float)
        if grid.shape != target.shape or not np.allclose(grid, target, rtol=0, atol=1e-9):
            raise GridMismatchError(f"{where}: observers on {grid[0]:g}-{grid[-1]:g} nm ({grid.size} points); the "
                                    f"displays use {target[0]:g}-{target[-1]:g} nm ({target.size} points); make the "
                                    "observers on the displays' grid")
    _check_functions(observers, "cmf", ["X", "Y", "Z"], where, {"X": X_BAR_NEGATIVE_SHARE})
    if "lms" in observers.data_vars and set(observers["lms"].dims) == {"observer", "cone", "wavelength"}:
        _check_functions(observers, "lms", [str(c) for c in observers["cone"].values], where, {})
    for name, positive in (("weight", False), ("age_years", True)):
        if name not in observers.coords:
            continue
        values = np.asarray(observers[name].values, dtype=float)
        bad = ~np.isfinite(values) | (values <= 0 if positive else values < 0)
        if bad.any() or (not positive and values.sum() <= 0):
            i = int(np.argmax(bad)) if bad.any() else 0
            raise ObserverError(f"{where}: {_label(observers, i)}: {name} = {float(values[i])}; allowed: finite and "
                                + ("> 0" if positive else ">= 0, not all zero"))
    return observers


def read_observers(path: str | os.PathLike, wavelengths=None) -> xr.Dataset:
    """An observer set from a netCDF file, checked (:func:`check_observers`) before it is used.

    Parameters
    ----------
    path : path-like
        A netCDF file (for example from ``metasim observers --out``).
    wavelengths : optional
        The grid the observers must share with the displays (checked when given).

    Returns
    -------
    Dataset
        The observer set, checked.

    Raises
    ------
    FileFormatError
        A missing or unreadable file.
    ObserverError, GridMismatchError
        As for :func:`check_observers`.

    Examples
    --------
    >>> import os, tempfile
    >>> import metasim
    >>> from metasim.observers import read_observers
    >>> path = os.path.join(tempfile.mkdtemp(), "audience.nc")
    >>> _ = metasim.save_dataset(metasim.observer_population(3, seed=1), path)
    >>> read_observers(path).sizes["observer"]
    3
    """
    return check_observers(load_dataset(path), where=str(path), wavelengths=wavelengths)


__all__ = ["X_BAR_NEGATIVE_SHARE", "ROUND_OFF_SHARE", "check_observers", "read_observers"]
