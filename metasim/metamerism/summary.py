"""The engine's summaries of mismatch results: per stimulus, per observer, by age band, shares above thresholds.

Every number comes from the statistics layer (:mod:`metasim.statistics`, the only place
summaries are computed), by its definitions: observers weighted by their ``weight`` coordinate
when there is one (observer categories carry the share of the population each represents),
otherwise equally; quantiles by numpy's linear method without weights and numpy's weighted
``inverted_cdf`` with them. Plain populations take the fast path (one sort per summary and one
compiled pass, :mod:`metasim.statistics.sorted_rows`). Each summary variable says in its
attributes what it pools. This module keeps the age-band policy.
"""

from __future__ import annotations

import math

import numpy as np
import xarray as xr

from metasim._threads import blas_single_threaded
from metasim.labelling import label_coordinate
from metasim.errors import MismatchError
from metasim.statistics import STATISTICS, THRESHOLDS, share_above_threshold, statistics_along
from metasim.statistics import observer_weights as _statistics_weights
from metasim.statistics.sorted_rows import observer_stimulus_stats
from metasim.statistics.summaries import weights_note
from metasim.units import DELTA_E00

#: The default age-band policy: decade bands (edges at whole multiples of 10 years) that just cover
#: the observers' ages, so no band is empty at either end (see :func:`decade_age_bands`).
DECADES = "decades"

#: result variables: the share of observers above each threshold (per stimulus), and of all
#: observer × stimulus pairs (were ``share_beyond`` and ``share_beyond_overall``)
OBSERVER_SHARE = "share_of_observers_above_threshold"
PAIR_SHARE = "share_of_pairs_above_threshold"


def observer_weights(delta_e: xr.DataArray) -> np.ndarray | None:
    """The observers' ``weight`` coordinate (checked), or None for equal weights."""
    return _statistics_weights(delta_e)


def decade_age_bands(ages) -> list[int]:
    """Edges of the decade age bands that cover ``ages`` (years): the default age-band policy.

    The bands are [lo, lo + 10), [lo + 10, lo + 20), ..., the last one closed, from the decade below
    the youngest observer to the decade at or above the oldest; a single decade when all ages fall
    in one. Decades are common practice, no source.

    Parameters
    ----------
    ages : array_like
        Observer ages in years (at least one, finite).

    Returns
    -------
    list of int
        Ascending band edges in years.

    Raises
    ------
    MetasimError
        When no finite age is given.

    Examples
    --------
    >>> decade_age_bands([20.4, 33.0, 69.9])
    [20, 30, 40, 50, 60, 70]
    >>> decade_age_bands([32.0])
    [30, 40]
    """
    ages = np.asarray(ages, dtype=float).ravel()
    if ages.size == 0 or not np.isfinite(ages).all():
        raise MismatchError(f"age bands need finite ages in years, got {ages.tolist()[:5]}")
    lo, hi = math.floor(ages.min() / 10) * 10, math.ceil(ages.max() / 10) * 10
    edges = list(range(int(lo), int(hi) + 1, 10))
    return edges if len(edges) >= 2 else [int(lo), int(lo) + 10]


def age_band_edges(age_bands, ages) -> tuple[float, ...] | None:
    """The band edges an ``age_bands`` option stands for, for observers of ``ages`` (years).

    ``"decades"`` (:data:`DECADES`, the default everywhere) gives :func:`decade_age_bands` of the
    ages; a sequence gives those edges (ascending, at least two); ``None`` or an empty sequence
    gives no bands. Observers without ages (``ages`` None) have no bands either.

    Parameters
    ----------
    age_bands : "decades", sequence of float or None
        The option: :data:`DECADES`, ascending band edges in years (at least two), or None / empty.
    ages : array_like or xarray.DataArray (observer), or None
        The observers' ages in years.

    Returns
    -------
    tuple of float, or None
        Ascending band edges in years (bands [lo, hi), the last one closed); None for no bands.

    Raises
    ------
    MismatchError
        Another string, edges that are not ascending and finite, or a band that would hold no
        observer (naming it and the observers' ages).

    Examples
    --------
    >>> from metasim.metamerism import age_band_edges
    >>> age_band_edges("decades", [23, 41, 67])
    (20, 30, 40, 50, 60, 70)
    >>> age_band_edges([20, 40, 80], [23, 41, 67])
    (20.0, 40.0, 80.0)
    """
    if ages is None or age_bands is None or (not isinstance(age_bands, str) and len(age_bands) == 0):
        return None
    if isinstance(age_bands, str):
        if age_bands != DECADES:
            raise MismatchError(f"age_bands={age_bands!r} is not allowed; give {DECADES!r} or ascending band "
                                "edges in years")
        return tuple(decade_age_bands(ages))
    if np.ndim(age_bands) != 1:
        raise MismatchError(f"age_bands={age_bands!r} is not allowed; give {DECADES!r} or ascending band edges "
                            "in years")
    try:
        edges = np.asarray(age_bands, dtype=float)
    except (TypeError, ValueError):
        edges = np.array([np.nan])
    if edges.size < 2 or not np.isfinite(edges).all() or (np.diff(edges) <= 0).any():
        raise MismatchError(f"age_bands={list(age_bands)!r} is not allowed; give at least two ascending, finite band "
                            "edges in years")
    years = np.asarray(getattr(ages, "values", ages), dtype=float)
    years = years[np.isfinite(years)]
    if years.size:
        low, high = float(years.min()), float(years.max())
        for i, (lo, hi) in enumerate(zip(edges[:-1], edges[1:])):
            last = i == edges.size - 2
            if hi < low or lo > high or (hi == low and not last):
                raise MismatchError(f"age band {_band_label(lo, hi, last)} (age_bands={[float(e) for e in edges]}) lies "
                                    f"outside the observers' ages ({low:.4g}-{high:.4g} years) and would hold no "
                                    "observer; give band edges within their ages")
    return tuple(float(e) for e in edges)


def check_thresholds(thresholds) -> tuple[float, ...]:
    """CIE 2000 thresholds of the shares above threshold: at least one, each finite and >= 0."""
    try:
        values = np.atleast_1d(np.asarray(thresholds, dtype=float))
    except (TypeError, ValueError):
        values = np.array([np.nan])
    if values.ndim != 1 or values.size == 0 or not np.isfinite(values).all() or (values < 0).any():
        raise MismatchError(f"thresholds={thresholds!r} is not allowed; give at least one finite CIE 2000 difference "
                            f">= 0, e.g. {THRESHOLDS}")
    return tuple(float(v) for v in values)


def age_band_labels(edges) -> list[str]:
    """Labels of the bands between ``edges``: '20-29' for [20, 30) in whole years, '60-70' for the
    closed last band (the ``age_band`` coordinate of the summaries)."""
    edges = [float(e) for e in edges]
    return [_band_label(lo, hi, i == len(edges) - 2) for i, (lo, hi) in enumerate(zip(edges[:-1], edges[1:]))]


def _band_label(lo: float, hi: float, last: bool) -> str:
    """'20-29' for [20, 30) with whole years, '70-80' for the closed last band."""
    if not last and float(lo).is_integer() and float(hi).is_integer():
        return f"{lo:g}-{hi - 1:g}"
    return f"{lo:g}-{hi:g}"


@blas_single_threaded
def summarise(delta_e: xr.DataArray, *, age_bands=DECADES, thresholds=THRESHOLDS, name: str = "delta_e") -> xr.Dataset:
    """Summaries of a difference array with dims (``observer``, ``stimulus``, [other dims]).

    Returns ``<name>_by_stimulus`` (statistic, stimulus, …), ``<name>_by_observer`` (statistic,
    observer, …), ``<name>_by_age`` (statistic, age_band, …; needs an ``age_years`` coordinate),
    ``share_of_observers_above_threshold`` (threshold, stimulus, …: share of observers above each threshold) and
    ``share_of_pairs_above_threshold`` (threshold, …: share of observer × stimulus pairs above it).
    ``age_bands`` is resolved by :func:`age_band_edges` (default: the decades covering the ages).

    Parameters
    ----------
    delta_e : xarray.DataArray (observer, stimulus, ...)
        Differences, e.g. CIE 2000 (ΔE00; the ``units`` attribute is kept), with labelled
        ``observer`` and ``stimulus`` coordinates, optionally ``age_years`` (observer) and ``weight``
        (observer: observer weights).
    age_bands : "decades", sequence of float or None
        As for :func:`age_band_edges`.
    thresholds : sequence of float
        Thresholds of the shares above, in the values' unit (default 1, 2, 3: common practice, no
        source).
    name : str
        Prefix of the variable names.

    Returns
    -------
    xarray.Dataset
        The variables above, in the values' unit (shares in unit 1), with the coordinates
        ``statistic`` (mean, median, p95, max), ``age_band`` and ``threshold``; each variable's
        attributes say what it pools and with which observer weights.

    Raises
    ------
    MismatchError
        No ``observer`` or ``stimulus`` dim, or ``age_bands`` not allowed.
    StatisticsError
        Observer weights not allowed.

    References
    ----------
    Hyndman, R. J. & Fan, Y. (1996). Sample quantiles in statistical packages. *The American
    Statistician* 50(4), 361-365, doi:10.1080/00031305.1996.10473566 (the quantile definitions of
    :mod:`metasim.statistics.summaries`).

    Examples
    --------
    >>> import xarray as xr
    >>> from metasim.metamerism import summarise
    >>> differences = xr.DataArray([[0.5, 1.5, 2.5], [1.0, 3.5, 0.2], [0.8, 2.2, 1.1]], dims=("observer", "stimulus"),
    ...                            coords={"observer": [0, 1, 2], "stimulus": ["red", "green", "blue"],
    ...                                    "age_years": ("observer", [25.0, 47.0, 63.0])}, attrs={"units": "ΔE00"})
    >>> summary = summarise(differences, thresholds=(1.0, 2.0))
    >>> summary["delta_e_by_stimulus"].sel(statistic="median").values.tolist()
    [0.8, 2.2, 1.1]
    >>> summary["age_band"].values.tolist(), summary["observers_per_age_band"].values.tolist()
    (['20-29', '30-39', '40-49', '50-59', '60-70'], [1, 0, 1, 0, 1])
    """
    for dim in ("observer", "stimulus"):
        if dim not in delta_e.dims:
            raise MismatchError(f"summaries need an '{dim}' dim, got {tuple(delta_e.dims)}")
    rest = [d for d in delta_e.dims if d not in ("observer", "stimulus")]
    values = np.asarray(delta_e.variable.transpose("observer", "stimulus", *rest).values, dtype=float)
    coords_in = delta_e.coords
    labelled_dims = ["stimulus", *[d for d in rest if d in coords_in], "observer"]
    given = {d: coords_in.variables[d] for d in labelled_dims}  # KeyError for unlabelled stimuli or observers
    ages = coords_in.variables["age_years"].values if "age_years" in coords_in else None
    out, fixed = summary_variables(values, rest, observer_weights(delta_e), ages, age_bands=age_bands,
                                   thresholds=thresholds, name=name, units=delta_e.attrs.get("units", DELTA_E00))
    # one Dataset from (dims, values, attrs) and the dimension coordinates only (as before: the
    # observers' other coordinates are not summarised), the given ones with their indexes
    variables = {**fixed.variables, **given}
    indexes = {**fixed.xindexes, **{d: coords_in.xindexes[d] for d in given if d in coords_in.xindexes}}
    order = [d for d in ("statistic", "stimulus", *rest, "observer", "age_band", "threshold") if d in variables]
    coords = xr.Coordinates({d: variables[d] for d in order}, indexes={d: indexes[d] for d in order if d in indexes})
    return xr.Dataset(out, coords=coords)


def age_band_members(ages, age_bands):
    """Labels, observer counts and membership masks of the age bands [lo, hi) (the last one closed)."""
    edges = np.asarray(age_bands, dtype=float)
    if edges.ndim != 1 or edges.size < 2 or (np.diff(edges) <= 0).any():
        raise MismatchError(f"age_bands={list(age_bands)} is not allowed; give ascending band edges in years")
    ages = np.asarray(ages, dtype=float)
    labels, counts, members = [], [], []
    for i, (lo, hi) in enumerate(zip(edges[:-1], edges[1:])):
        last = i == edges.size - 2
        inside = (ages >= lo) & ((ages <= hi) if last else (ages < hi))
        labels.append(_band_label(lo, hi, last))
        counts.append(int(inside.sum()))
        members.append(inside)
    return labels, counts, members


#: what a summarised array holds, by the name its summaries are called after
QUANTITIES = {"delta_e_2000": "CIE 2000 difference", "delta_e": "colour difference",
              "metamerism_index": "observer-change metamerism index (ISO 18314-4 construction)"}


def summary_attrs(weights: np.ndarray | None, units: str = DELTA_E00, name: str = "delta_e_2000") -> dict[str, dict]:
    """The attributes of the summary variables of :func:`summary_variables` (what each pools, with
    which observer weights, in which unit), by kind: ``by_stimulus``, ``by_observer``, ``by_age``,
    ``observers_per_age_band``, ``share_of_observers_above_threshold``, ``share_of_pairs_above_threshold``. ``units`` are those of
    the values summarised (metasim.units); every long name says what they are (``name`` →
    :data:`QUANTITIES`). A sweep's summaries carry the same (:mod:`metasim.sweep.summary`)."""
    pooled = {"includes_white": "no", "observer_weights": weights_note(weights)}
    what = QUANTITIES.get(name, name.replace("_", " "))
    return {
        "by_stimulus": {"units": units, "long_name": f"{what}, statistics over observers, per stimulus",
                        "pooled_over": "observers (per stimulus)", **pooled},
        "by_observer": {"units": units, "long_name": f"{what}, statistics over stimuli, per observer",
                        "pooled_over": "stimuli (per observer)", "includes_white": "no"},
        "by_age": {"units": units, "long_name": f"{what}, statistics over all observer x stimulus pairs in each age band",
                   "pooled_over": "observer x stimulus pairs (per age band)", **pooled},
        "observers_per_age_band": {"units": "1", "long_name": "observers in each age band"},
        OBSERVER_SHARE: {"units": "1", "long_name": f"share of observers whose {what} is above each threshold, "
                                                    "per stimulus",
                         "thresholds_source": "common practice, no source", "pooled_over": "observers (per stimulus)",
                         **pooled},
        PAIR_SHARE: {"units": "1", "long_name": f"share of observer x stimulus pairs whose {what} is above each "
                                                "threshold",
                     "pooled_over": "observer x stimulus pairs", **pooled},
        "threshold": {"units": units, "long_name": f"{what} threshold"},
    }


def summary_variables(values: np.ndarray, rest, weights: np.ndarray | None, ages, *, age_bands=DECADES,
                      thresholds=THRESHOLDS, name: str = "delta_e",
                      units: str = DELTA_E00) -> tuple[dict, xr.Coordinates]:
    """The summaries of :func:`summarise` from numpy values (observer, stimulus, *rest): a dict of
    (dims, values, attrs) and the Coordinates of the summary dims (statistic, age_band, threshold)."""
    out = {}
    t = np.asarray(check_thresholds(thresholds), dtype=float)
    # the common case (equal weights, no NaN, observer × stimulus only) goes through one compiled
    # pass per summary; anything else through numpy
    fast = weights is None and values.size > 0 and not np.isnan(values).any()
    edges = age_band_edges(age_bands, ages)
    bands = age_band_members(ages, edges) if edges else None
    if fast:  # one sort per summary, then one compiled pass over it; other dims one slice at a time
        segments = [np.flatnonzero(inside) for inside in (bands[2] if bands else []) if inside.any()]
        flat = values.reshape(*values.shape[:2], -1)
        parts = [observer_stimulus_stats(flat[:, :, i], t, segments) for i in range(flat.shape[2])]
        by_stimulus, share, by_observer, by_segment = (
            np.stack([part[j] for part in parts], axis=-1).reshape(*parts[0][j].shape, *values.shape[2:])
            for j in range(4))
    else:
        by_stimulus = statistics_along(values, weights, 0)
        share = share_above_threshold(values, t, weights, 0)
        by_observer = statistics_along(values, None, 1)
    attrs = summary_attrs(weights, units, name)
    out[f"{name}_by_stimulus"] = (("statistic", "stimulus", *rest), by_stimulus, attrs["by_stimulus"])
    out[f"{name}_by_observer"] = (("statistic", "observer", *rest), by_observer, attrs["by_observer"])
    fixed = [label_coordinate("statistic", STATISTICS)]
    if bands:
        band_labels, counts, members = bands
        blocks = []
        for inside in members:
            if fast or not inside.any():
                blocks.append(np.full((len(STATISTICS), *values.shape[2:]), np.nan))
                continue
            block = values[inside].reshape(-1, *values.shape[2:])
            w = None if weights is None else np.repeat(weights[inside], values.shape[1])
            blocks.append(statistics_along(block, w, 0))
        by_age = np.stack(blocks, axis=1)
        filled = [i for i, count in enumerate(counts) if count]
        if fast and filled:
            by_age[:, filled] = by_segment
        out[f"{name}_by_age"] = (("statistic", "age_band", *rest), by_age, attrs["by_age"])
        out["observers_per_age_band"] = ("age_band", np.asarray(counts), attrs["observers_per_age_band"])
        fixed.append(label_coordinate("age_band", tuple(band_labels)))
    out[OBSERVER_SHARE] = (("threshold", "stimulus", *rest), share, attrs[OBSERVER_SHARE])
    # every stimulus weighs the same, so the share of all pairs is the mean of the stimuli's shares
    out[PAIR_SHARE] = (("threshold", *rest), share.mean(axis=1), attrs[PAIR_SHARE])
    threshold = label_coordinate("threshold", tuple(t.tolist()))
    variables = {name: variable for part in fixed for name, variable in part.variables.items()}
    indexes = {name: index for part in fixed for name, index in part.xindexes.items()}
    # a fresh variable for the attributes (the cached coordinate is shared), its index reused
    variables["threshold"] = xr.Variable("threshold", t, attrs["threshold"])
    indexes["threshold"] = threshold.xindexes["threshold"]
    return out, xr.Coordinates(variables, indexes=indexes)


__all__ = ["STATISTICS", "THRESHOLDS", "DECADES", "decade_age_bands", "age_band_edges", "age_band_labels", "summarise",
           "summary_attrs", "summary_variables", "age_band_members", "observer_weights"]
