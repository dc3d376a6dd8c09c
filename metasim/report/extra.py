"""The report page of an extra-primary analysis (:func:`metasim.sweep.extra_primary_value`)."""

from __future__ import annotations

import numpy as np
import xarray as xr

from metasim.report.html import _attribute_list, _e, _image, _num, _pct, _table


def is_extra_value(ds: xr.Dataset) -> bool:
    return ds.attrs.get("result_kind") == "metasim extra primary" and "mismatch_gain" in ds


def extra_value_page(ds: xr.Dataset, figure: tuple | None) -> str:
    peaks = ds["peak_wavelength"].values
    gain, area = ds["mismatch_gain"].values, ds["area_gain_share"].values
    best_m, best_a = int(np.nanargmax(gain)), int(np.nanargmax(area))
    base = float(ds["base_delta_e_2000_p95"])
    text = (f"<h2>The base design</h2><p>Base design {_e(ds.attrs.get('base_design', ''))} "
            f"({_e(', '.join(map(str, ds.attrs.get('base_primaries', []))))}): 95th percentile {_num(base)} CIE 2000 "
            f"units over {_e(ds.attrs.get('observer_count', '?'))} observers × {_e(ds.attrs.get('stimulus_count', '?'))} "
            f"stimuli, BT.2020 coverage {_pct(float(ds['base_coverage']))}. The answer box above names the candidate "
            f"adding the most gamut ({peaks[best_a]:g} nm) and the one saving the most viewer disagreement "
            f"({peaks[best_m]:g} nm).</p>"
            "<p>The extended design uses its extra degree of freedom for the population: every colour is still "
            "matched for the calibration observer, and among the drives that do so the one with the least "
            "(linearised) mismatch over the population is shown. That strategy minimises the mean squared "
            "mismatch, so the 95th percentile can also rise (bars below zero).</p>")
    header = ["extra primary peak (nm)", "xy area added", "CIELAB volume added", "BT.2020 coverage added",
              "95th pct ΔE00 with it", "95th pct saved"]
    rows = [[f"{p:g}", _pct(area[i]), _pct(float(ds["volume_gain_share"].values[i])) if "volume_gain_share" in ds
             else "–", _pct(float(ds["coverage_gain"].values[i])), _num(float(ds["delta_e_2000_p95"].values[i])),
             _num(gain[i])] for i, p in enumerate(peaks)]
    out = text + (_image(*figure) if figure is not None else "") + "<h2>Every candidate</h2>" + _table(header, rows)
    return out + "<h2>Models and parameters</h2>" + _attribute_list(dict(ds.attrs))


__all__ = ["is_extra_value", "extra_value_page"]
