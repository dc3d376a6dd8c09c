"""Benchmark: `metasim demo` on a first run (empty kernel cache) and on a later run (warm cache).

Each repetition points numba at a fresh, empty cache folder (``NUMBA_CACHE_DIR``), runs the demo
there twice in new processes, cold then warm, and records wall-clock and CPU time (the command and
any helper processes it starts). With ``--mismatch`` it also times one ``mismatch()`` of the demo
displays (100 observers) in a new process, cold and warm. The machine may be shared: the load
average is printed next to the figures, and medians over the repetitions are quoted with the ratio
cold / warm measured in the same repetitions, and whether the demo meets its targets (under 30 s
cold, under 10 s warm, wall-clock on 2 cores). Each run also says how long the command's main
thread waited for a core held by other processes (Linux schedstat): on a shared machine that wait
is where wall-clock time beyond CPU time goes when the command itself does not sleep.

    python scripts/bench_first_run.py                # 3 repetitions
    python scripts/bench_first_run.py --repeat 5 --mismatch
    python scripts/bench_first_run.py --other ../metasim-old   # also another checkout, interleaved
"""

from __future__ import annotations

import argparse
import os
import resource
import statistics
import subprocess
import sys
import tempfile
import time
from pathlib import Path

#: targets of `metasim demo` on a 2-core machine (wall-clock seconds, median): empty cache, warm cache
COLD_TARGET_S, WARM_TARGET_S = 30.0, 10.0

MISMATCH = """
from metasim._paths import data_dir
from metasim.cli.specs import load_display
from metasim import mismatch, observer_population
from metasim.metamerism.stimuli import combine, neutral_ramp, primaries_and_secondaries
demo = data_dir() / "demo"
reference, _ = load_display(demo / "grading_monitor.toml")
test, _ = load_display(demo / "projector_four_laser.toml")
observers = observer_population(100, seed=1, wavelengths=test.wavelengths.values)
mismatch(reference, test, observers, combine(neutral_ramp(6), primaries_and_secondaries()))
"""


def _main_thread_queued(pid: int) -> float | None:
    """Seconds the process's main thread has spent runnable but waiting for a free core (Linux
    schedstat), None where the kernel does not say."""
    try:
        with open(f"/proc/{pid}/task/{pid}/schedstat") as handle:
            return int(handle.read().split()[1]) / 1e9
    except (OSError, ValueError, IndexError):
        return None


def timed(command: list[str], env: dict, cwd: str) -> tuple[float, float, float | None]:
    """Wall-clock and CPU seconds (user + system, children included) of one command, and the seconds
    its main thread waited for a core (other processes on the machine; sampled every 0.1 s)."""
    before = resource.getrusage(resource.RUSAGE_CHILDREN)
    start = time.perf_counter()
    with tempfile.TemporaryFile("w+") as errors:
        process = subprocess.Popen(command, env=env, cwd=cwd, stdout=subprocess.DEVNULL, stderr=errors, text=True)
        queued = None
        while process.poll() is None:
            value = _main_thread_queued(process.pid)
            queued = value if value is not None else queued
            time.sleep(0.1)
        wall = time.perf_counter() - start
        after = resource.getrusage(resource.RUSAGE_CHILDREN)
        if process.returncode:
            errors.seek(0)
            sys.exit(f"{' '.join(command)} failed:\n{errors.read()}")
    return wall, (after.ru_utime - before.ru_utime) + (after.ru_stime - before.ru_stime), queued


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--repeat", type=int, default=3, help="repetitions (default 3)")
    parser.add_argument("--mismatch", action="store_true", help="also time one mismatch() cold and warm")
    parser.add_argument("--other", metavar="CHECKOUT", help="also time another metasim checkout (run from its "
                        "folder through PYTHONPATH), alternating with this one, for a ratio in the same run")
    options = parser.parse_args()
    versions = {"this": None} if not options.other else {"this": None, "other": str(Path(options.other).resolve())}
    demo = lambda out: [sys.executable, "-m", "metasim", "demo", "--quiet", "--out", out]  # noqa: E731
    cases = {f"{version} demo": (path, demo) for version, path in versions.items()}
    if options.mismatch:
        cases.update({f"{version} mismatch": (path, lambda out: [sys.executable, "-c", MISMATCH])
                      for version, path in versions.items()})
    figures = {(case, state): [] for case in cases for state in ("cold", "warm")}
    print(f"load average before: {' '.join(f'{x:.1f}' for x in os.getloadavg())} ({os.cpu_count()} CPUs)")
    for repetition in range(options.repeat):
        for case, (checkout, command) in cases.items():
            with tempfile.TemporaryDirectory(prefix="metasim-bench-") as folder:
                env = dict(os.environ, NUMBA_CACHE_DIR=str(Path(folder) / "numba-cache"))
                if checkout:
                    env["PYTHONPATH"] = os.pathsep.join(filter(None, [checkout, env.get("PYTHONPATH")]))
                for state in ("cold", "warm"):
                    # run in the empty folder: a checkout in the working directory would shadow PYTHONPATH
                    wall, cpu, queued = timed(command(str(Path(folder) / f"out-{state}")), env, folder)
                    figures[case, state].append((wall, cpu))
                    waited = f", main thread waited {queued:5.1f} s for a core" if queued is not None else ""
                    print(f"  run {repetition + 1} {case:14s} {state}: {wall:6.1f} s wall, {cpu:6.1f} s CPU{waited} "
                          f"(load {os.getloadavg()[0]:.1f})", flush=True)
    print(f"load average after: {' '.join(f'{x:.1f}' for x in os.getloadavg())}")
    print(f"\nmedians over {options.repeat} repetitions (fresh numba cache folder for each cold run):")
    for case in cases:
        cold_wall = statistics.median(w for w, _ in figures[case, "cold"])
        warm_wall = statistics.median(w for w, _ in figures[case, "warm"])
        cold_cpu = statistics.median(c for _, c in figures[case, "cold"])
        warm_cpu = statistics.median(c for _, c in figures[case, "warm"])
        print(f"  {case:14s} cold {cold_wall:6.1f} s wall ({cold_cpu:5.1f} s CPU)   warm {warm_wall:6.1f} s wall "
              f"({warm_cpu:5.1f} s CPU)   cold/warm {cold_wall / warm_wall:4.1f}x wall, {cold_cpu / warm_cpu:4.1f}x CPU")
        if case.endswith(" demo"):
            print(f"  {'':14s} targets (wall, medians): cold < {COLD_TARGET_S:g} s "
                  f"{'met' if cold_wall < COLD_TARGET_S else 'NOT met'}, warm < {WARM_TARGET_S:g} s "
                  f"{'met' if warm_wall < WARM_TARGET_S else 'NOT met'}")


if __name__ == "__main__":
    main()
