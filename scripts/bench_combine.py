"""Benchmark: memory and time of combining a sweep store (``combine_sweep``) from 10³ to 10⁶ designs.

Run:  python scripts/bench_combine.py [--sizes 1000 10000 100000 1000000] [--chunk-size 250]
                                      [--observers 50] [--intervals] [--keep DIR] [--phases]

A real 10⁶-design sweep takes about 25 minutes of both cores; the combine step alone is measured
here on a synthetic but valid store. One real sweep of ``--chunk-size`` designs (the cube64 case of
``scripts/bench_sweep.py``: lazy laser design grid, ``--observers`` seeded CIE 170-1 observers, 64
stimuli; ``--intervals`` runs it with intervals, 200 resamples) gives a chunk's layout: variables,
dims, attributes. Then the chunk files of the largest size are written through the store's own
functions (``write_chunk`` records each file's SHA-256 in the manifest; ``write_manifest``), each
chunk's values varied: every floating-point ``design`` variable is the real chunk's values times
(1 + 0.05 × seeded normal numbers) with a design's NaNs kept, the design coordinates are seeded
random wavelengths. The store of each smaller size links the first chunk files of the largest one
and has its own manifest (same spec hash, design ranges and checksums), so every size reads the same
kind of chunks.

Each size's combine runs in a fresh Python process: the process imports metasim, xarray and the
netCDF library, loads the compiled Pareto kernel, then times ``combine_sweep(store)`` (writing
``sweep.nc``). Printed per size: wall seconds, CPU seconds (user + sys of the process, what a loaded
machine distorts least), peak resident memory (``ru_maxrss`` of the child) and its ratio to the
smallest size's, and the machine's load average. Target: peak resident memory at 10⁶ designs
within +10 % of 10³ designs.

``--phases`` also prints, per size, where the memory goes: the resident memory at the start and
its peak (Linux ``/proc/self/clear_refs``, where allowed) during each phase, and with ``--trace``
the peak of the Python allocations (``tracemalloc``; numpy reports its arrays to it, the compiled
Pareto sort does not): the chunks streamed into the
file (``CombinedWriter.add``), the ranking (``ranking_variables``), the Pareto ranks
(``pareto_front`` or ``pareto_rank_variable``) and the added variables written (``CombinedWriter.finish``).
Tracing slows the run; the figures of the table above come from runs without it.

``--keep DIR`` keeps the synthetic stores in ``DIR`` and reuses them on the next run (e.g. to
compare two versions of metasim on the same files: ``PYTHONPATH=/path/to/other/checkout``).
"""

from __future__ import annotations

import argparse
import json
import os
import resource
import shutil
import subprocess
import sys
import tempfile
import time
import warnings
from pathlib import Path

import numpy as np

warnings.filterwarnings("ignore")
sys.path.insert(0, os.path.dirname(os.path.abspath(__file__)))

SIZES = [1000, 10000, 100000, 1000000]


def _rss_now_mb() -> float:
    with open("/proc/self/status") as handle:
        for line in handle:
            if line.startswith("VmRSS:"):
                return int(line.split()[1]) / 1024
    return float("nan")


def _hwm_mb() -> float:
    with open("/proc/self/status") as handle:
        for line in handle:
            if line.startswith("VmHWM:"):
                return int(line.split()[1]) / 1024
    return float("nan")


def _reset_hwm() -> bool:
    try:
        with open("/proc/self/clear_refs", "w") as handle:
            handle.write("5")
        return True
    except OSError:
        return False


# -- the synthetic store ------------------------------------------------------------------------------

def template_store(folder: Path, args) -> Path:
    """One real sweep of ``chunk_size`` designs (bench_sweep's cube64 inputs), in ``folder/template``."""
    import bench_sweep

    from metasim.sweep import run_sweep

    store = folder / "template"
    if not (store / "chunk-00000.nc").is_file():
        reference, observers, stimuli = bench_sweep.build_inputs(args.observers, args.seed, "cube64")
        designs = bench_sweep.grid(args.chunk_size)
        run_sweep(designs, reference, observers, stimuli, store=store,
                  chunk_size=args.chunk_size, scheduler="threads", replace=True, intervals=args.intervals,
                  **({"resamples": 200} if args.intervals else {}))
    return store


def varied_chunk(template, start: int, stop: int, seed: int):
    """The template chunk's layout with designs ``start .. stop`` and seeded values."""
    import xarray as xr

    rng = np.random.default_rng([seed, start])
    count = stop - start
    part = template.isel(design=np.arange(count) % template.sizes["design"])
    part = part.assign_coords(design=np.arange(start, stop, dtype=template["design"].dtype))
    for name, coord in template.coords.items():
        if name != "design" and coord.dims == ("design",) and coord.dtype.kind == "f":
            low, high = float(coord.min()), float(coord.max())
            values = low + (high - low + 1.0) * rng.random(count)
            part = part.assign_coords({name: ("design", values, coord.attrs)})
    for name, variable in template.data_vars.items():
        if "design" not in variable.dims:
            continue
        values = part[name].values
        if values.dtype.kind == "f":
            values = values * (1.0 + 0.05 * rng.standard_normal(values.shape))
        elif values.dtype.kind in "iu":
            values = rng.permutation(values.ravel()).reshape(values.shape)
        part[name] = xr.DataArray(values, dims=variable.dims, attrs=variable.attrs)
    return part


def build_stores(folder: Path, args) -> dict:
    """A store per size (the chunk files of the largest, linked into the smaller ones)."""
    import metasim
    from metasim.sweep.store import chunk_ranges, read_manifest, write_chunk, write_manifest

    largest = max(args.sizes)
    tag = f"c{args.chunk_size}-o{args.observers}-s{args.seed}{'-i' if args.intervals else ''}"
    full = folder / f"store-{tag}-{largest}"
    done = full / "complete.json"
    if not done.is_file():
        template_folder = template_store(folder, args)
        template = metasim.load_dataset(template_folder / "chunk-00000.nc")
        template.attrs = {k: v for k, v in template.attrs.items() if k not in ("chunk", "design_start", "design_stop")}
        manifest = read_manifest(template_folder)
        manifest["design_count"] = largest
        manifest["chunks"] = [{"index": i, "start": a, "stop": b, "file": f"chunk-{i:05d}.nc", "sha256": None}
                              for i, (a, b) in enumerate(chunk_ranges(largest, args.chunk_size))]
        shutil.rmtree(full, ignore_errors=True)
        full.mkdir(parents=True)
        write_manifest(full, manifest)
        started = time.perf_counter()
        for chunk in manifest["chunks"]:
            write_chunk(full, manifest, chunk["index"], varied_chunk(template, chunk["start"], chunk["stop"],
                                                                     args.seed))
            if chunk["index"] % 500 == 0:
                print(f"  writing synthetic chunks: {chunk['stop']:,} of {largest:,} designs "
                      f"({time.perf_counter() - started:.0f} s)", flush=True)
        done.write_text(json.dumps({"designs": largest}))
    manifest = read_manifest(full)
    stores = {}
    for size in args.sizes:
        if size == largest:
            stores[size] = full
            continue
        if size % args.chunk_size:
            raise SystemExit(f"--sizes: {size} is not a multiple of the chunk size {args.chunk_size}")
        store = folder / f"store-{tag}-{size}"
        shutil.rmtree(store, ignore_errors=True)
        store.mkdir(parents=True)
        chunks = manifest["chunks"][: size // args.chunk_size]
        for chunk in chunks:
            os.link(full / chunk["file"], store / chunk["file"])
        write_manifest(store, {**manifest, "design_count": size, "chunks": chunks})
        stores[size] = store
    return stores


# -- one combine, in a fresh process ------------------------------------------------------------------

def phase_watch(report: dict, trace: bool):
    """Wrap the combine's phases; each records its resident-memory peak (and tracemalloc peak)."""
    import tracemalloc

    from metasim.sweep import store as store_module

    def wrap(owner, name, label):
        original = getattr(owner, name, None)
        if original is None:
            return

        def watched(*args, **kwargs):
            if trace:
                tracemalloc.reset_peak()
            base = tracemalloc.get_traced_memory()[0]
            rss = _rss_now_mb()
            hwm = _reset_hwm()
            try:
                return original(*args, **kwargs)
            finally:
                entry = report.setdefault(label, {"python_peak_mb": 0.0, "rss_peak_mb": 0.0, "rss_start_mb": rss})
                entry["python_peak_mb"] = max(entry["python_peak_mb"],
                                              (tracemalloc.get_traced_memory()[1] - base) / 2**20)
                if hwm:
                    entry["rss_peak_mb"] = max(entry["rss_peak_mb"], _hwm_mb())
        setattr(owner, name, watched)

    wrap(store_module.CombinedWriter, "add", "chunks streamed")
    wrap(store_module, "ranking_variables", "ranking")
    wrap(store_module, "pareto_front", "Pareto ranks")
    wrap(store_module, "pareto_rank_variable", "Pareto ranks")
    wrap(store_module.CombinedWriter, "finish", "added variables written")
    if trace:
        tracemalloc.start()


def one_size(args) -> dict:
    import netCDF4  # noqa: F401  (loaded before the measurement, as a sweep has loaded it)
    import xarray  # noqa: F401

    from metasim.sweep.pareto import pareto_ranks
    from metasim.sweep.store import combine_sweep

    pareto_ranks(np.random.default_rng(0).random((8, 3)))  # the compiled kernel loaded
    store = Path(args.one)
    phases: dict = {}
    if args.phases:
        phase_watch(phases, args.trace)
    rss_before = resource.getrusage(resource.RUSAGE_SELF).ru_maxrss / 1024
    load = os.getloadavg()[0]
    start, cpu = time.perf_counter(), os.times()
    try:
        combined = combine_sweep(store)
        count = combined.sizes["design"]
        combined.close()
    finally:
        (store / "sweep.nc").unlink(missing_ok=True)
    seconds = time.perf_counter() - start
    end = os.times()
    return {"designs": count, "seconds": seconds, "cpu_seconds": (end.user - cpu.user) + (end.system - cpu.system),
            "peak_rss_mb": resource.getrusage(resource.RUSAGE_SELF).ru_maxrss / 1024, "rss_before_mb": rss_before,
            "load_before": load, "load_after": os.getloadavg()[0], "phases": phases}


def run_child(store: Path, phases: bool, trace: bool = False) -> dict:
    command = [sys.executable, os.path.abspath(__file__), "--one", str(store)] + (["--phases"] if phases else []) \
        + (["--trace"] if trace else [])
    done = subprocess.run(command, capture_output=True, text=True)
    if done.returncode != 0:
        raise SystemExit(f"benchmark child failed:\n{done.stderr[-3000:]}")
    return json.loads(done.stdout.strip().splitlines()[-1])


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--sizes", type=int, nargs="+", default=SIZES)
    parser.add_argument("--chunk-size", type=int, default=250)
    parser.add_argument("--observers", type=int, default=50)
    parser.add_argument("--seed", type=int, default=11)
    parser.add_argument("--intervals", action="store_true", help="the template sweep is run with intervals")
    parser.add_argument("--keep", default=None, metavar="DIR", help="keep (and reuse) the synthetic stores here")
    parser.add_argument("--phases", action="store_true", help="also the resident memory of each phase")
    parser.add_argument("--trace", action="store_true", help="with --phases: also the Python allocations "
                        "(tracemalloc; several times slower)")
    parser.add_argument("--one", default=None, help=argparse.SUPPRESS)
    args = parser.parse_args()
    if args.one is not None:
        print(json.dumps(one_size(args)))
        return
    args.sizes = sorted(args.sizes)
    folder = Path(args.keep) if args.keep else Path(tempfile.mkdtemp(prefix="bench-combine-"))
    folder.mkdir(parents=True, exist_ok=True)
    try:
        import metasim

        print(f"combine_sweep of synthetic stores: chunks of {args.chunk_size} designs laid out as a sweep of the "
              f"cube64 case with {args.observers} observers{' and intervals' if args.intervals else ''}; metasim "
              f"{metasim.__version__} from {os.path.dirname(metasim.__file__)}; {os.cpu_count()} CPUs, load "
              f"average now {os.getloadavg()[0]:.1f}", flush=True)
        stores = build_stores(folder, args)
        print(f"{'designs':>9} {'seconds':>8} {'CPU s':>7} {'peak RSS':>9} {'vs first':>8} {'load':>10}")
        first = None
        for size in args.sizes:
            row = run_child(stores[size], False)
            first = first or row["peak_rss_mb"]
            change = row["peak_rss_mb"] / first - 1
            print(f"{row['designs']:>9,} {row['seconds']:>8.1f} {row['cpu_seconds']:>7.1f} "
                  f"{row['peak_rss_mb']:>6.0f} MB {change:>+7.1%} "
                  f"{row['load_before']:>4.1f}-{row['load_after']:<4.1f}", flush=True)
        if first is not None and len(args.sizes) > 1:
            met = "met" if change <= 0.10 else "NOT met"
            print(f"target: peak RSS at {args.sizes[-1]:,} designs within +10 % of {args.sizes[0]:,}: "
                  f"{change:+.1%}, {met}")
        if args.phases:
            print("\nwhere the memory goes (RSS: at the start and peak during the phase, where /proc/self/clear_refs "
                  "allows; with --trace the peak of the Python allocations too, numpy arrays included, compiled "
                  "code's not)")
            for size in args.sizes:
                row = run_child(stores[size], True, args.trace)
                for label, entry in row["phases"].items():
                    traced = f"   python peak {entry['python_peak_mb']:>6.1f} MB" if args.trace else ""
                    print(f"{row['designs']:>9,}  {label:<24} RSS {entry['rss_start_mb']:>5.0f} MB at start, peak "
                          f"{entry['rss_peak_mb']:>5.0f} MB{traced}", flush=True)
    finally:
        if not args.keep:
            shutil.rmtree(folder, ignore_errors=True)


if __name__ == "__main__":
    main()
