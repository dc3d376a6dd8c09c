"""colour-science spectral objects ↔ metasim's labelled spectra: the one place they are converted.

Every public metasim function that takes spectra (emitters, :func:`metasim.make_display`, stimulus
sets, illuminants, gamut inputs, tristimulus integration) also takes colour-science's
``SpectralDistribution`` and ``MultiSpectralDistributions`` (and its subclasses such as
``RGB_DisplayPrimaries``, ``XYZ_ColourMatchingFunctions``, ``LMS_ConeFundamentals``) and turns them
into a DataArray here, once, at its edge:

* a ``SpectralDistribution`` becomes a ``wavelength`` DataArray named like the distribution;
* a ``MultiSpectralDistributions`` becomes ``<dim> × wavelength``, its labels the ``<dim>`` labels.
  The dim is the caller's (``primary`` for display primaries, ``stimulus`` for reflectance sets);
  without one it follows the class: ``primary`` for display primaries, ``xyz`` (X, Y, Z) for XYZ
  colour-matching functions, ``cone`` (L, M, S) for cone fundamentals, ``channel`` otherwise.
* Wavelengths are nm as in colour-science. Without a target grid the object's own grid is kept
  (no value changes). With one (the grid of the display, observer or stimulus set the object is
  used with) the values go through :func:`metasim.spectra.resample`, the documented policy: linear
  inside the object's range, zero outside, a :class:`SpectralEnergyWarning` when more than 0.1 % of
  a spectrum's energy falls off the grid; the result records ``resampled_from``.
* colour-science leaves undefined values of its colour-matching-function and cone-fundamental
  tables as NaN (e.g. the S cone above 615 nm); they become 0 (no response). NaN anywhere else is
  refused by :func:`metasim.spectra.check_spectra`.

Plain numpy arrays carry no wavelengths and no labels; they are refused with a message that shows
how to label them (:func:`unlabelled_message`).

:func:`spectra_to_colour` goes the other way. It records metasim's name, dim, labels and
attributes on the colour object (attribute ``metasim_metadata``), so :func:`from_colour` of an
object made by :func:`spectra_to_colour` gives the original DataArray back, identical.
"""

from __future__ import annotations

from collections.abc import Mapping

import numpy as np
import xarray as xr

from metasim.errors import SpectrumError
from metasim.spectra.grid import RADIANCE_UNITS, WAVELENGTH_ATTRS, _grid_text, check_spectra, resample, same_grid

#: Attribute of a colour-science object made by metasim holding what colour-science has no place for.
METADATA = "metasim_metadata"

# colour-science class name -> (default dim, metasim labels replacing colour's, units, long_name)
_CLASSES = {
    "RGB_DisplayPrimaries": ("primary", None, RADIANCE_UNITS, "spectral radiance"),
    "XYZ_ColourMatchingFunctions": ("xyz", ("X", "Y", "Z"), "1", "colour-matching functions"),
    "LMS_ConeFundamentals": ("cone", ("L", "M", "S"), "1", "cone fundamentals (energy-based)"),
    "RGB_ColourMatchingFunctions": ("channel", None, "1", "RGB colour-matching functions"),
}
_TABLE_CLASSES = ("XYZ_ColourMatchingFunctions", "LMS_ConeFundamentals", "RGB_ColourMatchingFunctions")
# metasim dim -> colour-science class name (and colour's own labels) used by spectra_to_colour
_TARGETS = {"xyz": ("XYZ_ColourMatchingFunctions", ("x_bar", "y_bar", "z_bar")),
            "cone": ("LMS_ConeFundamentals", ("l_bar", "m_bar", "s_bar"))}


def is_colour_object(obj) -> bool:
    """True for an instance of any colour-science class (checked without importing colour-science)."""
    module = type(obj).__module__ or ""
    return module == "colour" or module.startswith("colour.")


def is_colour_spectrum(obj) -> bool:
    """True for a colour-science ``SpectralDistribution`` or ``MultiSpectralDistributions`` (any subclass).

    Parameters
    ----------
    obj
        Any object.

    Returns
    -------
    bool
        Whether it is a colour-science spectral distribution (single or multi).

    Examples
    --------
    >>> import colour
    >>> from metasim.spectra import is_colour_spectrum
    >>> is_colour_spectrum(colour.SDS_ILLUMINANTS["D65"]), is_colour_spectrum([1.0, 2.0])
    (True, False)
    """
    if not is_colour_object(obj):
        return False
    import colour

    return isinstance(obj, (colour.SpectralDistribution, colour.MultiSpectralDistributions))


def _class_names(obj) -> list[str]:
    return [cls.__name__ for cls in type(obj).__mro__]


def is_colour_collection(obj) -> bool:
    """True for a non-empty mapping (name → distribution) or list of colour-science
    ``SpectralDistribution`` objects, as colour-science's datasets hold colour checkers."""
    items = list(obj.values()) if isinstance(obj, Mapping) else obj if isinstance(obj, (list, tuple)) else None
    return bool(items) and all(is_colour_object(item) and type(item).__name__ == "SpectralDistribution"
                               for item in items)


def _from_collection(obj, wavelengths, dim, units, long_name, where) -> xr.DataArray:
    items = list(obj.items()) if isinstance(obj, Mapping) else [(str(sd.name), sd) for sd in obj]
    labels = [str(key) for key, _ in items]
    if len(set(labels)) != len(labels):
        raise SpectrumError(f"{where}: names {labels} repeat; each spectral distribution needs a unique name")
    first = from_colour(items[0][1], None, units=units, long_name=long_name, where=where)
    grid = first.coords["wavelength"]
    parts = [first] + [from_colour(sd, grid, units=units, long_name=long_name, where=where) for _, sd in items[1:]]
    label_dim = dim or "channel"
    array = xr.concat(parts, dim=xr.DataArray(labels, dims=label_dim, name=label_dim), coords="minimal",
                      combine_attrs="drop").transpose(label_dim, "wavelength")
    array.attrs = {k: v for k, v in first.attrs.items() if k != "source"}
    array.attrs["source"] = f"colour-science spectral distributions {labels[0]!r} ... ({len(labels)})"
    array.name = label_dim
    if wavelengths is not None and not same_grid(array, wavelengths):  # one resampling, one warning at most
        source = _grid_text(grid.values)
        array = resample(array, wavelengths)
        array.attrs["resampled_from"] = source
    return array


def from_colour(obj, wavelengths=None, *, dim: str | None = None, units: str | None = None,
                long_name: str | None = None, where: str = "spectra") -> xr.DataArray:
    """A colour-science spectral object as a labelled DataArray (see the module docstring).

    Parameters
    ----------
    obj : colour.SpectralDistribution or colour.MultiSpectralDistributions, or a mapping / list of
        SpectralDistribution objects (a colour-science dataset such as a colour checker's samples:
        stacked along ``dim``, labelled by the keys or names, on ``wavelengths`` or else the first
        one's grid)
    wavelengths : optional
        Target grid (nm). None keeps the object's own wavelengths.
    dim : str, optional
        The dim of a multi-spectral object's labels (``primary``, ``stimulus``, ...).
    units, long_name : str, optional
        Attributes of the result (colour-science objects carry no units); defaults by class.
    where : str
        What the caller calls the input, for messages.

    Returns
    -------
    xarray.DataArray (wavelength) or (dim, wavelength)
        The spectra with a ``wavelength`` coordinate in nm, ``units``, ``long_name`` and ``source``
        attributes (``resampled_from`` when put on ``wavelengths``); undefined entries of
        colour-matching tables become 0. A DataArray converted by :func:`spectra_to_colour` comes
        back identical.

    Raises
    ------
    SpectrumError
        Not a colour-science spectral object, repeated names in a collection, ``dim="wavelength"``,
        or values or wavelengths not allowed.
    EnergyOutsideGridError
        Resampling onto ``wavelengths`` would drop more than 1 % of an emitter's energy
        (:func:`metasim.spectra.resample` policy).

    Examples
    --------
    >>> import colour
    >>> from metasim.spectra import from_colour, wavelength_grid
    >>> d65 = from_colour(colour.SDS_ILLUMINANTS["D65"])  # on its own grid
    >>> d65.dims, d65.sizes["wavelength"], float(d65.sel(wavelength=560.0))  # CIE 15: D65 is 100 at 560 nm
    (('wavelength',), 97, 100.0)
    >>> checker = from_colour(colour.SDS_COLOURCHECKERS["ColorChecker N Ohta"], wavelength_grid(380, 780, 10),
    ...                       dim="stimulus")
    >>> checker.dims, checker["stimulus"].values[:2].tolist()
    (('stimulus', 'wavelength'), ['dark skin', 'light skin'])
    """
    if is_colour_collection(obj):
        return _from_collection(obj, wavelengths, dim, units, long_name, where)
    if not is_colour_spectrum(obj):
        raise SpectrumError(f"{where}: expected a colour-science SpectralDistribution or "
                            f"MultiSpectralDistributions, got {type(obj).__name__}")
    import colour

    names = _class_names(obj)
    known = next((name for name in names if name in _CLASSES), None)
    class_dim, class_labels, class_units, class_long_name = _CLASSES.get(known, ("channel", None, "1", "spectrum"))
    wl = np.array(obj.wavelengths, dtype=float)
    values = np.array(obj.values, dtype=float)
    if known in _TABLE_CLASSES:
        values = np.nan_to_num(values, nan=0.0)  # undefined table entries: no response
    metadata = getattr(obj, METADATA, None)
    metadata = metadata if isinstance(metadata, dict) else {}
    coords = {"wavelength": ("wavelength", wl, dict(WAVELENGTH_ATTRS))}
    if isinstance(obj, colour.MultiSpectralDistributions):
        labels = [str(v) for v in obj.labels]
        stored = metadata.get("labels")
        if stored is not None and len(stored) == len(labels):
            labels = list(stored)
        elif class_labels is not None and len(class_labels) == len(labels):
            labels = list(class_labels)
        label_dim = dim or metadata.get("dim") or class_dim
        if label_dim == "wavelength":
            raise SpectrumError(f"{where}: dim='wavelength' is not allowed for the labels of {type(obj).__name__}")
        coords[label_dim] = labels
        array = xr.DataArray(values.T, dims=(label_dim, "wavelength"), coords=coords)
    else:
        array = xr.DataArray(values, dims=("wavelength",), coords=coords)
    array.name = metadata.get("name", str(obj.name))
    for coord, coord_attrs in (metadata.get("coord_attrs") or {}).items():
        if coord in array.coords:
            array.coords[coord].attrs = dict(coord_attrs)
    attrs = dict(metadata.get("attrs") or {
        "units": class_units, "long_name": class_long_name,
        "source": f"colour-science {type(obj).__name__} {str(obj.name)!r}"})
    if units is not None:
        attrs["units"] = units
    if long_name is not None:
        attrs["long_name"] = long_name
    array.attrs = attrs
    check_spectra(array, where=f"{where} ({type(obj).__name__} {str(obj.name)!r})", non_negative=False)
    if wavelengths is not None and not same_grid(array, wavelengths):
        source = _grid_text(wl)
        array = resample(array, wavelengths)
        array.attrs["resampled_from"] = source
    return array


_EXAMPLE_LABELS = {"primary": "['R', 'G', 'B']", "stimulus": "['sample 1', 'sample 2']", "xyz": "['X', 'Y', 'Z']",
                   "cone": "['L', 'M', 'S']", "chromaticity": "['x', 'y']", "wavelength": "wavelengths_nm"}


def unlabelled_message(where: str, dims: tuple[str, ...]) -> str:
    """The message refusing a plain array whose axes the call cannot tell: how to label it."""
    coords = ", ".join(f"{d!r}: {_EXAMPLE_LABELS.get(d, d + '_labels')}" for d in dims)
    return (f"{where}: a plain array does not say which axis is which (nor the wavelengths); label it, "
            f"e.g. xarray.DataArray(values, dims={tuple(dims)!r}, coords={{{coords}}})")


def as_spectra(obj, *, dim: str | None = None, wavelengths=None, where: str = "spectra",
               dims_example: tuple[str, ...] = ("primary", "wavelength"), units: str | None = None,
               long_name: str | None = None) -> xr.DataArray:
    """Spectra at a public entry: a DataArray passes unchanged; a colour-science object is converted
    by :func:`from_colour` (onto ``wavelengths`` when given); anything else is refused, a plain array
    with the labelling example of :func:`unlabelled_message`.

    Parameters
    ----------
    obj : xarray.DataArray (..., wavelength) or colour-science spectral object
        The spectra as given by a user.
    dim : str, optional
        The dim of a multi-spectral object's labels (as :func:`from_colour`).
    wavelengths : array_like, optional
        The grid in nm to put a colour-science object on (None: its own).
    where : str
        What the caller calls the input, for messages.
    dims_example : tuple of str
        The dims the refusal of a plain array suggests.
    units, long_name : str, optional
        Attributes of a converted object (as :func:`from_colour`).

    Returns
    -------
    xarray.DataArray
        ``obj`` itself for a DataArray, else the converted object.

    Raises
    ------
    SpectrumError
        A plain array (with how to label it) or any other object; the errors of :func:`from_colour`.

    Examples
    --------
    >>> import colour
    >>> from metasim.spectra import as_spectra, wavelength_grid
    >>> illuminant_a = as_spectra(colour.SDS_ILLUMINANTS["A"], wavelengths=wavelength_grid(300, 780, 5))
    >>> illuminant_a.name, illuminant_a.sizes["wavelength"]
    ('A', 97)
    >>> as_spectra([1.0, 2.0, 3.0], where="primaries")  # doctest: +ELLIPSIS
    Traceback (most recent call last):
        ...
    metasim.errors.SpectrumError: primaries: a plain array does not say which axis is which (nor the wavelengths); label it, ...
    """
    if isinstance(obj, xr.DataArray):
        return obj
    if is_colour_spectrum(obj) or is_colour_collection(obj):
        return from_colour(obj, wavelengths, dim=dim, units=units, long_name=long_name, where=where)
    if isinstance(obj, (np.ndarray, list, tuple)):
        raise SpectrumError(unlabelled_message(where, dims_example))
    raise SpectrumError(f"{where}: expected a DataArray with a 'wavelength' dim or a colour-science spectral "
                        f"distribution, got {type(obj).__name__}")


def spectra_to_colour(array: xr.DataArray, *, name: str | None = None):
    """A DataArray of spectra as a colour-science object.

    ``wavelength`` only → ``SpectralDistribution``; ``<dim> × wavelength`` →
    ``RGB_DisplayPrimaries`` (dim ``primary``, 3 primaries), ``XYZ_ColourMatchingFunctions`` (dim
    ``xyz``), ``LMS_ConeFundamentals`` (dim ``cone``), else ``MultiSpectralDistributions`` with the
    labels of ``<dim>``. Other dims (``design``, ``observer``, ...) must be selected first.

    Parameters
    ----------
    array : xarray.DataArray (wavelength) or (dim, wavelength)
        Spectra with a ``wavelength`` coordinate in nm.
    name : str, optional
        The colour-science object's name (default the array's name or ``long_name``).

    Returns
    -------
    colour.SpectralDistribution or colour.MultiSpectralDistributions
        The object of the class above; the array's name, attributes and labels are kept on it so
        :func:`from_colour` gives the same DataArray back.

    Raises
    ------
    SpectrumError
        Not a DataArray, no ``wavelength`` dim, wavelengths not allowed, or more than one dim
        besides ``wavelength``.

    Examples
    --------
    >>> from metasim.emitters import gaussian
    >>> from metasim.spectra import from_colour, spectra_to_colour, wavelength_grid
    >>> primaries = gaussian([450, 550, 620], 20, wavelength_grid(390, 830, 5), name=["B", "G", "R"])
    >>> display_primaries = spectra_to_colour(primaries)
    >>> type(display_primaries).__name__, from_colour(display_primaries).identical(primaries)
    ('RGB_DisplayPrimaries', True)
    """
    if not isinstance(array, xr.DataArray):
        raise SpectrumError(f"spectra_to_colour: expected a DataArray with a 'wavelength' dim, got {type(array).__name__}")
    check_spectra(array, where="spectra_to_colour", non_negative=False)
    import colour

    other = [d for d in array.dims if d != "wavelength"]
    if len(other) > 1:
        raise SpectrumError(f"spectra_to_colour: dims {tuple(array.dims)} hold more than one set of spectra; "
                            f"select one first, e.g. .isel({other[0]}=0)")
    wl = np.asarray(array.coords["wavelength"].values, dtype=float)
    label = name or (str(array.name) if array.name is not None else str(array.attrs.get("long_name", "spectra")))
    metadata = {"name": array.name, "attrs": dict(array.attrs),
                "coord_attrs": {d: dict(array.coords[d].attrs) for d in array.dims if d in array.coords}}
    if not other:
        out = colour.SpectralDistribution(np.asarray(array.values, dtype=float), wl, name=label)
    else:
        label_dim = other[0]
        values = np.asarray(array.transpose("wavelength", label_dim).values, dtype=float)
        labels = ([str(v) for v in array.coords[label_dim].values] if label_dim in array.coords
                  else [f"{label_dim}{i}" for i in range(array.sizes[label_dim])])
        metadata.update(dim=label_dim, labels=labels)
        if label_dim == "primary" and len(labels) == 3:
            from colour.characterisation import RGB_DisplayPrimaries

            out = RGB_DisplayPrimaries(values, wl, name=label)
        elif label_dim in _TARGETS and len(labels) == 3:
            import colour.colorimetry as colorimetry

            cls_name, colour_labels = _TARGETS[label_dim]
            out = getattr(colorimetry, cls_name)(values, wl, name=label, labels=list(colour_labels))
        else:
            out = colour.MultiSpectralDistributions(values, wl, name=label, labels=labels)
    setattr(out, METADATA, metadata)
    return out


__all__ = ["METADATA", "is_colour_object", "is_colour_spectrum", "is_colour_collection", "from_colour", "as_spectra", "spectra_to_colour",
           "unlabelled_message"]
