"""The Pareto-front section of a sweep or search report: the figure and a table of the front's designs."""

from __future__ import annotations

import numpy as np
import xarray as xr

from metasim import plots
from metasim.report.html import _image, _num, _pct, _table
from metasim.sweep.pareto import objective_values, pareto_front, pareto_objectives


def with_pareto_ranks(ds: xr.Dataset) -> xr.Dataset:
    """The result with ``pareto_rank`` (over the default objectives when the file has none yet)."""
    if "pareto_rank" in ds or "design" not in ds.dims or "delta_e_2000_overall" not in ds:
        return ds
    return pareto_front(ds)


def pareto_caption(ds: xr.Dataset) -> str:
    words = [f"{o.get('long_name', o['name'])} ({'lower' if o['sense'] == 'min' else 'higher'} is better)"
             for o in pareto_objectives(ds)]
    return ("Every design, the first objective against each other one; the Pareto front (designs no other design "
            f"beats on every objective) highlighted and labelled with its design number. Objectives: {'; '.join(words)}.")


def pareto_section(ds: xr.Dataset, figure: tuple | None = None, shown: int = 30) -> str:
    """HTML: heading, the Pareto figure (PNG bytes and caption) and the table of the front's designs."""
    if "pareto_rank" not in ds:
        return ""
    objectives = pareto_objectives(ds)
    if not objectives:
        return ""
    values = objective_values(ds, {o["name"]: o["sense"] for o in objectives})[0]
    ranks = np.asarray(ds["pareto_rank"].values)
    front = np.flatnonzero(ranks == 1)
    front = front[np.argsort(values[front, 0], kind="stable")]
    varied = plots.sweep_parameters(ds)[0]
    header = ["design"] + [plots.parameter_label(ds, c) for c in varied]
    header += [plots.objective_axis(o["name"], o["sense"], o.get("long_name"))[0].split("\n")[0] for o in objectives]
    rows = []
    for index in front[:shown]:
        row = [str(plots.design_number(ds, index))] + [f"{ds[c].values[index]:.4g}" if np.issubdtype(ds[c].dtype, np.number)
                                                   else str(ds[c].values[index]) for c in varied]
        for j, o in enumerate(objectives):
            scale = plots.objective_axis(o["name"], o["sense"])[1]
            row.append(_pct(values[index, j]) if scale == 100.0 else _num(values[index, j]))
        rows.append(row)
    count, total = len(front), ds.sizes["design"]
    unranked = int((ranks == 0).sum())
    text = (f"<p>{count} of {total} designs are on the Pareto front: for each, every other design is worse on at "
            "least one objective. Moving along the front trades one objective for another; a design off the front "
            "can be improved on every objective at once."
            + (f" {unranked} designs lack an objective value and are not ranked." if unranked else "")
            + (f" The table lists the first {shown}, by the first objective." if count > shown else
               " The table lists them by the first objective.") + "</p>")
    out = "<h2>Pareto front</h2>" + text
    if figure is not None:
        out += _image(*figure)
    return out + _table(header, rows)


__all__ = ["with_pareto_ranks", "pareto_caption", "pareto_section"]
