"""Per-design summaries: one :func:`metasim.mismatch` call and the gamut numbers of many designs, reduced.

A sweep keeps, for every design, only numbers that do not grow with the population or the stimulus
set, so a chunk of designs is small on disk however many observers and colours it was judged by:

=======================================  ==============================================================
variable (dims)                          holds
=======================================  ==============================================================
``delta_e_2000_overall`` (design, statistic)   mean, median, p95, max of CIE 2000 over all observer ×
                                         stimulus pairs (observer weights when present)
``share_of_pairs_above_threshold`` (design, threshold)   share of pairs above 1, 2, 3 CIE 2000 units
                                         (before: ``share_beyond_overall``)
``delta_e_2000_by_age`` (design, statistic, age_band)   the same statistics per age band (needs ages)
``delta_e_white_overall`` (design, statistic)  CIE 2000 between the two whites, statistics over observers
                                        (as in a study; before: ``delta_e_white``)
``metamerism_index_overall`` (design, statistic)   observer-change metamerism index over all pairs
``delta_e_itp_overall`` (design, statistic)        ΔE_ITP over all pairs (HDR transfer functions only)
``out_of_gamut_count`` (design)          stimuli outside the design's gamut (clipped)
``delta_e_2000_calibration_max`` (design)     largest CIE 2000 residual for the calibration observer
``gamut_area_xy`` (design)               CIE 1931 xy area of the chromaticity gamut
``gamut_coverage`` (design, reference_gamut)   share of BT.709, Display P3, BT.2020 xy area covered
``primary_xy`` (design, primary, chromaticity) CIE 1931 xy of each primary
``lab_volume`` (design)                  CIELAB volume of the colour solid (optional: slower)
``white_efficacy`` (design)              luminous efficacy of radiation of the white, lm/W (CIE 1931 ȳ)
``delta_e_2000_by_stimulus`` (design, statistic, stimulus)   statistics over observers for each
                                         stimulus (optional, ``per_stimulus=True``: grows with the set)
``share_of_observers_above_threshold`` (design, threshold, stimulus)   share of observers above each
                                         threshold, per stimulus (optional, with ``per_stimulus``;
                                         before: ``share_beyond``)
``*_interval``, ``delta_e_2000_p95_replicates``  intervals and paired replicates (optional,
                                         ``intervals``; :mod:`metasim.sweep.ranking`)
=======================================  ==============================================================
"""

from __future__ import annotations

import numpy as np
import xarray as xr

from metasim.display import Display
from metasim.errors import SweepError
from metasim.colorimetry.efficacy import luminous_efficacy
from metasim.gamut import lab_gamut_volume
from metasim.gamut.chromaticity import xy_gamut_numbers
from metasim.metamerism.summary import OBSERVER_SHARE, PAIR_SHARE, STATISTICS, summary_attrs
from metasim.observers import standard_observer
from metasim.observers.standard import standard_cmf
from metasim.spectra import grid_step
from metasim.colorimetry.integration import spectral_products
from metasim.statistics import statistics_along
from metasim.sweep.evaluate import SweepContext, design_statistics, prepare
from metasim.sweep.ranking import interval_variables
from metasim.units import DELTA_E00, DELTA_E_ITP

#: Reference gamuts of the coverage numbers.
COVERAGE_GAMUTS = ("bt709", "display_p3", "bt2020")


def statistics_over(values: np.ndarray, weights: np.ndarray | None) -> np.ndarray:
    """mean, median, p95, max along axis 0 (weights per row, NaN ignored): shape (4, ...), by the
    statistics layer (:func:`metasim.statistics.statistics_along`; equal weights without NaN take
    its sorted-row fast path)."""
    return statistics_along(values, weights, 0)


def design_summaries(test: Display, reference, observers, stimuli, *, lab_volume: bool = False,
                     per_stimulus: bool = False, intervals: dict | None = None,
                     context: SweepContext | None = None, **mismatch_options) -> xr.Dataset:
    """Mismatch and gamut summaries of every design of ``test`` (a Display with a ``design`` dim).

    Parameters
    ----------
    test : Display
        The candidate designs, stacked along ``design`` (:func:`metasim.display.stack_designs`, or
        :func:`metasim.make_display` of a ``design × primary × wavelength`` array).
    reference, observers, stimuli, mismatch_options
        As for :func:`metasim.mismatch` (all designs are evaluated at once, with the same numbers).
    lab_volume : bool
        Also compute the CIELAB volume of each design's colour solid (slower).
    per_stimulus : bool
        Also keep the statistics over observers and the shares above the thresholds of every
        stimulus (design × stimulus numbers: which colours a design gets wrong).
    intervals : dict, optional
        ``level``, ``resamples`` and ``seed`` of intervals from resampling observers: adds the
        interval and replicate variables of :mod:`metasim.sweep.ranking` (the same resamples in
        every chunk, so the designs' replicates are paired).
    context : SweepContext, optional
        The reference side prepared once for many blocks of designs (:func:`metasim.sweep.evaluate.prepare`
        with the same inputs); ``reference``, ``observers``, ``stimuli`` and the options are then
        taken from it.

    Returns
    -------
    xarray.Dataset (design, ...)
        The variables of the module docstring over ``design`` (the designs' coordinates kept):
        CIE 2000 differences in ΔE00 (statistics over observers and stimuli, white, metamerism
        index), gamut area and coverage (unit 1), and with ``lab_volume`` the CIELAB volume.

    Raises
    ------
    SweepError
        ``test`` not a Display with a ``design`` dim.
    MismatchError, StimulusError, ObserverError, DisplayError
        Inputs the mismatch procedure refuses (as :func:`metasim.mismatch`).

    References
    ----------
    CIE 15:2004 (CIELAB); Sharma, Wu & Dalal (2005) Color Res. Appl. 30, 21-30,
    doi:10.1002/col.20070 (CIE 2000 colour difference); ISO 18314-4:2024 (metamerism index
    construction).

    Examples
    --------
    >>> import metasim
    >>> from metasim.emitters import gaussian, laser_line
    >>> from metasim.metamerism import neutral_ramp
    >>> from metasim.sweep import chunk_display, design_summaries, display_settings_of
    >>> monitor = metasim.calibrate_white(metasim.make_display(gaussian([455, 535, 615], [25, 30, 35],
    ...                                                                 name=["B", "G", "R"])), "cie1931_2")
    >>> designs = metasim.design_grid("laser", {"R": [630, 650]}, 1.0, base=laser_line([465, 532, 638], 1.0,
    ...                                                                                 name=["B", "G", "R"]))
    >>> test = chunk_display(designs, display_settings_of(monitor))
    >>> summary = design_summaries(test, monitor, metasim.observer_population(3, seed=1, age_years=(20, 70)),
    ...                            neutral_ramp(3))
    >>> summary["delta_e_2000_overall"].dims, summary["delta_e_2000_overall"].sel(statistic="median").round(2).values.tolist()
    (('design', 'statistic'), [4.74, 4.37])
    """
    if context is None:
        context = prepare(reference, test, observers, stimuli, **mismatch_options)
    return summary_dataset(context, [summary_parts(context, test, lab_volume=lab_volume, per_stimulus=per_stimulus,
                                                   intervals=intervals)])


def summary_parts(context: SweepContext, test: Display, *, lab_volume: bool = False,
                  per_stimulus: bool = False, intervals: dict | None = None, raw: np.ndarray | None = None) -> dict:
    """The summaries of one block of designs as plain values: ``{"variables": {name: (dims, values,
    attrs)}, "coords": {name: Variable}}``, every variable with a leading ``design`` dim except
    ``observers_per_age_band``. Blocks of one sweep join with :func:`summary_dataset`. ``raw``: the
    designs' spectra before white calibration, if ``test`` was made from them (see
    :func:`metasim.sweep.evaluate.design_statistics`). ``intervals``: as for :func:`design_summaries`
    (the block's differences are then kept until its intervals are made)."""
    if not isinstance(test, Display) or test.batch_dims != ["design"]:
        dims = test.batch_dims if isinstance(test, Display) else type(test).__name__
        raise SweepError(f"design_summaries needs a Display with one 'design' dim, got {dims}")
    numbers = design_statistics(context, test, per_stimulus, raw, differences=intervals is not None)
    statistic_attrs = {"units": DELTA_E00}
    pooled = summary_attrs(context.weights)  # what each summary pools, as the engine's summaries say
    design_dims = ("design", "statistic")
    out = {
        "delta_e_2000_overall": (design_dims, numbers["delta_e_2000_overall"], {
            **statistic_attrs, "long_name": "CIE 2000 difference over all observer x stimulus pairs"}),
        "metamerism_index_overall": (design_dims, numbers["metamerism_index_overall"], {
            **statistic_attrs, "long_name": "observer-change metamerism index over all observer x stimulus pairs"}),
    }
    if "delta_e_itp_overall" in numbers:
        out["delta_e_itp_overall"] = (design_dims, numbers["delta_e_itp_overall"], {
            "units": DELTA_E_ITP, "long_name": "ITU-R BT.2124 difference over all observer x stimulus pairs"})
    out["delta_e_white_overall"] = (design_dims, numbers["delta_e_white"], {
        "units": DELTA_E00, "long_name": "CIE 2000 difference between the two whites, statistics over observers"})
    out[PAIR_SHARE] = (("design", "threshold"), numbers[PAIR_SHARE], pooled[PAIR_SHARE])
    if "delta_e_2000_by_age" in numbers:
        out["delta_e_2000_by_age"] = (("design", "statistic", "age_band"), numbers["delta_e_2000_by_age"],
                                      pooled["by_age"])
    out["out_of_gamut_count"] = ("design", numbers["out_of_gamut_count"], {
        "units": "1", "long_name": "stimuli outside the design's gamut (clipped)"})
    out["delta_e_2000_calibration_max"] = ("design", numbers["delta_e_2000_calibration_max"], {
        "units": DELTA_E00, "long_name": "largest CIE 2000 difference for the calibration observer"})

    spectra = test.spectra.variable.transpose("design", "primary", "wavelength").values
    wavelengths = test.wavelengths.values
    n_designs, n_primaries, n_wavelengths = spectra.shape
    xyz = (spectral_products(spectra.reshape(-1, n_wavelengths), standard_cmf("cie1931_2", wavelengths))
           * grid_step(wavelengths)).reshape(n_designs, n_primaries, 3)  # as tristimulus(scale="none")
    design_labels = test.spectra.coords.variables["design"].values if "design" in test.spectra.coords else None
    area, coverage, xy = xy_gamut_numbers(xyz, COVERAGE_GAMUTS, labels=design_labels)
    out["gamut_area_xy"] = ("design", area, {"units": "1", "long_name": "CIE 1931 xy gamut area (convex hull of the primaries)"})
    out["gamut_coverage"] = (("design", "reference_gamut"), coverage, {
        "units": "1", "long_name": "share of each reference gamut's CIE 1931 xy area covered"})
    out["primary_xy"] = (("design", "primary", "chromaticity"), xy, {
        "units": "1", "long_name": "CIE 1931 xy chromaticity of each primary"})
    cie1931 = standard_observer("cie1931_2", wavelengths)
    efficacy = luminous_efficacy(test.white_spectrum(), cie1931).transpose("design")
    out["white_efficacy"] = ("design", efficacy.values, dict(efficacy.attrs))
    if lab_volume:
        volume = lab_gamut_volume(test, cie1931).transpose("design")
        out["lab_volume"] = ("design", volume.values, dict(volume.attrs))
    if per_stimulus:
        out["delta_e_2000_by_stimulus"] = (("design", "statistic", "stimulus"), numbers["delta_e_2000_by_stimulus"],
                                           pooled["by_stimulus"])
        out[OBSERVER_SHARE] = (("design", "threshold", "stimulus"), numbers[OBSERVER_SHARE], pooled[OBSERVER_SHARE])
    interval_attrs = {}
    if intervals is not None:
        stimuli = int(context.xyz_reference.shape[1])
        extra, interval_attrs = interval_variables(_differences(context, numbers["differences"]),
                                                   pooled=f"{stimuli} stimuli ({context.attrs.get('stimuli', 'stimulus set')})",
                                                   **intervals)
        out.update({name: (value.dims, value.values, dict(value.attrs)) for name, value in extra.items()})
    coords = {k: v.variable for k, v in test.spectra.coords.items() if v.dims == ("design",)}
    return {"variables": out, "coords": coords, "primaries": test.primaries, "attrs": interval_attrs}


def _differences(context: SweepContext, values: np.ndarray) -> xr.DataArray:
    """A block's CIE 2000 differences (design, observer, stimulus) labelled for the statistics
    layer: the observers' weights as the ``weight`` coordinate when they have them."""
    coords = {}
    if context.weights is not None:
        coords["weight"] = ("observer", context.weights)
    return xr.DataArray(values, dims=("design", "observer", "stimulus"), coords=coords)


def summary_dataset(context: SweepContext, parts: list[dict]) -> xr.Dataset:
    """One Dataset over ``design`` from the :func:`summary_parts` of consecutive blocks of designs."""
    first = parts[0]
    variables = {}
    for name, (dims, values, attrs) in first["variables"].items():
        if len(parts) > 1:
            values = np.concatenate([part["variables"][name][1] for part in parts])
        variables[name] = (dims, values, attrs)
    if context.bands is not None:
        variables["observers_per_age_band"] = ("age_band", np.asarray(context.bands[1]),
                                               summary_attrs(context.weights)["observers_per_age_band"])
    coords = {}
    for name, variable in first["coords"].items():
        if len(parts) > 1:
            variable = xr.Variable(variable.dims, np.concatenate([part["coords"][name].values for part in parts]),
                                   variable.attrs)
        coords[name] = variable
    coords.update({"statistic": list(STATISTICS), "reference_gamut": list(COVERAGE_GAMUTS),
                   "primary": first["primaries"], "chromaticity": ["x", "y"],
                   "threshold": xr.Variable("threshold", context.thresholds,
                                            {"units": "1", "long_name": "CIE 2000 difference threshold"})})
    if context.bands is not None:
        coords["age_band"] = list(context.bands[0])
    if first["attrs"]:
        coords["bound"] = ["lower", "upper"]
    if "delta_e_2000_by_stimulus" in variables:
        coords.update({k: v.variable for k, v in context.side.targets.coords.items() if v.dims == ("stimulus",)})
    summary = xr.Dataset(variables, coords=coords)
    summary.attrs = dict(context.attrs)
    summary.attrs["observer_count"] = int(context.cmf.shape[0])
    summary.attrs["stimulus_count"] = int(context.xyz_reference.shape[1])
    summary.attrs.update(first["attrs"])
    return summary


__all__ = ["COVERAGE_GAMUTS", "design_summaries", "statistics_over", "summary_dataset", "summary_parts"]
