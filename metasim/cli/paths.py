"""The files a ``metasim`` command reads and writes, found from its arguments alone, and checked first.

This module imports only the standard library and metasim's light utilities (errors, file helpers):
:func:`check_command_files` runs before the numerical modules are loaded, so a missing input, a
spec that is not UTF-8 TOML, an output that would replace an input, or an output that exists when
``--replace`` was not given ends the command in well under a second, before anything is computed.

Inputs of a command: its spec files (design, reference, sweep spec and the ``base`` / ``reference``
specs a sweep spec names), every CSV file those specs name (``file = ...`` of measured primaries and
backlights, relative to the spec), the ``--observers`` file, stimulus CSV files in ``--stimuli``
(or a sweep spec's ``stimuli``), the result file of ``report``, and the matching data, reference
spectra, display spec (with its CSV files), primary spectra and category file of ``estimate``.
"""

from __future__ import annotations

import math
import tomllib
from pathlib import Path

from metasim.errors import FileFormatError, OptionError, SpecError
from metasim.io import check_outputs, read_text_file

#: the reference that is the stimuli as real surfaces, and its old name (accepted for one release)
SURFACE_NAMES = ("surfaces", "objects")
RESULT_FILE = "study.nc"
FIT_FILE = "fit.nc"
REPORT_FILE = "report.html"
FIGURES_DIR = "figures"
#: the files a sweep or search store's result is written to (the store itself is a folder)
STORE_FILES = {"sweep": ("sweep.nc", "manifest.json"), "search": ("search.nc", "search.json")}


def parse_range(text: str, what: str):
    """``"20-70"`` → (20.0, 70.0); ``"32"`` → 32.0 (finite numbers; LO <= HI)."""
    parts = str(text).split("-")
    try:
        values = [float(p) for p in parts]
    except ValueError:
        values = []
    if len(values) not in (1, 2) or not all(math.isfinite(v) for v in values):
        raise OptionError(f"{what} {text!r} is not a number or a LO-HI range of finite numbers, e.g. 20-70")
    if len(values) == 2 and values[0] > values[1]:
        raise OptionError(f"{what} {text!r}: LO {values[0]:g} is above HI {values[1]:g}; give LO-HI")
    return values[0] if len(values) == 1 else tuple(values)


def range_text(value) -> str:
    """The ``N`` or ``LO-HI`` text of a number or a ``(lo, hi)`` pair (the inverse of :func:`parse_range`)."""
    if isinstance(value, (tuple, list)):
        return "-".join(f"{float(v):g}" for v in value)
    return f"{float(value):g}"


def read_toml(path, what: str = "design spec") -> dict:
    """The parsed TOML of a spec file, with ``_path`` (the file) and ``_text`` (its text) added."""
    path = Path(path)
    if not path.is_file() and not path.is_dir():
        raise SpecError(f"{path}: no such {what} file")
    try:
        text = read_text_file(path, f"{what} file")
    except FileFormatError as exc:
        raise SpecError(str(exc)) from None
    try:
        spec = tomllib.loads(text)
    except tomllib.TOMLDecodeError as exc:
        raise SpecError(f"{path}: not valid TOML ({exc})") from None
    spec["_path"], spec["_text"] = path, text
    return spec


def relative_to(spec_path, value) -> Path:
    """A path written in a spec file: absolute, or relative to the spec's folder."""
    path = Path(value)
    return path if path.is_absolute() else Path(spec_path).parent / path


def spec_files(spec: dict) -> list[Path]:
    """The CSV files a parsed design spec names (measured primaries and a measured backlight)."""
    tables = spec.get("primary") if isinstance(spec.get("primary"), list) else []
    backlight = spec.get("backlight") if isinstance(spec.get("backlight"), dict) else {}
    files = []
    for table in [*tables, backlight]:
        if isinstance(table, dict) and isinstance(table.get("file"), str) and table["file"]:
            files.append(relative_to(spec["_path"], table["file"]))
    return files


def design_spec_inputs(path) -> list[Path]:
    """A design spec file and the files it names (the spec is read and parsed, nothing built)."""
    spec = read_toml(path)
    files = spec_files(spec)
    for file in files:
        if not file.is_file():
            raise SpecError(f"{path}: file {file}: {'is a folder' if file.is_dir() else 'no such file'}")
    return [Path(path), *files]


def stimulus_files(text) -> list[Path]:
    """The CSV files of a ``--stimuli`` list (tokens ending in .csv)."""
    tokens = [t.strip() for t in str(text or "").split(",")]
    return [Path(t) for t in tokens if t.lower().endswith(".csv")]


def check_inputs(paths) -> None:
    """Every input must be an existing, readable file: one line naming the first that is not."""
    for path in paths:
        path = Path(path)
        if not path.exists():
            raise FileFormatError(f"{path}: no such file")
        if path.is_dir():
            raise FileFormatError(f"{path}: is a folder; give a file")


def _sweep_inputs(args) -> list[Path]:
    spec = read_toml(args.spec, f"{args.command} spec")
    inputs = [Path(args.spec)]
    for key in ("base", "reference"):
        value = spec.get(key)
        if key == "reference" and (args.reference is not None or value in SURFACE_NAMES):
            continue
        if isinstance(value, str) and value:
            path = relative_to(args.spec, value)
            inputs += design_spec_inputs(path) if path.is_file() else [path]
    if args.stimuli is None and isinstance(spec.get("stimuli"), str):
        inputs += stimulus_files(spec["stimuli"])
    return inputs


def command_files(args) -> tuple[list[Path], list[Path]]:
    """(inputs, outputs) of a parsed ``metasim`` command line; outputs whose names need the result
    (report figures) are checked by the command itself before it computes."""
    command = args.command
    inputs, outputs = [], []
    if command in ("evaluate", "compare"):
        specs = [args.design] if command == "evaluate" else [args.first, args.second]
        if args.reference not in (None, *SURFACE_NAMES):
            specs.append(args.reference)
        check_inputs(specs)
        for spec in specs:
            inputs += design_spec_inputs(spec)
    elif command in ("sweep", "search"):
        check_inputs([args.spec])
        inputs += _sweep_inputs(args)
        if args.reference not in (None, *SURFACE_NAMES):
            check_inputs([args.reference])
            inputs += design_spec_inputs(args.reference)
    elif command == "report":
        inputs.append(Path(args.result))
    elif command == "tables":
        inputs.append(_table_source(args.result))
    elif command == "estimate":
        inputs.append(Path(args.data))
        for option in (args.references, args.categories, args.display,
                       args.primaries if args.primaries and Path(args.primaries).suffix.lower() == ".csv" else None):
            if option:
                check_inputs([option])
                inputs += design_spec_inputs(option) if Path(option).suffix.lower() == ".toml" else [Path(option)]
    if command in ("evaluate", "compare", "sweep", "search"):
        inputs += stimulus_files(args.stimuli)
        if args.observers:
            inputs.append(Path(args.observers))
    check_inputs(inputs)
    if command == "demo" and getattr(args, "files", None):  # the example files, copied out for editing
        folder = Path(args.files)
        if folder.exists() and not folder.is_dir():
            raise FileFormatError(f"--files {folder}: is a file; give a folder for the example specs")
        inputs += example_files()
        outputs += [folder / path.name for path in example_files()]
    elif command in ("demo", "evaluate", "compare"):
        out = Path(args.out)
        if out.exists() and not out.is_dir():
            raise FileFormatError(f"--out {out}: is a file; give a folder for the result, report and figures")
        outputs.append(out / RESULT_FILE)
        if not getattr(args, "no_report", False):
            outputs.append(out / REPORT_FILE)
    elif command == "observers":
        outputs += [Path(args.out), *([Path(args.report)] if args.report else [])]
    elif command == "estimate":
        out = Path(args.out)
        if out.exists() and not out.is_dir():
            raise FileFormatError(f"--out {out}: is a file; give a folder for the fit and its report")
        outputs += [out / FIT_FILE, *([] if args.no_report else [out / REPORT_FILE])]
    elif command == "report":
        outputs.append(Path(args.out) if args.out else Path(args.result).with_suffix(".html"))
    elif command == "tables" and args.xlsx:  # the CSV names follow the file's tables: checked by the command
        outputs.append(Path(args.xlsx))
    return inputs, outputs


def example_files() -> list[Path]:
    """The demo's example files a user may copy out and edit (``metasim demo --files DIR``): the design,
    sweep and search specs, their data files and README.md, which describes every spec format."""
    from metasim._paths import data_dir

    folder = data_dir() / "demo"
    return sorted(p for p in folder.iterdir() if p.is_file() and p.suffix.lower() in (".toml", ".csv", ".md"))


def _table_source(result) -> Path:
    """The file ``metasim tables`` reads: the result file, or ``sweep.nc`` of a sweep store folder."""
    path = Path(result)
    if path.is_dir():
        if not (path / "sweep.nc").is_file():
            raise FileFormatError(f"{path}: is a folder without sweep.nc; give a result file (.nc) or a finished "
                                  "sweep store")
        return path / "sweep.nc"
    return path


def check_command_files(args) -> None:
    """Check a command's inputs and outputs before any computing (see the module docstring).

    Stores ``args.inputs`` and ``args.outputs`` for the command. A sweep's store is checked by the
    sweep itself (its files are replaced when the same sweep resumes; see :mod:`metasim.sweep.store`).
    """
    inputs, outputs = command_files(args)
    args.inputs, args.outputs = inputs, outputs
    if args.command in STORE_FILES:
        store = Path(args.out)
        if store.exists() and not store.is_dir():
            raise FileFormatError(f"--out {store}: is a file; the {args.command} store must be a folder")
        check_outputs([store / name for name in STORE_FILES[args.command]], inputs=inputs, replace=True)
        return
    check_outputs(outputs, inputs=inputs, replace=args.replace)


__all__ = ["SpecError", "parse_range", "range_text", "RESULT_FILE", "FIT_FILE", "REPORT_FILE", "FIGURES_DIR",
           "STORE_FILES", "read_toml", "relative_to", "spec_files", "design_spec_inputs", "stimulus_files", "check_inputs",
           "command_files", "check_command_files", "example_files"]
