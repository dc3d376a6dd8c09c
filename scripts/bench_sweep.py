"""Benchmark: design sweeps, metasim's run_sweep vs the straightforward colour-science loop.

Run:  python scripts/bench_sweep.py [--case cube64 random50] [--sizes N ...] [--repeats 3]
                                   [--huge [--huge-observers 50]]

Designs: a lazy ``design_grid`` of three laser primaries (R 615-660 nm, G 515-550 nm, B 440-470 nm,
1 nm line width) judged against a broadband three-primary reference monitor by ``--observers``
(500) CIE 170-1 observers aged 20-70 (seeded), scheduler ``--scheduler`` (default "threads"), the
default chunk size. Two cases (both by default):

* ``cube64``: ``rgb_cube_grid(4)`` (64 BT.709 colours), 10³, 10⁴ and 10⁵ designs. Targets: at least
  500 designs/s (16 M pairs/s) at 10³ and 10⁴ designs; peak resident memory within +10 % from 10³
  to 10⁵ designs. ``--huge`` adds one sweep of 10⁶ designs (about an hour of both cores with 500
  observers). ``--huge-observers N`` runs the 10⁶-design sweep with N observers instead, and then
  also runs 10³, 10⁴ and 10⁵ designs with N observers (one run each), so that the peak resident
  memory of the same settings is printed from 10³ to 10⁶ designs, each with its met / not met for
  +10 % over 10³ designs (``--huge-only``: these runs alone). The observer count is printed with
  every figure.
* ``random50``: 50 seeded random BT.709 colours, 100, 1,000 and 10,000 designs (the scale of a
  design search). Targets: throughput at 10,000 designs at least 80 % of that at 1,000; peak
  resident memory under 2 GB and flat; at least 300 times the colour-science loop per design.

Each sweep size runs in a fresh Python process (so the peak resident memory is that size's): the
process builds the inputs, runs one 8-design sweep (numba's compiled code loaded, xarray's netCDF
writer imported), then times ``run_sweep`` of the whole grid into a new store. Printed per size:
seconds, designs/s, observer × stimulus pairs/s and the process's peak resident memory (median
over ``--repeats`` runs, each in its own process), the process CPU time per design (all threads:
what a loaded machine distorts least), and the machine's load average around the runs (the
machine is shared: figures are noisy, ratios in the same run are what to compare).

colour-science loop (``--loop-designs`` designs, default 10): per design and per observer, build
its colour-matching functions, ``sd_to_XYZ`` (method "Integration") of every primary of both
displays, of their blacks and of the reference white, the XYZ of every stimulus from the drives
metasim solved (white matching and drive solving are the same work on both sides and are taken
from metasim), ``XYZ_to_Lab`` against the observer's reference white and ``delta_E`` (CIE 2000),
then numpy's mean, median, 95th percentile and maximum over the design's pairs. With
``--loop-observers`` < ``--observers`` the loop is timed on that many observers and scaled. The
ratio is the loop's time per design over the sweep's; the largest difference of the four
statistics between the loop and metasim's sweep of the same designs is printed too.
"""

from __future__ import annotations

import argparse
import json
import os
import resource
import shutil
import statistics
import subprocess
import sys
import tempfile
import time
import warnings

import numpy as np

warnings.filterwarnings("ignore")

PER_AXIS = {100: (5, 5, 4), 1000: (10, 10, 10), 10000: (25, 20, 20), 100000: (50, 50, 40),
            1000000: (100, 100, 100)}
#: The cases: default sweep sizes and a description of the stimuli.
CASES = {"cube64": ([1000, 10000, 100000], "64 stimuli (rgb_cube_grid(4))"),
         "random50": ([100, 1000, 10000], "50 stimuli (seeded random BT.709 signals)")}
HUGE = 1_000_000


def build_stimuli(case: str, seed: int):
    from metasim.metamerism import rgb_cube_grid
    from metasim.metamerism.stimuli import rgb_set

    if case == "cube64":
        return rgb_cube_grid(4)
    signals = np.random.default_rng(seed).random((50, 3))
    return rgb_set(signals, [f"colour {i + 1}" for i in range(50)], description="50 seeded random BT.709 signals")


def build_inputs(n_observers: int, seed: int, case: str = "cube64"):
    import metasim
    from metasim import emitters

    reference = metasim.calibrate_white(metasim.make_display(
        emitters.gaussian([612, 548, 455], [38, 42, 28], name=["R", "G", "B"]), name="reference monitor"),
        "cie1931_2", white="D65", luminance=100)
    observers = metasim.observer_population(n_observers, seed=seed, age_years=(20, 70))
    return reference, observers, build_stimuli(case, seed)


def grid(size: int, lazy: bool = True):
    from metasim.sweep import design_grid

    if size in PER_AXIS:
        r, g, b = PER_AXIS[size]
    else:
        r = g = b = max(1, round(size ** (1 / 3)))
    peaks = {"R": np.linspace(615, 660, r), "G": np.linspace(515, 550, g), "B": np.linspace(440, 470, b)}
    try:
        return design_grid("laser", peaks_nm=peaks, fwhm_nm=1.0, lazy=lazy)
    except TypeError:  # a metasim without lazy grids (for before/after figures with PYTHONPATH)
        return design_grid("laser", peaks_nm=peaks, fwhm_nm=1.0)


def one_size(args) -> dict:
    """Time one sweep in this (fresh) process; returns the figures as a dict."""
    from metasim.sweep import run_sweep

    reference, observers, stimuli = build_inputs(args.observers, args.seed, args.case)
    designs = grid(args.one)
    folder = tempfile.mkdtemp(prefix="bench-sweep-")
    try:
        warm = grid(8)  # loads the compiled kernels and the netCDF writer once
        run_sweep(warm, reference, observers, stimuli, store=os.path.join(folder, "warm"), scheduler=args.scheduler)
        rss_before = resource.getrusage(resource.RUSAGE_SELF).ru_maxrss / 1024
        load = os.getloadavg()[0]
        start = time.perf_counter()
        cpu = time.process_time()
        run_sweep(designs, reference, observers, stimuli, store=os.path.join(folder, "sweep"), scheduler=args.scheduler,
                  chunk_size=args.chunk_size)
        seconds = time.perf_counter() - start
        cpu = time.process_time() - cpu
    finally:
        shutil.rmtree(folder, ignore_errors=True)
    count = designs.sizes["design"]
    pairs = count * observers.sizes["observer"] * stimuli.sizes["stimulus"]
    return {"designs": count, "seconds": seconds, "cpu_seconds": cpu, "designs_per_s": count / seconds,
            "pairs_per_s": pairs / seconds, "peak_rss_mb": resource.getrusage(resource.RUSAGE_SELF).ru_maxrss / 1024,
            "rss_before_mb": rss_before, "load_before": load, "load_after": os.getloadavg()[0]}


def colour_loop(args) -> dict:
    """The colour-science loop on a few designs, and metasim's sweep of the same designs."""
    import colour

    import metasim
    from metasim.sweep import chunk_display, run_sweep
    from bench_mismatch import colour_delta_e  # scripts/ is on the path when a script runs
    from metasim.sweep.grid import DEFAULT_DISPLAY_SETTINGS

    reference, observers, stimuli = build_inputs(args.observers, args.seed, args.case)
    full = grid(1000, lazy=False)
    picks = np.linspace(0, full.sizes["design"] - 1, args.loop_designs).round().astype(int)
    designs = full.isel(design=picks)
    folder = tempfile.mkdtemp(prefix="bench-sweep-")
    try:
        swept = run_sweep(designs, reference, observers, stimuli, store=os.path.join(folder, "s"), scheduler="serial")
    finally:
        shutil.rmtree(folder, ignore_errors=True)
    display = chunk_display(designs, DEFAULT_DISPLAY_SETTINGS)
    result = metasim.mismatch(reference, display, observers, stimuli)  # the drives the loop takes
    matched = metasim.calibrate_white(display, "cie1931_2", white=tuple(
        colour.XYZ_to_xy(metasim.tristimulus(reference.white_spectrum(), metasim.standard_observer("cie1931_2")).values)),
        luminance=float(metasim.tristimulus(reference.white_spectrum(), metasim.standard_observer("cie1931_2")).sel(xyz="Y")))
    count = min(args.loop_observers or args.observers, args.observers)
    drive_ref = result["drive_reference"].transpose("stimulus", "reference_primary").values
    ref_primaries = reference.spectra.transpose("primary", "wavelength").values
    ref_black, ref_white = reference.black.values, reference.white_spectrum().values
    stats = np.empty((len(picks), 4))
    start = time.perf_counter()
    for d in range(len(picks)):
        test = matched.spectra.isel(design=d).transpose("primary", "wavelength").values
        test_black = matched.black.isel(design=d).values if "design" in matched.black.dims else matched.black.values
        drive_test = result["drive_test"].isel(design=d).transpose("stimulus", "primary").values
        de = colour_delta_e(observers, ref_primaries, ref_black, ref_white, test, test_black, drive_ref, drive_test,
                            count)
        flat = de.ravel()
        stats[d] = [flat.mean(), np.median(flat), np.quantile(flat, 0.95), flat.max()]
    seconds = (time.perf_counter() - start) * args.observers / count
    ours = swept["delta_e_2000_overall"].values
    difference = float(np.max(np.abs(ours - stats))) if count == args.observers else None
    return {"designs": len(picks), "observers_timed": count, "seconds": seconds,
            "seconds_per_design": seconds / len(picks), "largest_difference": difference}


def run_child(args, extra) -> dict:
    command = [sys.executable, os.path.abspath(__file__), *extra, "--observers", str(args.observers),
               "--seed", str(args.seed), "--scheduler", args.scheduler, "--case", args.case]
    if args.chunk_size:
        command += ["--chunk-size", str(args.chunk_size)]
    if args.loop_observers:
        command += ["--loop-observers", str(args.loop_observers)]
    done = subprocess.run(command + ["--loop-designs", str(args.loop_designs)], capture_output=True, text=True)
    if done.returncode != 0:
        raise SystemExit(f"benchmark child failed:\n{done.stderr[-3000:]}")
    return json.loads(done.stdout.strip().splitlines()[-1])


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--case", nargs="+", choices=sorted(CASES), default=["cube64", "random50"])
    parser.add_argument("--sizes", type=int, nargs="+", default=None, help="sweep sizes (default: the case's)")
    parser.add_argument("--huge", action="store_true", help=f"also one sweep of {HUGE:,} designs (cube64 case)")
    parser.add_argument("--huge-observers", type=int, default=None, metavar="N",
                        help=f"observers of the {HUGE:,}-design sweep (default: --observers); with it, 1,000 to "
                             "100,000 designs are run with N observers too, for the memory figures")
    parser.add_argument("--huge-only", action="store_true",
                        help="with --huge-observers: only the runs with N observers (not the case's own sizes)")
    parser.add_argument("--repeats", type=int, default=3, help="runs per size (each in a fresh process)")
    parser.add_argument("--repeats-large", type=int, default=1, help="runs per size above 10,000 designs")
    parser.add_argument("--observers", type=int, default=500)
    parser.add_argument("--seed", type=int, default=11)
    parser.add_argument("--scheduler", default="threads")
    parser.add_argument("--chunk-size", type=int, default=None)
    parser.add_argument("--loop-designs", type=int, default=10)
    parser.add_argument("--loop-observers", type=int, default=None,
                        help="observers timed in the colour-science loop (default: all; then scaled)")
    parser.add_argument("--one", type=int, default=None, help=argparse.SUPPRESS)
    parser.add_argument("--loop", action="store_true", help=argparse.SUPPRESS)
    args = parser.parse_args()
    cases = args.case
    if args.one is not None or args.loop:
        args.case = cases[0]
        print(json.dumps(one_size(args) if args.one is not None else colour_loop(args)))
        return
    for case in cases:
        args.case = case
        sizes = args.sizes or CASES[case][0]
        if args.huge and case == "cube64" and args.huge_observers and args.huge_observers != args.observers:
            if not args.huge_only:
                run_case(args, sizes)
            huge = argparse.Namespace(**{**vars(args), "observers": args.huge_observers, "repeats": 1,
                                         "repeats_large": 1})
            print(f"\n{HUGE:,}-design sweep with {args.huge_observers} observers (not {args.observers}: the "
                  "configuration above would take about an hour of both cores), with 1,000-100,000 designs at the "
                  "same settings for the memory figures")
            run_case(huge, [1000, 10000, 100000, HUGE], loop=False)
        else:
            if args.huge and case == "cube64":
                sizes = [*sizes, HUGE]
            run_case(args, sizes)


def run_case(args, sizes, loop: bool = True) -> None:
    """Print one case's table: the loop, then each sweep size in fresh processes, then the targets."""
    stimuli = 64 if args.case == "cube64" else 50
    print(f"\ncase {args.case}: lazy laser design grid x {args.observers} observers x {CASES[args.case][1]}, "
          f"scheduler {args.scheduler!r}, {os.cpu_count()} CPUs; load average now {os.getloadavg()[0]:.1f}")
    if loop:
        loop = run_child(args, ["--loop"])
        scaled = "" if loop["observers_timed"] == args.observers else \
            f", timed on {loop['observers_timed']} observers, scaled"
        print(f"colour-science loop: {loop['seconds_per_design'] * 1e3:.0f} ms per design "
              f"({loop['designs']} designs{scaled})")
        if loop["largest_difference"] is not None:
            print(f"largest |difference| of mean, median, p95, max (CIE 2000), loop vs sweep: "
                  f"{loop['largest_difference']:.2e}")
    print(f"{'designs':>9} {'runs':>4} {'seconds':>9} {'designs/s':>10} {'pairs/s':>10} {'CPU ms/design':>14} "
          f"{'peak RSS':>9} {'load':>10} {'ratio vs loop':>14} {'observers':>9}")
    rows = {}
    for size in sizes:
        repeats = args.repeats if size <= 10000 else args.repeats_large
        runs = [run_child(args, ["--one", str(size)]) for _ in range(repeats)]
        seconds = statistics.median(r["seconds"] for r in runs)
        rss = statistics.median(r["peak_rss_mb"] for r in runs)
        cpu = statistics.median(r["cpu_seconds"] for r in runs)
        loads = [r["load_before"] for r in runs] + [r["load_after"] for r in runs]
        count = runs[0]["designs"]
        pairs = count * args.observers * stimuli
        ratio = loop["seconds_per_design"] / (seconds / count) if loop else None
        rows[count] = {"designs_per_s": count / seconds, "rss": rss, "ratio": ratio}
        print(f"{count:>9,} {repeats:>4} {seconds:>9.2f} {count / seconds:>10.0f} {pairs / seconds / 1e6:>9.1f}M "
              f"{cpu / count * 1e3:>14.2f} {rss:>7.0f}MB {min(loads):>4.1f}-{max(loads):<4.1f} "
              f"{'-' if ratio is None else f'{ratio:.0f}x':>14} {args.observers:>9}")
        sys.stdout.flush()
    targets(args.case, rows, args.observers)


def targets(case: str, rows: dict, observers: int = 500) -> None:
    """Print each target of the case against the figures just measured (met / not met)."""
    def line(text, met):
        print(f"  {'met    ' if met else 'NOT met'}  {text}")

    print("targets:")
    counts = sorted(rows)
    rss = [rows[c]["rss"] for c in counts]
    if case == "cube64":
        for c in (1000, 10000):
            if c in rows:
                line(f">= 500 designs/s at {c:,} designs: {rows[c]['designs_per_s']:.0f}",
                     rows[c]["designs_per_s"] >= 500)
        if 1000 in rows and 100000 in rows:
            growth = rows[100000]["rss"] / rows[1000]["rss"] - 1
            line(f"peak RSS within +10 % from 1,000 to 100,000 designs: {growth:+.1%} ({observers} observers)",
                 growth <= 0.10)
        if HUGE in rows:
            print(f"  {HUGE:,} designs ran to the end with {observers} observers: {rows[HUGE]['designs_per_s']:.0f} "
                  f"designs/s, peak RSS {rows[HUGE]['rss']:.0f} MB")
            if 1000 in rows:
                growth = rows[HUGE]["rss"] / rows[1000]["rss"] - 1
                line(f"peak RSS within +10 % from 1,000 to {HUGE:,} designs: {growth:+.1%} ({observers} observers)",
                     growth <= 0.10)
    else:
        if 1000 in rows and 10000 in rows:
            share = rows[10000]["designs_per_s"] / rows[1000]["designs_per_s"]
            line(f"throughput at 10,000 designs >= 80 % of that at 1,000: {share:.0%}", share >= 0.8)
        line(f"peak RSS < 2 GB at every size: largest {max(rss):.0f} MB", max(rss) < 2048)
        line(f"peak RSS flat: {min(rss):.0f}-{max(rss):.0f} MB (+{max(rss) / min(rss) - 1:.0%})",
             max(rss) / min(rss) <= 1.10)
        if all(r["ratio"] is not None for r in rows.values()):
            line(f">= 300x the colour-science loop per design: {min(r['ratio'] for r in rows.values()):.0f}x at the "
                 "slowest size", min(r["ratio"] for r in rows.values()) >= 300)


if __name__ == "__main__":
    main()
