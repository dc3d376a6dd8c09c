"""A design search instead of a grid: differential evolution over continuous primary parameters.

A grid grows as (values)^(parameters); four primaries with a peak and a width each at ten values is
10^8 designs. A search instead evaluates a population of designs per generation and moves it towards
the objective: differential evolution (Storn & Price 1997, "Differential evolution — a simple and
efficient heuristic for global optimization over continuous spaces", J. Global Optim. 11), as
implemented by :func:`scipy.optimize.differential_evolution` in its vectorised mode, so that each
generation is one batched evaluation of all its designs (:func:`metasim.sweep.run_sweep`: one
:func:`metasim.mismatch` call along ``design`` per chunk, on the sweep schedulers).

The space (:func:`search_space`): per searched primary a peak wavelength range, a width (range or
fixed) and a relative power (range or fixed: the primary's integrated radiance before white
calibration, which matters for more than three primaries); other primaries come fixed from a base
design; 3 to 6 primaries in all.

The objective is one named objective (:data:`metasim.sweep.pareto.OBJECTIVES`, e.g.
``"p95_mismatch"``) or a weighted sum of several (``{"p95_mismatch": 1, "bt2020_coverage": 5}``:
each term is minimised, a "max" objective enters with its sign turned). An epsilon-constrained pair
is one objective plus the other as a constraint. Constraints bound named objectives or ``design``
variables: ``{"bt2020_coverage": {"min": 0.9}, "white_efficacy": {"min": 250}}``. (A display's
luminance is set by its white calibration; a floor on light per watt is a ``white_efficacy``
constraint.) A design that breaks a constraint gets the value ``PENALTY`` plus its summed relative
violation, so every feasible design beats every infeasible one and among infeasible designs the
smaller violation wins (Deb 2000, "An efficient constraint handling method for genetic algorithms",
Comput. Methods Appl. Mech. Eng. 186).

Store (resumable like a sweep)::

    STORE/search.json            what the search is: spec hash, seed, settings, space, objective
    STORE/generation-00000/      the initial population: a sweep store (manifest, chunks, sweep.nc)
    STORE/generation-00001/      each later generation, written as it completes
    STORE/search.nc              every evaluated design, all generations (the layout of a sweep)
    STORE/writer.lock            while a run writes the store

The search is deterministic for a seed, so a re-run replays it: a generation already in the store
is read back (its designs checked to be the ones asked for), a half-finished one resumes its chunks,
and the search continues where it stopped with the same result as an uninterrupted run. The number
of generations is not part of the spec hash: a finished search given more generations continues.

Layer: sweep.
"""

from __future__ import annotations

import json
import math
import shutil
from dataclasses import dataclass, field
from pathlib import Path
from typing import Mapping

import numpy as np
import xarray as xr

from metasim import emitters
from metasim._version import __version__
from metasim.checks import current_spelling
from metasim.errors import StoreIntegrityError, SweepError
from metasim.io import load_dataset, remove_stale_partials, save_dataset, write_text
from metasim.metamerism.summary import THRESHOLDS
from metasim.metamerism.engine import resolve_observers
from metasim.spectra import RADIANCE_UNITS, WAVELENGTH_ATTRS, default_grid
from metasim.sweep.grid import GRID_KINDS, _base_spectra
from metasim.sweep.pareto import OBJECTIVES, SENSES, objective_values, pareto_front
from metasim.sweep.run import run_sweep
from metasim.sweep.store import COMBINED, MANIFEST, spec_hash, store_lock, upgraded

SEARCH_FORMAT = "metasim search store"
SEARCH_MANIFEST = "search.json"
SEARCH_RESULT = "search.nc"
#: value of a design that breaks a constraint (plus its summed relative violation)
PENALTY = 1.0e6
PRIMARY_COUNT = (3, 6)
PARAMETERS = ("peak_nm", "fwhm_nm", "relative_power")
#: a searched primary's parameters renamed: old name → new name (the old still taken for one release)
RENAMED_PARAMETERS = {"width_nm": "fwhm_nm", "power": "relative_power"}
#: the parameter names the spec hash reads (those of stores made before the renames, so they resume)
_HASHED_PARAMETERS = {new: old for old, new in RENAMED_PARAMETERS.items()}
_UNITS = {"peak_nm": "nm", "fwhm_nm": "nm", "relative_power": "1"}


def generation_folder(store, generation: int) -> Path:
    return Path(store) / f"generation-{generation:05d}"


def _range(where: str, value, low: float, high: float) -> tuple[float, float]:
    """(lo, hi) from a number (fixed: lo == hi) or a two-number list; inside [low, high]."""
    items = list(value) if isinstance(value, (list, tuple, np.ndarray)) else [value, value]
    if len(items) != 2 or any(isinstance(v, bool) or not isinstance(v, (int, float, np.integer, np.floating))
                              for v in items):
        raise SweepError(f"{where}: {value!r} is not allowed; give a number (fixed) or [lowest, highest]")
    lo, hi = float(items[0]), float(items[1])
    if not (math.isfinite(lo) and math.isfinite(hi)) or lo > hi or lo < low or hi > high:
        raise SweepError(f"{where}: {value!r} is not allowed; need lowest <= highest within {low:g}-{high:g}")
    return lo, hi


@dataclass(frozen=True)
class SearchSpace:
    """The searched primaries (label → (lo, hi) per parameter), the emitter kind, fixed base primaries."""

    kind: str
    primaries: dict
    wavelengths: np.ndarray = field(repr=False)
    base: xr.DataArray | None = field(default=None, repr=False)
    settings: dict = field(default_factory=dict)
    profile: str = "gaussian"

    @property
    def parameters(self) -> list[tuple[str, float, float]]:
        """The searched parameters: (coordinate name, lowest, highest), in a fixed order; a
        coordinate is named by the primary's label and the parameter, e.g. ``R_peak_nm``."""
        return [(f"{label}_{p}", lo, hi) for label, ranges in self.primaries.items()
                for p, (lo, hi) in ranges.items() if hi > lo]

    @property
    def labels(self) -> list[str]:
        fixed = [str(p) for p in self.base.primary.values] if self.base is not None else []
        return fixed + [label for label in self.primaries if label not in fixed]

    def describe(self) -> dict:
        """The space as the spec hash and the designs' ``parameters`` attribute record it (each
        primary's parameters under the names of stores made before the renames, which still resume)."""
        return {"kind": self.kind, "profile": self.profile,
                "primaries": {k: {_HASHED_PARAMETERS.get(p, p): list(v) for p, v in r.items()}
                              for k, r in self.primaries.items()},
                "fixed_primaries": [p for p in self.labels if p not in self.primaries]}

    def designs(self, x) -> xr.DataArray:
        """The designs of parameter rows ``x`` (designs × searched parameters): design × primary × wavelength."""
        x = np.atleast_2d(np.asarray(x, dtype=float))
        names = [name for name, _, _ in self.parameters]
        if x.shape[1] != len(names):
            raise SweepError(f"need {len(names)} parameters per design ({', '.join(names)}), got {x.shape[1]}")
        count, wl = x.shape[0], self.wavelengths
        column = {}
        for label, ranges in self.primaries.items():
            for p, (lo, hi) in ranges.items():
                name = f"{label}_{p}"
                column[name] = x[:, names.index(name)] if name in names else np.full(count, lo)
        function = {"laser": emitters.laser_line, "gaussian": emitters.gaussian, "quantum_dot": emitters.quantum_dot}
        labels = self.labels
        values = np.empty((count, len(labels), wl.size))
        for j, label in enumerate(labels):
            if label not in self.primaries:
                values[:, j] = self.base.sel(primary=label).values[None, :]
                continue
            options = {"profile": self.profile} if self.kind == "laser" else {}
            spectra = function[self.kind](column[f"{label}_peak_nm"], column[f"{label}_fwhm_nm"], wl,
                                          name=[f"{label} {i}" for i in range(count)], **options)
            values[:, j] = spectra.transpose("primary", "wavelength").values * column[f"{label}_relative_power"][:, None]
        coords = {"design": ("design", np.arange(count), {"units": "1", "long_name": "design index"}),
                  "primary": labels, "wavelength": ("wavelength", wl, dict(WAVELENGTH_ATTRS))}
        width_word = "line width (FWHM)" if self.kind == "laser" else "FWHM"
        words = {"peak_nm": "peak wavelength", "fwhm_nm": width_word, "relative_power": "relative power before calibration"}
        for label, ranges in self.primaries.items():
            for p in ranges:
                if f"{label}_{p}" in names:
                    coords[f"{label}_{p}"] = ("design", column[f"{label}_{p}"],
                                              {"units": _UNITS[p], "long_name": f"{words[p]} of primary {label}"})
        attrs = {"units": RADIANCE_UNITS, "long_name": "spectral radiance of each primary at full drive, per design",
                 "model": f"design search: {self.kind} primaries {', '.join(self.primaries)} searched",
                 "parameters": json.dumps(self.describe())}
        if self.settings:
            attrs["display_settings"] = self.settings
        return xr.DataArray(values, dims=("design", "primary", "wavelength"), coords=coords, attrs=attrs,
                            name="spectra")


def search_space(kind: str = "laser", primaries: Mapping[str, Mapping] | None = None, *, base=None,
                 wavelengths=None, profile: str = "gaussian") -> SearchSpace:
    """The space of a design search.

    Parameters
    ----------
    kind : {"laser", "gaussian", "quantum_dot"}
        Emitter of the searched primaries.
    primaries : mapping of label to {"peak_nm", "fwhm_nm", "relative_power"}
        Each value a number (fixed) or ``[lowest, highest]``; ``peak_nm`` is required (the range
        of available emitters), ``fwhm_nm`` (full width at half maximum, a laser's line width)
        defaults to 1 nm, ``relative_power`` (before white calibration) to 1. The old names
        ``width_nm`` and ``power`` still work for one release, with a warning.
    base : Display or DataArray, optional
        Fixed primaries (spectra before calibration) and, for a Display, the display settings; a
        searched label replaces the base primary of that label.
    wavelengths : optional
        The grid (default: the base's, else 390–830 nm at 1 nm).

    Returns
    -------
    SearchSpace
        The searched parameters, their bounds and the fixed primaries.

    Examples
    --------
    >>> from metasim.sweep import search_space
    >>> space = search_space("laser", {"R": {"peak_nm": [610, 660]}, "G": {"peak_nm": [510, 550]},
    ...                                "B": {"peak_nm": 465}})
    >>> [name for name, _, _ in space.parameters], dict(space.designs([[630, 532]]).sizes)
    (['R_peak_nm', 'G_peak_nm'], {'design': 1, 'primary': 3, 'wavelength': 441})
    """
    if kind not in GRID_KINDS:
        raise SweepError(f"kind={kind!r} is not known; allowed: {', '.join(GRID_KINDS)}")
    if not isinstance(primaries, Mapping) or not primaries:
        raise SweepError("primaries must map at least one label to its ranges, e.g. {'R': {'peak_nm': [610, 660]}}")
    fixed, settings = _base_spectra(base)
    wl = np.asarray(wavelengths if wavelengths is not None else
                    (fixed.wavelength.values if fixed is not None else default_grid().values), dtype=float)
    out = {}
    for label, ranges in primaries.items():
        label = str(label)
        if not isinstance(ranges, Mapping) or "peak_nm" not in ranges:
            raise SweepError(f"primary {label!r}: give at least peak_nm (a number or [lowest, highest])")
        given = dict(ranges)
        ranges = {}
        for key, value in given.items():
            new = current_spelling(key, RENAMED_PARAMETERS, f"primary {label!r} parameter", stacklevel=3)
            if new != key and new in given:
                raise SweepError(f"primary {label!r}: both {key!r} and {new!r} given; give only {new!r}")
            ranges[new] = value
        unknown = [k for k in ranges if k not in PARAMETERS]
        if unknown:
            raise SweepError(f"primary {label!r}: unknown parameter {unknown[0]!r}; allowed: {', '.join(PARAMETERS)}")
        out[label] = {"peak_nm": _range(f"primary {label!r} peak_nm", ranges["peak_nm"], wl[0], wl[-1]),
                      "fwhm_nm": _range(f"primary {label!r} fwhm_nm", ranges.get("fwhm_nm", 1.0), 1e-3, 200.0),
                      "relative_power": _range(f"primary {label!r} relative_power", ranges.get("relative_power", 1.0),
                                               1e-6, 1e6)}
    space = SearchSpace(kind, out, wl, fixed, settings, profile)
    count = len(space.labels)
    if not PRIMARY_COUNT[0] <= count <= PRIMARY_COUNT[1]:
        raise SweepError(f"the designs would have {count} primaries ({', '.join(space.labels)}); allowed: "
                         f"{PRIMARY_COUNT[0]} to {PRIMARY_COUNT[1]}")
    if not space.parameters:
        raise SweepError("nothing to search: every parameter is fixed; give at least one [lowest, highest] range")
    return space


# -- objective and constraints --------------------------------------------------------------------

def _objective_terms(objective) -> dict:
    """{name: (weight, sense)} of a named objective or a weighted mapping of them."""
    if isinstance(objective, str):
        objective = {objective: 1.0}
    if not isinstance(objective, Mapping) or not objective:
        raise SweepError(f"objective {objective!r}: give a name ({', '.join(OBJECTIVES)}) or a mapping of names to "
                         "weights")
    out = {}
    for name, weight in objective.items():
        if name not in OBJECTIVES:
            raise SweepError(f"objective {name!r} is not known; allowed: {', '.join(OBJECTIVES)}")
        if isinstance(weight, bool) or not isinstance(weight, (int, float)) or not math.isfinite(weight) or weight <= 0:
            raise SweepError(f"objective {name!r}: weight {weight!r} is not allowed; need a number > 0")
        out[str(name)] = (float(weight), OBJECTIVES[name][2])
    return out


def _constraint_terms(constraints) -> dict:
    """{name: (lowest or None, highest or None)}."""
    out = {}
    for name, bound in (constraints or {}).items():
        if not isinstance(bound, Mapping) or not bound or any(k not in ("min", "max") for k in bound):
            raise SweepError(f"constraint {name!r}: {bound!r} is not allowed; give {{'min': value}} and/or "
                             "{'max': value}")
        limits = []
        for key in ("min", "max"):
            value = bound.get(key)
            if value is not None and (isinstance(value, bool) or not isinstance(value, (int, float))
                                      or not math.isfinite(value)):
                raise SweepError(f"constraint {name!r}: {key} = {value!r} must be a finite number")
            limits.append(None if value is None else float(value))
        out[str(name)] = tuple(limits)
    return out


def search_values(ds: xr.Dataset, objective, constraints=None) -> tuple[np.ndarray, np.ndarray]:
    """(value to minimise, summed relative constraint violation) of every design of a sweep result."""
    terms = _objective_terms(objective)
    values = objective_values(ds, {name: sense for name, (_, sense) in terms.items()})[0]
    signed = np.array([w * (1.0 if s == "min" else -1.0) for w, s in terms.values()])
    f = values @ signed
    violation = np.zeros(ds.sizes["design"])
    for name, (low, high) in _constraint_terms(constraints).items():
        v = objective_values(ds, [name])[0][:, 0]
        for limit, excess in ((low, None if low is None else low - v), (high, None if high is None else v - high)):
            if limit is not None:
                violation += np.where(np.isfinite(v), np.maximum(excess, 0.0) / max(abs(limit), 1e-12), 1.0)
    f = np.where(np.isfinite(f), f, PENALTY)
    return np.where(violation > 0, PENALTY + violation, f), violation


# -- the store ------------------------------------------------------------------------------------

def _open_search_store(store: Path, manifest: dict, replace: bool) -> None:
    path = store / SEARCH_MANIFEST
    remove_stale_partials(path)
    remove_stale_partials(store / SEARCH_RESULT)
    existing = None
    if path.is_file():
        try:
            existing = json.loads(path.read_text(encoding="utf-8"))
        except (OSError, ValueError):
            if not replace:
                raise StoreIntegrityError(f"{path}: not a readable search manifest; give replace=True to start "
                                          "this store afresh") from None
        if existing is not None and (not isinstance(existing, dict) or existing.get("format") != SEARCH_FORMAT):
            if not replace:
                raise StoreIntegrityError(f"{path}: not a metasim search manifest; use a new store folder, or give "
                                          "replace=True")
            existing = None
    generations = sorted(p for p in store.glob("generation-*") if p.is_dir())
    if existing is not None and existing.get("spec_hash") == manifest["spec_hash"]:
        write_text(path, json.dumps(manifest, indent=2, sort_keys=True, default=str) + "\n")  # generations may grow
        return
    if existing is not None or generations or (store / SEARCH_RESULT).exists():
        if not replace:
            what = (f"a search of a different spec (hash {str(existing.get('spec_hash'))[:12]}, this spec "
                    f"{manifest['spec_hash'][:12]})" if existing is not None else "generation folders but no "
                    f"{SEARCH_MANIFEST}")
            raise SweepError(f"{store}: holds {what}; use a new store folder, or give replace=True to start afresh")
        for folder in generations:  # only metasim's own folders: each a sweep store
            if (folder / MANIFEST).is_file() or not any(folder.iterdir()):
                shutil.rmtree(folder)
        for name in (SEARCH_RESULT, SEARCH_MANIFEST):
            (store / name).unlink(missing_ok=True)
    write_text(path, json.dumps(manifest, indent=2, sort_keys=True, default=str) + "\n")


def _stored_generation(folder: Path, designs: xr.DataArray, names: list[str]) -> xr.Dataset | None:
    """A finished generation read back, when it holds exactly these designs; None when not finished."""
    path = folder / COMBINED
    if not path.is_file():
        return None
    ds = upgraded(load_dataset(path))
    same = ds.sizes.get("design") == designs.sizes["design"] and all(
        name in ds.coords and np.array_equal(ds[name].values, designs[name].values) for name in names)
    if not same:
        raise StoreIntegrityError(f"{folder}: holds other designs than this search asks for at that generation; "
                                  "use a new store folder, or give replace=True to start afresh")
    return ds


def combine_search(store, manifest: dict, parts: list[xr.Dataset], objective, constraints) -> xr.Dataset:
    """Every generation's designs in one Dataset over ``design`` (the layout of a sweep) + search variables."""
    rows = []
    for generation, part in enumerate(parts):
        part = part.drop_vars("pareto_rank", errors="ignore")
        part = part.assign(generation=("design", np.full(part.sizes["design"], generation), {  # a variable, not a
            "units": "1", "long_name": "generation of the search (0 = initial population)"}))  # design parameter
        rows.append(part.assign_coords(design=("design", part["design"].values)))
    combined = xr.concat(rows, dim="design", data_vars="minimal", coords="minimal", compat="override",
                         combine_attrs="drop_conflicts")
    combined = combined.assign_coords(design=("design", np.arange(combined.sizes["design"]),
                                              {"units": "1", "long_name": "design index (all generations)"}))
    value, violation = search_values(combined, objective, constraints)
    terms = _objective_terms(objective)
    units, words = "1", "value the search minimises"
    if len(terms) == 1 and next(iter(terms.values())) == (1.0, "min"):  # one named objective: its own unit
        units, words = OBJECTIVES[next(iter(terms))][4], OBJECTIVES[next(iter(terms))][3]
    combined["search_objective"] = xr.DataArray(value, dims="design", attrs={
        "units": units, "long_name": f"{words} (infeasible designs: penalty + violation)"})
    combined["constraint_violation"] = xr.DataArray(violation, dims="design", attrs={
        "units": "1", "long_name": "summed relative violation of the constraints (0 = feasible)"})
    best = int(np.argmin(value))
    for key in ("chunk_size", "chunk_count", "spec_hash"):
        combined.attrs.pop(key, None)
    combined.attrs.update({
        "result_kind": "metasim sweep", "search_kind": "metasim search",
        "model": "differential evolution over primary parameters (scipy.optimize.differential_evolution, "
                 "vectorised); per-design summaries of metasim.mismatch and the chromaticity gamut",
        "spec": manifest["spec"], "spec_hash": manifest["spec_hash"], "search_seed": manifest["seed"],
        "generation_count": len(parts), "evaluation_count": int(combined.sizes["design"]),
        "best_design": best, "best_feasible": int(violation[best] == 0), "metasim_version": __version__})
    combined = pareto_front(combined)
    save_dataset(combined, Path(store) / SEARCH_RESULT)
    return combined


# -- the search -----------------------------------------------------------------------------------

def run_search(space: SearchSpace, reference, observers, stimuli: xr.Dataset, *, store, objective="p95_mismatch",
               constraints: Mapping | None = None, generations: int = 20, population: int | None = None,
               seed: int = 0, tolerance: float = 0.01, mutation=(0.5, 1.0), recombination: float = 0.7,
               chunk_size: int | None = None, scheduler="threads", workers: int | None = None,
               calibration_observer="cie1931_2", strategy: str = "min_norm", display_settings: dict | None = None,
               lab_volume: bool = False, age_bands=None, thresholds=THRESHOLDS, progress=None,
               attrs: dict | None = None, replace: bool = False, wait: bool = False) -> xr.Dataset:
    """Search the space for the design that minimises ``objective`` under ``constraints``; resumable.

    Parameters
    ----------
    space : SearchSpace
        :func:`search_space`.
    reference, observers, stimuli, calibration_observer, strategy, display_settings, lab_volume, age_bands, thresholds
        As for :func:`metasim.run_sweep`.
    store : path
        The search store (see the module docstring); a store of the same spec resumes.
    objective : str or mapping
        A named objective (:data:`metasim.sweep.pareto.OBJECTIVES`) or {name: weight} (weighted sum,
        each term minimised).
    constraints : mapping, optional
        {name: {"min": value, "max": value}} over named objectives or ``design`` variables.
    generations : int
        Generations after the initial population (scipy's ``maxiter``).
    population : int, optional
        Designs per generation (rounded up to a multiple of the number of searched parameters;
        default 10 per parameter, at least 10).
    seed : int
        Seed of the search (initial Latin hypercube and every mutation).
    tolerance, mutation, recombination
        scipy's ``tol``, ``mutation`` and ``recombination``: the search stops early once the spread of
        the population's values is below ``tolerance`` × their mean.
    chunk_size, scheduler, workers
        As for :func:`metasim.run_sweep`, per generation (default: one chunk per generation unless
        memory asks for more).
    progress : callable, optional
        Called with a dict per generation: ``kind`` ("generation"), ``generation``, ``designs``,
        ``best``, ``stored`` (read back from the store), ``message``.

    Returns
    -------
    Dataset
        Every evaluated design over ``design`` in the layout of a sweep (so reports and
        :func:`metasim.sweep.pareto_front` work on it), with coordinate ``generation`` and variables
        ``search_objective``, ``constraint_violation``, ``pareto_rank``; attributes ``best_design``,
        ``best_feasible``, ``search_seed``, ``generation_count``, ``evaluation_count``. Also written
        to ``STORE/search.nc``.

    Examples
    --------
    >>> import metasim, pathlib, tempfile
    >>> from metasim.emitters import gaussian
    >>> from metasim.metamerism import neutral_ramp
    >>> from metasim.sweep import run_search, search_space
    >>> monitor = metasim.calibrate_white(metasim.make_display(gaussian([455, 535, 615], [25, 30, 35],
    ...                                                                 name=["B", "G", "R"])), "cie1931_2")
    >>> space = search_space("laser", {"R": {"peak_nm": [615, 660]}, "G": {"peak_nm": 532}, "B": {"peak_nm": 465}})
    >>> found = run_search(space, monitor, metasim.observer_population(3, seed=1), neutral_ramp(3),
    ...                    store=pathlib.Path(tempfile.mkdtemp()) / "s", generations=2, population=5, seed=1,
    ...                    scheduler="serial")
    >>> found.attrs["generation_count"], found.sizes["design"]
    (3, 15)
    """
    from scipy.optimize import differential_evolution

    if not isinstance(space, SearchSpace):
        raise SweepError(f"space must be a SearchSpace (metasim.sweep.search_space), got {type(space).__name__}")
    terms = _objective_terms(objective)
    limits = _constraint_terms(constraints)
    for name, value, low in (("generations", generations, 0), ("seed", seed, 0)):
        if isinstance(value, bool) or not isinstance(value, (int, np.integer)) or value < low:
            raise SweepError(f"{name}={value!r} is not allowed; need a whole number >= {low}")
    names = [name for name, _, _ in space.parameters]
    bounds = [(lo, hi) for _, lo, hi in space.parameters]
    if population is None:
        population = max(10, 10 * len(names))
    if isinstance(population, bool) or not isinstance(population, (int, np.integer)) or population < 5:
        raise SweepError(f"population={population!r} is not allowed; need a whole number >= 5")
    popsize = max(1, math.ceil(population / len(names)))
    if not (isinstance(tolerance, (int, float)) and tolerance >= 0):
        raise SweepError(f"tolerance={tolerance!r} is not allowed; need a number >= 0")
    store = Path(store)
    grid = space.wavelengths
    observers = resolve_observers(observers, grid)
    settings = {**space.settings, **(display_settings or {})}
    search_settings = {"objective": {k: w for k, (w, _) in terms.items()},
                       "constraints": {k: {"min": lo, "max": hi} for k, (lo, hi) in limits.items()},
                       "population": int(popsize * len(names)), "seed": int(seed), "tolerance": float(tolerance),
                       "mutation": list(np.atleast_1d(mutation).astype(float)), "recombination": float(recombination),
                       "strategy": "best1bin", "init": "latinhypercube", "updating": "deferred"}
    digest = spec_hash(space.describe(), list(space.wavelengths), space.base if space.base is not None else "no base",
                       settings, reference, observers, stimuli, search_settings, calibration_observer, strategy,
                       bool(lab_volume), None if age_bands is None else list(age_bands), list(thresholds),
                       chunk_size or "auto")
    spec = {"parameters": names, "design_model": f"design search: {space.kind} primaries",
            "design_parameters": json.dumps(space.describe()), "display_settings": settings,
            "reference": getattr(reference, "name", str(reference)) if not isinstance(reference, str) else reference,
            "observer_count": int(observers.sizes.get("observer", 1)), "stimulus_count": int(stimuli.sizes.get("stimulus", 0)),
            "stimuli": str(stimuli.attrs.get("description", "")), "search": search_settings,
            "bounds": {n: [lo, hi] for n, lo, hi in space.parameters}, "generations": int(generations), **(attrs or {})}
    manifest = {"format": SEARCH_FORMAT, "spec_hash": digest, "seed": int(seed), "spec": spec,
                "observer_seed": observers.attrs.get("seed", "none"), "metasim_version": __version__}
    parts: list[xr.Dataset] = []

    def evaluate(x: np.ndarray) -> np.ndarray:
        generation = len(parts)
        designs = space.designs(np.asarray(x, dtype=float).T)
        folder = generation_folder(store, generation)
        stored = _stored_generation(folder, designs, names)
        if stored is None:
            stored = run_sweep(designs, reference, observers, stimuli, store=folder, chunk_size=chunk_size,
                               scheduler=scheduler, workers=workers, calibration_observer=calibration_observer,
                               strategy=strategy, display_settings=settings, lab_volume=lab_volume,
                               age_bands=age_bands, thresholds=thresholds, attrs={"search_generation": generation})
            fresh = True
        else:
            fresh = False
        parts.append(stored)
        value = search_values(stored, objective, constraints)[0]
        if progress is not None:
            best = min(float(np.min(search_values(p, objective, constraints)[0])) for p in parts)
            progress({"kind": "generation", "generation": generation, "designs": designs.sizes["design"],
                      "best": best, "stored": not fresh,
                      "message": f"generation {generation}: {designs.sizes['design']} designs "
                                 f"{'computed' if fresh else 'read from the store'}; best value so far {best:.4g}"})
        return value

    failures: list[BaseException] = []

    def guarded(x: np.ndarray) -> np.ndarray:
        try:
            return evaluate(x)
        except BaseException as exc:  # scipy wraps errors of the function; ours are raised as they are
            failures.append(exc)
            raise

    with store_lock(store, wait=wait):
        _open_search_store(store, manifest, replace)
        try:
            differential_evolution(guarded, bounds, maxiter=int(generations), popsize=popsize, tol=float(tolerance),
                                   mutation=mutation, recombination=recombination, rng=int(seed), polish=False,
                                   init="latinhypercube", updating="deferred", vectorized=True)
        except Exception:
            if failures:
                raise failures[0] from None
            raise
        return combine_search(store, manifest, parts, objective, constraints)


def best_design(result: xr.Dataset) -> dict:
    """The best design of a search result: {parameter: value} plus ``design``, ``value`` and ``feasible``.

    Parameters
    ----------
    result : xarray.Dataset (design)
        A search result (:func:`run_search`): ``search_objective`` and ``constraint_violation``
        over ``design``, the searched parameters as ``design`` coordinates (those the ``spec``
        attribute names, else every ``design`` coordinate), and the attribute ``best_design``
        (default: the design of the lowest objective).

    Returns
    -------
    dict
        Each parameter's value (in its coordinate's unit, e.g. nm), ``design`` (index), ``value``
        (the objective) and ``feasible`` (no constraint violated).

    Examples
    --------
    >>> import xarray as xr
    >>> from metasim.sweep import best_design
    >>> result = xr.Dataset({"search_objective": ("design", [2.5, 1.25, 1.75]),
    ...                      "constraint_violation": ("design", [0.0, 0.0, 0.3])},
    ...                     coords={"R_peak_nm": ("design", [620.0, 640.0, 655.0])}, attrs={"best_design": 1})
    >>> best_design(result)
    {'R_peak_nm': 640.0, 'design': 1, 'value': 1.25, 'feasible': True}
    """
    index = int(result.attrs.get("best_design", int(np.argmin(result["search_objective"].values))))
    spec = result.attrs.get("spec", {})
    spec = json.loads(spec) if isinstance(spec, str) else spec
    names = list(spec.get("parameters", [])) if isinstance(spec, dict) else []
    if not names:
        names = [str(c) for c in result.coords if result[c].dims == ("design",) and c != "design"]
    out = {name: float(result[name].values[index]) for name in names if name in result.coords}
    out.update({"design": index, "value": float(result["search_objective"].values[index]),
                "feasible": bool(result["constraint_violation"].values[index] == 0)})
    return out


__all__ = ["SEARCH_FORMAT", "SEARCH_MANIFEST", "SEARCH_RESULT", "PENALTY", "PRIMARY_COUNT", "PARAMETERS",
           "RENAMED_PARAMETERS", "SENSES",
           "SearchSpace", "search_space", "search_values", "run_search", "combine_search", "best_design",
           "generation_folder"]
