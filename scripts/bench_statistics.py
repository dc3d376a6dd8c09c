"""Benchmark: what intervals from resampling observers cost, next to a mismatch() study.

Run:  python scripts/bench_statistics.py [--observers 1000] [--stimuli 200] [--resamples 400] [--loop 40]

Case: the mismatch benchmark's study (scripts/bench_mismatch.py: 1,000 CIE 170-1 observers x 200
random BT.709 colours, a broadband monitor against a four-laser projector). Timed in one process,
interleaved, best of ``--repeats``:

1. ``metasim.mismatch()`` — the full study;
2. the pooled table of its CIE 2000 differences (mean, median, p95, max, shares beyond 1, 2, 3) with
   ``metasim.statistics.population_statistics``, without and with intervals (default resamples);
   the interval cost is printed in ms and as a share of the study;
3. the straightforward numpy way of the same intervals: per resample, copy the drawn observers'
   rows (``numpy.repeat``) and call ``numpy.mean`` / ``numpy.quantile`` / ``>`` on the copy,
   timed on ``--loop`` resamples and scaled. Same resamples on both sides; the largest difference
   of the replicates is printed.
"""

from __future__ import annotations

import argparse
import sys
import time
import warnings
from pathlib import Path

import numpy as np

warnings.filterwarnings("ignore")
sys.path.insert(0, str(Path(__file__).resolve().parent))


def numpy_replicates(values: np.ndarray, counts: np.ndarray, thresholds) -> np.ndarray:
    """(R, 2 + 1 + T) median, p95, mean and shares of each resample, by copying the drawn rows."""
    out = []
    for row in counts:
        copied = np.repeat(values, row.astype(np.int64), axis=0).ravel()
        out.append([*np.quantile(copied, [0.5, 0.95]), copied.mean(), *[(copied > t).mean() for t in thresholds]])
    return np.array(out)


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--observers", type=int, default=1000)
    parser.add_argument("--stimuli", type=int, default=200)
    parser.add_argument("--resamples", type=int, default=None, help="default: the library default")
    parser.add_argument("--loop", type=int, default=40, help="resamples timed in the numpy loop (scaled)")
    parser.add_argument("--repeats", type=int, default=9)
    parser.add_argument("--seed", type=int, default=11)
    args = parser.parse_args()

    from bench_mismatch import build_case

    from metasim import mismatch
    from metasim._memory import keep_freed_memory
    from metasim.statistics import DEFAULT_RESAMPLES, population_statistics, pooled_replicates, resample_counts

    keep_freed_memory()  # as the metasim command runs
    resamples = args.resamples or DEFAULT_RESAMPLES
    ref, test, observers, stimuli = build_case(args.observers, args.stimuli, args.seed)
    result = mismatch(ref, test, observers, stimuli)
    de = result["delta_e_2000"]
    population_statistics(de, interval=True, resamples=resamples)  # warm-up (compiles once)
    times = {"study": [], "points": [], "intervals": []}
    for _ in range(args.repeats):  # interleaved, so machine load hits all alike
        start = time.perf_counter()
        result = mismatch(ref, test, observers, stimuli)
        times["study"].append(time.perf_counter() - start)
        de = result["delta_e_2000"]
        start = time.perf_counter()
        population_statistics(de)
        times["points"].append(time.perf_counter() - start)
        start = time.perf_counter()
        population_statistics(de, interval=True, resamples=resamples)
        times["intervals"].append(time.perf_counter() - start)
    best = {k: min(v) for k, v in times.items()}

    values = de.transpose("observer", "stimulus").values
    thresholds = (1.0, 2.0, 3.0)
    counts = resample_counts(values.shape[0], resamples, seed=0)
    ours = pooled_replicates(values, quantiles=(0.5, 0.95), thresholds=thresholds, counts=counts)
    mine = np.column_stack([ours["quantiles"][:, 1:].T, ours["mean"][1:], ours["share_above_threshold"][:, 1:].T])
    loop = min(args.loop, resamples)
    start = time.perf_counter()
    theirs = numpy_replicates(values, counts[:loop], thresholds)
    numpy_time = (time.perf_counter() - start) * resamples / loop
    start = time.perf_counter()
    pooled_replicates(values, quantiles=(0.5, 0.95), thresholds=thresholds, counts=counts)
    ours_time = time.perf_counter() - start

    extra = best["intervals"] - best["points"]
    print(f"case                              : {values.shape[0]} observers x {values.shape[1]} stimuli, "
          f"{resamples} resamples")
    print(f"mismatch() study                  : {best['study'] * 1e3:8.2f} ms")
    print(f"pooled table, no intervals        : {best['points'] * 1e3:8.2f} ms "
          f"({100 * best['points'] / best['study']:.1f} % of the study)")
    print(f"pooled table with intervals       : {best['intervals'] * 1e3:8.2f} ms "
          f"({100 * best['intervals'] / best['study']:.1f} % of the study)")
    print(f"intervals alone (difference)      : {extra * 1e3:8.2f} ms ({100 * extra / best['study']:.1f} % of the study)")
    print(f"numpy loop, copying rows          : {numpy_time * 1e3:8.1f} ms (measured on {loop} resamples, scaled)")
    print(f"metasim replicates, same resamples: {ours_time * 1e3:8.2f} ms")
    print(f"speed ratio                       : {numpy_time / ours_time:8.1f} x")
    print(f"largest |difference| of replicates: {np.max(np.abs(mine[:loop] - theirs)):.3e}")


if __name__ == "__main__":
    main()
