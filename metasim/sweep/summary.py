"""Per-design summaries: one :func:`metasim.mismatch` call and the gamut numbers of many designs, reduced.

A sweep keeps, for every design, only numbers that do not grow with the population or the stimulus
set, so a chunk of designs is small on disk however many observers and colours it was judged by:

=======================================  ==============================================================
variable (dims)                          holds
=======================================  ==============================================================
``delta_e_2000_overall`` (design, statistic)   mean, median, p95, max of CIE 2000 over all observer ×
                                         stimulus pairs (observer weights when present)
``share_beyond_overall`` (design, threshold)   share of pairs beyond 1, 2, 3 CIE 2000 units
``delta_e_2000_by_age`` (design, statistic, age_band)   the same statistics per age band (needs ages)
``delta_e_white`` (design, statistic)    CIE 2000 between the two whites, statistics over observers
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
``share_beyond`` (design, threshold, stimulus)   share of observers beyond each threshold, per
                                         stimulus (optional, with ``per_stimulus``)
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
from metasim.gamut import chromaticity_gamut, gamut_coverage, lab_gamut_volume
from metasim.metamerism import mismatch
from metasim.metamerism.summary import STATISTICS, observer_weights
from metasim.statistics import statistics_along
from metasim.sweep.ranking import interval_variables
from metasim.observers import standard_observer

#: Reference gamuts of the coverage numbers.
COVERAGE_GAMUTS = ("bt709", "display_p3", "bt2020")


def statistics_over(values: np.ndarray, weights: np.ndarray | None) -> np.ndarray:
    """mean, median, p95, max along axis 0 (weights per row, NaN ignored): shape (4, ...), by the
    statistics layer (:func:`metasim.statistics.statistics_along`; equal weights without NaN take
    its sorted-row fast path)."""
    return statistics_along(values, weights, 0)


def _pairs_table(array: xr.DataArray, weights, long_name: str, units: str = "1") -> xr.DataArray:
    """Statistics over all observer × stimulus pairs, per design: (design, statistic)."""
    values = array.transpose("observer", "stimulus", "design").values
    flat = values.reshape(-1, values.shape[-1])
    w = None if weights is None else np.repeat(weights, values.shape[1])
    return xr.DataArray(statistics_over(flat, w).T, dims=("design", "statistic"),
                        attrs={"units": units, "long_name": long_name})


def design_summaries(test: Display, reference, observers, stimuli, *, lab_volume: bool = False,
                     per_stimulus: bool = False, intervals: dict | None = None, **mismatch_options) -> xr.Dataset:
    """Mismatch and gamut summaries of every design of ``test`` (a Display with a ``design`` dim).

    Parameters
    ----------
    test : Display
        The candidate designs, stacked along ``design`` (:func:`metasim.display.stack_designs`, or
        :func:`metasim.make_display` of a ``design × primary × wavelength`` array).
    reference, observers, stimuli, mismatch_options
        As for :func:`metasim.mismatch` (all designs are evaluated in one call).
    lab_volume : bool
        Also compute the CIELAB volume of each design's colour solid (slower).
    per_stimulus : bool
        Also keep the statistics over observers and the shares beyond the thresholds of every
        stimulus (design × stimulus numbers: which colours a design gets wrong).
    intervals : dict, optional
        ``level``, ``resamples`` and ``seed`` of intervals from resampling observers: adds the
        interval and replicate variables of :mod:`metasim.sweep.ranking` (the same resamples in
        every chunk, so the designs' replicates are paired).

    Returns
    -------
    Dataset
        The variables of the module docstring over ``design`` (the designs' coordinates kept).
    """
    if not isinstance(test, Display) or test.batch_dims != ["design"]:
        dims = test.batch_dims if isinstance(test, Display) else type(test).__name__
        raise SweepError(f"design_summaries needs a Display with one 'design' dim, got {dims}")
    result = mismatch(reference, test, observers, stimuli, **mismatch_options)
    de = result["delta_e_2000"]
    weights = observer_weights(de)
    out = {
        "delta_e_2000_overall": _pairs_table(de, weights, "CIE 2000 difference over all observer x stimulus pairs"),
        "metamerism_index_overall": _pairs_table(result["metamerism_index"], weights,
                                                 "observer-change metamerism index over all observer x stimulus pairs"),
    }
    if "delta_e_itp" in result:
        out["delta_e_itp_overall"] = _pairs_table(result["delta_e_itp"], weights,
                                                  "ITU-R BT.2124 difference over all observer x stimulus pairs")
    white = result["delta_e_white"].transpose("observer", "design").values
    out["delta_e_white"] = xr.DataArray(statistics_over(white, weights).T, dims=("design", "statistic"), attrs={
        "units": "1", "long_name": "CIE 2000 difference between the two whites, statistics over observers"})
    out["share_beyond_overall"] = result["share_beyond_overall"].transpose("design", "threshold")
    if "delta_e_2000_by_age" in result:
        out["delta_e_2000_by_age"] = result["delta_e_2000_by_age"].transpose("design", "statistic", "age_band")
        out["observers_per_age_band"] = result["observers_per_age_band"]
    flags = result["out_of_gamut_test"].transpose("design", "stimulus")
    out["out_of_gamut_count"] = xr.DataArray(flags.values.sum(-1).astype(np.int64), dims="design", attrs={
        "units": "1", "long_name": "stimuli outside the design's gamut (clipped)"})
    residual = result["delta_e_2000_calibration"].transpose("design", ...).values
    out["delta_e_2000_calibration_max"] = xr.DataArray(
        np.nanmax(residual.reshape(residual.shape[0], -1), axis=1), dims="design",
        attrs={"units": "1", "long_name": "largest CIE 2000 difference for the calibration observer"})

    cie1931 = standard_observer("cie1931_2", test.wavelengths.values)
    gamut = chromaticity_gamut(test, observer=cie1931)
    out["gamut_area_xy"] = gamut["area"].transpose("design")
    coverage = np.stack([gamut_coverage(gamut, ref).transpose("design").values for ref in COVERAGE_GAMUTS], axis=1)
    out["gamut_coverage"] = xr.DataArray(coverage, dims=("design", "reference_gamut"), attrs={
        "units": "1", "long_name": "share of each reference gamut's CIE 1931 xy area covered"})
    out["primary_xy"] = gamut["chromaticity_of_primary"].transpose("design", "primary", "chromaticity")
    out["white_efficacy"] = luminous_efficacy(test.white_spectrum(), cie1931).transpose("design")
    if lab_volume:
        out["lab_volume"] = lab_gamut_volume(test, cie1931).transpose("design")
    if per_stimulus:
        out["delta_e_2000_by_stimulus"] = result["delta_e_2000_by_stimulus"].transpose("design", "statistic", "stimulus")
        out["share_beyond"] = result["share_beyond"].transpose("design", "threshold", "stimulus")
    for name in ("gamut_area_xy", "primary_xy", "share_beyond_overall", "delta_e_2000_by_age", "observers_per_age_band",
                 "lab_volume", "white_efficacy", "delta_e_2000_by_stimulus", "share_beyond"):
        if name in out:
            value = out[name]
            out[name] = xr.DataArray(value.values, dims=value.dims, attrs=dict(value.attrs))
    design_coords = {k: v.variable for k, v in test.spectra.coords.items() if v.dims == ("design",)}
    coords = {**design_coords, "statistic": list(STATISTICS), "reference_gamut": list(COVERAGE_GAMUTS),
              "primary": test.primaries, "chromaticity": ["x", "y"],
              "threshold": result["threshold"].variable}
    if "age_band" in result.coords:
        coords["age_band"] = result["age_band"].variable
    if per_stimulus:
        coords.update({k: v.variable for k, v in result.coords.items() if v.dims == ("stimulus",)})
    interval_attrs = {}
    if intervals is not None:
        extra, interval_attrs = interval_variables(de, pooled=f"{de.sizes['stimulus']} stimuli "
                                                   f"({result.attrs.get('stimuli', 'stimulus set')})", **intervals)
        out.update(extra)
        coords["bound"] = ["lower", "upper"]
    summary = xr.Dataset(out, coords=coords)
    summary.attrs = {key: result.attrs[key] for key in (
        "model", "reference", "reference_kind", "calibration_observer", "white_matched", "adapted_white",
        "drive_strategy", "stimuli", "stimulus_kind", "observer_model", "observer_seed", "observer_peak_shift_axis",
        "thresholds_source",
        "metasim_version") if key in result.attrs}
    summary.attrs["observer_count"] = int(de.sizes["observer"])
    summary.attrs["stimulus_count"] = int(de.sizes["stimulus"])
    summary.attrs.update(interval_attrs)
    return summary


__all__ = ["COVERAGE_GAMUTS", "design_summaries", "statistics_over"]
