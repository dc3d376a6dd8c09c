"""Benchmark: a design search against the fine grid it replaces, on a 4-parameter problem.

The problem: a three-primary Gaussian design (red, green and blue peaks, the green FWHM searched;
red and blue FWHM fixed at 20 nm) judged against a studio monitor by a seeded population on a small
stimulus set; objective: the 95th percentile CIE 2000 difference over all observer × stimulus pairs.

1. The grid optimum is computed once, here, on a fine grid (default 10 values per parameter =
   10,000 designs, :func:`metasim.run_sweep`).
2. :func:`metasim.run_search` (differential evolution, one batched evaluation per generation)
   runs on the same problem with a budget of at most 10 % of the grid's evaluations.

Target: the search's best value within 1 % of the grid optimum (or below it) with <= 10 % of the
grid's evaluations. Printed: both optima and their parameters, evaluation counts, wall times, and
the ratios, measured in this one run.

Run: ``python scripts/bench_search.py`` (``--steps 8`` for a quicker, coarser grid).
"""

from __future__ import annotations

import argparse
import tempfile
import time
from pathlib import Path

import numpy as np

import metasim
from metasim._memory import keep_freed_memory
from metasim.emitters import gaussian
from metasim.metamerism import primaries_and_secondaries
from metasim.sweep import best_design, design_grid, run_search, run_sweep, search_space

BOUNDS = {"R_peak_nm": (600.0, 650.0), "G_peak_nm": (510.0, 560.0), "B_peak_nm": (440.0, 475.0),
          "G_fwhm_nm": (5.0, 70.0)}


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.split("\n")[0])
    parser.add_argument("--steps", type=int, default=10, help="grid values per parameter (default 10: 10,000 designs)")
    parser.add_argument("--observers", type=int, default=40)
    parser.add_argument("--seed", type=int, default=3, help="seed of the search")
    args = parser.parse_args()
    keep_freed_memory()

    monitor = metasim.calibrate_white(metasim.make_display(
        gaussian([612, 548, 455], [38, 42, 28], name=["R", "G", "B"]), name="studio monitor"), "cie1931_2")
    viewers = metasim.observer_population(args.observers, seed=11, age_years=(20, 70))
    stimuli = primaries_and_secondaries()
    axes = {name: np.linspace(lo, hi, args.steps) for name, (lo, hi) in BOUNDS.items()}
    count = args.steps ** 4
    print(f"problem: 4 parameters ({', '.join(BOUNDS)}), {args.observers} observers x "
          f"{stimuli.sizes['stimulus']} stimuli, objective p95 CIE 2000 difference")

    with tempfile.TemporaryDirectory() as folder:
        designs = design_grid("gaussian", {"R": axes["R_peak_nm"], "G": axes["G_peak_nm"], "B": axes["B_peak_nm"]},
                              {"R": [20.0], "G": axes["G_fwhm_nm"], "B": [20.0]})
        start = time.perf_counter()
        grid = run_sweep(designs, monitor, viewers, stimuli, store=Path(folder) / "grid", scheduler="threads")
        grid_seconds = time.perf_counter() - start
        p95 = grid["delta_e_2000_overall"].sel(statistic="p95").values
        best = int(np.argmin(p95))
        grid_best = float(p95[best])
        print(f"grid:   {count} designs in {grid_seconds:.1f} s ({count / grid_seconds:.0f} designs/s); optimum "
              f"{grid_best:.4f} at " + ", ".join(f"{n} {float(grid[n].values[best]):g}"
                                                for n in ("R_peak_nm", "G_peak_nm", "B_peak_nm", "G_fwhm_nm")))

        space = search_space("gaussian", {"R": {"peak_nm": list(BOUNDS["R_peak_nm"]), "fwhm_nm": 20.0},
                                          "G": {"peak_nm": list(BOUNDS["G_peak_nm"]),
                                                "fwhm_nm": list(BOUNDS["G_fwhm_nm"])},
                                          "B": {"peak_nm": list(BOUNDS["B_peak_nm"]), "fwhm_nm": 20.0}})
        budget = count // 10
        population = 40
        generations = budget // population - 1  # the initial population counts as one generation
        start = time.perf_counter()
        found = run_search(space, monitor, viewers, stimuli, store=Path(folder) / "search", generations=generations,
                           population=population, seed=args.seed, tolerance=0.0, scheduler="threads")
        search_seconds = time.perf_counter() - start
        result = best_design(found)
        evaluations = found.sizes["design"]
        print(f"search: {evaluations} designs ({found.attrs['generation_count']} generations of {population}) in "
              f"{search_seconds:.1f} s; best {result['value']:.4f} at "
              + ", ".join(f"{k} {v:.4g}" for k, v in result.items() if k not in ("design", "value", "feasible")))
    ratio = result["value"] / grid_best
    print(f"search best / grid optimum: {ratio:.4f} (target <= 1.01)   evaluations: {evaluations / count:.1%} of the "
          f"grid's (target <= 10 %)   wall time: {search_seconds / grid_seconds:.1%} of the grid's")
    print("targets met" if ratio <= 1.01 and evaluations <= count / 10 else "TARGET MISSED")


if __name__ == "__main__":
    main()
