"""Individual observers from colour-matching data: :func:`fit_observer`.

For every subject, the eight deviations of the individual observer model (and optionally age) that
make the subject's matches cone-excitation matches (:mod:`metasim.fitting.model`), as a maximum a
posteriori estimate with the population model's spread as a Gaussian prior, all subjects in one
batched Levenberg-Marquardt solve (:mod:`metasim.fitting.solve`), with the diagnostics of
:mod:`metasim.fitting.diagnostics`.

Setting noise model (metasim's own): independent normal errors, one standard deviation σ per
subject, estimated with the fit unless given —

* colour-matching functions: σ is a share of the size of the match, the error of an amount at test
  wavelength λ being σ · Σ_k |amount_k(λ)| of the mean observer (of the subject's age and field);
* matching sessions: σ is in linear drive units (0..1), the same for every setting.

Unknown ages are taken as :data:`ASSUMED_AGE_YEARS` (32, the reference age of CIE 170-1) unless
``fit_age``; with ``fit_age`` every subject's age is a free parameter with the prior
:data:`AGE_PRIOR` (recorded ages are then not used), bounded to 20-80 years.

References
----------
CIE 170-1:2006; Asano, Fairchild & Blondé (2016) PLoS ONE 11, e0145671 (the eight deviations and
their spread); Tarantola (2005) Inverse Problem Theory, SIAM (least squares with a Gaussian prior).
"""

from __future__ import annotations

import json
from functools import lru_cache
from numbers import Real

import numpy as np
import xarray as xr

from metasim._version import __version__
from metasim.errors import FittingError
from metasim.fitting import diagnostics
from metasim.fitting.forms import CMF_FORM, OBSERVATION, MatchData, check_matching_data
from metasim.fitting.model import FIT_INTERPOLATION, predict
from metasim.fitting.solve import solve_map
from metasim.observers.physiological import (AGE_RANGE_YEARS, BASE_WAVELENGTHS, DEVIATIONS, PARAMETER_ATTRS,
                                             physiological_observers)
from metasim.observers.pigments import DEFAULT_PEAK_SHIFT_AXIS, check_peak_shift_axis
from metasim.observers.population import DEFAULT_SD
from metasim.spectra import default_grid

#: Prior of age when it is fitted: mean and SD (years) of ages uniform on 20-80 (60 / √12 = 17.3).
AGE_PRIOR = (50.0, 17.3)
ASSUMED_AGE_YEARS = 32.0
NOISE_DESCRIPTION = {
    CMF_FORM: "SD of an amount as a share of the size of the match (sum of |amounts| of the mean observer)",
    "matching session": "SD of a linear drive setting (0..1)",
}
RESULT_KIND = "metasim observer fit"
#: Categories drawn when none are given: population size, number of categories, seed, ages.
DEFAULT_CATEGORIES = {"size": 1000, "k": 8, "seed": 0, "age_years": (20.0, 80.0), "field_size_deg": 2.0}


def prior_model(prior=None, *, fit_age: bool = False, age_prior=AGE_PRIOR):
    """Parameter names, prior means and SDs of the fit, and a record of them for the result.

    ``prior``: None (the population model's defaults, :data:`metasim.observers.DEFAULT_SD`, mean
    0); a dict {deviation: sd or (mean, sd)} overriding some of them; or a population Dataset from
    :func:`metasim.observer_population`, whose recorded standard deviations are used.

    Parameters
    ----------
    prior : None, dict or xarray.Dataset
        None, {deviation name: SD or (mean, SD)} in the deviation's unit (% or nm; names as
        :data:`metasim.observers.DEVIATIONS`), or a population Dataset.
    fit_age : bool
        Add ``age_years`` as a fitted parameter with the prior ``age_prior``.
    age_prior : tuple of (float, float)
        Mean and SD of age in years (default :data:`AGE_PRIOR`).

    Returns
    -------
    tuple of (list of str, ndarray, ndarray, dict)
        Parameter names; prior means and SDs (parameter,) in each parameter's unit; and a record
        {"source": ..., name: {"mean", "sd"}} for the result's attributes.

    Raises
    ------
    FittingError
        An unknown parameter name, a mean or SD that is not a finite number, an SD ≤ 0, a
        population that records no SDs, or another kind of ``prior``.

    References
    ----------
    Asano, Fairchild & Blondé (2016) PLoS ONE 11, e0145671, doi:10.1371/journal.pone.0145671 (the
    eight deviations and their spread); Tarantola (2005) Inverse Problem Theory, SIAM,
    doi:10.1137/1.9780898717921 (Gaussian prior).

    Examples
    --------
    >>> from metasim.fitting import prior_model
    >>> names, mean, sd, record = prior_model({"lens_density_pct": 10.0}, fit_age=True)
    >>> names[0], names[-1], sd.tolist()
    ('lens_density_pct', 'age_years', [10.0, 36.5, 9.0, 9.0, 7.4, 2.0, 1.5, 1.3, 17.3])
    >>> record["source"]
    'population model defaults, overridden by the given prior'
    """
    means = {name: 0.0 for name in DEVIATIONS}
    sds = dict(DEFAULT_SD)
    source = "population model defaults (Asano, Fairchild & Blondé 2016, SDs from memory)"
    if isinstance(prior, xr.Dataset):
        try:
            recorded = json.loads(prior.attrs["parameters"])
            sds = {name: float(recorded[f"sd_{name}"]) for name in DEVIATIONS}
        except (KeyError, TypeError, ValueError):
            raise FittingError("the prior population records no standard deviations (attribute 'parameters' "
                               "with sd_* values, as metasim.observer_population writes)") from None
        source = "standard deviations recorded in the given population"
    elif isinstance(prior, dict):
        unknown = set(prior) - set(DEVIATIONS)
        if unknown:
            raise FittingError(f"prior names unknown parameter(s) {sorted(unknown)}; allowed: {', '.join(DEVIATIONS)}")
        for name, value in prior.items():
            mean, sd = (value if isinstance(value, (tuple, list)) and len(value) == 2 else (0.0, value))
            means[name], sds[name] = mean, sd
        source = "population model defaults, overridden by the given prior"
    elif prior is not None:
        raise FittingError(f"prior={type(prior).__name__} is not allowed; give None, a dict of SDs or a population Dataset")
    names = list(DEVIATIONS)
    if fit_age:
        means["age_years"], sds["age_years"] = (age_prior if isinstance(age_prior, (tuple, list)) and len(age_prior) == 2
                                                else (None, None))
        names.append("age_years")
    for name in names:
        for what, value in (("mean", means[name]), ("SD", sds[name])):
            if isinstance(value, bool) or not isinstance(value, Real) or not np.isfinite(value):
                raise FittingError(f"prior {what} of {name} = {value!r}; give a finite number")
        if sds[name] <= 0:
            raise FittingError(f"prior SD of {name} = {sds[name]!r}; a prior SD must be > 0")
    mean = np.array([float(means[n]) for n in names])
    sd = np.array([float(sds[n]) for n in names])
    record = {"source": source, **{n: {"mean": float(m), "sd": float(s)} for n, m, s in zip(names, mean, sd)}}
    return names, mean, sd, record


def match_weights(data: MatchData, ages: np.ndarray, fields: np.ndarray, peak_shift_axis: str) -> np.ndarray:
    """Per subject × stimulus weights w (the setting noise of a value is σ / w; module docstring)."""
    n, S = len(fields), data.geometry.n_stimuli
    if data.form != CMF_FORM:
        return np.ones((n, S))
    mean_amounts, _ = predict(data.geometry, np.zeros((n, len(DEVIATIONS))), ages, fields,
                              peak_shift_axis=peak_shift_axis, jacobian=False)
    size = np.abs(mean_amounts).sum(axis=-1)
    return 1.0 / size


@lru_cache(maxsize=2)
def _default_categories(peak_shift_axis: str):
    from metasim.metamerism.categories import observer_categories
    from metasim.observers import observer_population

    spec = DEFAULT_CATEGORIES
    population = observer_population(spec["size"], seed=spec["seed"], age_years=spec["age_years"],
                                     field_size_deg=spec["field_size_deg"], peak_shift_axis=peak_shift_axis,
                                     absorbance_interpolation=FIT_INTERPOLATION)
    return observer_categories(population, spec["k"], seed=spec["seed"])


def _category_table(categories, peak_shift_axis: str):
    if categories is None:
        categories, description = _default_categories(peak_shift_axis), (
            f"{DEFAULT_CATEGORIES['k']} categories of {DEFAULT_CATEGORIES['size']} observers drawn from the population "
            f"model (seed {DEFAULT_CATEGORIES['seed']}, ages 20-80, 2°) by metasim.observer_categories")
    else:
        description = "categories given by the caller"
    needed = ["age_years", *DEVIATIONS]
    if not isinstance(categories, xr.Dataset) or "observer" not in categories.dims or any(
            n not in categories.coords for n in needed):
        raise FittingError("categories must be a Dataset of representative observers (from "
                           "metasim.observer_categories) with age_years and the eight deviations as coordinates")
    table = {n: np.asarray(categories[n].values, dtype=float) for n in needed}
    k = categories.sizes["observer"]
    weight = np.asarray(categories["weight"].values, dtype=float) if "weight" in categories.coords else np.full(k, 1.0 / k)
    return table, weight, description


def _observers(ages, fields, params: dict, wavelengths, peak_shift_axis):
    return physiological_observers(ages, fields, wavelengths=wavelengths, peak_shift_axis=peak_shift_axis,
                                   absorbance_interpolation=FIT_INTERPOLATION, **params)


def _nearest_categories(cmf: np.ndarray, fields: np.ndarray, categories, wavelengths, peak_shift_axis):
    table, weight, description = _category_table(categories, peak_shift_axis)
    index = np.zeros(len(fields), dtype=int)
    distance = np.zeros(len(fields))
    for field in np.unique(fields):  # a handful of field sizes, not subjects
        members = fields == field
        reps = _observers(table["age_years"], field, {n: table[n] for n in DEVIATIONS}, wavelengths, peak_shift_axis)
        index[members], distance[members] = diagnostics.nearest_category(cmf[members], reps["cmf"].values)
    record = [{"weight": float(w), **{n: float(table[n][j]) for n in table}} for j, w in enumerate(weight)]
    return index, distance, {"description": description, "categories": record}


def fit_observer(data, *, prior=None, fit_age: bool = False, age_prior=AGE_PRIOR, setting_noise=None,
                 peak_shift_axis: str = DEFAULT_PEAK_SHIFT_AXIS, categories=None, wavelengths=None,
                 max_iterations: int = 200) -> xr.Dataset:
    """Fit individual CIE 170-1 observers to colour-matching data, one batched MAP solve for all subjects.

    Parameters
    ----------
    data : xarray.Dataset
        Colour-matching functions or matching sessions (:mod:`metasim.fitting.forms`), with
        observations.
    prior : None, dict or population Dataset
        The population spread used as the prior (:func:`prior_model`); default the population
        model's standard deviations, mean 0.
    fit_age : bool
        Also fit each subject's age (prior ``age_prior`` = (mean, SD) years, bounded 20-80).
    setting_noise : float or per subject, optional
        Known setting noise (module docstring for its units); estimated per subject when None.
    peak_shift_axis : str
        ``"log_wavelength"`` (default) or ``"wavelength"``: what a fitted peak shift means
        (:mod:`metasim.observers.pigments`).
    categories : None, Dataset or False
        Representative observers (from :func:`metasim.observer_categories`) to name the nearest of;
        None draws :data:`DEFAULT_CATEGORIES`; False skips.
    wavelengths : optional
        Grid of the fitted observers' functions (default: the session's grid, or 390-830 nm at 1 nm).

    Returns
    -------
    xarray.Dataset
        One ``observer`` per subject with ``lms`` and ``cmf`` of the fitted observer and every
        parameter as a coordinate (usable wherever a population is accepted); ``estimate``,
        ``standard_error``, ``posterior_correlation`` (``parameter`` × ``other_parameter``),
        ``information_share``, ``effect_cosine``, ``identified``, ``identification_note``,
        ``setting_noise``, residuals and match errors for the fitted and the mean observer per
        match (dims ``matching_stimulus``, ``matching_repeat``, ``matching_primary``), the nearest
        category, convergence; attributes record the prior, models and rules.

    References
    ----------
    CIE 170-1:2006; Asano, Fairchild & Blondé (2016); Levenberg (1944); Marquardt (1963).

    Examples
    --------
    >>> import metasim
    >>> from metasim.fitting.synthetic import synthetic_matches
    >>> plan = metasim.colour_matching_data(test_wavelengths=range(420, 680, 20), primaries=[645.16, 526.32, 444.44])
    >>> subjects = metasim.observer_population(2, seed=4, age_years=40)
    >>> fit = metasim.fit_observer(synthetic_matches(plan, subjects, setting_noise=0.002, seed=4), categories=False)
    >>> fit.sizes["observer"], "lms" in fit and "cmf" in fit
    (2, True)
    """
    md = check_matching_data(data)
    check_peak_shift_axis(peak_shift_axis)
    if md.observations is None:
        name = OBSERVATION[md.form]
        raise FittingError(f"the data hold no observations (variable '{name}'); a plan can be judged with "
                           "metasim.fitting.expected_uncertainty, not fitted")
    names, mean, sd, prior_record = prior_model(prior, fit_age=fit_age, age_prior=age_prior)
    n, p = md.observations.shape[0], len(names)
    count = np.isfinite(md.observations).sum(axis=(1, 2, 3))
    short = count < p + 1
    if short.any():
        i = int(np.argmax(short))
        raise FittingError(f"subject {md.subjects[i]} has {count[i]} valid values; fitting {p} parameters and the "
                           f"setting noise needs at least {p + 1}")
    known = np.isfinite(md.age_years)
    ages = np.where(known, md.age_years, ASSUMED_AGE_YEARS)
    fields = md.field_size_deg
    noise = None
    if setting_noise is not None:
        noise = np.broadcast_to(np.asarray(setting_noise, dtype=float), (n,)).copy()
        if not (np.isfinite(noise) & (noise > 0)).all():
            raise FittingError(f"setting_noise={setting_noise!r}; give a number > 0 (or one per subject)")
    weights = match_weights(md, ages, fields, peak_shift_axis)
    geometry = md.geometry

    def model(theta, index):
        return predict(geometry, theta, ages[index], fields[index], fit_age=fit_age, peak_shift_axis=peak_shift_axis)

    lower = np.full(p, -np.inf)
    upper = np.full(p, np.inf)
    if fit_age:
        lower[-1], upper[-1] = AGE_RANGE_YEARS
    solution = solve_map(model, md.observations, weights, mean, sd, noise=noise, lower=lower, upper=upper,
                         max_iterations=max_iterations)
    theta = solution.theta
    fitted_ages = theta[:, -1] if fit_age else ages
    mean_theta = np.broadcast_to(mean, (n, p)).copy()
    mean_prediction, _ = predict(geometry, mean_theta, ages, fields, fit_age=fit_age, peak_shift_axis=peak_shift_axis,
                                 jacobian=False)
    grid = wavelengths
    if grid is None:
        grid = md.dataset["wavelength"].values if md.form != CMF_FORM else default_grid()
    deviations = {name: theta[:, i] for i, name in enumerate(DEVIATIONS)}
    observers = _observers(fitted_ages, fields, deviations, grid, peak_shift_axis)
    mean_ages = mean_theta[:, -1] if fit_age else ages
    mean_deviations = {k: mean_theta[:, i] for i, k in enumerate(DEVIATIONS)}
    error_grid = md.dataset["wavelength"].values if md.form != CMF_FORM else BASE_WAVELENGTHS
    same_grid = np.array_equal(observers["wavelength"].values, error_grid)
    fitted_cmf = (observers if same_grid else _observers(fitted_ages, fields, deviations, error_grid,
                                                         peak_shift_axis))["cmf"].values
    mean_cmf = _observers(mean_ages, fields, mean_deviations, error_grid, peak_shift_axis)["cmf"].values
    errors_fit = diagnostics.match_errors(md, solution.prediction, fitted_cmf)
    errors_mean = diagnostics.match_errors(md, mean_prediction, mean_cmf)
    share, cosine, identified, notes = diagnostics.identification(solution.covariance, solution.data_information, sd,
                                                                  solution.at_bound, names)
    result = _assemble(md, observers, names, sd, mean, solution, share, cosine, identified, notes, mean_prediction,
                       errors_fit, errors_mean, known, weights)
    if categories is not False:
        index, distance, record = _nearest_categories(observers["cmf"].values, fields, categories,
                                                      observers["wavelength"].values, peak_shift_axis)
        result["nearest_category"] = ("observer", index, {"units": "1", "long_name": "nearest observer category "
                                      "(index into the 'categories' attribute, by RMS difference of the XYZ functions)"})
        result["category_distance"] = ("observer", distance, {"units": "1", "long_name": "RMS difference of the XYZ "
                                       "colour-matching functions to the nearest category observer"})
        result.attrs["categories"] = record
    result.attrs.update({
        "result_kind": RESULT_KIND,
        "model": "CIE 170-1:2006 individual observers fitted to colour matches (maximum a posteriori, "
                 "population model as Gaussian prior)",
        "matching_data": md.form,
        "method": "batched Levenberg-Marquardt on stacked analytic Jacobians; standard errors from the "
                  "inverse Gauss-Newton curvature",
        "prior": prior_record,
        "fit_age": int(bool(fit_age)),
        "assumed_age_years": ASSUMED_AGE_YEARS,
        "setting_noise_model": NOISE_DESCRIPTION[md.form],
        "setting_noise_given": int(noise is not None),
        "identification_rules": (f"identified unless: posterior SD >= {diagnostics.PRIOR_DOMINATED_RATIO:g} x population SD "
                                 f"(little information); |cosine| >= {diagnostics.COLLINEARITY_LIMIT:g} between the "
                                 "parameter's and another's noise-weighted effect on the matches (not separable); "
                                 "on a bound (age 20-80)"),
        "match_error": ("CIE 1976 u'v' distance between the observed and the predicted mixture of the primaries, "
                        "as each observer sees them" if md.form == CMF_FORM else
                        "CIE 2000 difference between reference and setting, CIELAB relative to the display white "
                        "as each observer sees it"),
        "seed": "none (deterministic)",
        "metasim_version": __version__,
    })
    return result


def _assemble(md, observers, names, sd, mean, solution, share, cosine, identified, notes, mean_prediction,
              errors_fit, errors_mean, age_known, weights) -> xr.Dataset:
    """The result Dataset (see :func:`fit_observer`)."""
    out = observers.assign_coords(observer=("observer", md.subjects, {"long_name": "subject"}))
    out = out.assign_coords(age_known=("observer", age_known, {"long_name": "age recorded in the data"}))
    units = [PARAMETER_ATTRS[name]["units"] for name in names]
    se = np.sqrt(np.diagonal(solution.covariance, axis1=1, axis2=2))
    corr = diagnostics.correlation(solution.covariance)
    pp = ("observer", "parameter", "other_parameter")
    noise_attrs = {"units": "1", "long_name": "setting noise: " + NOISE_DESCRIPTION[md.form]}
    observed = md.observations
    residual = observed - solution.prediction[:, :, None, :]
    residual_mean = observed - mean_prediction[:, :, None, :]
    match = ("observer", "matching_stimulus", "matching_repeat", "matching_primary")
    variables = {
        "estimate": (("observer", "parameter"), solution.theta, {"units": "see parameter_units",
                                                                 "long_name": "maximum a posteriori estimate"}),
        "standard_error": (("observer", "parameter"), se, {"units": "see parameter_units",
                                                           "long_name": "posterior standard deviation (inverse curvature)"}),
        "prior_mean": ("parameter", mean, {"units": "see parameter_units", "long_name": "population prior mean"}),
        "prior_sd": ("parameter", sd, {"units": "see parameter_units", "long_name": "population prior SD"}),
        "posterior_correlation": (pp, corr, {"units": "1", "long_name": "posterior correlation of the estimates"}),
        "effect_cosine": (pp, cosine, {"units": "1", "long_name": "cosine between two parameters' noise-weighted "
                                       "effects on the matches (the data's own correlation)"}),
        "information_share": (("observer", "parameter"), share, {"units": "1", "long_name":
                              "share of the prior variance removed by the data (1 - posterior var / prior var)"}),
        "identified": (("observer", "parameter"), identified, {"long_name": "the data identify the parameter "
                                                               "(see the attribute identification_rules)"}),
        "identification_note": (("observer", "parameter"), notes, {"long_name": "why a parameter is not identified"}),
        "setting_noise": ("observer", solution.noise, noise_attrs),
        "value_count": ("observer", solution.count.astype(int), {"units": "1", "long_name": "valid values fitted"}),
        "iterations": ("observer", solution.iterations, {"units": "1", "long_name": "solver iterations"}),
        "converged": ("observer", solution.converged, {"long_name": "the solve converged"}),
        "observed": (match, observed, {"units": "1", "long_name": f"observed {OBSERVATION[md.form]}s"}),
        "residual": (match, residual, {"units": "1", "long_name": "observed minus fitted observer's match"}),
        "residual_mean_observer": (match, residual_mean, {"units": "1", "long_name": "observed minus mean observer's match"}),
        "residual_weight": (("observer", "matching_stimulus"), weights, {"units": "1", "long_name":
                            "weight of a residual in the fit (setting noise of a value = setting_noise / weight)"}),
        "match_error": (match[:3], errors_fit, {"units": "1", "long_name": "match error for the fitted observer"}),
        "match_error_mean_observer": (match[:3], errors_mean, {"units": "1", "long_name": "match error for the mean observer"}),
    }
    coords = {
        "parameter": ("parameter", names, {"long_name": "fitted parameter"}),
        "other_parameter": ("other_parameter", names, {"long_name": "fitted parameter"}),
        "parameter_units": ("parameter", units, {"long_name": "units of the parameter"}),
        "matching_stimulus": ("matching_stimulus", md.stimuli, {"long_name": "stimulus of the matching data"}),
        "matching_repeat": ("matching_repeat", np.arange(observed.shape[2]), {"long_name": "repeated match"}),
        "matching_primary": ("matching_primary", md.primaries, {"long_name": "primary of the matching data"}),
    }
    if "test_wavelength" in md.dataset.coords:
        coords["test_wavelength"] = ("matching_stimulus", md.dataset["test_wavelength"].values,
                                     {"units": "nm", "long_name": "test light wavelength"})
    out = out.assign_coords(coords).assign(variables)
    return out


__all__ = ["AGE_PRIOR", "ASSUMED_AGE_YEARS", "DEFAULT_CATEGORIES", "fit_observer", "prior_model", "match_weights"]
