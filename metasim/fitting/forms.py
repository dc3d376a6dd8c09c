"""The two input forms of colour-matching data, as xarray Datasets (netCDF via :func:`metasim.save_dataset`).

**Colour-matching functions** (``matching_data = "colour-matching functions"``), the form of the
classic published individual-observer data sets: per subject, the amounts of three primaries that
match each monochromatic test light of unit energy.

* ``amount`` (``observer`` × ``stimulus`` × ``repeat`` × ``primary``): amounts in primary-normalised
  energy units, so that each primary matches itself with amount 1 (the unit of a primary is its
  spectrum scaled to unit radiant energy; for a monochromatic primary, unit energy at its
  wavelength). A negative amount is a primary added to the test field. NaN marks a missing value.
* coordinate ``test_wavelength`` (``stimulus``, nm, 390-830 nm);
* the primaries: coordinate ``primary_wavelength`` (``primary``, nm) for monochromatic primaries, or
  variable ``primary_spectra`` (``primary`` × ``wavelength``, any non-negative spectra on a uniform
  grid, normalised here to unit energy);
* coordinates ``field_size_deg`` and ``age_years`` (``observer``; NaN age = unknown).

**Matching sessions** (``matching_data = "matching session"``): per subject, the linear drive settings
(0..1) of a three-primary test display that match reference spectra, with repeats.

* ``setting`` (``observer`` × ``stimulus`` × ``repeat`` × ``primary``): linear drive values, NaN =
  missing;
* ``reference_spectra`` (``stimulus`` × ``wavelength``): spectral radiance of each reference;
* ``display_spectra`` (``primary`` × ``wavelength``): the test display's full-drive spectral
  radiance, ``display_black`` (``wavelength``): its black (default 0); same grid as the references;
* coordinates ``field_size_deg`` and ``age_years`` as above.

Without observations (``amount`` / ``setting`` absent) a Dataset of either form is a *plan*: the
test lights or references and primaries of a session not run yet, for :func:`metasim.fitting.advice`.
CSV imports of both forms are in :mod:`metasim.fitting.files`.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
import xarray as xr

from metasim._version import __version__
from metasim.errors import FittingError, MetasimError
from metasim.fitting.model import (MatchGeometry, match_geometry, monochromatic_weights, primary_condition,
                                   spectral_weights)
from metasim.observers.physiological import AGE_RANGE_YEARS, FIELD_RANGE_DEG
from metasim.spectra import RADIANCE_UNITS, WAVELENGTH_ATTRS, check_spectra, check_wavelengths

CMF_FORM = "colour-matching functions"
SESSION_FORM = "matching session"
FORMS = (CMF_FORM, SESSION_FORM)
OBSERVATION = {CMF_FORM: "amount", SESSION_FORM: "setting"}
#: Largest condition number of the primaries' cone-excitation matrix (mean observer) accepted.
MAX_PRIMARY_CONDITION = 1e8


@dataclass(frozen=True)
class MatchData:
    """Matching data checked and reduced to arrays (what the fit and the advice work on)."""

    form: str
    geometry: MatchGeometry
    observations: np.ndarray | None  # (n, S, R, 3) or None for a plan
    field_size_deg: np.ndarray  # (n,)
    age_years: np.ndarray  # (n,), NaN = unknown
    subjects: np.ndarray
    stimuli: np.ndarray
    primaries: list
    dataset: xr.Dataset


def _per_subject(name: str, value, n: int, allowed, unknown_ok: bool) -> np.ndarray:
    values = np.asarray(np.nan if value is None else value, dtype=float)
    if values.ndim > 1 or (values.ndim == 1 and values.size != n):
        raise FittingError(f"{name} needs one number or {n} (one per subject); got shape {values.shape}")
    values = np.broadcast_to(values, (n,)).astype(float)
    known = np.isfinite(values)
    if not unknown_ok and not known.all():
        raise FittingError(f"{name}={values[~known][0]!r} is not allowed; give a number per subject")
    bad = known & ((values < allowed[0]) | (values > allowed[1]))
    if bad.any():
        raise FittingError(f"{name}={values[bad][0]:g} is outside the CIE 170-1 model; allowed: "
                           f"{allowed[0]:g}-{allowed[1]:g}" + (" (NaN = unknown)" if unknown_ok else ""))
    return values


def _observations(values, name: str, n_stimuli: int, n_primaries: int, subjects) -> tuple[np.ndarray, np.ndarray]:
    """Observations as (n, S, R, P) float and the subject labels; accepts (S, P), (n, S, P), (n, S, R, P)."""
    if isinstance(values, xr.DataArray):
        order = [d for d in ("observer", "stimulus", "repeat", "primary") if d in values.dims]
        if set(values.dims) != set(order) or "stimulus" not in order or "primary" not in order:
            raise FittingError(f"{name} dims {values.dims} are not allowed; use (observer, stimulus, [repeat,] primary)")
        if subjects is None and "observer" in values.coords:
            subjects = values["observer"].values
        values = values.transpose(*order)
        array = np.asarray(values.values, dtype=float)
        if "observer" not in order:
            array = array[None]
        if "repeat" not in order:
            array = array[:, :, None]
    else:
        try:
            array = np.asarray(values, dtype=float)
        except (TypeError, ValueError):
            raise FittingError(f"{name} must be numbers (NaN for missing values)") from None
        if array.ndim == 2:
            array = array[None, :, None]
        elif array.ndim == 3:
            array = array[:, :, None]
        elif array.ndim != 4:
            raise FittingError(f"{name} has shape {array.shape}; give (stimulus, primary), "
                               "(observer, stimulus, primary) or (observer, stimulus, repeat, primary)")
    if array.shape[1] != n_stimuli or array.shape[3] != n_primaries:
        raise FittingError(f"{name} has {array.shape[1]} stimuli x {array.shape[3]} primaries; the data describe "
                           f"{n_stimuli} stimuli x {n_primaries} primaries")
    if np.isinf(array).any():
        raise FittingError(f"{name} holds an infinite value; give finite numbers (NaN for missing values)")
    n = array.shape[0]
    subjects = np.arange(n) if subjects is None else np.asarray(subjects)
    if subjects.shape != (n,) or len(set(subjects.tolist())) != n:
        raise FittingError(f"subjects must be {n} distinct labels, got {subjects.tolist()!r}")
    return array, subjects


def _subject_coords(n: int, subjects, field_size_deg, age_years) -> dict:
    field = _per_subject("field_size_deg", field_size_deg, n, FIELD_RANGE_DEG, unknown_ok=False)
    age = _per_subject("age_years", age_years, n, AGE_RANGE_YEARS, unknown_ok=True)
    return {
        "observer": ("observer", subjects, {"long_name": "subject"}),
        "field_size_deg": ("observer", field, {"units": "degree", "long_name": "visual field size of the matches"}),
        "age_years": ("observer", age, {"units": "year", "long_name": "subject age (NaN = unknown)"}),
    }


def _plan_coords(field_size_deg, age_years) -> dict:
    """Field size and age of the typical subject of a plan (scalar coordinates)."""
    coords = _subject_coords(1, np.arange(1), np.ravel(field_size_deg)[:1], age_years if age_years is None
                             else np.ravel(age_years)[:1])
    return {k: ((), v[1][0], v[2]) for k, v in coords.items() if k != "observer"}


def _primary_labels(labels, count: int) -> list[str]:
    labels = [f"P{i + 1}" for i in range(count)] if labels is None else [str(v) for v in labels]
    if len(labels) != count or len(set(labels)) != count:
        raise FittingError(f"primary labels {labels!r} must be {count} distinct names")
    return labels


def colour_matching_data(amounts=None, *, test_wavelengths, primaries, primary_labels=None, subjects=None,
                         field_size_deg=2.0, age_years=None) -> xr.Dataset:
    """Individual colour-matching functions in metasim's documented layout (module docstring).

    Parameters
    ----------
    amounts : array-like or DataArray, optional
        Amounts of the three primaries matching each unit-energy test light, primary-normalised
        energy units; (stimulus, primary), (observer, stimulus, primary) or (observer, stimulus,
        repeat, primary); NaN = missing. None makes a plan (no observations).
    test_wavelengths : sequence of float
        Wavelength (nm) of each monochromatic test light, 390-830 nm.
    primaries : three wavelengths (nm) or DataArray
        Monochromatic primaries (for example the CIE 1964 / Stiles-Burch 645.16, 526.32, 444.44 nm),
        or spectra (``primary`` × ``wavelength``, non-negative, uniform grid).
    primary_labels, subjects : optional labels
    field_size_deg : float or per subject
        1-10 degrees (default 2).
    age_years : float or per subject, optional
        20-80 years; NaN or None = unknown.

    Returns
    -------
    Dataset
        The matches in the layout of the module docstring (``amounts`` or a plan without
        observations, the test wavelengths, primaries and subject coordinates).

    Examples
    --------
    >>> import metasim
    >>> plan = metasim.colour_matching_data(test_wavelengths=[450, 500, 550, 600], primaries=[645.16, 526.32, 444.44])
    >>> dict(plan.sizes)  # a plan: the stimuli and primaries, no observations yet
    {'primary': 3, 'stimulus': 4}
    """
    test = np.atleast_1d(np.asarray(test_wavelengths, dtype=float))
    monochromatic_weights(test)  # range check
    if test.ndim != 1 or test.size < 1:
        raise FittingError("test_wavelengths must be a list of wavelengths (nm)")
    variables, coords = {}, {}
    if isinstance(primaries, xr.DataArray):
        check_spectra(primaries, where="primary spectra")
        if set(primaries.dims) != {"primary", "wavelength"} or primaries.sizes["primary"] != 3:
            raise FittingError(f"primary spectra need dims (primary, wavelength) with 3 primaries; got {dict(primaries.sizes)}")
        labels = [str(v) for v in primaries["primary"].values] if "primary" in primaries.coords else None
        labels = _primary_labels(primary_labels if primary_labels is not None else labels, 3)
        variables["primary_spectra"] = xr.DataArray(
            primaries.transpose("primary", "wavelength").values, dims=("primary", "wavelength"),
            coords={"wavelength": ("wavelength", primaries["wavelength"].values, dict(WAVELENGTH_ATTRS))},
            attrs={"units": str(primaries.attrs.get("units", RADIANCE_UNITS)),
                   "long_name": "primary spectra (normalised to unit energy in the fit)"})
    else:
        wl = np.asarray(primaries, dtype=float) if not isinstance(primaries, str) else np.array([])
        if wl.shape != (3,):
            raise FittingError(f"primaries={primaries!r}: give three wavelengths (nm) or a DataArray of three spectra")
        monochromatic_weights(wl)
        labels = _primary_labels(primary_labels, 3)
        coords["primary_wavelength"] = ("primary", wl, {"units": "nm", "long_name": "monochromatic primary wavelength"})
    coords["primary"] = ("primary", labels, {"long_name": "matching primary"})
    coords["stimulus"] = ("stimulus", np.arange(test.size), {"long_name": "test light"})
    coords["test_wavelength"] = ("stimulus", test, {"units": "nm", "long_name": "test light wavelength"})
    if amounts is not None:
        array, subjects = _observations(amounts, "amounts", test.size, 3, subjects)
        coords.update(_subject_coords(array.shape[0], subjects, field_size_deg, age_years))
        coords["repeat"] = ("repeat", np.arange(array.shape[2]), {"long_name": "repeated match"})
        variables["amount"] = (("observer", "stimulus", "repeat", "primary"), array, {
            "units": "1", "long_name": "amount of each primary matching a unit-energy test light "
            "(primary-normalised energy units)"})
    else:
        coords.update(_plan_coords(field_size_deg, age_years))
    ds = xr.Dataset(variables, coords=coords, attrs={"matching_data": CMF_FORM, "metasim_version": __version__})
    check_matching_data(ds)
    return ds


def matching_session_data(settings=None, *, references, display, black=None, subjects=None, field_size_deg=2.0,
                          age_years=None) -> xr.Dataset:
    """Matching sessions on a three-primary display in metasim's documented layout (module docstring).

    Parameters
    ----------
    settings : array-like or DataArray, optional
        Linear drive values 0..1 of the display's primaries matching each reference; (stimulus,
        primary), (observer, stimulus, primary) or (observer, stimulus, repeat, primary); NaN =
        missing. None makes a plan.
    references : DataArray
        Reference spectral radiance, (``stimulus`` or ``channel``) × ``wavelength``.
    display : metasim Display or DataArray
        The test display (three primaries, no design dim), or its full-drive primary spectra
        (``primary`` × ``wavelength``), on the references' grid.
    black : DataArray, optional
        Black-level spectral radiance when ``display`` is given as spectra (default 0).

    Returns
    -------
    Dataset
        The sessions in the layout of the module docstring (settings or a plan, references, display
        primaries and subject coordinates).

    Examples
    --------
    >>> import metasim
    >>> from metasim.emitters import gaussian, laser_line
    >>> display = metasim.make_display(laser_line([465, 532, 638], 1.0, name=["B", "G", "R"]))
    >>> plan = metasim.matching_session_data(references=gaussian([480, 560, 600], 20), display=display)
    >>> dict(plan.sizes)
    {'wavelength': 441, 'stimulus': 3, 'primary': 3}
    """
    if not isinstance(references, xr.DataArray):
        raise FittingError(f"references must be a DataArray (stimulus x wavelength), got {type(references).__name__}")
    check_spectra(references, where="reference spectra")
    other = [d for d in references.dims if d != "wavelength"]
    if len(other) != 1:
        raise FittingError(f"reference spectra need dims (stimulus, wavelength); got {references.dims}")
    references = references.rename({other[0]: "stimulus"}) if other[0] != "stimulus" else references
    if hasattr(display, "spectra") and hasattr(display, "black"):
        if display.batch_dims:
            raise FittingError(f"the display has batch dims {display.batch_dims}; give one display")
        spectra, black = display.spectra, display.black
    elif isinstance(display, xr.DataArray):
        spectra = display
    else:
        raise FittingError(f"display must be a metasim Display or primary spectra, got {type(display).__name__}")
    check_spectra(spectra, where="display spectra")
    if set(spectra.dims) != {"primary", "wavelength"}:
        raise FittingError(f"display spectra need dims (primary, wavelength); got {spectra.dims}")
    if spectra.sizes["primary"] != 3:
        raise FittingError(f"a matching session needs a display of exactly 3 adjustable primaries; got "
                           f"{spectra.sizes['primary']}")
    wl = check_wavelengths(references["wavelength"], where="reference spectra", uniform=True)
    if not np.array_equal(spectra["wavelength"].values, wl):
        raise FittingError("display and reference spectra must share one wavelength grid; resample one "
                           "(metasim.spectra.resample)")
    black_values = np.zeros(wl.size) if black is None else np.asarray(black.values if isinstance(black, xr.DataArray)
                                                                       else black, dtype=float)
    if black_values.shape != wl.shape or not np.isfinite(black_values).all() or (black_values < 0).any():
        raise FittingError(f"display black must be {wl.size} finite values >= 0 on the references' grid")
    labels = [str(v) for v in spectra["primary"].values] if "primary" in spectra.coords else None
    labels = _primary_labels(labels, 3)
    stim_labels = references["stimulus"].values if "stimulus" in references.coords else np.arange(references.sizes["stimulus"])
    wl_coord = ("wavelength", wl, dict(WAVELENGTH_ATTRS))
    variables = {
        "reference_spectra": xr.DataArray(references.transpose("stimulus", "wavelength").values, dims=("stimulus", "wavelength"),
                                          coords={"wavelength": wl_coord},
                                          attrs={"units": RADIANCE_UNITS, "long_name": "reference spectral radiance"}),
        "display_spectra": xr.DataArray(spectra.transpose("primary", "wavelength").values, dims=("primary", "wavelength"),
                                        coords={"wavelength": wl_coord},
                                        attrs={"units": RADIANCE_UNITS, "long_name": "test display full-drive spectral radiance"}),
        "display_black": xr.DataArray(black_values, dims=("wavelength",), coords={"wavelength": wl_coord},
                                      attrs={"units": RADIANCE_UNITS, "long_name": "test display black spectral radiance"}),
    }
    coords = {"primary": ("primary", labels, {"long_name": "display primary"}),
              "stimulus": ("stimulus", stim_labels, {"long_name": "reference to match"})}
    if settings is not None:
        array, subjects = _observations(settings, "settings", len(stim_labels), 3, subjects)
        coords.update(_subject_coords(array.shape[0], subjects, field_size_deg, age_years))
        coords["repeat"] = ("repeat", np.arange(array.shape[2]), {"long_name": "repeated match"})
        variables["setting"] = xr.DataArray(array, dims=("observer", "stimulus", "repeat", "primary"),
                                            attrs={"units": "1", "long_name": "linear drive setting of each primary"})
    else:
        coords.update(_plan_coords(field_size_deg, age_years))
    ds = xr.Dataset(variables, coords=coords, attrs={"matching_data": SESSION_FORM, "metasim_version": __version__})
    check_matching_data(ds)
    return ds


def _geometry(ds: xr.Dataset, form: str) -> MatchGeometry:
    if form == CMF_FORM:
        stimuli = monochromatic_weights(ds["test_wavelength"].values)
        if "primary_spectra" in ds:
            spectra = ds["primary_spectra"].transpose("primary", "wavelength")
            grid = check_wavelengths(spectra["wavelength"], where="primary spectra", uniform=True)
            values = spectra.values
            energy = values.sum(axis=1) * (grid[1] - grid[0])
            if (energy <= 0).any():
                raise FittingError(f"primary spectrum {spectra['primary'].values[np.argmin(energy)]} has no energy")
            primaries = spectral_weights(values / energy[:, None], grid)
        elif "primary_wavelength" in ds.coords:
            primaries = monochromatic_weights(ds["primary_wavelength"].values)
        else:
            raise FittingError("colour-matching data without primaries: give the coordinate 'primary_wavelength' "
                               "(nm) or the variable 'primary_spectra' (primary x wavelength)")
        return match_geometry(stimuli, primaries)
    grid = check_wavelengths(ds["wavelength"], where="matching session", uniform=True)
    stimuli = spectral_weights(ds["reference_spectra"].transpose("stimulus", "wavelength").values, grid)
    primaries = spectral_weights(ds["display_spectra"].transpose("primary", "wavelength").values, grid)
    black = spectral_weights(ds["display_black"].values[None], grid)[0] if "display_black" in ds else None
    return match_geometry(stimuli, primaries, black)


def _check_primaries(geometry: MatchGeometry, field: float) -> None:
    condition = primary_condition(geometry, field)
    if not condition < MAX_PRIMARY_CONDITION:
        raise FittingError(f"the primaries are not independent for the mean observer (condition number "
                           f"{condition:.3g}, allowed below {MAX_PRIMARY_CONDITION:g}); give three primaries "
                           "of clearly different colour")


def check_matching_data(ds) -> MatchData:
    """Check a Dataset of either form (module docstring) and reduce it to arrays; FittingError if unusable.

    Parameters
    ----------
    ds : xarray.Dataset
        Colour-matching functions (``amount``: observer, stimulus, repeat, primary) or a matching
        session (``setting``: observer, stimulus, repeat, primary; drives 0..1), or a plan of
        either form (no observations); the form from the attribute ``matching_data`` or, without
        it, from the variable present.

    Returns
    -------
    MatchData
        The form, the match geometry (stimuli and primaries as cone-excitation weights), the
        observations (subject, stimulus, repeat, primary; None for a plan), field sizes (degrees)
        and ages (years, NaN = unknown) per subject, subject, stimulus and primary labels, and
        ``ds`` itself.

    Raises
    ------
    FittingError
        Not a Dataset of either form, a missing coordinate or variable, observations of other dims,
        infinite values, a setting outside 0..1, a subject without valid matches, a field size or
        age outside the CIE 170-1 model (1-10°, 20-80 years), or primaries that are not
        independent for the mean observer.

    References
    ----------
    CIE 170-1:2006 (the observer model the matches are read with; its field-size and age range).

    Examples
    --------
    >>> import metasim
    >>> from metasim.fitting import check_matching_data
    >>> plan = metasim.colour_matching_data(test_wavelengths=[450, 500, 550, 600], primaries=[645.16, 526.32, 444.44])
    >>> data = check_matching_data(plan)
    >>> data.form, data.observations is None, data.primaries
    ('colour-matching functions', True, ['P1', 'P2', 'P3'])
    """
    if not isinstance(ds, xr.Dataset):
        raise FittingError(f"matching data must be an xarray Dataset, got {type(ds).__name__}")
    form = ds.attrs.get("matching_data")
    if form not in FORMS:
        if "amount" in ds:
            form = CMF_FORM
        elif "setting" in ds:
            form = SESSION_FORM
        else:
            raise FittingError(f"the Dataset is not matching data (attribute matching_data={form!r}); allowed: "
                               f"{', '.join(repr(f) for f in FORMS)} with variable 'amount' or 'setting'")
    if form == CMF_FORM and "test_wavelength" not in ds.coords:
        raise FittingError("colour-matching data need the coordinate 'test_wavelength' (stimulus, nm)")
    if form == SESSION_FORM:
        missing = [v for v in ("reference_spectra", "display_spectra") if v not in ds]
        if missing:
            raise FittingError(f"a matching session needs the variable(s) {', '.join(missing)}")
        if ds.sizes.get("primary") != 3:
            raise FittingError(f"a matching session needs exactly 3 display primaries; got {ds.sizes.get('primary')}")
    try:
        geometry = _geometry(ds, form)
    except MetasimError as exc:
        raise FittingError(str(exc)) from None
    name = OBSERVATION[form]
    observations = None
    n = ds.sizes.get("observer", 1)
    if name in ds:
        var = ds[name]
        order = ("observer", "stimulus", "repeat", "primary")
        if set(var.dims) != set(order):
            raise FittingError(f"'{name}' needs dims {order}; got {var.dims}")
        observations = np.asarray(var.transpose(*order).values, dtype=float)
        if np.isinf(observations).any():
            raise FittingError(f"'{name}' holds an infinite value; give finite numbers (NaN for missing values)")
        if form == SESSION_FORM:
            outside = np.isfinite(observations) & ((observations < 0) | (observations > 1))
            if outside.any():
                i, s, r, k = np.argwhere(outside)[0]
                raise FittingError(
                    f"setting {observations[i, s, r, k]:g} of subject {ds['observer'].values[i]}, stimulus "
                    f"{ds['stimulus'].values[s]}, primary {ds['primary'].values[k]} is outside 0..1; drive settings "
                    "are linear drive values 0..1 (decode signal values with the display's transfer function first)")
        empty = ~np.isfinite(observations).any(axis=(1, 2, 3))
        if empty.all():
            raise FittingError(f"every '{name}' value is NaN: there is nothing to fit")
        if empty.any():
            raise FittingError(f"subject {ds['observer'].values[np.argmax(empty)]} has no valid matches (every "
                               f"'{name}' value is NaN); remove the subject or give its matches")
    field = _per_subject("field_size_deg", ds["field_size_deg"].values if "field_size_deg" in ds.coords else 2.0, n,
                         FIELD_RANGE_DEG, unknown_ok=False)
    age = _per_subject("age_years", ds["age_years"].values if "age_years" in ds.coords else None, n,
                       AGE_RANGE_YEARS, unknown_ok=True)
    subjects = ds["observer"].values if "observer" in ds.coords else np.arange(n)
    _check_primaries(geometry, float(np.median(field)))
    return MatchData(form=form, geometry=geometry, observations=observations, field_size_deg=field, age_years=age,
                     subjects=subjects, stimuli=ds["stimulus"].values, primaries=[str(v) for v in ds["primary"].values],
                     dataset=ds)


__all__ = ["CMF_FORM", "SESSION_FORM", "MatchData", "colour_matching_data", "matching_session_data",
           "check_matching_data"]
