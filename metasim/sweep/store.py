"""The sweep store: a folder of chunk files, a manifest, a lock, and the combined result.

Layout::

    STORE/manifest.json      what the sweep is: spec hash, chunk size, chunk ranges (with the
                             SHA-256 of each finished chunk file), seed, model, metasim version,
                             a description of the spec
    STORE/chunk-00000.nc     per-design summaries of designs [start, stop) of chunk 0, written
    STORE/chunk-00001.nc     (atomically, by metasim.io.save_dataset) as soon as the chunk is done
    ...
    STORE/sweep.nc           every chunk gathered along ``design`` (:func:`combine_sweep`)
    STORE/writer.lock        while a run writes the store: its process id, host and start time

Only one process writes a store at a time (:func:`store_lock`): a second run is refused with the
holder's process id and host, or waits for it when asked; the lock of a run that was killed (its
process gone) is taken over with one line saying so.

A chunk is finished when its file exists and its SHA-256 equals the one the manifest recorded when
the file was written (the manifest is updated just before the file is renamed into place). A re-run
with the same store skips finished chunks; a chunk file that does not match (changed, truncated,
copied from another slot, or without a recorded checksum) is renamed aside
(``chunk-NNNNN.nc.set-aside``, never deleted) and computed again, with one warning line
(:class:`~metasim.errors.ChunkSetAsideWarning`). Before combining, every chunk is checked again,
including the design range its attributes record. The manifest itself is checked on every read
(keys, types, chunk ranges); an edited or damaged one is refused with one line
(:class:`~metasim.errors.StoreIntegrityError`).

The spec hash is a SHA-256 over everything that decides the numbers (design spectra and parameters,
display settings, reference, observers, stimuli, calibration observer, strategy, options); a store
made for a different hash, or with a different chunk size, is refused (or, when asked, replaced).
A change of the sweep's name or description only (not hashed) is taken into the manifest on resume.
"""

from __future__ import annotations

import contextlib
import hashlib
import inspect
import json
import os
import socket
import tempfile
import time
import warnings
from pathlib import Path

import numpy as np
import xarray as xr

from metasim._version import __version__
from metasim.sweep.ranking import ranking_variables
from metasim.display import Display
from metasim.errors import (
    ChunkSetAsideWarning,
    MetasimWarning,
    StoreIntegrityError,
    StoreLockedError,
    SweepError,
)
from metasim.io import (
    JSON_ATTRS,
    atomic_output,
    decode_attrs,
    encode_attrs,
    load_dataset,
    process_alive,
    remove_stale_partials,
    save_dataset,
    with_current_names,
    write_text,
)
from metasim.sweep.pareto import pareto_rank_variable

try:
    import fcntl
except ImportError:  # not a POSIX system: the lock falls back to its process id check
    fcntl = None

STORE_FORMAT = "metasim sweep store"
STORE_FORMAT_VERSION = 2
MANIFEST = "manifest.json"
COMBINED = "sweep.nc"
LOCK = "writer.lock"
SET_ASIDE = ".set-aside"
#: attributes left out of the spec hash: they name the software, not the computation
_UNHASHED_ATTRS = ("metasim_version",)


def chunk_name(index: int) -> str:
    return f"chunk-{index:05d}.nc"


def chunk_ranges(count: int, chunk_size: int) -> list[tuple[int, int]]:
    """[start, stop) of each chunk of ``count`` designs."""
    return [(start, min(start + chunk_size, count)) for start in range(0, count, chunk_size)]


def _json_bytes(value) -> bytes:
    return json.dumps(value, sort_keys=True, default=str).encode()


def _feed_variable(hasher, name: str, dims, shape, blocks, attrs: dict) -> None:
    hasher.update(name.encode() + _json_bytes(list(dims)) + _json_bytes(list(shape)))
    for values in blocks:  # one array, or consecutive blocks along its first dim
        values = np.asarray(values)
        if values.dtype.kind in "biuf":
            hasher.update(np.ascontiguousarray(values, dtype=float))  # the bytes, without a copy
        else:
            hasher.update("\x1f".join(map(str, values.ravel())).encode())
    hasher.update(_json_bytes({k: v for k, v in attrs.items() if k not in _UNHASHED_ATTRS}))


def _feed(hasher, item) -> None:
    if hasattr(item, "hash_parts"):  # a lazy design grid: the bytes of its full array, block by block
        variables, attrs = item.hash_parts()
        for name, dims, shape, blocks, variable_attrs in variables:
            _feed_variable(hasher, name, dims, shape, blocks, variable_attrs)
        hasher.update(_json_bytes({k: v for k, v in attrs.items() if k not in _UNHASHED_ATTRS}))
        return
    if isinstance(item, Display):
        item = item.to_dataset()
    if isinstance(item, xr.DataArray):
        item = item.to_dataset(name=str(item.name or "values"))
    if isinstance(item, xr.Dataset):
        for name in sorted(map(str, item.variables)):
            variable = item.variables[name]
            _feed_variable(hasher, name, variable.dims, variable.shape, [variable.values], variable.attrs)
        hasher.update(_json_bytes({k: v for k, v in item.attrs.items() if k not in _UNHASHED_ATTRS}))
    else:
        hasher.update(_json_bytes(item))


def spec_hash(*items) -> str:
    """SHA-256 (hex) of labelled arrays, displays and JSON-able values, in order.

    Arrays are hashed with their dims, shapes, values and attributes (but those that do not change
    a result); a store records the hash of its inputs and settings, and a re-run with other inputs
    is refused instead of mixing chunks.

    Parameters
    ----------
    *items : xarray.DataArray, xarray.Dataset, Display or JSON-able value
        What the hash covers, in order.

    Returns
    -------
    str
        64 hexadecimal digits.

    References
    ----------
    NIST FIPS 180-4 (2015) Secure Hash Standard, doi:10.6028/NIST.FIPS.180-4 (SHA-256).

    Examples
    --------
    >>> from metasim.sweep import spec_hash
    >>> len(spec_hash({"chunk_size": 2}, [630, 650]))
    64
    >>> spec_hash({"chunk_size": 2}) == spec_hash({"chunk_size": 2}), spec_hash({"chunk_size": 2}) == spec_hash({"chunk_size": 3})
    (True, False)
    """
    hasher = hashlib.sha256()
    for item in items:
        hasher.update(b"\x1e")
        _feed(hasher, item)
    return hasher.hexdigest()


def file_checksum(path) -> str:
    """SHA-256 (hex) of a file's bytes."""
    digest = hashlib.sha256()
    with open(path, "rb") as handle:
        for block in iter(lambda: handle.read(1 << 20), b""):
            digest.update(block)
    return digest.hexdigest()


def _damaged(path, what: str):
    return StoreIntegrityError(f"{path}: {what}; the manifest was edited or damaged; use a new store folder, or "
                               "give replace=True to start this store afresh")


def check_manifest(manifest, path) -> dict:
    """The manifest, its keys, types and chunk ranges checked (:class:`StoreIntegrityError` if not)."""
    if not isinstance(manifest, dict) or manifest.get("format") != STORE_FORMAT:
        raise SweepError(f"{path}: not a metasim sweep manifest (format {STORE_FORMAT!r} expected)")
    for key, kind, what in (("spec_hash", str, "text"), ("chunk_size", int, "a whole number"),
                            ("design_count", int, "a whole number"), ("chunks", list, "a list"), ("spec", dict, "a table")):
        value = manifest.get(key)
        if not isinstance(value, kind) or isinstance(value, bool):
            raise _damaged(path, f"{key} = {str(value)[:40]!r} is not {what}")
    if manifest["chunk_size"] < 1 or manifest["design_count"] < 1:
        raise _damaged(path, f"chunk_size {manifest['chunk_size']} and design_count {manifest['design_count']} "
                             "must be >= 1")
    expected = chunk_ranges(manifest["design_count"], manifest["chunk_size"])
    if len(manifest["chunks"]) != len(expected):
        raise _damaged(path, f"{len(manifest['chunks'])} chunks listed; {manifest['design_count']} designs in chunks "
                             f"of {manifest['chunk_size']} make {len(expected)}")
    for i, (chunk, (start, stop)) in enumerate(zip(manifest["chunks"], expected)):
        if not isinstance(chunk, dict) or [chunk.get(k) for k in ("index", "start", "stop", "file")] != [
                i, start, stop, chunk_name(i)]:
            raise _damaged(path, f"chunk entry {i} ({str(chunk)[:60]}) should be designs {start}-{stop - 1} in "
                                 f"{chunk_name(i)}")
        checksum = chunk.get("sha256")
        if checksum is not None and not (isinstance(checksum, str) and len(checksum) == 64
                                         and all(c in "0123456789abcdef" for c in checksum)):
            raise _damaged(path, f"chunk entry {i}: sha256 = {str(checksum)[:40]!r} is not a SHA-256 checksum")
    return manifest


def read_manifest(store) -> dict | None:
    """The manifest of a store, checked (:func:`check_manifest`), or None when the folder holds none.

    Parameters
    ----------
    store : str or os.PathLike
        The sweep's store folder.

    Returns
    -------
    dict or None
        The manifest (``format``, ``spec_hash``, ``chunk_size``, ``design_count``, ``chunks``:
        index, design range, file and SHA-256 of each chunk, ``spec``, ...), or None without one.

    Raises
    ------
    StoreIntegrityError
        A manifest that cannot be read or whose keys, types or chunk ranges were edited or damaged.
    SweepError
        A file that is not a metasim sweep manifest.

    Examples
    --------
    >>> import pathlib, tempfile
    >>> from metasim.sweep import read_manifest
    >>> with tempfile.TemporaryDirectory() as folder:
    ...     empty = read_manifest(folder)
    ...     _ = (pathlib.Path(folder) / "manifest.json").write_text("{not json")
    ...     read_manifest(folder)  # doctest: +ELLIPSIS
    Traceback (most recent call last):
        ...
    metasim.errors.StoreIntegrityError: .../manifest.json: not a readable sweep manifest (...); use a new store folder, ...
    >>> empty is None
    True
    """
    path = Path(store) / MANIFEST
    if not path.is_file():
        return None
    try:
        manifest = json.loads(path.read_text(encoding="utf-8"))
    except (OSError, ValueError) as exc:
        raise StoreIntegrityError(f"{path}: not a readable sweep manifest ({exc}); use a new store folder, or give "
                                  "replace=True to start this store afresh") from None
    return check_manifest(manifest, path)


def write_manifest(store, manifest: dict) -> Path:
    """Write the manifest (atomically)."""
    return write_text(Path(store) / MANIFEST, json.dumps(manifest, indent=2, sort_keys=True, default=str) + "\n")


# -- the lock -------------------------------------------------------------------------------------

def _read_holder(handle) -> dict | None:
    with contextlib.suppress(OSError, ValueError):
        handle.seek(0)
        holder = json.loads(handle.read() or "null")
        return holder if isinstance(holder, dict) else None
    return None


def _describe_holder(holder: dict | None) -> str:
    if not holder:
        return "a run that left no details"
    return (f"process {holder.get('pid', '?')} on {holder.get('host', '?')}, started "
            f"{holder.get('started', '?')}")


def _try_lock(handle) -> bool | None:
    """True: locked; False: another process holds it; None: the file system cannot lock."""
    if fcntl is None:
        return None
    try:
        fcntl.flock(handle.fileno(), fcntl.LOCK_EX | fcntl.LOCK_NB)
        return True
    except BlockingIOError:
        return False
    except OSError:
        return None


def _stale(holder: dict | None) -> bool:
    """Whether a lock's holder is known to be gone (same host, process not running)."""
    if not holder:
        return True
    return holder.get("host") == socket.gethostname() and not process_alive(int(holder.get("pid", -1)))


@contextlib.contextmanager
def store_lock(store, *, wait: bool = False, poll_seconds: float = 0.5, on_wait=None):
    """Hold the store's writer lock (``STORE/writer.lock``) while the block runs.

    The lock file holds this process's id, host and start time, and is locked with ``flock`` (the
    operating system releases it when the process dies, however it dies). When another live run
    holds it: :class:`~metasim.errors.StoreLockedError` naming that run, or, with ``wait``, wait
    for it (``on_wait(holder)`` is called once with its details). A lock left by a killed run is
    taken over with a :class:`~metasim.errors.MetasimWarning` saying so. The folder is created if
    needed (and removed again on exit if it is still empty).
    """
    folder = Path(store)
    if folder.exists() and not folder.is_dir():
        raise SweepError(f"{folder}: is a file; the sweep store must be a folder")
    created = not folder.exists()
    folder.mkdir(parents=True, exist_ok=True)
    path = folder / LOCK
    me = {"pid": os.getpid(), "host": socket.gethostname(),
          "started": time.strftime("%Y-%m-%d %H:%M:%S %z")}
    handle, announced = None, False
    try:
        while handle is None:
            candidate = open(path, "a+", encoding="utf-8")
            locked = _try_lock(candidate)
            holder = _read_holder(candidate)
            if locked is None:  # no flock here: judge by the process id it names
                locked = holder is None or holder.get("pid") == me["pid"] or _stale(holder)
            if locked:
                try:
                    same = os.path.samestat(os.fstat(candidate.fileno()), os.stat(path))
                except FileNotFoundError:
                    same = False
                if not same:  # the previous holder removed the file as we opened it: open again
                    candidate.close()
                    continue
                if holder and holder.get("pid") != me["pid"]:
                    warnings.warn(f"{path}: taking over the lock of {_describe_holder(holder)}, which ended "
                                  "without releasing it", MetasimWarning, stacklevel=3)
                candidate.seek(0)
                candidate.truncate()
                candidate.write(json.dumps(me) + "\n")
                candidate.flush()
                handle = candidate
                break
            candidate.close()
            if not wait:
                raise StoreLockedError(f"{folder}: another run is writing this sweep store ({_describe_holder(holder)}); "
                                       "let it finish (a re-run then resumes), or give wait=True to wait for it")
            if not announced and on_wait is not None:
                on_wait(holder)
            announced = True
            time.sleep(poll_seconds)
        yield me
    finally:
        if handle is not None:
            with contextlib.suppress(OSError):
                path.unlink()
            handle.close()  # releases the flock
        if created:
            with contextlib.suppress(OSError):
                folder.rmdir()  # only if still empty


# -- chunks ---------------------------------------------------------------------------------------

def _clear_store(folder: Path) -> None:
    """Remove the metasim files of a store (manifest, chunks, set-aside chunks, combined result)."""
    for path in [folder / MANIFEST, folder / COMBINED, *folder.glob("chunk-*.nc"),
                 *folder.glob(f"chunk-*.nc{SET_ASIDE}*")]:
        if path.is_file():
            path.unlink()


def _readable_manifest(folder: Path) -> dict | None:
    """The manifest, or None when it is missing or damaged (a store that is about to be replaced)."""
    try:
        return read_manifest(folder)
    except SweepError:
        (folder / MANIFEST).unlink(missing_ok=True)
        return None


def open_store(store, manifest: dict, *, replace: bool = False) -> dict:
    """Create the store for ``manifest``, or check that an existing one belongs to the same sweep.

    Call it holding :func:`store_lock`. A store of another sweep is refused, unless ``replace``:
    then its metasim files are removed (manifest, chunk files, ``sweep.nc``; nothing else in the
    folder) and the store starts afresh. Temporary files of killed runs are removed.
    """
    folder = Path(store)
    if folder.exists() and not folder.is_dir():
        raise SweepError(f"{folder}: is a file; the sweep store must be a folder")
    folder.mkdir(parents=True, exist_ok=True)
    for chunk in manifest["chunks"]:
        remove_stale_partials(folder / chunk["file"])
    remove_stale_partials(folder / MANIFEST)
    remove_stale_partials(folder / COMBINED)
    existing = read_manifest(folder) if not replace else _readable_manifest(folder)
    if existing is not None and replace and any(existing.get(k) != manifest[k] for k in
                                                ("spec_hash", "chunk_size", "design_count")):
        _clear_store(folder)
        existing = None
    if existing is None:
        stray = sorted(p.name for p in folder.glob("chunk-*.nc"))
        if replace and (stray or (folder / COMBINED).exists()):
            _clear_store(folder)
        elif stray:
            raise SweepError(f"{folder}: holds chunk files ({stray[0]}, ...) but no {MANIFEST}; use an empty or new "
                             "folder, or give replace=True to remove them")
        elif (folder / COMBINED).exists():
            raise SweepError(f"{folder}: holds a {COMBINED} but no {MANIFEST}; use an empty or new folder, or give "
                             "replace=True to replace it")
        write_manifest(folder, manifest)
        return manifest
    if existing.get("spec_hash") != manifest["spec_hash"]:
        raise SweepError(f"{folder}: holds a sweep of a different spec (hash {str(existing.get('spec_hash'))[:12]}, "
                         f"this spec {manifest['spec_hash'][:12]}); use a new store folder, or give replace=True to "
                         "replace that sweep")
    if existing["chunk_size"] != manifest["chunk_size"]:
        raise SweepError(f"{folder}: was made with chunk size {existing['chunk_size']}; this run asks for chunk size "
                         f"{manifest['chunk_size']}; run it with chunk size {existing['chunk_size']}, use a new store "
                         "folder, or give replace=True to start afresh")
    if existing["design_count"] != manifest["design_count"]:
        raise _damaged(folder / MANIFEST, f"design_count {existing['design_count']} differs from the "
                                          f"{manifest['design_count']} designs of this sweep (same spec hash)")
    if existing["spec"] != manifest["spec"]:  # name, description, spec text: not in the hash, taken as now
        existing = {**existing, "spec": manifest["spec"]}
        write_manifest(folder, existing)
    return existing


def set_aside(path) -> Path:
    """Rename a chunk file aside (``NAME.set-aside``, ``NAME.set-aside-2``, ...); returns the new path."""
    path = Path(path)
    target, n = path.with_name(path.name + SET_ASIDE), 2
    while target.exists():
        target, n = path.with_name(f"{path.name}{SET_ASIDE}-{n}"), n + 1
    os.replace(path, target)
    return target


def _chunk_problem(path: Path, chunk: dict) -> str | None:
    if not chunk.get("sha256"):
        return f"{MANIFEST} records no checksum for it"
    if file_checksum(path) != chunk["sha256"]:
        return (f"its bytes do not match the checksum in {MANIFEST} (changed, truncated or copied from another "
                f"chunk; {path.stat().st_size} bytes)")
    return None


def _put_aside(store, manifest: dict, chunk: dict, problem: str, *, warn: bool = True) -> Path:
    path = Path(store) / chunk["file"]
    aside = set_aside(path)
    chunk["sha256"] = None
    write_manifest(store, manifest)
    if warn:
        warnings.warn(f"{path}: {problem}; set aside as {aside.name} and computed again", ChunkSetAsideWarning,
                      stacklevel=3)
    return aside


def verified_chunks(store, manifest: dict) -> set[int]:
    """Indexes of the finished chunks: file present and its checksum equal to the manifest's.

    A chunk file that does not match is set aside (:func:`set_aside`), its checksum cleared from
    the manifest, and a :class:`~metasim.errors.ChunkSetAsideWarning` names it; it is then pending.
    """
    folder = Path(store)
    good = set()
    for chunk in manifest["chunks"]:
        path = folder / chunk["file"]
        if not path.is_file():
            continue
        problem = _chunk_problem(path, chunk)
        if problem is None:
            good.add(chunk["index"])
        else:
            _put_aside(store, manifest, chunk, problem)
    return good


def finished_chunks(store, manifest: dict) -> set[int]:
    """Indexes of the finished chunks (:func:`verified_chunks`)."""
    return verified_chunks(store, manifest)


def write_chunk(store, manifest: dict, index: int, summary: xr.Dataset) -> Path:
    """Write one chunk file; its checksum goes into the manifest just before the file is renamed in."""
    chunk = manifest["chunks"][index]
    summary = summary.copy()
    summary.attrs = {**summary.attrs, "spec_hash": manifest["spec_hash"], "chunk": index,
                     "design_start": chunk["start"], "design_stop": chunk["stop"]}

    def record(tmp: Path) -> None:
        chunk["sha256"] = file_checksum(tmp)
        write_manifest(store, manifest)

    return save_dataset(summary, Path(store) / chunk["file"], before_rename=record)


#: variables of chunks written before a rename: old name → new name (read for one release)
RENAMED_VARIABLES = {"delta_e_white": "delta_e_white_overall"}


def upgraded(part: xr.Dataset) -> xr.Dataset:
    """A chunk or sweep written before a variable was renamed, with the new names
    (:data:`RENAMED_VARIABLES`: the sweep's white statistics are ``delta_e_white_overall``, as in a
    study; ``delta_e_white`` is the per-observer white difference everywhere)."""
    old = {name: new for name, new in RENAMED_VARIABLES.items()
           if name in part and "statistic" in part[name].dims and new not in part}
    return part.rename(old) if old else part


def _checked_chunk(folder: Path, manifest: dict, chunk: dict) -> xr.Dataset:
    """One chunk file, loaded, after its checksum and design range are checked (set aside and
    :class:`StoreIntegrityError` when they do not match)."""
    path = folder / chunk["file"]
    problem = _chunk_problem(path, chunk)
    if problem is None:
        part = load_dataset(path)
        if [part.attrs.get("spec_hash"), part.attrs.get("design_start"), part.attrs.get("design_stop"),
                part.sizes.get("design")] != [manifest["spec_hash"], chunk["start"], chunk["stop"],
                                              chunk["stop"] - chunk["start"]]:
            problem = (f"it does not hold designs {chunk['start']}-{chunk['stop'] - 1} of this sweep (spec hash "
                       f"{str(part.attrs.get('spec_hash'))[:12]}, designs {part.attrs.get('design_start')}-"
                       f"{part.attrs.get('design_stop')})")
    if problem is not None:
        aside = _put_aside(folder, manifest, chunk, problem, warn=False).name
        raise StoreIntegrityError(f"{path}: {problem}; set aside as {aside}; run the sweep again to compute it")
    # a store begun before the design coordinates were renamed: its chunks under today's names
    return upgraded(with_current_names(part, manifest.get("spec", {}).get("parameters", [])))


def _equivalent(a, b) -> bool:
    """Attribute values equal as xarray's "drop_conflicts" compares them (arrays element by element)."""
    if isinstance(a, np.ndarray) or isinstance(b, np.ndarray):
        a, b = np.asarray(a), np.asarray(b)
        return a.shape == b.shape and bool(np.all((a == b) | ((a != a) & (b != b))))
    try:
        return bool(a == b)
    except ValueError:
        return False


class _DropConflicts:
    """Attributes of many parts merged as ``xr.concat(..., combine_attrs="drop_conflicts")`` does:
    every key kept unless two parts give it different values."""

    def __init__(self):
        self.merged, self.dropped = {}, set()

    def add(self, attrs: dict) -> None:
        for key, value in attrs.items():
            if key in self.dropped:
                continue
            if key not in self.merged:
                self.merged[key] = value
            elif not _equivalent(self.merged[key], value):
                del self.merged[key]
                self.dropped.add(key)


#: largest HDF5 chunk of a combined sweep's variable, in bytes (the design rows of one chunk file, or fewer)
_STORAGE_BYTES = 4 << 20


class CombinedWriter:
    """``sweep.nc`` written chunk by chunk: the file holds the designs written so far, memory one chunk.

    The first chunk goes through xarray's netCDF writer (so the file has xarray's layout: coordinates,
    attribute encodings) with ``design`` as the unlimited dimension; every further chunk is written
    into its slice of each ``design`` variable (:meth:`add`), encoded as xarray encodes it. The
    variables without ``design`` must equal the first chunk's; attributes that differ between chunks
    are dropped (as ``xr.concat(..., combine_attrs="drop_conflicts")`` drops them).
    ``chunks_alive`` counts the chunk Datasets the writer holds (at most one, the one being
    written).
    """

    def __init__(self, path, rows: int):
        self.path, self.rows = Path(path), max(1, int(rows))
        self.count, self.first, self.names = 0, None, None
        self.attrs = _DropConflicts()
        self.variable_attrs: dict[str, _DropConflicts] = {}
        self.chunks_alive = 0

    def _storage(self, variable) -> dict:
        row = int(np.prod([n for d, n in variable.sizes.items() if d != "design"] or [1])) * variable.dtype.itemsize
        rows = max(1, min(self.rows, _STORAGE_BYTES // max(row, 1)))
        return {"_FillValue": None, "chunksizes": tuple(rows if d == "design" else n for d, n in variable.sizes.items())}

    def add(self, part: xr.Dataset, start: int) -> None:
        """Write ``part`` (designs ``start`` .. ``start + part.sizes["design"]``) into the file."""
        self.chunks_alive += 1
        try:
            self._add(part, start)
        finally:
            self.chunks_alive -= 1

    def _add(self, part: xr.Dataset, start: int) -> None:
        if start != self.count:
            raise SweepError(f"{self.path}: designs {start}-... given after {self.count} designs; chunks go in order")
        names = set(map(str, part.variables))
        self.attrs.add(part.attrs)
        for name in names:
            self.variable_attrs.setdefault(name, _DropConflicts()).add(part[name].attrs)
        if self.first is None:
            self.first, self.names = {n: v for n, v in part.variables.items() if "design" not in v.dims}, names
            out = part.copy()
            out.attrs = {}
            encoding = {}
            for name in list(out.variables):
                out[name].attrs = encode_attrs(part[name].attrs, f"{self.path}:{name}")
                out[name].encoding = {}
                encoding[name] = self._storage(out[name].variable) if "design" in out[name].dims else {"_FillValue": None}
            out.to_netcdf(self.path, engine="netcdf4", format="NETCDF4", unlimited_dims=["design"], encoding=encoding)
        else:
            if names != self.names:
                raise StoreIntegrityError(f"{self.path}: the chunk of designs {start}-... holds the variables "
                                          f"{sorted(names ^ self.names)} that the first chunk does not (or lacks them)")
            for name, variable in self.first.items():
                if not variable.equals(part.variables[name]):
                    raise StoreIntegrityError(f"{self.path}: {name!r} of the chunk of designs {start}-... differs from "
                                              "the first chunk's")
            import netCDF4

            with netCDF4.Dataset(self.path, "a") as handle:
                handle.set_auto_maskandscale(False)
                for name, variable in part.variables.items():
                    if "design" not in variable.dims:
                        continue
                    target = handle.variables[name]
                    values = xr.conventions.encode_cf_variable(variable, name=name).transpose(
                        *target.dimensions).values
                    if values.dtype.kind == "U":
                        values = values.astype(object)
                    where = tuple(slice(start, start + variable.sizes["design"]) if d == "design" else slice(None)
                                  for d in target.dimensions)
                    target[where] = values
        self.count += part.sizes["design"]

    def finish(self, variables: dict, attrs: dict) -> None:
        """Add ``variables`` (DataArrays by name, over ``design`` and dims of the file) and set the
        file's attributes to ``attrs``; attributes of a variable that differed between chunks are
        dropped."""
        import netCDF4

        with netCDF4.Dataset(self.path, "a") as handle:
            for name, merged in self.variable_attrs.items():
                if not merged.dropped or name not in handle.variables:
                    continue
                target = handle.variables[name]
                listed = json.loads(target.getncattr(JSON_ATTRS)) if JSON_ATTRS in target.ncattrs() else []
                for key in merged.dropped & set(target.ncattrs()):
                    target.delncattr(key)
                rest = [key for key in listed if key not in merged.dropped]
                if rest != listed:
                    target.delncattr(JSON_ATTRS)
                    if rest:
                        target.setncattr(JSON_ATTRS, json.dumps(rest))
        # the values only: the coordinates of their dims are in the file already
        extra = xr.Dataset({name: (value.dims, np.asarray(value.values)) for name, value in variables.items()})
        encoding = {}
        for name in list(extra.variables):
            extra[name].attrs = encode_attrs(variables[name].attrs, f"{self.path}:{name}")
            extra[name].encoding = {}
            encoding[name] = self._storage(extra[name].variable) if "design" in extra[name].dims else {"_FillValue": None}
        extra.attrs = encode_attrs(attrs, str(self.path))
        extra.to_netcdf(self.path, mode="a", engine="netcdf4", format="NETCDF4", encoding=encoding)


def open_sweep(path) -> xr.Dataset:
    """A combined sweep (``sweep.nc``) opened from its file: attributes restored as
    :func:`metasim.load_dataset` restores them, values read from the file when first used (so a
    sweep of any size opens in little memory; ``.load()`` reads it all)."""
    path = Path(path)
    if not path.is_file():
        raise SweepError(f"{path}: no such file")
    ds = xr.open_dataset(path, engine="netcdf4", mask_and_scale=False, decode_times=False)
    ds.attrs = decode_attrs(ds.attrs, str(path))
    for name in ds.variables:
        ds[name].attrs = decode_attrs(ds[name].attrs, f"{path}:{name}")
    return with_current_names(ds)


def combine_sweep(store, *, write: bool = True) -> xr.Dataset:
    """Gather every chunk of a finished store into one Dataset over ``design`` (saved as ``sweep.nc``).

    The chunks are written into ``sweep.nc`` one after the other (:class:`CombinedWriter`): memory
    holds one chunk at a time, whatever the number of designs. The result is that file, opened
    (:func:`open_sweep`: values read when used); with ``write=False`` it is read into memory and no
    ``sweep.nc`` is left in the store.

    A sweep run with intervals also gets its designs' ranks, probabilities of being the best, the
    best set and the edge warning (:func:`metasim.sweep.ranking.ranking_variables`, computed in
    blocks of designs); every sweep gets its Pareto ranks (:func:`metasim.sweep.pareto.pareto_rank_variable`,
    its objectives read in blocks of designs).

    Every chunk's checksum and design range are checked first; a chunk that fails is set aside and
    :class:`~metasim.errors.StoreIntegrityError` asks for the sweep to be run again.

    Parameters
    ----------
    store : str or os.PathLike
        A store every chunk of which is finished (:func:`metasim.run_sweep`).
    write : bool
        Also save the result as ``STORE/sweep.nc`` (atomically).

    Returns
    -------
    xarray.Dataset (design, ...)
        The per-design summaries of every chunk in design order (:mod:`metasim.sweep.summary`),
        with the ranking variables for a sweep run with intervals: ``STORE/sweep.nc`` opened
        (values read when used), or in memory with ``write=False``.

    Raises
    ------
    SweepError
        No manifest, or chunks not finished.
    StoreIntegrityError
        A damaged manifest, or a chunk whose checksum or design range does not match (set aside).

    References
    ----------
    NIST FIPS 180-4 (2015) Secure Hash Standard, doi:10.6028/NIST.FIPS.180-4 (chunk checksums).

    Examples
    --------
    >>> import pathlib, tempfile
    >>> import metasim
    >>> from metasim.emitters import gaussian, laser_line
    >>> from metasim.metamerism import neutral_ramp
    >>> from metasim.sweep import combine_sweep
    >>> monitor = metasim.calibrate_white(metasim.make_display(gaussian([455, 535, 615], [25, 30, 35],
    ...                                                                 name=["B", "G", "R"])), "cie1931_2")
    >>> designs = metasim.design_grid("laser", {"R": [630, 650]}, 1.0, base=laser_line([465, 532, 638], 1.0,
    ...                                                                                 name=["B", "G", "R"]))
    >>> with tempfile.TemporaryDirectory() as folder:
    ...     store = pathlib.Path(folder) / "red-sweep"
    ...     sweep = metasim.run_sweep(designs, monitor, metasim.observer_population(3, seed=1), neutral_ramp(3),
    ...                               store=store, chunk_size=1, scheduler="serial")
    ...     combined = combine_sweep(store, write=False)  # the two one-design chunks again
    >>> combined.sizes["design"], combined.identical(sweep)
    (2, True)
    """
    folder = Path(store)
    manifest = read_manifest(folder)
    if manifest is None:
        raise SweepError(f"{folder}: no {MANIFEST}; not a sweep store")
    missing = [c["file"] for c in manifest["chunks"] if not (folder / c["file"]).is_file()]
    if missing:
        raise SweepError(f"{folder}: {len(missing)} of {len(manifest['chunks'])} chunks are not finished "
                         f"({missing[0]}, ...); run the sweep again to finish them")
    for chunk in manifest["chunks"]:  # every chunk checked before anything is written
        problem = _chunk_problem(folder / chunk["file"], chunk)
        if problem is not None:
            aside = _put_aside(folder, manifest, chunk, problem, warn=False).name
            raise StoreIntegrityError(f"{folder / chunk['file']}: {problem}; set aside as {aside}; run the sweep "
                                      "again to compute it")
    target = folder / COMBINED
    if write:
        with atomic_output(target) as tmp:
            _write_combined(folder, manifest, tmp)
        return open_sweep(target)
    with tempfile.TemporaryDirectory(dir=folder, prefix=".combine-") as scratch:
        path = Path(scratch) / COMBINED
        _write_combined(folder, manifest, path)
        with open_sweep(path) as lazy:
            return lazy.load()


def _write_combined(folder: Path, manifest: dict, path: Path) -> None:
    writer = CombinedWriter(path, manifest["chunk_size"])
    for chunk in manifest["chunks"]:
        writer.add(_checked_chunk(folder, manifest, chunk), chunk["start"])
    attrs = dict(writer.attrs.merged)
    for key in ("chunk", "design_start", "design_stop"):
        attrs.pop(key, None)
    attrs["engine_model"] = attrs.pop("model", "")
    attrs.update({
        "result_kind": "metasim sweep",
        "model": manifest.get("model", "metasim sweep"),
        "observer_seed": manifest.get("observer_seed", "none"),
        "observer_model": manifest.get("observer_model", ""),
        "spec_hash": manifest["spec_hash"],
        "spec": manifest["spec"],
        "chunk_size": manifest["chunk_size"],
        "chunk_count": len(manifest["chunks"]),
        "metasim_version": __version__,
        "store_metasim_version": manifest.get("metasim_version", ""),
    })
    with _small_chunk_cache(), _open_without_design_index(path) as lazy:
        lazy.attrs = attrs
        for name in lazy.variables:
            lazy[name].attrs = decode_attrs(lazy[name].attrs, f"{path}:{name}")
        # read in blocks of designs, scratch files beside the file (metasim.sweep.ranking)
        ranked, ranking_attrs = ranking_variables(lazy, scratch=path.parent)
        attrs.update(ranking_attrs)
        lazy.attrs = attrs
        added = {}
        if "pareto_rank" not in lazy.data_vars:  # over the default objectives, read in blocks (metasim.sweep.pareto)
            added["pareto_rank"] = pareto_rank_variable(lazy)
    writer.finish({**ranked, **added}, attrs)


@contextlib.contextmanager
def _open_without_design_index(path: Path):
    """The combined file opened (values read when used) without an index of ``design`` (xarray would
    read every design's label into memory for it); the other dims keep theirs (for ``.sel``)."""
    options = {"engine": "netcdf4", "mask_and_scale": False, "decode_times": False, "cache": False}
    if "create_default_indexes" not in inspect.signature(xr.open_dataset).parameters:  # an older xarray
        with xr.open_dataset(path, **options) as opened:
            yield opened
        return
    with xr.open_dataset(path, create_default_indexes=False, **options) as opened:
        indexed = opened
        for name in opened.dims:
            if name != "design" and name in opened.coords:
                indexed = indexed.set_xindex(name)
        yield indexed


#: bytes of HDF5 chunk cache per variable while a combined sweep is read back (its designs are read
#: in order, block by block: a chunk is not read twice)
_READ_CACHE_BYTES = 1 << 20


@contextlib.contextmanager
def _small_chunk_cache():
    """netCDF files opened in the block get a small chunk cache per variable (the library's default,
    64 MB per variable, would fill with the chunks of every design variable read)."""
    import netCDF4

    before = netCDF4.get_chunk_cache()
    netCDF4.set_chunk_cache(_READ_CACHE_BYTES, 16, before[2])
    try:
        yield
    finally:
        netCDF4.set_chunk_cache(*before)


__all__ = ["STORE_FORMAT", "STORE_FORMAT_VERSION", "MANIFEST", "COMBINED", "LOCK", "SET_ASIDE", "chunk_name",
           "chunk_ranges", "spec_hash", "file_checksum", "check_manifest", "read_manifest", "write_manifest",
           "store_lock", "open_store", "set_aside", "verified_chunks", "finished_chunks", "write_chunk",
           "combine_sweep", "open_sweep", "CombinedWriter"]
