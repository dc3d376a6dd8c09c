"""The observer-fit page of a report (results of :func:`metasim.fit_observer`): the data and setting noise, estimates
against the population spread, parameters the data did not identify, match errors before and after,
a table per subject, the categories and the models."""

from __future__ import annotations

from collections import Counter

import numpy as np
import xarray as xr

from metasim.report.html import _attribute_list, _e, _num, _pct, _table
from metasim.report.labels import key_label, label

MAX_SUBJECT_ROWS = 60
FIT_CAUTION = ("Estimates describe the model observer (CIE 170-1:2006 with eight deviations) that best explains "
               "the matches given the population prior, not a measurement of anyone's eye; parameters marked "
               "not identified are mostly the prior, and a fitted peak shift is a shift along the recorded "
               "axis of the peak shifts.")


def is_fit(ds: xr.Dataset) -> bool:
    """Whether ``ds`` is an observer fit."""
    return ds.attrs.get("result_kind") == "metasim observer fit" or ("standard_error" in ds and "setting_noise" in ds)


def _typical(values: np.ndarray) -> np.ndarray:
    """Median match error of each subject (over stimuli and repeats)."""
    flat = values.reshape(values.shape[0], -1)
    with np.errstate(all="ignore"):
        return np.nanmedian(flat, axis=1)


def _short(name: str) -> str:
    """A parameter key as a reader reads it: ``"l_shift_nm"`` → ``"L-cone shift (nm)"``."""
    return key_label(str(name))


def _readable(text: str, names) -> str:
    """A note with the parameter keys it names replaced by their labels."""
    text = str(text)
    for name in sorted(map(str, names), key=len, reverse=True):
        text = text.replace(name, _short(name))
    return text


def _unit(ds) -> str:
    return "CIE 2000 units" if ds.attrs.get("matching_data") == "matching session" else "Δu'v'"


def fit_data_table(ds: xr.Dataset) -> str:
    """What the fit worked from and how noisy the settings were: the numbers the answer box above does
    not already say (subjects, convergence, match errors and identification are said there once)."""
    n = ds.sizes["observer"]
    noise = ds["setting_noise"].values
    rows = [
        ["matching data", f"{ds.attrs.get('matching_data', '')}: {ds.sizes['matching_stimulus']} stimuli × "
                          f"{ds.sizes['matching_repeat']} repeat(s), {int(np.median(ds['value_count']))} values per "
                          "subject (median)"],
        ["setting noise (median, range)", f"{noise.mean() if n == 1 else np.median(noise):.3g} "
                                          f"({noise.min():.3g}–{noise.max():.3g}); {ds['setting_noise'].attrs.get('long_name', '')}"],
        ["axis of the peak shifts", label(ds.attrs.get("peak_shift_axis", ""))],
    ]
    return "<h2>Data and setting noise</h2>" + _table(["quantity", "value"], rows)


def fit_parameter_table(ds: xr.Dataset) -> str:
    rows = []
    names = [str(v) for v in ds["parameter"].values]
    for name in ds["parameter"].values:
        sel = ds.sel(parameter=name)
        notes = Counter(part.split(" (")[0].split(":")[0] for note in sel["identification_note"].values
                        for part in str(note).split("; ") if part)
        common = "; ".join(f"{_readable(text, names)} ({count})" for text, count in notes.most_common(2))
        rows.append([_short(name), _num(sel["prior_sd"], 3),
                     _num(np.median(sel["estimate"].values), 3), _num(np.median(sel["standard_error"].values), 3),
                     _pct(np.median(sel["standard_error"].values) / float(sel["prior_sd"])),
                     _pct(sel["identified"].values.astype(bool).mean()), common])
    rule = _e(ds.attrs.get("identification_rules", ""))
    return ("<h2>Parameters</h2><p>Standard errors are posterior standard deviations from the curvature at the "
            f"estimate. Rule: {rule}.</p>"
            + _table(["parameter", "population SD", "median estimate", "median SE", "SE / population SD",
                      "identified", "most common reasons (subjects)"], rows))


def fit_subject_table(ds: xr.Dataset) -> str:
    n = ds.sizes["observer"]
    names = [str(v) for v in ds["parameter"].values]
    before, after = _typical(ds["match_error_mean_observer"].values), _typical(ds["match_error"].values)
    rows = []
    for i in range(min(n, MAX_SUBJECT_ROWS)):
        sub = ds.isel(observer=i)
        missing = [names[j] for j, ok in enumerate(sub["identified"].values.astype(bool)) if not ok]
        estimates = ", ".join(f"{_short(names[j])} "
                              f"{float(sub['estimate'].values[j]):+.3g} ± {float(sub['standard_error'].values[j]):.2g}"
                              for j in range(len(names)))
        category = str(int(sub["nearest_category"])) if "nearest_category" in ds else "–"
        rows.append([str(sub["observer"].values), _num(sub["age_years"], 1), _num(sub["field_size_deg"], 1),
                     f"{float(sub['setting_noise']):.3g}", f"{before[i]:.3g} → {after[i]:.3g}", category,
                     ", ".join(_short(m) for m in missing) or "–", estimates])
    more = f" (first {MAX_SUBJECT_ROWS} of {n})" if n > MAX_SUBJECT_ROWS else ""
    table = _table(["subject", "age (years)", "field (°)", "setting noise", f"median match error ({_unit(ds)})",
                    "nearest category", "not identified", "estimates ± SE"], rows)
    return f"<details><summary>Subjects{more}</summary>{table}</details>"


def fit_categories(ds: xr.Dataset) -> str:
    record = ds.attrs.get("categories")
    if not isinstance(record, dict) or "nearest_category" not in ds:
        return ""
    counts = np.bincount(ds["nearest_category"].values.astype(int), minlength=len(record["categories"]))
    rows = []
    for j, cat in enumerate(record["categories"]):
        rows.append([str(j), _pct(cat["weight"]), _num(cat["age_years"], 0),
                     ", ".join(f"{_short(k)} {v:+.2g}" for k, v in cat.items() if k not in ("weight", "age_years")),
                     str(counts[j])])
    return ("<h2>Nearest observer category</h2><p>" + _e(record.get("description", "")) + "; nearness: RMS difference "
            "of the XYZ colour-matching functions, each category observer evaluated at the subject's field size.</p>"
            + _table(["category", "share of population", "age (years)", "deviations", "subjects nearest"], rows))


def _prior_table(prior) -> str:
    """The population prior as a table: each parameter's mean and standard deviation, and its source."""
    from metasim.report.labels import parsed

    prior = parsed(prior)
    if not isinstance(prior, dict):
        return ""
    rows = [[_short(name), _num(value.get("mean", np.nan), 3), _num(value.get("sd", np.nan), 3)]
            for name, value in prior.items() if isinstance(value, dict)]
    source = f"<p>Source: {_e(prior['source'])}.</p>" if prior.get("source") else ""
    return ("<h3>Prior: the population spread the fit starts from</h3>" + source
            + _table(["parameter", "population mean", "population standard deviation"], rows))


def fit_models(ds: xr.Dataset) -> str:
    attrs = {k: v for k, v in ds.attrs.items() if k not in ("categories", "prior")}
    return "<h2>Models and parameters</h2>" + _attribute_list(attrs) + _prior_table(ds.attrs.get("prior"))


__all__ = ["is_fit", "fit_data_table", "fit_parameter_table", "fit_subject_table", "fit_categories", "fit_models"]
