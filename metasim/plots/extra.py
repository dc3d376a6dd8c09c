"""What an extra primary buys: gamut gained and population mismatch saved, side by side."""

from __future__ import annotations

import numpy as np
import xarray as xr
from matplotlib import rc_context
from matplotlib.figure import Figure

from metasim.plots.figures import DESIGN_COLOURS, REFERENCE_COLOUR, STYLE, _figure
from metasim.units import DELTA_E00


def extra_primary_value_figure(value: xr.Dataset) -> Figure:
    """Left: xy area, CIELAB volume and BT.2020 coverage added (%); right: 95th percentile CIE 2000
    difference saved, per candidate peak wavelength (:func:`metasim.sweep.extra_primary_value`).

    Parameters
    ----------
    value : xarray.Dataset
        A :func:`metasim.sweep.extra_primary_value` result over ``peak_wavelength`` (nm):
        ``area_gain_share`` (share of the base xy area), ``coverage_gain`` (share of the BT.2020 xy
        area), optionally ``volume_gain_share`` (share of the base CIELAB volume), all unitless;
        ``mismatch_gain`` (ΔE00 saved on the 95th percentile) and ``base_delta_e_2000_p95`` (0-d,
        ΔE00); attribute ``candidate_kind``.

    Returns
    -------
    matplotlib.figure.Figure
        Two axes side by side (gamut in %, mismatch saved in ΔE00).

    References
    ----------
    CIE 15:2004 §7.3, §8.2.1 (CIE 1931 xy, CIELAB); CIE 142-2001 (CIEDE2000); ITU-R BT.2020-2.

    Examples
    --------
    >>> import xarray as xr
    >>> peaks = {"peak_wavelength": [490.0, 510.0]}
    >>> value = xr.Dataset({"area_gain_share": ("peak_wavelength", [0.08, 0.12]),
    ...                     "coverage_gain": ("peak_wavelength", [0.05, 0.07]),
    ...                     "mismatch_gain": ("peak_wavelength", [0.3, -0.1]),
    ...                     "base_delta_e_2000_p95": 1.9}, coords=peaks)
    >>> fig = extra_primary_value_figure(value)
    >>> [ax.get_title() for ax in fig.axes]
    ['Gamut', 'Viewer disagreement (base: 1.90)']
    """
    peaks = value["peak_wavelength"].values
    with rc_context(STYLE):
        fig, axes = _figure(11.0, 4.4, 1, 2, sharex=True)
        left, right = axes[0, 0], axes[0, 1]
        left.plot(peaks, 100 * value["area_gain_share"].values, color=DESIGN_COLOURS[0], lw=1.8, marker="o", ms=3.5,
                  label="xy area added")
        if "volume_gain_share" in value:
            left.plot(peaks, 100 * value["volume_gain_share"].values, color=DESIGN_COLOURS[1], lw=1.6, ls="--",
                      marker="s", ms=3.5, label="CIELAB volume added")
        left.plot(peaks, 100 * value["coverage_gain"].values, color=DESIGN_COLOURS[2], lw=1.4, ls=":", marker="^",
                  ms=3.5, label="BT.2020 coverage added (points)")
        left.set_ylabel("Gamut gained (% of the base;\ncoverage: percentage points)")
        left.set_title("Gamut")
        left.legend(loc="best", frameon=False)
        gain = value["mismatch_gain"].values
        right.axhline(0.0, color="#9a9a9a", lw=0.8)
        right.bar(peaks, gain, width=0.7 * (np.min(np.diff(peaks)) if peaks.size > 1 else 5.0),
                  color=np.where(gain >= 0, DESIGN_COLOURS[1], DESIGN_COLOURS[0]), edgecolor=REFERENCE_COLOUR, lw=0.4)
        right.set_ylabel(f"95th percentile CIE 2000 difference saved\n({DELTA_E00}; below 0: worse)")
        base = float(value["base_delta_e_2000_p95"])
        right.set_title(f"Viewer disagreement (base: {base:.2f})")
        for ax in (left, right):
            ax.set_xlabel("Peak wavelength of the extra primary (nm)")
        fig.suptitle(f"What one more primary buys ({value.attrs.get('candidate_kind', 'laser')} candidates)",
                     fontsize=12)
    return fig


__all__ = ["extra_primary_value_figure"]
