"""Benchmark: 10,000 individual CIE 170-1 observers at 1 nm, vectorised vs one at a time.

Both sides go through the same public function, ``metasim.observers.physiological_observers``:
once with vectors of 10,000 parameter values, and 10,000 times with one value each (all 10,000
by default; ``--loop-sample m`` times only m calls and scales, for a quick look). Parameters are a seeded population draw
(ages 20-80, fields 1-10°, default standard deviations). Prints both times and the ratio, and the
time of ``metasim.observer_population`` for the same n.

Usage: python scripts/bench_observers.py [--n 10000] [--loop-sample m]
"""

from __future__ import annotations

import argparse
import time

import numpy as np

from metasim.observers import observer_population, physiological_observers
from metasim.observers.physiological import DEVIATIONS


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--n", type=int, default=10_000)
    parser.add_argument("--loop-sample", type=int, default=None, help="time only this many loop calls, scaled to n")
    args = parser.parse_args()
    n = args.n

    warm = observer_population(8, seed=0, age_years=(20, 80), field_size_deg=(1, 10))  # tables, caches
    reference = observer_population(n, seed=1, age_years=(20, 80), field_size_deg=(1, 10))
    names = ["age_years", "field_size_deg", *DEVIATIONS]
    params = {name: reference[name].values for name in names}
    del warm

    vector_times = []
    for _ in range(3):  # best of 3: the machine may be shared
        start = time.perf_counter()
        vectorised = physiological_observers(**params)
        vector_times.append(time.perf_counter() - start)
    t_vector = min(vector_times)

    loop_n = n if args.loop_sample is None else min(n, args.loop_sample)
    start = time.perf_counter()
    lms_rows = []
    for i in range(loop_n):
        one = physiological_observers(**{name: params[name][i] for name in names})
        lms_rows.append(one["lms"].values[0])
    t_loop_sample = time.perf_counter() - start
    t_loop = t_loop_sample * n / loop_n
    agreement = float(np.abs(np.stack(lms_rows) - vectorised["lms"].values[:loop_n]).max())

    population_times = []
    for _ in range(3):
        start = time.perf_counter()
        observer_population(n, seed=1, age_years=(20, 80), field_size_deg=(1, 10))
        population_times.append(time.perf_counter() - start)
    t_population = min(population_times)

    scaled = "" if loop_n == n else f" (timed {loop_n}, scaled)"
    print(f"observers: {n} at 1 nm, 390-830 nm (lms + cmf)")
    print(f"vectorised  physiological_observers(n={n}):  {t_vector:8.3f} s  (best of "
          + ", ".join(f"{t:.3f}" for t in vector_times) + ")")
    print(f"one at a time physiological_observers x {n}:  {t_loop:8.3f} s{scaled}")
    print(f"ratio loop / vectorised:                     {t_loop / t_vector:8.1f} x  (target >= 20)")
    print(f"observer_population(n={n}) incl. sampling:  {t_population:8.3f} s  (target < 2 s; best of "
          + ", ".join(f"{t:.3f}" for t in population_times) + ")")
    print(f"max |lms loop - lms vectorised| = {agreement:.1e}")


if __name__ == "__main__":
    main()
