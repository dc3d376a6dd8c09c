"""CSV exchange of measured spectra (see :func:`read_spectra_csv` for the file layout)."""

from __future__ import annotations

import csv
import math
import os
from pathlib import Path
from typing import Iterable

import numpy as np
import xarray as xr

from metasim.checks import is_number
from metasim.errors import FileFormatError, SpectrumError
from metasim.io import atomic_output, read_csv_rows
from metasim.spectra.grid import RADIANCE_UNITS, WAVELENGTH_ATTRS, as_wavelengths, check_spectra, resample


def read_spectra_csv(
    path: str | os.PathLike,
    *,
    wavelengths=None,
    units: str = RADIANCE_UNITS,
    long_name: str = "spectral radiance",
    non_negative: bool = True,
    dim: str = "channel",
    allow_outside_grid: bool = False,
) -> xr.DataArray:
    """Read measured spectra from a CSV file into a DataArray (``channel`` × ``wavelength``).

    Layout: optional comment lines starting with ``#`` (kept in the ``source_notes`` attribute);
    a header line whose first column is the wavelength in nm (for example ``wavelength_nm``) and
    whose other columns name the channels; then one row per wavelength. Wavelengths must be strictly
    ascending and unique; cells must be finite numbers; with ``non_negative`` (the default, for
    emission, reflectance and transmittance) no value may be negative.

    Parameters
    ----------
    path : path-like
        The CSV file.
    wavelengths : optional
        Resample onto this grid (see :func:`resample`); the measured grid is kept when None.
    allow_outside_grid : bool
        Accept, with a warning, a spectrum that loses more than 1 % of its energy outside
        ``wavelengths`` (an error otherwise; :func:`metasim.spectra.check_energy_on_grid`).

    Returns
    -------
    DataArray
        ``dim`` × ``wavelength`` with ``units``, ``long_name`` and ``source_notes``.

    Raises
    ------
    FileFormatError
        Missing or empty file, no data rows, bad header, non-numeric cell, ragged rows; the message
        names the file and line.
    SpectrumError
        Unsorted, duplicate or non-finite wavelengths, NaN values, negative values; named likewise.

    Examples
    --------
    >>> import metasim
    >>> import pathlib, tempfile
    >>> path = pathlib.Path(tempfile.mkdtemp()) / "filter.csv"
    >>> _ = path.write_text("wavelength_nm,red filter\\n600,0.1\\n610,0.5\\n620,0.9\\n")
    >>> spectra = metasim.read_spectra_csv(path, units="1", long_name="transmittance")
    >>> spectra.sel(channel="red filter", wavelength=610).item()
    0.5
    """
    path = Path(path)
    notes, records = read_csv_rows(path)
    header: list[str] | None = None
    rows: list[list[float]] = []
    lines: list[int] = []
    for line_no, record in records:
        if header is None:
            header = [cell.strip() for cell in record]
            if len(header) < 2:
                raise FileFormatError(
                    f"{path}:{line_no}: header {record!r} names no channel; "
                    "expected 'wavelength_nm,<channel>,...'"
                )
            if is_number(header[0]):
                raise FileFormatError(
                    f"{path}:{line_no}: first line {record!r} is numeric; a header line "
                    "'wavelength_nm,<channel>,...' must come first"
                )
            if len(set(header[1:])) != len(header) - 1:
                raise FileFormatError(f"{path}:{line_no}: channel names repeat in {header[1:]}")
            continue
        if len(record) != len(header):
            raise FileFormatError(
                f"{path}:{line_no}: {len(record)} cells but the header has {len(header)} columns"
            )
        values = []
        for column, cell in enumerate(record):
            try:
                values.append(float(cell))
            except ValueError:
                raise FileFormatError(
                    f"{path}:{line_no}: cell {cell.strip()!r} in column '{header[column]}' "
                    "is not a number"
                ) from None
        rows.append(values)
        lines.append(line_no)
    if header is None:
        raise FileFormatError(f"{path}: file is empty; expected a header 'wavelength_nm,<channel>,...' and data rows")
    if not rows:
        raise FileFormatError(f"{path}: header but no data rows")
    table = np.asarray(rows, dtype=float)
    wl = table[:, 0]
    for i in range(len(wl)):
        if not math.isfinite(wl[i]):
            raise SpectrumError(f"{path}:{lines[i]}: wavelength {wl[i]!r} is not finite")
        if i and wl[i] == wl[i - 1]:
            raise SpectrumError(f"{path}:{lines[i]}: duplicate wavelength {wl[i]:g} nm; wavelengths must be unique")
        if i and wl[i] < wl[i - 1]:
            raise SpectrumError(
                f"{path}:{lines[i]}: wavelength {wl[i]:g} nm follows {wl[i - 1]:g} nm; "
                "wavelengths must be strictly ascending"
            )
    data = table[:, 1:]
    bad = ~np.isfinite(data)
    if bad.any():
        r, c = np.argwhere(bad)[0]
        raise SpectrumError(
            f"{path}:{lines[r]}: value {data[r, c]!r} in column '{header[c + 1]}'; values must be finite"
        )
    if non_negative and (data < 0).any():
        r, c = np.argwhere(data < 0)[0]
        raise SpectrumError(
            f"{path}:{lines[r]}: negative value {data[r, c]:g} in column '{header[c + 1]}'; "
            "emission, reflectance and transmittance must be >= 0"
        )
    if len(wl) < 2:
        raise SpectrumError(f"{path}: only {len(wl)} data row; need at least 2 wavelengths")
    array = xr.DataArray(
        data.T,
        dims=(dim, "wavelength"),
        coords={dim: header[1:], "wavelength": wl},
        attrs={"units": units, "long_name": long_name, "source_file": str(path)},
    )
    if notes:
        array.attrs["source_notes"] = "\n".join(notes)
    array.coords["wavelength"].attrs.update(WAVELENGTH_ATTRS)
    if wavelengths is not None:
        array = resample(array, wavelengths, allow_outside_grid=allow_outside_grid)
    return array


def write_spectra_csv(
    spectra: xr.DataArray, path: str | os.PathLike, *, notes: Iterable[str] = (), replace: bool = True
) -> Path:
    """Write spectra (one leading dim × ``wavelength``, or ``wavelength`` only) as CSV.

    The file reads back with :func:`read_spectra_csv`: comment lines (``notes`` plus units), then
    ``wavelength_nm,<label>,...`` and one row per wavelength, values with 17 significant digits.
    Written through :func:`metasim.io.atomic_output`; an existing file is replaced unless
    ``replace=False``.

    Parameters
    ----------
    spectra : DataArray
        One leading dim × ``wavelength``, or ``wavelength`` only.
    path : path-like
        The CSV file.
    notes : iterable of str
        Comment lines written first.
    replace : bool
        Replace an existing file (default True).

    Returns
    -------
    Path
        The path written.

    Examples
    --------
    >>> import metasim
    >>> import pathlib, tempfile
    >>> from metasim.emitters import gaussian
    >>> path = metasim.write_spectra_csv(gaussian([450, 550], 30), pathlib.Path(tempfile.mkdtemp()) / "bands.csv")
    >>> metasim.read_spectra_csv(path).sizes["channel"]
    2
    """
    check_spectra(spectra, where=str(path), non_negative=False)
    lead = [d for d in spectra.dims if d != "wavelength"]
    if len(lead) > 1:
        raise SpectrumError(f"{path}: can write one channel dim, got dims {tuple(spectra.dims)}")
    if lead:
        labels = [str(v) for v in spectra.coords[lead[0]].values] if lead[0] in spectra.coords else [
            f"{lead[0]}{i}" for i in range(spectra.sizes[lead[0]])
        ]
        values = spectra.transpose(lead[0], "wavelength").values
    else:
        labels = [str(spectra.name or "value")]
        values = spectra.values[None, :]
    path = Path(path)
    with atomic_output(path, replace=replace) as tmp, tmp.open("w", newline="", encoding="utf-8") as handle:
        for note in notes:
            handle.write(f"# {note}\n")
        handle.write(f"# units: {spectra.attrs.get('units', 'unknown')}\n")
        writer = csv.writer(handle)
        writer.writerow(["wavelength_nm", *labels])
        for j, w in enumerate(as_wavelengths(spectra)):
            writer.writerow([repr(float(w)), *(repr(float(v)) for v in values[:, j])])
    return path


__all__ = ["read_spectra_csv", "write_spectra_csv"]
