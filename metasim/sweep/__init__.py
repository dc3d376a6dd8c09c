"""Batch sweeps: many candidate designs × a population × a stimulus set, chunked, stored, resumable.

::

    from metasim.sweep import design_grid, run_sweep

    designs = design_grid("laser", peaks_nm={"R": [620, 630, 640], "G": [525, 532], "B": [455, 465]},
                          fwhm_nm=[1, 2])                          # 24 designs (design, primary, wavelength)
    result = run_sweep(designs, monitor, viewers, stimuli, store="red-sweep", chunk_size=8)
    result["delta_e_2000_overall"].sel(statistic="p95")           # one number per design

* :mod:`metasim.sweep.grid` — the designs: a Cartesian grid of emitter parameters (``design_grid``;
  with ``lazy=True`` a :class:`DesignGrid` that makes any block of designs on demand) or an
  explicit list of spectra (``design_list``); parameters become ``design`` coordinates
  (``R_peak_nm``, ``fwhm_nm`` ...).
* :mod:`metasim.sweep.evaluate` — the reference side of the mismatch procedure prepared once per
  sweep, and a block of designs taken through the rest (one compiled pass, ``sweep/_kernels``).
* :mod:`metasim.sweep.summary` — a block of designs' mismatch and gamut numbers reduced to
  per-design summaries (``design_summaries``); every statistic is the statistics layer's
  (:mod:`metasim.statistics`; its compiled summary is called per design by the compiled pass).
* :mod:`metasim.sweep.ranking` — with ``intervals=True``: each design's intervals and paired
  replicates, and on the combined sweep its probability of being the best, rank interval, the set
  that cannot be told apart from the best, the edge warning and the observers needed.
* :mod:`metasim.sweep.store` — the store folder: ``manifest.json`` (spec hash, chunk ranges, seed,
  model, version), one ``chunk-NNNNN.nc`` per finished chunk, the combined ``sweep.nc``.
* :mod:`metasim.sweep.pareto` — Pareto ranks of any sweep or search result over named objectives
  (``pareto_front``: variable ``pareto_rank``, 1 = on the front).
* :mod:`metasim.sweep.search` — a design search instead of a grid (``search_space``, ``run_search``):
  differential evolution, one batched evaluation per generation, each generation stored, resumable.
* :mod:`metasim.sweep.extra` — what an extra primary buys: gamut and population-mismatch gain per
  candidate wavelength (``extra_primary_value``).
* :mod:`metasim.sweep.run` — ``run_sweep``: chunks along ``design``, evaluated in blocks on a
  scheduler ("serial", "threads", "dask-threads", or a dask.distributed address), each chunk
  written as it completes; a re-run with the same store resumes.

Layer: sweep (imports every library layer above it; never the report or the CLI).
"""

from metasim.sweep.pareto import OBJECTIVES, pareto_front, pareto_ranks
from metasim.sweep.extra import extra_primary_value
from metasim.sweep.search import SearchSpace, best_design, run_search, search_space
from metasim.sweep.grid import (
    DEFAULT_DISPLAY_SETTINGS,
    GRID_KINDS,
    DesignGrid,
    design_grid,
    design_list,
    display_settings_of,
)
from metasim.sweep.run import SCHEDULERS, chunk_display, evaluate_chunk, run_sweep
from metasim.sweep.store import combine_sweep, read_manifest, spec_hash
from metasim.sweep.summary import COVERAGE_GAMUTS, design_summaries

__all__ = ["DEFAULT_DISPLAY_SETTINGS", "GRID_KINDS", "SCHEDULERS", "COVERAGE_GAMUTS", "DesignGrid", "design_grid",
           "design_list",
           "display_settings_of", "run_sweep", "chunk_display", "evaluate_chunk", "combine_sweep", "read_manifest",
           "spec_hash", "design_summaries", "OBJECTIVES", "pareto_front", "pareto_ranks",
           "SearchSpace", "search_space", "run_search", "best_design", "extra_primary_value"]
