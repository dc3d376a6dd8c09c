"""The sweep store: a folder of chunk files, a manifest, and the combined result.

Layout::

    STORE/manifest.json      what the sweep is: spec hash, chunk size, chunk ranges, seed, model,
                             metasim version, a description of the spec
    STORE/chunk-00000.nc     per-design summaries of designs [start, stop) of chunk 0, written
    STORE/chunk-00001.nc     (atomically, by metasim.io.save_dataset) as soon as the chunk is done
    ...
    STORE/sweep.nc           every chunk gathered along ``design`` (:func:`combine_sweep`)

A chunk is finished when its file exists; a re-run with the same store skips finished chunks. The
spec hash is a SHA-256 over everything that decides the numbers (design spectra and parameters,
display settings, reference, observers, stimuli, calibration observer, strategy, options); a store
made for a different hash, or with a different chunk size, is refused.
"""

from __future__ import annotations

import hashlib
import json
from pathlib import Path

import numpy as np
import xarray as xr

from metasim._version import __version__
from metasim.display import Display
from metasim.errors import SweepError
from metasim.io import load_dataset, save_dataset, write_text

STORE_FORMAT = "metasim sweep store"
STORE_FORMAT_VERSION = 1
MANIFEST = "manifest.json"
COMBINED = "sweep.nc"
#: attributes left out of the spec hash: they name the software, not the computation
_UNHASHED_ATTRS = ("metasim_version",)


def chunk_name(index: int) -> str:
    return f"chunk-{index:05d}.nc"


def chunk_ranges(count: int, chunk_size: int) -> list[tuple[int, int]]:
    """[start, stop) of each chunk of ``count`` designs."""
    return [(start, min(start + chunk_size, count)) for start in range(0, count, chunk_size)]


def _json_bytes(value) -> bytes:
    return json.dumps(value, sort_keys=True, default=str).encode()


def _feed(hasher, item) -> None:
    if isinstance(item, Display):
        item = item.to_dataset()
    if isinstance(item, xr.DataArray):
        item = item.to_dataset(name=str(item.name or "values"))
    if isinstance(item, xr.Dataset):
        for name in sorted(map(str, item.variables)):
            variable = item.variables[name]
            hasher.update(name.encode() + _json_bytes(list(variable.dims)) + _json_bytes(list(variable.shape)))
            values = np.asarray(variable.values)
            if values.dtype.kind in "biuf":
                hasher.update(np.ascontiguousarray(values, dtype=float).tobytes())
            else:
                hasher.update("\x1f".join(map(str, values.ravel())).encode())
            hasher.update(_json_bytes({k: v for k, v in variable.attrs.items() if k not in _UNHASHED_ATTRS}))
        hasher.update(_json_bytes({k: v for k, v in item.attrs.items() if k not in _UNHASHED_ATTRS}))
    else:
        hasher.update(_json_bytes(item))


def spec_hash(*items) -> str:
    """SHA-256 (hex) of labelled arrays, displays and JSON-able values, in order."""
    hasher = hashlib.sha256()
    for item in items:
        hasher.update(b"\x1e")
        _feed(hasher, item)
    return hasher.hexdigest()


def read_manifest(store) -> dict | None:
    """The manifest of a store, or None when the folder holds none."""
    path = Path(store) / MANIFEST
    if not path.is_file():
        return None
    try:
        manifest = json.loads(path.read_text(encoding="utf-8"))
    except (OSError, ValueError) as exc:
        raise SweepError(f"{path}: not a readable sweep manifest ({exc})") from None
    if not isinstance(manifest, dict) or manifest.get("format") != STORE_FORMAT:
        raise SweepError(f"{path}: not a metasim sweep manifest (format {STORE_FORMAT!r} expected)")
    return manifest


def _clear_store(folder: Path) -> None:
    """Remove the metasim files of a store (manifest, chunk files, combined result); others stay."""
    for path in [folder / MANIFEST, folder / COMBINED, *folder.glob("chunk-*.nc")]:
        if path.is_file():
            path.unlink()


def _readable_manifest(folder: Path) -> dict | None:
    """The manifest, or None when it is missing or unreadable (a store that is about to be replaced)."""
    try:
        return read_manifest(folder)
    except SweepError:
        (folder / MANIFEST).unlink(missing_ok=True)
        return None


def open_store(store, manifest: dict, *, replace: bool = False) -> dict:
    """Create the store for ``manifest``, or check that an existing one belongs to the same sweep.

    A store of another sweep is refused, unless ``replace``: then its metasim files are removed
    (manifest, chunk files, ``sweep.nc``; nothing else in the folder) and the store starts afresh.
    """
    folder = Path(store)
    if folder.exists() and not folder.is_dir():
        raise SweepError(f"{folder}: is a file; the sweep store must be a folder")
    folder.mkdir(parents=True, exist_ok=True)
    existing = read_manifest(folder) if not replace else _readable_manifest(folder)
    if existing is not None and replace and (existing.get("spec_hash") != manifest["spec_hash"]
                                             or existing.get("chunk_size") != manifest["chunk_size"]):
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
        write_text(folder / MANIFEST, json.dumps(manifest, indent=2, sort_keys=True, default=str) + "\n")
        return manifest
    if existing.get("spec_hash") != manifest["spec_hash"]:
        raise SweepError(f"{folder}: holds a sweep of a different spec (hash {str(existing.get('spec_hash'))[:12]}, "
                         f"this spec {manifest['spec_hash'][:12]}); use a new store folder, or give replace=True to "
                         "replace that sweep")
    if existing.get("chunk_size") != manifest["chunk_size"]:
        raise SweepError(f"{folder}: was made with chunk size {existing.get('chunk_size')}, not "
                         f"{manifest['chunk_size']}; give --chunk-size {existing.get('chunk_size')} or a new store folder")
    return existing


def finished_chunks(store, manifest: dict) -> set[int]:
    """Indexes of the chunks whose file is in the store."""
    folder = Path(store)
    return {chunk["index"] for chunk in manifest["chunks"] if (folder / chunk["file"]).is_file()}


def write_chunk(store, manifest: dict, index: int, summary: xr.Dataset) -> Path:
    chunk = manifest["chunks"][index]
    summary = summary.copy()
    summary.attrs = {**summary.attrs, "spec_hash": manifest["spec_hash"], "chunk": index,
                     "design_start": chunk["start"], "design_stop": chunk["stop"]}
    return save_dataset(summary, Path(store) / chunk["file"])


def combine_sweep(store, *, write: bool = True) -> xr.Dataset:
    """Gather every chunk of a finished store into one Dataset over ``design`` (saved as ``sweep.nc``)."""
    folder = Path(store)
    manifest = read_manifest(folder)
    if manifest is None:
        raise SweepError(f"{folder}: no {MANIFEST}; not a sweep store")
    missing = [c["file"] for c in manifest["chunks"] if not (folder / c["file"]).is_file()]
    if missing:
        raise SweepError(f"{folder}: {len(missing)} of {len(manifest['chunks'])} chunks are not finished "
                         f"({missing[0]}, ...); run the sweep again to finish them")
    parts = []
    for chunk in manifest["chunks"]:
        part = load_dataset(folder / chunk["file"])
        if part.attrs.get("spec_hash") != manifest["spec_hash"] or part.sizes.get("design") != chunk["stop"] - chunk["start"]:
            raise SweepError(f"{folder / chunk['file']}: does not belong to this store's sweep; delete it and run again")
        parts.append(part)
    combined = xr.concat(parts, dim="design", data_vars="minimal", coords="minimal", compat="equals",
                         combine_attrs="drop_conflicts")
    for key in ("chunk", "design_start", "design_stop"):
        combined.attrs.pop(key, None)
    combined.attrs["engine_model"] = combined.attrs.pop("model", "")
    combined.attrs.update({
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
    if write:
        save_dataset(combined, folder / COMBINED)
    return combined


__all__ = ["STORE_FORMAT", "MANIFEST", "COMBINED", "chunk_name", "chunk_ranges", "spec_hash", "read_manifest",
           "open_store", "finished_chunks", "write_chunk", "combine_sweep"]
