"""colour-science colour-matching functions ↔ metasim observer Datasets (both ways, in one place).

Every metasim argument that takes an observer also takes colour-science's
``XYZ_ColourMatchingFunctions`` (e.g. ``colour.MSDS_CMFS["CIE 1931 2 Degree Standard Observer"]``)
and ``LMS_ConeFundamentals`` objects; :func:`as_observer` converts them here, on the grid of the
spectra they are used with (:func:`metasim.spectra.from_colour`: linear interpolation, zero outside,
a warning when more than 0.1 % of a function's area falls off the grid):

* XYZ colour-matching functions → an observer Dataset with ``cmf`` (``xyz`` × ``wavelength``);
* cone fundamentals → an observer Dataset with ``lms`` only (cone excitations, not XYZ).

:func:`observer_to_colour` gives one observer's ``cmf`` back as ``XYZ_ColourMatchingFunctions``;
the Dataset's attributes travel with it, so converting that object back gives the same Dataset.
"""

from __future__ import annotations

import numpy as np
import xarray as xr

from metasim.errors import ObserverError
from metasim.spectra.convert import METADATA, from_colour, is_colour_spectrum, spectra_to_colour, unlabelled_message

_ATTRS = {"cmf": {"units": "1", "long_name": "colour-matching functions"},
          "lms": {"units": "1", "long_name": "cone fundamentals (energy-based, peak-normalised)"}}


def is_colour_observer(obj) -> bool:
    """True for a colour-science ``XYZ_ColourMatchingFunctions`` or ``LMS_ConeFundamentals`` object."""
    return is_colour_spectrum(obj) and any(
        cls.__name__ in ("XYZ_ColourMatchingFunctions", "LMS_ConeFundamentals") for cls in type(obj).__mro__)


def observer_from_colour(obj, wavelengths=None) -> xr.Dataset:
    """An observer Dataset from colour-science colour-matching functions or cone fundamentals.

    Parameters
    ----------
    obj : XYZ_ColourMatchingFunctions or LMS_ConeFundamentals
    wavelengths : optional
        Grid (nm) to put the functions on; None keeps the object's own wavelengths.
    """
    if not is_colour_observer(obj):
        raise ObserverError(
            f"observer of type {type(obj).__name__} is not usable; colour-science observers are "
            "XYZ_ColourMatchingFunctions (colour.MSDS_CMFS[...]) or LMS_ConeFundamentals")
    array = from_colour(obj, wavelengths, where="observer")
    variable = "cmf" if "xyz" in array.dims else "lms"
    metadata = getattr(obj, METADATA, None)
    stored = metadata.get("dataset_attrs") if isinstance(metadata, dict) else None
    array.name = None
    resampled = array.attrs.get("resampled_from")
    if not stored:
        array.attrs = dict(_ATTRS[variable])
    attrs = dict(stored) if stored else {
        "observer": str(obj.name), "model": "colour-science observer",
        "source": f"colour-science {type(obj).__name__} {str(obj.name)!r}"}
    if resampled:
        attrs["resampled_from"] = resampled
    return xr.Dataset({variable: array}, attrs=attrs)


def as_observer(obj, wavelengths=None):
    """An observer argument at a public entry: colour-science objects become observer Datasets on
    ``wavelengths`` (see :func:`observer_from_colour`); a plain array is refused with how to label
    it; anything else is returned unchanged."""
    if is_colour_observer(obj):
        return observer_from_colour(obj, wavelengths)
    if isinstance(obj, np.ndarray):
        raise ObserverError(unlabelled_message("observer", ("xyz", "wavelength")) +
                            " and pass xarray.Dataset({'cmf': that_array}), or a standard observer name")
    if is_colour_spectrum(obj):
        raise ObserverError(
            f"a colour-science {type(obj).__name__} is not an observer; give XYZ_ColourMatchingFunctions "
            "(colour.MSDS_CMFS[...]), a standard observer name or an observer Dataset with 'cmf'")
    return obj


def observer_to_colour(observer: xr.Dataset):
    """One observer's XYZ colour-matching functions as colour-science ``XYZ_ColourMatchingFunctions``.

    ``observer`` is an observer Dataset with ``cmf`` and no ``observer`` dim (or one of size 1;
    select a member of a population with ``.isel(observer=i)``). The name is the ``observer``
    attribute.
    """
    if not isinstance(observer, xr.Dataset) or "cmf" not in observer:
        raise ObserverError(f"observer_to_colour needs an observer Dataset with a 'cmf' variable, "
                            f"got {type(observer).__name__}")
    if "observer" in observer.dims:
        if observer.sizes["observer"] != 1:
            raise ObserverError(f"the Dataset holds {observer.sizes['observer']} observers; colour-science takes "
                                "one set of functions at a time: select one with .isel(observer=i)")
        observer = observer.isel(observer=0, drop=True)
    cmf = observer["cmf"]
    extra = [d for d in cmf.dims if d not in ("xyz", "wavelength")]
    if extra:
        raise ObserverError(f"the observer's 'cmf' has dims {tuple(cmf.dims)}; select along {extra} first")
    name = str(observer.attrs.get("observer", "observer"))
    out = spectra_to_colour(cmf.transpose("xyz", "wavelength"), name=name)
    getattr(out, METADATA)["dataset_attrs"] = dict(observer.attrs)
    return out


__all__ = ["is_colour_observer", "observer_from_colour", "as_observer", "observer_to_colour"]
