"""A self-contained HTML report of any metasim result file.

The page embeds its figures as base64 PNG (``data:image/png;base64,...``), uses no script, font or
style sheet from anywhere else, and so opens in a browser with no network. It shows what the result
holds, section by section:

* a study result (:func:`metasim.run_study`; the layout documented in :mod:`metasim.study`):
  headline mismatch numbers per design, gamut table, the five figures of :mod:`metasim.plots`,
  age-band and per-stimulus tables, calibration-observer ranking and white-point offsets when
  present;
* a mismatch Dataset straight from :func:`metasim.mismatch` (one design: :func:`metasim.study.as_study`);
* an observer population or category file (:func:`metasim.observer_population`): ages, parameters
  and the spread of the colour-matching functions;
* an observer fit (:func:`metasim.fit_observer`): estimates against the population spread, the
  parameters the data did not identify, match errors before and after, subjects, categories
  (:mod:`metasim.report.fitting`);
* what an extra primary buys (:func:`metasim.sweep.extra_primary_value`): gamut and population
  mismatch gain per candidate wavelength, two panels side by side (:mod:`metasim.report.extra`);
* a combined sweep (``STORE/sweep.nc`` of :func:`metasim.sweep.run_sweep`): the best design, the
  sweep figure (:func:`metasim.plots.sweep_figure`), the ten best designs, the Pareto front over
  the result's objectives with a table of its designs (:mod:`metasim.report.pareto`), the stimuli
  hardest for the best design (sweeps with per-stimulus summaries) and the sweep spec
  (:mod:`metasim.report.sweep`).

Every report lists the models and parameters recorded in the file's attributes and the cautions.
"""

from __future__ import annotations

from pathlib import Path

import numpy as np
import xarray as xr

from metasim import plots
from metasim._version import __version__
from metasim.errors import OutputError, ReportError
from metasim.io import check_outputs, write_bytes, write_text
from metasim.progress import current
from metasim.report.html import (CAUTIONS, REFERENCE_NAMES, STYLE, _attribute_list, _e, _image, _num, _pct,
                                 _table)
from metasim.report.answer import (answer_box, cautions_section, extra_sentences, fit_sentences, population_sentences,
                                   study_sentences, sweep_sentences)
from metasim.report.labels import label, parsed
from metasim.report.fitting import (fit_categories, fit_data_table, fit_models, fit_parameter_table, fit_subject_table,
                                    is_fit)
from metasim.report.extra import extra_value_page, is_extra_value
from metasim.report.pareto import pareto_caption, pareto_section, with_pareto_ranks
from metasim.report.search import is_search, search_section
from metasim.report.sweep import _sweep_best, _sweep_headline, _sweep_models, _sweep_stimuli
from metasim.statistics import population_statistics
from metasim.statistics.headline import share_with_interval, with_interval
from metasim.study import RESULT_KIND, as_study, study_headlines


def is_sweep(ds: xr.Dataset) -> bool:
    """Whether ``ds`` is a sweep's per-design summaries (combined ``sweep.nc`` or one chunk file).

    Parameters
    ----------
    ds : xarray.Dataset
        Any result.

    Returns
    -------
    bool
        True for a Dataset with ``delta_e_2000_overall`` over ``design``, no per-pair
        ``delta_e_2000`` and a sweep's ``result_kind`` (``"metasim sweep"``) or ``spec_hash``
        attribute.

    Examples
    --------
    >>> import xarray as xr
    >>> overall = xr.DataArray([[0.7, 1.9]], dims=("design", "statistic"))
    >>> is_sweep(xr.Dataset({"delta_e_2000_overall": overall}, attrs={"result_kind": "metasim sweep"}))
    True
    >>> is_sweep(xr.Dataset({"delta_e_2000_overall": overall}, attrs={"result_kind": "metasim study"}))
    False
    """
    return ("delta_e_2000_overall" in ds and "design" in ds.dims and "delta_e_2000" not in ds
            and (ds.attrs.get("result_kind") == "metasim sweep" or "spec_hash" in ds.attrs))


def report_kind(ds: xr.Dataset) -> str:
    """What a result file holds for a report: "study", "sweep", "population", "fit" or "extra"
    (:class:`~metasim.errors.ReportError` if none); a plain mismatch result is a "study".

    Parameters
    ----------
    ds : xarray.Dataset
        Any result.

    Returns
    -------
    str
        One of ``"extra"``, ``"fit"``, ``"sweep"``, ``"study"``, ``"population"`` (the keys of
        :data:`FIGURE_NAMES`).

    Raises
    ------
    ReportError
        The Dataset holds none of these.

    Examples
    --------
    >>> import metasim, xarray as xr
    >>> report_kind(metasim.observer_population(3, seed=1))
    'population'
    >>> report_kind(xr.Dataset({"delta_e_2000": (("observer", "stimulus"), [[0.4, 1.2]])}))
    'study'
    >>> report_kind(xr.Dataset())
    Traceback (most recent call last):
        ...
    metasim.errors.ReportError: the file holds no metasim results this report can show (need a study, a mismatch result, ...)
    """
    return _kind(ds)


def _kind(ds: xr.Dataset) -> str:
    if is_extra_value(ds):
        return "extra"
    if is_fit(ds):
        return "fit"
    if is_sweep(ds):
        return "sweep"
    if ds.attrs.get("result_kind") == RESULT_KIND or "delta_e_2000" in ds or "gamut_polygon" in ds:
        return "study"
    if "cmf" in ds and "observer" in ds.dims:
        return "population"
    raise ReportError("the file holds no metasim results this report can show (need a study, a mismatch "
                      "result, a sweep, an observer population or an observer fit)")


# -- figures ---------------------------------------------------------------------------------------------

def _primary_peaks(ds: xr.Dataset, base: bool = True) -> dict:
    """Peak wavelength of each primary in (``base``) or beyond (not ``base``) a design's extra-primary
    base, per design: {design: [peaks]} for the base, {design: {label: peak}} beyond it."""
    out = {}
    if "spectra" not in ds or "design" not in ds.dims:
        return out
    for name in ds["design"].values:
        if name not in ds["display"].values:
            continue
        spectra = ds["spectra"].sel(display=name).transpose("primary", "wavelength")
        labels = [str(v) for v in ds["primary_label"].sel(display=name).values]
        members = str(ds["extra_base"].sel(design=name).values).split(", ") if "extra_base" in ds else labels
        wl = spectra["wavelength"].values
        peaks = {lab: float(wl[int(np.nanargmax(spectra.values[i]))]) for i, lab in enumerate(labels) if lab}
        if base:
            out[str(name)] = [peak for lab, peak in peaks.items() if lab in members]
        else:
            out[str(name)] = {lab: peak for lab, peak in peaks.items() if lab not in members}
    return out


def _describe_primary(table: dict) -> str:
    """What a primary of a design spec is, in words: "laser line 639 nm", "backlight through a
    610-710 nm filter"."""
    kind = table.get("kind", table.get("type"))

    def nm(key):
        value = table.get(key)
        return f"{value:g}" if isinstance(value, (int, float)) else "?"

    if kind == "laser":
        return f"laser line {nm('peak_nm')} nm"
    if kind == "filter":
        centre, width = table.get("centre_nm"), table.get("passband_nm", table.get("width_nm"))
        if isinstance(centre, (int, float)) and isinstance(width, (int, float)):
            return f"backlight through a {centre - width / 2:g}-{centre + width / 2:g} nm filter"
        return "backlight through a filter"
    return {"gaussian": "Gaussian band", "led": "LED", "quantum_dot": "quantum dot",
            "measured": "measured spectrum"}.get(kind, str(kind or "primary"))


def primary_descriptions(ds: xr.Dataset) -> dict:
    """{display: {primary label: words}} from the design specs a result keeps (``display_specs``);
    empty for displays without a spec."""
    import tomllib

    specs = parsed(ds.attrs.get("display_specs", {}))
    out = {}
    for name, text in (specs.items() if isinstance(specs, dict) else []):
        try:
            spec = tomllib.loads(str(text))
        except tomllib.TOMLDecodeError:
            continue
        tables = spec.get("primary") if isinstance(spec.get("primary"), list) else []
        out[str(name)] = {str(t.get("label")): _describe_primary(t) for t in tables if isinstance(t, dict)}
    return out


def figure_builders(ds: xr.Dataset) -> dict:
    """The figures a result supports, by file stem, not drawn yet: {name: (function, caption)};
    calling the function draws the Figure.

    Parameters
    ----------
    ds : xarray.Dataset
        A result of any :func:`report_kind` (a plain mismatch result is read as a one-design study).

    Returns
    -------
    dict
        File stem (:data:`FIGURE_NAMES`) → (function of no arguments returning a
        :class:`matplotlib.figure.Figure`, caption), only for the figures the result has the
        variables for.

    Raises
    ------
    ReportError
        The result is of no kind a report shows (:func:`report_kind`).

    Examples
    --------
    >>> import metasim
    >>> builders = figure_builders(metasim.observer_population(3, seed=1))
    >>> list(builders), builders["observers"][1]
    (['observers'], 'Ages and colour-matching functions of the observers.')
    """
    if _kind(ds) == "extra":
        return {"extra_primary_value": (lambda: plots.extra_primary_value_figure(ds), "Left: gamut added by one more "
                                        "primary at each candidate peak wavelength; right: the population's 95th "
                                        "percentile CIE 2000 difference saved when the extra primary serves the "
                                        "population.")}
    ds = as_study(ds)
    figures = {}
    if _kind(ds) == "sweep":
        varied = plots.sweep_parameters(ds)[0]
        what = {1: "against the varied parameter, with the BT.2020 coverage of each design",
                2: "over the two varied parameters (the best design outlined)"}.get(
            len(varied), "for every design, sorted (the best design starred)")
        if not is_search(ds):  # a search's designs scatter over continuous ranges: no grid to draw
            figures["sweep"] = (lambda: plots.sweep_figure(ds), "95th percentile (and median) CIE 2000 difference "
                                f"over all observer × stimulus pairs, per design, {what}.")
        else:
            figures["search"] = (lambda: plots.search_convergence(ds), "Value the search minimises, for every design "
                                 "of each generation, and the best found so far.")
        ranked = with_pareto_ranks(ds)
        if "pareto_rank" in ranked:
            figures["pareto"] = (lambda: plots.result_pareto_figure(ranked), pareto_caption(ranked))
        return figures
    if _kind(ds) == "fit":
        figures["fit_parameters"] = (lambda: plots.fit_parameters(ds), "Each parameter's estimates against the "
                                     "population spread used as the prior: up to 30 subjects one row each with ± 2 "
                                     "standard errors (grey: not identified by the data), more as a histogram.")
        figures["fit_residuals"] = (lambda: plots.fit_residuals(ds), "Match errors of the mean observer (before) and of "
                                    "each subject's fitted observer (after).")
        return figures
    if _kind(ds) == "population":
        figures["observers"] = (lambda: plots.observer_spread(ds), "Ages and colour-matching functions of the observers.")
        return figures
    if "gamut_polygon" in ds:
        references = ([str(r) for r in ds["reference_gamut"].values] if "reference_gamut" in ds.coords
                      else ["bt709", "bt2020"])
        figures["chromaticity"] = (lambda: plots.chromaticity_diagram(ds["gamut_polygon"], ds.get("primary_xy"),
                                                                      ds.get("white_xy"), references=references),
                                   "Gamut of each display in the CIE 1931 xy diagram, with the outlines of the "
                                   f"reference gamuts ({', '.join(label(r) for r in references)}).")
    if "spectra" in ds and "display" in ds["spectra"].dims:
        figures["spectra"] = (lambda: plots.primary_spectra(ds["spectra"], ds.get("primary_label"), ds.get("primary_xy"),
                                                            primary_descriptions(ds)),
                              "Spectral radiance of every primary at full drive after white calibration.")
    if "delta_e_2000" in ds and "age_years" in ds["delta_e_2000"].coords:
        bands = list(ds["age_band"].values) if "age_band" in ds.coords else None
        figures["age_bands"] = (lambda: plots.delta_e_by_age(ds["delta_e_2000"], bands),
                                "CIE 2000 differences between reference and design, all stimuli pooled, by viewer age band.")
    if "delta_e_2000_by_stimulus" in ds:
        figures["p95_by_stimulus"] = (lambda: plots.p95_by_stimulus(ds["delta_e_2000_by_stimulus"]),
                                      "95th percentile of the population's CIE 2000 difference, per stimulus.")
    if "area_gain_share" in ds:
        figures["extra_primary"] = (lambda: plots.extra_primary_gain(ds["area_gain_share"], ds.get("volume_gain_share"),
                                                                     _primary_peaks(ds), _primary_peaks(ds, base=False)),
                                    "Gamut area and CIELAB volume gained by one more laser primary, per candidate wavelength.")
    return figures


def report_figures(ds: xr.Dataset) -> dict:
    """The figures a result supports, by file stem: {name: (Figure, caption)}.

    Parameters
    ----------
    ds : xarray.Dataset
        A result of any :func:`report_kind`.

    Returns
    -------
    dict
        File stem → (:class:`matplotlib.figure.Figure`, caption): :func:`figure_builders`, drawn.

    Raises
    ------
    ReportError
        The result is of no kind a report shows.

    Examples
    --------
    >>> import metasim
    >>> figure, caption = report_figures(metasim.observer_population(3, seed=1))["observers"]
    >>> [ax.get_xlabel() for ax in figure.axes]
    ['Age (years)', 'Wavelength (nm)']
    """
    return {name: (build(), caption) for name, (build, caption) in figure_builders(ds).items()}


# -- sections --------------------------------------------------------------------------------------------

def with_summaries(ds: xr.Dataset) -> xr.Dataset:
    """A study-layout result with the tables over all pairs (and their intervals): a result that
    lacks them (a plain :func:`metasim.mismatch` Dataset) gets them from the statistics layer.

    Parameters
    ----------
    ds : xarray.Dataset
        A study-layout result: ``delta_e_2000`` ([design,] observer, stimulus) in ΔE00 and,
        optionally, ``delta_e_white`` ([design,] observer).

    Returns
    -------
    xarray.Dataset
        ``ds`` itself when it has no ``delta_e_2000`` or has ``delta_e_2000_overall`` already; else
        a copy with ``delta_e_2000_overall``, ``share_of_pairs_above_threshold``,
        ``delta_e_white_overall`` and their ``*_interval`` (default level, resamples and seed of
        :func:`metasim.statistics.population_statistics`) and the interval attributes.

    References
    ----------
    CIE 142-2001 (CIEDE2000); percentile intervals from resampling observers: Efron & Tibshirani
    (1993) An Introduction to the Bootstrap, ch. 13.

    Examples
    --------
    >>> import xarray as xr
    >>> result = xr.Dataset({"delta_e_2000": (("design", "observer", "stimulus"), [[[0.2, 1.4], [0.6, 2.6], [1.0, 3.0]]])},
    ...                     coords={"design": ["candidate"]})
    >>> summaries = with_summaries(result)
    >>> summaries["delta_e_2000_overall"].sel(design="candidate").values.round(3).tolist()
    [1.467, 1.2, 2.9, 3.0]
    >>> summaries["delta_e_2000_overall_interval"].dims
    ('bound', 'statistic', 'design')
    """
    if "delta_e_2000" not in ds or "delta_e_2000_overall" in ds:
        return ds
    ds = ds.copy()
    table = population_statistics(ds["delta_e_2000"], interval=True, pooled=str(ds.attrs.get("stimuli", "")) or None)
    ds["delta_e_2000_overall"] = table["statistics"]
    ds["delta_e_2000_overall_interval"] = table["statistics_interval"]
    ds["share_of_pairs_above_threshold"] = table["share_above_threshold"]
    ds["share_of_pairs_above_threshold_interval"] = table["share_above_threshold_interval"]
    if "delta_e_white" in ds:
        white = population_statistics(ds["delta_e_white"], over="observer", interval=True, pooled="the white",
                                      includes_white=True)
        ds["delta_e_white_overall"] = white["statistics"]
        ds["delta_e_white_overall_interval"] = white["statistics_interval"]
    ds.attrs.update({k: table.attrs[k] for k in ("interval_method", "interval_level", "interval_resamples",
                                                  "interval_seed")})
    return ds


def _cell(ds: xr.Dataset, name: str, share: bool = False, **where) -> str:
    """A table cell: the value with its interval in brackets when the result holds one."""
    value = ds[name].sel(**where)
    interval = ds[f"{name}_interval"].sel(**where) if f"{name}_interval" in ds else None
    return share_with_interval(value, interval) if share else with_interval(value, interval)


def _headline(ds: xr.Dataset) -> str:
    if "delta_e_2000_overall" not in ds:
        return ""
    rows = []
    for name in ds["design"].values:
        row = [str(name)] + [_cell(ds, "delta_e_2000_overall", design=name, statistic=s) for s in ("mean", "median", "p95")]
        for t in (1.0, 2.0, 3.0):
            present = "share_of_pairs_above_threshold" in ds and t in ds["threshold"].values
            row.append(_cell(ds, "share_of_pairs_above_threshold", True, design=name, threshold=t) if present else "–")
        if "delta_e_white_overall" in ds:
            row += [_cell(ds, "delta_e_white_overall", design=name, statistic=s) for s in ("median", "p95")]
        else:
            row += ["–", "–"]
        if "best_calibration_observer" in ds:
            row.append(label(ds["best_calibration_observer"].sel(design=name).values))
        rows.append(row)
    header = ["design", "mean ΔE00", "median ΔE00", "95th pct ΔE00", "share > 1", "share > 2", "share > 3",
              "white ΔE00 median", "white ΔE00 95th pct"]
    if "best_calibration_observer" in ds:
        header.append("best calibration observer")
    count = ds.sizes.get("observer", ds.attrs.get("observer_count", 0))
    pooled = ds["delta_e_2000_overall"].attrs.get("pooled_stimuli") or f"{ds.sizes.get('stimulus', 0)} stimuli"
    note = (f"<p>CIE 2000 differences (CIE 2000 units) over all {count} observers × {_e(pooled)} (the white not "
            f"pooled: its own columns), against {_e(label(ds.attrs.get('reference', 'the reference')))}, both sides "
            f"matched for the {_e(label(ds.attrs.get('calibration_observer', '')))} observer; shares are of observer × "
            "stimulus pairs beyond 1, 2 and 3 CIE 2000 units.")
    if "interval_level" in ds.attrs:
        note += (f" In brackets: {100 * float(ds.attrs['interval_level']):g} % intervals from resampling observers "
                 f"({ds.attrs.get('interval_resamples')} resamples, seed {ds.attrs.get('interval_seed')}).")
    answer = set(study_sentences(ds))  # the lines the answer box shows already
    sentences = "".join(f"<p class='headline'>{_e(line)}</p>" for line in study_headlines(ds) if line not in answer)
    return "<h2>Numbers per design</h2>" + note + "</p>" + sentences + _table(header, rows)


def _gamut(ds: xr.Dataset) -> str:
    if "gamut_area_xy" not in ds:
        return ""
    refs = [str(r) for r in ds["reference_gamut"].values] if "reference_gamut" in ds.coords else []
    header = ["display", "role", "xy area", "u'v' area"] + [f"covers {REFERENCE_NAMES.get(r, r)}" for r in refs]
    header += ["covers the spectrum locus (every chromaticity)", "CIELAB volume (CIELAB units³)", "CIELAB volume of BT.2020 covered"]
    rows = []
    for name in ds["display"].values:
        sel = ds.sel(display=name)
        role = str(sel["display_role"].values) if "display_role" in sel.coords else ""
        row = [str(name), role, _num(sel["gamut_area_xy"], 4), _num(sel["gamut_area_uv"], 4)]
        row += [_pct(sel["gamut_coverage"].sel(reference_gamut=r)) for r in refs]
        row += [_pct(sel["spectrum_locus_coverage"]), _volume(sel["lab_volume"])]
        row.append(_pct(sel["lab_coverage_volume"].sel(reference_gamut="bt2020")) if "bt2020" in refs else "–")
        rows.append(row)
    return ("<h2>Gamut</h2><p>Chromaticity areas in the CIE 1931 xy and CIE 1976 u'v' diagrams (unitless); "
            "CIELAB volumes in CIELAB units³, relative to each display's own white; all for the CIE 1931 2° "
            "observer.</p>" + _table(header, rows))


def _volume(value) -> str:
    """A CIELAB volume in a table whose header names the unit: ``1 110 000`` → ``"1.11 million"``."""
    value = float(value)
    if not np.isfinite(value):
        return "–"
    return f"{value / 1e6:.2f} million" if abs(value) >= 1e6 else f"{value:,.0f}".replace(",", " ")


def _by_age(ds: xr.Dataset) -> str:
    if "delta_e_2000_by_age" not in ds:
        return ""
    bands = [str(b) for b in ds["age_band"].values]
    rows = []
    for name in ds["design"].values:
        by = ds["delta_e_2000_by_age"].sel(design=name)
        counts = ds["observers_per_age_band"].sel(design=name).values if "observers_per_age_band" in ds else [""] * len(bands)
        for band, n in zip(bands, counts):
            cell = by.sel(age_band=band)
            rows.append([str(name), band, str(n)] + [_num(cell.sel(statistic=s)) for s in ("mean", "median", "p95", "max")])
    return ("<h3>By age band</h3><p>CIE 2000 differences (CIE 2000 units) of all observer × stimulus pairs in each "
            "age band.</p>" + _table(["design", "age band (years)", "observers", "mean", "median", "95th pct", "max"], rows))


def _by_stimulus(ds: xr.Dataset) -> str:
    if "delta_e_2000_by_stimulus" not in ds:
        return ""
    rows = []
    for name in ds["design"].values:
        by = ds["delta_e_2000_by_stimulus"].sel(design=name)
        share = ds["share_of_observers_above_threshold"].sel(design=name) if "share_of_observers_above_threshold" in ds else None
        flags = ds["out_of_gamut_test"].sel(design=name) if "out_of_gamut_test" in ds else None
        for stim in ds["stimulus"].values:
            cell = by.sel(stimulus=stim)
            row = [str(name), str(stim)] + [_num(cell.sel(statistic=s)) for s in ("mean", "median", "p95", "max")]
            row.append(_pct(share.sel(stimulus=stim, threshold=2.0)) if share is not None and 2.0 in share.threshold.values else "–")
            row.append("yes (clipped)" if flags is not None and bool(flags.sel(stimulus=stim)) else "no")
            rows.append(row)
    table = _table(["design", "stimulus", "mean ΔE00", "median ΔE00", "95th pct ΔE00", "max ΔE00", "share of observers > 2",
                    "outside the design's gamut"], rows)
    return f"<details><summary>Per-stimulus table ({len(rows)} rows)</summary>{table}</details>"


def _choices(ds: xr.Dataset) -> str:
    parts = []
    if "calibration_mean_delta_e" in ds:
        rows = []
        for name in ds["design"].values:
            for cal in ds["calibration_observer"].values:
                rows.append([str(name), label(cal), _num(ds["calibration_mean_delta_e"].sel(design=name, calibration_observer=cal)),
                             _num(ds["calibration_p95_delta_e"].sel(design=name, calibration_observer=cal)),
                             _num(ds["calibration_mean_delta_e_white"].sel(design=name, calibration_observer=cal))])
        stimuli_only = "calibration_mean_delta_e_stimuli" in ds
        if stimuli_only:
            for row, (name, cal) in zip(rows, [(n, c) for n in ds["design"].values
                                                for c in ds["calibration_observer"].values]):
                row.append(_num(ds["calibration_mean_delta_e_stimuli"].sel(design=name, calibration_observer=cal)))
        parts.append("<h3>Calibration observer</h3><p>Each candidate observer used to match white and stimuli; "
                     "CIE 2000 differences over the population. The mean and 95th percentile pool the white pair "
                     "with the stimuli" + ("; the last column pools the stimuli only, as the headline does (for the "
                                           "study's calibration observer it is the headline mean)" if stimuli_only
                                           else "") + ".</p>"
                     + _table(["design", "calibration observer", "mean ΔE00 (white + stimuli)",
                               "95th pct ΔE00 (white + stimuli)", "mean white ΔE00"]
                              + (["mean ΔE00 (stimuli only)"] if stimuli_only else []), rows))
    if "white_offset_xy" in ds:
        rows = []
        for name in ds["design"].values:
            offsets = ds["white_offset_xy"].sel(design=name)
            for c in ds["category"].values:
                cell = offsets.sel(category=c)
                weight = ds["category_weight"].sel(category=c).values if "category_weight" in ds.coords else np.nan
                age = ds["category_age_years"].sel(category=c).values if "category_age_years" in ds.coords else np.nan
                uv = ds["white_offset_uv_length"].sel(design=name, category=c) if "white_offset_uv_length" in ds else np.nan
                rows.append([str(name), str(c), _pct(weight), _num(age, 0), f"{float(cell.sel(chromaticity='x')):+.4f}",
                             f"{float(cell.sel(chromaticity='y')):+.4f}", _num(uv, 4)])
        parts.append("<h3>White-point offsets per observer category</h3><p>The white trim (in the calibration "
                     "observer's xy) that makes the design's white match the reference white for each category; "
                     "Δu'v' is the length of the offset in the CIE 1976 u'v' diagram (unitless).</p>"
                     + _table(["design", "category", "share of viewers", "age", "Δx", "Δy", "Δu'v'"], rows))
    return "".join(parts)


def _population(ds: xr.Dataset) -> str:
    ages = np.asarray(ds.coords["age_years"].values, dtype=float) if "age_years" in ds.coords else np.array([np.nan])
    rows = [["observers", str(ds.sizes["observer"])], ["age range (years)", f"{np.nanmin(ages):.1f}–{np.nanmax(ages):.1f}"],
            ["median age (years)", _num(np.nanmedian(ages), 1)]]
    if "field_size_deg" in ds.coords:
        rows.append(["field size (degrees)", _num(np.median(ds.coords["field_size_deg"].values), 1)])
    out = "<h2>Observers</h2>" + _table(["quantity", "value"], rows)
    if "weight" in ds.coords:
        weights = np.asarray(ds.coords["weight"].values, dtype=float)
        shares = weights / weights.sum() if weights.sum() > 0 else weights
        cat_rows = []
        for i in np.argsort(-shares, kind="stable"):
            row = [str(ds["observer"].values[i]), _pct(shares[i])]
            row.append(_num(ages[i], 0) if ages.size == shares.size else "–")
            if "field_size_deg" in ds.coords:
                row.append(_num(ds.coords["field_size_deg"].values[i], 1))
            cat_rows.append(row)
        header = ["category", "share of the population", "age (years)"]
        header += ["field size (°)"] if "field_size_deg" in ds.coords else []
        out += ("<h3>Observer categories</h3><p>Each category is the representative observer of a cluster of the "
                "population; its share is the part of the population it stands for.</p>" + _table(header, cat_rows))
    return out


def _models(ds: xr.Dataset) -> str:
    attrs = dict(ds.attrs)
    specs = attrs.pop("display_specs", {}) or {}
    out = "<h2>Models and parameters</h2>" + _attribute_list(attrs)
    if ds.sizes.get("display") and "spectra" in ds:
        rows = []
        for name in ds["display"].values if "display" in ds.dims else []:
            labels = [str(v) for v in ds["primary_label"].sel(display=name).values if str(v)] if "primary_label" in ds else []
            rows.append([str(name), str(len(labels)), ", ".join(labels)])
        if rows:
            out += _table(["display", "primaries", "labels"], rows)
    specs = parsed(specs)
    for name, text in (specs.items() if isinstance(specs, dict) else []):
        if text:
            out += (f"<details><summary>Design spec file of {_e(name)}</summary>"
                    f"<pre class='spec-file'>{_e(text)}</pre></details>")
    return out


# -- sweeps ----------------------------------------------------------------------------------------------
def default_title(ds: xr.Dataset, kind: str) -> str:
    """The title of a result without one: what it holds, e.g. "1000 observers aged 20-70"."""
    if kind == "population":
        n = ds.sizes.get("observer", 0)
        what = f"{n} observer categories" if "weight" in ds.coords else f"{n} model observers"
        ages = np.asarray(ds.coords["age_years"].values, dtype=float) if "age_years" in ds.coords else np.array([])
        if ages.size and np.isfinite(ages).any():
            what += f" aged {np.nanmin(ages):.0f} to {np.nanmax(ages):.0f} years"
        return what
    return {"fit": "Observers fitted to colour matches", "sweep": "Sweep of display designs",
            "extra": "What one more primary buys"}.get(kind, "metasim result")


def report_answer(ds: xr.Dataset, kind: str) -> list[str]:
    """The sentences of the answer box of a result of ``kind`` (:mod:`metasim.report.answer`)."""
    if kind == "sweep":
        return sweep_sentences(ds)
    if kind == "fit":
        return fit_sentences(ds)
    if kind == "population":
        return population_sentences(ds)
    if kind == "extra":
        return extra_sentences(ds)
    return study_sentences(ds)


def figure_pngs(ds: xr.Dataset) -> dict:
    """The figures of :func:`report_figures` as PNG bytes: {name: (png, caption)}, one at a time
    with progress lines (:func:`metasim.progress.current`).

    Parameters
    ----------
    ds : xarray.Dataset
        A result of any :func:`report_kind`.

    Returns
    -------
    dict
        File stem → (PNG bytes, caption); each figure is drawn, encoded and let go before the next.

    Raises
    ------
    ReportError
        The result is of no kind a report shows.

    References
    ----------
    ISO/IEC 15948:2004 (Portable Network Graphics).

    Examples
    --------
    >>> import metasim
    >>> png, caption = figure_pngs(metasim.observer_population(3, seed=1))["observers"]
    >>> png[1:4], caption
    (b'PNG', 'Ages and colour-matching functions of the observers.')
    """
    out = {}
    builders = figure_builders(ds)
    for name in current().loop(list(builders), "report figures"):
        build, caption = builders[name]
        out[name] = (plots.png_bytes(build()), caption)
    return out


def render_report(ds: xr.Dataset, *, title: str | None = None, source: str | None = None,
                  figures: dict | None = None) -> str:
    """The report of a result Dataset as one HTML string (figures embedded).

    ``figures`` may pass the output of :func:`figure_pngs` when it has been made already.

    Parameters
    ----------
    ds : xarray.Dataset
        A result of any :func:`report_kind`.
    title : str, optional
        The page title (default: the sweep name, the result's ``title`` attribute, or what it
        holds).
    source : str, optional
        Where the result came from (a file name), named under the title.
    figures : dict, optional
        :func:`figure_pngs` of ``ds`` (default: drawn now); ``{}`` makes a page without figures.

    Returns
    -------
    str
        A complete HTML page, figures embedded as ``data:`` URLs, no script or outside resource.

    Raises
    ------
    ReportError
        ``ds`` is not a Dataset, or of no kind a report shows.

    References
    ----------
    WHATWG HTML Living Standard; RFC 2397 (the ``data`` URL scheme); RFC 4648 §4 (base64).

    Examples
    --------
    >>> import metasim
    >>> page = render_report(metasim.observer_population(3, seed=1), title="Demo audience", figures={})
    >>> page.startswith("<!DOCTYPE html>"), "<title>Demo audience</title>" in page, "id='cautions'" in page
    (True, True, True)
    """
    if not isinstance(ds, xr.Dataset):
        raise ReportError(f"a report needs a result Dataset, got {type(ds).__name__}")
    kind = _kind(ds)
    ds = ds if kind == "extra" else as_study(ds)
    if kind == "sweep":
        title = title or str(plots.sweep_spec(ds).get("sweep_name") or ds.attrs.get("title") or "metasim sweep")
    title = title or str(ds.attrs.get("title") or default_title(ds, kind))
    figures = figure_pngs(ds) if figures is None else figures
    body = [f"<h1>{_e(title)}</h1>",
            f"<p class='sub'>metasim {__version__} {'sweep ' if kind == 'sweep' else ''}report"
            f"{(' of ' + _e(source)) if source else ''}.</p>", answer_box(report_answer(ds, kind), kind)]
    if kind == "sweep":
        ds = with_pareto_ranks(ds)
        body += [_sweep_headline(ds), search_section(ds, figures.get("search"))]
        body += [_image(png, caption) for name, (png, caption) in figures.items() if name not in ("pareto", "search")]
        body += [_sweep_best(ds), pareto_section(ds, figures.get("pareto")), _sweep_stimuli(ds), _sweep_models(ds)]
    elif kind == "extra":
        body.append(extra_value_page(ds, figures.get("extra_primary_value")))
    elif kind == "fit":
        body += [fit_data_table(ds), _image(*figures["fit_parameters"]), fit_parameter_table(ds),
                 "<h2>Matches before and after</h2>", _image(*figures["fit_residuals"]), fit_subject_table(ds),
                 fit_categories(ds), fit_models(ds)]
    elif kind == "population":
        body.append(_population(ds))
        body += [_image(png, caption) for png, caption in figures.values()]
    else:
        body.append(_headline(with_summaries(ds)))
        if "age_bands" in figures:
            body.append(_image(*figures["age_bands"]))
        body.append(_by_age(ds))
        if "p95_by_stimulus" in figures:
            body.append("<h2>Stimuli</h2>" + _image(*figures["p95_by_stimulus"]))
        body.append(_by_stimulus(ds))
        body.append(_choices(ds))
        body.append(_gamut(ds))
        for key in ("chromaticity", "spectra", "extra_primary"):
            if key in figures:
                body.append(_image(*figures[key]))
    if kind not in ("sweep", "fit", "extra"):
        body.append(_models(ds))
    body.append(cautions_section(kind))
    return ("<!DOCTYPE html><html lang='en'><head><meta charset='utf-8'>"
            f"<meta name='viewport' content='width=device-width, initial-scale=1'><title>{_e(title)}</title>"
            f"<style>{STYLE}</style></head><body><main>{''.join(body)}</main></body></html>")


#: the figure files a report may write, by result kind (file stems; see :func:`report_figures`)
FIGURE_NAMES = {
    "study": ("chromaticity", "spectra", "age_bands", "p95_by_stimulus", "extra_primary"),
    "population": ("observers",),
    "sweep": ("sweep", "pareto", "search"),
    "fit": ("fit_parameters", "fit_residuals"),
    "extra": ("extra_primary_value",),
}


def report_outputs(kind: str, path, figures_dir=None) -> list[Path]:
    """Every file :func:`write_report` may write for a result of ``kind`` (a :func:`report_kind`):
    the page and each figure it may hold.

    Parameters
    ----------
    kind : str
        A :func:`report_kind` (also ``"fit"`` and ``"extra"``).
    path : path-like
        The HTML page.
    figures_dir : path-like, optional
        The folder of the PNG files (None: the page only).

    Returns
    -------
    list of Path
        The page, then ``figures_dir/NAME.png`` for every figure of :data:`FIGURE_NAMES` ``[kind]``
        (whether or not the result holds it).

    Raises
    ------
    ReportError
        ``kind`` is not a key of :data:`FIGURE_NAMES` (and ``figures_dir`` is given); the message
        names the kinds allowed.

    Examples
    --------
    >>> [path.as_posix() for path in report_outputs("sweep", "out/sweep.html", "out/figures")]
    ['out/sweep.html', 'out/figures/sweep.png', 'out/figures/pareto.png', 'out/figures/search.png']
    """
    outputs = [Path(path)]
    if figures_dir is not None:
        if kind not in FIGURE_NAMES:
            raise ReportError(f"report kind {kind!r} is not known; allowed: {', '.join(sorted(FIGURE_NAMES))}")
        outputs += [Path(figures_dir) / f"{name}.png" for name in FIGURE_NAMES[kind]]
    return outputs


def write_report(ds: xr.Dataset, path, *, figures_dir=None, title: str | None = None, source: str | None = None,
                 replace: bool = True, inputs=()) -> Path:
    """Write :func:`render_report` to ``path``; with ``figures_dir`` also each figure as a PNG file.

    Every file is written through :func:`metasim.io.atomic_output` (complete or absent, never
    partial). With ``replace=False`` nothing is rendered when the page or a figure file exists
    already (:class:`~metasim.errors.OutputExistsError`); an output that is one of ``inputs`` is
    refused either way (:func:`metasim.io.check_outputs`).

    Parameters
    ----------
    ds : xarray.Dataset
        A result of any :func:`report_kind`.
    path : path-like
        The HTML page; its folder must exist.
    figures_dir : path-like, optional
        A folder (created) for the figures as PNG files, named as in :data:`FIGURE_NAMES`.
    title, source : str, optional
        As for :func:`render_report`.
    replace : bool
        Replace existing files (default True).
    inputs : sequence of path-like
        Files that must not be overwritten (the result file read).

    Returns
    -------
    Path
        ``path``.

    Raises
    ------
    ReportError
        ``ds`` is not a Dataset, or of no kind a report shows.
    OutputError
        The folder of ``path`` does not exist.
    OutputExistsError
        A file exists and ``replace`` is False (nothing is drawn or written).
    OutputIsInputError
        An output is one of ``inputs``.

    References
    ----------
    WHATWG HTML Living Standard; ISO/IEC 15948:2004 (PNG).

    Examples
    --------
    A mismatch result without the variables of any figure (no ages, no per-stimulus table) makes a
    page alone, quickly; :func:`figure_pngs` shows a figure drawn.

    >>> import pathlib, tempfile
    >>> import xarray as xr
    >>> result = xr.Dataset({"delta_e_2000": (("observer", "stimulus"), [[0.2, 1.4], [0.6, 2.6], [1.0, 3.0]])},
    ...                     attrs={"test": "candidate", "reference": "studio monitor"})
    >>> with tempfile.TemporaryDirectory() as folder:
    ...     page = write_report(result, pathlib.Path(folder) / "candidate.html", figures_dir=pathlib.Path(folder) / "figures")
    ...     print(sorted(p.name for p in page.parent.rglob("*")), "95th pct ΔE00" in page.read_text(encoding="utf-8"))
    ['candidate.html', 'figures'] True
    """
    path = Path(path)
    if not isinstance(ds, xr.Dataset):
        raise ReportError(f"a report needs a result Dataset, got {type(ds).__name__}")
    if not path.parent.is_dir():
        raise OutputError(f"{path}: folder {path.parent} does not exist")
    check_outputs(report_outputs(_kind(ds), path, figures_dir), inputs=inputs, replace=replace)
    figures = figure_pngs(ds)
    if figures_dir is not None:
        figures_dir = Path(figures_dir)
        figures_dir.mkdir(parents=True, exist_ok=True)
        for name, (png, _) in figures.items():
            write_bytes(figures_dir / f"{name}.png", png, replace=replace)
    return write_text(path, render_report(ds, title=title, source=source, figures=figures), replace=replace)


__all__ = ["with_summaries", "CAUTIONS", "FIGURE_NAMES", "report_kind", "as_study", "is_sweep", "figure_builders",
           "report_figures",
           "figure_pngs", "render_report",
           "report_outputs", "write_report"]
