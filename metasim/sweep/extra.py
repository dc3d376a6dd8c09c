"""What an extra primary buys: gamut gained and population mismatch saved, per candidate wavelength.

For a base design and each candidate extra primary (a laser line or a Gaussian band at a peak
wavelength) two gains are computed:

* **gamut** — :func:`metasim.gamut.extra_primary_gain`: CIE 1931 xy area and CIELAB volume added
  (the base white fixed), plus the BT.2020 coverage added;
* **mismatch** — the population's 95th percentile CIE 2000 difference against the reference with
  the base design, minus the same with the extended design, whose extra degree of freedom is used
  by the ``"least_mismatch"`` drive strategy (each colour is still matched exactly for the calibration
  observer; among the drives that do so, the one with the least CIELAB-linearised mismatch over the
  population is taken, :mod:`metasim.display.drive`).

A fourth primary can add little gamut yet cut how much viewers disagree; the two curves show both.

The extended design is the white-calibrated base plus the candidate at the radiant power of the mean
base primary (``level`` scales it); it is not calibrated again: the white stays reachable with the
candidate at zero drive, and the mismatch engine matches the white for the calibration observer.
All candidates are evaluated in one :func:`metasim.mismatch` call along ``design``.

Layer: sweep.
"""

from __future__ import annotations

import numpy as np
import xarray as xr

from metasim._version import __version__
from metasim.display import Display, make_display
from metasim.errors import SweepError
from metasim.gamut import extra_primary_gain
from metasim.gamut.extra import candidate_spectra
from metasim.metamerism.engine import resolve_observers
from metasim.observers import standard_observer
from metasim.spectra import grid_step
from metasim.sweep.summary import design_summaries
from metasim.units import DELTA_E00

RESULT_KIND = "metasim extra primary"


def _stacked(display: Display, spectra: np.ndarray, labels: list[str], peaks: np.ndarray, name: str) -> Display:
    wl = display.wavelengths.values
    array = xr.DataArray(spectra, dims=("design", "primary", "wavelength"),
                         coords={"design": np.arange(spectra.shape[0]), "primary": labels, "wavelength": wl,
                                 "extra_peak_nm": ("design", peaks, {"units": "nm",
                                                                      "long_name": "peak wavelength of the extra primary"})},
                         attrs={"units": display.spectra.attrs.get("units", "")})
    return make_display(array, transfer=display.transfer, gamma=display.gamma,
                        peak_luminance=float(display.peak_luminance.max()), black_luminance=display.black_luminance,
                        name=name)


def extra_primary_value(base: Display, reference, observers, stimuli: xr.Dataset, *, peak_nm=None, kind: str = "laser",
                        fwhm_nm: float | None = None, level: float = 1.0, calibration_observer="cie1931_2",
                        volume: bool = True) -> xr.Dataset:
    """Gamut and population-mismatch gain of one extra primary, per candidate peak wavelength.

    Parameters
    ----------
    base : Display
        The white-calibrated base design (one design, any number of primaries).
    reference, observers, stimuli, calibration_observer
        As for :func:`metasim.mismatch`; ``observers`` is also the population the extended design's
        drives are optimised for.
    peak_nm : sequence, optional
        Candidate peaks (default 450-650 nm in 10 nm steps).
    kind, fwhm_nm
        Candidate line: ``"laser"`` or ``"gaussian"`` (with ``fwhm_nm``).
    level : float
        Candidate radiant power as a multiple of the mean base primary's.
    volume : bool
        Also the CIELAB volume gain (slower).

    Returns
    -------
    Dataset
        Over ``peak_wavelength``: ``area_gain_share``, ``volume_gain_share`` (with ``volume``),
        ``coverage_gain`` (BT.2020 share of xy area added), ``delta_e_2000_p95`` (with the extra
        primary), ``mismatch_gain`` (base p95 minus that: CIE 2000 units saved), ``mismatch_gain_share``
        (of the base p95); scalars ``base_delta_e_2000_p95``, ``base_coverage``. Attribute
        ``result_kind = "metasim extra primary"``.

    Examples
    --------
    >>> import metasim
    >>> from metasim.emitters import gaussian, laser_line
    >>> from metasim.metamerism import neutral_ramp
    >>> from metasim.sweep import extra_primary_value
    >>> monitor = metasim.calibrate_white(metasim.make_display(gaussian([455, 535, 615], [25, 30, 35],
    ...                                                                 name=["B", "G", "R"])), "cie1931_2")
    >>> lasers = metasim.calibrate_white(metasim.make_display(laser_line([465, 532, 638], 1.0,
    ...                                                                  name=["B", "G", "R"])), "cie1931_2")
    >>> value = extra_primary_value(lasers, monitor, metasim.observer_population(5, seed=1), neutral_ramp(3),
    ...                             peak_nm=[500, 580], volume=False)
    >>> sorted(value.data_vars)[:3], value.sizes["peak_wavelength"]
    (['area_gain_share', 'base_coverage', 'base_delta_e_2000_p95'], 2)
    """
    if not isinstance(base, Display) or base.batch_dims:
        raise SweepError("the base design must be one white-calibrated Display (no design dim)")
    if not np.isfinite(level) or level <= 0:
        raise SweepError(f"level={level!r} is not allowed; need a finite number > 0")
    wl = base.wavelengths.values
    peaks = np.arange(450.0, 651.0, 10.0) if peak_nm is None else np.atleast_1d(np.asarray(peak_nm, dtype=float))
    observers = resolve_observers(observers, wl)
    candidates = candidate_spectra(peaks, wl, kind, fwhm_nm)
    spectra = base.spectra.transpose("primary", "wavelength").values
    power = spectra.sum(-1).mean() * grid_step(wl)
    extra = candidates.values * (level * power / (candidates.values.sum(-1, keepdims=True) * grid_step(wl)))
    labels = [str(p) for p in base.primaries]
    extended = np.concatenate([np.broadcast_to(spectra, (peaks.size, *spectra.shape)), extra[:, None, :]], axis=1)
    options = {"calibration_observer": calibration_observer, "strategy": "least_mismatch", "strategy_population": observers}
    before = design_summaries(_stacked(base, spectra[None], labels, np.array([np.nan]), base.name), reference,
                              observers, stimuli, **options)
    after = design_summaries(_stacked(base, extended, labels + ["extra"], peaks, f"{base.name} + extra"), reference,
                             observers, stimuli, **options)
    base_p95 = float(before["delta_e_2000_overall"].sel(statistic="p95").values[0])
    p95 = after["delta_e_2000_overall"].sel(statistic="p95").values
    base_coverage = float(before["gamut_coverage"].sel(reference_gamut="bt2020").values[0])
    coverage = after["gamut_coverage"].sel(reference_gamut="bt2020").values
    gamut = extra_primary_gain(base, standard_observer("cie1931_2", wl), candidates=candidates, level=level,
                               volume=volume)
    coord = {"peak_wavelength": ("peak_wavelength", peaks, {"units": "nm",
                                                           "long_name": "peak wavelength of the extra primary"})}
    out = xr.Dataset(coords=coord)
    out["area_gain_share"] = ("peak_wavelength", gamut["area_gain_share"].transpose("peak_wavelength").values,
                              {"units": "1", "long_name": "CIE 1931 xy area added, as a share of the base area"})
    if volume:
        out["volume_gain_share"] = ("peak_wavelength", gamut["volume_gain_share"].transpose("peak_wavelength").values,
                                    {"units": "1", "long_name": "CIELAB volume added (white fixed), as a share of the "
                                                                "base volume"})
    out["coverage_gain"] = ("peak_wavelength", coverage - base_coverage,
                            {"units": "1", "long_name": "share of the BT.2020 xy area added"})
    out["delta_e_2000_p95"] = ("peak_wavelength", p95, {
        "units": DELTA_E00, "long_name": "95th percentile CIE 2000 difference over all observer x stimulus pairs, "
                                   "with the extra primary (population drive strategy)"})
    out["mismatch_gain"] = ("peak_wavelength", base_p95 - p95, {
        "units": DELTA_E00, "long_name": "95th percentile CIE 2000 difference saved by the extra primary"})
    out["mismatch_gain_share"] = ("peak_wavelength", (base_p95 - p95) / base_p95 if base_p95 > 0 else np.zeros_like(p95),
                                  {"units": "1", "long_name": "95th percentile saved, as a share of the base's"})
    out["base_delta_e_2000_p95"] = ((), base_p95, {"units": DELTA_E00, "long_name": "95th percentile CIE 2000 difference "
                                                                              "of the base design"})
    out["base_coverage"] = ((), base_coverage, {"units": "1", "long_name": "share of the BT.2020 xy area the base "
                                                                          "covers"})
    out.attrs = {"result_kind": RESULT_KIND, "base_design": base.name, "base_primaries": labels,
                 "candidate_kind": kind, "candidate_fwhm_nm": "none" if fwhm_nm is None else float(fwhm_nm),
                 "candidate_level": float(level), "drive_strategy": "least_mismatch", "reference": before.attrs.get(
                     "reference", ""), "calibration_observer": before.attrs.get("calibration_observer", ""),
                 "observer_count": before.attrs.get("observer_count", 0), "stimulus_count": before.attrs.get(
                     "stimulus_count", 0), "observer_seed": before.attrs.get("observer_seed", "none"),
                 "observer_model": before.attrs.get("observer_model", ""),
                 "model": "gain of one extra primary: gamut (metasim.gamut.extra_primary_gain) and population "
                          "mismatch with the population drive strategy (metasim.mismatch)",
                 "metasim_version": __version__}
    return out


__all__ = ["RESULT_KIND", "extra_primary_value"]
