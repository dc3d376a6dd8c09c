"""Decisions a display designer takes from mismatch results.

* :func:`rank_calibration_observers` — which observer to calibrate the test display with so that
  the population sees the least mismatch against the reference.
* :func:`white_point_offsets` — for each observer category, the white-point offset (in the
  calibration observer's chromaticity diagram) that makes the test white match the reference white
  for that category: the trim a display would need to look right to that group of viewers.
"""

from __future__ import annotations

import numpy as np
import xarray as xr

from metasim._version import __version__
from metasim.colorimetry import tristimulus, xyz_to_uv, xyz_to_xy
from metasim.display import Display, calibrate_white
from metasim.errors import MismatchError
from metasim.metamerism.engine import (
    mismatch,
    reference_white_spectrum,
    resolve_calibration_observer,
    resolve_observers,
    resolve_reference,
)
from metasim.metamerism.stimuli import as_stimuli
from metasim.metamerism.summary import observer_weights
from metasim.statistics import quantiles, weighted_mean
from metasim.observers.standard import STANDARD_OBSERVERS
from metasim.units import DELTA_E00

#: Calibration observers: every standard observer and the population's mean observer.
CANDIDATES = (*STANDARD_OBSERVERS, "population_mean")


def rank_calibration_observers(
    reference,
    test: Display,
    observers,
    stimuli: xr.Dataset,
    *,
    candidates=CANDIDATES,
    **options,
) -> xr.Dataset:
    """Evaluate candidate calibration observers by the population mismatch they leave.

    For each candidate the test white is matched to the reference white and every stimulus is
    matched for that candidate (:func:`metasim.mismatch`), then the population's CIE 2000
    differences are pooled over the white and all stimuli. The score is the (weighted) mean over
    observers and over white + stimuli; the 95th percentile and the mean white difference are
    reported too. One :func:`mismatch` run per candidate (a handful); nothing loops over observers
    or stimuli.

    Parameters
    ----------
    candidates : sequence
        Standard observer names, ``"population_mean"``, or observer Datasets.
    options
        Passed on to :func:`metasim.mismatch` (e.g. ``strategy``, ``adapted_white``).

    Returns
    -------
    Dataset
        ``mean_delta_e``, ``p95_delta_e``, ``mean_delta_e_white``, ``mean_delta_e_stimuli`` (dim
        ``calibration_observer``) and the attribute ``best_calibration_observer``.

    Examples
    --------
    >>> import metasim
    >>> from metasim.emitters import gaussian, laser_line
    >>> from metasim.metamerism import primaries_and_secondaries
    >>> studio = metasim.make_display(gaussian([450, 540, 625], [20, 35, 30], name=["B", "G", "R"]))
    >>> studio = metasim.calibrate_white(studio, "cie1964_10")
    >>> projector = metasim.make_display(laser_line([462, 520, 640], 2.0, name=["B", "G", "R"]))
    >>> elders = metasim.observer_population(3, seed=2, age_years=(60, 75))
    >>> ranking = metasim.rank_calibration_observers(studio, projector, elders, primaries_and_secondaries(),
    ...                                              candidates=("cie1931_2", "cie2015_2"))
    >>> ranking.calibration_observer.values.tolist(), ranking.attrs["best_calibration_observer"] in ("cie1931_2", "cie2015_2")
    (['cie1931_2', 'cie2015_2'], True)
    """
    if not candidates:
        raise MismatchError("candidates is empty; give at least one calibration observer")
    if isinstance(test, Display):  # colour-science inputs converted once, not once per candidate
        grid = test.wavelengths.values
        reference, stimuli = resolve_reference(reference, grid), as_stimuli(stimuli, grid)
        observers = resolve_observers(observers, grid)
    names, mean, p95, white, stimulus_means = [], [], [], [], []
    for candidate in candidates:
        result = mismatch(reference, test, observers, stimuli, calibration_observer=candidate, **options)
        de = result["delta_e_2000"]
        if "design" in de.dims:
            raise MismatchError("rank_calibration_observers takes a single test design; select one with .isel(design=i)")
        stimuli_only = de.transpose("observer", "stimulus").values
        pooled = np.concatenate([result["delta_e_white"].values[:, None], stimuli_only], axis=1)
        weights = observer_weights(de)
        per_pair = None if weights is None else np.repeat(weights, pooled.shape[1])
        names.append(result.attrs["calibration_observer"])
        mean.append(float(weighted_mean(pooled.ravel(), per_pair)))
        p95.append(float(quantiles(pooled.ravel(), (0.95,), per_pair)[0]))
        white.append(float(weighted_mean(result["delta_e_white"].values, weights)))
        stimulus_means.append(float(weighted_mean(stimuli_only.ravel(), None if weights is None
                                        else np.repeat(weights, stimuli_only.shape[1]))))
    if len(set(names)) != len(names):
        names = [f"{n} #{i}" for i, n in enumerate(names)]
    coords = {"calibration_observer": names}
    with_white = {"pooled_over": "observer x (white + stimulus) pairs", "includes_white": "yes: the white pair pooled "
                  "with the stimuli", "pooled_stimuli": f"the white and {stimuli.sizes['stimulus']} stimuli"}
    without_white = {"pooled_over": "observer x stimulus pairs", "includes_white": "no",
                     "pooled_stimuli": f"{stimuli.sizes['stimulus']} stimuli"}
    out = xr.Dataset(
        {
            "mean_delta_e": ("calibration_observer", mean, {
                "units": DELTA_E00, "long_name": "mean CIE 2000 difference over observers, white and stimuli", **with_white}),
            "p95_delta_e": ("calibration_observer", p95, {
                "units": DELTA_E00, "long_name": "95th percentile of CIE 2000 differences over observers, white and stimuli",
                **with_white}),
            "mean_delta_e_white": ("calibration_observer", white, {
                "units": DELTA_E00, "long_name": "mean CIE 2000 difference of the white", "pooled_over": "observers",
                "includes_white": "only the white"}),
            "mean_delta_e_stimuli": ("calibration_observer", stimulus_means, {
                "units": DELTA_E00, "long_name": "mean CIE 2000 difference over the stimuli", **without_white}),
        },
        coords=coords,
    )
    out.attrs = {
        "model": "calibration-observer ranking by population mismatch (metasim)",
        "best_calibration_observer": names[int(np.argmin(mean))],
        "score": "weighted mean over observers of the mean CIE 2000 difference over white + stimuli",
        "metasim_version": __version__,
    }
    return out


def white_point_offsets(
    reference,
    test: Display,
    categories: xr.Dataset,
    *,
    calibration_observer="cie1931_2",
    stimuli: xr.Dataset | None = None,
) -> xr.Dataset:
    """White-point offset, per observer category, that makes the test white match the reference white.

    For each category observer c the test display's white is calibrated so that c sees it equal to
    the reference white as c sees it (chromaticity and luminance). The offset is that white's
    chromaticity minus the reference white's chromaticity, both in the *calibration observer's*
    diagram — the setting a technician with a colorimeter for the calibration observer would dial in.

    Parameters
    ----------
    reference : Display, "surfaces" or illuminant spectrum
        As for :func:`metasim.mismatch` (``"surfaces"`` needs ``stimuli`` with reflectances).
    test : Display
    categories : Dataset
        Observers with an ``observer`` dim (e.g. :func:`metasim.observer_categories`, whose
        ``weight`` coordinate is kept).

    Returns
    -------
    Dataset
        ``offset_xy`` (observer × chromaticity x, y), ``offset_uv_length`` (observer: Δu'v'),
        ``test_white_xy`` (observer × chromaticity), ``reference_white_xy`` (chromaticity).

    Examples
    --------
    >>> import metasim
    >>> from metasim.emitters import gaussian, laser_line
    >>> monitor = metasim.calibrate_white(metasim.make_display(gaussian([455, 535, 615], [25, 30, 35],
    ...                                                                 name=["B", "G", "R"])), "cie1931_2")
    >>> lasers = metasim.make_display(laser_line([465, 532, 638], 1.0, name=["B", "G", "R"]))
    >>> groups = metasim.observer_categories(metasim.observer_population(20, seed=1, age_years=(20, 70)), 2, seed=1)
    >>> dict(metasim.white_point_offsets(monitor, lasers, groups)["offset_xy"].sizes)
    {'observer': 2, 'chromaticity': 2}
    """
    if not isinstance(test, Display):
        raise MismatchError(f"test must be a Display, got {type(test).__name__}")
    grid = test.wavelengths
    group = resolve_observers(categories, grid)
    if stimuli is not None:
        stimuli = as_stimuli(stimuli, grid.values)
    calibration, calibration_name = resolve_calibration_observer(calibration_observer, group, grid)
    white_spectrum, _ = reference_white_spectrum(reference, stimuli, test, calibration)
    ref_xyz_cal = tristimulus(white_spectrum, calibration)
    seen = tristimulus(white_spectrum, group)  # (observer, xyz): the reference white as each category sees it
    whites = []
    for i in range(group.sizes["observer"]):  # one small calibration per category (k is small)
        member = group.isel(observer=i)
        target = seen.isel(observer=i, drop=True)
        matched = calibrate_white(test, member[["cmf"]], white=xyz_to_xy(target),
                                  luminance=float(target.sel(xyz="Y")))
        whites.append(matched.white_tristimulus(calibration))
    test_white = xr.concat(whites, dim="observer").assign_coords(observer=group.observer)
    test_xy, ref_xy = xyz_to_xy(test_white), xyz_to_xy(ref_xyz_cal)
    test_uv, ref_uv = xyz_to_uv(test_white), xyz_to_uv(ref_xyz_cal)
    offset_xy = test_xy - ref_xy
    offset_uv = test_uv - ref_uv
    coords = {k: v for k, v in group.coords.items() if v.dims == ("observer",)}
    out = xr.Dataset(
        {
            "offset_xy": offset_xy.assign_attrs(units="1", long_name=f"white-point offset in {calibration_name} xy"),
            "offset_uv_length": np.hypot(offset_uv.isel(chromaticity=0, drop=True),
                                         offset_uv.isel(chromaticity=1, drop=True)).assign_attrs(
                units="1", long_name=f"length of the offset in {calibration_name} u'v' (delta u'v')"),
            "test_white_xy": test_xy.assign_attrs(units="1", long_name=f"test white matched per category, in {calibration_name} xy"),
            "reference_white_xy": ref_xy.assign_attrs(units="1", long_name=f"reference white in {calibration_name} xy"),
        }
    ).assign_coords(coords)
    out.attrs = {
        "model": "white-point offsets per observer category (metasim)",
        "calibration_observer": calibration_name,
        "metasim_version": __version__,
    }
    return out


__all__ = ["CANDIDATES", "rank_calibration_observers", "white_point_offsets"]
