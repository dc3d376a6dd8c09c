"""Tristimulus integration: many spectra × many observers in one contraction over wavelength.

The integral is the rectangle rule on a uniform grid, ``Σ S(λ)·cmf(λ)·Δλ`` — the "Integration"
method of colour-science's ``sd_to_XYZ`` (ASTM E308 weighting tables are not used).
"""

from __future__ import annotations

import numpy as np
import xarray as xr

from metasim.colorimetry.integration import spectral_products
from metasim.errors import ColorimetryError, SpectrumError
from metasim.labelling import coordinates, labelled  # noqa: F401  (coordinates: kept importable from here)
from metasim.observers.convert import as_observer
from metasim.spectra import RADIANCE_UNITS, as_wavelengths, check_spectra, grid_step, require_same_grid
from metasim.spectra.convert import as_spectra, is_colour_object, is_colour_spectrum

#: Maximum luminous efficacy for photopic vision, lm/W (CIE 15:2004; 683 lm/W at 555 nm).
K_M = 683.0

SCALES = ("absolute", "relative", "none")


def observer_responses(observers, quantity: str = "xyz") -> xr.DataArray:
    """The observer functions to integrate against (``[observer,] <quantity> × wavelength``)."""
    if isinstance(observers, xr.Dataset):
        variable = "cmf" if quantity == "xyz" else "lms"
        if variable not in observers:
            raise ColorimetryError(
                f"observers carry no '{variable}' variable (have {sorted(observers.data_vars)}); "
                "cone excitations need an observer defined from cone fundamentals"
            )
        observers = observers[variable]
    if not isinstance(observers, xr.DataArray):
        raise ColorimetryError(f"observers must be an xarray Dataset or DataArray, got {type(observers).__name__}")
    channel = "xyz" if quantity == "xyz" else "cone"
    if channel not in observers.dims or "wavelength" not in observers.dims:
        raise ColorimetryError(
            f"observer functions need dims '{channel}' and 'wavelength', got {tuple(observers.dims)}"
        )
    return observers


def _wavelengths(array) -> np.ndarray:
    """The wavelength coordinate values of a DataArray (without building a coordinate DataArray)."""
    if "wavelength" in array.coords:
        return np.asarray(array.coords.variables["wavelength"].values, dtype=float)
    return as_wavelengths(array)


def grid_of(spectra: xr.DataArray, responses: xr.DataArray) -> float:
    """The grid step (nm) of ``spectra`` after checking that ``responses`` share its grid."""
    wl = _wavelengths(spectra)
    require_same_grid(wl, _wavelengths(responses), names=("spectra", "observer functions"))
    return grid_step(wl)


def _contract(spectra: xr.DataArray, responses: xr.DataArray, channel_dim: str):
    """Σ_λ spectra · responses · Δλ as numpy values, with the output dims."""
    step = grid_of(spectra, responses)
    s_dims = [d for d in spectra.dims if d != "wavelength"]
    r_dims = [d for d in responses.dims if d not in ("wavelength", channel_dim)]
    shared = set(s_dims) & set(r_dims)
    if shared:
        raise ColorimetryError(
            f"spectra and observer functions share dims {sorted(shared)}; rename one "
            "(only 'wavelength' may be shared)"
        )
    s = spectra.variable.transpose(*s_dims, "wavelength").values
    r = responses.variable.transpose(*r_dims, channel_dim, "wavelength").values
    n_wavelengths = s.shape[-1]
    out = spectral_products(s.reshape(-1, n_wavelengths), r.reshape(-1, n_wavelengths)) * step
    return out.reshape(s.shape[:-1] + r.shape[:-1]), (*s_dims, *r_dims, channel_dim)


def contract(spectra: xr.DataArray, responses: xr.DataArray, channel_dim: str) -> xr.DataArray:
    """Σ_λ spectra · responses · Δλ as one matrix product.

    Output dims: the spectra's non-wavelength dims, then the responses' non-wavelength dims other
    than ``channel_dim``, then ``channel_dim``. No Python loop over spectra or observers.

    Parameters
    ----------
    spectra : DataArray
        Spectra with a ``wavelength`` dim.
    responses : DataArray
        Response functions on the same grid (for example ``cmf``), with ``channel_dim``.
    channel_dim : str
        The responses' channel dim (``xyz`` or ``cone``).

    Returns
    -------
    DataArray
        Σ_λ spectra · responses · Δλ over the dims named above.

    Examples
    --------
    >>> import metasim
    >>> from metasim.colorimetry import contract
    >>> from metasim.emitters import gaussian
    >>> spectra = gaussian([450, 550], [20, 20], name=["B", "G"])
    >>> contract(spectra, metasim.standard_observer("cie1931_2")["cmf"], "xyz").dims
    ('primary', 'xyz')
    """
    values, dims = _contract(spectra, responses, channel_dim)
    return labelled(values, dims, (spectra, responses))


def tristimulus(
    spectra: xr.DataArray,
    observers,
    *,
    scale: str = "absolute",
    white: xr.DataArray | None = None,
    quantity: str = "xyz",
) -> xr.DataArray:
    """Tristimulus values of many spectra for many observers in one call.

    Parameters
    ----------
    spectra : DataArray
        Any dims plus ``wavelength`` (nm). For ``scale="absolute"`` spectral radiance in
        W·sr⁻¹·m⁻²·nm⁻¹. A colour-science spectral distribution is converted
        (:mod:`metasim.spectra.convert`), onto the observers' grid when they have one.
    observers : Dataset or DataArray
        An observer Dataset (variable ``cmf``, or ``lms`` for ``quantity="lms"``) or the functions
        themselves as a DataArray with ``xyz`` (or ``cone``) and ``wavelength`` dims, with or without a
        leading ``observer`` dim; the same grid as ``spectra``. colour-science colour-matching
        functions or cone fundamentals are put on the spectra's grid (:mod:`metasim.observers.convert`).
    scale : {"absolute", "relative", "none"}
        ``absolute``: K_m·Σ S·x̄·Δλ with K_m = 683 lm/W, giving cd/m² for radiance input.
        ``relative``: scaled per observer so that ``white`` has Y = 100 (for ``quantity="lms"``
        the white's own channel values are 100).
        ``none``: the bare integral Σ S·x̄·Δλ.
    white : DataArray, optional
        The stated white spectrum (``wavelength`` only) for ``scale="relative"``.
    quantity : {"xyz", "lms"}
        Integrate the XYZ functions (default) or the cone fundamentals.

    Returns
    -------
    DataArray
        The spectra's other dims, the observers' ``observer`` dim if any, then ``xyz`` (or ``cone``).

    References
    ----------
    CIE 15:2004 Colorimetry, §7 (tristimulus values); colour-science ``sd_to_XYZ`` method "Integration".

    Examples
    --------
    >>> import metasim
    >>> import numpy as np
    >>> equal_energy = metasim.make_spectra(np.ones(441), metasim.default_grid())
    >>> xyz = metasim.tristimulus(equal_energy, metasim.standard_observer("cie1931_2"))
    >>> metasim.xyz_to_xy(xyz).round(3).values.tolist()  # CIE illuminant E: x = y = 1/3
    [0.333, 0.333]
    """
    if scale not in SCALES:
        raise ColorimetryError(f"scale={scale!r} is not known; allowed: {', '.join(SCALES)}")
    channel = {"xyz": "xyz", "lms": "cone"}.get(quantity)
    if channel is None:
        raise ColorimetryError(f"quantity={quantity!r} is not known; allowed: xyz, lms")
    if is_colour_spectrum(spectra):  # colour-science input: on the observer's grid when it has one
        grid = observers if isinstance(observers, (xr.Dataset, xr.DataArray)) and "wavelength" in observers.dims else None
        spectra = as_spectra(spectra, wavelengths=grid, where="spectra")
    spectra = as_spectra(spectra, where="spectra", dims_example=("stimulus", "wavelength"))
    check_spectra(spectra, where="spectra", non_negative=False)
    if is_colour_object(observers) or isinstance(observers, np.ndarray):
        observers = as_observer(observers, _wavelengths(spectra))
    if white is not None:
        white = as_spectra(white, wavelengths=_wavelengths(spectra), where="white")
    responses = observer_responses(observers, quantity)
    attrs = {"long_name": "tristimulus values" if quantity == "xyz" else "cone excitations",
             "integration": "rectangle rule over the uniform wavelength grid"}
    name = "tristimulus" if quantity == "xyz" else "cone_excitation"
    if scale == "relative":
        values = contract(spectra, responses, channel)
        if white is None:
            raise ColorimetryError("scale='relative' needs a stated white spectrum (white=...)")
        if set(white.dims) != {"wavelength"}:
            raise SpectrumError(f"white must have only a 'wavelength' dim, got {tuple(white.dims)}")
        white_values = contract(white, responses, channel)
        reference = white_values.sel({channel: "Y"}) if channel == "xyz" else white_values
        if (np.asarray(reference) <= 0).any():
            raise SpectrumError("the stated white has zero or negative response; it cannot set Y = 100")
        values = values * (100.0 / reference)
        values.attrs = {"units": "1 (white Y = 100)", **attrs}
        values.name = name
        return values
    values, dims = _contract(spectra, responses, channel)
    if scale == "absolute":
        values = values * K_M
        units = "cd m-2" if spectra.attrs.get("units") == RADIANCE_UNITS else f"683 lm/W x ({spectra.attrs.get('units', '1')}) nm"
    else:
        units = f"({spectra.attrs.get('units', '1')}) nm"
    return labelled(values, dims, (spectra, responses), attrs={"units": units, **attrs}, name=name)


def cone_excitations(spectra: xr.DataArray, observers, **kwargs) -> xr.DataArray:
    """Cone excitations (``cone`` = L, M, S) of spectra; see :func:`tristimulus` for the options.

    Parameters
    ----------
    spectra : DataArray
        Spectra with a ``wavelength`` dim on the observers' grid.
    observers : str or Dataset
        A standard observer name or observer Dataset with ``lms``.
    **kwargs
        As for :func:`tristimulus` (``scale``, ...).

    Returns
    -------
    DataArray
        Cone excitations with a ``cone`` dim (L, M, S) in place of ``wavelength``.

    Examples
    --------
    >>> import metasim
    >>> from metasim.emitters import gaussian
    >>> lms = metasim.cone_excitations(gaussian(450, 20), metasim.standard_observer("cie2015_2"))
    >>> lms.idxmax("cone").item()  # a blue band excites the S cones most
    'S'
    """
    return tristimulus(spectra, observers, quantity="lms", **kwargs)


__all__ = ["K_M", "SCALES", "contract", "tristimulus", "cone_excitations", "coordinates", "labelled",
           "observer_responses", "grid_of"]
