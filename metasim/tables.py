"""The summary tables of any result file, as tidy tables for spreadsheets (CSV files or one workbook).

Part of the report layer (it reads the result layout only); a module of its own, outside
:mod:`metasim.report`, so that ``metasim tables`` does not load the plotting stack.

:func:`result_tables` turns a result Dataset — a study, a plain mismatch result, a sweep
(``STORE/sweep.nc``), an observer population, or any other metasim result — into named tidy tables:

* **which variables**: every variable that is a summary, i.e. has no ``wavelength`` dim (spectra,
  colour-matching functions), no ``vertex`` dim (gamut polygons) and is not a raw per observer ×
  stimulus array (``delta_e_2000``, ``xyz_test``, ...: those hold the population itself; ask with
  ``pairs=True``);
* **one table per set of dims**: variables over the same dims share a table, one column each; the
  table's key is the variable's name when it holds one (``delta_e_2000_overall``), else ``per_`` and
  its dims (``per_display``, ``per_design_statistic_stimulus``); 0-d variables form ``result``;
* **tidy long format**: one row per combination of the dims, one column per dim holding its labels,
  then the coordinates along those dims (an observer's age and deviations, a sweep design's
  parameters), then the values;
* a dim whose coordinates appear in no table gets its own table (the observers of a population file);
* ``attributes`` lists the file's attributes (model, seed, version and every parameter recorded).

Column headers are the stable keys (variable and coordinate names), followed by the units in
brackets when there are any: ``delta_e_2000_overall [1]``, ``age_years [year]``. The ``contents``
table (:func:`contents_table`) gives every column of every table its long name, units and row count.

:func:`write_csv_tables` writes one CSV file per table (UTF-8, comma separated, numbers as Python
writes them, so they read back exactly; empty cell = NaN; booleans as 1 / 0). :func:`write_workbook`
writes one ``.xlsx`` workbook with a sheet per table through the optional package openpyxl
(``pip install "metasim[spreadsheet]"``), imported only then. Both write through
:func:`metasim.io.atomic_output`.
"""

from __future__ import annotations

import csv
import io
import json
import math
import os
import re
from dataclasses import dataclass, field
from pathlib import Path

import numpy as np
import xarray as xr

from metasim.errors import FileFormatError, OutputError, ReportError
from metasim.io import atomic_output, check_outputs, read_text_file, write_text

#: Dims whose variables are not summaries (spectra, functions of wavelength, polygon vertices).
SKIPPED_DIMS = ("wavelength", "vertex")
#: A variable over both of these is the raw result for every observer and stimulus.
PAIR_DIMS = ("observer", "stimulus")
#: Rows a worksheet can hold under its header (Office Open XML limit).
WORKSHEET_ROWS = 1_048_575
_RESERVED = ("contents", "attributes", "result")


@dataclass(frozen=True)
class Column:
    """One column: a stable ``key`` (variable, coordinate or dim name), its units and long name,
    and its values (one-dimensional: float, int, or str)."""

    key: str
    values: np.ndarray
    units: str = ""
    long_name: str = ""
    role: str = "value"  # "dim" (labels), "coordinate" or "value"

    @property
    def header(self) -> str:
        return f"{self.key} [{self.units}]" if self.units else self.key


@dataclass
class Table:
    """A named tidy table: ``key`` (file and sheet name), ``title`` and ``columns`` of equal length."""

    key: str
    title: str
    columns: list[Column] = field(default_factory=list)

    @property
    def rows(self) -> int:
        return len(self.columns[0].values) if self.columns else 0

    @property
    def headers(self) -> list[str]:
        return [c.header for c in self.columns]

    def column(self, key: str) -> Column:
        for c in self.columns:
            if c.key == key:
                return c
        raise KeyError(f"table {self.key!r} has no column {key!r}; it has {[c.key for c in self.columns]}")


def _units(attrs, values=None, role: str = "value") -> str:
    """The units for a header; none for text, and none for dimensionless labels ("1" on a dim)."""
    units = str(attrs.get("units", "") or "").strip()
    if values is not None and np.asarray(values).dtype.kind in "OUS":
        return ""
    return "" if role == "dim" and units == "1" else units


def _plain_values(values: np.ndarray) -> np.ndarray:
    """Values a cell can hold: floats, ints (booleans as 1 / 0) or strings."""
    values = np.asarray(values)
    kind = values.dtype.kind
    if kind == "b":
        return values.astype(np.int64)
    if kind in "iu":
        return values.astype(np.int64)
    if kind == "f":
        return values.astype(float)
    if kind == "M":
        return np.asarray([str(np.datetime_as_string(v)) for v in values.ravel()], dtype=object).reshape(values.shape)
    return np.asarray([str(v) for v in values.ravel()], dtype=object).reshape(values.shape)


def _is_summary(variable: xr.DataArray, pairs: bool) -> bool:
    dims = set(variable.dims)
    if dims & set(SKIPPED_DIMS):
        return False
    return pairs or not set(PAIR_DIMS) <= dims


def _dim_labels(ds: xr.Dataset, dim: str) -> tuple[np.ndarray, str, str]:
    if dim in ds.coords:
        coord = ds.coords[dim]
        values = _plain_values(coord.values)
        return values, _units(coord.attrs, values, "dim"), str(coord.attrs.get("long_name", dim))
    return np.arange(ds.sizes[dim], dtype=np.int64), "", f"position along {dim}"


def _grid_columns(ds: xr.Dataset, dims: tuple[str, ...], with_coordinates: bool = True) -> tuple[list[Column], set]:
    """The dim and coordinate columns of a table over ``dims`` (every combination, first dim slowest)."""
    sizes = [ds.sizes[d] for d in dims]
    index = np.indices(sizes).reshape(len(dims), -1) if dims else np.zeros((0, 1), dtype=int)
    columns, used = [], set()
    for i, dim in enumerate(dims):
        labels, units, long_name = _dim_labels(ds, dim)
        columns.append(Column(dim, labels[index[i]], units, long_name, "dim"))
    if not with_coordinates:
        return columns, used
    for name, coord in ds.coords.items():
        name = str(name)
        if name in dims or not coord.dims or not set(coord.dims) <= set(dims):
            continue
        if set(coord.dims) & set(SKIPPED_DIMS):
            continue
        values = _plain_values(coord.transpose(*[d for d in dims if d in coord.dims]).values)
        flat = values[tuple(index[dims.index(d)] for d in dims if d in coord.dims)]
        columns.append(Column(name, flat, _units(coord.attrs, flat), str(coord.attrs.get("long_name", name)),
                              "coordinate"))
        used.add(name)
    return columns, used


def _table_key(names: list[str], dims: tuple[str, ...], taken: set) -> str:
    key = names[0] if len(names) == 1 else ("per_" + "_".join(dims) if dims else "result")
    if key in taken or (key in _RESERVED and key != "result"):
        key = f"{key}_table"
    while key in taken:
        key += "_"
    return key


def result_tables(ds, *, pairs: bool = False, attributes: bool = True) -> list[Table]:
    """The summary tables of a result Dataset (see the module docstring), in the file's order.

    Parameters
    ----------
    ds : Dataset
        Any metasim result (study, mismatch, sweep, observer population, ...).
    pairs : bool
        Also tabulate the raw per observer × stimulus arrays (large: observers × stimuli rows).
    attributes : bool
        Add the ``attributes`` table of the file's attributes.

    Returns
    -------
    list of Table
        One table per group of variables sharing dims (module docstring).

    Examples
    --------
    >>> import metasim
    >>> tables = metasim.result_tables(metasim.observer_population(5, seed=1))
    >>> [table.key for table in tables]
    ['observer', 'attributes']
    """
    if isinstance(ds, xr.DataArray):
        ds = ds.to_dataset(name=str(ds.name or "values"))
    if not isinstance(ds, xr.Dataset):
        raise ReportError(f"result_tables needs a result Dataset, got {type(ds).__name__}")
    groups: dict[frozenset, list[str]] = {}
    order: dict[frozenset, tuple[str, ...]] = {}
    for name, variable in ds.data_vars.items():
        if not _is_summary(variable, pairs):
            continue
        key = frozenset(variable.dims)
        groups.setdefault(key, []).append(str(name))
        order.setdefault(key, tuple(map(str, variable.dims)))
    tables, taken, covered = [], set(), set()
    for key, names in groups.items():
        dims = order[key]
        columns, used = _grid_columns(ds, dims)
        covered |= used
        for name in names:
            variable = ds[name].transpose(*dims)
            values = _plain_values(variable.values).reshape(-1)
            columns.append(Column(name, values, _units(variable.attrs, values), str(variable.attrs.get("long_name", name))))
        table_key = _table_key(names, dims, taken)
        taken.add(table_key)
        title = (str(ds[names[0]].attrs.get("long_name", names[0])) if len(names) == 1
                 else f"per {', '.join(dims) if dims else 'result'}: {', '.join(names)}")
        tables.append(Table(table_key, title, columns))
    for dim in map(str, ds.dims):  # coordinates no table shows yet: a table of the dim itself
        if dim in SKIPPED_DIMS:
            continue
        own = [str(n) for n, c in ds.coords.items() if c.dims == (dim,) and n != dim and str(n) not in covered]
        if not own:
            continue
        columns, used = _grid_columns(ds, (dim,))
        covered |= used
        key = _table_key([dim], (dim,), taken)
        taken.add(key)
        tables.append(Table(key, f"{dim}: {', '.join(own)}", columns))
    if attributes and ds.attrs:
        tables.append(attributes_table(ds.attrs))
    if not tables:
        raise ReportError("the file holds no summary values to tabulate (only spectra, polygons or per observer x "
                          "stimulus arrays; pairs=True tabulates the latter)")
    return tables


def attributes_table(attrs: dict) -> Table:
    """The file's attributes as a two-column table (``attribute``, ``value``; non-text values as JSON).

    Parameters
    ----------
    attrs : dict
        A result's ``attrs`` (model, seed, version, parameter records, ...).

    Returns
    -------
    Table
        Key ``attributes``, one row per attribute in the given order: strings and numbers as text,
        booleans, None, lists, records and arrays as JSON.

    Examples
    --------
    >>> table = attributes_table({"seed": 7, "model": "demo audience", "ages": [20, 40], "weighted": True})
    >>> table.key, table.headers
    ('attributes', ['attribute', 'value'])
    >>> list(table.column("value").values)
    ['7', 'demo audience', '[20, 40]', 'true']
    """
    keys, values = [], []
    for key, value in attrs.items():
        keys.append(str(key))
        if isinstance(value, (str, int, float, np.integer, np.floating)) and not isinstance(value, bool):
            values.append(str(value))
        else:
            values.append(json.dumps(value.tolist() if isinstance(value, np.ndarray) else value, default=str))
    return Table("attributes", "attributes of the result file (model, parameters, seed, version)", [
        Column("attribute", np.asarray(keys, dtype=object), "", "attribute name", "dim"),
        Column("value", np.asarray(values, dtype=object), "", "attribute value (JSON for lists and records)")])


def contents_table(tables: list[Table]) -> Table:
    """One row per column of every table: ``table``, ``column`` (header), ``key``, ``long_name``,
    ``units``, ``rows``, ``table_title``.

    Parameters
    ----------
    tables : list of Table
        From :func:`result_tables`.

    Returns
    -------
    Table
        Key ``contents``; ``rows`` holds each table's row count (int), the other columns text.

    Examples
    --------
    >>> import xarray as xr
    >>> result = xr.Dataset({"p95": ("display", [0.8, 1.4], {"units": "1", "long_name": "95th percentile"})},
    ...                     coords={"display": ["lamp", "laser"]})
    >>> contents = contents_table(result_tables(result, attributes=False))
    >>> list(contents.column("column").values), list(contents.column("rows").values)
    (['display', 'p95 [1]'], [2, 2])
    """
    rows = [(t.key, c.header, c.key, c.long_name, c.units, t.rows, t.title) for t in tables for c in t.columns]
    names = ("table", "column", "key", "long_name", "units", "rows", "table_title")
    columns = []
    for i, name in enumerate(names):
        values = [r[i] for r in rows]
        columns.append(Column(name, np.asarray(values, dtype=np.int64 if name == "rows" else object), "",
                              name.replace("_", " "), "dim" if name in ("table", "column") else "value"))
    return Table("contents", "the tables, their columns, long names and units", columns)


# -- writing -----------------------------------------------------------------------------------------

def _cell_text(value) -> str:
    if isinstance(value, (float, np.floating)):
        return "" if math.isnan(value) else repr(float(value))
    if isinstance(value, (int, np.integer)):
        return str(int(value))
    return str(value)


def table_csv(table: Table) -> str:
    """The CSV text of a table: the header row, then one row per entry.

    Floats are written as Python's ``repr`` (so they read back exactly), NaN as an empty cell,
    integers (and booleans, stored as 1 / 0) as integers.

    Parameters
    ----------
    table : Table
        A table from :func:`result_tables`, :func:`attributes_table` or :func:`contents_table`.

    Returns
    -------
    str
        Comma-separated text, ``\\n`` line ends.

    References
    ----------
    RFC 4180 (CSV format; quoting of cells holding commas or quotes).

    Examples
    --------
    >>> import xarray as xr
    >>> result = xr.Dataset({"p95": ("display", [0.8, float("nan")], {"units": "1"})},
    ...                     coords={"display": ["lamp", "laser"]})
    >>> print(table_csv(result_tables(result, attributes=False)[0]), end="")
    display,p95 [1]
    lamp,0.8
    laser,
    """
    buffer = io.StringIO()
    writer = csv.writer(buffer, lineterminator="\n")
    writer.writerow(table.headers)
    for row in zip(*(c.values for c in table.columns)):
        writer.writerow([_cell_text(v) for v in row])
    return buffer.getvalue()


def csv_paths(tables: list[Table], folder, *, contents: bool = True) -> list[Path]:
    """The files :func:`write_csv_tables` writes for these tables.

    Parameters
    ----------
    tables : list of Table
        From :func:`result_tables`.
    folder : path-like
        The folder the files go in (nothing is created).
    contents : bool
        Include ``contents.csv`` first (default True).

    Returns
    -------
    list of Path
        ``folder/KEY.csv`` per table, the key made safe as a file name (characters other than
        letters, digits, ``_``, ``.`` and ``-`` become ``_``).

    Examples
    --------
    >>> import xarray as xr
    >>> result = xr.Dataset({"p95": ("display", [0.8, 1.4])}, attrs={"seed": 7})
    >>> [path.as_posix() for path in csv_paths(result_tables(result), "tables")]
    ['tables/contents.csv', 'tables/p95.csv', 'tables/attributes.csv']
    """
    keys = (["contents"] if contents else []) + [t.key for t in tables]
    return [Path(folder) / f"{_file_key(k)}.csv" for k in keys]


def _file_key(key: str) -> str:
    return re.sub(r"[^A-Za-z0-9_.-]+", "_", key).strip("._") or "table"


def write_csv_tables(tables: list[Table], folder, *, contents: bool = True, replace: bool = False,
                     inputs=()) -> list[Path]:
    """One CSV file per table in ``folder`` (created), plus ``contents.csv``; returns the paths.

    Existing files are refused unless ``replace`` (nothing is written then), as is a file that is one
    of ``inputs``.

    Parameters
    ----------
    tables : list of Table
        From :func:`result_tables`.
    folder : path-like
        The folder to write into (created).
    contents : bool
        Also write ``contents.csv`` (default True).
    replace : bool
        Replace existing files (default False).
    inputs : sequence of path-like
        Files that must not be overwritten.

    Returns
    -------
    list of Path
        The files written.

    Raises
    ------
    OutputExistsError
        A file exists and ``replace`` is False, or is one of ``inputs``.

    Examples
    --------
    >>> import metasim
    >>> import pathlib, tempfile
    >>> tables = metasim.result_tables(metasim.observer_population(5, seed=1))
    >>> folder = tempfile.TemporaryDirectory()
    >>> paths = metasim.write_csv_tables(tables, pathlib.Path(folder.name) / "tables")
    >>> sorted(path.name for path in paths)
    ['attributes.csv', 'contents.csv', 'observer.csv']
    >>> folder.cleanup()
    """
    folder = Path(folder)
    if folder.exists() and not folder.is_dir():
        raise OutputError(f"{folder}: is a file; give a folder for the CSV tables")
    all_tables = ([contents_table(tables)] if contents else []) + list(tables)
    paths = csv_paths(tables, folder, contents=contents)
    check_outputs(paths, inputs=inputs, replace=replace)
    folder.mkdir(parents=True, exist_ok=True)
    return [write_text(path, table_csv(table), replace=replace) for path, table in zip(paths, all_tables)]


def _sheet_names(tables: list[Table]) -> list[str]:
    names, taken = [], set()
    for table in tables:
        base = re.sub(r"[\[\]:*?/\\]", "_", table.key)[:31] or "table"
        name, i = base, 2
        while name.lower() in taken:
            suffix = f"~{i}"
            name, i = base[:31 - len(suffix)] + suffix, i + 1
        taken.add(name.lower())
        names.append(name)
    return names


def require_workbook_writer(path=None) -> None:
    """Raise the clear error now, before anything is written: ``path`` does not end in .xlsx, or
    openpyxl is not installed.

    Parameters
    ----------
    path : path-like, optional
        The workbook file to be written; None checks only for openpyxl.

    Returns
    -------
    None
        Returns only when a workbook can be written.

    Raises
    ------
    OutputError
        ``path`` does not end in ``.xlsx``.
    ReportError
        openpyxl (the ``spreadsheet`` extra) is not installed.

    References
    ----------
    ISO/IEC 29500-1:2016 (Office Open XML, the ``.xlsx`` workbook format).

    Examples
    --------
    >>> require_workbook_writer("audience.csv")
    Traceback (most recent call last):
        ...
    metasim.errors.OutputError: audience.csv: give a workbook file name ending in .xlsx
    """
    if path is not None and Path(path).suffix.lower() != ".xlsx":
        raise OutputError(f"{path}: give a workbook file name ending in .xlsx")
    _openpyxl()


def _openpyxl():
    try:
        import openpyxl
    except ImportError:
        raise ReportError("writing an .xlsx workbook needs the optional package openpyxl: "
                          "pip install \"metasim[spreadsheet]\" (or pip install openpyxl); the CSV tables need "
                          "nothing extra") from None
    return openpyxl


def _cell(value):
    if isinstance(value, (float, np.floating)):
        return None if math.isnan(value) else float(value)
    if isinstance(value, (int, np.integer)):
        return int(value)
    return str(value)


def write_workbook(tables: list[Table], path, *, contents: bool = True, replace: bool = False, inputs=()) -> Path:
    """One ``.xlsx`` workbook: a ``contents`` sheet, then a sheet per table (header row frozen).

    Needs openpyxl (the ``spreadsheet`` extra); an existing file is refused unless ``replace``.

    Parameters
    ----------
    tables : list of Table
        From :func:`result_tables`.
    path : path-like
        The ``.xlsx`` file.
    contents : bool
        Also write the ``contents`` sheet (default True).
    replace : bool
        Replace an existing file (default False).
    inputs : sequence of path-like
        Files that must not be overwritten.

    Returns
    -------
    Path
        The workbook file.

    Raises
    ------
    ReportError
        openpyxl is not installed.
    OutputError
        A file name not ending in ``.xlsx``.

    Examples
    --------
    >>> import metasim
    >>> import pathlib, tempfile
    >>> tables = metasim.result_tables(metasim.observer_population(5, seed=1))
    >>> folder = tempfile.TemporaryDirectory()
    >>> metasim.write_workbook(tables, pathlib.Path(folder.name) / "audience.xlsx").suffix
    '.xlsx'
    >>> folder.cleanup()
    """
    path = Path(path)
    require_workbook_writer(path)
    all_tables = ([contents_table(tables)] if contents else []) + list(tables)
    for table in all_tables:
        if table.rows > WORKSHEET_ROWS:
            raise FileFormatError(f"table {table.key!r} has {table.rows:,} rows; a worksheet holds at most "
                                  f"{WORKSHEET_ROWS:,}; use the CSV tables instead")
    check_outputs([path], inputs=inputs, replace=replace)
    openpyxl = _openpyxl()
    book = openpyxl.Workbook(write_only=True)
    for name, table in zip(_sheet_names(all_tables), all_tables):
        sheet = book.create_sheet(title=name)
        sheet.freeze_panes = "A2"
        sheet.append(table.headers)
        for row in zip(*(c.values for c in table.columns)):
            sheet.append([_cell(v) for v in row])
    with atomic_output(path, replace=replace) as tmp:
        with open(tmp, "wb") as handle:
            book.save(handle)
    return path


def read_csv_table(path: str | os.PathLike) -> tuple[list[str], list[list[str]]]:
    """The header and rows of a CSV table written by :func:`write_csv_tables` (as text).

    Parameters
    ----------
    path : path-like
        A CSV file (UTF-8).

    Returns
    -------
    header : list of str
        The first row (the column headers, units in brackets).
    rows : list of list of str
        Every other row, cells as text (an empty cell is a NaN).

    Raises
    ------
    FileFormatError
        The file is missing, not UTF-8 text (:func:`metasim.io.read_text_file`) or empty.

    Examples
    --------
    >>> import pathlib, tempfile
    >>> import xarray as xr
    >>> result = xr.Dataset({"p95": ("display", [0.8, 1.4], {"units": "1"})}, coords={"display": ["lamp", "laser"]})
    >>> with tempfile.TemporaryDirectory() as folder:
    ...     paths = write_csv_tables(result_tables(result, attributes=False), pathlib.Path(folder), contents=False)
    ...     read_csv_table(paths[0])
    (['display', 'p95 [1]'], [['lamp', '0.8'], ['laser', '1.4']])
    """
    records = list(csv.reader(io.StringIO(read_text_file(path, "CSV table"), newline="")))
    if not records:
        raise FileFormatError(f"{path}: empty; expected a header row")
    return records[0], records[1:]


__all__ = ["Column", "Table", "SKIPPED_DIMS", "PAIR_DIMS", "WORKSHEET_ROWS", "result_tables", "attributes_table",
           "contents_table", "table_csv", "csv_paths", "write_csv_tables", "write_workbook", "require_workbook_writer",
           "read_csv_table"]
