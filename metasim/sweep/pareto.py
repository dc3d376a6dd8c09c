"""Pareto fronts of sweep and search results: which designs no other design beats on every objective.

A design *dominates* another when it is at least as good on every objective and strictly better on
one. Rank 1 (the front) holds the designs no design dominates; rank 2 those only rank-1 designs
dominate, and so on (non-dominated sorting, Deb et al. 2002, "A fast and elitist multiobjective
genetic algorithm: NSGA-II", IEEE Trans. Evol. Comput. 6(2)). Designs with equal values on every
objective do not dominate each other and share a rank. A design with a missing (NaN) objective is
not ranked: rank 0.

The ranks are computed by the efficient non-dominated sort with binary search (Zhang et al. 2015,
"An efficient approach to nondominated sorting for evolutionary multiobjective optimization", IEEE
Trans. Evol. Comput. 19(2)): designs in lexicographic order (a design can only be dominated by one
before it), each put into the first front none of whose members dominates it. Memory grows with the
number of designs, not its square.

Objectives are named (:data:`OBJECTIVES`: where the numbers live in a sweep result and whether more
is better), or given as ``{"variable": "min" | "max"}`` for any ``design`` variable.

Layer: sweep (numpy and xarray only).
"""

from __future__ import annotations

import json
from typing import Mapping, Sequence

import numpy as np
import xarray as xr

from metasim.errors import SweepError
from metasim.sweep._kernels.pareto import sorted_ranks
from metasim.units import DELTA_E00, LAB_VOLUME

#: Named objectives: (variable, selection, sense, words, units). Sense "min": smaller is better.
OBJECTIVES = {
    "p95_mismatch": ("delta_e_2000_overall", {"statistic": "p95"}, "min",
                     "95th percentile CIE 2000 difference over all observer × stimulus pairs", DELTA_E00),
    "median_mismatch": ("delta_e_2000_overall", {"statistic": "median"}, "min",
                        "median CIE 2000 difference over all observer × stimulus pairs", DELTA_E00),
    "white_p95": ("delta_e_white_overall", {"statistic": "p95"}, "min",
                  "95th percentile CIE 2000 difference between the whites over observers", DELTA_E00),
    "bt2020_coverage": ("gamut_coverage", {"reference_gamut": "bt2020"}, "max",
                        "share of the BT.2020 xy area covered", "1"),
    "p3_coverage": ("gamut_coverage", {"reference_gamut": "display_p3"}, "max",
                    "share of the Display P3 xy area covered", "1"),
    "bt709_coverage": ("gamut_coverage", {"reference_gamut": "bt709"}, "max",
                       "share of the BT.709 xy area covered", "1"),
    "gamut_area": ("gamut_area_xy", {}, "max", "CIE 1931 xy area of the chromaticity gamut", "1"),
    "lab_volume": ("lab_volume", {}, "max", "CIELAB volume of the colour solid", LAB_VOLUME),
    "white_efficacy": ("white_efficacy", {}, "max", "luminous efficacy of radiation of the white", "lm W-1"),
}
SENSES = ("min", "max")


def default_objectives(ds: xr.Dataset) -> dict:
    """The default objectives a result supports: p95 mismatch (min); CIELAB volume when the result
    has it, else BT.2020 coverage (max); luminous efficacy of the white (max) when present."""
    names = ["p95_mismatch", "lab_volume" if "lab_volume" in ds else "bt2020_coverage"]
    if "white_efficacy" in ds:
        names.append("white_efficacy")
    return {name: OBJECTIVES[name][2] for name in names}


def pareto_ranks(values, senses: Sequence[str] | None = None) -> np.ndarray:
    """Non-dominated sorting ranks of ``values`` (n points × k objectives): 1 = the front, 0 = not ranked.

    Parameters
    ----------
    values : array_like, shape (n, k)
        Objective values per point.
    senses : sequence of {"min", "max"}, optional
        Per objective whether smaller or larger is better (default: all "min").

    Returns
    -------
    ndarray of int64, shape (n,)
        Rank of each point (1 on the front); 0 for points with a NaN objective.

    Examples
    --------
    >>> from metasim.sweep.pareto import pareto_ranks
    >>> pareto_ranks([[1, 5], [2, 2], [3, 3], [4, 1], [2, 2]]).tolist()  # the repeat of (2, 2) shares rank 1
    [1, 1, 2, 1, 1]
    """
    points = np.asarray(values, dtype=float)
    if points.ndim != 2 or points.shape[1] < 1:
        raise SweepError(f"Pareto ranks need an (n points, k objectives) array, got shape {points.shape}")
    senses = ["min"] * points.shape[1] if senses is None else list(senses)
    if len(senses) != points.shape[1] or any(s not in SENSES for s in senses):
        raise SweepError(f"senses {senses!r}: need one of {', '.join(SENSES)} per objective ({points.shape[1]})")
    signs = np.array([1.0 if s == "min" else -1.0 for s in senses])
    return minimised_ranks(np.ascontiguousarray(points.T) * signs[:, None])


def minimised_ranks(points: np.ndarray) -> np.ndarray:
    """:func:`pareto_ranks` of ``points`` (k objectives × n points, float64, C order: each
    objective's values contiguous; every objective minimised), whose points with a missing or
    infinite value are overwritten with NaN (so they sort last).

    Working memory besides ``points`` and the ranks: a mask and the lexicographic order of the
    points, and the compiled sort's copies of the points in their fronts
    (:func:`metasim.sweep._kernels.pareto.sorted_ranks`).
    """
    ranks = np.zeros(points.shape[1], dtype=np.int64)
    finite = np.isfinite(points[0])
    for row in points[1:]:
        finite &= np.isfinite(row)
    ranked = int(np.count_nonzero(finite))
    if ranked == 0:
        return ranks
    if ranked < finite.size:
        points[:, ~finite] = np.nan  # after every finite point on every objective
    del finite
    # lexicographic (first objective, then the next ...); NaN points last; ties in point order, as in a
    # lexicographic sort of the finite points alone
    order = np.lexsort(points[::-1])[:ranked]
    sorted_ranks(points, order, ranks)  # compiled: metasim.sweep._kernels.pareto
    return ranks


def objective_columns(ds: xr.Dataset, objectives: Mapping[str, str] | Sequence[str] | None = None):
    """(columns, senses, names, words) of the named objectives of a result: each column a DataArray
    over ``design`` only, not read (for a result opened from its file, values are read when used)."""
    if objectives is None:
        objectives = default_objectives(ds)
    elif not isinstance(objectives, Mapping):
        objectives = {str(name): OBJECTIVES[name][2] if name in OBJECTIVES else "min" for name in objectives}
    if not objectives:
        raise SweepError("no objectives given; name at least one, e.g. {'p95_mismatch': 'min'}")
    columns, senses, words = [], [], []
    for name, sense in objectives.items():
        if sense not in SENSES:
            raise SweepError(f"objective {name!r}: sense {sense!r} is not known; allowed: {', '.join(SENSES)}")
        if name in OBJECTIVES:
            variable, selection, _, text, _ = OBJECTIVES[name]
        else:
            variable, selection, text = name, {}, None
        if variable not in ds:
            known = [k for k, v in OBJECTIVES.items() if v[0] in ds] + [
                str(k) for k, v in ds.data_vars.items() if v.dims == ("design",)]
            raise SweepError(f"objective {name!r}: the result holds no {variable!r}; allowed here: "
                             f"{', '.join(dict.fromkeys(known))}")
        column = ds[variable].sel(selection) if selection else ds[variable]
        if column.dims != ("design",):
            raise SweepError(f"objective {name!r}: {variable!r} has dims {column.dims}; an objective needs one "
                             "number per design")
        columns.append(column)
        senses.append(sense)
        words.append(text or str(ds[variable].attrs.get("long_name", name)))
    return columns, senses, list(objectives), words


def objective_values(ds: xr.Dataset, objectives: Mapping[str, str] | Sequence[str] | None = None):
    """(values (design × objective), senses, names, words) of the named objectives of a result."""
    columns, senses, names, words = objective_columns(ds, objectives)
    return np.stack([np.asarray(c.values, dtype=float) for c in columns], axis=1), senses, names, words


#: designs whose objective values are read at once by :func:`pareto_rank_variable`
READ_DESIGNS = 1 << 16


def pareto_rank_variable(ds: xr.Dataset, objectives: Mapping[str, str] | Sequence[str] | None = None, *,
                         read_designs: int | None = None) -> xr.DataArray:
    """The ``pareto_rank`` variable of a result (:func:`pareto_front`), its objectives read in blocks.

    Each objective is read ``read_designs`` (default :data:`READ_DESIGNS`) designs at a time into one (design × objective) array
    (for a result opened from its file, only those numbers are read), so besides that array and the
    ranks the memory holds the lexicographic order and the fronts' copies of the points
    (:func:`minimised_ranks`), whatever the size of the result's other variables.
    """
    if "design" not in ds.dims:
        raise SweepError(f"a Pareto front needs a result with a 'design' dim, got dims {tuple(ds.dims)}")
    columns, senses, names, words = objective_columns(ds, objectives)
    count = ds.sizes["design"]
    points = np.empty((len(columns), count))  # objective by objective
    step = max(1, int(READ_DESIGNS if read_designs is None else read_designs))
    for row, column, sense in zip(points, columns, senses):
        for a in range(0, count, step):
            b = min(a + step, count)
            row[a:b] = column.isel(design=slice(a, b)).values
            if sense == "max":
                row[a:b] *= -1.0
    ranks = minimised_ranks(points)
    del points
    described = [{"name": n, "sense": s, "long_name": w} for n, s, w in zip(names, senses, words)]
    return xr.DataArray(ranks, dims="design", attrs={
        "units": "1", "long_name": "Pareto rank (1 = on the front; 0 = an objective missing)",
        "objectives": json.dumps(described),
        "method": "non-dominated sorting (Deb et al. 2002), efficient binary-search variant (Zhang et al. 2015)"})


def pareto_front(ds: xr.Dataset, objectives: Mapping[str, str] | Sequence[str] | None = None) -> xr.Dataset:
    """The result with a ``pareto_rank`` variable over ``design`` (1 = on the Pareto front).

    Parameters
    ----------
    ds : Dataset
        A sweep or search result (one row of summaries per design).
    objectives : mapping of name to "min"/"max", or sequence of names, optional
        Named objectives (:data:`OBJECTIVES`) or ``design`` variables; default
        :func:`default_objectives`.

    Returns
    -------
    Dataset
        ``ds`` with ``pareto_rank`` (int, 0 where an objective is missing); its attribute
        ``objectives`` (JSON) lists each objective's name and sense.

    Examples
    --------
    >>> import numpy as np, xarray as xr
    >>> from metasim.sweep.pareto import pareto_front
    >>> ds = xr.Dataset({"cost": ("design", [3.0, 1.0, 2.0]), "gain": ("design", [3.0, 1.0, 1.0])})
    >>> pareto_front(ds, {"cost": "min", "gain": "max"})["pareto_rank"].values.tolist()
    [1, 1, 2]
    """
    return ds.assign(pareto_rank=pareto_rank_variable(ds, objectives))


def pareto_objectives(ds: xr.Dataset) -> list[dict]:
    """The objectives recorded with a result's ``pareto_rank`` ([{name, sense, long_name}], [] if none)."""
    if "pareto_rank" not in ds:
        return []
    try:
        out = json.loads(ds["pareto_rank"].attrs.get("objectives", "[]"))
    except (TypeError, ValueError):
        return []
    return out if isinstance(out, list) else []


__all__ = ["OBJECTIVES", "SENSES", "READ_DESIGNS", "default_objectives", "pareto_ranks", "minimised_ranks",
           "objective_columns", "objective_values", "pareto_rank_variable", "pareto_front", "pareto_objectives"]
