"""Luminous efficacy of radiation: lumens per watt of a spectrum for the CIE photopic observer.

K = K_m · Σ S(λ)·V(λ)·Δλ / Σ S(λ)·Δλ with K_m = 683 lm/W and V(λ) = ȳ(λ) of the CIE 1931 2°
observer (CIE 15:2004; the quantity is "luminous efficacy of radiation", CIE S 017:2020 17-21-052).
It measures how much of a display white's radiant power the eye counts as light: narrow lines near
555 nm score high, deep red and violet lines low.

Layer: colorimetry.
"""

from __future__ import annotations

import xarray as xr

from metasim.colorimetry.tristimulus import K_M, tristimulus
from metasim.errors import ColorimetryError
from metasim.spectra import grid_step


def luminous_efficacy(spectra: xr.DataArray, observer) -> xr.DataArray:
    """Luminous efficacy of radiation (lm/W) of each spectrum, for ``observer``'s ȳ (CIE 1931 2° as V(λ)).

    Parameters
    ----------
    spectra : DataArray
        Any dims plus ``wavelength``.
    observer : Dataset
        A standard observer (``cmf``) on the spectra's grid, normally CIE 1931 2°.

    Returns
    -------
    DataArray
        The spectra's dims without ``wavelength``; NaN where a spectrum carries no power.

    Examples
    --------
    >>> import metasim
    >>> from metasim.colorimetry.efficacy import luminous_efficacy
    >>> from metasim.emitters import laser_line
    >>> line = laser_line([555.0], 1.0, name=["G"])
    >>> round(float(luminous_efficacy(line, metasim.standard_observer("cie1931_2")).squeeze()), 1)
    683.0
    """
    if "wavelength" not in spectra.dims:
        raise ColorimetryError(f"luminous_efficacy needs spectra with a 'wavelength' dim, got {tuple(spectra.dims)}")
    luminance = tristimulus(spectra, observer, scale="absolute").sel(xyz="Y", drop=True)
    power = spectra.sum("wavelength") * grid_step(spectra["wavelength"].values)
    out = luminance / power.where(power > 0)
    out.attrs = {"units": "lm W-1", "long_name": "luminous efficacy of radiation",
                 "source": f"CIE 15:2004, K_m = {K_M:g} lm/W, V(lambda) = CIE 1931 y-bar"}
    return out.rename("luminous_efficacy")


__all__ = ["luminous_efficacy"]
