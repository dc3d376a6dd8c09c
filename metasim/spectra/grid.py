"""Wavelength grids, spectral validation, resampling and CSV exchange of measured spectra.

This is the top layer of metasim: it imports nothing else from the package except the error family
(:mod:`metasim.errors`) and the value checks (:mod:`metasim.checks`).

Conventions
-----------
* A spectral quantity is an :class:`xarray.DataArray` with a ``wavelength`` dimension (nm, float64,
  strictly ascending). Any other dimensions (``channel``, ``primary``, ``stimulus``, ...) may lead.
* The default grid is 390-830 nm at 1 nm, the range of the CIE 170-1:2006 physiological observer.
  Use ``wavelength_grid(360, 830)`` for work with the CIE 1931 and 1964 observers only.

Resampling policy (:func:`resample`)
------------------------------------
* Inside the measured range: linear interpolation of the spectral density (values per nm).
* Outside the measured range: zero. A measured spectrum says nothing about wavelengths it was not
  measured at; zero is the conservative choice for emission and keeps integrals finite.
* Energy that falls outside the target grid is dropped; if it exceeds 0.1 % of the spectrum's total
  energy (trapezoidal integral over its own wavelengths) a :class:`SpectralEnergyWarning` names the
  channel and the share lost.

Energy outside the grid (:func:`check_energy_on_grid`, for measured files and parametric emitters)
-----------------------------------------------------------------------------------------------
* A spectrum that loses more than 1 % of its energy outside the grid (:data:`OUTSIDE_GRID_SHARE`)
  is an error (:class:`~metasim.errors.EnergyOutsideGridError`) naming it, the share lost and the
  grid — a peak at 200 or 835 nm on the 390-830 nm grid would otherwise be cut, or rescaled from
  its last few samples, into a different spectrum without a word.
* Only when asked (``allow_outside_grid=True``; on the command line ``--allow-outside-grid``) is it
  a :class:`SpectralEnergyWarning` stating the share lost, and the computation goes on.
* A spectrum with (almost) nothing on the grid is an error either way.
* This is the rule for display primaries (parametric emitters, measured primary files read by
  :func:`~metasim.spectra.read_spectra_csv`); :func:`resample` on its own (illuminants,
  reflectances) only warns unless told otherwise. Published tables that are cut to the working grid
  on purpose (standard observers, illuminants, reflectance and density tables) are resampled
  without any of this (``warn_share=None``).

Every resampling in metasim goes through :func:`resample`.
"""

from __future__ import annotations

import math
import warnings
from typing import Sequence

import numpy as np
import xarray as xr

from metasim.errors import EnergyOutsideGridError, GridMismatchError, SpectrumError

DEFAULT_START_NM = 390.0
DEFAULT_END_NM = 830.0
DEFAULT_STEP_NM = 1.0
#: Share of a spectrum's energy that resampling may drop silently (0.1 %).
ENERGY_WARNING_SHARE = 1e-3
#: Share of a spectrum's energy that may lie outside the grid; more is an error unless allowed (1 %).
OUTSIDE_GRID_SHARE = 1e-2
#: Share below which a spectrum counts as having nothing on the grid (an error, allowed or not).
NOTHING_ON_GRID_SHARE = 1e-6

RADIANCE_UNITS = "W sr-1 m-2 nm-1"
WAVELENGTH_ATTRS = {"units": "nm", "long_name": "wavelength"}


class SpectralEnergyWarning(UserWarning):
    """A spectrum lost part of its energy outside the wavelength grid (the warning states the share)."""


def check_energy_on_grid(lost, labels, wavelengths, *, where: str, allow: bool = False, details=None) -> None:
    """The one rule for the energy a spectrum loses outside the wavelength grid.

    ``lost`` holds, per spectrum, the share (0..1) of its energy that falls outside ``wavelengths``;
    ``labels`` (and optional ``details``, e.g. " (peak 835 nm, FWHM 1 nm)") name the spectra.
    More than :data:`OUTSIDE_GRID_SHARE`: :class:`~metasim.errors.EnergyOutsideGridError`, or with
    ``allow`` a :class:`SpectralEnergyWarning` stating the share lost. Less than
    :data:`NOTHING_ON_GRID_SHARE` kept: an error either way.

    Parameters
    ----------
    lost : float or array_like
        Per spectrum, the share (0..1) of its energy outside the grid.
    labels : sequence of str
        The spectra's names, one per entry of ``lost``.
    wavelengths : array_like
        The grid in nm (named in messages).
    where : str
        What the caller calls the spectra, for messages.
    allow : bool
        Accept a loss above :data:`OUTSIDE_GRID_SHARE` (1 %) with a warning instead of an error.
    details : sequence of str, optional
        Text after each label in messages, e.g. " (peak 835 nm, FWHM 1 nm)".

    Returns
    -------
    None

    Raises
    ------
    EnergyOutsideGridError
        A spectrum losing more than 1 % of its energy (unless ``allow``), or keeping less than
        :data:`NOTHING_ON_GRID_SHARE` of it on the grid.
    SpectrumError
        A share that is not finite.

    Examples
    --------
    >>> from metasim.spectra import check_energy_on_grid, wavelength_grid
    >>> check_energy_on_grid([0.0, 0.0005], ["B", "G"], wavelength_grid(), where="primaries")  # within 1 %
    >>> check_energy_on_grid([0.2], ["R"], wavelength_grid(), where="primaries",
    ...                      details=[" (peak 835 nm)"])  # doctest: +ELLIPSIS
    Traceback (most recent call last):
        ...
    metasim.errors.EnergyOutsideGridError: primaries: R (peak 835 nm) loses 20.00 % of its energy outside the wavelength grid 390-830 nm ...
    """
    lost = np.clip(np.atleast_1d(np.asarray(lost, dtype=float)), 0.0, 1.0)
    details = list(details) if details is not None else [""] * lost.size
    grid = _grid_text(np.asarray(wavelengths, dtype=float))
    if not np.isfinite(lost).all():
        i = int(np.argmax(~np.isfinite(lost)))
        raise SpectrumError(f"{where}: {labels[i]}{details[i]}: its energy is not finite on the grid {grid}")
    nothing = lost > 1.0 - NOTHING_ON_GRID_SHARE
    if nothing.any():
        i = int(np.argmax(nothing))
        raise EnergyOutsideGridError(f"{where}: {labels[i]}{details[i]} has no emission on the wavelength grid {grid}; "
                                     "move it inside the grid")
    over = lost > OUTSIDE_GRID_SHARE
    if over.any():
        i = int(np.argmax(np.where(over, lost, -1.0)))
        text = (f"{where}: {labels[i]}{details[i]} loses {100 * lost[i]:.2f} % of its energy outside the wavelength "
                f"grid {grid}")
        if not allow:
            raise EnergyOutsideGridError(f"{text}; allowed: at most {100 * OUTSIDE_GRID_SHARE:g} %; move it inside the "
                                         "grid, or give allow_outside_grid=True to accept the loss with a warning")
        warnings.warn(f"{text}; going on with the part on the grid", SpectralEnergyWarning, stacklevel=3)


def wavelength_grid(
    start_nm: float = DEFAULT_START_NM,
    end_nm: float = DEFAULT_END_NM,
    step_nm: float = DEFAULT_STEP_NM,
) -> xr.DataArray:
    """Return a uniform wavelength grid as a ``wavelength`` coordinate DataArray (nm).

    Parameters
    ----------
    start_nm, end_nm : float
        First and last wavelength in nm, ``0 < start_nm < end_nm``; ``end_nm`` is included when it
        lies on the grid.
    step_nm : float
        Spacing in nm, > 0.

    Returns
    -------
    DataArray
        The ``wavelength`` coordinate (nm) with its attributes.

    Examples
    --------
    >>> import metasim
    >>> grid = metasim.wavelength_grid(400, 700, 5)
    >>> grid.sizes["wavelength"], float(grid[0]), float(grid[-1])
    (61, 400.0, 700.0)
    """
    for name, value in (("start_nm", start_nm), ("end_nm", end_nm), ("step_nm", step_nm)):
        if not isinstance(value, (int, float, np.number)) or not math.isfinite(float(value)):
            raise SpectrumError(f"{name}={value!r} is not a finite number of nm")
    if step_nm <= 0:
        raise SpectrumError(f"step_nm={step_nm} is not allowed: the grid step must be > 0 nm")
    if not 0 < start_nm < end_nm:
        raise SpectrumError(
            f"grid {start_nm}-{end_nm} nm is not allowed: need 0 < start_nm < end_nm"
        )
    count = int(math.floor((end_nm - start_nm) / step_nm + 1e-9)) + 1
    values = start_nm + step_nm * np.arange(count, dtype=float)
    holder = xr.DataArray(
        values, dims=("wavelength",), coords={"wavelength": ("wavelength", values, dict(WAVELENGTH_ATTRS))}
    )
    return holder.coords["wavelength"]


def default_grid() -> xr.DataArray:
    """The default grid, 390-830 nm at 1 nm (CIE 170-1:2006 range).

    Returns
    -------
    DataArray
        The ``wavelength`` coordinate, 390-830 nm at 1 nm.

    Examples
    --------
    >>> import metasim
    >>> grid = metasim.default_grid()
    >>> grid.sizes["wavelength"], float(grid[0]), float(grid[-1]), grid.attrs["units"]
    (441, 390.0, 830.0, 'nm')
    """
    return wavelength_grid()


def as_wavelengths(wavelengths) -> np.ndarray:
    """Return the wavelengths of a grid, DataArray, Dataset or sequence as a float64 array.

    Parameters
    ----------
    wavelengths : DataArray, Dataset or sequence
        A grid, an object with a ``wavelength`` coordinate, or the numbers (nm).

    Returns
    -------
    ndarray
        The wavelengths in nm, float64.

    Examples
    --------
    >>> from metasim.spectra import as_wavelengths, wavelength_grid
    >>> as_wavelengths(wavelength_grid(400, 410, 5)).tolist()
    [400.0, 405.0, 410.0]
    """
    if isinstance(wavelengths, (xr.DataArray, xr.Dataset)) and "wavelength" in wavelengths.coords:
        return np.asarray(wavelengths.coords["wavelength"].values, dtype=float)
    return np.asarray(wavelengths, dtype=float)


def check_wavelengths(
    wavelengths, *, where: str = "wavelengths", uniform: bool = False
) -> np.ndarray:
    """Validate a wavelength vector and return it as float64.

    Allowed: a one-dimensional, finite, strictly ascending vector of positive values in nm with at
    least two entries; with ``uniform=True`` also a constant step (relative tolerance 1e-6).

    Parameters
    ----------
    wavelengths : array_like
        The wavelengths in nm.
    where : str
        How the message names them.
    uniform : bool
        Also require a constant step.

    Returns
    -------
    ndarray
        The wavelengths, float64.

    Raises
    ------
    SpectrumError
        Naming ``where``, the first offending value and what is allowed.

    Examples
    --------
    >>> from metasim.spectra import check_wavelengths
    >>> check_wavelengths([400, 405, 410], uniform=True).tolist()
    [400.0, 405.0, 410.0]
    """
    try:
        values = as_wavelengths(wavelengths)
    except (TypeError, ValueError) as exc:
        raise SpectrumError(f"{where}: wavelengths are not numeric ({exc})") from None
    if values.ndim != 1:
        raise SpectrumError(f"{where}: wavelengths must be one-dimensional, got shape {values.shape}")
    if values.size < 2:
        raise SpectrumError(f"{where}: need at least 2 wavelengths, got {values.size}")
    bad = ~np.isfinite(values)
    if bad.any():
        i = int(np.argmax(bad))
        raise SpectrumError(f"{where}: wavelength #{i} is {values[i]!r}; wavelengths must be finite")
    if (values <= 0).any():
        i = int(np.argmax(values <= 0))
        raise SpectrumError(f"{where}: wavelength {values[i]!r} nm is not allowed; must be > 0 nm")
    steps = np.diff(values)
    if (steps == 0).any():
        i = int(np.argmax(steps == 0))
        raise SpectrumError(
            f"{where}: duplicate wavelength {values[i + 1]:g} nm; wavelengths must be unique"
        )
    if (steps < 0).any():
        i = int(np.argmax(steps < 0))
        raise SpectrumError(
            f"{where}: wavelength {values[i + 1]:g} nm follows {values[i]:g} nm; "
            "wavelengths must be strictly ascending"
        )
    if uniform and not np.allclose(steps, steps[0], rtol=1e-6, atol=1e-9):
        i = int(np.argmax(~np.isclose(steps, steps[0], rtol=1e-6, atol=1e-9)))
        raise SpectrumError(
            f"{where}: step {steps[i]:g} nm at {values[i]:g} nm differs from {steps[0]:g} nm; "
            "a grid must be uniform (resample measured data first)"
        )
    return values


def grid_step(wavelengths) -> float:
    """Step in nm of a uniform grid (validated; a grid seen before is recognised by its values).

    Parameters
    ----------
    wavelengths
        A uniform grid (anything :func:`as_wavelengths` reads).

    Returns
    -------
    float
        The step in nm.

    Raises
    ------
    SpectrumError
        A grid that is not uniform.

    Examples
    --------
    >>> from metasim.spectra import grid_step, wavelength_grid
    >>> grid_step(wavelength_grid(390, 830, 5))
    5.0
    """
    try:
        values = as_wavelengths(wavelengths)
    except (TypeError, ValueError):
        values = None
    if values is not None and values.ndim == 1 and values.dtype == np.float64:
        step = _checked_steps.get(values.tobytes())
        if step is not None:
            return step
    values = check_wavelengths(wavelengths, where="grid", uniform=True)
    step = float(values[1] - values[0])
    if len(_checked_steps) >= 64:
        _checked_steps.clear()
    _checked_steps[values.tobytes()] = step
    return step


_checked_steps: dict[bytes, float] = {}  # valid uniform grids (their bytes) and their steps


def check_spectra(
    spectra: xr.DataArray, *, where: str = "spectra", non_negative: bool = True
) -> xr.DataArray:
    """Validate a spectral DataArray: a ``wavelength`` dim, valid wavelengths, finite values.

    With ``non_negative=True`` (emission, reflectance, transmittance) negative values are refused.
    Returns the input unchanged.

    Parameters
    ----------
    spectra : DataArray
        The spectra to check.
    where : str
        How messages name them.
    non_negative : bool
        Refuse negative values (emission, reflectance, transmittance).

    Returns
    -------
    DataArray
        ``spectra``, unchanged.

    Raises
    ------
    SpectrumError
        No ``wavelength`` dim or coordinate, wavelengths not allowed, non-finite or negative values,
        each named.

    Examples
    --------
    >>> from metasim.emitters import gaussian
    >>> from metasim.spectra import check_spectra
    >>> spectra = gaussian([450], [20], name=["B"])
    >>> check_spectra(spectra) is spectra
    True
    """
    if not isinstance(spectra, xr.DataArray):
        raise SpectrumError(
            f"{where}: expected an xarray.DataArray with a 'wavelength' dim, got {type(spectra).__name__}"
        )
    if "wavelength" not in spectra.dims:
        raise SpectrumError(f"{where}: no 'wavelength' dim among {tuple(spectra.dims)}")
    if "wavelength" not in spectra.coords:
        raise SpectrumError(f"{where}: the 'wavelength' dim has no coordinate values (nm)")
    check_wavelengths(spectra.coords["wavelength"], where=where)
    values = np.asarray(spectra.values, dtype=float)
    bad = ~np.isfinite(values)
    if bad.any():
        index = np.unravel_index(int(np.argmax(bad)), values.shape)
        raise SpectrumError(f"{where}: value {values[index]!r} at {_describe(spectra, index)}; values must be finite")
    if non_negative and (values < 0).any():
        index = np.unravel_index(int(np.argmin(values)), values.shape)
        raise SpectrumError(
            f"{where}: negative value {values[index]:.6g} at {_describe(spectra, index)}; "
            "emission, reflectance and transmittance must be >= 0"
        )
    return spectra


def _describe(array: xr.DataArray, index: tuple) -> str:
    parts = []
    for dim, i in zip(array.dims, index):
        if dim in array.coords:
            value = array.coords[dim].values[i]
            parts.append(f"{dim}={value:g}" if isinstance(value, (float, np.floating)) else f"{dim}={value}")
        else:
            parts.append(f"{dim}#{i}")
    return ", ".join(parts)


def make_spectra(
    values,
    wavelengths,
    *,
    dim: str = "channel",
    labels: Sequence | None = None,
    units: str = RADIANCE_UNITS,
    long_name: str = "spectral radiance",
    non_negative: bool = True,
    **attrs,
) -> xr.DataArray:
    """Build a validated spectral DataArray (``dim`` × ``wavelength``, or ``wavelength`` only).

    ``values`` has shape (n_wavelength,) or (n_labels, n_wavelength).

    Parameters
    ----------
    values : array_like
        Shape (n_wavelength,) or (n_labels, n_wavelength).
    wavelengths : array_like or DataArray
        A uniform ascending grid in nm.
    dim : str
        Name of the label dim (default ``channel``).
    labels : sequence, optional
        One label per row of ``values``.
    units, long_name : str
        The attributes of the result.
    non_negative : bool
        Refuse negative values (default True).
    **attrs
        Further attributes.

    Returns
    -------
    DataArray
        ``dim`` × ``wavelength`` (or ``wavelength`` only), checked.

    Raises
    ------
    SpectrumError
        Values that are not 1-D or 2-D, a grid that is not uniform, NaN or negative values.
    GridMismatchError
        A number of values per row other than the number of wavelengths.

    Examples
    --------
    >>> import metasim
    >>> spectra = metasim.make_spectra([[0.0, 1.0, 0.0], [1.0, 0.0, 1.0]], [500, 550, 600], labels=["peak", "dip"])
    >>> dict(spectra.sizes)
    {'channel': 2, 'wavelength': 3}
    """
    wl = check_wavelengths(wavelengths, where=long_name)
    data = np.asarray(values, dtype=float)
    if data.ndim == 1:
        array = xr.DataArray(data, dims=("wavelength",), coords={"wavelength": wl})
    elif data.ndim == 2:
        if labels is None:
            labels = [f"{dim}{i}" for i in range(data.shape[0])]
        array = xr.DataArray(
            data, dims=(dim, "wavelength"), coords={dim: list(labels), "wavelength": wl}
        )
    else:
        raise SpectrumError(f"{long_name}: values must be 1-D or 2-D, got shape {data.shape}")
    if array.sizes["wavelength"] != wl.size:
        raise GridMismatchError(f"{long_name}: {data.shape[-1]} values for {wl.size} wavelengths")
    array.coords["wavelength"].attrs.update(WAVELENGTH_ATTRS)
    array.attrs.update({"units": units, "long_name": long_name, **attrs})
    return check_spectra(array, where=long_name, non_negative=non_negative)


def same_grid(a, b) -> bool:
    """True when two objects carry identical wavelength coordinates.

    Parameters
    ----------
    a, b
        Objects with a ``wavelength`` coordinate.

    Returns
    -------
    bool
        Whether the coordinates are identical.

    Examples
    --------
    >>> from metasim.spectra import same_grid, wavelength_grid
    >>> same_grid(wavelength_grid(), wavelength_grid(390, 830, 1)), same_grid(wavelength_grid(), wavelength_grid(390, 830, 5))
    (True, False)
    """
    wa, wb = as_wavelengths(a), as_wavelengths(b)
    return wa.shape == wb.shape and np.array_equal(wa, wb)


def require_same_grid(a, b, *, names: tuple[str, str] = ("first", "second")) -> None:
    """Raise :class:`GridMismatchError` unless ``a`` and ``b`` share their wavelength grid.

    Parameters
    ----------
    a, b
        Objects with a ``wavelength`` coordinate.
    names : tuple of str
        How the message names them.

    Returns
    -------
    None

    Raises
    ------
    GridMismatchError
        Different wavelength grids.

    Examples
    --------
    >>> from metasim.spectra import require_same_grid, wavelength_grid
    >>> require_same_grid(wavelength_grid(390, 830, 5), wavelength_grid(390, 830, 1),
    ...                   names=("spectra", "observer"))  # doctest: +ELLIPSIS
    Traceback (most recent call last):
        ...
    metasim.errors.GridMismatchError: spectra is sampled at 390-830 nm (89 points, 5 nm) but observer at ...
    """
    if not same_grid(a, b):
        wa, wb = as_wavelengths(a), as_wavelengths(b)
        raise GridMismatchError(
            f"{names[0]} is sampled at {_grid_text(wa)} but {names[1]} at {_grid_text(wb)}; "
            "resample one onto the other's grid (metasim.spectra.resample)"
        )


def _grid_text(values: np.ndarray) -> str:
    if values.size < 2:
        return f"{values.size} wavelength(s)"
    step = np.diff(values)
    step_text = f"{step[0]:g} nm" if np.allclose(step, step[0]) else "non-uniform steps"
    return f"{values[0]:g}-{values[-1]:g} nm ({values.size} points, {step_text})"


def resample(
    spectra: xr.DataArray,
    wavelengths=None,
    *,
    warn_share: float | None = ENERGY_WARNING_SHARE,
    allow_outside_grid: bool = True,
) -> xr.DataArray:
    """Resample spectra onto a wavelength grid following the module's documented policy.

    Linear interpolation inside the measured range, zero outside; a :class:`SpectralEnergyWarning`
    when more than ``warn_share`` of any channel's energy falls outside the target grid. With
    ``allow_outside_grid=False`` (how measured display primaries are read,
    :func:`metasim.spectra.read_spectra_csv`) more than :data:`OUTSIDE_GRID_SHARE` is an error
    (:func:`check_energy_on_grid`); nothing on the grid is an error either way. The default keeps
    the warning for general resampling (illuminants, reflectances, colour-matching functions that
    reach into the ultraviolet, where the part beyond the grid does not count). ``warn_share=None``
    skips the energy accounting altogether: published tables cut to the working grid on purpose
    (standard observers, CIE illuminants, CIE 13.3 reflectances, density tables).

    Parameters
    ----------
    spectra : DataArray
        Spectra with a ``wavelength`` dim.
    wavelengths : optional
        The target grid (default 390-830 nm at 1 nm).
    warn_share : float or None
        Share of any channel's energy outside the grid above which a warning is given (None: no
        energy accounting).
    allow_outside_grid : bool
        False: more than :data:`OUTSIDE_GRID_SHARE` outside is an error.

    Returns
    -------
    DataArray
        The spectra on the grid (attribute ``resampled_from``).

    Raises
    ------
    EnergyOutsideGridError
        No energy on the grid, or too much outside it with ``allow_outside_grid=False``.

    Examples
    --------
    >>> import metasim
    >>> from metasim.emitters import gaussian
    >>> coarse = metasim.resample(gaussian(550, 40), metasim.wavelength_grid(390, 830, 5))
    >>> coarse.sizes["wavelength"]
    89
    """
    check_spectra(spectra, where=spectra.name or "spectra", non_negative=False)
    target = check_wavelengths(default_grid() if wavelengths is None else wavelengths, where="target grid")
    source = as_wavelengths(spectra)
    if same_grid(source, target):
        return spectra
    moved = spectra.transpose(..., "wavelength")
    values = np.asarray(moved.values, dtype=float)
    flat = values.reshape(-1, source.size)
    if warn_share is not None:
        _account_energy(spectra, moved, flat, source, target, warn_share, allow_outside_grid)
    out = np.empty((flat.shape[0], target.size))
    for row in range(flat.shape[0]):  # rows are channels of one measured file: few, not a hot path
        out[row] = np.interp(target, source, flat[row], left=0.0, right=0.0)
    result = xr.DataArray(
        out.reshape(values.shape[:-1] + (target.size,)),
        dims=moved.dims,
        coords={k: v for k, v in moved.coords.items() if "wavelength" not in v.dims},
        attrs=dict(spectra.attrs),
        name=spectra.name,
    )
    result = result.assign_coords(wavelength=target)
    result.coords["wavelength"].attrs.update(WAVELENGTH_ATTRS)
    return result.transpose(*spectra.dims)


def _account_energy(spectra: xr.DataArray, moved: xr.DataArray, flat: np.ndarray, source: np.ndarray,
                    target: np.ndarray, warn_share: float, allow_outside_grid: bool) -> None:
    """The energy policy of :func:`resample` for rows ``flat`` (on ``source``) put on ``target``."""
    total = np.abs(np.trapezoid(flat, source, axis=-1))
    lo, hi = max(target[0], source[0]), min(target[-1], source[-1])
    if lo < hi:
        inside = source[(source > lo) & (source < hi)]
        xs = np.concatenate([[lo], inside, [hi]])
        kept_values = np.stack([np.interp(xs, source, row) for row in flat])
        kept = np.abs(np.trapezoid(kept_values, xs, axis=-1))
    else:
        kept = np.zeros_like(total)
    with np.errstate(invalid="ignore", divide="ignore"):
        lost = np.where(total > 0, 1.0 - kept / total, 0.0)
    if (lost > 1.0 - NOTHING_ON_GRID_SHARE).any() or ((lost > OUTSIDE_GRID_SHARE).any() and not allow_outside_grid):
        labels = [_flat_label(moved, i) for i in range(flat.shape[0])]
        where = str(spectra.attrs.get("source_file") or spectra.name or "spectra")
        check_energy_on_grid(lost, labels, target, where=where, allow=False,
                             details=[f" (measured {source[0]:g}-{source[-1]:g} nm)"] * len(labels))
    if (lost > warn_share).any():
        worst = int(np.argmax(lost))
        label = _flat_label(moved, worst)
        warnings.warn(
            f"resampling {label} onto {_grid_text(target)} drops {100 * lost[worst]:.2f} % of its "
            f"energy (measured {source[0]:g}-{source[-1]:g} nm); values outside the measured range are 0",
            SpectralEnergyWarning,
            stacklevel=3,
        )


def _flat_label(array: xr.DataArray, flat_index: int) -> str:
    lead = [d for d in array.dims if d != "wavelength"]
    if not lead:
        return f"spectrum {array.name or ''}".strip()
    index = np.unravel_index(flat_index, [array.sizes[d] for d in lead])
    return "spectrum " + ", ".join(
        f"{d}={array.coords[d].values[i]}" if d in array.coords else f"{d}#{i}" for d, i in zip(lead, index)
    )


def integrate(spectra: xr.DataArray) -> xr.DataArray:
    """Integral over wavelength by the rectangle rule on a uniform grid (sum × step), in units × nm.

    Parameters
    ----------
    spectra : DataArray
        Spectra on a uniform grid (``wavelength`` dim).

    Returns
    -------
    DataArray
        The integrals, without ``wavelength``; units the spectra's × nm.

    Examples
    --------
    >>> import numpy as np
    >>> from metasim.spectra import integrate, make_spectra
    >>> flat = make_spectra(np.ones(11), np.arange(400.0, 411.0), units="1")
    >>> float(integrate(flat))  # 11 samples × 1 nm
    11.0
    """
    step = grid_step(spectra)
    out = spectra.sum("wavelength") * step
    out.attrs = {"long_name": f"integral of {spectra.attrs.get('long_name', 'spectrum')}"}
    return out


__all__ = [
    "DEFAULT_START_NM",
    "DEFAULT_END_NM",
    "DEFAULT_STEP_NM",
    "ENERGY_WARNING_SHARE",
    "OUTSIDE_GRID_SHARE",
    "NOTHING_ON_GRID_SHARE",
    "RADIANCE_UNITS",
    "WAVELENGTH_ATTRS",
    "SpectralEnergyWarning",
    "check_energy_on_grid",
    "wavelength_grid",
    "default_grid",
    "as_wavelengths",
    "check_wavelengths",
    "grid_step",
    "check_spectra",
    "make_spectra",
    "same_grid",
    "require_same_grid",
    "resample",
    "integrate",
]
