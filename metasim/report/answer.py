"""The box that opens every report — the answer in a few sentences and a one-line caution — and the
cautions at the end, only those that apply to the kind of result.

The sentences are the study's own (:func:`metasim.study.study_headlines`, written by the statistics
layer's :mod:`metasim.statistics.headline`): a study of one design says how far it is from the
reference (95th percentile and median of the CIE 2000 differences over all viewer × colour pairs,
with intervals from resampling the observers); of two designs it gives their paired comparison
seen by the same observers; then for whom (the age bands with the largest and smallest differences)
and the whites. A sweep names its best design; an observer file
says who the observers are; an observer fit how well the fits match.
"""

from __future__ import annotations

import numpy as np
import xarray as xr

from metasim.report.fitting import FIT_CAUTION
from metasim.report.html import CAUTIONS, _e
from metasim.report.labels import label
from metasim.units import format_share

#: every caution by topic (the full texts stand at the end of a report)
CAUTION_TEXTS = {
    "safety": CAUTIONS[0],
    "observers": CAUTIONS[1],
    "thresholds": CAUTIONS[2],
    "fit": FIT_CAUTION,
}
#: the cautions that apply to each kind of result
CAUTIONS_BY_KIND = {
    "study": ("safety", "observers", "thresholds"),
    "sweep": ("safety", "observers", "thresholds"),
    "population": ("observers",),
    "fit": ("fit", "observers"),
}
#: the one-line caution of each kind's answer box
SHORT_CAUTIONS = {
    "study": "Colour matching of model observers, not eye safety: laser and high-radiance light sources fall under "
             "IEC 60825-1 and IEC 62471 and local regulations (cautions at the end).",
    "population": "Model observers with estimated individual variation, not measurements of any real audience "
                  "(caution at the end).",
    "fit": "Fitted model observers, not measurements of anyone's eye (cautions at the end).",
}
SHORT_CAUTIONS["sweep"] = SHORT_CAUTIONS["study"]


def cautions_section(kind: str) -> str:
    """The closing section of a report of ``kind``: the full text of every caution that applies."""
    texts = [CAUTION_TEXTS[key] for key in CAUTIONS_BY_KIND.get(kind, CAUTIONS_BY_KIND["study"])]
    return "<h2 id='cautions'>Cautions</h2>" + "".join(f"<p class='caution'>{_e(t)}</p>" for t in texts)


def answer_box(sentences: list[str], kind: str) -> str:
    """The answer box: the sentences, then the one-line caution of ``kind``."""
    body = "".join(f"<p>{_e(s)}</p>" for s in sentences if s)
    caution = SHORT_CAUTIONS.get(kind, SHORT_CAUTIONS["study"])
    return (f"<section class='answer' aria-label='answer'><h2>Answer</h2>{body}"
            f"<p class='short-caution'>{_e(caution)}</p></section>")


# -- the sentences of each kind --------------------------------------------------------------------------

def _reference_name(ds: xr.Dataset) -> str:
    if ds.attrs.get("reference_kind") in ("surfaces", "objects") or ds.attrs.get("reference") in ("surfaces", "objects"):
        return "real surfaces"
    return str(ds.attrs.get("reference") or "the reference")


def _p95(ds: xr.Dataset, design) -> float:
    if "delta_e_2000_overall" in ds:
        return float(ds["delta_e_2000_overall"].sel(design=design, statistic="p95"))
    return float(np.nanquantile(ds["delta_e_2000"].sel(design=design).values, 0.95))


def _age_sentence(ds: xr.Dataset, design) -> str:
    """Who sees the largest and the smallest differences with ``design``: age bands by their 95th percentile."""
    if "delta_e_2000_by_age" not in ds or ds.sizes.get("age_band", 0) < 2:
        return ""
    p95 = ds["delta_e_2000_by_age"].sel(design=design, statistic="p95")
    values = np.asarray(p95.values, dtype=float)
    if not np.isfinite(values).any():
        return ""
    bands = [str(b) for b in p95["age_band"].values]
    worst, best = int(np.nanargmax(values)), int(np.nanargmin(values))
    return (f"With {design}, viewers aged {bands[worst]} see the largest differences (95th percentile "
            f"{values[worst]:.2f} CIE 2000 units) and viewers aged {bands[best]} the smallest ({values[best]:.2f}).")


def _white_sentence(ds: xr.Dataset, design) -> str:
    if "delta_e_white" not in ds:
        return ""
    white = np.asarray(ds["delta_e_white"].sel(design=design).values, dtype=float).ravel()
    white = white[np.isfinite(white)]
    if not white.size:
        return ""
    return (f"Its white differs from the reference white by a median {np.median(white):.2f} and a 95th percentile "
            f"{np.quantile(white, 0.95):.2f} CIE 2000 units over the observers.")


def study_sentences(ds: xr.Dataset) -> list[str]:
    """The answer of a study (layout of :mod:`metasim.study`): which design, by how much (the study's
    own headline sentences with their intervals, :func:`metasim.study.study_headlines`), for whom (age
    bands) and the whites."""
    from metasim.report import with_summaries
    from metasim.study import study_headlines

    if "delta_e_2000_overall" not in ds and "delta_e_2000" not in ds:
        return []
    ds = with_summaries(ds)
    if "delta_e_2000_overall" not in ds or "design" not in ds.dims:
        return []
    designs = [str(d) for d in ds["design"].values]
    order = sorted(designs, key=lambda d: (not np.isfinite(_p95(ds, d)), _p95(ds, d)))
    best = order[0]
    lines = study_headlines(ds)
    if "comparison_share_second_closer" in ds:
        sentences = [lines[0]]  # the paired comparison of the two designs
    else:
        sentences = [line for line in lines if line.startswith(f"{best} differs")][:1]
        if len(designs) > 1:
            sentences.append(f"{best} has the lowest 95th percentile of the {len(designs)} designs.")
    sentences += [_age_sentence(ds, best), _white_sentence(ds, best)]
    count = ds.sizes.get("observer", ds.attrs.get("observer_count", 0))
    note = (f"Differences are pooled over all {count} observers × {ds.sizes.get('stimulus', 0)} colours, both sides "
            f"matched for the {label(ds.attrs.get('calibration_observer', 'cie1931_2'))} observer")
    if "interval_level" in ds.attrs:
        note += f"; numbers in brackets are {100 * float(ds.attrs['interval_level']):g} % intervals from resampling the observers"
    sentences.append(note + ".")
    return [s for s in sentences if s]


def population_sentences(ds: xr.Dataset) -> list[str]:
    """Who the observers of an observer file are."""
    n = ds.sizes.get("observer", 0)
    ages = np.asarray(ds.coords["age_years"].values, dtype=float) if "age_years" in ds.coords else np.array([])
    text = f"{n} model observers"
    if "weight" in ds.coords:
        text = f"{n} observer categories, each standing for a share of a larger population"
    if ages.size and np.isfinite(ages).any():
        text += f", aged {np.nanmin(ages):.0f} to {np.nanmax(ages):.0f} years (median {np.nanmedian(ages):.0f})"
    if "field_size_deg" in ds.coords:
        field = np.asarray(ds.coords["field_size_deg"].values, dtype=float)
        text += (f", field size {np.nanmin(field):g}°" if np.nanmin(field) == np.nanmax(field)
                 else f", field sizes {np.nanmin(field):g}° to {np.nanmax(field):g}°")
    seed = ds.attrs.get("seed")
    return [text + (f", drawn with seed {seed}." if seed is not None else ".")]


def sweep_sentences(ds: xr.Dataset) -> list[str]:
    """The best design of a sweep (lowest 95th percentile) and the range over the sweep."""
    from metasim import plots
    from metasim.report.sweep import _design_name, _parameters_of, _sweep_numbers, sweep_answer_sentences

    numbers = _sweep_numbers(ds)
    best = int(numbers["order"][0])
    if not np.isfinite(numbers["p95"][best]):
        return ["No design of this sweep has finite results."]
    ranked = sweep_answer_sentences(ds)  # with intervals, when the sweep was run with them
    if ranked:
        text = f"Its median is {numbers['median'][best]:.2f} CIE 2000 units over all observer × colour pairs"
    else:
        described = _parameters_of(ds, plots.sweep_parameters(ds)[0], best)
        among = ""
        if numbers["constrained"]:
            among = (" (of the designs that meet every constraint)" if not numbers["breaks"][best]
                     else " (no design meets every constraint; this one breaks them least)")
        text = (f"Best design{among}: {_design_name(ds, best)}{' (' + described + ')' if described else ''}, "
                "95th percentile "
                f"{numbers['p95'][best]:.2f} and median {numbers['median'][best]:.2f} CIE 2000 units over all "
                "observer × colour pairs")
    if np.isfinite(numbers["share2"][best]):
        text += f", {format_share(numbers['share2'][best])} of pairs beyond 2"
    if np.isfinite(numbers["bt2020"][best]):
        text += f"; it covers {format_share(numbers['bt2020'][best])} of the BT.2020 xy area"
    sentences = ranked[:1] + [text + "."] + ranked[1:]
    finite = numbers["p95"][np.isfinite(numbers["p95"])]
    if finite.size > 1:
        worst = int(np.nanargmax(numbers["p95"]))
        sentences.append(f"Over the {ds.sizes['design']} designs the 95th percentile runs from {finite.min():.2f} to "
                         f"{finite.max():.2f} CIE 2000 units (worst: {_design_name(ds, worst)}).")
    return sentences


def extra_sentences(ds: xr.Dataset) -> list[str]:
    """Where one more primary adds the most gamut and where it saves the most viewer disagreement
    (:func:`metasim.sweep.extra_primary_value`)."""
    peaks = np.asarray(ds["peak_wavelength"].values, dtype=float)
    gain = np.asarray(ds["mismatch_gain"].values, dtype=float)
    area = np.asarray(ds["area_gain_share"].values, dtype=float)
    if not (np.isfinite(gain).any() and np.isfinite(area).any()):
        return ["No candidate extra primary has finite results."]
    best_m, best_a = int(np.nanargmax(gain)), int(np.nanargmax(area))
    base = float(ds["base_delta_e_2000_p95"])
    return [f"Most gamut: an extra primary at {peaks[best_a]:g} nm adds {format_share(area[best_a])} of the base "
            "design's CIE 1931 xy area.",
            f"Least viewer disagreement: at {peaks[best_m]:g} nm the 95th percentile CIE 2000 difference over the "
            f"observers falls from {base:.2f} to {base - gain[best_m]:.2f} when the extra primary serves the "
            "population."]


def fit_sentences(ds: xr.Dataset) -> list[str]:
    """How many subjects were fitted and how much closer the fitted observers match."""
    from metasim.report.fitting import _typical, _unit

    n = ds.sizes.get("observer", 0)
    before = np.nanmedian(_typical(ds["match_error_mean_observer"].values))
    after = np.nanmedian(_typical(ds["match_error"].values))
    identified = ds["identified"].values.astype(bool)
    return [f"{n} subject{'s' if n != 1 else ''} fitted ({int(ds['converged'].values.sum())} converged): the median "
            f"match error falls from {before:.3g} with the mean observer to {after:.3g} with each subject's fitted "
            f"observer ({_unit(ds)}); {format_share(identified.mean())} of subject × parameter estimates are "
            "identified by the data."]


__all__ = ["CAUTION_TEXTS", "CAUTIONS_BY_KIND", "SHORT_CAUTIONS", "answer_box", "cautions_section",
           "study_sentences", "population_sentences", "sweep_sentences", "extra_sentences", "fit_sentences"]
