"""Running a sweep: designs in chunks along ``design``, each chunk written to the store as it completes.

A chunk (the unit written, resumed and reported) is evaluated in blocks of designs (the unit a
worker computes at once): each block is one pass of :func:`metasim.sweep.summary.summary_parts`
(the mismatch procedure of :func:`metasim.mismatch` against a reference prepared once per sweep,
plus the gamut numbers), reduced at once to per-design summaries, so memory is bounded by the
block size, not the sweep size. Designs of a lazy grid (:class:`~metasim.sweep.grid.DesignGrid`)
are made block by block where the block runs. Only the process that called :func:`run_sweep`
writes files: workers return the (small) summaries, joined into one Dataset per chunk.

Schedulers
----------
``"serial"``            one block after another in this process.
``"threads"`` (default) a thread pool in this process (numpy and the compiled kernels release the
                        GIL); the first pending block runs alone first, so compilation and input
                        errors surface before the pool starts.
``"dask-threads"``      an in-process ``dask.distributed`` cluster of threads (mainly for trying
                        the distributed path on one machine).
``"tcp://host:port"``   (any ``scheme://`` address) the ``dask.distributed`` scheduler there; the
                        workers need metasim installed. A ``distributed.Client`` may be passed too.

The distributed schedulers import ``distributed`` only when asked for; without it the error says
``pip install -e ".[distributed]"``.
"""

from __future__ import annotations

import json
import os
import threading
import time
from concurrent.futures import FIRST_COMPLETED, ThreadPoolExecutor, wait
from pathlib import Path

import numpy as np
import xarray as xr

from metasim.checks import current_spelling
from metasim.display.drive import RENAMED_STRATEGIES
from metasim.metamerism.engine import RENAMED_REFERENCES, SURFACES
from metasim._version import __version__
from metasim.display import Display, calibrate_white, make_display
from metasim.errors import MetasimError, SweepError
from metasim.metamerism.engine import resolve_observers, resolve_reference
from metasim.observers import check_observers
from metasim.metamerism.stimuli import as_stimuli
from metasim.observers.convert import as_observer
from metasim.spectra.convert import is_colour_object
from metasim.metamerism.summary import THRESHOLDS, age_band_edges, check_thresholds
from metasim.statistics import DEFAULT_LEVEL, DEFAULT_RESAMPLES
from metasim.statistics.resampling import check_interval_settings
from metasim.sweep.evaluate import prepare
from metasim.sweep.grid import DEFAULT_DISPLAY_SETTINGS, DesignGrid, hashed_designs
from metasim.sweep.store import (
    STORE_FORMAT,
    STORE_FORMAT_VERSION,
    chunk_name,
    chunk_ranges,
    combine_sweep,
    open_store,
    read_manifest,
    spec_hash,
    store_lock,
    verified_chunks,
    write_chunk,
)
from metasim.sweep.summary import summary_dataset, summary_parts

SCHEDULERS = ("serial", "threads", "dask-threads")
#: observer × stimulus × design triples per chunk file when no chunk size is given
PAIRS_PER_CHUNK = 32_000_000
#: at most this many designs per chunk file when no chunk size is given
MAX_AUTO_CHUNK = 1024
#: observer × stimulus × design triples per block, the unit a worker evaluates at once (bounds memory)
PAIRS_PER_BLOCK = 4_000_000
_SERIAL_KERNELS = threading.Lock()


def _settings(designs, display_settings) -> dict:
    given = designs.attrs.get("display_settings", {}) if isinstance(designs, (xr.DataArray, DesignGrid)) else {}
    if isinstance(given, str):
        try:
            given = json.loads(given)
        except ValueError:
            raise SweepError(f"the designs' display_settings attribute {given[:60]!r} is not JSON; give a dict") from None
    settings = {**DEFAULT_DISPLAY_SETTINGS, **given, **(display_settings or {})}
    unknown = [k for k in settings if k not in DEFAULT_DISPLAY_SETTINGS]
    if unknown:
        raise SweepError(f"display setting {unknown[0]!r} is not known; allowed: {', '.join(DEFAULT_DISPLAY_SETTINGS)}")
    return settings


def _check_designs(designs) -> None:
    if isinstance(designs, DesignGrid):
        return
    if isinstance(designs, Display):
        if designs.batch_dims != ["design"]:
            raise SweepError(f"a Display of designs needs exactly one 'design' dim, got {designs.batch_dims}")
        return
    if not isinstance(designs, xr.DataArray) or set(designs.dims) != {"design", "primary", "wavelength"}:
        what = tuple(designs.dims) if isinstance(designs, xr.DataArray) else type(designs).__name__
        raise SweepError(f"designs must be a DataArray (design, primary, wavelength) or a Display with a 'design' "
                         f"dim, got {what}")
    if designs.sizes["design"] == 0:
        raise SweepError("designs: the 'design' dim is empty; give at least one design")


def chunk_display(designs, settings: dict) -> Display:
    """The white-calibrated Display of a block of designs.

    Parameters
    ----------
    designs : xarray.DataArray (design, primary, wavelength), Display or xarray.Dataset
        Spectra of the designs (W sr⁻¹ m⁻² nm⁻¹), made into a display and white-calibrated; a
        Display, or a Display's Dataset, is used as it is.
    settings : dict
        The display settings of :func:`metasim.sweep.display_settings_of` (``transfer``,
        ``gamma``, ``peak_luminance``, ``black_luminance``, ``white``, ``calibration_observer``).

    Returns
    -------
    Display
        The designs along ``design``, each calibrated to ``white`` at ``peak_luminance`` (cd/m²)
        for the calibration observer.

    Raises
    ------
    DisplayError
        Spectra, settings or a white the display model refuses (e.g. a white the primaries cannot
        reach).

    References
    ----------
    SMPTE RP 177-1993 (white balance of the primaries).

    Examples
    --------
    >>> import metasim
    >>> from metasim.emitters import gaussian, laser_line
    >>> from metasim.sweep import chunk_display, display_settings_of
    >>> monitor = metasim.calibrate_white(metasim.make_display(gaussian([455, 535, 615], [25, 30, 35],
    ...                                                                 name=["B", "G", "R"])), "cie1931_2")
    >>> designs = metasim.design_grid("laser", {"R": [630, 650]}, 1.0, base=laser_line([465, 532, 638], 1.0,
    ...                                                                                 name=["B", "G", "R"]))
    >>> display = chunk_display(designs, display_settings_of(monitor))
    >>> display.batch_dims, display.attrs["calibration_observer"]
    (['design'], 'cie1931_2')
    """
    if isinstance(designs, Display):
        return designs
    if isinstance(designs, xr.Dataset):
        return Display.from_dataset(designs)
    display = make_display(designs.transpose("design", "primary", "wavelength"), transfer=settings["transfer"],
                           gamma=settings["gamma"], peak_luminance=settings["peak_luminance"],
                           black_luminance=settings["black_luminance"], name="sweep designs")
    return calibrate_white(display, settings["calibration_observer"], white=settings["white"],
                           luminance=settings["peak_luminance"])


def evaluate_chunk(designs, reference, observers, stimuli, options: dict, context=None) -> xr.Dataset:
    """Per-design summaries of one block of designs as a Dataset (pure: writes nothing).

    ``designs``: a ``design × primary × wavelength`` array, a Display Dataset, or
    ``(grid, start, stop)`` for a :class:`~metasim.sweep.grid.DesignGrid` (made here);
    ``context``: the reference prepared once (:func:`metasim.sweep.evaluate.prepare`), made here if
    not given.

    Parameters
    ----------
    designs : xarray.DataArray (design, primary, wavelength), xarray.Dataset or tuple
        The block of designs (spectra in W sr⁻¹ m⁻² nm⁻¹, a Display Dataset, or
        ``(grid, start, stop)``).
    reference, observers, stimuli
        As for :func:`metasim.mismatch`.
    options : dict
        The sweep's options as :func:`metasim.run_sweep` assembles them: ``display_settings``
        (:func:`metasim.sweep.display_settings_of`), ``lab_volume`` (bool), ``per_stimulus``
        (bool), ``mismatch`` (keyword arguments of the mismatch procedure: ``calibration_observer``,
        ``strategy``, ``thresholds``, ``age_bands``, ...) and ``intervals`` (None, or ``level``,
        ``resamples``, ``seed``).
    context : SweepContext, optional
        The reference side prepared once (:func:`metasim.sweep.evaluate.prepare`).

    Returns
    -------
    xarray.Dataset (design, ...)
        The per-design summaries of :mod:`metasim.sweep.summary` (CIE 2000 differences in ΔE00,
        gamut areas and coverage), the designs' coordinates kept.

    Raises
    ------
    SweepError, DisplayError, MismatchError
        Designs, options or inputs that the display model or the mismatch procedure refuse.

    References
    ----------
    CIE 15:2004 (CIELAB); Sharma, Wu & Dalal (2005) Color Res. Appl. 30, 21-30,
    doi:10.1002/col.20070 (CIE 2000 colour difference).

    Examples
    --------
    >>> import metasim
    >>> from metasim.emitters import gaussian, laser_line
    >>> from metasim.metamerism import neutral_ramp
    >>> from metasim.sweep import display_settings_of, evaluate_chunk
    >>> monitor = metasim.calibrate_white(metasim.make_display(gaussian([455, 535, 615], [25, 30, 35],
    ...                                                                 name=["B", "G", "R"])), "cie1931_2")
    >>> designs = metasim.design_grid("laser", {"R": [630, 650]}, 1.0, base=laser_line([465, 532, 638], 1.0,
    ...                                                                                 name=["B", "G", "R"]))
    >>> options = {"display_settings": display_settings_of(monitor), "lab_volume": False, "per_stimulus": False,
    ...            "mismatch": {"calibration_observer": "cie1931_2", "strategy": "min_norm"}, "intervals": None}
    >>> block = evaluate_chunk(designs, monitor, metasim.observer_population(3, seed=1, age_years=(20, 70)),
    ...                        neutral_ramp(3), options)
    >>> block["delta_e_2000_overall"].sel(statistic="median").round(2).values.tolist()
    [4.74, 4.37]
    """
    if context is None:
        display = _block_display(designs, options)
        context = prepare(reference, display, observers, stimuli, **options["mismatch"])
    return summary_dataset(context, [evaluate_block(designs, options, context)])


def evaluate_block(designs, options: dict, context) -> dict:
    """:func:`metasim.sweep.summary.summary_parts` of one block of designs (runs on workers)."""
    if isinstance(designs, tuple):
        grid, start, stop = designs
        designs = grid.block(start, stop)
    display = chunk_display(designs, options["display_settings"])
    raw = None  # spectra before calibration: their distinct primaries are integrated once
    if isinstance(designs, xr.DataArray):
        raw = designs.transpose("design", "primary", "wavelength").values
    lock = _SERIAL_KERNELS if options.get("serialise_kernels") else None
    if lock is not None:
        lock.acquire()
    try:
        return summary_parts(context, display, lab_volume=options["lab_volume"],
                             per_stimulus=options.get("per_stimulus", False), intervals=options.get("intervals"),
                             raw=raw)
    finally:
        if lock is not None:
            lock.release()


def _block_display(designs, options: dict) -> Display:
    if isinstance(designs, tuple):
        grid, start, stop = designs
        designs = grid.block(start, stop)
    return chunk_display(designs, options["display_settings"])


def _kernels_need_serialising() -> bool:
    """numba's 'workqueue' threading layer must not be entered from two threads at once."""
    try:
        import numba

        return numba.threading_layer() == "workqueue"
    except (ImportError, ValueError):
        return False


def _auto_chunk_size(count: int, pairs: int) -> int:
    return int(max(1, min(MAX_AUTO_CHUNK, count, PAIRS_PER_CHUNK // max(pairs, 1))))


def _block_size(chunk_size: int, pairs: int) -> int:
    return int(max(1, min(chunk_size, PAIRS_PER_BLOCK // max(pairs, 1))))


def _stored_chunk_size(store, digest: str):
    """The chunk size of an existing store of the same sweep (so that a re-run resumes), else None."""
    try:
        manifest = read_manifest(store)
    except SweepError:
        return None
    if manifest is not None and manifest.get("spec_hash") == digest:
        return manifest.get("chunk_size")
    return None


def _describe(item) -> str:
    if isinstance(item, Display):
        return item.name
    return str(item) if isinstance(item, str) else type(item).__name__


def run_sweep(designs, reference, observers, stimuli: xr.Dataset, *, store, chunk_size: int | None = None,
              scheduler="threads", workers: int | None = None, calibration_observer="cie1931_2",
              strategy: str = "min_norm", display_settings: dict | None = None, lab_volume: bool = False,
              per_stimulus: bool = False, age_bands=None, thresholds=THRESHOLDS, progress=None, attrs: dict | None = None,
              replace: bool = False, wait: bool = False, intervals: bool = False, level: float = DEFAULT_LEVEL,
              resamples: int | None = None, interval_seed: int = 0) -> xr.Dataset:
    """Evaluate every design against ``reference`` in chunks, writing each chunk to ``store``; resume.

    Parameters
    ----------
    designs : DataArray or Display
        ``design × primary × wavelength`` spectra (:func:`metasim.sweep.design_grid`,
        :func:`metasim.sweep.design_list`; parameters as ``design`` coordinates), made into displays
        with ``display_settings`` and white-calibrated; or a Display with a ``design`` dim, used as is.
    reference : Display or "surfaces"
        As for :func:`metasim.mismatch`.
    observers : Dataset or str or list of str
        The population (``cmf`` over ``observer``) or standard observer names.
    stimuli : Dataset
        A stimulus set (:mod:`metasim.metamerism.stimuli`).
    store : path
        Folder of the chunk files, ``manifest.json`` and the combined ``sweep.nc``. A store of the
        same spec resumes (finished chunks are skipped); one of another spec is refused.
    chunk_size : int, optional
        Designs per chunk file, the unit written and resumed (default: the chunk size of an
        existing store of the same sweep, else about 32 million observer × stimulus × design triples,
        at most 1,024 designs). Workers evaluate a chunk in blocks of about 2 million triples.
    scheduler : str or distributed.Client
        ``"serial"``, ``"threads"`` (default), ``"dask-threads"``, a ``scheme://host:port`` dask
        scheduler address, or a ``distributed.Client`` (see the module docstring).
    workers : int, optional
        Threads for ``"threads"`` / ``"dask-threads"`` (default: CPU count).
    calibration_observer, strategy, age_bands, thresholds
        As for :func:`metasim.mismatch`.
    display_settings : dict, optional
        ``transfer``, ``gamma``, ``peak_luminance``, ``black_luminance``, ``white``,
        ``calibration_observer`` of the designs (over the designs' own ``display_settings``
        attribute, over :data:`metasim.sweep.DEFAULT_DISPLAY_SETTINGS`).
    lab_volume : bool
        Also compute each design's CIELAB volume (slower).
    per_stimulus : bool
        Also keep every stimulus's statistics over observers and shares above the thresholds
        (``delta_e_2000_by_stimulus``, ``share_of_observers_above_threshold``: design × stimulus numbers).
    progress : callable, optional
        Called with one dict per event: ``kind`` ("waiting", "skipped", "computed", "combined"), ``chunk``,
        ``start``, ``stop``, ``done``, ``total``, ``seconds``, ``message``.
    attrs : dict, optional
        Extra attributes for the manifest and the result (e.g. the text of a sweep spec file).
    replace : bool
        A store holding a different sweep is refused unless ``replace``; then its metasim files
        (manifest, chunk files, ``sweep.nc``) are removed and the sweep starts afresh.
    wait : bool
        Only one run writes a store at a time (:func:`metasim.sweep.store.store_lock`): another
        run's store is refused (:class:`~metasim.errors.StoreLockedError`) unless ``wait``; then
        this run waits for it and resumes (a "waiting" progress event says so).
    intervals : bool
        Intervals from resampling observers for each design's statistics over all pairs, paired
        replicates of its 95th percentile, and on the combined sweep each design's probability of
        being the best, its rank interval, the set that cannot be told apart from the best, the
        edge warning and the observers needed (:mod:`metasim.sweep.ranking`). Off by default in
        the library (it costs about as much again as the summaries of a chunk); on in ``metasim
        sweep``.
    level, resamples, interval_seed
        Interval level (0.95), resamples (None: 400, at least 200) and the seed of the resamples
        (one for the whole sweep: the designs are resampled together).

    Returns
    -------
    Dataset
        Per-design summaries over ``design`` (:mod:`metasim.sweep.summary`), with the attributes
        ``spec_hash``, ``spec``, ``observer_seed``, ``observer_model``, ``metasim_version``: the
        file ``store/sweep.nc``, opened (:func:`metasim.sweep.store.open_sweep`: values read when
        used, so memory does not grow with the number of designs; ``.load()`` reads it all).

    Examples
    --------
    >>> import metasim
    >>> import pathlib, tempfile
    >>> from metasim.emitters import gaussian, laser_line
    >>> from metasim.metamerism import neutral_ramp
    >>> monitor = metasim.calibrate_white(metasim.make_display(gaussian([455, 535, 615], [25, 30, 35],
    ...                                                                 name=["B", "G", "R"])), "cie1931_2")
    >>> designs = metasim.design_grid("laser", {"R": [630, 650]}, 1.0, base=laser_line([465, 532, 638], 1.0, name=["B", "G", "R"]))
    >>> viewers = metasim.observer_population(3, seed=1, age_years=(20, 70))
    >>> store = pathlib.Path(tempfile.mkdtemp()) / "red-sweep"
    >>> sweep = metasim.run_sweep(designs, monitor, viewers, neutral_ramp(3), store=store, scheduler="serial")
    >>> sweep["delta_e_2000_overall"].sizes["design"], (store / "sweep.nc").exists()
    (2, True)
    """
    _check_designs(designs)
    _check_scheduler(scheduler)
    if isinstance(reference, str):  # old names still work for one release
        reference = current_spelling(reference, RENAMED_REFERENCES, "reference")
    strategy = current_spelling(strategy, RENAMED_STRATEGIES, "strategy")
    if isinstance(reference, str) and reference == SURFACES and stimuli.attrs.get("kind") != "reflectance":
        raise SweepError(f"reference='surfaces' (real surfaces) needs reflectance stimuli such as the CIE 13.3 samples; "
                         f"these stimuli are {stimuli.attrs.get('kind', 'unknown')!r}")
    settings = _settings(designs, display_settings) if not isinstance(designs, Display) else {}
    count = designs.spectra.sizes["design"] if isinstance(designs, Display) else designs.sizes["design"]
    if isinstance(designs, DesignGrid):
        grid = designs.wavelengths
    else:
        grid = designs.wavelengths.values if isinstance(designs, Display) else designs.wavelength.values
    observers = check_observers(resolve_observers(observers, grid), where="observers", wavelengths=grid)
    # colour-science inputs converted once, before the spec hash (metasim.spectra.convert)
    stimuli, reference = as_stimuli(stimuli, grid), resolve_reference(reference, grid)
    if is_colour_object(calibration_observer):
        calibration_observer = as_observer(calibration_observer, grid)
    thresholds = check_thresholds(thresholds)
    mismatch_options = {"calibration_observer": calibration_observer, "strategy": strategy, "thresholds": thresholds}
    if age_bands is not None:
        if not isinstance(age_bands, str):  # checked against the observers' ages before the store is touched
            age_band_edges(age_bands, observers.coords.get("age_years"))
        mismatch_options["age_bands"] = tuple(age_bands)
    if isinstance(reference, str) and reference == SURFACES:  # one object white for every chunk
        # every design's white is calibrated to the stated peak luminance
        peak = designs.peak_luminance.max() if isinstance(designs, Display) else settings["peak_luminance"]
        mismatch_options["object_white_luminance"] = float(peak)
    if chunk_size is not None and (isinstance(chunk_size, bool) or not isinstance(chunk_size, (int, np.integer))
                                   or chunk_size < 1):
        raise SweepError(f"chunk_size={chunk_size!r} is not allowed; need a whole number >= 1")
    interval_options = None
    if intervals:
        resamples = DEFAULT_RESAMPLES if resamples is None else resamples
        check_interval_settings(level, resamples)
        interval_options = {"level": float(level), "resamples": int(resamples), "seed": int(interval_seed)}
    options = {"display_settings": settings, "lab_volume": bool(lab_volume), "per_stimulus": bool(per_stimulus),
               "mismatch": mismatch_options, "intervals": interval_options}
    # hashed with the names of before the renames, so that stores made then still resume
    hashed_reference = {SURFACES: "objects"}.get(reference, reference) if isinstance(reference, str) else reference
    hashed_options = {k: ({"least_mismatch": "population"}.get(v, v) if k == "strategy" else v)
                      for k, v in mismatch_options.items() if k != "calibration_observer"}
    digest = spec_hash(hashed_designs(designs), hashed_reference, observers, stimuli, settings, bool(lab_volume), hashed_options,
                       calibration_observer,
                       *(["per stimulus"] if per_stimulus else []),  # stores without it keep their hash
                       *([f"intervals {json.dumps(interval_options, sort_keys=True)}"] if interval_options else []))
    pairs = observers.sizes["observer"] * stimuli.sizes.get("stimulus", 1)
    if chunk_size is None:  # an existing store of this sweep keeps its chunks; else about 1,000 designs a chunk
        chunk_size = (0 if replace else _stored_chunk_size(store, digest)) or _auto_chunk_size(count, pairs)
    chunk_size = int(chunk_size)
    ranges = chunk_ranges(count, chunk_size)
    if isinstance(designs, DesignGrid):
        coords = designs.coordinate_names
    else:
        coords = [c for c, v in (designs.spectra if isinstance(designs, Display) else designs).coords.items()
                  if v.dims == ("design",) and c != "design"]
    manifest = {
        "format": STORE_FORMAT, "format_version": STORE_FORMAT_VERSION, "spec_hash": digest, "chunk_size": chunk_size,
        "design_count": count,
        "chunks": [{"index": i, "start": a, "stop": b, "file": chunk_name(i)} for i, (a, b) in enumerate(ranges)],
        "spec": {"parameters": coords, "design_model": str(getattr(designs, "attrs", {}).get("model", "")),
                 "design_parameters": getattr(designs, "attrs", {}).get("parameters", ""),
                 "display_settings": settings, "reference": _describe(reference),
                 "calibration_observer": _describe(calibration_observer), "strategy": strategy,
                 "lab_volume": bool(lab_volume), "per_stimulus": bool(per_stimulus),
                 "intervals": interval_options or False, "observer_count": int(observers.sizes["observer"]),
                 "stimulus_count": int(stimuli.sizes.get("stimulus", 0)),
                 "stimuli": str(stimuli.attrs.get("description", "")), "thresholds": list(thresholds),
                 "age_bands": None if age_bands is None else list(age_bands), **(attrs or {})},
        "observer_seed": observers.attrs.get("seed", "none"),
        "observer_model": str(observers.attrs.get("model", "standard observers")),
        "model": "per-design summaries of metasim.mismatch and the chromaticity gamut, chunked along design",
        "metasim_version": __version__,
    }
    state = {"done": 0, "total": len(ranges), "start": time.perf_counter()}

    def report(kind: str, index: int | None, message: str) -> None:
        if kind in ("skipped", "computed"):
            state["done"] += 1
        if progress is not None:
            start, stop = ranges[index] if index is not None else (0, count)
            progress({"kind": kind, "chunk": index, "start": start, "stop": stop, "done": state["done"],
                      "total": state["total"], "seconds": time.perf_counter() - state["start"], "message": message})

    def waiting(holder) -> None:
        report("waiting", None, f"waiting for the run writing {store} (process {(holder or {}).get('pid', '?')} on "
               f"{(holder or {}).get('host', '?')}) to finish")

    with store_lock(store, wait=wait, on_wait=waiting):  # one writer at a time
        return _fill_store(store, manifest, replace, ranges, count, report, designs, scheduler, reference, observers,
                           stimuli, options, workers, _block_size(chunk_size, pairs))


def _fill_store(store, manifest, replace, ranges, count, report, designs, scheduler, reference, observers, stimuli,
                options, workers, size) -> xr.Dataset:
    """Under the store's lock: open or resume it, compute the pending chunks in blocks of ``size``
    designs, verify, combine."""
    manifest = open_store(store, manifest, replace=replace)
    done = verified_chunks(store, manifest)
    for index in sorted(done):
        a, b = ranges[index]
        report("skipped", index, f"chunk {index + 1}/{len(ranges)} (designs {a + 1}-{b}) already in the store")
    pending = [i for i in range(len(ranges)) if i not in done]

    def designs_of(a: int, b: int):
        if isinstance(designs, DesignGrid):
            return designs, a, b  # made where the block runs
        if isinstance(designs, Display):
            return designs.to_dataset().isel(design=slice(a, b))
        return designs.isel(design=slice(a, b))

    waiting = {}

    def finish(block: tuple, parts: dict) -> None:
        index = block[0]
        waiting[index][1].append((block[1], parts))
        if len(waiting[index][1]) < waiting[index][0]:
            return
        summary = summary_dataset(context, [part for _, part in sorted(waiting.pop(index)[1], key=lambda item: item[0])])
        path = write_chunk(store, manifest, index, summary)
        a, b = ranges[index]
        p95 = summary["delta_e_2000_overall"].sel(statistic="p95").values
        report("computed", index, f"chunk {index + 1}/{len(ranges)} (designs {a + 1}-{b}) written to {Path(path).name}; "
               f"95th percentile {np.nanmin(p95):.2f}-{np.nanmax(p95):.2f} CIE 2000 units")

    context = None

    def compute(chunks) -> None:
        nonlocal context
        blocks = [(index, a, min(a + size, ranges[index][1])) for index in chunks
                  for a in range(ranges[index][0], ranges[index][1], size)]
        for index in chunks:
            waiting[index] = (-(-(ranges[index][1] - ranges[index][0]) // size), [])
        if not blocks:
            return
        if context is None:  # the reference side, rendered once for every block (the grid checked on one design)
            a = blocks[0][1]
            context = prepare(reference, _block_display(designs_of(a, a + 1), options), observers, stimuli,
                              **options["mismatch"])
        _execute(scheduler, blocks, designs_of, finish, options, workers, context)

    compute(pending)
    compute(sorted(set(range(len(ranges))) - verified_chunks(store, manifest)))  # checked again before combining
    combined = combine_sweep(store)
    report("combined", None, f"combined {count} designs into {Path(store) / 'sweep.nc'}")
    return combined


def _run_block(block, designs_of, options, context):
    index, a, b = block
    try:
        return evaluate_block(designs_of(a, b), options, context)
    except SweepError:
        raise
    except MetasimError as exc:
        raise SweepError(f"chunk {index + 1} (designs {a + 1}-{b}): {exc}") from exc


def _execute(scheduler, blocks, designs_of, finish, options, workers, context) -> None:
    if isinstance(scheduler, str) and scheduler in ("serial", "threads"):
        first, rest = blocks[0], blocks[1:]
        finish(first, _run_block(first, designs_of, options, context))
        if scheduler == "serial" or not rest:
            for block in rest:
                finish(block, _run_block(block, designs_of, options, context))
            return
        options = {**options, "serialise_kernels": _kernels_need_serialising()}
        _threads(rest, designs_of, finish, options, workers, context)
        return
    _distributed(scheduler, blocks, designs_of, finish, options, workers, context)


def _threads(blocks, designs_of, finish, options, workers, context) -> None:
    size = max(1, int(workers or os.cpu_count() or 1))
    pool = ThreadPoolExecutor(max_workers=size, thread_name_prefix="metasim-sweep")
    queue = list(blocks)
    running = {}
    try:
        while queue or running:
            while queue and len(running) < size:  # submit lazily: at most `size` blocks in memory at once
                block = queue.pop(0)
                running[pool.submit(_run_block, block, designs_of, options, context)] = block
            finished, _ = wait(list(running), return_when=FIRST_COMPLETED)
            for future in finished:
                finish(running.pop(future), future.result())
    finally:
        pool.shutdown(wait=True, cancel_futures=True)


def _check_scheduler(scheduler) -> None:
    if isinstance(scheduler, str):
        if scheduler in SCHEDULERS or "://" in scheduler:
            return
        raise SweepError(f"scheduler {scheduler!r} is not known; allowed: {', '.join(SCHEDULERS)} or a dask "
                         "scheduler address such as 'tcp://127.0.0.1:8786'")
    if not (hasattr(scheduler, "submit") and hasattr(scheduler, "scatter")):
        raise SweepError(f"scheduler of type {type(scheduler).__name__} is not usable; allowed: "
                         f"{', '.join(SCHEDULERS)}, a 'tcp://host:port' address or a distributed.Client")


def _client(scheduler, workers):
    """(client, close) for a scheduler address, "dask-threads", or a given Client."""
    _check_scheduler(scheduler)
    if not isinstance(scheduler, str):
        return scheduler, False
    try:
        from distributed import Client, LocalCluster
    except ImportError:
        raise SweepError(f"scheduler {scheduler!r} needs dask.distributed, which is not installed; "
                         'install it with pip install -e ".[distributed]"') from None
    if scheduler == "dask-threads":
        cluster = LocalCluster(n_workers=1, threads_per_worker=max(1, int(workers or os.cpu_count() or 1)),
                               processes=False, dashboard_address=None)
        return Client(cluster), True
    try:
        return Client(scheduler, timeout="10s"), True
    except (OSError, TimeoutError) as exc:
        raise SweepError(f"scheduler {scheduler!r}: cannot connect ({exc}); start one with 'dask scheduler'") from None


def _distributed(scheduler, blocks, designs_of, finish, options, workers, context) -> None:
    client, close = _client(scheduler, workers)
    try:
        from distributed import as_completed

        shared = client.scatter(context, broadcast=True)
        # submit lazily: a few blocks per worker thread in flight, so the designs are never all made at once
        threads = sum(client.nthreads().values()) if hasattr(client, "nthreads") else 1
        limit = max(2, 2 * int(threads or 1))
        queue = list(blocks)

        def submit(block):
            return client.submit(evaluate_block, designs_of(block[1], block[2]), options, shared, pure=False)

        futures = {}
        while queue and len(futures) < limit:
            block = queue.pop(0)
            futures[submit(block)] = block
        running = as_completed(list(futures))
        for future in running:
            block = futures.pop(future)
            try:
                parts = future.result()
            except MetasimError as exc:
                raise SweepError(f"chunk {block[0] + 1} (designs {block[1] + 1}-{block[2]}): {exc}") from exc
            finish(block, parts)
            if queue:
                block = queue.pop(0)
                following = submit(block)
                futures[following] = block
                running.add(following)
    finally:
        if close:
            cluster = getattr(client, "cluster", None)
            client.close()
            if cluster is not None:
                cluster.close()


__all__ = ["SCHEDULERS", "PAIRS_PER_CHUNK", "PAIRS_PER_BLOCK", "run_sweep", "evaluate_chunk", "evaluate_block",
           "chunk_display"]
