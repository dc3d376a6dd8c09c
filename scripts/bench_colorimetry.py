"""Benchmark: CIE 2000 colour difference, metasim's compiled kernel vs colour-science, same pairs.

Run:  python scripts/bench_colorimetry.py [--pairs 1000000] [--repeats 3]

Both implementations get the same random CIELAB pairs; each is timed best-of-``repeats`` after one
warm-up call (the warm-up includes metasim's one-off compilation, which is cached on disk). Prints
pairs/s for each, the speed ratio and the largest absolute difference between the results.
"""

from __future__ import annotations

import argparse
import time
import warnings

import numpy as np

warnings.filterwarnings("ignore")


def best_time(function, repeats: int) -> tuple[float, np.ndarray]:
    result = function()
    best = float("inf")
    for _ in range(repeats):
        start = time.perf_counter()
        result = function()
        best = min(best, time.perf_counter() - start)
    return best, result


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--pairs", type=int, default=1_000_000)
    parser.add_argument("--repeats", type=int, default=3)
    parser.add_argument("--seed", type=int, default=2005)
    args = parser.parse_args()

    import colour

    from metasim import delta_e_2000

    rng = np.random.default_rng(args.seed)
    n = args.pairs
    lab_1 = np.column_stack([rng.uniform(0, 100, n), rng.uniform(-128, 128, n), rng.uniform(-128, 128, n)])
    lab_2 = np.column_stack([rng.uniform(0, 100, n), rng.uniform(-128, 128, n), rng.uniform(-128, 128, n)])

    t_ours, ours = best_time(lambda: delta_e_2000(lab_1, lab_2), args.repeats)
    t_theirs, theirs = best_time(lambda: colour.delta_E(lab_1, lab_2, method="CIE 2000"), args.repeats)
    print(f"pairs                      : {n:,}")
    print(f"metasim delta_e_2000       : {t_ours * 1e3:9.1f} ms  {n / t_ours / 1e6:8.2f} M pairs/s")
    print(f"colour-science delta_E     : {t_theirs * 1e3:9.1f} ms  {n / t_theirs / 1e6:8.2f} M pairs/s")
    print(f"speed ratio (colour/metasim): {t_theirs / t_ours:8.1f} x")
    print(f"largest |difference|       : {np.max(np.abs(ours - theirs)):.3e}")


if __name__ == "__main__":
    main()
