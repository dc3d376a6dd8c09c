"""The sweep page of a report: headline, best designs, the stimuli hardest for the best design,
models (for ``STORE/sweep.nc`` of :func:`metasim.sweep.run_sweep`)."""

from __future__ import annotations

import json

import numpy as np
import xarray as xr

from metasim import plots
from metasim.report.html import _attribute_list, _e, _num, _pct, _table
from metasim.report.labels import label
from metasim.statistics.comparison import DEFAULT_HALF_WIDTH
from metasim.statistics.headline import population_advice, sweep_headline, with_interval

def _sweep_numbers(ds: xr.Dataset) -> dict:
    """Per-design p95, median, share beyond 2 and BT.2020 coverage (NaN where the file lacks them)."""
    stats = ds["delta_e_2000_overall"].transpose("design", "statistic")
    nan = np.full(ds.sizes["design"], np.nan)
    share = nan
    if "share_of_pairs_above_threshold" in ds and 2.0 in ds["share_of_pairs_above_threshold"]["threshold"].values:
        share = ds["share_of_pairs_above_threshold"].sel(threshold=2.0).transpose("design").values
    coverage = nan
    if "gamut_coverage" in ds and "bt2020" in ds["gamut_coverage"]["reference_gamut"].values:
        coverage = ds["gamut_coverage"].sel(reference_gamut="bt2020").transpose("design").values
    p95 = np.asarray(stats.sel(statistic="p95").values, dtype=float)
    # a search result: designs that break a constraint rank after every design that meets them all
    breaks = (ds["constraint_violation"].transpose("design").values > 0 if "constraint_violation" in ds
              else np.zeros(ds.sizes["design"], dtype=bool))
    order = np.lexsort((np.where(np.isfinite(p95), p95, np.inf), breaks))
    return {"p95": p95, "median": np.asarray(stats.sel(statistic="median").values, dtype=float),
            "share2": np.asarray(share, dtype=float), "bt2020": np.asarray(coverage, dtype=float),
            "breaks": breaks, "constrained": "constraint_violation" in ds, "order": order}


def _cell(value) -> str:
    return f"{value:g}" if isinstance(value, (int, float, np.integer, np.floating)) else str(value)


def _design_name(ds: xr.Dataset, index: int) -> str:
    """Designs are numbered from 1, like ranks (:func:`metasim.plots.design_number`)."""
    return f"design {plots.design_number(ds, index)}"


def _parameters_of(ds: xr.Dataset, names, index: int) -> str:
    return ", ".join(f"{plots.parameter_text(ds, c)[0]} {plots.parameter_value(ds, c, index)}" for c in names)


def _sweep_headline(ds: xr.Dataset) -> str:
    spec = plots.sweep_spec(ds)
    numbers = _sweep_numbers(ds)
    varied, fixed = plots.sweep_parameters(ds)
    best = int(numbers["order"][0])
    observers = ds.attrs.get("observer_count", spec.get("observer_count", "?"))
    stimuli = ds.attrs.get("stimulus_count", spec.get("stimulus_count", "?"))
    count = ds.sizes["design"]
    reference = spec.get("reference") or ds.attrs.get("reference", "the reference")
    parts = [f"<p>{count} design{'s' if count != 1 else ''}, each judged by {_e(observers)} observers × {_e(stimuli)} "
             f"stimuli against {_e(label(reference))}, matched for the "
             f"{_e(label(ds.attrs.get('calibration_observer', '')))} observer."]
    if spec.get("sweep_description"):
        parts.append(f" {_e(str(spec['sweep_description']).rstrip('.'))}.")
    parts.append("</p>")
    parts += _sweep_interval_note(ds)
    if varied:
        parts.append(f"<p>Varied: {_e(', '.join(plots.parameter_label(ds, c) for c in varied))}.</p>")
    try:
        kept = json.loads(spec.get("design_parameters") or "{}").get("fixed_primaries", [])
    except (TypeError, ValueError, AttributeError):
        kept = []
    held = [_parameters_of(ds, fixed, best)] if fixed else []
    held += [f"the base primaries {', '.join(map(str, kept))}"] if kept else []
    if held:
        parts.append(f"<p>Held fixed: {_e('; '.join(held))}.</p>")
    return "<h2>The sweep</h2>" + "".join(parts)


def sweep_answer_sentences(ds: xr.Dataset) -> list[str]:
    """The one-sentence answer with intervals, the edge warnings and the population-size advice, for the
    answer box (sweeps run with intervals: :mod:`metasim.sweep.ranking`; empty without them)."""
    if "best_probability" not in ds:
        return []
    varied = plots.sweep_parameters(ds)[0]
    p95 = ds["delta_e_2000_overall"].sel(statistic="p95")
    interval = ds["delta_e_2000_overall_interval"].sel(statistic="p95")

    def describe(index: int) -> str:
        described = _parameters_of(ds, varied, index)
        return _design_name(ds, index) + (f" ({described})" if described else "")

    edges = plots.sweep.edge_messages(ds)  # the parameters in words
    sentences = [sweep_headline(ds, p95, interval, describe=describe)]
    sentences += [f"{m[0].upper() + m[1:]}." for m in edges]
    best = int(np.flatnonzero(ds["rank"].values == 1)[0])
    advice = population_advice(interval.isel(design=best), int(ds.attrs.get("observer_count", 0)),
                               float(ds.attrs.get("target_half_width", DEFAULT_HALF_WIDTH)))
    return sentences + ([advice] if advice else [])


def _sweep_interval_note(ds: xr.Dataset) -> list[str]:
    """What the numbers in brackets are (sweeps run with intervals)."""
    if "best_probability" not in ds:
        return []
    level = 100 * float(ds.attrs.get("interval_level", 0.95))
    return [f"<p>In brackets: {level:g} % intervals from resampling observers "
            f"({_e(ds.attrs.get('interval_resamples'))} resamples, the same for every design, so designs are "
            "compared observer by observer).</p>"]


def _sweep_best(ds: xr.Dataset, shown: int = 10) -> str:
    numbers = _sweep_numbers(ds)
    varied = plots.sweep_parameters(ds)[0]
    header = ["rank", "design"] + [plots.parameter_label(ds, c) for c in varied]
    header += ["95th pct ΔE00", "median ΔE00", "share > 2", "BT.2020 covered"]
    ranked = "best_probability" in ds
    if ranked:
        header += ["best in (share of resamples)", "rank interval"]
    if numbers["constrained"]:
        header += ["meets the constraints"]
    interval = ds["delta_e_2000_overall_interval"] if "delta_e_2000_overall_interval" in ds else None
    rows = []
    for rank, index in enumerate(numbers["order"][:shown], start=1):
        index = int(index)
        p95, median = numbers["p95"][index], numbers["median"][index]
        if interval is not None:
            p95 = with_interval(p95, interval.isel(design=index).sel(statistic="p95"))
            median = with_interval(median, interval.isel(design=index).sel(statistic="median"))
        else:
            p95, median = _num(p95), _num(median)
        row = ([str(rank), str(plots.design_number(ds, index))] + [_cell(ds[c].values[index]) for c in varied]
               + [p95, median, _pct(numbers["share2"][index]), _pct(numbers["bt2020"][index])])
        if ranked:
            low, high = ds["rank_interval"].isel(design=index).values
            row += [_pct(ds["best_probability"].values[index]), f"{low}–{high}"]
        if numbers["constrained"]:
            row += ["no" if numbers["breaks"][index] else "yes"]
        rows.append(row)
    count = ds.sizes["design"]
    what = f"The {min(shown, count)} best of {count} designs" if count > shown else f"All {count} designs"
    return (f"<h2>Best designs</h2><p>{what}, by the 95th percentile of the CIE 2000 difference over all observer × "
            "stimulus pairs; the share is of pairs beyond 2 CIE 2000 units; BT.2020 coverage is of its CIE 1931 xy "
            "area. Designs are numbered from 1 as ranks are; in the result file design N is index N − 1 of "
            "the <code>design</code> dimension." + (" Designs that break a constraint of the search are listed after every design that meets "
                       "them all." if numbers["constrained"] else "") + "</p>" + _table(header, rows))


#: keys of a search's settings whose words elsewhere mean something else (``strategy``: the drive)
SEARCH_KEYS = {"strategy": "evolution_strategy", "init": "initial_population", "updating": "population_updating"}


def _design_numbers(value) -> str:
    """Design indexes stored in an attribute (``8``, ``"0, 7, 8"``) as the numbers readers see."""
    try:
        indexes = [int(v) for v in str(value).replace(",", " ").split()]
    except ValueError:
        return str(value)
    numbers = [i + 1 for i in indexes]  # as plots.design_number: the file's design index + 1
    return ("design " if len(numbers) == 1 else "designs ") + ", ".join(map(str, numbers))


def readable_sweep_attributes(ds: xr.Dataset) -> dict:
    """A sweep's or search's attributes as a report shows them: design indexes as design numbers
    (from 1, like ranks), edge warnings with the parameters in words, the spec left out.

    Parameters
    ----------
    ds : xarray.Dataset
        A sweep or search result.

    Returns
    -------
    dict
        Attribute name → value to show.

    Examples
    --------
    >>> import xarray as xr
    >>> sweep = xr.Dataset(coords={"design": [0, 1, 2], "R_peak_nm": ("design", [610.0, 630.0, 650.0], {"units": "nm"})},
    ...                    attrs={"best_design": "2", "best_set": "1, 2",
    ...                           "edge_warnings": "the best design has R_peak_nm = 650 nm, the upper end"})
    >>> readable_sweep_attributes(sweep)
    {'best_design': 'design 3', 'best_set': 'designs 2, 3', 'edge_warnings': 'the best design has red primary peak = 650 nm, the upper end'}
    """
    attrs = {k: v for k, v in ds.attrs.items() if k != "spec"}
    for key in ("best_design", "best_set"):
        if key in attrs:
            attrs[key] = _design_numbers(attrs[key])
    if attrs.get("edge_warnings"):
        attrs["edge_warnings"] = "; ".join(plots.edge_messages(ds))
    if "best_feasible" in attrs:
        attrs["best_feasible"] = bool(int(attrs["best_feasible"]))
    return attrs


def _sweep_models(ds: xr.Dataset) -> str:
    attrs = readable_sweep_attributes(ds)
    spec = dict(plots.sweep_spec(ds))
    text = spec.pop("sweep_spec_text", "")
    if isinstance(spec.get("parameters"), list):  # the design parameters by their names, not their keys
        spec["parameters"] = [plots.parameter_label(ds, c) if c in ds.coords else c for c in spec["parameters"]]
    if isinstance(spec.get("search"), dict):  # the search's own settings, not those of the displays
        spec["search"] = {SEARCH_KEYS.get(k, k): v for k, v in spec["search"].items()}
    if isinstance(spec.get("bounds"), dict):
        spec["bounds"] = {plots.parameter_label(ds, c) if c in ds.coords else c: f"{lo:g} to {hi:g}"
                          for c, (lo, hi) in spec["bounds"].items()}
    out = "<h2>Models and parameters</h2>" + _attribute_list(attrs)
    if spec:
        out += "<h3>Sweep spec</h3>" + _attribute_list(spec)
    if text:
        out += f"<h3>Sweep spec file</h3><pre class='spec-file'>{_e(text)}</pre>"
    return out


def _sweep_stimuli(ds: xr.Dataset, shown: int = 10) -> str:
    """The stimuli hardest for the best design (sweeps run with per-stimulus summaries only)."""
    if "delta_e_2000_by_stimulus" not in ds or "stimulus" not in ds.dims:
        return ""
    best = int(_sweep_numbers(ds)["order"][0])
    by = ds["delta_e_2000_by_stimulus"].isel(design=best).transpose("statistic", "stimulus")
    p95 = by.sel(statistic="p95").values
    share = None
    if "share_of_observers_above_threshold" in ds and 2.0 in ds["share_of_observers_above_threshold"]["threshold"].values:
        share = ds["share_of_observers_above_threshold"].isel(design=best).sel(threshold=2.0).transpose("stimulus").values
    order = np.argsort(np.where(np.isfinite(p95), -p95, np.inf), kind="stable")[:shown]
    rows = [[str(ds["stimulus"].values[i])] + [_num(by.sel(statistic=s).values[i]) for s in ("mean", "median", "p95", "max")]
            + [_pct(share[i]) if share is not None else "–"] for i in order]
    return (f"<h2>Hardest stimuli for {_e(_design_name(ds, best))}</h2><p>The {len(rows)} stimuli with the largest "
            "95th percentile over observers of the CIE 2000 difference; the share is of observers beyond 2.</p>"
            + _table(["stimulus", "mean", "median", "95th pct", "max", "share > 2"], rows))
