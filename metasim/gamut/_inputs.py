"""Turning the many ways of stating primaries into one labelled XYZ array, and back.

Accepted primaries (every gamut function goes through :func:`primaries_xyz`):

* a DataArray with dims ``primary`` and ``xyz`` (tristimulus values, any common scale), with any
  leading dims (``design``, ``observer``, ...);
* a DataArray with dims ``primary`` and ``wavelength`` (emission spectra) plus an observer Dataset
  (variable ``cmf``, optional leading ``observer`` dim) — integrated with
  :func:`metasim.colorimetry.tristimulus`;
* any object with a ``spectra`` attribute holding such a DataArray (a display), plus an observer;
* for chromaticity-only work, a DataArray with dims ``primary`` and ``chromaticity`` (x, y), or the
  name of a reference colour space (:data:`REFERENCE_GAMUTS`);
* colour-science objects, converted once by :func:`gamut_inputs`: display primaries (any
  ``MultiSpectralDistributions``, labels → ``primary``, on the observer's grid when the observer is a
  Dataset), an ``RGB_Colourspace`` (like a reference name: its primaries and white), colour-matching
  functions as the observer (on the spectra's grid);
* plain arrays where each axis is clear: (N, 3) = N primaries × X, Y, Z; for chromaticity work also
  (N, 2) = N primaries × x, y (N ≥ 3). Other shapes are refused with how to label them.

Reference colour spaces take their primaries and white point from colour-science's
``colour.RGB_COLOURSPACES`` (ITU-R BT.709, SMPTE EG 432-1 Display P3, SMPTE RP 431-2 DCI-P3,
ITU-R BT.2020), through :mod:`metasim.colorimetry.rgb_spaces`.
"""

from __future__ import annotations

import numpy as np
import xarray as xr

from metasim.colorimetry import tristimulus, xy_to_xyz
from metasim.colorimetry.rgb_spaces import RGB_SPACES, is_rgb_space, rgb_space
from metasim.errors import GamutError
from metasim.observers.convert import as_observer
from metasim.spectra.convert import as_spectra, is_colour_object, is_colour_spectrum, unlabelled_message

#: Reference gamut name -> colour-science colour-space name (:data:`metasim.colorimetry.rgb_spaces.RGB_SPACES`).
REFERENCE_GAMUTS = {name: RGB_SPACES[name] for name in ("bt709", "display_p3", "dci_p3", "bt2020")}

SPACES = ("xy", "uv")


def check_space(space: str) -> str:
    if space not in SPACES:
        raise GamutError(f"space={space!r} is not known; allowed: {', '.join(SPACES)}")
    return space


is_colour_space = is_rgb_space


def is_reference(value) -> bool:
    """A reference gamut: a name of :data:`REFERENCE_GAMUTS` or a colour-science ``RGB_Colourspace``."""
    return isinstance(value, str) or is_colour_space(value)


def reference_name(value) -> str:
    """The label of a reference gamut (its key, or the colour-science colour space's name)."""
    return str(value.name) if is_colour_space(value) else str(value)


def _colour_space(name):
    if not is_colour_space(name) and name not in REFERENCE_GAMUTS:
        raise GamutError(f"reference gamut {name!r} is not known; allowed: {', '.join(REFERENCE_GAMUTS)}")
    return rgb_space(name)


def reference_xy(name) -> xr.DataArray:
    """xy chromaticities (``primary`` = R, G, B × ``chromaticity``) of a named reference gamut (or of
    a colour-science ``RGB_Colourspace``).

    Values from colour-science ``colour.RGB_COLOURSPACES`` (ITU-R BT.709-6, SMPTE EG 432-1,
    SMPTE RP 431-2, ITU-R BT.2020-2).

    Parameters
    ----------
    name : str or colour.RGB_Colourspace
        A key of :data:`REFERENCE_GAMUTS` (``bt709``, ``display_p3``, ``dci_p3``, ``bt2020``) or a
        colour-science colour space.

    Returns
    -------
    xarray.DataArray (primary, chromaticity)
        CIE 1931 x, y (unit 1) of R, G, B.

    Raises
    ------
    GamutError
        An unknown name (naming the allowed ones).

    References
    ----------
    ITU-R BT.709-6 (primaries); SMPTE EG 432-1:2010 and SMPTE RP 431-2:2011 (P3 primaries);
    ITU-R BT.2020-2 (primaries).

    Examples
    --------
    >>> from metasim.gamut import reference_xy
    >>> reference_xy("bt709").values.tolist()  # ITU-R BT.709-6
    [[0.64, 0.33], [0.3, 0.6], [0.15, 0.06]]
    """
    space = _colour_space(name)
    return xr.DataArray(
        np.asarray(space.primaries, dtype=float),
        dims=("primary", "chromaticity"),
        coords={"primary": ["R", "G", "B"], "chromaticity": ["x", "y"]},
        attrs={"units": "1", "long_name": f"{space.name} primary chromaticities (CIE 1931 xy)"},
    )


def reference_xyz(name, white_luminance: float = 1.0) -> xr.DataArray:
    """XYZ of a named reference gamut's (or an ``RGB_Colourspace``'s) primaries, scaled so that its
    own white has Y = ``white_luminance``.

    The columns of the colour space's normalised primary matrix (SMPTE RP 177) as colour-science
    stores it (``matrix_RGB_to_XYZ``; see :mod:`metasim.colorimetry.rgb_spaces`).

    Parameters
    ----------
    name : str or colour.RGB_Colourspace
        A key of :data:`REFERENCE_GAMUTS` or a colour-science colour space.
    white_luminance : float
        Y of the space's white (R = G = B = 1), in the unit the caller works in (1: relative).

    Returns
    -------
    xarray.DataArray (primary, xyz)
        X, Y, Z of R, G, B (the unit of ``white_luminance``), attribute ``reference_gamut``.

    Raises
    ------
    GamutError
        An unknown name (naming the allowed ones).

    References
    ----------
    SMPTE RP 177-1993 (normalised primary matrix); primaries and whites of ITU-R BT.709-6,
    SMPTE EG 432-1:2010, SMPTE RP 431-2:2011 and ITU-R BT.2020-2.

    Examples
    --------
    >>> from metasim.gamut import reference_xyz
    >>> reference_xyz("bt2020", white_luminance=100.0).round(2).values.tolist()
    [[63.7, 26.27, 0.0], [14.46, 67.8, 2.81], [16.89, 5.93, 106.1]]
    """
    space = _colour_space(name)
    matrix = np.asarray(space.matrix_RGB_to_XYZ, dtype=float) * float(white_luminance)
    return xr.DataArray(
        matrix.T,
        dims=("primary", "xyz"),
        coords={"primary": ["R", "G", "B"], "xyz": ["X", "Y", "Z"]},
        attrs={"units": "1", "long_name": f"{space.name} primary tristimulus values",
               "reference_gamut": reference_name(name)},
    )


def _spectra_of(obj):
    if isinstance(obj, xr.DataArray) or is_reference(obj):
        return obj
    spectra = getattr(obj, "spectra", None)
    if isinstance(spectra, xr.DataArray):
        return spectra
    raise GamutError(
        f"primaries of type {type(obj).__name__} are not usable; allowed: a DataArray with dims "
        "'primary' and 'xyz' (or 'wavelength', or 'chromaticity'), a display with a 'spectra' "
        "attribute, a reference name, colour-science display primaries or an RGB_Colourspace, or a "
        "plain (N, 3) array of primary XYZ"
    )


def _grid(value):
    """The wavelengths of a labelled spectral object, or None."""
    if isinstance(value, (xr.DataArray, xr.Dataset)) and "wavelength" in value.dims:
        return value.coords["wavelength"].values
    return None


def _plain_primaries(values) -> xr.DataArray:
    """A plain (N, 3) array as primary XYZ, (N, 2) as primary xy; other shapes are refused."""
    try:
        array = np.asarray(values, dtype=float)
    except (TypeError, ValueError):
        raise GamutError(f"primaries {values!r} are not numbers; give an (N, 3) array of primary XYZ") from None
    if array.ndim == 2 and array.shape[0] >= 3 and array.shape[1] in (2, 3):
        dim, labels = ("xyz", ["X", "Y", "Z"]) if array.shape[1] == 3 else ("chromaticity", ["x", "y"])
        return xr.DataArray(array, dims=("primary", dim),
                            coords={"primary": [f"primary{i}" for i in range(array.shape[0])], dim: labels},
                            attrs={"units": "1", "long_name": "primary tristimulus values" if dim == "xyz"
                                   else "primary chromaticities (CIE 1931 xy)"})
    raise GamutError(unlabelled_message(f"primaries of shape {array.shape}", ("primary", "xyz"))
                     + "; a plain array is read as (N, 3) = N >= 3 primaries x X, Y, Z (or (N, 2) x, y)")


def gamut_inputs(primaries, observer=None):
    """The primaries and observer of a gamut call with colour-science objects and plain arrays
    converted, once (see the module docstring). Returns ``(primaries, observer)``."""
    if is_colour_spectrum(primaries):
        primaries = as_spectra(primaries, dim="primary", wavelengths=_grid(observer), where="primaries")
    elif isinstance(primaries, (np.ndarray, list, tuple)):
        primaries = _plain_primaries(primaries)
    if is_colour_object(observer) or isinstance(observer, np.ndarray):
        observer = as_observer(observer, _grid(_spectra_of(primaries)) if not is_reference(primaries) else None)
    return primaries, observer


def primaries_xyz(primaries, observer=None, *, allow_chromaticity: bool = False) -> xr.DataArray:
    """The primaries as tristimulus values: a DataArray ``[leading dims...,] primary, xyz``.

    ``observer`` is needed for spectra (any observer Dataset with ``cmf``; a leading ``observer``
    dim is kept). With ``allow_chromaticity`` xy input and reference names are accepted and given
    Y = 1 (chromaticity work only).

    Parameters
    ----------
    primaries : xarray.DataArray, display, str, colour-science object or array_like
        Any form the module docstring lists: tristimulus values (primary, xyz), spectra (primary,
        wavelength) in W sr⁻¹ m⁻² nm⁻¹, a display, a reference name, chromaticities (primary,
        chromaticity), colour-science primaries or colour space, or a plain (N, 3) array; any
        leading dims (``design``, ``observer``) are kept.
    observer : xarray.Dataset or colour.XYZ_ColourMatchingFunctions, optional
        ``cmf`` (xyz, wavelength), optionally with a leading ``observer`` dim; needed for spectra.
    allow_chromaticity : bool
        Accept chromaticities and reference names as Y = 1 values (for chromaticity work only).

    Returns
    -------
    xarray.DataArray (..., primary, xyz)
        The primaries' X, Y, Z (spectra integrated over wavelength: radiance units × nm), at least
        3 primaries, finite.

    Raises
    ------
    GamutError
        An unusable type or shape, no ``primary`` dim, spectra without an observer, chromaticities
        that are not x, y, fewer than 3 primaries or non-finite values.

    References
    ----------
    CIE 15:2018 Colorimetry, 4th edition (tristimulus values of a spectrum; chromaticity
    coordinates).

    Examples
    --------
    >>> import metasim
    >>> from metasim.emitters import gaussian
    >>> from metasim.gamut import primaries_xyz
    >>> from metasim.spectra import wavelength_grid
    >>> grid = wavelength_grid(390, 830, 5)
    >>> spectra = gaussian([455, 535, 615], [25, 30, 35], grid, name=["B", "G", "R"])
    >>> xyz = primaries_xyz(spectra, metasim.standard_observer("cie1931_2", grid))
    >>> xyz.dims, xyz.round(3).values.tolist()
    (('primary', 'xyz'), [[0.296, 0.053, 1.633], [0.244, 0.872, 0.041], [0.865, 0.449, 0.0]])
    """
    primaries, observer = gamut_inputs(primaries, observer)
    primaries = _spectra_of(primaries)
    if is_reference(primaries):
        if not allow_chromaticity:
            return reference_xyz(primaries)
        primaries = reference_xy(primaries)
    if "primary" not in primaries.dims:
        raise GamutError(f"primaries need a 'primary' dim, got dims {tuple(primaries.dims)}")
    if "xyz" in primaries.dims:
        xyz = primaries
    elif "wavelength" in primaries.dims:
        if observer is None:
            raise GamutError("primaries given as spectra need an observer (a Dataset with 'cmf'), got none")
        xyz = tristimulus(primaries, observer, scale="none")
    elif "chromaticity" in primaries.dims and allow_chromaticity:
        labels = [str(v) for v in primaries.coords["chromaticity"].values] if "chromaticity" in primaries.coords else []
        if labels != ["x", "y"]:
            raise GamutError(f"chromaticity primaries must be CIE 1931 x, y; got chromaticity={labels}")
        xyz = xy_to_xyz(primaries)
    else:
        allowed = "'xyz', 'wavelength' or 'chromaticity'" if allow_chromaticity else "'xyz' or 'wavelength'"
        raise GamutError(f"primaries with dims {tuple(primaries.dims)} are not usable; need 'primary' and {allowed}")
    n = xyz.sizes["primary"]
    if n < 3:
        raise GamutError(f"{n} primaries given; a gamut needs at least 3 (dim 'primary' of size >= 3)")
    values = np.asarray(xyz.values, dtype=float)
    if not np.isfinite(values).all():
        raise GamutError("primaries contain non-finite tristimulus values; all values must be finite")
    lead = [d for d in xyz.dims if d not in ("primary", "xyz")]
    return xyz.transpose(*lead, "primary", "xyz")


def flatten(array: xr.DataArray, core: tuple[str, ...]):
    """(values reshaped to (M, *core sizes), leading dims, leading shape, leading coords)."""
    lead = [d for d in array.dims if d not in core]
    moved = array.transpose(*lead, *core)
    shape = tuple(moved.sizes[d] for d in lead)
    values = np.asarray(moved.values, dtype=float).reshape((-1,) + moved.shape[len(lead):])
    coords = {k: v for k, v in array.coords.items() if not (set(v.dims) & set(core)) and set(v.dims) <= set(lead)}
    return values, lead, shape, coords


def describe_item(lead: list[str], shape: tuple[int, ...], coords: dict, flat_index: int) -> str:
    """Human label of one flattened leading-dim entry, e.g. ``design=d3, observer=7``."""
    if not lead:
        return "primaries"
    index = np.unravel_index(flat_index, shape)
    parts = []
    for dim, i in zip(lead, index):
        parts.append(f"{dim}={coords[dim].values[i]}" if dim in coords else f"{dim}#{i}")
    return ", ".join(parts)


def lead_array(values, lead, shape, coords, *, extra_dims=(), extra_coords=None, attrs=None, name=None):
    """Wrap a flattened result (M, *extra) back into a labelled DataArray."""
    values = np.asarray(values)
    data = values.reshape(shape + values.shape[1:])
    all_coords = {k: v for k, v in coords.items()}
    all_coords.update(extra_coords or {})
    return xr.DataArray(data, dims=(*lead, *extra_dims), coords=all_coords, attrs=dict(attrs or {}), name=name)


def white_xyz(white, primaries: xr.DataArray, observer=None) -> xr.DataArray:
    """The CIELAB white: the sum of the primaries (all drives 1) when ``white`` is None, else the
    stated white as XYZ (a DataArray with an ``xyz`` dim or a plain (X, Y, Z); or a spectrum with
    ``wavelength`` or a colour-science ``SpectralDistribution``, integrated with ``observer``),
    broadcast against the primaries' leading dims."""
    if is_colour_object(observer):
        observer = as_observer(observer, _grid(white))
    if is_colour_spectrum(white):
        white = as_spectra(white, wavelengths=_grid(observer), where="white", dims_example=("wavelength",))
    elif isinstance(white, (np.ndarray, list, tuple)) and np.shape(white) == (3,):
        white = xr.DataArray(np.asarray(white, dtype=float), dims=("xyz",), coords={"xyz": ["X", "Y", "Z"]})
    if white is None:
        out = primaries.sum("primary")
    elif isinstance(white, xr.DataArray) and "xyz" in white.dims:
        out = white
    elif isinstance(white, xr.DataArray) and "wavelength" in white.dims:
        if observer is None:
            raise GamutError("a white given as a spectrum needs an observer (a Dataset with 'cmf'), got none")
        out = tristimulus(white, observer, scale="none")
    else:
        raise GamutError(
            f"white of type {type(white).__name__} is not usable; allowed: None (sum of the primaries), "
            "a DataArray with an 'xyz' dim or a plain (X, Y, Z), or a spectrum (a 'wavelength' DataArray or a "
            "colour-science SpectralDistribution)"
        )
    out = out.broadcast_like(primaries.isel(primary=0, drop=True))
    lead = [d for d in primaries.dims if d not in ("primary", "xyz")]
    extra = [d for d in out.dims if d not in lead and d != "xyz"]
    if extra:
        raise GamutError(f"white has dims {extra} that the primaries lack; allowed dims: {lead + ['xyz']}")
    out = out.transpose(*lead, "xyz")
    if (np.asarray(out.sel(xyz="Y")) <= 0).any():
        raise GamutError("the white has Y <= 0; a CIELAB white needs Y > 0")
    return out
