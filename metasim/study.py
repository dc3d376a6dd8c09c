"""Studies: the gamut of every display and the population mismatch of each design, in one Dataset.

A *study* compares one or more candidate display designs with a reference (a display, or real
objects under their illuminant) for a population of observers: the chromaticity gamut, CIELAB
volume and coverage of every display, the extra-primary gain of each design, the engine's mismatch
results and summaries per design and, optionally, the calibration-observer ranking and the white
trims per observer category. :func:`run_study` chooses the library calls and gathers their outputs
into one self-describing Dataset that :mod:`metasim.report` renders and :func:`metasim.save_dataset`
writes losslessly. Nothing here models anything: every number comes from a library function
(:mod:`metasim.gamut`, :func:`metasim.mismatch`, :mod:`metasim.metamerism.choices`).

Study result layout
-------------------
Dims (project vocabulary):

``display``          every display in the study, the reference display (if there is one) first;
                     coordinate ``display_role`` ("reference" or "design")
``design``           the candidates judged against the reference (the last entries of ``display``)
``primary``          an index 0..N-1 (N: most primaries of any display); ``primary_label`` names it
``wavelength``, ``chromaticity`` (x, y), ``vertex``, ``reference_gamut`` (bt709, display_p3,
dci_p3, bt2020), ``peak_wavelength``, and the engine's ``observer``, ``stimulus``, ``xyz``,
``statistic`` (mean, median, p95, max), ``age_band``, ``threshold``; with choices also
``calibration_observer`` and ``category``.

Variables over ``display`` (CIE 1931 2° observer, each display's own white):

=========================================  ======================================================
``spectra`` (display, primary, wavelength)  radiance of each primary at full drive after white
                                            calibration, W sr-1 m-2 nm-1 (NaN pads missing ones)
``primary_label`` (display, primary)        label of each primary ("" pads)
``primary_xy`` (display, primary, chrom.)   CIE 1931 xy of each primary
``white_xy`` (display, chromaticity)        CIE 1931 xy of the display white
``gamut_area_xy``, ``gamut_area_uv``        chromaticity gamut area in xy and u'v'
``gamut_polygon`` (display, vertex, chr.)   hull in CIE 1931 xy, NaN padded
``gamut_coverage`` (display, reference_gamut)      share of each reference xy area covered
``spectrum_locus_coverage`` (display)       share of the CIE 1931 spectrum-locus area (was
                                            ``locus_share``)
``lab_volume`` (display)                    CIELAB volume of the colour solid
``lab_coverage_volume`` (display, reference_gamut) share of each reference solid's volume covered
=========================================  ======================================================

Variables over ``design``:

==============================================  =================================================
``delta_e_2000`` (design, observer, stimulus)   CIE 2000 difference per observer and stimulus;
                                                the ``observer`` coordinates (``age_years``, ...)
                                                come with it
``delta_e_white`` (design, observer)            CIE 2000 difference of the whites
``delta_e_2000_by_stimulus``, ``_by_age``,      the engine's summaries (:func:`metasim.mismatch`);
``observers_per_age_band``,                     age bands by default the decades covering the
``share_of_observers_above_threshold``,         observers' ages (the shares were ``share_beyond``
``share_of_pairs_above_threshold``              and ``share_beyond_overall``)
``out_of_gamut_test``, ``out_of_gamut_reference``, ``delta_e_2000_calibration``  as in the engine
``delta_e_2000_overall`` (design, statistic)    over all observer × stimulus pairs (weighted), from
                                                :func:`metasim.statistics.population_statistics`;
                                                ``share_of_pairs_above_threshold`` (design, threshold) likewise
``delta_e_white_overall`` (design, statistic)   the white difference, statistics over observers
``*_interval`` (design, bound, ...)             with ``intervals``: the percentile interval of each of
                                                the three from resampling observers (bound = lower,
                                                upper; none for the maximum)
``observers_needed_p95`` (design)               observers for the ``target_half_width`` on p95
``comparison_difference`` (statistic), ``comparison_share_second_closer`` (), with ``*_interval``
                                                two designs with intervals: second minus first per
                                                statistic, and the share of observers who see the
                                                second closer to the reference (paired)
``metamerism_index_by_stimulus``                observer metamerism index, statistics per stimulus
``area_gain_share``, ``volume_gain_share``,     gain of one extra laser primary per candidate peak
``area_gain``, ``volume_gain`` (design, peak_wavelength)
``extra_base`` (design)                         the primaries the gain starts from
``calibration_mean_delta_e``, ``calibration_p95_delta_e`` (white and stimuli pooled),
``calibration_mean_delta_e_white``, ``calibration_mean_delta_e_stimuli`` (stimuli only: for the
study's calibration observer the mean of ``delta_e_2000_overall``) (design, calibration_observer),
``best_calibration_observer`` (design)          with the ranking
``white_offset_xy`` (design, category, chromaticity), ``white_offset_uv_length`` (design,
category), coordinates ``category_weight``, ``category_age_years``   with the white trims
==============================================  =================================================

Every variable has ``units`` and ``long_name``. Attributes: ``result_kind`` = ``"metasim study"``
(:data:`RESULT_KIND`), ``title``, ``model`` and the engine's settings (``calibration_observer``,
``drive_strategy``, ``white_matched``, ``adapted_white``, ``reference``, ``reference_kind``),
``observer_model``, ``observer_parameters``, ``observer_seed``, ``observer_count``,
``observer_categories``, ``stimuli``, ``stimulus_kind``, ``stimulus_source``,
``thresholds_source``, ``gamut_observer``, ``gamut_references``, ``extra_primary_candidates``,
``display_specs`` (display name → text of its spec file), ``pooled_stimuli`` (what the tables
over pairs pool), with intervals ``interval_method``, ``interval_level``, ``interval_resamples``,
``interval_seed`` and ``target_half_width``, and ``metasim_version``. Every summary variable says
in its attributes what it pools (``pooled_over``, ``pooled_stimuli``, ``includes_white``,
``observer_weights``).

A plain :func:`metasim.mismatch` result takes this layout through :func:`as_study` (a one-entry
``design`` dim).
"""

from __future__ import annotations

import json
from collections.abc import Callable, Sequence

import numpy as np
import xarray as xr

from metasim._version import __version__
from metasim.colorimetry import xyz_to_xy
from metasim.display import Display
from metasim.gamut import (
    REFERENCE_GAMUTS,
    chromaticity_gamut,
    extra_primary_gain,
    gamut_coverage,
    lab_coverage_volume,
    lab_gamut_volume,
    spectrum_locus_coverage,
)
from metasim.metamerism import mismatch
from metasim.metamerism.engine import resolve_observers
from metasim.metamerism.stimuli import as_stimuli
from metasim.metamerism.choices import rank_calibration_observers, white_point_offsets
from metasim.metamerism.summary import DECADES, PAIR_SHARE, summarise
from metasim.errors import StatisticsError
from metasim.statistics import DEFAULT_LEVEL, DEFAULT_RESAMPLES, population_statistics
from metasim.statistics.resampling import check_interval_settings
from metasim.statistics import headline as sentences
from metasim.statistics.comparison import DEFAULT_HALF_WIDTH, half_width, observers_needed, paired_comparison
from metasim.metamerism.categories import observer_categories
from metasim.observers import standard_observer
from metasim.spectra import default_grid
from metasim.units import LAB_VOLUME, format_volume

RESULT_KIND = "metasim study"
#: The observer of every gamut number of a study.
GAMUT_OBSERVER = "cie1931_2"
#: Candidate peaks of the extra-primary gain curve, nm.
EXTRA_PEAKS_NM = np.arange(450.0, 651.0, 1.0)
#: The engine's variables a study keeps, per design.
MISMATCH_VARIABLES = ("delta_e_2000", "delta_e_white", "delta_e_2000_by_stimulus", "delta_e_2000_by_age",
                      "observers_per_age_band", "share_of_observers_above_threshold", "share_of_pairs_above_threshold", "out_of_gamut_test",
                      "out_of_gamut_reference", "delta_e_2000_calibration")
#: Observer categories of the white trims when the population has none (``white_categories``).
WHITE_CATEGORIES = 6

VARIABLE_ATTRS = {
    "spectra": ("W sr-1 m-2 nm-1", "spectral radiance of each primary at full drive, after white calibration"),
    "primary_label": ("1", "label of each primary (empty: padding)"),
    "primary_xy": ("1", "CIE 1931 xy chromaticity of each primary"),
    "white_xy": ("1", "CIE 1931 xy chromaticity of the display white"),
    "gamut_area_xy": ("1", "chromaticity gamut area in CIE 1931 xy"),
    "gamut_area_uv": ("1", "chromaticity gamut area in CIE 1976 u'v'"),
    "gamut_polygon": ("1", "chromaticity gamut polygon in CIE 1931 xy (NaN padded)"),
    "gamut_coverage": ("1", "share of each reference gamut's xy area covered"),
    "spectrum_locus_coverage": ("1", "share of the CIE 1931 xy spectrum-locus area (every chromaticity) that the gamut covers"),
    "lab_volume": (LAB_VOLUME, "CIELAB volume of the colour solid (own white)"),
    "lab_coverage_volume": ("1", "share of each reference colour solid's CIELAB volume covered"),
    "area_gain_share": ("1", "chromaticity area gained by one extra laser primary, share of the base area"),
    "volume_gain_share": ("1", "CIELAB volume gained by one extra laser primary, share of the base volume"),
    "extra_base": ("1", "primaries the extra-primary gain starts from"),
}


def _quiet(text: str) -> None:
    """The default progress callback: says nothing."""


# -- gamut of every display --------------------------------------------------------------------------

def _gamut_block(display: Display, cie1931: xr.Dataset) -> dict:
    gamut = chromaticity_gamut(display, observer=cie1931)
    refs = list(REFERENCE_GAMUTS)
    coverage = xr.concat([gamut_coverage(gamut, r) for r in refs], dim="reference_gamut")
    volume_cover = xr.concat([lab_coverage_volume(display, r, observer=cie1931)["coverage"] for r in refs],
                             dim="reference_gamut")
    return {
        "gamut_area_xy": gamut["area"],
        "gamut_area_uv": chromaticity_gamut(display, space="uv", observer=cie1931)["area"],
        "gamut_polygon": gamut["polygon"],
        "primary_xy": gamut["chromaticity_of_primary"],
        "gamut_coverage": coverage.assign_coords(reference_gamut=refs),
        "spectrum_locus_coverage": spectrum_locus_coverage(display, cie1931),
        "lab_volume": lab_gamut_volume(display, cie1931),
        "lab_coverage_volume": volume_cover.assign_coords(reference_gamut=refs),
    }


def _pad_primary(array: xr.DataArray, n: int) -> xr.DataArray:
    array = array.drop_vars([c for c in array.coords if "primary" in array[c].dims])
    array = array.assign_coords(primary=np.arange(array.sizes["primary"]))
    return array.reindex(primary=np.arange(n))


def _clean(array: xr.DataArray, keep=()) -> xr.DataArray:
    drop = [c for c in array.coords if c not in array.dims and c not in keep]
    return array.drop_vars(drop)


def unique_names(names: Sequence[str]) -> list[str]:
    """``names`` with repeats numbered.

    Parameters
    ----------
    names : sequence of str
        Display names in study order.

    Returns
    -------
    list of str
        The names, the second and later uses of a name followed by `` (2)``, `` (3)``, ...; a
        numbered label that is itself taken counts on.

    Examples
    --------
    >>> unique_names(["monitor", "projector", "monitor"])
    ['monitor', 'projector', 'monitor (2)']
    """
    out = []
    for name in names:
        label, i = name, 2
        while label in out:
            label, i = f"{name} ({i})", i + 1
        out.append(label)
    return out


def display_blocks(displays: Sequence[Display], roles: Sequence[str], observer: xr.Dataset | None = None,
                   progress: Callable[[str], None] | None = None) -> xr.Dataset:
    """Spectra and gamut variables of every display, stacked along ``display``.

    Parameters
    ----------
    displays : sequence of Display
        The displays, in study order.
    roles : sequence of str
        ``"reference"`` or ``"design"`` per display (coordinate ``display_role``).
    observer : Dataset, optional
        The observer of the gamut numbers (default :data:`GAMUT_OBSERVER` on the default grid).
    progress : callable, optional
        Called with one line of text per display.

    Returns
    -------
    Dataset
        The ``display`` variables of the study layout (module docstring): ``spectra`` (display,
        primary, wavelength) in W sr-1 m-2 nm-1, ``primary_label``, ``primary_xy`` and ``white_xy``
        (CIE 1931 xy), ``gamut_area_xy``, ``gamut_area_uv``, ``gamut_polygon`` (display, vertex,
        chromaticity), ``gamut_coverage`` and ``lab_coverage_volume`` (display, reference_gamut),
        ``spectrum_locus_coverage`` and ``lab_volume`` (CIELAB units³); coordinate ``display_role``. Repeated
        display names are numbered (:func:`unique_names`); displays with fewer primaries are padded
        with NaN and ``""``.

    Raises
    ------
    MetasimError
        From the gamut functions, for a display they do not allow (e.g. primaries on one line).

    References
    ----------
    CIE 15:2004 §7.3 (CIE 1931 xy, CIE 1976 u'v'), §8.2.1 (CIELAB); reference gamuts ITU-R BT.709-6,
    SMPTE EG 432-1, SMPTE RP 431-2, ITU-R BT.2020-2.

    Examples
    --------
    >>> import metasim
    >>> from metasim.emitters import gaussian
    >>> spectra = gaussian([455, 535, 615], 30, name=["B", "G", "R"])
    >>> monitor = metasim.calibrate_white(metasim.make_display(spectra, name="monitor"), "cie1931_2")
    >>> blocks = display_blocks([monitor], ["reference"])
    >>> list(blocks.display.values), list(blocks.display_role.values), blocks["gamut_coverage"].dims
    (['monitor'], ['reference'], ('display', 'reference_gamut'))
    >>> blocks["primary_label"].values.tolist(), blocks["lab_volume"].attrs["units"]
    ([['B', 'G', 'R']], 'CIELAB units³')
    """
    progress = progress or _quiet
    observer = observer if observer is not None else standard_observer(GAMUT_OBSERVER, default_grid().values)
    n = max(d.n_primaries for d in displays)
    parts = []
    for display in displays:
        block = {k: _clean(v) for k, v in _gamut_block(display, observer).items()}
        block["spectra"] = _pad_primary(display.spectra, n)
        block["primary_xy"] = _pad_primary(block["primary_xy"], n)
        labels = display.primaries + [""] * (n - display.n_primaries)
        block["primary_label"] = xr.DataArray(np.array(labels, dtype=str), dims="primary",
                                              coords={"primary": np.arange(n)})
        block["white_xy"] = _clean(xyz_to_xy(display.white_tristimulus(observer)))
        parts.append(xr.Dataset(block))
        progress(f"gamut of {display.name!r}: {float(block['gamut_area_xy']):.4f} xy area, "
                 f"CIELAB volume {format_volume(float(block['lab_volume']))}")
    max_vertex = max(p.sizes["vertex"] for p in parts)
    parts = [p.reindex(vertex=np.arange(max_vertex)) for p in parts]
    names = unique_names([d.name for d in displays])
    out = xr.concat(parts, dim=xr.DataArray(names, dims="display", name="display"))
    out = out.assign_coords(display_role=("display", list(roles)))
    out["primary_label"] = out["primary_label"].astype(str)
    return out


# -- decisions ---------------------------------------------------------------------------------------

def decision_block(reference, design: Display, observers: xr.Dataset, stimuli: xr.Dataset, *, strategy: str,
                   calibration_observer, rank: bool, categories: int, seed: int,
                   groups: xr.Dataset | None = None) -> xr.Dataset | None:
    """Calibration-observer ranking and per-category white-point offsets of one design.

    Parameters
    ----------
    reference : Display or "surfaces"
        As for :func:`run_study`.
    design : Display
        The one design judged.
    observers : Dataset
        Observer population (``observer`` dim), as for :func:`run_study`; a population with
        ``weight`` coordinates (observer categories) is used as the categories.
    stimuli : Dataset
        Stimulus set (``stimulus`` dim), as for :func:`run_study`; its reflectances (``kind`` =
        ``"reflectance"``) are also used for the white trims.
    strategy : str
        Drive strategy for more than three primaries (:data:`metasim.display.STRATEGIES`).
    calibration_observer : str or Dataset
        The observer the white trims start from, as for :func:`run_study`.
    rank : bool
        Rank the candidate calibration observers
        (:func:`metasim.metamerism.rank_calibration_observers`).
    categories : int
        Observer categories for the white trims (:func:`metasim.metamerism.white_point_offsets`);
        a population of categories is used as it is; 0 skips the trims.
    seed : int
        Seed of the category clustering.
    groups : Dataset, optional
        The observer categories already made from ``observers`` with ``categories`` and ``seed``
        (:func:`metasim.observer_categories`; a study makes them once for all its designs).

    Returns
    -------
    Dataset or None
        The ``calibration_*`` (calibration_observer), ``best_calibration_observer`` (0-d, text) and
        ``white_offset_xy`` (category, chromaticity), ``white_offset_uv_length`` (category) variables
        of the study layout (attribute ``best``: the best calibration observer or ``"n/a"``), or None
        when neither was asked for.

    Raises
    ------
    MetasimError
        From the ranking, clustering and white-offset functions, for inputs they do not allow.

    References
    ----------
    CIE 15:2004 §8.3 and CIE 142-2001 (CIEDE2000 differences of the ranking); CIE 15:2004 §7.3
    (CIE 1931 xy and CIE 1976 u'v' of the white offsets).

    Examples
    --------
    >>> import metasim
    >>> from metasim.emitters import gaussian
    >>> from metasim.metamerism import neutral_ramp
    >>> def display(name, peaks):
    ...     spectra = gaussian(peaks, [25, 30, 35], name=["B", "G", "R"])
    ...     return metasim.calibrate_white(metasim.make_display(spectra, name=name), "cie1931_2")
    >>> reference, design = display("monitor", [455, 535, 615]), display("candidate", [465, 530, 630])
    >>> audience = metasim.observer_population(3, seed=1, age_years=(20, 70))
    >>> block = decision_block(reference, design, audience, neutral_ramp(3), strategy="min_norm",
    ...                        calibration_observer="cie1931_2", rank=False, categories=2, seed=0)
    >>> sorted(block.data_vars), block["white_offset_xy"].dims, block.attrs["best"]
    (['white_offset_uv_length', 'white_offset_xy'], ('category', 'chromaticity'), 'n/a')
    >>> decision_block(reference, design, audience, neutral_ramp(3), strategy="min_norm",
    ...                calibration_observer="cie1931_2", rank=False, categories=0, seed=0) is None
    True
    """
    out, best = xr.Dataset(), "n/a"
    if rank:
        ranking = rank_calibration_observers(reference, design, observers, stimuli, strategy=strategy)
        best = str(ranking.attrs.get("best_calibration_observer", "n/a"))
        out["calibration_mean_delta_e"] = ranking["mean_delta_e"]
        out["calibration_p95_delta_e"] = ranking["p95_delta_e"]
        out["calibration_mean_delta_e_white"] = ranking["mean_delta_e_white"]
        out["calibration_mean_delta_e_stimuli"] = ranking["mean_delta_e_stimuli"]
        out["best_calibration_observer"] = xr.DataArray(best, attrs={
            "units": "1", "long_name": "calibration observer with the lowest mean CIE 2000 difference over the "
                                       "observers, white and stimuli"})
    if categories:
        group = groups if groups is not None else _study_categories(observers, categories, seed)
        offsets = white_point_offsets(reference, design, group, calibration_observer=calibration_observer,
                                      stimuli=stimuli if stimuli.attrs.get("kind") == "reflectance" else None)
        keep = [c for c in ("weight", "age_years") if c in offsets.coords]
        for name in ("offset_xy", "offset_uv_length"):
            if name in offsets:
                value = offsets[name].drop_vars([c for c in offsets[name].coords
                                                 if c not in offsets[name].dims and c not in keep])
                value = value.rename(observer="category").assign_coords(category=np.arange(value.sizes["observer"]))
                out[f"white_{name}"] = value.rename({c: f"category_{c}" for c in keep})
    if not out.data_vars:
        return None
    out.attrs["best"] = best
    return out


def _study_categories(observers: xr.Dataset, categories: int, seed: int) -> xr.Dataset:
    """The observer categories of the white trims: ``observers`` as they are when they carry category
    weights, else :func:`metasim.observer_categories` of them (at most one category per observer)."""
    if "weight" in observers.coords:
        return observers
    return observer_categories(observers, min(int(categories), observers.sizes["observer"]), seed=seed)


def overall_statistics(delta_e: xr.DataArray, *, interval: bool = True, level: float = DEFAULT_LEVEL,
                       resamples: int = DEFAULT_RESAMPLES, seed: int = 0, pooled: str | None = None) -> xr.Dataset:
    """mean, median, p95, max and shares above thresholds of ``delta_e`` over all observer ×
    stimulus pairs (observer weights if present), with intervals from resampling observers: the
    table of :func:`metasim.statistics.population_statistics` (``pooled`` says which stimuli).

    Parameters
    ----------
    delta_e : xarray.DataArray (observer, stimulus)
        CIE 2000 differences, ΔE00; a ``weight`` coordinate on ``observer`` weights the observers.
    interval : bool
        Add percentile intervals from resampling observers (default True).
    level : float
        Interval level, a share (default 0.95).
    resamples : int
        Resamples of the observers (default 400).
    seed : int
        Seed of the resampling.
    pooled : str, optional
        What the stimuli are, recorded in the result's ``pooled_stimuli`` attribute.

    Returns
    -------
    Dataset
        ``statistics`` (statistic: mean, median, p95, max) in ΔE00, ``share_above_threshold``
        (threshold), and with ``interval`` their ``*_interval`` (bound: lower, upper).

    Raises
    ------
    StatisticsError
        Interval settings that are not allowed (level outside (0, 1), too few resamples).

    References
    ----------
    CIE 142-2001 (CIEDE2000); quantiles: Hyndman & Fan (1996) The American Statistician 50(4),
    361-365, definition 7 (no weights) and definition 1 with weights (:mod:`metasim.statistics.summaries`);
    percentile intervals: Efron & Tibshirani (1993) An Introduction to the Bootstrap, ch. 13.

    Examples
    --------
    >>> import xarray as xr
    >>> delta_e = xr.DataArray([[0.0, 1.0], [2.0, 3.0]], dims=("observer", "stimulus"))
    >>> overall_statistics(delta_e, interval=False)["statistics"].round(6).values.tolist()  # numpy's linear
    [1.5, 1.5, 2.85, 3.0]
    """
    return population_statistics(delta_e, interval=interval, level=level, resamples=resamples, seed=seed,
                                 pooled=pooled)


def _comparison_variables(comparison: xr.Dataset) -> dict:
    """The ``comparison_*`` variables of a study from a :func:`paired_comparison` result."""
    out = {}
    for name in ("difference", "difference_interval", "share_above_threshold_difference",
                 "share_above_threshold_difference_interval", "share_second_closer", "share_second_closer_interval"):
        value = comparison[name]
        out[f"comparison_{name.replace('share_above_threshold', PAIR_SHARE)}"] = xr.DataArray(value.values, dims=value.dims, attrs={
            **value.attrs, "first": comparison.attrs["first"], "second": comparison.attrs["second"]})
    return out


def study_headlines(study: xr.Dataset, *, target_half_width: float | None = None) -> list[str]:
    """One-sentence answers of a study result, with their intervals (for the command line and the
    report): the comparison of two designs when there is one, each design against the reference,
    and the observers a chosen half-width on the 95th percentile needs.

    Parameters
    ----------
    study : Dataset
        A study result (:func:`run_study` layout), at least ``delta_e_2000_overall`` (design,
        statistic) in ΔE00; its ``*_interval``, ``share_of_pairs_above_threshold`` (with its
        interval) and ``comparison_*`` variables are used when present.
    target_half_width : float, optional
        The interval half-width on the 95th percentile the population-size advice aims at, ΔE00
        (None: the study's ``target_half_width`` attribute, else 0.1).

    Returns
    -------
    list of str
        One sentence per answer: the comparison first (two designs with intervals), then one per
        design, then the population-size advice (with intervals only); empty for a result without
        ``delta_e_2000_overall`` or ``design``.

    Examples
    --------
    >>> import xarray as xr
    >>> study = xr.Dataset({"delta_e_2000_overall": (("design", "statistic"), [[0.61, 0.52, 1.43, 2.2]])},
    ...                    coords={"design": ["candidate"], "statistic": ["mean", "median", "p95", "max"]},
    ...                    attrs={"reference": "the studio monitor"})
    >>> study_headlines(study)
    ['candidate differs from the studio monitor by a 95th percentile of 1.43 CIE 2000 units, median 0.52.']
    """
    if "delta_e_2000_overall" not in study or "design" not in study.dims:
        return []
    reference = str(study.attrs.get("reference", "the reference")) or "the reference"
    overall = study["delta_e_2000_overall"]
    interval = study.get("delta_e_2000_overall_interval")
    lines = []
    if "comparison_share_second_closer" in study:
        first = study["comparison_share_second_closer"].attrs["first"]
        second = study["comparison_share_second_closer"].attrs["second"]
        paired = xr.Dataset({"statistics": overall, "share_second_closer": study["comparison_share_second_closer"],
                             "share_second_closer_interval": study["comparison_share_second_closer_interval"]},
                            attrs={"first": first, "second": second})
        if interval is not None:
            paired["statistics_interval"] = interval
        lines.append(sentences.comparison_headline(paired, reference))
    for name in study["design"].values:
        table = xr.Dataset({"statistics": overall.sel(design=name)})
        if interval is not None:
            table["statistics_interval"] = interval.sel(design=name)
        if "share_of_pairs_above_threshold" in study:
            table["share_above_threshold"] = study["share_of_pairs_above_threshold"].sel(design=name)
            if "share_of_pairs_above_threshold_interval" in study:
                table["share_above_threshold_interval"] = study["share_of_pairs_above_threshold_interval"].sel(
                    design=name)
        lines.append(sentences.design_headline(table, str(name), reference))
    if interval is not None:
        target = target_half_width or float(study.attrs.get("target_half_width", DEFAULT_HALF_WIDTH))
        for name in study["design"].values:
            advice = sentences.population_advice(interval.sel(design=name, statistic="p95"),
                                                 int(study.sizes.get("observer", study.attrs.get("observer_count", 0))),
                                                 target)
            if advice:
                lines.append(f"{name}: {advice[0].lower()}{advice[1:]}")
    return lines


def study_attributes(engine: dict, observers: xr.Dataset, stimuli: xr.Dataset, spec_texts: dict | None, reference,
                     design_names: Sequence[str], strategy: str, calibration) -> dict:
    """The attributes of a study result (module docstring) from the engine's and the inputs'.

    Parameters
    ----------
    engine : dict
        The attributes of a :func:`metasim.mismatch` result (``model``, ``reference``,
        ``white_matched``, ...); missing ones are recorded empty.
    observers : Dataset
        The observer population (``observer`` dim); its ``model``, ``parameters`` (JSON text or a
        record) and ``seed`` attributes are recorded.
    stimuli : Dataset
        The stimulus set (``stimulus`` dim); its ``description``, ``kind`` and ``source``.
    spec_texts : dict or None
        Display name → text of its spec file.
    reference : Display or "surfaces"
        The reference (its name goes in the title).
    design_names : sequence of str
        The design names, for the title.
    strategy : str
        The drive strategy used.
    calibration : str or Dataset
        The calibration observer used (``calibration_observer`` of :func:`run_study`).

    Returns
    -------
    dict
        ``result_kind``, ``title``, ``model``, the observer, engine, stimulus and gamut settings,
        ``display_specs`` and ``metasim_version`` (module docstring).

    Examples
    --------
    >>> import metasim
    >>> from metasim.metamerism import neutral_ramp
    >>> attrs = study_attributes({"model": "demo engine"}, metasim.observer_population(3, seed=4), neutral_ramp(3),
    ...                          None, "surfaces", ["candidate"], "min_norm", "cie1931_2")
    >>> attrs["title"], attrs["observer_seed"], attrs["observer_count"], attrs["result_kind"]
    ('candidate against real objects', 4, 3, 'metasim study')
    """
    population = dict(observers.attrs)
    parameters = population.get("parameters", "{}")
    if isinstance(parameters, str):
        try:
            parameters = json.loads(parameters)
        except ValueError:
            parameters = {"text": parameters}
    return {
        "result_kind": RESULT_KIND,
        "title": f"{', '.join(design_names)} against "
                 f"{reference.name if isinstance(reference, Display) else 'real objects'}",
        "model": engine.get("model", ""),
        "observer_model": str(population.get("model", engine.get("observer_model", ""))),
        "observer_parameters": parameters,
        "observer_seed": population.get("seed", "none"),
        "observer_count": int(observers.sizes["observer"]),
        "observer_categories": bool("weight" in observers.coords),
        "calibration_observer": calibration,
        "drive_strategy": strategy,
        "white_matched": engine.get("white_matched", True),
        "adapted_white": engine.get("adapted_white", ""),
        "reference": engine.get("reference", ""),
        "reference_kind": engine.get("reference_kind", ""),
        "stimuli": stimuli.attrs.get("description", ""),
        "stimulus_kind": stimuli.attrs.get("kind", ""),
        "stimulus_source": stimuli.attrs.get("source", ""),
        "thresholds_source": engine.get("thresholds_source", "common practice, no source"),
        "gamut_observer": GAMUT_OBSERVER,
        "gamut_references": "primaries from colour-science: ITU-R BT.709, SMPTE EG 432-1, SMPTE RP 431-2, ITU-R BT.2020",
        "extra_primary_candidates": "laser lines 450-650 nm, power of the mean base primary, CIELAB white fixed",
        "display_specs": dict(spec_texts or {}),
        "metasim_version": __version__,
    }


# -- the study ---------------------------------------------------------------------------------------

def run_study(reference, designs: Sequence[Display], observers: xr.Dataset, stimuli: xr.Dataset, *,
              calibration_observer="cie1931_2", strategy: str = "min_norm", age_bands=DECADES,
              extra_bases: Sequence | None = None, spec_texts: dict | None = None,
              progress: Callable[[str], None] | None = None, extra_peaks_nm=EXTRA_PEAKS_NM,
              rank_calibration: bool = True, white_categories: int = WHITE_CATEGORIES, seed: int = 0,
              intervals: bool = True, level: float = DEFAULT_LEVEL, resamples: int | None = None,
              target_half_width: float | None = None) -> xr.Dataset:
    """Gamut of every display and the population mismatch of each design against ``reference``.

    For every display: chromaticity gamut, CIELAB volume and coverage of the reference gamuts
    (CIE 1931 2° observer). For every design: :func:`metasim.mismatch` against ``reference`` with
    its summaries, the statistics over all pairs, the observer metamerism index per stimulus, the
    gain of one extra laser primary and, optionally, the calibration-observer ranking and the white
    trims per observer category.

    Parameters
    ----------
    reference : Display or "surfaces"
        The reference display, or ``"surfaces"`` (old name ``"objects"``): the stimuli as real surfaces under their own
        illuminant (reflectance stimuli).
    designs : sequence of Display
        The candidate displays.
    observers : Dataset
        Observer population (:func:`metasim.observer_population` or
        :func:`metasim.observer_categories`); or what :func:`metasim.mismatch` accepts (standard
        observer names, colour-science colour-matching functions).
    stimuli : Dataset
        A stimulus set (:mod:`metasim.metamerism.stimuli`), or colour-science reflectances.
    calibration_observer : str or Dataset
        The observer both sides are matched for (as for :func:`metasim.mismatch`).
    strategy : str
        Drive strategy for more than three primaries (:data:`metasim.display.STRATEGIES`).
    age_bands : "decades" or sequence of float or None
        Age-band edges in years; ``"decades"`` (default): the decades covering the observers'
        ages (:func:`metasim.metamerism.summary.decade_age_bands`); None: no bands.
    extra_bases : sequence, optional
        Per design, the primary labels the extra-primary gain starts from (None: all primaries).
    spec_texts : dict, optional
        Display name → text of its spec file, kept in the ``display_specs`` attribute.
    progress : callable, optional
        Called with one line of text after each step (gamut per display, mismatch, gain and
        choices per design).
    extra_peaks_nm : array_like
        Candidate peaks of the extra laser primary, nm (default 450-650 nm every 1 nm).
    rank_calibration : bool
        Rank the candidate calibration observers per design.
    white_categories : int
        Observer categories of the white trims (0: none).
    seed : int
        Seed of the category clustering and of the resampling of observers.
    intervals : bool
        Percentile intervals from resampling observers for the statistics over all pairs, the
        white differences, the comparison of two designs and the population-size advice
        (:mod:`metasim.statistics`); default on.
    level, resamples : float, int
        Interval level (default 0.95) and resamples (None: 400; at least 200).
    target_half_width : float
        The interval half-width on the 95th percentile the population-size advice aims at, CIE
        2000 units (None: 0.1).

    Returns
    -------
    Dataset
        The study result (layout in the module docstring).

    Raises
    ------
    MetasimError
        From the library functions called, for inputs they do not allow.

    Examples
    --------
    >>> import metasim
    >>> from metasim.emitters import gaussian
    >>> from metasim.metamerism import neutral_ramp
    >>> def display(name, peaks):
    ...     spectra = gaussian(peaks, [25, 30, 35], name=["B", "G", "R"])
    ...     return metasim.calibrate_white(metasim.make_display(spectra, name=name), "cie1931_2")
    >>> reference, design = display("monitor", [455, 535, 615]), display("candidate", [465, 530, 630])
    >>> audience = metasim.observer_population(4, seed=1, age_years=(20, 70))
    >>> study = metasim.run_study(reference, [design], audience, neutral_ramp(3), extra_peaks_nm=[500],
    ...                           rank_calibration=False, white_categories=0)
    >>> study.attrs["result_kind"], list(study.display.values), study.sizes["observer"]
    ('metasim study', ['monitor', 'candidate'], 4)
    """
    progress = progress or _quiet
    resamples = DEFAULT_RESAMPLES if resamples is None else resamples
    target_half_width = DEFAULT_HALF_WIDTH if target_half_width is None else target_half_width
    if intervals:
        check_interval_settings(level, resamples)
        if not (isinstance(target_half_width, (int, float)) and np.isfinite(target_half_width) and target_half_width > 0):
            raise StatisticsError(f"target half-width {target_half_width!r} is not allowed; give a number > 0 "
                                  "(CIE 2000 units)")
    cie1931 = standard_observer(GAMUT_OBSERVER, default_grid().values)
    designs = list(designs)
    if designs and isinstance(designs[0], Display):  # colour-science inputs converted once, on the designs' grid
        grid = designs[0].wavelengths.values
        if not isinstance(observers, xr.Dataset):
            observers = resolve_observers(observers, grid)
        stimuli = as_stimuli(stimuli, grid)
    pooled = f"{stimuli.sizes['stimulus']} stimuli ({stimuli.attrs.get('description', 'stimulus set')})"
    displays = ([reference] if isinstance(reference, Display) else []) + designs
    roles = (["reference"] if isinstance(reference, Display) else []) + ["design"] * len(designs)
    blocks = display_blocks(displays, roles, cie1931, progress)
    design_names = list(blocks.display.values[len(displays) - len(designs):])
    results, gains, choices = [], [], []
    groups = None  # the white trims' categories: the same for every design, made once (a seeded clustering)
    for i, design in enumerate(designs):
        result = mismatch(reference, design, observers, stimuli, calibration_observer=calibration_observer,
                          strategy=strategy, age_bands=age_bands)
        settings = {"interval": intervals, "level": level, "resamples": resamples, "seed": seed}
        table = overall_statistics(result["delta_e_2000"], pooled=pooled, **settings)
        white = population_statistics(result["delta_e_white"], over="observer", pooled="the white",
                                      includes_white=True, **settings)
        keep = [v for v in MISMATCH_VARIABLES if v in result]
        part = result[keep]
        part = part.drop_vars([c for c in part.coords if c not in part.dims and "observer" not in part[c].dims])
        part["delta_e_2000_overall"] = _plain(table["statistics"], "CIE 2000 difference over all observer x "
                                              "stimulus pairs")
        part["share_of_pairs_above_threshold"] = _plain(table["share_above_threshold"], "share of observer x "
                                                        "stimulus pairs whose CIE 2000 difference is above each "
                                                        "threshold")
        part["delta_e_white_overall"] = _plain(white["statistics"], "CIE 2000 difference between the two whites, "
                                               "statistics over observers")
        if intervals:
            for name, source in (("delta_e_2000_overall_interval", table["statistics_interval"]),
                                 ("share_of_pairs_above_threshold_interval", table["share_above_threshold_interval"]),
                                 ("delta_e_white_overall_interval", white["statistics_interval"])):
                part[name] = _plain(source, source.attrs["long_name"])
            p95_interval = table["statistics_interval"].sel(statistic="p95")
            part["observers_needed_p95"] = xr.DataArray(
                observers_needed(float(half_width(p95_interval)), observers.sizes["observer"], target_half_width),
                attrs={"units": "1", "long_name": "observers needed for the target interval half-width on the 95th "
                       "percentile (half-widths shrink as 1/sqrt(n))", "target_half_width": float(target_half_width)})
        part["metamerism_index_by_stimulus"] = summarise(result["metamerism_index"], age_bands=(),
                                                         name="metamerism_index")["metamerism_index_by_stimulus"]
        results.append(part)
        p95 = sentences.with_interval(table["statistics"].sel(statistic="p95"),
                                      table["statistics_interval"].sel(statistic="p95") if intervals else None)
        progress(f"mismatch of {design.name!r}: {observers.sizes['observer']} observers x "
                 f"{stimuli.sizes['stimulus']} stimuli, 95th percentile {p95} CIE 2000 units")
        base = design.spectra
        labels = (extra_bases or [None] * len(designs))[i]
        if labels:
            base = base.sel(primary=list(labels))
        gain = extra_primary_gain(base, cie1931, peak_nm=extra_peaks_nm, kind="laser", volume=True)
        gains.append(gain[["area_gain_share", "volume_gain_share", "area_gain", "volume_gain"]]
                     .assign(extra_base=xr.DataArray(", ".join(str(p) for p in base.primary.values))))
        progress(f"extra-primary gain of {design.name!r}: {len(extra_peaks_nm)} candidate lines")
        if rank_calibration or white_categories:
            if (groups is None and white_categories and isinstance(seed, (int, np.integer))
                    and isinstance(observers, xr.Dataset)):
                groups = _study_categories(observers, white_categories, seed)
            choice = decision_block(reference, design, observers, stimuli, strategy=strategy,
                                    calibration_observer=calibration_observer, rank=rank_calibration,
                                    categories=white_categories, seed=seed, groups=groups)
            if choice is not None:
                choices.append(choice)
                progress(f"calibration choices for {design.name!r}: best {choice.attrs.get('best', 'n/a')}")
    engine = dict(results[0].attrs) if results else {}
    design_dim = xr.DataArray(design_names, dims="design", name="design")
    mism = xr.concat(results, dim=design_dim, combine_attrs="drop_conflicts")
    gain = xr.concat(gains, dim=design_dim)
    parts = [blocks, mism, gain]
    if choices and len(choices) == len(designs):
        parts.append(xr.concat(choices, dim=design_dim, combine_attrs="drop_conflicts"))
    if intervals and len(designs) == 2:  # the two designs seen by the same observers
        comparison = paired_comparison(mism["delta_e_2000"].isel(design=0, drop=True),
                                       mism["delta_e_2000"].isel(design=1, drop=True), labels=design_names,
                                       level=level, resamples=resamples, seed=seed, pooled=pooled)
        parts.append(xr.Dataset(_comparison_variables(comparison)))
    out = xr.merge(parts, combine_attrs="override")
    out.attrs = study_attributes(engine, observers, stimuli, spec_texts, reference, design_names, strategy,
                                 calibration_observer)
    if intervals:
        out.attrs.update({key: table.attrs[key] for key in ("interval_method", "interval_level", "interval_resamples",
                                                            "interval_seed")})
        out.attrs["target_half_width"] = float(target_half_width)
    out.attrs["pooled_stimuli"] = pooled
    for name, (units, long_name) in VARIABLE_ATTRS.items():
        if name in out:
            out[name].attrs.update({"units": units, "long_name": long_name})
    for name in out.data_vars:
        out[name].attrs.setdefault("long_name", name.replace("_", " "))
        out[name].attrs.setdefault("units", "1")
    for name in out.data_vars:  # an interval says of what: "95 % interval of each statistic, of <what>"
        base = name.removesuffix("_interval")
        if base != name and base in out and "of each" in str(out[name].attrs.get("long_name", "")):
            out[name].attrs["long_name"] += f": {out[base].attrs['long_name']}"
    return out


def _plain(value: xr.DataArray, long_name: str) -> xr.DataArray:
    """A table variable without its coordinates (the study supplies them), attributes kept."""
    return xr.DataArray(value.values, dims=value.dims, coords={d: value[d].values for d in value.dims if d in value.coords},
                        attrs={**value.attrs, "long_name": long_name})


def as_study(ds: xr.Dataset) -> xr.Dataset:
    """A result in the study layout: a plain :func:`metasim.mismatch` Dataset gains a one-entry
    ``design`` dim (named by its ``test`` attribute); a study is returned as it is.

    Parameters
    ----------
    ds : Dataset
        A study result, or a :func:`metasim.mismatch` result (``delta_e_2000`` over observer,
        stimulus).

    Returns
    -------
    Dataset
        Every data variable of a mismatch result gains a leading one-entry ``design`` dim (a copy;
        the input is unchanged); any other Dataset as it is.

    Examples
    --------
    >>> import xarray as xr
    >>> result = xr.Dataset({"delta_e_2000": (("observer", "stimulus"), [[0.5, 1.5]])}, attrs={"test": "lasers"})
    >>> as_study(result)["delta_e_2000"].dims, list(as_study(result).design.values)
    (('design', 'observer', 'stimulus'), ['lasers'])
    """
    if "delta_e_2000" in ds and "design" not in ds["delta_e_2000"].dims:
        name = str(ds.attrs.get("test", "design"))
        ds = ds.copy()
        for v in list(ds.data_vars):
            ds[v] = ds[v].expand_dims(design=[name])
    return ds


__all__ = ["RESULT_KIND", "GAMUT_OBSERVER", "EXTRA_PEAKS_NM", "MISMATCH_VARIABLES", "WHITE_CATEGORIES",
           "VARIABLE_ATTRS", "run_study", "display_blocks", "decision_block", "overall_statistics", "study_headlines",
           "study_attributes", "unique_names", "as_study"]
