"""The ``metasim`` command: parse the options, call the library layers, print what was written.

Subcommands::

    metasim demo       run the embedded demo study end to end; ``--files DIR`` copies its example
                       specs and their format description (README.md) out for editing
    metasim observers  build a seeded observer population (or its categories) to netCDF
    metasim evaluate   one display design: gamut, extra-primary gain and mismatch against a reference
    metasim compare    two display designs side by side against one reference (or the second
                       against the first)
    metasim report     an HTML report (figures embedded) from any metasim result file
    metasim tables     the summary tables of any result file as CSV files and, optionally, a workbook
    metasim search     a design search (a search spec, :mod:`metasim.cli.search`) by differential evolution
    metasim sweep      a grid of candidate designs (a sweep spec, :mod:`metasim.cli.sweep`) in chunks
                       written to a store folder as they finish; a re-run resumes
    metasim estimate   individual observers from colour-matching data (CSV or netCDF), with
                       uncertainties, to a result file and an HTML report

Displays are described in TOML design spec files (full format: :mod:`metasim.cli.specs` and the
README.md that ``metasim demo --files DIR`` writes beside the example specs), for example::

    name = "Four-laser projector"
    transfer = "gamma"
    gamma = 2.6
    peak_luminance = 48
    white = "D65"

    [[primary]]
    label = "B"
    kind = "laser"          # laser | gaussian | led | quantum_dot | filter | measured
    peak_nm = 465
    linewidth_nm = 1.0
    # ... one [[primary]] table per primary, at least three
Studies are the library function :func:`metasim.study.run_study`; this package parses the options,
calls the library and prints what was written. Nothing here models anything.

Errors from bad input (unknown options, missing or malformed files, bad specs, values outside what
a model allows) end the command with one line ``metasim: error: ...`` on stderr and exit code 2
(usage) or 1 (everything else); never a traceback.

Files: every command first checks, before loading the numerical modules, that its input files exist
and are readable and that no output would replace an input (:mod:`metasim.cli.paths`); an output
that exists already is replaced only with ``--replace`` (the same option on every subcommand),
otherwise the command stops before computing, naming the file. Every output is written under a
temporary ``*.partial`` name and renamed when complete (:func:`metasim.io.atomic_output`).
"""

from __future__ import annotations

import argparse
import importlib
import math
import sys
import warnings
from collections.abc import Sequence
from pathlib import Path

from metasim._memory import keep_freed_memory
from metasim._version import __version__
from metasim.cli.paths import FIGURES_DIR, FIT_FILE, REPORT_FILE, RESULT_FILE, check_command_files, parse_range, range_text
from metasim.errors import FileFormatError, MetasimError, OptionError, ReportError, StimulusError
from metasim.units import format_share
from metasim.progress import Progress

PROG = "metasim"
SWEEP_FILE = "sweep.nc"


class LibraryChoices(Sequence):
    """The allowed values of an option, read from a library constant when first needed.

    Importing the library takes seconds (xarray, numba, colour-science); the parser reads the
    constant only to check a given value or to print help, so ``metasim --help`` and usage errors
    of other options stay quick.
    """

    def __init__(self, module: str, name: str, renamed: dict | None = None):
        self.module, self.name, self._values = module, name, None
        self.renamed = dict(renamed or {})  # old names still accepted for one release (not listed in help)

    def _load(self) -> tuple:
        if self._values is None:
            self._values = tuple(getattr(importlib.import_module(self.module), self.name))
        return self._values

    def __getitem__(self, index):
        return self._load()[index]

    def __len__(self) -> int:
        return len(self._load())

    def __contains__(self, value) -> bool:
        return value in self._load() or value in self.renamed


CALIBRATION_OBSERVERS = LibraryChoices("metasim.metamerism.choices", "CANDIDATES")
STRATEGIES = LibraryChoices("metasim.display.drive", "STRATEGIES", {"population": "least_mismatch"})
#: the reference that is the stimuli themselves, as real surfaces; its old name (one release more)
SURFACES, OLD_SURFACES = "surfaces", "objects"
#: old option spellings: old → new (each still works for one release, with a notice naming the new one)
RENAMED_OPTIONS = {"--no-choices": "--no-calibration-ranking", "--source": "--stimulus-space"}
#: old values of options: (option, old value) → new value
RENAMED_VALUES = {("--strategy", "population"): "least_mismatch", ("--reference", OLD_SURFACES): SURFACES}
SOURCES = LibraryChoices("metasim.display.sources", "SOURCE_SPACES")
CSV_KINDS = LibraryChoices("metasim.metamerism.stimuli", "KINDS")


#: library keyword hints in messages, as the command-line option that does the same
CLI_OPTIONS = {"replace=True": "--replace", "wait=True": "--wait", "allow_outside_grid=True": "--allow-outside-grid",
               "extrapolate=True": "--extrapolate", "resamples=": "--resamples ", "target half-width": "--p95-half-width"}


def _for_cli(text) -> str:
    text = " ".join(str(text).split())
    for keyword, option in CLI_OPTIONS.items():
        text = text.replace(keyword, option)
    return text


def _error(text: str) -> None:
    print(f"{PROG}: error: {_for_cli(text)}", file=sys.stderr)


def _warning(message, category, filename, lineno, file=None, line=None) -> None:
    print(f"{PROG}: warning: {_for_cli(message)}", file=sys.stderr)


# -- subcommands -------------------------------------------------------------------------------------

COMPILING = "compiling kernels (first run only)"
_after_command: list = []  # clean-ups main() runs when a command ends


def _kernels_ahead(progress, study: bool = True) -> None:
    """Compile a study's kernels in helper processes if numba's cache lacks them (metasim._warmup;
    not for sweeps and searches, whose own compiled pass is in metasim.sweep._kernels), and say so
    once on the command's progress reporter when compiling happens, here or in the helpers."""
    from metasim import _warmup

    said = []

    def note():
        if not said:
            said.append(True)
            progress.say(COMPILING)

    if study and _warmup.start():
        note()
    _after_command.append(_warmup.on_compile(note))
    _after_command.append(_warmup.stop)


def cmd_demo(args) -> int:
    if args.files:
        return _copy_examples(args)
    _kernels_ahead(args.progress)  # first: the helpers start before the rest of the library is imported
    from metasim.cli.demo import run_demo

    paths = run_demo(args.out, size=args.size, seed=args.seed, replace=args.replace, progress=args.progress)
    _print_headline(paths["result"])
    print(f"result:  {paths['result_path']}")
    print(f"report:  {paths['report_path']}")
    print(f"figures: {paths['figures_dir']}")
    return 0


def _copy_examples(args) -> int:
    """``metasim demo --files DIR``: the example specs, their data files and the format description
    (README.md) written into DIR for editing (nothing is computed)."""
    from metasim.cli.paths import example_files
    from metasim.io import write_bytes

    folder = Path(args.files)
    folder.mkdir(parents=True, exist_ok=True)
    for path in example_files():
        write_bytes(folder / path.name, path.read_bytes(), replace=args.replace)
        args.progress.say(f"wrote {folder / path.name}")
    print(f"examples: {len(example_files())} files in {folder}")
    print(f"formats:  {folder / 'README.md'} (design, sweep and search specs; stimulus and matching CSV files)")
    print(f"try:      metasim evaluate {folder / 'projector_four_laser.toml'} --reference "
          f"{folder / 'grading_monitor.toml'} --out study-a")
    return 0


def cmd_observers(args) -> int:
    from metasim.cli.study import build_population
    from metasim.io import save_dataset

    out = Path(args.out)
    if out.suffix != ".nc":
        raise OptionError(f"--out {out}: give a netCDF file name ending in .nc")
    progress = args.progress
    progress.steps = 1 + int(args.categories is not None) + 1 + int(bool(args.report))
    population = build_population(args.size, args.seed, args.age_years, args.field_size_deg,
                                  extrapolate=args.extrapolate, progress=progress)
    if args.categories is not None:
        from metasim.metamerism.categories import observer_categories

        population = observer_categories(population, args.categories, seed=args.seed)
        progress.step(f"{args.categories} observer categories")
    save_dataset(population, out, replace=args.replace)
    progress.step(f"wrote {out}")
    what = f"{args.categories} categories of {args.size} observers" if args.categories else f"{args.size} observers"
    print(f"wrote {out}: {what}, ages {range_text(args.age_years)}, field size {range_text(args.field_size_deg)} deg, "
          f"seed {args.seed}")
    if args.report:
        from metasim.report import write_report

        report = write_report(population, args.report, source=out.name, replace=args.replace, inputs=args.inputs)
        progress.step(f"wrote {report}")
        print(f"report: {report}")
    return 0


def _observer_file(args):
    """The --observers file, read and checked in full before anything is computed (or None)."""
    if not getattr(args, "observers", None):
        return None
    from metasim.observers import read_observers
    from metasim.spectra import default_grid

    return read_observers(args.observers, default_grid())


def _observers(args, numbered: bool = True):
    """The observers of a study or sweep: the --observers file (checked first thing by the command,
    :func:`_observer_file`), or a drawn population (a numbered progress step, or a plain line)."""
    from metasim.cli.study import build_population

    if getattr(args, "observer_set", None) is not None:
        return args.observer_set
    return build_population(args.size, args.seed, args.age_years, args.field_size_deg, extrapolate=args.extrapolate,
                            progress=args.progress if numbered else args.progress.say)


def _reference(args, specs: dict):
    from metasim.cli.specs import load_display

    if args.reference in (None, SURFACES):
        return SURFACES
    display, spec = load_display(args.reference, allow_outside_grid=args.allow_outside_grid)
    specs[display.name] = spec
    return display


def _spec_reference(value: str, spec_path) -> str:
    """A spec's ``reference = "surfaces"`` (or its old name, with a notice)."""
    if value == OLD_SURFACES:
        from metasim.checks import warn_renamed

        warn_renamed(f"{spec_path}: reference = {OLD_SURFACES!r}", repr(SURFACES))
    return SURFACES


def _age_bands(args):
    """The --age-bands edges, or the library's default policy ("decades") when not given."""
    from metasim.metamerism.summary import DECADES

    return args.age_bands or DECADES


def _study(args, designs: list, reference, specs: dict) -> int:
    from metasim.cli.study import build_stimuli, spec_texts
    from metasim.io import check_outputs, save_dataset
    from metasim.report import report_outputs, write_report
    from metasim.study import WHITE_CATEGORIES, run_study

    out = Path(args.out)
    figures = out / FIGURES_DIR
    if not args.no_report:  # the figure files too, before computing
        check_outputs(report_outputs("study", out / REPORT_FILE, figures), inputs=args.inputs, replace=args.replace)
    stimuli_text = args.stimuli or ("cie13.3" if reference == SURFACES else "ramp:6,primaries,cube:3")
    stimuli = build_stimuli(stimuli_text, source=args.source, csv_kind=args.csv_kind)
    if reference == SURFACES and stimuli.attrs.get("kind") != "reflectance":
        raise StimulusError("a reference of real surfaces needs reflectance stimuli (--stimuli cie13.3 or a "
                            "reflectance CSV with --csv-kind reflectance); or give --reference SPEC.toml")
    from metasim.metamerism.engine import check_mismatch_memory

    size = args.observer_set.sizes["observer"] if getattr(args, "observer_set", None) is not None else args.size
    check_mismatch_memory(size, stimuli.sizes["stimulus"], 1)  # one design at a time; before drawing observers
    progress = args.progress
    progress.steps = (int(getattr(args, "observer_set", None) is None) + len(designs) * (2 + int(args.choices))
                      + len(designs) + int(reference != SURFACES) + 1 + int(not args.no_report))
    observers = _observers(args)
    result = run_study(reference, designs, observers, stimuli, calibration_observer=args.calibration_observer,
                       strategy=args.strategy, age_bands=_age_bands(args), spec_texts=spec_texts(specs),
                       progress=progress, extra_bases=[specs[d.name].get("extra_primary_added_to") for d in designs],
                       rank_calibration=args.choices, white_categories=WHITE_CATEGORIES if args.choices else 0,
                       seed=args.seed, intervals=args.intervals, resamples=args.resamples,
                       target_half_width=args.p95_half_width)
    out.mkdir(parents=True, exist_ok=True)
    result_path = save_dataset(result, out / RESULT_FILE, replace=args.replace)
    progress.step(f"wrote {result_path}")
    _print_headline(result, args.p95_half_width)
    print(f"result:  {result_path}")
    if not args.no_report:
        report = write_report(result, out / REPORT_FILE, figures_dir=figures, source=result_path.name,
                              replace=args.replace, inputs=args.inputs)
        progress.step(f"wrote {report}")
        print(f"report:  {report}")
        print(f"figures: {figures}")
    return 0


def cmd_evaluate(args) -> int:
    _kernels_ahead(args.progress)
    from metasim.cli.specs import load_display

    args.observer_set = _observer_file(args)  # before any computing
    specs = {}
    design, spec = load_display(args.design, allow_outside_grid=args.allow_outside_grid)
    specs[design.name] = spec
    return _study(args, [design], _reference(args, specs), specs)


def cmd_compare(args) -> int:
    _kernels_ahead(args.progress)
    from metasim.cli.specs import load_display

    args.observer_set = _observer_file(args)  # before any computing
    specs = {}
    first, first_spec = load_display(args.first, allow_outside_grid=args.allow_outside_grid)
    second, second_spec = load_display(args.second, allow_outside_grid=args.allow_outside_grid)
    specs[first.name], specs[second.name] = first_spec, second_spec
    if args.reference is None:  # the second judged against the first
        return _study(args, [second], first, specs)
    return _study(args, [first, second], _reference(args, specs), specs)


def cmd_report(args) -> int:
    from metasim.io import load_dataset
    from metasim.report import report_kind, write_report

    data = load_dataset(args.result)
    if not hasattr(data, "data_vars"):
        raise FileFormatError(f"{args.result}: holds a single array, not a metasim result Dataset")
    try:
        report_kind(data)
    except MetasimError as exc:
        raise ReportError(f"{args.result}: {exc}") from None
    args.progress.say(f"read {args.result}")
    out = args.outputs[0]
    report = write_report(data, out, figures_dir=args.figures, source=Path(args.result).name, replace=args.replace,
                          inputs=args.inputs)
    args.progress.say(f"wrote {report}")
    print(f"report: {report}")
    return 0


def cmd_tables(args) -> int:
    from metasim.io import load_dataset
    from metasim.tables import require_workbook_writer, result_tables, write_csv_tables, write_workbook

    source = args.inputs[0]  # the result file, or sweep.nc of a store folder (metasim.cli.paths)
    if args.no_csv and not args.xlsx:
        raise OptionError("--no-csv without --xlsx writes nothing; give --xlsx FILE.xlsx or drop --no-csv")
    if args.xlsx:
        require_workbook_writer(args.xlsx)  # before anything is written
    data = load_dataset(source)
    if not hasattr(data, "data_vars"):
        raise FileFormatError(f"{source}: holds a single array, not a metasim result Dataset")
    args.progress.say(f"read {source}")
    tables = result_tables(data, pairs=args.pairs)
    args.progress.say(f"{len(tables)} tables gathered")
    if not args.no_csv:
        out = Path(args.out) if args.out else source.parent / f"{source.stem}-tables"
        paths = write_csv_tables(tables, out, replace=args.replace, inputs=args.inputs)
        print(f"tables:   {len(tables)} CSV files and contents.csv in {out}")
        for table, path in zip(tables, paths[1:]):
            print(f"  {path.name}: {table.rows} rows, {len(table.columns)} columns")
    if args.xlsx:
        print(f"workbook: {write_workbook(tables, args.xlsx, replace=args.replace, inputs=args.inputs)}")
    return 0


def _spec_reference_and_stimuli(args, spec: dict):
    """The reference and stimuli of a sweep or search spec (the command line's options win)."""
    from metasim.cli.study import build_stimuli
    from metasim.cli.sweep import relative

    if args.reference is None and "reference" in spec:
        args.reference = (_spec_reference(spec["reference"], args.spec) if spec["reference"] in (SURFACES, OLD_SURFACES)
                          else str(relative(spec, spec["reference"])))
    reference = _reference(args, {})
    stimuli_text = args.stimuli or spec.get("stimuli") or ("cie13.3" if reference == SURFACES else "ramp:6,primaries,cube:3")
    return reference, build_stimuli(stimuli_text, source=args.source, csv_kind=args.csv_kind)


def cmd_sweep(args) -> int:
    from metasim.cli.sweep import read_sweep_spec, sweep_designs
    from metasim.metamerism.summary import age_band_edges
    from metasim.sweep import run_sweep

    spec = read_sweep_spec(args.spec)
    _kernels_ahead(args.progress, study=False)
    args.observer_set = _observer_file(args)  # before any computing
    designs, _ = sweep_designs(spec, allow_outside_grid=args.allow_outside_grid)
    reference, stimuli = _spec_reference_and_stimuli(args, spec)
    observers = _observers(args, numbered=False)  # the chunks are numbered
    line = args.progress
    line.say(f"{len(designs)} designs from {args.spec}; computing them in chunks",
             activity=f"computing the first chunk of {len(designs)} designs")
    timing = {"computed": 0, "start": None}

    def progress(event):
        if event["kind"] == "waiting":
            line.say(event["message"])
            return
        if timing["start"] is None:  # the first event of this run: chunks finished since then are timed
            timing["start"] = line.clock() - event["seconds"]
        message = event["message"]
        if event["kind"] == "computed":
            timing["computed"] += 1
            left = event["total"] - event["done"]
            if left:  # chunks computed in this run, not those found in the store, give the pace
                message += "; " + line.time_left(timing["computed"], timing["computed"] + left,
                                                 line.clock() - timing["start"])
        line.say(message)  # "chunk 2/5 ...": numbered by the sweep

    result = run_sweep(designs, reference, observers, stimuli, store=args.out,
                       chunk_size=args.chunk_size or spec.get("chunk_size"), scheduler=args.scheduler,
                       workers=args.workers, calibration_observer=args.calibration_observer or spec.get(
                           "calibration_observer", "cie1931_2"), strategy=args.strategy or spec.get("strategy", "min_norm"),
                       lab_volume=bool(args.lab_volume if args.lab_volume is not None else spec.get("lab_volume", False)),
                       per_stimulus=bool(args.per_stimulus if args.per_stimulus is not None
                                         else spec.get("per_stimulus", False)),
                       age_bands=age_band_edges(_age_bands(args), observers.coords.get("age_years")), progress=progress,
                       replace=args.replace, wait=args.wait, intervals=args.intervals, resamples=args.resamples,
                       interval_seed=args.seed,
                       attrs={"sweep_name": spec.get("name", Path(args.spec).stem),
                              "sweep_description": spec.get("description", ""), "sweep_spec_text": spec["_text"]})
    _print_sweep_answer(result, args.p95_half_width)
    print(f"result:  {Path(args.out) / 'sweep.nc'} ({result.sizes['design']} designs)")
    _store_report(args, result, "sweep.nc")
    return 0


def _store_report(args, result, name: str) -> None:
    """The report of a sweep or search beside its result in the store folder (STORE/report.html and
    STORE/figures/): files of the store, rewritten when the run resumes, as the result is."""
    if args.no_report:
        return
    from metasim.report import write_report

    store = Path(args.out)
    report = write_report(result, store / REPORT_FILE, figures_dir=store / FIGURES_DIR, source=name, replace=True,
                          inputs=args.inputs)
    args.progress.say(f"wrote {report}")
    print(f"report:  {report}")
    print(f"figures: {store / FIGURES_DIR}")


def _print_sweep_answer(result, target_half_width: float | None) -> None:
    """The three best designs with their intervals, then the one-sentence answer and the advice."""
    import numpy as np

    from metasim.statistics.comparison import DEFAULT_HALF_WIDTH
    from metasim.statistics.headline import population_advice, sweep_headline, with_interval

    p95 = result["delta_e_2000_overall"].sel(statistic="p95")
    interval = result["delta_e_2000_overall_interval"].sel(statistic="p95") \
        if "delta_e_2000_overall_interval" in result else None
    parameters = [c for c in result.coords if result[c].dims == ("design",) and c != "design"]

    from metasim.plots.sweep import design_number, edge_messages, parameter_text, parameter_value, sweep_parameters

    varied = sweep_parameters(result)[0] or parameters

    def describe(index: int) -> str:  # by its parameters; designs are numbered from 1 as ranks are
        values = ", ".join(f"{parameter_text(result, c)[0]} {parameter_value(result, c, index)}" for c in varied)
        name = f"design {design_number(result, index)}, index {result.design.values[index]} in {SWEEP_FILE}"
        return f"{values} ({name})" if values else name

    for rank, index in enumerate(np.argsort(p95.values, kind="stable")[:3], start=1):
        text = with_interval(p95.values[index], None if interval is None else interval.isel(design=index))
        line = f"#{rank}: {describe(int(index))}: 95th percentile {text} CIE 2000 units"
        if "best_probability" in result:
            low, high = result["rank_interval"].isel(design=index).values
            line += (f"; best in {format_share(result['best_probability'].values[index])} of resamples, "
                     f"rank {low}-{high}")
        print(line)
    if "best_probability" in result:
        edges = edge_messages(result)  # the parameters in words
        print(sweep_headline(result, p95, interval, describe=describe, edges=edges))
        best = int(np.flatnonzero(result["rank"].values == 1)[0])
        advice = population_advice(interval.isel(design=best), int(result.attrs.get("observer_count", 0)),
                                   target_half_width or DEFAULT_HALF_WIDTH)
        if advice:
            print(f"{describe(best)}: {advice[0].lower()}{advice[1:]}")


def cmd_search(args) -> int:
    from metasim.cli.search import read_search_spec, spec_search_space
    from metasim.metamerism.summary import age_band_edges
    from metasim.sweep import best_design, run_search

    spec = read_search_spec(args.spec)
    _kernels_ahead(args.progress, study=False)
    space, settings = spec_search_space(spec)
    search = spec["search"]
    reference, stimuli = _spec_reference_and_stimuli(args, spec)
    generations = args.generations if args.generations is not None else search.get("generations", 20)
    line = args.progress
    # the observers, the first generation and those after it, the report
    line.steps = int(getattr(args, "observer_set", None) is None) + generations + 1 + int(not args.no_report)
    observers = _observers(args)
    line.say(f"searching {len(space.parameters)} parameters over at most {generations} generations")
    result = run_search(space, reference, observers, stimuli, store=args.out, objective=search.get("objective", "p95_mismatch"),
                        constraints=search.get("constraints"), generations=generations,
                        population=search.get("population"), seed=args.search_seed if args.search_seed is not None
                        else search.get("seed", 0), tolerance=search.get("tolerance", 0.01),
                        chunk_size=args.chunk_size or spec.get("chunk_size"), scheduler=args.scheduler,
                        workers=args.workers, calibration_observer=args.calibration_observer or spec.get(
                            "calibration_observer", "cie1931_2"), strategy=args.strategy or spec.get("strategy", "min_norm"),
                        display_settings=settings,
                        lab_volume=bool(args.lab_volume if args.lab_volume is not None else spec.get("lab_volume", False)),
                        age_bands=age_band_edges(_age_bands(args), observers.coords.get("age_years")),
                        progress=lambda event: line.step(event["message"]), replace=args.replace, wait=args.wait,
                        attrs={"sweep_name": spec.get("name", Path(args.spec).stem),
                               "sweep_description": spec.get("description", ""), "sweep_spec_text": spec["_text"]})
    best = best_design(result)
    values = ", ".join(f"{k} {v:.4g}" for k, v in best.items() if k not in ("design", "value", "feasible"))
    print(f"best: design {best['design'] + 1} (index {best['design']} in search.nc; {values}): value {best['value']:.4g}"
          f"{'' if best['feasible'] else ' (no design found meets every constraint)'}")
    print(f"result:  {Path(args.out) / 'search.nc'} ({result.sizes['design']} designs in "
          f"{result.attrs['generation_count']} generations)")
    _store_report(args, result, "search.nc")
    return 0


def cmd_estimate(args) -> int:
    import numpy as np

    from metasim.fitting import fit_observer, read_matching_csv
    from metasim.io import load_dataset, save_dataset
    from metasim.report import write_report

    source = Path(args.data)
    progress = args.progress
    if source.suffix.lower() == ".nc":
        data = load_dataset(source)
    else:
        display = args.display
        if display and Path(display).suffix.lower() == ".toml":
            from metasim.cli.specs import load_display

            display, _ = load_display(display)
        primaries = args.primaries
        if primaries and not Path(primaries).is_file():
            try:
                primaries = [float(v) for v in primaries.split(",")]
            except ValueError:
                raise OptionError(f"--primaries {args.primaries!r}: give three wavelengths in nm "
                                  "(e.g. 645.16,526.32,444.44) or a spectra CSV file") from None
        data = read_matching_csv(source, primaries=primaries, references=args.references, display=display,
                                 field_size_deg=args.field_size_deg, age_years=args.age_years)
    categories = False if args.no_categories else (load_dataset(args.categories) if args.categories else None)
    progress.say(f"read {source}; fitting the subjects' observers")
    result = fit_observer(data, fit_age=args.fit_age, setting_noise=args.setting_noise,
                          peak_shift_axis=args.peak_shift_axis, categories=categories)
    out = Path(args.out)
    out.mkdir(parents=True, exist_ok=True)
    path = save_dataset(result, out / FIT_FILE, replace=args.replace)
    progress.say(f"wrote {path}")
    n = result.sizes["observer"]
    flat = result["match_error"].values.reshape(n, -1), result["match_error_mean_observer"].values.reshape(n, -1)
    after, before = (np.nanmedian(np.nanmedian(v, axis=1)) for v in flat)
    identified = result["identified"].sum("observer")
    weak = ", ".join(f"{name} ({n - int(identified.sel(parameter=name))})" for name in result["parameter"].values
                     if int(identified.sel(parameter=name)) < n)
    print(f"fitted {n} subjects ({int(result['converged'].sum())} converged): median setting noise "
          f"{float(result['setting_noise'].median()):.3g}; median match error {before:.3g} (mean observer) -> "
          f"{after:.3g} (fitted), {result.attrs['match_error'].split(',')[0]}")
    print(f"not identified (subjects): {weak or 'none'}")
    print(f"result:  {path}")
    if not args.no_report:
        report = write_report(result, out / REPORT_FILE, source=path.name, replace=args.replace, inputs=args.inputs)
        progress.say(f"wrote {report}")
        print(f"report:  {report}")
    return 0


def _print_headline(result, target_half_width: float | None = None) -> None:
    from metasim.study import study_headlines

    for line in study_headlines(result, target_half_width=target_half_width):
        print(line)


# -- parser ------------------------------------------------------------------------------------------

class OldSpelling(argparse.Action):
    """An option's old spelling (:data:`RENAMED_OPTIONS`): does what the new one does and leaves a notice
    naming it, which :func:`main` prints as a warning line."""

    def __call__(self, parser, namespace, values, option_string=None):
        setattr(namespace, self.dest, self.const if self.nargs == 0 else values)
        namespace.notices = [*getattr(namespace, "notices", []), f"{option_string} is renamed "
                             f"{RENAMED_OPTIONS[option_string]}; the old spelling works until the next release"]


def renamed_values(args) -> list[str]:
    """Old values of options (:data:`RENAMED_VALUES`) replaced by their new names; the notices."""
    notices = []
    for (option, old), new in RENAMED_VALUES.items():
        dest = option.lstrip("-").replace("-", "_")
        if getattr(args, dest, None) == old:
            setattr(args, dest, new)
            notices.append(f"{option} {old} is renamed {option} {new}; the old name works until the next release")
    return notices


class Parser(argparse.ArgumentParser):
    """argparse with usage errors on one line: ``metasim: error: ... (see 'metasim demo --help')``."""

    def error(self, message):
        self.exit(2, f"{PROG}: error: {' '.join(message.split())} (see '{self.prog} --help')\n")


EXAMPLES = {
    "demo": ("examples:\n  metasim demo --out metasim-demo\n  metasim demo --out quick-demo --size 200 --seed 5\n"
             "  metasim demo --files examples   # the example specs and README.md (every file format), to edit"),
    "observers": ("examples:\n  metasim observers --out audience.nc --size 1000 --ages 20-70 --seed 7\n"
                  "  metasim observers --out groups.nc --size 2000 --ages 20-80 --categories 8 --report groups.html"),
    "evaluate": ("examples:\n  metasim evaluate examples/projector_four_laser.toml --reference examples/grading_monitor.toml "
                 "--out study-a\n  metasim evaluate my_oled.toml --observers audience.nc --stimuli cie13.3 --out oled-vs-surfaces"),
    "compare": ("examples:\n  metasim compare examples/projector_four_laser.toml examples/projector_laser_phosphor.toml "
                "--reference examples/grading_monitor.toml --out a-vs-b\n"
                "  metasim compare old_monitor.toml new_monitor.toml --size 300 --out upgrade   # second against first"),
    "estimate": ("examples:\n  metasim estimate matches.csv --primaries 645.16,526.32,444.44 --field-size 10 --out fit\n"
                 "  metasim estimate sessions.csv --references references.csv --display my_monitor.toml --out lab-fit\n"
                 "  metasim estimate matches.nc --fit-age --no-categories --out fit-with-age\n"
                 "CSV layouts: 'subject,test_wavelength_nm,<3 primaries>[,field_size_deg][,age_years]' (colour-matching\n"
                 "functions, amounts in primary-normalised energy units) or 'subject,stimulus,<3 primaries>,...' (drive\n"
                 "settings 0..1 of a three-primary display); rows of one subject and stimulus are repeats.\n"
                 "Writes OUT/fit.nc (one observer per subject, usable as --observers) and OUT/report.html."),
    "report": "examples:\n  metasim report a-vs-b/study.nc --out a-vs-b.html\n  metasim report audience.nc",
    "tables": ("examples:\n  metasim tables a-vs-b/study.nc --out a-vs-b-tables --xlsx a-vs-b.xlsx\n"
               "  metasim tables red-sweep            # the sweep store: red-sweep/sweep-tables/*.csv\n"
               "  metasim tables audience.nc --xlsx audience.xlsx --no-csv\n"
               "one CSV file per table (one row per combination of its dims, a column per dim, coordinate and value;\n"
               "headers 'key [units]'); contents.csv lists every column with its long name and units"),
    "search": ("examples:\n  metasim search examples/search_red_green.toml --out rg-search --size 100 --seed 7\n"
               "  metasim search examples/search_red_green.toml --out rg-search --size 100 --seed 7  # again: resumes\n"
               "  metasim report rg-search/search.nc --out rg-search.html\n\n"
               "Each generation is one batched evaluation of all its designs, stored as a sweep store\n"
               "(STORE/generation-NNNNN); a re-run replays the finished generations from the store and continues."),
    "sweep": ("examples:\n  metasim sweep examples/sweep_red_laser.toml --out red-sweep --size 300 --seed 7\n"
              "  metasim sweep examples/sweep_red_laser.toml --out red-sweep --size 300 --seed 7   # again: resumes\n"
              "  metasim sweep my_grid.toml --out big-sweep --observers audience.nc --chunk-size 16 "
              "--scheduler tcp://10.0.0.5:8786\n"
              "the store folder holds manifest.json (with a checksum of every finished chunk), one chunk-NNNNN.nc per\n"
              "finished chunk, the combined sweep.nc and its report (report.html, figures/); a chunk file that does\n"
              "not match its checksum is renamed to chunk-NNNNN.nc.set-aside and computed again; writer.lock names\n"
              "the run writing the store;\n"
              "the spec format is described in README.md of 'metasim demo --files examples'"),
}
#: where the examples' spec files come from (a regular install has no data/ folder to point to)
EXAMPLE_NOTE = "the example specs above: 'metasim demo --files examples' writes them, with README.md (every format)"
for _name in ("evaluate", "compare", "sweep", "search"):
    EXAMPLES[_name] += "\n" + EXAMPLE_NOTE


REPLACE_HELP = {
    None: "replace output files that exist already (default: stop before computing, naming the file); "
          "an output is never allowed to be one of the input files",
    "sweep": "if the store folder holds a different sweep, remove its metasim files (manifest, chunks, sweep.nc) "
             "and start afresh (default: stop, naming the folder); a store of the same sweep always resumes",
    "search": "if the store folder holds a different search, remove its generation folders, search.json and "
              "search.nc and start afresh (default: stop, naming the folder); a store of the same search resumes",
}


def _whole(minimum: int):
    """argparse type: a whole number >= ``minimum``."""
    def whole(text: str) -> int:
        try:
            value = int(text)
        except ValueError:
            raise argparse.ArgumentTypeError(f"{text!r} is not a whole number") from None
        if value < minimum:
            raise argparse.ArgumentTypeError(f"{value} is not allowed; need a whole number >= {minimum}")
        return value

    return whole


def _range(what: str):
    """argparse type: N or LO-HI → a number or a (lo, hi) pair (the library checks the model's range)."""
    def number_or_range(text: str):
        try:
            return parse_range(text, what)
        except MetasimError as exc:
            raise argparse.ArgumentTypeError(str(exc)) from None

    return number_or_range


def _edges(text: str) -> list[float]:
    """argparse type: ascending, finite age band edges ``20,40,60``."""
    try:
        edges = [float(v) for v in text.split(",")]
    except ValueError:
        edges = []
    if len(edges) < 2 or not all(math.isfinite(e) for e in edges) or any(b <= a for a, b in zip(edges, edges[1:])):
        raise argparse.ArgumentTypeError(f"{text!r}: give at least two ascending ages in years, e.g. 20,40,60,80")
    return edges


def _population_options(parser, observers_file: bool = True) -> None:
    group = parser.add_argument_group("observers")
    if observers_file:
        group.add_argument("--observers", metavar="FILE.nc", help="observer file from 'metasim observers' "
                           "(default: draw a population with the options below)")
    group.add_argument("--size", type=_whole(1), default=1000, help="number of observers (default 1000)")
    group.add_argument("--seed", type=_whole(0), default=1, help="random seed (default 1)")
    group.add_argument("--ages", dest="age_years", metavar="AGES", type=_range("age range"), default="20-70",
                       help="age in years, N or LO-HI uniform (default 20-70; CIE 170-1 covers 20-80)")
    group.add_argument("--field-size", dest="field_size_deg", metavar="FIELD_SIZE", type=_range("field size"), default="2",
                       help="field size in degrees, N or LO-HI (default 2; CIE 170-1 covers 1-10)")
    group.add_argument("--extrapolate", action="store_true",
                       help="allow ages and field sizes outside the CIE 170-1 range (the model is then extrapolated)")


def _study_options(parser, default_out: str) -> None:
    parser.add_argument("--out", default=default_out, metavar="FOLDER",
                        help=f"output FOLDER for study.nc, report.html and figures/ (default {default_out})")
    _population_options(parser)
    group = _matching_options(parser)
    group.add_argument("--no-calibration-ranking", dest="choices", action="store_false",
                       help="skip the ranking of calibration observers and the white-point trims per observer category")
    group.add_argument("--no-choices", dest="choices", action=OldSpelling, nargs=0, const=False, help=argparse.SUPPRESS)
    group.add_argument("--no-report", action="store_true", help="write the result file only")
    _interval_options(parser)


def _interval_options(parser) -> None:
    # defaults None: the library's (metasim.statistics), so building the parser imports nothing heavy
    group = parser.add_argument_group("intervals (95 %, from resampling observers)")
    group.add_argument("--no-intervals", dest="intervals", action="store_false",
                       help="skip the intervals, the comparison of two designs and the population-size advice")
    group.add_argument("--resamples", type=_whole(200), default=None, metavar="N",
                       help="resamples of the observers (at least 200; default 400)")
    group.add_argument("--p95-half-width", type=float, default=None, metavar="DE",
                       help="interval half-width on the 95th percentile the population-size advice aims at, CIE "
                            "2000 units (default 0.1)")


def _matching_options(parser):
    group = parser.add_argument_group("stimuli and matching")
    group.add_argument("--stimuli", help="comma list of ramp[:N], primaries, cube[:N], cie13.3 or CSV files "
                       "(default ramp:6,primaries,cube:3; cie13.3 for --reference surfaces)")
    # choice lists from the library's constants (LibraryChoices); a metavar keeps argparse from
    # reading them while it builds the parser
    group.add_argument("--csv-kind", choices=CSV_KINDS, default="rgb", metavar="KIND",
                       help="what stimulus CSV files hold: %(choices)s (default rgb)")
    group.add_argument("--stimulus-space", dest="source", choices=SOURCES, default="bt709", metavar="SPACE",
                       help="colour space the RGB stimuli are encoded in: %(choices)s (default bt709)")
    group.add_argument("--source", dest="source", choices=SOURCES, action=OldSpelling, metavar="SPACE",
                       help=argparse.SUPPRESS)
    group.add_argument("--calibration-observer", choices=CALIBRATION_OBSERVERS, default="cie1931_2", metavar="NAME",
                       help="observer both sides are matched for: %(choices)s (default cie1931_2)")
    group.add_argument("--strategy", choices=STRATEGIES, default="min_norm", metavar="NAME",
                       help="drive strategy for more than 3 primaries: %(choices)s (default min_norm; least_mismatch: "
                            "the least mismatch over the observers)")
    group.add_argument("--age-bands", type=_edges, help="age band edges in years, e.g. 20,40,60,80 (default: decades)")
    group.add_argument("--allow-outside-grid", action="store_true",
                       help="accept primaries and measured spectra that lose more than 1 %% of their energy outside "
                       "the 390-830 nm grid (a warning states the share lost; default: stop, naming the spectrum)")
    return group


def build_parser() -> argparse.ArgumentParser:
    """The ``metasim`` command's argument parser: one subcommand per ``add(...)`` call, usage errors
    on one line.

    Returns
    -------
    argparse.ArgumentParser
        The parser with every subcommand.

    Examples
    --------
    >>> from metasim.cli import build_parser
    >>> build_parser().parse_args(["observers", "--out", "audience.nc", "--ages", "30-60"]).age_years
    (30.0, 60.0)
    """
    parser = Parser(
        prog=PROG, formatter_class=argparse.RawDescriptionHelpFormatter,
        description="Spectral simulation of observer-dependent metamerism for display design.",
        epilog="start with:\n  metasim demo --out metasim-demo\nthen 'metasim <command> --help' for each command.")
    parser.add_argument("--version", action="version", version=f"{PROG} {__version__}")
    parser.add_argument("--quiet", action="store_true", help="no progress lines on stderr")
    sub = parser.add_subparsers(dest="command", metavar="command", required=True)

    def add(name, help_text, run):
        p = sub.add_parser(name, help=help_text, description=help_text, epilog=EXAMPLES[name],
                           formatter_class=argparse.RawDescriptionHelpFormatter)
        p.add_argument("--quiet", action="store_true", default=argparse.SUPPRESS, help="no progress lines on stderr")
        p.add_argument("--replace", action="store_true", help=REPLACE_HELP.get(name, REPLACE_HELP[None]))
        p.set_defaults(run=run)
        return p

    p = add("demo", "run the embedded demo study end to end (figures, result file, HTML report)", cmd_demo)
    p.add_argument("--out", default="metasim-demo", metavar="FOLDER",
                   help="output FOLDER for study.nc, report.html and figures/ (default metasim-demo)")
    p.add_argument("--size", type=_whole(1), default=1000, help="audience size (default 1000)")
    p.add_argument("--seed", type=_whole(0), default=2024, help="random seed of the audience (default 2024)")
    p.add_argument("--files", metavar="FOLDER", help="write the example specs, their data files and README.md (the "
                   "format of every spec and input file) into FOLDER for editing, and stop: no study is run")

    p = add("observers", "build a seeded observer population (or its categories) to a netCDF file", cmd_observers)
    p.add_argument("--out", required=True, metavar="FILE.nc", help="the FILE (not a folder) to write the observers "
                   "to, ending in .nc")
    _population_options(p, observers_file=False)
    p.add_argument("--categories", type=_whole(1), metavar="K",
                   help="write K representative observer categories instead (K >= 1)")
    p.add_argument("--report", metavar="FILE.html", help="also write an HTML report of the observers")

    p = add("evaluate", "evaluate one display design: gamut, extra-primary gain, mismatch against a reference",
            cmd_evaluate)
    p.add_argument("design", help="design spec (TOML)")
    p.add_argument("--reference", help="reference display spec (TOML), or 'surfaces' for the stimuli as real "
                   "surfaces under their illuminant (default surfaces)")
    _study_options(p, "metasim-evaluate")

    p = add("compare", "compare two display designs: both against --reference, or the second against the first",
            cmd_compare)
    p.add_argument("first", help="first design spec (TOML); the reference when --reference is not given")
    p.add_argument("second", help="second design spec (TOML)")
    p.add_argument("--reference", help="reference display spec (TOML) or 'surfaces' (the stimuli as real surfaces)")
    _study_options(p, "metasim-compare")

    p = add("sweep", "evaluate a grid of candidate designs (a sweep spec) in chunks; resumable", cmd_sweep)
    p.add_argument("spec", help="sweep spec (TOML): the designs to vary and, optionally, reference and stimuli")
    p.add_argument("--out", required=True, metavar="STORE", help="store FOLDER (chunk files, manifest, sweep.nc, "
                   "report.html, figures/); "
                   "an existing store of the same sweep resumes")
    p.add_argument("--reference", help="reference display spec (TOML) or 'surfaces' (default: the spec's, else surfaces)")
    p.add_argument("--chunk-size", type=_whole(1), metavar="N",
                   help="designs per chunk (default: the spec's, else automatic)")
    p.add_argument("--scheduler", default="threads", help="serial, threads (default), dask-threads, or a dask "
                   "scheduler address such as tcp://host:8786")
    p.add_argument("--workers", type=_whole(1), metavar="N",
                   help="threads for threads / dask-threads (default: CPU count)")
    p.add_argument("--lab-volume", action="store_true", default=None, help="also the CIELAB volume of every design")
    p.add_argument("--per-stimulus", action="store_true", default=None,
                   help="also keep every stimulus's statistics over observers, per design")
    p.add_argument("--wait", action="store_true", help="if another run is writing the same store, wait for it to "
                   "finish and then resume (default: stop, naming that run's process and host)")
    p.add_argument("--no-report", action="store_true", help="write the store only (default: also STORE/report.html "
                   "and STORE/figures/)")
    _population_options(p)
    _matching_options(p)
    _interval_options(p)
    p.set_defaults(calibration_observer=None, strategy=None)

    p = add("search", "search for the best design (a search spec) by differential evolution; resumable", cmd_search)
    p.add_argument("spec", help="search spec (TOML): the primaries' ranges, objective, constraints; optionally "
                   "reference and stimuli")
    p.add_argument("--out", required=True, metavar="STORE", help="store FOLDER (one sweep store per generation, "
                   "search.json, search.nc); an existing store of the same search resumes")
    p.add_argument("--reference", help="reference display spec (TOML) or 'surfaces' (default: the spec's, else surfaces)")
    p.add_argument("--generations", type=int, metavar="N", help="generations after the first (default: the spec's, "
                   "else 20); more than a finished search had continues it")
    p.add_argument("--search-seed", type=int, metavar="N", help="seed of the search (default: the spec's, else 0)")
    p.add_argument("--chunk-size", type=int, metavar="N", help="designs per chunk (default: automatic)")
    p.add_argument("--scheduler", default="threads", help="serial, threads (default), dask-threads, or a dask "
                   "scheduler address such as tcp://host:8786")
    p.add_argument("--workers", type=int, metavar="N", help="threads for threads / dask-threads (default: CPU count)")
    p.add_argument("--lab-volume", action="store_true", default=None, help="also the CIELAB volume of every design")
    p.add_argument("--wait", action="store_true", help="if another run is writing the same store, wait for it")
    p.add_argument("--no-report", action="store_true", help="write the store only (default: also STORE/report.html "
                   "and STORE/figures/)")
    _population_options(p)
    _matching_options(p)
    p.set_defaults(calibration_observer=None, strategy=None)

    p = add("estimate", "estimate individual observers from colour-matching data, with uncertainties", cmd_estimate)
    p.add_argument("data", help="matching data: CSV (either layout, see below) or netCDF (.nc)")
    p.add_argument("--out", default="metasim-fit", metavar="FOLDER",
                   help="output FOLDER for fit.nc and report.html (default metasim-fit)")
    p.add_argument("--primaries", help="colour-matching functions: three primary wavelengths in nm, comma-separated, "
                   "or a spectra CSV (default: the file's '# primary_wavelengths_nm:' comment)")
    p.add_argument("--references", metavar="SPECTRA.csv", help="matching sessions: reference spectra, one column per stimulus")
    p.add_argument("--display", metavar="SPEC", help="matching sessions: the three-primary test display, a design spec "
                   "(TOML) or a spectra CSV of its primaries")
    p.add_argument("--field-size", dest="field_size_deg", metavar="FIELD_SIZE", type=float, default=2.0,
                   help="field size in degrees for subjects without a "
                   "field_size_deg column (default 2)")
    p.add_argument("--age", dest="age_years", metavar="AGE", type=float,
                   help="age in years for subjects without an age_years column (default unknown)")
    p.add_argument("--fit-age", action="store_true", help="also fit every subject's age (prior 50 ± 17.3 years)")
    p.add_argument("--setting-noise", type=float, help="known setting noise (default: estimated per subject)")
    p.add_argument("--peak-shift-axis", choices=("log_wavelength", "wavelength"), default="log_wavelength",
                   help="axis of the peak-wavelength shifts (default log_wavelength)")
    p.add_argument("--categories", metavar="FILE.nc", help="observer categories to name the nearest of "
                   "(from 'metasim observers --categories'; default: 8 categories of the population model)")
    p.add_argument("--no-categories", action="store_true", help="skip the nearest category")
    p.add_argument("--no-report", action="store_true", help="write the result file only")

    p = add("report", "write an HTML report (figures embedded) from a metasim result file", cmd_report)
    p.add_argument("result", help="result file (.nc): a study, a mismatch result, a sweep (STORE/sweep.nc) or an observer file")
    p.add_argument("--out", metavar="FILE.html", help="the HTML FILE (not a folder) to write (default: the result "
                   "file's name with .html)")
    p.add_argument("--figures", metavar="DIR", help="also write each figure as a PNG file into DIR")

    p = add("tables", "write the summary tables of a result file as CSV files (tidy, units in the header) "
            "and, optionally, one .xlsx workbook", cmd_tables)
    p.add_argument("result", help="result file (.nc): a study, a mismatch result, a sweep (STORE/sweep.nc, or the "
                   "STORE folder) or an observer file")
    p.add_argument("--out", metavar="FOLDER", help="FOLDER for the CSV files (default: RESULT-tables beside the result)")
    p.add_argument("--xlsx", metavar="FILE.xlsx", help="also write every table into one workbook (needs the "
                   "spreadsheet extra: pip install \"metasim[spreadsheet]\")")
    p.add_argument("--no-csv", action="store_true", help="write the workbook only")
    p.add_argument("--pairs", action="store_true", help="also tabulate the per observer x stimulus arrays "
                   "(observers x stimuli rows per design)")
    return parser


def main(argv=None) -> int:
    """Entry point of the ``metasim`` console script; returns the exit code.

    Parameters
    ----------
    argv : list of str, optional
        The arguments (default: the command line).

    Returns
    -------
    int
        The exit code: 0, 1 (an error, one line on stderr) or 2 (usage).

    Examples
    --------
    >>> from metasim.cli import main
    >>> main(["observers", "--out", "audience.txt"])  # the error is one line on stderr
    1
    """
    parser = build_parser()
    args = parser.parse_args(argv)
    args.quiet = bool(getattr(args, "quiet", False))
    for notice in [*getattr(args, "notices", []), *renamed_values(args)]:
        print(f"{PROG}: warning: {notice}", file=sys.stderr)
    args.progress = Progress(quiet=args.quiet)  # progress lines on stderr (metasim.progress); --quiet silences
    keep_freed_memory()  # many studies in one process: reuse freed memory (metasim._memory)
    try:
        with warnings.catch_warnings():  # restored on return: main() may run many times in one process
            warnings.showwarning = _warning
            warnings.filterwarnings("ignore", module="colour")
            warnings.filterwarnings("ignore", category=RuntimeWarning, module="numpy")
            check_command_files(args)  # inputs and outputs, before the numerical modules load
            args.progress.say(f"{args.command}: inputs checked; loading the numerical modules",
                              activity="loading the numerical modules and reading the inputs")
            with args.progress:  # the active reporter (metasim.progress.current) and its heartbeat
                return int(args.run(args) or 0)
    except MetasimError as exc:
        _error(exc)
    except (FileNotFoundError, IsADirectoryError, NotADirectoryError, PermissionError) as exc:
        _error(f"{exc.filename or ''}: {exc.strerror or exc}")
    except OSError as exc:
        _error(f"{getattr(exc, 'filename', '') or ''} {exc}")
    except KeyboardInterrupt:
        _error("interrupted")
        return 130
    finally:
        while _after_command:
            _after_command.pop()()
    return 1


__all__ = ["main", "build_parser"]
