"""Back into colour-science workflows: :func:`to_colour`, and :func:`from_colour` the other way.

The conversions themselves live in their layers (:mod:`metasim.spectra.convert`,
:mod:`metasim.observers.convert`); this module only dispatches on the kind of object, so a user has
one name for each direction. It imports the spectra, observers and display layers and nothing
imports it (it sits at the display layer's level).

=====================================  =====================================================
metasim                                colour-science
=====================================  =====================================================
observer Dataset (``cmf``)             ``XYZ_ColourMatchingFunctions``
:class:`~metasim.display.Display`      ``RGB_DisplayPrimaries`` (3 primaries) or
                                       ``MultiSpectralDistributions`` (its primary spectra)
``primary × wavelength`` DataArray     the same as a display's spectra
``<dim> × wavelength`` DataArray       ``MultiSpectralDistributions`` (``xyz`` → XYZ CMFs,
                                       ``cone`` → ``LMS_ConeFundamentals``)
``wavelength`` DataArray               ``SpectralDistribution``
reflectance stimulus set               ``MultiSpectralDistributions`` of its reflectances
=====================================  =====================================================

What colour-science has no place for (metasim's name, dim, labels and attributes) is recorded on the
colour-science object (attribute ``metasim_metadata``), so ``from_colour(to_colour(x))`` is ``x``
again, identical: a DataArray for spectra, an observer Dataset for colour-matching functions. A
display's black level, transfer function and calibration are not colour-science concepts and stay
behind; ``make_display(to_colour(display))`` has the same primary spectra.
"""

from __future__ import annotations

import xarray as xr

from metasim.display.model import Display
from metasim.errors import DisplayError, InteropError
from metasim.observers.convert import is_colour_observer, observer_from_colour, observer_to_colour
from metasim.spectra.convert import from_colour as spectra_from_colour
from metasim.spectra.convert import METADATA, is_colour_collection, is_colour_spectrum, spectra_to_colour


def to_colour(obj, *, name: str | None = None):
    """A metasim object as the matching colour-science object (see the module table).

    Parameters
    ----------
    obj
        An observer Dataset (one observer; select a population member with ``.isel(observer=i)``),
        a :class:`~metasim.display.Display` (one design), a reflectance stimulus set, or a spectral
        DataArray (``wavelength`` and at most one other dim).
    name : str, optional
        Name of the colour-science object (default: the observer / display / array name).

    Returns
    -------
    object
        colour-science ``XYZ_ColourMatchingFunctions``, ``LMS_ConeFundamentals``,
        ``RGB_DisplayPrimaries``, ``MultiSpectralDistributions`` or ``SpectralDistribution``.

    Examples
    --------
    >>> import metasim
    >>> cmfs = metasim.to_colour(metasim.standard_observer("cie1931_2"))
    >>> type(cmfs).__name__, cmfs.shape.interval
    ('XYZ_ColourMatchingFunctions', 1.0)
    """
    if isinstance(obj, Display):
        if obj.batch_dims:
            raise DisplayError(f"the display holds several designs ({obj.batch_dims}); select one with "
                               "Display.from_dataset(display.to_dataset().isel(design=i))")
        return spectra_to_colour(obj.spectra, name=name or obj.name)
    if isinstance(obj, xr.Dataset):
        if "cmf" in obj:
            out = observer_to_colour(obj)
            if name:
                out.name = name
            return out
        if obj.attrs.get("kind") == "reflectance" and "reflectance" in obj:
            return spectra_to_colour(obj["reflectance"], name=name or str(obj.attrs.get("description", "reflectances")))
        raise InteropError("to_colour takes an observer Dataset (with 'cmf'), a reflectance stimulus set, a Display "
                           f"or spectra; this Dataset has variables {sorted(map(str, obj.data_vars))}")
    if isinstance(obj, xr.DataArray):
        return spectra_to_colour(obj, name=name)
    raise InteropError(f"to_colour takes an observer Dataset, a Display, a reflectance stimulus set or a spectral "
                       f"DataArray, got {type(obj).__name__}")


def from_colour(obj, wavelengths=None, *, dim: str | None = None):
    """A colour-science object as metasim data: colour-matching functions or cone fundamentals → an
    observer Dataset (a DataArray again if :func:`to_colour` made them from one); other spectral
    distributions → a labelled DataArray (``dim`` names the label
    dim of a multi-spectral object). ``wavelengths`` puts the result on a grid
    (:func:`metasim.spectra.resample` policy); None keeps the object's own.

    Parameters
    ----------
    obj
        colour-science colour-matching functions, cone fundamentals or spectral distributions.
    wavelengths : optional
        The grid of the result (None: the object's own).
    dim : str, optional
        The label dim of a multi-spectral object.

    Returns
    -------
    Dataset or DataArray
        An observer Dataset or a labelled spectral DataArray.

    Raises
    ------
    InteropError
        An object that is not a colour-science spectral distribution or colour-matching functions.

    Examples
    --------
    >>> import metasim
    >>> import colour
    >>> observer = metasim.from_colour(colour.MSDS_CMFS["CIE 1931 2 Degree Standard Observer"])
    >>> dict(observer["cmf"].sizes)  # colour-science's table: 360-830 nm
    {'xyz': 3, 'wavelength': 471}
    """
    metadata = getattr(obj, METADATA, None)
    made_from_array = isinstance(metadata, dict) and "dataset_attrs" not in metadata
    if is_colour_observer(obj) and not made_from_array:
        return observer_from_colour(obj, wavelengths)
    if is_colour_spectrum(obj) or is_colour_collection(obj):
        return spectra_from_colour(obj, wavelengths, dim=dim)
    raise InteropError(f"from_colour takes colour-science spectral distributions or colour-matching functions, "
                       f"got {type(obj).__name__}")


__all__ = ["to_colour", "from_colour"]
