"""Advice before a session: how well would a planned set of matches pin down each parameter?

For a plan (test lights or references and primaries, :mod:`metasim.fitting.forms`), the expected
posterior standard errors are those of the linearised fit at the mean observer: with J the
derivatives of the matches with respect to the parameters (:mod:`metasim.fitting.model`), W the
weights of the noise model times the number of repeats, τ the population SDs and σ the expected
setting noise,

    C = (τ Jᵀ W J τ / σ² + I)⁻¹,   expected SE_p = τ_p · √C_pp,

the Cramér-Rao bound of the linearised problem with the Gaussian prior (Tarantola 2005); for
subjects near the population mean it is what :func:`metasim.fitting.fit_observer` will report.
The identification rules are those of :mod:`metasim.fitting.diagnostics`, so a plan can be changed
until the parameters that matter come out identified.

References
----------
Tarantola, A. (2005) Inverse Problem Theory, SIAM, ch. 3. Fedorov, V. V. (1972) Theory of Optimal
Experiments, Academic Press (design of experiments by the information matrix).
"""

from __future__ import annotations

import numpy as np
import xarray as xr

from metasim._version import __version__
from metasim.errors import FittingError
from metasim.fitting import diagnostics
from metasim.fitting.fit import AGE_PRIOR, NOISE_DESCRIPTION, match_weights, prior_model
from metasim.fitting.forms import check_matching_data
from metasim.fitting.model import predict
from metasim.observers.physiological import AGE_RANGE_YEARS, FIELD_RANGE_DEG, PARAMETER_ATTRS
from metasim.observers.pigments import DEFAULT_PEAK_SHIFT_AXIS, check_peak_shift_axis


def _information(plan, setting_noise, tau, mean, fit_age, age, field, repeats, axis):
    md = check_matching_data(plan)
    if field is None:
        field = float(np.median(md.field_size_deg))
    ages, fields = np.array([age]), np.array([float(field)])
    theta = mean[None].copy()
    if fit_age:
        theta[0, -1] = age  # the typical subject's age, also when age is a fitted parameter
    _, jac = predict(md.geometry, theta, ages, fields, fit_age=fit_age, peak_shift_axis=axis)
    weights = match_weights(md, ages, fields, axis)[0]  # (S,)
    jz = jac[0] * tau[:, None, None]  # (p, S, 3)
    info = np.einsum("psk,qsk->pq", jz * (repeats * weights**2)[None, :, None], jz) / setting_noise**2
    return info, md


def expected_uncertainty(plans, *, setting_noise: float, prior=None, fit_age: bool = False, age_prior=AGE_PRIOR,
                         age_years: float = 32.0, field_size_deg: float | None = None, repeats: int = 1,
                         peak_shift_axis: str = DEFAULT_PEAK_SHIFT_AXIS) -> xr.Dataset:
    """Expected standard errors of the fitted parameters for one or more planned sessions.

    Parameters
    ----------
    plans : Dataset or dict of Datasets
        A plan of either form (observations, if any, are ignored), or {name: plan} to compare
        several (dim ``plan``).
    setting_noise : float
        Expected setting noise, in the units of the fit's noise model (:mod:`metasim.fitting.fit`).
    prior, fit_age, age_prior, peak_shift_axis
        As in :func:`metasim.fitting.fit_observer`.
    age_years, field_size_deg : float
        The typical subject (field default: the plan's, else 2°).
    repeats : int
        Matches per stimulus.

    Returns
    -------
    xarray.Dataset
        Over ``plan`` × ``parameter``: ``expected_standard_error``, ``prior_sd``, ``information_share``,
        ``identified``, ``identification_note``; ``posterior_correlation`` and ``effect_cosine``
        over ``plan`` × ``parameter`` × ``other_parameter``.

    Examples
    --------
    >>> import metasim
    >>> plan = metasim.colour_matching_data(test_wavelengths=range(420, 680, 20), primaries=[645.16, 526.32, 444.44])
    >>> advice = metasim.expected_uncertainty(plan, setting_noise=0.01)
    >>> list(advice.parameter.values)[:3], advice["expected_standard_error"].sizes["parameter"]
    (['lens_density_pct', 'macular_density_pct', 'l_density_pct'], 8)
    """
    check_peak_shift_axis(peak_shift_axis)
    if not (isinstance(setting_noise, (int, float)) and np.isfinite(setting_noise) and setting_noise > 0):
        raise FittingError(f"setting_noise={setting_noise!r}; give the expected setting noise, a number > 0")
    if isinstance(repeats, bool) or not isinstance(repeats, (int, np.integer)) or repeats < 1:
        raise FittingError(f"repeats={repeats!r}; give an integer >= 1")
    if not AGE_RANGE_YEARS[0] <= age_years <= AGE_RANGE_YEARS[1]:
        raise FittingError(f"age_years={age_years!r} is outside the CIE 170-1 model; allowed: 20-80")
    if field_size_deg is not None and not FIELD_RANGE_DEG[0] <= field_size_deg <= FIELD_RANGE_DEG[1]:
        raise FittingError(f"field_size_deg={field_size_deg!r} is outside the CIE 170-1 model; allowed: 1-10")
    single = isinstance(plans, xr.Dataset)
    plans = {"plan": plans} if single else plans
    if not isinstance(plans, dict) or not plans:
        raise FittingError("plans must be a matching-data Dataset or a non-empty dict of them")
    names, mean, tau, record = prior_model(prior, fit_age=fit_age, age_prior=age_prior)
    infos, forms = [], []
    for plan in plans.values():
        info, md = _information(plan, float(setting_noise), tau, mean, fit_age, float(age_years), field_size_deg,
                                int(repeats), peak_shift_axis)
        infos.append(info)
        forms.append(md.form)
    info = np.stack(infos)
    covariance = np.linalg.inv(info + np.eye(len(names))) * tau[None, :, None] * tau[None, None, :]
    at_bound = np.zeros((len(plans), len(names)), dtype=bool)
    share, cosine, identified, notes = diagnostics.identification(covariance, info, tau, at_bound, names)
    pp = ("plan", "parameter", "other_parameter")
    units = [PARAMETER_ATTRS[n]["units"] for n in names]
    out = xr.Dataset(
        {
            "expected_standard_error": (("plan", "parameter"), np.sqrt(np.diagonal(covariance, axis1=1, axis2=2)),
                                        {"units": "see parameter_units", "long_name": "expected posterior SD"}),
            "prior_sd": ("parameter", tau, {"units": "see parameter_units", "long_name": "population prior SD"}),
            "information_share": (("plan", "parameter"), share, {"units": "1", "long_name":
                                  "expected share of the prior variance removed by the data"}),
            "identified": (("plan", "parameter"), identified, {"long_name": "expected to be identified"}),
            "identification_note": (("plan", "parameter"), notes, {"long_name": "why a parameter would not be identified"}),
            "posterior_correlation": (pp, diagnostics.correlation(covariance), {"units": "1",
                                      "long_name": "expected posterior correlation"}),
            "effect_cosine": (pp, cosine, {"units": "1", "long_name": "cosine between two parameters' effects on the matches"}),
        },
        coords={"plan": ("plan", list(plans), {"long_name": "planned session"}),
                "parameter": ("parameter", names), "other_parameter": ("other_parameter", names),
                "parameter_units": ("parameter", units),
                "matching_data": ("plan", forms, {"long_name": "form of the plan"})},
        attrs={"model": "expected posterior SD of the linearised MAP fit at the mean observer", "prior": record,
               "setting_noise": float(setting_noise), "setting_noise_model": {f: NOISE_DESCRIPTION[f] for f in set(forms)},
               "age_years": float(age_years), "repeats": int(repeats), "peak_shift_axis": peak_shift_axis,
               "fit_age": int(bool(fit_age)), "metasim_version": __version__})
    return out.isel(plan=0) if single else out


__all__ = ["expected_uncertainty"]
