"""Standard colorimetric observers as labelled xarray Datasets.

Sources (tables as shipped by colour-science):

* ``cie1931_2``  — CIE 1931 2° standard colorimetric observer (CIE 15:2004, ISO/CIE 11664-1).
* ``cie1964_10`` — CIE 1964 10° standard colorimetric observer (CIE 15:2004, ISO/CIE 11664-1).
* ``cie2015_2``, ``cie2015_10`` — CIE 170-2:2015 cone-fundamental-based XYZ functions, with the
  Stockman & Sharpe (2000) 2° / 10° cone fundamentals they derive from (= CIE 170-1:2006 at age 32),
  energy-based and peak-normalised.

Tables are sampled onto the requested grid by linear interpolation; outside the range a table covers
the functions are zero (a CIE table covers 360-830 nm, the CIE 2015 and cone tables 390-830 nm).
"""

from __future__ import annotations

from functools import lru_cache

import numpy as np
import xarray as xr

from metasim._version import __version__
from metasim.errors import ObserverError
from metasim.spectra import WAVELENGTH_ATTRS, check_wavelengths, default_grid, from_colour, resample

CONES = ("L", "M", "S")
XYZ = ("X", "Y", "Z")

_TABLES = {
    "cie1931_2": ("CIE 1931 2 Degree Standard Observer", None, 2.0,
                  "CIE 1931 2° standard colorimetric observer (CIE 15:2004; table from colour-science)"),
    "cie1964_10": ("CIE 1964 10 Degree Standard Observer", None, 10.0,
                   "CIE 1964 10° standard colorimetric observer (CIE 15:2004; table from colour-science)"),
    "cie2015_2": ("CIE 2015 2 Degree Standard Observer", "Stockman & Sharpe 2 Degree Cone Fundamentals", 2.0,
                  "CIE 170-2:2015 2° XYZ functions from Stockman & Sharpe (2000) cone fundamentals "
                  "(tables from colour-science)"),
    "cie2015_10": ("CIE 2015 10 Degree Standard Observer", "Stockman & Sharpe 10 Degree Cone Fundamentals", 10.0,
                   "CIE 170-2:2015 10° XYZ functions from Stockman & Sharpe (2000) cone fundamentals "
                   "(tables from colour-science)"),
}

STANDARD_OBSERVERS = tuple(_TABLES)


@lru_cache(maxsize=16)
def _table(colour_name: str) -> xr.DataArray:
    """colour-science's table on its own grid (undefined entries 0, :func:`metasim.spectra.from_colour`)."""
    import colour  # imported lazily: colour-science takes a moment to import

    return from_colour(colour.MSDS_CMFS[colour_name], where=colour_name)


def _sample(colour_name: str, wavelengths: np.ndarray) -> np.ndarray:
    """Table values at ``wavelengths`` (3 × n), zero outside the table's range (:func:`metasim.spectra.resample`;
    the tables are cut to the grid on purpose, so no energy warning)."""
    return np.array(resample(_table(colour_name), wavelengths, warn_share=None).values)


def standard_observer(name: str, wavelengths=None) -> xr.Dataset:
    """A standard observer on a wavelength grid.

    Parameters
    ----------
    name : str
        One of ``"cie1931_2"``, ``"cie1964_10"``, ``"cie2015_2"``, ``"cie2015_10"``.
    wavelengths : optional
        Grid (nm); default 390-830 nm at 1 nm.

    Returns
    -------
    xarray.Dataset
        ``cmf``: the XYZ colour-matching functions (``xyz`` × ``wavelength``); for the CIE 2015
        observers also ``lms`` (``cone`` × ``wavelength``, energy-based, peak-normalised Stockman &
        Sharpe fundamentals). (xarray cannot hold a variable named like its ``xyz`` dim, hence ``cmf``.)

    References
    ----------
    CIE 15:2004 Colorimetry; CIE 170-1:2006; CIE 170-2:2015; Stockman & Sharpe (2000) Vision Research 40.

    Examples
    --------
    >>> import metasim
    >>> cie1931 = metasim.standard_observer("cie1931_2")
    >>> float(cie1931["cmf"].sel(xyz="Y", wavelength=555))  # CIE 15:2004 table: y-bar(555 nm) = 1
    1.0
    """
    if name not in _TABLES:
        raise ObserverError(f"unknown standard observer {name!r}; allowed: {', '.join(STANDARD_OBSERVERS)}")
    if wavelengths is None:
        return _observer_dataset(name, None).copy(deep=True)
    wl = check_wavelengths(wavelengths, where="observer grid")
    return _observer_dataset(name, wl.tobytes()).copy(deep=True)


def standard_cmf(name: str, wavelengths) -> np.ndarray:
    """The colour-matching functions of a standard observer on a grid as a read-only numpy array
    (``xyz`` × ``wavelength``), shared between calls: the ``cmf`` values of :func:`standard_observer`."""
    if name not in _TABLES:
        raise ObserverError(f"unknown standard observer {name!r}; allowed: {', '.join(STANDARD_OBSERVERS)}")
    wl = check_wavelengths(wavelengths, where="observer grid")
    values = _observer_dataset(name, wl.tobytes())["cmf"].values
    values.flags.writeable = False
    return values


@lru_cache(maxsize=32)
def _observer_dataset(name: str, grid: bytes | None) -> xr.Dataset:
    """The observer Dataset for a grid (float64 bytes; None for the default grid), built once.

    Callers get a deep copy, so the cached Dataset is never handed out.
    """
    if grid is None:
        wl = check_wavelengths(default_grid(), where="observer grid")
    else:
        wl = np.frombuffer(grid, dtype=float).copy()
    xyz_table, lms_table, field, source = _TABLES[name]
    coords = {"wavelength": ("wavelength", wl, dict(WAVELENGTH_ATTRS)), "xyz": list(XYZ)}
    data = {
        "cmf": (("xyz", "wavelength"), _sample(xyz_table, wl),
                {"units": "1", "long_name": "colour-matching functions"}),
    }
    if lms_table is not None:
        coords["cone"] = list(CONES)
        data["lms"] = (("cone", "wavelength"), _sample(lms_table, wl),
                       {"units": "1", "long_name": "cone fundamentals (energy-based, peak-normalised)"})
    return xr.Dataset(
        data,
        coords=coords,
        attrs={
            "observer": name,
            "model": "standard observer",
            "source": source,
            "field_size_deg": field,
            "metasim_version": __version__,
        },
    )


def cone_fundamentals(field_size_deg: int = 2, wavelengths=None) -> xr.DataArray:
    """Stockman & Sharpe (2000) 2° or 10° cone fundamentals (``cone`` × ``wavelength``).

    Energy-based, peak-normalised; identical to CIE 170-1:2006 at age 32.

    Parameters
    ----------
    field_size_deg : {2, 10}
        Field size in degrees.
    wavelengths : optional
        The grid (default 390-830 nm at 1 nm).

    Returns
    -------
    DataArray
        ``cone`` × ``wavelength``, energy-based, each peak 1.

    Examples
    --------
    >>> import metasim
    >>> lms = metasim.cone_fundamentals(2)
    >>> [int(lms.sel(cone=cone).idxmax()) for cone in ("L", "M", "S")]  # peak wavelengths, nm
    [570, 543, 442]
    """
    if field_size_deg not in (2, 10):
        raise ObserverError(
            f"tabulated cone fundamentals exist for 2° and 10° fields, not {field_size_deg!r}; "
            "use metasim.cie2006_observer for other field sizes"
        )
    return standard_observer(f"cie2015_{field_size_deg}", wavelengths)["lms"]


__all__ = ["CONES", "XYZ", "STANDARD_OBSERVERS", "standard_observer", "cone_fundamentals"]
