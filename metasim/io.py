"""Files: safe writing of every output, and lossless netCDF4 save/load of metasim Datasets.

Writing outputs (every file metasim writes goes through these)
-------------------------------------------------------------
* :func:`check_outputs` — call it once, before computing anything, with every file the job will
  write and every file it reads. It refuses an output that is one of the inputs (or two outputs
  that are one file), refuses an output that exists unless ``replace=True``, and removes temporary
  files that an earlier, killed run left beside those outputs. It raises
  :class:`~metasim.errors.OutputIsInputError` / :class:`~metasim.errors.OutputExistsError`.
* :func:`atomic_output` — a context manager that yields a temporary path ``NAME.<pid>.partial``
  beside ``NAME``; write the file there, and when the block ends normally it is renamed onto
  ``NAME`` in one step (on error, or if the process dies, no file appears under ``NAME``; a killed
  run's ``*.partial`` is removed by the next :func:`check_outputs` of the same output).
  :func:`write_bytes` and :func:`write_text` are the one-call forms; :func:`save_dataset` uses it.

Typical command::

    outputs = [out / "result.nc", out / "table.csv"]
    check_outputs(outputs, inputs=[spec_path, observers_path], replace=replace)   # before computing
    ...                                                                             # compute
    save_dataset(result, out / "result.nc")
    write_text(out / "table.csv", text)

The helpers import only the standard library (numpy and xarray are imported by the netCDF
functions when called), so a command can check its paths before loading the heavy modules.

netCDF
------
netCDF attributes hold only strings, numbers and numeric vectors. Anything else a metasim result may
carry in its attributes (booleans, None, dicts, lists of strings, nested parameter records) is stored
as a JSON string, and the names of those attributes are listed in the attribute
``metasim_json_attrs`` of the same variable, so :func:`load_dataset` restores them exactly.
"""

from __future__ import annotations

import contextlib
import csv
import glob
import io
import json
import os
from pathlib import Path
from typing import TYPE_CHECKING, Iterable, Iterator

from metasim.errors import FileFormatError, OutputError, OutputExistsError, OutputIsInputError

if TYPE_CHECKING:  # annotations only; xarray is imported where it is used
    import xarray as xr

_JSON_LIST = "metasim_json_attrs"
_DATAARRAY_FLAG = "metasim_dataarray_name"


PARTIAL_SUFFIX = ".partial"


# -- writing outputs safely -----------------------------------------------------------------------

def partial_path(path: str | os.PathLike) -> Path:
    """The temporary name ``NAME.<pid>.partial`` an output is written under before its rename.

    Parameters
    ----------
    path : path-like
        The output file (``NAME``).

    Returns
    -------
    Path
        ``NAME.<pid>.partial`` in the same folder, ``<pid>`` this process's id (nothing is created).

    Examples
    --------
    >>> import os
    >>> partial_path("out/report.html").name == f"report.html.{os.getpid()}.partial"
    True
    """
    path = Path(path)
    return path.with_name(f"{path.name}.{os.getpid()}{PARTIAL_SUFFIX}")


def process_alive(pid: int) -> bool:
    """Whether a process with this id runs on this machine (True when that cannot be told).

    Parameters
    ----------
    pid : int
        A process id, as written in a ``NAME.<pid>.partial`` file name.

    Returns
    -------
    bool
        True for this process and for any process that exists (also one of another user, which
        cannot be signalled); False for ids <= 0 and ids no process holds.

    Examples
    --------
    >>> import os
    >>> process_alive(os.getpid()), process_alive(0)
    (True, False)
    """
    if pid == os.getpid():
        return True
    if pid <= 0:
        return False
    try:
        os.kill(pid, 0)
    except ProcessLookupError:
        return False
    except OSError:  # e.g. PermissionError: it exists but belongs to someone else
        return True
    return True


def remove_stale_partials(path: str | os.PathLike) -> list[Path]:
    """Remove ``NAME.<pid>.partial`` files of the output ``path`` whose process is gone.

    Returns the files removed. Temporary files of running processes are left alone.

    Parameters
    ----------
    path : path-like
        The output file (``NAME``) whose temporary files are looked for in its folder.

    Returns
    -------
    list of Path
        The temporary files removed: those whose ``<pid>`` no longer runs (:func:`process_alive`),
        and a ``NAME.partial`` without a process id. Empty when the folder does not exist.

    Examples
    --------
    >>> import os, pathlib, tempfile
    >>> with tempfile.TemporaryDirectory() as folder:
    ...     out = pathlib.Path(folder) / "result.nc"
    ...     _ = pathlib.Path(folder, "result.nc.partial").write_text("left by a killed run")
    ...     _ = partial_path(out).write_text("this process is still writing it")
    ...     print([p.name for p in remove_stale_partials(out)], partial_path(out).exists())
    ['result.nc.partial'] True
    """
    path = Path(path)
    if not path.parent.is_dir():
        return []
    removed = []
    for text in glob.glob(glob.escape(str(path)) + ".*" + PARTIAL_SUFFIX) + [str(path) + PARTIAL_SUFFIX]:
        candidate = Path(text)
        middle = candidate.name[len(path.name) + 1:-len(PARTIAL_SUFFIX)]
        stale = candidate.name == path.name + PARTIAL_SUFFIX or (middle.isdigit() and not process_alive(int(middle)))
        if stale and candidate.is_file():
            with contextlib.suppress(FileNotFoundError):
                candidate.unlink()
                removed.append(candidate)
    return removed


def same_file(a: str | os.PathLike, b: str | os.PathLike) -> bool:
    """Whether two paths name one file (through links, ``..`` or a relative path).

    Parameters
    ----------
    a, b : path-like
        The two paths; they need not exist.

    Returns
    -------
    bool
        For two existing files, whether they are one file (:func:`os.path.samefile`, so hard links
        count); otherwise whether the resolved paths are equal (case-folded where the system folds).

    Examples
    --------
    >>> import pathlib, tempfile
    >>> with tempfile.TemporaryDirectory() as folder:
    ...     spec = pathlib.Path(folder) / "spec.toml"
    ...     print(same_file(spec, pathlib.Path(folder) / "sub" / ".." / "spec.toml"),
    ...           same_file(spec, pathlib.Path(folder) / "spec.csv"))
    True False
    """
    a, b = Path(a), Path(b)
    with contextlib.suppress(OSError):
        if a.exists() and b.exists():
            return os.path.samefile(a, b)
    return os.path.normcase(os.path.realpath(a)) == os.path.normcase(os.path.realpath(b))


def check_outputs(outputs: Iterable, *, inputs: Iterable = (), replace: bool = False) -> list[Path]:
    """Check the files a job will write before it computes anything; returns them as paths.

    Refuses, writing nothing and leaving every complete file as it is:

    * an output that is one of ``inputs``, or two outputs that name one file
      (:class:`~metasim.errors.OutputIsInputError`);
    * an output that is a folder (:class:`~metasim.errors.OutputError`);
    * an output that exists, unless ``replace`` (:class:`~metasim.errors.OutputExistsError`).

    The temporary ``*.partial`` files an earlier, killed run left for these outputs are removed
    (:func:`remove_stale_partials`) before the last check. ``None`` entries are skipped.

    Parameters
    ----------
    outputs : iterable of path-like or None
        Every file the job will write.
    inputs : iterable of path-like or None
        Every file the job reads.
    replace : bool
        Allow outputs that exist already (they are replaced when written; default False).

    Returns
    -------
    list of Path
        The outputs, ``None`` entries dropped, in the order given.

    Raises
    ------
    OutputIsInputError
        An output is also an input, or two outputs name one file.
    OutputError
        An output is a folder.
    OutputExistsError
        An output exists and ``replace`` is False.

    Examples
    --------
    >>> import pathlib, tempfile
    >>> folder = tempfile.TemporaryDirectory()
    >>> spec = pathlib.Path(folder.name) / "spec.toml"
    >>> _ = spec.write_text("")
    >>> [p.name for p in check_outputs([spec.with_name("result.nc"), None], inputs=[spec])]
    ['result.nc']
    >>> check_outputs([spec], inputs=[spec])
    Traceback (most recent call last):
        ...
    metasim.errors.OutputIsInputError: .../spec.toml: is an output and also an input; nothing was written; give the output another name
    >>> folder.cleanup()
    """
    outs = [Path(o) for o in outputs if o is not None]
    ins = [Path(i) for i in inputs if i is not None]
    for i, out in enumerate(outs):
        for source in ins:
            if same_file(out, source):
                also = f" (as {source})" if str(source) != str(out) else ""
                raise OutputIsInputError(f"{out}: is an output and also an input{also}; nothing was written; "
                                         "give the output another name")
        for other in outs[:i]:
            if same_file(out, other):
                also = f" (also as {other})" if str(other) != str(out) else ""
                raise OutputIsInputError(f"{out}: is named for two outputs{also}; nothing was written; give each "
                                         "output its own name")
        if out.is_dir():
            raise OutputError(f"{out}: is a folder; give a file name for this output")
    for out in outs:  # temporary files of killed runs go in any case: they hold nothing complete
        remove_stale_partials(out)
    existing = [out for out in outs if out.exists() or out.is_symlink()]
    if existing and not replace:
        more = f" (and {len(existing) - 1} more)" if len(existing) > 1 else ""
        raise OutputExistsError(f"{existing[0]}: exists already{more}; nothing was written; give replace=True "
                                "to replace existing outputs")
    return outs


@contextlib.contextmanager
def atomic_output(path: str | os.PathLike, *, replace: bool = True) -> Iterator[Path]:
    """Write one output file under a temporary name and rename it into place when complete.

    ::

        with atomic_output("report.html") as tmp:
            tmp.write_text(html, encoding="utf-8")

    The block writes to ``tmp`` (``NAME.<pid>.partial`` in the same folder); when it ends normally
    the file is flushed to disk and renamed onto ``path`` in one step, so ``path`` is either the old
    file or the complete new one, never a partial one. If the block raises, the temporary file is
    removed. With ``replace=False`` an existing ``path`` is never replaced
    (:class:`~metasim.errors.OutputExistsError`, also when it appears while the block runs).

    Parameters
    ----------
    path : path-like
        The output file; its folder must exist.
    replace : bool
        Replace an existing file (default True).

    Yields
    ------
    Path
        The temporary file to write (:func:`partial_path`); it does not exist yet.

    Raises
    ------
    OutputError
        ``path`` is a folder, its folder does not exist, or the block wrote nothing.
    OutputExistsError
        ``path`` exists (or appears while the block runs) and ``replace`` is False.

    Examples
    --------
    >>> import pathlib, tempfile
    >>> with tempfile.TemporaryDirectory() as folder:
    ...     out = pathlib.Path(folder) / "notes.txt"
    ...     with atomic_output(out) as tmp:
    ...         _ = tmp.write_text("complete")
    ...         print(out.exists())  # nothing under the final name while the block runs
    ...     print(out.read_text(), sorted(p.name for p in out.parent.iterdir()))
    False
    complete ['notes.txt']
    """
    path = Path(path)
    if path.is_dir():
        raise OutputError(f"{path}: is a folder; give a file name for this output")
    if not path.parent.is_dir():
        raise OutputError(f"{path}: folder {path.parent} does not exist")
    if not replace and (path.exists() or path.is_symlink()):
        raise OutputExistsError(f"{path}: exists already; nothing was written; give replace=True to replace it")
    tmp = partial_path(path)
    try:
        yield tmp
        if not tmp.is_file():
            raise OutputError(f"{path}: nothing was written to the temporary file {tmp.name}")
        with open(tmp, "rb+") as handle:
            os.fsync(handle.fileno())
        if replace:
            os.replace(tmp, path)
        else:
            try:
                os.link(tmp, path)  # fails if path exists, atomically
            except FileExistsError:
                raise OutputExistsError(f"{path}: appeared while it was being written; nothing was replaced") from None
    finally:
        with contextlib.suppress(FileNotFoundError):
            tmp.unlink()


def write_bytes(path: str | os.PathLike, data: bytes, *, replace: bool = True) -> Path:
    """Write ``data`` to ``path`` through :func:`atomic_output`; returns the path.

    Parameters
    ----------
    path : path-like
        The output file; its folder must exist.
    data : bytes
        The whole content.
    replace : bool
        Replace an existing file (default True).

    Returns
    -------
    Path
        ``path``.

    Raises
    ------
    OutputError
        ``path`` is a folder or its folder does not exist.
    OutputExistsError
        ``path`` exists and ``replace`` is False.

    Examples
    --------
    >>> import pathlib, tempfile
    >>> with tempfile.TemporaryDirectory() as folder:
    ...     out = write_bytes(pathlib.Path(folder) / "figure.png", b"\\x89PNG")
    ...     write_bytes(out, b"", replace=False)
    Traceback (most recent call last):
        ...
    metasim.errors.OutputExistsError: .../figure.png: exists already; nothing was written; give replace=True to replace it
    """
    with atomic_output(path, replace=replace) as tmp:
        tmp.write_bytes(data)
    return Path(path)


def write_text(path: str | os.PathLike, text: str, *, replace: bool = True, encoding: str = "utf-8") -> Path:
    """Write ``text`` to ``path`` through :func:`atomic_output`; returns the path.

    Line ends are written as given (no translation).

    Parameters
    ----------
    path : path-like
        The output file; its folder must exist.
    text : str
        The whole content.
    replace : bool
        Replace an existing file (default True).
    encoding : str
        Text encoding (default UTF-8).

    Returns
    -------
    Path
        ``path``.

    Raises
    ------
    OutputError
        ``path`` is a folder or its folder does not exist.
    OutputExistsError
        ``path`` exists and ``replace`` is False.

    Examples
    --------
    >>> import pathlib, tempfile
    >>> with tempfile.TemporaryDirectory() as folder:
    ...     out = write_text(pathlib.Path(folder) / "table.csv", "band,p95\\r\\nred,0.8\\r\\n")
    ...     print(out.name, out.read_bytes())
    table.csv b'band,p95\\r\\nred,0.8\\r\\n'
    """
    with atomic_output(path, replace=replace) as tmp:
        tmp.write_text(text, encoding=encoding, newline="")
    return Path(path)


# -- reading text ---------------------------------------------------------------------------------

_WIDE_BOMS = {b"\xff\xfe\x00\x00": "UTF-32", b"\x00\x00\xfe\xff": "UTF-32", b"\xff\xfe": "UTF-16",
              b"\xfe\xff": "UTF-16"}


def read_text_file(path: str | os.PathLike, what: str = "text file") -> str:
    """The text of a UTF-8 file (a UTF-8 byte-order mark is dropped), for TOML and CSV inputs.

    Raises :class:`~metasim.errors.FileFormatError` naming the file for a missing file or folder,
    a file that cannot be read, UTF-16/UTF-32 text, bytes that are not UTF-8 (with the first bad
    byte and its position) and NUL bytes (binary data), so no reader meets undecodable input.

    Parameters
    ----------
    path : path-like
        The file to read.
    what : str
        What the file is, for the error messages ("spec file", "CSV file").

    Returns
    -------
    str
        The decoded text, without a UTF-8 byte-order mark.

    Raises
    ------
    FileFormatError
        Missing file, a folder, an unreadable file, UTF-16/UTF-32 text, bytes that are not UTF-8,
        or NUL bytes.

    References
    ----------
    The Unicode Standard, §3.9 and §23.8 (UTF-8; the byte-order mark); RFC 3629 (UTF-8).

    Examples
    --------
    >>> import pathlib, tempfile
    >>> folder = tempfile.TemporaryDirectory()
    >>> path = pathlib.Path(folder.name) / "spec.toml"
    >>> _ = path.write_bytes("\\ufeffname = 'Café display'\\n".encode("utf-8"))
    >>> read_text_file(path, "spec file")
    "name = 'Café display'\\n"
    >>> _ = path.write_bytes("name = 'Café'\\n".encode("latin-1"))
    >>> read_text_file(path, "spec file")
    Traceback (most recent call last):
        ...
    metasim.errors.FileFormatError: .../spec.toml:1: byte 0xe9 is not UTF-8 text; save the spec file as UTF-8 ...
    >>> folder.cleanup()
    """
    path = Path(path)
    if not path.exists():
        raise FileFormatError(f"{path}: no such file")
    if path.is_dir():
        raise FileFormatError(f"{path}: is a folder, not a {what}")
    try:
        data = path.read_bytes()
    except OSError as exc:
        raise FileFormatError(f"{path}: cannot be read ({exc.strerror or exc})") from None
    for bom, name in _WIDE_BOMS.items():
        if data.startswith(bom):
            raise FileFormatError(f"{path}: is {name} text; save the {what} as UTF-8")
    try:
        text = data.decode("utf-8-sig")
    except UnicodeDecodeError as exc:
        line = data[:exc.start].count(b"\n") + 1
        raise FileFormatError(f"{path}:{line}: byte 0x{data[exc.start]:02x} is not UTF-8 text; save the {what} as "
                              "UTF-8 (Latin-1 and other encodings are not read)") from None
    if "\x00" in text:
        line = text[:text.index("\x00")].count("\n") + 1
        raise FileFormatError(f"{path}:{line}: holds NUL bytes; not a {what}")
    return text


def read_csv_rows(path: str | os.PathLike, what: str = "CSV file") -> tuple[list[str], list[tuple[int, list[str]]]]:
    """The notes and rows of a UTF-8 CSV input (:func:`read_text_file`), for every CSV reader.

    Rows whose cells are all blank are skipped; a row whose first cell starts with ``#`` is a note
    (its text, ``#`` and surrounding blanks removed); every other row is returned with its line
    number, cells as written (the reader strips and checks them). Text the csv module cannot split
    is a :class:`~metasim.errors.FileFormatError` naming the file.

    Parameters
    ----------
    path : path-like
        The CSV file (UTF-8).
    what : str
        What the file is, for the error messages.

    Returns
    -------
    notes : list of str
        The text of the note rows, in file order.
    rows : list of (int, list of str)
        Line number (from 1) and cells of every other non-blank row.

    Raises
    ------
    FileFormatError
        The file cannot be read as UTF-8 text (:func:`read_text_file`) or split as CSV.

    References
    ----------
    RFC 4180 (CSV format).

    Examples
    --------
    >>> import pathlib, tempfile
    >>> with tempfile.TemporaryDirectory() as folder:
    ...     path = pathlib.Path(folder) / "spectra.csv"
    ...     _ = path.write_text("# measured 2026-11-02\\nwavelength,red\\n\\n450, 0.01\\n")
    ...     read_csv_rows(path)
    (['measured 2026-11-02'], [(2, ['wavelength', 'red']), (4, ['450', ' 0.01'])])
    """
    text = read_text_file(path, what)
    try:
        records = list(csv.reader(io.StringIO(text, newline="")))
    except csv.Error as exc:
        raise FileFormatError(f"{path}: not a readable CSV file ({exc})") from None
    notes, rows = [], []
    for line, record in enumerate(records, start=1):
        if not record or all(not cell.strip() for cell in record):
            continue
        if record[0].strip().startswith("#"):
            notes.append(",".join(record).lstrip("#").strip())
            continue
        rows.append((line, record))
    return notes, rows


# -- netCDF ---------------------------------------------------------------------------------------

def _plain(value) -> bool:
    import numpy as np

    if isinstance(value, bool) or value is None:
        return False
    if isinstance(value, (str, int, float, np.integer, np.floating)):
        return True
    if isinstance(value, np.ndarray):
        return value.ndim == 1 and value.dtype.kind in "iuf" and value.size > 0
    return False


def _to_json(value):
    import numpy as np

    if isinstance(value, np.ndarray):
        return {"__ndarray__": value.tolist(), "dtype": str(value.dtype)}
    if isinstance(value, (np.integer,)):
        return int(value)
    if isinstance(value, (np.floating,)):
        return float(value)
    if isinstance(value, np.bool_):
        return bool(value)
    if isinstance(value, tuple):
        return {"__tuple__": [_to_json(v) for v in value]}
    if isinstance(value, dict):
        return {str(k): _to_json(v) for k, v in value.items()}
    if isinstance(value, list):
        return [_to_json(v) for v in value]
    return value


def _from_json(value):
    import numpy as np

    if isinstance(value, dict):
        if "__ndarray__" in value:
            return np.asarray(value["__ndarray__"], dtype=value["dtype"])
        if "__tuple__" in value:
            return tuple(_from_json(v) for v in value["__tuple__"])
        return {k: _from_json(v) for k, v in value.items()}
    if isinstance(value, list):
        return [_from_json(v) for v in value]
    return value


def _encode_attrs(attrs: dict, where: str) -> dict:
    out, encoded = {}, []
    for key, value in attrs.items():
        if _plain(value):
            out[key] = value
        else:
            try:
                out[key] = json.dumps(_to_json(value), allow_nan=True)
            except TypeError:
                raise FileFormatError(
                    f"{where}: attribute {key!r} holds a {type(value).__name__}, which cannot be "
                    "saved; allowed: numbers, strings, booleans, None, lists, tuples, dicts, arrays"
                ) from None
            encoded.append(key)
    if encoded:
        out[_JSON_LIST] = json.dumps(encoded)
    return out


def _decode_attrs(attrs: dict, where: str) -> dict:
    import numpy as np

    attrs = dict(attrs)
    listed = attrs.pop(_JSON_LIST, "[]")
    try:
        encoded = json.loads(listed)
    except (TypeError, ValueError):
        raise FileFormatError(f"{where}: attribute {_JSON_LIST!r} = {str(listed)[:60]!r} is not a JSON list of "
                              "attribute names; the file was not written by metasim or was edited") from None
    if not isinstance(encoded, list) or not all(isinstance(k, str) for k in encoded):
        raise FileFormatError(f"{where}: attribute {_JSON_LIST!r} must be a JSON list of attribute names, got "
                              f"{str(listed)[:60]!r}")
    for key in encoded:
        if key not in attrs:
            raise FileFormatError(f"{where}: attribute {key!r} is listed in {_JSON_LIST!r} but missing")
        try:
            attrs[key] = _from_json(json.loads(attrs[key]))
        except (TypeError, ValueError, KeyError):
            raise FileFormatError(f"{where}: attribute {key!r} = {str(attrs[key])[:60]!r} is not valid JSON "
                                  "(metasim stores it as JSON); the file was edited or not written by metasim") from None
    for key, value in attrs.items():
        if isinstance(value, np.ndarray) and value.ndim == 0:
            attrs[key] = value.item()
    return attrs


#: the attribute listing which attributes a file written by :func:`save_dataset` holds as JSON
JSON_ATTRS = _JSON_LIST


def encode_attrs(attrs: dict, where: str) -> dict:
    """Attributes as :func:`save_dataset` writes them to a netCDF file (JSON for values netCDF cannot
    hold, listed in :data:`JSON_ATTRS`); ``where`` names the file or variable in errors."""
    return _encode_attrs(attrs, where)


def decode_attrs(attrs: dict, where: str) -> dict:
    """Attributes read from a file written by :func:`save_dataset`, restored exactly (the inverse of
    :func:`encode_attrs`)."""
    return _decode_attrs(attrs, where)


def save_dataset(data: xr.Dataset | xr.DataArray, path: str | os.PathLike, *, replace: bool = True,
                 before_rename=None) -> Path:
    """Save a metasim Dataset (or DataArray) to a netCDF4 file, losslessly; returns the path written.

    Written through :func:`atomic_output` (a temporary ``*.partial`` file renamed when complete).
    An existing file is replaced unless ``replace=False``
    (:class:`~metasim.errors.OutputExistsError`). ``before_rename``, if given, is called with the
    complete temporary file just before the rename (e.g. to record its checksum).

    Parameters
    ----------
    data : Dataset or DataArray
        What to save.
    path : path-like
        The netCDF4 file.
    replace : bool
        Replace an existing file (default True).
    before_rename : callable, optional
        Called with the complete temporary file before the rename.

    Returns
    -------
    Path
        The path written.

    Raises
    ------
    OutputExistsError
        The file exists and ``replace=False``.

    Examples
    --------
    >>> import metasim
    >>> import pathlib, tempfile
    >>> population = metasim.observer_population(3, seed=1)
    >>> folder = tempfile.TemporaryDirectory()
    >>> path = metasim.save_dataset(population, pathlib.Path(folder.name) / "audience.nc")
    >>> metasim.load_dataset(path).attrs["seed"]
    1
    >>> folder.cleanup()
    """
    import xarray as xr

    path = Path(path)
    if isinstance(data, xr.DataArray):
        name = data.name if data.name is not None else "values"
        ds = data.to_dataset(name=name)
        ds.attrs = {_DATAARRAY_FLAG: str(name)}
    elif isinstance(data, xr.Dataset):
        ds = data
    else:
        raise FileFormatError(f"{path}: can save an xarray Dataset or DataArray, not {type(data).__name__}")
    for name, index in ds.indexes.items():
        if getattr(index, "nlevels", 1) > 1:
            raise FileFormatError(f"{path}: coordinate {name!r} is a MultiIndex; reset_index() before saving")
    out = ds.copy()
    out.attrs = _encode_attrs(ds.attrs, str(path))
    for name in list(out.variables):
        out[name].attrs = _encode_attrs(ds[name].attrs, f"{path}:{name}")
        out[name].encoding = {"_FillValue": None}
    with atomic_output(path, replace=replace) as tmp:
        out.to_netcdf(tmp, engine="netcdf4", format="NETCDF4")
        if before_rename is not None:
            before_rename(tmp)
    return path


def load_dataset(path: str | os.PathLike) -> xr.Dataset | xr.DataArray:
    """Load a file written by :func:`save_dataset`, restoring attributes exactly.

    Returns a DataArray if a DataArray was saved, else a Dataset, fully loaded into memory.
    Raises :class:`~metasim.errors.FileFormatError` for a missing or unreadable file and for
    attributes metasim stores as JSON that do not hold JSON.

    Parameters
    ----------
    path : path-like
        A file written by :func:`save_dataset`.

    Returns
    -------
    Dataset or DataArray
        What was saved, attributes restored, loaded into memory.

    Examples
    --------
    >>> import metasim
    >>> import pathlib, tempfile
    >>> from metasim.emitters import gaussian
    >>> folder = tempfile.TemporaryDirectory()
    >>> path = metasim.save_dataset(gaussian([450, 550], 30), pathlib.Path(folder.name) / "bands.nc")
    >>> type(metasim.load_dataset(path)).__name__  # a DataArray comes back as a DataArray
    'DataArray'
    >>> folder.cleanup()
    """
    import xarray as xr

    path = Path(path)
    if not path.is_file():
        raise FileFormatError(f"{path}: no such file")
    try:
        with xr.open_dataset(path, engine="netcdf4", mask_and_scale=False, decode_times=False) as handle:
            ds = handle.load()
    except (OSError, ValueError, RuntimeError, KeyError, IndexError) as exc:
        reason = getattr(exc, "strerror", None) or str(exc).replace(f": {str(path.resolve())!r}", "")
        raise FileFormatError(f"{path}: not a readable netCDF4 file ({reason})") from None
    ds.attrs = _decode_attrs(ds.attrs, str(path))
    for name in list(ds.variables):
        ds[name].attrs = _decode_attrs(ds[name].attrs, f"{path}: variable {name!r}")
        ds[name].encoding = {}
        if ds[name].dtype == object:
            ds[name] = ds[name].astype(str)
    flag = ds.attrs.pop(_DATAARRAY_FLAG, None)
    if flag is not None:
        if flag not in ds:
            raise FileFormatError(f"{path}: attribute {_DATAARRAY_FLAG!r} names {flag!r}, which the file does not hold")
        return ds[flag]
    return with_current_names(ds)


#: result variables renamed since files were first written: old name → new name. A file written
#: before is read under the new names (with a notice) for one release.
RENAMED_RESULT_VARIABLES = {
    "locus_share": "spectrum_locus_coverage",
    "share_beyond": "share_of_observers_above_threshold",
    "share_beyond_overall": "share_of_pairs_above_threshold",
    "share_beyond_overall_interval": "share_of_pairs_above_threshold_interval",
    "comparison_share_beyond_difference": "comparison_share_of_pairs_above_threshold_difference",
    "comparison_share_beyond_difference_interval": "comparison_share_of_pairs_above_threshold_difference_interval",
}


#: design coordinates of design grids and searches renamed since files were first written: the old
#: prefix (the primary's label after it) → the new suffix (the label before it); the shared line
#: width ``width_nm`` is now ``fwhm_nm``. Files and stores written before read under the new names.
RENAMED_DESIGN_COORDINATES = {"peak_nm_": "_peak_nm", "width_nm_": "_fwhm_nm", "power_": "_relative_power"}
_SHARED_WIDTH = ("width_nm", "fwhm_nm")
#: ``design_model`` of the results whose design coordinates are named as above
_NAMED_DESIGNS = ("design grid", "design search")


def current_design_coordinate(name: str) -> str:
    """Today's name of a design grid's or search's ``design`` coordinate (``peak_nm_R`` → ``R_peak_nm``).

    Parameters
    ----------
    name : str
        A coordinate name as written before the rename (:data:`RENAMED_DESIGN_COORDINATES`); any other
        name comes back as it is.

    Returns
    -------
    str

    Examples
    --------
    >>> [current_design_coordinate(n) for n in ("peak_nm_R", "width_nm_G", "width_nm", "power_Y", "drive")]
    ['R_peak_nm', 'G_fwhm_nm', 'fwhm_nm', 'Y_relative_power', 'drive']
    """
    if name == _SHARED_WIDTH[0]:
        return _SHARED_WIDTH[1]
    for old, new in RENAMED_DESIGN_COORDINATES.items():
        if name.startswith(old) and len(name) > len(old):
            return name[len(old):] + new
    return name


def first_design_coordinate(name: str) -> str:
    """The name a design grid's or search's ``design`` coordinate had when stores were first written
    (``R_peak_nm`` → ``peak_nm_R``): the spec hash reads coordinates under these names, so a store
    begun before the rename still resumes. The inverse of :func:`current_design_coordinate`.

    Parameters
    ----------
    name : str
        A coordinate name of today; any other name comes back as it is.

    Returns
    -------
    str

    Examples
    --------
    >>> [first_design_coordinate(n) for n in ("R_peak_nm", "G_fwhm_nm", "fwhm_nm", "Y_relative_power", "drive")]
    ['peak_nm_R', 'width_nm_G', 'width_nm', 'power_Y', 'drive']
    """
    if name == _SHARED_WIDTH[1]:
        return _SHARED_WIDTH[0]
    for old, new in RENAMED_DESIGN_COORDINATES.items():
        if name.endswith(new) and len(name) > len(new):
            return old + name[: -len(new)]
    return name


def renamed_design_coordinates(ds, parameters=None) -> dict:
    """Old → new name of each ``design`` coordinate of ``ds`` written before the rename.

    Parameters
    ----------
    ds : xarray.Dataset
        A sweep or search result, or one chunk of a sweep store.
    parameters : list of str, optional
        Today's names of the design parameters (a chunk's store manifest); without it the result's
        own ``spec`` attribute decides: only design grids' and searches' coordinates are renamed
        (a design list keeps the names its author gave).

    Returns
    -------
    dict
        Old name → new name, only for names that change and whose new name is not taken.

    Examples
    --------
    >>> import xarray as xr
    >>> chunk = xr.Dataset(coords={"peak_nm_R": ("design", [620.0]), "width_nm": ("design", [1.0])})
    >>> renamed_design_coordinates(chunk, ["R_peak_nm", "fwhm_nm"])
    {'peak_nm_R': 'R_peak_nm', 'width_nm': 'fwhm_nm'}
    >>> renamed_design_coordinates(chunk.assign_attrs(spec={"design_model": "design list"}))  # the author's names
    {}
    """
    if parameters is None:
        spec = getattr(ds, "attrs", {}).get("spec")
        if isinstance(spec, str):
            try:
                spec = json.loads(spec)
            except ValueError:
                return {}
        if not isinstance(spec, dict) or not str(spec.get("design_model", "")).startswith(_NAMED_DESIGNS):
            return {}
        parameters = [current_design_coordinate(str(name)) for name in spec.get("parameters", [])]
    current = {name: current_design_coordinate(name) for name in map(str, getattr(ds, "coords", ()))}
    return {name: new for name, new in current.items()
            if new != name and new in parameters and new not in ds.coords}


def with_current_names(ds, parameters=None):
    """A result read from a file written before a variable was renamed, with today's names
    (:data:`RENAMED_RESULT_VARIABLES`, and the design coordinates of :data:`RENAMED_DESIGN_COORDINATES`)
    and one :class:`~metasim.errors.RenamedWarning` naming them.

    Parameters
    ----------
    ds : xarray.Dataset
        A Dataset as read (anything else is returned unchanged).
    parameters : list of str, optional
        Today's names of the design parameters, for a sweep chunk (:func:`renamed_design_coordinates`).

    Returns
    -------
    xarray.Dataset
        ``ds`` with old variable names replaced (a name whose new spelling is already present stays);
        a sweep's or search's ``spec`` attribute lists its parameters, and its ``edge_warnings``
        name them, under the new names.

    Examples
    --------
    >>> import warnings, xarray as xr
    >>> old = xr.Dataset({"locus_share": ("display", [0.5])})
    >>> with warnings.catch_warnings(record=True) as seen:
    ...     warnings.simplefilter("always")
    ...     list(with_current_names(old).data_vars)
    ['spectrum_locus_coverage']
    >>> str(seen[0].message)
    "a file written before variables were renamed: 'locus_share' is read as 'spectrum_locus_coverage'"
    >>> sweep = xr.Dataset(coords={"peak_nm_R": ("design", [620.0, 640.0])},
    ...                    attrs={"spec": {"design_model": "design grid: laser", "parameters": ["peak_nm_R"]}})
    >>> with warnings.catch_warnings(record=True):
    ...     warnings.simplefilter("always")
    ...     current = with_current_names(sweep)
    >>> list(current.coords), current.attrs["spec"]["parameters"]
    (['R_peak_nm'], ['R_peak_nm'])
    """
    import warnings

    from metasim.errors import RenamedWarning

    if not hasattr(ds, "variables"):
        return ds
    old = {name: new for name, new in RENAMED_RESULT_VARIABLES.items()
           if name in ds.variables and new not in ds.variables}
    old.update(renamed_design_coordinates(ds, parameters))
    if not old:
        return ds
    warnings.warn("a file written before variables were renamed: "
                  + ", ".join(f"{name!r} is read as {new!r}" for name, new in old.items()), RenamedWarning,
                  stacklevel=3)
    ds = ds.rename(old)
    spec = ds.attrs.get("spec")
    if isinstance(spec, dict) and isinstance(spec.get("parameters"), list):
        spec = {**spec, "parameters": [current_design_coordinate(str(n)) if str(n) in old else n
                                       for n in spec["parameters"]]}
        if isinstance(spec.get("bounds"), dict):
            spec["bounds"] = {old.get(k, k): v for k, v in spec["bounds"].items()}
        ds.attrs = {**ds.attrs, "spec": spec}
    warnings_text = ds.attrs.get("edge_warnings")
    if isinstance(warnings_text, str) and warnings_text:  # sentences that name a renamed coordinate
        for name, new in old.items():
            warnings_text = warnings_text.replace(f" {name} = ", f" {new} = ")
        ds.attrs = {**ds.attrs, "edge_warnings": warnings_text}
    return ds


__all__ = ["PARTIAL_SUFFIX", "partial_path", "process_alive", "remove_stale_partials", "same_file", "check_outputs",
           "atomic_output", "write_bytes", "write_text", "read_text_file", "read_csv_rows", "save_dataset",
           "load_dataset", "RENAMED_RESULT_VARIABLES", "with_current_names", "RENAMED_DESIGN_COORDINATES",
           "current_design_coordinate", "first_design_coordinate", "renamed_design_coordinates"]
