"""The search section of a report on a design search (:func:`metasim.sweep.run_search`)."""

from __future__ import annotations

import numpy as np
import xarray as xr

from metasim import plots
from metasim.report.html import _e, _image, _num, _table
from metasim.sweep.pareto import OBJECTIVES


def _objective_text(name: str) -> str:
    """The reader's words for a named objective or a design variable (the key itself when unknown)."""
    return OBJECTIVES[name][3] if name in OBJECTIVES else name


def is_search(ds: xr.Dataset) -> bool:
    return ds.attrs.get("search_kind") == "metasim search" and "search_objective" in ds


def search_section(ds: xr.Dataset, figure: tuple | None = None) -> str:
    """HTML: what was searched, the best design found and the convergence figure."""
    if not is_search(ds):
        return ""
    spec = plots.sweep_spec(ds)
    settings = spec.get("search", {}) if isinstance(spec.get("search"), dict) else {}
    index = int(ds.attrs.get("best_design", int(np.argmin(ds["search_objective"].values))))
    feasible = bool(ds["constraint_violation"].values[index] == 0)
    objective = " + ".join(f"{w:g} × {_objective_text(n)}" if w != 1 else _objective_text(n)
                           for n, w in settings.get("objective", {}).items())
    limits = []
    for name, bound in (settings.get("constraints") or {}).items():
        limits += [f"{_objective_text(name)} ≥ {bound['min']:g}"] if bound.get("min") is not None else []
        limits += [f"{_objective_text(name)} ≤ {bound['max']:g}"] if bound.get("max") is not None else []
    text = (f"<p>Differential evolution (seed {_e(ds.attrs.get('search_seed', '?'))}) over "
            f"{_e(', '.join(plots.parameter_label(ds, c) for c in spec.get('parameters', []) if c in ds.coords))}: "
            f"{ds.sizes['design']} designs evaluated in {_e(ds.attrs.get('generation_count', '?'))} generations of "
            f"{_e(settings.get('population', '?'))}. Minimised: {_e(objective or '?')}"
            f"{'; constraints: ' + _e(', '.join(limits)) if limits else ''}.</p>")
    rows = [[plots.parameter_label(ds, c), f"{float(ds[c].values[index]):.4g}"]
            for c in spec.get("parameters", []) if c in ds.coords]
    rows.append(["value minimised", _num(float(ds["search_objective"].values[index]), 4)])
    rows.append(["meets every constraint", "yes" if feasible else "no: no design found meets them"])
    bounds = spec.get("bounds", {})
    edge = [c for c, (lo, hi) in bounds.items() if c in ds.coords and min(
        abs(float(ds[c].values[index]) - lo), abs(float(ds[c].values[index]) - hi)) <= 1e-3 * max(hi - lo, 1e-9)]
    note = (f"<p>The best design sits at the edge of the searched range of {_e(', '.join(edge))}; a wider range "
            "may hold better designs.</p>") if edge else ""
    out = (f"<h2>Search</h2>{text}<h3>Best design found: design {plots.design_number(ds, index)}</h3>" + _table(["quantity", "value"], rows) + note)
    if figure is not None:
        out += _image(*figure)
    return out


__all__ = ["is_search", "search_section"]
