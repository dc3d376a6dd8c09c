"""The convergence figure of a design search: every design's value by generation, the best so far."""

from __future__ import annotations

import textwrap

import numpy as np
import xarray as xr
from matplotlib import rc_context
from matplotlib.figure import Figure
from matplotlib.ticker import MaxNLocator

from metasim.plots.figures import DESIGN_COLOURS, OUTLINE_COLOUR, REFERENCE_COLOUR, STYLE, _figure
from metasim.units import axis_label


def search_convergence(result: xr.Dataset, penalty: float = 1.0e6) -> Figure:
    """Value of every evaluated design (feasible ones; infeasible ones marked at the top) per generation,
    and the best value found so far (:func:`metasim.sweep.run_search` results).

    Parameters
    ----------
    result : xarray.Dataset
        A search result over ``design``: ``generation`` (int; 0 = the initial population) and
        ``search_objective`` (the value minimised, with its ``units`` and ``long_name``).
    penalty : float
        Values at or above it mark designs that break a constraint; the default repeats
        :data:`metasim.sweep.search.PENALTY` (1e6).

    Returns
    -------
    matplotlib.figure.Figure
        One axis: designs per generation, the best so far as a line.

    Examples
    --------
    >>> import xarray as xr
    >>> result = xr.Dataset({"generation": ("design", [0, 0, 1, 1]),
    ...                      "search_objective": ("design", [2.1, 1.0e6, 1.7, 1.4],
    ...                                           {"units": "ΔE00", "long_name": "95th percentile CIE 2000 difference"})})
    >>> fig = search_convergence(result)
    >>> fig.axes[0].get_title(), fig.axes[0].get_ylabel()
    ('Search: 4 designs in 2 generations', 'Minimised: 95th percentile CIE 2000\\ndifference (ΔE00)')
    """
    generation = np.asarray(result["generation"].values)
    value = np.asarray(result["search_objective"].values, dtype=float)
    feasible = value < penalty
    count = int(generation.max()) + 1
    best = np.array([value[generation <= g].min() for g in range(count)])
    with rc_context(STYLE):
        fig, axes = _figure(9.0, 4.2)
        ax = axes[0, 0]
        ax.scatter(generation[feasible], value[feasible], s=12, color=OUTLINE_COLOUR, alpha=0.5, lw=0,
                   label="designs of the generation")
        ok = best < penalty
        ax.plot(np.arange(count)[ok], best[ok], color=DESIGN_COLOURS[0], lw=2.0, marker="o", ms=4,
                label="best so far")
        if (~feasible).any() and feasible.any():
            top = float(np.max(value[feasible]))
            bad = np.flatnonzero(~feasible)
            ax.scatter(generation[bad], np.full(bad.size, top * 1.05 if top > 0 else 1.0), marker="x", s=14,
                       color=REFERENCE_COLOUR, lw=0.8, label="breaks a constraint")
        ax.set_xlabel("Generation (count; 0 = initial population)")
        words = str(result["search_objective"].attrs.get("long_name", "value the search minimises")).split(" (")[0]
        ax.set_ylabel(axis_label(textwrap.fill(f"Minimised: {words}", 40),
                                 result["search_objective"].attrs.get("units", "1")))
        ax.xaxis.set_major_locator(MaxNLocator(integer=True))
        ax.set_title(f"Search: {value.size} designs in {count} generations")
        ax.legend(loc="upper left", bbox_to_anchor=(1.01, 1.0), frameon=False)
    return fig


__all__ = ["search_convergence"]
