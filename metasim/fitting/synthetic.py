"""Synthetic matching data: the matches known observers would make, with setting noise.

For tests, benchmarks, demos and for trying a session plan before running it. The matches are
those of :mod:`metasim.fitting.model` (exact cone-excitation matches of each observer), plus
independent normal setting noise following the fit's noise model (:mod:`metasim.fitting.fit`):
for colour-matching functions σ times the size of the mean observer's match at that wavelength,
for matching sessions σ in drive units, settings then clipped to 0..1 (the number clipped is
recorded in the attribute ``clipped_settings``). The true parameters are kept as ``true_*``
coordinates of ``observer``.
"""

from __future__ import annotations

import numpy as np
import xarray as xr

from metasim.checks import number, seed_attributes, seed_generator, whole_number
from metasim.errors import FittingError
from metasim.fitting.fit import match_weights
from metasim.fitting.forms import CMF_FORM, OBSERVATION, check_matching_data
from metasim.fitting.model import predict
from metasim.observers.physiological import DEVIATIONS, PARAMETER_ATTRS
from metasim.observers.pigments import DEFAULT_PEAK_SHIFT_AXIS, check_peak_shift_axis


def synthetic_matches(plan: xr.Dataset, observers, *, setting_noise: float, seed, repeats: int = 1,
                      record_ages: bool = True, peak_shift_axis: str | None = None) -> xr.Dataset:
    """Matching data of ``observers`` for the stimuli and primaries of ``plan`` (either form).

    Parameters
    ----------
    plan : xarray.Dataset
        Colour-matching functions or a matching session (:mod:`metasim.fitting.forms`); its
        observations, if any, are replaced.
    observers : Dataset or dict
        A population (from :func:`metasim.observer_population`) or a dict of equal-length arrays,
        with ``age_years``, ``field_size_deg`` and any of the eight deviations (missing ones 0).
    setting_noise : float
        σ of the noise model (module docstring), >= 0.
    seed : int or numpy.random.Generator
        Source of the noise.
    repeats : int
        Matches per stimulus and subject.
    record_ages : bool
        Write the true ages into the data (False: ages unknown, NaN).
    peak_shift_axis : str, optional
        Default: the population's recorded axis, else ``"log_wavelength"``.

    Returns
    -------
    xarray.Dataset
        ``plan`` with ``amount`` (colour-matching functions, primary-normalised energy units) or
        ``setting`` (matching session, linear drive 0..1) of dims (observer, stimulus, repeat,
        primary); coordinates ``field_size_deg``, ``age_years`` and the true parameters
        ``true_*`` per observer; attributes ``seed``, ``synthetic``, ``peak_shift_axis`` and
        ``clipped_settings``.

    Raises
    ------
    FittingError
        ``plan`` not matching data, observers without ``age_years`` and ``field_size_deg``, a
        negative noise, ``repeats`` not a whole number ≥ 1, or a seed not allowed.
    ObserverError
        An unknown ``peak_shift_axis``.

    References
    ----------
    CIE 170-1:2006 (cone fundamentals of each observer); Asano, Fairchild & Blondé (2016) PLoS ONE
    11, e0145671, doi:10.1371/journal.pone.0145671 (the eight deviations).

    Examples
    --------
    >>> import metasim
    >>> from metasim.fitting import synthetic_matches
    >>> plan = metasim.colour_matching_data(test_wavelengths=[450, 500, 550, 600], primaries=[645.16, 526.32, 444.44])
    >>> data = synthetic_matches(plan, metasim.observer_population(2, seed=4, age_years=40), setting_noise=0.01, seed=1)
    >>> data["amount"].dims, data.attrs["seed"]
    (('observer', 'stimulus', 'repeat', 'primary'), 1)
    >>> data["amount"].isel(observer=0, repeat=0).round(3).values.tolist()  # test wavelength × primary
    [[-0.015, 0.02, 0.903], [-0.236, 0.37, 0.114], [0.87, 1.123, -0.014], [2.977, 0.313, 0.011]]
    """
    md = check_matching_data(plan)
    source = observers.coords if isinstance(observers, xr.Dataset) else observers
    if not hasattr(source, "keys") or "age_years" not in source or "field_size_deg" not in source:
        raise FittingError("observers must be a population Dataset or a dict with age_years, field_size_deg and deviations")
    ages = np.atleast_1d(np.asarray(source["age_years"], dtype=float))
    n = ages.size
    fields = np.broadcast_to(np.asarray(source["field_size_deg"], dtype=float), (n,)).copy()
    params = np.stack([np.broadcast_to(np.asarray(source[k], dtype=float) if k in source else 0.0, (n,))
                       for k in DEVIATIONS], axis=1)
    if peak_shift_axis is None:
        peak_shift_axis = (observers.attrs.get("peak_shift_axis", DEFAULT_PEAK_SHIFT_AXIS)
                           if isinstance(observers, xr.Dataset) else DEFAULT_PEAK_SHIFT_AXIS)
    check_peak_shift_axis(peak_shift_axis)
    whole_number(repeats, "repeats", error=FittingError, minimum=1)
    number(setting_noise, "setting_noise", error=FittingError, minimum=0.0)
    rng, recorded_seed = seed_generator(seed, error=FittingError)
    seed_attrs = seed_attributes(rng, recorded_seed)
    truth, _ = predict(md.geometry, params, ages, fields, peak_shift_axis=peak_shift_axis, jacobian=False)
    scale = 1.0 / match_weights(md, ages, fields, peak_shift_axis)  # (n, S)
    noise = rng.normal(size=(n, truth.shape[1], int(repeats), 3)) * (setting_noise * scale)[:, :, None, None]
    values = truth[:, :, None, :] + noise
    clipped = 0
    if md.form != CMF_FORM:
        clipped = int(((values < 0) | (values > 1)).sum())
        values = np.clip(values, 0.0, 1.0)
    ds = md.dataset.drop_vars([v for v in (OBSERVATION[md.form],) if v in md.dataset])
    ds = ds.drop_dims([d for d in ("observer", "repeat") if d in ds.dims])
    subjects = np.arange(n)
    ds = ds.assign_coords(
        observer=("observer", subjects, {"long_name": "subject"}),
        repeat=("repeat", np.arange(int(repeats)), {"long_name": "repeated match"}),
        field_size_deg=("observer", fields, {"units": "degree", "long_name": "visual field size of the matches"}),
        age_years=("observer", ages if record_ages else np.full(n, np.nan),
                   {"units": "year", "long_name": "subject age (NaN = unknown)"}),
        **{f"true_{k}": ("observer", params[:, i], {**PARAMETER_ATTRS[k], "long_name": "true " + PARAMETER_ATTRS[k]["long_name"]})
           for i, k in enumerate(DEVIATIONS)},
        true_age_years=("observer", ages, {"units": "year", "long_name": "true age"}),
    )
    name = OBSERVATION[md.form]
    ds[name] = (("observer", "stimulus", "repeat", "primary"), values, {
        "units": "1", "long_name": "synthetic " + ("amount" if md.form == CMF_FORM else "linear drive setting")})
    ds.attrs.update({**seed_attrs, "synthetic": f"matches of known observers with setting noise {setting_noise:g}",
                     "peak_shift_axis": peak_shift_axis, "clipped_settings": clipped})
    return ds


__all__ = ["synthetic_matches"]
