"""netCDF4 save and load for any metasim Dataset, lossless for values, coordinates and attributes.

netCDF attributes hold only strings, numbers and numeric vectors. Anything else a metasim result may
carry in its attributes (booleans, None, dicts, lists of strings, nested parameter records) is stored
as a JSON string, and the names of those attributes are listed in the attribute
``metasim_json_attrs`` of the same variable, so :func:`load_dataset` restores them exactly.
"""

from __future__ import annotations

import json
import os
from pathlib import Path

import numpy as np
import xarray as xr

from metasim.errors import FileFormatError

_JSON_LIST = "metasim_json_attrs"
_DATAARRAY_FLAG = "metasim_dataarray_name"


def _plain(value) -> bool:
    if isinstance(value, bool) or value is None:
        return False
    if isinstance(value, (str, int, float, np.integer, np.floating)):
        return True
    if isinstance(value, np.ndarray):
        return value.ndim == 1 and value.dtype.kind in "iuf" and value.size > 0
    return False


def _to_json(value):
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


def _decode_attrs(attrs: dict) -> dict:
    attrs = dict(attrs)
    encoded = json.loads(attrs.pop(_JSON_LIST, "[]"))
    for key in encoded:
        attrs[key] = _from_json(json.loads(attrs[key]))
    for key, value in attrs.items():
        if isinstance(value, np.ndarray) and value.ndim == 0:
            attrs[key] = value.item()
    return attrs


def save_dataset(data: xr.Dataset | xr.DataArray, path: str | os.PathLike) -> Path:
    """Save a metasim Dataset (or DataArray) to a netCDF4 file, losslessly.

    Returns the path written. Existing files are replaced.
    """
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
    if path.parent and not path.parent.exists():
        raise FileFormatError(f"{path}: folder {path.parent} does not exist")
    tmp = path.with_name(path.name + ".partial")
    out.to_netcdf(tmp, engine="netcdf4", format="NETCDF4")
    os.replace(tmp, path)
    return path


def load_dataset(path: str | os.PathLike) -> xr.Dataset | xr.DataArray:
    """Load a file written by :func:`save_dataset`, restoring attributes exactly.

    Returns a DataArray if a DataArray was saved, else a Dataset, fully loaded into memory.
    """
    path = Path(path)
    if not path.is_file():
        raise FileFormatError(f"{path}: no such file")
    try:
        with xr.open_dataset(path, engine="netcdf4", mask_and_scale=False, decode_times=False) as handle:
            ds = handle.load()
    except (OSError, ValueError) as exc:
        raise FileFormatError(f"{path}: not a readable netCDF4 file ({exc})") from None
    ds.attrs = _decode_attrs(ds.attrs)
    for name in list(ds.variables):
        ds[name].attrs = _decode_attrs(ds[name].attrs)
        ds[name].encoding = {}
        if ds[name].dtype == object:
            ds[name] = ds[name].astype(str)
    flag = ds.attrs.pop(_DATAARRAY_FLAG, None)
    if flag is not None:
        return ds[flag]
    return ds


__all__ = ["save_dataset", "load_dataset"]
